"""Lauritzen-Hoffman fits, regimes, surface energies, Hoffman-Weeks, growth-rate tables.

Fixtures A and B are synthetic data sets generated from the Lauritzen-Hoffman equation
(docs/sources.md section 2.5, "derived here"; equation: Lauritzen & Hoffman 1960 J. Res. NBS
64A, 73 and Hoffman 1983 Polymer 24, 3 `# from memory`).
"""

import argparse
import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from analysis.cli.lauritzen_hoffman import add_cli_arguments, run_cli
from analysis.errors import InputError
from analysis.kinetics.lauritzen_hoffman import (
    LHConstants,
    fit_lauritzen_hoffman,
    hoffman_weeks,
    lh_coordinates,
    lh_growth_rate,
    read_growth_table,
    regime_factor,
    sigma_sigma_e_from_kg,
    thomas_stavely_sigma,
)

# Fixture constants: Tm0 = 458.15 K, Tg = 263.15 K, T_inf = 233.15 K, U* = 6270 J/mol
CONST = LHConstants(tm0_c=185.0, tg_c=-10.0)
LN_G0_III, KG_III = 32.542025, 5.5e5
LN_G0_II, KG_II = 17.756191, 2.75e5
A_T = np.array([120.0, 122.5, 125.0, 127.5, 130.0, 132.5, 135.0, 137.5, 140.0, 142.5, 145.0])
A_G = np.array([92.5056, 49.5375, 24.8726, 11.6169, 5.00000, 1.96107, 0.691541, 0.215702,
                0.0583348, 0.0133449, 0.00250379])
B_T = np.array([125.0, 127.5, 130.0, 132.5, 135.0, 137.5, 140.0, 142.5, 145.0, 147.5, 150.0])
B_G = np.array([24.8726, 11.6169, 5.00000, 1.96107, 0.691541, 0.245122, 0.131290, 0.0646232,
                0.0287843, 0.0113774, 0.00389160])


def test_defaults_and_coordinates():
    # T_inf = Tg - 30 K, U* = 6270 J/mol (Hoffman 1983 Polymer 24, 3 # from memory)
    assert CONST.t_inf == -40.0 and CONST.u_star_j_per_mol == 6270.0
    x, _ = lh_coordinates([130.0], [1.0], CONST)
    t, tm0 = 403.15, 458.15
    assert x[0] == pytest.approx(1.0 / (t * (tm0 - t) * 2 * t / (tm0 + t)), rel=1e-14)


def test_fixture_a_table_reproduced_by_equation():
    # Fixture A values (6 significant figures) from G0, Kg (docs/sources.md 2.5, derived here)
    g = lh_growth_rate(A_T, math.exp(LN_G0_III), KG_III, CONST)
    assert np.allclose(g, A_G, rtol=5e-6)
    assert g[4] == pytest.approx(5.0, rel=1e-6)


def test_fixture_a_exact_refit():
    # Noise-free data from the fixture parameters refit to Kg within 1e-9 (docs/sources.md 2.5)
    g = lh_growth_rate(A_T, math.exp(LN_G0_III), KG_III, CONST)
    fit = fit_lauritzen_hoffman(A_T, g, constants=CONST)
    assert fit.overall.kg_k2 == pytest.approx(KG_III, rel=1e-9)
    assert math.log(fit.overall.g0_um_per_min) == pytest.approx(LN_G0_III, abs=1e-8)
    assert len(fit.regimes) == 1 and fit.regime_ratio is None
    # the published-precision table refits to 1e-5 (rounding of G to 6 figures)
    table_fit = fit_lauritzen_hoffman(A_T, A_G, constants=CONST)
    assert table_fit.overall.kg_k2 == pytest.approx(KG_III, rel=1e-5)
    assert len(table_fit.regimes) == 1


def test_tm0_sensitivity():
    # +5 K in Tm0 gives Kg = 6.78e5 K^2 (+23 %) on fixture A (docs/sources.md 2.5, derived here)
    fit = fit_lauritzen_hoffman(A_T, A_G, constants=LHConstants(190.0, -10.0))
    assert fit.overall.kg_k2 == pytest.approx(6.78e5, rel=5e-3)


def test_fixture_b_break_found():
    # Fixture B: regime III -> II at 137 C, Kg ratio 2 (docs/sources.md 2.5; Hoffman 1983 # from memory)
    fit = fit_lauritzen_hoffman(B_T, B_G, constants=CONST, material="iPP")
    assert len(fit.regimes) == 2
    assert abs(fit.break_c - 137.0) <= 2.0
    low, high = fit.regimes
    assert (low.name, high.name) == ("III", "II")
    assert low.kg_k2 == pytest.approx(KG_III, rel=1e-4)
    assert high.kg_k2 == pytest.approx(KG_II, rel=1e-4)
    assert math.log(high.g0_um_per_min) == pytest.approx(LN_G0_II, abs=1e-3)
    assert fit.regime_ratio == pytest.approx(2.0, rel=1e-4)
    assert fit.aicc_two < fit.aicc_one


