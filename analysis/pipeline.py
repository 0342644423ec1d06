"""From a time-lapse stack to an :class:`ExperimentResult`, and the user's edits replayed.

Stages: one streaming pass over the frames builds the arrival-time map
(:mod:`analysis.arrival`); nuclei are its regional minima (:mod:`analysis.nuclei`),
completed by two checks against the first fits — regions that crystallise earlier than
any fitted cone predicts hold a nucleus without a minimum, and territories that two
cones explain far better than one hold two nuclei; territories are the Johnson-Mehl
cells of the fitted cones (a watershed of the map gives the starting partition); a
robust cone fit per territory gives centre, nucleation time and G
(:mod:`analysis.growth`); radii along free directions are measured from the map
(:mod:`analysis.fronts`); nucleation statistics and X(t) follow
(:mod:`analysis.nucleation`). Edits change only markers, statuses and frame masks, so
:func:`apply_edits` re-partitions and refits from cached state without touching frames.

Edit semantics (replayed in list order; a target is the detection whose centre is
nearest to the edit's point within ``AnalysisSettings.edit_tolerance_px``):
``add_nucleus`` seeds a new territory at the arrival-map minimum within 3 px of the
click (source ``manual``); ``delete_detection`` removes the detection and leaves its
territory *unassigned* (no neighbour absorbs it: a deleted detection is usually dust or
a scratch whose pixels would spoil the neighbours' cone fits; its area still counts as
crystallised in X(t)); ``merge_detections`` joins the second territory to the first;
``move_centre`` holds the centre at the new point and refits t0 and G; ``exclude`` and
``include`` set the status (``include`` also forces an automatic reject to ``ok`` when
it has a growth rate); ``ignore_frames`` removes the frames from one spherulite's data or,
without a position, from the whole experiment (fits, radii and X(t)).
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass, field
from typing import Any, Generator, Sequence

import cv2
import numpy as np
from scipy import ndimage as ndi
from skimage.segmentation import watershed

from . import export, growth, nuclei
from .edits import Edit, nearest_index
from .errors import InputError
from .fronts import blocked_distance, front_radii
from .nucleation import (MeltExposure, area_fraction, field_area_mm2, film_avrami,
                         nucleation_statistics, predicted_avrami)
from .progress import Progress, run_to_completion, scaled
from .results import (ExperimentResult, PooledGrowthRate, RadiusSeries,
                      Spherulite)


@dataclass(frozen=True)
class AnalysisSettings:
    """Tunable analysis settings, stored with the experiment (``to_dict``/``from_dict``).

    Attributes
    ----------
    arrival : dict
        Settings of the arrival-map pass (``analysis.arrival.ArrivalSettings`` fields).
    sensitivity_frames : float
        Minimum depth of an arrival-map minimum below its saddle, in frame intervals, for
        it to count as a nucleus. Lower finds later/closer nuclei but risks splits.
    min_territory_px : int
        Smallest territory kept, px.
    smooth_px : float
        Gaussian smoothing of the arrival map before detection, px.
    boundary_band_px : int
        Pixels this close to another territory are left out of the cone fit.
    apex_exclusion_px : float
        Pixels this close to the fitted centre are left out of a second fit (0 = none).
    max_fit_pixels : int
        Territories with more usable pixels are subsampled (evenly) for the fit.
    n_sectors : int
        Angular sectors for the radius measurement.
    min_free_fraction : float
        A radius enters the linearity test when at least this fraction of directions is free.
    min_points : int
        Fewer frames than this of free growth -> status ``few-points``.
    nonlinear_alpha, nonlinear_min_change : float
        Significance and minimum relative slope change of the non-linear growth test.
    edit_tolerance_px : float
        How far from a detection's centre an edit may point and still find it.
    """

    arrival: dict = field(default_factory=dict)
    sensitivity_frames: float = 0.5
    min_territory_px: int = 20
    smooth_px: float = 1.0
    boundary_band_px: int = 2
    apex_exclusion_px: float = 6.0
    max_fit_pixels: int = 4000
    n_sectors: int = 36
    min_free_fraction: float = 0.25
    min_points: int = 4
    nonlinear_alpha: float = 0.01
    nonlinear_min_change: float = 0.20
    edit_tolerance_px: float = 15.0

    def to_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, d: dict[str, Any] | None, *, path: str | None = None) -> "AnalysisSettings":
        """Settings from a stored dict; unknown keys are ignored, bad values raise InputError."""
        d = dict(d or {})
        known = {f.name: f for f in dataclasses.fields(cls)}
        values = {k: v for k, v in d.items() if k in known}
        try:
            settings = cls(**values)
        except TypeError as exc:
            raise InputError(f"bad analysis settings: {exc}", path) from None
        settings.validate(path)
        return settings

    def validate(self, path: str | None = None) -> None:
        checks = [("sensitivity_frames", self.sensitivity_frames > 0),
                  ("min_territory_px", self.min_territory_px >= 1),
                  ("smooth_px", self.smooth_px >= 0), ("boundary_band_px", self.boundary_band_px >= 0),
                  ("max_fit_pixels", self.max_fit_pixels >= 50), ("n_sectors", self.n_sectors >= 8),
                  ("min_free_fraction", 0 <= self.min_free_fraction <= 1),
                  ("min_points", self.min_points >= 2), ("nonlinear_alpha", 0 < self.nonlinear_alpha < 1),
                  ("edit_tolerance_px", self.edit_tolerance_px > 0),
                  ("arrival", isinstance(self.arrival, dict))]
        for name, ok in checks:
            try:
                good = bool(ok)
            except (TypeError, ValueError):
                good = False
            if not good:
                raise InputError(f"analysis setting {name} = {getattr(self, name)!r} is out of range", path)


@dataclass(frozen=True)
class _Context:
    """Everything about the experiment that the replay needs, computed once."""

    stack: str
    frames: int
    shape: tuple[int, int]
    times_s: np.ndarray
    interval_s: float
    um_per_px: float
    isothermal_start_s: float
    temperature_c: float | None
    thickness_um: float | None
    geometry: str
    work: np.ndarray
    fit_arrival: np.ndarray
    frame_index: np.ndarray
    at_start: np.ndarray
    near_start: np.ndarray  # crystalline at the start, or within 2 px of it: not fitted
    filled: np.ndarray
    arrival_s: np.ndarray
    markers: nuclei.Markers
    base_territories: np.ndarray
    auto_lookup_xy: np.ndarray
    slope_s_per_px: float
    cache: dict = field(default_factory=dict, compare=False, repr=False)


@dataclass(frozen=True)
class Analysis:
    """An analysed stack: the arrival map, the result with edits applied, cached state."""

    arrival: Any
    result: ExperimentResult
    settings: AnalysisSettings = AnalysisSettings()
    edits: tuple = ()
    _context: _Context | None = field(default=None, repr=False, compare=False)


# ---------------------------------------------------------------- detections and replay
@dataclass
class _Detection:
    id: int
    seeds: list  # flat pixel indices of the marker(s)
    lookup_xy: tuple[float, float]
    source: str = "auto"
    fixed_xy: tuple[float, float] | None = None
    excluded: bool | None = None
    ignored: list = field(default_factory=list)
    deleted: bool = False
    merged: bool = False
    absorbed: list = field(default_factory=list)  # ids merged into this one


def _auto_detections(ctx: _Context) -> list[_Detection]:
    flat = ctx.markers.labels.ravel()
    order = np.argsort(flat, kind="stable")
    bounds = np.searchsorted(flat[order], np.arange(1, ctx.markers.xy_px.shape[0] + 2))
    return [_Detection(k + 1, [order[bounds[k]:bounds[k + 1]]], tuple(ctx.auto_lookup_xy[k]))
            for k in range(ctx.markers.xy_px.shape[0])]


def _find(dets, x, y, tol) -> _Detection | None:
    live = [d for d in dets if not (d.deleted or d.merged)]
    k = nearest_index(x, y, [d.lookup_xy for d in live], tol)
    return None if k is None else live[k]


def _replay(ctx, edits, settings) -> tuple[list[_Detection], list, list]:
    dets = _auto_detections(ctx)
    global_ignored: list[tuple[int, int]] = []
    unapplied: list[Edit] = []
    for edit in edits:
        if not _apply_one(ctx, dets, global_ignored, edit, settings.edit_tolerance_px):
            unapplied.append(edit)
    return dets, global_ignored, unapplied


def _frame_range(ctx, edit) -> tuple[int, int] | None:
    first, last = int(edit.first_frame), int(edit.last_frame)
    if first > last or last < 0 or first >= ctx.frames:
        return None
    return max(first, 0), min(last, ctx.frames - 1)


def _apply_one(ctx, dets, global_ignored, edit, tol) -> bool:
    kind = edit.kind
    if kind == "add_nucleus":
        return _add_nucleus(ctx, dets, edit.x_px, edit.y_px)
    if kind == "ignore_frames":
        span = _frame_range(ctx, edit)
        if span is None:
            return False
        if edit.x_px is None or edit.y_px is None:
            global_ignored.append(span)
            return True
        target = _find(dets, edit.x_px, edit.y_px, tol)
        return target is not None and (target.ignored.append(span) or True)
    target = _find(dets, edit.x_px, edit.y_px, tol)
    if target is None:
        return False
    if kind == "delete_detection":
        target.deleted = True
    elif kind == "merge_detections":
        other = _find(dets, edit.other_x_px, edit.other_y_px, tol)
        if other is None or other is target:
            return False
        target.seeds.extend(other.seeds)
        target.absorbed.extend([other.id, *other.absorbed])
        other.merged = True
    elif kind == "move_centre":
        h, w = ctx.shape
        if not (-0.5 <= edit.new_x_px <= w - 0.5 and -0.5 <= edit.new_y_px <= h - 0.5):
            return False
        target.fixed_xy = (float(edit.new_x_px), float(edit.new_y_px))
        target.lookup_xy = target.fixed_xy
    elif kind in ("exclude", "include"):
        target.excluded = kind == "exclude"
    else:
        return False
    return True


def _add_nucleus(ctx, dets, x, y) -> bool:
    h, w = ctx.shape
    if not (-0.5 <= x <= w - 0.5 and -0.5 <= y <= h - 0.5):
        return False
    row, col = nuclei.snap_to_minimum(ctx.work, x, y, 3.0)
    taken = set()
    for d in dets:
        if not d.deleted:
            for s in d.seeds:
                taken.update(s.tolist())
    candidates = [row * w + col, int(round(y)) * w + int(round(x))]
    free = [c for c in candidates if c not in taken and np.isfinite(ctx.arrival_s.flat[c])]
    if not free:
        return False
    new_id = max((d.id for d in dets), default=0) + 1
    dets.append(_Detection(new_id, [np.array([free[0]])], (float(x), float(y)), source="manual"))
    return True


def _territories(ctx, dets) -> np.ndarray:
    """Territories of the current detections from the automatic flooding, edited locally.

    Merged detections take over their partners' labels; a nucleus added by hand splits
    the territory it falls in by a watershed restricted to that territory (the cone
    partition then settles the borders with the neighbours); deleted territories become
    0 (unassigned). No global flooding is needed, so a click stays fast.
    """
    labels = ctx.base_territories.copy()
    by_id = {d.id: d for d in dets}
    for d in dets:
        if d.source == "manual":
            _split_territory(ctx, labels, d, by_id)
    for d in dets:
        if d.absorbed and not d.merged:
            labels[np.isin(labels, d.absorbed)] = d.id
    deleted = [d.id for d in dets if d.deleted]
    if deleted:
        labels[np.isin(labels, deleted)] = 0
    return labels


def _split_territory(ctx, labels, det, by_id) -> None:
    """Carve ``det``'s territory out of the one its seed lies in (in place)."""
    seed = int(det.seeds[0][0])
    host = int(labels.flat[seed])
    if host == 0:
        region = nuclei.crystallised_mask(ctx.arrival_s) & (labels == 0)
        components, _ = ndi.label(region)
        region = components == components.flat[seed]
    else:
        region = labels == host
    rows, cols = np.nonzero(region)
    y0, y1, x0, x1 = rows.min(), rows.max() + 1, cols.min(), cols.max() + 1
    markers = np.zeros((y1 - y0, x1 - x0), np.int32)
    owner = by_id.get(host)
    for s in (owner.seeds if owner is not None and host else []):
        sy, sx = np.divmod(s, ctx.shape[1])
        inside = (sy >= y0) & (sy < y1) & (sx >= x0) & (sx < x1)
        markers[sy[inside] - y0, sx[inside] - x0] = host
    sy, sx = divmod(seed, ctx.shape[1])
    markers[sy - y0, sx - x0] = det.id
    split = watershed(ctx.work[y0:y1, x0:x1], markers, mask=region[y0:y1, x0:x1])
    window = labels[y0:y1, x0:x1]
    window[region[y0:y1, x0:x1]] = split[region[y0:y1, x0:x1]]


