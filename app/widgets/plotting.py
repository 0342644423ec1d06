"""Export any pyqtgraph plot to PNG and SVG at publication size.

A figure is laid out at a fixed logical size (6.5 x 4.5 inches at 120 logical dots per
inch, i.e. 780 x 540) whatever the size of the plot on screen, so fonts and line widths
keep the proportions of a journal figure; the PNG is then rendered at 300 dpi (1950 px
wide) and the SVG at the logical size. Both files are written atomically (temporary file
then rename), so a failed export never leaves half a file over an earlier good one.

Both axes must carry a label with its unit: a figure without units is not exported.
"""

from __future__ import annotations

import contextlib
import os
from dataclasses import dataclass
from pathlib import Path

import pyqtgraph as pg
from pyqtgraph.exporters import ImageExporter
from PySide6 import QtCore, QtGui, QtWidgets
from PySide6.QtSvg import QSvgGenerator

from analysis.units import write_bytes_atomic
from app.widgets.formatting import fmt

#: Logical figure size (points at 120 per inch) and the PNG resolution.
#: Line colours shared by every page's plots.
COLOURS = {
    "signal": "#2b4c7e", "baseline": "#d97706", "fit": "#be123c", "curve_fit": "#64748b",
    "predicted": "#0f766e", "measured": "#7c3aed", "image": "#a16207",
}
FIGURE_SIZE_LOGICAL = (780, 540)
LOGICAL_DPI = 120
PNG_DPI = 300

_FOREGROUND = "#202020"
_BACKGROUND = "#ffffff"


@dataclass(frozen=True)
class ExportedFigure:
    png_path: str
    svg_path: str
    png_size_px: tuple[int, int]


class DecadeAxis(pg.AxisItem):
    """Logarithmic axis labelled at 1, 2 and 5 times a power of ten only (no crowding)."""

    def tickValues(self, minVal, maxVal, size):  # noqa: N802,N803 - pyqtgraph override
        """The decades once: pyqtgraph's minor level repeats the major level's values, and
        their labels, drawn twice a hair apart, overlapped."""
        levels = super().tickValues(minVal, maxVal, size)
        if not self.logMode or len(levels) < 2:
            return levels
        major = {round(float(v), 6) for v in levels[0][1]}
        return [levels[0], *[(spacing, [v for v in values if round(float(v), 6) not in major])
                             for spacing, values in levels[1:]]]

    def logTickStrings(self, values, scale, spacing):
        """Labels written by the application's one number rule (``20``, ``5 × 10⁴``)."""
        keep = []
        for value in values:
            mantissa = 10 ** (float(value) % 1.0)
            tick = min(abs(mantissa - m) for m in (1, 2, 5, 10)) < 0.05
            keep.append(fmt(float(10 ** float(value) * scale), digits=2) if tick else "")
        return keep


def styled_plot(
    *, x_label: str, x_unit: str, y_label: str, y_unit: str, title: str = "", log_y: bool = False
) -> pg.PlotWidget:
    """A plot widget in the house look (light, dark text) with unit axis labels.

    Units are written literally ("min", "µm/min") and never rescaled with SI prefixes,
    because several of our units (min, min⁻ⁿ, K⁻¹) are not SI. ``log_y`` gives a
    logarithmic vertical axis labelled at 1-2-5 steps.
    """
    axes = {"left": DecadeAxis("left")} if log_y else None
    widget = pg.PlotWidget(background=_BACKGROUND, axisItems=axes)
    item = widget.getPlotItem()
    if log_y:
        item.setLogMode(y=True)
    for name in ("left", "bottom", "top", "right"):
        axis = item.getAxis(name)
        axis.setPen(pg.mkPen(_FOREGROUND))
        axis.setTextPen(pg.mkPen(_FOREGROUND))
        axis.enableAutoSIPrefix(False)
    set_axis_labels(item, x_label=x_label, x_unit=x_unit, y_label=y_label, y_unit=y_unit)
    if title:
        item.setTitle(title, color=_FOREGROUND)
    item.showGrid(x=True, y=True, alpha=0.15)
    widget.setMinimumSize(150, 120)
    return widget


def set_axis_labels(item: pg.PlotItem, *, x_label: str, x_unit: str, y_label: str, y_unit: str) -> None:
    """Label both axes as "quantity (unit)"; an empty unit means dimensionless."""
    style = {"color": _FOREGROUND, "font-size": "10pt"}
    item.setLabel("bottom", _with_unit(x_label, x_unit), **style)
    item.setLabel("left", _with_unit(y_label, y_unit), **style)


def _with_unit(label: str, unit: str) -> str:
    return f"{label} ({unit})" if unit else label


def axis_label_text(item: pg.PlotItem, side: str) -> str:
    axis = item.getAxis(side)
    return axis.labelText if axis.label.isVisible() else ""


def export_plot(item: pg.PlotItem, base_path: str | os.PathLike) -> ExportedFigure:
    """Write ``base_path``.png (300 dpi) and ``base_path``.svg for one plot.

    Raises
    ------
    ValueError
        If an axis has no label (a figure must state its units).
    analysis.errors.InputError
        If a file cannot be written (missing folder, no permission); the message names
        the file. Both files are written atomically (``analysis.units``).
    """
    for side in ("bottom", "left"):
        if not axis_label_text(item, side):
            raise ValueError(f"the {side} axis of the plot has no label with units")
    base = Path(base_path)
    if base.suffix.lower() in (".png", ".svg"):
        base = base.with_suffix("")
    png_path, svg_path = base.with_suffix(".png"), base.with_suffix(".svg")
    with _figure_geometry(item):
        image = _render_png(item)
        svg_bytes = _render_svg(item)
    write_bytes_atomic(png_path, _png_bytes(image, png_path))
    write_bytes_atomic(svg_path, svg_bytes)
    return ExportedFigure(str(png_path), str(svg_path), (image.width(), image.height()))


