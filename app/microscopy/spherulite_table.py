"""The table of every detection of the current experiment, sortable, in step with the
selection. The Details panel holds one (narrow); the microscopy page can show another as
a wide tab beside the image, with every column including the reason for the status.

Run alone: ``python -m app.microscopy.spherulite_table PROJECT``.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QBrush
from PySide6.QtWidgets import QAbstractItemView, QHeaderView, QTableWidget, QTableWidgetItem, QWidget

from app.microscopy.overlays import status_colour

SPHERULITE_COLUMNS = ("id", "x (px)", "y (px)", "t0 (s)", "G (µm/min)", "± 95 % CI (µm/min)",
                      "R² (cone fit)", "frames in fit", "status", "source", "confidence", "reason")
STATUS_COLUMN = SPHERULITE_COLUMNS.index("status")


def _num(value: Any, fmt: str = ".3g") -> str:
    return "—" if value is None else f"{value:{fmt}}"


def spherulite_row(s: Any) -> tuple[str, ...]:
    """The table cells of one spherulite (numbers plain, so they sort and copy as numbers)."""
    return (str(s.id), f"{s.x_px:.1f}", f"{s.y_px:.1f}", _num(s.nucleation_time_s, ".1f"),
            _num(s.growth_rate_um_per_min), _num(s.growth_rate_ci95_um_per_min, ".2g"),
            _num(s.r2, ".3f"), str(s.n_points), s.status, s.source,
            _num(getattr(s, "confidence", None), ".2f"), getattr(s, "reason", ""))


class SortableItem(QTableWidgetItem):
    """Sorts numbers as numbers ('—' last), words as words."""

    def _key(self) -> tuple:
        try:
            return (0, float(self.text()), "")
        except ValueError:
            return (1, 0.0, self.text())

    def __lt__(self, other: QTableWidgetItem) -> bool:
        if isinstance(other, SortableItem):
            return self._key() < other._key()
        return super().__lt__(other)


class SpherulitesTable(QTableWidget):
    """Every detection of the current experiment; a row click selects the spherulite."""

    def __init__(self, model: Any, parent: QWidget | None = None, *, follow_model: bool = False):
        super().__init__(0, len(SPHERULITE_COLUMNS), parent)
        self._model = model
        self.show_rejected = False  # rejected candidates are listed only on request
        self.setHorizontalHeaderLabels(SPHERULITE_COLUMNS)
        self.setSelectionBehavior(QAbstractItemView.SelectRows)
        self.setSelectionMode(QAbstractItemView.SingleSelection)
        self.setEditTriggers(QAbstractItemView.NoEditTriggers)
        self.verticalHeader().setVisible(False)
        self.horizontalHeader().setSortIndicator(0, Qt.AscendingOrder)
        self.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.horizontalHeader().setStretchLastSection(True)
        self.itemSelectionChanged.connect(self._on_selected)
        if follow_model:  # a table of its own (not inside the Details panel)
            for signal in (model.selection_changed, model.project_replaced):
                signal.connect(lambda *_: self.refresh())
            for signal in (model.analysis_updated, model.experiment_changed):
                signal.connect(lambda i: i == model.current_index and self.refresh())
            self.refresh()

    def refresh(self) -> None:
        index = self._model.current_index
        self.fill(None if index < 0 else self._model.result(index))

    def set_show_rejected(self, shown: bool) -> None:
        self.show_rejected = bool(shown)
        self.refresh()

    def fill(self, result: Any) -> None:
        spherulites = () if result is None else tuple(
            s for s in result.spherulites if self.show_rejected or s.status != "rejected")
        self.blockSignals(True)
        self.setSortingEnabled(False)  # fill first, then let the user's sort apply
        self.setRowCount(len(spherulites))
        for row, s in enumerate(spherulites):
            for column, text in enumerate(spherulite_row(s)):
                item = SortableItem(text)
                if column == STATUS_COLUMN:
                    item.setForeground(QBrush(status_colour(s.status)))
                self.setItem(row, column, item)
        self.setSortingEnabled(True)
        for row in range(self.rowCount()):
            if self.item(row, 0).text() == str(self._model.selected_id):
                self.selectRow(row)
        self.blockSignals(False)

    def _on_selected(self) -> None:
        rows = {i.row() for i in self.selectedIndexes()}
        if rows:
            self._model.select_spherulite(int(self.item(min(rows), 0).text()))


if __name__ == "__main__":  # pragma: no cover
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(lambda model: SpherulitesTable(model, follow_model=True), sys.argv))
