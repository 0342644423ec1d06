"""Rendering, files and command line of the synthetic hot-stage stacks."""

from __future__ import annotations

import argparse
import csv
import json
import math
from dataclasses import replace

import cv2
import numpy as np
import pytest

from analysis.cli.simulate import add_cli_arguments, run_cli
from analysis.errors import InputError
from analysis.stack.frames import open_stack
from analysis.synthetic.hot_stage import (
    StackParams,
    simulate_film_kinetics,
    simulate_stack,
    stack_truth,
    write_stack,
)
from analysis.synthetic.optics import retardation_to_rgb

CLEAN = dict(read_noise=0.0, photons_full_scale=0.0, flicker=0.0, vignetting=0.0, dust_specks=0, scratches=0,
             drift_px_per_frame=0.0, drift_jitter_px=0.0, texture_contrast=0.0)
SMALL = dict(height_px=96, width_px=128, n_frames=12, interval_s=20.0)


def _single_spherulite(**optics):
    """One nucleus at t = 0 in the middle of the field."""
    sim = simulate_stack(StackParams(**SMALL, **CLEAN, seed=4, **optics), nuclei=[(48.0, 64.0, 0.0)])
    assert len(sim.kinetics.centres_yx) == 1
    return sim


def test_crossed_polarizers_show_dark_melt_and_the_extinction_cross():
    """Between crossed polarizers a spherulite with radial optic axes is extinct where the
    radius is parallel to the polarizer or analyser, I ∝ sin²(2(φ − θ_pol)) (Hartshorne &
    Stuart 1970, Crystals and the Polarising Microscope, 4th ed., Arnold # from memory)."""
    sim = _single_spherulite(polarizer_angle_deg=0.0)
    frame = sim.frame(len(sim) - 1).astype(float) / 255
    cy, cx = sim.kinetics.centres_yx[0]
    reached_um = sim.params.growth_rate_um_per_min * (sim.times_s[-1]) / 60
    radius = 0.6 * reached_um / sim.params.um_per_px
    sample = lambda deg: frame[int(round(cy + radius * math.sin(math.radians(deg)))),
                               int(round(cx + radius * math.cos(math.radians(deg))))]
    bright = [sample(a) for a in (45, 135, 225, 315)]
    dark = [sample(a) for a in (0, 90, 180, 270)]
    assert min(bright) > 0.6 and max(dark) < 0.1
    far_corner = frame[0, 0] if np.hypot(cy, cx) > reached_um + 3 else frame[-1, -1]
    assert far_corner == pytest.approx(sim.params.melt_level, abs=1 / 255)
    turned = _single_spherulite(polarizer_angle_deg=45.0).frame(len(sim) - 1).astype(float) / 255
    assert turned[int(round(cy)), int(round(cx + radius))] > 0.6  # the cross turns with the polarizers


def test_retardation_plate_colours():
    """Interference colours of crossed polarizers, sin²(πR/λ) (Michel-Lévy chart; Hartshorne
    & Stuart 1970 # from memory): 530 nm is first-order red-magenta (green extinguished),
    about 650-700 nm second-order blue, about 350-420 nm first-order yellow-orange."""
    melt, blue, yellow = retardation_to_rgb(np.array([530.0, 660.0, 400.0]))
    assert melt[1] < 0.1 < min(melt[0], melt[2])
    assert blue[2] > blue[0] + 0.4 and yellow[0] > yellow[2] + 0.4
    sim = _single_spherulite(retardation_plate=True)
    frame = sim.frame(len(sim) - 1).astype(float)
    cy, cx = sim.kinetics.centres_yx[0]
    r = 0.6 * sim.params.growth_rate_um_per_min * sim.times_s[-1] / 60
    colour = lambda deg: frame[int(round(cy + r * math.sin(math.radians(deg)))),
                               int(round(cx + r * math.cos(math.radians(deg))))]
    # plate slow axis at 45° (image y down): a positive spherulite adds retardation there
    for deg, blue_wins in ((45, True), (225, True), (135, False), (315, False)):
        pixel = colour(deg)
        assert (pixel[2] > pixel[0] + 40) if blue_wins else (pixel[0] > pixel[2] + 40), (deg, pixel)
    assert frame.shape[-1] == 3 and frame[0, 0, 1] < frame[0, 0, 0]  # magenta melt in the corner


