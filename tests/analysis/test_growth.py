"""Cone fits of arrival times, the linearity test and the pooled growth rate."""

import numpy as np
import pytest
from scipy import stats

from analysis.spherulites import growth


def _cone_pixels(rng, *, cx=31.3, cy=28.7, t0=5.0, g=0.8, noise=0.5, radius=40, interval=2.0):
    yy, xx = np.mgrid[:70, :70]
    r = np.hypot(xx - cx, yy - cy)
    inside = r < radius
    t = t0 + r / g + rng.normal(0, noise, r.shape)
    frames = np.ceil(t / interval).astype(int)
    t_q = frames * interval - interval / 2  # dequantised frame time
    return xx[inside], yy[inside], t_q[inside], frames[inside]


def test_cone_fit_recovers_centre_birth_and_rate():
    # Constant radial growth from a point nucleus: t = t0 + |p - c| / G
    # (Johnson & Mehl 1939, Trans. AIME 135, 416).
    rng = np.random.default_rng(1)
    x, y, t, frames = _cone_pixels(rng)
    fit = growth.fit_cone(x, y, t, frames, start_xy=(30.0, 30.0), f_scale_s=1.0)
    assert fit.ok
    assert abs(fit.x_px - 31.3) < 0.2 and abs(fit.y_px - 28.7) < 0.2
    assert abs(fit.t0_s - 5.0) < 1.0
    assert fit.g_px_per_s == pytest.approx(0.8, rel=0.01)
    assert fit.r2 > 0.99


def test_confidence_interval_covers_the_true_rate_about_95_percent():
    # from memory: coverage of a nominal 95 % interval (Neyman 1937, Phil. Trans. R. Soc. A
    # 236, 333);
    # with frame-level effective samples it must not be far below nominal.
    hits = 0
    trials = 40
    for seed in range(trials):
        rng = np.random.default_rng(100 + seed)
        x, y, t, frames = _cone_pixels(rng, noise=1.5, radius=25)
        fit = growth.fit_cone(x, y, t, frames, start_xy=(31.0, 29.0), f_scale_s=1.0)
        hits += abs(fit.g_px_per_s - 0.8) <= fit.g_ci95_px_per_s()
    assert hits / trials >= 0.85


def test_fixed_centre_fits_only_birth_and_rate():
    rng = np.random.default_rng(2)
    x, y, t, frames = _cone_pixels(rng)
    fit = growth.fit_cone(x, y, t, frames, start_xy=(31.3, 28.7), f_scale_s=1.0, fixed_centre=True)
    assert (fit.x_px, fit.y_px) == (31.3, 28.7)
    assert fit.g_px_per_s == pytest.approx(0.8, rel=0.01)


def test_a_cone_of_four_frames_is_fitted_with_the_slope_held_at_the_field_s():
    # One growth rate for every spherulite of an isothermal field (Lauritzen & Hoffman 1960,
    # J. Res. Natl. Bur. Stand. 64A, 73): with G known, centre and t0 need only three levels.
    rng = np.random.default_rng(3)
    x, y, t, frames = _cone_pixels(rng, radius=5.0, noise=0.2)
    assert np.unique(frames).size == 4
    free = growth.fit_cone(x, y, t, frames, start_xy=(30.0, 30.0), f_scale_s=1.0)
    held = growth.fit_cone(x, y, t, frames, start_xy=(30.0, 30.0), f_scale_s=1.0, held_slope_s_per_px=1 / 0.8)
    assert not free.ok and "too few" in free.reason
    assert held.ok and held.slope_held and held.dof == 1
    assert abs(held.x_px - 31.3) < 0.5 and abs(held.y_px - 28.7) < 0.5 and abs(held.t0_s - 5.0) < 1.0
    assert held.slope_s_per_px == 1 / 0.8 and held.g_ci95_px_per_s() is None  # G is not measured


def test_too_few_frames_is_a_failed_fit_not_an_exception():
    fit = growth.fit_cone([1, 2, 3], [1, 2, 3], [1.0, 2.0, 3.0], [1, 1, 1], start_xy=(0, 0), f_scale_s=1)
    assert not fit.ok and "too few" in fit.reason


def test_dequantised_moves_frame_times_to_interval_midpoints():
    times = np.array([0.0, 10.0, 20.0, 30.0])
    arrival = np.array([[0.0, 10.0], [30.0, np.inf]])
    out = growth.dequantised(arrival, times)
    assert out[0, 1] == 5.0 and out[1, 0] == 25.0 and out[0, 0] == 0.0 and np.isinf(out[1, 1])
    sub_frame = np.array([[1.3, 12.7]])
    assert np.array_equal(growth.dequantised(sub_frame, times), sub_frame)


def test_square_root_growth_is_flagged_and_linear_is_not():
    # from memory: diffusion-limited growth r ∝ sqrt(t) (Christian 2002, The Theory of Transformations
    # in Metals and Alloys, Pergamon) against constant G.
    rng = np.random.default_rng(4)
    t = np.arange(10.0, 400.0, 10.0)
    curved = growth.linearity_test(t, 8.0 * np.sqrt(t) + rng.normal(0, 0.2, t.size))
    straight = growth.linearity_test(t, 0.3 * t + rng.normal(0, 0.2, t.size))
    assert curved.nonlinear and curved.p_value < 1e-6
    assert not straight.nonlinear
    assert "F-test" in curved.description


def test_pooled_rate_is_the_inverse_variance_mean_when_homogeneous():
    # from memory: fixed-effect inverse-variance weighting (DerSimonian & Laird 1986, Controlled
    # Clinical Trials 7, 177): tau^2 = 0 when Q <= k - 1.
    pooled = growth.pooled_rate([10.0, 10.2, 9.9], [0.2, 0.4, 0.2])
    w = np.array([25.0, 6.25, 25.0])
    expected = np.sum(w * [10.0, 10.2, 9.9]) / w.sum()
    assert pooled.tau2 == 0.0 and pooled.value == pytest.approx(expected)
    assert pooled.ci95_half_width == pytest.approx(stats.t.ppf(0.975, 2) / np.sqrt(w.sum()))


def test_pooled_rate_widens_for_heterogeneous_spherulites():
    pooled = growth.pooled_rate([8.0, 10.0, 12.0, 9.0], [0.1, 0.1, 0.1, 0.1])
    assert pooled.tau2 > 1.0
    assert pooled.ci95_half_width > 1.0
    assert pooled.value == pytest.approx(9.75)


def test_model_arrival_map_is_the_minimum_over_cones():
    out = growth.model_arrival_map((1, 11), [[0.0, 0.0], [10.0, 0.0]], [0.0, 2.0], 1.0)
    assert out[0, 0] == 0.0 and out[0, 10] == 2.0 and out[0, 6] == pytest.approx(6.0)
