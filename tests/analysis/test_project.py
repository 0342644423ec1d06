"""Project file: frozen v1 schema, round trip, atomic save, refusals with clear messages."""

import json
import shutil
from dataclasses import replace
from pathlib import Path

import pytest

from analysis import edits as E
from analysis.errors import InputError
from analysis.project.file import (
    SCHEMA_VERSION,
    CalorimetrySource,
    Experiment,
    Project,
    load_project,
    migrate,
    open_experiment_stack,
    save_project,
)

FIXTURE_V1 = Path(__file__).parent / "fixtures" / "project_v1.spherokin.json"


def test_frozen_v1_fixture_still_loads_with_every_edit_kind(tmp_path):
    shutil.copy(FIXTURE_V1, tmp_path / "p.spherokin.json")
    project = load_project(tmp_path / "p.spherokin.json")
    (experiment,) = project.experiments
    assert experiment.stack_path == str((tmp_path / "stacks/tc128/stack.tif").resolve())
    assert experiment.calorimetry.file == str((tmp_path / "dsc/tc128.csv").resolve())
    assert experiment.calorimetry.window == (0.03, 0.2)
    assert experiment.isothermal_start_s == 12.5 and experiment.thickness_um == 20.0
    assert {e.kind for e in experiment.edits} == set(E.EDIT_KINDS)
    assert project.series["tm0_c"] == 185.0 and project.material == "iPP"


def test_round_trip_keeps_everything_and_paths_stay_relative(tmp_path):
    shutil.copy(FIXTURE_V1, tmp_path / "p.spherokin.json")
    project = load_project(tmp_path / "p.spherokin.json")
    saved = save_project(project, tmp_path / "copy.spherokin.json")
    document = json.loads((tmp_path / "copy.spherokin.json").read_text())
    assert document["format"] == "spherokin-project" and document["schema_version"] == SCHEMA_VERSION
    assert document["experiments"][0]["stack"] == "stacks/tc128/stack.tif"
    assert document["experiments"][0]["edits"][0] == {"kind": "add_nucleus", "x_px": 101.5, "y_px": 40.0,
                                                       "id": None}
    again = load_project(tmp_path / "copy.spherokin.json")
    assert again.experiments == project.experiments
    assert saved.modified and saved.created == project.created


def test_save_is_atomic_and_leaves_no_temporary_files(tmp_path, monkeypatch):
    target = tmp_path / "p.spherokin.json"
    project = Project(experiments=(Experiment(name="a", stack_path=str(tmp_path / "s.tif")),))
    save_project(project, target)
    before = target.read_text()

    def explode(*args, **kwargs):
        raise OSError("disk full")

    monkeypatch.setattr("analysis.units.os.replace", explode)
    with pytest.raises(InputError, match="p.spherokin.json: could not write the file .disk full"):
        save_project(replace(project, material="PET"), target)
    assert target.read_text() == before  # the old file survives a failed save
    assert [p.name for p in tmp_path.iterdir()] == ["p.spherokin.json"]


def test_newer_schema_is_refused_with_a_clear_message(tmp_path):
    path = tmp_path / "new.spherokin.json"
    path.write_text(json.dumps({"format": "spherokin-project", "schema_version": SCHEMA_VERSION + 1}))
    with pytest.raises(InputError, match="newer spherokin"):
        load_project(path)


def test_migration_chain_runs_step_by_step(monkeypatch):
    def next_step(document):
        """Test-only step: renames a key."""
        document["renamed"] = document.pop("old", None)
        return document

    monkeypatch.setattr("analysis.project.file.SCHEMA_VERSION", SCHEMA_VERSION + 1)
    monkeypatch.setitem(__import__("analysis.project.file").project.file.MIGRATIONS,
                        SCHEMA_VERSION, next_step)
    migrated = migrate({"format": "spherokin-project", "schema_version": 1, "old": 3}, "x")
    assert migrated == {"format": "spherokin-project", "schema_version": SCHEMA_VERSION + 1,
                        "renamed": 3}


