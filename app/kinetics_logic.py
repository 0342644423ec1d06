"""Glue between the kinetics view and ``analysis``: caching, inputs, curves for display.

No science is done here: predictions, fits, conversions and comparisons come from
``analysis.avrami`` and ``analysis.calorimetry``; this module picks their inputs from the
project and shapes their outputs for the widgets.
"""

from __future__ import annotations

import os
import re
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from analysis.avrami import predict_model_from_result
from analysis.calorimetry import analyze_source
from analysis.errors import InputError


class CalorimetryCache:
    """The last few ``analysis.calorimetry.analyze_source`` results, keyed by the source.

    The file's modification time is part of the key, so an edited export is re-read.
    """

    def __init__(self, size: int = 16):
        self._results: OrderedDict = OrderedDict()
        self._size = size

    def analyze(self, source):
        try:
            stamp = os.stat(source.file).st_mtime_ns
        except OSError as error:
            raise InputError(f"cannot read calorimetry file ({error.strerror})", source.file) from None
        key = (source, stamp)
        if key not in self._results:
            self._results[key] = analyze_source(source)
            _trim(self._results, self._size)
        self._results.move_to_end(key)
        return self._results[key]


def _trim(cache: OrderedDict, size: int) -> None:
    while len(cache) > size:
        cache.popitem(last=False)


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


def volumetric_density(result, experiment) -> tuple[float | None, float | None]:
    """(N_V in mm⁻³, film thickness h in µm used): the pipeline's N_V, else N_A / h
    exactly as ``analysis.avrami`` forms it for the bulk prediction."""
    nuc = result.nucleation
    h = experiment.thickness_um or result.thickness_um
    if nuc.density_per_mm3 is not None:
        return nuc.density_per_mm3, h
    if nuc.density_per_mm2 is None or not h:
        return None, h
    return nuc.density_per_mm2 / (h * 1e-3), h


def material_for(experiment, project) -> str | None:
    """The material whose densities convert calorimetry to a volume basis."""
    source = experiment.calorimetry
    return (source.material if source is not None and source.material else None) or project.material


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


def file_stem(name: str) -> str:
    """A file-name-safe version of an experiment name."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", name).strip("._")
    return stem or "experiment"


@dataclass(frozen=True)
class ComparisonView:
    rows: tuple[tuple[str, str, str], ...]
    note: str
    measured_curve: tuple



def _measured_curve(calorimetry, material):
    """Calorimetry X(t − t0) on a volume basis (mass basis, with the reason, without densities)."""
    from analysis.avrami import volume_fraction_from_mass

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
    """Bulk prediction against the calorimetry fit (``analysis.tables.compare_kinetics``):
    table rows (microscopy, calorimetry, calorimetry / microscopy), the note, the curve."""
    from analysis.tables import ReportEntry, compare_kinetics

    from .kinetics_panels import DASH, fmt, k_unit

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
