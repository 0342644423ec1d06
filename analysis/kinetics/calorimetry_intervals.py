"""Intervals on the calorimetric Avrami n, k and t_half.

The scatter of the points about the Avrami line understates the uncertainty of n, k and
t_half by orders of magnitude: X(t) is a running integral, so neighbouring points share
their errors, and the largest errors are the analyst's choices, not the noise. The
interval here therefore combines

* the choices, one at a time, each over a reasonable range: the instrument lag (the heat
  flow as recorded and corrected for a first-order lag of 4 s and of 8 s, when the user
  gave no lag constant; DSC time constants are a few seconds, common practice); the
  baseline end anchor (as found, and half an exotherm span later or at the end of the
  record if that comes sooner); the conversion window
  of the Avrami line (3-20 %, 2-15 %, 5-30 %, 10-50 %; Lorenzo et al. 2007, Polym. Test.
  26, 222 recommend the low-conversion range, the others are common practice); and the
  conversion range of the induction-time fit (2-80 %, 5-50 %, 10-90 %, common practice).
  What each choice tells is that the estimate lies somewhere in the range it spans, so
  it is taken as a rectangular distribution: centred on the middle of the range, with a
  standard uncertainty of half the range / sqrt(3) (JCGM 100:2008, GUM 4.3.7). The
  choices are varied one at a time and combined in quadrature: the envelope over every
  combination would add their ranges linearly, counting the same spread several times;
* the noise: the standard deviation of the estimate when the record is analysed again
  with Gaussian noise of its own white-noise level added (a parametric bootstrap, Efron
  & Tibshirani 1993, ch. 6), the level from second differences, which the slope of a
  steep exotherm does not inflate;
* the time origin: t_half counts from the induction time t0 and n is the slope against
  ln(t - t0), so the onset fit's standard error of t0 (corrected for the autocorrelated
  residuals of a running integral) widens t_half, k = ln 2 / t_half^n and n.

The standard uncertainties are added in quadrature (GUM 5.1.2) and expanded by 1.96.
The interval is centred on the estimate corrected by the middle of each choice's range
(a bias the choices reveal, such as that of an uncorrected instrument lag, is removed
from the interval), and widened where needed to contain the reported value, which stays
that of the analysis the user chose. The choices were fixed on simulated isotherms with
seeds 0-199 (tests/benchmarks/coverage.py) before the coverage was reported on others.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED, Z95, Estimate
from analysis.kinetics.avrami import fit_avrami_window
from analysis.progress import Progress, run_to_completion
from analysis.settings import DEFAULT_FIT_WINDOW

WINDOWS = (DEFAULT_FIT_WINDOW, (0.02, 0.15), (0.05, 0.30), (0.10, 0.50))
#: Conversion ranges of the induction-time fit (the first is the analysis default).
ONSET_RANGES = ((0.02, 0.80), (0.05, 0.50), (0.10, 0.90))
NOISE_DRAWS = 16
#: Instrument lag time constants tried when the user gave none, s (0: as recorded).
LAGS_S = (0.0, 4.0, 8.0)
#: The alternative baseline end: this fraction of the exotherm's span later.
END_SHIFT = 0.5


@dataclass(frozen=True)
class CalorimetryIntervals:
    """95 % intervals of the window fit's n, k (min^-n) and t_half (min)."""

    n: Estimate
    k_per_min_n: Estimate
    t_half_min: Estimate
    variants: int  # analyses of the choices (the chosen one included)
    noise_draws: int
    seed: int


def _fit_values(result) -> tuple[float, float, float] | None:
    fit = result.avrami
    return (fit.n, fit.k_per_min_n, fit.t_half_min) if fit else None


def _later_end(result) -> list[dict]:
    """The baseline end anchor moved later by END_SHIFT of the exotherm's span, or to the
    end of the record when that comes sooner (none when the end is the record's end): a
    baseline end found where the signal first drops into the noise cuts the slow tail of
    the exotherm."""
    span = result.baseline_end_min - result.baseline_start_min
    last = float(result.time_min[-1])
    if not result.baseline_end_min < last:
        return []
    return [{"baseline_start_min": result.baseline_start_min,
             "baseline_end_min": min(result.baseline_end_min + END_SHIFT * span, last)}]


def _alternatives(result, chosen: dict) -> list[list[dict]]:
    """The other options of each choice, the rest left as the user chose them. A lag the
    user gave is not varied."""
    lags = [] if chosen.get("lag_s") else [{"lag_s": lag} for lag in LAGS_S if lag]
    windows = [{"window": w} for w in WINDOWS if tuple(w) != tuple(result.window)]
    onset = tuple(chosen.get("onset_range", ONSET_RANGES[0]))
    onsets = [{"onset_range": r} for r in ONSET_RANGES if tuple(r) != onset]
    return [lags, _later_end(result), windows, onsets]


