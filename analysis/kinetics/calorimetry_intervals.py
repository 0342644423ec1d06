"""Intervals on the calorimetric Avrami n, k and t_half.

The scatter of the points about the Avrami line understates the uncertainty of n, k and
t_half by orders of magnitude: X(t) is a running integral, so neighbouring points share
their errors, and the largest errors are the analyst's choices, not the noise. The
interval here therefore combines

* the analysis repeated over a reasonable range of choices: the linear baseline between
  the user's anchors and with its end anchor half an exotherm span later; the heat flow as
  recorded and corrected for a first-order instrument lag of 4 s and of 8 s (when the
  user gave no lag constant; DSC time constants are a few seconds, common practice); and
  four conversion windows for the Avrami line (3-20 %, 2-15 %, 5-30 % and 10-50 %;
  Lorenzo et al. 2007, Polym. Test. 26, 222 recommend the low-conversion range, the
  others are common practice). A flat baseline is not among them: it ignores the drift a
  linear one follows. Half the range of each estimate over these analyses is one part
  of the half-width;
* the time origin: t_half counts from the induction time t0, so 1.96 standard errors of
  the onset fit's t0 widen t_half (and k = ln 2 / t_half^n accordingly);
* the noise: 1.96 standard deviations of the estimate when the record is analysed again
  with Gaussian noise of its own measured level added (a parametric bootstrap, Efron &
  Tibshirani 1993, ch. 6).

The parts are added in quadrature (JCGM 100:2008, 5.1.2). The set of choices was fixed on
simulated isotherms with seeds 0-99 (tests/benchmarks/coverage.py) before the coverage
was reported on other seeds.
The point values stay those of the analysis the user chose.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED, Z95, Estimate
from analysis.settings import DEFAULT_FIT_WINDOW

WINDOWS = (DEFAULT_FIT_WINDOW, (0.02, 0.15), (0.05, 0.30), (0.10, 0.50))
BASELINES = ("linear",)
NOISE_DRAWS = 8
#: Instrument lag time constants tried when the user gave none, s (0: as recorded).
LAGS_S = (0.0, 4.0, 8.0)


@dataclass(frozen=True)
class CalorimetryIntervals:
    """95 % intervals of the window fit's n, k (min^-n) and t_half (min)."""

    n: Estimate
    k_per_min_n: Estimate
    t_half_min: Estimate
    variants: int  # analyses in the envelope
    noise_draws: int
    seed: int


def _fit_values(result) -> tuple[float, float, float] | None:
    fit = result.avrami
    return (fit.n, fit.k_per_min_n, fit.t_half_min) if fit else None


#: Baseline end moved later by these fractions of the exotherm's span (0: as chosen).
END_SHIFTS = (0.0, 0.5)


def _anchor_choices(result, chosen) -> list[dict]:
    """The user's baseline anchors, and the end anchor moved later by END_SHIFTS of the
    span (never past the record)."""
    span = result.baseline_end_min - result.baseline_start_min
    last = float(result.time_min[-1])
    out = []
    for shift in END_SHIFTS:
        if shift == 0.0:
            out.append({})
        elif result.baseline_end_min + shift * span < last:
            out.append({"baseline_start_min": result.baseline_start_min,
                        "baseline_end_min": result.baseline_end_min + shift * span})
    return out


def calorimetry_intervals(isotherm, result, options: dict, *, analyze_isotherm, noise_sigma: float,
                          seed: int = DEFAULT_SEED,
                          noise_draws: int = NOISE_DRAWS) -> CalorimetryIntervals | None:
    """Intervals for ``result`` = ``analyze_isotherm(isotherm, **options)``; None without
    a window fit. ``noise_sigma``: the record's white-noise level (heat-flow unit).
    Variants that cannot be analysed are left out of the envelope."""
    central = _fit_values(result)
    if central is None:
        return None
    chosen = dict(options)
    values = [central]
    lags = LAGS_S if not chosen.get("lag_s") else (chosen["lag_s"],)
    for lag in lags:
        for anchors in _anchor_choices(result, chosen):
            for baseline in BASELINES:
                for window in WINDOWS:
                    try:
                        values.append(_fit_values(analyze_isotherm(isotherm, **{
                            **chosen, **anchors, "baseline": baseline, "window": window,
                            "lag_s": lag})))
                    except InputError:
                        continue
    values = np.array([v for v in values if v is not None], dtype=float)
    rng = np.random.default_rng(seed)
    sigma = noise_sigma
    noisy = []
    for _ in range(noise_draws):
        flow = isotherm.heat_flow + sigma * rng.standard_normal(isotherm.heat_flow.size)
        try:
            noisy.append(_fit_values(analyze_isotherm(replace(isotherm, heat_flow=flow), **chosen)))
        except InputError:
            continue
    noisy = np.array([v for v in noisy if v is not None], dtype=float).reshape(-1, 3)
    noise_sd = np.std(noisy, axis=0, ddof=1) if noisy.shape[0] >= 3 else np.zeros(3)
    choice_half = 0.5 * np.ptp(values, axis=0)
    half = np.hypot(Z95 * noise_sd, choice_half)
    origin = Z95 * (result.induction_time_se_min or 0.0)  # t_half counts from t0
    n, k, t_half = central
    half[2] = math.hypot(half[2], origin)
    half[1] = math.hypot(half[1], n * k * origin / t_half)  # k = ln 2 / t_half^n
    parts = [Estimate(float(c), float(max(c - h, 0.0)), float(c + h))
             for c, h in zip(central, half)]
    return CalorimetryIntervals(*parts, variants=int(values.shape[0]), noise_draws=noisy.shape[0],
                                seed=seed)
