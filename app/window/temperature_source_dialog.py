"""Editor of an experiment's kind (isothermal or ramp) and its temperature source.

A ramp experiment needs the sample temperature against the recording clock: either the
stage's temperature log (columns mapped like the calorimetry import, units from the
header unless chosen here) or a programme typed in as a start temperature and segments
(ramp at a rate to an end temperature, or hold for some minutes). The clock offset and
the sensor lag (both in s) apply to either. The choice is checked by reading the whole
log (or building the programme) with ``analysis.kinetics.temperature_programme`` before
the dialog accepts; a bad log gives its one-line error naming the file. Nothing is
changed in the project here: :meth:`TemperatureSourceDialog.result_values` gives the new
``kind`` and ``temperature_source`` for one undo step.
"""

from __future__ import annotations

import math
import os

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from analysis.errors import InputError
from analysis.kinetics.temperature_programme import (
    ProgrammeSegment,
    format_programme,
    parse_programme,
    programme_of_source,
    sniff_temperature_log,
)
from analysis.project.model import TemperatureSource
from app.core.errors import one_line

KIND_LABELS = (("isothermal", "Isothermal: one crystallization temperature"),
               ("ramp", "Ramp or steps: temperature follows a programme"))
_FROM_HEADER = "from the column name"
_TIME_UNITS = (_FROM_HEADER, "s", "min", "h")
_TEMPERATURE_UNITS = ((_FROM_HEADER, None), ("°C", "C"), ("K", "K"))
_RAMP, _HOLD = "ramp to", "hold"


def _spin(minimum: float, maximum: float, decimals: int, suffix: str, name: str) -> QtWidgets.QDoubleSpinBox:
    box = QtWidgets.QDoubleSpinBox(objectName=name)
    box.setRange(minimum, maximum)
    box.setDecimals(decimals)
    box.setSuffix(suffix)
    return box


