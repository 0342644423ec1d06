"""The main window: view rail, microscopy page, experiments and details docks.

Layout: a narrow view rail on the left switches the central page (the microscopy page
is the stack viewer beside its plots; optional views come from ``app.window.views``); the
experiments list and the details/edits/history panels are docks the user can move and
resize. Window geometry, dock layout and recent files live in QSettings.
Project commands (new/open/save, stacks, recovery) are in :mod:`app.window.files`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import shiboken6
from PySide6.QtCore import QSettings, QStandardPaths, Qt
from PySide6.QtWidgets import (
    QDockWidget,
    QHBoxLayout,
    QLabel,
    QListWidget,
    QListWidgetItem,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QScrollArea,
    QSplitter,
    QStackedWidget,
    QTabWidget,
    QUndoView,
    QWidget,
)

from app.core.autosave import Autosaver
from app.core.errors import report_error
from app.core.model import STATUS_RUNNING, STATUS_STALE, ProjectModel
from app.core.runner import AnalysisRunner
from app.microscopy.details_panel import DetailsPanel
from app.microscopy.experiments_panel import ExperimentsPanel
from app.microscopy.frame_range_dialog import FrameRangeDialog
from app.microscopy.plots_panel import PlotsPanel
from app.microscopy.review import ReviewQueue
from app.microscopy.tools import ToolController
from app.microscopy.viewer import StackViewer
from app.widgets.help_guide import register_shortcuts
from app.microscopy.spherulite_table import SpherulitesTable
from app.window import actions as act
from app.window import layout
from app.window.files import WindowFilesMixin
from app.window.views import build_views

APP_NAME = "spherokin"
CAUTION = ("Hot-stage work: the stage and slides are hot enough to burn, and polymer "
           "held too long or too hot degrades and gives off fumes. Work with extraction "
           "and follow your laboratory's own safety rules; they take precedence over "
           "anything this program says.")
RAIL_STYLE = """
QListWidget#viewRail { background:#1f232b; color:#cfd6e0; border:none; font-weight:600; }
QListWidget#viewRail::item { padding:14px 6px; border-left:3px solid transparent; }
QListWidget#viewRail::item:selected { background:#2d3440; color:#ffffff;
                                      border-left:3px solid #4cf2c2; }
