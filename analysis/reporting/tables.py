"""Tables across experiments: growth rate versus temperature, microscopy/DSC comparison.

Public API (shared by the report and the GUI)
---------------------------------------------
``ReportEntry(name, result, geometry="bulk-3d", mode_override=None, calorimetry=None,
calorimetry_problem=None, temperature_c=None, thickness_um=None)``: one experiment, its
``ExperimentResult`` and optional ``calorimetry.CalorimetryResult``; Tc and h are the
result's unless given; ``.prediction`` (an ``AvramiPrediction`` or None) and
``.prediction_problem``, ``.density_per_mm3`` and ``.rate_per_mm3_per_min`` (N_A / h).
Build entries with ``analysis.reporting.entries.report_entry``.
``Table(header, rows)``: ``header`` list of column names with units, ``rows`` list of lists
(numbers stay numbers, None for unknown).
``growth_vs_temperature_table(entries) -> Table`` (sorted by temperature)
``comparison_table(entries) -> Table``: predicted 3-D versus measured n, k, t_half, ratio,
agreement and a plain-language note, for entries that have calorimetry.
``compare_kinetics(entry) -> Comparison | None``
``escape_cell(value)``: text beginning with = + - @ gets a leading apostrophe.
``write_csv(table, path)``, ``write_xlsx({sheet: table}, path)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

from analysis.errors import InputError
from analysis.kinetics.avrami import AvramiPrediction
from analysis.kinetics.prediction import (
    PredictionInputs,
    predict_model_from_result,
    prediction_inputs,
)
from analysis.outputs import clean_text
from analysis.results import COUNTS, ExperimentResult
from analysis.settings import DEFAULT_GEOMETRY
from analysis.units import per_mm3_from_per_mm2, write_atomic, write_csv_atomic

__all__ = ["Comparison", "ReportEntry", "Table", "compare_kinetics", "comparison_table",
           "escape_cell", "growth_vs_temperature_table", "write_csv", "write_xlsx"]

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


@dataclass(frozen=True)
class Table:
    header: list
    rows: list


@dataclass(frozen=True)
class ReportEntry:
    """One analysed experiment as every table, figure and page shows it.

    ``temperature_c`` and ``thickness_um`` are the experiment's (°C, µm); None at
    construction means the result's.
    """

    name: str
    result: ExperimentResult
    geometry: str = DEFAULT_GEOMETRY
    mode_override: str | None = None
    calorimetry: object | None = None  # calorimetry.CalorimetryResult
    calorimetry_problem: str | None = None
    temperature_c: float | None = None
    thickness_um: float | None = None
    ramp: object | None = None  # kinetics.ramp.RampAnalysis for an experiment of kind "ramp"

    def __post_init__(self):
        if self.result is None:  # an entry not analysed yet: nothing to take from a result
            return
        if self.temperature_c is None:
            object.__setattr__(self, "temperature_c", self.result.temperature_c)
        if not self.thickness_um:
            object.__setattr__(self, "thickness_um", self.result.thickness_um)

    @property
    def density_per_mm3(self) -> float | None:
        """N_V = N_A / h, mm^-3, with this entry's film thickness."""
        return per_mm3_from_per_mm2(self.result.nucleation.density_per_mm2, self.thickness_um)

    @property
    def rate_per_mm3_per_min(self) -> float | None:
        """Ndot_V = Ndot_A / h, mm^-3 min^-1."""
        return per_mm3_from_per_mm2(self.result.nucleation.rate_per_mm2_per_min, self.thickness_um)

    @property
    def growth_rate_ci95_half_width(self) -> float | None:
        """Half the width of the pooled G's 95 % interval, µm/min (None if unknown)."""
        return self.result.growth_rate.ci95_half_width

    def prediction_inputs(self, geometry: str | None = None) -> PredictionInputs:
        """What enters this entry's prediction (``geometry`` defaults to the entry's)."""
        return prediction_inputs(self.result, geometry or self.geometry, self.mode_override,
                                 thickness_um=self.thickness_um)

    def _predict(self, geometry: str) -> AvramiPrediction:
        return predict_model_from_result(self.result, geometry, self.mode_override,
                                         thickness_um=self.thickness_um)

    @cached_property
    def _predicted(self) -> tuple[AvramiPrediction | None, str | None]:
        try:
            return self._predict(self.geometry), None
        except InputError as err:
            return None, err.problem

    @property
    def prediction(self) -> AvramiPrediction | None:
        return self._predicted[0]

    @property
    def prediction_problem(self) -> str | None:
        return self._predicted[1]

    def bulk_prediction(self) -> AvramiPrediction | None:
        """The 3-D prediction (what a bulk DSC sample should show), whatever ``geometry``."""
        if self.geometry == "bulk-3d":
            return self.prediction
        try:
            return self._predict("bulk-3d")
        except InputError:
            return None


