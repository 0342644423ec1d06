"""Runs the analysis of experiments one after the other in a worker, with cancel.

Results go into the :class:`app.core.model.ProjectModel` as soon as each experiment ends, so
the table and the viewer fill in while the rest are still running.
"""

from __future__ import annotations

import time
from typing import Any, Iterable

from PySide6.QtCore import QObject, QThreadPool, Signal

from app.core import model as m
from app.core.engine import AnalysisEngine
from app.core.errors import failure_line, one_line
from app.core.worker import GeneratorWorker

PROGRESS_INTERVAL_S = 0.05


class AnalysisRunner(QObject):
    """A queue of experiment indices analysed one at a time in a pool thread."""

    progressed = Signal(int, object)  # experiment index, analysis.progress.Progress
    experiment_finished = Signal(int)
    experiment_failed = Signal(int, str)  # index, one-line message
    experiment_errored = Signal(int, object)  # index, the exception (for app.core.errors)
    all_finished = Signal()
    busy_changed = Signal(bool)

    def __init__(self, model: "m.ProjectModel", pool: QThreadPool | None = None,
                 parent: QObject | None = None, *, engine: AnalysisEngine | None = None):
        super().__init__(parent)
        self._model = model
        self._engine: AnalysisEngine = engine or model.engine
        self._pool = pool or QThreadPool.globalInstance()
        self._queue: list[int] = []
        self._worker: GeneratorWorker | None = None
        self._retired: GeneratorWorker | None = None
        self._running_index = -1
        self._running_experiment: Any = None
        self._last_stage, self._last_emit_s = None, 0.0
        model.experiments_removed.connect(self._on_removed)
        model.experiments_inserted.connect(self._on_inserted)
        model.project_replaced.connect(self._on_project_replaced)

    # ---------------------------------------------------------------- public
    def is_busy(self) -> bool:
        return self._worker is not None

    @property
    def running_index(self) -> int:
        return self._running_index

    def run(self, indices: Iterable[int]) -> None:
        """Queue experiments (already queued or running ones are not added twice)."""
        was_busy = self.is_busy()
        for index in indices:
            if index != self._running_index and index not in self._queue:
                self._queue.append(index)
                self._model.set_status(index, m.STATUS_QUEUED)
        if not was_busy:
            self.busy_changed.emit(True)
            self._start_next()

    def run_all(self) -> None:
        self.run(range(self._model.experiment_count()))

    def cancel(self) -> None:
        """Stop the running analysis at its next progress report and empty the queue."""
        for index in self._queue:
            self._model.set_status(index, m.STATUS_CANCELLED)
        self._queue.clear()
        if self._worker is not None:
            self._worker.abort()

    def wait(self, timeout_s: float = 60.0) -> bool:
        """Block until the current worker ends (shutdown, tests). Does not run the queue."""
        return self._worker.wait(timeout_s) if self._worker is not None else True

    def run_sync(self, indices: Iterable[int]) -> list[str]:
        """Analyse in the calling thread (screenshots, scripts): returns error lines.

        A bug (anything but bad input) is logged with its traceback, and its line says so.
        """
        from analysis.progress import run_to_completion

        problems = []
        for index in indices:
            experiment = self._model.experiment(index)
            try:
                analysis = run_to_completion(self._engine.analyze_iter(experiment))
            except Exception as exc:  # reported either way; a bug is logged as one
                self._model.set_status(index, m.STATUS_FAILED, one_line(exc))
                problems.append(f"{experiment.name}: {failure_line(exc, 'analysis')}")
                continue
            self._model.set_analysis(index, analysis, experiment)
        return problems

    # ---------------------------------------------------------------- internals
    def _start_next(self) -> None:
        if not self._queue:
            self._worker, self._running_index = None, -1
            self.busy_changed.emit(False)
            self.all_finished.emit()
            return
        index = self._queue.pop(0)
        experiment = self._model.experiment(index)
        self._running_index, self._running_experiment = index, experiment
        self._last_stage, self._last_emit_s = None, 0.0
        self._model.set_status(index, m.STATUS_RUNNING, "starting")
        worker = GeneratorWorker(lambda: self._engine.analyze_iter(experiment))
        worker.signals.yielded.connect(self._on_progress)
        worker.signals.returned.connect(self._on_returned)
        worker.signals.errored.connect(self._on_errored)
        worker.signals.aborted.connect(self._on_aborted)
        worker.signals.finished.connect(self._on_finished)
        self._worker = worker
        worker.start(self._pool)

    def _on_progress(self, report: Any) -> None:
        """Forward progress, at most every 50 ms unless the stage changes."""
        now = time.monotonic()
        stage = getattr(report, "stage", None)
        if self._running_index < 0:
            return
        if stage == self._last_stage and now - self._last_emit_s < PROGRESS_INTERVAL_S:
            return
        self._last_stage, self._last_emit_s = stage, now
        self.progressed.emit(self._running_index, report)

    def _on_returned(self, analysis: Any) -> None:
        index = self._running_index
        if index < 0:
            return
        try:
            self._model.set_analysis(index, analysis, self._running_experiment)
        except Exception as exc:  # replaying edits made during the run failed: same report
            self._on_errored(exc)
            return
        self.experiment_finished.emit(index)

    def _on_errored(self, exc: BaseException) -> None:
        index = self._running_index
        if index < 0:
            return
        self._model.set_status(index, m.STATUS_FAILED, one_line(exc))
        self.experiment_failed.emit(index, f"{self._model.experiment(index).name}: {one_line(exc)}")
        self.experiment_errored.emit(index, exc)

    def _on_aborted(self) -> None:
        if self._running_index >= 0:
            self._model.set_status(self._running_index, m.STATUS_CANCELLED)

    def _on_finished(self) -> None:
        # keep the finished runnable one more round: its run() may still be unwinding
        self._retired, self._worker = self._worker, None
        self._start_next()

    def _on_project_replaced(self) -> None:
        self._queue.clear()
        self._running_index = -1
        if self._worker is not None:
            self._worker.abort()

    def _on_removed(self, first: int, last: int) -> None:
        count = last - first + 1
        if first <= self._running_index <= last:
            self._running_index = -1
            if self._worker is not None:
                self._worker.abort()
        elif self._running_index > last:
            self._running_index -= count
        self._queue = [i - count if i > last else i for i in self._queue if not first <= i <= last]

    def _on_inserted(self, first: int, last: int) -> None:
        count = last - first + 1
        if self._running_index >= first:
            self._running_index += count
        self._queue = [i + count if i >= first else i for i in self._queue]

