"""One set of detections evaluated: territories, cone fits, radii and the whole result.

Territories are redrawn as the Johnson-Mehl cells of provisional cones, fitted, and
redrawn from the fits (:func:`evaluate`); each spherulite gets a robust cone fit
(:mod:`analysis.spherulites.growth`), radii along free directions (:mod:`analysis.spherulites.fronts`) and a
status; the pooled rate, nucleation statistics and X(t) follow. Fits, radii and
partitions are memoised in the context's cache, keyed on their input pixels, so
unchanged territories cost nothing when edits are replayed.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from analysis import heuristics
from analysis.results import (
    ExperimentResult,
    PooledGrowthRate,
    RadiusSeries,
    Spherulite,
)
from analysis.spherulites import evidence_checks, growth, nuclei, statuses
from analysis.spherulites.fronts import blocked_distance, front_radii
from analysis.spherulites.nucleation import (
    MeltExposure,
    area_fraction,
    field_area_mm2,
    nucleation_statistics,
)
from analysis.spherulites.replay import cached, digest, edited_territories


def ignored_mask(frames: np.ndarray, spans) -> np.ndarray:
    bad = np.zeros(frames.shape, bool)
    for first, last in spans:
        bad |= (frames >= first) & (frames <= last)
    return bad


def _fit_usable(ctx) -> np.ndarray:
    """Flat mask of pixels a cone fit may use: a measured arrival within the record."""
    return cached(ctx, ("fit usable",), lambda: (
        np.isfinite(ctx.fit_arrival) & ~ctx.near_start & ~ctx.filled & (ctx.frame_index >= 0)).ravel())


def fit_pixels(ctx, pix, band, spans, settings):
    usable = _fit_usable(ctx)[pix]
    if spans:
        usable &= ~ignored_mask(ctx.frame_index.ravel()[pix], spans)
    inner = usable & ~band.ravel()[pix]
    chosen = pix[inner] if np.count_nonzero(inner) >= 30 else pix[usable]
    step = max(1, int(np.ceil(chosen.size / settings.max_fit_pixels)))
    return chosen[::step]


def _cone_key(chosen, hold_xy, refine, warm, held_slope=None) -> tuple:
    """Cache key of a cone fit: everything the fit depends on, so the cache is a pure
    memo (the same edits always give the same fits, whatever was computed before)."""
    start = None if warm is None or not warm.ok else (warm.x_px, warm.y_px, warm.t0_s,
                                                       warm.slope_s_per_px)
    key = ("cone", digest(chosen), hold_xy, refine, None if hold_xy is not None else start)
    return key if held_slope is None else key + (("held slope", held_slope),)


def _held_centre(ctx, det, chosen, refine, warm) -> tuple[float, float] | None:
    """The centre the fit must keep: the user's, or the automatic one when the pixels
    are no longer those the automatic fit used (a neighbour's edit changed them)."""
    if det.fixed_xy is not None:
        return det.fixed_xy
    if det.held and _cone_key(chosen, None, refine, warm) not in ctx.auto_fit_keys:
        return det.anchor_xy
    return None


def _cone(ctx, det, pix, band, spans, settings, *, refine: bool = True,
          warm: growth.ConeFit | None = None, held_slope: float | None = None) -> growth.ConeFit:
    """Cone fit of one territory (cached); ``refine`` adds the refit without the apex.
    ``warm``: an earlier fit of nearly the same pixels to start from (fewer iterations);
    ``held_slope``: the slope to hold (s/px) instead of fitting it (the centre is free)."""
    chosen = fit_pixels(ctx, pix, band, spans, settings)
    hold = None if held_slope is not None else _held_centre(ctx, det, chosen, refine, warm)
    key = _cone_key(chosen, hold, refine, warm, held_slope)
    if ctx.fit_key_recorder is not None:
        ctx.fit_key_recorder.add(key)
    if key in ctx.cache:
        return ctx.cache[key]
    y, x = np.divmod(chosen, ctx.shape[1])
    start, guess = hold, None
    if start is None and warm is not None and warm.ok:
        start, guess = (warm.x_px, warm.y_px), (warm.t0_s, warm.slope_s_per_px)
    if start is None:
        seeds = np.concatenate(det.seeds)
        sy, sx = np.divmod(seeds, ctx.shape[1])
        start = (float(sx.mean()), float(sy.mean()))
    t, levels = ctx.fit_arrival.ravel()[chosen], ctx.frame_index.ravel()[chosen]
    fixed = hold is not None
    fit = growth.fit_cone(x, y, t, levels, start_xy=start, f_scale_s=0.5 * ctx.interval_s,
                          fixed_centre=fixed, field_shape=ctx.shape, start_t0_slope=guess,
                          held_slope_s_per_px=held_slope)
    if refine and fit.ok and settings.apex_exclusion_px > 0:
        # Near the apex the measured front is a small, strongly curved disc whose
        # timing the segmentation blur delays; refit without it.
        outer = np.hypot(x - fit.x_px, y - fit.y_px) >= settings.apex_exclusion_px
        if np.count_nonzero(outer) >= 30:
            refit = growth.fit_cone(x[outer], y[outer], t[outer], levels[outer],
                                    start_xy=(fit.x_px, fit.y_px), f_scale_s=0.5 * ctx.interval_s,
                                    fixed_centre=fixed, field_shape=ctx.shape,
                                    start_t0_slope=(fit.t0_s, fit.slope_s_per_px),
                                    held_slope_s_per_px=held_slope)
            # Without the apex the centre of a cone cut by the border or a neighbour is
            # poorly pinned: keep the refit only when it confirms the centre.
            if refit.ok and np.hypot(refit.x_px - fit.x_px, refit.y_px - fit.y_px) <= 1.0:
                fit = refit
    ctx.cache[key] = fit
    return fit


def _radius_series(ctx, det_id, pix, labels, cx, cy, spans, settings):
    """Radii of one spherulite and their linearity test (cached on its pixels, centre,
    spans and neighbourhood)."""
    rows, cols = np.divmod(pix, ctx.shape[1]) if pix.size else (np.zeros(1, int), np.zeros(1, int))
    r = 3 + int(max(np.ptp(rows), np.ptp(cols)))
    y0, x0 = max(int(cy) - r, 0), max(int(cx) - r, 0)
    window = labels[y0:max(int(cy) + r + 1, 0), x0:max(int(cx) + r + 1, 0)]
    key = ("radii", det_id, digest(pix, window, (cx, cy, tuple(spans))))
    return cached(ctx, key, lambda: _tested(_measure_radii(ctx, det_id, pix, labels, cx, cy, spans,
                                                            settings), settings))


def _tested(series: RadiusSeries, settings) -> tuple[RadiusSeries, growth.LinearityTest]:
    return series, growth.linearity_test(series.time_s[series.used], series.radius_um[series.used],
                                         alpha=settings.nonlinear_alpha,
                                         min_slope_change=settings.nonlinear_min_change)


def _measure_radii(ctx, det_id, pix, labels, cx, cy, spans, settings) -> RadiusSeries:
    frames = ctx.frame_index.ravel()[pix]
    keep = frames >= 0
    y, x = np.divmod(pix[keep], ctx.shape[1])
    reach = float(np.max(np.hypot(x - cx, y - cy))) + 3.0 if x.size else 3.0
    blocked = blocked_distance(labels, det_id, cx, cy, n_sectors=settings.n_sectors, reach_px=reach)
    samples = front_radii(x, y, frames[keep], blocked, cx, cy, ctx.frames)
    ok = np.isfinite(samples.radius_px)
    frame_ids = np.flatnonzero(ok)
    used = (samples.free_fraction[ok] >= settings.min_free_fraction) & \
        (samples.radius_px[ok] >= heuristics.current().min_radius_px) & ~ignored_mask(frame_ids, spans)
    return RadiusSeries(det_id, ctx.times_s[ok] - ctx.isothermal_start_s,
                        samples.radius_px[ok] * ctx.um_per_px, samples.free_fraction[ok], used)


def _inside(ctx, x_px, y_px) -> bool:
    h, w = ctx.shape
    return -0.5 <= x_px <= w - 0.5 and -0.5 <= y_px <= h - 0.5


def _verdict(ctx, det, fit, series, lin, settings) -> statuses.Verdict:
    """Status and reason (see analysis.spherulites.statuses), plus the early-nucleation note.

    Edge spherulites are decided by the fitted centre (a minimum on the border decides
    only when there is no fit): counting by the fitted centre keeps the count unbiased
    for nuclei right at the border.
    """
    verdict = statuses.classify(
        excluded=det.excluded, fit_ok=fit.ok, fit_reason=fit.reason,
        marker_on_border=det.source == "auto" and bool(ctx.markers.on_border[det.id - 1]),
        centre_inside=fit.ok and _inside(ctx, fit.x_px, fit.y_px),
        user_centre=det.source != "auto" or det.fixed_xy is not None,
        free_radii=series.n_used(), min_points=settings.min_points,
        min_free_fraction=settings.min_free_fraction, nonlinear=lin.nonlinear,
        linearity=lin.description)
    if fit.ok and fit.slope_held and verdict.status in ("ok", "nonlinear", "few-points"):
        # Its own growth rate is not measured: never part of the pooled G.
        verdict = statuses.Verdict("few-points", "too few frames of growth to measure its own G: "
                                   "located and timed at the field's growth rate")
    note = statuses.early_nucleation_note(
        fit.t0_s - ctx.isothermal_start_s if fit.ok else None, fit.se_t0_s, fit.dof)
    return statuses.Verdict(verdict.status, statuses.with_note(verdict.reason, note))


def _spherulite(ctx, det, pix, labels, band, global_spans, settings, warm=None, held_slope=None):
    spans = global_spans + det.ignored
    fit = _cone(ctx, det, pix, band, spans, settings, warm=warm, held_slope=held_slope)
    if fit.ok:
        cx, cy = fit.x_px, fit.y_px
    elif det.fixed_xy is not None or det.held:
        cx, cy = det.centre_xy
    else:
        seeds = np.concatenate(det.seeds)
        sy, sx = np.divmod(seeds, ctx.shape[1])
        cx, cy = float(sx.mean()), float(sy.mean())
    series, lin = _radius_series(ctx, det.id, pix, labels, cx, cy, spans, settings)
    verdict = _verdict(ctx, det, fit, series, lin, settings)
    frames = ctx.frame_index.ravel()[pix]
    seen = frames[frames >= 0]
    g = growth.growth_rate_um_per_min(fit.g_px_per_s, ctx.um_per_px) if fit.ok and not fit.slope_held else None
    ci = fit.g_ci95_px_per_s()
    sph = Spherulite(
        id=det.id, x_px=float(cx), y_px=float(cy),
        nucleation_time_s=float(fit.t0_s - ctx.isothermal_start_s) if fit.ok else None,
        first_seen_s=float(ctx.times_s[seen.min()] - ctx.isothermal_start_s) if seen.size else None,
        growth_rate_um_per_min=g,
        growth_rate_ci95_um_per_min=growth.growth_rate_um_per_min(ci, ctx.um_per_px),
        r2=float(fit.r2) if fit.ok and np.isfinite(fit.r2) else None,
        n_points=int(fit.n_levels), status=verdict.status, source=det.source,
        reason=verdict.reason, growth_rate_se_um_per_min=_growth_se(fit, ctx.um_per_px))
    return sph, series, fit, _evidence(ctx, det, fit, pix, band, spans, settings)


def _evidence(ctx, det, fit, pix, band, spans, settings) -> evidence_checks.Evidence:
    """The pixels and residuals a detection's fit rests on (see evidence_checks)."""
    chosen = fit_pixels(ctx, pix, band, spans, settings)
    y, x = np.divmod(chosen, ctx.shape[1])
    t = ctx.fit_arrival.ravel()[chosen]
    scale = growth.residual_scale_s(fit, x, y, t) if fit.ok and chosen.size else float("nan")
    seeds = np.concatenate(det.seeds) if det.seeds else np.zeros(0, np.int64)
    early = bool(seeds.size) and bool(ctx.at_start.ravel()[seeds].any())
    return evidence_checks.Evidence(fit, scale, x, y, t, user_included=det.excluded is False,
                                    automatic=det.source == "auto", in_first_frame=early)


def _too_short_for_own_cone(ctx, det, fit, ev) -> bool:
    """An automatic detection with too few frames for its own four-parameter cone
    (fewer than ``reject_min_levels``: a late nucleus hemmed in after a few frames, a
    crystal present at the start that grew for only a few): it is fitted again with the
    field's slope held, since an isothermal field grows at one rate. Not when its own
    cone failed on enough frames (its pixels do not follow a cone), for a marker on the
    border (an arc that needs its own slope to place its centre) or a centre the user
    set. (A detection held at its automatic centre while edits are replayed is retried
    too, so an edit elsewhere leaves it as the automatic result has it.)"""
    return (not fit.ok and fit.n_levels < heuristics.current().reject_min_levels
            and det.source == "auto" and det.fixed_xy is None
            and not det.excluded and not bool(ctx.markers.on_border[det.id - 1]))


def _growth_se(fit, um_per_px) -> float | None:
    """Standard error of G from the fit's slope (delta method, G = 1/slope), µm/min."""
    if not fit.ok or fit.dof < 1 or not np.isfinite(fit.se_slope_s_per_px):
        return None
    return growth.growth_rate_um_per_min(fit.se_slope_s_per_px / fit.slope_s_per_px ** 2, um_per_px)


# ---------------------------------------------------------------- whole result
def _provisional_cones(ctx, live) -> dict:
    """A cone per single-seed detection from its seed (apex, lowest working-map time)
    and the field's mean slope, its apex at the user's centre when there is one; merged
    detections get none (they keep their flooding)."""
    cones = {}
    for d in live:
        if len(d.seeds) != 1:
            continue
        sy, sx = np.divmod(d.seeds[0], ctx.shape[1])
        t0 = float(np.min(ctx.work.ravel()[d.seeds[0]]))
        x, y = d.fixed_xy if d.fixed_xy is not None else (float(sx.mean()), float(sy.mean()))
        cones[d.id] = growth.ConeFit(x, y, t0, ctx.slope_s_per_px, 0, 0, 0, 0, 0, 1.0, 0, 0)
    return cones


def _partition(ctx, dets, global_spans, settings):
    """Flooded territories, redrawn from provisional cones, fitted, redrawn from the fits."""
    live = [d for d in dets if not (d.deleted or d.merged)]
    flooded = edited_territories(ctx, dets)
    cones = _provisional_cones(ctx, live)
    labels = cached(ctx, ("provisional", digest(flooded, sorted(cones.items()))),
                     lambda: nuclei.cone_partition(flooded, _groups(ctx, flooded), cones))
    band = nuclei.boundary_band(labels, settings.boundary_band_px)
    groups = _groups(ctx, labels)
    empty = np.zeros(0, np.int64)
    fits = {d.id: _cone(ctx, d, groups.get(d.id, empty), band, global_spans + d.ignored, settings,
                        refine=False) for d in live}
    single = {k: f for k, f in fits.items() if len(by_seeds[k]) == 1} if (
        by_seeds := {d.id: d.seeds for d in live}) else {}
    final = cached(ctx, ("final", digest(labels, sorted(single.items()))),
                    lambda: nuclei.cone_partition(labels, groups, single))
    return final, fits


def _groups(ctx, labels):
    return cached(ctx, ("groups", digest(labels)), lambda: nuclei.pixel_groups(labels))


def result_of(ctx, dets, global_spans, unapplied, settings) -> ExperimentResult:
    return evaluate(ctx, dets, global_spans, unapplied, settings)[0]


def automatic_fit_keys(ctx, dets, settings) -> frozenset:
    """The cone fits the automatic result is made of (they are all cached by now)."""
    recorder: set = set()
    evaluate(dataclasses.replace(ctx, fit_key_recorder=recorder), dets, [], [], settings)
    return frozenset(recorder)


def evaluate(ctx, dets, global_spans, unapplied, settings):
    """The result, and the final fits by detection id and their pixel groups (None when
    ``ctx.fit_key_recorder`` is set: then only the cone fits are made, and recorded)."""
    labels, provisional = _partition(ctx, dets, global_spans, settings)
    band = nuclei.boundary_band(labels, settings.boundary_band_px)
    groups = _groups(ctx, labels)
    empty = np.zeros(0, np.int64)
    live = [det for det in dets if not (det.deleted or det.merged)]
    rows = [_spherulite(ctx, det, groups.get(det.id, empty), labels, band, global_spans, settings,
                        provisional.get(det.id)) for det in live]
    judged = [(sph, ev) for sph, _, _, ev in rows]
    slope, typical = evidence_checks.field_slope(judged), evidence_checks.typical_residual(judged)
    for k, det in enumerate(live):
        if not (np.isfinite(slope) and _too_short_for_own_cone(ctx, det, rows[k][2], rows[k][3])):
            continue
        again = _spherulite(ctx, det, groups.get(det.id, empty), labels, band, global_spans, settings,
                            held_slope=slope)
        # A crystal present at the start may hide its nucleus: without a cone that fits it
        # stays as it was, for review (no evidence either way).
        if not rows[k][3].in_first_frame or evidence_checks.follows_one_front(again[3], typical, ctx.interval_s):
            rows[k] = again
    if ctx.fit_key_recorder is not None:
        return None  # only the cone fits were asked for (automatic_fit_keys): they are all made
    spherulites, radii, fits, evidence = (list(column) for column in zip(*rows)) if rows else ([], [], [], [])
    spherulites = evidence_checks.judge(spherulites, evidence, interval_s=ctx.interval_s, shape=ctx.shape,
                                        correlation_px=ctx.correlation_px)
    pooled, pooled_text = _pooled(ctx, spherulites, fits, radii)
    time_s, fraction = _area_fraction(ctx, global_spans)
    nucleation = _nucleation(ctx, spherulites, fits, time_s, fraction)
    result = ExperimentResult(
        stack=ctx.stack, frames=ctx.frames, um_per_px=ctx.um_per_px, interval_s=ctx.interval_s,
        temperature_c=ctx.temperature_c, thickness_um=ctx.thickness_um,
        spherulites=tuple(spherulites), radii=tuple(radii), growth_rate=pooled,
        nucleation=nucleation, area_fraction_time_s=time_s, area_fraction=fraction,
        unapplied_edits=tuple(unapplied),
        warnings=tuple(_warnings(ctx, spherulites, fits)),
        extra={"pooled_growth_rate_method": pooled_text, "territories": labels,
               "geometry": ctx.geometry,
               "next_detection_id": max((d.id for d in dets), default=0) + 1})
    return result, dict(zip([s.id for s in spherulites], fits)), groups


def _pooled(ctx, spherulites, fits, radii) -> tuple[PooledGrowthRate, str]:
    g, se, spans = [], [], []
    for s, f, series in zip(spherulites, fits, radii):
        if s.status == "ok" and f.ok and f.dof >= 1:
            g.append(s.growth_rate_um_per_min)
            se.append(s.growth_rate_se_um_per_min)
            used = series.time_s[series.used]
            spans.append(float(np.ptp(used)) if used.size else 0.0)
    systematic = 0.0
    if g:
        g_px_per_s = float(np.median(g)) / 60.0 / ctx.um_per_px
        systematic = growth.timing_systematic(ctx.times_s, float(np.median(spans)), g_px_per_s,
                                              ctx.registered_drift_px).total
    pooled = growth.pooled_rate(g, se, systematic)
    if pooled.value is None:
        return PooledGrowthRate(None, None, None, 0), pooled.description
    return PooledGrowthRate(pooled.value, pooled.value - pooled.ci95_half_width,
                            pooled.value + pooled.ci95_half_width, pooled.n,
                            pooled.systematic_rel), pooled.description


def _area_fraction(ctx, global_spans):
    fraction = cached(ctx, ("area fraction",), lambda: area_fraction(ctx.arrival_s, ctx.times_s))
    keep = ~ignored_mask(np.arange(ctx.frames), global_spans)
    return ctx.times_s[keep] - ctx.isothermal_start_s, fraction[keep]


def _counted(spherulites, fits, shape) -> list:
    """(spherulite, fit) pairs that count as nuclei inside the field.

    Nuclei count by their centre (docs/sources.md §1.6); edge spherulites never count. A
    ``few-points`` detection counts only when its cone fit grows within ``few_points_g_tolerance`` (30 %) of the
    field's median G (common practice): with fewer frames a real late nucleus still
    grows like its neighbours, whereas dust or a segmentation artefact does not. One
    fitted with the field's slope held (too few frames for its own G) counts when the
    evidence checks kept it: its cone at the field's rate fits its pixels and the
    neighbouring fronts do not explain them (evidence_checks.nucleus_support).
    """
    h, w = shape
    tolerance = heuristics.current().few_points_g_tolerance
    g_ok = [s.growth_rate_um_per_min for s in spherulites if s.status == "ok"]
    g_med = float(np.median(g_ok)) if g_ok else None
    out = []
    for s, f in zip(spherulites, fits):
        if s.status in ("edge", "rejected") or not (-0.5 <= s.x_px <= w - 0.5 and -0.5 <= s.y_px <= h - 0.5):
            continue
        if s.status == "few-points" and not f.slope_held and (g_med is None or s.growth_rate_um_per_min is None or
                                         abs(s.growth_rate_um_per_min / g_med - 1) > tolerance):
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

