"""Every value of a project is checked when it loads: one line naming file, experiment and key.

The ranges are physical plausibility bounds (# common practice), not published limits; the
point checked here is that nothing absurd or unknown gets through, and nothing is dropped.
"""

import copy
import dataclasses
import json
import shutil
from pathlib import Path

import numpy as np
import pytest
import tifffile

from analysis.errors import InputError
from analysis.project.file import load_project, save_project
from analysis.settings import DEFAULT_GEOMETRY, AnalysisSettings

FIXTURES = Path(__file__).parent / "fixtures"
FIXTURE_V1 = FIXTURES / "project_v1.spherokin.json"

GOOD = {
    "format": "spherokin-project", "schema_version": 3, "material": "iPP",
    "series": {"tm0_c": 185.0, "tg_c": -10.0, "u_star_j_per_mol": 6270.0, "t_inf_c": None,
               "hoffman_weeks_pairs": [[124.0, 160.0], [130.0, 163.0]]},
    "experiments": [{
        "name": "Tc 130", "stack": "s.tif", "temperature_c": 130.0, "um_per_px": 0.5,
        "interval_s": 4.0, "isothermal_start_s": 3.0, "thickness_um": 20.0, "geometry": "bulk-3d",
        "mode_override": None, "notes": "", "times_s": None,
        "settings": {"sensitivity_frames": 0.7, "n_sectors": 48, "arrival": {"track_frames": 10}},
        "calorimetry": {"file": "d.csv", "time_col": "Time (min)", "heat_flow_col": 1, "mass_mg": 5.0,
                        "window": [0.03, 0.2], "exotherm": "up", "lag_s": 6.0},
        "edits": [],
    }],
}


def _write(tmp_path, document) -> Path:
    path = tmp_path / "p.spherokin.json"
    path.write_text(json.dumps(document))
    return path


def _with(change) -> dict:
    document = copy.deepcopy(GOOD)
    change(document)
    return document


def _experiment(document):
    return document["experiments"][0]


def test_a_good_project_loads_with_typed_settings(tmp_path):
    project = load_project(_write(tmp_path, GOOD))
    (experiment,) = project.experiments
    assert isinstance(experiment.settings, AnalysisSettings)
    assert experiment.settings.sensitivity_frames == 0.7 and experiment.settings.n_sectors == 48
    assert experiment.settings.arrival.track_frames == 10
    assert experiment.calorimetry.heat_flow_col == 1 and experiment.calorimetry.window == (0.03, 0.2)
    assert project.series["hoffman_weeks_pairs"] == [[124.0, 160.0], [130.0, 163.0]]


def test_settings_survive_a_save_and_load_unchanged(tmp_path):
    project = load_project(_write(tmp_path, GOOD))
    save_project(project, tmp_path / "again.spherokin.json")
    assert load_project(tmp_path / "again.spherokin.json").experiments == project.experiments


