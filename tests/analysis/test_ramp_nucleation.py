"""Nucleation against temperature on heating, cooling and step programmes.

Scientific checks: the nucleation rate per untransformed area, ΔN / ∫(1 − X) A dt over the
time the film spends in a temperature bin (nuclei appear only in melt: the extended-area
argument of Avrami 1939, J. Chem. Phys. 7, 1103, docs/sources.md §1.2); on a simulated
heating run the birth temperatures come from the joint G(T) fit of R(t) = ∫ G(T(t')) dt'
(Lauritzen-Hoffman growth rate, Lauritzen & Hoffman 1960, J. Res. NBS 64A, 73) and are
compared with the simulator's true births.
"""

from __future__ import annotations

import json
import types

import numpy as np
import pytest

from analysis.kinetics.avrami import FitFailure
from analysis.kinetics.ramp_nucleation import nucleation_vs_temperature
from analysis.kinetics.temperature_programme import ProgrammeSegment, programme_from_segments

FIELD_PX = (1000, 1000)  # at 1 µm/px: 1 mm²


def _result(births_s, statuses=None, melt_fraction=None):
    """A stand-in analysis result: nuclei born at ``births_s`` (s), an untransformed field
    unless ``melt_fraction`` = (times, crystalline fraction) is given."""
    statuses = statuses or ["ok"] * len(births_s)
    spherulites = [types.SimpleNamespace(id=i + 1, status=s, nucleation_time_s=t, first_seen_s=t)
                   for i, (t, s) in enumerate(zip(births_s, statuses))]
    times, fraction = melt_fraction or (np.array([0.0, 600.0]), np.zeros(2))
    return types.SimpleNamespace(um_per_px=1.0, spherulites=spherulites, area_fraction_time_s=times,
                                 area_fraction=fraction)


def _bin(nucleation, temperature_c):
    return int(np.flatnonzero(np.isclose(nucleation.temperature_c, temperature_c))[0])


def test_heating_bins_run_coldest_first_with_the_time_spent_in_each():
    programme = programme_from_segments(100.0, [ProgrammeSegment(2.0, 120.0)])  # 2 K/min
    births = [15.0, 45.0, 50.0, 290.0, 400.0]  # 100.5, 101.5, 101.67, 109.67, 113.33 °C
    result = _result(births + [60.0], statuses=["ok"] * 5 + ["excluded"])
    n = nucleation_vs_temperature(result, FitFailure("no fit"), programme, field_shape=FIELD_PX)
    assert n.direction == "heating" and np.all(np.diff(n.temperature_c) > 0)
    assert n.birth_temperature_c == pytest.approx([100.5, 101.5, 101.6667, 109.6667, 113.3333], abs=1e-3)
    assert n.n_nuclei[_bin(n, 101.5)] == 2 and n.n_nuclei.sum() == 5  # the excluded one is not counted
    assert np.all(np.diff(n.cumulative_per_mm2) >= 0) and n.cumulative_per_mm2[-1] == pytest.approx(5.0)
    # 1 K bins at 2 K/min: half a minute of melt each, on 1 mm²
    assert n.rate_per_mm2_per_min[_bin(n, 101.5)] == pytest.approx(2 / 0.5, rel=0.02)
    assert n.rate_per_mm2_per_min[_bin(n, 109.5)] == pytest.approx(1 / 0.5, rel=0.02)


def test_a_hold_gives_its_bin_the_hold_time_and_crystal_removes_melt():
    # 130 °C, 5 K/min to 120 °C (120 s), hold 2 min, 5 K/min to 110 °C
    programme = programme_from_segments(130.0, [ProgrammeSegment(5.0, 120.0), ProgrammeSegment(hold_s=120.0),
                                                ProgrammeSegment(5.0, 110.0)])
    births = [30.0, 150.0, 170.0, 200.0, 312.0]  # 127.5 °C, three in the hold, 119.0 °C
    n = nucleation_vs_temperature(_result(births), FitFailure("no fit"), programme, field_shape=FIELD_PX)
    assert n.direction == "cooling" and np.all(np.diff(n.temperature_c) < 0)
    hold = _bin(n, 120.5)
    assert n.n_nuclei[hold] == 3
    # the hold bin [120, 121): 12 s of ramp plus the 120 s hold = 2.2 min
    assert n.rate_per_mm2_per_min[hold] == pytest.approx(3 / 2.2, rel=0.02)
    assert n.rate_per_mm2_per_min[_bin(n, 127.5)] == pytest.approx(1 / 0.2, rel=0.02)
    # half of the field crystalline from the start: half the melt area-time, twice the rate
    half = (np.array([0.0, 600.0]), np.full(2, 0.5))
    m = nucleation_vs_temperature(_result(births, melt_fraction=half), FitFailure("no fit"), programme,
                                  field_shape=FIELD_PX)
    assert m.rate_per_mm2_per_min[hold] == pytest.approx(2 * 3 / 2.2, rel=0.02)