def _digest(*parts) -> str:
    key = hashlib.sha1()
    for part in parts:
        key.update(part.tobytes() if isinstance(part, np.ndarray) else repr(part).encode())
    return key.hexdigest()


def _cached(ctx, key, compute):
    """Memoise ``compute()`` in the analysis cache (bounded)."""
    if key not in ctx.cache:
        if len(ctx.cache) > 5000:
            ctx.cache.clear()
        ctx.cache[key] = compute()
    return ctx.cache[key]


# ---------------------------------------------------------------- per-spherulite fits
def _ignored_mask(frames: np.ndarray, spans) -> np.ndarray:
    bad = np.zeros(frames.shape, bool)
    for first, last in spans:
        bad |= (frames >= first) & (frames <= last)
    return bad


def _fit_pixels(ctx, pix, band, spans, settings):
    frames = ctx.frame_index.flat[pix]
    t = ctx.fit_arrival.flat[pix]
    usable = np.isfinite(t) & ~ctx.near_start.flat[pix] & ~ctx.filled.flat[pix] & (frames >= 0) & \
        ~_ignored_mask(frames, spans)
    inner = usable & ~band.flat[pix]
    chosen = pix[inner] if np.count_nonzero(inner) >= 30 else pix[usable]
    step = max(1, int(np.ceil(chosen.size / settings.max_fit_pixels)))
    return chosen[::step]


