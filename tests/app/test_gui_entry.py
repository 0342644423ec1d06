"""`spherokin gui` hooks: display detection and the --screenshot path."""

from __future__ import annotations

from types import SimpleNamespace

from PySide6.QtGui import QImage

from app import main


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
