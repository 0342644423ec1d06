"""Crystalline evidence: how far each pixel has moved away from the melt, in noise units.

Between crossed polarizers the melt is dark and a spherulite bright except in its four
extinction wedges; with a first-order retardation plate the melt (and the extinction
arms) are red-magenta and the quadrants blue and yellow. Neither brightness nor any one
colour works for both, so the evidence is the *difference from the melt*, per channel,
divided by that channel's noise and summed (an L1 colour distance):

    e(p) = Σ_c |G_σ * (g_c f_c − m_c)|(p) / s_c

- ``m`` is a per-pixel melt reference in camera coordinates (:class:`MeltModel`): it
  carries the uneven illumination and every speck of dust or scratch that sits on the
  optics, so all of these cancel in the difference instead of needing a flat field.
- ``g_c`` is a per-frame gain that removes lamp flicker, measured on pixels that are still
  melt (:func:`frame_gain`).
- ``s_c`` is the temporal noise of the channel (robust, from two frames:
  :func:`temporal_noise`), so the threshold is chosen from the data
  (:func:`evidence_threshold`), with a user ``sensitivity`` factor.
- the difference is smoothed (Gaussian, about a pixel) before taking its magnitude so
  noise averages out while the soft front stays sharp.

Pixels whose light is blocked by dense dust carry no information and are flagged
(:func:`blind_pixels`). Recordings that start late are handled by
:func:`initial_crystalline`, which finds crystals already present in frame 0 from that
frame alone. :func:`complete_wedges` fills what the evidence cannot see (extinction
wedges, dark bands) from the growth geometry once the arrival-time map exists.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage
from skimage import measure

from analysis import heuristics
from analysis.settings import CHANNEL_MODES  # described once with the other settings

__all__ = [
    "CHANNEL_MODES", "MeltModel", "resolve_channel_mode", "working_image", "temporal_noise",
    "blind_pixels", "sample_step", "with_local_smoothing", "frame_gain", "melt_difference", "evidence_from_difference", "evidence", "evidence_threshold", "initial_crystalline",
    "estimate_slowness", "complete_wedges", "complete_wedges_in_time",
]



@dataclass
class MeltModel:
    """What the melt looks like through this camera, pixel by pixel.

    Attributes
    ----------
    level : ndarray, float32, (H, W) or (H, W, C)
        Melt appearance in camera coordinates (native units of the frames).
    noise : ndarray, float32, (C,)
        Temporal noise standard deviation of each channel (same units).
    blind : ndarray of bool, (H, W)
        Camera pixels covered by dense dust (no usable light).
    smoothing_px : float
        Gaussian sigma applied to the difference before its magnitude, px.
    wide_smoothing_px : float
        Second, wider Gaussian sigma for the dimly lit parts of the field, px (0: none;
        see :func:`with_local_smoothing`).
    wide_weight, wide_gain : ndarray, float32, (H, W), or None
        Per-pixel share of the wide smoothing in the blend, and the factor that brings
        the blend's noise back to that of ``smoothing_px`` (camera coordinates).
    """

    level: np.ndarray
    noise: np.ndarray
    blind: np.ndarray
    smoothing_px: float = 1.0
    wide_smoothing_px: float = 0.0
    wide_weight: np.ndarray | None = None
    wide_gain: np.ndarray | None = None

    @property
    def any_blind(self) -> bool:
        return bool(self.blind.any())

    @property
    def channels(self) -> int:
        return 1 if self.level.ndim == 2 else self.level.shape[2]


def resolve_channel_mode(mode: str, frame: np.ndarray) -> str:
    """``"grey"`` or ``"colour"``; ``"auto"`` picks colour for RGB frames whose channels differ."""
    if mode not in CHANNEL_MODES:
        raise ValueError(f"channel mode must be one of {CHANNEL_MODES}, not {mode!r}")
    if frame.ndim == 2:
        return "grey"
    if mode != "auto":
        return mode
    sample = frame[::4, ::4].astype(np.float32)
    spread = np.abs(sample[..., 0] - sample[..., 1]).mean() + np.abs(sample[..., 1] - sample[..., 2]).mean()
    return "colour" if spread > 0.01 * (sample.mean() + 1e-6) else "grey"


def working_image(frame: np.ndarray, mode: str, *, keep_integers: bool = False) -> np.ndarray:
    """Frame as float32 in the resolved channel mode (grey: (H, W); colour: (H, W, 3)).

    ``keep_integers``: a grey 8/16-bit frame is returned as it is (:func:`melt_difference`
    converts on the fly, which saves a pass over the frame).
    """
    frame = np.asarray(frame)
    if keep_integers and frame.ndim == 2 and frame.dtype in (np.uint8, np.uint16):
        return frame
    image = frame.astype(np.float32, copy=False)
    if image.ndim == 3 and mode == "grey":
        return cv2.cvtColor(image, cv2.COLOR_RGB2GRAY)
    return image


def temporal_noise(first: np.ndarray, second: np.ndarray, *, integer_data: bool = True) -> np.ndarray:
    """Per-channel noise sigma from two frames: 1.4826·MAD(difference)/√2, floored at the
    quantization noise of integer data (or a millionth of the range of float data)."""
    first = np.asarray(first, np.float32)
    diff = (np.asarray(second, np.float32) - first).reshape(-1, 1 if first.ndim == 2 else first.shape[2])
    mad = np.median(np.abs(diff - np.median(diff, axis=0)), axis=0)
    floor = heuristics.current().noise_floor_dn if integer_data else max(1e-6 * float(np.ptp(first)), 1e-12)
    return np.maximum(1.4826 * mad / np.sqrt(2.0), floor).astype(np.float32)


def blind_pixels(level: np.ndarray, noise: np.ndarray, exclude: np.ndarray | None = None) -> np.ndarray:
    """Pixels much darker than the melt around them (dense dust).

    Only looked for when the melt itself is bright (retardation plate, bright field):
    on the black melt of crossed polarizers dust cannot be told from melt, and there it
    simply hides the crystal behind it like an extinction wedge. ``exclude`` marks
    pixels that are not melt (crystals present in frame 0).
    """
    total = level if level.ndim == 2 else level.sum(axis=2)
    melt = total if exclude is None else total[~exclude]
    if melt.size == 0 or np.median(melt) < 20.0 * float(np.sum(noise)):
        return np.zeros(total.shape, bool)
    background = _coarse_background(total.astype(np.float32))
    blind = total < heuristics.current().blind_transmission * background
    if exclude is not None:
        blind &= ~exclude
    return cv2.dilate(blind.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)


def sample_step(shape) -> int:
    """Grid step that leaves about 20 000 pixels: plenty for a global level."""
    return max(1, int(np.sqrt(shape[0] * shape[1] / 20000.0)))


def frame_gain(image: np.ndarray, model: MeltModel, melt_sample: np.ndarray) -> np.ndarray:
    """Factor that brings this frame's melt back to the reference (lamp flicker).

    ``melt_sample`` is a boolean mask, on the grid ``[::step, ::step]`` with
    ``step = sample_step(shape)``, of pixels believed to be melt. A lamp brightens all
    colours alike, so one gain serves every channel: the median over the sample of the
    per-pixel ratio reference / frame (channels summed), robust to the odd crystal pixel
    in the sample. With fewer than 200 samples or a melt too dark to measure, 1.
    """
    gains = np.ones(model.channels, np.float32)
    if np.count_nonzero(melt_sample) < 200:
        return gains
    step = sample_step(image.shape)
    now = image[::step, ::step][melt_sample]
    ref = model.level[::step, ::step][melt_sample]
    if now.ndim == 2:
        now, ref = now.sum(axis=1), ref.sum(axis=1)
    if np.median(ref) < 5.0 * float(np.sum(model.noise)):
        return gains
    ratio = ref / np.maximum(now, 1e-6)
    gains[:] = np.clip(np.median(ratio), 0.5, 2.0)
    return gains


def melt_difference(image: np.ndarray, model: MeltModel, gain: np.ndarray) -> np.ndarray:
    """Signed, flicker-corrected difference from the melt in noise units (camera
    coordinates, float32, channels kept); zero on blind pixels."""
    if model.channels == 1:
        scale = float(gain[0] / model.noise[0])
        diff = cv2.addWeighted(image, scale, model.level, -1.0 / float(model.noise[0]), 0.0, dtype=cv2.CV_32F)
    else:
        scale = tuple(float(g / s) for g, s in zip(gain, model.noise)) + (0.0,)
        inverse = tuple(float(1.0 / s) for s in model.noise) + (0.0,)
        diff = cv2.subtract(cv2.multiply(image, scale), cv2.multiply(model.level, inverse))
    if model.any_blind:
        diff[model.blind] = 0.0
    return diff


def with_local_smoothing(model: MeltModel, needed_px: np.ndarray | None) -> MeltModel:
    """The model with a second, wider smoothing blended in where the light is dim.

    ``needed_px`` (H, W) is the Gaussian sigma each part of the field needs for its own
    crystal to stand out of the noise (:func:`analysis.arrival.quality.smoothing_map`).
    The evidence becomes ``g(p)·[(1 − w) G_σ0 + w G_σ1] * diff`` with σ0 the model's
    smoothing and σ1 the largest sigma needed. The blend of two Gaussians of white noise
    has variance (1 − w)²v0 + w²v1 + 2w(1 − w)c01, v_k = 1/(4πσ_k²) and
    c01 = 1/(2π(σ0² + σ1²)); w is chosen so that this equals the variance of G_σ(p)
    (σ(p) the sigma needed there) and g(p) scales the blend's noise back to G_σ0's. Melt
    noise therefore looks the same everywhere, one detection threshold serves the whole
    field, and a dim crystal reaches it as a bright one does: each part of the field is
    judged on its own signal-to-noise ratio. With less than a quarter pixel between σ0
    and σ1 the model is returned unchanged (no second filter, no cost).
    """
    s0 = float(model.smoothing_px)
    if needed_px is None:
        return model
    s1 = float(np.max(needed_px))
    if s1 - s0 < 0.25:
        return model
    v0, v1, c01 = (1.0 / (4 * np.pi * s0 ** 2), 1.0 / (4 * np.pi * s1 ** 2), 1.0 / (2 * np.pi * (s0 ** 2 + s1 ** 2)))
    w = np.linspace(0.0, 1.0, 201)
    blend_sd = np.sqrt((1 - w) ** 2 * v0 + w ** 2 * v1 + 2 * w * (1 - w) * c01)  # decreasing in w
    target_sd = 1.0 / (2.0 * np.sqrt(np.pi) * np.clip(needed_px, s0, s1))
    weight = np.interp(target_sd, blend_sd[::-1], w[::-1]).astype(np.float32)
    gain = (np.sqrt(v0) / np.interp(weight, w, blend_sd)).astype(np.float32)
    return MeltModel(level=model.level, noise=model.noise, blind=model.blind, smoothing_px=s0,
                     wide_smoothing_px=s1, wide_weight=weight, wide_gain=gain)


def _gaussian(diff, sigma, dy, dx, whole_y, whole_x):
    radius = int(round(2.0 * sigma))  # ±2σ is plenty, and faster than ±4σ
    if dy == whole_y and dx == whole_x:
        return cv2.GaussianBlur(diff, (2 * radius + 1, 2 * radius + 1), sigma, borderType=cv2.BORDER_REPLICATE)
    kernel_y = _shifted_gaussian(sigma, radius, dy - whole_y)
    kernel_x = _shifted_gaussian(sigma, radius, dx - whole_x)
    return cv2.sepFilter2D(diff, cv2.CV_32F, kernel_x, kernel_y, borderType=cv2.BORDER_REPLICATE)


def evidence_from_difference(diff: np.ndarray, model: MeltModel, shift_yx=(0.0, 0.0), *,
                             local: bool = True) -> np.ndarray:
    """Smoothed magnitude of a melt difference, optionally resampled onto frame 0's grid.

    ``out(p) = |G_σ * diff|(p + shift)`` summed over channels: the Gaussian and the
    bilinear sub-pixel shift are one separable filter, the whole-pixel part a slice, so
    registering costs no extra pass over the frame. Pixels that were outside the camera
    field get 0. When the model blends in a wider smoothing for dim parts of the field
    (:func:`with_local_smoothing`), the blend replaces G_σ; ``local=False`` skips it
    (a window of the frame, for registration).
    """
    dy, dx = float(shift_yx[0]), float(shift_yx[1])
    whole_y, whole_x = int(np.floor(dy)), int(np.floor(dx))
    smooth = _gaussian(diff, model.smoothing_px, dy, dx, whole_y, whole_x)
    if local and model.wide_weight is not None:
        wide = _gaussian(diff, model.wide_smoothing_px, dy, dx, whole_y, whole_x)
        weight, gain = model.wide_weight, model.wide_gain
        if smooth.ndim == 3:
            weight, gain = weight[..., None], gain[..., None]
        smooth = (smooth + weight * (wide - smooth)) * gain  # camera coordinates: the map is slow
    if model.channels == 1 and (whole_y or whole_x):
        return _slide(smooth, whole_y, whole_x, magnitude=True)  # one pass for both
    magnitude = np.abs(smooth, out=smooth)
    if model.channels > 1:
        magnitude = cv2.transform(magnitude, np.ones((1, model.channels), np.float32))
    if whole_y == 0 and whole_x == 0:
        return magnitude
    return _slide(magnitude, whole_y, whole_x)


def _shifted_gaussian(sigma: float, radius: int, fraction: float) -> np.ndarray:
    """Taps m = -(radius+1)..radius+1 (centred, as OpenCV expects) of a Gaussian followed
    by a bilinear shift by ``fraction``: h_m = (1-f) g_m + f g_(m-1); h_-(radius+1) = 0."""
    taps = np.arange(-radius - 1, radius + 2, dtype=np.float64)
    gauss = np.exp(-0.5 * (taps / sigma) ** 2)
    gauss[0] = gauss[-1] = 0.0
    gauss /= gauss.sum()
    return ((1.0 - fraction) * gauss + fraction * np.roll(gauss, 1)).astype(np.float32)


def _slide(image: np.ndarray, dy: int, dx: int, *, magnitude: bool = False) -> np.ndarray:
    """``out(p) = image(p + (dy, dx))`` for whole pixels, zero where that is outside
    (``magnitude``: ``|image(p + (dy, dx))|``)."""
    height, width = image.shape[:2]
    rows = slice(max(-dy, 0), min(height - dy, height))
    cols = slice(max(-dx, 0), min(width - dx, width))
    if rows.stop <= rows.start or cols.stop <= cols.start:
        return np.zeros_like(image)
    out = np.empty_like(image)
    source = image[rows.start + dy:rows.stop + dy, cols.start + dx:cols.stop + dx]
    if magnitude:
        np.abs(source, out=out[rows, cols])
    else:
        out[rows, cols] = source
    out[:rows.start], out[rows.stop:] = 0, 0
    out[:, :cols.start], out[:, cols.stop:] = 0, 0
    return out


def evidence(image: np.ndarray, model: MeltModel, gain: np.ndarray) -> np.ndarray:
    """Crystalline evidence of one frame in camera coordinates, float32 (H, W), noise units."""
    return evidence_from_difference(melt_difference(image, model, gain), model)


def evidence_threshold(melt_evidence: np.ndarray, sensitivity: float = 1.0) -> float:
    """Detection threshold from the evidence of pixels known to be melt.

    median + (w / sensitivity) × robust spread, w = ``threshold_noise_widths`` of
    :mod:`analysis.heuristics` (ten: rare enough that, with the persistence rule, noise
    and flicker do not crystallise pixels); larger sensitivity detects fainter crystals.
    """
    if sensitivity <= 0:
        raise ValueError("sensitivity must be positive")
    values = np.asarray(melt_evidence, np.float64).ravel()
    values = values[np.isfinite(values)]
    if values.size == 0:
        raise ValueError("no melt pixels to set the threshold from")
    centre = np.median(values)
    spread = 1.4826 * np.median(np.abs(values - centre))
    rules = heuristics.current()
    return float(centre + max(rules.threshold_noise_widths / sensitivity * spread,
                              rules.threshold_floor_noise_units / sensitivity))


def initial_crystalline(image: np.ndarray, model: MeltModel, threshold: float, *, min_size_px: int = 12,
                        mode: str = "grey") -> np.ndarray:
    """Crystals already present in frame 0 (the recording started late).

    There is no melt frame to compare with, so each pixel is compared with the melt
    around it (a coarse median background) in a way that ignores what dust does: in
    grey, only pixels *brighter* than the melt count (crossed polarizers: crystals
    transmit, dust only absorbs); in colour, only the change of chromaticity counts
    (dust and illumination darken all channels alike, crystals shift the colour).
    A pixel counts when its evidence exceeds twice the detection threshold and half of
    the strongest evidence within 3 px. Found objects smaller than ``min_size_px`` are
    dropped; the extinction wedges of compact objects are filled with their convex hull.
    """
    rules = heuristics.current()
    frame_evidence = _spatial_evidence(image, model, mode)
    # Half of the local maximum marks the front (as for arrival times); the smoothing
    # would otherwise grow every bright object by a pixel or two.
    local_peak = cv2.dilate(frame_evidence, np.ones((7, 7), np.uint8))
    loose = (frame_evidence >= rules.frame0_threshold_factor * threshold) & ~model.blind
    core = loose & (frame_evidence >= rules.frame0_front_fraction * local_peak)
    # Join the four quadrants of a spherulite across its extinction wedges near the centre.
    loose = cv2.morphologyEx(loose.astype(np.uint8), cv2.MORPH_CLOSE,
                             cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (5, 5))).astype(bool)
    loose = _remove_small(loose, min_size_px)
    return _fill_compact_objects(loose, core & loose)


def _spatial_evidence(image, model, mode):
    background = _coarse_background(image)
    if mode == "colour" and image.ndim == 3:
        total = image.sum(axis=2, keepdims=True) + 1e-6
        back_total = background.sum(axis=2, keepdims=True) + 1e-6
        diff = (image / total - background / back_total) * back_total / model.noise
        diff = cv2.GaussianBlur(diff.astype(np.float32), (0, 0), model.smoothing_px)
        return np.abs(diff).sum(axis=2)
    grey = image if image.ndim == 2 else image.mean(axis=2)
    back = background if background.ndim == 2 else background.mean(axis=2)
    diff = cv2.GaussianBlur((grey - back).astype(np.float32), (0, 0), model.smoothing_px)
    return np.maximum(diff, 0.0) / float(np.mean(model.noise))


def _coarse_background(image: np.ndarray) -> np.ndarray:
    """Slowly varying melt level: median over ~70 px blocks of an 8× reduced image."""
    height, width = image.shape[:2]
    small = cv2.resize(image, (max(width // 8, 1), max(height // 8, 1)), interpolation=cv2.INTER_AREA)
    size = (9, 9) if small.ndim == 2 else (9, 9, 1)
    small = ndimage.median_filter(small, size=size, mode="nearest")
    return cv2.resize(small, (width, height), interpolation=cv2.INTER_LINEAR)


def _remove_small(mask: np.ndarray, min_size_px: int) -> np.ndarray:
    count, labels, stats, _ = cv2.connectedComponentsWithStats(mask.astype(np.uint8), connectivity=8)
    keep = stats[:, cv2.CC_STAT_AREA] >= min_size_px
    keep[0] = False
    return keep[labels]


def _fill_compact_objects(loose: np.ndarray, core: np.ndarray, min_solidity: float = 0.6) -> np.ndarray:
    """Objects of the ``loose`` mask that are nearly convex (a spherulite minus its
    wedges) become the convex hull of their ``core`` (pixels above half the local
    peak, which places the front where the contrast is half); other objects (touching
    groups) keep their core, holes filled."""
    if not loose.any():
        return loose
    filled = ndimage.binary_fill_holes(core)
    labels = measure.label(ndimage.binary_fill_holes(loose), connectivity=2)
    for region in measure.regionprops(labels):
        if region.solidity < min_solidity:
            continue
        r0, c0, r1, c1 = region.bbox
        inner = core[r0:r1, c0:c1] & region.image
        if inner.sum() >= 3:
            filled[r0:r1, c0:c1] |= _hull(inner)
    return filled


def _hull(mask: np.ndarray) -> np.ndarray:
    """Convex hull of the true pixels of a small mask, same shape."""
    points = cv2.findNonZero(mask.astype(np.uint8))
    hull = cv2.convexHull(points)
    out = np.zeros(mask.shape, np.uint8)
    cv2.fillConvexPoly(out, hull, 1)
    return out.astype(bool)


def estimate_slowness(arrival_s: np.ndarray, reliable: np.ndarray, *, baseline_px: int = 3,
                      percentile: float = 70.0) -> float:
    """Typical |∇t| (s per px, i.e. 1/G) over pixels whose arrival time is reliable.

    Central differences over ±``baseline_px``. The true |∇t| of Johnson-Mehl growth is
    1/G almost everywhere and smaller only near nuclei and impingement lines, while
    timing noise and bands spread it both ways; the 70th percentile (rather than the
    median) lands on 1/G within about 1 % on simulated recordings, erring slow, which
    keeps wedge filling an upper bound. NaN when too few reliable pixels.
    """
    slope, _ = _front_slopes(arrival_s, reliable, baseline_px)
    return _typical_slope(slope, percentile)


def _front_slopes(arrival_s, reliable, baseline_px: int = 3):
    """|∇t| (s/px) at reliable pixels from central differences over ±``baseline_px``, and
    the arrival time (s) at those pixels."""
    t = np.where(reliable, arrival_s, np.nan).astype(np.float64)
    b = int(baseline_px)
    gy = (t[2 * b:, b:-b] - t[:-2 * b, b:-b]) / (2 * b)
    gx = (t[b:-b, 2 * b:] - t[b:-b, :-2 * b]) / (2 * b)
    slope = np.hypot(gy, gx)
    chosen = np.isfinite(slope) & (slope > 0)
    return slope[chosen], t[b:-b, b:-b][chosen]


def _typical_slope(slope: np.ndarray, percentile: float = 70.0) -> float:
    return float(np.percentile(slope, percentile)) if slope.size >= 50 else float("nan")


# Chamfer steps (dy, dx) reaching rows above: with the within-row exact scans below, paths
# in 16 directions; the path length exceeds the straight line by under ~2 %.
_STEPS_FROM_ABOVE = ((1, -2), (1, -1), (1, 0), (1, 1), (1, 2), (2, -1), (2, 1))


def complete_wedges(arrival_s: np.ndarray, slowness_s_per_px: float) -> np.ndarray:
    """Earliest arrival consistent with growth at speed 1/slowness from every known pixel.

    Returns ``min_q t(q) + slowness·|p − q|`` for every pixel p (q over finite entries of
    ``arrival_s``; inf elsewhere), computed with two chamfer raster passes whose
    horizontal propagation is exact. For Johnson-Mehl growth at constant G this is the
    true arrival time wherever some detected pixel lies between p and its nucleus, which
    is what fills the extinction wedges and dark bands of a spherulite.
    """
    t = np.where(np.isfinite(arrival_s), arrival_s, np.inf).astype(np.float64)
    if not np.isfinite(slowness_s_per_px) or slowness_s_per_px <= 0:
        return t
    t = _chamfer_pass(t, slowness_s_per_px)
    return _chamfer_pass(t[::-1, ::-1], slowness_s_per_px)[::-1, ::-1].copy()


def complete_wedges_in_time(arrival_s: np.ndarray, reliable: np.ndarray, slowness_s_per_px: float, *,
                            spans: int = 8, tolerance: float = 0.15) -> np.ndarray:
    """:func:`complete_wedges` for fronts whose speed changes during the record (a
    temperature ramp: G follows T). With one speed for the whole record the fronts of
    the slow part would be carried on at the speed of the fast part, and melt that never
    crystallised would be filled in. The record's crystallisation is cut into ``spans``
    equal time spans; where the slowness of the fronts of every span (as
    :func:`estimate_slowness`, over the pixels the fronts passed in that span) stays
    within ``tolerance`` of ``slowness_s_per_px`` this is :func:`complete_wedges` itself;
    otherwise the gaps of each span after the fastest are completed at that span's own
    speed where it is slower than the record's (a span with too few fronts to measure
    takes the slower of its neighbours'), from the pixels known by its end (measured, or
    completed in an earlier span).
    """
    known = reliable & np.isfinite(arrival_s)
    if known.sum() < 50:
        return complete_wedges(arrival_s, slowness_s_per_px)
    edges = np.linspace(arrival_s[known].min(), arrival_s[known].max(), spans + 1)
    edges[-1] = np.inf
    slope, when = _front_slopes(arrival_s, reliable)
    speeds = np.array([_typical_slope(slope[(when >= a) & (when < b)]) for a, b in zip(edges[:-1], edges[1:])])
    measured = speeds[np.isfinite(speeds)]
    if measured.size == 0 or np.all(np.abs(measured / slowness_s_per_px - 1) <= tolerance):
        return complete_wedges(arrival_s, slowness_s_per_px)
    # Only fronts slowing down need their own speed: where they speed up (cooling) a gap
    # completed too early is overtaken by the real front a few frames later, but after the
    # fastest span melt completed as crystal may never crystallise at all (heating).
    after_fastest = np.arange(speeds.size) > np.nanargmin(speeds)
    speeds = np.where(after_fastest, np.maximum(_slower_neighbour_where_unknown(speeds), slowness_s_per_px),
                      slowness_s_per_px)
    if np.all(speeds == slowness_s_per_px):
        return complete_wedges(arrival_s, slowness_s_per_px)
    current = np.where(np.isfinite(arrival_s), arrival_s, np.inf).astype(np.float64)
    for end, speed in zip(edges[1:], speeds):
        completed = complete_wedges(np.where(current < end, current, np.inf), speed)
        current = np.where(~np.isfinite(current) & (completed < end), completed, current)
    return current


def _slower_neighbour_where_unknown(speeds: np.ndarray) -> np.ndarray:
    """NaN entries replaced by the larger (slower) of the nearest known values on each side."""
    out = speeds.copy()
    known = np.flatnonzero(np.isfinite(speeds))
    for i in np.flatnonzero(~np.isfinite(speeds)):
        before, after = known[known < i], known[known > i]
        sides = [speeds[before[-1]]] if before.size else []
        sides += [speeds[after[0]]] if after.size else []
        out[i] = max(sides)
    return out


def _chamfer_pass(t: np.ndarray, slowness: float) -> np.ndarray:
    height, width = t.shape
    ramp = slowness * np.arange(width, dtype=np.float64)
    costs = [(dy, dx, slowness * np.hypot(dy, dx)) for dy, dx in _STEPS_FROM_ABOVE]
    out = t.copy()
    for y in range(height):
        row = out[y]
        for dy, dx, cost in costs:
            if y - dy < 0:
                continue
            above = out[y - dy]
            if dx > 0:
                np.minimum(row[dx:], above[:-dx] + cost, out=row[dx:])
            elif dx < 0:
                np.minimum(row[:dx], above[-dx:] + cost, out=row[:dx])
            else:
                np.minimum(row, above + cost, out=row)
        row[:] = np.minimum(row, ramp + np.minimum.accumulate(row - ramp))
        backward = row[::-1] - ramp
        row[:] = np.minimum(row, (ramp + np.minimum.accumulate(backward))[::-1])
    return out
