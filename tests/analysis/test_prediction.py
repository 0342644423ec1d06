"""The Avrami film fit and prediction computed from an experiment's result.

Sources: extended-volume prefactors (athermal k = C_d N G^d, sporadic k = C_d Ndot G^d/(d+1),
mixed terms add) from Avrami 1939, J. Chem. Phys. 7, 1103 and 1940, J. Chem. Phys. 8, 212
(# from memory), tabulated in docs/sources.md §1.2-1.4; N_V = N_A / h in docs/sources.md §1.7.
"""

import math

import numpy as np
import pytest

from analysis.errors import InputError
from analysis.kinetics.avrami import avrami_conversion, k_from_half_time
from analysis.kinetics.prediction import (
    film_avrami_fit,
    film_conversion,
    predict_from_result,
    predict_model_from_result,
    prediction_inputs,
)
from analysis.results import ExperimentResult, Nucleation, PooledGrowthRate


def make_result(*, g=10.0, mode="athermal", n_mm2=None, rate_mm2=None, burst_mm2=None,
                thickness_um=None, t_s=None, x=None, induction_s=None):
    h_mm = thickness_um * 1e-3 if thickness_um else None
    return ExperimentResult(
        stack="demo.tif", frames=10, um_per_px=1.0, interval_s=1.0, temperature_c=130.0,
        thickness_um=thickness_um, spherulites=(), radii=(),
        growth_rate=PooledGrowthRate(g, None, None, 5),
        nucleation=Nucleation(5, mode, n_mm2, None if n_mm2 is None or not h_mm else n_mm2 / h_mm,
                              rate_mm2, None if rate_mm2 is None or not h_mm else rate_mm2 / h_mm,
                              induction_s, burst_density_per_mm2=burst_mm2),
        area_fraction_time_s=np.zeros(0) if t_s is None else t_s,
        area_fraction=np.zeros(0) if x is None else x)


def test_bulk_prediction_uses_n_a_over_thickness():
    # N_V = N_A / h (docs/sources.md §1.7): 100 mm^-2 over 100 um = 1e3 mm^-3;
    # k = (4 pi / 3) N_V G^3 with G = 0.01 mm/min (Avrami 1940, # from memory)
    res = make_result(n_mm2=100.0, thickness_um=100.0)
    params = predict_from_result(res, "bulk-3d")
    assert params.geometry == "bulk-3d" and params.n == 3
    assert params.k_per_min_n == pytest.approx(4 * math.pi / 3 * 1e3 * 1e-6, rel=1e-12)
    film = predict_from_result(res, "film-2d")  # k = pi N_A G^2
    assert film.k_per_min_n == pytest.approx(math.pi * 100.0 * 1e-4, rel=1e-12)
    # a corrected thickness given by the project replaces the result's
    thinner = predict_from_result(res, "bulk-3d", thickness_um=50.0)
    assert thinner.k_per_min_n == pytest.approx(2 * params.k_per_min_n, rel=1e-12)


def test_mixed_prediction_counts_the_sporadic_nuclei_once():
    # Mixed nucleation: X_ex = C_d N0 G^d t^d + C_d Ndot G^d t^(d+1) / (d + 1) (Avrami 1940,
    # # from memory). N0 is the initial burst only; the total N_A also holds the nuclei
    # born later, which the rate term already describes.
    res = make_result(mode="mixed", n_mm2=100.0, burst_mm2=60.0, rate_mm2=2.0, thickness_um=20.0)
    inputs = prediction_inputs(res, "film-2d")
    assert inputs.density_per_mm_d == 60.0 and inputs.rate_per_mm_d_per_min == 2.0
    model = predict_model_from_result(res, "film-2d")
    g_mm = 0.01
    assert model.athermal_k == pytest.approx(math.pi * 60.0 * g_mm ** 2, rel=1e-12)
    assert model.sporadic_k == pytest.approx(math.pi * 2.0 * g_mm ** 2 / 3, rel=1e-12)
    bulk = prediction_inputs(res, "bulk-3d")
    assert bulk.density_per_mm_d == pytest.approx(60.0 / 0.02)
    assert bulk.rate_per_mm_d_per_min == pytest.approx(2.0 / 0.02)
    # the half-time solves X_ex = ln 2 (X = 1/2)
    t_half = model.t_half_min
    assert float(model.extended_fraction(t_half)) == pytest.approx(math.log(2.0), rel=1e-10)


def test_mode_override_and_clear_errors():
    res = make_result(mode="mixed", n_mm2=100.0, burst_mm2=60.0, rate_mm2=2.0, thickness_um=20.0)
    assert predict_model_from_result(res).mode == "mixed"
    athermal = predict_model_from_result(res, mode="athermal")
    assert athermal.sporadic_k == 0.0  # every nucleus counted as predetermined: N_A
    assert prediction_inputs(res, "film-2d", "athermal").density_per_mm_d == 100.0
    assert predict_model_from_result(res, mode="sporadic").n == 4
    with pytest.raises(InputError, match="demo.tif.*nucleus density.*thickness"):
        predict_from_result(make_result(n_mm2=100.0), "bulk-3d")  # no thickness
    thermal = make_result(mode="thermal", n_mm2=100.0, rate_mm2=2.0, thickness_um=20.0)
    with pytest.raises(InputError, match="nucleus density"):  # no burst in a thermal result
        predict_model_from_result(thermal, mode="mixed")
    assert predict_model_from_result(make_result(mode=None, n_mm2=10.0, thickness_um=10.0)).mode == "athermal"
    assert predict_model_from_result(make_result(mode=None, rate_mm2=1.0, thickness_um=10.0)).mode == "thermal"
    with pytest.raises(InputError, match="mode 'burst' unknown"):
        predict_model_from_result(res, mode="burst")
    with pytest.raises(InputError, match="geometry"):
        predict_from_result(res, "bulk-4d")
    with pytest.raises(InputError, match="growth rate"):
        predict_from_result(make_result(g=None, n_mm2=1.0, thickness_um=10.0))


def test_film_fit_recovers_an_exact_two_dimensional_curve():
    # X = 1 - exp(-k t^n) with n = 2 (2-D athermal law, Avrami 1940, # from memory),
    # counted from the induction time.
    n, t_half, induction_s = 2.0, 3.0, 45.0
    t_s = np.linspace(0.0, 600.0, 121)
    x = avrami_conversion((t_s - induction_s) / 60.0, n, k_from_half_time(n, t_half))
    res = make_result(n_mm2=10.0, t_s=t_s, x=x, induction_s=induction_s)
    t_min, x_back = film_conversion(res)
    assert t_min[0] == pytest.approx(-0.75) and np.array_equal(x_back, x)
    fit = film_avrami_fit(res)
    assert fit.n == pytest.approx(n, rel=1e-6) and fit.t_half_min == pytest.approx(t_half, rel=1e-6)
    assert not film_avrami_fit(make_result(n_mm2=10.0))  # no X(t): a falsy failure
