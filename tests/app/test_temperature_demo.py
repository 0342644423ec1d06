"""The temperature-series view on the demo project, analysed by the real pipeline: the
table, the Lauritzen-Hoffman fit against the simulator's truth, and the XLSX export.

The demo series is simulated with Kg = 4.6e5 K^2 (sample_images/README.md: invented
truth of the demo, not published data), Tm0 = 185 °C, Tg = -10 °C, U* = 6270 J/mol.
"""

from __future__ import annotations

import openpyxl
import pytest
from test_kinetics_view import _collect_qt_garbage  # noqa: F401 (autouse fixture)

from analysis.spherulites.pipeline import analyze_experiment
from app.core.model import ProjectModel
from app.temperature.view import TemperatureView


def test_demo_series_table_fit_and_xlsx(qtbot, demo_project_path, tmp_path):
    model = ProjectModel()
    model.open_project(str(demo_project_path))
    for i, experiment in enumerate(model.experiments()):
        model.set_analysis(i, analyze_experiment(experiment), experiment)
    view = TemperatureView(model)
    qtbot.addWidget(view)
    view.resize(1600, 1000)
    view.show()
    assert view.table.proxy.rowCount() == 5 and not view.empty_note.isVisible()
    (ramp,) = view.ramps  # the demo's cooling run: its G(T) is drawn beside the points
    growth = ramp.ramp.growth
    assert growth.temperature_c.min() < 125 < growth.temperature_c.max()
    assert len(view.fit.regimes) == 1
    assert view.fit.overall.kg_k2 == pytest.approx(4.6e5, rel=0.05)
    measured = [p.measured_t_half_min for p in view.points]
    assert all(t is not None and t > 0 for t in measured)  # every DSC isotherm analysed
    book = openpyxl.load_workbook(view.export_table("xlsx", str(tmp_path / "demo.xlsx")))
    rows = list(book["growth_vs_temperature"].iter_rows(values_only=True))
    assert [r[1] for r in rows[1:]] == [124.0, 127.0, 130.0, 133.0, 136.0]
    assert "comparison" in book.sheetnames