@contextlib.contextmanager
def _figure_geometry(item: pg.PlotItem):
    """Temporarily lay the plot out at the logical figure size, then restore it."""
    saved = QtCore.QRectF(item.geometry())
    width, height = FIGURE_SIZE_LOGICAL
    item.setGeometry(QtCore.QRectF(saved.x(), saved.y(), width, height))
    try:
        yield
    finally:
        item.setGeometry(saved)


def _render_png(item: pg.PlotItem) -> QtGui.QImage:
    exporter = ImageExporter(item)
    exporter.parameters()["background"] = QtGui.QColor(_BACKGROUND)
    exporter.parameters()["width"] = int(FIGURE_SIZE_LOGICAL[0] * PNG_DPI / LOGICAL_DPI)
    image = exporter.export(toBytes=True)
    dots_per_metre = int(round(PNG_DPI / 0.0254))
    image.setDotsPerMeterX(dots_per_metre)
    image.setDotsPerMeterY(dots_per_metre)
    return image


def _render_svg(item: pg.PlotItem) -> bytes:
    # Qt's own SVG 1.1 generator (it writes clip paths, so curves stay inside the axes).
    # pyqtgraph's SVGExporter cannot parse the closed paths newer Qt versions emit.
    source = item.sceneBoundingRect()
    width, height = int(source.width()), int(source.height())
    buffer = QtCore.QBuffer()
    buffer.open(QtCore.QIODevice.OpenModeFlag.WriteOnly)
    generator = QSvgGenerator(QSvgGenerator.SvgVersion.Svg11)
    generator.setOutputDevice(buffer)
    generator.setSize(QtCore.QSize(width, height))
    generator.setViewBox(QtCore.QRect(0, 0, width, height))
    generator.setResolution(LOGICAL_DPI)
    generator.setTitle("spherokin figure")
    painter = QtGui.QPainter(generator)
    try:
        painter.fillRect(QtCore.QRectF(0, 0, width, height), QtGui.QColor(_BACKGROUND))
        item.scene().render(painter, QtCore.QRectF(0, 0, width, height), source)
    finally:
        painter.end()
    return bytes(buffer.data())


def _png_bytes(image: QtGui.QImage, path: Path) -> bytes:
    buffer = QtCore.QBuffer()
    buffer.open(QtCore.QIODevice.OpenModeFlag.WriteOnly)
    if not image.save(buffer, "PNG"):
        raise OSError(f"{path}: could not encode the figure as PNG")
    return bytes(buffer.data())


def ask_and_export(parent: QtWidgets.QWidget, item: pg.PlotItem, suggested_name: str) -> ExportedFigure | None:
    """File dialog, then PNG + SVG; errors are shown in a dialog naming the file."""
    start = str(Path(QtCore.QDir.homePath()) / f"{suggested_name}.png")
    path, _ = QtWidgets.QFileDialog.getSaveFileName(
        parent, "Export figure (PNG and SVG)", start, "Figure (*.png *.svg)"
    )
    if not path:
        return None
    try:
        return export_plot(item, path)
    except (OSError, ValueError) as error:
        QtWidgets.QMessageBox.critical(parent, "Figure not exported", str(error))
        return None


def export_plots(parent: QtWidgets.QWidget, items: dict, folder: str | None, prefix: str) -> list[str]:
    """Every plot of ``items`` (name -> PlotItem) as ``prefix_name``.png/.svg in ``folder``.

    ``folder=None`` asks for it. A failure stops the export and is shown in a dialog
    naming the file; the paths written so far are returned.
    """
    if folder is None:
        folder = QtWidgets.QFileDialog.getExistingDirectory(parent, "Folder for the figures")
        if not folder:
            return []
    written = []
    try:
        for name, item in items.items():
            figure = export_plot(item, Path(folder) / f"{prefix}_{name}")
            written += [figure.png_path, figure.svg_path]
    except (OSError, ValueError) as error:
        QtWidgets.QMessageBox.critical(parent, "Figures not exported", str(error))
    return written


def add_export_button(parent: QtWidgets.QWidget, plot: pg.PlotWidget, suggested_name: str) -> QtWidgets.QToolButton:
    """A small "Export…" button for one plot (place it in the plot's header row)."""
    button = QtWidgets.QToolButton(parent)
    button.setText("Export…")
    button.setToolTip("Save this plot as PNG (300 dpi) and SVG, with unit axis labels")
    button.setObjectName(f"export_{suggested_name}")
    button.clicked.connect(lambda: ask_and_export(parent, plot.getPlotItem(), suggested_name))
    return button


def titled_plot(parent, title: str, plot: pg.PlotWidget, name: str,
                tip: str = "") -> QtWidgets.QWidget:
    """A plot under a one-line title with its "Export…" button (``name``: file name).

    Keep ``title`` short enough for a 1280-pixel-wide window; ``tip`` (the tooltip, default
    the title) can say more, e.g. what can be dragged.
    """
    box = QtWidgets.QWidget(parent)
    header = QtWidgets.QHBoxLayout()
    label = QtWidgets.QLabel(f"<b>{title}</b>")
    label.setToolTip(tip or title)
    label.setSizePolicy(QtWidgets.QSizePolicy.Policy.Ignored, QtWidgets.QSizePolicy.Policy.Preferred)
    header.addWidget(label, 1)
    header.addWidget(add_export_button(box, plot, name))
    layout = QtWidgets.QVBoxLayout(box)
    layout.setContentsMargins(2, 2, 2, 2)
    layout.setSpacing(1)
    layout.addLayout(header)
    layout.addWidget(plot, 1)
    return box
