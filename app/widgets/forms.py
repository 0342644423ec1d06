"""Form building blocks shared by the pages: labelled number forms, lazy pages, scroll columns."""

from __future__ import annotations

from PySide6 import QtCore, QtWidgets

from app.widgets.formatting import DASH
from app.widgets.help_panel import help_button


class NumberForm(QtWidgets.QGroupBox):
    """A titled form of labelled numbers, each with a help button."""

    def __init__(self, title: str, rows: list[tuple[str, str, str]], parent=None):
        super().__init__(title, parent)
        self.values: dict[str, QtWidgets.QLabel] = {}
        layout = QtWidgets.QGridLayout(self)
        layout.setContentsMargins(6, 6, 6, 6)
        layout.setVerticalSpacing(2)
        for row, (key, label, topic_key) in enumerate(rows):
            layout.addWidget(QtWidgets.QLabel(label), row, 0)
            value = QtWidgets.QLabel(DASH)
            value.setObjectName(f"value_{key}")
            value.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
            value.setWordWrap(True)
            layout.addWidget(value, row, 1)
            layout.addWidget(help_button(topic_key, self), row, 2)
            self.values[key] = value
        layout.setColumnStretch(1, 1)

    def set(self, key: str, text: str) -> None:
        self.values[key].setText(text)

    def text(self, key: str) -> str:
        return self.values[key].text()

    def clear(self) -> None:
        for label in self.values.values():
            label.setText(DASH)


class LazyPage(QtWidgets.QWidget):
    """A page that redraws only while visible: changes made while it is hidden mark it out
    of date, and it catches up when shown. Subclasses define ``redraw()`` and
    ``first_split_sizes(width)`` for their ``self.split`` splitter."""

    _stale = True
    _sized = False

    def redraw(self) -> None:
        raise NotImplementedError

    def first_split_sizes(self, width: int) -> list[int]:
        raise NotImplementedError

    def _rebuild(self) -> None:
        if not self.isVisible():
            self._stale = True
            return
        self._stale = False
        self.redraw()

    def shown(self) -> None:
        """Called by the main window when the rail switches to this page."""
        if self._stale:
            self._rebuild()

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if not self._sized:
            self._sized = True
            self.split.setSizes(self.first_split_sizes(self.width()))
        if self._stale:
            self._rebuild()


def scroll_column(widgets, minimum_width: int = 300) -> QtWidgets.QScrollArea:
    """Stack panels in a vertically scrolling column as wide as its widest panel needs."""
    inner = QtWidgets.QWidget()
    column = QtWidgets.QVBoxLayout(inner)
    column.setContentsMargins(0, 0, 0, 0)
    for widget in widgets:
        column.addWidget(widget)
    column.addStretch(1)
    scroll = QtWidgets.QScrollArea()
    scroll.setWidgetResizable(True)
    scroll.setWidget(inner)
    scrollbar = scroll.verticalScrollBar().sizeHint().width()
    scroll.setMinimumWidth(max(minimum_width, inner.minimumSizeHint().width() + scrollbar + 4))
    scroll.setHorizontalScrollBarPolicy(QtCore.Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
    return scroll


class FormPanel(QtWidgets.QWidget):
    """A ``NumberForm`` with a line for problems and warnings under it."""

    ROWS: list = []
    TITLE = ""

    def __init__(self, parent=None, *, problem_name: str = "problem"):
        super().__init__(parent)
        self.form = NumberForm(self.TITLE, self.ROWS, self)
        self.problem = QtWidgets.QLabel("", objectName=problem_name)
        self.problem.setWordWrap(True)
        self.problem.setStyleSheet("color: #9a3412;")
        self.extra_rows = len(self.ROWS)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.form)

    def add_full_row(self, widget: QtWidgets.QWidget) -> None:
        self.form.layout().addWidget(widget, self.extra_rows, 0, 1, 3)
        self.extra_rows += 1

    def clear(self, text: str = "") -> None:
        self.form.clear()
        self.problem.setText(text)
