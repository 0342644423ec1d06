"""Stage-temperature uncertainty in G(Tc), and intervals of the Lauritzen-Hoffman results.

A stage reading off by dT moves a measured G to the wrong temperature; near Tm0, where
ln G changes by tens of per cent per kelvin, this dominates every other error. As an
uncertainty of G at the stated Tc it is |d ln G / dT| G u_T (first-order propagation,
JCGM 100:2008, GUM 5.1.2). In the Lauritzen-Hoffman fit the same term enters the weights
(the effective-variance method for errors in the abscissa, Orear 1982, Am. J. Phys. 50,
912), and the intervals of Kg, G0, sigma*sigma_e, sigma_e and the regime-break
temperature come from a parametric bootstrap (Efron & Tibshirani 1993, ch. 6): each
draw moves every temperature by N(0, u_T) and every G by its own standard error, and
fits again. The weights are the same in every draw: they define the estimator, and the
draws alone carry the errors, so the temperature term is not counted twice. Kg and G0
take the basic interval (:func:`analysis.intervals.basic_interval`), which corrects the
flattening of the slope by the temperature errors that the draws repeat; it is not
widened for degrees of freedom, because the draws come from the stated error sizes, not
from the fit's residuals. The break temperature takes the percentile interval of the
draws that find a break.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.intervals import (
    DEFAULT_SEED,
    Z95,
    Estimate,
    estimate,
    basic_interval,
    percentile_interval,
)
from analysis.kinetics.lauritzen_hoffman import LHAnalysis, fit_lauritzen_hoffman
from analysis.progress import Progress, run_to_completion

LINE_RESAMPLES = 400
BREAK_RESAMPLES = 100


def log_growth_slope_per_k(tc_c, g_um_per_min) -> np.ndarray:
    """d ln G / dT (1/K) at each temperature, by finite differences over the series
    (model-free; second-order central differences inside, one-sided at the ends).
    Repeated temperatures share one slope; fewer than two temperatures give zeros."""
    tc = np.asarray(tc_c, dtype=float)
    g = np.asarray(g_um_per_min, dtype=float)
    out = np.zeros(tc.shape)
    ok = np.isfinite(tc) & np.isfinite(g) & (g > 0)
    temps = np.unique(tc[ok])
    if temps.size < 2:
        return out
    mean_ln_g = np.array([np.mean(np.log(g[ok & (tc == t)])) for t in temps])
    slopes = np.gradient(mean_ln_g, temps)
    for t, s in zip(temps, slopes):
        out[tc == t] = s
    return out


def temperature_half_width(tc_c, g_um_per_min, stage_uncertainty_k) -> np.ndarray:
    """95 % half-width of G (µm/min) from the stage-temperature uncertainty u_T (K,
    scalar or one per point): 1.96 |d ln G/dT| G u_T."""
    g = np.asarray(g_um_per_min, dtype=float)
    u = np.broadcast_to(np.asarray(stage_uncertainty_k, dtype=float), g.shape)
    return Z95 * np.abs(log_growth_slope_per_k(tc_c, g)) * g * u


def with_temperature(value, low, high, half_t) -> tuple[float | None, float | None]:
    """A G interval widened by the temperature half-width (both halves in quadrature)."""
    if value is None or low is None or high is None or half_t is None:
        return low, high
    return (value - math.hypot(value - low, half_t), value + math.hypot(high - value, half_t))


@dataclass(frozen=True)
class LHIntervals:
    """95 % intervals of the one-line fit and of the regime break."""

    kg_k2: Estimate
    g0_um_per_min: Estimate
    sigma_sigma_e_j2_per_m4: Estimate
    sigma_e_j_m2: Estimate
    break_c: Estimate
    break_fraction: float | None  # share of the draws that find a break (None: not tested)
    stage_uncertainty_k: float
    seed: int
    resamples: int


def _draw_inputs(lh: LHAnalysis, se_ln, u_t, rng):
    g = lh.g_um_per_min
    tc = lh.tc_c + u_t * rng.standard_normal(g.size)
    return tc, g * np.exp(se_ln * rng.standard_normal(g.size))


def _sigma_e(lh: LHAnalysis, product):
    if product is None or lh.sigma_j_m2 is None:
        return None
    return product / lh.sigma_j_m2


def lh_intervals(lh: LHAnalysis, growth_ci95_um_per_min, stage_uncertainty_k, *,
                 seed: int = DEFAULT_SEED, resamples: int = LINE_RESAMPLES,
                 break_resamples: int = BREAK_RESAMPLES) -> LHIntervals:
    """Bootstrap intervals for a fit made by :func:`fit_lauritzen_hoffman`.

    ``lh`` was fitted with weights from G's CI widened by the temperature part
    (:func:`fit_with_temperature`); ``growth_ci95_um_per_min`` is G's own 95 % half-width
    (None: the draws move only the temperatures) and ``stage_uncertainty_k`` u_T in K
    (scalar or one per point). Each draw refits with the same weights.
    """
    return run_to_completion(lh_intervals_steps(
        lh, growth_ci95_um_per_min, stage_uncertainty_k, seed=seed, resamples=resamples,
        break_resamples=break_resamples))


#: Draws between two progress reports of :func:`lh_intervals_steps`.
PROGRESS_EVERY = 25


def lh_intervals_steps(lh: LHAnalysis, growth_ci95_um_per_min, stage_uncertainty_k, *,
                       seed: int = DEFAULT_SEED, resamples: int = LINE_RESAMPLES,
                       break_resamples: int = BREAK_RESAMPLES):
    """:func:`lh_intervals` as a generator: yields ``Progress`` every PROGRESS_EVERY draws
    and returns the ``LHIntervals`` (so a worker can report and stop)."""
    rng = np.random.default_rng(seed)
    u_t = np.asarray(stage_uncertainty_k, dtype=float)
    g = lh.g_um_per_min
    se_ln = (np.zeros_like(g) if growth_ci95_um_per_min is None
             else np.asarray(growth_ci95_um_per_min, dtype=float) / Z95 / g)
    draws = np.full((resamples, 2), np.nan)
    weights = lh.ci95_um_per_min
    total = resamples + (break_resamples if lh.aicc_one is not None else 0)
    for i in range(resamples):
        if i % PROGRESS_EVERY == 0:
            yield Progress("resampling the fit", i / total, f"draw {i} of {total}")
        tc, g = _draw_inputs(lh, se_ln, u_t, rng)
        try:
            fit = fit_lauritzen_hoffman(tc, g, weights, constants=lh.constants,
                                        detect_regimes=False)
        except InputError:
            continue
        draws[i] = fit.overall.kg_k2, math.log(fit.overall.g0_um_per_min)
    kg = estimate(lh.overall.kg_k2, *basic_interval(lh.overall.kg_k2, draws[:, 0]))
    ln_g0 = basic_interval(math.log(lh.overall.g0_um_per_min), draws[:, 1])
    g0 = estimate(lh.overall.g0_um_per_min, *(None if v is None else math.exp(v) for v in ln_g0))
    product = _scaled_by_kg(lh.sigma_sigma_e_j2_per_m4, lh.overall.kg_k2, kg)
    sigma_e = _scaled_by_kg(lh.sigma_e_j_m2, lh.overall.kg_k2, kg)
    brk, fraction = yield from _break_interval(lh, se_ln, u_t, weights, rng, break_resamples,
                                               resamples, total)
    return LHIntervals(kg, g0, product, sigma_e, brk, fraction, float(np.max(u_t)) if u_t.size else 0.0,
                       seed, resamples)


def _scaled_by_kg(value, kg_point, kg: Estimate) -> Estimate:
    """sigma*sigma_e and sigma_e are proportional to Kg (the other factors are fixed
    constants of the material), so their intervals scale with Kg's."""
    if value is None or kg.low is None or not kg_point:
        return Estimate(value)
    return Estimate(value, value * kg.low / kg_point, value * kg.high / kg_point)


