"""Per-frame radii of each spherulite measured from the arrival map, along free directions.

The cone fit in :mod:`analysis.spherulites.growth` gives G; the radii here are the *data* a user
compares it with. Around a spherulite's centre the plane is cut into angular sectors.
At frame f the front in a sector is the farthest pixel of the territory whose arrival
time is at or before t_f. A sector is *free* at frame f while that front is still short
of the first pixel of another territory (or of the field edge) along the sector; once it
gets there the spherulite has impinged in that direction and the radius no longer grows
(docs/sources.md §1.6: measure G only before impingement). The radius of the frame is the
median over free sectors that hold data (extinction wedges left as NaN hold none).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class FrontSamples:
    """Radius per frame in px with its free fraction; NaN radius where none was measured."""

    radius_px: np.ndarray
    free_fraction: np.ndarray
    n_free_sectors: np.ndarray


def _sector_of(dx: np.ndarray, dy: np.ndarray, n_sectors: int) -> np.ndarray:
    angle = np.arctan2(dy, dx)
    return ((angle + np.pi) / (2 * np.pi) * n_sectors).astype(int) % n_sectors


def _edge_distance(cx, cy, shape, n_sectors) -> np.ndarray:
    """Distance from the centre to the field edge along each sector, px (minimum over 5 rays)."""
    h, w = shape
    k = np.arange(n_sectors)[:, None] + np.linspace(0.0, 1.0, 5)[None, :]
    theta = k / n_sectors * 2 * np.pi - np.pi
    c, s = np.cos(theta), np.sin(theta)
    with np.errstate(divide="ignore"):
        tx = np.where(c > 0, (w - 0.5 - cx) / c, np.where(c < 0, (-0.5 - cx) / c, np.inf))
        ty = np.where(s > 0, (h - 0.5 - cy) / s, np.where(s < 0, (-0.5 - cy) / s, np.inf))
    return np.clip(np.minimum(tx, ty), 0.0, None).min(axis=1)


def blocked_distance(labels: np.ndarray, label: int, cx: float, cy: float, *,
                     n_sectors: int, reach_px: float) -> np.ndarray:
    """Per sector, distance from (cx, cy) to the nearest pixel of another territory or
    to the field edge, px. Pixels outside ``reach_px`` are not searched."""
    h, w = labels.shape
    r = int(np.ceil(reach_px)) + 2
    y0, y1 = max(int(cy) - r, 0), min(int(cy) + r + 1, h)
    x0, x1 = max(int(cx) - r, 0), min(int(cx) + r + 1, w)
    window = labels[y0:y1, x0:x1]
    yy, xx = np.nonzero((window != label) & (window > 0))
    blocked = _edge_distance(cx, cy, labels.shape, n_sectors)
    if yy.size:
        dx, dy = xx + x0 - cx, yy + y0 - cy
        dist = np.hypot(dx, dy)
        sector = _sector_of(dx, dy, n_sectors)
        np.minimum.at(blocked, sector, dist)
    return blocked


def front_radii(x, y, frame_index, blocked_px, cx, cy, n_frames: int, *,
                margin_px: float = 2.0, min_free_sectors: int = 3) -> FrontSamples:
    """Radius per frame from one territory's crystallised pixels.

    Parameters
    ----------
    x, y : arrays
        Columns and rows of the territory's pixels with a usable arrival time.
    frame_index : array of int
        First crystalline frame of each pixel.
    blocked_px : array
        Per-sector distance to the nearest obstacle (see :func:`blocked_distance`).
    cx, cy : float
        Centre, px.
    n_frames : int
        Number of frames.
    margin_px : float
        A sector stops being free when its front comes within this distance of the
        obstacle (the last pixels before a boundary are mixed and noisy).
    """
    n_sectors = blocked_px.size
    frames = np.asarray(frame_index, dtype=int)
    dx, dy = np.asarray(x, float) - cx, np.asarray(y, float) - cy
    dist = np.hypot(dx, dy)
    sector = _sector_of(dx, dy, n_sectors)
    reach = np.full((n_frames, n_sectors), np.nan)
    inside = (frames >= 0) & (frames < n_frames)
    np.fmax.at(reach, (frames[inside], sector[inside]), dist[inside])
    reach = np.fmax.accumulate(reach, axis=0)  # the front never recedes
    free = reach < (blocked_px[None, :] - margin_px)
    counted = np.where(free, reach, np.nan)
    n_free = np.sum(free, axis=1)
    enough = n_free >= min_free_sectors
    radius = np.full(n_frames, np.nan)
    if enough.any():
        radius[enough] = _row_nanmedian(counted[enough])
    reference = np.where(np.isfinite(radius), radius, np.nanmax(np.where(np.isfinite(reach), reach, 0), axis=1))
    free_fraction = np.mean(blocked_px[None, :] - margin_px > reference[:, None], axis=1)
    return FrontSamples(radius, free_fraction, n_free)


def _row_nanmedian(values: np.ndarray) -> np.ndarray:
    """np.nanmedian(values, axis=1) for rows holding at least one number, by one sort
    (NaN sorts last) instead of a Python loop over short rows."""
    ordered = np.sort(values, axis=1)
    count = np.sum(~np.isnan(values), axis=1)
    rows = np.arange(values.shape[0])
    low, high = np.maximum((count - 1) // 2, 0), np.maximum(count // 2, 0)
    return 0.5 * (ordered[rows, low] + ordered[rows, high])


def area_radii(x, y, frame_index, labels: np.ndarray, label: int, cx: float, cy: float,
               n_frames: int, *, n_sectors: int = 36, margin_px: float = 2.0,
               min_free_sectors: int = 3) -> np.ndarray:
    """Radius per frame (px, NaN where not measured) from the crystallised *area* per sector.

    In a sector of angle Δθ a front at radius R encloses Δθ R²/2 pixels, so each free
    sector gives R = sqrt(2 n / Δθ) from its count n of pixels crystalline by the frame;
    the frame's radius is the median over sectors still growing freely (as in
    :func:`front_radii`). The farthest pixel of a sector falls short of the front by
    about 1/(R Δθ) px, a bias that shrinks as R grows and so reads as extra growth;
    a pixel count has no such bias, and the median ignores the sectors along the
    extinction cross, whose pixels are found late.
    """
    frames = np.asarray(frame_index, dtype=int)
    dx, dy = np.asarray(x, float) - cx, np.asarray(y, float) - cy
    inside = (frames >= 0) & (frames < n_frames)
    frames, dx, dy = frames[inside], dx[inside], dy[inside]
    radius = np.full(n_frames, np.nan)
    if frames.size == 0:
        return radius
    dist = np.hypot(dx, dy)
    sector = _sector_of(dx, dy, n_sectors)
    blocked = blocked_distance(labels, label, cx, cy, n_sectors=n_sectors, reach_px=float(dist.max()) + 3.0)
    reach = np.full((n_frames, n_sectors), np.nan)
    np.fmax.at(reach, (frames, sector), dist)
    reach = np.fmax.accumulate(reach, axis=0)
    count = np.zeros((n_frames, n_sectors))
    np.add.at(count, (frames, sector), 1.0)
    equivalent = np.sqrt(2.0 * np.cumsum(count, axis=0) / (2 * np.pi / n_sectors))
    free = reach < (blocked[None, :] - margin_px)
    counted = np.where(free & (count.cumsum(axis=0) > 0), equivalent, np.nan)
    enough = np.sum(np.isfinite(counted), axis=1) >= min_free_sectors
    if enough.any():
        radius[enough] = _row_nanmedian(counted[enough])
    return radius
