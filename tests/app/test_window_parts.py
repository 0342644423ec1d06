"""Dialogs, correction tools, stack import and the window's unsaved-changes guard."""

from __future__ import annotations

import numpy as np
import pytest
from conftest import write_disc_stack
from fake_pipeline import FakeEngine
from PySide6.QtCore import QSettings

from analysis.edits import (
    AddNucleus,
    DeleteDetection,
    ExcludeSpherulite,
    IncludeSpherulite,
    MergeDetections,
    MoveCentre,
)
from analysis.errors import InputError
from app.core import model as m
from app.microscopy.calibration import CalibrationDialog, scale_um_per_px
from app.window.main_window import MainWindow
from app.window.properties_dialog import (
    PropertiesDialog,
    parse_optional_number,
    parse_times,
)
from app.window.stack_import import experiments_from_paths, temperature_from_name


@pytest.fixture
def window(qtbot, tmp_path, small_project):
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    win = MainWindow(m.ProjectModel(engine=FakeEngine()), settings=settings,
                     recovery_dir=str(tmp_path / "recovery"))
    win.ask_unsaved_changes = lambda: "discard"  # never block on a modal question
    qtbot.addWidget(win)
    win.open_project_path(small_project.path, ask=False)
    win.runner.run_sync([0, 1])
    win.show()
    return win


def test_number_and_times_parsing():
    assert parse_optional_number(" 0,42 ", "scale", positive=True, optional=True) == 0.42
    assert parse_optional_number("", "scale", positive=True, optional=True) is None
    with pytest.raises(InputError, match="must be a positive number"):
        parse_optional_number("-3", "scale", positive=True, optional=True)
    with pytest.raises(InputError, match="not a number"):
        parse_optional_number("abc", "Tc", positive=False, optional=True)
    assert parse_times("0, 2.5 5") == (0.0, 2.5, 5.0)
    with pytest.raises(InputError, match="increasing"):
        parse_times("0 5 3")


def test_properties_dialog_changes_are_one_undo_entry(window):
    dialog = PropertiesDialog(window.model.experiment(0))
    dialog.numbers["temperature_c"].setText("129.5")
    dialog.numbers["thickness_um"].setText("25")
    dialog.notes.setPlainText("slight drift")
    changes = dialog.changes()
    assert changes == {"temperature_c": 129.5, "thickness_um": 25.0, "notes": "slight drift"}
    window.model.set_experiment_properties(0, "Edit properties", **changes)
    assert window.model.undo_stack.count() == 1
    assert window.experiments_panel.item(0, 1).text() == "129.5"
    assert window.model.status(0) == m.STATUS_STALE
    window.undo()
    assert window.model.experiment(0).temperature_c == 128.0


def test_stage_uncertainty_override_is_one_undo_entry_and_keeps_the_analysis(window):
    dialog = PropertiesDialog(window.model.experiment(0))
    assert dialog.numbers["stage_uncertainty_k"].text() == ""  # empty: the project's value
    dialog.numbers["stage_uncertainty_k"].setText("0,8")
    changes = dialog.changes()
    assert changes == {"stage_uncertainty_k": 0.8}
    window.model.set_experiment_properties(0, "Edit properties", **changes)
    assert window.model.undo_stack.count() == 1
    assert window.model.experiment(0).stage_uncertainty_k == 0.8
    assert window.model.status(0) != m.STATUS_STALE  # the frame pass does not depend on it
    window.undo()
    assert window.model.experiment(0).stage_uncertainty_k is None
    for bad in ("-0.1", "25"):
        dialog.numbers["stage_uncertainty_k"].setText(bad)
        with pytest.raises(InputError, match="Stage-temperature uncertainty"):
            dialog.changes()


def test_calibration_line_gives_scale_and_applies_to_all_in_one_step(window, qtbot):
    dialog = CalibrationDialog(np.zeros((120, 160), np.uint8))
    qtbot.addWidget(dialog)
    dialog.set_line(10, 20, 110, 20)
    dialog.known_um.setValue(50.0)
    assert dialog.length_px() == pytest.approx(100.0)
    assert dialog.um_per_px == pytest.approx(0.5)
    assert scale_um_per_px(0.0, 10.0) is None
    window.apply_calibration(0.5, to_all=True)
    assert [e.um_per_px for e in window.model.experiments()] == [0.5, 0.5]
    assert window.model.undo_stack.count() == 1
    window.undo()
    assert [e.um_per_px for e in window.model.experiments()] == [None, None]


def test_stack_without_scale_shows_a_warning(window, tmp_path):
    bare = write_disc_stack(tmp_path / "no_scale_131C.tif", um_per_px=None)
    assert window.add_stack_paths([str(bare)]) == 1
    assert window.model.experiment(2).temperature_c == 131.0
    assert window.model.current_index == 2
    assert not window.viewer._banner.isHidden()
    assert "no scale" in window.viewer._banner.text()