def _cone(ctx, det, pix, band, spans, settings, *, refine: bool = True) -> growth.ConeFit:
    """Cone fit of one territory (cached); ``refine`` adds the refit without the apex."""
    chosen = _fit_pixels(ctx, pix, band, spans, settings)
    key = ("cone", hashlib.sha1(chosen.tobytes()).hexdigest(), det.fixed_xy, refine)
    if key in ctx.cache:
        return ctx.cache[key]
    y, x = np.divmod(chosen, ctx.shape[1])
    start = det.fixed_xy
    if start is None:
        seeds = np.concatenate(det.seeds)
        sy, sx = np.divmod(seeds, ctx.shape[1])
        start = (float(sx.mean()), float(sy.mean()))
    t, levels = ctx.fit_arrival.flat[chosen], ctx.frame_index.flat[chosen]
    fixed = det.fixed_xy is not None
    fit = growth.fit_cone(x, y, t, levels, start_xy=start, f_scale_s=0.5 * ctx.interval_s,
                          fixed_centre=fixed, field_shape=ctx.shape)
    if refine and fit.ok and settings.apex_exclusion_px > 0:
        # Near the apex the measured front is a small, strongly curved disc whose
        # timing the segmentation blur delays; refit without it.
        outer = np.hypot(x - fit.x_px, y - fit.y_px) >= settings.apex_exclusion_px
        if np.count_nonzero(outer) >= 30:
            refit = growth.fit_cone(x[outer], y[outer], t[outer], levels[outer],
                                    start_xy=(fit.x_px, fit.y_px), f_scale_s=0.5 * ctx.interval_s,
                                    fixed_centre=fixed, field_shape=ctx.shape)
            # Without the apex the centre of a cone cut by the border or a neighbour is
            # poorly pinned: keep the refit only when it confirms the centre.
            if refit.ok and np.hypot(refit.x_px - fit.x_px, refit.y_px - fit.y_px) <= 1.0:
                fit = refit
    ctx.cache[key] = fit
    return fit


