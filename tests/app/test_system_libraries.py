"""The check for the X11 libraries the Qt xcb plugin needs, run before Qt loads."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

from app.window import system_libraries as sl

EVERYTHING = set(sl.XCB_PLUGIN_LIBRARIES)


def test_only_an_x11_session_is_checked():
    assert sl.uses_xcb({"DISPLAY": ":0"}, "linux")
    assert sl.uses_xcb({"DISPLAY": ":0", "QT_QPA_PLATFORM": "xcb"}, "linux")
    assert not sl.uses_xcb({"DISPLAY": ":0", "QT_QPA_PLATFORM": "offscreen"}, "linux")
    assert not sl.uses_xcb({"WAYLAND_DISPLAY": "w-0", "XDG_SESSION_TYPE": "wayland",
                            "DISPLAY": ":0"}, "linux")
    assert not sl.uses_xcb({}, "linux")
    assert not sl.uses_xcb({"DISPLAY": ":0"}, "darwin")


def test_a_missing_library_names_its_package_in_one_line():
    known = EVERYTHING - {"libxcb-cursor.so.0", "libxcb-keysyms.so.1"}
    problem = sl.check_before_qt({"DISPLAY": ":0"}, "linux", cache=lambda: known)
    assert problem is not None and "\n" not in problem
    assert "sudo apt install libxcb-cursor0 libxcb-keysyms1" in problem


def test_nothing_is_reported_when_all_are_there_or_the_linker_cannot_be_asked():
    assert sl.check_before_qt({"DISPLAY": ":0"}, "linux", cache=lambda: EVERYTHING) is None
    assert sl.check_before_qt({"DISPLAY": ":0"}, "linux", cache=lambda: None) is None
    assert sl.check_before_qt({"QT_QPA_PLATFORM": "offscreen"}, "linux",
                              cache=lambda: set()) is None


def test_a_library_on_ld_library_path_counts(tmp_path):
    (tmp_path / "libxcb-cursor.so.0").write_bytes(b"")
    known = EVERYTHING - {"libxcb-cursor.so.0"}
    env = {"DISPLAY": ":0", "LD_LIBRARY_PATH": str(tmp_path)}
    assert sl.check_before_qt(env, "linux", cache=lambda: known) is None


def test_the_gui_command_exits_2_with_the_line_before_qt_loads(tmp_path):
    """`spherokin gui` on an X display whose linker knows none of the libraries: the
    child process prints the line and exits 2 instead of aborting in Qt."""
    probe = ("import sys\n"
             "from app.window import system_libraries as sl\n"
             "sl.linker_cache = lambda: set()\n"
             "from analysis.cli.main import main\n"
             "status = main(['gui'])\n"
             "assert 'PySide6.QtGui' not in sys.modules\n"
             "sys.exit(status)\n")
    env = {k: v for k, v in os.environ.items() if k not in ("QT_QPA_PLATFORM", "WAYLAND_DISPLAY")}
    env["DISPLAY"] = ":99"
    done = subprocess.run([sys.executable, "-c", probe], env=env, capture_output=True, text=True,
                          timeout=120, cwd=Path(__file__).resolve().parents[2])
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "sudo apt install libxcb-cursor0" in lines[0]
