"""Checks of the synthetic isothermal DSC runs against the extended-volume theory."""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from scipy import integrate

from analysis.errors import InputError
from analysis.synthetic.hot_stage import (
    DscIsotherm,
    simulate_dsc_isotherm,
    write_dsc_csv,
)

QUIET = dict(lag_s=0.0, baseline_drift_mw_per_min=0.0, transient_amplitude_mw=0.0, noise_mw=0.0)


def _extended_volume_3d(t_s, n_v, ndot_v, g_mm_per_s):
    """Extended volume fraction by direct numerical integration of the Avrami integral.

    X_ex(t) = N_V (4 pi/3) (G t)^3 + integral_0^t Ndot_V (4 pi/3) (G (t - s))^3 ds
    (a nucleus born at s has, at time t, the volume of a ball of radius G (t - s)).
    """
    ball = lambda s: ndot_v * (4.0 * math.pi / 3.0) * (g_mm_per_s * (t_s - s)) ** 3
    sporadic, _ = integrate.quad(ball, 0.0, t_s)
    return n_v * (4.0 * math.pi / 3.0) * (g_mm_per_s * t_s) ** 3 + sporadic


def _crystallinity_from_heat_flow(iso: DscIsotherm) -> np.ndarray:
    cumulative = integrate.cumulative_trapezoid(iso.heat_flow_mw, iso.time_s, initial=0.0)
    return cumulative / cumulative[-1]


@pytest.mark.parametrize(
    "n_v, ndot_v, n_expected",
    [(2.0e4, 0.0, 3.0), (0.0, 400.0, 4.0)],
    ids=["athermal", "sporadic"],
)
def test_relative_crystallinity_follows_3d_avrami_prefactors(n_v, ndot_v, n_expected):
    """Avrami 1939, 1940, 1941 (J. Chem. Phys. 7, 1103; 8, 212; 9, 177), extended volume:

    X = 1 - exp(-X_ex), X_ex(t) = integral_0^t nu(s) (4 pi/3) G^3 (t - s)^3 ds.

    Athermal, nu(s) = N_V delta(s):  X_ex = (4 pi/3) N_V G^3 t^3   ->  n = 3, k = (4 pi/3) N_V G^3.
    Sporadic, nu(s) = Ndot_V:        X_ex = (4 pi/3) Ndot_V G^3 integral_0^t (t - s)^3 ds
                                          = (4 pi/3) Ndot_V G^3 t^4 / 4 = (pi/3) Ndot_V G^3 t^4
                                                                     ->  n = 4, k = (pi/3) Ndot_V G^3.
    The test evaluates the integral numerically (independently of the simulator's closed form),
    then checks the simulator's true X, its reported n and k, and the X obtained by integrating
    its (noise- and lag-free) heat flow.
    """
    g_um_per_min, induction_s = 12.0, 40.0
    g_mm_per_s = g_um_per_min / 1000.0 / 60.0
    iso = simulate_dsc_isotherm(
        n_v_per_mm3=n_v, ndot_v_per_mm3_per_s=ndot_v, growth_rate_um_per_min=g_um_per_min,
        induction_time_s=induction_s, interval_s=0.5, duration_s=900.0, **QUIET,
    )
    t_probe = np.arange(5.0, 400.0, 35.0)  # on the 0.5 s sampling grid
    x_integral = np.array([1 - math.exp(-_extended_volume_3d(t, n_v, ndot_v, g_mm_per_s)) for t in t_probe])
    x_sim = iso.relative_crystallinity[np.searchsorted(iso.time_s, t_probe + induction_s)]
    np.testing.assert_allclose(x_sim, x_integral, atol=1e-9)

    # k from the integral at one time, in min^-n
    t_ref_s = 120.0
    k_integral = _extended_volume_3d(t_ref_s, n_v, ndot_v, g_mm_per_s) / (t_ref_s / 60.0) ** n_expected
    assert iso.n == n_expected
    assert iso.k_per_min_n == pytest.approx(k_integral, rel=1e-9)
    assert iso.t_half_min == pytest.approx((math.log(2) / k_integral) ** (1 / n_expected), rel=1e-9)

    # the heat flow carries the same kinetics: heat flow ∝ dX/dt (the usual DSC assumption,
    # Borchardt & Daniels 1957, J. Am. Chem. Soc. 79, 41 # from memory); integrate it and
    # compare in the primary range
    x_heat = _crystallinity_from_heat_flow(iso)
    tau_min = (iso.time_s - induction_s) / 60.0
    primary = (x_heat > 0.03) & (x_heat < 0.8)
    x_theory = 1 - np.exp(-k_integral * tau_min[primary] ** n_expected)
    assert np.max(np.abs(x_heat[primary] - x_theory)) < 2e-3
    slope, _ = np.polyfit(np.log(tau_min[primary]), np.log(-np.log(1 - x_heat[primary])), 1)
    assert slope == pytest.approx(n_expected, abs=0.05)


