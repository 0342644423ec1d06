"""Avrami predictions and fits.

Sources: extended-volume prefactors and worked values are derived analytically
(Avrami 1939 J. Chem. Phys. 7, 1103; 1940 J. Chem. Phys. 8, 212 `# from memory`) and
tabulated with a Monte Carlo check in docs/sources.md section 1.2-1.4 ("derived here").
"""

import math

import numpy as np
import pytest

from analysis.errors import InputError
from analysis.kinetics.avrami import (
    AvramiFit,
    FitFailure,
    avrami_conversion,
    fit_avrami_curve,
    fit_avrami_window,
    half_time,
    k_from_half_time,
    k_per_second,
    mass_fraction_from_volume,
    predict_avrami,
    volume_fraction_from_mass,
)


# Worked values: docs/sources.md section 1.4 (derived here; Avrami 1940 J. Chem. Phys. 8, 212 # from memory)
def test_worked_3d_athermal():
    # N_V = 1e6 cm^-3 = 1e3 mm^-3, G = 10 um/min
    p = predict_avrami("bulk-3d", 10.0, density_per_mm_d=1e3)
    assert p.n == 3
    assert p.k_per_min_n == pytest.approx(4.18879e-3, rel=1e-5)
    assert p.t_half_min == pytest.approx(5.4901, rel=1e-4)
    assert k_per_second(p.k_per_min_n, 3) == pytest.approx(1.93926e-8, rel=1e-5)
    assert p.t_half_min * 60 == pytest.approx(329.41, rel=1e-4)


def test_worked_2d_athermal():
    # N_A = 100 mm^-2, G = 10 um/min
    p = predict_avrami("film-2d", 10.0, density_per_mm_d=100.0)
    assert (p.n, p.mode) == (2, "athermal")
    assert p.k_per_min_n == pytest.approx(3.14159e-2, rel=1e-5)
    assert p.t_half_min == pytest.approx(4.6972, rel=1e-4)


def test_worked_3d_sporadic_prefactor_pi_over_3():
    # Ndot_V = 1e4 cm^-3 min^-1 = 10 mm^-3 min^-1, G = 10 um/min
    p = predict_avrami("bulk-3d", 10.0, rate_per_mm_d_per_min=10.0)
    assert (p.n, p.mode) == (4, "thermal")
    assert p.k_per_min_n == pytest.approx(1.04720e-5, rel=1e-5)
    assert p.k_per_min_n == pytest.approx(math.pi / 3 * 10.0 * (1e-2) ** 3, rel=1e-12)
    assert p.t_half_min == pytest.approx(16.040, rel=1e-4)


def test_2d_sporadic_prefactor():
    # k = (pi/3) Ndot_A G^2, n = 3 (docs/sources.md 1.2, derived here)
    p = predict_avrami("film-2d", 5.0, rate_per_mm_d_per_min=20.0)
    assert p.n == 3
    assert p.k_per_min_n == pytest.approx(math.pi / 3 * 20.0 * (5e-3) ** 2, rel=1e-12)


def test_mixed_is_full_extended_volume_sum():
    # X = 1 - exp(-(4pi/3) N0 G^3 t^3 - (pi/3) Ndot G^3 t^4) (docs/sources.md 1.2, derived here)
    p = predict_avrami("bulk-3d", 10.0, density_per_mm_d=1e3, rate_per_mm_d_per_min=500.0)
    assert p.mode == "mixed"
    th = p.t_half_min
    ka, ks = 4 * math.pi / 3 * 1e3 * 1e-6, math.pi / 3 * 500.0 * 1e-6
    assert ka * th ** 3 + ks * th ** 4 == pytest.approx(math.log(2), rel=1e-12)
    assert 3.0 < p.n < 4.0
    assert float(p.conversion(th)) == pytest.approx(0.5, abs=1e-12)
    t = np.linspace(0, 20, 50)
    assert np.allclose(p.conversion(t), 1 - np.exp(-ka * t ** 3 - ks * t ** 4))
    # the reported (n, k) are consistent with t_half
    assert half_time(p.n, p.k_per_min_n) == pytest.approx(th, rel=1e-12)


def test_half_time_and_k_roundtrip():
    assert half_time(3.0, k_from_half_time(3.0, 7.5)) == pytest.approx(7.5, rel=1e-14)