class TemperatureSourceDialog(QtWidgets.QDialog):
    """Kind and temperature source of one experiment.

    ``frame_times_s``: the recording's first and last frame times (s), when known; the
    source must then cover them.
    """

    def __init__(self, experiment, frame_times_s: tuple[float, float] | None = None, parent=None):
        super().__init__(parent)
        self.setWindowTitle(f"Temperature of {experiment.name}")
        self._experiment = experiment
        self._frames = frame_times_s
        self._preview = None
        self._values = None
        self._build()
        self._fill(experiment)
        self._update_enabled()
        self._refresh_preview()

    # ---------------------------------------------------------------- layout
    def _build(self) -> None:
        self.kind = QtWidgets.QComboBox(objectName="kind")
        for key, label in KIND_LABELS:
            self.kind.addItem(label, key)
        self.from_log = QtWidgets.QRadioButton("Stage temperature log (a delimited text file)",
                                               objectName="from_log")
        self.from_programme = QtWidgets.QRadioButton("Programme typed in", objectName="from_programme")
        self.from_log.setChecked(True)
        self.pages = QtWidgets.QStackedWidget()
        self.pages.addWidget(self._log_page())
        self.pages.addWidget(self._programme_page())
        self.clock_offset = _spin(-1e6, 1e6, 2, " s", "clock_offset_s")
        self.clock_offset.setToolTip("Added to the log's (or programme's) times to put them on the "
                                     "recording clock: a log started 12 s before the camera has −12 s")
        self.lag = _spin(0.0, 600.0, 2, " s", "lag_s")
        self.lag.setSpecialValueText("no lag correction")
        self.lag.setToolTip("First-order time constant of the film behind the stage sensor")
        common = QtWidgets.QFormLayout()
        common.addRow("Clock offset", self.clock_offset)
        common.addRow("Sensor lag", self.lag)
        self.plot = pg.PlotWidget(background="w")
        self.plot.setObjectName("programme_plot")
        self.plot.setMinimumHeight(170)
        self.plot.setLabel("bottom", "time on the recording clock (s)")
        self.plot.setLabel("left", "sample temperature (°C)")
        self.summary = QtWidgets.QLabel("", objectName="summary")
        self.summary.setWordWrap(True)
        self.error = QtWidgets.QLabel("", objectName="source_error")
        self.error.setWordWrap(True)
        self.error.setStyleSheet("color: #b91c1c;")
        caution = QtWidgets.QLabel("Hot-stage work: follow your lab's safety rules for hot surfaces "
                                   "and for fumes from degrading polymer.")
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #57534e;")
        buttons = QtWidgets.QDialogButtonBox(QtWidgets.QDialogButtonBox.StandardButton.Ok
                                             | QtWidgets.QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        self.source_box = QtWidgets.QGroupBox("Temperature source")
        inner = QtWidgets.QVBoxLayout(self.source_box)
        choice = QtWidgets.QHBoxLayout()
        choice.addWidget(self.from_log)
        choice.addWidget(self.from_programme)
        choice.addStretch(1)
        inner.addLayout(choice)
        inner.addWidget(self.pages)
        inner.addLayout(common)
        inner.addWidget(self.plot)
        inner.addWidget(self.summary)
        layout = QtWidgets.QVBoxLayout(self)
        kind_row = QtWidgets.QFormLayout()
        kind_row.addRow("Kind of experiment", self.kind)
        layout.addLayout(kind_row)
        layout.addWidget(self.source_box, 1)
        layout.addWidget(self.error)
        layout.addWidget(caution)
        layout.addWidget(buttons)
        self.kind.currentIndexChanged.connect(self._update_enabled)
        self.from_log.toggled.connect(self._update_enabled)
        for box in (self.clock_offset, self.lag):
            box.valueChanged.connect(self._refresh_preview)
        self.resize(760, 720)

    def _log_page(self) -> QtWidgets.QWidget:
        page = QtWidgets.QWidget()
        self.log_file = QtWidgets.QLineEdit(objectName="log_file")
        self.log_file.setPlaceholderText("path of the stage's temperature log")
        self.log_file.editingFinished.connect(self._load_log)
        browse = QtWidgets.QPushButton("Browse…", objectName="browse_log")
        browse.clicked.connect(self._browse)
        row = QtWidgets.QHBoxLayout()
        row.addWidget(self.log_file, 1)
        row.addWidget(browse)
        self.table = QtWidgets.QTableWidget(0, 0, objectName="log_preview")
        self.table.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.setMaximumHeight(130)
        self.table.setMinimumHeight(110)
        self.time_col = QtWidgets.QComboBox(objectName="time_col")
        self.temperature_col = QtWidgets.QComboBox(objectName="temperature_col")
        self.time_unit = QtWidgets.QComboBox(objectName="time_unit")
        self.time_unit.addItems(_TIME_UNITS)
        self.temperature_unit = QtWidgets.QComboBox(objectName="temperature_unit")
        for label, value in _TEMPERATURE_UNITS:
            self.temperature_unit.addItem(label, value)
        for combo in (self.time_col, self.temperature_col, self.time_unit, self.temperature_unit):
            combo.currentIndexChanged.connect(self._refresh_preview)
        form = QtWidgets.QFormLayout()
        form.addRow("Log file", row)
        form.addRow("Time column", self.time_col)
        form.addRow("Time unit", self.time_unit)
        form.addRow("Temperature column", self.temperature_col)
        form.addRow("Temperature unit", self.temperature_unit)
        layout = QtWidgets.QVBoxLayout(page)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addLayout(form)
        layout.addWidget(self.table)
        return page

    def _programme_page(self) -> QtWidgets.QWidget:
        page = QtWidgets.QWidget()
        self.start_c = _spin(-100.0, 500.0, 2, " °C", "start_c")
        self.start_c.valueChanged.connect(self._refresh_preview)
        self.segments = QtWidgets.QTableWidget(0, 4, objectName="segments")
        self.segments.setHorizontalHeaderLabels(["segment", "rate (K/min)", "end (°C)", "hold (min)"])
        self.segments.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.Stretch)
        self.segments.setMaximumHeight(150)
        self.segments.itemChanged.connect(lambda _item: self._refresh_preview())
        add_ramp = QtWidgets.QPushButton("Add a ramp", objectName="add_ramp")
        add_ramp.clicked.connect(lambda: self.add_segment(ProgrammeSegment(5.0, self.start_c.value() - 20.0)))
        add_hold = QtWidgets.QPushButton("Add a hold", objectName="add_hold")
        add_hold.clicked.connect(lambda: self.add_segment(ProgrammeSegment(hold_s=300.0)))
        remove = QtWidgets.QPushButton("Remove the selected segment", objectName="remove_segment")
        remove.clicked.connect(self._remove_segment)
        buttons = QtWidgets.QHBoxLayout()
        for button in (add_ramp, add_hold, remove):
            buttons.addWidget(button)
        buttons.addStretch(1)
        form = QtWidgets.QFormLayout()
        form.addRow("Start temperature", self.start_c)
        layout = QtWidgets.QVBoxLayout(page)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addLayout(form)
        layout.addWidget(self.segments)
        layout.addLayout(buttons)
        return page

    # ---------------------------------------------------------------- filling in
    def _fill(self, experiment) -> None:
        self.kind.setCurrentIndex(max(0, self.kind.findData(experiment.kind)))
        source = experiment.temperature_source or TemperatureSource()
        self.clock_offset.setValue(source.clock_offset_s)
        self.lag.setValue(source.lag_s)
        start, segments = 150.0, ()
        if source.programme:
            try:
                start, segments = parse_programme(source.programme)
            except InputError:
                pass  # a stored programme that no longer parses: the form starts empty
        self.start_c.setValue(start)
        for segment in segments:
            self.add_segment(segment)
        if source.programme and not source.log_file:
            self.from_programme.setChecked(True)
        if source.log_file:
            self.log_file.setText(source.log_file)
            self._load_log(source)

    def add_segment(self, segment: ProgrammeSegment) -> None:
        """Append one ramp or hold row to the programme table."""
        blocked = self.segments.blockSignals(True)
        row = self.segments.rowCount()
        self.segments.insertRow(row)
        hold = segment.hold_s is not None
        kind = QtWidgets.QComboBox()
        kind.addItems([_RAMP, _HOLD])
        kind.setCurrentText(_HOLD if hold else _RAMP)
        kind.currentIndexChanged.connect(lambda _i: self._refresh_preview())
        self.segments.setCellWidget(row, 0, kind)
        values = ("", "", f"{segment.hold_s / 60.0:g}") if hold else \
            (f"{segment.rate_k_per_min:g}", f"{segment.end_c:g}", "")
        for column, text in enumerate(values, start=1):
            self.segments.setItem(row, column, QtWidgets.QTableWidgetItem(text))
        self.segments.blockSignals(blocked)
        self._refresh_preview()

    def _remove_segment(self) -> None:
        row = self.segments.currentRow()
        if row < 0:
            row = self.segments.rowCount() - 1
        if row >= 0:
            self.segments.removeRow(row)
            self._refresh_preview()

    def _browse(self) -> None:
        start = os.path.dirname(self.log_file.text()) or os.path.dirname(self._experiment.stack_path)
        path, _ = QtWidgets.QFileDialog.getOpenFileName(self, "Stage temperature log", start,
                                                        "Text tables (*.csv *.txt *.tsv *.dat);;All files (*)")
        if path:
            self.set_log_file(path)

    def set_log_file(self, path: str) -> None:
        """Show a log file's columns (what Browse does)."""
        self.log_file.setText(path)
        self._load_log()

    def _load_log(self, source: TemperatureSource | None = None) -> None:
        path = self.log_file.text().strip()
        self._preview = None
        for combo in (self.time_col, self.temperature_col):
            combo.blockSignals(True)
            combo.clear()
        self.table.clear()
        self.table.setRowCount(0)
        self.table.setColumnCount(0)
        try:
            if path:
                self._preview = sniff_temperature_log(path, max_rows=8)
        except InputError as error:
            self.error.setText(one_line(error))
        preview = self._preview
        if preview is not None:
            names = [f"{i}: {name}" for i, name in enumerate(preview.columns)]
            self.time_col.addItems(names)
            self.temperature_col.addItems(names)
            self.time_col.setCurrentIndex(self._column(source.time_col if source else None, preview.time_col, 0))
            self.temperature_col.setCurrentIndex(
                self._column(source.temperature_col if source else None, preview.temperature_col,
                             min(1, len(names) - 1)))
            self.table.setColumnCount(len(preview.columns))
            self.table.setRowCount(len(preview.rows))
            self.table.setHorizontalHeaderLabels(names)
            for r, row in enumerate(preview.rows):
                for c, text in enumerate(row[:len(preview.columns)]):
                    self.table.setItem(r, c, QtWidgets.QTableWidgetItem(text))
            self.table.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.Stretch)
        if source is not None:
            self.time_unit.setCurrentText(source.time_unit or _FROM_HEADER)
            self.temperature_unit.setCurrentIndex(max(0, self.temperature_unit.findData(source.temperature_unit)))
        for combo in (self.time_col, self.temperature_col):
            combo.blockSignals(False)
        self._refresh_preview()

    def _column(self, chosen, guessed, fallback: int) -> int:
        columns = self._preview.columns
        if isinstance(chosen, int) and 0 <= chosen < len(columns):
            return chosen
        if isinstance(chosen, str) and chosen in columns:
            return columns.index(chosen)
        return guessed if guessed is not None else fallback

    # ---------------------------------------------------------------- the source
    def _segments(self) -> tuple[ProgrammeSegment, ...]:
        out = []
        for row in range(self.segments.rowCount()):
            hold = self.segments.cellWidget(row, 0).currentText() == _HOLD
            cells = [(self.segments.item(row, c).text() if self.segments.item(row, c) else "").strip()
                     for c in (1, 2, 3)]
            try:
                if hold:
                    out.append(ProgrammeSegment(hold_s=float(cells[2].replace(",", ".")) * 60.0))
                else:
                    out.append(ProgrammeSegment(rate_k_per_min=float(cells[0].replace(",", ".")),
                                                end_c=float(cells[1].replace(",", "."))))
            except ValueError:
                what = "a hold time in min" if hold else "a rate in K/min and an end temperature in °C"
                raise InputError(f"programme segment {row + 1} needs {what}") from None
        if not out:
            raise InputError("the programme has no segments: add a ramp or a hold")
        return tuple(out)

    def chosen_source(self) -> TemperatureSource:
        """The source as the form stands (InputError when a field is unusable)."""
        offset, lag = self.clock_offset.value(), self.lag.value()
        if self.from_log.isChecked():
            path = self.log_file.text().strip()
            if not path:
                raise InputError("choose the stage temperature log (or type a programme)")
            preview = self._preview
            if preview is None:
                preview = sniff_temperature_log(path, max_rows=1)
            pick = (lambda combo: preview.columns[combo.currentIndex()]) if preview.has_header \
                else (lambda combo: combo.currentIndex())
            time_unit = self.time_unit.currentText()
            return TemperatureSource(
                log_file=os.path.abspath(path), time_col=pick(self.time_col),
                temperature_col=pick(self.temperature_col),
                time_unit=None if time_unit == _FROM_HEADER else time_unit,
                temperature_unit=self.temperature_unit.currentData(), clock_offset_s=offset, lag_s=lag)
        start = self.start_c.value()
        segments = self._segments()
        # the same checks the analysis makes (rates positive, ends differ) with its wording
        text = format_programme(start, segments)
        parse_programme(text)
        return TemperatureSource(programme=text, clock_offset_s=offset, lag_s=lag)

    def _checked_programme(self, source: TemperatureSource):
        programme = programme_of_source(source)
        if self._frames is not None:
            programme.require_coverage(*self._frames)
        return programme

    def _update_enabled(self) -> None:
        ramp = self.kind.currentData() == "ramp"
        self.source_box.setEnabled(ramp)
        self.pages.setCurrentIndex(0 if self.from_log.isChecked() else 1)
        self._refresh_preview()

    def _refresh_preview(self, *_args) -> None:
        """Draw T(t) of the source as it stands, with the recording's span."""
        if not hasattr(self, "summary"):
            return
        self.plot.clear()
        self.error.setText("")
        if self.kind.currentData() != "ramp":
            self.summary.setText("An isothermal experiment uses its Tc (Experiment properties); "
                                 "a temperature source, if any, is kept but not used.")
            return
        try:
            source = self.chosen_source()
            programme = programme_of_source(source)
        except InputError as error:
            self.summary.setText("")
            self.error.setText(one_line(error))
            return
        first, last = float(programme.time_s[0]), float(programme.time_s[-1])
        text = (f"{programme.temperature_c.min():.1f} to {programme.temperature_c.max():.1f} °C over "
                f"{first:g} to {last:g} s of the recording clock.")
        if self._frames is not None:
            lo, hi = self._frames
            margin = 0.25 * max(hi - lo, 1.0)
            first, last = max(first, lo - margin), min(last, hi + margin)
            self.plot.addItem(pg.LinearRegionItem((lo, hi), movable=False, brush=(43, 76, 126, 40)))
            try:
                programme.require_coverage(lo, hi)
                at = programme.temperature_at(np.array([lo, hi]))
                text = (f"Sample temperature {at[0]:.1f} °C at the first frame ({lo:g} s), {at[1]:.1f} °C "
                        f"at the last ({hi:g} s); the shaded span is the recording.")
            except InputError as error:
                self.error.setText(one_line(error))
        if last > first:
            inner = programme.time_s[(programme.time_s > first) & (programme.time_s < last)]
            t = np.union1d(np.linspace(first, last, 800), inner)
            self.plot.plot(t, programme.temperature_at(t), pen=pg.mkPen("#2b4c7e", width=2))
        self.summary.setText(text)

    # ---------------------------------------------------------------- result
    def result_values(self) -> dict | None:
        """``{"kind": ..., "temperature_source": ...}`` once accepted (None before)."""
        return self._values

    def accept(self) -> None:
        kind = self.kind.currentData()
        source = self._experiment.temperature_source
        if kind == "ramp":
            try:
                source = self.chosen_source()
                self._checked_programme(source)
            except InputError as error:
                self.error.setText(one_line(error))
                return
        self._values = {"kind": kind, "temperature_source": source}
        super().accept()


def frame_span(stack) -> tuple[float, float] | None:
    """(first, last) frame time in s of a frame stack on the recording clock, when it has times."""
    times = getattr(stack, "times_s", None)
    if times is None or len(times) == 0 or not all(math.isfinite(float(t)) for t in (times[0], times[-1])):
        return None
    return float(times[0]), float(times[-1])


if __name__ == "__main__":  # pragma: no cover
    import sys

    from app.core.model import ProjectModel

    app = QtWidgets.QApplication(sys.argv)
    shared = ProjectModel()
    shared.open_project(sys.argv[1])
    index = int(sys.argv[2]) if len(sys.argv) > 2 else 0
    dialog = TemperatureSourceDialog(shared.experiment(index))
    dialog.exec()
    print(dialog.result_values())
    QtCore.QTimer.singleShot(0, app.quit)
