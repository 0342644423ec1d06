"""Publication export of plots: valid PNG at 300 dpi and valid SVG, units required."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np
import pytest
from PySide6 import QtGui

from analysis.errors import InputError
from app.widgets.plotting import FIGURE_SIZE_LOGICAL, PNG_DPI, export_plot, styled_plot


@pytest.fixture
def plot(qtbot):
    widget = styled_plot(x_label="time t", x_unit="min", y_label="relative crystallinity X", y_unit="")
    widget.plot(np.linspace(0, 10, 50), 1 - np.exp(-0.01 * np.linspace(0, 10, 50) ** 3))
    qtbot.addWidget(widget)
    widget.resize(300, 200)  # a small on-screen plot still exports at figure size
    return widget


def test_png_and_svg_are_valid_and_at_publication_size(plot, tmp_path):
    before = plot.getPlotItem().geometry()
    figure = export_plot(plot.getPlotItem(), tmp_path / "conversion")
    image = QtGui.QImage(figure.png_path)
    assert not image.isNull()
    assert image.width() == FIGURE_SIZE_LOGICAL[0] * PNG_DPI // 120
    assert abs(image.dotsPerMeterX() * 0.0254 - PNG_DPI) < 1
    pixels = image.convertToFormat(QtGui.QImage.Format.Format_Grayscale8)
    values = np.frombuffer(pixels.constBits(), np.uint8, pixels.sizeInBytes())
    assert values.min() < 100 and values.max() > 240  # something dark drawn on white
    root = ET.parse(figure.svg_path).getroot()
    assert root.tag.endswith("svg")
    text = open(figure.svg_path, encoding="utf-8").read()
    assert "(min)" in text  # the unit label made it into the vector file
    assert plot.getPlotItem().geometry() == before  # on-screen layout restored


def test_extension_in_base_name_is_replaced(plot, tmp_path):
    figure = export_plot(plot.getPlotItem(), tmp_path / "fig.svg")
    assert figure.png_path.endswith("fig.png") and figure.svg_path.endswith("fig.svg")


def test_plot_without_unit_label_is_refused(qtbot, tmp_path):
    import pyqtgraph as pg

    bare = pg.PlotWidget()
    qtbot.addWidget(bare)
    with pytest.raises(ValueError, match="axis"):
        export_plot(bare.getPlotItem(), tmp_path / "bare")
    assert not (tmp_path / "bare.png").exists()


def test_unwritable_folder_names_the_file(plot, tmp_path):
    target = tmp_path / "missing" / "fig"
    with pytest.raises(InputError, match="fig.png.*folder does not exist"):
        export_plot(plot.getPlotItem(), target)
