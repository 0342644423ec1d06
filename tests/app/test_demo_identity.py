"""Every number the demo project shows is the same wherever it appears.

Each demo experiment is analysed once. Its numbers are then read back from every place a
user meets them: the Microscopy page (experiment table, summary, nuclei plot), the
Kinetics page, the Tc-series page (plotted points and table), summary.json of `analyze`
and the report's CSV and XLSX files. Each quantity must show the same value in the same
unit everywhere; a place that shows fewer digits must show the value rounded to them.
"""

from __future__ import annotations

import csv
import html
import json
import re
from dataclasses import replace
from pathlib import Path

import pytest
from openpyxl import load_workbook
from test_kinetics_view import _collect_qt_garbage  # noqa: F401 (autouse fixture)

from analysis.cli.main import main as cli_main
from analysis.project.file import load_project, save_project
from analysis.reporting.entries import report_entry
from analysis.reporting.export import write_analysis_outputs
from analysis.results import COUNTS
from analysis.spherulites import pipeline

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "sample_images" / "demo.spherokin.json"
_SUPERSCRIPT = str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺", "0123456789-+")
# "4.6", "4.6 × 10⁵", "4.6 × 10^5", "4.6e+05", "32.1 ± 0.51", "(4.60 ± 0.03) × 10⁵"
_NUMBER = re.compile(r"(?P<open>\()?(?P<value>-?\d+(?:\.\d+)?)"
                     r"(?:\s*±\s*(?P<half>\d+(?:\.\d+)?)(?(open)\)))?"
                     r"(?:\s*×\s*10(?P<sup>[⁻⁺]?[⁰¹²³⁴⁵⁶⁷⁸⁹]+)|\s*×\s*10\^(?P<caret>-?\d+)"
                     r"|e(?P<e>[+-]?\d+))?")


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo project analysed once, the `report` command run on those analyses, and
    each experiment's summary.json written by `analyze`'s writer."""
    # The isothermal experiments: each has a DSC isotherm to compare with. The demo's
    # cooling ramp shows G(T), not these numbers; its own tests cover it.
    demo = load_project(str(DEMO))
    isothermal = tuple(e for e in demo.experiments if e.kind == "isothermal")
    assert len(isothermal) == 5  # the five Tc of the demo series
    project = save_project(replace(demo, experiments=isothermal),
                           tmp_path_factory.mktemp("project") / "isothermal.spherokin.json")
    analyses = {e.name: pipeline.analyze_experiment(e) for e in project.experiments}
    report_dir = tmp_path_factory.mktemp("report")

    def cached(experiment):  # the report's own call, answered from the analyses above
        return analyses[experiment.name]
        yield  # a generator, like the function it stands in for

    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(pipeline, "analyze_experiment_iter", cached)
        assert cli_main(["report", project.path, "--out", str(report_dir)]) == 0
    summaries = {}
    for experiment in project.experiments:
        out = tmp_path_factory.mktemp("analyze")
        write_analysis_outputs(analyses[experiment.name].result, out, geometry=experiment.geometry)
        summaries[experiment.name] = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    return project, analyses, report_dir, summaries


@pytest.fixture
def model(demo):
    from app.core.model import ProjectModel

    project, analyses, _report, _summaries = demo
    shown = ProjectModel(project)
    for i, experiment in enumerate(project.experiments):
        shown.set_analysis(i, analyses[experiment.name], experiment)
    return shown


def _truth(demo):
    """The analysis functions' own numbers per experiment, by quantity."""
    project, analyses, _report, _summaries = demo
    out = {}
    for experiment in project.experiments:
        entry = report_entry(experiment, analyses[experiment.name].result, project.material)
        r, pred, bulk = entry.result, entry.prediction, entry.bulk_prediction()
        fit = entry.calorimetry.avrami
        out[experiment.name] = {
            "temperature_c": entry.temperature_c, "g": r.growth_rate.value,
            "g_low": r.growth_rate.ci95_low, "g_high": r.growth_rate.ci95_high,
            "g_half": entry.growth_rate_ci95_half_width, **r.counts(), "mode": r.nucleation.mode,
            "n_a": r.nucleation.density_per_mm2, "n_v": entry.density_per_mm3,
            "rate_a": r.nucleation.rate_per_mm2_per_min, "rate_v": entry.rate_per_mm3_per_min,
            "geometry": entry.geometry, "pred_n": pred.n, "pred_k": pred.k_per_min_n,
            "pred_t_half": pred.t_half_min, "bulk_n": bulk.n, "bulk_k": bulk.k_per_min_n,
            "bulk_t_half": bulk.t_half_min, "dsc_n": fit.n, "dsc_k": fit.k_per_min_n,
            "dsc_t_half": fit.t_half_min}
    return out