def _radius_series(ctx, det_id, pix, labels, cx, cy, spans, settings) -> RadiusSeries:
    """Radii of one spherulite (cached on its pixels, centre, spans and neighbourhood)."""
    rows, cols = np.divmod(pix, ctx.shape[1]) if pix.size else (np.zeros(1, int), np.zeros(1, int))
    r = 3 + int(max(np.ptp(rows), np.ptp(cols)))
    y0, x0 = max(int(cy) - r, 0), max(int(cx) - r, 0)
    window = labels[y0:max(int(cy) + r + 1, 0), x0:max(int(cx) + r + 1, 0)]
    key = ("radii", det_id, _digest(pix, window, (cx, cy, tuple(spans))))
    return _cached(ctx, key, lambda: _measure_radii(ctx, det_id, pix, labels, cx, cy, spans, settings))


def _measure_radii(ctx, det_id, pix, labels, cx, cy, spans, settings) -> RadiusSeries:
    frames = ctx.frame_index.flat[pix]
    keep = frames >= 0
    y, x = np.divmod(pix[keep], ctx.shape[1])
    reach = float(np.max(np.hypot(x - cx, y - cy))) + 3.0 if x.size else 3.0
    blocked = blocked_distance(labels, det_id, cx, cy, n_sectors=settings.n_sectors, reach_px=reach)
    samples = front_radii(x, y, frames[keep], blocked, cx, cy, ctx.frames)
    ok = np.isfinite(samples.radius_px)
    frame_ids = np.flatnonzero(ok)
    used = (samples.free_fraction[ok] >= settings.min_free_fraction) & \
        (samples.radius_px[ok] >= 3.0) & ~_ignored_mask(frame_ids, spans)  # < 3 px: pixel-limited
    return RadiusSeries(det_id, ctx.times_s[ok] - ctx.isothermal_start_s,
                        samples.radius_px[ok] * ctx.um_per_px, samples.free_fraction[ok], used)


def _edge(ctx, det, fit) -> bool:
    """Nucleated outside the field: the fitted centre lies outside it. (A minimum on the
    border decides only when there is no fit, see :func:`_status`.) Counting by the
    fitted centre keeps the count unbiased for nuclei right at the border."""
    h, w = ctx.shape
    inside = -0.5 <= fit.x_px <= w - 0.5 and -0.5 <= fit.y_px <= h - 0.5
    return det.fixed_xy is None and not inside


def _status(ctx, det, fit, series, settings) -> tuple[str, str]:
    """Status and the linearity test's description."""
    lin = growth.linearity_test(series.time_s[series.used], series.radius_um[series.used],
                                alpha=settings.nonlinear_alpha,
                                min_slope_change=settings.nonlinear_min_change)
    if det.excluded:
        return "excluded", lin.description
    if not fit.ok:
        on_border = det.source == "auto" and bool(ctx.markers.on_border[det.id - 1])
        return ("edge" if on_border else "few-points"), fit.reason
    if det.excluded is False:
        return "ok", lin.description
    if _edge(ctx, det, fit):
        return "edge", lin.description
    if np.count_nonzero(series.used) < settings.min_points:
        return "few-points", lin.description
    return ("nonlinear" if lin.nonlinear else "ok"), lin.description


def _spherulite(ctx, det, pix, labels, band, global_spans, settings):
    spans = global_spans + det.ignored
    fit = _cone(ctx, det, pix, band, spans, settings)
    if fit.ok:
        cx, cy = fit.x_px, fit.y_px
    else:
        seeds = np.concatenate(det.seeds)
        sy, sx = np.divmod(seeds, ctx.shape[1])
        cx, cy = det.fixed_xy or (float(sx.mean()), float(sy.mean()))
    series = _radius_series(ctx, det.id, pix, labels, cx, cy, spans, settings)
    status, _ = _status(ctx, det, fit, series, settings)
    frames = ctx.frame_index.flat[pix]
    seen = frames[frames >= 0]
    g = growth.growth_rate_um_per_min(fit.g_px_per_s, ctx.um_per_px) if fit.ok else None
    ci = fit.g_ci95_px_per_s()
    sph = Spherulite(
        id=det.id, x_px=float(cx), y_px=float(cy),
        nucleation_time_s=float(fit.t0_s - ctx.isothermal_start_s) if fit.ok else None,
        first_seen_s=float(ctx.times_s[seen.min()] - ctx.isothermal_start_s) if seen.size else None,
        growth_rate_um_per_min=g,
        growth_rate_ci95_um_per_min=growth.growth_rate_um_per_min(ci, ctx.um_per_px),
        r2=float(fit.r2) if fit.ok and np.isfinite(fit.r2) else None,
        n_points=int(fit.n_levels), status=status, source=det.source)
    return sph, series, fit