def test_free_break_model_and_repeated_temperatures():
    # Fixture B with two independent lines (docs/sources.md 2.5, derived here)
    fit = fit_lauritzen_hoffman(B_T, B_G, constants=CONST, break_model="free")
    assert len(fit.regimes) == 2 and abs(fit.break_c - 137.0) <= 2.0
    assert fit.regimes[0].kg_k2 == pytest.approx(KG_III, rel=1e-5)
    assert fit.regimes[1].kg_k2 == pytest.approx(KG_II, rel=1e-5)
    # each temperature measured twice: still one break near 137 C
    twice = fit_lauritzen_hoffman(np.repeat(B_T, 2), np.repeat(B_G, 2) * np.tile([0.99, 1.01], B_T.size),
                                  constants=CONST)
    assert len(twice.regimes) == 2 and abs(twice.break_c - 137.0) <= 2.0
    with pytest.raises(InputError, match="break model"):
        fit_lauritzen_hoffman(B_T, B_G, constants=CONST, break_model="kinked")


def test_noisy_break_and_weighted_ci():
    # Fixture B with 3 % scatter and stated CIs: the break is still found within 2 K
    rng = np.random.default_rng(4)
    t = np.arange(125.0, 150.01, 1.25)
    g = np.where(t <= 137.0, lh_growth_rate(t, math.exp(LN_G0_III), KG_III, CONST),
                 lh_growth_rate(t, math.exp(LN_G0_II), KG_II, CONST))
    g = g * np.exp(0.03 * rng.standard_normal(t.size))
    fit = fit_lauritzen_hoffman(t, g, 1.96 * 0.03 * g, constants=CONST)
    assert len(fit.regimes) == 2 and abs(fit.break_c - 137.0) <= 2.0
    assert 1.6 < fit.regime_ratio < 2.4
    assert all(r.kg_ci95 > 0 for r in fit.regimes)
    single = fit_lauritzen_hoffman(A_T, A_G * np.exp(0.03 * rng.standard_normal(A_T.size)),
                                   1.96 * 0.03 * A_G, constants=CONST)
    assert len(single.regimes) == 1
    assert abs(single.overall.kg_k2 - KG_III) < 2 * single.overall.kg_ci95


def test_surface_energies():
    # Kg formula check value PE: 1.909e5 K^2 (docs/sources.md 3.2, derived here from
    # Hoffman & Miller 1997 Polymer 38, 3151 # from memory)
    ssig = sigma_sigma_e_from_kg(1.909e5, 4, 4.15e-10, 2.80e8, 418.7)
    assert ssig == pytest.approx(0.0118 * 0.090, rel=1e-3)
    # Thomas-Stavely (Thomas & Stavely 1952 J. Chem. Soc. 4569 # from memory), alpha = 0.1:
    # PE 12.2 mJ/m2, PET 10.6 mJ/m2 (docs/sources.md 2.4, derived here)
    assert thomas_stavely_sigma(2.80e8, 4.55e-10, 4.15e-10) == pytest.approx(12.2e-3, rel=5e-3)
    # (the quoted 10.6 is 10.55 rounded up, hence 1 %)
    assert thomas_stavely_sigma(2.1e8, 4.56e-10, 5.53e-10) == pytest.approx(10.6e-3, rel=1e-2)
    assert (regime_factor("II"), regime_factor("III"), regime_factor("I")) == (2, 4, 4)
    fit = fit_lauritzen_hoffman(B_T, B_G, constants=CONST, material="iPP")
    # both regimes give the same sigma*sigma_e when Kg(III) = 2 Kg(II)
    dhf = 207.0 * 0.936e6
    expected = sigma_sigma_e_from_kg(KG_III, 4, 6.26e-10, dhf, 458.15)
    assert fit.sigma_sigma_e_j2_per_m4 == pytest.approx(expected, rel=1e-4)
    assert fit.sigma_e_j_m2 == pytest.approx(expected / thomas_stavely_sigma(dhf, 5.49e-10, 6.26e-10))


