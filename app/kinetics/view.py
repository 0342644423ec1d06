"""Kinetics of one experiment: the Avrami prediction from microscopy, a calorimetry
isotherm with its baseline and fit window, and the comparison of the two.

Everything shown is computed by ``analysis.kinetics.avrami`` and ``analysis.kinetics.calorimetry``; this
module only gathers the inputs from the model, displays the results and turns gestures
into undoable commands (one per gesture: a drag is committed when it ends).

Run alone: ``python -m app.kinetics.view PROJECT`` (analyses the project first).
"""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from PySide6 import QtCore, QtGui, QtWidgets

from analysis.errors import InputError
from analysis.kinetics.calorimetry import source_interval_steps
from analysis.outputs import file_stem
from analysis.project.model import resampling_seed
from analysis.reporting.entries import calorimetry_source
from analysis.settings import DEFAULT_FIT_WINDOW
from app.core.kinetics_inputs import CalorimetryCache
from app.kinetics import logic
from app.kinetics.calorimetry_dialog import CalorimetryMappingDialog
from app.kinetics.intervals_job import IntervalsJob, intervals_key
from app.kinetics.panels import CalorimetryPanel, ComparisonTable, PredictionPanel
from app.kinetics.plots import KineticsPlots
from app.widgets.formatting import DASH, fmt, fmt_estimate, k_unit
from app.widgets.background import BackgroundResults
from app.widgets.forms import LazyPage, scroll_column
from app.widgets.help_panel import help_button, show_help
from app.widgets.plotting import export_plots

DEFAULT_WINDOW = DEFAULT_FIT_WINDOW  # the common 3-20 % guideline


def window_action_text(window) -> str:
    """The menu entry that resets the fit window, showing the window in use now."""
    span = lambda w: f"{w[0] * 100:.3g}-{w[1] * 100:.3g} %"
    reset = f"Reset fit window to {span(DEFAULT_WINDOW)}"
    if window is None:
        return reset
    now = span(window)
    return reset + (" (in use)" if tuple(window) == DEFAULT_WINDOW else f" (now {now})")
GEOMETRIES = (("bulk-3d", "bulk sample (3-D spheres)"), ("film-2d", "thin film (2-D discs)"))
MODES = ((None, "as found by the analysis"), ("athermal", "athermal (predetermined)"),
         ("thermal", "thermal (sporadic)"), ("mixed", "mixed"))


