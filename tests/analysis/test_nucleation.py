"""Nucleation counts, densities, rate per untransformed area and mode; X(t)."""

import math

import numpy as np
import pytest

from analysis.spherulites import nucleation


def _exposure_2d_athermal(n_a_per_mm2, g_mm_per_s, times_s, area_mm2):
    # 2-D athermal Avrami law X = 1 - exp(-pi N_A G^2 t^2) (Avrami 1940, J. Chem. Phys. 8, 212;
    # from memory, prefactor checked by Monte Carlo in the shared references).
    x = 1 - np.exp(-math.pi * n_a_per_mm2 * (g_mm_per_s * times_s) ** 2)
    return nucleation.MeltExposure.from_fraction(times_s, x, area_mm2), x


def test_area_fraction_counts_pixels_reached_by_each_frame():
    arrival = np.array([[0.0, 10.0, np.inf], [20.0, np.nan, 10.0]])
    x = nucleation.area_fraction(arrival, [0.0, 10.0, 20.0])
    assert np.allclose(x, [1 / 5, 3 / 5, 4 / 5])


def test_melt_exposure_integrates_the_untransformed_area():
    t = np.linspace(0, 100, 201)
    exposure = nucleation.MeltExposure.from_fraction(t, t / 100.0, 2.0)
    assert exposure.between(0, 100) == pytest.approx(100.0, rel=1e-3)  # ∫ 2 (1 - t/100) dt
    assert exposure.between(50, 100) == pytest.approx(25.0, rel=1e-3)


def test_simultaneous_births_are_athermal_with_density_over_field_area():
    t = np.linspace(0, 600, 61)
    exposure, _ = _exposure_2d_athermal(100.0, 1e-4, t, 0.25)
    births = np.random.default_rng(0).normal(30.0, 1.0, 25)
    nuc = nucleation.nucleation_statistics(
        births, exposure=exposure, field_area_mm2=0.25, interval_s=10.0, thickness_um=20.0, end_s=600.0)
    assert nuc.mode == "athermal" and nuc.count == 25
    assert nuc.density_per_mm2 == pytest.approx(100.0)
    # N_V = N_A / h for nuclei seen through the whole film thickness (Piorkowska, Galeski
    # & Haudin 2006, Prog. Polym. Sci. 31, 549)  # from memory
    assert nuc.density_per_mm3 == pytest.approx(100.0 / 0.02)
    assert nuc.rate_per_mm2_per_min is None and nuc.burst_density_per_mm2 == pytest.approx(100.0)
    assert nuc.induction_time_s == pytest.approx(births.min())


def test_sporadic_births_at_constant_rate_per_melt_area_are_thermal():
    # Poisson births with rate Ndot per untransformed area: N(t) = Ndot ∫(1 - X) A dt
    # (Avrami 1939, J. Chem. Phys. 7, 1103). Draw births by inverting that integral.
    rng = np.random.default_rng(5)
    t = np.linspace(0, 2000, 401)
    area, ndot = 1.0, 0.05  # per mm^2 per s
    x = 1 - np.exp(-(math.pi / 3) * ndot * (2e-4) ** 2 * t ** 3)  # 2-D sporadic law
    exposure = nucleation.MeltExposure.from_fraction(t, x, area)
    total = exposure.between(0, 2000)
    u = np.sort(rng.uniform(0, total, rng.poisson(ndot * total)))
    births = np.interp(u, exposure.cumulative_mm2_s, t)
    nuc = nucleation.nucleation_statistics(
        births, exposure=exposure, field_area_mm2=area, interval_s=10.0, thickness_um=None, end_s=2000.0)
    assert nuc.mode == "thermal"
    assert nuc.rate_per_mm2_per_min == pytest.approx(ndot * 60, rel=0.2)
    assert nuc.density_per_mm3 is None and "KS" in nuc.mode_test


def test_burst_plus_later_births_is_mixed():
    rng = np.random.default_rng(6)
    t = np.linspace(0, 1000, 201)
    exposure, _ = _exposure_2d_athermal(30.0, 2e-4, t, 1.0)
    births = np.concatenate([np.full(30, 5.0), rng.uniform(50, 400, 15)])
    nuc = nucleation.nucleation_statistics(
        births, exposure=exposure, field_area_mm2=1.0, interval_s=5.0, thickness_um=None, end_s=1000.0)
    assert nuc.mode == "mixed"
    assert nuc.burst_density_per_mm2 == pytest.approx(30.0)
    assert nuc.rate_per_mm2_per_min > 0


def test_no_nuclei_gives_zero_density_and_unknown_mode():
    exposure = nucleation.MeltExposure.from_fraction([0, 1], [0, 0], 1.0)
    nuc = nucleation.nucleation_statistics(
        [], exposure=exposure, field_area_mm2=1.0, interval_s=1.0, thickness_um=None, end_s=1.0)
    assert nuc.count == 0 and nuc.mode is None and nuc.density_per_mm2 == 0.0
