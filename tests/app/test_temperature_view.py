"""The temperature-series view: table (sort, copy, CSV/XLSX read back), Lauritzen-Hoffman
constants as undoable edits, the fit on an exact synthetic G(Tc) series, Hoffman-Weeks."""

from __future__ import annotations

import csv

import numpy as np
import openpyxl
import pytest
from PySide6 import QtCore, QtWidgets
from test_kinetics_view import HandMadeAnalysis, _collect_qt_garbage, hand_made_result, model_with  # noqa: F401 (autouse fixture)

from app.temperature.view import TemperatureView

# Synthetic single-regime G(Tc) series generated from the LH equation with Tm0 = 185 °C,
# Tg = -10 °C, T_inf = Tg - 30 K, U* = 6270 J/mol, Kg = 5.5e5 K^2 (exact by construction;
# LH form: Lauritzen & Hoffman 1960, J. Res. NBS 64A, 73, from memory; Hoffman 1983, Polymer 24, 3,
# from memory).
FIXTURE_A = {120.0: 92.5056, 125.0: 24.8726, 130.0: 5.0, 135.0: 0.691541, 140.0: 0.0583348,
             145.0: 0.00250379}



@pytest.fixture
def view(qtbot, tmp_path):
    results = [hand_made_result(temperature_c=tc, g=g) for tc, g in FIXTURE_A.items()]
    model = model_with(results, tmp_path)
    widget = TemperatureView(model)
    qtbot.addWidget(widget)
    widget.resize(1500, 950)
    widget.show()
    return widget


def _set_spin(spin, value):
    spin.setValue(value)
    spin.editingFinished.emit()


def test_table_sorts_and_copies_tsv(view):
    table = view.table
    assert table.proxy.rowCount() == len(FIXTURE_A)
    header = table.header()
    assert "Tc (°C)" in header and "G (µm/min)" in header and "G 95 % CI low (µm/min)" in header
    assert "predicted t½ (min) 95 % CI high" not in header and "predicted t½ 95 % CI high (min)" in header
    tc_col, g_col = header.index("Tc (°C)"), header.index("G (µm/min)")
    table.view.sortByColumn(g_col, QtCore.Qt.SortOrder.AscendingOrder)
    rows = table.shown_rows()
    assert [float(r[tc_col]) for r in rows] == sorted(FIXTURE_A, reverse=True)  # G falls with Tc
    text = table.copy_to_clipboard()
    assert QtWidgets.QApplication.clipboard().text() == text
    lines = text.splitlines()
    assert len(lines) == 1 + len(FIXTURE_A) and lines[0].split("\t") == header


def _intervals_resampled(view, qtbot) -> None:
    """The Kg text shows the point value at once and the resampled interval once the
    worker is done: wait for it, so the texts compared are of the same kind."""
    qtbot.waitUntil(lambda: not view.lh_job.running, timeout=60_000)


def test_lh_fit_needs_constants_and_undo_restores(view, qtbot):
    model = view.model
    # until the series sets its own, Tm0 and Tg come from the material table, as in the report
    assert "material table entry iPP" in view.lh_results.message.text()
    _intervals_resampled(view, qtbot)
    from_table = view.lh_results.form.text("kg")
    _set_spin(view.constants.tm0, 185.0)
    _set_spin(view.constants.tg, -10.0)
    assert model.undo_stack.count() == 2
    assert model.project.series["tm0_c"] == 185.0
    _intervals_resampled(view, qtbot)
    kg_text = view.lh_results.form.text("kg")
    assert kg_text.startswith("5.5 × 10⁵ K² (95 % CI "), kg_text  # exact data: Kg recovered
    x, y = view.plots.lh_points.getData()
    assert len(x) == len(FIXTURE_A)
    _set_spin(view.constants.tm0, 190.0)
    assert view.lh_results.form.text("kg") != kg_text  # Kg depends on Tm0
    model.undo_stack.undo()
    assert view.lh_results.form.text("kg") == kg_text
    model.undo_stack.undo()
    assert model.project.series.get("tg_c") is None
    assert view.lh_results.form.text("kg") == from_table
    model.set_project_fields(material=None)
    assert "no Tg" in view.lh_results.message.text()  # nothing fitted without constants
    assert view.lh_results.form.text("kg") == "—"


