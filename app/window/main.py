"""Entry points of the desktop application.

``spherokin gui [PROJECT] [--screenshot PNG] [--view NAME]`` (analysis/cli.py) calls
:func:`run_from_cli`. With ``--screenshot`` the window is rendered off screen at
1600×1000 after analysing every experiment that has no result, saved as PNG, and the
program exits; this works with ``QT_QPA_PLATFORM=offscreen``.
"""

from __future__ import annotations

import gc
import os
import sys
import tempfile
from pathlib import Path
from types import SimpleNamespace
from typing import Any

SCREENSHOT_SIZE = (1600, 1000)
NO_DISPLAY = ("no display found; use `spherokin analyze STACK --out DIR` for headless analysis")
HEADLESS_PLATFORMS = {"offscreen", "minimal", "vnc", "linuxfb", "eglfs"}


def has_display(environ=os.environ, platform: str = sys.platform) -> bool:
    """Whether a window can be shown (Linux: X11/Wayland, or a headless Qt platform)."""
    if not platform.startswith("linux"):
        return True
    qpa = environ.get("QT_QPA_PLATFORM", "").split(":")[0]
    return bool(environ.get("DISPLAY") or environ.get("WAYLAND_DISPLAY")
                or qpa in HEADLESS_PLATFORMS)


def _application() -> Any:
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("spherokin")
    app.setOrganizationName("spherokin")
    return app


def run_from_cli(args: Any) -> int:
    """Run the GUI for parsed ``spherokin gui`` arguments; returns the exit status."""
    from app.window.system_libraries import check_before_qt

    screenshot = getattr(args, "screenshot", None)
    if not screenshot and not has_display():
        print(NO_DISPLAY, file=sys.stderr)
        return 2
    problem = check_before_qt()  # before Qt loads its platform plugin, which would abort
    if problem:
        print(f"spherokin gui: {problem}", file=sys.stderr)
        return 2
    app = _application()
    if screenshot:
        return _screenshot(app, getattr(args, "project", None), screenshot,
                           getattr(args, "view", None))
    return _interactive(app, getattr(args, "project", None), getattr(args, "view", None))


def _screenshot(app: Any, project: str | None, out: str, view: str | None) -> int:
    from PySide6.QtCore import QSettings

    from app.window.main_window import MainWindow

    with tempfile.TemporaryDirectory(prefix="spherokin-shot-") as scratch:
        settings = QSettings(str(Path(scratch) / "settings.ini"), QSettings.IniFormat)
        window = MainWindow(settings=settings, recovery_dir=scratch, remember_layout=False)
        try:
            return _render(app, window, project, out, view)
        finally:
            dispose(app, window)


def dispose(app: Any, window: Any) -> None:
    """Delete the window and collect its Python wrappers while Qt is still alive.

    Graphics items dropped from plots are otherwise collected during interpreter
    shutdown, after their C++ scene is gone, which can abort the process.
    """
    from PySide6.QtCore import QCoreApplication, QEvent

    window.close()
    window.model.undo_stack.clear()
    window.deleteLater()
    QCoreApplication.sendPostedEvents(None, QEvent.DeferredDelete)
    app.processEvents()
    gc.collect()


def _render(app: Any, window: Any, project: str | None, out: str, view: str | None) -> int:
    from app.window.views import PAGE_VIEWS

    if len(window.optional_views) != len(PAGE_VIEWS):  # already logged with its traceback
        print(f"spherokin gui: internal error: {window.problems_shown[-1]}", file=sys.stderr)
        return 1
    if project and not window.open_project_path(project, ask=False, read_only=True):
        print(window.problems_shown[-1], file=sys.stderr)
        return 2
    if view and not window.show_view(view):
        print(f"spherokin gui: unknown view {view!r} (available: {', '.join(window.view_names)})",
              file=sys.stderr)
        return 2
    model = window.model
    pending = [i for i in range(model.experiment_count()) if model.result(i) is None]
    for problem in window.runner.run_sync(pending):
        print(f"analysis failed: {problem}", file=sys.stderr)
    window.resize(*SCREENSHOT_SIZE)
    window.show()
    app.processEvents()
    window.viewer.view_box.autoRange(padding=0.01)
    present_interesting_frame(window)
    for _ in range(3):
        app.processEvents()
    target = Path(out)
    target.parent.mkdir(parents=True, exist_ok=True)
    if not window.grab().save(str(target)):
        print(f"{target}: could not write the screenshot", file=sys.stderr)
        return 2
    return 0


def present_interesting_frame(window: Any) -> None:
    """Show a frame late in the growth with a spherulite selected (screenshots)."""
    model = window.model
    if model.current_index < 0:
        return
    window.viewer.set_frame(int(0.6 * max(0, window.viewer.frame_count() - 1)))
    result = model.result(model.current_index)
    if result is not None and result.spherulites:
        ok = [s for s in result.spherulites if s.status == "ok"] or list(result.spherulites)
        height, width = window.model.frame_stack(model.current_index).frame_shape[:2]
        central = min(ok, key=lambda s: (s.x_px - width / 2) ** 2 + (s.y_px - height / 2) ** 2)
        model.select_spherulite(central.id)


def _interactive(app: Any, project: str | None, view: str | None) -> int:
    from app.window.main_window import MainWindow, show_first_run_notice

    from app.core.errors import install_excepthook

    window = MainWindow()
    install_excepthook(lambda: window)  # a bug in a slot: logged and shown, never lost
    window.show()
    show_first_run_notice(window)
    if not window.offer_recovery() and project:
        window.open_project_path(project, ask=False)
    if view and not window.show_view(view):
        window.show_problem("Unknown view", f"no view named {view!r}")
    status = int(app.exec())
    dispose(app, window)
    return status


def main(argv: list[str] | None = None) -> int:
    """``python -m app.window.main [PROJECT]``: the GUI without the command-line front end."""
    argv = sys.argv[1:] if argv is None else argv
    return run_from_cli(SimpleNamespace(project=argv[0] if argv else None,
                                        screenshot=None, view=None))


if __name__ == "__main__":
    sys.exit(main())