def escape_cell(value):
    """Neutralise spreadsheet formulas (text starting with = + - @, tab or CR gets a "'")
    and replace control characters with spaces."""
    if isinstance(value, str):
        value = clean_text(value)  # spreadsheet files cannot hold control characters
        if value.startswith(_FORMULA_START):
            return "'" + value
    return value


GROWTH_HEADER = [
    "experiment", "temperature_c", "growth_rate_um_per_min", "growth_rate_ci95_low_um_per_min",
    "growth_rate_ci95_high_um_per_min", *COUNTS, "nucleation_mode",
    "nucleus_density_per_mm2", "nucleus_density_per_mm3", "nucleation_rate_per_mm2_per_min",
    "nucleation_rate_per_mm3_per_min", "predicted_geometry", "predicted_avrami_n",
    "predicted_k_per_min_n", "predicted_t_half_min", "dsc_avrami_n", "dsc_k_per_min_n",
    "dsc_t_half_min", "dsc_t_half_measured_min", "dsc_induction_time_min", "dsc_r2",
]


def _dsc_columns(cal) -> list:
    if cal is None:
        return [None] * 6
    fit = cal.avrami
    if not fit:
        return [None, None, None, cal.t_half_measured_min, cal.induction_time_min, None]
    return [fit.n, fit.k_per_min_n, fit.t_half_min, cal.t_half_measured_min,
            cal.induction_time_min, fit.r2]


def _growth_row(entry: ReportEntry) -> list:
    r = entry.result
    g, nuc, pred = r.growth_rate, r.nucleation, entry.prediction
    predicted = [None, None, None] if pred is None else [pred.n, pred.k_per_min_n, pred.t_half_min]
    counts = r.counts()
    return [entry.name, entry.temperature_c, g.value, g.ci95_low, g.ci95_high,
            *(counts[key] for key in COUNTS), nuc.mode,
            nuc.density_per_mm2, entry.density_per_mm3, nuc.rate_per_mm2_per_min,
            entry.rate_per_mm3_per_min, entry.geometry, *predicted, *_dsc_columns(entry.calorimetry)]


def _by_temperature(entries):
    return sorted(entries, key=lambda e: (e.temperature_c is None, e.temperature_c or 0.0, e.name))


def growth_vs_temperature_table(entries) -> Table:
    """One row per experiment, sorted by temperature (units in the column names)."""
    return Table(list(GROWTH_HEADER), [_growth_row(e) for e in _by_temperature(entries)])


# ---------------------------------------------------------------- comparison
@dataclass(frozen=True)
class Comparison:
    """Predicted (3-D, from N_V and G) against measured (DSC) kinetics at one Tc."""

    name: str
    temperature_c: float | None
    predicted_n: float
    measured_n: float
    predicted_k_per_min_n: float
    measured_k_per_min_n: float
    predicted_t_half_min: float
    measured_t_half_min: float
    t_half_ratio: float          # measured / predicted
    ratio_uncertainty: float     # 95 % factor: the ratio is consistent with 1 within x/ this
    agree: bool
    note: str


def _predicted_log_sigma(entry: ReportEntry, pred: AvramiPrediction) -> float:
    """sigma of ln t_half from the Poisson count and the G CI (t_half ~ (N G^d)^(-1/n))."""
    r = entry.result
    g, count = r.growth_rate, max(1, r.nucleation.count)
    rel_g = 0.0
    if g.value and g.ci95_low is not None and g.ci95_high is not None:
        rel_g = (g.ci95_high - g.ci95_low) / (2 * 1.96 * g.value)
    d = pred.dimension
    return math.sqrt(1.0 / count + (d * rel_g) ** 2) / pred.n