def test_material_fills_tm0_and_tg_in_one_step(view):
    index = view.constants.material.findData("iPP")
    view.constants.material.setCurrentIndex(index)
    view.constants.material.activated.emit(index)
    project = view.model.project
    assert project.material == "iPP" and project.series["tm0_c"] is not None
    assert view.model.undo_stack.count() == 1
    assert view.constants.tm0.value() == pytest.approx(project.series["tm0_c"])


def test_hoffman_weeks_helper(view):
    # Tm0 = 186 °C, gamma = 2: Tc 130 -> Tm 158, Tc 140 -> Tm 163 (Hoffman & Weeks 1962,
    # J. Res. NBS 66A, 13, from memory; values derived from the formula).
    hw = view.hw
    hw.add_row()
    hw.add_row()
    assert hw.table.rowCount() == 2
    for row, (tc, tm) in enumerate(((130, 158), (140, 163))):
        hw.table.item(row, 0).setText(str(tc))
        hw.table.item(row, 1).setText(str(tm))
    assert view.model.project.series["hoffman_weeks_pairs"] == [[130.0, 158.0], [140.0, 163.0]]
    assert "Tm0 = 186.0 °C" in hw.result.text() and "γ = 2.00" in hw.result.text()
    hw.adopt.click()
    assert view.model.project.series["tm0_c"] == pytest.approx(186.0)
    view.model.undo_stack.undo()
    assert view.model.project.series.get("tm0_c") is None


def test_export_csv_and_xlsx_read_back(view, tmp_path):
    csv_path = view.export_table("csv", str(tmp_path / "series.csv"))
    with open(csv_path, newline="", encoding="utf-8") as handle:
        rows = list(csv.reader(handle))
    assert rows[0][:3] == ["experiment", "temperature_c", "growth_rate_um_per_min"]
    assert len(rows) == 1 + len(FIXTURE_A)
    xlsx_path = view.export_table("xlsx", str(tmp_path / "series.xlsx"))
    book = openpyxl.load_workbook(xlsx_path)
    sheet = book["growth_vs_temperature"]
    values = list(sheet.iter_rows(values_only=True))
    assert values[0][1] == "temperature_c"
    by_tc = {row[1]: row[2] for row in values[1:]}
    assert by_tc == pytest.approx(FIXTURE_A)
    assert not list(tmp_path.glob(".*"))  # no temporary files left behind


def test_export_into_missing_folder_reports_the_file(view, tmp_path, monkeypatch):
    shown = []
    monkeypatch.setattr(QtWidgets.QMessageBox, "critical", lambda *args: shown.append(args[2]))
    assert view.export_table("csv", str(tmp_path / "nowhere" / "series.csv")) is None
    assert "series.csv" in shown[0]


def test_export_figures(view, tmp_path):
    _set_spin(view.constants.tm0, 185.0)
    _set_spin(view.constants.tg, -10.0)
    written = view.export_figures(str(tmp_path))
    assert len(written) == 8 and all(p.endswith((".png", ".svg")) for p in written)


