"""One path through the real window: open the demo project, analyse, click-add a
nucleus, undo, redo, save, reopen, and check that the edit and the results survived."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QPointF, QSettings, Qt
from PySide6.QtWidgets import QFileDialog

from app.core import model as m
from app.window.main_window import MainWindow


@pytest.fixture
def window(qtbot, tmp_path):
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    win = MainWindow(settings=settings, recovery_dir=str(tmp_path / "recovery"))
    win.ask_unsaved_changes = lambda: "discard"
    qtbot.addWidget(win)
    win.show()
    yield win
    win.runner.cancel()
    win.runner.wait(30)


def _analyse_current(qtbot, win):
    with qtbot.waitSignal(win.runner.all_finished, timeout=90_000):
        win.actions_by_id["run"].trigger()
    index = win.model.current_index
    assert win.model.status(index) == m.STATUS_DONE, win.model.status_message(index)
    return win.model.result(index)


def _click_image(qtbot, win, x_px, y_px):
    """A real mouse click on the viewer at image position (x = column, y = row)."""
    view = win.viewer._graphics
    scene_point = win.viewer.view_box.mapViewToScene(QPointF(x_px + 0.5, y_px + 0.5))
    qtbot.mouseClick(view.viewport(), Qt.LeftButton, pos=view.mapFromScene(scene_point))


def _gap_between_detections(result):
    """A crystalline point far from every detected centre: midway between two neighbours."""
    centres = np.array([(s.x_px, s.y_px) for s in result.spherulites if s.status == "ok"])
    a = centres[len(centres) // 2]
    b = centres[np.argsort(np.hypot(*(centres - a).T))[1]]
    return tuple((a + b) / 2.0)


def test_open_analyse_correct_undo_redo_save_reopen(qtbot, window, demo_project_path,
                                                    tmp_path, monkeypatch):
    assert window.open_project_path(str(demo_project_path))
    window.model.select(0)
    before = _analyse_current(qtbot, window)
    assert before.spherulites and window.experiments_panel.item(0, 4).text() == m.STATUS_DONE

    window.actions_by_id["tool_add"].trigger()
    x, y = _gap_between_detections(before)
    _click_image(qtbot, window, x, y)
    (edit,) = window.model.experiment(0).edits
    assert edit.kind == "add_nucleus" and abs(edit.x_px - x) < 1.0 and abs(edit.y_px - y) < 1.0
    added = window.model.result(0)
    manual = [s for s in added.spherulites if s.source == "manual"]
    assert len(manual) == 1 and added.unapplied_edits == ()
    assert window.isWindowModified() and window.model.undo_stack.count() == 1

    window.actions_by_id["undo"].trigger()
    assert window.model.experiment(0).edits == ()
    assert not any(s.source == "manual" for s in window.model.result(0).spherulites)
    window.actions_by_id["redo"].trigger()
    assert window.model.experiment(0).edits == (edit,)
    assert window.details.edits_list.count() == 1

    target = tmp_path / "corrected.spherokin.json"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    window.actions_by_id["save_as"].trigger()
    assert target.is_file() and not window.isWindowModified()

    assert window.open_project_path(str(demo_project_path))  # something else in between
    assert window.model.experiment(0).edits == ()
    assert window.open_project_path(str(target))
    assert window.model.experiment(0).edits == (edit,)
    reopened = _analyse_current(qtbot, window)
    again = [s for s in reopened.spherulites if s.source == "manual"]
    assert len(again) == 1 and abs(again[0].x_px - manual[0].x_px) < 1e-6
    assert reopened.growth_rate.value == pytest.approx(added.growth_rate.value, rel=1e-9)
    assert len(reopened.spherulites) == len(added.spherulites)
