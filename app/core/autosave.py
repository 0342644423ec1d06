"""Autosave of unsaved work to a side file, and recovery after a crash.

While the project has unsaved changes, its whole recipe (experiments, properties, the
edit list) is written every minute to a side file: ``<project>.autosave`` beside a saved
project, or ``untitled-<stamp>.spherokin.json.autosave`` in the recovery folder for a
project never saved. Saving, or closing and discarding, removes the side file; one that
is still there at the next start means the application did not close normally, and the
window offers to recover it.
"""

from __future__ import annotations

import dataclasses
import os
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
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(self.saved_at))
        return f"{self.project_path or 'an unsaved project'} (autosaved {when})"


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


def find_recoverable(recovery_dir: str | os.PathLike, project_paths=()) -> list[Recoverable]:
    """Autosaves left behind: untitled ones in ``recovery_dir`` and beside known projects."""
    found = []
    folder = Path(recovery_dir)
    if folder.is_dir():
        for side in sorted(folder.glob("*" + SIDE_SUFFIX)):
            found.append(Recoverable(side, None, side.stat().st_mtime))
    for project_path in dict.fromkeys(str(p) for p in project_paths):
        side = side_path_for(project_path)
        if side.is_file():
            found.append(Recoverable(side, project_path, side.stat().st_mtime))
    return found


def load_recovered(item: Recoverable) -> Any:
    """The autosaved project, pointing back at its own project file (or untitled)."""
    from analysis.project.file import load_project

    project = load_project(item.autosave_path)
    return dataclasses.replace(project, path=item.project_path)