def test_report_runs_in_worker_and_writes_the_report_folder(view, tmp_path, qtbot):
    _set_spin(view.constants.tm0, 185.0)
    _set_spin(view.constants.tg, -10.0)
    view._pairs_edited([[130.0, 158.0], [140.0, 163.0], [None, 170.0]])  # last row incomplete
    out = tmp_path / "report"
    with qtbot.waitSignal(view.report_job.finished, timeout=60000) as done:
        assert view.write_report(str(out))
        assert view.report_job.bar_widget.isVisibleTo(view)
        assert not view.write_report(str(out))  # one report at a time
    ok, detail = done.args
    assert ok, detail
    names = {p.name for p in out.iterdir()}
    assert {"growth_vs_temperature.csv", "growth_vs_temperature.xlsx",
            "secondary_nucleation.json", "lauritzen_hoffman.png", "lauritzen_hoffman.svg",
            "hoffman_weeks.json"} <= names
    assert "files written" in view.report_status.text()
    assert not view.report_job.bar_widget.isVisibleTo(view)


# Two-regime synthetic series: regime III (Kg = 5.5e5 K^2) up to 137 °C, regime II (Kg = 2.75e5 K^2)
# above, same constants as FIXTURE_A (Kg(III) = 2 Kg(II): Hoffman 1983, Polymer 24, 3, from memory).
FIXTURE_B = {125.0: 24.8726, 127.5: 11.6169, 130.0: 5.0, 132.5: 1.96107, 135.0: 0.691541,
             137.5: 0.245122, 140.0: 0.131290, 142.5: 0.0646232, 145.0: 0.0287843,
             147.5: 0.0113774, 150.0: 0.00389160}


def test_regimes_are_detected_and_shaded(qtbot, tmp_path):
    import pyqtgraph as pg

    results = [hand_made_result(temperature_c=tc, g=g) for tc, g in FIXTURE_B.items()]
    model = model_with(results, tmp_path)
    model.set_project_fields(series={"tm0_c": 185.0, "tg_c": -10.0})
    view = TemperatureView(model)
    qtbot.addWidget(view)
    view.show()
    assert len(view.fit.regimes) == 2 and abs(view.fit.break_c - 137.0) <= 2.0
    assert float(view.lh_results.form.text("ratio")) == pytest.approx(2.0, abs=0.1)
    assert "break at" in view.lh_results.form.text("regimes")
    bands = [item for item in view.plots.lh.getPlotItem().items if isinstance(item, pg.LinearRegionItem)]
    assert len(bands) == 2


def test_double_click_selects_the_experiment_and_undo_text_names_the_constant(view):
    table = view.table
    tc_col = table.header().index("Tc (°C)")
    table.view.sortByColumn(tc_col, QtCore.Qt.SortOrder.DescendingOrder)
    table.view.doubleClicked.emit(table.proxy.index(0, 0))
    assert view.model.experiment(view.model.current_index).temperature_c == 145.0
    _set_spin(view.constants.tm0, 185.0)
    assert view.model.undo_stack.undoText() == "Set Tm0 = 185 °C"


def test_lh_intervals_resample_in_the_worker_with_the_stored_seed(qtbot, tmp_path):
    from analysis.reporting.entries import lauritzen_hoffman_series, series_constants
    from app.widgets.formatting import fmt_estimate

    results = [hand_made_result(temperature_c=tc, g=g) for tc, g in FIXTURE_A.items()]
    model = model_with(results, tmp_path)
    series = {"tm0_c": 185.0, "tg_c": -10.0, "resampling_seed": 5}
    model.set_project_fields(series=series)
    view = TemperatureView(model)
    qtbot.addWidget(view)
    view.show()
    assert view.lh_job.running  # in the worker, not on the GUI thread
    assert "resampling" in view.lh_results.message.text()
    qtbot.waitUntil(lambda: not view.lh_job.running, timeout=60_000)
    # the report's numbers: same function, same inputs, the project's stored seed
    constants, _ = series_constants(series, model.project.material)
    report = lauritzen_hoffman_series(view.entries, constants, model.project.material, seed=5).intervals
    form = view.lh_results.form
    assert form.text("kg") == fmt_estimate(report.kg_k2, "K²") and "95 % CI" in form.text("kg")
    assert form.text("g0") == fmt_estimate(report.g0_um_per_min, "µm/min")
    assert form.text("sigma_sigma_e") == fmt_estimate(report.sigma_sigma_e_j2_per_m4, "J²/m⁴")
    assert fmt_estimate(report.sigma_e_j_m2.scaled(1e3), "mJ/m²") in form.text("sigma")
    assert "resampled series" in form.text("regimes")  # how often the draws find a break
    assert "resampling" not in view.lh_results.message.text()


