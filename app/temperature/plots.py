"""Plots of the temperature-series view (display only; values from ``analysis``).

Logarithmic axes are drawn in log10 of the value with the axis in log mode, so error
bars (which pyqtgraph does not transform) are given in the same log10 coordinates.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6 import QtCore, QtWidgets

from analysis.kinetics.ramp import SUB_PIXEL_FRONT_PX
from app.widgets.plotting import COLOURS, styled_plot, titled_plot

LH_X_SCALE = 1e5  # the linearised plot's abscissa 1/(T ΔT f) is shown in units of 1e-5 K^-2
_REGIME_BRUSHES = {"I": (37, 99, 235, 28), "II": (22, 163, 74, 28), "III": (217, 119, 6, 32)}


def _finite(*arrays):
    arrays = [np.asarray(a, float) for a in arrays]
    keep = np.logical_and.reduce([np.isfinite(a) for a in arrays])
    return [a[keep] for a in arrays]


def _log_points(plot: pg.PlotWidget, name: str, colour: str, symbol: str = "o") -> pg.PlotDataItem:
    return plot.getPlotItem().plot([], [], pen=None, symbol=symbol, symbolSize=8,
                                   symbolBrush=colour, symbolPen=pg.mkPen("#202020", width=0.6), name=name)


class TemperaturePlots(QtWidgets.QWidget):
    def __init__(self, parent=None):
        super().__init__(parent)
        self.growth = styled_plot(x_label="crystallization temperature Tc", x_unit="°C",
                                  y_label="growth rate G", y_unit="µm/min", log_y=True)
        self.density = styled_plot(x_label="crystallization temperature Tc", x_unit="°C",
                                   y_label="nucleation density", y_unit="mm⁻² or mm⁻³", log_y=True)
        self.half_time = styled_plot(x_label="crystallization temperature Tc", x_unit="°C",
                                     y_label="half-time t½", y_unit="min", log_y=True)
        self.lh = styled_plot(x_label="10⁵ / (Tc·ΔT·f)", x_unit="K⁻²",
                              y_label="ln G + U*/(R·(Tc − T∞))", y_unit="G in µm/min")
        for plot, corner in ((self.growth, (-10, 10)), (self.density, (-10, 10)),
                             (self.half_time, (10, 10)), (self.lh, (-10, 10))):
            plot.getPlotItem().addLegend(offset=corner, labelTextColor="#202020",
                                         brush=pg.mkBrush(255, 255, 255, 200))
        self.growth_points = _log_points(self.growth, "G ± 95 % CI", COLOURS["signal"])
        self.growth_errors = pg.ErrorBarItem(pen=pg.mkPen(COLOURS["signal"], width=1.2), beam=0.3)
        self.growth.addItem(self.growth_errors)
        self.growth_fit = self.growth.getPlotItem().plot([], [], pen=pg.mkPen(COLOURS["fit"], width=1.8),
                                                         name="Lauritzen-Hoffman fit")
        self.areal_points = _log_points(self.density, "N_A (mm⁻²)", COLOURS["predicted"])
        self.volume_points = _log_points(self.density, "N_V (mm⁻³)", COLOURS["measured"], "s")
        self.predicted_half = _log_points(self.half_time, "predicted from N, G (bulk)", COLOURS["predicted"])
        self.measured_half = _log_points(self.half_time, "calorimetry", COLOURS["measured"], "s")
        self.lh_points = self.lh.getPlotItem().plot([], [], pen=None, symbol="o", symbolSize=8,
                                                    symbolBrush=COLOURS["signal"], name="experiments")
        self.lh_ramp_points = self.lh.getPlotItem().plot([], [], pen=None, symbol="d", symbolSize=8,
                                                         symbolBrush=None, symbolPen=pg.mkPen("#b03a2e", width=1.4),
                                                         name="ramp G(T)")
        self._lh_items: list = []
        self._ramp_items: list = []
        grid = QtWidgets.QGridLayout(self)
        grid.setContentsMargins(0, 0, 0, 0)
        grid.addWidget(titled_plot(self, "Growth rate against Tc", self.growth, "growth_vs_tc"), 0, 0)
        grid.addWidget(titled_plot(self, "Nucleation density against Tc", self.density, "density_vs_tc"), 0, 1)
        grid.addWidget(titled_plot(self, "Half-time against Tc", self.half_time, "half_time_vs_tc"), 1, 0)
        grid.addWidget(titled_plot(self, "Lauritzen-Hoffman plot", self.lh, "lauritzen_hoffman",
                                   "Lauritzen-Hoffman plot (regimes shaded)"), 1, 1)

    def show_growth(self, tc, g, ci95) -> None:
        tc, g, ci = _finite(tc, g, np.where(np.isfinite(np.asarray(ci95, float)), ci95, 0.0))
        positive = g > 0
        tc, g, ci = tc[positive], g[positive], ci[positive]
        self.growth_points.setData(tc, g)
        low = np.log10(g) - np.log10(np.clip(g - ci, g * 1e-3, None))
        high = np.log10(g + ci) - np.log10(g)
        self.growth_errors.setData(x=tc, y=np.log10(g), top=high, bottom=low)

    def show_ramps(self, curves) -> None:
        """Each ramp's G(T) as a line with its 95 % band; ``curves``: (name, RampAnalysis)
        pairs. Where the fronts move less than a pixel per frame the line is dashed: G(T)
        there rests on sub-pixel motion (``RampAnalysis.warnings``)."""
        item = self.growth.getPlotItem()
        for old in self._ramp_items:
            item.removeItem(old)
        self._ramp_items = []
        for k, (name, ramp) in enumerate(curves):
            g, colour = ramp.growth, ("#b03a2e", "#7d3c98", "#117a65", "#a04000")[k % 4]
            low = item.plot(g.temperature_c, g.ci95_low, pen=pg.mkPen(colour, width=0.5))
            high = item.plot(g.temperature_c, g.ci95_high, pen=pg.mkPen(colour, width=0.5))
            rgb = pg.mkColor(colour)
            band = pg.FillBetweenItem(low, high, brush=pg.mkBrush(rgb.red(), rgb.green(), rgb.blue(), 50))
            item.addItem(band)
            resolved = ramp.front_advance_px_per_frame >= SUB_PIXEL_FRONT_PX
            solid = np.append(resolved[:-1] & resolved[1:], False)  # segment i joins points i, i+1
            line = item.plot(g.temperature_c, g.growth_rate_um_per_min, pen=pg.mkPen(colour, width=2),
                             name=f"{name} (ramp, 95 % band)", connect=solid)
            self._ramp_items += [low, high, band, line]
            if not resolved.all():
                dashed = item.plot(g.temperature_c, g.growth_rate_um_per_min,
                                   pen=pg.mkPen(colour, width=1.5, style=QtCore.Qt.PenStyle.DashLine),
                                   name=f"ramp: fronts under {SUB_PIXEL_FRONT_PX:g} px per frame",
                                   connect=np.append(~solid[:-1], False))
                self._ramp_items.append(dashed)

    def show_growth_fit(self, tc_grid, g_fit) -> None:
        if tc_grid is None:
            self.growth_fit.setData([], [])
        else:
            self.growth_fit.setData(*_finite(tc_grid, g_fit))

    def show_density(self, tc, areal, volumetric) -> None:
        self.areal_points.setData(*_positive(tc, areal))
        self.volume_points.setData(*_positive(tc, volumetric))

    def show_half_times(self, tc, predicted, measured) -> None:
        self.predicted_half.setData(*_positive(tc, predicted))
        self.measured_half.setData(*_positive(tc, measured))

    def show_lh(self, x, y, lines, regimes, from_ramp=None) -> None:
        """Points (x in K⁻², y), fit lines [(x_ends, y_ends)], regimes [(name, x_low, x_high)];
        ``from_ramp`` marks the points taken from ramps' G(T) (open diamonds)."""
        item = self.lh.getPlotItem()
        for old in self._lh_items:
            item.removeItem(old)
        self._lh_items = []
        x, y = np.asarray(x, float), np.asarray(y, float)
        ramp = np.zeros(x.size, bool) if from_ramp is None else np.asarray(from_ramp, bool)
        self.lh_points.setData(*_finite(x[~ramp] * LH_X_SCALE, y[~ramp]))
        self.lh_ramp_points.setData(*_finite(x[ramp] * LH_X_SCALE, y[ramp]))
        for x_ends, y_ends in lines:
            line = item.plot(np.asarray(x_ends) * LH_X_SCALE, y_ends, pen=pg.mkPen(COLOURS["fit"], width=2))
            self._lh_items.append(line)
        for name, x_low, x_high in regimes:
            band = pg.LinearRegionItem((x_low * LH_X_SCALE, x_high * LH_X_SCALE), movable=False,
                                       brush=_REGIME_BRUSHES.get(name.split()[0], (100, 100, 100, 25)))
            band.setZValue(-20)
            label = pg.TextItem(f"regime {name}", color="#202020", anchor=(0.5, 0))
            label.setPos((x_low + x_high) / 2 * LH_X_SCALE, float(np.nanmax(y)) if len(y) else 0.0)
            for extra in (band, label):
                item.addItem(extra)
                self._lh_items.append(extra)

    def clear_lh(self) -> None:
        self.show_lh([], [], [], [])

    def plot_items(self) -> dict:
        return {"growth_vs_tc": self.growth.getPlotItem(), "density_vs_tc": self.density.getPlotItem(),
                "half_time_vs_tc": self.half_time.getPlotItem(),
                "lauritzen_hoffman": self.lh.getPlotItem()}


def _positive(tc, values):
    tc, values = _finite(tc, values)
    keep = values > 0
    return tc[keep], values[keep]
