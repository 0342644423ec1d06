"""The temperature series: growth rate, nucleation and half-times across Tc, the
Lauritzen-Hoffman analysis with its constants, Hoffman-Weeks, tables and the report.

Series constants and Hoffman-Weeks pairs live in ``Project.series`` / ``Project.material``
and change only through the model's undoable commands. Long work (the report) runs in
the shared ``GeneratorWorker`` with a progress bar and Cancel.

Run alone: ``python -m app.temperature.view PROJECT`` (analyses the project first).
"""

from __future__ import annotations

from pathlib import Path

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.errors import InputError
from analysis.outputs import file_stem
from analysis.project.model import resampling_seed
from app.core.kinetics_inputs import ReportEntryCache
from app.temperature import export as temperature_export
from app.temperature import logic
from app.temperature.lauritzen_hoffman import (
    HW_KEY,
    ConstantsForm,
    HoffmanWeeksHelper,
    LHResults,
)
from app.temperature.plots import TemperaturePlots
from app.temperature.table import GrowthTable
from app.widgets.background import BackgroundResults
from app.widgets.forms import LazyPage, scroll_column
from app.widgets.help_panel import show_help
from app.widgets.plotting import export_plots


class TemperatureView(LazyPage):
    """Whole-project temperature-series page (registered as the "temperature" view)."""

    def __init__(self, model, parent=None):
        super().__init__(parent)
        self.model = model
        self.entry_cache = ReportEntryCache()
        self.points: list = []
        self.entries: list = []  # analysis.reporting.tables.ReportEntry, project order
        self.ramps: list = []  # entries of ramp experiments with their G(T)
        self.fit = None
        self.report_job = temperature_export.ReportJob(self)
        self.lh_job = BackgroundResults(self, "Lauritzen-Hoffman 95 % intervals", object_name="lh_intervals_bar")
        self.lh_job.ready.connect(lambda _key: self._show_lh())
        self._build()
        for signal in (model.project_replaced, model.project_fields_changed):
            signal.connect(self._rebuild)
        for signal in (model.experiments_inserted, model.experiments_removed):
            signal.connect(lambda *_: self._rebuild())
        model.experiment_changed.connect(lambda _i: self._rebuild())
        model.analysis_updated.connect(lambda _i: self._rebuild())
        self._rebuild()

    # ---------------------------------------------------------------- layout
    def _build(self) -> None:
        self.table = GrowthTable(self)
        self.table.view.doubleClicked.connect(self._row_activated)
        self.table.view.setToolTip("Double-click a row to make it the current experiment")
        self.plots = TemperaturePlots(self)
        self.constants = ConstantsForm(self)
        self.constants.series_edited.connect(self._series_edited)
        self.constants.material_chosen.connect(self._material_chosen)
        self.lh_results = LHResults(self)
        self.include_ramps = QtWidgets.QCheckBox("Include ramp experiments' G(T) in the fit")
        self.include_ramps.setToolTip("Adds a point every 2 K of each ramp's smooth G(T) (open diamonds "
                                      "on the Lauritzen-Hoffman plot) beside the isothermal points")
        self.include_ramps.toggled.connect(self._include_ramps_toggled)
        self.hw = HoffmanWeeksHelper(self)
        self.hw.pairs_edited.connect(self._pairs_edited)
        self.hw.tm0_adopted.connect(self._tm0_adopted)
        self.actions = self._make_actions()
        bar = QtWidgets.QHBoxLayout()
        title = QtWidgets.QLabel("<b>G against Tc</b>")  # short: the toolbar needs the room at 1280 px
        title.setToolTip("Growth rate against crystallization temperature, one row per experiment")
        bar.addWidget(title)
        bar.addStretch(1)
        toolbar = QtWidgets.QToolBar(self)  # folds into a "»" menu when the window is narrow
        toolbar.setToolButtonStyle(QtCore.Qt.ToolButtonStyle.ToolButtonTextOnly)
        toolbar.addActions(self.actions)
        bar.addWidget(toolbar, 1)
        self.empty_note = QtWidgets.QLabel("", objectName="empty_note")
        self.empty_note.setStyleSheet("color: #9a3412;")
        self.empty_note.setWordWrap(True)
        left = QtWidgets.QSplitter(QtCore.Qt.Orientation.Vertical)
        table_box = QtWidgets.QWidget()
        table_layout = QtWidgets.QVBoxLayout(table_box)
        table_layout.setContentsMargins(0, 0, 0, 0)
        table_layout.addWidget(self.empty_note)
        table_layout.addWidget(self.table, 1)
        left.addWidget(table_box)
        left.addWidget(self.plots)
        left.setSizes([260, 700])
        scroll = scroll_column((self.constants, self.include_ramps, self.lh_results, self.hw))
        self.split = split = QtWidgets.QSplitter()
        split.addWidget(left)
        split.addWidget(scroll)
        split.setStretchFactor(0, 1)
        split.setStretchFactor(1, 0)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addLayout(bar)
        layout.addWidget(split, 1)
        layout.addWidget(self.lh_job.bar_widget)
        layout.addWidget(self.report_job.bar_widget)
        self.report_status = QtWidgets.QLabel("", objectName="report_status")
        self.report_status.setWordWrap(True)
        layout.addWidget(self.report_status)
        self.report_job.finished.connect(
            lambda ok, detail: self.report_status.setText(("Report: " if ok else "Report not written: ") + detail))

    def _make_actions(self) -> list:
        table = [  # menu text, toolbar label (short enough for a 1280-pixel window), handler, tip
            ("Copy table", "Copy", self.table.copy_to_clipboard, "Copy the table as tab-separated text"),
            ("Export CSV…", "CSV…", lambda: self.export_table("csv"),
             "Save the table as CSV (units in headers)"),
            ("Export XLSX…", "XLSX…", lambda: self.export_table("xlsx"),
             "Save the table as an Excel workbook"),
            ("Write report…", "Report…", self.write_report,
             "Tables, fits and figures for every experiment"),
            ("Export all figures…", "Figures…", self.export_figures,
             "Every plot of this page as PNG and SVG"),
            ("Help and safety", "Help", lambda: show_help("lauritzen_hoffman"),
             "What each number means"),
        ]
        actions = []
        for text, short, handler, tip in table:
            action = QtGui.QAction(text, self)
            action.setIconText(short)
            action.setToolTip(tip)
            action.triggered.connect(lambda _checked=False, h=handler: h())
            actions.append(action)
        return actions

    def actions_for_menu(self) -> list:
        return list(self.actions)

    # ---------------------------------------------------------------- refresh
    def first_split_sizes(self, width: int) -> list[int]:
        side = max(300, min(400, width // 4))  # constants column about a quarter
        return [max(300, width - side), side]

    def redraw(self) -> None:
        self.refresh()

    def refresh(self) -> None:
        project = self.model.project
        self.constants.fill(project.material, project.series)
        self.hw.fill(logic.hw_pairs(project.series))
        self._show_hw()
        self.entries = temperature_export.report_entries(self.model, self.entry_cache)
        self.ramps, ramp_problems = temperature_export.ramp_entries(self.model)
        self.points = logic.points_from(self.entries)
        header, rows = temperature_export.table_rows(self.entries)
        self.table.set_rows(header, rows)
        self.include_ramps.blockSignals(True)
        self.include_ramps.setChecked(bool(project.series.get(logic.RAMPS_IN_LH_KEY)))
        self.include_ramps.setEnabled(bool(self.ramps))
        self.include_ramps.blockSignals(False)
        isothermal = sum(e.kind != "ramp" for e in self.model.experiments())
        missing = isothermal - len(rows)
        notes = ([f"{missing} of {isothermal} isothermal experiments have no microscopy result yet: "
                  "run their analysis to include them."] if missing > 0 else []) + ramp_problems
        self.empty_note.setVisible(bool(notes))
        self.empty_note.setText(" ".join(notes))
        tc = logic.column(self.points, "temperature_c")
        self.plots.show_growth(tc, logic.column(self.points, "growth_rate"), logic.column(self.points, "growth_ci95"))
        self.plots.show_ramps([(e.name, e.ramp) for e in self.ramps])
        self.plots.show_density(tc, logic.column(self.points, "density_areal"),
                                logic.column(self.points, "density_volumetric"))
        self.plots.show_half_times(tc, logic.column(self.points, "predicted_t_half_min"),
                                   logic.column(self.points, "measured_t_half_min"))
        self._show_lh()

    def _show_lh(self) -> None:
        project = self.model.project
        try:
            self.fit, note, sources = logic.lh_fit(self.entries + self.ramps, project.series, project.material)
        except InputError as error:
            self.fit = None
            self.lh_results.clear(f"No Lauritzen-Hoffman fit: {error.problem}")
            self.plots.clear_lh()
            self.plots.show_growth_fit(None, None)
            return
        entries, series, seed = self.entries + self.ramps, project.series, resampling_seed(project)
        fit = self.fit
        key = logic.lh_intervals_key(fit, entries, series, seed)
        intervals = self.lh_job.request(key, lambda: logic.lh_interval_steps(fit, entries, series, seed))
        self.lh_results.show_fit(fit, intervals)
        lines = [note] if "material table" in note else []  # where constants not set by the user came from
        if intervals is None:
            lines.append("95 % intervals cancelled: “Compute” below resamples them" if self.lh_job.cancelled(key)
                         else "95 % intervals: resampling (progress below)…")
        self.lh_results.message.setText("; ".join([*lines, *fit.warnings]))
        self.plots.show_lh(*logic.lh_display(self.fit), [s.startswith("ramp") for s in sources])
        self.plots.show_growth_fit(*logic.growth_curve(self.fit))

    def _show_hw(self) -> None:
        try:
            estimate, problem = logic.hw_estimate(self.hw.pairs())
        except InputError as error:
            estimate, problem = None, error.problem
        self.hw.show_estimate(estimate, problem)

    def _row_activated(self, index) -> None:
        """Make the experiment of a double-clicked row the current one (kinetics, viewer)."""
        row = self.table.shown_rows()[index.row()]
        header = self.table.header()
        name = row[header.index("experiment")]
        for i, experiment in enumerate(self.model.experiments()):
            if experiment.name == name:
                self.model.select(i)
                return

    # ---------------------------------------------------------------- edits (one undo entry each)
    def _series_edited(self, series: dict, text: str) -> None:
        self.model.set_project_fields(text=text, series=series)

    def _include_ramps_toggled(self, on: bool) -> None:
        series = {**self.model.project.series, logic.RAMPS_IN_LH_KEY: bool(on)}
        self.model.set_project_fields(text=("Include" if on else "Leave out") + " ramps in the fit",
                                      series=series)

    def _material_chosen(self, name) -> None:
        series = dict(self.model.project.series)
        if name is not None:
            from analysis.kinetics.materials import get_material

            material = get_material(name)
            for key, value in (("tm0_c", material.tm0_c), ("tg_c", material.tg_c)):
                if value is not None:
                    series[key] = value
        self.model.set_project_fields(text=f"Use material {name or 'custom values'}",
                                      material=name, series=series)

    def _pairs_edited(self, pairs: list) -> None:
        series = {**self.model.project.series, HW_KEY: [list(p) for p in pairs]}
        self.model.set_project_fields(text="Edit Hoffman-Weeks pairs", series=series)

    def _tm0_adopted(self, tm0_c: float) -> None:
        series = {**self.model.project.series, "tm0_c": round(float(tm0_c), 2)}
        self.model.set_project_fields(text=f"Tm0 = {tm0_c:.1f} °C from Hoffman-Weeks", series=series)

    # ---------------------------------------------------------------- export
    def export_table(self, kind: str, path: str | None = None) -> str | None:
        """Write the table as CSV or XLSX through ``analysis.reporting.tables``; errors in a dialog."""
        if path is None:
            pattern = "CSV table (*.csv)" if kind == "csv" else "Excel workbook (*.xlsx)"
            path, _ = QtWidgets.QFileDialog.getSaveFileName(
                self, "Export growth-rate table", f"growth_vs_temperature.{kind}", pattern)
            if not path:
                return None
        try:
            return temperature_export.write_table(self.model, self.entry_cache, path, kind)
        except (InputError, OSError) as error:
            QtWidgets.QMessageBox.critical(self, "Table not exported", str(error))
            return None

    def export_figures(self, folder: str | None = None) -> list[str]:
        """Write every plot as PNG and SVG into ``folder`` (asked for when None)."""
        prefix = file_stem(Path(self.model.path).stem if self.model.path else "series")
        return export_plots(self, self.plots.plot_items(), folder, prefix)

    def write_report(self, folder: str | None = None) -> bool:
        if folder is None:
            folder = QtWidgets.QFileDialog.getExistingDirectory(self, "Folder for the report")
            if not folder:
                return False
        snapshot = temperature_export.report_snapshot(self.model)  # the worker never reads the model
        return self.report_job.start(lambda: temperature_export.report_iter(snapshot, folder), folder)


if __name__ == "__main__":  # pragma: no cover
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(TemperatureView, sys.argv))
