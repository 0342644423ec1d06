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
from analysis.intervals import DEFAULT_SEED, Estimate
from analysis.kinetics.avrami import AvramiPrediction
from analysis.kinetics.lh_intervals import temperature_half_width, with_temperature
from analysis.kinetics.prediction import (
    PredictionInputs,
    predict_model_from_result,
    prediction_inputs,
)
from analysis.kinetics.uncertainty import PredictionIntervals, prediction_intervals, ratio_interval
from analysis.settings import DEFAULT_STAGE_UNCERTAINTY_K
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
    stage_uncertainty_k: float = DEFAULT_STAGE_UNCERTAINTY_K  # K, standard uncertainty of Tc
    seed: int = DEFAULT_SEED  # of the resampling

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
    def prediction_intervals(self) -> PredictionIntervals | None:
        """Bootstrap intervals of the prediction in the entry's geometry."""
        return prediction_intervals(self.result, self.geometry, self.mode_override, seed=self.seed,
                                    thickness_um=self.thickness_um)

    @cached_property
    def bulk_prediction_intervals(self) -> PredictionIntervals | None:
        if self.geometry == "bulk-3d":
            return self.prediction_intervals
        return prediction_intervals(self.result, "bulk-3d", self.mode_override, seed=self.seed,
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


def _ci_names(name: str, unit: str = "") -> list[str]:
    suffix = f"_{unit}" if unit else ""
    return [f"{name}{suffix}", f"{name}_ci95_low{suffix}", f"{name}_ci95_high{suffix}"]


GROWTH_HEADER = [
    "experiment", "temperature_c", *_ci_names("growth_rate", "um_per_min"), "stage_uncertainty_k",
    "growth_rate_with_temperature_ci95_low_um_per_min",
    "growth_rate_with_temperature_ci95_high_um_per_min",
    *COUNTS, "nucleation_mode", *_ci_names("nucleus_density_per_mm2"),
    *_ci_names("nucleus_density_per_mm3"), *_ci_names("nucleation_rate_per_mm2_per_min"),
    *_ci_names("nucleation_rate_per_mm3_per_min"), "predicted_geometry",
    *_ci_names("predicted_avrami_n"), *_ci_names("predicted_k_per_min_n"),
    *_ci_names("predicted_t_half_min"), *_ci_names("dsc_avrami_n"), *_ci_names("dsc_k_per_min_n"),
    *_ci_names("dsc_t_half_min"), "dsc_t_half_measured_min", "dsc_induction_time_min", "dsc_r2",
    "resampling_seed",
]


def _triple(est: Estimate | None) -> list:
    return [None, None, None] if est is None else [est.value, est.low, est.high]


def _per_volume(entry: ReportEntry, pair):
    """An areal (low, high) pair per mm^3 with the entry's film thickness (None without)."""
    if pair is None or not entry.thickness_um:
        return None
    return tuple(per_mm3_from_per_mm2(v, entry.thickness_um) for v in pair)


def _with_ci(value, pair) -> list:
    return [value, *(pair if pair is not None and value is not None else (None, None))]


def dsc_estimates(cal) -> tuple[Estimate, Estimate, Estimate] | None:
    """The calorimetry window fit's n, k and t_half with their intervals (None: no fit)."""
    if cal is None or not cal.avrami:
        return None
    ci, fit = getattr(cal, "intervals", None), cal.avrami
    if ci is not None:
        return ci.n, ci.k_per_min_n, ci.t_half_min
    # intervals not computed: the calorimetry side counts as exact in the ratio
    return tuple(Estimate(v, v, v) for v in (fit.n, fit.k_per_min_n, fit.t_half_min))


def _dsc_columns(cal) -> list:
    if cal is None:
        return [None] * 12
    found = dsc_estimates(cal)
    values = [None] * 9 if found is None else [v for est in found for v in _triple(est)]
    return [*values, cal.t_half_measured_min, cal.induction_time_min,
            cal.avrami.r2 if cal.avrami else None]


def growth_estimate(entry: ReportEntry) -> Estimate:
    """Pooled G at the stated Tc with its 95 % interval including the stage-temperature
    part; the slope d ln G/dT comes from the entry's neighbours (set by
    :func:`growth_estimates`), so call that for a series."""
    return growth_estimates([entry])[0]


def growth_estimates(entries) -> list[Estimate]:
    """Pooled G of each entry with the interval widened by the stage-temperature
    uncertainty (the slope d ln G/dT from the series, analysis.kinetics.lh_intervals)."""
    tc = [e.temperature_c for e in entries]
    g = [e.result.growth_rate for e in entries]
    usable = [i for i, (t, p) in enumerate(zip(tc, g)) if t is not None and p.value]
    half = [None] * len(entries)
    if usable:
        widths = temperature_half_width([tc[i] for i in usable], [g[i].value for i in usable],
                                        [entries[i].stage_uncertainty_k for i in usable])
        for i, h in zip(usable, widths):
            half[i] = float(h)
    out = []
    for p, h in zip(g, half):
        low, high = with_temperature(p.value, p.ci95_low, p.ci95_high, h)
        out.append(Estimate(p.value, low, high))
    return out


def _growth_row(entry: ReportEntry, growth: Estimate) -> list:
    r = entry.result
    nuc = r.nucleation
    pi = entry.prediction_intervals
    predicted = [None] * 9 if pi is None else [
        *_triple(pi.n), *_triple(pi.k_per_min_n), *_triple(pi.t_half_min)]
    counts = r.counts()
    g = r.growth_rate
    return [entry.name, entry.temperature_c, g.value, g.ci95_low, g.ci95_high,
            entry.stage_uncertainty_k, growth.low, growth.high,
            *(counts[key] for key in COUNTS), nuc.mode,
            *_with_ci(nuc.density_per_mm2, nuc.density_per_mm2_ci95),
            *_with_ci(entry.density_per_mm3, _per_volume(entry, nuc.density_per_mm2_ci95)),
            *_with_ci(nuc.rate_per_mm2_per_min, nuc.rate_per_mm2_per_min_ci95),
            *_with_ci(entry.rate_per_mm3_per_min, _per_volume(entry, nuc.rate_per_mm2_per_min_ci95)),
            entry.geometry, *predicted, *_dsc_columns(entry.calorimetry), entry.seed]


def _by_temperature(entries):
    return sorted(entries, key=lambda e: (e.temperature_c is None, e.temperature_c or 0.0, e.name))


def growth_vs_temperature_table(entries) -> Table:
    """One row per experiment, sorted by temperature (units in the column names); every
    estimate with its 95 % interval (``<name>_ci95_low``/``_high``)."""
    ordered = _by_temperature(entries)
    return Table(list(GROWTH_HEADER), [_growth_row(e, g) for e, g in
                                       zip(ordered, growth_estimates(ordered))])


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
    t_half_ratio_ci95: tuple[float | None, float | None] = (None, None)


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
    """Comparison for one entry, or None without both a 3-D prediction and a DSC fit.

    The ratio's interval combines the bootstrap interval of the predicted t_half and the
    calorimetry interval (analysis.kinetics.uncertainty.ratio_interval); the two agree
    when it contains 1.
    """
    pred, cal = entry.bulk_prediction(), entry.calorimetry
    if pred is None or cal is None or not cal.avrami:
        return None
    fit = cal.avrami
    pi = entry.bulk_prediction_intervals
    predicted = pi.t_half_min if pi is not None else Estimate(pred.t_half_min)
    measured = dsc_estimates(cal)[2]
    ratio = ratio_interval(measured, predicted)
    value = fit.t_half_min / pred.t_half_min
    if ratio.low is None:
        factor, agree = math.inf, True
    else:
        factor = math.sqrt(ratio.high / ratio.low)
        agree = ratio.low <= 1.0 <= ratio.high
    return Comparison(entry.name, entry.temperature_c, pred.n, fit.n, pred.k_per_min_n,
                      fit.k_per_min_n, pred.t_half_min, fit.t_half_min, value, factor, agree,
                      _note(agree, value, fit.n, factor), (ratio.low, ratio.high))


COMPARISON_HEADER = [
    "experiment", "temperature_c", "predicted_n", "dsc_n", "predicted_k_per_min_n",
    "dsc_k_per_min_n", "predicted_t_half_min", "dsc_t_half_min", "t_half_ratio_dsc_over_predicted",
    "t_half_ratio_dsc_over_predicted_ci95_low", "t_half_ratio_dsc_over_predicted_ci95_high",
    "ratio_uncertainty_factor_95", "agreement", "note",
]


def comparison_table(entries) -> Table:
    rows = []
    for entry in _by_temperature(entries):
        c = compare_kinetics(entry)
        if c is not None:
            rows.append([c.name, c.temperature_c, c.predicted_n, c.measured_n,
                         c.predicted_k_per_min_n, c.measured_k_per_min_n, c.predicted_t_half_min,
                         c.measured_t_half_min, c.t_half_ratio, *c.t_half_ratio_ci95,
                         c.ratio_uncertainty,
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