def test_banding_has_the_requested_period():
    """Rings of period P: the brightness along a bright radius oscillates with period P."""
    sim = _single_spherulite(band_period_um=8.0, band_contrast=0.9)
    frame = sim.frame(len(sim) - 1).astype(float)
    cy, cx = sim.kinetics.centres_yx[0]
    radii = np.arange(4, 36)
    profile = [frame[int(round(cy + r * math.sin(math.pi / 4))), int(round(cx + r * math.cos(math.pi / 4)))]
               for r in radii]
    spectrum = np.abs(np.fft.rfft(profile - np.mean(profile), 512))
    freq = np.fft.rfftfreq(512, d=1.0)  # one sample per µm of radius (1 µm/px)
    assert 1 / freq[np.argmax(spectrum[1:]) + 1] == pytest.approx(8.0, rel=0.15)


def test_the_specimen_drifts_and_the_dust_stays_on_the_sensor():
    moving = dict(SMALL, drift_px_per_frame=0.4, drift_jitter_px=0.0, read_noise=0.0, photons_full_scale=0.0,
                  flicker=0.0, vignetting=0.0, seed=2)
    crystalline = simulate_stack(StackParams(**moving, dust_specks=0, scratches=0, n_athermal_per_mm2=400.0,
                                             isothermal_start_s=-3000.0))  # fully crystalline from frame 0
    first, last = (crystalline.frame(i).astype(np.float32) for i in (0, len(crystalline) - 1))
    window = cv2.createHanningWindow(first.shape[::-1], cv2.CV_32F)
    (dx, dy), _ = cv2.phaseCorrelate(first, last, window)
    assert np.hypot(*crystalline.drift_px[-1]) > 3
    assert (dy, dx) == pytest.approx(tuple(crystalline.drift_px[-1]), abs=0.5)
    dusty_melt = simulate_stack(StackParams(**moving, dust_specks=8, scratches=1, n_athermal_per_mm2=0.0,
                                            retardation_plate=True))  # bright magenta melt shows the dust
    first, last = (dusty_melt.frame(i).astype(float).sum(axis=2) for i in (0, len(dusty_melt) - 1))
    assert first.min() < 0.7 * np.median(first)
    np.testing.assert_allclose(first, last, atol=3)


def test_late_start_and_isothermal_offset_shift_the_clock():
    base = dict(SMALL, **CLEAN, n_athermal_per_mm2=300.0, guard_band_um=150.0, seed=8)
    late = simulate_stack(StackParams(**base, isothermal_start_s=-60.0))
    early = simulate_stack(StackParams(**base, isothermal_start_s=40.0))
    on_time = simulate_stack(StackParams(**base))
    assert late.area_fraction[0] > 0 and on_time.area_fraction[0] == 0
    assert early.area_fraction[2] == 0  # the sample was still cooling to Tc
    np.testing.assert_allclose(early.area_fraction[2:], on_time.area_fraction[:-2])
    np.testing.assert_allclose(late.area_fraction[:-3], on_time.area_fraction[3:])
    assert np.all(np.diff(on_time.area_fraction) >= 0)


def test_frames_are_lazy_deterministic_and_respect_bit_depth_and_jpeg():
    params = StackParams(**SMALL, seed=3)
    sim = simulate_stack(params)
    np.testing.assert_array_equal(sim.frame(7), list(sim.frames())[7])
    sixteen = simulate_stack(replace(params, bit_depth=16)).frame(7)
    assert sixteen.dtype == np.uint16 and sixteen.max() > 255
    jpeg = simulate_stack(replace(params, jpeg_quality=60)).frame(7)
    plain = sim.frame(7).astype(float)
    assert 0 < np.abs(jpeg - plain).mean() < 6


def test_write_stack_round_trips_calibration_frames_and_truth(tmp_path):
    """The loader reads µm/px and the frame interval back from the ImageJ tags."""
    params = StackParams(**dict(SMALL, um_per_px=0.65, interval_s=7.5, isothermal_start_s=15.0,
                         induction_time_s=5.0, n_athermal_per_mm2=1500.0, ndot_per_mm2_per_s=20.0,
                         retardation_plate=True, seed=6))
    sim = simulate_stack(params)
    write_stack(sim, tmp_path, compression="zlib", write_maps=True)
    stack = open_stack(tmp_path / "stack.tif")
    try:
        assert stack.um_per_px == pytest.approx(0.65, rel=1e-6)
        assert stack.interval_s == pytest.approx(7.5)
        assert stack.shape == (12, 96, 128, 3) and stack.is_rgb
        np.testing.assert_array_equal(stack[5], sim.frame(5))
    finally:
        stack.close()
    truth = json.loads((tmp_path / "truth.json").read_text(encoding="utf-8"))
    assert truth["times_s"] == pytest.approx(list(np.arange(12) * 7.5))
    assert truth["area_fraction"] == pytest.approx(list(sim.area_fraction))
    assert truth["isothermal_start_s"] == 15.0 and truth["params"]["seed"] == 6
    for nucleus in truth["nuclei"]:
        assert nucleus["t_recording_s"] == pytest.approx(nucleus["t_s"] + 15.0)
        assert nucleus["t_s"] >= 5.0
    assert any(n["inside"] for n in truth["nuclei"]) and any(not n["inside"] for n in truth["nuclei"])
    maps = np.load(tmp_path / "truth_maps.npz")
    finite = np.isfinite(maps["arrival_s"])
    assert np.all(maps["owner"][finite] >= 0)
    assert np.mean(maps["arrival_s"] <= 7.5 * 11) == pytest.approx(sim.area_fraction[-1])


