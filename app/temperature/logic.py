"""Glue between the temperature-series view and ``analysis``: gather each experiment's
numbers from the model, and call the Lauritzen-Hoffman and Hoffman-Weeks fits.

No science is done here; the fits and predictions are ``analysis`` functions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.prediction import predict_from_result
from analysis.kinetics.lauritzen_hoffman import (
    LHConstants,
    fit_lauritzen_hoffman,
    hoffman_weeks,
    lh_coordinates,
    lh_growth_rate,
)
from app.core.kinetics_inputs import volumetric_density
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


def _half_width(growth) -> float | None:
    if growth.ci95_low is None or growth.ci95_high is None:
        return None
    return (growth.ci95_high - growth.ci95_low) / 2.0


def _predicted_half_time(result, experiment) -> float | None:
    try:
        return predict_from_result(result, "bulk-3d", experiment.mode_override).t_half_min
    except InputError:
        return None


def _measured_half_time(experiment, cache) -> float | None:
    if experiment.calorimetry is None:
        return None
    try:
        fit = cache.analyze(experiment.calorimetry).avrami
    except InputError:
        return None
    return fit.t_half_min if fit else None


def collect(model, cache) -> list[SeriesPoint]:
    """One point per experiment with an analysis result, in project order."""
    points = []
    for i, experiment in enumerate(model.experiments()):
        result = model.result(i)
        if result is None:
            continue
        nuc, growth = result.nucleation, result.growth_rate
        volumetric, _h = volumetric_density(result, experiment)
        temperature = experiment.temperature_c if experiment.temperature_c is not None else result.temperature_c
        points.append(SeriesPoint(experiment.name, temperature, growth.value, _half_width(growth),
                                  nuc.density_per_mm2, volumetric, _predicted_half_time(result, experiment),
                                  _measured_half_time(experiment, cache)))
    return points


def column(points, name: str) -> np.ndarray:
    return np.array([np.nan if getattr(p, name) is None else getattr(p, name) for p in points], float)


def constants_from(series: dict) -> LHConstants:
    """LH constants from the project's series settings (InputError naming what is missing)."""
    missing = [label for key, label in (("tm0_c", "Tm0"), ("tg_c", "Tg")) if series.get(key) is None]
    if missing:
        raise InputError(f"set {' and '.join(missing)} (or choose a material) for the Lauritzen-Hoffman fit")
    return LHConstants(tm0_c=float(series["tm0_c"]), tg_c=float(series["tg_c"]),
                       u_star_j_per_mol=float(series.get("u_star_j_per_mol") or 6270.0),
                       t_inf_c=series.get("t_inf_c"))


def lh_fit(points, series: dict, material: str | None):
    """``fit_lauritzen_hoffman`` over the experiments with a growth rate."""
    constants = constants_from(series)
    usable = [p for p in points if p.temperature_c is not None and p.growth_rate is not None]
    tc, g = column(usable, "temperature_c"), column(usable, "growth_rate")
    ci = column(usable, "growth_ci95")
    weights = None if np.isnan(ci).any() else ci
    return fit_lauritzen_hoffman(tc, g, weights, constants=constants, material=material)


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