def test_mixed_nucleation_has_no_single_exponent_and_a_true_half_time():
    """Mixed nucleation, Avrami 1940 (J. Chem. Phys. 8, 212): the two extended-volume
    terms add, X_ex = (4 pi/3) N_V G^3 t^3 + (pi/3) Ndot_V G^3 t^4."""
    iso = simulate_dsc_isotherm(n_v_per_mm3=1.0e4, ndot_v_per_mm3_per_s=200.0, **QUIET)
    g = 10.0 / 1000.0 / 60.0
    assert iso.n is None and iso.k_per_min_n is None
    x_ex_half = _extended_volume_3d(iso.t_half_min * 60.0, 1.0e4, 200.0, g)
    assert x_ex_half == pytest.approx(math.log(2), rel=1e-7)


def test_heat_flow_area_is_total_enthalpy_and_lag_delays_by_its_time_constant():
    """The area under dH/dt is enthalpy x mass (mJ), whatever the lag; a first-order lag
    delays the centroid of the peak by exactly its time constant (the first moment of the
    kernel exp(-t/tau)/tau is tau; a property of convolution, derived here)."""
    common = dict(QUIET, enthalpy_j_per_g=90.0, mass_mg=4.0, interval_s=0.5, duration_s=1500.0)
    sharp = simulate_dsc_isotherm(**common)
    lagged = simulate_dsc_isotherm(**dict(common, lag_s=15.0))
    for iso in (sharp, lagged):
        assert integrate.trapezoid(iso.heat_flow_mw, iso.time_s) == pytest.approx(360.0, rel=2e-3)
    centroid = lambda iso: integrate.trapezoid(iso.time_s * iso.heat_flow_mw, iso.time_s) / integrate.trapezoid(
        iso.heat_flow_mw, iso.time_s
    )
    assert centroid(lagged) - centroid(sharp) == pytest.approx(15.0, abs=0.3)
    assert np.argmax(lagged.heat_flow_mw) > np.argmax(sharp.heat_flow_mw)


def test_instrument_effects_baseline_transient_noise_and_sign():
    base = simulate_dsc_isotherm(**QUIET)
    noisy = simulate_dsc_isotherm(
        lag_s=0.0, baseline_drift_mw_per_min=0.01, baseline_offset_mw=0.2, transient_amplitude_mw=1.0,
        transient_tau_s=10.0, noise_mw=0.02, seed=3,
    )
    residual = noisy.heat_flow_mw - base.heat_flow_mw - 0.2 - 0.01 * base.time_s / 60 - np.exp(-base.time_s / 10)
    assert np.std(residual) == pytest.approx(0.02, rel=0.1)
    assert abs(np.mean(residual)) < 0.005
    down = simulate_dsc_isotherm(exotherm="down", **QUIET)
    np.testing.assert_allclose(down.heat_flow_mw, -base.heat_flow_mw)


def _read_export(path, delimiter, decimal):
    with open(path, encoding="utf-8", newline="") as handle:
        rows = list(csv.reader(handle, delimiter=delimiter))
    head = next(i for i, row in enumerate(rows) if row and row[0].startswith("Time ("))
    data = np.array([[float(v.replace(decimal, ".")) for v in row] for row in rows[head + 1:]])
    return rows[:head], rows[head], data


@pytest.mark.parametrize("delimiter, decimal, unit, flow_unit",
                         [(",", ".", "min", "mW"), (";", ",", "s", "W/g")])
def test_csv_export_round_trip_in_both_dialects(tmp_path, delimiter, decimal, unit, flow_unit):
    iso = simulate_dsc_isotherm(mass_mg=5.25, seed=2)
    path = tmp_path / "run.csv"
    write_dsc_csv(iso, path, delimiter=delimiter, decimal=decimal, time_unit=unit, heat_flow_unit=flow_unit,
                  sample_name="grade X; lot 7, 128 C", temperature_c=128.0)
    header, columns, data = _read_export(path, delimiter, decimal)
    assert columns == [f"Time ({unit})", f"Heat flow ({flow_unit})", "Sample temperature (°C)"]
    assert ["Mass (mg)", f"5{decimal}250"] in header and ["Sample", "grade X; lot 7, 128 C"] in header
    scale = 60.0 if unit == "min" else 1.0
    per_mass = 5.25 if flow_unit == "W/g" else 1.0
    np.testing.assert_allclose(data[:, 0] * scale, iso.time_s, atol=1e-3)
    np.testing.assert_allclose(data[:, 1] * per_mass, iso.heat_flow_mw, atol=1e-5)
    assert np.all(np.abs(data[:, 2] - 128.0) < 0.1)


def test_absurd_parameters_are_input_errors(tmp_path):
    with pytest.raises(InputError, match="growth_rate"):
        simulate_dsc_isotherm(growth_rate_um_per_min=-1.0)
    with pytest.raises(InputError, match="no nucleation"):
        simulate_dsc_isotherm(n_v_per_mm3=0.0)
    with pytest.raises(InputError, match="clash"):
        write_dsc_csv(simulate_dsc_isotherm(), tmp_path / "x.csv", delimiter=",", decimal=",")