@pytest.mark.parametrize("n, k", [(2.0, 0.03), (3.0, 4.18879e-3), (4.0, 1.0472e-5), (2.6, 0.01)])
def test_window_fit_recovers_analytic_curve_exactly(n, k):
    # Analytic Avrami curve: the linear form is exact (Avrami 1940 J. Chem. Phys. 8, 212 # from memory)
    th = half_time(n, k)
    t = np.linspace(0.01, 3 * th, 400)
    fit = fit_avrami_window(t, avrami_conversion(t, n, k))
    assert isinstance(fit, AvramiFit)
    assert fit.n == pytest.approx(n, rel=1e-10)
    assert fit.k_per_min_n == pytest.approx(k, rel=1e-8)
    assert fit.t_half_min == pytest.approx(th, rel=1e-9)
    assert fit.r2 == pytest.approx(1.0, abs=1e-12)
    assert fit.window == (0.03, 0.20)


@pytest.mark.parametrize("n, th", [(2.0, 3.0), (3.0, 5.4901), (3.7, 12.0)])
def test_curve_fit_recovers_analytic_curve(n, th):
    t = np.linspace(0.0, 3 * th, 300)
    fit = fit_avrami_curve(t, avrami_conversion(t, n, k_from_half_time(n, th)))
    assert fit and fit.method == "nonlinear"
    assert fit.n == pytest.approx(n, rel=1e-6)
    assert fit.t_half_min == pytest.approx(th, rel=1e-6)


def test_fit_failures_are_falsy_values():
    t = np.linspace(0.1, 1, 5)
    failure = fit_avrami_window(t, np.full(5, 0.9))
    assert isinstance(failure, FitFailure) and not failure and "fewer than 3" in failure.reason
    assert not fit_avrami_window(t, np.linspace(0.05, 0.1, 5), window=(0.3, 0.2))
    assert not fit_avrami_curve(t, np.linspace(0.0, 0.3, 5))


def test_mass_volume_conversion():
    # iPP w = 0.5 -> phi = 0.4771 with rho_c/rho_a = 1.0960 (docs/sources.md 4.1, derived here)
    phi = volume_fraction_from_mass(0.5, density_ratio=0.936 / 0.854)
    assert float(phi) == pytest.approx(0.4771, abs=1e-4)
    assert float(volume_fraction_from_mass(0.5, material="PP")) == pytest.approx(float(phi))
    w = np.linspace(0, 1, 11)
    back = mass_fraction_from_volume(volume_fraction_from_mass(w, density_ratio=1.17),
                                     density_ratio=1.17)
    assert np.allclose(back, w, atol=1e-14)
    with pytest.raises(InputError):
        volume_fraction_from_mass(0.5)


@pytest.mark.parametrize("density, rate_per_s, n_theory", [(400.0, 0.0, 2), (0.0, 2.0, 3)])
def test_monte_carlo_film_matches_2d_prediction(density, rate_per_s, n_theory):
    # Monte Carlo link: the simulator's Poisson nuclei + Johnson-Mehl growth on a pixel grid
    # against the extended-volume prediction (docs/sources.md 1.3, MC check derived there;
    # Johnson & Mehl 1939 Trans. AIME 135, 416 # from memory). About 400 nuclei per field,
    # so t_half scatters by a few % (Poisson); the mean over 3 fields is held to 5 %.
    from analysis.synthetic.hot_stage import StackParams, simulate_film_kinetics

    pred = predict_avrami("film-2d", 10.0, density_per_mm_d=density,
                          rate_per_mm_d_per_min=rate_per_s * 60.0)
    assert pred.n == n_theory
    ratios, exponents = [], []
    for seed in range(3):
        params = StackParams(height_px=300, width_px=300, um_per_px=2.0, growth_rate_um_per_min=10.0,
                             n_athermal_per_mm2=density, ndot_per_mm2_per_s=rate_per_s, seed=seed)
        t_s = np.linspace(1.0, 1500.0, 600)
        fit = fit_avrami_curve(t_s / 60.0, simulate_film_kinetics(params).area_fraction(t_s))
        ratios.append(fit.t_half_min / pred.t_half_min)
        exponents.append(fit.n)
    assert np.mean(ratios) == pytest.approx(1.0, abs=0.05)
    assert np.mean(exponents) == pytest.approx(n_theory, abs=0.2)