def _choice_parts(isotherm, central, result, chosen, analyze_isotherm, progress):
    """(shift of the centre, variances, analyses) over the choices; each choice spans the
    chosen analysis and its alternatives. A generator: yields ``progress()`` reports."""
    shift, variances, count = np.zeros(3), np.zeros(3), 1
    for options in _alternatives(result, chosen):
        values = [central]
        for option in options:
            yield progress()
            try:
                found = _fit_values(analyze_isotherm(isotherm, **{**chosen, **option}))
            except InputError:
                continue
            if found is not None:
                values.append(found)
                count += 1
        values = np.array(values, dtype=float)
        low, high = values.min(axis=0), values.max(axis=0)
        shift += 0.5 * (low + high) - central
        variances += (0.5 * (high - low)) ** 2 / 3.0  # rectangular (GUM 4.3.7)
    return shift, variances, count


def _noise_sd(isotherm, chosen, analyze_isotherm, sigma, seed, draws, progress):
    """(standard deviations of n, k, t_half over the noisy re-analyses, their number); a
    generator yielding ``progress()`` reports."""
    rng = np.random.default_rng(seed)
    noisy = []
    for _ in range(draws):
        yield progress()
        flow = isotherm.heat_flow + sigma * rng.standard_normal(isotherm.heat_flow.size)
        try:
            noisy.append(_fit_values(analyze_isotherm(replace(isotherm, heat_flow=flow), **chosen)))
        except InputError:
            continue
    noisy = np.array([v for v in noisy if v is not None], dtype=float).reshape(-1, 3)
    sd = np.std(noisy, axis=0, ddof=1) if noisy.shape[0] >= 3 else np.zeros(3)
    return sd, noisy.shape[0]


def _origin_n_half(result, origin_half: float) -> float:
    """Half the change of the window fit's n when t0 moves by -/+ ``origin_half`` min."""
    if not origin_half:
        return 0.0
    t, x = result.conversion_table()
    tau = t - result.induction_time_min
    fits = [fit_avrami_window(tau + d, x, result.window) for d in (origin_half, -origin_half)]
    if not all(fits):
        return 0.0
    return 0.5 * abs(fits[0].n - fits[1].n)


def calorimetry_intervals(isotherm, result, options: dict, *, analyze_isotherm, noise_sigma: float,
                          seed: int = DEFAULT_SEED,
                          noise_draws: int = NOISE_DRAWS) -> CalorimetryIntervals | None:
    """Intervals for ``result`` = ``analyze_isotherm(isotherm, **options)``; None without
    a window fit. ``noise_sigma``: the record's white-noise level (heat-flow unit, see
    ``calorimetry.white_noise_sigma``). Choices that cannot be analysed are left out."""
    return run_to_completion(calorimetry_interval_steps(
        isotherm, result, options, analyze_isotherm=analyze_isotherm, noise_sigma=noise_sigma,
        seed=seed, noise_draws=noise_draws))


def calorimetry_interval_steps(isotherm, result, options: dict, *, analyze_isotherm,
                               noise_sigma: float, seed: int = DEFAULT_SEED,
                               noise_draws: int = NOISE_DRAWS):
    """:func:`calorimetry_intervals` as a generator: yields ``Progress`` before each
    re-analysis and returns the intervals (so a worker can report and stop)."""
    central = _fit_values(result)
    if central is None:
        return None
    central = np.array(central, dtype=float)
    chosen = dict(options)
    total = sum(len(options) for options in _alternatives(result, chosen)) + noise_draws
    done = iter(range(total + 1))

    def progress() -> Progress:
        step = next(done)
        return Progress("re-analysing the isotherm", step / total, f"analysis {step + 1} of {total}")

    shift, variances, count = yield from _choice_parts(isotherm, central, result, chosen,
                                                       analyze_isotherm, progress)
    noise_sd, draws = yield from _noise_sd(isotherm, chosen, analyze_isotherm, noise_sigma, seed,
                                           noise_draws, progress)
    half = Z95 * np.sqrt(variances + noise_sd ** 2)
    n, k, t_half = central
    origin = Z95 * (result.induction_time_se_min or 0.0)
    half[0] = math.hypot(half[0], _origin_n_half(result, origin))
    half[1] = math.hypot(half[1], n * k * origin / t_half)  # k = ln 2 / t_half^n
    half[2] = math.hypot(half[2], origin)
    middle = central + shift
    low = np.maximum(np.minimum(middle - half, central), 0.0)
    high = np.maximum(middle + half, central)
    parts = [Estimate(float(c), float(lo), float(hi)) for c, lo, hi in zip(central, low, high)]
    return CalorimetryIntervals(*parts, variants=count, noise_draws=draws, seed=seed)