# ---------------------------------------------------------------- whole result
def _provisional_cones(ctx, live) -> dict:
    """A cone per single-seed detection from its seed (apex, lowest working-map time)
    and the field's mean slope; merged detections get none (they keep their flooding)."""
    cones = {}
    for d in live:
        if len(d.seeds) != 1:
            continue
        sy, sx = np.divmod(d.seeds[0], ctx.shape[1])
        t0 = float(np.min(ctx.work.flat[d.seeds[0]]))
        cones[d.id] = growth.ConeFit(float(sx.mean()), float(sy.mean()), t0, ctx.slope_s_per_px,
                                     0, 0, 0, 0, 0, 1.0, 0, 0)
    return cones


def _partition(ctx, dets, global_spans, settings):
    """Flooded territories, redrawn from provisional cones, fitted, redrawn from the fits."""
    live = [d for d in dets if not (d.deleted or d.merged)]
    flooded = _territories(ctx, dets)
    cones = _provisional_cones(ctx, live)
    labels = _cached(ctx, ("provisional", _digest(flooded, sorted(cones.items()))),
                     lambda: nuclei.cone_partition(flooded, _groups(ctx, flooded), cones))
    band = nuclei.boundary_band(labels, settings.boundary_band_px)
    groups = _groups(ctx, labels)
    empty = np.zeros(0, np.int64)
    fits = {d.id: _cone(ctx, d, groups.get(d.id, empty), band, global_spans + d.ignored, settings,
                        refine=False) for d in live}
    single = {k: f for k, f in fits.items() if len(by_seeds[k]) == 1} if (
        by_seeds := {d.id: d.seeds for d in live}) else {}
    return _cached(ctx, ("final", _digest(labels, sorted(single.items()))),
                   lambda: nuclei.cone_partition(labels, groups, single))


def _groups(ctx, labels):
    return _cached(ctx, ("groups", _digest(labels)), lambda: nuclei.pixel_groups(labels))


def _result(ctx, dets, global_spans, unapplied, settings) -> ExperimentResult:
    return _evaluate(ctx, dets, global_spans, unapplied, settings)[0]


def _evaluate(ctx, dets, global_spans, unapplied, settings):
    """The result, and the final fits by detection id and their pixel groups."""
    labels = _partition(ctx, dets, global_spans, settings)
    band = nuclei.boundary_band(labels, settings.boundary_band_px)
    groups = _groups(ctx, labels)
    empty = np.zeros(0, np.int64)
    spherulites, radii, fits = [], [], []
    for det in dets:
        if det.deleted or det.merged:
            continue
        sph, series, fit = _spherulite(ctx, det, groups.get(det.id, empty), labels, band,
                                       global_spans, settings)
        spherulites.append(sph)
        radii.append(series)
        fits.append(fit)
    pooled, pooled_text = _pooled(spherulites, fits, ctx.um_per_px)
    time_s, fraction = _area_fraction(ctx, global_spans)
    nucleation, burst_density = _nucleation(ctx, spherulites, fits, time_s, fraction)
    film = film_avrami(time_s, fraction, nucleation.induction_time_s)
    predicted = predicted_avrami(ctx.geometry, ctx.thickness_um, pooled.value, nucleation,
                                 burst_density)
    result = ExperimentResult(
        stack=ctx.stack, frames=ctx.frames, um_per_px=ctx.um_per_px, interval_s=ctx.interval_s,
        temperature_c=ctx.temperature_c, thickness_um=ctx.thickness_um,
        spherulites=tuple(spherulites), radii=tuple(radii), growth_rate=pooled,
        nucleation=nucleation, area_fraction_time_s=time_s, area_fraction=fraction,
        avrami_film=film, avrami_predicted=predicted, unapplied_edits=tuple(unapplied),
        warnings=tuple(_warnings(ctx, spherulites, fits)),
        extra={"pooled_growth_rate_method": pooled_text, "territories": labels,
               "geometry": ctx.geometry})
    return result, dict(zip([s.id for s in spherulites], fits)), groups


def _pooled(spherulites, fits, um_per_px) -> tuple[PooledGrowthRate, str]:
    g, se = [], []
    for s, f in zip(spherulites, fits):
        if s.status == "ok" and f.ok and f.dof >= 1:
            g.append(s.growth_rate_um_per_min)
            se_slope = f.se_slope_s_per_px / f.slope_s_per_px ** 2
            se.append(growth.growth_rate_um_per_min(se_slope, um_per_px))
    pooled = growth.pooled_rate(g, se)
    if pooled.value is None:
        return PooledGrowthRate(None, None, None, 0), pooled.description
    return PooledGrowthRate(pooled.value, pooled.value - pooled.ci95_half_width,
                            pooled.value + pooled.ci95_half_width, pooled.n), pooled.description


