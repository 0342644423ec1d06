"""Calibration from a stage micrometer: drag a line over the ruling, type its length.

The dialog shows one image (a micrometer frame, or the current frame), a line the user
drags end to end over a known length of the ruling, the measured length in pixels, and
the resulting scale in µm per pixel beside the experiment's current scale and the change,
so OK never replaces a scale unnoticed. With a current scale the known length starts at
what the line measures at that scale (OK untouched changes nothing).

Run alone: ``python -m app.microscopy.calibration IMAGE_OR_STACK``.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtWidgets import (
    QCheckBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QLabel,
    QVBoxLayout,
)

from app.microscopy.frame_cache import auto_levels, to_grey

pg.setConfigOptions(imageAxisOrder="row-major")


def scale_um_per_px(length_um: float, length_px: float) -> float | None:
    """µm per pixel from a known length; None when either length is not positive."""
    if not (length_um > 0 and length_px > 0) or not math.isfinite(length_um / length_px):
        return None
    return length_um / length_px


class CalibrationDialog(QDialog):
    """Measure a known length on an image; :attr:`um_per_px` is the result."""

    def __init__(self, image: np.ndarray, title: str = "", can_apply_to_all: bool = True,
                 parent=None, *, current_um_per_px: float | None = None):
        super().__init__(parent)
        self.setWindowTitle("Calibrate the scale" + (f" — {title}" if title else ""))
        self.resize(900, 700)
        grey = to_grey(np.asarray(image))
        height, width = grey.shape[:2]
        self.plot = pg.PlotWidget(background="#14161c")
        self.plot.setAspectLocked(True)
        self.plot.invertY(True)
        self.plot.addItem(pg.ImageItem(grey, levels=auto_levels(grey)))
        self.line = pg.LineSegmentROI([(width * 0.25, height * 0.5), (width * 0.75, height * 0.5)],
                                      pen=pg.mkPen("#ffd24c", width=2))
        self.plot.addItem(self.line)
        self.current_um_per_px = current_um_per_px
        self.known_um = QDoubleSpinBox(decimals=3, minimum=0.0, maximum=1e6, value=100.0)
        self.known_um.setSuffix(" µm")
        if current_um_per_px:
            self.known_um.setValue(round(current_um_per_px * width * 0.5, 3))
        self.measured = QLabel()
        self.result_label = QLabel()
        self.current_label = QLabel("not set" if not current_um_per_px
                                    else f"{current_um_per_px:.5g} µm per pixel")
        self.change_label = QLabel()
        self.change_label.setObjectName("calibration_change")
        self.apply_all = QCheckBox("Apply to every experiment of the project")
        self.apply_all.setVisible(can_apply_to_all)
        form = QFormLayout()
        form.addRow("Known length on the micrometer", self.known_um)
        form.addRow("Line length", self.measured)
        form.addRow("Current scale", self.current_label)
        form.addRow("New scale", self.result_label)
        form.addRow("Change", self.change_label)
        hint = QLabel("Drag the yellow line's ends onto two marks of the stage micrometer a known "
                      "distance apart (zoom with the wheel for precision), then type that distance.")
        hint.setWordWrap(True)
        self.buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel)
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        layout.addWidget(hint)
        layout.addWidget(self.plot, 1)
        layout.addLayout(form)
        layout.addWidget(self.apply_all)
        layout.addWidget(self.buttons)
        self.line.sigRegionChanged.connect(self._update)
        self.known_um.valueChanged.connect(self._update)
        self._update()

    def length_px(self) -> float:
        (x0, y0), (x1, y1) = [(p.x(), p.y()) for p in self._end_points()]
        return float(math.hypot(x1 - x0, y1 - y0))

    def set_line(self, x0: float, y0: float, x1: float, y1: float) -> None:
        handles = self.line.getHandles()
        self.line.movePoint(handles[0], pg.Point(x0, y0), finish=False)
        self.line.movePoint(handles[1], pg.Point(x1, y1))
        self._update()

    @property
    def um_per_px(self) -> float | None:
        return scale_um_per_px(self.known_um.value(), self.length_px())

    def _end_points(self):
        return [self.line.mapToParent(h.pos()) for h in self.line.getHandles()]

    def change_text(self) -> str:
        """The change OK would make, in words."""
        scale, current = self.um_per_px, self.current_um_per_px
        if scale is None:
            return "—"
        if not current:
            return f"sets the scale to {scale:.5g} µm/px (none yet)"
        if abs(scale / current - 1.0) < 5e-4:
            return "none (the current scale is kept)"
        return f"{current:.5g} → {scale:.5g} µm/px ({scale / current - 1.0:+.1%})"

    def _update(self, *_args) -> None:
        self.measured.setText(f"{self.length_px():.1f} px")
        scale = self.um_per_px
        self.result_label.setText("—" if scale is None else f"{scale:.5g} µm per pixel")
        self.change_label.setText(self.change_text())
        ok = self.buttons.button(QDialogButtonBox.Ok)
        ok.setEnabled(scale is not None)
        ok.setText("Apply the new scale" if scale is not None and self.current_um_per_px and
                   abs(scale / self.current_um_per_px - 1.0) >= 5e-4 else "OK")


if __name__ == "__main__":  # pragma: no cover
    import sys

    from PySide6.QtWidgets import QApplication

    from analysis.stack.frames import open_stack

    app = QApplication(sys.argv)
    dialog = CalibrationDialog(open_stack(sys.argv[1])[0], sys.argv[1])
    if dialog.exec():
        print(dialog.um_per_px)
