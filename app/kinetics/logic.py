"""Glue between the kinetics view and ``analysis``: caching, inputs, curves for display.

No science is done here: entries, predictions, fits, conversions and comparisons come from
``analysis.reporting.entries``, ``analysis.kinetics`` and ``analysis.reporting.tables``; this module picks their inputs from the
project and shapes their outputs for the widgets.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.prediction import film_conversion
from analysis.kinetics.uncertainty import prediction_intervals_steps
from analysis.progress import scaled
from analysis.reporting.entries import experiment_entry
from analysis.reporting.tables import compare_kinetics


def entry(result, experiment, calorimetry=None, *, seed: int = DEFAULT_SEED, intervals=None):
    """The experiment's ``ReportEntry`` (``analysis.reporting.entries.experiment_entry``):
    the same prediction, N_V and Tc as the report and the Tc-series page, resampled with
    ``seed``. ``intervals``: the (prediction, bulk prediction) intervals already computed by
    :func:`interval_steps` for the same inputs, so that nothing is resampled again here."""
    made = experiment_entry(experiment, result, calorimetry, seed=seed)
    if intervals is not None:
        # ReportEntry caches these as functools.cached_property values in the instance
        # dict: filling them is what computing them on first use would have done
        made.__dict__["prediction_intervals"], made.__dict__["bulk_prediction_intervals"] = intervals
    return made


def interval_steps(result, experiment, *, seed: int):
    """Generator of the bootstrap intervals of the experiment's prediction (its geometry,
    and bulk 3-D for the comparison with calorimetry when that differs): yields
    ``Progress`` and returns (prediction intervals, bulk prediction intervals) as the
    report computes them (``analysis.kinetics.uncertainty``, same seed, thickness and mode)."""
    made = experiment_entry(experiment, result, seed=seed)
    geometries = [made.geometry] + ([] if made.geometry == "bulk-3d" else ["bulk-3d"])
    found = []
    for i, geometry in enumerate(geometries):
        steps = prediction_intervals_steps(result, geometry, made.mode_override, seed=seed,
                                           thickness_um=made.thickness_um)
        share = 1.0 / len(geometries)
        found.append((yield from scaled(steps, i * share, (i + 1) * share)))
    return found[0], found[-1]


def safe_prediction(result, experiment):
    """The experiment's predicted Avrami model, or None when it cannot be predicted."""
    return None if result is None else experiment_entry(experiment, result).prediction


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
    """The film's measured area fraction X(t), t in min from the induction time (the clock
    of the prediction): ``analysis.kinetics.prediction.film_conversion``."""
    if result is None or len(result.area_fraction) == 0:
        return None, None
    return film_conversion(result)


@dataclass(frozen=True)
class ComparisonView:
    rows: tuple[tuple[str, str, str], ...]
    note: str
    measured_curve: tuple



def _ratio(measured, predicted) -> str:
    return "—" if measured is None or predicted is None or not predicted else f"{measured / predicted:.2f}"


def _waiting_for_intervals(made, curve_note: str, curve) -> ComparisonView:
    """The point values side by side while the intervals are computed (the verdict and the
    ratio's interval need those of the prediction and of the calorimetry)."""
    from app.widgets.formatting import DASH, fmt, k_unit

    predicted, fit = made.bulk_prediction(), made.calorimetry.avrami
    if predicted is None or not fit:
        return ComparisonView(((DASH,) * 3,) * 3, f"No comparison yet. {curve_note}", curve)
    rows = ((f"{predicted.n:.2f}", f"{fit.n:.2f}", _ratio(fit.n, predicted.n)),
            (fmt(predicted.k_per_min_n, k_unit(predicted.n)), fmt(fit.k_per_min_n, k_unit(fit.n)), DASH),
            (fmt(predicted.t_half_min), fmt(fit.t_half_min), _ratio(fit.t_half_min, predicted.t_half_min)))
    return ComparisonView(rows, "Agreement: waiting for the 95 % intervals (progress above). "
                          + curve_note, curve)


def compare(result, experiment, calorimetry, *, seed: int = DEFAULT_SEED,
            intervals=None) -> ComparisonView:
    """Bulk prediction against the calorimetry fit (``analysis.reporting.tables.compare_kinetics``):
    table rows (microscopy, calorimetry, calorimetry / microscopy), the note, the curve
    (``CalorimetryResult.volume_conversion``). ``intervals`` from :func:`interval_steps`;
    None: the comparison waits for them (it is not resampled on the GUI thread)."""
    from app.widgets.formatting import DASH, fmt, fmt_interval, k_unit

    empty = (DASH, DASH, DASH)
    if calorimetry is None:
        return ComparisonView((empty,) * 3, "Import a calorimetry isotherm to compare.", (None, None))
    tau, x, basis = calorimetry.volume_conversion()
    curve_note = f"The plotted calorimetry curve is on a {basis}."
    if result is None:
        return ComparisonView((empty,) * 3, f"No microscopy result to compare with. {curve_note}", (tau, x))
    if intervals is None:
        return _waiting_for_intervals(entry(result, experiment, calorimetry, seed=seed), curve_note, (tau, x))
    c = compare_kinetics(entry(result, experiment, calorimetry, seed=seed, intervals=intervals))
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
         fmt_interval(c.t_half_ratio, *c.t_half_ratio_ci95)),
    )
    verdict = "Agree." if c.agree else "Disagree beyond the uncertainty."
    return ComparisonView(rows, f"{verdict} {c.note} {curve_note}", (tau, x))