def _area_fraction(ctx, global_spans):
    fraction = _cached(ctx, ("area fraction",), lambda: area_fraction(ctx.arrival_s, ctx.times_s))
    keep = ~_ignored_mask(np.arange(ctx.frames), global_spans)
    return ctx.times_s[keep] - ctx.isothermal_start_s, fraction[keep]


def _counted(spherulites, fits, shape) -> list:
    """(spherulite, fit) pairs that count as nuclei inside the field.

    Nuclei count by their centre (REFERENCES §1.6); edge spherulites never count. A
    ``few-points`` detection counts only when its cone fit grows within 30 % of the
    field's median G (common practice): with fewer frames a real late nucleus still
    grows like its neighbours, whereas dust or a segmentation artefact does not.
    """
    h, w = shape
    g_ok = [s.growth_rate_um_per_min for s in spherulites if s.status == "ok"]
    g_med = float(np.median(g_ok)) if g_ok else None
    out = []
    for s, f in zip(spherulites, fits):
        if s.status == "edge" or not (-0.5 <= s.x_px <= w - 0.5 and -0.5 <= s.y_px <= h - 0.5):
            continue
        if s.status == "few-points" and (g_med is None or s.growth_rate_um_per_min is None or
                                         abs(s.growth_rate_um_per_min / g_med - 1) > 0.30):
            continue
        out.append((s, f))
    return out


def _nucleation(ctx, spherulites, fits, time_s, fraction):
    t0, se = [], []
    for s, f in _counted(spherulites, fits, ctx.shape):
        t0.append(s.nucleation_time_s)
        se.append(f.se_t0_s)
    area = field_area_mm2(ctx.shape, ctx.um_per_px)
    exposure = MeltExposure.from_fraction(time_s, fraction, area)
    end = float(time_s[-1]) if time_s.size else 0.0
    return nucleation_statistics(t0, exposure=exposure, field_area_mm2=area,
                                 interval_s=ctx.interval_s, thickness_um=ctx.thickness_um,
                                 end_s=end, t0_se_s=se)


def _warnings(ctx, spherulites, fits) -> list[str]:
    out = []
    few = [s for s in spherulites if s.status == "few-points"]
    counted = {s.id for s, _ in _counted(spherulites, fits, ctx.shape)}
    dubious = [s.id for s in few if s.id not in counted]
    if dubious:
        out.append(f"{len(dubious)} detections with too little or inconsistent growth are not "
                   f"counted as nuclei (ids {', '.join(map(str, dubious[:10]))})")
    if not spherulites:
        out.append("no spherulite found in the arrival map")
    usable = ~np.isnan(ctx.arrival_s)
    if usable.any() and np.all(ctx.at_start[usable]):
        out.append("the field is crystalline in the first frame: nothing grows in the record")
    return out


# ---------------------------------------------------------------- public API
def _context_from_arrival(arrival, settings, *, stack, isothermal_start_s, temperature_c,
                          thickness_um, geometry) -> Generator[Progress, None, _Context]:
    times = np.asarray(arrival.times_s, dtype=float)
    arrival_s = np.asarray(arrival.arrival_s, dtype=np.float32)
    yield Progress("finding nuclei", 0.1)
    at_start = _solid_start(np.asarray(arrival.crystalline_at_start, bool) | (arrival_s <= times[0]),
                            arrival_s, times)
    filled = np.asarray(getattr(arrival, "filled", np.zeros(arrival_s.shape, bool)), bool)
    # Inferred (filled) arrivals are not evidence of a minimum: detect on measured pixels.
    work = nuclei.working_map(np.where(filled, np.float32(np.nan), arrival_s), times,
                              smooth_px=settings.smooth_px, at_start=at_start)
    markers = nuclei.find_markers(work, arrival_s, times, depth_frames=settings.sensitivity_frames,
                                  min_territory_px=settings.min_territory_px)
    base = markers.territories
    if base is None:
        base = nuclei.territories(work, arrival_s, markers.labels)
    ctx = _Context(stack=stack, frames=times.size, shape=arrival_s.shape, times_s=times,
                   interval_s=nuclei.frame_interval_s(times), um_per_px=float(arrival.um_per_px),
                   isothermal_start_s=float(isothermal_start_s), temperature_c=temperature_c,
                   thickness_um=thickness_um, geometry=geometry, work=work,
                   fit_arrival=growth.dequantised(arrival_s, times),
                   frame_index=np.asarray(arrival.frame_index, np.int32), at_start=at_start,
                   near_start=cv2.dilate(at_start.astype(np.uint8), np.ones((5, 5), np.uint8)) > 0,
                   filled=filled,
                   arrival_s=arrival_s, markers=markers, base_territories=base,
                   auto_lookup_xy=markers.xy_px.copy(),
                   slope_s_per_px=nuclei.mean_slope_s_per_px(arrival_s, np.isfinite(arrival_s) & ~at_start))
    yield Progress("fitting growth cones", 0.4)
    ctx = _with_missed_nuclei(ctx, settings)
    for _ in range(2):  # a second round separates clusters of three
        before = ctx.markers.xy_px.shape[0]
        ctx = _with_split_nuclei(ctx, settings)
        if ctx.markers.xy_px.shape[0] == before:
            break
    yield Progress("fitting growth cones", 0.7)
    for sph in _result(ctx, _auto_detections(ctx), [], [], settings).spherulites:
        ctx.auto_lookup_xy[sph.id - 1] = (sph.x_px, sph.y_px)
    return ctx