def test_stage_uncertainty_of_the_project_is_one_undo_step(view):
    model, spin = view.model, view.constants.stage_u
    header = view.table.header()
    column = header.index("stage u_T (K)")
    assert spin.value() == 0.5 and "stage_uncertainty_k" not in model.project.series  # the default
    assert {row[column] for row in view.table.shown_rows()} == {"0.5"}
    _set_spin(spin, 0.5)  # the default confirmed: nothing to undo
    assert model.undo_stack.count() == 0
    _set_spin(spin, 1.2)
    assert model.undo_stack.count() == 1 and model.project.series["stage_uncertainty_k"] == 1.2
    assert model.undo_stack.undoText() == "Set stage-temperature uncertainty = 1.2 K"
    assert {row[column] for row in view.table.shown_rows()} == {"1.2"}  # every experiment follows
    model.undo_stack.undo()
    assert "stage_uncertainty_k" not in model.project.series and spin.value() == 0.5


def test_refresh_reuses_entries_until_their_result_changes(view, monkeypatch):
    """The bootstrap intervals of a prediction are cached on its entry: a refresh with the
    same results must not resample them again; a new result of one experiment gets a new
    entry (and so new intervals), the others keep theirs."""
    before = list(view.entries)
    assert all("prediction_intervals" in vars(e) for e in before)  # computed for the table
    view.refresh()
    assert all(a is b for a, b in zip(view.entries, before))
    model = view.model
    model.set_analysis(0, HandMadeAnalysis(hand_made_result(temperature_c=120.0, g=90.0)), model.experiment(0))
    view.refresh()
    assert view.entries[0] is not before[0] and view.entries[0].result.growth_rate.value == pytest.approx(90.0)
    assert all(a is b for a, b in zip(view.entries[1:], before[1:]))


def test_ramp_curve_is_dashed_where_fronts_move_under_a_pixel_per_frame(qtbot):
    """G(T) of a ramp is drawn solid where the fronts move at least a pixel between frames
    and dashed where it rests on sub-pixel motion (``RampAnalysis.warnings`` says so too)."""
    from types import SimpleNamespace

    from app.temperature.plots import TemperaturePlots

    plots = TemperaturePlots()
    qtbot.addWidget(plots)
    tc = np.linspace(120.0, 132.0, 13)
    g = 30.0 * np.exp(-(tc - 120.0) / 3.0)
    ramp = SimpleNamespace(growth=SimpleNamespace(temperature_c=tc, growth_rate_um_per_min=g,
                                                  ci95_low=0.95 * g, ci95_high=1.05 * g),
                           front_advance_px_per_frame=g / 6.0)  # under 1 px per frame from 126 °C on
    plots.show_ramps([("run A", ramp)])
    solid, dashed = plots._ramp_items[3], plots._ramp_items[4]
    assert dashed.opts["pen"].style() == QtCore.Qt.PenStyle.DashLine
    assert solid.opts["pen"].style() == QtCore.Qt.PenStyle.SolidLine
    fast = ramp.front_advance_px_per_frame >= 1.0
    assert list(solid.opts["connect"][:-1]) == list(fast[:-1] & fast[1:])
    assert list(dashed.opts["connect"][:-1]) == list(~(fast[:-1] & fast[1:]))
    plots.show_ramps([("run A", SimpleNamespace(growth=ramp.growth, front_advance_px_per_frame=np.full_like(g, 5.0)))])
    assert len(plots._ramp_items) == 4  # every front resolved: no dashed part, the old one removed
