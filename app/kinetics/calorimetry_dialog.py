"""Column-mapping dialog for a calorimetry isotherm export.

Shows the first rows of the file as ``analysis.kinetics.calorimetry.sniff_calorimetry_file`` read
them (dialect, column row, metadata), lets the user pick the time and heat-flow columns,
their units, the exotherm direction, the sample mass and the material, and checks the
choice by analysing the whole file (``analyze_source``) before accepting. The result is an
``analysis.project.file.CalorimetrySource``; nothing is changed in the project here.

Nothing is overwritten silently: when the file's header names another temperature,
sample or mass than the experiment's, the dialog says so and asks before importing; the
instrument settings already stored (lag, exotherm direction, material) are kept for a new
file unless the user changes them.
"""

from __future__ import annotations

import dataclasses
import os

from PySide6 import QtCore, QtWidgets

from analysis.errors import InputError
from analysis.kinetics.calorimetry import (
    HeaderCheck,
    analyze_source,
    check_header,
    sniff_calorimetry_file,
)
from analysis.kinetics.materials import list_materials
from analysis.project.file import CalorimetrySource

_DELIMITER_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", " ": "spaces"}
_FROM_NAME = "from column name"


class CalorimetryMappingDialog(QtWidgets.QDialog):
    """Map the columns of one isotherm file. Raises InputError if the file cannot be sniffed."""

    def __init__(self, path: str, current: CalorimetrySource | None = None, parent=None, *,
                 experiment=None):
        super().__init__(parent)
        self.setWindowTitle(f"Import calorimetry isotherm: {os.path.basename(path)}")
        self.path = os.path.abspath(path)
        self.preview = sniff_calorimetry_file(self.path, max_rows=12)
        self._current = current if current is not None and current.file == self.path else None
        self._instrument = current  # lag, exotherm and material carry over to a new file
        self._source: CalorimetrySource | None = None
        self.header = HeaderCheck() if experiment is None else check_header(
            self.preview, temperature_c=experiment.temperature_c, experiment_name=experiment.name,
            mass_mg=current.mass_mg if current is not None else None)
        self.mismatches = self.header.conflicts
        self._build()
        self._fill_from(self._current)

    # ---------------------------------------------------------------- layout
    def _build(self) -> None:
        p = self.preview
        about = QtWidgets.QLabel(
            f"<b>{self.path}</b><br>{p.n_rows} data rows, separated by "
            f"{_DELIMITER_NAMES.get(p.delimiter, repr(p.delimiter))}, decimal mark "
            f"'{p.decimal}'" + ("" if p.header_line is not None else "; no column names found"))
        about.setWordWrap(True)
        about.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.table = self._preview_table()
        self.metadata = QtWidgets.QPlainTextEdit("\n".join(p.metadata) or "(no lines above the data)")
        self.metadata.setReadOnly(True)
        self.metadata.setMaximumHeight(80)
        self.error = QtWidgets.QLabel("")
        self.error.setObjectName("mapping_error")
        self.error.setWordWrap(True)
        self.error.setStyleSheet("color: #b91c1c;")
        buttons = QtWidgets.QDialogButtonBox(
            QtWidgets.QDialogButtonBox.StandardButton.Ok | QtWidgets.QDialogButtonBox.StandardButton.Cancel)
        buttons.button(QtWidgets.QDialogButtonBox.StandardButton.Ok).setText("Import")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout = QtWidgets.QVBoxLayout(self)
        layout.addWidget(about)
        said = self.header.conflicts + self.header.notes
        self.mismatch_note = QtWidgets.QLabel(
            "<b>The file's header differs from this experiment:</b> " + "; ".join(said)
            + ". Check that this is the right file." if said else "")
        self.mismatch_note.setObjectName("mismatch_note")
        self.mismatch_note.setWordWrap(True)
        self.mismatch_note.setStyleSheet("color: #9a3412;")
        self.mismatch_note.setVisible(bool(said))
        layout.addWidget(self.mismatch_note)
        layout.addWidget(QtWidgets.QLabel("Lines above the data"))
        layout.addWidget(self.metadata)
        layout.addWidget(QtWidgets.QLabel("First rows"))
        layout.addWidget(self.table, 1)
        layout.addLayout(self._mapping_form())
        layout.addWidget(self.error)
        layout.addWidget(buttons)
        self.resize(760, 620)

    def _preview_table(self) -> QtWidgets.QTableWidget:
        p = self.preview
        table = QtWidgets.QTableWidget(len(p.rows), len(p.columns))
        table.setObjectName("preview_table")
        table.setHorizontalHeaderLabels([f"{i}: {name}" for i, name in enumerate(p.columns)])
        table.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
        for r, row in enumerate(p.rows):
            for c, text in enumerate(row[: len(p.columns)]):
                table.setItem(r, c, QtWidgets.QTableWidgetItem(text))
        table.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.Stretch)
        return table

    def _mapping_form(self) -> QtWidgets.QFormLayout:
        names = [f"{i}: {name}" for i, name in enumerate(self.preview.columns)]
        self.time_col = QtWidgets.QComboBox(objectName="time_col")
        self.time_col.addItems(names)
        self.flow_col = QtWidgets.QComboBox(objectName="heat_flow_col")
        self.flow_col.addItems(names)
        self.time_unit = QtWidgets.QComboBox(objectName="time_unit")
        self.time_unit.addItems([_FROM_NAME, "s", "min"])
        self.flow_unit = QtWidgets.QComboBox(objectName="heat_flow_unit")
        self.flow_unit.addItems([_FROM_NAME, "mW", "W/g"])
        self.exotherm = QtWidgets.QComboBox(objectName="exotherm")
        self.exotherm.addItem("detect automatically", "auto")
        self.exotherm.addItem("exotherm up (positive)", "up")
        self.exotherm.addItem("exotherm down (negative)", "down")
        self.mass = QtWidgets.QDoubleSpinBox(objectName="mass_mg")
        self.mass.setRange(0.0, 1000.0)
        self.mass.setDecimals(3)
        self.mass.setSuffix(" mg")
        self.mass.setSpecialValueText("unknown")
        self.lag = QtWidgets.QDoubleSpinBox(objectName="lag_s")
        self.lag.setRange(0.0, 600.0)
        self.lag.setDecimals(2)
        self.lag.setSuffix(" s")
        self.lag.setSpecialValueText("no lag correction")
        self.lag.setToolTip("First-order time constant of the instrument, from its calibration")
        self.material = QtWidgets.QComboBox(objectName="material")
        self.material.addItem("none (no ΔH0, no density ratio)", None)
        for material in list_materials():
            self.material.addItem(f"{material.name} ({material.full_name})", material.name)
        for combo in (self.time_col, self.flow_col, self.time_unit, self.flow_unit):
            combo.currentIndexChanged.connect(lambda _i: self.error.setText(""))
        form = QtWidgets.QFormLayout()
        form.addRow("Time column", self.time_col)
        form.addRow("Time unit", self.time_unit)
        form.addRow("Heat-flow column", self.flow_col)
        form.addRow("Heat-flow unit", self.flow_unit)
        form.addRow("Exotherm direction", self.exotherm)
        form.addRow("Sample mass", self.mass)
        form.addRow("Instrument lag", self.lag)
        form.addRow("Material (ΔH0, densities)", self.material)
        return form

    def _fill_from(self, source: CalorimetrySource | None) -> None:
        p = self.preview
        time_col = self._column_index(source.time_col if source else None, p.time_col, 0)
        flow_col = self._column_index(source.heat_flow_col if source else None, p.heat_flow_col,
                                      1 if len(p.columns) > 1 else 0)
        self.time_col.setCurrentIndex(time_col)
        self.flow_col.setCurrentIndex(flow_col)
        self.time_unit.setCurrentText((source and source.time_unit) or _FROM_NAME)
        self.flow_unit.setCurrentText((source and source.heat_flow_unit) or _FROM_NAME)
        kept = source or self._instrument  # the stored instrument settings, also for a new file
        self.exotherm.setCurrentIndex(max(0, self.exotherm.findData(kept.exotherm if kept else "auto")))
        mass = (source.mass_mg if source else None) or p.mass_mg or (kept.mass_mg if kept else None)
        self.mass.setValue(mass or 0.0)
        self.lag.setValue((getattr(kept, "lag_s", 0.0) or 0.0) if kept else 0.0)
        material = kept.material if kept else None
        self.material.setCurrentIndex(max(0, self.material.findData(material)))

    def _column_index(self, chosen, guessed, fallback: int) -> int:
        if isinstance(chosen, int) and 0 <= chosen < len(self.preview.columns):
            return chosen
        if isinstance(chosen, str) and chosen in self.preview.columns:
            return self.preview.columns.index(chosen)
        return guessed if guessed is not None else fallback

    # ---------------------------------------------------------------- result
    def set_material(self, name: str | None) -> None:
        """Preselect a material (the project's), if the table knows it."""
        index = self.material.findData(name)
        if index >= 0:
            self.material.setCurrentIndex(index)

    def chosen_source(self) -> CalorimetrySource:
        """The mapping as it stands in the dialog (not yet checked)."""
        unit = lambda combo: None if combo.currentText() == _FROM_NAME else combo.currentText()
        columns = self.preview.columns
        # Column names are stored when the file has them: robust to re-exports with new columns.
        named = self.preview.header_line is not None
        pick = lambda combo: columns[combo.currentIndex()] if named else combo.currentIndex()
        base = self._current or CalorimetrySource(file=self.path)
        return dataclasses.replace(
            base, file=self.path, time_col=pick(self.time_col), heat_flow_col=pick(self.flow_col),
            time_unit=unit(self.time_unit), heat_flow_unit=unit(self.flow_unit),
            exotherm=self.exotherm.currentData(), mass_mg=self.mass.value() or None,
            material=self.material.currentData(), lag_s=self.lag.value())

    def source(self) -> CalorimetrySource | None:
        """The accepted mapping (None until the dialog was accepted)."""
        return self._source

    def confirm_mismatches(self) -> bool:
        """Ask before importing a file whose header disagrees with the experiment."""
        answer = QtWidgets.QMessageBox.question(
            self, "Import a file that does not match?",
            "The file's header differs from this experiment:\n• " + "\n• ".join(self.mismatches)
            + "\n\nImport it into this experiment anyway?",
            QtWidgets.QMessageBox.StandardButton.Yes | QtWidgets.QMessageBox.StandardButton.No,
            QtWidgets.QMessageBox.StandardButton.No)
        return answer == QtWidgets.QMessageBox.StandardButton.Yes

    def accept(self) -> None:
        candidate = self.chosen_source()
        try:  # the whole file with this mapping, so a bad choice is caught here
            analyze_source(candidate)
        except InputError as error:
            self.error.setText(str(error))
            return
        if self.mismatches and not self.confirm_mismatches():
            return
        self._source = candidate
        super().accept()