# (where, key as named in the message, bad value)
BAD_VALUES = [
    (lambda d: _experiment(d)["settings"].update(n_sectors=10 ** 9), "settings.n_sectors", "1000000000"),
    (lambda d: _experiment(d)["settings"].update(n_sectors=36.5), "settings.n_sectors", "36.5"),
    (lambda d: _experiment(d)["settings"].update(sensitivity_frames="x"), "settings.sensitivity_frames", "'x'"),
    (lambda d: _experiment(d)["settings"].update(sensitivity_frames=True), "settings.sensitivity_frames", "True"),
    (lambda d: _experiment(d)["settings"].update(sensitivity_frames=float("nan")), "settings.sensitivity_frames", "nan"),
    (lambda d: _experiment(d)["settings"].update(smooth_px=1e300), "settings.smooth_px", "1e+300"),
    (lambda d: _experiment(d)["settings"].update(min_free_fraction=-0.1), "settings.min_free_fraction", "-0.1"),
    (lambda d: _experiment(d)["settings"]["arrival"].update(channel="infrared"), "settings.arrival.channel", "infrared"),
    (lambda d: _experiment(d)["settings"]["arrival"].update(fill_wedges="yes"), "settings.arrival.fill_wedges", "'yes'"),
    (lambda d: _experiment(d).update(um_per_px=1e300), "um_per_px", "1e+300"),
    (lambda d: _experiment(d).update(interval_s=-4.0), "interval_s", "-4.0"),
    (lambda d: _experiment(d).update(isothermal_start_s=1e300), "isothermal_start_s", "1e+300"),
    (lambda d: _experiment(d).update(temperature_c="hot"), "temperature_c", "'hot'"),
    (lambda d: _experiment(d).update(thickness_um=0), "thickness_um", "0"),
    (lambda d: _experiment(d).update(geometry="sphere"), "geometry", "sphere"),
    (lambda d: _experiment(d).update(mode_override="sometimes"), "mode_override", "sometimes"),
    (lambda d: _experiment(d).update(times_s=[0.0, 5.0, 4.0]), "times_s", "increase"),
    (lambda d: _experiment(d)["calorimetry"].update(mass_mg="five"), "calorimetry.mass_mg", "'five'"),
    (lambda d: _experiment(d)["calorimetry"].update(window=[0.2, 0.03]), "calorimetry.window", "low < high"),
    (lambda d: _experiment(d)["calorimetry"].update(lag_s=1e9), "calorimetry.lag_s", "1000000000"),
    (lambda d: _experiment(d)["calorimetry"].update(heat_flow_col=10 ** 9), "calorimetry.heat_flow_col", "index"),
]


@pytest.mark.parametrize("change, key, shown", BAD_VALUES)
def test_a_bad_value_is_one_line_naming_file_experiment_and_key(tmp_path, change, key, shown):
    path = _write(tmp_path, _with(change))
    with pytest.raises(InputError) as info:
        load_project(path)
    message = str(info.value)
    assert "\n" not in message and len(message) < 400
    assert message.startswith(str(path)) and "experiment 'Tc 130'" in message
    assert f" {key} " in message and shown in message


@pytest.mark.parametrize("change, key, shown", [
    (lambda d: d["series"].update(tm0_c="Tm"), "series.tm0_c", "'Tm'"),
    (lambda d: d["series"].update(u_star_j_per_mol=1e300), "series.u_star_j_per_mol", "1e+300"),
    (lambda d: d["series"].update(tg_c=200.0), "series.tg_c", "below tm0_c"),
    (lambda d: d["series"].update(t_inf_c=0.0), "series.t_inf_c", "below tg_c"),
    (lambda d: d["series"].update(hoffman_weeks_pairs=[[124.0, 160.0], [124.0]]),
     "series.hoffman_weeks_pairs entry 2", "[124.0]"),
    (lambda d: d["series"].update(hoffman_weeks_pairs=[["x", 160.0]]), "series.hoffman_weeks_pairs entry 1", "'x'"),
    (lambda d: d.update(material=3), "material", "int"),
])
def test_a_bad_series_value_names_file_and_key(tmp_path, change, key, shown):
    path = _write(tmp_path, _with(change))
    with pytest.raises(InputError) as info:
        load_project(path)
    message = str(info.value)
    assert "\n" not in message and message.startswith(str(path))
    assert f"{key} " in message and shown in message


@pytest.mark.parametrize("change, key", [
    (lambda d: d.update(colour="blue"), "colour"),
    (lambda d: d["series"].update(kg_guess=1.0), "series.kg_guess"),
    (lambda d: _experiment(d).update(scale=0.5), "scale"),
    (lambda d: _experiment(d)["settings"].update(sensitivty_frames=0.5), "settings.sensitivty_frames"),
    (lambda d: _experiment(d)["settings"]["arrival"].update(colour_space="lab"), "settings.arrival.colour_space"),
    (lambda d: _experiment(d)["calorimetry"].update(baseline="spline"), "calorimetry.baseline"),
])
def test_an_unknown_key_is_refused_not_dropped(tmp_path, change, key):
    path = _write(tmp_path, _with(change))
    with pytest.raises(InputError, match=f"{key} is not a known") as info:
        load_project(path)
    assert str(path) in str(info.value)


