"""The four plots of the kinetics view and their draggable regions.

* heat flow against time, with the baseline and its two limits (a draggable region);
* relative crystallinity X(t) from calorimetry with the fitted Avrami curves;
* the Avrami plot log10(−ln(1 − X)) against log10(t − t0) with the fit window shaded and
  draggable (the region's edges are the window's conversion limits);
* microscopy prediction against calorimetry X(t), both as volume fractions.

The plots only draw arrays computed by ``analysis``. Region drags are reported through
``baseline_dragging`` / ``baseline_dragged`` and ``window_dragging`` / ``window_dragged``
(the ``*_dragged`` signals fire once, at the end of a gesture).
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from app.widgets.plotting import COLOURS, set_axis_labels, styled_plot, titled_plot

_REGION_BRUSH = (13, 148, 136, 40)
_WINDOW_BRUSH = (190, 18, 60, 35)
#: Conversion limits a window edge may take (log10(-ln(1-X)) is infinite at 0 and 1).
X_MIN, X_MAX = 0.001, 0.995


def x_to_avrami_y(x: float) -> float:
    """log10(−ln(1 − X)): where a conversion X sits on the Avrami plot's vertical axis."""
    return math.log10(-math.log1p(-x))


def avrami_y_to_x(y: float) -> float:
    """Inverse of :func:`x_to_avrami_y`, clipped to a usable conversion."""
    return min(X_MAX, max(X_MIN, -math.expm1(-(10.0 ** y))))


def _pen(name: str, width: float = 1.6, dashed: bool = False):
    style = QtCore.Qt.PenStyle.DashLine if dashed else QtCore.Qt.PenStyle.SolidLine
    return pg.mkPen(COLOURS[name], width=width, style=style)


