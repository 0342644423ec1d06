"""One way to tell the user that something went wrong, used by every part of the application.

Two kinds of failure, two kinds of dialog:

* **bad input** (:class:`~analysis.errors.InputError`; the analysis raises it for every
  file, value or folder a user can get wrong, including a full disk or a folder without
  write permission): a one-line warning naming the file and the problem;
* **anything else is a bug**: an "Internal error" dialog that says so, and the full
  traceback written to stderr and appended to a log file whose path the dialog shows,
  so the report can be attached to a bug report.

Dialogs are non-blocking (``open()``): work continues behind them, and tests read
:data:`shown_messages` instead of clicking. :func:`install_excepthook` routes exceptions
escaping Qt slots to the same dialogs.
"""

from __future__ import annotations

import os
import sys
import tempfile
import traceback
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable

from PySide6.QtCore import QStandardPaths, Qt
from PySide6.QtWidgets import QApplication, QMessageBox, QWidget

from analysis.errors import InputError

#: Environment variable that moves the error log (tests, portable installs).
LOG_DIR_VARIABLE = "SPHEROKIN_LOG_DIR"
LOG_NAME = "spherokin-errors.log"
#: Longest message a one-line dialog shows (a hostile input must not fill the screen).
MAX_LINE_CHARS = 300
#: Every message shown, newest last (title, text): what tests and ``--screenshot`` read.
shown_messages: list[tuple[str, str]] = []
_parentless: list[QMessageBox] = []


def is_user_problem(exc: BaseException) -> bool:
    """True for bad input (a one-line message says it all); False for a bug."""
    return isinstance(exc, InputError)


def one_line(exc: BaseException) -> str:
    """The exception's message on one bounded line."""
    text = " ".join(str(exc).split()) or type(exc).__name__
    return text if len(text) <= MAX_LINE_CHARS else text[: MAX_LINE_CHARS - 1] + "…"


def log_path() -> Path:
    """Where internal errors are logged: $SPHEROKIN_LOG_DIR, the app data folder, or temp."""
    folder = os.environ.get(LOG_DIR_VARIABLE) or QStandardPaths.writableLocation(
        QStandardPaths.AppLocalDataLocation) or tempfile.gettempdir()
    return Path(folder) / LOG_NAME


def log_internal_error(exc: BaseException, context: str = "") -> Path | None:
    """Write the traceback to stderr and append it to :func:`log_path`; the log's path.

    None when the log cannot be written (the traceback is still on stderr).
    """
    stamp = datetime.now(timezone.utc).isoformat(timespec="seconds")
    trace = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
    entry = f"--- {stamp} internal error{': ' + context if context else ''}\n{trace}"
    sys.stderr.write(entry)
    path = log_path()
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        with open(path, "a", encoding="utf-8") as log:
            log.write(entry)
    except OSError:
        return None
    return path


def failure_line(exc: BaseException, context: str = "") -> str:
    """One line for a failure listed rather than shown in a dialog (runs, imports, autosave).

    A bug is logged first (traceback to stderr and the log) and the line says where.
    """
    if is_user_problem(exc):
        return one_line(exc)
    path = log_internal_error(exc, context)
    return f"internal error {type(exc).__name__}: {one_line(exc)} (details in {path or 'stderr'})"


def describe_error(title: str, exc: BaseException) -> tuple[str, str]:
    """(dialog title, text) for ``exc``; logs it first when it is a bug."""
    if is_user_problem(exc):
        return title, one_line(exc)
    path = log_internal_error(exc, title)
    where = f"The details were written to {path}." if path else "The details were written to the terminal (stderr)."
    return ("Internal error",
            f"{title}: spherokin hit an internal error — a bug, not a problem with your data.\n"
            f"{type(exc).__name__}: {one_line(exc)}\n{where}\n"
            "Your project is unchanged; please report the error with that file.")


def report_error(parent: QWidget | None, title: str, exc: BaseException) -> str:
    """Show ``exc`` in the right dialog (non-blocking); returns the text shown."""
    title, text = describe_error(title, exc)
    show_message(parent, title, text, internal=title == "Internal error")
    return text


def show_message(parent: QWidget | None, title: str, text: str, *, internal: bool = False) -> None:
    """A non-blocking warning (or critical, for internal errors) dialog."""
    shown_messages.append((title, text))
    if QApplication.instance() is None:  # no GUI (scripts): stderr says it
        print(f"{title}: {text}", file=sys.stderr)
        return
    icon = QMessageBox.Critical if internal else QMessageBox.Warning
    box = QMessageBox(icon, title, text, QMessageBox.Ok, parent)
    box.setAttribute(Qt.WA_DeleteOnClose)
    box.setTextInteractionFlags(Qt.TextSelectableByMouse)  # the log path can be copied
    if parent is None:  # nothing owns it (no window yet): keep it alive until it is closed
        _parentless.append(box)
        box.finished.connect(lambda _result: _parentless.remove(box))
    box.open()


def install_excepthook(parent: Callable[[], QWidget | None] = lambda: None) -> None:
    """Exceptions escaping Qt slots and callbacks: logged and shown, never silently lost."""
    def hook(kind, exc, trace):
        if issubclass(kind, KeyboardInterrupt):
            sys.__excepthook__(kind, exc, trace)
            return
        report_error(parent(), "Unexpected problem", exc.with_traceback(trace))

    sys.excepthook = hook
