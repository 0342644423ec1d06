"""Nuclei and territories from an arrival-time map.

Isothermal crystallization is irreversible, so each pixel has one arrival time: the time
the growth front reached it. Inside one spherulite the arrival time rises away from the
nucleus as a cone, so nuclei are the *regional minima* of the arrival map, and the basin
of each minimum under a watershed flooding is the spherulite's territory: the
Johnson-Mehl tessellation of the field (Johnson & Mehl 1939, Trans. AIME 135, 416).

Conventions: arrays in (row, column) order; pixel centres at integers; marker positions
are returned as (x_px, y_px) = (column, row); times in seconds on the recording clock.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import cv2
import numpy as np
from scipy import ndimage as ndi
from skimage.morphology import h_minima
from skimage.segmentation import watershed

from analysis import heuristics
from analysis.arrival import evidence as segment


@dataclass(frozen=True)
class Markers:
    """Seed regions of the watershed, one per detected nucleus.

    Attributes
    ----------
    labels : np.ndarray
        int32 (H, W): marker k occupies the pixels equal to k (1-based); 0 elsewhere.
    xy_px : np.ndarray
        float (n, 2): centroid (x, y) of each marker region, px.
    min_time_s : np.ndarray
        float (n,): smoothed arrival time at the marker, s.
    on_border : np.ndarray
        bool (n,): the marker touches the field border (candidate edge spherulite).
    territories : np.ndarray or None
        int32 (H, W) watershed basins of the markers, when the detection computed them.
    """

    labels: np.ndarray
    xy_px: np.ndarray
    min_time_s: np.ndarray
    on_border: np.ndarray
    territories: np.ndarray | None = None  # their watershed basins, when already computed


def frame_interval_s(times_s: np.ndarray) -> float:
    """Median spacing of the frame times, s (1.0 when there is a single frame)."""
    steps = np.diff(np.asarray(times_s, dtype=float))
    steps = steps[np.isfinite(steps) & (steps > 0)]
    return float(np.median(steps)) if steps.size else 1.0


def mean_slope_s_per_px(arrival_s: np.ndarray, usable: np.ndarray) -> float:
    """Mean arrival-time gradient |grad t| over usable pixels, s/px (about 1/G).

    Quantisation to frames turns the cone into steps, but a central difference spreads
    each step over two pixels, so the mean gradient is still the mean of 1/G. The top
    percent (impingement creases) is clipped.
    """
    gy, gx = np.gradient(np.where(usable, arrival_s, np.nan).astype(np.float64))
    grad = np.hypot(gx, gy)
    grad = grad[np.isfinite(grad)]
    if grad.size == 0:
        return 1.0
    return float(np.mean(np.minimum(grad, np.percentile(grad, 99)))) or 1.0


def _extend_below_start(work, at_start, times_s, estimate_s=None) -> np.ndarray:
    """Inside regions already crystalline in frame 0, continue the cones downwards.

    Those pixels only tell that the front passed before the first frame: a flat
    plateau that hides how many nuclei it holds. Each is given the latest arrival that
    growth at the field's speed allows from every pixel measured later,
    ``max_q t(q) − s·|p − q|`` (s = 1/G in s/px): exact on a cone when p lies between
    its nucleus and some measured pixel, so each nucleus present at the start becomes a
    minimum of its own whatever the shape of the frame-0 mask. Where ``estimate_s`` is
    finite (the arrival pass's own extrapolation, from pixels of high contrast only)
    it is used instead. Pixels nothing constrains fall back on their distance to the
    plateau edge times the slope (the classic distance-transform split).
    """
    usable = np.isfinite(work) & ~at_start
    slope = segment.estimate_slowness(work, usable)
    if not np.isfinite(slope):
        slope = mean_slope_s_per_px(work, usable)
    first = float(times_s[0])
    backwards = -segment.complete_wedges(np.where(usable, -work, np.inf), slope)
    if estimate_s is not None:
        backwards = np.where(np.isfinite(estimate_s), estimate_s, backwards)
    depth = ndi.distance_transform_edt(at_start)
    fallback = first - depth * slope
    estimate = np.where(np.isfinite(backwards), np.minimum(backwards, first), fallback)
    out = work.copy()
    out[at_start] = estimate[at_start]
    return out


def working_map(arrival_s: np.ndarray, times_s: np.ndarray, *, smooth_px: float = 1.0,
                at_start: np.ndarray | None = None,
                below_start_s: np.ndarray | None = None) -> np.ndarray:
    """Finite, lightly smoothed copy of the arrival map for minimum detection and flooding.

    Unusable pixels (NaN: dust, extinction wedges left open) take the value of the nearest
    usable pixel, so a wedge or a speck of dust neither creates nor hides a minimum.
    Never-crystallised pixels (+inf) become a plateau above the last frame. Pixels
    crystalline at the start (``at_start``) are extended below the first frame time
    (see :func:`_extend_below_start`; ``below_start_s``: estimated arrivals there, NaN
    where unknown, e.g. ``ArrivalMap.before_start_s``). A 3x3 median removes isolated outliers before a
    Gaussian of ``smooth_px`` (0 = none).
    """
    arrival = np.asarray(arrival_s, dtype=np.float32)
    work = arrival.copy()
    if at_start is not None and np.any(at_start):
        work = _extend_below_start(work, np.asarray(at_start, bool), times_s,
                                   below_start_s).astype(np.float32)
    never = np.isposinf(work)
    work[never] = float(np.max(times_s)) + 2.0 * frame_interval_s(times_s)
    unusable = ~np.isfinite(work)
    if unusable.all():
        return np.zeros_like(work)
    if unusable.any():
        _, (iy, ix) = ndi.distance_transform_edt(unusable, return_indices=True)
        work = work[iy, ix]
    work = cv2.medianBlur(np.ascontiguousarray(work), 3)
    if smooth_px > 0:
        work = cv2.GaussianBlur(work, (0, 0), smooth_px)
    return work


def crystallised_mask(arrival_s: np.ndarray) -> np.ndarray:
    """Pixels that crystallised during the record or were unusable (everything but +inf)."""
    return ~np.isposinf(np.asarray(arrival_s))


def find_markers(work: np.ndarray, arrival_s: np.ndarray, times_s: np.ndarray, *,
                 depth_frames: float = 1.0, min_territory_px: int = 20) -> Markers:
    """Regional minima of the working map that are deep and large enough to be nuclei.

    A minimum must be at least ``depth_frames`` frame intervals deeper than the saddle
    to its neighbours (h-minima transform), so quantisation to frame times and pixel
    noise do not split a spherulite; its territory must hold at least
    ``min_territory_px`` pixels, else it is a noise pit and is dropped (the flooding is
    then redone without it). A late nucleus in a melt pocket qualifies once it has grown
    for about one frame interval before meeting its neighbours.
    """
    h = max(depth_frames, 0.05) * frame_interval_s(times_s)
    valid = crystallised_mask(arrival_s)
    seeds = h_minima(work, h).astype(bool) & valid
    labels, _ = ndi.label(seeds, structure=np.ones((3, 3), bool))
    for _ in range(3):
        flooded = watershed(work, labels, mask=valid).astype(np.int32)
        area = np.bincount(flooded.ravel(), minlength=labels.max() + 1)
        small = np.flatnonzero(area[1:] < min_territory_px) + 1
        if small.size == 0:
            return dataclasses.replace(markers_from_labels(labels, work), territories=flooded)
        labels[np.isin(labels, small)] = 0
        labels, _ = ndi.label(labels > 0, structure=np.ones((3, 3), bool))
    return markers_from_labels(labels, work)


def markers_from_labels(labels: np.ndarray, work: np.ndarray) -> Markers:
    """Describe marker regions (centroids, depth, border contact) of a label image."""
    labels = labels.astype(np.int32)
    n = int(labels.max())
    if n == 0:
        empty = np.zeros((0,))
        return Markers(labels, np.zeros((0, 2)), empty, np.zeros(0, bool))
    # Markers are small: work on their pixels only, not on whole-image label scans.
    flat = np.flatnonzero(labels)
    which = labels.ravel()[flat]
    rows, cols = np.divmod(flat, labels.shape[1])
    count = np.bincount(which, minlength=n + 1)[1:]
    with np.errstate(invalid="ignore", divide="ignore"):
        cy_cx = np.column_stack([np.bincount(which, rows, n + 1)[1:] / count,
                                 np.bincount(which, cols, n + 1)[1:] / count])
    min_t = np.full(n, np.inf)
    np.minimum.at(min_t, which - 1, np.asarray(work, dtype=float).ravel()[flat])
    border = np.zeros(labels.shape, bool)
    border[0, :] = border[-1, :] = border[:, 0] = border[:, -1] = True
    touches = np.zeros(n + 1, bool)
    touches[np.unique(labels[border])] = True
    return Markers(labels, cy_cx[:, ::-1].copy(), min_t, touches[1:])


def territories(work: np.ndarray, arrival_s: np.ndarray, marker_labels: np.ndarray) -> np.ndarray:
    """Watershed of the working map from the markers: int32 territory labels, 0 = none.

    Never-crystallised pixels stay 0, so a melt pocket never separates two territories.
    """
    valid = crystallised_mask(arrival_s)
    return watershed(work, marker_labels, mask=valid).astype(np.int32)


def snap_to_minimum(work: np.ndarray, x_px: float, y_px: float, radius_px: float) -> tuple[int, int]:
    """(row, col) of the lowest working-map pixel within ``radius_px`` of a click.

    A nucleus added by hand is seeded at the local minimum near the click, because a seed
    on a slope of the cone would flood only the uphill side.
    """
    h, w = work.shape
    r = max(int(round(radius_px)), 0)
    row, col = int(round(y_px)), int(round(x_px))
    row, col = min(max(row, 0), h - 1), min(max(col, 0), w - 1)
    y0, y1, x0, x1 = max(row - r, 0), min(row + r + 1, h), max(col - r, 0), min(col + r + 1, w)
    window = work[y0:y1, x0:x1]
    yy, xx = np.mgrid[y0:y1, x0:x1]
    inside = (yy - y_px) ** 2 + (xx - x_px) ** 2 <= r * r + 0.5
    masked = np.where(inside, window, np.inf)
    k = int(np.argmin(masked))
    return int(yy.ravel()[k]), int(xx.ravel()[k])


def deficit_threshold_s(residuals_s: np.ndarray, interval_s: float) -> float:
    """Least lead (s) over the fitted cones that marks a region as a nucleus of its own:
    ``missed_deficit_sigmas`` robust standard deviations (1.4826 MAD) of the residuals,
    at most ``missed_deficit_intervals`` frame intervals."""
    rules = heuristics.current()
    cap = rules.missed_deficit_intervals * interval_s
    residuals_s = np.asarray(residuals_s, float)
    if residuals_s.size < 10:
        return cap
    scale = 1.4826 * float(np.median(np.abs(residuals_s - np.median(residuals_s))))
    return min(cap, rules.missed_deficit_sigmas * scale) if scale > 0 else cap


def missed_nuclei(arrival_s: np.ndarray, measured: np.ndarray, model_s: np.ndarray, *,
                  frames: np.ndarray, interval_s: float, slope_s_per_px: float,
                  existing_xy: np.ndarray, min_area_px: int = 30) -> list[tuple[int, int]]:
    """Seeds (row, col) of nuclei that have no regional minimum, found from the fits.

    A nucleus born just as a neighbour's front reaches it grows away from that front
    only: the arrival map rises from it, but it is not a regional minimum (the
    neighbour's side is lower), so no marker finds it. Its pixels, however, crystallise
    earlier than any fitted cone predicts. Connected regions where the measured arrival
    precedes the fitted model (``model_s``) by more than 1.5 frame intervals, or by more
    than 4 robust standard deviations of the residuals about the model when those are
    smaller (arrivals resolved within a frame), and that
    hold ``min_area_px`` pixels are fitted with their own cone; the region becomes a
    nucleus when that fit converges with a slope within 25 % of the field's mean slope
    and an apex within 3 px of the region and more than 3 px from every known nucleus.
    The seed is the region's pixel nearest the apex.
    """
    from analysis.spherulites.growth import (
        fit_cone,  # local: growth does not need nuclei
    )

    rules = heuristics.current()
    usable = measured & np.isfinite(model_s) & np.isfinite(arrival_s)
    deficit = np.zeros(arrival_s.shape)
    np.subtract(model_s, arrival_s, out=deficit, where=usable)
    mask = (deficit > deficit_threshold_s(deficit[usable], interval_s)).astype(np.uint8)
    count, labels, stats, _ = cv2.connectedComponentsWithStats(mask, connectivity=8)
    seeds = []
    for k in range(1, count):
        if stats[k, cv2.CC_STAT_AREA] < min_area_px:
            continue
        yy, xx = np.nonzero(labels == k)
        start = int(np.argmin(arrival_s[yy, xx]))
        fit = fit_cone(xx, yy, arrival_s[yy, xx], frames[yy, xx], start_xy=(xx[start], yy[start]),
                       f_scale_s=0.5 * interval_s, field_shape=arrival_s.shape)
        if not fit.ok or abs(fit.slope_s_per_px / slope_s_per_px - 1) > rules.missed_slope_tolerance:
            continue
        gap = np.hypot(xx - fit.x_px, yy - fit.y_px)
        near = int(np.argmin(gap))
        known = np.hypot(*(np.asarray(existing_xy, float).reshape(-1, 2) - [fit.x_px, fit.y_px]).T)
        if gap[near] <= rules.missed_apex_px and (known.size == 0 or known.min() > rules.missed_apex_px):
            seeds.append((int(yy[near]), int(xx[near])))
    return seeds


def _axis_ends(x, y, reach: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """The points ``reach`` standard deviations (at least 1.5 px) either side of the
    centroid of points along their principal axis."""
    pts = np.column_stack([x, y]).astype(float)
    centre = pts.mean(axis=0)
    evals, evecs = np.linalg.eigh(np.cov(pts.T))
    axis = evecs[:, -1] * max(reach * np.sqrt(max(evals[-1], 0.0)), 1.5)
    return centre - axis, centre + axis


def independent_samples(n_pixels: int, correlation_px: float) -> float:
    """How many independent arrival-time errors ``n_pixels`` pixels hold, when the image
    was smoothed (or blurred) by a Gaussian of sigma ``correlation_px`` (px).

    White noise smoothed by a Gaussian of sigma s has a Gaussian autocorrelation of
    variance 2 s^2, whose integral over the plane, 4 pi s^2, is the area one independent
    sample covers. At least one sample and at most one per pixel.
    """
    area = max(4.0 * math.pi * float(correlation_px) ** 2, 1.0)
    return float(min(max(n_pixels / area, 1.0), max(n_pixels, 1)))


def pair_evidence(cost_one: float, cost_two: float, *, noise_s: float, n_pixels: int,
                  correlation_px: float, extra_parameters: int = 3) -> float:
    """Schwarz criterion of the one-cone model minus that of the model with
    ``extra_parameters`` more (two cones: a second apex and nucleation time), from their
    soft-L1 costs over the same ``n_pixels`` pixels.

    BIC = chi^2 + k ln n (Schwarz 1978, Ann. Stat. 6, 461), with chi^2 = 2 cost / noise^2
    (the soft-L1 cost is half the sum of squares for residuals within the noise) and n
    the number of independent samples (:func:`independent_samples`): neighbouring pixels
    share the smoothing, so each pixel's chi^2 counts n / n_pixels. Positive values
    favour two cones; above 6 the evidence is strong (Kass & Raftery 1995, J. Am. Stat.
    Assoc. 90, 773).
    """
    if not (noise_s > 0 and n_pixels > 0):
        return float("-inf")
    n = independent_samples(n_pixels, correlation_px)
    gain = 2.0 * (cost_one - cost_two) / noise_s ** 2 * (n / n_pixels)
    return float(gain - extra_parameters * math.log(n))


def elongation(fit, x, y, t, *, noise_s: float, correlation_px: float):
    """Evidence that a cone fit hides two apexes, and where they would be.

    Two nuclei born together d px apart make one front elongated along their axis: about
    a single cone through their midpoint the arrival is earlier by s d / 2 |cos(theta -
    phi)| (s the slope, phi the axis), whose lowest angular harmonic left after the fit
    (a shifted centre absorbs the first) is the second, of amplitude 4 / (3 pi) of
    s d / 2. The residuals are regressed on cos 2 theta and sin 2 theta about the fitted
    centre. Returns (Schwarz criterion gain of the two harmonic terms, see
    :func:`pair_evidence`; the separation d it implies, px; the two starting apexes
    (x, y) d / 2 (between 0.5 and 5 px) either side of the centre along phi).
    """
    from analysis.spherulites.growth import cone_residuals

    resid = cone_residuals(fit, x, y, t)
    theta = np.arctan2(np.asarray(y, float) - fit.y_px, np.asarray(x, float) - fit.x_px)
    design = np.column_stack([np.ones_like(theta), np.cos(2 * theta), np.sin(2 * theta)])
    coef, *_ = np.linalg.lstsq(design, resid, rcond=None)
    centred = resid - resid.mean()
    explained = float(centred @ centred - np.sum((resid - design @ coef) ** 2))
    evidence = pair_evidence(0.5 * explained, 0.0, noise_s=noise_s, n_pixels=resid.size,
                             correlation_px=correlation_px, extra_parameters=2)
    phi = 0.5 * math.atan2(coef[2], coef[1])
    half = math.hypot(coef[1], coef[2]) / (4.0 / (3.0 * math.pi)) / max(fit.slope_s_per_px, 1e-12)
    offset = min(max(half, 0.5), 5.0) * np.array([math.cos(phi), math.sin(phi)])
    centre = np.array([fit.x_px, fit.y_px])
    return evidence, 2.0 * half, (centre - offset, centre + offset)


def split_candidates(x, y, t, fit, *, slope_s_per_px: float, f_scale_s: float,
                     start_region=None, start_time_s: float | None = None):
    """Two apexes (x, y) when one territory's pixels are better explained by two cones
    (see :func:`split_cones`), else None."""
    params = split_cones(x, y, t, fit, slope_s_per_px=slope_s_per_px, f_scale_s=f_scale_s,
                         start_region=start_region, start_time_s=start_time_s)
    if params is None:
        return None
    return (float(params[0]), float(params[1])), (float(params[3]), float(params[4]))


def region_outline(x, y) -> tuple[np.ndarray, np.ndarray]:
    """Pixels (x, y) of a pixel set that have a 4-neighbour outside it."""
    x, y = np.asarray(x, int), np.asarray(y, int)
    if x.size == 0:
        return x, y
    mask = np.zeros((np.ptp(y) + 3, np.ptp(x) + 3), np.uint8)
    mask[y - y.min() + 1, x - x.min() + 1] = 1
    inner = cv2.erode(mask, np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8))
    edge = (mask > 0) & (inner == 0)
    ey, ex = np.nonzero(edge)
    return ex + x.min() - 1, ey + y.min() - 1


def split_cones(x, y, t, fit, *, slope_s_per_px: float, f_scale_s: float, start_region=None,
                start_time_s: float | None = None, noise_s: float | None = None,
                correlation_px: float = 0.0, axis_start=None):
    """Parameters [xa, ya, t0a, xb, yb, t0b, s] of two cones (px, s, s/px) when one
    territory's pixels are better explained by two cones than by ``fit``, else None.

    The two-cone model (common slope) starts from the ends of the principal axis of the
    territory's earliest 15 % of pixels, and also of ``start_region`` (x, y) when given
    (the part already crystalline in the first frame, which holds both apexes); the
    lower cost wins. It is accepted when its soft-L1 cost is below
    half that of the single cone, the apexes are at least 3 px apart, each cone reaches
    at least 15 % of the pixels first (5 % when the cost falls below a quarter: a
    cluster present in the first frame shows little of its inner cones), and the common
    slope is within 25 % of the field's mean slope. Returns None otherwise.

    With ``start_time_s`` (the first frame's time), the outline of ``start_region`` enters
    both costs as a bound: each of its pixels had crystallised by then, so a model that
    reaches it later pays the delay. The shape of a crystal present at the start is
    evidence too: a single cone predicts a disc, two merged nuclei a lobed outline.

    With ``noise_s`` (the field's arrival-time noise, s) two cones are also accepted on a
    model comparison: their Schwarz criterion beats the single cone's by
    ``split_evidence_bic`` (:func:`pair_evidence`, ``correlation_px`` the smoothing
    sigma), with apexes at least ``pair_min_separation_px`` apart, each cone first over
    ``split_min_share`` of the pixels and residuals that fit (:func:`_adequate`). This
    resolves pairs too close for a large cost ratio. ``axis_start``: two starting apexes
    used instead of the earliest pixels' axis (e.g. from :func:`elongation`).
    """
    from analysis.spherulites.growth import (
        bound_violation_s,
        cone_residuals,
        fit_two_cones,
        soft_l1_cost,
    )

    rules = heuristics.current()
    x, y, t = (np.asarray(a, dtype=float) for a in (x, y, t))
    early = t <= np.percentile(t, 15)
    if np.count_nonzero(early) < 5:
        return None
    starts = [_axis_ends(x[early], y[early])] if axis_start is None else \
        [tuple(np.asarray(a, float) for a in axis_start)]
    if start_region is not None and len(start_region[0]) >= 5:
        starts.append(_axis_ends(*start_region))
    bound = None
    if start_time_s is not None and start_region is not None and len(start_region[0]):
        bound = (*region_outline(*start_region), float(start_time_s))
    # Nuclei present at the start are usually as old as the single cone says (athermal).
    t0_starts = [None] if bound is None else [None, fit.t0_s]
    params, cost2 = min((fit_two_cones(x, y, t, a, b, fit.slope_s_per_px, f_scale_s=f_scale_s,
                                       bound=bound, start_t0_s=t0)
                         for a, b in starts for t0 in t0_starts), key=lambda pc: pc[1])
    cost1 = soft_l1_cost(cone_residuals(fit, x, y, t), f_scale_s)
    if bound is not None:
        cost1 += soft_l1_cost(bound_violation_s(fit, bound[0], bound[1], bound[2]), f_scale_s)
    a, b = params[0:2], params[3:5]
    nearer_a = (params[2] + params[6] * np.hypot(x - a[0], y - a[1])) <= \
        (params[5] + params[6] * np.hypot(x - b[0], y - b[1]))
    share = float(np.mean(nearer_a))
    least = rules.split_min_share if cost2 >= rules.split_lopsided_cost_ratio * cost1 \
        else rules.split_min_share_lopsided
    balanced = least <= share <= 1.0 - least
    apart = float(np.hypot(*(a - b)))
    large_gain = cost2 < rules.split_cost_ratio * cost1 and apart >= rules.split_min_separation_px
    preferred = (noise_s is not None and apart >= rules.pair_min_separation_px
                 and rules.split_min_share <= share <= 1.0 - rules.split_min_share
                 and _adequate(params, x, y, t, noise_s)
                 and pair_evidence(cost1, cost2, noise_s=noise_s, n_pixels=x.size,
                                   correlation_px=correlation_px) > rules.split_evidence_bic)
    if ((large_gain and balanced or preferred)
            and abs(params[6] / slope_s_per_px - 1) <= rules.split_slope_tolerance):
        return np.asarray(params, float)
    return None


def _adequate(params, x, y, t, noise_s: float) -> bool:
    """The two cones leave residuals (robust scale, 1.4826 MAD) within
    ``split_residual_ratio`` times the field's noise: a model comparison only chooses
    between models that fit. Structure two cones cannot absorb either (a front cut by
    the field's edge, banding) is something else than a second nucleus."""
    resid = cones_arrival(params, x, y) - np.asarray(t, float)
    scale = 1.4826 * float(np.median(np.abs(resid - np.median(resid))))
    return scale <= heuristics.current().split_residual_ratio * noise_s


def best_split(x, y, t, slope_s_per_px: float, *, f_scale_s: float):
    """The two nuclei (x, y) px of the best two-cone fit to one detection's pixels, or None.

    Asked for by a person who judged the detection to be two spherulites, so no cost
    gain is demanded (the automatic split, :func:`split_cones`, asks for one).
    Two cones of one growth rate (t = min of the two cones; the model of two touching
    spherulites, Johnson & Mehl 1939, Trans. AIME 135, 416) are fitted from several
    starts: the ends of the principal axis of the earliest 15 % and 30 % of the pixels and
    of all of them. The lowest robust cost wins. None with fewer than 30 pixels, when
    the apexes come closer than 1 px, or when one cone reaches under 2 % of the pixels
    first (then the data show one front only).
    """
    from analysis.spherulites.growth import fit_two_cones

    x, y, t = (np.asarray(a, dtype=float) for a in (x, y, t))
    if x.size < 30 or not (math.isfinite(slope_s_per_px) and slope_s_per_px > 0):
        return None
    starts = []
    for share, reach in ((15, 1.0), (30, 1.0), (100, 0.5)):
        part = t <= np.percentile(t, share)
        if np.count_nonzero(part) >= 5:
            starts.append(_axis_ends(x[part], y[part], reach))
    if not starts:
        return None
    params, _ = min((fit_two_cones(x, y, t, a, b, slope_s_per_px, f_scale_s=f_scale_s)
                     for a, b in starts), key=lambda pc: pc[1])
    a, b = params[0:2], params[3:5]
    first_a = params[2] + params[6] * np.hypot(x - a[0], y - a[1]) <= params[5] + params[6] * np.hypot(x - b[0], y - b[1])
    share = float(np.mean(first_a))
    if np.hypot(*(a - b)) < 1.0 or not 0.02 <= share <= 0.98:
        return None
    return (float(a[0]), float(a[1])), (float(b[0]), float(b[1]))


def cluster_cones(x, y, t, fit, *, slope_s_per_px: float, f_scale_s: float, start_region,
                  start_time_s: float, max_nuclei: int = 6):
    """Cones [x1, y1, t01, ..., xk, yk, t0k, s] (k >= 2) of the nuclei inside a crystal
    present in the first frame, or None when one cone explains it.

    A crystal already there at the first frame may hold several merged nuclei; only its
    outline (a bound: crystalline by ``start_time_s``) and the fronts measured around it
    tell them apart. Models of k = 2, 3, ... cones with a common slope are fitted from
    k-means centres of ``start_region`` (x, y) (deterministic seed); a model with more
    nuclei replaces the best so far only when it buys the gain a two-nucleus split must
    (robust cost below ``split_cost_ratio`` of that model's; fits of k and k + 1 cones
    can land in poorer local optima than k + 2, so every k is tried), the apexes stay
    ``split_min_separation_px`` apart, every cone is first over at least
    ``split_min_share_lopsided`` of the pixels and the slope stays within
    ``split_slope_tolerance`` of the field's: a penalised model comparison.
    """
    from scipy.cluster.vq import kmeans2

    from analysis.spherulites.growth import bound_violation_s, cone_residuals, fit_cones, soft_l1_cost

    rules = heuristics.current()
    sx, sy = (np.asarray(a, float) for a in start_region)
    if sx.size < 20:
        return None
    ox, oy = region_outline(sx, sy)
    bound = (ox, oy, float(start_time_s))
    best, cost = None, soft_l1_cost(cone_residuals(fit, x, y, t), f_scale_s) + \
        soft_l1_cost(bound_violation_s(fit, ox, oy, start_time_s), f_scale_s)
    points = np.column_stack([sx, sy])
    for k in range(2, max_nuclei + 1):
        if points.shape[0] < 10 * k:
            break
        centres, _ = kmeans2(points, k, seed=0, minit="++")
        params, cost_k, first = fit_cones(x, y, t, centres, fit.slope_s_per_px, f_scale_s=f_scale_s,
                                          start_t0_s=fit.t0_s, bound=bound)
        apexes = params[:-1].reshape(-1, 3)[:, :2]
        gaps = np.hypot(*(apexes[:, None, :] - apexes[None, :, :]).transpose(2, 0, 1))
        shares = np.bincount(first, minlength=k) / first.size
        if (cost_k < rules.split_cost_ratio * cost
                and gaps[np.triu_indices(k, 1)].min() >= rules.split_min_separation_px
                and shares.min() >= rules.split_min_share_lopsided
                and abs(params[-1] / slope_s_per_px - 1) <= rules.split_slope_tolerance):
            best, cost = params, cost_k
    return best


def cones_arrival(params, x, y) -> np.ndarray:
    """Arrival time (s) at (x, y) of the cones ``params`` (see :func:`cluster_cones`)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    cones = np.asarray(params[:-1], float).reshape(-1, 3)
    return np.min([t0 + params[-1] * np.hypot(x - cx, y - cy) for cx, cy, t0 in cones], axis=0)


def boundary_band(labels: np.ndarray, band: int) -> np.ndarray:
    """Pixels within ``band`` px of another territory (melt and unassigned are neutral)."""
    if band <= 0:
        return np.zeros(labels.shape, bool)
    kernel = np.ones((2 * band + 1, 2 * band + 1), np.uint8)
    lab = labels.astype(np.float32)
    hi = cv2.dilate(lab, kernel)
    lo = cv2.erode(np.where(labels > 0, lab, np.float32(3e7)), kernel)
    return (labels > 0) & ((hi != lab) | (lo != lab))


def label_order(flat: np.ndarray) -> np.ndarray:
    """Stable argsort of non-negative integer labels (a radix sort when they fit 16 bits)."""
    if flat.size and 0 <= int(flat.min()) and int(flat.max()) < 65536:
        flat = flat.astype(np.uint16)
    return np.argsort(flat, kind="stable")


def pixel_groups(labels: np.ndarray) -> dict[int, np.ndarray]:
    """Flat pixel indices (ascending) of each positive label."""
    flat = labels.ravel()
    if flat.size == 0 or int(flat.max()) <= 0:
        return {}
    order = label_order(np.maximum(flat, 0))
    ends = np.cumsum(np.bincount(np.maximum(flat, 0)))
    starts = ends - np.bincount(np.maximum(flat, 0))
    return {int(i): order[starts[i]:ends[i]] for i in range(1, ends.size) if ends[i] > starts[i]}


def cone_model(shape, groups: dict, cones: dict) -> tuple[np.ndarray, np.ndarray]:
    """Earliest arrival over the given cones, each evaluated around its territory, and
    which cone gives it (0 where none reaches).

    ``cones`` maps a territory label to an object with ``ok``, ``x_px``, ``y_px``,
    ``t0_s`` and ``slope_s_per_px`` (a :class:`analysis.spherulites.growth.ConeFit`).
    """
    h, w = shape
    best = np.full(shape, np.inf, np.float32)  # float32: ties closer than ~1e-4 s do not matter
    owner = np.zeros(shape, np.int32)
    for label, cone in cones.items():
        pix = groups.get(label)
        if pix is None or pix.size == 0 or not cone.ok:
            continue
        y, x = np.divmod(pix, w)
        margin = 12 + int(0.5 * max(np.ptp(y), np.ptp(x)))
        y0, y1 = max(int(y.min()) - margin, 0), min(int(y.max()) + margin + 1, h)
        x0, x1 = max(int(x.min()) - margin, 0), min(int(x.max()) + margin + 1, w)
        t = np.square(np.arange(y0, y1, dtype=np.float32) - np.float32(cone.y_px))[:, None] + \
            np.square(np.arange(x0, x1, dtype=np.float32) - np.float32(cone.x_px))[None, :]
        np.sqrt(t, out=t)
        t *= np.float32(cone.slope_s_per_px)
        t += np.float32(cone.t0_s)
        view, own = best[y0:y1, x0:x1], owner[y0:y1, x0:x1]
        better = t < view
        np.copyto(view, t, where=better)
        own[better] = label
    return best.astype(np.float64), owner


def cone_partition(labels: np.ndarray, groups: dict, cones: dict) -> np.ndarray:
    """Territories redrawn as the Johnson-Mehl cells of the given cones.

    A watershed of the arrival map floods in arrival order, and where two cones meet
    obliquely its boundary locks onto pixel rows or columns and can sit many pixels
    off the true one. Each pixel of a territory with a cone is given instead to the
    cone (of its own or a nearby territory) that reaches it first, which is the
    Johnson-Mehl rule itself (Johnson & Mehl 1939). Unassigned pixels and territories
    without a usable cone keep their labels.
    """
    best, owner = cone_model(labels.shape, groups, cones)
    with_cone = np.zeros(max(int(labels.max()), max(cones, default=0)) + 1, bool)
    with_cone[[k for k, c in cones.items() if c.ok and k >= 0]] = True
    movable = with_cone[labels] & np.isfinite(best)  # territory labels are >= 0
    return np.where(movable, owner, labels).astype(np.int32)
