"""Screen-fixed annotations over the image: a µm scale bar and the time stamp.

Drawn in the view box's own (screen) coordinates so they keep their size and corner
while the user zooms and pans; the scale bar picks a round length for the zoom.
"""

from __future__ import annotations

import math

import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPainter, QPen
from PySide6.QtWidgets import QGraphicsObject

_NICE = (1, 2, 5)


def nice_length_um(target_um: float) -> float:
    """The largest 1-2-5 × 10^k length not above ``target_um`` (µm)."""
    if not target_um > 0 or not math.isfinite(target_um):
        return 0.0
    exponent = math.floor(math.log10(target_um))
    best = 10.0 ** exponent
    for step in _NICE:
        if step * 10.0 ** exponent <= target_um:
            best = step * 10.0 ** exponent
    return best


def format_length_um(length_um: float) -> str:
    if length_um >= 1000:
        return f"{length_um / 1000:g} mm"
    return f"{length_um:g} µm"


def format_clock(time_s: float) -> str:
    """'t = 3:05.2' style clock from seconds (negative before the isothermal start)."""
    sign = "-" if time_s < 0 else ""
    minutes, seconds = divmod(abs(time_s), 60.0)
    return f"{sign}{int(minutes)}:{seconds:04.1f}"


class ViewAnnotations(QGraphicsObject):
    """Scale bar (bottom right) and time stamp (top left) of a ViewBox."""

    def __init__(self, view_box: pg.ViewBox):
        super().__init__(view_box)
        self._view_box = view_box
        self.setZValue(1000)
        self.um_per_px: float | None = None
        self.time_text = ""
        self.show_scale_bar = True
        self.show_time_stamp = True
        self._font = QFont()
        self._font.setPixelSize(15)
        self._font.setBold(True)
        view_box.sigResized.connect(self._refresh)
        view_box.sigRangeChanged.connect(self._refresh)

    def _refresh(self, *_args) -> None:
        self.prepareGeometryChange()
        self.update()

    def set_state(self, *, um_per_px=None, time_text="") -> None:
        self.um_per_px, self.time_text = um_per_px, time_text
        self.update()

    def boundingRect(self) -> QRectF:
        return QRectF(self._view_box.rect())

    def paint(self, painter: QPainter, _option, _widget=None) -> None:
        painter.setRenderHint(QPainter.Antialiasing, True)
        painter.setFont(self._font)
        rect = self._view_box.rect()
        if self.show_time_stamp and self.time_text:
            self._draw_text(painter, rect.left() + 12, rect.top() + 26, self.time_text)
        if self.show_scale_bar:
            self._draw_scale_bar(painter, rect)

    def _draw_scale_bar(self, painter: QPainter, rect: QRectF) -> None:
        if not self.um_per_px:
            self._draw_text(painter, rect.right() - 190, rect.bottom() - 14,
                            "no scale: set µm/px", QColor("#ffcc33"))
            return
        px_size = self._view_box.viewPixelSize()[0]  # image pixels per screen pixel
        if not px_size > 0:
            return
        um_per_screen_px = px_size * self.um_per_px
        length_um = nice_length_um(0.18 * rect.width() * um_per_screen_px)
        if length_um <= 0:
            return
        width = length_um / um_per_screen_px
        x1, y = rect.right() - 18, rect.bottom() - 16
        x0 = x1 - width
        for colour, thickness in ((QColor(10, 12, 20, 200), 8), (QColor("#ffffff"), 4)):
            pen = QPen(colour, thickness)
            pen.setCapStyle(Qt.FlatCap)
            painter.setPen(pen)
            painter.drawLine(int(x0), int(y), int(x1), int(y))
        self._draw_text(painter, x0, y - 10, format_length_um(length_um))

    def _draw_text(self, painter: QPainter, x: float, y: float, text: str,
                   colour: QColor | None = None) -> None:
        painter.setPen(QColor(10, 12, 20, 220))
        for dx, dy in ((-1, 0), (1, 0), (0, -1), (0, 1)):
            painter.drawText(int(x + dx), int(y + dy), text)
        painter.setPen(colour or QColor("#ffffff"))
        painter.drawText(int(x), int(y), text)
