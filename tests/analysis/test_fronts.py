"""Per-frame radii along free directions."""

import numpy as np
import pytest

from analysis.spherulites import fronts, growth


def _pixels(arrival, labels, label, times):
    yy, xx = np.nonzero(labels == label)
    frames = np.searchsorted(times, arrival[yy, xx])
    return xx, yy, frames


def test_free_spherulite_radius_grows_linearly():
    # A lone disc growing at constant G: r(t) = G (t - t0) (Johnson & Mehl 1939,
    # Trans. AIME 135, 416: constant radial growth from a point nucleus).
    times = np.arange(0.0, 50.0, 1.0)
    arrival = growth.model_arrival_map((121, 121), [[60.0, 60.0]], [0.0], 1.5)
    labels = np.ones(arrival.shape, np.int32)
    x, y, frames = _pixels(arrival, labels, 1, times)
    blocked = fronts.blocked_distance(labels, 1, 60.0, 60.0, n_sectors=36, reach_px=100)
    out = fronts.front_radii(x, y, frames, blocked, 60.0, 60.0, times.size)
    ok = np.isfinite(out.radius_px) & (out.free_fraction == 1.0)
    slope = np.polyfit(times[ok], out.radius_px[ok], 1)[0]
    assert slope == pytest.approx(1.5, rel=0.02)
    assert out.free_fraction[5] == 1.0
    assert out.free_fraction[-1] < 0.5  # the field edge at 60 px stops every direction


def test_impinged_directions_stop_counting():
    times = np.arange(0.0, 60.0, 1.0)
    centres = [[40.0, 50.0], [80.0, 50.0]]
    arrival = growth.model_arrival_map((100, 120), centres, [0.0, 0.0], 1.0)
    labels = np.where(np.hypot(*(np.mgrid[:100, :120][::-1] - np.array([40.0, 50.0])[:, None, None]))
                      <= np.hypot(*(np.mgrid[:100, :120][::-1] - np.array([80.0, 50.0])[:, None, None])), 1, 2)
    x, y, frames = _pixels(arrival, labels, 1, times)
    blocked = fronts.blocked_distance(labels, 1, 40.0, 50.0, n_sectors=36, reach_px=120)
    assert blocked.min() == pytest.approx(20.0, abs=1.0)
    out = fronts.front_radii(x, y, frames, blocked, 40.0, 50.0, times.size)
    # After the contact at r = 20 the free fraction falls, but the median stays on free fronts.
    assert out.free_fraction[10] == 1.0 and out.free_fraction[30] < 1.0
    assert out.radius_px[30] == pytest.approx(30.0, abs=1.0)


def test_extinction_wedges_without_data_do_not_bias_the_radius():
    times = np.arange(0.0, 30.0, 1.0)
    arrival = growth.model_arrival_map((101, 101), [[50.0, 50.0]], [0.0], 1.0)
    yy, xx = np.mgrid[:101, :101]
    angle = np.degrees(np.arctan2(yy - 50, xx - 50)) % 90
    arrival[(angle < 12) | (angle > 78)] = np.nan  # four dark arms along the polarizers
    labels = np.ones(arrival.shape, np.int32)
    ok = np.isfinite(arrival)
    frames = np.searchsorted(times, arrival[ok])
    blocked = fronts.blocked_distance(labels, 1, 50.0, 50.0, n_sectors=36, reach_px=80)
    out = fronts.front_radii(xx[ok], yy[ok], frames, blocked, 50.0, 50.0, times.size)
    assert out.radius_px[20] == pytest.approx(20.0, abs=1.0)