def _break_interval(lh, se_ln, u_t, weights, rng, resamples, done, total):
    """(interval of the break temperature over the draws that find one, share of the
    draws that find one; None when the fit has too few temperatures to test for a
    break), as a generator yielding ``Progress`` (``done`` of ``total`` draws before it)."""
    if lh.aicc_one is None:
        return Estimate(lh.break_c), None
    found = []
    for i in range(resamples):
        if i % PROGRESS_EVERY == 0:
            yield Progress("resampling the regime break", (done + i) / total,
                           f"draw {done + i} of {total}")
        tc, g = _draw_inputs(lh, se_ln, u_t, rng)
        try:
            fit = fit_lauritzen_hoffman(tc, g, weights, constants=lh.constants)
        except InputError:
            continue
        found.append(np.nan if fit.break_c is None else fit.break_c)
    found = np.asarray(found, dtype=float)
    fraction = float(np.mean(np.isfinite(found))) if found.size else None
    if lh.break_c is None:
        return Estimate(None), fraction
    return estimate(lh.break_c, *percentile_interval(found)), fraction


def fit_with_temperature(tc_c, g_um_per_min, growth_ci95_um_per_min, stage_uncertainty_k, *,
                         constants, **options) -> LHAnalysis:
    """The LH fit weighted by G's CI combined with the temperature part (effective
    variance); ``options`` as for :func:`fit_lauritzen_hoffman`."""
    g = np.asarray(g_um_per_min, dtype=float)
    half_t = temperature_half_width(tc_c, g, stage_uncertainty_k)
    if growth_ci95_um_per_min is None:
        combined = half_t if np.all(half_t > 0) else None
    else:
        combined = np.hypot(np.asarray(growth_ci95_um_per_min, dtype=float), half_t)
    return fit_lauritzen_hoffman(tc_c, g, combined, constants=constants, **options)
