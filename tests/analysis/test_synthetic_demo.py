"""The committed demo data match their README: checksums, commands, project and true values."""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import re
import shlex
from pathlib import Path

import numpy as np
import pytest
import tifffile

from analysis.cli.simulate import add_cli_arguments, run_cli
from analysis.project.file import load_project, open_experiment_stack

DEMO = Path(__file__).resolve().parents[2] / "sample_images"
README = (DEMO / "README.md").read_text(encoding="utf-8")
TEMPERATURES = (124, 127, 130, 133, 136)


def _documented_commands() -> dict[str, list[str]]:
    """``spherokin simulate`` command lines from the README, keyed by output folder."""
    block = re.search(r"```sh\n(.*?)```", README, re.S).group(1).replace("\\\n", " ")
    commands = {}
    for line in block.splitlines():
        words = shlex.split(line)
        if words[:2] == ["spherokin", "simulate"]:
            commands[words[words.index("--out") + 1]] = words[2:]
    return commands


def test_checksums_in_the_readme_match_the_files():
    listed = dict(line.split()[::-1] for line in re.search(r"## SHA-256 checksums\n\n```\n(.*?)```", README,
                                                           re.S).group(1).splitlines())
    on_disk = sorted(str(p.relative_to(DEMO)) for p in DEMO.glob("*/*"))
    assert sorted(listed) == on_disk
    for name, digest in listed.items():
        assert hashlib.sha256((DEMO / name).read_bytes()).hexdigest() == digest, name


@pytest.mark.parametrize("folder", ["tc133", "tc130"])
def test_documented_command_regenerates_the_committed_stack(tmp_path, folder):
    """Golden data: the README command must still produce the committed frames and truth."""
    argv = _documented_commands()[f"sample_images/{folder}"]
    argv[argv.index("--out") + 1] = str(tmp_path)
    parser = argparse.ArgumentParser()
    add_cli_arguments(parser)
    assert run_cli(parser.parse_args(argv)) == 0
    fresh, committed = tifffile.imread(tmp_path / "stack.tif"), tifffile.imread(DEMO / folder / "stack.tif")
    difference = np.abs(fresh.astype(int) - committed.astype(int))
    assert difference.max() <= 1 and difference.mean() < 1e-3  # allow last-bit rounding elsewhere
    truth = json.loads((tmp_path / "truth.json").read_text(encoding="utf-8"))
    expected = json.loads((DEMO / folder / "truth.json").read_text(encoding="utf-8"))
    table = lambda t: [[n["id"], n["x_px"], n["y_px"], n["t_s"], n["inside"]] for n in t["nuclei"]]
    np.testing.assert_allclose(table(truth), table(expected), rtol=1e-9)
    assert truth["area_fraction"] == pytest.approx(expected["area_fraction"], abs=1e-9)


def test_demo_project_opens_every_experiment_with_its_true_calibration():
    project = load_project(DEMO / "demo.spherokin.json")
    isothermal = [e for e in project.experiments if e.kind == "isothermal"]
    assert [e.temperature_c for e in isothermal] == list(TEMPERATURES)
    for experiment in isothermal:
        folder = Path(experiment.stack_path).parent
        truth = json.loads((folder / "truth.json").read_text(encoding="utf-8"))
        stack = open_experiment_stack(experiment)
        try:
            assert stack.um_per_px == pytest.approx(truth["um_per_px"])
            assert stack.interval_s == pytest.approx(truth["interval_s"])
            assert len(stack) == len(truth["times_s"])
        finally:
            stack.close()
        assert experiment.isothermal_start_s == truth["isothermal_start_s"]
        assert experiment.thickness_um == 20.0
        assert Path(experiment.calorimetry.file).is_file()
        assert experiment.calorimetry.exotherm == truth["dsc"]["exotherm"]


def test_demo_growth_rates_follow_the_stated_lauritzen_hoffman_parameters():
    """G = G0 exp[−U*/(R (T − T∞))] exp[−Kg/(T ΔT f)], f = 2T/(Tm0 + T)
    (Lauritzen & Hoffman 1960, J. Res. NBS 64A, 73; Hoffman 1983, Polymer 24, 3 # from memory),
    with the invented demo constants stated in sample_images/README.md."""
    tm0_k, t_inf_k, u_star, kg, ln_g0 = 458.15, 233.15, 6270.0, 4.6e5, 28.51
    for tc in TEMPERATURES:
        truth = json.loads((DEMO / f"tc{tc}" / "truth.json").read_text(encoding="utf-8"))
        t = tc + 273.15
        f = 2 * t / (tm0_k + t)
        g = math.exp(ln_g0 - u_star / (8.314462618 * (t - t_inf_k)) - kg / (t * (tm0_k - t) * f))
        assert truth["growth_rate_um_per_min"] == pytest.approx(g, abs=6e-4)
    densities = [json.loads((DEMO / f"tc{tc}" / "truth.json").read_text())["n_athermal_per_mm2"]
                 for tc in TEMPERATURES]
    assert densities == sorted(densities, reverse=True)  # more nuclei at larger undercooling


def test_demo_ramp_experiment_reads_its_stage_log_over_the_whole_recording():
    """The ramp demo follows the same invented Lauritzen-Hoffman set (README), cooled at 5 K/min."""
    from analysis.kinetics.temperature_programme import programme_of_source

    (ramp,) = [e for e in load_project(DEMO / "demo.spherokin.json").experiments if e.kind == "ramp"]
    truth = json.loads((DEMO / "ramp5" / "truth.json").read_text(encoding="utf-8"))
    programme = programme_of_source(ramp.temperature_source)
    programme.require_coverage(truth["times_s"][0], truth["times_s"][-1])
    film = programme.temperature_at(truth["times_s"])
    # the lag-corrected log gives the film temperature to within the log noise (0.05 K)
    assert np.max(np.abs(film - np.array(truth["frame_temperature_c"]))) < 0.15
    assert truth["ramp"]["kg_k2"] == 4.6e5 and truth["g0_um_per_min"] == pytest.approx(math.exp(28.51), rel=2e-3)
