"""Recovery never deletes what it could not recover; one window per project.

Each case leaves an autosave beside a saved project as a crashed session would, starts
a fresh window and checks what the recovery offer does with it.
"""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time

import pytest
from fake_pipeline import FakeEngine
from PySide6.QtCore import QSettings

from analysis.edits import AddNucleus
from analysis.project.file import project_to_dict, save_project
from app.core.autosave import compare_with_project, find_recoverable, side_path_for
from app.core.model import ProjectModel
from app.core.project_lock import ProjectLock, live_lock_owner, lock_path_for
from app.window.main_window import MainWindow


@pytest.fixture
def fresh_window(qtbot, tmp_path):
    """A new window after a 'crash'; its recovery answers are scripted per test."""
    def make(answer="recover"):
        settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
        window = MainWindow(ProjectModel(engine=FakeEngine()), settings=settings,
                            recovery_dir=str(tmp_path / "recovery"))
        window.ask_unsaved_changes = lambda: "discard"
        window.asked = []
        window.ask_recover = lambda item, comparison=None: window.asked.append(comparison) or answer
        qtbot.addWidget(window)
        return window

    return make


def _autosave(project, edits=(AddNucleus(4.0, 4.0),), age_s=0.0):
    """Write the side file of ``project`` holding extra edits; ``age_s`` back-dates it."""
    from dataclasses import replace

    changed = project.with_experiment(0, replace(project.experiments[0], edits=edits))
    side = side_path_for(project.path)
    save_project(changed, side)
    if age_s:
        stamp = time.time() - age_s
        os.utime(side, (stamp, stamp))
    return side


def test_failed_recovery_of_a_newer_schema_keeps_the_autosave(fresh_window, small_project):
    side = _autosave(small_project)
    document = json.loads(side.read_text(encoding="utf-8"))
    side.write_text(json.dumps({**document, "schema_version": 99}), encoding="utf-8")
    window = fresh_window("recover")
    assert not window.offer_recovery([small_project.path])
    assert side.is_file() and json.loads(side.read_text(encoding="utf-8"))["schema_version"] == 99
    assert str(side) in window.problems_shown[-1] and "newer spherokin" in window.problems_shown[-1]


def test_failed_recovery_of_a_truncated_autosave_keeps_it(fresh_window, small_project):
    side = _autosave(small_project)
    text = side.read_text(encoding="utf-8")
    side.write_text(text[: len(text) // 2], encoding="utf-8")
    window = fresh_window("recover")
    assert not window.offer_recovery([small_project.path])
    assert side.read_text(encoding="utf-8") == text[: len(text) // 2]
    assert f"kept at {side}" in window.problems_shown[-1]


def test_an_autosave_older_than_the_project_is_flagged_and_kept_aside(fresh_window, small_project):
    side = _autosave(small_project, age_s=3600)  # the project was saved after the autosave
    window = fresh_window("keep")
    assert not window.offer_recovery([small_project.path])
    (comparison,) = window.asked
    assert comparison.status == "project-newer" and "NEWER" in comparison.text
    assert not side.exists()
    (kept,) = small_project_side_files(small_project)
    assert ".kept-" in kept.name
    assert window.model.path != small_project.path  # nothing recovered over the newer project
    # a new autosave of the project cannot overwrite the kept copy
    window.open_project_path(small_project.path, ask=False)
    window.model.push_edit(1, AddNucleus(9.0, 9.0))
    assert window.autosaver.autosave() == side and kept.is_file()


def small_project_side_files(project):
    folder = side_path_for(project.path).parent
    return sorted(folder.glob(os.path.basename(project.path) + "*.autosave"))


def test_a_newer_autosave_is_described_as_newer(small_project):
    side = _autosave(small_project)
    os.utime(small_project.path, (time.time() - 3600,) * 2)
    (item,) = find_recoverable(None, [small_project.path])
    assert item.autosave_path == side
    assert compare_with_project(item).status == "autosave-newer"


def test_an_autosave_identical_to_the_project_is_not_offered(fresh_window, small_project):
    side = side_path_for(small_project.path)
    save_project(small_project, side)  # same work, other stamps
    window = fresh_window("recover")
    assert not window.offer_recovery([small_project.path])
    assert window.asked == [] and not side.exists()


def test_a_declined_offer_keeps_the_autosave_unless_deletion_is_chosen(fresh_window, small_project):
    side = _autosave(small_project)
    assert not fresh_window(False).offer_recovery([small_project.path])  # "No" keeps
    (kept,) = small_project_side_files(small_project)
    assert fresh_window("delete").offer_recovery([small_project.path]) is False
    assert not kept.exists() and not side.exists()


@pytest.fixture
def other_process():
    """A live process that is not this one, to own locks and autosaves."""
    child = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    yield child.pid
    child.kill()
    child.wait()


def _write_lock(project_path, pid, host=None):
    lock_path_for(project_path).write_text(json.dumps(
        {"pid": pid, "host": host or socket.gethostname(), "started": time.time()}), encoding="utf-8")


def test_a_live_window_keeps_its_project_and_its_autosave(fresh_window, small_project, other_process):
    side = _autosave(small_project)
    _write_lock(small_project.path, other_process)
    window = fresh_window("delete")
    assert find_recoverable(None, [small_project.path]) == []  # live: not a crash
    assert not window.offer_recovery([small_project.path])
    assert side.is_file()
    assert not window.open_project_path(small_project.path, ask=False)
    assert "open in another spherokin window" in window.problems_shown[-1]


def test_a_crashed_sessions_lock_is_stale_and_taken_over(fresh_window, small_project, other_process):
    child = subprocess.Popen([sys.executable, "-c", "pass"])
    child.wait()  # its pid is now free: the session "crashed"
    _write_lock(small_project.path, child.pid)
    assert live_lock_owner(small_project.path) is None
    window = fresh_window()
    assert window.open_project_path(small_project.path, ask=False)
    owner = json.loads(lock_path_for(small_project.path).read_text(encoding="utf-8"))
    assert owner["pid"] == os.getpid()
    window.new_project()
    assert not lock_path_for(small_project.path).exists()  # released with the project


def test_lock_from_another_host_is_reported_with_its_path(small_project):
    _write_lock(small_project.path, 12345, host="bench-pc-7")
    owner = ProjectLock(small_project.path).acquire()
    assert owner is not None and "bench-pc-7" in owner.describe()


def test_untitled_autosave_of_a_running_session_is_left_alone(tmp_path, other_process, small_project):
    folder = tmp_path / "recovery"
    folder.mkdir()
    live = folder / f"untitled-1700000000-{other_process}.spherokin.json.autosave"
    live.write_text(json.dumps(project_to_dict(small_project, live)), encoding="utf-8")
    assert find_recoverable(folder) == []
