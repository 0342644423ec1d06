"""Autosave of unsaved work to a side file, and recovery after a crash.

While the project has unsaved changes, its whole recipe (experiments, properties, the
edit list) is written every minute to a side file: ``<project>.autosave`` beside a saved
project, or ``untitled-<stamp>.spherokin.json.autosave`` in the recovery folder for a
project never saved. Saving, or closing and discarding, removes the side file; one that
is still there at the next start means the application did not close normally, and the
window offers to recover it. The offer compares the autosave with the saved project
(:func:`compare_with_project`); an autosave that is not recovered is only deleted when the
user asks for it, and one kept for later is set aside (:func:`keep_aside`) so that new
autosaves never overwrite it.
"""

from __future__ import annotations

import dataclasses
import glob
import json
import os
import re
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from PySide6.QtCore import QObject, QTimer, Signal

from app.core.errors import failure_line

SIDE_SUFFIX = ".autosave"
AUTOSAVE_INTERVAL_MS = 60_000


def side_path_for(project_path: str) -> Path:
    return Path(str(project_path) + SIDE_SUFFIX)


@dataclass(frozen=True)
class Recoverable:
    """An autosave found at start-up: where it is and which project file it belongs to."""

    autosave_path: Path
    project_path: str | None  # None: the project had never been saved
    saved_at: float  # seconds since the epoch

    def describe(self) -> str:
        return f"{self.project_path or 'an unsaved project'} (autosaved {_when(self.saved_at)})"


def _when(stamp: float) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(stamp))


@dataclass(frozen=True)
class Comparison:
    """How an autosave relates to its saved project.

    ``status``: "unsaved" (no project file was ever saved), "missing" (the project file
    is gone), "same" (the autosave holds what the project file holds), "autosave-newer"
    or "project-newer" (by the file times; the contents differ).
    """

    status: str
    text: str


#: Keys that change on every save without changing the work.
_STAMP_KEYS = ("modified", "created", "app_version")


def _document(path) -> dict | None:
    try:
        document = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, ValueError, RecursionError):
        return None
    if not isinstance(document, dict):
        return None
    return {k: v for k, v in document.items() if k not in _STAMP_KEYS}


def compare_with_project(item: Recoverable) -> Comparison:
    """Compare the autosave with its project file by content and by time saved."""
    if item.project_path is None:
        return Comparison("unsaved", "The project had never been saved.")
    project = Path(item.project_path)
    try:
        project_time = project.stat().st_mtime
    except OSError:
        return Comparison("missing", f"The project file {project} is gone; the autosave is "
                                     "the only copy.")
    ours = _document(item.autosave_path)
    if ours is not None and ours == _document(project):
        return Comparison("same", "The autosave holds the same work as the saved project.")
    if project_time > item.saved_at:
        return Comparison("project-newer", (
            f"The saved project ({_when(project_time)}) is NEWER than this autosave "
            f"({_when(item.saved_at)}): recovering would replace newer work with older."))
    return Comparison("autosave-newer", (
        f"The autosave ({_when(item.saved_at)}) is newer than the saved project "
        f"({_when(project_time)})."))


def keep_aside(item: Recoverable) -> Path:
    """Rename an autosave so that no later autosave overwrites it; returns the new path.

    It keeps the side-file suffix, so it is offered again at the next start.
    """
    stamp = time.strftime("%Y%m%d-%H%M%S", time.localtime(item.saved_at))
    target = item.autosave_path.with_name(
        item.autosave_path.name[: -len(SIDE_SUFFIX)] + f".kept-{stamp}" + SIDE_SUFFIX)
    if ".kept-" in item.autosave_path.name or target.exists():
        return item.autosave_path  # already set aside
    item.autosave_path.rename(target)
    return target


class Autosaver(QObject):
    """Writes the model's project to its side file every minute while it is dirty."""

    autosaved = Signal(str)  # side file path
    autosave_failed = Signal(str)  # one-line problem

    def __init__(self, model: Any, recovery_dir: str | os.PathLike,
                 interval_ms: int = AUTOSAVE_INTERVAL_MS, parent: QObject | None = None):
        super().__init__(parent)
        self._model = model
        self.recovery_dir = Path(recovery_dir)
        self._untitled_name = f"untitled-{int(time.time())}-{os.getpid()}.spherokin.json"
        self._written: Path | None = None
        self._timer = QTimer(self)
        self._timer.setInterval(interval_ms)
        self._timer.timeout.connect(self.autosave_if_dirty)
        self._timer.start()
        model.dirty_changed.connect(self._on_dirty_changed)

    def side_path(self) -> Path:
        path = self._model.path
        if path:
            return side_path_for(path)
        return self.recovery_dir / (self._untitled_name + SIDE_SUFFIX)

    def autosave_if_dirty(self) -> Path | None:
        return self.autosave() if self._model.is_dirty() else None

    def autosave(self) -> Path | None:
        """Write the side file now (atomically); returns its path, None on failure."""
        from analysis.project.file import save_project

        target = self.side_path()
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            save_project(self._model.project, target)
        except Exception as exc:  # autosave must never disturb the session; a bug is logged
            self.autosave_failed.emit(f"{target}: autosave failed ({failure_line(exc, 'autosave')})")
            return None
        if self._written is not None and self._written != target:
            self._written.unlink(missing_ok=True)
        self._written = target
        self.autosaved.emit(str(target))
        return target

    def discard(self) -> None:
        """Remove the side file (after a save, or when the user discards the changes)."""
        for path in {self._written, self.side_path()} - {None}:
            path.unlink(missing_ok=True)
        self._written = None

    def _on_dirty_changed(self, dirty: bool) -> None:
        if not dirty:
            self.discard()


def find_recoverable(recovery_dir: str | os.PathLike | None, project_paths=()) -> list[Recoverable]:
    """Autosaves left behind: untitled ones in ``recovery_dir`` (None: not looked for) and
    beside known projects.

    Autosaves of sessions still running are skipped: a project locked by a live window
    (:mod:`app.core.project_lock`), or an untitled one whose name carries the id of a
    running process other than this one.
    """
    from app.core.project_lock import live_lock_owner

    found = []
    folder = None if recovery_dir is None else Path(recovery_dir)
    if folder is not None and folder.is_dir():
        for side in sorted(folder.glob("*" + SIDE_SUFFIX)):
            if not _belongs_to_live_session(side.name):
                found.append(Recoverable(side, None, side.stat().st_mtime))
    for project_path in dict.fromkeys(str(p) for p in project_paths):
        project = Path(project_path)
        if live_lock_owner(project_path) is not None:
            continue
        for side in sorted(project.parent.glob(glob.escape(project.name) + "*" + SIDE_SUFFIX)):
            if side.is_file():
                found.append(Recoverable(side, project_path, side.stat().st_mtime))
    return found


def _belongs_to_live_session(name: str) -> bool:
    from app.core.project_lock import process_is_running

    match = re.match(r"untitled-\d+-(\d+)\.", name)
    return bool(match) and int(match.group(1)) != os.getpid() and process_is_running(int(match.group(1)))


def load_recovered(item: Recoverable) -> Any:
    """The autosaved project, pointing back at its own project file (or untitled)."""
    from analysis.project.file import load_project

    project = load_project(item.autosave_path)
    return dataclasses.replace(project, path=item.project_path)
