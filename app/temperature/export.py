"""Tables and the report of the temperature series, through ``analysis.reporting.tables`` and
``analysis.reporting.report``.

Files are written to a temporary name beside the target and renamed into place, so a
failed export never damages an earlier good file. The report runs in the shared
``GeneratorWorker`` with a progress bar and Cancel.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

from PySide6 import QtCore, QtWidgets

from analysis.project.model import resampling_seed, stage_uncertainty_k
from analysis.progress import Progress, scaled
from analysis.reporting.entries import experiment_entry, report_entry, series_constants
from analysis.reporting.report import HW_PAIRS_KEY, RAMPS_IN_LH_KEY, build_report, project_entries_iter
from analysis.reporting.tables import (
    comparison_table,
    growth_vs_temperature_table,
    write_csv,
    write_xlsx,
)
from analysis.results import COUNTS
from app.core.ramp_inputs import RAMPS
from app.widgets.background import progress_row

#: Display names for the table's columns (the files keep the snake_case names).
DISPLAY_NAMES = {
    "experiment": "experiment", "temperature_c": "Tc (°C)", "growth_rate_um_per_min": "G (µm/min)",
    "growth_rate_ci95_low_um_per_min": "G 95 % CI low (µm/min)",
    "growth_rate_ci95_high_um_per_min": "G 95 % CI high (µm/min)",
    **{key: label for key, (label, _what) in COUNTS.items()},
    "nucleation_mode": "mode", "nucleus_density_per_mm2": "N_A (mm⁻²)",
    "nucleus_density_per_mm3": "N_V (mm⁻³)", "nucleation_rate_per_mm2_per_min": "Ṅ_A (mm⁻² min⁻¹)",
    "nucleation_rate_per_mm3_per_min": "Ṅ_V (mm⁻³ min⁻¹)", "predicted_geometry": "geometry",
    "predicted_avrami_n": "predicted n", "predicted_k_per_min_n": "predicted k (min⁻ⁿ)",
    "predicted_t_half_min": "predicted t½ (min)", "dsc_avrami_n": "DSC n",
    "dsc_k_per_min_n": "DSC k (min⁻ⁿ)", "dsc_t_half_min": "DSC t½ fit (min)",
    "dsc_t_half_measured_min": "DSC t½ read (min)", "dsc_induction_time_min": "DSC t₀ (min)",
    "dsc_r2": "DSC R²", "stage_uncertainty_k": "stage u_T (K)",
    "growth_rate_with_temperature_ci95_low_um_per_min": "G 95 % CI low with u_T (µm/min)",
    "growth_rate_with_temperature_ci95_high_um_per_min": "G 95 % CI high with u_T (µm/min)",
    "resampling_seed": "resampling seed",
}


def display_name(name: str) -> str:
    """The table's column title for a file column name; an interval column takes its
    quantity's title with "95 % CI low/high" before the unit."""
    if name in DISPLAY_NAMES:
        return DISPLAY_NAMES[name]
    for tag, words in (("_ci95_low", "95 % CI low"), ("_ci95_high", "95 % CI high")):
        if tag in name:
            base = DISPLAY_NAMES.get(name.replace(tag, ""), name.replace(tag, ""))
            title, bracket, unit = base.partition(" (")
            return f"{title} {words}{bracket}{unit}"
    return name


def report_entries(model, cache) -> list:
    """One ``ReportEntry`` per analysed isothermal experiment (``analysis.reporting.entries.
    report_entry``, through the page's ``app.core.kinetics_inputs.ReportEntryCache``); ramps:
    :func:`ramp_entries`."""
    project = model.project
    seed = resampling_seed(project)
    return [cache.entry(experiment, model.result(i), project.material,
                        stage_uncertainty_k=stage_uncertainty_k(project, experiment), seed=seed)
            for i, experiment in enumerate(model.experiments())
            if model.result(i) is not None and experiment.kind != "ramp"]


def ramp_entries(model) -> tuple[list, list[str]]:
    """(entries of the analysed ramp experiments with their G(T), "name: problem" lines for
    those without one); the ramp analysis is ``analysis.kinetics.ramp.analyze_ramp``, cached."""
    project = model.project
    constants, _ = series_constants(project.series, project.material)
    entries, problems = [], []
    for i, experiment in enumerate(model.experiments()):
        if experiment.kind != "ramp" or model.analysis(i) is None:
            continue
        ramp, problem = RAMPS.ramp(experiment, model.analysis(i), constants)
        if ramp is None or not ramp.growth:
            problems.append(f"{experiment.name}: no G(T) ({problem or ramp.growth.reason})")
            continue
        entries.append(experiment_entry(experiment, model.result(i), ramp=ramp,
                                        stage_uncertainty_k=stage_uncertainty_k(project, experiment),
                                        seed=resampling_seed(project)))
    return entries, problems


def table_rows(entries) -> tuple[list[str], list[list]]:
    """Display header and rows of the growth-rate-versus-temperature table of ``entries``."""
    table = growth_vs_temperature_table(entries)
    return [display_name(name) for name in table.header], table.rows


