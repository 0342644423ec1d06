"""Avrami kinetics of one experiment from its result: the film fit and the prediction.

The one place where an ``ExperimentResult`` (nucleation statistics, pooled G, X(t))
becomes Avrami numbers; ``analyze``'s summary.json, the report tables, the Microscopy
and Kinetics pages and the temperature series all call these functions.

Public API
----------
``prediction_inputs(result, geometry="bulk-3d", mode=None, *, thickness_um=None) -> PredictionInputs``
    G, N and Ndot per mm^d that enter the model, and the mode used.
``predict_model_from_result(...) -> AvramiPrediction`` (InputError naming the stack when an
    input is missing) and ``predict_from_result(...) -> AvramiParameters``.
``film_conversion(result) -> (t_min, X)``: the image's X(t), t in min from the induction time.
``film_avrami_fit(result) -> AvramiFit | FitFailure``: whole-curve fit of that X(t) (2-D law).

Which nuclei enter the prediction
---------------------------------
* athermal: every nucleus counted in the field, N = N_A (all predetermined);
* thermal: only the rate Ndot (no predetermined nuclei);
* mixed: the predetermined part is the initial burst only (``burst_density_per_mm2``,
  known for results classified athermal or mixed), plus the rate. The total density N_A already contains the sporadic nuclei born later,
  so adding the rate to N_A would count them twice.

For ``bulk-3d`` the areal values become volumetric through N_V = N_A / h
(docs/sources.md §1.7); the film thickness h is the result's unless ``thickness_um`` is
given (a project may hold a corrected thickness).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.avrami import (
    AvramiFit,
    AvramiPrediction,
    FitFailure,
    GEOMETRIES,
    fit_avrami_curve,
    predict_avrami,
)
from analysis.results import AvramiParameters, ExperimentResult
from analysis.settings import DEFAULT_GEOMETRY
from analysis.units import per_mm3_from_per_mm2

__all__ = ["PredictionInputs", "film_avrami_fit", "film_conversion", "predict_from_result",
           "predict_model_from_result", "prediction_inputs"]

_MODE_ALIASES = {"athermal": "athermal", "thermal": "thermal", "sporadic": "thermal",
                 "mixed": "mixed"}


@dataclass(frozen=True)
class PredictionInputs:
    """What enters the Avrami prediction of one experiment (None = not used or unknown).

    Densities per mm^d and rates per mm^d per min, d = 2 for film-2d, 3 for bulk-3d.
    """

    geometry: str
    mode: str
    growth_rate_um_per_min: float | None
    density_per_mm_d: float | None
    rate_per_mm_d_per_min: float | None
    thickness_um: float | None


def _mode_used(result: ExperimentResult, mode: str | None) -> str:
    nuc = result.nucleation
    wanted = mode or nuc.mode
    if wanted is None:  # no mode stated: use whatever nucleation data there are
        has_density, has_rate = nuc.density_per_mm2 is not None, nuc.rate_per_mm2_per_min is not None
        wanted = {(True, True): "mixed", (False, True): "thermal"}.get((has_density, has_rate),
                                                                       "athermal")
    key = _MODE_ALIASES.get(wanted)
    if key is None:
        raise InputError(f"nucleation mode {wanted!r} unknown; use athermal, thermal or mixed",
                         result.stack)
    return key


def _predetermined_per_mm2(result: ExperimentResult, mode: str) -> float | None:
    """Areal density of the predetermined nuclei for ``mode`` (see the module notes)."""
    nuc = result.nucleation
    if mode == "thermal":
        return None
    if mode == "mixed":
        return nuc.burst_density_per_mm2  # unknown (None) for a result classified thermal
    return nuc.density_per_mm2


def prediction_inputs(result: ExperimentResult, geometry: str = DEFAULT_GEOMETRY, mode: str | None = None,
                      *, thickness_um: float | None = None) -> PredictionInputs:
    """The inputs of the prediction (never raises for missing values; see
    :func:`predict_model_from_result` for that). ``mode`` overrides the result's mode."""
    if geometry not in GEOMETRIES:
        raise InputError(f"unknown geometry {geometry!r}; use one of {sorted(GEOMETRIES)}")
    mode_key = _mode_used(result, mode)
    h = thickness_um if thickness_um else result.thickness_um
    density = _predetermined_per_mm2(result, mode_key)
    rate = None if mode_key == "athermal" else result.nucleation.rate_per_mm2_per_min
    if geometry == "bulk-3d":
        density, rate = per_mm3_from_per_mm2(density, h), per_mm3_from_per_mm2(rate, h)
    return PredictionInputs(geometry, mode_key, result.growth_rate.value, density, rate, h or None)


def predict_model_from_result(result: ExperimentResult, geometry: str = DEFAULT_GEOMETRY,
                              mode: str | None = None, *,
                              thickness_um: float | None = None) -> AvramiPrediction:
    """Avrami model from an experiment's pooled G and nucleation statistics.

    Missing inputs raise InputError naming the stack and what is missing.
    """
    inputs = prediction_inputs(result, geometry, mode, thickness_um=thickness_um)
    needs_density, needs_rate = inputs.mode != "thermal", inputs.mode != "athermal"
    missing = [name for name, value, need in (
        ("growth rate", inputs.growth_rate_um_per_min, True),
        ("nucleus density", inputs.density_per_mm_d, needs_density),
        ("nucleation rate", inputs.rate_per_mm_d_per_min, needs_rate)) if need and value is None]
    if missing:
        extra = " (or the film thickness)" if geometry == "bulk-3d" and not inputs.thickness_um else ""
        raise InputError(f"cannot predict {geometry} Avrami kinetics: missing "
                         f"{' and '.join(missing)}{extra}", result.stack)
    try:
        return predict_avrami(geometry, inputs.growth_rate_um_per_min,
                              density_per_mm_d=inputs.density_per_mm_d,
                              rate_per_mm_d_per_min=inputs.rate_per_mm_d_per_min)
    except InputError as err:
        raise InputError(err.problem, result.stack) from None


def predict_from_result(result: ExperimentResult, geometry: str = DEFAULT_GEOMETRY,
                        mode: str | None = None, *,
                        thickness_um: float | None = None) -> AvramiParameters:
    """Predicted n, k (min^-n) and t_half (min); see :func:`predict_model_from_result`."""
    return predict_model_from_result(result, geometry, mode, thickness_um=thickness_um).to_parameters()


def film_conversion(result: ExperimentResult) -> tuple[np.ndarray, np.ndarray]:
    """The image's transformed area fraction X(t), t in min from the induction time.

    This is the film's own clock for Avrami analysis (the first nucleus starts growth).
    Empty arrays when the result has no X(t).
    """
    t = np.asarray(result.area_fraction_time_s, dtype=float)
    x = np.asarray(result.area_fraction, dtype=float)
    origin = result.nucleation.induction_time_s or 0.0
    return (t - origin) / 60.0, x


def film_avrami_fit(result: ExperimentResult) -> AvramiFit | FitFailure:
    """Whole-curve Avrami fit of the image's X(t) (projected area follows the 2-D law
    whatever the film thickness, docs/sources.md §1.7); falsy FitFailure when impossible."""
    t_min, x = film_conversion(result)
    if t_min.size == 0:
        return FitFailure("the result has no area fraction X(t)")
    return fit_avrami_curve(t_min, x)