def _solid_start(at_start: np.ndarray, arrival_s: np.ndarray, times: np.ndarray) -> np.ndarray:
    """Crystals present in frame 0 as solid regions.

    Their extinction arms are dark in frame 0, so the crystalline-at-start mask comes
    with gaps that the next frame fills; left as they are, each fragment would look like
    a nucleus of its own. Gaps up to ~6 px wide that were crystalline by frame 1 are
    closed and enclosed holes filled.
    """
    if not at_start.any():
        return at_start
    disk = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (7, 7))
    closed = cv2.morphologyEx(at_start.astype(np.uint8), cv2.MORPH_CLOSE, disk) > 0
    by_frame_1 = arrival_s <= times[min(1, times.size - 1)]
    return at_start | ndi.binary_fill_holes(closed & (by_frame_1 | at_start))


def _with_missed_nuclei(ctx: _Context, settings) -> _Context:
    """Add markers for nuclei without a regional minimum (see nuclei.missed_nuclei)."""
    result, fits, groups = _evaluate(ctx, _auto_detections(ctx), [], [], settings)
    model, _ = nuclei.cone_model(ctx.shape, groups, fits)
    measured = np.isfinite(ctx.fit_arrival) & ~ctx.filled & ~ctx.at_start & (ctx.frame_index >= 0)
    seeds = nuclei.missed_nuclei(
        ctx.fit_arrival, measured, model, frames=ctx.frame_index, interval_s=ctx.interval_s,
        slope_s_per_px=ctx.slope_s_per_px, existing_xy=[(s.x_px, s.y_px) for s in result.spherulites],
        min_area_px=max(settings.min_territory_px, 30))
    seeds = [(row, col) for row, col in seeds if ctx.markers.labels[row, col] == 0]
    if not seeds:
        return ctx
    labels = ctx.markers.labels.copy()
    for k, (row, col) in enumerate(seeds):
        labels[row, col] = ctx.markers.xy_px.shape[0] + k + 1
    markers = nuclei.markers_from_labels(labels, ctx.work)
    base = nuclei.territories(ctx.work, ctx.arrival_s, markers.labels)
    return dataclasses.replace(ctx, markers=markers, base_territories=base,
                               auto_lookup_xy=markers.xy_px.copy())


def _split_pixels(ctx, result, fits, groups, settings) -> dict:
    """Fit pixels (x, y, t, fit) of the detections worth a two-nucleus test: residual
    scale above 1.5 times the field's typical one, non-linear growth, or a slope more
    than 25 % off the field's mean."""
    band = nuclei.boundary_band(result.extra["territories"], settings.boundary_band_px)
    data, scales = {}, {}
    for sph in result.spherulites:
        fit = fits[sph.id]
        if not fit.ok:
            continue
        pix = _fit_pixels(ctx, groups.get(sph.id, np.zeros(0, np.int64)), band, [], settings)
        if pix.size < 100:
            continue
        y, x = np.divmod(pix, ctx.shape[1])
        t = ctx.fit_arrival.flat[pix]
        scales[sph.id] = growth.residual_scale_s(fit, x, y, t)
        data[sph.id] = (x, y, t, fit, sph.status)
    if not scales:
        return {}
    typical = float(np.median(list(scales.values())))
    odd_slope = {k for k, v in data.items() if abs(v[3].slope_s_per_px / ctx.slope_s_per_px - 1) > 0.25}
    return {k: v for k, v in data.items()
            if scales[k] > 1.5 * typical or v[4] == "nonlinear" or k in odd_slope}


def _with_split_nuclei(ctx: _Context, settings) -> _Context:
    """Give two markers to territories that hold two nuclei (nuclei.split_candidates)."""
    result, fits, groups = _evaluate(ctx, _auto_detections(ctx), [], [], settings)
    labels = ctx.markers.labels.copy()
    next_id = ctx.markers.xy_px.shape[0] + 1
    for det_id, (x, y, t, fit, _) in _split_pixels(ctx, result, fits, groups, settings).items():
        apexes = nuclei.split_candidates(x, y, t, fit, slope_s_per_px=ctx.slope_s_per_px,
                                         f_scale_s=0.5 * ctx.interval_s)
        if apexes is None:
            continue
        rows, cols = np.divmod(groups[det_id], ctx.shape[1])
        seeds = [int(np.argmin(np.hypot(cols - ax, rows - ay))) for ax, ay in apexes]
        spots = [(rows[k], cols[k]) for k in seeds]
        # A marker in the way that never gave a cone fit was a fragment of this nucleus.
        others = {int(labels[r, c]) for r, c in spots} - {0, det_id}
        if spots[0] == spots[1] or any(k not in fits or fits[k].ok for k in others):
            continue
        labels[np.isin(labels, [det_id, *others])] = 0
        labels[spots[0]] = det_id
        labels[spots[1]] = next_id
        next_id += 1
    if next_id == ctx.markers.xy_px.shape[0] + 1:
        return ctx
    _, contiguous = np.unique(labels, return_inverse=True)  # removed fragments leave gaps
    markers = nuclei.markers_from_labels(contiguous.reshape(labels.shape), ctx.work)
    base = nuclei.territories(ctx.work, ctx.arrival_s, markers.labels)
    return dataclasses.replace(ctx, markers=markers, base_territories=base,
                               auto_lookup_xy=markers.xy_px.copy())


