"""Bad input gets one line; a bug gets the internal-error dialog, a traceback and a log file."""

from __future__ import annotations

import pytest
from fake_pipeline import FakeEngine

from analysis.errors import InputError
from app.core import errors
from app.core import model as m
from app.core.runner import AnalysisRunner


@pytest.fixture
def log_dir(tmp_path, monkeypatch):
    monkeypatch.setenv(errors.LOG_DIR_VARIABLE, str(tmp_path / "logs"))
    monkeypatch.setattr(errors, "shown_messages", [])
    return tmp_path / "logs"


def _raised(exc):
    try:
        raise exc
    except Exception as caught:
        return caught


def test_bad_input_is_one_line_and_logs_nothing(qapp, log_dir, capsys):
    text = errors.report_error(None, "Cannot open the project", InputError("bad\nvalue " + "x" * 900, "p.json"))
    assert errors.shown_messages == [("Cannot open the project", text)]
    assert "\n" not in text and text.startswith("p.json: bad value") and len(text) <= errors.MAX_LINE_CHARS
    assert not log_dir.exists() and capsys.readouterr().err == ""


def test_a_bug_gets_the_internal_error_dialog_with_the_log_path(qapp, log_dir, capsys):
    text = errors.report_error(None, "Could not save", _raised(ZeroDivisionError("division by zero")))
    log = log_dir / errors.LOG_NAME
    title, shown = errors.shown_messages[-1]
    assert title == "Internal error" and shown == text
    assert "a bug, not a problem with your data" in text and str(log) in text
    assert "ZeroDivisionError: division by zero" in text
    logged = log.read_text()
    assert "Traceback (most recent call last)" in logged and "Could not save" in logged
    assert "Traceback (most recent call last)" in capsys.readouterr().err
    from PySide6.QtWidgets import QApplication, QMessageBox

    (box,) = [w for w in QApplication.topLevelWidgets() if isinstance(w, QMessageBox) and w.text() == text]
    assert box.isVisible()  # a dialog without a window to own it stays up until closed
    box.done(0)


def test_runner_reports_each_kind_through_the_seam(qtbot, log_dir, small_project):
    for failure, internal in ((InputError("no frames", "s.tif"), False), (RuntimeError("boom"), True)):
        model = m.ProjectModel(small_project, engine=FakeEngine(fail_with=failure))
        runner = AnalysisRunner(model)
        errored = []
        runner.experiment_errored.connect(lambda i, exc: errored.append((i, exc)))
        with qtbot.waitSignal(runner.all_finished, timeout=10000):
            runner.run([0])
        assert errored == [(0, failure)] and model.status(0) == m.STATUS_FAILED
        problems = runner.run_sync([1])
        assert ("internal error RuntimeError: boom (details in" in problems[0]) is internal
        assert (log_dir / errors.LOG_NAME).exists() is internal


def test_window_shows_a_failed_analysis_in_the_right_dialog(qtbot, tmp_path, log_dir, small_project):
    from PySide6.QtCore import QSettings

    from app.window.main_window import MainWindow

    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.IniFormat)
    window = MainWindow(m.ProjectModel(engine=FakeEngine(fail_with=RuntimeError("boom"))),
                        settings=settings, recovery_dir=str(tmp_path / "recovery"))
    qtbot.addWidget(window)
    assert window.open_project_path(small_project.path, ask=False)
    with qtbot.waitSignal(window.runner.all_finished, timeout=10000):
        window.run_current()
    assert errors.shown_messages[-1][0] == "Internal error"
    assert str(log_dir / errors.LOG_NAME) in window.problems_shown[-1]
    broken = tmp_path / "broken.spherokin.json"
    broken.write_text('{"format": "spherokin-project", "schema_version": 3, "colour": 1}')
    assert not window.open_project_path(str(broken), ask=False)
    assert errors.shown_messages[-1] == ("Cannot open the project", window.problems_shown[-1])
    assert "colour is not a known key" in window.problems_shown[-1]
