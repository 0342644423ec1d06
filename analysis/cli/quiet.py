"""One stderr line per error: library chatter captured during a command and summarised.

Libraries speak on stderr in three ways: Python warnings (numpy's RuntimeWarning),
``logging`` records (tifffile warns about odd files that way) and C code writing to file
descriptor 2 directly (libpng's "iCCP" warnings, OpenCV and FFmpeg logs). A bad-input
run must print exactly one line, so during a command all three are collected: warnings
and records in memory, descriptor 2 into a temporary file, while ``sys.stderr`` keeps
writing to the real terminal. After a successful command one ``note:`` line summarises
what was collected; after a failure only the error line is printed.
"""

from __future__ import annotations

import logging
import os
import sys
import tempfile
import warnings
from contextlib import contextmanager

#: Set before OpenCV is imported: no log lines from OpenCV or its FFmpeg backend.
QUIET_ENVIRONMENT = {"OPENCV_LOG_LEVEL": "SILENT", "OPENCV_FFMPEG_LOGLEVEL": "-8",
                     "OPENCV_VIDEOIO_DEBUG": "0", "OPENCV_VIDEOIO_PRIORITY_MSMF": "0"}


class Chatter:
    """What the libraries said during one command."""

    def __init__(self):
        self.messages: list[str] = []
        self.native_lines: list[str] = []

    def summary(self) -> str | None:
        """One line describing the collected messages, None when there were none."""
        everything = self.messages + self.native_lines
        if not everything:
            return None
        first = everything[0].strip().splitlines()[0][:120] if everything[0].strip() else ""
        return (f"note: {len(everything)} message(s) from libraries were suppressed"
                + (f" (first: {first})" if first else ""))


class _Collector(logging.Handler):
    def __init__(self, chatter: Chatter):
        super().__init__(logging.WARNING)
        self.chatter = chatter

    def emit(self, record):
        self.chatter.messages.append(f"{record.name}: {record.getMessage()}")


def quiet_environment() -> None:
    """Set the OpenCV/FFmpeg log variables unless the user chose other values."""
    for key, value in QUIET_ENVIRONMENT.items():
        os.environ.setdefault(key, value)


@contextmanager
def captured_chatter():
    """Collect warnings, log records and native stderr output; yields a :class:`Chatter`."""
    chatter = Chatter()
    collector, root = _Collector(chatter), logging.getLogger()
    root.addHandler(collector)
    try:
        with warnings.catch_warnings(record=True) as caught, \
                _native_stderr_captured(chatter.native_lines):
            warnings.simplefilter("default")
            try:
                yield chatter
            finally:
                chatter.messages.extend(f"{w.category.__name__}: {w.message}" for w in caught)
    finally:
        root.removeHandler(collector)


def _writes_to_descriptor_2(stream) -> bool:
    try:
        return stream.fileno() == 2
    except (AttributeError, OSError, ValueError):
        return False


@contextmanager
def _native_stderr_captured(lines: list[str]):
    """Point descriptor 2 at a temporary file (its lines go to ``lines`` at the end);
    ``sys.stderr`` keeps writing to the real terminal."""
    try:
        sys.stderr.flush()
        original = os.dup(2)
    except (OSError, AttributeError, ValueError):  # no real descriptor (e.g. under a test runner)
        yield
        return
    sink = tempfile.TemporaryFile(mode="w+b")
    python_stderr = sys.stderr
    if _writes_to_descriptor_2(python_stderr):  # else (a test's capture) it stays as it is
        sys.stderr = os.fdopen(os.dup(original), "w", buffering=1, encoding="utf-8",
                               errors="backslashreplace", closefd=True)
    os.dup2(sink.fileno(), 2)
    try:
        yield
    finally:
        sys.stderr.flush()
        os.dup2(original, 2)
        os.close(original)
        if sys.stderr is not python_stderr:
            sys.stderr.close()
            sys.stderr = python_stderr
        sink.seek(0)
        lines.extend(line for line in sink.read(64 * 1024).decode("utf-8", "replace").splitlines()
                     if line.strip())
        sink.close()
