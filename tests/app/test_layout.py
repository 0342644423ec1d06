"""The window on a small screen, tools on their own page, reset layout, the wide table,
locating a moved stack and the ignore-frames dialog's default."""

from __future__ import annotations

import shutil

import pytest
from fake_pipeline import FakeEngine
from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QToolBar

from app.core.model import ProjectModel
from app.microscopy.frame_range_dialog import FrameRangeDialog
from app.window import files as window_files
from app.window import layout
from app.window.main_window import MainWindow


@pytest.fixture
def window(qtbot, tmp_path, small_project):
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    win = MainWindow(ProjectModel(engine=FakeEngine()), settings=settings,
                     recovery_dir=str(tmp_path / "recovery"))
    win.ask_unsaved_changes = lambda: "discard"
    qtbot.addWidget(win)
    win.open_project_path(small_project.path, ask=False)
    win.runner.run_sync([0, 1])
    win.resize(*layout.SMALLEST_SUPPORTED)
    win.show()
    return win


def _cut(window) -> list[str]:
    """Toolbar actions (the window's and the shown page's) hidden behind an overflow arrow."""
    return [a.text() for bar in window.findChildren(QToolBar) if bar.isVisible()
            for a in bar.actions()
            if bar.widgetForAction(a) is not None and not bar.widgetForAction(a).isVisible()]


def test_the_window_opens_within_the_screen():
    assert layout.fitted_size((1920, 1080)) == (1600, 1000)
    assert layout.fitted_size((1280, 800)) == (1216, 760)


def test_every_tool_shows_at_1280_by_760_and_only_on_the_microscopy_page(window, qtbot):
    qtbot.waitUntil(lambda: window.width() == 1280)
    assert _cut(window) == []
    tools = window.toolbars["tools"]
    assert tools.isVisible() and window.actions_by_id["tool_add"].isVisible()
    window.show_view("kinetics")
    assert not tools.isVisible() and not window.actions_by_id["tool_add"].isVisible()
    assert window.hint_label.text() == "" and _cut(window) == []
    window.show_view("temperature")
    qtbot.wait(10)
    assert _cut(window) == []
    window.show_view("viewer")
    assert tools.isVisible() and window.hint_label.text()


def test_reset_layout_brings_every_panel_back(window):
    window.docks["experiments"].hide()
    window.docks["details"].setFloating(True)
    window.save_layout()
    assert window.settings.value("window/state") is not None
    window.show_view("temperature")
    window.reset_layout()
    assert window.view_names[window.rail.currentRow()] == "viewer"
    assert not window.docks["experiments"].isHidden()
    assert not window.docks["details"].isFloating()
    assert window.settings.value("window/state") is None


def test_the_experiments_dock_keeps_tc_in_view_at_its_starting_width(window, qtbot):
    panel = window.experiments_panel
    qtbot.waitUntil(lambda: window.width() == 1280)
    tc_right_edge = panel.columnViewportPosition(1) + panel.columnWidth(1)
    assert tc_right_edge <= panel.viewport().width()
    assert panel.item(0, 1).text() == f"{window.model.experiment(0).temperature_c:g}"


def test_the_spherulites_table_opens_wide_with_every_column(window):
    window.show_spherulite_table()
    table = window.wide_table
    assert window.microscopy_tabs.currentWidget() is table
    headers = [table.horizontalHeaderItem(c).text() for c in range(table.columnCount())]
    assert headers[-1] == "reason" and "± 95 % CI (µm/min)" in headers
    assert table.rowCount() == len(window.model.result(0).spherulites)
    table.selectRow(1)
    assert window.model.selected_id == int(table.item(1, 0).text())


def test_a_moved_stack_is_located_in_one_undo_step(window, tmp_path, monkeypatch):
    old = window.model.experiment(0).stack_path
    moved = tmp_path / "moved" / "discs.tif"
    moved.parent.mkdir()
    shutil.copy(old, moved)
    window.model.set_experiment_properties(0, stack_path=str(tmp_path / "gone" / "discs.tif"))
    assert not window.viewer.locate_button.isHidden()  # the file is not where the project says
    monkeypatch.setattr(window_files.QFileDialog, "getOpenFileName",
                        staticmethod(lambda *a, **k: (str(moved), "")))
    count = window.model.undo_stack.count()
    window.viewer.locate_button.click()
    assert window.model.experiment(0).stack_path == str(moved.resolve())
    assert window.model.undo_stack.count() == count + 1
    assert window.viewer.locate_button.isHidden()


def test_ignore_frames_defaults_to_the_whole_experiment(qtbot):
    dialog = FrameRangeDialog(40, 9, selected_id=57)
    qtbot.addWidget(dialog)
    assert dialog.whole_experiment() and dialog.one.isEnabled() and "#57" in dialog.one.text()
    assert dialog.range() == (9, 9)
    nothing = FrameRangeDialog(40, 0, selected_id=-1)
    qtbot.addWidget(nothing)
    assert nothing.whole_experiment() and not nothing.one.isEnabled()
