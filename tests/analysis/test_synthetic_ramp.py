"""The ramp simulator and ``spherokin analyze --temperature-log`` end to end.

Scientific checks: Johnson-Mehl competition ("earliest arrival wins", Johnson & Mehl 1939,
Trans. AIME 135, 416 `# from memory`) with every front at the common rate G(T(t)): a
pixel owned by nucleus i is reached when S(t) − S(t_i) equals its distance, S = ∫ G dt
(derived in analysis/synthetic/ramp.py); G(T) from the Lauritzen-Hoffman equation
(docs/sources.md §2.1).
"""

import csv
import json

import numpy as np
import pytest

from analysis.cli.main import main
from analysis.synthetic.hot_stage import StackParams
from analysis.synthetic.ramp import RampParams, simulate_ramp_stack, true_growth_rate, write_ramp

RAMP = RampParams(programme="140, 5:100", programme_start_s=-72.0, lag_s=5.0, log_start_s=-100.0,
                  ndot_ref_per_mm2_per_s=0.02)
STACK = StackParams(n_frames=36, height_px=160, width_px=160, um_per_px=0.5, interval_s=6.0,
                    n_athermal_per_mm2=2500.0, dust_specks=0, scratches=0, seed=4)


@pytest.fixture(scope="module")
def ramp_folder(tmp_path_factory):
    ramp = simulate_ramp_stack(RAMP, STACK)
    return ramp, write_ramp(ramp, tmp_path_factory.mktemp("ramp"))


def test_arrival_is_the_growth_integral_from_the_owner(ramp_folder):
    """Johnson & Mehl 1939 in the growth coordinate (module docstring)."""
    ramp, _ = ramp_folder
    k = ramp.sim.kinetics
    owner, arrival = ramp.sim.owner, ramp.sim.arrival_s
    yy, xx = np.nonzero((owner >= 0) & np.isfinite(arrival))
    own = owner[yy, xx]
    distance_px = np.hypot(yy - k.centres_yx[own, 0], xx - k.centres_yx[own, 1])
    grown_px = ramp.clock.s_at(arrival[yy, xx].astype(float)) - ramp.clock.s_at(k.birth_s[own])
    assert np.max(np.abs(grown_px - distance_px)) < 0.05 + 1e-3 * distance_px.max()
    # and no other nucleus could have got there first
    others = np.hypot(yy[:, None] - k.centres_yx[None, :, 0], xx[:, None] - k.centres_yx[None, :, 1])
    earliest = np.min(ramp.clock.s_at(k.birth_s)[None, :] + others, axis=1)
    assert np.allclose(earliest, ramp.clock.s_at(k.birth_s[own]) + distance_px, atol=1e-6)


def test_growth_follows_the_film_temperature(ramp_folder):
    ramp, folder = ramp_folder
    temps = ramp.frame_temperature_c
    assert np.all(np.diff(temps) < 0)  # cooling
    g = true_growth_rate(RAMP, temps)
    assert np.all(np.diff(g) > 0)  # G rises with undercooling above the maximum (LH, §2.1)
    assert true_growth_rate(RAMP, [RAMP.g_ref_c])[0] == pytest.approx(RAMP.g_ref_um_per_min)
    truth = json.loads((folder / "truth.json").read_text(encoding="utf-8"))
    assert truth["kind"] == "ramp" and truth["log_clock_offset_s"] == RAMP.log_start_s
    rows = (folder / "stage_log.csv").read_text(encoding="utf-8").splitlines()
    assert rows[1] == "Time (s),Stage temperature (°C)" and rows[2].startswith("0.00,")


def test_analyze_with_a_temperature_log_writes_g_of_t(ramp_folder, tmp_path, capsys):
    _, folder = ramp_folder
    out = tmp_path / "out"
    code = main(["analyze", str(folder / "stack.tif"), "--out", str(out), "--temperature-log",
                 str(folder / "stage_log.csv"), "--clock-offset-s", str(RAMP.log_start_s),
                 "--sensor-lag-s", "5", "--tm0-c", "185", "--tg-c", "-10"])
    assert code == 0, capsys.readouterr().err
    with open(out / "growth_vs_temperature.csv", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == ["temperature_c", "growth_rate_um_per_min", "growth_rate_um_per_min_ci95_low",
                       "growth_rate_um_per_min_ci95_high", "n_spherulites", "front_advance_px_per_frame"]
    table = np.array(rows[1:], float)
    truth = true_growth_rate(RAMP, table[:, 0])
    assert np.all(table[:, 2] <= table[:, 1]) and np.all(table[:, 1] <= table[:, 3])
    assert np.median(np.abs(table[:, 1] / truth - 1)) < 0.15  # a small field: a sanity bound
    for name in ("growth_vs_temperature.xlsx", "nucleation_vs_temperature.csv", "ramp.json",
                 "growth_radii.png", "growth_vs_temperature.svg", "spherulites.csv"):
        assert (out / name).is_file(), name
    summary = json.loads((out / "ramp.json").read_text(encoding="utf-8"))
    assert summary["sensor_lag_s"] == 5.0 and summary["lauritzen_hoffman"]["kg_k2"] > 0


def test_analyze_refuses_a_log_that_misses_the_frames(ramp_folder, tmp_path, capsys):
    _, folder = ramp_folder
    code = main(["analyze", str(folder / "stack.tif"), "--out", str(tmp_path / "o"), "--temperature-log",
                 str(folder / "stage_log.csv"), "--clock-offset-s", "100"])
    err = capsys.readouterr().err
    assert code == 2 and "stage_log.csv" in err and "check the clock offset" in err
    code = main(["analyze", str(folder / "stack.tif"), "--out", str(tmp_path / "o"),
                 "--temperature-programme", "140, 5:fast"])
    assert code == 2 and "RATE:END" in capsys.readouterr().err