def test_bad_stack_is_reported_with_its_name(tmp_path):
    broken = tmp_path / "broken.tif"
    broken.write_bytes(b"not a tiff at all")
    experiments, problems = experiments_from_paths([broken])
    assert experiments == [] and len(problems) == 1 and str(broken) in problems[0]
    assert temperature_from_name("film_132.5C_b") == 132.5


def test_tools_turn_clicks_into_single_edits(window):
    model, tools = window.model, window.tools
    first, second = model.result(0).spherulites[:2]
    tools.set_tool("delete")
    tools.click(first.x_px + 1, first.y_px - 1)
    assert model.experiment(0).edits[-1] == DeleteDetection(first.x_px, first.y_px, id=first.id)
    window.undo()
    tools.set_tool("merge")
    tools.click(first.x_px, first.y_px)
    assert model.experiment(0).edits == ()  # first click only remembers
    tools.click(second.x_px, second.y_px)
    assert model.experiment(0).edits == (MergeDetections(first.x_px, first.y_px, second.x_px,
                                                         second.y_px, id=first.id,
                                                         other_id=second.id),)
    tools.set_tool("move")
    tools.click(second.x_px, second.y_px)
    tools.click(second.x_px + 3.0, second.y_px)
    assert model.experiment(0).edits[-1] == MoveCentre(second.x_px, second.y_px,
                                                       second.x_px + 3.0, second.y_px, id=second.id)
    assert model.undo_stack.count() == 2
    tools.set_tool("add")
    next_id = model.result(0).next_detection_id()
    assert next_id > max(s.id for s in model.result(0).spherulites)
    tools.click(5.0, 6.0)
    assert model.experiment(0).edits[-1] == AddNucleus(5.0, 6.0, id=next_id)


def test_exclude_tool_toggles_include(window):
    model, tools = window.model, window.tools
    target = model.result(0).spherulites[0]
    tools.set_tool("exclude")
    tools.click(target.x_px, target.y_px)
    assert model.experiment(0).edits[-1] == ExcludeSpherulite(target.x_px, target.y_px, id=target.id)
    assert model.result(0).spherulites[0].status == "excluded"
    tools.click(target.x_px, target.y_px)
    assert model.experiment(0).edits[-1] == IncludeSpherulite(target.x_px, target.y_px, id=target.id)


def test_selection_is_shared_by_viewer_table_and_plots(window):
    target = window.model.result(0).spherulites[1]
    window.tools.set_tool("select")
    window.tools.click(target.x_px, target.y_px)
    assert window.model.selected_id == target.id
    table = window.details.table
    assert table.item(table.currentRow(), 0).text() == str(target.id)
    window.details.table.selectRow(0)
    assert window.model.selected_id == window.model.result(0).spherulites[0].id


def test_close_with_unsaved_changes_asks(window, qtbot):
    window.model.push_edit(0, AddNucleus(3.0, 3.0))
    assert window.isWindowModified() and window.windowTitle().startswith("small.spherokin.json")
    window.ask_unsaved_changes = lambda: "cancel"
    assert not window.close() and window.isVisible()
    window.ask_unsaved_changes = lambda: "discard"
    assert window.close()


def test_dropping_files_adds_stacks_or_opens_a_project(window, tmp_path, small_project):
    from types import SimpleNamespace

    from PySide6.QtCore import QMimeData, QUrl

    def drop(*paths):
        mime = QMimeData()
        mime.setUrls([QUrl.fromLocalFile(str(p)) for p in paths])
        accepted = []
        window.dropEvent(SimpleNamespace(mimeData=lambda: mime,
                                         acceptProposedAction=lambda: accepted.append(1)))
        return accepted

    stack = write_disc_stack(tmp_path / "dropped_127C.tif")
    assert drop(stack) == [1]
    assert window.model.experiment_count() == 3
    assert window.model.experiment(2).temperature_c == 127.0
    window.undo()  # adding stacks is one undo entry
    assert window.model.experiment_count() == 2
    window.model.push_edit(0, AddNucleus(1.0, 1.0))
    drop(small_project.path)  # a project file opens (unsaved work: asked first, discarded here)
    assert window.model.experiment(0).edits == () and not window.model.is_dirty()


def test_views_rail_switches_pages_and_lends_the_details_room(window):
    assert window.view_names[0] == "viewer"
    assert not window.show_view("no-such-view")
    others = window.view_names[1:]
    assert others == ["kinetics", "temperature"]  # every page is built; a failure is an error
    assert window.show_view(others[0])
    assert window.pages.currentIndex() == 1 and window.docks["details"].isHidden()
    assert window.show_view("viewer")
    assert not window.docks["details"].isHidden() and not window.docks["history"].isHidden()


