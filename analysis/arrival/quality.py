"""Image quality measured from the recording itself, and the smoothing chosen from it.

The detection must not rely on pixel sizes tuned to one camera: how much the crystal
stands out of the melt noise decides how much the evidence is smoothed. Before the
streaming pass the last frame is compared with the melt reference: the typical
crystal/melt difference divided by the melt's temporal noise is the signal-to-noise
ratio of one pixel in one frame, ``snr``. A Gaussian of sigma σ (px) averages white noise
down by 2·sqrt(π)·σ (the noise-equivalent area of the kernel is 4πσ²) while leaving a
plateau unchanged, so the smallest σ with ``(snr / 2) · 2·sqrt(π)·σ ≥ target`` is chosen
(half the bright crystal's contrast: the median pixel of an extinction cross).

After the pass, :func:`measure` reports the block that ``summary.json`` and the Details
panel show: noise, contrast and their ratio, the fraction of the crystallised field
whose time could not be measured, the edge blur, the unevenness of the illumination and
a verdict in plain language.
"""

from __future__ import annotations

import math

import cv2
import numpy as np
from scipy import ndimage

from analysis import heuristics
from analysis.results import ImageQuality

__all__ = ["crystal_contrast", "crystal_noise", "smoothing_for", "local_brightness", "smoothing_map", "edge_blur_px", "unevenness", "measure"]

_PROBE_SIGMA_PX = 2.0  # smoothing used to find crystalline pixels in the last frame


def crystal_contrast(last: np.ndarray, level: np.ndarray, noise: np.ndarray) -> tuple[float | None, np.ndarray]:
    """Crystal/melt difference of the last frame's bright crystal (90th percentile of the
    crystalline pixels), in melt-noise units, and the crystalline mask it was measured on.

    The per-channel difference from the melt is smoothed (σ = 2 px, which keeps a
    plateau's level) and summed in noise units; crystalline pixels stand more than six
    smoothed-noise sigmas above the melt. The 90th percentile is the brightness of the
    bright quadrants, which the dark extinction arms (left out of the mask) do not bias.
    Returns (None, empty mask) when less than 1 % of the field qualifies.
    """
    smooth = _probe_evidence(last, level, noise)
    channels = 1 if level.ndim == 2 else level.shape[2]
    smoothed_noise = channels / (2.0 * math.sqrt(math.pi) * _PROBE_SIGMA_PX)
    crystal = smooth > 6.0 * smoothed_noise
    if crystal.mean() < 0.01:
        return None, crystal
    return float(np.percentile(smooth[crystal], 90)) / channels, crystal


def crystal_noise(before: np.ndarray, last: np.ndarray, crystal: np.ndarray | None, *,
                  integer_data: bool) -> float | None:
    """Temporal noise (mean over channels, data units) of crystalline pixels from the last
    two frames: 1.4826·MAD(difference)/sqrt(2), as for the melt. Shot noise makes it larger
    than the melt's, and a dark melt clipped at zero shows less noise than it has. None
    with fewer than 500 crystalline pixels."""
    if crystal is None or np.count_nonzero(crystal) < 500:
        return None
    diff = (np.asarray(last, np.float32) - np.asarray(before, np.float32))[crystal]
    diff = diff.reshape(diff.shape[0], -1)
    mad = np.median(np.abs(diff - np.median(diff, axis=0)), axis=0)
    floor = heuristics.current().noise_floor_dn if integer_data else 0.0
    return float(np.mean(np.maximum(1.4826 * mad / math.sqrt(2.0), floor)))


def _sigma_needed_px(snr):
    """Gaussian sigma (px, unrounded) that lifts the median crystal pixel, half the bright
    crystal's ``snr`` (scalar or array), to the target: smoothing white noise with G_σ
    divides its sd by 2σ√π."""
    return heuristics.current().target_smoothed_snr / (2.0 * math.sqrt(math.pi) * 0.5 * snr)


def smoothing_for(snr: float | None, minimum_px: float) -> float:
    """Gaussian sigma (px) for the evidence: the smallest, in quarter pixels, that lifts a
    typical crystal pixel to the target (never below ``minimum_px``).

    ``snr`` is the bright crystal's contrast over the noise; between crossed polarizers
    the median pixel of a spherulite transmits half of it (the median of sin²(2φ) over
    the azimuth φ is 1/2), so that half is what must reach the target.
    """
    rules = heuristics.current()
    if snr is None or not math.isfinite(snr) or snr <= 0:
        return float(minimum_px)
    sigma = math.ceil(_sigma_needed_px(snr) * 4.0) / 4.0
    return float(min(max(sigma, minimum_px), max(rules.max_adaptive_smoothing_px, minimum_px)))


def _probe_evidence(last, level, noise):
    diff = (np.asarray(last, np.float32) - level) / noise.reshape((1, 1, -1) if level.ndim == 3 else ())
    smooth = np.abs(cv2.GaussianBlur(diff, (0, 0), _PROBE_SIGMA_PX))
    return smooth.sum(axis=2) if smooth.ndim == 3 else smooth