def test_v1_edits_migrate_to_records_that_name_no_detection_yet(tmp_path):
    shutil.copy(FIXTURE_V1, tmp_path / "p.spherokin.json")
    edits = load_project(tmp_path / "p.spherokin.json").experiments[0].edits
    assert len(edits) == 8 and all(edit.id is None for edit in edits)
    assert edits[2].other_id is None
    assert (edits[0].x_px, edits[0].y_px) == (101.5, 40.0)  # the click, kept exactly


@pytest.mark.parametrize("text, problem", [
    ("{not json", "not valid JSON"),
    ('{"schema_version": 1}', "not a spherokin project"),
    ('{"format": "spherokin-project", "schema_version": "one"}', "invalid schema_version"),
    ('{"format": "spherokin-project", "schema_version": 1, "experiments": [{"name": "a"}]}', "no stack"),
    ('{"format": "spherokin-project", "schema_version": 1, "experiments": '
     '[{"name": "a", "stack": "s.tif", "um_per_px": 0}]}', "'a': um_per_px must be a number in \\(0.0001"),
    ('{"format": "spherokin-project", "schema_version": 1, "experiments": '
     '[{"name": "a", "stack": "s.tif", "edits": [{"kind": "teleport"}]}]}', "unknown edit kind"),
])
def test_broken_project_files_name_the_file_and_the_problem(tmp_path, text, problem):
    path = tmp_path / "broken.spherokin.json"
    path.write_text(text)
    with pytest.raises(InputError, match=problem) as info:
        load_project(path)
    assert "broken.spherokin.json" in str(info.value)
    assert path.read_text() == text  # never touched


def test_missing_stack_is_reported_when_opened(tmp_path):
    experiment = Experiment(name="a", stack_path=str(tmp_path / "gone.tif"))
    with pytest.raises(InputError, match="gone.tif: no such file"):
        open_experiment_stack(experiment)


def test_calorimetry_source_defaults():
    source = CalorimetrySource(file="/x.csv")
    assert source.window == (0.03, 0.20) and source.exotherm == "auto"


def test_saved_file_keeps_normal_permissions(tmp_path):
    import os
    import stat

    target = tmp_path / "p.spherokin.json"
    save_project(Project(), target)
    umask = os.umask(0)
    os.umask(umask)
    assert stat.S_IMODE(target.stat().st_mode) == 0o666 & ~umask
    target.chmod(0o640)
    save_project(Project(), target)
    assert stat.S_IMODE(target.stat().st_mode) == 0o640


FIXTURE_V3 = Path(__file__).parent / "fixtures" / "project_v3.spherokin.json"


def test_frozen_v3_fixture_loads_as_isothermal_experiments(tmp_path):
    shutil.copy(FIXTURE_V3, tmp_path / "p.spherokin.json")
    project = load_project(tmp_path / "p.spherokin.json")
    (experiment,) = project.experiments
    assert experiment.kind == "isothermal" and experiment.temperature_source is None
    assert experiment.isothermal_start_s == 12.5 and {e.kind for e in experiment.edits} == set(E.EDIT_KINDS)


def test_a_ramp_experiment_round_trips_with_its_log_relative(tmp_path):
    from analysis.project.file import TemperatureSource

    source = TemperatureSource(log_file=str(tmp_path / "logs" / "stage.csv"), time_col="Time (s)",
                               clock_offset_s=-120.0, lag_s=5.0)
    ramp = Experiment(name="cooling 5 K/min", stack_path=str(tmp_path / "ramp" / "stack.tif"), kind="ramp",
                      temperature_source=source)
    save_project(Project(experiments=(ramp,)), tmp_path / "p.spherokin.json")
    document = json.loads((tmp_path / "p.spherokin.json").read_text())
    stored = document["experiments"][0]
    assert stored["kind"] == "ramp" and stored["temperature_source"]["log_file"] == "logs/stage.csv"
    assert load_project(tmp_path / "p.spherokin.json").experiments == (ramp,)
    stored["kind"] = "quench"
    (tmp_path / "bad.spherokin.json").write_text(json.dumps(document))
    with pytest.raises(InputError, match="kind must be one of isothermal, ramp"):
        load_project(tmp_path / "bad.spherokin.json")
