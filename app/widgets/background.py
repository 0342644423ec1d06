"""A row with a progress bar and Cancel for numbers computed off the GUI thread.

:class:`BackgroundResults` runs one progress generator at a time in the shared
``app.core.worker.GeneratorWorker`` and keeps what each finished one returned, by key
(what the numbers depend on), so that coming back to the same inputs does not compute
them again. A generator that ends before its first progress report is finished on the
spot. Cancel marks the key: a redraw does not restart it behind the user's back, the
row's "Compute" button does.
"""

from __future__ import annotations

from typing import Callable

from PySide6 import QtCore, QtWidgets
from shiboken6 import isValid

from app.core.worker import GeneratorWorker


def progress_row(parent: QtWidgets.QWidget, labels: list, *, object_name: str = ""):
    """A hidden row of ``labels``, a progress bar (0-1000) and a Cancel button:
    (row widget, bar, button)."""
    widget = QtWidgets.QWidget(parent, objectName=object_name)
    bar = QtWidgets.QProgressBar(widget)
    bar.setRange(0, 1000)
    button = QtWidgets.QPushButton("Cancel", widget)
    row = QtWidgets.QHBoxLayout(widget)
    row.setContentsMargins(0, 0, 0, 0)
    for label in labels:
        row.addWidget(label)
    row.addWidget(bar, 1)
    row.addWidget(button)
    widget.setVisible(False)
    return widget, bar, button


class BackgroundResults(QtCore.QObject):
    """Keyed results of progress generators, computed one at a time in a worker."""

    ready = QtCore.Signal(object)  # the key whose result (or cancellation) is now known

    def __init__(self, parent: QtWidgets.QWidget, title: str, *, object_name: str = "background_bar"):
        super().__init__(parent)
        self.title = title
        self._done: dict = {}  # key -> (objects kept alive with it, result)
        self._cancelled: set = set()
        self._pending = None  # (key, make_steps, keep) of the cancelled key shown
        self.worker: GeneratorWorker | None = None
        self._retired: list = []  # finished workers whose pool thread may still be unwinding
        self.key = None
        self.label = QtWidgets.QLabel(f"{title}:")
        self.bar_widget, self.bar, self.button = progress_row(parent, [self.label], object_name=object_name)
        self.button.clicked.connect(self._button_clicked)

    @property
    def running(self) -> bool:
        return self.worker is not None

    def result(self, key):
        """What the generator of ``key`` returned, or None (not known yet)."""
        found = self._done.get(key)
        return None if found is None else found[1]

    def cancelled(self, key) -> bool:
        return key in self._cancelled

    def request(self, key, make_steps: Callable, keep=None):
        """The result of ``key`` if known; else start ``make_steps()`` (a generator yielding
        ``Progress`` and returning the result) unless the user cancelled this key, and
        return None. ``keep``: objects held as long as the result (e.g. the input whose
        identity is part of the key)."""
        if key in self._done:
            if not self.running:
                self.bar_widget.setVisible(False)
            return self._done[key][1]
        if key == self.key and self.running:
            return None
        if key in self._cancelled:
            self._show_cancelled(key, make_steps, keep)
            return None
        self.cancel()
        steps = make_steps()
        try:
            first = next(steps)
        except StopIteration as finished:  # nothing slow to do: done on the spot
            self._done[key] = (keep, finished.value)
            if not self.running:
                self.bar_widget.setVisible(False)
            return finished.value
        worker = self.worker = GeneratorWorker(lambda: steps)
        self.key = key
        signals = worker.signals
        signals.yielded.connect(self._progressed)
        signals.returned.connect(lambda value: self._returned(worker, key, keep, value))
        signals.aborted.connect(lambda: self._aborted(worker, key, make_steps, keep))
        signals.errored.connect(lambda error: self._errored(worker, error))
        self.destroyed.connect(worker.abort)  # a closed page stops its computation
        self._progressed(first)
        self.button.setText("Cancel")
        self.button.setVisible(True)
        self.bar_widget.setVisible(True)
        worker.start()
        return None

    def cancel(self) -> None:
        """Stop the running generator at its next progress report (its key is marked)."""
        if self.worker is not None:
            self.worker.abort()

    def wait(self, timeout_s: float = 30.0) -> bool:
        """Block until the running worker has ended (tests, shutdown); its signals arrive
        when the event loop runs next."""
        return self.worker is None or self.worker.wait(timeout_s)

    def _button_clicked(self) -> None:
        if self.running:
            self.cancel()
        elif self._pending is not None:
            key, make_steps, keep = self._pending
            self._pending = None
            self._cancelled.discard(key)
            if self.request(key, make_steps, keep) is not None:
                self.ready.emit(key)

    def _alive(self) -> bool:
        """False once the page (and this object's widgets) are gone; late signals of its
        worker are then ignored."""
        return isValid(self) and isValid(self.bar_widget)

    def _progressed(self, report) -> None:
        if not self._alive():
            return
        self.bar.setVisible(True)
        self.bar.setValue(int(1000 * max(0.0, min(1.0, report.fraction))))
        self.label.setText(f"{self.title}: {report.stage}")

    def _retire(self, worker) -> bool:
        """Forget ``worker``; False when it is no longer the current one (superseded) or
        the page is gone."""
        self._retired.append(worker)
        if worker is not self.worker or not self._alive():
            return False
        self.worker, self.key = None, None
        self.bar_widget.setVisible(False)
        return True

    def _returned(self, worker, key, keep, value) -> None:
        self._done[key] = (keep, value)  # kept even when superseded: it is still right
        if self._retire(worker):
            self.ready.emit(key)

    def _aborted(self, worker, key, make_steps, keep) -> None:
        self._cancelled.add(key)
        if self._retire(worker):
            self._show_cancelled(key, make_steps, keep)
            self.ready.emit(key)

    def _errored(self, worker, error) -> None:
        if self._retire(worker):
            self.label.setText(f"{self.title} not computed: {error}")
            self.bar.setVisible(False)
            self.button.setVisible(False)
            self.bar_widget.setVisible(True)

    def _show_cancelled(self, key, make_steps, keep) -> None:
        self._pending = (key, make_steps, keep)
        self.label.setText(f"{self.title}: cancelled")
        self.bar.setVisible(False)
        self.button.setVisible(True)
        self.button.setText("Compute")
        self.bar_widget.setVisible(True)
