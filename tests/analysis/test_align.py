"""Drift estimation and correction (pure image processing: no published values involved)."""

import cv2
import numpy as np
import pytest

from analysis.arrival.registration import (
    DriftTracker,
    bandpass,
    drift_path,
    estimate_shift,
    warp_onto_reference,
)


def _specimen(size=320, seed=0):
    """Textured patches (like spherulite interiors) on a flat, featureless background."""
    rng = np.random.default_rng(seed)
    texture = cv2.GaussianBlur(rng.standard_normal((size, size)).astype(np.float32), (0, 0), 1.5)
    mask = np.zeros((size, size), np.float32)
    for _ in range(6):
        centre = tuple(int(v) for v in rng.integers(40, size - 40, 2))
        cv2.circle(mask, centre, int(rng.integers(20, 45)), 1.0, -1)
    mask = cv2.GaussianBlur(mask, (0, 0), 1.0)  # soft fronts
    return 10.0 * texture * mask + 20.0 * mask


def _moved(image, shift_yx):
    """The specimen displaced by shift_yx on the sensor (content at p goes to p + shift);
    content enters and leaves through the edges as on a real stage."""
    dy, dx = shift_yx
    matrix = np.float32([[1, 0, dx], [0, 1, dy]])
    return cv2.warpAffine(image, matrix, image.shape[::-1], flags=cv2.INTER_CUBIC, borderMode=cv2.BORDER_CONSTANT)


def test_estimate_shift_recovers_subpixel_translation():
    rng = np.random.default_rng(3)
    base = _specimen()
    for shift in ([0.3, -0.7], [1.6, 2.2], [-2.45, 0.05]):
        moving = _moved(base, shift) + rng.normal(0, 0.5, base.shape).astype(np.float32)
        crop = slice(32, 288)
        found = estimate_shift(bandpass(base)[crop, crop], bandpass(moving)[crop, crop])
        assert abs(found.dy - shift[0]) < 0.05 and abs(found.dx - shift[1]) < 0.05
        assert found.response > 0.2


def test_warp_onto_reference_undoes_the_drift():
    base = _specimen()
    moved = _moved(base, (1.25, -0.5))
    back = warp_onto_reference(moved, (1.25, -0.5))
    inner = slice(20, 300)
    before = np.abs(moved - base)[inner, inner].mean()
    after = np.abs(back - base)[inner, inner].mean()
    assert after < 0.15 * before


def test_cumulative_drift_over_a_growing_recording():
    """Linear drift plus slowly growing content; the specimen's texture is static."""
    rng = np.random.default_rng(5)
    base = _specimen(seed=2)
    truth = np.array([[0.23 * k, -0.17 * k] for k in range(40)])
    images = []
    for k, shift in enumerate(truth):
        grown = base * min(1.0, 0.4 + 0.02 * k)  # content brightening, like filling-in
        images.append(_moved(grown, shift) + rng.normal(0, 0.5, base.shape).astype(np.float32))
    found = drift_path(images, crop_px=256)
    error = np.hypot(*(found - truth).T)
    assert np.sqrt(np.mean(error**2)) < 0.08
    assert np.max(error) < 0.2


def test_featureless_frames_hold_the_shift():
    """Pure noise gives no drift information: the tracker must not wander."""
    rng = np.random.default_rng(7)
    images = [rng.normal(0, 1, (200, 200)).astype(np.float32) for _ in range(15)]
    found = drift_path(images, crop_px=128)
    assert np.max(np.abs(found)) < 0.5


def test_tracker_rejects_frames_too_small():
    with pytest.raises(ValueError):
        DriftTracker().update(np.zeros((40, 40), np.float32))
