"""The Qt model the whole GUI shares: the project, its undo stack, analyses and selection.

The project itself is a tree of frozen dataclasses (``analysis.project.file``); the model
swaps whole values in and out through undoable commands (``app.core.commands``), keeps the
per-experiment :class:`analysis.spherulites.pipeline.Analysis` cache, and tells views what happened
through past-tense signals. Views never change the project directly: they call the
methods below, which push one command per gesture.

Run alone (``python -m app.core.model PROJECT``) to print a summary of a project file.
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Iterable

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from app.core.commands import (
    InsertExperimentsCommand,
    RemoveExperimentCommand,
    ReplaceExperimentCommand,
    ReplaceProjectFieldsCommand,
)
from app.core.engine import AnalysisEngine, PipelineEngine

if TYPE_CHECKING:
    from analysis.spherulites.pipeline import Analysis

#: Experiment fields that do not change what the frame pass computes.
#: (The kind and temperature source only feed the ramp fit, redone from the cached analysis.)
_NON_RECIPE_FIELDS = {"name", "notes", "edits", "calorimetry", "mode_override", "stage_uncertainty_k",
                      "kind", "temperature_source"}
#: Project fields that commands may change (everything but the experiments and file data).
PROJECT_FIELDS = ("material", "series")

STATUS_NOT_RUN = "not run"
STATUS_QUEUED = "queued"
STATUS_RUNNING = "running"
STATUS_DONE = "done"
STATUS_STALE = "out of date"
STATUS_FAILED = "failed"
STATUS_CANCELLED = "cancelled"


@dataclass
class AnalysisEntry:
    """What the model knows about the analysis of one experiment."""

    analysis: Analysis | None = None  # edits applied
    status: str = STATUS_NOT_RUN
    message: str = ""  # the error of a failed run, or a progress stage


def recipe_of(experiment: Any) -> tuple:
    """The fields of an experiment that the frame pass depends on (for staleness)."""
    return tuple(
        (f.name, repr(getattr(experiment, f.name)))
        for f in dataclasses.fields(experiment)
        if f.name not in _NON_RECIPE_FIELDS
    )


def new_empty_project() -> Any:
    """An empty, unsaved project."""
    from analysis.project.file import new_project

    return new_project()


class ProjectModel(QObject):
    """Shared state of the application window (one project at a time)."""

    project_replaced = Signal()  # a new/opened/recovered project: views reset
    experiments_inserted = Signal(int, int)  # first, last index (inclusive)
    experiments_removed = Signal(int, int)
    experiment_changed = Signal(int)  # recipe, properties or edits of one experiment
    analysis_updated = Signal(int)  # new Analysis or re-applied edits (results changed)
    status_changed = Signal(int)  # analysis status / progress stage of one experiment
    selection_changed = Signal(int, int)  # experiment index (-1 none), spherulite id (-1 none)
    project_fields_changed = Signal()  # material / series constants
    dirty_changed = Signal(bool)
    path_changed = Signal(str)
    problem_reported = Signal(str, str)  # title, one-line message (shown in a dialog)
    error_raised = Signal(str, object)  # title, the exception (app.core.errors chooses the dialog)

    def __init__(self, project: Any = None, parent: QObject | None = None, *,
                 engine: AnalysisEngine | None = None):
        super().__init__(parent)
        #: The analysis behind the model (and its runner): the seam tests replace.
        self.engine: AnalysisEngine = engine or PipelineEngine()
        self.undo_stack = QUndoStack(self)
        self.undo_stack.cleanChanged.connect(self._on_clean_changed)
        self._project = project if project is not None else new_empty_project()
        self._entries = [AnalysisEntry() for _ in self._project.experiments]
        self._recovered = False  # dirty without undo history (recovered autosave)
        self._current, self._selected_id = -1, -1
        self._stacks: dict[tuple, Any] = {}
        if self._entries:
            self._current = 0

    # ---------------------------------------------------------------- queries
    @property
    def project(self) -> Any:
        return self._project

    @property
    def path(self) -> str | None:
        return self._project.path

    def experiment_count(self) -> int:
        return len(self._project.experiments)

    def experiment(self, index: int) -> Any:
        return self._project.experiments[index]

    def experiments(self) -> tuple:
        return tuple(self._project.experiments)

    def analysis(self, index: int) -> Analysis | None:
        """The cached ``Analysis`` of experiment ``index`` (edits applied), or None."""
        return self._entries[index].analysis

    def result(self, index: int) -> Any:
        """The ``ExperimentResult`` of experiment ``index``, or None before analysis."""
        analysis = self._entries[index].analysis
        return None if analysis is None else analysis.result

    def status(self, index: int) -> str:
        return self._entries[index].status

    def status_message(self, index: int) -> str:
        return self._entries[index].message

    def is_dirty(self) -> bool:
        return self._recovered or not self.undo_stack.isClean()

    @property
    def current_index(self) -> int:
        return self._current

    @property
    def selected_id(self) -> int:
        return self._selected_id

    def selected_spherulite(self) -> Any:
        """The selected ``Spherulite`` of the current experiment, or None."""
        if self._current < 0 or self._selected_id < 0:
            return None
        result = self.result(self._current)
        if result is None:
            return None
        try:
            return result.spherulite(self._selected_id)
        except KeyError:
            return None

    def frame_stack(self, index: int) -> Any:
        """The lazily read ``FrameStack`` of experiment ``index`` (opened once, reused).

        Raises ``InputError`` when the file cannot be opened.
        """
        from analysis.project.file import open_experiment_stack

        experiment = self.experiment(index)
        key = recipe_of(experiment)
        if key not in self._stacks:
            if len(self._stacks) > 8:
                self._stacks.clear()
            self._stacks[key] = open_experiment_stack(experiment)
        return self._stacks[key]

    # ---------------------------------------------------------------- selection
    def select(self, index: int, spherulite_id: int = -1) -> None:
        """Select experiment ``index`` and (optionally) one of its spherulites."""
        if not -1 <= index < self.experiment_count():
            raise IndexError(index)
        if (index, spherulite_id) == (self._current, self._selected_id):
            return
        self._current, self._selected_id = index, spherulite_id
        self.selection_changed.emit(index, spherulite_id)

    def select_spherulite(self, spherulite_id: int) -> None:
        self.select(self._current, spherulite_id)

    # ---------------------------------------------------------------- undoable changes
    def push(self, command: QUndoCommand) -> None:
        """Push any undoable command (it is executed now)."""
        self.undo_stack.push(command)

    def replace_experiment(self, index: int, new: Any, text: str) -> None:
        """Replace experiment ``index`` by ``new`` as one undo entry (no-op if equal)."""
        old = self.experiment(index)
        if new != old:
            self.push(ReplaceExperimentCommand(self, index, old, new, text))

    def set_experiment_properties(self, index: int, text: str | None = None, **changes) -> None:
        """Change fields of one experiment (``temperature_c=...``) as one undo entry."""
        names = ", ".join(sorted(changes))
        new = dataclasses.replace(self.experiment(index), **changes)
        self.replace_experiment(index, new, text or f"Set {names}")

    def push_edit(self, index: int, edit: Any, text: str | None = None) -> None:
        """Append one ``analysis.edits`` record to experiment ``index`` (one undo entry)."""
        self.push_edits(index, (edit,), text or describe_edit(edit))

    def push_edits(self, index: int, edits: Iterable[Any], text: str) -> None:
        """Append several ``analysis.edits`` records to experiment ``index`` as ONE undo
        entry (a split: the first centre moved and the second nucleus added)."""
        experiment = self.experiment(index)
        new = dataclasses.replace(experiment, edits=tuple(experiment.edits) + tuple(edits))
        self.replace_experiment(index, new, text)

    def remove_edit(self, index: int, position: int) -> None:
        """Remove the edit at ``position`` of experiment ``index``'s edit list."""
        experiment = self.experiment(index)
        edits = list(experiment.edits)
        removed = edits.pop(position)
        new = dataclasses.replace(experiment, edits=tuple(edits))
        self.replace_experiment(index, new, f"Remove edit: {describe_edit(removed)}")

    def add_experiments(self, experiments: Iterable[Any], text: str = "Add stacks") -> None:
        experiments = tuple(experiments)
        if experiments:
            self.push(InsertExperimentsCommand(self, experiments, text))

    def remove_experiment(self, index: int) -> None:
        name = self.experiment(index).name
        self.push(RemoveExperimentCommand(self, index, f"Remove {name}"))

    def set_project_fields(self, text: str | None = None, **changes) -> None:
        """Change project-level fields (``material``, ``series``) as one undo entry."""
        unknown = set(changes) - set(PROJECT_FIELDS)
        if unknown:
            raise ValueError(f"not a project field: {sorted(unknown)}")
        old = {name: getattr(self._project, name) for name in changes}
        if old != changes:
            text = text or f"Set {', '.join(sorted(changes))}"
            self.push(ReplaceProjectFieldsCommand(self, old, dict(changes), text))

    # ---------------------------------------------------------------- analysis results
    def set_status(self, index: int, status: str, message: str = "") -> None:
        entry = self._entries[index]
        entry.status, entry.message = status, message
        self.status_changed.emit(index)

    def set_analysis(self, index: int, analysis: Analysis, analysed: Any) -> None:
        """Store a finished analysis of ``analysed`` (the experiment as it was at start).

        Edits made while the analysis ran are applied now; a recipe changed in the
        meantime marks the result out of date rather than discarding it.
        """
        current = self.experiment(index)
        if tuple(analysed.edits) != tuple(current.edits):
            analysis = self.engine.apply_edits(analysis, tuple(current.edits))
        entry = self._entries[index]
        entry.analysis = analysis
        stale = recipe_of(analysed) != recipe_of(current)
        entry.status, entry.message = (STATUS_STALE if stale else STATUS_DONE), ""
        self.analysis_updated.emit(index)
        self.status_changed.emit(index)

    # ---------------------------------------------------------------- whole project
    def replace_project(self, project: Any, *, recovered: bool = False) -> None:
        """Show another project (new, opened or recovered); clears undo history."""
        self._project = project
        self._entries = [AnalysisEntry() for _ in project.experiments]
        self._stacks.clear()
        self.undo_stack.clear()
        self._recovered = recovered
        self._current = 0 if self._entries else -1
        self._selected_id = -1
        self.project_replaced.emit()
        self.path_changed.emit(project.path or "")
        self.dirty_changed.emit(self.is_dirty())
        self.selection_changed.emit(self._current, -1)

    def new_project(self) -> None:
        self.replace_project(new_empty_project())

    def open_project(self, path: str) -> None:
        """Load ``path`` (``InputError`` on a bad file; the current project is kept)."""
        from analysis.project.file import load_project

        self.replace_project(load_project(os.fspath(path)))

    def save(self, path: str | None = None) -> str:
        """Save atomically to ``path`` (default: the project's own); returns the path.

        On failure the exception propagates and the model is unchanged (still dirty).
        """
        from analysis.project.file import save_project

        target = os.fspath(path) if path else self._project.path
        if not target:
            raise ValueError("the project has no file yet: choose one with Save As")
        saved = save_project(self._project, target)
        old_path = self._project.path
        self._project = saved
        self._recovered = False
        self.undo_stack.setClean()
        self.dirty_changed.emit(False)
        if saved.path != old_path:
            self.path_changed.emit(saved.path or "")
        return saved.path

    # ---------------------------------------------------------------- used by commands
    def _store_experiment(self, index: int, new: Any) -> None:
        old = self.experiment(index)
        experiments = list(self._project.experiments)
        experiments[index] = new
        self._project = dataclasses.replace(self._project, experiments=tuple(experiments))
        self.experiment_changed.emit(index)
        entry = self._entries[index]
        if entry.analysis is None:
            return
        if recipe_of(old) != recipe_of(new) and entry.status == STATUS_DONE:
            entry.status = STATUS_STALE
            self.status_changed.emit(index)
        if tuple(old.edits) != tuple(new.edits):
            self._reapply_edits(index, new)
        self.analysis_updated.emit(index)

    def _reapply_edits(self, index: int, experiment: Any) -> None:
        entry = self._entries[index]
        try:
            entry.analysis = self.engine.apply_edits(entry.analysis, tuple(experiment.edits))
        except Exception as exc:  # the edit list is kept; only the refresh failed (bad input or bug:
            entry.status, entry.message = STATUS_FAILED, str(exc)  # the error dialog tells which)
            self.error_raised.emit(f"Could not apply the edits of {experiment.name}", exc)

    def _insert_experiment(self, index: int, experiment: Any, entry: Any) -> None:
        experiments = list(self._project.experiments)
        experiments.insert(index, experiment)
        self._project = dataclasses.replace(self._project, experiments=tuple(experiments))
        self._entries.insert(index, entry if entry is not None else AnalysisEntry())
        shifted = 0 <= index <= self._current  # the same experiment stays selected
        self._current += 1 if shifted else 0
        self.experiments_inserted.emit(index, index)
        if self._current < 0:
            self.select(index)
        elif shifted:
            self.selection_changed.emit(self._current, self._selected_id)

    def _take_experiment(self, index: int) -> Any:
        experiments = list(self._project.experiments)
        experiments.pop(index)
        self._project = dataclasses.replace(self._project, experiments=tuple(experiments))
        entry = self._entries.pop(index)
        before = (self._current, self._selected_id)
        if self._current == index or self._current >= self.experiment_count():
            self._current, self._selected_id = min(index, self.experiment_count() - 1), -1
        elif self._current > index:
            self._current -= 1
        self.experiments_removed.emit(index, index)  # views read the new selection
        if (self._current, self._selected_id) != before or before[0] == index:
            self.selection_changed.emit(self._current, self._selected_id)
        return entry

    def _store_project_fields(self, values: dict) -> None:
        self._project = dataclasses.replace(self._project, **values)
        self.project_fields_changed.emit()

    def _on_clean_changed(self, _clean: bool) -> None:
        self.dirty_changed.emit(self.is_dirty())