def test_heating_then_cooling_is_ordered_by_first_passage():
    programme = programme_from_segments(100.0, [ProgrammeSegment(5.0, 104.0), ProgrammeSegment(5.0, 98.0)])
    n = nucleation_vs_temperature(_result([6.0, 80.0]), FitFailure("no fit"), programme, field_shape=FIELD_PX)
    assert n.direction == "mixed"
    assert list(n.temperature_c[:4]) == [100.5, 101.5, 102.5, 103.5]  # up first, then the colder bins
    assert list(n.temperature_c[4:]) == [99.5, 98.5]


@pytest.fixture(scope="module")
def heating_run(tmp_path_factory):
    """A film heated at 2 K/min from 128 °C: athermal nuclei at the start, sporadic nuclei
    whose rate falls tenfold per 5 K of heating; analysed from the rendered TIFF."""
    from analysis.kinetics.lauritzen_hoffman import LHConstants
    from analysis.kinetics.ramp import analyze_ramp
    from analysis.kinetics.temperature_programme import read_temperature_log
    from analysis.spherulites.pipeline import analyze
    from analysis.stack.frames import open_stack
    from analysis.synthetic.hot_stage import StackParams
    from analysis.synthetic.ramp import RampParams, simulate_ramp_stack, write_ramp

    params = RampParams(programme="128, 2:145", programme_start_s=-30.0, lag_s=5.0, log_start_s=-60.0,
                        ndot_ref_per_mm2_per_s=8.0)
    stack = StackParams(n_frames=40, height_px=200, width_px=200, um_per_px=0.5, interval_s=6.0,
                        n_athermal_per_mm2=600.0, dust_specks=0, scratches=0, seed=3)
    folder = write_ramp(simulate_ramp_stack(params, stack), tmp_path_factory.mktemp("heating"))
    analysis = analyze(open_stack(folder / "stack.tif"))
    programme = read_temperature_log(folder / "stage_log.csv", clock_offset_s=params.log_start_s, lag_s=5.0)
    ramp = analyze_ramp(analysis, programme, constants=LHConstants(185.0, -10.0, 6270.0))
    truth = json.loads((folder / "truth.json").read_text(encoding="utf-8"))
    return params, stack, ramp, truth


def test_heating_run_counts_nuclei_at_their_true_temperatures(heating_run):
    params, stack, ramp, truth = heating_run
    n = ramp.nucleation
    assert n.direction == "heating" and np.all(np.diff(n.temperature_c) > 0)
    inside = np.array([p["temperature_c"] for p in truth["nuclei"]
                       if 0 <= p["x_px"] < stack.width_px and 0 <= p["y_px"] < stack.height_px])
    counted = n.birth_temperature_c
    # most nuclei are found (a few born late stay too small to see) and none invented
    assert 0.75 * inside.size <= counted.size <= inside.size + 1
    nearest = np.min(np.abs(counted[:, None] - inside[None, :]), axis=1)
    assert np.median(nearest) < 0.2 and np.max(nearest) < 1.0  # K
    area_mm2 = stack.height_px * stack.width_px * (stack.um_per_px * 1e-3) ** 2
    assert n.cumulative_per_mm2[-1] * area_mm2 == pytest.approx(counted.size)


def test_heating_run_growth_rate_where_fronts_move_a_pixel_per_frame(heating_run):
    """A sanity check of the joint fit on heating (G falls with time); the benchmark's
    3 % target is for cooling runs where fronts move 2 px per frame."""
    from analysis.synthetic.ramp import true_growth_rate

    params, stack, ramp, _ = heating_run
    growth = ramp.growth
    truth = true_growth_rate(params, growth.temperature_c)
    resolved = truth / 60.0 * stack.interval_s / stack.um_per_px >= 1.0
    assert resolved.any()
    assert np.all(np.abs(growth.growth_rate_um_per_min[resolved] / truth[resolved] - 1.0) < 0.15)
