"""Cross-experiment tables, the microscopy/DSC comparison, CSV/XLSX writing."""

import csv
import math

import numpy as np
import pytest
from openpyxl import load_workbook

from analysis.kinetics.avrami import AvramiFit
from analysis.reporting.tables import (
    GROWTH_HEADER,
    ReportEntry,
    Table,
    compare_kinetics,
    comparison_table,
    escape_cell,
    growth_vs_temperature_table,
    write_csv,
    write_xlsx,
)
from analysis.results import ExperimentResult, Nucleation, PooledGrowthRate


def result(tc, g=10.0, n_mm3=1e3, count=400, name="stack.tif", mode="athermal"):
    return ExperimentResult(
        stack=name, frames=10, um_per_px=1.0, interval_s=1.0, temperature_c=tc, thickness_um=20.0,
        spherulites=(), radii=(), growth_rate=PooledGrowthRate(g, g and 0.98 * g, g and 1.02 * g, 12),
        nucleation=Nucleation(count, mode, n_mm3 * 0.02, n_mm3, None, None, None),
        area_fraction_time_s=np.zeros(0), area_fraction=np.zeros(0))


class FakeCalorimetry:
    """Only the attributes the tables read (a CalorimetryResult in real use)."""

    def __init__(self, n, t_half):
        k = math.log(2) / t_half ** n
        self.avrami = AvramiFit(n, k, t_half, 0.999, 20, (0.03, 0.2), "window-linear")
        self.t_half_measured_min = t_half * 1.001
        self.induction_time_min = 0.5


def test_escape_cell():
    # spreadsheet formula injection (OWASP CSV injection guidance # common practice)
    for text in ("=1+1", "+cmd", "-2+3", "@SUM(A1)", "\t=x"):
        assert escape_cell(text) == "'" + text
    assert escape_cell("plain") == "plain" and escape_cell(-3.5) == -3.5 and escape_cell(None) is None


def test_growth_table_rows_sorted_with_units():
    entries = [ReportEntry("hot", result(140.0, g=1.0)), ReportEntry("cold", result(120.0, g=30.0),
               calorimetry=FakeCalorimetry(3.0, 2.0))]
    table = growth_vs_temperature_table(entries)
    assert table.header == GROWTH_HEADER
    assert [row[0] for row in table.rows] == ["cold", "hot"]
    cold = dict(zip(table.header, table.rows[0]))
    assert cold["growth_rate_um_per_min"] == 30.0 and cold["spherulites_in_pooled_g"] == 12
    assert cold["nuclei_counted"] == 400 and cold["spherulites_detected"] == 0
    # 3-D athermal k = (4 pi/3) N_V G^3 (docs/sources.md 1.2, derived here)
    assert cold["predicted_k_per_min_n"] == pytest.approx(4 * math.pi / 3 * 1e3 * 0.03 ** 3)
    assert cold["dsc_avrami_n"] == 3.0 and cold["dsc_t_half_min"] == 2.0
    hot = dict(zip(table.header, table.rows[1]))
    assert hot["dsc_avrami_n"] is None


def test_comparison_agreement_and_disagreement():
    # predicted t_half = 5.4901 min for N_V = 1e3 mm^-3, G = 10 um/min (docs/sources.md 1.4)
    same = ReportEntry("a", result(130.0), calorimetry=FakeCalorimetry(3.0, 5.50))
    comp = compare_kinetics(same)
    assert comp.predicted_t_half_min == pytest.approx(5.4901, rel=1e-4)
    assert comp.agree and "agree" in comp.note
    fast = compare_kinetics(ReportEntry("b", result(130.0), calorimetry=FakeCalorimetry(3.0, 2.0)))
    assert not fast.agree and fast.t_half_ratio == pytest.approx(2.0 / 5.4901, rel=1e-4)
    assert "faster" in fast.note and "nuclei" in fast.note
    slow = compare_kinetics(ReportEntry("c", result(130.0), calorimetry=FakeCalorimetry(1.6, 15.0)))
    assert "slower" in slow.note and "unusual" in slow.note
    # few spherulites -> wide Poisson uncertainty (docs/sources.md 1.6: 1/sqrt(N)) -> agreement
    wide = compare_kinetics(ReportEntry("d", result(130.0, count=4), calorimetry=FakeCalorimetry(3.0, 7.0)))
    assert wide.agree
    assert compare_kinetics(ReportEntry("e", result(130.0))) is None
    table = comparison_table([same, ReportEntry("e", result(130.0))])
    assert len(table.rows) == 1 and table.rows[0][10] == "agree"


def test_film_geometry_still_compared_in_3d():
    entry = ReportEntry("f", result(130.0), geometry="film-2d", calorimetry=FakeCalorimetry(3.0, 5.5))
    assert entry.prediction.dimension == 2
    assert compare_kinetics(entry).predicted_n == 3


def test_missing_inputs_leave_blanks():
    entry = ReportEntry("g", result(130.0, g=None))
    assert entry.prediction is None and "growth rate" in entry.prediction_problem
    row = dict(zip(GROWTH_HEADER, growth_vs_temperature_table([entry]).rows[0]))
    assert row["predicted_avrami_n"] is None


def test_csv_and_xlsx_escape_and_round_trip(tmp_path):
    table = Table(["name", "value_um", "note"], [["=HYPERLINK(\"x\")", -1.5, "@risk"],
                                                 ["ok", None, float("nan")]])
    path = write_csv(table, tmp_path / "t.csv")
    rows = list(csv.reader(open(path, encoding="utf-8")))
    assert rows[1] == ["'=HYPERLINK(\"x\")", "-1.5", "'@risk"]
    assert rows[2] == ["ok", "", ""]
    book = load_workbook(write_xlsx({"growth": table}, tmp_path / "t.xlsx"))
    sheet = book["growth"]
    assert sheet["A2"].value == "'=HYPERLINK(\"x\")" and sheet["A2"].data_type == "s"
    assert sheet["B2"].value == -1.5 and sheet["C3"].value is None
    assert sheet.freeze_panes == "A2" and sheet["A1"].font.bold
