"""Detection overlays drawn over the stack: fitted fronts, centres and ids.

Every mark is drawn twice, a dark halo under a bright stroke, so it stays readable on
the dark melt, on red-magenta and on blue/yellow interference colours alike. Fronts
change with the frame; centres and ids only change when the analysis does, so a frame
change rebuilds only one painter path per status.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPainterPath, QPen
from PySide6.QtWidgets import QGraphicsItem, QGraphicsPathItem

from analysis.spherulites.statuses import STATUSES

#: Our status palette (bright strokes; a dark halo goes underneath).
STATUS_COLOURS = {
    "ok": "#4cf2c2",          # mint
    "edge": "#ffb347",        # apricot
    "few-points": "#c9a7ff",  # lilac
    "nonlinear": "#ff6f91",   # rose
    "excluded": "#b8c0c8",    # pewter, drawn dashed
    "rejected": "#8a7f72",    # driftwood, shown only on request
}
SELECTED_COLOUR = "#ffffff"
HALO = QColor(10, 12, 20, 190)
#: What each status means, from its one definition.
STATUS_WORDS = {name: status.meaning for name, status in STATUSES.items()}


def status_colour(status: str) -> QColor:
    return QColor(STATUS_COLOURS.get(status, "#e0e0e0"))


@dataclass(frozen=True)
class OverlayMark:
    """One spherulite as the overlay needs it (pixels on frame 0's grid)."""

    id: int
    x_px: float
    y_px: float
    status: str
    manual: bool
    spherulite: Any


def marks_from_result(result: Any, *, show_rejected: bool = False) -> list[OverlayMark]:
    """Marks of a result's detections; rejected candidates only when asked for."""
    if result is None:
        return []
    return [
        OverlayMark(s.id, s.x_px, s.y_px, s.status, s.source == "manual", s)
        for s in result.spherulites if show_rejected or s.status != "rejected"
    ]


def front_radii_px(marks: Sequence[OverlayMark], time_s: float, um_per_px: float) -> np.ndarray:
    """Radius in pixels of each mark's fitted front at ``time_s`` (NaN: no fit)."""
    radii = np.full(len(marks), np.nan)
    for i, mark in enumerate(marks):
        radius_um = mark.spherulite.radius_um_at(time_s)
        if radius_um is not None:
            radii[i] = radius_um / um_per_px
    return radii


def clipped_fronts(marks: Sequence[OverlayMark], radii_px: np.ndarray,
                   territories: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Polylines of fitted front circles, drawn only inside each spherulite's territory.

    Returns ``x, y, connect`` for all circles at once: each circle sampled about every
    6 px, and for each point whether a line joins it to the next. ``territories`` is the
    analysis's label image (spherulite id per pixel): past impingement a fitted circle
    would cross its neighbours, where the real front has stopped, and outside the field
    nothing was seen, so neither part is drawn. One vectorised pass keeps a frame change
    within the scrubbing budget.
    """
    ids = np.array([m.id for m in marks], dtype=np.int64)
    cx = np.array([m.x_px for m in marks])
    cy = np.array([m.y_px for m in marks])
    radii = np.asarray(radii_px, dtype=float)
    counts = np.clip(np.pi * radii / 3.0, 16, 240).astype(int) + 1
    owner = np.repeat(np.arange(len(marks)), counts)
    first = np.repeat(np.cumsum(counts) - counts, counts)
    angle = 2.0 * np.pi * (np.arange(counts.sum()) - first) / (counts[owner] - 1)
    x = cx[owner] + radii[owner] * np.cos(angle)
    y = cy[owner] + radii[owner] * np.sin(angle)
    rows, cols = np.rint(y).astype(int), np.rint(x).astype(int)
    height, width = territories.shape
    inside = (rows >= 0) & (rows < height) & (cols >= 0) & (cols < width)
    own = np.zeros(len(x), dtype=bool)
    own[inside] = territories[rows[inside], cols[inside]] == ids[owner[inside]]
    connect = own & np.append(own[1:], False)
    connect[np.cumsum(counts) - 1] = False  # never join one circle to the next
    return x, y, connect.astype(np.int32)


def _pen(colour: QColor, width: float, style=Qt.SolidLine) -> QPen:
    pen = QPen(colour, width)
    pen.setCosmetic(True)
    pen.setStyle(style)
    return pen


class _HaloPath:
    """A path drawn as dark halo + coloured stroke (two graphics items)."""

    def __init__(self, parent, colour: QColor, width: float, style=Qt.SolidLine):
        self.halo = QGraphicsPathItem(parent)
        self.halo.setPen(_pen(HALO, width + 1.6))
        self.stroke = QGraphicsPathItem(parent)
        self.stroke.setPen(_pen(colour, width, style))
        for item in (self.halo, self.stroke):
            item.setZValue(10)

    def set_path(self, path: QPainterPath) -> None:
        self.halo.setPath(path)
        self.stroke.setPath(path)

    def set_visible(self, visible: bool) -> None:
        self.halo.setVisible(visible)
        self.stroke.setVisible(visible)


class OverlayLayer:
    """Fronts, centres and ids of one experiment over a pyqtgraph ViewBox."""

    def __init__(self, view_box: pg.ViewBox):
        self._root = pg.ItemGroup()
        view_box.addItem(self._root, ignoreBounds=True)
        self._fronts = {s: _HaloPath(self._root, status_colour(s), 1.6,
                                     Qt.DashLine if s in ("excluded", "rejected") else Qt.SolidLine)
                        for s in STATUS_COLOURS}
        self._selected = _HaloPath(self._root, QColor(SELECTED_COLOUR), 2.6)
        self._centres = {s: _HaloPath(self._root, status_colour(s), 1.4) for s in STATUS_COLOURS}
        self._labels = IdLabels(self._root)
        self._marks: list[OverlayMark] = []
        self._territories: np.ndarray | None = None
        self._selected_id = -1
        self._offset = QPointF(0, 0)
        self.visible = {"fronts": True, "centres": True, "ids": True}

    @property
    def marks(self) -> list[OverlayMark]:
        return self._marks

    def set_marks(self, marks: Sequence[OverlayMark], selected_id: int = -1,
                  territories: np.ndarray | None = None) -> None:
        """New analysis: rebuild centres and ids (fronts follow on ``update_fronts``).

        ``territories`` is the analysis's label image (spherulite id per pixel on frame
        0's grid); with it, fronts are clipped to each spherulite's own territory.
        """
        self._marks = list(marks)
        self._territories = territories
        self._selected_id = selected_id
        self._build_centres()
        self._build_labels()

    def set_selected(self, spherulite_id: int) -> None:
        self._selected_id = spherulite_id

    def set_offset(self, dx_px: float, dy_px: float) -> None:
        """Shift the whole layer (frame drift relative to frame 0)."""
        self._root.setPos(dx_px, dy_px)

    def set_visible(self, name: str, visible: bool) -> None:
        self.visible[name] = visible
        for path in self._centres.values():
            path.set_visible(self.visible["centres"])
        self._labels.setVisible(self.visible["ids"])
        fronts_on = self.visible["fronts"]
        for path in self._fronts.values():
            path.set_visible(fronts_on)
        self._selected.set_visible(fronts_on or self.visible["centres"])

    def update_fronts(self, time_s: float | None, um_per_px: float | None) -> None:
        """Redraw the fitted fronts at ``time_s`` (seconds from the isothermal start)."""
        pieces: dict[str, list] = {s: [] for s in self._fronts}
        selected: list = []
        if time_s is not None and um_per_px and self._marks:
            radii = front_radii_px(self._marks, time_s, um_per_px)
            for mark, radius in zip(self._marks, radii):
                if not radius > 0:
                    continue
                target = selected if mark.id == self._selected_id else pieces.get(mark.status)
                (target if target is not None else pieces["ok"]).append((mark, radius))
        for status, parts in pieces.items():
            self._fronts[status].set_path(self._front_path(parts))
        self._selected.set_path(self._front_path(selected))

    def _front_path(self, parts: list) -> QPainterPath:
        """Whole circles without territories (cheap ellipses), else clipped polylines."""
        if self._territories is None:
            path = QPainterPath()
            for mark, radius in parts:
                path.addEllipse(QRectF(mark.x_px - radius, mark.y_px - radius, 2 * radius, 2 * radius))
            return path
        if not parts:
            return QPainterPath()
        marks, radii = zip(*parts)
        x, y, connect = clipped_fronts(marks, np.array(radii), self._territories)
        return pg.arrayToQPath(x, y, connect=connect)

    def _build_centres(self) -> None:
        paths = {s: QPainterPath() for s in self._centres}
        for mark in self._marks:
            path = paths.get(mark.status, paths["ok"])
            x, y, size = mark.x_px, mark.y_px, 4.0
            if mark.manual:  # a diamond for nuclei the user placed
                path.moveTo(x, y - size)
                path.lineTo(x + size, y)
                path.lineTo(x, y + size)
                path.lineTo(x - size, y)
                path.closeSubpath()
            else:  # a plus for automatic detections
                path.moveTo(x - size, y)
                path.lineTo(x + size, y)
                path.moveTo(x, y - size)
                path.lineTo(x, y + size)
        for status, path in paths.items():
            self._centres[status].set_path(path)

    def _build_labels(self) -> None:
        self._labels.set_labels([(m.x_px + 3, m.y_px + 3, str(m.id), status_colour(m.status))
                                 for m in self._marks])
        self._labels.setVisible(self.visible["ids"])


class IdLabels(QGraphicsItem):
    """All id labels in one item, drawn at a fixed screen size with a dark shadow.

    One item painting plain text is far cheaper per frame than one outlined text item
    per spherulite.
    """

    def __init__(self, parent=None):
        super().__init__(parent)
        self._labels: list[tuple[float, float, str, QColor]] = []
        self._bounds = QRectF()
        self._font = QFont()
        self._font.setPixelSize(12)
        self._font.setBold(True)
        self.setZValue(11)

    def set_labels(self, labels) -> None:
        self.prepareGeometryChange()
        self._labels = list(labels)
        if self._labels:
            xs = [x for x, _y, _t, _c in self._labels]
            ys = [y for _x, y, _t, _c in self._labels]
            self._bounds = QRectF(min(xs) - 50, min(ys) - 50, max(xs) - min(xs) + 100,
                                  max(ys) - min(ys) + 100)
        else:
            self._bounds = QRectF()
        self.update()

    def boundingRect(self) -> QRectF:
        return self._bounds

    def paint(self, painter, _option, _widget=None) -> None:
        transform = painter.worldTransform()
        painter.save()
        painter.resetTransform()
        painter.setFont(self._font)
        device = painter.device()
        width, height = device.width(), device.height()
        for x, y, text, colour in self._labels:
            point = transform.map(QPointF(x, y))
            if not (-20 <= point.x() <= width and -5 <= point.y() <= height + 15):
                continue
            painter.setPen(HALO)
            painter.drawText(point + QPointF(1, 13), text)
            painter.setPen(colour)
            painter.drawText(point + QPointF(0, 12), text)
        painter.restore()
