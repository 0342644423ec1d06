"""Plots of the current experiment: radius versus time with the fits, the nuclei count
and the crystallized area fraction X(t) versus time.

Every curve is drawn against time from the isothermal start; a vertical line follows the
viewer's frame. Clicking a spherulite's points or fit selects it everywhere.

Run alone: ``python -m app.microscopy.plots_panel PROJECT``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QSplitter, QVBoxLayout, QWidget

from analysis.kinetics.avrami import avrami_conversion
from analysis.kinetics.prediction import film_avrami_fit
from analysis.results import COUNTS

from app.core import model as m
from app.microscopy.overlays import SELECTED_COLOUR, status_colour

BACKGROUND = "#1b1e25"
FOREGROUND = "#c9d1dc"


def nuclei_count_curve(nucleation_times_s, end_s: float | None = None):
    """Step curve (time, cumulative count) from nucleation times; None times are skipped.

    With ``end_s`` later than the last nucleation the final count is held until then.
    """
    times = np.sort(np.array([t for t in nucleation_times_s if t is not None], float))
    if times.size == 0:
        return np.zeros(0), np.zeros(0)
    counts = np.arange(1, times.size + 1, dtype=float)
    step_t, step_n = np.repeat(times, 2)[1:], np.repeat(counts, 2)[:-1]
    if end_s is not None and end_s > times[-1]:
        step_t, step_n = np.append(step_t, end_s), np.append(step_n, counts[-1])
    return step_t, step_n


def avrami_curve(avrami: Any, t_max_s: float, origin_s: float = 0.0):
    """X(t) = 1 - exp(-k (t - origin)^n), t in minutes, over [origin_s, t_max_s] seconds.

    The film fit counts time from the induction time (``origin_s``), so the curve starts
    there on the plot's axis of time from reaching Tc.
    """
    if not avrami or avrami.n is None or avrami.k_per_min_n is None or not t_max_s > origin_s:
        return None
    t_s = np.linspace(origin_s, t_max_s, 200)
    return t_s, avrami_conversion((t_s - origin_s) / 60.0, avrami.n, avrami.k_per_min_n)


def _plot(title: str, y_label: str) -> pg.PlotWidget:
    widget = pg.PlotWidget(background=BACKGROUND)
    item = widget.getPlotItem()
    item.setTitle(title, color=FOREGROUND, size="10pt")
    item.setLabel("left", y_label, color=FOREGROUND)
    item.setLabel("bottom", "t from reaching Tc (s)", color=FOREGROUND)
    item.showGrid(x=True, y=True, alpha=0.15)
    item.setMenuEnabled(False)
    return widget


class PlotsPanel(QWidget):
    """Three stacked plots kept in step with the model's current experiment."""

    def __init__(self, model: "m.ProjectModel", parent: QWidget | None = None):
        super().__init__(parent)
        self._model = model
        self.splitter = QSplitter(Qt.Vertical)
        # Short titles: they must fit the panel's width on a 1280-pixel screen.
        self.radius_plot = _plot("Radii r(t)", "radius (µm)")
        self.count_plot = _plot(COUNTS["nuclei_counted"][0], "count")
        self.count_plot.setToolTip(f"{COUNTS['nuclei_counted'][0]}: {COUNTS['nuclei_counted'][1]}, "
                                   "against their nucleation time")
        self.fraction_plot = _plot("Area fraction X(t)", "X")
        for plot in (self.radius_plot, self.count_plot, self.fraction_plot):
            self.splitter.addWidget(plot)
        self.splitter.setSizes([500, 250, 250])
        layout = QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(self.splitter)
        self._time_lines = []
        for plot in (self.radius_plot, self.count_plot, self.fraction_plot):
            line = pg.InfiniteLine(angle=90, pen=pg.mkPen("#8895a7", style=Qt.DashLine))
            line.setZValue(-5)
            plot.addItem(line, ignoreBounds=True)
            self._time_lines.append(line)
        self._curves: dict[int, list] = {}
        self._pool: list[list] = []  # reusable [filled points, hollow points, fit] per slot
        self._count_curve = self.count_plot.plot(pen=pg.mkPen("#f2c14e", width=2))
        self._fraction_points = self.fraction_plot.plot(
            pen=None, symbol="o", symbolSize=4, symbolBrush="#6ec3ff", symbolPen=None)
        self._fraction_fit = self.fraction_plot.plot(
            pen=pg.mkPen("#ff9f6b", width=2, style=Qt.DashLine))
        self._item_ids: dict[int, int] = {}  # id(graphics item) -> spherulite id
        model.project_replaced.connect(self.refresh)
        model.experiments_removed.connect(lambda *_: self.refresh())
        model.analysis_updated.connect(self._on_index_event)
        model.selection_changed.connect(self._on_selection_changed)
        self._shown_index = None
        self.refresh()

    def set_time(self, time_s: float | None) -> None:
        """Move the current-frame marker (seconds from the isothermal start)."""
        for line in self._time_lines:
            line.setVisible(time_s is not None)
            if time_s is not None:
                line.setValue(time_s)

    def refresh(self) -> None:
        index = self._model.current_index
        self._shown_index = index
        result = self._model.result(index) if index >= 0 else None
        self._draw_radii(result)
        self._draw_counts(result)
        self._draw_fraction(result)

    # ---------------------------------------------------------------- drawing
    # Items are created once and reused (setData / hide): dropping pyqtgraph items on
    # every refresh leaves wrappers to be collected after Qt shuts down.
    def _radius_items(self, slot: int) -> list:
        while len(self._pool) <= slot:
            items = [pg.PlotDataItem(pen=None, symbol="o", symbolSize=5, symbolPen=None),
                     pg.PlotDataItem(pen=None, symbol="o", symbolSize=5, symbolBrush=None),
                     pg.PlotDataItem()]
            for item in items:
                item.setCurveClickable(True, width=6)
                item.sigClicked.connect(self._on_item_clicked)
                item.scatter.sigClicked.connect(self._on_item_clicked)
                self.radius_plot.addItem(item)
            self._pool.append(items)
        return self._pool[slot]

    def _draw_radii(self, result: Any) -> None:
        self._curves, self._item_ids = {}, {}
        by_id = {} if result is None else {s.id: s for s in result.spherulites}
        series_list = [] if result is None else [r for r in result.radii if r.id in by_id]
        for slot, series in enumerate(series_list):
            s = by_id[series.id]
            items = self._radius_items(slot)
            self._fill_radius_items(items, s, series, s.id == self._model.selected_id)
            self._curves[s.id] = items
            for item in items:
                self._item_ids[id(item)] = self._item_ids[id(item.scatter)] = s.id
        for items in self._pool[len(series_list):]:
            for item in items:
                item.setData([], [])
                item.setVisible(False)
        self._style_selection()

    def _fill_radius_items(self, items: list, s: Any, series: Any, selected: bool) -> None:
        used = np.asarray(series.used, bool)
        t, r = np.asarray(series.time_s, float), np.asarray(series.radius_um, float)
        colour = status_colour(s.status)
        filled, hollow, fit = items
        filled.setData(t[used], r[used], symbolBrush=colour)
        hollow.setData(t[~used], r[~used], symbolPen=colour)
        if s.growth_rate_um_per_min is not None and s.nucleation_time_s is not None and t.size:
            t_fit = np.array([s.nucleation_time_s, t.max()])
            fit.setData(t_fit, np.array([s.radius_um_at(x) for x in t_fit]))
        else:
            fit.setData([], [])
        fit.setPen(pg.mkPen(QColor(SELECTED_COLOUR), width=3) if selected
                   else pg.mkPen(colour, width=1.5))
        for item in items:
            item.setVisible(True)

    def _on_item_clicked(self, item, *_args) -> None:
        sid = self._item_ids.get(id(item))
        if sid is not None:
            self._model.select_spherulite(sid)

    def _style_selection(self) -> None:
        selected = self._model.selected_id
        for sid, items in self._curves.items():
            for item in items:
                is_selected = sid == selected
                item.setOpacity(1.0 if is_selected or selected < 0 else 0.3)
                item.setZValue(10 if is_selected else 0)

    def _draw_counts(self, result: Any) -> None:
        times = counts = np.zeros(0)
        if result is not None:
            record = np.asarray(result.area_fraction_time_s, float)
            times, counts = nuclei_count_curve(
                result.nucleation.times_s,
                float(record.max()) if record.size else None)
        self._count_curve.setData(times, counts)

    def _draw_fraction(self, result: Any) -> None:
        t = x = np.zeros(0)
        curve = None
        if result is not None:
            t = np.asarray(result.area_fraction_time_s, float)
            x = np.asarray(result.area_fraction, float)
            origin = result.nucleation.induction_time_s or 0.0
            curve = avrami_curve(film_avrami_fit(result), float(t.max()) if t.size else 0.0, origin)
        self._fraction_points.setData(t, x)
        self._fraction_fit.setData(*(curve if curve is not None else ([], [])))
        self.fraction_plot.setYRange(0, 1.02)

    # ---------------------------------------------------------------- events
    def _on_index_event(self, index: int) -> None:
        if index == self._model.current_index:
            self.refresh()

    def _on_selection_changed(self, index: int, _sid: int) -> None:
        if index != self._shown_index:
            self.refresh()
        else:
            self._draw_radii(self._model.result(index) if index >= 0 else None)


if __name__ == "__main__":  # pragma: no cover - quick look
    import sys

    from app.widgets.preview import run_alone

    sys.exit(run_alone(PlotsPanel, sys.argv, size=(600, 800)))