"""


def default_recovery_dir() -> str:
    base = QStandardPaths.writableLocation(QStandardPaths.AppLocalDataLocation)
    return str(Path(base or Path.home() / ".spherokin") / "recovery")


def _scrollable(widget: QWidget) -> QScrollArea:
    """Wrap a page so its minimum size never forces the window wider than the screen."""
    area = QScrollArea()
    area.setWidgetResizable(True)
    area.setFrameShape(QScrollArea.NoFrame)
    area.setWidget(widget)
    return area


class MainWindow(WindowFilesMixin, QMainWindow):
    """One project per window."""

    def __init__(self, model: ProjectModel | None = None, *, settings: QSettings | None = None,
                 recovery_dir: str | None = None, remember_layout: bool = True):
        super().__init__()
        self.setObjectName("spherokinMainWindow")
        self.model = model or ProjectModel()
        if self.model.parent() is None:
            self.model.setParent(self)  # the undo stack must outlive the window's actions
        self.settings = settings or QSettings(APP_NAME, APP_NAME)
        self.remember_layout = remember_layout
        self.runner = AnalysisRunner(self.model, parent=self)
        self.autosaver = Autosaver(self.model, recovery_dir or default_recovery_dir(), parent=self)
        self.problems_shown: list[str] = []
        self._hidden_docks: list | None = None  # docks hidden while off the microscopy page
        self._build_central()
        self._build_docks()
        self.tools = ToolController(self.model, self.viewer, self)
        self.review = ReviewQueue(self.model, self.viewer, self.tools, self)
        self.actions_by_id = act.build_actions(self)
        register_shortcuts(act.shortcut_rows(self.actions_by_id))  # listed in Help
        self.menus = act.populate_menus(self, self.actions_by_id)
        self.toolbars = act.populate_toolbars(self, self.actions_by_id)
        self._build_status_bar()
        self._add_view_menus()
        self.experiments_panel.setContextMenuPolicy(Qt.ActionsContextMenu)
        for key in ("run", "properties", "temperature_source", "analysis_settings", "calibrate",
                    "remove_experiment"):
            self.experiments_panel.addAction(self.actions_by_id[key])
        self.build_recent_menu()
        self._connect()
        self.actions_by_id["tool_select"].setChecked(True)
        self.setAcceptDrops(True)
        layout.fit_to_screen(self)
        if remember_layout:
            self._restore_layout()
        self._refresh_title()
        self._refresh_actions()

    # ---------------------------------------------------------------- construction
    def _build_central(self) -> None:
        self.viewer = StackViewer(self.model)
        self.plots = PlotsPanel(self.model)
        self.viewer_splitter = QSplitter(Qt.Horizontal)
        self.viewer_splitter.setObjectName("viewerSplitter")
        self.viewer_splitter.addWidget(self.viewer)
        self.viewer_splitter.addWidget(self.plots)
        self.viewer_splitter.setSizes([1000, 520])
        self.wide_table = SpherulitesTable(self.model, follow_model=True)
        self.microscopy_tabs = QTabWidget()
        self.microscopy_tabs.setObjectName("microscopyTabs")
        self.microscopy_tabs.setDocumentMode(True)
        self.microscopy_tabs.addTab(self.viewer_splitter, "Image")
        self.microscopy_tabs.addTab(self.wide_table, "Spherulites table")
        self.rail = QListWidget()
        self.rail.setObjectName("viewRail")
        self.rail.setStyleSheet(RAIL_STYLE)
        self.rail.setFixedWidth(104)
        self.pages = QStackedWidget()
        self.view_names: list[str] = []
        self._add_page("viewer", "Microscopy", self.microscopy_tabs,
                       "Frames of the current experiment with the detections")
        self.optional_views = build_views(self.model, self.show_error)
        for spec, widget in self.optional_views:
            self._add_page(spec.name, spec.title, _scrollable(widget), spec.tooltip)
        self.rail.currentRowChanged.connect(self._on_rail_changed)
        self.rail.setCurrentRow(0)
        central = QWidget()
        layout = QHBoxLayout(central)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.setSpacing(0)
        layout.addWidget(self.rail)
        layout.addWidget(self.pages, 1)
        self.setCentralWidget(central)

    def _add_page(self, name: str, title: str, widget: QWidget, tooltip: str) -> None:
        item = QListWidgetItem(title)
        item.setToolTip(tooltip)
        item.setTextAlignment(Qt.AlignCenter)
        self.rail.addItem(item)
        self.pages.addWidget(widget)
        self.view_names.append(name)

    def _build_docks(self) -> None:
        self.experiments_panel = ExperimentsPanel(self.model)
        self.details = DetailsPanel(self.model)
        self.history = QUndoView(self.model.undo_stack)
        self.history.setEmptyLabel("(opened project)")
        self.docks = {}
        for name, title, widget, area in (
            ("experiments", "Experiments", self.experiments_panel, Qt.LeftDockWidgetArea),
            ("details", "Details", self.details, Qt.RightDockWidgetArea),
            ("history", "History", self.history, Qt.RightDockWidgetArea),
        ):
            dock = QDockWidget(title, self)
            dock.setObjectName(f"dock_{name}")
            dock.setWidget(widget)
            self.addDockWidget(area, dock)
            self.docks[name] = dock
        self.tabifyDockWidget(self.docks["details"], self.docks["history"])
        self.docks["details"].raise_()
        self._docks_sized = False

    def showEvent(self, event) -> None:
        super().showEvent(event)
        first_show = not self._docks_sized
        self._docks_sized = True
        if first_show and not (self.remember_layout and self.settings.value("window/state")):
            self.resizeDocks([self.docks["experiments"], self.docks["details"]],
                             layout.dock_widths(self), Qt.Horizontal)
        if not first_show:
            return
        splitter = self.settings.value("window/viewer_splitter") if self.remember_layout else None
        if splitter is not None:  # restored once the widgets have their sizes
            self.viewer_splitter.restoreState(splitter)
        else:
            total = max(600, self.viewer_splitter.width())
            share = layout.IMAGE_SHARE
            self.viewer_splitter.setSizes([int(total * share), int(total * (1 - share))])

    def _build_status_bar(self) -> None:
        bar = self.statusBar()
        self.hint_label = QLabel()
        self.unapplied_label = QLabel()
        self.unapplied_label.setStyleSheet("color:#ff9a9a; font-weight:600;")
        self.progress_label = QLabel()
        self.progress = QProgressBar()
        self.progress.setRange(0, 1000)
        self.progress.setFixedWidth(240)
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.clicked.connect(self.cancel_analysis)
        bar.addWidget(self.hint_label, 1)
        bar.addPermanentWidget(self.unapplied_label)
        for widget in (self.progress_label, self.progress, self.cancel_button):
            bar.addPermanentWidget(widget)
            widget.hide()

    def _add_view_menus(self) -> None:
        view_menu = self.menus["View"]
        view_menu.addSeparator()
        for dock in self.docks.values():
            view_menu.addAction(dock.toggleViewAction())
        for spec, widget in self.optional_views:
            hook = getattr(widget, "actions_for_menu", None)
            if callable(hook):
                menu = self.menuBar().addMenu(spec.title)
                for action in hook():
                    menu.addAction(action)

    def _connect(self) -> None:
        model = self.model
        model.dirty_changed.connect(lambda _d: self._refresh_title())
        model.path_changed.connect(lambda _p: self._refresh_title())
        model.problem_reported.connect(self.show_problem)
        model.error_raised.connect(self.show_error)
        model.selection_changed.connect(lambda *_: self._refresh_actions())
        model.analysis_updated.connect(lambda _i: self._refresh_unapplied())
        model.status_changed.connect(lambda _i: self._refresh_unapplied())
        model.selection_changed.connect(lambda *_: self._refresh_unapplied())
        model.experiments_inserted.connect(lambda *_: self._refresh_actions())
        model.experiments_removed.connect(lambda *_: self._refresh_actions())
        model.project_replaced.connect(self._refresh_actions)
        self.experiments_panel.properties_requested.connect(self.edit_properties_of)
        self.viewer.frame_changed.connect(lambda _f: self.plots.set_time(self.viewer.time_from_start_s()))
        self.tools.hint_changed.connect(self.hint_label.setText)
        self.review.message.connect(self.hint_label.setText)
        self.viewer.locate_requested.connect(self.locate_stack)
        self.runner.progressed.connect(self._on_progress)
        self.runner.busy_changed.connect(self._on_busy_changed)
        self.runner.experiment_errored.connect(
            lambda i, exc: self.show_error(f"Analysis of {self.model.experiment(i).name} failed", exc))
        self.autosaver.autosaved.connect(lambda p: self.statusBar().showMessage(f"Autosaved to {p}", 4000))
        self.autosaver.autosave_failed.connect(lambda t: self.statusBar().showMessage(t, 8000))
        stack = model.undo_stack
        for signal in (stack.canUndoChanged, stack.canRedoChanged, stack.undoTextChanged,
                       stack.redoTextChanged):
            signal.connect(self._on_undo_state_changed)

    def _on_undo_state_changed(self, *_args) -> None:
        if shiboken6.isValid(self.model.undo_stack):  # not while the window is torn down
            self._refresh_actions()

    # ---------------------------------------------------------------- views
    def show_view(self, name: str) -> bool:
        """Switch the rail to the view registered as ``name``; False if unknown."""
        if name not in self.view_names:
            return False
        self.rail.setCurrentRow(self.view_names.index(name))
        return True

    def _on_rail_changed(self, row: int) -> None:
        self._show_microscopy_docks(row == 0)
        if hasattr(self, "toolbars"):
            layout.show_page_tools(self, row == 0)
        self.pages.setCurrentIndex(row)
        page = self.pages.widget(row)
        page = page.widget() if isinstance(page, QScrollArea) else page
        hook = getattr(page, "shown", None)
        if callable(hook):
            hook()

    def _show_microscopy_docks(self, on_viewer: bool) -> None:
        """The spherulite details and history belong to the microscopy page: other pages
        get their room, and the user's choice of docks comes back with the microscopy."""
        if not hasattr(self, "docks"):
            return
        if not on_viewer and self._hidden_docks is None:
            self._hidden_docks = [d for d in (self.docks["details"], self.docks["history"])
                                  if not d.isHidden()]
            for dock in self._hidden_docks:
                dock.hide()
        elif on_viewer and self._hidden_docks is not None:
            for dock in self._hidden_docks:
                dock.show()
            self.docks["details"].raise_()
            self._hidden_docks = None

    # ---------------------------------------------------------------- state display
    def _refresh_title(self) -> None:
        path = self.model.path
        name = Path(path).name if path else "untitled project"
        self.setWindowTitle(f"{name}[*] — {APP_NAME}")
        self.setWindowModified(self.model.is_dirty())

    def _refresh_actions(self) -> None:
        has_experiment = self.model.current_index >= 0
        for key in ("properties", "temperature_source", "analysis_settings", "calibrate", "remove_experiment",
                    "run", "ignore_frames"):
            self.actions_by_id[key].setEnabled(has_experiment)
        self.actions_by_id["run_all"].setEnabled(self.model.experiment_count() > 0)
        self.actions_by_id["cancel"].setEnabled(self.runner.is_busy())
        stack = self.model.undo_stack
        for key, can, text in (("undo", stack.canUndo(), stack.undoText()),
                               ("redo", stack.canRedo(), stack.redoText())):
            self.actions_by_id[key].setEnabled(can)
            self.actions_by_id[key].setText(f"{key.capitalize()} {text}".strip())

    def _refresh_unapplied(self) -> None:
        index = self.model.current_index
        result = self.model.result(index) if index >= 0 else None
        count = len(result.unapplied_edits) if result is not None else 0
        notes = [f"{count} edit(s) not applied — see Details ▸ Edits"] if count else []
        if index >= 0 and self.model.status(index) == STATUS_STALE:
            notes.append("results out of date — analyse again (F5)")
        self.unapplied_label.setText("   ".join(notes))

    def show_error(self, title: str, exc: BaseException) -> None:
        """Bad input: a one-line warning; a bug: the internal-error dialog with the log's path."""
        self.problems_shown.append(report_error(self, title, exc))

    def show_problem(self, title: str, text: str) -> None:
        """A non-blocking warning dialog (the work continues behind it)."""
        self.problems_shown.append(text)
        box = QMessageBox(QMessageBox.Warning, title, text, QMessageBox.Ok, self)
        box.setAttribute(Qt.WA_DeleteOnClose)
        box.open()

    # ---------------------------------------------------------------- analysis
    def run_current(self) -> None:
        if self.model.current_index >= 0:
            self.runner.run([self.model.current_index])

    def run_all(self) -> None:
        self.runner.run_all()

    def cancel_analysis(self) -> None:
        self.runner.cancel()

    def _on_progress(self, index: int, report: Any) -> None:
        name = self.model.experiment(index).name
        self.progress.setValue(int(1000 * max(0.0, min(1.0, report.fraction))))
        detail = f" ({report.message})" if report.message else ""
        self.progress_label.setText(f"{name}: {report.stage}{detail}")
        self.model.set_status(index, STATUS_RUNNING, report.stage)

    def _on_busy_changed(self, busy: bool) -> None:
        for widget in (self.progress_label, self.progress, self.cancel_button):
            widget.setVisible(busy)
        self.progress.setValue(0)
        self._refresh_actions()

    # ---------------------------------------------------------------- tools and viewer
    def set_tool(self, name: str) -> None:
        self.tools.set_tool(name)

    def cancel_gesture(self) -> None:
        self.tools.cancel_gesture()

    def review_step(self, delta: int) -> None:
        self.show_view("viewer")
        self.review.step(delta)

    def review_accept(self) -> None:
        self.review.accept()

    def review_reject(self) -> None:
        self.review.reject()

    def review_split(self) -> None:
        self.review.split()
        if self.tools.tool == "add":
            self.actions_by_id["tool_add"].setChecked(True)

    def set_show_rejected(self, shown: bool) -> None:
        self.viewer.set_show_rejected(shown)
        self.details.set_show_rejected(shown)
        self.wide_table.set_show_rejected(shown)

    def ignore_frames(self) -> None:
        index = self.model.current_index
        if index < 0 or self.viewer.frame_count() == 0:
            return
        dialog = FrameRangeDialog(self.viewer.frame_count(), self.viewer.frame,
                                  self.model.selected_id, self)
        if dialog.exec():
            first, last = dialog.range()
            self.model.push_edit(index, self.tools.ignore_frames_edit(
                first, last, dialog.whole_experiment()))

    def toggle_playing(self) -> None:
        self.viewer.toggle_playing()

    def next_frame(self) -> None:
        self.viewer.step(1)

    def previous_frame(self) -> None:
        self.viewer.step(-1)

    def undo(self) -> None:
        self.model.undo_stack.undo()

    def redo(self) -> None:
        self.model.undo_stack.redo()

    def show_help_panel(self) -> None:
        """The help panel (``app.widgets.help_panel``) if installed, else the About box."""
        try:
            from app.widgets.help_panel import show_help
        except ImportError:
            self.show_about()
            return
        show_help("cautions")

    def show_about(self) -> None:
        QMessageBox.about(self, f"About {APP_NAME}",
                          f"<b>{APP_NAME}</b><br>Spherulite growth rates, nucleation and "
                          f"crystallization kinetics from hot-stage time-lapse recordings."
                          f"<p><b>Caution.</b> {CAUTION}</p>")

    # ---------------------------------------------------------------- layout and closing
    def reset_layout(self) -> None:
        layout.reset_layout(self)

    def show_spherulite_table(self) -> None:
        """The spherulites table as a wide tab beside the image."""
        self.show_view(self.view_names[0])
        self.microscopy_tabs.setCurrentWidget(self.wide_table)

    def _restore_layout(self) -> None:
        geometry = self.settings.value("window/geometry")
        state = self.settings.value("window/state")
        if geometry is not None:
            self.restoreGeometry(geometry)
        if state is not None:
            self.restoreState(state)

    def save_layout(self) -> None:
        if not self.remember_layout:
            return
        self._show_microscopy_docks(True)  # save the user's docks, not a page's
        self.settings.setValue("window/geometry", self.saveGeometry())
        self.settings.setValue("window/state", self.saveState())
        self.settings.setValue("window/viewer_splitter", self.viewer_splitter.saveState())

    def closeEvent(self, event) -> None:
        if not self.confirm_discard_or_save():
            event.ignore()
            return
        self.runner.cancel()
        self.runner.wait(10.0)
        self.save_layout()
        self.autosaver.discard()
        self.hold_project_lock(None)
        event.accept()


def show_first_run_notice(window: MainWindow) -> None:
    """The hot-stage cautions, once per installation (non-blocking)."""
    if window.settings.value("notice/cautions_shown", False, type=bool):
        return
    window.settings.setValue("notice/cautions_shown", True)
    box = QMessageBox(QMessageBox.Information, "Before you start", CAUTION, QMessageBox.Ok, window)
    box.setAttribute(Qt.WA_DeleteOnClose)
    box.open()