def test_crash_recovery_offer_restores_the_autosaved_edits(window, qtbot, tmp_path):
    window.model.push_edit(0, AddNucleus(4.0, 4.0))
    side = window.autosaver.autosave()
    assert side.is_file()
    # a "crash": the next window starts with the side file still there
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    fresh = MainWindow(m.ProjectModel(engine=FakeEngine()), settings=settings,
                       recovery_dir=str(tmp_path / "recovery"))
    fresh.ask_unsaved_changes = lambda: "discard"
    qtbot.addWidget(fresh)
    offered = []
    fresh.ask_recover = lambda item, comparison=None: offered.append(item.project_path) or True
    assert fresh.offer_recovery()
    assert offered == [window.model.path]
    assert fresh.model.experiment(0).edits == (AddNucleus(4.0, 4.0),)
    assert fresh.model.is_dirty() and fresh.model.path == window.model.path
    assert side.is_file()  # still protected until the user saves


def test_viewer_plays_steps_and_reads_time_from_the_isothermal_start(window, qtbot):
    viewer = window.viewer
    window.model.set_experiment_properties(0, isothermal_start_s=-15.0)
    viewer.set_frame(2)
    assert viewer.time_from_start_s() == pytest.approx(2 * 10.0 + 15.0)
    assert "frame 3 / 6" in viewer.readout.text()
    viewer.speed.setCurrentIndex(viewer.speed.count() - 1)
    viewer.set_playing(True)
    qtbot.waitUntil(lambda: viewer.frame == viewer.frame_count() - 1, timeout=3000)
    qtbot.waitUntil(lambda: not viewer.play_button.isChecked(), timeout=3000)  # stops at the end
    window.previous_frame()
    assert viewer.frame == viewer.frame_count() - 2
    viewer.auto_contrast.setChecked(False)
    viewer.black_level.setValue(10.0)
    viewer.white_level.setValue(90.0)
    assert tuple(viewer.image_item.levels) == (10.0, 90.0)


def test_layout_and_recent_projects_are_remembered(window, qtbot, tmp_path, small_project):
    window.docks["history"].hide()
    window.save_layout()
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    again = MainWindow(m.ProjectModel(engine=FakeEngine()), settings=settings,
                       recovery_dir=str(tmp_path / "recovery"))
    again.ask_unsaved_changes = lambda: "discard"
    qtbot.addWidget(again)
    again.show()
    assert again.docks["history"].isHidden()
    assert again.recent_projects()[0] == small_project.path
    # pixel sizes depend on the (small) offscreen screen: check the splitter was stored
    assert settings.value("window/viewer_splitter") is not None


def test_ignore_frames_targets_the_selected_spherulite_or_the_experiment(window):
    from analysis.edits import IgnoreFrames

    target = window.model.result(0).spherulites[0]
    window.model.select_spherulite(target.id)
    assert window.tools.ignore_frames_edit(2, 4, whole=False) == IgnoreFrames(
        2, 4, target.x_px, target.y_px, id=target.id)
    assert window.tools.ignore_frames_edit(2, 4, whole=True) == IgnoreFrames(2, 4)
    window.model.push_edit(0, IgnoreFrames(2, 4))
    assert "Ignore frames 2-4 of the experiment" in window.details.edits_list.item(0).text()


def test_calibrate_on_the_frame_shown_is_one_undoable_change(window, monkeypatch):
    from app.window import files as window_files

    window.ask_calibration_source = lambda: "frame"

    class Measured:
        def __init__(self, image, title, can_apply_to_all, parent, current_um_per_px=None):
            assert image.shape == (64, 64)
            self.um_per_px = 1.25
            self.apply_all = type("Box", (), {"isChecked": lambda self: False})()

        def exec(self):
            return True

    monkeypatch.setattr(window_files, "CalibrationDialog", Measured)
    window.calibrate()
    assert window.model.experiment(0).um_per_px == 1.25
    assert window.model.experiment(1).um_per_px is None
    window.undo()
    assert window.model.experiment(0).um_per_px is None


def test_spherulite_table_sorts_numbers_and_keeps_the_selection(window):
    table = window.details.table
    table.sortItems(4)  # G column: numeric
    values = [table.item(r, 4).text() for r in range(table.rowCount())]
    assert values == sorted(values, key=float)
    last_id = int(table.item(table.rowCount() - 1, 0).text())
    table.selectRow(table.rowCount() - 1)
    assert window.model.selected_id == last_id
    window.model.set_experiment_properties(0, um_per_px=3.0)
    assert "out of date" in window.unapplied_label.text()