class KineticsView(LazyPage):
    """Per-experiment kinetics page (registered as the "kinetics" view)."""

    def __init__(self, model, parent=None):
        super().__init__(parent)
        self.model = model
        self.calorimetry = CalorimetryCache()
        self._reported: set[str] = set()
        self._preview: dict = {}  # live values during a drag, cleared when it ends
        self.intervals_job = IntervalsJob(self)
        self.intervals_job.ready.connect(self._intervals_ready)
        self.calorimetry_job = BackgroundResults(self, "calorimetry 95 % intervals",
                                                 object_name="calorimetry_intervals_bar")
        self.calorimetry_job.ready.connect(lambda _key: self.refresh())
        self._build()
        for signal in (model.project_replaced, model.project_fields_changed):
            signal.connect(self._rebuild)
        for signal in (model.experiments_inserted, model.experiments_removed):
            signal.connect(lambda *_: self._rebuild())
        model.experiment_changed.connect(self._on_experiment_changed)
        model.analysis_updated.connect(self._on_experiment_changed)
        model.selection_changed.connect(lambda *_: self._rebuild())
        self._rebuild()

    # ---------------------------------------------------------------- layout
    def _build(self) -> None:
        bar, toolbar = self._build_bar()
        self.prediction = PredictionPanel(self)
        self.calorimetry_panel = CalorimetryPanel(self)
        self.comparison = ComparisonTable(self)
        scroll = scroll_column((self.prediction, self.calorimetry_panel, self.comparison))
        self.plots = KineticsPlots(self)
        self.plots.baseline_dragging.connect(lambda a, b: self._drag_preview(baseline=(a, b)))
        self.plots.baseline_dragged.connect(self._baseline_dragged)
        self.plots.window_dragging.connect(lambda a, b: self._drag_preview(window=(a, b)))
        self.plots.window_dragged.connect(self._window_dragged)
        self.split = split = QtWidgets.QSplitter()
        split.addWidget(scroll)
        split.addWidget(self.plots)
        split.setStretchFactor(0, 0)
        split.setStretchFactor(1, 1)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addLayout(bar)
        layout.addWidget(toolbar)
        layout.addWidget(self.intervals_job.bar_widget)
        layout.addWidget(self.calorimetry_job.bar_widget)
        layout.addWidget(split, 1)

    def _build_bar(self) -> tuple[QtWidgets.QHBoxLayout, QtWidgets.QToolBar]:
        """The experiment, geometry and mode pickers, and the toolbar of actions."""
        self.experiment_picker = QtWidgets.QComboBox(objectName="experiment_picker")
        self.experiment_picker.activated.connect(lambda i: self.model.select(i))
        self.geometry = QtWidgets.QComboBox(objectName="geometry")
        for key, text in GEOMETRIES:
            self.geometry.addItem(text, key)
        self.geometry.activated.connect(self._geometry_chosen)
        self.mode = QtWidgets.QComboBox(objectName="mode")
        for key, text in MODES:
            self.mode.addItem(text, key)
        self.mode.activated.connect(self._mode_chosen)
        self.actions = []
        for name, text, short, handler in (  # short: the toolbar label (menus show the text)
                ("import_action", "Import calorimetry isotherm…", "Import DSC…",
                 self.import_calorimetry),
                ("remap_action", "Column mapping…", "Columns…", self.edit_mapping),
                ("auto_baseline_action", "Automatic baseline", "Auto baseline", self.reset_baseline),
                ("default_window_action", window_action_text(None), "Window 3-20 %", self.reset_window),
                ("remove_action", "Remove isotherm", "Remove DSC", self.remove_calorimetry),
                ("export_action", "Export all figures…", "Export…", self.export_figures),
                ("help_action", "Kinetics help and safety", "Help", lambda: show_help("cautions"))):
            action = QtGui.QAction(text, self)
            action.setIconText(short)
            action.triggered.connect(lambda _checked=False, h=handler: h())
            setattr(self, name, action)
            self.actions.append(action)
        for combo, length in ((self.experiment_picker, 12), (self.geometry, 8), (self.mode, 8)):
            combo.setSizeAdjustPolicy(QtWidgets.QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.setMinimumContentsLength(length)
        bar = QtWidgets.QHBoxLayout()
        for label, widget in (("Experiment", self.experiment_picker), ("Geometry", self.geometry),
                              ("Nucleation", self.mode)):
            bar.addWidget(QtWidgets.QLabel(label))
            bar.addWidget(widget, 1)
        bar.addWidget(help_button("predicted_k", self))
        toolbar = QtWidgets.QToolBar(self)  # folds into a "»" menu when the window is narrow
        toolbar.setToolButtonStyle(QtCore.Qt.ToolButtonStyle.ToolButtonTextOnly)
        toolbar.addActions(self.actions)
        bar.addStretch(1)
        return bar, toolbar

    def actions_for_menu(self) -> list:
        return list(self.actions)

    # ---------------------------------------------------------------- refresh
    def index(self) -> int:
        return self.model.current_index

    def experiment(self):
        i = self.index()
        return None if i < 0 else self.model.experiment(i)

    def _on_experiment_changed(self, index: int) -> None:
        if index == self.index():
            self._rebuild()

    def redraw(self) -> None:
        self._fill_picker()
        self.refresh()

    def first_split_sizes(self, width: int) -> list[int]:
        numbers = max(300, min(420, width // 3))  # numbers column about a third, plots the rest
        return [numbers, max(300, width - numbers)]

    def _fill_picker(self) -> None:
        self.experiment_picker.blockSignals(True)
        self.experiment_picker.clear()
        for experiment in self.model.experiments():
            tc = DASH if experiment.temperature_c is None else f"{experiment.temperature_c:g} °C"
            self.experiment_picker.addItem(f"{experiment.name} ({tc})")
        self.experiment_picker.setCurrentIndex(self.index())
        self.experiment_picker.blockSignals(False)

    def refresh(self) -> None:
        """Recompute and redraw everything for the current experiment from the model."""
        experiment = self.experiment()
        has_experiment = experiment is not None
        for widget in (self.geometry, self.mode):
            widget.setEnabled(has_experiment)
        self.import_action.setEnabled(has_experiment)
        has_source = has_experiment and experiment.calorimetry is not None
        for action in (self.remap_action, self.auto_baseline_action, self.default_window_action,
                       self.remove_action):
            action.setEnabled(has_source)
        self.default_window_action.setText(
            window_action_text(experiment.calorimetry.window if has_source else None))
        if not has_experiment:
            self.prediction.clear("No experiment: add a stack to the project.")
            self._show_calorimetry(None, None)
            return
        self._set_combo(self.geometry, experiment.geometry)
        self._set_combo(self.mode, experiment.mode_override)
        prediction = self._show_prediction(experiment)
        calorimetry = self._show_calorimetry(experiment, self._source(experiment))
        self._show_comparison(experiment, prediction, calorimetry)

    def _source(self, experiment):
        """The experiment's calorimetry run as the report analyses it (material filled in)."""
        return calorimetry_source(experiment, self.model.project.material)

    @staticmethod
    def _set_combo(combo: QtWidgets.QComboBox, data) -> None:
        index = combo.findData(data)
        combo.blockSignals(True)
        combo.setCurrentIndex(max(0, index))
        combo.blockSignals(False)

    def _seed(self) -> int:
        return resampling_seed(self.model.project)

    def _intervals(self, experiment):
        """The prediction's (own geometry, bulk) intervals if known; else they are being
        computed in the worker (or were cancelled) and this is None."""
        result = self.model.result(self.index())
        if result is None:
            return None
        return self.intervals_job.request_for(result, experiment, self._seed())

    def _intervals_ready(self, key) -> None:
        experiment = self.experiment()
        result = self.model.result(self.index())
        if experiment is not None and result is not None and key == intervals_key(result, experiment, self._seed()):
            self.refresh()

    def _show_prediction(self, experiment):
        result = self.model.result(self.index())
        if result is None:
            self.prediction.clear(f"Microscopy analysis: {self.model.status(self.index())}. Run it "
                                  "to see N, G and the predicted kinetics.")
            return None
        entry = logic.entry(result, experiment, seed=self._seed())
        self.prediction.show_inputs(entry)
        if entry.prediction is None:
            self.prediction.show_problem(entry.prediction_problem, experiment.geometry,
                                         entry.prediction_inputs().mode)
            return None
        intervals = self._intervals(experiment)
        self.prediction.show_prediction(entry.prediction, experiment.geometry,
                                        None if intervals is None else intervals[0])
        if intervals is None:
            self.prediction.problem.setText(
                "95 % intervals cancelled: “Compute” above resamples them."
                if self.intervals_job.cancelled(intervals_key(result, experiment, self._seed()))
                else "95 % intervals: resampling (progress above)…")
        return entry.prediction

    # ---------------------------------------------------------------- calorimetry
    def _effective_source(self, source):
        if source is None:
            return None
        changes = {}
        if "baseline" in self._preview:
            changes["baseline_start_min"], changes["baseline_end_min"] = self._preview["baseline"]
        if "window" in self._preview:
            changes["window"] = self._preview["window"]
        return dataclasses.replace(source, **changes) if changes else source

    def _show_calorimetry(self, experiment, source):
        source = self._effective_source(source)
        if source is None:
            self.calorimetry_panel.clear("No calorimetry isotherm for this experiment. Use "
                                         "“Import calorimetry isotherm…” to add one.")
            self.plots.show_calorimetry(None, "mW")
            self.plots.set_regions(None, None)
            return None
        try:
            result = self._with_calorimetry_intervals(
                source, self.calorimetry.analyze(source, seed=self._seed(), intervals=False))
        except InputError as error:
            if self._preview:  # mid-drag: say why, but leave the plots and the band alone
                self.calorimetry_panel.problem.setText(f"Not usable: {error}")
                return None
            self._report_once("Calorimetry isotherm not analysed", str(error))
            self.calorimetry_panel.clear(str(error))
            self.plots.show_calorimetry(None, "mW")
            self.plots.set_regions(None, None)
            return None
        self._fill_calorimetry_panel(source, result)
        self.plots.show_calorimetry(result, result.heat_flow_unit)
        self.plots.set_regions((result.baseline_start_min, result.baseline_end_min), result.window)
        return result

    def _with_calorimetry_intervals(self, source, result):
        """``result`` with its intervals when known; otherwise they are computed in the
        worker (not during a drag: the numbers follow the hand at once)."""
        if self._preview:
            return result
        seed = self._seed()
        intervals = self.calorimetry_job.request(
            (id(result), seed), lambda: source_interval_steps(source, result, seed=seed), keep=result)
        return result if intervals is None else dataclasses.replace(result, intervals=intervals)

    def _fill_calorimetry_panel(self, source, result) -> None:
        form, fit = self.calorimetry_panel.form, result.avrami
        automatic = source.baseline_start_min is None and source.baseline_end_min is None
        form.set("file", f"{os.path.basename(source.file)} ({'automatic' if automatic else 'manual'} baseline "
                         f"{result.baseline_start_min:.2f}-{result.baseline_end_min:.2f} min)")
        form.set("induction", fmt(result.induction_time_min, "min"))
        form.set("enthalpy", fmt(result.enthalpy_j_per_g, "J/g"))
        form.set("crystallinity", DASH if result.crystallinity is None else f"{result.crystallinity:.1%}")
        form.set("window", f"{result.window[0]:.1%} – {result.window[1]:.1%}")
        ci = result.intervals
        form.set("n", fmt_estimate(ci.n) if ci else (f"{fit.n:.3f}" if fit else DASH))
        form.set("k", (fmt_estimate(ci.k_per_min_n, k_unit(fit.n)) if ci else
                       fmt(fit.k_per_min_n, k_unit(fit.n))) if fit else DASH)
        t_half = fmt_estimate(ci.t_half_min, "min") if ci else fmt(fit.t_half_min if fit else None, "min")
        form.set("t_half", f"{t_half} / {fmt(result.t_half_measured_min, 'min')}")
        form.set("r2", f"{fit.r2:.5f}" if fit else DASH)
        waiting = [] if ci or not fit else ["95 % intervals: re-analysing (progress above)…"]
        self.calorimetry_panel.problem.setText("; ".join([*waiting, *result.warnings]))

    def _report_once(self, title: str, message: str) -> None:
        if message not in self._reported and self.isVisible():
            self._reported.add(message)
            QtWidgets.QMessageBox.warning(self, title, message)

    # ---------------------------------------------------------------- comparison
    def _show_comparison(self, experiment, prediction, calorimetry) -> None:
        result = self.model.result(self.index())
        intervals = None if result is None or logic.safe_prediction(result, experiment) is None \
            else self.intervals_job.result(intervals_key(result, experiment, self._seed()))
        if calorimetry is not None and calorimetry.avrami and calorimetry.intervals is None:
            intervals = None  # the verdict waits for both sides' intervals
        comparison = logic.compare(result, experiment, calorimetry, seed=self._seed(), intervals=intervals)
        self.comparison.clear(comparison.note)
        for row, cells in enumerate(comparison.rows):
            self.comparison.set_row(row, cells)
        image = logic.image_area_fraction(result) if experiment.geometry == "film-2d" else (None, None)
        self.plots.show_comparison(*logic.predicted_curve(prediction, calorimetry),
                                   *comparison.measured_curve, *image)

    # ---------------------------------------------------------------- gestures
    def _geometry_chosen(self, _row: int) -> None:
        geometry = self.geometry.currentData()
        if self.experiment() is not None and geometry != self.experiment().geometry:
            self.model.set_experiment_properties(self.index(), text=f"Set geometry to {geometry}",
                                                 geometry=geometry)

    def _mode_chosen(self, _row: int) -> None:
        mode = self.mode.currentData()
        if self.experiment() is not None and mode != self.experiment().mode_override:
            words = mode or "the analysis result"
            self.model.set_experiment_properties(self.index(), text=f"Use {words} as nucleation mode",
                                                 mode_override=mode)

    def _drag_preview(self, **values) -> None:
        self._preview.update(values)
        experiment = self.experiment()
        if experiment is not None and experiment.calorimetry is not None:
            calorimetry = self._show_calorimetry(experiment, self._source(experiment))
            self._show_comparison(experiment, logic.safe_prediction(self.model.result(self.index()),
                                                                    experiment), calorimetry)

    def _commit_source(self, text: str, **changes) -> None:
        self._preview.clear()
        experiment = self.experiment()
        if experiment is None or experiment.calorimetry is None:
            return
        source = dataclasses.replace(experiment.calorimetry, **changes)
        try:  # never store a baseline or window the analysis refuses
            self.calorimetry.analyze(calorimetry_source(
                dataclasses.replace(experiment, calorimetry=source), self.model.project.material),
                seed=self._seed(), intervals=False)
        except InputError as error:
            QtWidgets.QMessageBox.warning(self, "Change not applied", str(error))
            self.refresh()
            return
        if source == experiment.calorimetry:
            self.refresh()
            return
        self.model.replace_experiment(self.index(), dataclasses.replace(experiment, calorimetry=source), text)

    def _baseline_dragged(self, start_min: float, end_min: float) -> None:
        self._commit_source("Move calorimetry baseline limits", baseline_start_min=float(start_min),
                            baseline_end_min=float(end_min))

    def _window_dragged(self, low: float, high: float) -> None:
        self._commit_source("Move Avrami fit window", window=(round(low, 4), round(high, 4)))

    def reset_baseline(self) -> None:
        self._commit_source("Automatic calorimetry baseline", baseline_start_min=None, baseline_end_min=None)

    def reset_window(self) -> None:
        """Back to the guideline conversion window, 3-20 % (one undo entry)."""
        self._commit_source("Avrami fit window 3-20 %", window=DEFAULT_WINDOW)

    def remove_calorimetry(self) -> None:
        experiment = self.experiment()
        if experiment is not None and experiment.calorimetry is not None:
            self.model.replace_experiment(self.index(), dataclasses.replace(experiment, calorimetry=None),
                                          "Remove calorimetry isotherm")

    def import_calorimetry(self) -> None:
        if self.experiment() is None:
            return
        start = str(Path(self.model.path).parent) if self.model.path else QtCore.QDir.homePath()
        path, _ = QtWidgets.QFileDialog.getOpenFileName(
            self, "Calorimetry isotherm (delimited text export)", start,
            "Text exports (*.csv *.txt *.tsv *.dat);;All files (*)")
        if path:
            self.map_and_store(path)

    def edit_mapping(self) -> None:
        experiment = self.experiment()
        if experiment is not None and experiment.calorimetry is not None:
            self.map_and_store(experiment.calorimetry.file)

    def mapping_dialog(self, path: str) -> CalorimetryMappingDialog | None:
        """The mapping dialog for ``path`` (None, after an error dialog, if unreadable)."""
        experiment = self.experiment()
        try:
            dialog = CalorimetryMappingDialog(path, experiment.calorimetry, self,
                                              experiment=experiment)
        except InputError as error:
            QtWidgets.QMessageBox.critical(self, "Cannot read the calorimetry file", str(error))
            return None
        if experiment.calorimetry is None:  # else the stored material is kept
            dialog.set_material(self.model.project.material)
        return dialog

    def map_and_store(self, path: str, dialog: CalorimetryMappingDialog | None = None) -> bool:
        """Run the mapping dialog (or use an accepted one) and store the source: one undo entry."""
        dialog = dialog or self.mapping_dialog(path)
        if dialog is None or (dialog.source() is None and dialog.exec() != QtWidgets.QDialog.DialogCode.Accepted):
            return False
        source = dialog.source()
        experiment = self.experiment()
        if source.file != (experiment.calorimetry.file if experiment.calorimetry else None):
            source = dataclasses.replace(source, baseline_start_min=None, baseline_end_min=None)
        self.model.replace_experiment(self.index(), dataclasses.replace(experiment, calorimetry=source),
                                      f"Import calorimetry {os.path.basename(source.file)}")
        return True

    def export_figures(self, folder: str | None = None) -> list[str]:
        """Write every plot as PNG and SVG into ``folder`` (asked for when None)."""
        experiment = self.experiment()
        prefix = file_stem(experiment.name if experiment else "kinetics")
        return export_plots(self, self.plots.plot_items(), folder, prefix)


if __name__ == "__main__":  # pragma: no cover
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(KineticsView, sys.argv))