def describe_edit(edit: Any) -> str:
    """Short words for an edit record (undo history, edit lists): the detection it names
    by id and where it was, in image pixels."""
    kind = getattr(edit, "kind", type(edit).__name__)

    def which(det_id, x, y) -> str:
        where = f"({x:.1f}, {y:.1f}) px"
        return f"#{det_id} at {where}" if det_id is not None else f"at {where}"

    if kind == "ignore_frames":
        target = "the experiment" if edit.x_px is None else which(edit.id, edit.x_px, edit.y_px)
        return f"Ignore frames {edit.first_frame}-{edit.last_frame} of {target}"
    if kind == "add_nucleus":
        number = f" #{edit.id}" if edit.id is not None else ""
        return f"Add nucleus{number} at ({edit.x_px:.1f}, {edit.y_px:.1f}) px"
    target = which(edit.id, edit.x_px, edit.y_px)
    if kind == "merge_detections":
        return f"Merge {which(edit.other_id, edit.other_x_px, edit.other_y_px)} into {target}"
    if kind == "move_centre":
        return f"Move centre of {target} to ({edit.new_x_px:.1f}, {edit.new_y_px:.1f}) px"
    words = {"delete_detection": "Delete detection", "exclude": "Exclude spherulite",
             "include": "Include spherulite"}
    return f"{words.get(kind, kind)} {target}"


if __name__ == "__main__":  # pragma: no cover - quick look at a project file
    import sys

    from PySide6.QtCore import QCoreApplication

    app = QCoreApplication(sys.argv)
    model = ProjectModel()
    model.open_project(sys.argv[1])
    for i, exp in enumerate(model.experiments()):
        print(i, exp.name, exp.temperature_c, exp.stack_path, len(exp.edits), "edits")