def write_table(model, cache, path: str, kind: str) -> str:
    """CSV (growth table) or XLSX (growth table + comparison sheet), written atomically."""
    entries = report_entries(model, cache)
    growth = growth_vs_temperature_table(entries)
    if kind == "csv":
        return str(write_csv(growth, path))
    if kind == "xlsx":
        sheets = {"growth_vs_temperature": growth, "comparison": comparison_table(entries)}
        return str(write_xlsx(sheets, path))
    raise ValueError(f"unknown table format {kind!r}")


@dataclass(frozen=True)
class ReportSnapshot:
    """What the report needs, taken in the GUI thread: the project and every fresh result."""

    project: object
    results: tuple  # ExperimentResult or None (to be analysed in the worker), per experiment


def report_snapshot(model) -> ReportSnapshot:
    from app.core.model import STATUS_DONE

    results = tuple(model.result(i) if model.status(i) == STATUS_DONE else None
                    for i in range(model.experiment_count()))
    return ReportSnapshot(model.project, results)


def report_iter(snapshot: ReportSnapshot, folder: str):
    """The same folder as ``spherokin report``: cached analyses are reused, the others run here.

    Runs in the worker thread; touches only the frozen snapshot.
    """
    project = snapshot.project
    # ramps are analysed here again: their G(T) needs the arrival map, which results lack
    redo = [r is None or e.kind == "ramp" for e, r in zip(project.experiments, snapshot.results)]
    missing = tuple(e for e, again in zip(project.experiments, redo) if again)
    ready = [(e, r) for e, r, again in zip(project.experiments, snapshot.results, redo) if not again]
    entries, problems = [], []
    if missing:
        sub_project = dataclasses.replace(project, experiments=missing)
        entries, problems = yield from scaled(project_entries_iter(sub_project), 0.0, 0.8)
    for number, (experiment, result) in enumerate(ready):
        yield Progress("calorimetry", 0.8 + 0.1 * number / max(1, len(ready)), experiment.name)
        entry = report_entry(experiment, result, project.material,
                             stage_uncertainty_k=stage_uncertainty_k(project, experiment),
                             seed=resampling_seed(project))
        if entry.calorimetry_problem:
            problems.append(f"{experiment.name}: calorimetry skipped ({entry.calorimetry_problem})")
        entries.append(entry)
    constants, note = series_constants(project.series, project.material)
    yield Progress("writing report", 0.9, note)
    summary = build_report(entries, folder, constants=constants, material=project.material,
                           problems=problems, hoffman_weeks_pairs=(project.series or {}).get(HW_PAIRS_KEY),
                           include_ramps=bool((project.series or {}).get(RAMPS_IN_LH_KEY, False)))
    yield Progress("writing report", 1.0)
    return summary

class ReportJob(QtCore.QObject):
    """Runs one report at a time in a ``GeneratorWorker``: progress bar, Cancel, errors in a dialog."""

    finished = QtCore.Signal(bool, str)  # success, folder or the problem

    def __init__(self, parent: QtWidgets.QWidget):
        super().__init__(parent)
        self._parent = parent
        self.worker = None
        self._finished_workers: list = []  # kept alive: their pool thread may still be unwinding
        self.folder = ""
        self.stage = QtWidgets.QLabel("")
        self.bar_widget, self.bar, self.cancel_button = progress_row(
            parent, [QtWidgets.QLabel("Report:"), self.stage])
        self.cancel_button.clicked.connect(self.cancel)

    @property
    def running(self) -> bool:
        return self.worker is not None

    def start(self, make_generator, folder: str) -> bool:
        """Start ``make_generator()`` (a generator yielding ``Progress``); False if one runs."""
        from app.core.worker import GeneratorWorker

        if self.running:
            return False
        self.folder = folder
        self.worker = GeneratorWorker(make_generator)
        signals = self.worker.signals
        signals.yielded.connect(self._progressed)
        signals.returned.connect(lambda summary: self._done(True, _summary_text(summary, folder)))
        signals.errored.connect(lambda error: self._done(False, str(error)))
        signals.aborted.connect(lambda: self._done(False, "cancelled"))
        self.bar.setValue(0)
        self.stage.setText("starting")
        self.bar_widget.setVisible(True)
        self.worker.start()
        return True

    def cancel(self) -> None:
        if self.worker is not None:
            self.worker.abort()

    def _progressed(self, report) -> None:
        self.bar.setValue(int(1000 * max(0.0, min(1.0, report.fraction))))
        self.stage.setText(report.stage + (f": {report.message}" if report.message else ""))

    def _done(self, ok: bool, detail: str) -> None:
        if self.worker is None:
            return
        self._finished_workers.append(self.worker)
        self.worker = None
        self.bar_widget.setVisible(False)
        if not ok and detail != "cancelled" and self._parent.isVisible():
            QtWidgets.QMessageBox.critical(self._parent, "Report not written", detail)
        self.finished.emit(ok, detail)


def _summary_text(summary, folder: str) -> str:
    text = f"{len(summary.files)} files written to {folder}"
    if summary.problems:
        text += ". Not included: " + "; ".join(summary.problems)
    return text
