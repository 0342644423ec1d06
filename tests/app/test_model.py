"""The project model and its undoable commands, without widgets."""

from __future__ import annotations

import json

import pytest
from fake_pipeline import FakeEngine

from analysis.errors import InputError
from analysis.edits import (
    AddNucleus,
    DeleteDetection,
    ExcludeSpherulite,
    IgnoreFrames,
    MergeDetections,
    MoveCentre,
)
from analysis.progress import run_to_completion
from app.core import model as m


@pytest.fixture
def fake():
    return FakeEngine()


@pytest.fixture
def shared(qapp, fake, small_project):
    model = m.ProjectModel(small_project, engine=fake)
    for i in range(model.experiment_count()):
        experiment = model.experiment(i)
        model.set_analysis(i, run_to_completion(fake.analyze_iter(experiment)), experiment)
    return model


def test_edit_is_one_undo_entry_and_refreshes_result(shared):
    changed = []
    shared.analysis_updated.connect(changed.append)
    shared.push_edit(0, AddNucleus(10.0, 12.0))
    assert shared.undo_stack.count() == 1
    assert shared.experiment(0).edits == (AddNucleus(10.0, 12.0),)
    manual = [s for s in shared.result(0).spherulites if s.source == "manual"]
    assert [(s.x_px, s.y_px) for s in manual] == [(10.0, 12.0)]
    assert changed == [0] and shared.is_dirty()
    shared.undo_stack.undo()
    assert shared.experiment(0).edits == ()
    assert all(s.source == "auto" for s in shared.result(0).spherulites)
    assert not shared.is_dirty()
    shared.undo_stack.redo()
    assert len(shared.result(0).spherulites) == 3 and shared.is_dirty()


def test_unapplied_edit_is_listed_not_dropped(shared):
    shared.push_edit(1, DeleteDetection(1.0, 1.0))  # nothing there
    assert shared.result(1).unapplied_edits == (DeleteDetection(1.0, 1.0),)
    assert shared.experiment(1).edits == (DeleteDetection(1.0, 1.0),)


def test_property_change_is_undoable_and_marks_analysis_out_of_date(shared):
    shared.set_experiment_properties(0, temperature_c=130.5)
    assert shared.experiment(0).temperature_c == 130.5
    assert shared.status(0) == m.STATUS_STALE
    shared.undo_stack.undo()
    assert shared.experiment(0).temperature_c == 128.0
    shared.set_experiment_properties(1, notes="focus drifted at the end")
    assert shared.status(1) == m.STATUS_DONE  # notes do not touch the frame pass


def test_reanalysis_replays_edits(shared, fake):
    shared.push_edit(0, AddNucleus(30.0, 5.0))
    shared.push_edit(0, ExcludeSpherulite(24.0, 20.0))
    experiment = shared.experiment(0)
    shared.set_analysis(0, run_to_completion(fake.analyze_iter(experiment)), experiment)
    statuses = {(s.x_px, s.y_px): (s.status, s.source) for s in shared.result(0).spherulites}
    assert statuses[(30.0, 5.0)] == ("ok", "manual")
    assert statuses[(24.0, 20.0)] == ("excluded", "auto")


def test_edit_made_while_analysis_ran_is_applied_to_its_result(shared, fake):
    started = shared.experiment(0)
    shared.push_edit(0, AddNucleus(50.0, 50.0))
    shared.set_analysis(0, run_to_completion(fake.analyze_iter(started)), started)
    assert any(s.source == "manual" for s in shared.result(0).spherulites)
    assert shared.status(0) == m.STATUS_DONE


def test_remove_and_restore_experiment_keeps_its_analysis(shared):
    before = shared.result(1)
    shared.select(1, 2)
    shared.remove_experiment(1)
    assert shared.experiment_count() == 1 and shared.current_index == 0
    shared.undo_stack.undo()
    assert shared.experiment_count() == 2 and shared.result(1) is before


def test_save_is_clean_and_reopens_with_edits(shared, tmp_path):
    shared.push_edit(0, AddNucleus(10.0, 12.0, id=7))
    target = tmp_path / "saved.spherokin.json"
    shared.save(str(target))
    assert not shared.is_dirty()
    record = json.loads(target.read_text())["experiments"][0]["edits"]
    assert record == [{"kind": "add_nucleus", "x_px": 10.0, "y_px": 12.0, "id": 7}]
    reopened = m.ProjectModel()
    reopened.open_project(str(target))
    assert reopened.experiment(0).edits == (AddNucleus(10.0, 12.0, id=7),)


def test_failed_save_keeps_work_and_dirty_state(shared, tmp_path):
    shared.push_edit(0, AddNucleus(10.0, 12.0))
    with pytest.raises(InputError, match="p.spherokin.json: the folder does not exist"):
        shared.save(str(tmp_path / "no such folder" / "p.spherokin.json"))
    assert shared.is_dirty()
    assert shared.experiment(0).edits == (AddNucleus(10.0, 12.0),)
    assert shared.project.path == str(tmp_path / "small.spherokin.json")


def test_project_fields_are_undoable(shared):
    shared.set_project_fields(series={"tm0_c": 186.0}, material="demo-polyolefin")
    assert shared.project.series == {"tm0_c": 186.0}
    shared.undo_stack.undo()
    assert shared.project.series == {} and shared.project.material is None
    with pytest.raises(ValueError):
        shared.set_project_fields(experiments=())


def test_describe_edit_words():
    assert m.describe_edit(AddNucleus(3.2, 4.9, id=12)) == "Add nucleus #12 at (3.2, 4.9) px"
    assert m.describe_edit(IgnoreFrames(2, 5)) == "Ignore frames 2-5 of the experiment"
    move = MoveCentre(104.09, 134.6, 91.0, 149.0, id=57)
    assert m.describe_edit(move) == "Move centre of #57 at (104.1, 134.6) px to (91.0, 149.0) px"
    merge = MergeDetections(1.0, 2.0, 3.0, 4.0, id=1, other_id=2)
    assert m.describe_edit(merge) == "Merge #2 at (3.0, 4.0) px into #1 at (1.0, 2.0) px"


def test_selection_follows_the_experiment_through_remove_and_undo(shared):
    shared.select(1, 2)
    shared.remove_experiment(0)
    assert shared.current_index == 0 and shared.experiment(0).name == "Tc 132"
    shared.undo_stack.undo()
    assert shared.current_index == 1 and shared.experiment(1).name == "Tc 132"
