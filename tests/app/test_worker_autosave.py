"""The generator worker, the analysis runner and autosave/recovery, without the window."""

from __future__ import annotations

import threading

import pytest
from fake_pipeline import FakeEngine

from analysis.edits import AddNucleus
from analysis.progress import Progress
from app.core import model as m
from app.core.autosave import Autosaver, find_recoverable, load_recovered, side_path_for
from app.core.runner import AnalysisRunner
from app.core.worker import GeneratorWorker


def _counting(n, gate=None):
    for k in range(n):
        if gate is not None:
            gate.wait(5)
        yield Progress("counting", k / n)
    return "done"


def test_worker_reports_progress_and_result(qtbot):
    worker = GeneratorWorker(lambda: _counting(4))
    seen, results = [], []
    worker.signals.yielded.connect(seen.append)
    worker.signals.returned.connect(results.append)
    with qtbot.waitSignal(worker.signals.finished, timeout=5000):
        worker.start()
    assert [p.fraction for p in seen] == [0.0, 0.25, 0.5, 0.75]
    assert results == ["done"]


def test_worker_reports_errors_instead_of_raising(qtbot):
    def broken():
        yield Progress("reading", 0.0)
        raise ValueError("frame 3 is truncated")

    worker = GeneratorWorker(broken)
    errors = []
    worker.signals.errored.connect(errors.append)
    with qtbot.waitSignal(worker.signals.finished, timeout=5000):
        worker.start()
    assert [str(e) for e in errors] == ["frame 3 is truncated"]


def test_worker_abort_stops_between_yields(qtbot):
    gate = threading.Event()
    worker = GeneratorWorker(lambda: _counting(1000, gate))
    results, aborted = [], []
    worker.signals.returned.connect(results.append)
    worker.signals.aborted.connect(lambda: aborted.append(True))
    with qtbot.waitSignal(worker.signals.finished, timeout=5000):
        worker.start()
        worker.abort()
        gate.set()
    assert aborted == [True] and results == []


@pytest.fixture
def fake():
    return FakeEngine()


def test_runner_fills_results_per_experiment(qtbot, fake, small_project):
    model = m.ProjectModel(small_project, engine=fake)
    runner = AnalysisRunner(model)
    finished = []
    runner.experiment_finished.connect(finished.append)
    with qtbot.waitSignal(runner.all_finished, timeout=10000):
        runner.run_all()
    assert finished == [0, 1]
    assert [model.status(i) for i in (0, 1)] == [m.STATUS_DONE, m.STATUS_DONE]
    assert len(model.result(1).spherulites) == 2


def test_runner_cancel_marks_queue_cancelled(qtbot, fake, small_project):
    model = m.ProjectModel(small_project, engine=fake)
    runner = AnalysisRunner(model)
    with qtbot.waitSignal(runner.all_finished, timeout=10000):
        runner.run_all()
        runner.cancel()
    assert model.status(1) == m.STATUS_CANCELLED


def test_autosave_writes_side_file_and_recovers_edits(qapp, fake, small_project, tmp_path):
    model = m.ProjectModel(small_project, engine=fake)
    saver = Autosaver(model, tmp_path / "recovery", interval_ms=10_000_000)
    assert saver.autosave_if_dirty() is None  # clean: nothing written
    model.push_edit(0, AddNucleus(7.0, 9.0))
    side = saver.autosave_if_dirty()
    assert side == side_path_for(small_project.path) and side.is_file()
    found = find_recoverable(tmp_path / "recovery", [small_project.path])
    assert [item.project_path for item in found] == [small_project.path]
    recovered = load_recovered(found[0])
    assert recovered.path == small_project.path
    assert recovered.experiments[0].edits == (AddNucleus(7.0, 9.0),)
    fresh = m.ProjectModel()
    fresh.replace_project(recovered, recovered=True)
    assert fresh.is_dirty()  # recovered work is unsaved until the user saves it
    model.save()
    assert not side.exists()  # saving removes the side file


def test_untitled_project_autosaves_in_recovery_folder(qapp, fake, small_project, tmp_path):
    model = m.ProjectModel()
    saver = Autosaver(model, tmp_path / "recovery", interval_ms=10_000_000)
    model.add_experiments(small_project.experiments[:1])
    side = saver.autosave()
    assert side.parent == tmp_path / "recovery"
    (item,) = find_recoverable(tmp_path / "recovery")
    assert item.project_path is None
    assert load_recovered(item).experiments[0].name == "Tc 128"
    saver.discard()
    assert find_recoverable(tmp_path / "recovery") == []
