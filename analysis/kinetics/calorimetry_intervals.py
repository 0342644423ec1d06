"""Intervals on the calorimetric Avrami n, k and t_half.

The scatter of the points about the Avrami line understates the uncertainty of n, k and
t_half by orders of magnitude: X(t) is a running integral, so neighbouring points share
their errors, and the largest errors are the analyst's choices, not the noise. The
interval here is therefore the envelope of

* the analysis repeated over a reasonable range of choices: a linear and a flat baseline
  (both in common use for isothermal runs; common practice), times four
  conversion windows for the Avrami line (3-20 %, 2-15 %, 5-30 % and 10-50 %; Lorenzo
  et al. 2007, Polym. Test. 26, 222 recommend the low-conversion range, the others are
  common practice);
* widened at each end by 1.96 standard deviations of the estimate under the record's
  noise, found by analysing the record again with Gaussian noise of the measured level
  added (a parametric bootstrap, Efron & Tibshirani 1993, ch. 6).

The point values stay those of the analysis the user chose.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED, Z95, Estimate

WINDOWS = ((0.03, 0.20), (0.02, 0.15), (0.05, 0.30), (0.10, 0.50))
BASELINES = ("linear", "flat")
NOISE_DRAWS = 8


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
    for baseline in BASELINES:
        for window in WINDOWS:
            try:
                values.append(_fit_values(analyze_isotherm(isotherm, **{
                    **chosen, "baseline": baseline, "window": window})))
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
    parts = [Estimate(float(c), float(max(c - h, 0.0)), float(c + h))
             for c, h in zip(central, half)]
    return CalorimetryIntervals(*parts, variants=int(values.shape[0]), noise_draws=noisy.shape[0],
                                seed=seed)
