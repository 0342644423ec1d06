"""The prediction's bootstrap intervals for the kinetics page, off the GUI thread.

The resampling (``app.kinetics.logic.interval_steps``) runs in the shared
``GeneratorWorker`` with a progress bar and Cancel, with the project's stored seed, so the
page shows the same numbers as the report and a re-run repeats them. Results are kept
per input (the result object, geometry, mode, thickness, seed): coming back to an
experiment does not resample again. A computation that ends before its first progress
report (no per-spherulite fits: a first-order formula) is finished on the spot.
"""

from __future__ import annotations

from PySide6 import QtCore, QtWidgets

from app.core.worker import GeneratorWorker
from app.kinetics import logic


def intervals_key(result, experiment, seed: int) -> tuple:
    """What the intervals depend on (the result by identity: a re-analysis is a new object)."""
    return (id(result), experiment.geometry, experiment.mode_override, experiment.thickness_um, seed)


class IntervalsJob(QtCore.QObject):
    """One resampling at a time; ``ready`` when a key's intervals are known."""

    ready = QtCore.Signal(object)  # the key

    def __init__(self, parent: QtWidgets.QWidget):
        super().__init__(parent)
        self._done: dict = {}  # key -> (result kept alive so its id stays unique, intervals)
        self._cancelled: set = set()
        self.worker: GeneratorWorker | None = None
        self._retired: list = []  # finished workers whose pool thread may still be unwinding
        self.key = None
        self.bar_widget = QtWidgets.QWidget(parent, objectName="intervals_bar")
        self.label = QtWidgets.QLabel("95 % intervals:", self.bar_widget)
        self.bar = QtWidgets.QProgressBar(self.bar_widget)
        self.bar.setRange(0, 1000)
        self.button = QtWidgets.QPushButton("Cancel", self.bar_widget, objectName="intervals_button")
        self.button.clicked.connect(self._button_clicked)
        row = QtWidgets.QHBoxLayout(self.bar_widget)
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(self.label)
        row.addWidget(self.bar, 1)
        row.addWidget(self.button)
        self.bar_widget.setVisible(False)
        self._pending = None  # (result, experiment, seed) of a cancelled key, for "Compute"

    @property
    def running(self) -> bool:
        return self.worker is not None

    def intervals(self, key):
        """The (prediction, bulk prediction) intervals of ``key``, or None."""
        found = self._done.get(key)
        return None if found is None else found[1]

    def cancelled(self, key) -> bool:
        return key in self._cancelled

    def request(self, result, experiment, seed: int):
        """The intervals if known; otherwise start computing them (unless the user cancelled
        this key) and return None."""
        key = intervals_key(result, experiment, seed)
        if key in self._done:
            if not self.running:
                self.bar_widget.setVisible(False)
            return self._done[key][1]
        if key == self.key and self.running:
            return None
        if key in self._cancelled:
            self._show_cancelled(result, experiment, seed)
            return None
        self.cancel()
        steps = logic.interval_steps(result, experiment, seed=seed)
        try:
            first = next(steps)
        except StopIteration as finished:  # a formula, not a resampling: done on the spot
            self._done[key] = (result, finished.value)
            return finished.value
        self.key = key
        self.worker = GeneratorWorker(lambda: steps)
        signals = self.worker.signals
        worker = self.worker
        signals.yielded.connect(self._progressed)
        signals.returned.connect(lambda value, k=key, r=result, w=worker: self._returned(w, k, r, value))
        signals.aborted.connect(lambda k=key, w=worker, args=(result, experiment, seed):
                                self._aborted(w, k, args))
        signals.errored.connect(lambda error, w=worker: self._errored(w, error))
        self._progressed(first)
        self.button.setText("Cancel")
        self.button.setVisible(True)
        self.bar_widget.setVisible(True)
        self.worker.start()
        return None

    def cancel(self) -> None:
        """Stop the running resampling (its key is then marked cancelled)."""
        if self.worker is not None:
            self.worker.abort()

    def wait(self, timeout_s: float = 30.0) -> bool:
        """Block until the running worker has ended (tests, shutdown); its signals are
        delivered when the event loop runs next."""
        return self.worker is None or self.worker.wait(timeout_s)

    def _button_clicked(self) -> None:
        if self.running:
            self.cancel()
        elif self._pending is not None:
            result, experiment, seed = self._pending
            self._cancelled.discard(intervals_key(result, experiment, seed))
            self._pending = None
            if self.request(result, experiment, seed) is not None:
                self.ready.emit(intervals_key(result, experiment, seed))

    def _progressed(self, report) -> None:
        self.bar.setVisible(True)
        self.bar.setValue(int(1000 * max(0.0, min(1.0, report.fraction))))
        self.label.setText(f"95 % intervals: {report.stage}")

    def _retire(self, worker) -> bool:
        """Forget ``worker``; False when it is not the current one (a superseded run)."""
        self._retired.append(worker)
        if worker is not self.worker:
            return False
        self.worker, self.key = None, None
        self.bar_widget.setVisible(False)
        return True

    def _returned(self, worker, key, result, value) -> None:
        self._done[key] = (result, value)  # kept even when superseded: it is still right
        if self._retire(worker):
            self.ready.emit(key)

    def _aborted(self, worker, key, args) -> None:
        self._cancelled.add(key)
        if self._retire(worker):
            self._show_cancelled(*args)
            self.ready.emit(key)

    def _errored(self, worker, error) -> None:
        if self._retire(worker):
            self.label.setText(f"95 % intervals not computed: {error}")
            self.bar.setVisible(False)
            self.button.setVisible(False)
            self.bar_widget.setVisible(True)

    def _show_cancelled(self, result, experiment, seed) -> None:
        self._pending = (result, experiment, seed)
        self.label.setText("95 % intervals: cancelled")
        self.bar.setVisible(False)
        self.button.setVisible(True)
        self.button.setText("Compute intervals")
        self.bar_widget.setVisible(True)