def _same_digits(mantissa: str, scale: float, value) -> None:
    shown = float(mantissa) * scale
    digits = len(mantissa.lstrip("-").replace(".", "").lstrip("0")) or 1
    expected = float(f"{value / scale:.{digits}g}") * scale
    assert shown == pytest.approx(expected, rel=1e-12, abs=0.0), (mantissa, scale, value)


def shows(text: str, value, unit: str = "", half_width=None) -> None:
    """``text`` shows ``value`` (rounded to the digits it shows), then ``± half_width`` when
    given, followed by ``unit``."""
    match = _NUMBER.search(str(text))
    assert match, f"no number in {text!r}"
    exponent = match["sup"].translate(_SUPERSCRIPT) if match["sup"] else match["caret"] or match["e"]
    scale = 10.0 ** int(exponent) if exponent else 1.0
    _same_digits(match["value"], scale, value)
    if half_width is not None:
        assert match["half"], f"no ± half-width in {text!r}"
        _same_digits(match["half"], scale, half_width)
    if unit:
        assert str(text)[match.end():].lstrip().startswith(unit), (text, unit)


def _csv_rows(path: Path) -> dict:
    with open(path, newline="", encoding="utf-8") as stream:
        return {row["experiment"]: row for row in csv.DictReader(stream)}


def _html_rows(page: str) -> dict:
    cells = re.findall(r"<tr><td[^>]*>(.*?)</td><td>(.*?)</td></tr>", page)
    return {html.unescape(k): html.unescape(v) for k, v in cells}


