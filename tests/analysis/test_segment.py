"""Crystalline evidence, thresholds, frame-0 crystals and wedge completion.

Optics used to build the images: between crossed polarizers a spherulite with radial
optic axes transmits I ∝ sin²(2(φ − θ_pol)) (four dark extinction wedges along the
polarizer axes); with a first-order retardation plate the extinction arms keep the
melt's red-magenta and opposite quadrants turn blue and yellow (Hartshorne & Stuart,
Crystals and the Polarising Microscope, 4th ed., 1970 # from memory). Growth geometry:
a spherulite growing at constant G reaches p at t0 + |p − c|/G (Johnson & Mehl 1939,
Trans. AIME 135, 416).
"""

import cv2
import numpy as np
import pytest

from analysis.arrival import evidence as segment
from analysis.arrival.registration import warp_onto_reference


def _model(level, noise, blind=None):
    level = np.asarray(level, np.float32)
    blind = np.zeros(level.shape[:2], bool) if blind is None else blind
    return segment.MeltModel(level=level, noise=np.atleast_1d(np.float32(noise)), blind=blind)


def _polar(size=96, centre=(48.0, 48.0)):
    rows, cols = np.indices((size, size), dtype=float)
    return np.hypot(rows - centre[0], cols - centre[1]), np.arctan2(rows - centre[0], cols - centre[1])


def test_channel_mode_resolution():
    grey = np.zeros((8, 8), np.uint8)
    flat_rgb = np.dstack([grey + 50] * 3)
    colour = np.dstack([grey + 180, grey + 60, grey + 150])
    assert segment.resolve_channel_mode("auto", grey) == "grey"
    assert segment.resolve_channel_mode("auto", flat_rgb) == "grey"
    assert segment.resolve_channel_mode("auto", colour) == "colour"
    assert segment.resolve_channel_mode("grey", colour) == "grey"
    with pytest.raises(ValueError):
        segment.resolve_channel_mode("infrared", colour)


def test_temporal_noise_recovers_sigma():
    rng = np.random.default_rng(0)
    scene = rng.uniform(0, 200, (128, 128)).astype(np.float32)
    a = scene + rng.normal(0, 3.0, scene.shape).astype(np.float32)
    b = scene + rng.normal(0, 3.0, scene.shape).astype(np.float32)
    assert segment.temporal_noise(a, b)[0] == pytest.approx(3.0, rel=0.05)


def test_flicker_gain_is_measured_on_the_melt_and_removed():
    rng = np.random.default_rng(1)
    melt = np.full((128, 128), 120.0, np.float32)
    model = _model(melt, 2.0)
    frame = melt * 1.06 + rng.normal(0, 2.0, melt.shape).astype(np.float32)
    step = segment.sample_step(melt.shape)
    gain = segment.frame_gain(frame, model, np.ones(melt[::step, ::step].shape, bool))
    assert gain[0] == pytest.approx(1 / 1.06, rel=0.005)
    corrected = segment.evidence(frame, model, gain)
    raw = segment.evidence(frame, model, np.ones(1, np.float32))
    assert np.percentile(corrected, 99) < 1.5 < np.percentile(raw, 1)


def test_dust_and_illumination_cancel_against_the_melt_reference():
    rng = np.random.default_rng(2)
    rows, cols = np.indices((96, 96))
    light = 1.0 - 0.4 * ((rows - 48) ** 2 + (cols - 48) ** 2) / 48**2
    dust = np.where(np.hypot(rows - 30, cols - 60) < 4, 0.3, 1.0)
    melt = (150.0 * light * dust).astype(np.float32)
    frame = melt + rng.normal(0, 1.5, melt.shape).astype(np.float32)
    evidence = segment.evidence(frame, _model(melt, 1.5), np.ones(1, np.float32))
    assert evidence.max() < 2.5


def test_retardation_colours_give_evidence_even_at_equal_brightness():
    melt_rgb = np.array([180.0, 70.0, 150.0])
    blue = np.array([100.0, 120.0, 180.0])   # same channel sum as the melt: brightness alone misses it
    radius, phi = _polar()
    c2 = np.cos(2 * phi)[..., None]
    inside = (radius < 30)[..., None]
    quadrant = melt_rgb + np.clip(c2, 0, None) * (blue - melt_rgb)
    image = np.where(inside, quadrant, melt_rgb).astype(np.float32)
    model = _model(np.broadcast_to(melt_rgb, image.shape).copy(), [2.0, 2.0, 2.0])
    evidence = segment.evidence(image, model, np.ones(3, np.float32))
    blue_quadrant = (radius < 25) & (radius > 5) & (np.cos(2 * phi) > 0.8)
    arm = (radius < 25) & (radius > 5) & (np.abs(np.cos(2 * phi)) < 0.05)
    assert np.all(evidence[blue_quadrant] > 20)
    assert np.median(evidence[arm]) < np.median(evidence[blue_quadrant]) / 4