def local_brightness(last: np.ndarray, level: np.ndarray, noise: np.ndarray, crystal: np.ndarray,
                     block_px: int = 64) -> np.ndarray | None:
    """How bright the crystal is in each part of the field relative to the whole field's
    bright crystal (H, W float32, about 1 where the light is full, lower where it is dim).

    The bright crystal of a block is the 90th percentile of its crystalline pixels (as in
    :func:`crystal_contrast`); the largest over the block and its eight neighbours is the
    level a bright quadrant reaches there (a block may lie in one dark extinction arm),
    then blocks without crystal take the nearest block's value and the map is
    interpolated smoothly. It follows uneven illumination (a lamp off centre, vignetting)
    because the light a crystal transmits is proportional to the light it receives.
    None when fewer than 4 blocks hold enough crystal.
    """
    smooth = _probe_evidence(last, level, noise)
    height, width = crystal.shape
    rows, cols = max(height // block_px, 1), max(width // block_px, 1)
    grid = np.full((rows, cols), np.nan, np.float32)
    for i in range(rows):
        for j in range(cols):
            r = slice(i * height // rows, (i + 1) * height // rows)
            c = slice(j * width // cols, (j + 1) * width // cols)
            mask = crystal[r, c]
            if mask.mean() >= 0.1:
                grid[i, j] = np.percentile(smooth[r, c][mask], 90)
    known = np.isfinite(grid)
    if np.count_nonzero(known) < 4:
        return None
    _, (iy, ix) = ndimage.distance_transform_edt(~known, return_indices=True)
    grid = grid[iy, ix]
    grid = ndimage.maximum_filter(grid, size=3, mode="nearest")
    overall = float(np.percentile(smooth[crystal], 90))
    if overall <= 0:
        return None
    # Block centres → pixels, linear in between and constant beyond the outer centres.
    smooth_map = cv2.resize(grid, (width, height), interpolation=cv2.INTER_LINEAR)
    return np.clip(smooth_map / overall, 0.0, None).astype(np.float32)


def smoothing_map(snr: float | None, brightness: np.ndarray | None, minimum_px: float) -> np.ndarray | None:
    """Gaussian sigma (px) each part of the field needs, :func:`smoothing_for` applied to the
    local signal-to-noise ratio ``snr × brightness`` (continuous, not in quarter pixels);
    None without a brightness map."""
    if brightness is None or snr is None or not math.isfinite(snr) or snr <= 0:
        return None
    rules = heuristics.current()
    needed = _sigma_needed_px(snr * np.maximum(brightness, 1e-3))
    return np.clip(needed, minimum_px, max(rules.max_adaptive_smoothing_px, minimum_px)).astype(np.float32)


def unevenness(image: np.ndarray, mask: np.ndarray | None = None) -> float | None:
    """1 − (5th / 95th percentile) of the slowly varying level of ``image`` over ``mask``.

    The level is the mean over 16 × 16 px blocks (at least half of them in the mask):
    it averages the noise down sixteenfold, even on a dim melt; None with too few blocks.
    """
    grey = np.asarray(image, np.float32)
    grey = grey if grey.ndim == 2 else grey.sum(axis=2)
    mask = np.ones(grey.shape, bool) if mask is None else mask
    block = 16
    h, w = (grey.shape[0] // block) * block, (grey.shape[1] // block) * block
    if h == 0 or w == 0:
        return None
    tiles = grey[:h, :w].reshape(h // block, block, w // block, block).swapaxes(1, 2).reshape(-1, block * block)
    inside = mask[:h, :w].reshape(h // block, block, w // block, block).swapaxes(1, 2).reshape(-1, block * block)
    levels = [np.mean(t[m]) for t, m in zip(tiles, inside) if m.mean() >= 0.5]
    if len(levels) < 6:
        return None
    low, high = np.percentile(levels, [5, 95])
    return float(np.clip(1.0 - low / high, 0.0, 1.0)) if high > 0 else None


def _smoothed_arrival(arrival_s: np.ndarray, sigma_px: float) -> np.ndarray:
    """Normalised Gaussian average of the finite arrival times (NaN where fewer than half
    the weight is finite). Along a growth cone the time is linear in the distance, so the
    average keeps it while the pixel-to-pixel timing scatter averages out."""
    valid = np.isfinite(arrival_s)
    weight = cv2.GaussianBlur(valid.astype(np.float32), (0, 0), sigma_px)
    total = cv2.GaussianBlur(np.where(valid, arrival_s, 0.0).astype(np.float32), (0, 0), sigma_px)
    out = np.full(arrival_s.shape, np.nan, np.float32)
    np.divide(total, weight, out=out, where=(weight >= 0.5) & valid)
    return out


def edge_blur_px(evidence_frame: np.ndarray, plateau: np.ndarray, arrival_s: np.ndarray,
                 frame_time_s: float, slowness_s_per_px: float, smoothing_px,
                 interval_s: float | None = None) -> float | None:
    """Gaussian sigma (px) of the crystal/melt edge beyond the applied smoothing: defocus
    and the softness of the front.

    Pixels near the front of one frame are placed by their signed distance to it,
    ``(frame time − arrival) / slowness``, and their evidence relative to their own
    plateau is a smoothed step of that distance: the spread between its 25 % and 75 %
    points is 1.349 σ for a Gaussian edge. The arrival times are first averaged over a
    Gaussian of half a frame step (``interval_s / slowness``, at least 1.5 px): single
    pixels' times scatter with the noise and, between frames, with where the front
    stood at each frame; left in, that scatter would be read as blur (an upward bias).
    The smoothing applied is removed in quadrature (``smoothing_px``: a number, or the
    per-pixel sigma of a locally adapted smoothing). None when fewer than 200 pixels lie
    within 8 px of the front.
    """
    if not (math.isfinite(slowness_s_per_px) and slowness_s_per_px > 0):
        return None
    step_px = (interval_s / slowness_s_per_px) if interval_s else 0.0
    arrival = _smoothed_arrival(arrival_s, max(1.5, 0.5 * step_px))
    distance = (frame_time_s - arrival) / slowness_s_per_px
    near = np.isfinite(distance) & (np.abs(distance) <= 8.0) & (plateau > 0)
    if np.count_nonzero(near) < 200:
        return None
    x = distance[near]
    y = np.clip(evidence_frame[near] / plateau[near], 0.0, 1.5)
    edges = np.arange(-8.0, 8.5, 0.5)
    centre, profile = [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        inside = (x >= lo) & (x < hi)
        if np.count_nonzero(inside) >= 10:
            centre.append(0.5 * (lo + hi))
            profile.append(float(np.median(y[inside])))
    if len(centre) < 6:
        return None
    profile = np.maximum.accumulate(np.asarray(profile))  # a step rises monotonically
    top = profile[-1]
    if top <= 0:
        return None
    quarter = np.interp(0.25 * top, profile, centre)
    three = np.interp(0.75 * top, profile, centre)
    sigma_edge = (three - quarter) / 1.349
    applied = float(np.sqrt(np.mean(np.square(smoothing_px[near])))) if np.ndim(smoothing_px) else float(smoothing_px)
    return float(math.sqrt(max(sigma_edge ** 2 - applied ** 2, 0.0)))


def measure(*, noise_dn: float, crystal_noise_dn: float | None, full_scale: float,
            contrast_noise_units: float | None,
            smoothing_px: float, crystallised: np.ndarray, inferred: np.ndarray,
            blur_px: float | None, illumination_unevenness: float | None,
            widest_smoothing_px: float | None = None) -> ImageQuality:
    """The image-quality block of one recording (see :class:`analysis.results.ImageQuality`);
    ``widest_smoothing_px``: the sigma used where the light is dimmest, when wider."""
    rules = heuristics.current()
    noise = noise_dn / full_scale
    contrast = None if contrast_noise_units is None else contrast_noise_units * noise
    worst = max(noise_dn, crystal_noise_dn or 0.0) / full_scale
    snr = None if contrast is None else contrast / worst
    total = int(np.count_nonzero(crystallised))
    unresolved = float(np.count_nonzero(inferred & crystallised)) / total if total else None
    problems = []
    if snr is None:
        problems.append("no crystal could be told from the melt in the last frame")
    elif snr < rules.poor_snr:
        problems.append(f"crystals stand only {snr:.1f} noise widths above the melt")
    if unresolved is not None and unresolved > rules.poor_unresolved_fraction:
        problems.append(f"{unresolved:.0%} of the crystallised field could not be timed")
    too_poor = bool(problems)
    if too_poor:
        verdict = ("Too poor for automatic counting: " + "; ".join(problems) +
                   ". Count by hand, or record with more light, a longer exposure or frame averaging.")
    else:
        verdict = f"Good enough for automatic counting (signal-to-noise {snr:.1f} per pixel"
        if widest_smoothing_px and widest_smoothing_px > smoothing_px:
            verdict += (f", smoothing {smoothing_px:.2g} px, up to {widest_smoothing_px:.2g} px where the "
                        "light is dim).")
        else:
            verdict += f", smoothing {smoothing_px:.2g} px)." if smoothing_px > 1.0 else ")."
        if illumination_unevenness is not None and illumination_unevenness > rules.uneven_illumination:
            verdict += (f" The illumination falls by {illumination_unevenness:.0%} across the field;"
                        " centring the lamp would help.")
    return ImageQuality(noise=float(noise), crystal_noise=None if crystal_noise_dn is None else
                        crystal_noise_dn / full_scale, contrast=contrast, snr=snr, smoothing_px=float(smoothing_px),
                        unresolved_fraction=unresolved, blur_px=blur_px,
                        illumination_unevenness=illumination_unevenness, verdict=verdict,
                        too_poor=too_poor)
