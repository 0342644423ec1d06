"""Glue between the temperature-series view and ``analysis``: gather each experiment's
numbers from the model, and call the Lauritzen-Hoffman and Hoffman-Weeks fits.

No science is done here; the fits and predictions are ``analysis`` functions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.lh_intervals import fit_with_temperature, lh_intervals_steps
from analysis.kinetics.lauritzen_hoffman import (
    hoffman_weeks,
    lh_coordinates,
    lh_growth_rate,
)
from analysis.reporting.entries import (
    lauritzen_hoffman_inputs,
    lauritzen_hoffman_sources,
    series_constants,
    stage_uncertainties,
)
from analysis.reporting.report import RAMPS_IN_LH_KEY
from app.temperature.lauritzen_hoffman import HW_KEY


@dataclass(frozen=True)
class SeriesPoint:
    """One experiment's numbers as the temperature view plots them (None = unknown)."""

    name: str
    temperature_c: float | None
    growth_rate: float | None
    growth_ci95: float | None  # half-width, µm/min
    density_areal: float | None
    density_volumetric: float | None
    predicted_t_half_min: float | None
    measured_t_half_min: float | None


def _measured_half_time(entry) -> float | None:
    fit = entry.calorimetry.avrami if entry.calorimetry is not None else None
    return fit.t_half_min if fit else None


def _predicted_half_time(entry) -> float | None:
    prediction = entry.bulk_prediction()
    return None if prediction is None else prediction.t_half_min


def points_from(entries) -> list[SeriesPoint]:
    """One point per report entry (``analysis.reporting.entries.report_entry``), in order."""
    return [SeriesPoint(e.name, e.temperature_c, e.result.growth_rate.value,
                        e.growth_rate_ci95_half_width, e.result.nucleation.density_per_mm2,
                        e.density_per_mm3, _predicted_half_time(e), _measured_half_time(e))
            for e in entries]


def column(points, name: str) -> np.ndarray:
    return np.array([np.nan if getattr(p, name) is None else getattr(p, name) for p in points], float)


def lh_fit(entries, series: dict, material: str | None):
    """(the Lauritzen-Hoffman fit over the entries with a Tc and a growth rate, where the
    constants came from, the source of each point) with the constants, inputs and weights
    the report uses (``analysis.reporting.entries``: G's CI with the stage-temperature part;
    ramp entries add their G(T) when the series flag ``lh_include_ramps`` is set);
    InputError when Tm0 or Tg is unknown."""
    constants, note = series_constants(series, material)
    if constants is None:
        raise InputError(note)
    include = bool(series.get(RAMPS_IN_LH_KEY, False))
    tc, g, ci = lauritzen_hoffman_inputs(entries, include_ramps=include)
    sources = lauritzen_hoffman_sources(entries, include_ramps=include)
    fit = fit_with_temperature(tc, g, ci, stage_uncertainties(entries, include_ramps=include),
                               constants=constants, material=material)
    return fit, note, sources


def _lh_interval_inputs(entries, series: dict):
    include = bool(series.get(RAMPS_IN_LH_KEY, False))
    _tc, _g, ci = lauritzen_hoffman_inputs(entries, include_ramps=include)
    return ci, stage_uncertainties(entries, include_ramps=include)


def lh_intervals_key(fit, entries, series: dict, seed: int) -> tuple:
    """What the intervals of ``fit`` (from :func:`lh_fit`) depend on, as a hashable key."""
    ci, u_t = _lh_interval_inputs(entries, series)
    return (tuple(fit.tc_c), tuple(fit.g_um_per_min), None if ci is None else tuple(ci),
            tuple(u_t), fit.constants, fit.material, fit.aicc_one is None, seed)


def lh_interval_steps(fit, entries, series: dict, seed: int):
    """Generator of the intervals on Kg, G0, σσe, σe and the regime break of ``fit`` (from
    :func:`lh_fit`), as the report computes them
    (``analysis.kinetics.lh_intervals.lh_intervals``: same inputs, same seed)."""
    ci, u_t = _lh_interval_inputs(entries, series)
    return lh_intervals_steps(fit, ci, u_t, seed=seed)


def lh_display(fit, points: int = 60):
    """Points, one fitted line per regime and the regimes' ranges, all on the LH plot's axes."""
    c = fit.constants
    x, y = lh_coordinates(fit.tc_c, fit.g_um_per_min, c)
    lines, bands = [], []
    for regime in fit.regimes:
        tc = np.linspace(regime.t_low_c, regime.t_high_c, points)
        line_x, line_y = lh_coordinates(tc, lh_growth_rate(tc, regime.g0_um_per_min, regime.kg_k2, c), c)
        lines.append((line_x, line_y))
        if len(fit.regimes) > 1:
            bands.append((regime.name, float(line_x.min()), float(line_x.max())))
    return x, y, lines, bands


def growth_curve(fit, points: int = 120):
    """The fitted G(Tc) over the measured range, regime by regime."""
    tc_all, g_all = [], []
    for regime in fit.regimes:
        tc = np.linspace(regime.t_low_c, regime.t_high_c, points)
        tc_all.append(tc)
        g_all.append(lh_growth_rate(tc, regime.g0_um_per_min, regime.kg_k2, fit.constants))
    return np.concatenate(tc_all), np.concatenate(g_all)


def hw_pairs(series: dict) -> list:
    return [list(pair) for pair in series.get(HW_KEY, [])]


def hw_estimate(pairs):
    done = [p for p in pairs if None not in p]
    if len(done) < 2:
        return None, "Enter at least two (Tc, Tm) pairs."
    return hoffman_weeks([p[0] for p in done], [p[1] for p in done]), ""