def _note(agree: bool, ratio: float, measured_n: float, factor: float) -> str:
    parts = []
    if agree:
        parts.append(f"Microscopy and calorimetry agree within the combined uncertainty "
                     f"(x/ {factor:.2g}).")
    elif ratio < 1:
        parts.append(f"The DSC sample crystallized {1 / ratio:.2g} times faster than predicted: "
                     "the bulk sample likely holds more nuclei than the film (pan and surface "
                     "nucleation, different melt history or sample mass), or the film "
                     "thickness used for N_V = N_A/h is too large.")
    else:
        parts.append(f"The DSC sample crystallized {ratio:.2g} times slower than predicted: "
                     "the film count may include surface nuclei on the glass (N_A > N_V h), "
                     "the film thickness may be too small, or the DSC run lost early "
                     "crystallization to the start-up transient.")
    if measured_n < 2.0 or measured_n > 4.5:
        parts.append(f"The DSC exponent n = {measured_n:.2f} is unusual: check the induction "
                     "time, crystallization during cooling, and whether the fit window reaches "
                     "secondary crystallization.")
    return " ".join(parts)


def compare_kinetics(entry: ReportEntry) -> Comparison | None:
    """Comparison for one entry, or None without both a 3-D prediction and a DSC fit."""
    pred, cal = entry.bulk_prediction(), entry.calorimetry
    if pred is None or cal is None or not cal.avrami:
        return None
    fit = cal.avrami
    ratio = fit.t_half_min / pred.t_half_min
    sigma = _predicted_log_sigma(entry, pred)
    factor = math.exp(1.96 * sigma)
    agree = abs(math.log(ratio)) <= 1.96 * sigma
    return Comparison(entry.name, entry.temperature_c, pred.n, fit.n, pred.k_per_min_n,
                      fit.k_per_min_n, pred.t_half_min, fit.t_half_min, ratio, factor, agree,
                      _note(agree, ratio, fit.n, factor))


COMPARISON_HEADER = [
    "experiment", "temperature_c", "predicted_n", "dsc_n", "predicted_k_per_min_n",
    "dsc_k_per_min_n", "predicted_t_half_min", "dsc_t_half_min", "t_half_ratio_dsc_over_predicted",
    "ratio_uncertainty_factor_95", "agreement", "note",
]


def comparison_table(entries) -> Table:
    rows = []
    for entry in _by_temperature(entries):
        c = compare_kinetics(entry)
        if c is not None:
            rows.append([c.name, c.temperature_c, c.predicted_n, c.measured_n,
                         c.predicted_k_per_min_n, c.measured_k_per_min_n, c.predicted_t_half_min,
                         c.measured_t_half_min, c.t_half_ratio, c.ratio_uncertainty,
                         "agree" if c.agree else "disagree", c.note])
    return Table(list(COMPARISON_HEADER), rows)


# ---------------------------------------------------------------- writers
def _csv_value(value):
    if value is None:
        return ""
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.6g}"
    return escape_cell(value)


def write_csv(table: Table, path) -> Path:
    """UTF-8 CSV, written atomically; text cells escaped against formula injection;
    None -> empty."""
    return write_csv_atomic(path, [[_csv_value(v) for v in row]
                                   for row in (table.header, *table.rows)])


def _xlsx_value(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return escape_cell(value)


def write_xlsx(sheets: dict, path) -> Path:
    """One worksheet per table; header row bold and frozen; text cells escaped; the file
    is written atomically."""
    from openpyxl import Workbook
    from openpyxl.styles import Font

    book = Workbook()
    book.remove(book.active)
    for title, table in sheets.items():
        sheet = book.create_sheet(title=str(title)[:31])
        sheet.append([_xlsx_value(h) for h in table.header])
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for row in table.rows:
            sheet.append([_xlsx_value(v) for v in row])
        sheet.freeze_panes = "A2"
    return write_atomic(path, lambda temporary: book.save(temporary))