def test_temperature_outside_window_and_bad_input():
    with pytest.raises(InputError, match="outside"):
        fit_lauritzen_hoffman([120.0, 130.0, 190.0], [1.0, 1.0, 1.0], constants=CONST)
    with pytest.raises(InputError, match="outside"):
        fit_lauritzen_hoffman([-45.0, 130.0, 140.0], [1.0, 1.0, 1.0], constants=CONST)
    with pytest.raises(InputError, match="positive"):
        fit_lauritzen_hoffman([120.0, 130.0, 140.0], [1.0, -1.0, 1.0], constants=CONST)
    with pytest.raises(InputError, match="at least 3"):
        fit_lauritzen_hoffman([120.0, 130.0], [1.0, 1.0], constants=CONST)


def test_hoffman_weeks_check_values():
    # Tm0 = 186 C, gamma = 2: Tc 130 -> Tm 158, Tc 140 -> Tm 163 (docs/sources.md 5, derived
    # here; Hoffman & Weeks 1962 J. Res. NBS 66A, 13 # from memory)
    hw = hoffman_weeks([130.0, 140.0], [158.0, 163.0])
    assert hw.slope == pytest.approx(0.5) and hw.intercept_c == pytest.approx(93.0)
    assert hw.tm0_c == pytest.approx(186.0) and hw.gamma == pytest.approx(2.0)
    assert "Marand" in hw.caveat
    assert not hoffman_weeks([130.0, 140.0], [160.0, 171.0])  # b > 1
    assert not hoffman_weeks([130.0], [158.0])


def write_table(path, text):
    path.write_text(text)
    return path


def test_growth_table_reader(tmp_path):
    path = write_table(tmp_path / "g.csv", "# demo series\ntemperature_c,growth_rate_um_per_min,"
                       "ci95_um_per_min\n125,24.9,1.0\n130,5.0,0.3\n135,0.69,0.05\n")
    table = read_growth_table(path)
    assert np.array_equal(table.temperature_c, [125, 130, 135])
    assert np.array_equal(table.ci95_um_per_min, [1.0, 0.3, 0.05])
    no_ci = read_growth_table(write_table(tmp_path / "h.csv", "temperature_c;growth_rate_um_per_min"
                                          "\n125;24.9\n130;5\n135;0.7\n"))
    assert no_ci.ci95_um_per_min is None


@pytest.mark.parametrize("text, problem", [
    ("", "empty"),
    ("temp,g\n1,2\n", "missing column"),
    ("temperature_c,growth_rate_um_per_min\n125,fast\n130,1\n135,1\n", "line 2"),
    ("temperature_c,growth_rate_um_per_min\n125,1\n130,1\n", "need at least 3"),
    ("temperature_c,growth_rate_um_per_min\n125,1\n130,0\n135,1\n", "positive"),
    ("temperature_c,growth_rate_um_per_min\n125,1\n130,nan\n135,1\n", "NaN"),
])
def test_growth_table_errors(tmp_path, text, problem):
    path = write_table(tmp_path / "bad.csv", text)
    with pytest.raises(InputError, match=problem) as info:
        read_growth_table(path)
    assert str(path) in str(info.value) and "\n" not in str(info.value)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(alphabet=st.sampled_from(list("0123456789.,;-e\n_temprauc")) , max_size=300))
def test_random_table_text_only_input_error(tmp_path, text):
    path = tmp_path / "random.csv"
    path.write_text("temperature_c,growth_rate_um_per_min\n" + text)
    try:
        table = read_growth_table(path)
        fit_lauritzen_hoffman(table.temperature_c, table.growth_rate_um_per_min,
                              constants=LHConstants(185.0, -10.0), path=path)
    except InputError as err:
        assert "\n" not in str(err)


def test_cli_writes_design_json(tmp_path):
    rows = "\n".join(f"{t},{g}" for t, g in zip(B_T, B_G))
    table = write_table(tmp_path / "series.csv", "temperature_c,growth_rate_um_per_min\n" + rows + "\n")
    parser = argparse.ArgumentParser()
    add_cli_arguments(parser)
    args = parser.parse_args([str(table), "--out", str(tmp_path / "o"), "--tm0-c", "185",
                              "--tg-c", "-10", "--material", "PP"])
    assert run_cli(args) == 0
    doc = json.loads((tmp_path / "o" / "secondary_nucleation.json").read_text())
    assert set(doc) == {"schema", "u_star_j_per_mol", "t_inf_c", "tm0_c", "tg_c", "kg_k2", "kg_ci95",
                        "g0_um_per_min", "regimes", "regime_ratio", "sigma_sigma_e_j2_per_m4"}
    assert [r["name"] for r in doc["regimes"]] == ["III", "II"]
    assert set(doc["regimes"][0]) == {"name", "t_low_c", "t_high_c", "kg_k2", "g0_um_per_min"}
    assert doc["t_inf_c"] == -40.0 and doc["regime_ratio"] == pytest.approx(2.0, rel=1e-4)
