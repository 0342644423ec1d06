"""Intervals of the numbers derived from one experiment by resampling.

The predicted Avrami k and half-time combine a Poisson count of nuclei with the pooled
growth rate raised to the power d; their distribution is skewed and no simple formula
gives an honest interval. Each bootstrap draw (Efron & Tibshirani 1993, An Introduction
to the Bootstrap, Chapman & Hall, ch. 6 and 13) therefore

* resamples the fitted spherulites with replacement and pools their G again (random
  effects, :func:`analysis.spherulites.growth.random_effects_mean`), times one draw of the shared
  timing error of the recording (its relative standard uncertainty);
* redraws the counts of nuclei from Poisson distributions with the observed counts as
  means (nuclei of the initial burst, and births after it for the rate), which is the
  Poisson bootstrap over nuclei (Hanley & MacGibbon 2006, Comput. Methods Programs
  Biomed. 83, 57);
* predicts n, k and t_half from the drawn G, density and rate (the same extended-volume
  model as the point estimate).

95 % intervals are the 2.5 and 97.5 percentiles of the draws. The seed is stored with
the results (``seed``, ``resamples``) so that a re-run repeats the numbers.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.intervals import (
    DEFAULT_RESAMPLES,
    DEFAULT_SEED,
    UNKNOWN,
    Estimate,
    estimate,
    percentile_interval,
)
from analysis.kinetics.avrami import predict_avrami
from analysis.kinetics.prediction import predict_model_from_result, prediction_inputs
from analysis.progress import Progress, run_to_completion
from analysis.results import ExperimentResult
from analysis.spherulites.growth import random_effects_mean


@dataclass(frozen=True)
class PredictionIntervals:
    """Predicted Avrami n, k (min^-n) and t_half (min) with 95 % intervals, and how they
    were resampled."""

    geometry: str
    mode: str
    n: Estimate
    k_per_min_n: Estimate
    t_half_min: Estimate
    seed: int
    resamples: int


@dataclass(frozen=True)
class _Inputs:
    g: np.ndarray
    se: np.ndarray
    systematic_rel: float
    burst_count: int
    late_count: int
    late_exposure_min: float  # mm^2 min (areal)
    area_mm2: float
    per_volume: float  # 1 / h in 1/mm for bulk-3d, 1 for film-2d


def _inputs(result: ExperimentResult, geometry: str, mode: str, thickness_um) -> _Inputs:
    ok = [s for s in result.spherulites if s.status == "ok" and s.growth_rate_um_per_min
          and s.growth_rate_se_um_per_min]
    nuc = result.nucleation
    area = nuc.field_area_mm2 or 0.0
    if mode == "thermal":
        burst = 0
    elif mode == "athermal":
        burst = nuc.count
    else:
        burst = int(round((nuc.burst_density_per_mm2 or 0.0) * area))
    late = nuc.late_count if mode != "athermal" else 0
    exposure = (nuc.late_exposure_mm2_s or 0.0) / 60.0
    per_volume = 1.0
    if geometry == "bulk-3d":  # N_V = N_A / h with the thickness the model used
        used = prediction_inputs(result, geometry, mode, thickness_um=thickness_um).thickness_um
        per_volume = 1.0 / (used * 1e-3)
    return _Inputs(np.array([s.growth_rate_um_per_min for s in ok]),
                   np.array([s.growth_rate_se_um_per_min for s in ok]),
                   result.growth_rate.systematic_rel, burst, late, exposure, area, per_volume)


def _draw(inputs: _Inputs, geometry: str, rng: np.random.Generator):
    """One bootstrap draw of (n, k, t_half); raises ValueError when it predicts nothing."""
    pick = rng.integers(0, inputs.g.size, inputs.g.size)
    g = random_effects_mean(inputs.g[pick], inputs.se[pick])[0] if pick.size > 1 else inputs.g[0]
    g *= 1.0 + inputs.systematic_rel * rng.standard_normal()
    density = rng.poisson(inputs.burst_count) / inputs.area_mm2 * inputs.per_volume \
        if inputs.burst_count else 0.0
    rate = rng.poisson(inputs.late_count) / inputs.late_exposure_min * inputs.per_volume \
        if inputs.late_count and inputs.late_exposure_min > 0 else 0.0
    try:
        model = predict_avrami(geometry, g, density_per_mm_d=density, rate_per_mm_d_per_min=rate)
    except InputError as err:
        raise ValueError(err.problem) from None
    return model.n, model.k_per_min_n, model.t_half_min


#: Draws between two progress reports of :func:`prediction_intervals_steps`.
PROGRESS_EVERY = 50


def prediction_intervals_steps(result: ExperimentResult, geometry: str = "bulk-3d",
                               mode: str | None = None, *, seed: int = DEFAULT_SEED,
                               resamples: int = DEFAULT_RESAMPLES,
                               thickness_um: float | None = None):
    """:func:`prediction_intervals` as a generator: yields ``Progress`` every
    PROGRESS_EVERY draws and returns the intervals (so a worker can report and stop)."""
    try:
        model = predict_model_from_result(result, geometry, mode, thickness_um=thickness_um)
    except InputError:
        return None
    inputs = _inputs(result, geometry, model.mode, thickness_um)
    if inputs.g.size == 0 or inputs.area_mm2 <= 0:
        return _delta_method(result, model, seed)
    rng = np.random.default_rng(seed)
    draws = np.full((resamples, 3), np.nan)
    for i in range(resamples):
        if i % PROGRESS_EVERY == 0:
            yield Progress("resampling", i / resamples, f"draw {i} of {resamples}")
        try:
            draws[i] = _draw(inputs, geometry, rng)
        except (ValueError, ZeroDivisionError):
            continue
    parts = [estimate(v, *percentile_interval(draws[:, j]))
             for j, v in enumerate((model.n, model.k_per_min_n, model.t_half_min))]
    if model.mode != "mixed":  # the exponent is fixed by the model, not estimated
        parts[0] = Estimate(model.n, model.n, model.n)
    return PredictionIntervals(geometry, model.mode, *parts, seed=seed, resamples=resamples)


def prediction_intervals(result: ExperimentResult, geometry: str = "bulk-3d",
                         mode: str | None = None, *, seed: int = DEFAULT_SEED,
                         resamples: int = DEFAULT_RESAMPLES,
                         thickness_um: float | None = None) -> PredictionIntervals | None:
    """Bootstrap intervals of the predicted n, k and t_half; None without a prediction.

    The point values are the prediction from the result itself
    (:func:`analysis.kinetics.prediction.predict_model_from_result`); only the intervals
    come from the draws.
    """
    return run_to_completion(prediction_intervals_steps(
        result, geometry, mode, seed=seed, resamples=resamples, thickness_um=thickness_um))


def _delta_method(result: ExperimentResult, model, seed: int) -> PredictionIntervals:
    """Without per-spherulite fits (a result read back from a table): first-order
    propagation, sigma(ln t_half) = sqrt(1/N + (d u_G)^2) / n with the Poisson count N
    and the relative standard uncertainty u_G of the pooled G (JCGM 100:2008, 5.1.6)."""
    g = result.growth_rate
    rel_g = 0.0
    if g.value and g.ci95_low is not None and g.ci95_high is not None:
        rel_g = (g.ci95_high - g.ci95_low) / (2 * 1.96 * g.value)
    count = max(1, result.nucleation.count)
    d, n = model.dimension, model.n
    sigma_t = math.sqrt(1.0 / count + (d * rel_g) ** 2) / n
    t_half, k = model.t_half_min, model.k_per_min_n
    spread = math.exp(1.96 * sigma_t)
    return PredictionIntervals(model.geometry, model.mode, Estimate(n, n, n),
                               Estimate(k, k / spread ** n, k * spread ** n),
                               Estimate(t_half, t_half / spread, t_half * spread), seed, 0)


def ratio_interval(numerator: Estimate, denominator: Estimate) -> Estimate:
    """numerator / denominator with a 95 % interval from the two independent intervals,
    combined on the log scale (half-widths of ln in quadrature; JCGM 100:2008, 5.1.6
    for products and quotients)."""
    values = (numerator.value, numerator.low, numerator.high,
              denominator.value, denominator.low, denominator.high)
    if any(v is None or not v > 0 for v in values):
        return UNKNOWN if numerator.value is None or denominator.value is None else \
            estimate(numerator.value / denominator.value, None, None)
    ratio = numerator.value / denominator.value
    half = math.hypot(0.5 * math.log(numerator.high / numerator.low),
                      0.5 * math.log(denominator.high / denominator.low))
    return Estimate(ratio, ratio * math.exp(-half), ratio * math.exp(half))
