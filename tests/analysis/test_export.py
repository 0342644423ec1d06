"""Files written by ``analyze``: columns, JSON schema, escaping and the overlay."""

import csv
import dataclasses
import json
import types

import cv2
import numpy as np
import pytest

from analysis.errors import InputError
from analysis.reporting import export
from analysis.spherulites import growth, pipeline


@pytest.fixture(scope="module")
def result():
    times = np.arange(0.0, 200.0, 4.0)
    exact = growth.model_arrival_map((90, 110), [[30.0, 40.0], [80.0, 50.0]], [0.0, 8.0], 0.5)
    idx = np.searchsorted(times, exact)
    never = idx >= times.size
    arrival = types.SimpleNamespace(
        arrival_s=np.where(never, np.inf, times[np.minimum(idx, times.size - 1)]).astype(np.float32),
        frame_index=np.where(never, -1, idx).astype(np.int32), crystalline_at_start=idx == 0,
        shifts_px=np.zeros((times.size, 2)), times_s=times, um_per_px=1.25)
    return pipeline.analyze_arrival(arrival, stack="/data/run-12.tif", temperature_c=128.0).result


def test_csv_columns_and_json_schema_follow_the_design(result, tmp_path):
    export.write_analysis_outputs(result, tmp_path, geometry="film-2d")
    with open(tmp_path / "spherulites.csv", newline="") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["id", "x_px", "y_px", "x_um", "y_um", "nucleation_time_s", "first_seen_s",
                       "growth_rate_um_per_min", "growth_rate_ci95_um_per_min", "r2", "n_points",
                       "status", "source", "reason", "confidence"]
    assert len(rows) == 1 + len(result.spherulites)
    assert float(rows[1][3]) == pytest.approx(float(rows[1][1]) * 1.25)
    with open(tmp_path / "radii.csv", newline="") as fh:
        radii = list(csv.reader(fh))
    assert radii[0] == ["id", "time_s", "radius_um", "free_fraction"] and len(radii) > 10
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert list(summary) == ["schema", "stack", "frames", "um_per_px", "interval_s", "temperature_c",
                             "thickness_um", "spherulites_detected", "growth_rate_um_per_min",
                             "nucleation", "area_fraction", "avrami_film", "avrami_predicted",
                             "image_quality", "resampling"]
    assert summary["schema"] == 2
    assert summary["spherulites_detected"] == len(result.spherulites)
    assert list(summary["growth_rate_um_per_min"]) == ["value", "ci95_low", "ci95_high",
                                                       "spherulites_in_pooled_g",
                                                       "shared_timing_uncertainty_rel"]

    def with_ci(*names):
        return [k for n in names for k in (n, f"{n}_ci95_low", f"{n}_ci95_high")]

    assert list(summary["nucleation"]) == ["nuclei_counted", "mode", *with_ci(
        "density_per_mm2", "density_per_mm3", "rate_per_mm2_per_min", "rate_per_mm3_per_min"),
        "induction_time_s"]
    assert list(summary["avrami_film"]) == ["n", "k_per_min_n", "t_half_min"]
    predicted = summary["avrami_predicted"]
    assert list(predicted)[:4] == ["geometry", "n", "k_per_min_n", "t_half_min"]
    if predicted["k_per_min_n"] is not None:
        assert predicted["k_per_min_n_ci95_low"] < predicted["k_per_min_n"] < predicted["k_per_min_n_ci95_high"]
    nuc = summary["nucleation"]
    assert nuc["density_per_mm2_ci95_low"] < nuc["density_per_mm2"] < nuc["density_per_mm2_ci95_high"]
    assert summary["thickness_um"] is None and summary["nucleation"]["density_per_mm3"] is None
    assert summary["growth_rate_um_per_min"]["value"] == pytest.approx(37.5, rel=0.02)
    assert len(summary["area_fraction"]["time_s"]) == 50


def test_text_cells_that_look_like_formulas_are_escaped(result, tmp_path):
    odd = dataclasses.replace(result.spherulites[0], status="=cmd()", source="@x", reason="-1+2")
    export.write_analysis_outputs(dataclasses.replace(result, spherulites=(odd,)), tmp_path,
                                  geometry="film-2d")
    with open(tmp_path / "spherulites.csv", newline="") as fh:
        row = list(csv.reader(fh))[1]
    assert row[-4:-1] == ["'=cmd()", "'@x", "'-1+2"]


def test_overlay_is_drawn_at_the_field_size(result, tmp_path):
    export.write_analysis_outputs(result, tmp_path, geometry="film-2d")
    image = cv2.imread(str(tmp_path / "overlay.png"))
    assert image.shape == (90, 110, 3) and image.max() > 0


def test_unwritable_output_folder_is_an_input_error(result, tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(InputError, match="output folder"):
        export.write_analysis_outputs(result, blocker / "out", geometry="film-2d")


# ---------------------------------------------------------------- end to end through the CLI
def _simulated_tiff(tmp_path, **overrides):
    from analysis.synthetic import hot_stage as synthetic

    params = dataclasses.replace(
        synthetic.StackParams(), n_frames=40, height_px=160, width_px=160, interval_s=10.0,
        growth_rate_um_per_min=12.0, n_athermal_per_mm2=500.0, seed=3, **overrides)
    sim = synthetic.simulate_stack(params)
    return synthetic.write_stack(sim, tmp_path / "sim") / "stack.tif", sim


def test_analyze_command_writes_the_four_files_with_accurate_growth(tmp_path):
    # End-to-end guard with loose accuracy targets (recall >= 0.9, pooled G within 3 %,
    # nucleation time within 1 frame) — common practice; the full matrix is in
    # tests/benchmarks/accuracy.py. Constant G of a Johnson-Mehl film (Johnson & Mehl
    # 1939, Trans. AIME 135, 416).
    from analysis.cli.main import main
    from analysis.synthetic import hot_stage as synthetic

    path, sim = _simulated_tiff(tmp_path)
    out = tmp_path / "out"
    assert main(["analyze", str(path), "--out", str(out), "--temperature-c", "127.5",
                 "--thickness-um", "30"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["overlay.png", "radii.csv", "spherulites.csv",
                                                     "summary.json"]
    summary = json.loads((out / "summary.json").read_text())
    assert summary["growth_rate_um_per_min"]["value"] == pytest.approx(12.0, rel=0.03)
    assert summary["temperature_c"] == 127.5 and summary["nucleation"]["mode"] == "athermal"
    truth = [n for n in synthetic.visible_nuclei(sim) if n["inside"]]
    with open(out / "spherulites.csv", newline="") as fh:
        rows = [r for r in csv.DictReader(fh) if r["status"] != "edge"]
    found = sum(1 for n in truth if any(np.hypot(float(r["x_px"]) - n["x_px"], float(r["y_px"]) - n["y_px"]) < 3
                                        for r in rows))
    assert found / len(truth) >= 0.9
    ok = [r for r in rows if r["status"] == "ok"]
    assert all(abs(float(r["nucleation_time_s"])) <= 10.0 for r in ok)


def test_analyze_without_calibration_exits_2_naming_the_file(tmp_path, capsys):
    import tifffile

    from analysis.cli.main import main

    tifffile.imwrite(tmp_path / "bare.tif", np.zeros((4, 32, 32), np.uint8), photometric="minisblack")
    assert main(["analyze", str(tmp_path / "bare.tif"), "--out", str(tmp_path / "o")]) == 2
    assert "bare.tif" in capsys.readouterr().err
