"""The growth-rate-versus-temperature table: sortable, numbers sort as numbers,
copy as tab-separated text. The rows and headers come from ``analysis.reporting.tables``."""

from __future__ import annotations

import math

from PySide6 import QtCore, QtGui, QtWidgets

_SORT_ROLE = QtCore.Qt.ItemDataRole.UserRole + 1


def cell_text(value) -> str:
    """How a table value is shown (and copied): numbers with 4 significant figures."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return "" if not math.isfinite(value) else f"{value:.4g}"
    return str(value)


def _sort_key(value):
    # Numbers before text, missing values last whatever the direction of the sort.
    if isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        return float(value)
    return None


class _NumericSortProxy(QtCore.QSortFilterProxyModel):
    def lessThan(self, left, right) -> bool:
        a, b = left.data(_SORT_ROLE), right.data(_SORT_ROLE)
        if a is None or b is None:
            return a is not None and b is None
        return a < b


class GrowthTable(QtWidgets.QWidget):
    """A read-only table of one row per experiment."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.source = QtGui.QStandardItemModel(self)
        self.proxy = _NumericSortProxy(self)
        self.proxy.setSourceModel(self.source)
        self.view = QtWidgets.QTableView(self)
        self.view.setObjectName("growth_table")
        self.view.setModel(self.proxy)
        self.view.setSortingEnabled(True)
        self.view.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
        self.view.setSelectionBehavior(QtWidgets.QAbstractItemView.SelectionBehavior.SelectRows)
        self.view.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.ResizeToContents)
        self.view.verticalHeader().setVisible(False)
        self.view.setWordWrap(False)
        copy = QtGui.QAction("Copy table", self.view)
        copy.setShortcut(QtGui.QKeySequence.StandardKey.Copy)
        copy.triggered.connect(self.copy_to_clipboard)
        self.view.addAction(copy)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.view)

    def set_rows(self, header: list[str], rows: list[list]) -> None:
        self.source.clear()
        self.source.setHorizontalHeaderLabels(list(header))
        for row in rows:
            items = []
            for value in row:
                item = QtGui.QStandardItem(cell_text(value))
                item.setData(_sort_key(value), _SORT_ROLE)
                if _sort_key(value) is not None:
                    item.setTextAlignment(QtCore.Qt.AlignmentFlag.AlignRight | QtCore.Qt.AlignmentFlag.AlignVCenter)
                items.append(item)
            self.source.appendRow(items)

    def header(self) -> list[str]:
        return [self.source.headerData(c, QtCore.Qt.Orientation.Horizontal) for c in range(self.source.columnCount())]

    def shown_rows(self) -> list[list[str]]:
        """Rows in the order on screen (after sorting)."""
        return [[self.proxy.index(r, c).data() or "" for c in range(self.proxy.columnCount())]
                for r in range(self.proxy.rowCount())]

    def as_tsv(self) -> str:
        flat = lambda cells: "\t".join(" ".join(str(c).split()) for c in cells)
        lines = [flat(self.header())] + [flat(row) for row in self.shown_rows()]
        return "\n".join(lines) + "\n"

    def copy_to_clipboard(self) -> str:
        text = self.as_tsv()
        QtWidgets.QApplication.clipboard().setText(text)
        return text
