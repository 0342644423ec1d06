"""The one worker abstraction: drive a progress generator off the GUI thread.

A :class:`GeneratorWorker` runs ``make_generator()`` on a QThreadPool thread, forwards
every yielded value through ``yielded``, the generator's return value through
``returned`` and any exception through ``errored``; ``finished`` always comes last.
``abort()`` sets a flag checked between yields (the generator is closed there, so its
``finally`` blocks run). Signals are queued to the receivers' thread; the worker never
touches a widget.
"""

from __future__ import annotations

import threading
from typing import Any, Callable, Generator

from PySide6.QtCore import QObject, QRunnable, QThreadPool, Signal


class WorkerSignals(QObject):
    started = Signal()
    yielded = Signal(object)
    returned = Signal(object)
    errored = Signal(object)  # the exception instance
    aborted = Signal()
    finished = Signal()


class GeneratorWorker(QRunnable):
    """Run a generator to completion in a pool thread, with an abort flag."""

    def __init__(self, make_generator: Callable[[], Generator[Any, None, Any]]):
        super().__init__()
        self.setAutoDelete(False)  # Python keeps the reference; signals outlive run()
        self.signals = WorkerSignals()
        self._make_generator = make_generator
        self._abort = threading.Event()
        self._done = threading.Event()

    def abort(self) -> None:
        """Ask the worker to stop at the next yield."""
        self._abort.set()

    @property
    def abort_requested(self) -> bool:
        return self._abort.is_set()

    def wait(self, timeout_s: float | None = None) -> bool:
        """Block until ``run`` has ended (for tests and shutdown)."""
        return self._done.wait(timeout_s)

    def run(self) -> None:  # runs in the pool thread
        signals = self.signals
        signals.started.emit()
        try:
            self._drive(signals)
        except Exception as exc:  # reported to the GUI thread, never raised in the pool
            signals.errored.emit(exc)
        finally:
            self._done.set()
            signals.finished.emit()

    def _drive(self, signals: WorkerSignals) -> None:
        generator = self._make_generator()
        while True:
            if self._abort.is_set():
                generator.close()
                signals.aborted.emit()
                return
            try:
                value = next(generator)
            except StopIteration as stop:
                signals.returned.emit(stop.value)
                return
            signals.yielded.emit(value)

    def start(self, pool: QThreadPool | None = None) -> "GeneratorWorker":
        (pool or QThreadPool.globalInstance()).start(self)
        return self
