"""`spherokin gui` hooks: display detection and the --screenshot path."""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace

from PySide6.QtGui import QImage

from app.window import main


def test_has_display_on_linux():
    assert not main.has_display({}, "linux")
    assert main.has_display({"DISPLAY": ":0"}, "linux")
    assert main.has_display({"WAYLAND_DISPLAY": "wayland-0"}, "linux")
    assert main.has_display({"QT_QPA_PLATFORM": "offscreen"}, "linux")
    assert main.has_display({}, "win32")


def test_no_display_without_screenshot_is_one_line_and_status_2(monkeypatch, capsys):
    monkeypatch.setattr(main, "has_display", lambda: False)
    status = main.run_from_cli(SimpleNamespace(project=None, screenshot=None, view=None))
    assert status == 2
    assert capsys.readouterr().err.strip() == main.NO_DISPLAY


def test_screenshot_analyses_and_writes_1600_by_1000_png(qapp, small_project, tmp_path):
    out = tmp_path / "shots" / "main.png"
    args = SimpleNamespace(project=small_project.path, screenshot=str(out), view="viewer")
    assert main.run_from_cli(args) == 0
    image = QImage(str(out))
    assert (image.width(), image.height()) == main.SCREENSHOT_SIZE


def test_screenshot_with_unknown_view_or_bad_project_fails_clearly(qapp, small_project,
                                                                   tmp_path, capsys):
    args = SimpleNamespace(project=small_project.path, screenshot=str(tmp_path / "x.png"),
                           view="no-such-view")
    assert main.run_from_cli(args) == 2
    assert "unknown view 'no-such-view'" in capsys.readouterr().err
    broken = tmp_path / "broken.spherokin.json"
    broken.write_text("{not json")
    args = SimpleNamespace(project=str(broken), screenshot=str(tmp_path / "y.png"), view=None)
    assert main.run_from_cli(args) == 2
    assert str(broken) in capsys.readouterr().err


INTERACTIVE_PROBE = """
import sys
from pathlib import Path
from types import SimpleNamespace
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication
from app.window import main
from app.window.main_window import MainWindow
app = main._application()
seen = {}
def look_and_quit():
    window = next(w for w in QApplication.topLevelWidgets() if isinstance(w, MainWindow))
    seen["path"], seen["count"] = window.model.path, window.model.experiment_count()
    seen["notice"] = any(w.windowTitle() == "Before you start"
                         for w in QApplication.topLevelWidgets())
    QApplication.quit()
QTimer.singleShot(300, look_and_quit)
status = main.run_from_cli(SimpleNamespace(project=sys.argv[1], screenshot=None, view="viewer"))
print(status, seen["path"], seen["count"], seen["notice"])
"""


def test_interactive_start_opens_the_project_and_returns_on_quit(small_project, tmp_path):
    # in a child process: app.exec() and a user's settings must not leak into other tests
    import os
    import subprocess
    import sys

    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", HOME=str(tmp_path),
               XDG_CONFIG_HOME=str(tmp_path / "config"), XDG_DATA_HOME=str(tmp_path / "data"))
    done = subprocess.run([sys.executable, "-c", INTERACTIVE_PROBE, small_project.path],
                          capture_output=True, text=True, env=env, timeout=60,
                          cwd=str(Path(__file__).resolve().parents[2]))
    assert done.returncode == 0, done.stderr
    status, path, count, notice = done.stdout.split()[-4:]
    assert (status, path, count) == ("0", small_project.path, "2")
    assert notice == "True"  # the hot-stage cautions on first start