def _check_inputs(arrival, thickness_um, geometry, path) -> None:
    if not (np.isfinite(arrival.um_per_px) and arrival.um_per_px > 0):
        raise InputError(f"pixel size {arrival.um_per_px!r} um must be positive", path)
    times = np.asarray(arrival.times_s, dtype=float)
    if times.size < 2 or not np.all(np.isfinite(times)) or np.any(np.diff(times) <= 0):
        raise InputError("frame times must be finite and increasing over at least 2 frames", path)
    if thickness_um is not None and not (np.isfinite(thickness_um) and thickness_um > 0):
        raise InputError(f"film thickness {thickness_um!r} um must be positive", path)
    if geometry not in ("film-2d", "bulk-3d"):
        raise InputError(f"unknown geometry {geometry!r} (film-2d or bulk-3d)", path)


def analyze_arrival_iter(arrival, *, settings: AnalysisSettings = AnalysisSettings(), edits=(),
                         isothermal_start_s: float = 0.0, temperature_c: float | None = None,
                         thickness_um: float | None = None, stack: str = "",
                         geometry: str = "film-2d") -> Generator[Progress, None, Analysis]:
    """Analyse an existing arrival map (no frames needed); see :func:`analyze_iter`."""
    _check_inputs(arrival, thickness_um, geometry, stack or None)
    ctx = yield from _context_from_arrival(
        arrival, settings, stack=stack, isothermal_start_s=isothermal_start_s,
        temperature_c=temperature_c, thickness_um=thickness_um, geometry=geometry)
    yield Progress("applying edits", 0.9)
    analysis = _with_edits(arrival, ctx, settings, edits)
    yield Progress("done", 1.0)
    return analysis


def analyze_arrival(arrival, **kwargs) -> Analysis:
    return run_to_completion(analyze_arrival_iter(arrival, **kwargs))


def apply_edits(analysis: Analysis, edits: Sequence[Edit]) -> Analysis:
    """The analysis with ``edits`` (the whole list) replayed over the automatic detections.

    No pass over frames: markers, territories and fits are recomputed from cached state,
    and unchanged territories reuse their cached fits.
    """
    if analysis._context is None:
        raise ValueError("this Analysis carries no replay state")
    return _with_edits(analysis.arrival, analysis._context, analysis.settings, edits)


def _with_edits(arrival, ctx, settings, edits) -> Analysis:
    edits = tuple(edits)
    dets, spans, unapplied = _replay(ctx, edits, settings)
    result = _result(ctx, dets, spans, unapplied, settings)
    return Analysis(arrival, result, settings, edits, ctx)


def analyze_iter(stack, *, settings: AnalysisSettings = AnalysisSettings(), edits=(),
                 isothermal_start_s: float = 0.0, temperature_c: float | None = None,
                 thickness_um: float | None = None,
                 geometry: str = "film-2d") -> Generator[Progress, None, Analysis]:
    """Analyse a :class:`FrameStack`: arrival map, nuclei, growth fits, nucleation, X(t).

    Yields :class:`Progress`; returns an :class:`Analysis`. Times in the result are
    seconds from ``isothermal_start_s`` (on the stack's clock). InputError when the
    stack lacks its calibration.
    """
    from .arrival import ArrivalSettings, arrival_map_iter

    stack.require_calibration()
    arrival_settings = ArrivalSettings.from_dict(settings.arrival)
    arrival = yield from scaled(arrival_map_iter(stack, settings=arrival_settings), 0.0, 0.85)
    analysis = yield from scaled(analyze_arrival_iter(
        arrival, settings=settings, edits=edits, isothermal_start_s=isothermal_start_s,
        temperature_c=temperature_c, thickness_um=thickness_um, stack=str(stack.path),
        geometry=geometry), 0.85, 1.0)
    return analysis


def analyze(stack, **kwargs) -> Analysis:
    return run_to_completion(analyze_iter(stack, **kwargs))


def analyze_experiment_iter(experiment) -> Generator[Progress, None, Analysis]:
    """Analyse a project :class:`Experiment` with its settings, calibration and edits."""
    from .project import open_experiment_stack

    stack = open_experiment_stack(experiment)
    settings = AnalysisSettings.from_dict(experiment.settings, path=experiment.stack_path)
    return (yield from analyze_iter(
        stack, settings=settings, edits=tuple(experiment.edits),
        isothermal_start_s=experiment.isothermal_start_s or 0.0,
        temperature_c=experiment.temperature_c, thickness_um=experiment.thickness_um,
        geometry=getattr(experiment, "geometry", "film-2d") or "film-2d"))


def analyze_experiment(experiment) -> Analysis:
    return run_to_completion(analyze_experiment_iter(experiment))


add_cli_arguments = export.add_cli_arguments


def run_cli(args) -> int:
    return export.run_cli(args, analyze_iter=analyze_iter, settings_cls=AnalysisSettings)