def test_report_files_and_summary_json_agree_with_the_analysis(demo):
    project, _analyses, report_dir, summaries = demo
    truth = _truth(demo)
    growth_csv = _csv_rows(report_dir / "growth_vs_temperature.csv")
    comparison_csv = _csv_rows(report_dir / "kinetics_comparison.csv")
    book = load_workbook(report_dir / "growth_vs_temperature.xlsx")
    sheet = list(book["growth_vs_temperature"].values)
    xlsx = {row[0]: dict(zip(sheet[0], row)) for row in sheet[1:]}
    assert set(growth_csv) == set(xlsx) == set(truth) == set(summaries)
    # the fixture's project holds the isothermal experiments only: no ramp files, no ramp rows
    assert not list(report_dir.glob("ramp_*"))
    for name, t in truth.items():
        row, cells, summary = growth_csv[name], xlsx[name], summaries[name]
        pairs = {"temperature_c": "temperature_c", "growth_rate_um_per_min": "g",
                 "growth_rate_ci95_low_um_per_min": "g_low", "growth_rate_ci95_high_um_per_min": "g_high",
                 "nucleus_density_per_mm2": "n_a", "nucleus_density_per_mm3": "n_v",
                 "predicted_avrami_n": "pred_n", "predicted_k_per_min_n": "pred_k",
                 "predicted_t_half_min": "pred_t_half", "dsc_avrami_n": "dsc_n",
                 "dsc_t_half_min": "dsc_t_half", **{key: key for key in COUNTS}}
        for column, key in pairs.items():
            shows(row[column], t[key])
            assert cells[column] == pytest.approx(t[key], rel=1e-12), (name, column)
        assert row["nucleation_mode"] == cells["nucleation_mode"] == t["mode"]
        for column, key in (("nucleation_rate_per_mm2_per_min", "rate_a"),
                            ("nucleation_rate_per_mm3_per_min", "rate_v")):
            if t[key] is None:
                assert row[column] == "" and cells[column] is None
            else:
                shows(row[column], t[key])
        compared = comparison_csv[name]
        for column, key in (("predicted_n", "bulk_n"), ("predicted_k_per_min_n", "bulk_k"),
                            ("predicted_t_half_min", "bulk_t_half"), ("dsc_t_half_min", "dsc_t_half")):
            shows(compared[column], t[key])
        # summary.json of `analyze`, with the experiment's geometry
        g, nuc = summary["growth_rate_um_per_min"], summary["nucleation"]
        assert summary["temperature_c"] == t["temperature_c"]
        assert (g["value"], g["ci95_low"], g["ci95_high"]) == (t["g"], t["g_low"], t["g_high"])
        assert summary["spherulites_detected"] == t["spherulites_detected"]
        assert g["spherulites_in_pooled_g"] == t["spherulites_in_pooled_g"]
        assert nuc["nuclei_counted"] == t["nuclei_counted"] and nuc["mode"] == t["mode"]
        assert nuc["density_per_mm2"] == t["n_a"] and nuc["density_per_mm3"] == pytest.approx(t["n_v"], rel=1e-12)
        assert nuc["rate_per_mm2_per_min"] == t["rate_a"]
        predicted = summary["avrami_predicted"]
        assert predicted["geometry"] == t["geometry"] == "bulk-3d"
        assert predicted["t_half_min"] == pytest.approx(t["pred_t_half"], rel=1e-12)
        assert predicted["n"] == pytest.approx(t["pred_n"], rel=1e-12)
        assert predicted["k_per_min_n"] == pytest.approx(t["pred_k"], rel=1e-12)


def test_mixed_nucleation_half_time_is_the_same_everywhere_and_near_the_simulated_truth(demo, tmp_path):
    # The 136 °C demo is simulated with mixed nucleation; its true bulk half-time is 40.46 min
    # (sample_images/README.md, simulated truth). The prediction adds the sporadic rate to the
    # initial burst only (extended volume, Avrami 1940, J. Chem. Phys. 8, 212 # from memory).
    project, analyses, report_dir, summaries = demo
    experiment = next(e for e in project.experiments if e.temperature_c == 136.0)
    t = _truth(demo)[experiment.name]
    assert t["mode"] == "mixed"
    # 10 %: the scatter of N and G detected on one small field, not a published value # common practice
    assert t["bulk_t_half"] == pytest.approx(40.46, rel=0.10)
    # `analyze` run for real from the command line gives the same summary as the project path
    out = tmp_path / "cli"
    args = ["analyze", str(Path(experiment.stack_path)), "--out", str(out),
            "--um-per-px", str(experiment.um_per_px), "--interval-s", str(experiment.interval_s),
            "--temperature-c", str(experiment.temperature_c),
            "--thickness-um", str(experiment.thickness_um),
            "--isothermal-start-s", str(experiment.isothermal_start_s), "--geometry", "bulk-3d"]
    assert cli_main(args) == 0
    from_cli = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    from_project = summaries[experiment.name]
    for key in ("growth_rate_um_per_min", "nucleation", "avrami_predicted", "spherulites_detected"):
        assert from_cli[key] == from_project[key], key
    assert from_cli["avrami_predicted"]["t_half_min"] == pytest.approx(t["bulk_t_half"], rel=1e-12)
    shows(_csv_rows(report_dir / "growth_vs_temperature.csv")[experiment.name]["predicted_t_half_min"],
          t["bulk_t_half"])


