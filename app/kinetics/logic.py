"""Glue between the kinetics view and ``analysis``: caching, inputs, curves for display.

No science is done here: predictions, fits, conversions and comparisons come from
``analysis.kinetics.avrami`` and ``analysis.kinetics.calorimetry``; this module picks their inputs from the
project and shapes their outputs for the widgets.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.prediction import predict_model_from_result


def prediction(result, geometry: str, mode_override: str | None):
    """The Avrami model predicted from the experiment's N and G (InputError if impossible)."""
    return predict_model_from_result(result, geometry, mode_override)


def safe_prediction(result, experiment):
    if result is None:
        return None
    try:
        return prediction(result, experiment.geometry, experiment.mode_override)
    except InputError:
        return None


def predicted_curve(model, calorimetry, points: int = 300):
    """(t_min, X) of a prediction over the time range of interest, or (None, None)."""
    if model is None:
        return None, None
    t_end = 3.0 * model.t_half_min
    if calorimetry is not None:
        t, _x = calorimetry.conversion_table()
        t_end = max(t_end, float(t.max() - calorimetry.induction_time_min))
    t = np.linspace(0.0, t_end, points)
    return t, model.conversion(t)


def image_area_fraction(result):
    """The measured crystallized area fraction of the film images, t in min."""
    if result is None or result.area_fraction is None or len(result.area_fraction) == 0:
        return None, None
    return np.asarray(result.area_fraction_time_s, float) / 60.0, np.asarray(result.area_fraction, float)


@dataclass(frozen=True)
class ComparisonView:
    rows: tuple[tuple[str, str, str], ...]
    note: str
    measured_curve: tuple



def _measured_curve(calorimetry, material):
    """Calorimetry X(t − t0) on a volume basis (mass basis, with the reason, without densities)."""
    from analysis.kinetics.avrami import volume_fraction_from_mass

    t, x = calorimetry.conversion_table()
    tau = t - calorimetry.induction_time_min
    keep = tau > 0
    tau, x = tau[keep], x[keep]
    if material is None:
        return tau, x, "mass basis (choose a material for the density ratio)"
    try:
        return tau, volume_fraction_from_mass(x, material=material), "volume basis"
    except InputError as error:
        return tau, x, f"mass basis ({error.problem})"


def _ratio(measured, predicted) -> str:
    return "—" if measured is None or predicted is None or not predicted else f"{measured / predicted:.2f}"


def compare(result, experiment, calorimetry, material) -> ComparisonView:
    """Bulk prediction against the calorimetry fit (``analysis.reporting.tables.compare_kinetics``):
    table rows (microscopy, calorimetry, calorimetry / microscopy), the note, the curve."""
    from analysis.reporting.tables import ReportEntry, compare_kinetics
    from app.widgets.formatting import DASH, fmt, k_unit

    empty = (DASH, DASH, DASH)
    if calorimetry is None:
        return ComparisonView((empty,) * 3, "Import a calorimetry isotherm to compare.", (None, None))
    tau, x, basis = _measured_curve(calorimetry, material)
    curve_note = f"The plotted calorimetry curve is on a {basis}."
    if result is None:
        return ComparisonView((empty,) * 3, f"No microscopy result to compare with. {curve_note}", (tau, x))
    entry = ReportEntry(experiment.name, result, experiment.geometry, experiment.mode_override, calorimetry)
    c = compare_kinetics(entry)
    if c is None:
        why = (calorimetry.avrami.reason if not calorimetry.avrami
               else "no bulk prediction from microscopy (see the prediction above)")
        return ComparisonView((empty,) * 3, f"No comparison: {why}. {curve_note}", (tau, x))
    root = lambda k, n: k ** (1.0 / n)
    rows = (
        (f"{c.predicted_n:.2f}", f"{c.measured_n:.2f}", _ratio(c.measured_n, c.predicted_n)),
        (fmt(c.predicted_k_per_min_n, k_unit(c.predicted_n)), fmt(c.measured_k_per_min_n, k_unit(c.measured_n)),
         f"{_ratio(root(c.measured_k_per_min_n, c.measured_n), root(c.predicted_k_per_min_n, c.predicted_n))}"
         " (k^(1/n))"),
        (fmt(c.predicted_t_half_min), fmt(c.measured_t_half_min),
         f"{c.t_half_ratio:.2f} (×/÷ {c.ratio_uncertainty:.3g})"),
    )
    verdict = "Agree." if c.agree else "Disagree beyond the uncertainty."
    return ComparisonView(rows, f"{verdict} {c.note} {curve_note}", (tau, x))
