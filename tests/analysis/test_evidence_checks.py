"""Evidence-based rejection of candidates, confidence and the review order."""

from __future__ import annotations

import dataclasses

import numpy as np

from analysis.results import Spherulite
from analysis.spherulites import evidence_checks as checks
from analysis.spherulites.growth import ConeFit, fit_cone

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


def _johnson_mehl_field(nuclei, *, shape=(200, 200), noise_s=0.5, interval_s=10.0, seed=0):
    """Arrival times of fronts growing at one rate from (x, y, t0, slope) nuclei, with
    Gaussian timing noise, and the index of the first front at each pixel."""
    yy, xx = np.mgrid[:shape[0], :shape[1]]
    cones = np.array([t0 + s * np.hypot(xx - x, yy - y) for x, y, t0, s in nuclei])
    t = cones.min(axis=0) + np.random.default_rng(seed).normal(0, noise_s, shape)
    return xx, yy, t, cones.argmin(axis=0)


def _fitted(k, xx, yy, t, mask, interval_s=10.0):
    x, y, tt = xx[mask].astype(float), yy[mask].astype(float), t[mask]
    start = int(np.argmin(tt))
    fit = fit_cone(x, y, tt, np.floor(tt / interval_s), start_xy=(x[start], y[start]),
                   f_scale_s=0.5 * interval_s, field_shape=SHAPE)
    resid = float(1.4826 * np.median(np.abs(tt - (fit.t0_s + fit.slope_s_per_px * np.hypot(x - fit.x_px, y - fit.y_px)))))
    sph = Spherulite(k, fit.x_px, fit.y_px, fit.t0_s, 0.0, 60.0 / fit.slope_s_per_px, 0.1, fit.r2,
                     fit.n_levels, "ok")
    return sph, checks.Evidence(fit, resid, x, y, tt, user_included=False, automatic=True)


def test_a_nucleus_born_just_before_a_front_arrives_is_kept():
    # Two fronts at 2 s/px from t0 = 0; a third nucleus 72 px from the first, born 7 s (0.7
    # frame interval) before that front reaches it (the Johnson-Mehl model of sporadic
    # nucleation: Johnson & Mehl 1939, Trans. AIME 135, 416). Arrival noise 0.5 s, as the
    # sub-frame timing of the arrival pass gives.
    nuclei = [(60.0, 100.0, 0.0, 2.0), (140.0, 100.0, 0.0, 2.0), (100.0, 40.0, 2.0 * 72.11 - 7.0, 2.0)]
    xx, yy, t, owner = _johnson_mehl_field(nuclei)
    items = [_fitted(k + 1, xx, yy, t, owner == k) for k in range(3)]
    judged = checks.judge([s for s, _ in items], [e for _, e in items], interval_s=10.0, shape=SHAPE)
    assert [s.status for s in judged] == ["ok", "ok", "ok"], [s.reason for s in judged]
    late = items[2][1]
    others = [e.fit for _, e in items[:2]]
    assert checks.nucleus_support(late, others, 0.5) > 0


def test_the_seam_where_two_fronts_met_is_rejected():
    # The strip along the line where two equal fronts met: its arrival times rise away from
    # the meeting point like a cone's, but they are the two fronts' own (Johnson & Mehl 1939).
    nuclei = [(60.0, 100.0, 0.0, 2.0), (140.0, 100.0, 0.0, 2.0)]
    xx, yy, t, _ = _johnson_mehl_field(nuclei)
    seam = np.abs(xx - 100) <= 4
    items = [_fitted(1, xx, yy, t, xx < 96), _fitted(2, xx, yy, t, xx > 104), _fitted(3, xx, yy, t, seam)]
    assert items[2][1].fit.ok and abs(items[2][1].fit.slope_s_per_px / 2.0 - 1) < 0.5  # passes the rate check
    judged = checks.judge([s for s, _ in items], [e for _, e in items], interval_s=10.0, shape=SHAPE)
    assert [s.status for s in judged] == ["ok", "ok", "rejected"]
    assert "seam" in judged[2].reason


def test_a_phantom_born_inside_crystal_has_no_support():
    # A cone born 20 s after the neighbour's front passed its centre never arrives first at
    # the same growth rate: the phantom nuclei of Avrami 1939 (J. Chem. Phys. 7, 1103).
    nuclei = [(60.0, 100.0, 0.0, 2.0)]
    xx, yy, t, _ = _johnson_mehl_field(nuclei)
    near = np.hypot(xx - 100, yy - 100) <= 15
    host = _fitted(1, xx, yy, t, ~near)[1]
    cone = ConeFit(100.0, 100.0, 2.0 * 40.0 + 20.0, 2.0, 0.1, 0.1, 1.0, 0.01, 10, 0.99, int(near.sum()), 14)
    phantom = checks.Evidence(cone, 0.5, xx[near].astype(float), yy[near].astype(float), t[near],
                              user_included=False, automatic=True)
    assert checks.nucleus_support(phantom, [host.fit], 0.5) <= 0


def test_a_piece_of_a_front_stays_explained_when_that_front_is_placed_within_its_uncertainty():
    # Pixels far out on one front, and that front's fitted cone 1.5 s late there: a shift
    # of 1.5 standard errors of its t0 still explains them (Schwarz 1978, Ann. Stat. 6,
    # 461: the penalised likelihood); a cone claimed exact would not.
    xx, yy, t, _ = _johnson_mehl_field([(60.0, 100.0, 0.0, 2.0)], noise_s=0.5)
    piece = _fitted(2, xx, yy, t, (xx >= 140) & (xx < 175) & (yy >= 80) & (yy < 140))[1]
    host = _fitted(1, xx, yy, t, xx < 120)[1].fit
    late = dataclasses.replace(host, t0_s=host.t0_s + 1.5, se_t0_s=1.0, se_slope_s_per_px=0.0,
                               se_x_px=0.0, se_y_px=0.0)
    assert checks.nucleus_support(piece, [late], 0.5) <= 0
    exact = dataclasses.replace(late, se_t0_s=0.0)
    assert checks.nucleus_support(piece, [exact], 0.5) > 0


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
