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
from analysis.calorimetry import analyze_isotherm, read_isotherm
from analysis.errors import InputError


class CalorimetryCache:
    """Read each isotherm file once per mapping; keep the last few analyses.

    The file's modification time is part of the key, so an edited export is re-read.
    """

    def __init__(self, size: int = 16):
        self._isotherms: OrderedDict = OrderedDict()
        self._results: OrderedDict = OrderedDict()
        self._size = size

    def isotherm(self, source):
        try:
            stamp = os.stat(source.file).st_mtime_ns
        except OSError as error:
            raise InputError(f"cannot read calorimetry file ({error.strerror})", source.file) from None
        key = (source.file, stamp, source.time_col, source.heat_flow_col, source.time_unit,
               source.heat_flow_unit)
        if key not in self._isotherms:
            self._isotherms[key] = read_isotherm(
                source.file, time_col=source.time_col, heat_flow_col=source.heat_flow_col,
                time_unit=source.time_unit, heat_flow_unit=source.heat_flow_unit)
            _trim(self._isotherms, self._size)
        return key, self._isotherms[key]

    def analyze(self, source):
        """``analysis.calorimetry.analyze_isotherm`` for a ``CalorimetrySource`` (cached)."""
        key, isotherm = self.isotherm(source)
        full_key = (key, source.exotherm, tuple(source.window), source.mass_mg, source.material,
                    source.baseline_start_min, source.baseline_end_min)
        if full_key not in self._results:
            self._results[full_key] = analyze_isotherm(
                isotherm, exotherm=source.exotherm or "auto", window=source.window,
                mass_mg=source.mass_mg, material=source.material,
                baseline_start_min=source.baseline_start_min, baseline_end_min=source.baseline_end_min)
            _trim(self._results, self._size)
        return self._results[full_key]


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


def _scaled_result(result, *, growth_factor: float, density_factor: float):
    """A copy of ``result`` with G and the nucleation densities/rates scaled (for bounds)."""
    import dataclasses

    g, nuc = result.growth_rate, result.nucleation
    scale = lambda value: None if value is None else value * density_factor
    return dataclasses.replace(
        result,
        growth_rate=dataclasses.replace(g, value=None if g.value is None else g.value * growth_factor),
        nucleation=dataclasses.replace(
            nuc, density_per_mm2=scale(nuc.density_per_mm2), density_per_mm3=scale(nuc.density_per_mm3),
            rate_per_mm2_per_min=scale(nuc.rate_per_mm2_per_min),
            rate_per_mm3_per_min=scale(nuc.rate_per_mm3_per_min)))


def predicted_half_time_range(result, mode_override: str | None) -> tuple[float, float] | None:
    """Bulk t½ predicted at the ends of G's 95 % interval and of the nucleus count's 95 %
    Poisson interval (1 ± 1.96/√count), each prediction made by ``analysis.avrami``."""
    g, nuc = result.growth_rate, result.nucleation
    if g.value is None or g.ci95_low is None or g.ci95_high is None or not nuc.count:
        return None
    spread = min(0.95, 1.96 / np.sqrt(nuc.count))
    bounds = []
    for growth, density in (((g.ci95_high / g.value), 1 + spread), ((g.ci95_low / g.value), 1 - spread)):
        if growth <= 0:
            return None
        scaled = _scaled_result(result, growth_factor=growth, density_factor=density)
        bounds.append(predict_model_from_result(scaled, "bulk-3d", mode_override).t_half_min)
    return min(bounds), max(bounds)


def _measured_fit(calorimetry, material):
    """Calorimetry X(t) on a volume basis and its window fit; mass basis without densities."""
    from analysis.avrami import fit_avrami_window, volume_fraction_from_mass

    t, x = calorimetry.conversion_table()
    tau = t - calorimetry.induction_time_min
    keep = tau > 0
    tau, x = tau[keep], x[keep]
    if material is None:
        return tau, x, calorimetry.avrami, "mass (no material chosen, so no density ratio)"
    try:
        x_volume = volume_fraction_from_mass(x, material=material)
    except InputError as error:
        return tau, x, calorimetry.avrami, f"mass ({error.problem})"
    return tau, x_volume, fit_avrami_window(tau, x_volume, calorimetry.window), "volume"


def _ratio(a, b) -> str:
    return "—" if a is None or b is None or not b else f"{a / b:.2f}"


def compare(result, experiment, calorimetry, material) -> ComparisonView:
    """Bulk prediction from microscopy against the calorimetry fit: table rows, note, curve."""
    from .kinetics_panels import DASH, fmt, k_unit

    empty = (DASH, DASH, DASH)
    if calorimetry is None:
        return ComparisonView((empty,) * 3, "Import a calorimetry isotherm to compare.", (None, None))
    tau, x_measured, fit, basis = _measured_fit(calorimetry, material)
    predicted = None if result is None else safe_prediction(result, _as_bulk(experiment))
    curve = (tau, x_measured)
    if not fit or predicted is None:
        why = fit.reason if not fit else "no bulk prediction from microscopy (see above)"
        return ComparisonView((empty,) * 3, f"No comparison: {why}.", curve)
    rows = (
        (f"{predicted.n:.2f}", f"{fit.n:.2f}", _ratio(predicted.n, fit.n)),
        (fmt(predicted.k_per_min_n, k_unit(predicted.n)), fmt(fit.k_per_min_n, k_unit(fit.n)),
         f"{_ratio(predicted.k_per_min_n ** (1 / predicted.n), fit.k_per_min_n ** (1 / fit.n))} (k^(1/n))"),
        (fmt(predicted.t_half_min), fmt(fit.t_half_min), _ratio(predicted.t_half_min, fit.t_half_min)),
    )
    note = _agreement_note(predicted, fit, predicted_half_time_range(result, experiment.mode_override))
    return ComparisonView(rows, f"{note} Calorimetry on a {basis} basis.", curve)


def _as_bulk(experiment):
    import dataclasses

    return dataclasses.replace(experiment, geometry="bulk-3d")


def _agreement_note(predicted, fit, t_half_range) -> str:
    if t_half_range is None:
        return ("The uncertainty of the prediction is unknown (no confidence interval for G or no "
                "nucleus count), so agreement cannot be judged.")
    low, high = t_half_range
    if low <= fit.t_half_min <= high:
        return (f"The half-times agree: calorimetry {fit.t_half_min:.3g} min lies within the "
                f"{low:.3g}-{high:.3g} min that G and N allow.")
    factor = fit.t_half_min / predicted.t_half_min
    faster = "slower" if factor > 1 else "faster"
    text = (f"The calorimetry sample crystallizes {max(factor, 1 / factor):.2g} times {faster} than "
            f"microscopy predicts ({fit.t_half_min:.3g} min against {low:.3g}-{high:.3g} min), "
            "beyond the uncertainty of G and N. ")
    if factor < 1:
        text += ("More nuclei in the bulk pan than in the film (pan surfaces, additives, a different "
                 "melt history) is the usual reason. ")
    else:
        text += ("Fewer active nuclei in the bulk sample, surface nuclei counted in the thin film, "
                 "or a film thickness set too large (N_V = N_A/h) are the usual reasons. ")
    if abs(fit.n - predicted.n) > 0.5:
        text += (f"The exponents also differ (n = {fit.n:.2f} against {predicted.n:.2f}): check the "
                 "induction time and that the fit window stays before secondary crystallization.")
    return text.strip()
