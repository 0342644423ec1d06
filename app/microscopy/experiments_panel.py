"""The experiments list: one row per crystallization temperature.

Columns: name, Tc ("ramp" for a temperature programme), number of spherulites, pooled growth rate G ± CI half-width, and the
analysis status. Selecting a row selects the experiment everywhere; double-click opens
its properties.

Run alone: ``python -m app.microscopy.experiments_panel PROJECT``.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (
    QAbstractItemView,
    QHeaderView,
    QTableWidget,
    QTableWidgetItem,
)

from analysis.results import COUNTS
from app.widgets.formatting import DASH, fmt_pm
from app.core import model as m

COLUMNS = ("Experiment", "Tc (°C)", COUNTS["spherulites_detected"][0], "G (µm/min)", "Status")
COLUMN_TIPS = ("Name of the experiment (one stack)", "Crystallization temperature",
               f"{COUNTS['spherulites_detected'][0]}: {COUNTS['spherulites_detected'][1]}",
               "Pooled growth rate ± half-width of its 95 % confidence interval",
               "State of the analysis")
NAME_SHARE = 0.5
STATUS_TINTS = {
    m.STATUS_DONE: "#7fd8a8",
    m.STATUS_STALE: "#ffcc66",
    m.STATUS_FAILED: "#ff7f7f",
    m.STATUS_RUNNING: "#8fc7ff",
    m.STATUS_QUEUED: "#b5b5d0",
    m.STATUS_CANCELLED: "#c0a080",
}


def format_growth_rate(result: Any) -> str:
    """'12.4 ± 0.8 (95 % CI)' or '—' when there is no pooled G (the column names the unit)."""
    if result is None or result.growth_rate.value is None:
        return DASH
    return fmt_pm(result.growth_rate.value, result.growth_rate.ci95_half_width)


def row_values(model: "m.ProjectModel", index: int) -> tuple[str, ...]:
    experiment, result = model.experiment(index), model.result(index)
    if experiment.kind == "ramp":
        tc = "ramp"
    else:
        tc = DASH if experiment.temperature_c is None else f"{experiment.temperature_c:g}"
    count = "—" if result is None else str(result.counts()["spherulites_detected"])
    status = model.status(index)
    if status == m.STATUS_RUNNING and model.status_message(index):
        status = f"running: {model.status_message(index)}"
    return experiment.name, tc, count, format_growth_rate(result), status


class ExperimentsPanel(QTableWidget):
    """Table of the project's experiments, kept in step with the model."""

    properties_requested = Signal(int)

    def __init__(self, model: "m.ProjectModel", parent=None):
        super().__init__(0, len(COLUMNS), parent)
        self._model = model
        self.setHorizontalHeaderLabels(COLUMNS)
        for column, tip in enumerate(COLUMN_TIPS):
            self.horizontalHeaderItem(column).setToolTip(tip)
        self.setSelectionBehavior(QAbstractItemView.SelectRows)
        self.setSelectionMode(QAbstractItemView.SingleSelection)
        self.setEditTriggers(QAbstractItemView.NoEditTriggers)
        self.verticalHeader().setVisible(False)
        self.setTextElideMode(Qt.ElideMiddle)
        self.setWordWrap(False)
        header = self.horizontalHeader()
        header.setSectionResizeMode(0, QHeaderView.Interactive)
        for column in range(1, len(COLUMNS)):
            header.setSectionResizeMode(column, QHeaderView.ResizeToContents)
        self.itemSelectionChanged.connect(self._on_rows_selected)
        self.cellDoubleClicked.connect(lambda row, _col: self.properties_requested.emit(row))
        for signal in (model.project_replaced, model.experiments_inserted, model.experiments_removed):
            signal.connect(lambda *_: self.rebuild())
        model.experiment_changed.connect(self.refresh_row)
        model.analysis_updated.connect(self.refresh_row)
        model.status_changed.connect(self.refresh_row)
        model.selection_changed.connect(self._on_selection_changed)
        self.rebuild()

    def resizeEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().resizeEvent(event)
        self.fit_name_column()

    def fit_name_column(self) -> None:
        """The name takes what the other columns leave, but never less than
        NAME_SHARE of the width: Tc must stay in view in a narrow dock (the full name is
        in the tooltip)."""
        width = self.viewport().width()
        others = sum(self.columnWidth(column) for column in range(1, len(COLUMNS)))
        self.setColumnWidth(0, max(int(width * NAME_SHARE), width - others))

    def rebuild(self) -> None:
        self.blockSignals(True)
        self.setRowCount(self._model.experiment_count())
        for row in range(self._model.experiment_count()):
            self._fill_row(row)
        self.blockSignals(False)
        self.fit_name_column()
        self._on_selection_changed(self._model.current_index, -1)

    def refresh_row(self, row: int) -> None:
        if 0 <= row < self.rowCount():
            self._fill_row(row)
            self.fit_name_column()

    def _fill_row(self, row: int) -> None:
        values = row_values(self._model, row)
        tint = STATUS_TINTS.get(self._model.status(row))
        for column, text in enumerate(values):
            item = self.item(row, column)
            if item is None:
                item = QTableWidgetItem()
                self.setItem(row, column, item)
            item.setText(text)
            if column == 0:
                item.setToolTip(text)
            if column in (1, 2, 3):
                item.setTextAlignment(Qt.AlignRight | Qt.AlignVCenter)
            if column == 4:
                item.setForeground(QBrush(QColor(tint)) if tint else QBrush())
                item.setToolTip(self._model.status_message(row) or text)

    def _on_rows_selected(self) -> None:
        rows = {index.row() for index in self.selectedIndexes()}
        if rows:
            self._model.select(min(rows))

    def _on_selection_changed(self, index: int, _spherulite_id: int) -> None:
        if index >= 0 and index < self.rowCount() and self.currentRow() != index:
            self.blockSignals(True)
            self.selectRow(index)
            self.blockSignals(False)


if __name__ == "__main__":  # pragma: no cover - quick look
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(ExperimentsPanel, sys.argv, size=(600, 300)))