def _cli(argv):
    parser = argparse.ArgumentParser()
    add_cli_arguments(parser)
    return parser.parse_args(argv)


def test_cli_writes_stack_truth_and_dsc(tmp_path, capsys):
    args = _cli(["--out", str(tmp_path), "--size", "64x48", "--frames", "5", "--rgb",
                 "--growth-rate-um-per-min", "20", "--band-period-um", "10", "--jpeg-quality", "90",
                 "--dsc", "dsc_130C.csv", "--dsc-dialect", "semicolon", "--temperature-c", "130", "--seed", "9"])
    assert run_cli(args) == 0
    truth = json.loads((tmp_path / "truth.json").read_text(encoding="utf-8"))
    assert truth["params"]["width_px"] == 64 and truth["params"]["height_px"] == 48
    assert truth["params"]["retardation_plate"] and truth["growth_rate_um_per_min"] == 20
    assert truth["dsc"]["n"] == 3.0 and truth["dsc"]["file"] == "dsc_130C.csv"
    with open(tmp_path / "dsc_130C.csv", encoding="utf-8") as handle:
        rows = list(csv.reader(handle, delimiter=";"))
    assert ["Time (min)", "Heat flow (mW)", "Sample temperature (°C)"] in rows
    assert "wrote" in capsys.readouterr().out


@pytest.mark.parametrize("option, value", [("--growth-rate-um-per-min", "-3"), ("--bit-depth", "12"),
                                           ("--size", "0x10"), ("--band-contrast", "2"),
                                           ("--rgb --bit-depth", "16")])
def test_cli_refuses_absurd_parameters(tmp_path, option, value):
    with pytest.raises((InputError, SystemExit)):
        run_cli(_cli(["--out", str(tmp_path), *option.split(), value]))
    assert not (tmp_path / "stack.tif").exists()


def test_absurd_parameters_are_input_errors():
    with pytest.raises(InputError, match="growth_rate_um_per_min"):
        simulate_film_kinetics(StackParams(growth_rate_um_per_min=0.0))
    with pytest.raises(InputError, match="spherulite_sign"):
        simulate_stack(StackParams(spherulite_sign="sideways"))
    with pytest.raises(InputError, match="nuclei"):
        simulate_film_kinetics(StackParams(n_athermal_per_mm2=1e9, height_px=2000, width_px=2000))
    assert stack_truth(simulate_stack(StackParams(**SMALL, n_athermal_per_mm2=0.0)))["nuclei"] == []


def test_write_stack_never_overwrites_a_real_recording(tmp_path):
    (tmp_path / "stack.tif").write_bytes(b"someone's recording")
    sim = simulate_stack(StackParams(**SMALL))
    with pytest.raises(InputError, match="not a simulated stack"):
        write_stack(sim, tmp_path)
    assert (tmp_path / "stack.tif").read_bytes() == b"someone's recording"
    (tmp_path / "stack.tif").unlink()
    write_stack(sim, tmp_path)
    write_stack(sim, tmp_path)  # a simulated stack may be replaced


def test_spherokin_simulate_through_the_main_command_line(tmp_path, capsys):
    from analysis.cli.main import main

    assert main(["simulate", "--out", str(tmp_path / "ok"), "--size", "40", "--frames", "3"]) == 0
    assert (tmp_path / "ok" / "stack.tif").is_file() and (tmp_path / "ok" / "truth.json").is_file()
    assert main(["simulate", "--out", str(tmp_path / "bad"), "--growth-rate-um-per-min", "-2"]) == 2
    assert "growth_rate_um_per_min" in capsys.readouterr().err
    assert not (tmp_path / "bad" / "stack.tif").exists()