@pytest.mark.parametrize("fixture", ["project_v1.spherokin.json", "project_v2.spherokin.json"])
def test_older_sensitivity_becomes_the_nucleus_depth_setting(tmp_path, fixture):
    shutil.copy(FIXTURES / fixture, tmp_path / "p.spherokin.json")
    project = load_project(tmp_path / "p.spherokin.json")
    settings = project.experiments[0].settings
    assert settings.sensitivity_frames == 1.0 and settings != AnalysisSettings()
    save_project(project, tmp_path / "p2.spherokin.json")
    stored = json.loads((tmp_path / "p2.spherokin.json").read_text())["experiments"][0]["settings"]
    assert stored["sensitivity_frames"] == 1.0 and "sensitivity" not in stored


def test_v1_file_with_both_names_is_refused(tmp_path):
    document = json.loads(FIXTURE_V1.read_text())
    document["experiments"][0]["settings"]["sensitivity_frames"] = 0.5
    with pytest.raises(InputError, match="both sensitivity and sensitivity_frames"):
        load_project(_write(tmp_path, document))


def test_v1_fixture_setting_reaches_the_analysis(tmp_path):
    from analysis.spherulites.pipeline import analyze_experiment

    shutil.copy(FIXTURE_V1, tmp_path / "p.spherokin.json")
    stack = tmp_path / "stacks" / "tc128" / "stack.tif"
    stack.parent.mkdir(parents=True)
    yy, xx = np.mgrid[0:64, 0:64]
    frames = np.zeros((8, 64, 64), np.uint8)
    for t in range(8):
        frames[t][(yy - 30) ** 2 + (xx - 28) ** 2 <= (3.0 * t) ** 2] = 200
    frames += np.random.default_rng(0).integers(0, 20, frames.shape, dtype=np.uint8)
    tifffile.imwrite(stack, frames)
    experiment = load_project(tmp_path / "p.spherokin.json").experiments[0]
    analysis = analyze_experiment(experiment)
    assert analysis.settings.sensitivity_frames == 1.0  # the stored 1.0, not the default 0.5
    assert analysis.result.um_per_px == 0.65 and analysis.context is not None


def test_one_default_geometry_everywhere():
    from analysis.cli.main import build_parser
    from analysis.kinetics.prediction import predict_model_from_result, prediction_inputs
    from analysis.project.file import Experiment
    from analysis.reporting.tables import ReportEntry
    from analysis.spherulites.pipeline import analyze_arrival_iter

    assert DEFAULT_GEOMETRY == "bulk-3d"  # summary.json's prediction is the one DSC compares with
    assert Experiment("a", "s.tif").geometry == DEFAULT_GEOMETRY
    entry_default = next(f.default for f in dataclasses.fields(ReportEntry) if f.name == "geometry")
    assert entry_default == DEFAULT_GEOMETRY
    for function in (predict_model_from_result, prediction_inputs, analyze_arrival_iter):
        assert _default(function, "geometry") == DEFAULT_GEOMETRY
    args = build_parser("analyze").parse_args(["analyze", "s.tif", "--out", "o"])
    assert args.setting_geometry is None  # absent flag: the analysis default applies


def _default(function, name):
    import inspect

    return inspect.signature(function).parameters[name].default


def test_constants_are_written_in_one_place_only():
    """U* and the default fit window appear as literals only in analysis/settings.py.

    The simulators (analysis/synthetic) are left out: their values are the ground truth
    of a simulated experiment, chosen independently of what the analysis assumes.
    """
    root = Path(__file__).resolve().parents[2]
    offenders = []
    for folder in ("analysis", "app"):
        for path in (root / folder).rglob("*.py"):
            text = path.read_text(encoding="utf-8")
            if "synthetic" in path.parts or path.name == "settings.py":
                continue
            if any(literal in text for literal in ("6270.0", "(0.03, 0.20)", "(0.03, 0.2)")):
                offenders.append(str(path.relative_to(root)))
    assert offenders == []
