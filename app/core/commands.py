"""Undoable commands on the project model.

Every change the user makes to a project is one of these commands pushed on the model's
QUndoStack: one gesture = one entry. Commands only swap immutable values (the frozen
``Experiment`` / ``Project`` dataclasses) in and out of the model, so undo is exact.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from PySide6.QtGui import QUndoCommand

if TYPE_CHECKING:  # pragma: no cover
    from app.core.model import ProjectModel


class ReplaceExperimentCommand(QUndoCommand):
    """Replace experiment ``index`` by ``new`` (properties, edits, settings...)."""

    def __init__(self, model: "ProjectModel", index: int, old: Any, new: Any, text: str):
        super().__init__(text)
        self._model, self._index, self._old, self._new = model, index, old, new

    def redo(self) -> None:
        self._model._store_experiment(self._index, self._new)

    def undo(self) -> None:
        self._model._store_experiment(self._index, self._old)


class InsertExperimentsCommand(QUndoCommand):
    """Append experiments at the end of the project (undo removes them again)."""

    def __init__(self, model: "ProjectModel", experiments: tuple, text: str):
        super().__init__(text)
        self._model, self._experiments = model, tuple(experiments)
        self._start = model.experiment_count()
        self._entries: list = [None] * len(self._experiments)

    def redo(self) -> None:
        for offset, experiment in enumerate(self._experiments):
            entry = self._entries[offset]
            self._model._insert_experiment(self._start + offset, experiment, entry)

    def undo(self) -> None:
        self._entries = [self._model._take_experiment(self._start) for _ in self._experiments]


class RemoveExperimentCommand(QUndoCommand):
    """Remove one experiment; undo puts it back with its cached analysis."""

    def __init__(self, model: "ProjectModel", index: int, text: str):
        super().__init__(text)
        self._model, self._index = model, index
        self._experiment = model.experiment(index)
        self._entry = None

    def redo(self) -> None:
        self._entry = self._model._take_experiment(self._index)

    def undo(self) -> None:
        self._model._insert_experiment(self._index, self._experiment, self._entry)


class ReplaceProjectFieldsCommand(QUndoCommand):
    """Change project-level fields (material, series constants) in one step."""

    def __init__(self, model: "ProjectModel", old: Any, new: Any, text: str):
        super().__init__(text)
        self._model, self._old, self._new = model, old, new

    def redo(self) -> None:
        self._model._store_project_fields(self._new)

    def undo(self) -> None:
        self._model._store_project_fields(self._old)
