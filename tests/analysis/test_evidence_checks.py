"""Evidence-based rejection of candidates, confidence and the review order."""

from __future__ import annotations

import numpy as np

from analysis.results import Spherulite
from analysis.spherulites import evidence_checks as checks
from analysis.spherulites.growth import fit_cone

SHAPE = (200, 200)


def _cone_pixels(cx, cy, slope, t0=0.0, half=25, noise=0.0, seed=0):
    yy, xx = np.mgrid[int(cy) - half:int(cy) + half, int(cx) - half:int(cx) + half]
    x, y = xx.ravel().astype(float), yy.ravel().astype(float)
    t = t0 + slope * np.hypot(x - cx, y - cy) + np.random.default_rng(seed).normal(0, noise, x.size)
    t = np.round(t / 10.0) * 10.0  # frame times, 10 s apart
    return x, y, t


def _candidate(k, cx, cy, slope, *, noise=0.5, status="ok", included=False, automatic=True):
    x, y, t = _cone_pixels(cx, cy, slope, noise=noise, seed=k)
    fit = fit_cone(x, y, t, np.round(t / 10.0), start_xy=(cx + 1, cy - 1), f_scale_s=5.0, field_shape=SHAPE)
    resid = float(1.4826 * np.median(np.abs(t - (fit.t0_s + fit.slope_s_per_px * np.hypot(x - fit.x_px, y - fit.y_px)))))
    sph = Spherulite(k, fit.x_px, fit.y_px, fit.t0_s, 0.0, 60.0 / fit.slope_s_per_px, 0.1, fit.r2,
                     fit.n_levels, status)
    return sph, checks.Evidence(fit, resid, x, y, t, user_included=included, automatic=automatic)


def test_a_candidate_growing_far_from_the_field_rate_is_rejected_with_a_reason():
    items = [_candidate(1, 50, 50, 2.0), _candidate(2, 150, 50, 2.0), _candidate(3, 50, 150, 2.0),
             _candidate(4, 150, 150, 6.0)]  # three times slower: dust or noise, not a spherulite
    judged = checks.judge([s for s, _ in items], [e for _, e in items], interval_s=10.0, shape=SHAPE)
    assert [s.status for s in judged] == ["ok", "ok", "ok", "rejected"]
    assert "growth rate" in judged[3].reason
    assert judged[3].confidence == 0.0
    assert all(0.3 < s.confidence <= 1.0 for s in judged[:3])
    noisy = _candidate(5, 100, 100, 2.0, noise=6.0)
    again = checks.judge([s for s, _ in items[:3]] + [noisy[0]], [e for _, e in items[:3]] + [noisy[1]],
                         interval_s=10.0, shape=SHAPE)
    assert again[3].confidence < min(s.confidence for s in again[:3])


def test_the_user_can_overrule_a_rejection_and_manual_nuclei_are_never_rejected():
    items = [_candidate(1, 50, 50, 2.0), _candidate(2, 150, 50, 2.0), _candidate(3, 100, 100, 2.0),
             _candidate(4, 150, 150, 6.0, included=True), _candidate(5, 50, 150, 6.0, automatic=False)]
    judged = checks.judge([s for s, _ in items], [e for _, e in items], interval_s=10.0, shape=SHAPE)
    assert [s.status for s in judged] == ["ok"] * 5


def test_doubtful_detections_come_first_in_the_review_order():
    spherulites = [Spherulite(k, 10.0 * k, 5.0, 0.0, 0.0, 10.0, 1.0, 0.9, 10, status, confidence=c)
                   for k, (status, c) in enumerate([("ok", 0.9), ("ok", 0.2), ("few-points", 0.4),
                                                    ("rejected", 0.0), ("edge", 0.55)], start=1)]
    assert checks.review_order(spherulites) == [2, 3, 5]
    assert checks.review_order(spherulites, include_rejected=True) == [2, 3, 5, 4]


def test_best_frame_shows_the_front_half_way_to_its_neighbour():
    times = np.arange(0.0, 600.0, 10.0)
    sph = Spherulite(1, 50.0, 50.0, 100.0, 110.0, 30.0, 0.5, 0.99, 20, "ok")
    frame = checks.best_frame(sph, times, 0.0, nearest_px=80.0, slope_s_per_px=2.0)
    assert times[frame] == 180.0  # 100 s + 40 px × 2 s/px


def _half(k, own, other, *, slope=12.0, noise=3.0):
    """One cell of two simultaneous nuclei (the Johnson-Mehl rule: each pixel goes to the
    front that reaches it first; Johnson & Mehl 1939, Trans. AIME 135, 416), timed with
    noise, fitted with its own cone."""
    yy, xx = np.mgrid[70:130, 70:130]
    x, y = xx.ravel().astype(float), yy.ravel().astype(float)
    near = np.hypot(x - own[0], y - own[1])
    keep = (near <= np.hypot(x - other[0], y - other[1])) & (near > 2.5)
    x, y = x[keep], y[keep]
    t = slope * near[keep] + np.random.default_rng(k).normal(0.0, noise, x.size)
    fit = fit_cone(x, y, t, np.round(t / 10.0), start_xy=own, f_scale_s=5.0, field_shape=SHAPE)
    resid = float(1.4826 * np.median(np.abs(t - (fit.t0_s + fit.slope_s_per_px * np.hypot(x - fit.x_px, y - fit.y_px)))))
    sph = Spherulite(k, fit.x_px, fit.y_px, fit.t0_s, 0.0, 60.0 / fit.slope_s_per_px, 0.1, fit.r2, fit.n_levels, "ok")
    return sph, checks.Evidence(fit, resid, x, y, t, user_included=False, automatic=True)


def test_a_close_pair_is_two_fronts_but_two_pieces_of_one_front_are_one():
    # Two nuclei 1.6 px apart: one joint cone is only a little worse per pixel (the
    # residual-scale rule alone calls them one front), but over every pixel, and the
    # Schwarz criterion (Schwarz 1978, Ann. Stat. 6, 461) keeps both.
    a, b = (99.2, 100.0), (100.8, 100.0)
    for seed in (1, 5):
        pair = [_half(seed, a, b), _half(seed + 1, b, a)]
        assert checks._duplicates(pair, 10.0) != {}
        assert checks._duplicates(pair, 10.0, noise_s=3.0, correlation_px=1.0) == {}
    # The same cone seen as two pieces (split by its extinction arms) is one front.
    c = (100.0, 100.0)
    pieces = [_half(3, c, (c[0] - 40.0, c[1])), _half(4, c, (c[0] + 40.0, c[1]))]
    assert len(checks._duplicates(pieces, 10.0, noise_s=3.0, correlation_px=1.0)) == 1
