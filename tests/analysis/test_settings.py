"""The setting descriptions: complete, self-consistent, and the source of the CLI flags."""

import dataclasses
import subprocess
import sys

import pytest

from analysis.cli.main import build_parser
from analysis.cli.setting_flags import ANALYSIS_SETTING_KEYS, analysis_settings_from_args
from analysis.errors import InputError
from analysis.settings import (
    CALORIMETRY_SPECS,
    EXPERIMENT_SPECS,
    SERIES_SPECS,
    AnalysisSettings,
    ArrivalSettings,
    Place,
    parse_value,
    specs_of,
    t_inf_default_c,
)

ALL_SPECS = [spec for _, spec in ANALYSIS_SETTING_KEYS] + [*EXPERIMENT_SPECS, *CALORIMETRY_SPECS, *SERIES_SPECS]


def test_every_setting_field_is_described():
    for cls in (AnalysisSettings, ArrivalSettings):
        described = {spec.key for spec in specs_of(cls)}
        fields = {f.name for f in dataclasses.fields(cls)} - {"arrival"}
        assert described == fields


@pytest.mark.parametrize("spec", ALL_SPECS, ids=lambda s: s.key)
def test_each_description_is_complete_and_its_default_valid(spec):
    assert spec.label and spec.help.endswith(".") and spec.flag
    assert parse_value(spec, spec.default, Place()) == spec.default or spec.default is None
    if spec.kind in (int, float) and spec.low is not None and spec.high is not None:
        assert spec.low < spec.high


def test_strict_parsing_rules():
    n_sectors = next(s for s in specs_of(AnalysisSettings) if s.key == "n_sectors")
    assert parse_value(n_sectors, 48.0, Place()) == 48 and isinstance(parse_value(n_sectors, 48.0, Place()), int)
    for bad in (36.5, "36", True, None, float("inf"), 10 ** 9, 7):
        with pytest.raises(InputError, match="n_sectors must be an integer in \\[8, 720\\] sectors"):
            parse_value(n_sectors, bad, Place("p.json", "Tc 1", "settings"))


def test_t_inf_default_is_tg_minus_30_k():
    from analysis.kinetics.lauritzen_hoffman import LHConstants

    # T∞ = Tg − 30 K with U* = 1500 cal/mol (Suzuki & Kovacs 1970; Hoffman, Davis &
    # Lauritzen 1976; docs/sources.md §2.2)  # from memory
    assert t_inf_default_c(-10.0) == pytest.approx(-40.0)
    assert LHConstants(185.0, -10.0).t_inf == pytest.approx(-40.0)
    assert LHConstants(185.0, -10.0).u_star_j_per_mol == pytest.approx(1500 * 4.184, abs=10)


def test_analyze_has_one_flag_per_setting_and_keeps_old_names():
    import argparse

    top = build_parser("analyze")
    (commands,) = [a for a in top._actions if isinstance(a, argparse._SubParsersAction)]
    flags = {option for action in commands.choices["analyze"]._actions for option in action.option_strings}
    for _, spec in ANALYSIS_SETTING_KEYS:
        assert f"--{spec.flag}" in flags
    for old in ("--um-per-px", "--interval-s", "--temperature-c", "--thickness-um",
                "--isothermal-start-s", "--sensitivity", "--geometry"):
        assert old in flags


def test_flags_become_settings():
    parser = build_parser("analyze")
    args = parser.parse_args(["analyze", "s.tif", "--out", "o", "--sensitivity", "0.8", "--n-sectors", "72",
                              "--arrival-sensitivity", "1.5", "--no-fill-wedges", "--channel", "grey"])
    settings = analysis_settings_from_args(args)
    assert settings.sensitivity_frames == 0.8 and settings.n_sectors == 72
    assert settings.arrival == ArrivalSettings(sensitivity=1.5, fill_wedges=False, channel="grey")
    untouched = analysis_settings_from_args(parser.parse_args(["analyze", "s.tif", "--out", "o"]))
    assert untouched == AnalysisSettings()


@pytest.mark.parametrize("flag, value, expected", [
    ("--n-sectors", "1e9", "--n-sectors must be an integer"),
    ("--min-points", "36.5", "--min-points must be an integer"),
    ("--um-per-px", "1e300", "--um-per-px must be a number"),
    ("--hysteresis", "0", "--hysteresis must be a number in (0, 1]"),
])
def test_a_bad_flag_exits_2_with_one_line_naming_it(tmp_path, flag, value, expected):
    result = subprocess.run([sys.executable, "-m", "analysis.cli.main", "analyze", str(tmp_path / "s.tif"),
                             "--out", str(tmp_path / "o"), flag, value], capture_output=True, text=True)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and expected in lines[0]
    assert not (tmp_path / "o").exists()