def test_blind_pixels_only_on_a_bright_melt():
    rows, cols = np.indices((96, 96))
    speck = np.hypot(rows - 40, cols - 50) < 3
    bright = np.where(speck, 20.0, 160.0).astype(np.float32)
    dark = np.where(speck, 1.0, 6.0).astype(np.float32)
    noise = np.float32([1.0])
    assert segment.blind_pixels(bright, noise)[speck].all()
    assert segment.blind_pixels(bright, noise).sum() < 3 * speck.sum()
    assert not segment.blind_pixels(dark, noise).any()


def test_threshold_sits_far_above_the_noise_and_follows_sensitivity():
    rng = np.random.default_rng(3)
    melt = np.abs(rng.normal(0, 0.3, 200_000))
    threshold = segment.evidence_threshold(melt)
    assert threshold > np.quantile(melt, 0.9999)
    assert segment.evidence_threshold(melt, 2.0) < threshold
    with pytest.raises(ValueError):
        segment.evidence_threshold(melt, 0.0)
    with pytest.raises(ValueError):
        segment.evidence_threshold(np.array([np.nan]))


def test_frame_zero_crystals_found_with_wedges_but_not_dust():
    rng = np.random.default_rng(4)
    radius, phi = _polar()
    disc = radius < 20
    image = 8.0 + 180.0 * disc * np.sin(2 * phi) ** 2
    rows, cols = np.indices(image.shape)
    image[np.hypot(rows - 80, cols - 15) < 3] = 2.0             # dust: darker than the melt
    image = (image + rng.normal(0, 1.5, image.shape)).astype(np.float32)
    model = _model(image, 1.5)
    found = segment.initial_crystalline(image, model, threshold=3.0, min_size_px=12)
    overlap = np.sum(found & disc) / np.sum(found | disc)
    assert overlap > 0.85
    wedges = (np.abs(np.sin(2 * phi)) < 0.15) & (radius > 4) & (radius < 16)
    assert found[wedges].mean() > 0.9
    assert not found[np.hypot(rows - 80, cols - 15) < 6].any()


def test_wedge_completion_recovers_the_cone():
    slowness = 0.7                                   # s per px
    radius, phi = _polar(size=160, centre=(80.3, 79.6))
    truth = 5.0 + slowness * radius
    seen = np.abs(np.sin(2 * phi)) > 0.3             # wedges hidden, as between crossed polarizers
    completed = segment.complete_wedges(np.where(seen, truth, np.inf), slowness)
    hidden = ~seen & (radius > 3) & (radius < 75)
    relative = (completed[hidden] - truth[hidden]) / (slowness * radius[hidden])
    assert np.all(relative > -1e-6)                  # never earlier than possible
    assert np.median(relative) < 0.01 and np.max(relative) < 0.05
    assert np.allclose(completed[seen], truth[seen], rtol=1e-12)


def test_slowness_from_a_cone():
    radius, _ = _polar(size=160, centre=(80.0, 80.0))
    truth = 3.0 + 0.45 * radius
    estimate = segment.estimate_slowness(truth, radius > 2)
    assert estimate == pytest.approx(0.45, rel=0.01)
    assert np.isnan(segment.estimate_slowness(truth, np.zeros_like(truth, bool)))


@pytest.mark.parametrize("shift", [(0.3, -0.6), (2.25, 1.5), (-3.7, 0.0)])
def test_fused_resampling_equals_smoothing_then_warping(shift):
    rng = np.random.default_rng(5)
    diff = cv2.GaussianBlur(rng.standard_normal((120, 120)).astype(np.float32), (0, 0), 2.0)
    model = _model(np.zeros((120, 120)), 1.0)
    fused = segment.evidence_from_difference(diff, model, shift)
    smooth = cv2.GaussianBlur(diff, (5, 5), 1.0, borderType=cv2.BORDER_REPLICATE)
    reference = np.abs(warp_onto_reference(smooth, shift))
    inner = (slice(8, -8), slice(8, -8))
    assert np.max(np.abs(fused - reference)[inner]) < 1e-4