def test_microscopy_page_shows_the_same_numbers(qtbot, demo, model):
    from app.microscopy.details_panel import experiment_html
    from app.microscopy.experiments_panel import row_values
    from app.microscopy.plots_panel import PlotsPanel

    truth = _truth(demo)
    plots = PlotsPanel(model)
    qtbot.addWidget(plots)
    for i, experiment in enumerate(model.experiments()):
        t = truth[experiment.name]
        name, tc, detected, growth, _status = row_values(model, i)
        shows(tc, t["temperature_c"])
        assert int(detected) == t["spherulites_detected"]
        shows(growth, t["g"], half_width=t["g_half"])
        rows = _html_rows(experiment_html(experiment, model.result(i), model.status(i), ""))
        for key in COUNTS:
            assert int(rows[COUNTS[key][0]]) == t[key], key
        shows(rows["Pooled G"], t["g"], "µm/min")
        assert rows["Nucleation mode"] == t["mode"]
        density_areal, density_volumetric = rows["Density"].split("|")
        shows(density_areal, t["n_a"], "mm⁻²")
        shows(density_volumetric, t["n_v"], "mm⁻³")
        predicted = rows["Avrami, predicted bulk-3d"]
        shows(predicted.split("n = ")[1], t["pred_n"])
        shows(predicted.split("t½ = ")[1], t["pred_t_half"], "min")
        model.select(i)
        plots.refresh()
        _times, counts = plots.count_plot.getPlotItem().listDataItems()[0].getData()
        assert counts[-1] == t["nuclei_counted"]


def test_kinetics_page_shows_the_same_numbers(qtbot, demo, model):
    from app.kinetics.view import KineticsView

    truth = _truth(demo)
    view = KineticsView(model)
    qtbot.addWidget(view)
    for i, experiment in enumerate(model.experiments()):
        t = truth[experiment.name]
        model.select(i)
        view.refresh()
        form = view.prediction.form
        assert form.text("mode").startswith(t["mode"])
        for key in ("nuclei_counted", "spherulites_in_pooled_g"):
            assert int(form.text(key)) == t[key], key
        shows(form.text("density_areal"), t["n_a"], "mm⁻²")
        shows(form.text("density_volumetric"), t["n_v"], "mm⁻³")
        shows(form.text("growth_rate"), t["g"], "µm/min", half_width=t["g_half"])
        shows(form.text("n"), t["pred_n"])
        shows(form.text("k"), t["pred_k"], "min⁻ⁿ")
        shows(form.text("t_half"), t["pred_t_half"], "min")
        calorimetry = view.calorimetry_panel.form
        shows(calorimetry.text("n"), t["dsc_n"])
        shows(calorimetry.text("t_half"), t["dsc_t_half"], "min")
        table = view.comparison.table
        shows(table.item(2, 0).text(), t["bulk_t_half"])  # t½ row: microscopy (bulk), DSC
        shows(table.item(2, 1).text(), t["dsc_t_half"])


def test_tc_series_page_shows_the_same_numbers(qtbot, demo, model):
    from app.temperature.view import TemperatureView

    truth = _truth(demo)
    view = TemperatureView(model)
    qtbot.addWidget(view)
    view.refresh()
    points = {p.name: p for p in view.points}
    header = view.table.header()
    rows = {row[0]: dict(zip(header, row)) for row in view.table.shown_rows()}
    assert set(points) == set(rows) == set(truth)
    for name, t in truth.items():
        p, row = points[name], rows[name]
        assert (p.temperature_c, p.growth_rate, p.growth_ci95) == (t["temperature_c"], t["g"], t["g_half"])
        assert (p.density_areal, p.density_volumetric) == (t["n_a"], t["n_v"])
        assert p.predicted_t_half_min == t["bulk_t_half"] and p.measured_t_half_min == t["dsc_t_half"]
        for label, key in (("Tc (°C)", "temperature_c"), ("G (µm/min)", "g"), ("N_A (mm⁻²)", "n_a"),
                           ("N_V (mm⁻³)", "n_v"), ("predicted t½ (min)", "pred_t_half"),
                           ("DSC t½ fit (min)", "dsc_t_half"),
                           *((COUNTS[key][0], key) for key in COUNTS)):
            shows(row[label], t[key])
        assert row["mode"] == t["mode"]