class KineticsPlots(QtWidgets.QWidget):
    baseline_dragging = QtCore.Signal(float, float)  # start, end (min) while dragging
    baseline_dragged = QtCore.Signal(float, float)  # once, at the end of the drag
    window_dragging = QtCore.Signal(float, float)  # conversion limits (fractions)
    window_dragged = QtCore.Signal(float, float)

    def __init__(self, parent=None):
        super().__init__(parent)
        self._updating = False
        self.heat_flow = styled_plot(x_label="time t", x_unit="min", y_label="heat flow", y_unit="mW")
        self.conversion = styled_plot(x_label="time since induction t − t₀", x_unit="min",
                                      y_label="relative crystallinity X (mass basis)", y_unit="")
        self.avrami = styled_plot(x_label="log₁₀[(t − t₀) / min]", x_unit="",
                                  y_label="log₁₀[−ln(1 − X)]", y_unit="")
        self.comparison = styled_plot(x_label="time since start of crystallization", x_unit="min",
                                      y_label="volume fraction crystallized", y_unit="")
        # Legends where the curves are not: rising curves leave the lower right free.
        for plot, corner in ((self.heat_flow, (-10, 10)), (self.conversion, (-10, -10)),
                             (self.avrami, (10, 10)), (self.comparison, (-10, -10))):
            plot.getPlotItem().addLegend(offset=corner, labelTextColor="#202020",
                                         brush=pg.mkBrush(255, 255, 255, 200))
        self._build_items()
        grid = QtWidgets.QGridLayout(self)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.addWidget(titled_plot(self, "Heat flow and baseline", self.heat_flow, "heat_flow",
                                   "Heat flow, baseline and limits (drag the band)"), 0, 0)
        grid.addWidget(titled_plot(self, "Relative crystallinity X(t)", self.conversion, "conversion"), 0, 1)
        grid.addWidget(titled_plot(self, "Avrami plot", self.avrami, "avrami_plot",
                                   "Avrami plot (drag the shaded fit window)"), 1, 0)
        grid.addWidget(titled_plot(self, "Prediction vs calorimetry", self.comparison, "comparison",
                                   "Microscopy prediction against calorimetry"), 1, 1)

    def _build_items(self) -> None:
        hf = self.heat_flow.getPlotItem()
        self.signal_curve = hf.plot([], [], pen=_pen("signal", 1.2), name="heat flow")
        self.baseline_curve = hf.plot([], [], pen=_pen("baseline", 1.6, dashed=True), name="baseline")
        self.baseline_region = pg.LinearRegionItem((0, 1), brush=_REGION_BRUSH)
        self.baseline_region.setZValue(-10)
        self.baseline_region.setToolTip("Baseline and integration limits: drag the band or its edges")
        hf.addItem(self.baseline_region)
        self.induction_line = pg.InfiniteLine(angle=90, pen=_pen("fit", 1.0, dashed=True),
                                              label="t₀", labelOpts={"color": COLOURS["fit"]})
        hf.addItem(self.induction_line)
        cv = self.conversion.getPlotItem()
        self.conversion_points = cv.plot([], [], pen=None, symbol="o", symbolSize=4,
                                         symbolBrush=COLOURS["signal"], symbolPen=None, name="calorimetry")
        self.window_fit_curve = cv.plot([], [], pen=_pen("fit", 2.0), name="window fit")
        self.curve_fit_curve = cv.plot([], [], pen=_pen("curve_fit", 1.4, dashed=True), name="whole-curve fit")
        av = self.avrami.getPlotItem()
        self.avrami_points = av.plot([], [], pen=None, symbol="o", symbolSize=4,
                                     symbolBrush=COLOURS["signal"], symbolPen=None, name="calorimetry")
        self.avrami_line = av.plot([], [], pen=_pen("fit", 2.0), name="fit in window")
        self.window_region = pg.LinearRegionItem((x_to_avrami_y(0.03), x_to_avrami_y(0.2)),
                                                 orientation="horizontal", brush=_WINDOW_BRUSH)
        self.window_region.setZValue(-10)
        self.window_region.setToolTip("Avrami fit window: drag the band or its edges")
        av.addItem(self.window_region)
        cp = self.comparison.getPlotItem()
        self.predicted_curve = cp.plot([], [], pen=_pen("predicted", 2.2), name="microscopy prediction")
        self.measured_curve = cp.plot([], [], pen=_pen("measured", 2.0), name="calorimetry (volume basis)")
        self.image_curve = cp.plot([], [], pen=None, symbol="t", symbolSize=6,
                                   symbolBrush=COLOURS["image"], symbolPen=None,
                                   name="image area fraction (film)")
        self.baseline_region.sigRegionChanged.connect(self._baseline_moving)
        self.baseline_region.sigRegionChangeFinished.connect(self._baseline_moved)
        self.window_region.sigRegionChanged.connect(self._window_moving)
        self.window_region.sigRegionChangeFinished.connect(self._window_moved)

    # ---------------------------------------------------------------- region signals
    def _baseline_moving(self, region) -> None:
        if not self._updating:
            self.baseline_dragging.emit(*region.getRegion())

    def _baseline_moved(self, region) -> None:
        if not self._updating:
            self.baseline_dragged.emit(*region.getRegion())

    def window_limits(self) -> tuple[float, float]:
        lo, hi = self.window_region.getRegion()
        return avrami_y_to_x(lo), avrami_y_to_x(hi)

    def _window_moving(self, _region) -> None:
        if not self._updating:
            self.window_dragging.emit(*self.window_limits())

    def _window_moved(self, _region) -> None:
        if not self._updating:
            self.window_dragged.emit(*self.window_limits())

    def set_regions(self, baseline: tuple[float, float] | None, window: tuple[float, float] | None) -> None:
        """Place the regions from the model without reporting a drag."""
        self._updating = True
        try:
            for region, values in ((self.baseline_region, baseline), (self.window_region, window)):
                region.setVisible(values is not None)
                if values is not None:
                    if region is self.window_region:
                        values = tuple(x_to_avrami_y(v) for v in values)
                    region.setRegion(values)
        finally:
            self._updating = False

    # ---------------------------------------------------------------- data
    def show_calorimetry(self, result, heat_flow_unit: str) -> None:
        """Draw an ``analysis.kinetics.calorimetry.CalorimetryResult`` (or clear with None)."""
        if result is None:
            for curve in (self.signal_curve, self.baseline_curve, self.conversion_points,
                          self.window_fit_curve, self.curve_fit_curve, self.avrami_points,
                          self.avrami_line, self.measured_curve):
                curve.setData([], [])
            self.induction_line.setVisible(False)
            return
        set_axis_labels(self.heat_flow.getPlotItem(), x_label="time t", x_unit="min",
                        y_label=f"heat flow (exotherm {result.exotherm})", y_unit=heat_flow_unit)
        # the legend goes to the corner the exotherm points away from
        corner = (1, 0) if result.exotherm == "up" else (1, 1)
        offset = (-10, 10) if result.exotherm == "up" else (-10, -10)
        self.heat_flow.getPlotItem().legend.anchor(itemPos=corner, parentPos=corner, offset=offset)
        self.signal_curve.setData(result.time_min, result.heat_flow)
        self.baseline_curve.setData(*self._baseline_segment(result))
        self.induction_line.setVisible(True)
        self.induction_line.setValue(result.induction_time_min)
        t, x = result.conversion_table()
        tau = t - result.induction_time_min
        keep = tau > 0
        self.conversion_points.setData(tau[keep], x[keep])
        self._draw_fits(result, tau[keep], x[keep])

    @staticmethod
    def _baseline_segment(result):
        sel = (result.time_min >= result.baseline_start_min) & (result.time_min <= result.baseline_end_min)
        return result.time_min[sel], result.baseline[sel]

    def _draw_fits(self, result, tau, x) -> None:
        usable = (x > 0) & (x < 1)
        self.avrami_points.setData(np.log10(tau[usable]), np.log10(-np.log1p(-x[usable])))
        grid = np.linspace(0.0, tau.max() if tau.size else 1.0, 300)[1:]
        fit, whole = result.avrami, result.avrami_curve
        self.window_fit_curve.setData(grid, fit.conversion(grid)) if fit else self.window_fit_curve.setData([], [])
        self.curve_fit_curve.setData(grid, whole.conversion(grid)) if whole else self.curve_fit_curve.setData([], [])
        if fit and usable.any():
            log_t = np.log10(tau[usable])
            ends = np.array([log_t.min(), log_t.max()])
            self.avrami_line.setData(ends, math.log10(fit.k_per_min_n) + fit.n * ends)
        else:
            self.avrami_line.setData([], [])

    def show_comparison(self, predicted_t_min, predicted_x, measured_t_min, measured_x,
                        image_t_min=None, image_x=None) -> None:
        empty = np.array([])
        self.predicted_curve.setData(*(empty, empty) if predicted_t_min is None else (predicted_t_min, predicted_x))
        self.measured_curve.setData(*(empty, empty) if measured_t_min is None else (measured_t_min, measured_x))
        self.image_curve.setData(*(empty, empty) if image_t_min is None else (image_t_min, image_x))

    def plot_items(self) -> dict[str, pg.PlotItem]:
        """Every plot by file-friendly name (for exporting them all)."""
        return {"heat_flow": self.heat_flow.getPlotItem(), "conversion": self.conversion.getPlotItem(),
                "avrami_plot": self.avrami.getPlotItem(), "comparison": self.comparison.getPlotItem()}
