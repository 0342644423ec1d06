"""From a time-lapse stack to an :class:`ExperimentResult`, and the user's edits replayed.

Stages: one streaming pass over the frames builds the arrival-time map
(:mod:`analysis.arrival.arrival_map`); nuclei are its regional minima (:mod:`analysis.spherulites.nuclei`),
completed by two checks against the first fits — regions that crystallise earlier than
any fitted cone predicts hold a nucleus without a minimum, and territories that two
cones explain far better than one hold two nuclei; territories are the Johnson-Mehl
cells of the fitted cones (a watershed of the map gives the starting partition); a
robust cone fit per territory gives centre, nucleation time and G
(:mod:`analysis.spherulites.growth`); radii along free directions are measured from the map
(:mod:`analysis.spherulites.fronts`); nucleation statistics and X(t) follow
(:mod:`analysis.spherulites.nucleation`). Edits change only markers, statuses and frame masks, so
:func:`apply_edits` re-partitions and refits from cached state without touching frames
(the cached state and the replay: :mod:`analysis.spherulites.replay`; one set of detections
evaluated into a result: :mod:`analysis.spherulites.evaluation`).

Edit semantics (replayed in list order; a target is the detection the edit names by id,
checked against its recorded centre within ``AnalysisSettings.edit_tolerance_px``, else
the detection nearest to that centre, see :mod:`analysis.spherulites.replay`):
``add_nucleus`` puts a nucleus exactly at the clicked point (source ``manual``; its
centre is held there, its territory seeded at the nearest free crystallised pixel);
``delete_detection`` removes the detection and leaves its
territory *unassigned* (no neighbour absorbs it: a deleted detection is usually dust or
a scratch whose pixels would spoil the neighbours' cone fits; its area still counts as
crystallised in X(t)); ``merge_detections`` joins the second territory to the first,
whose centre is then fitted afresh;
``move_centre`` holds the centre at the new point and refits t0 and G; ``exclude`` and
``include`` set the status (``include`` also forces an automatic reject to ``ok`` when
it has a growth rate); ``ignore_frames`` removes the frames from one spherulite's data or,
without a position, from the whole experiment (fits, radii and X(t)).
A detection no edit names keeps its automatic centre and id: when an edit next to it
changes its pixels, its cone is refitted with the centre held (t0 and G only).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Generator, Sequence

import cv2
import numpy as np
from scipy import ndimage as ndi

from analysis import heuristics
from analysis.edits import Edit
from analysis.errors import InputError
from analysis.progress import Progress, run_to_completion, scaled
from analysis.results import ExperimentResult
from analysis.settings import DEFAULT_GEOMETRY, GEOMETRIES, AnalysisSettings
from analysis.spherulites import growth, nuclei
from analysis.spherulites.evaluation import (
    automatic_fit_keys,
    evaluate,
    fit_pixels,
    result_of,
)
from analysis.spherulites.replay import Context, auto_detections, cached, digest, replay

_AUTOMATIC = ("result without edits",)  # cache key


@dataclass(frozen=True)
class Analysis:
    """An analysed stack: the arrival map, the result with edits applied, cached state."""

    arrival: Any
    result: ExperimentResult
    settings: AnalysisSettings = AnalysisSettings()
    edits: tuple = ()
    #: Cached replay state (arrival map, markers, fits) that :func:`apply_edits` reuses;
    #: None for an analysis that cannot replay edits.
    context: Context | None = field(default=None, repr=False, compare=False)



# ---------------------------------------------------------------- public API
def _context_from_arrival(arrival, settings, *, stack, isothermal_start_s, temperature_c,
                          thickness_um, geometry) -> Generator[Progress, None, Context]:
    times = np.asarray(arrival.times_s, dtype=float)
    arrival_s = np.asarray(arrival.arrival_s, dtype=np.float32)
    yield Progress("finding nuclei", 0.1)
    filled = np.asarray(getattr(arrival, "filled", np.zeros(arrival_s.shape, bool)), bool)
    at_start = _solid_start(np.asarray(arrival.crystalline_at_start, bool) | (arrival_s <= times[0]),
                            arrival_s, times, filled)
    # Inferred (filled) arrivals are not evidence of a minimum: detect on measured pixels.
    work = nuclei.working_map(np.where(filled, np.float32(np.nan), arrival_s), times,
                              smooth_px=settings.smooth_px, at_start=at_start,
                              below_start_s=getattr(arrival, "before_start_s", None))
    markers = nuclei.find_markers(work, arrival_s, times, depth_frames=settings.sensitivity_frames,
                                  min_territory_px=settings.min_territory_px)
    base = markers.territories
    if base is None:
        base = nuclei.territories(work, arrival_s, markers.labels)
    ctx = Context(stack=stack, frames=times.size, shape=arrival_s.shape, times_s=times,
                   interval_s=nuclei.frame_interval_s(times), um_per_px=float(arrival.um_per_px),
                   isothermal_start_s=float(isothermal_start_s), temperature_c=temperature_c,
                   thickness_um=thickness_um, geometry=geometry, work=work,
                   fit_arrival=growth.dequantised(arrival_s, times),
                   frame_index=np.asarray(arrival.frame_index, np.int32), at_start=at_start,
                   near_start=cv2.dilate(at_start.astype(np.uint8), np.ones((5, 5), np.uint8)) > 0,
                   filled=filled,
                   arrival_s=arrival_s, markers=markers, base_territories=base,
                   auto_lookup_xy=markers.xy_px.copy(),
                   slope_s_per_px=nuclei.mean_slope_s_per_px(arrival_s, np.isfinite(arrival_s) & ~at_start),
                   registered_drift_px=_largest_shift_px(arrival),
                   correlation_px=_correlation_px(arrival))
    yield Progress("fitting growth cones", 0.4)
    ctx = _with_missed_nuclei(ctx, settings)
    for _ in range(4):  # further rounds separate clusters of three or four
        before = ctx.markers.xy_px.shape[0]
        ctx = _with_split_nuclei(ctx, settings)
        if ctx.markers.xy_px.shape[0] == before:
            break
    yield Progress("fitting growth cones", 0.7)
    automatic, _, _ = _automatic_evaluation(ctx, settings)
    for sph in automatic.spherulites:
        ctx.auto_lookup_xy[sph.id - 1] = (sph.x_px, sph.y_px)
    ctx = dataclasses.replace(ctx, auto_fit_keys=automatic_fit_keys(ctx, auto_detections(ctx),
                                                                    settings))
    ctx.cache[_AUTOMATIC] = automatic  # the result without edits: no need to evaluate it twice
    return ctx


def _correlation_px(arrival) -> float:
    """Gaussian sigma (px) over which arrival-time errors are shared: the evidence
    smoothing and the measured edge blur, both Gaussian, added in quadrature."""
    quality = getattr(arrival, "image_quality", None)
    if quality is None:
        return 0.0
    return float(math.hypot(quality.smoothing_px or 0.0, quality.blur_px or 0.0))


def _largest_shift_px(arrival) -> float:
    shifts = np.asarray(getattr(arrival, "shifts_px", np.zeros((0, 2))), dtype=float)
    if shifts.size == 0:
        return 0.0
    return float(np.max(np.hypot(*(shifts - shifts[0]).T)))


def _automatic_evaluation(ctx: Context, settings):
    """The automatic detections evaluated (see evaluation.evaluate), memoised on the
    markers: a round of checks that changes nothing costs no second evaluation."""
    key = ("automatic evaluation", digest(ctx.markers.labels, ctx.base_territories))
    return cached(ctx, key, lambda: evaluate(ctx, auto_detections(ctx), [], [], settings))


def _solid_start(at_start: np.ndarray, arrival_s: np.ndarray, times: np.ndarray,
                 filled: np.ndarray) -> np.ndarray:
    """Crystals present in frame 0 as solid regions.

    Their extinction arms are dark in frame 0, so the crystalline-at-start mask comes
    with gaps that the next frame fills; left as they are, each fragment would look like
    a nucleus of its own. Gaps up to ~6 px wide that were crystalline by frame 1 are
    closed and enclosed holes filled, except pixels whose front was measured after
    frame 0 (not inferred): those were melt, e.g. the pocket between three touching discs.
    """
    if not at_start.any():
        return at_start
    disk = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (7, 7))
    closed = cv2.morphologyEx(at_start.astype(np.uint8), cv2.MORPH_CLOSE, disk) > 0
    by_frame_1 = arrival_s <= times[min(1, times.size - 1)]
    solid = ndi.binary_fill_holes(closed & (by_frame_1 | at_start))
    measured_later = np.isfinite(arrival_s) & ~filled & (arrival_s > times[0])
    return at_start | (solid & ~measured_later)


def _with_missed_nuclei(ctx: Context, settings) -> Context:
    """Add markers for nuclei without a regional minimum (see nuclei.missed_nuclei)."""
    result, fits, groups = _automatic_evaluation(ctx, settings)
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


def _split_pixels(ctx, result, fits, groups, settings) -> tuple[dict, float]:
    """Fit pixels (x, y, t, fit, status, axis start) of the detections worth a
    two-nucleus test, and the field's arrival-time noise (median robust residual scale,
    s). Worth the test: residual scale above 1.5 times the field's typical one,
    non-linear growth, a slope more than 25 % off the field's mean, or residuals
    elongated along one axis (nuclei.elongation, whose axis then gives the starting
    apexes) with strong evidence (split_evidence_bic) and by as much as two apexes
    pair_min_separation_px apart would make. A crystal present in the first frame must also lie
    inside the cone's disc at that time: its outline's excess arrival joins the residuals
    (nuclei.split_cones)."""
    band = nuclei.boundary_band(result.extra["territories"], settings.boundary_band_px)
    data, scales = {}, {}
    for sph in result.spherulites:
        fit = fits[sph.id]
        if not fit.ok:
            continue
        pix = fit_pixels(ctx, groups.get(sph.id, np.zeros(0, np.int64)), band, [], settings)
        if pix.size < 100:
            continue
        y, x = np.divmod(pix, ctx.shape[1])
        t = ctx.fit_arrival.ravel()[pix]
        scales[sph.id] = growth.residual_scale_s(fit, x, y, t)
        data[sph.id] = (x, y, t, fit, sph.status)
        rows, cols = np.divmod(groups[sph.id], ctx.shape[1])
        frame_0 = ctx.at_start[rows, cols]
        if np.any(frame_0):
            ox, oy = nuclei.region_outline(cols[frame_0], rows[frame_0])
            excess = growth.bound_violation_s(fit, ox, oy, float(ctx.times_s[0]))
            scales[sph.id] = max(scales[sph.id], float(1.4826 * np.median(excess)))
    if not scales:
        return {}, float("nan")
    rules = heuristics.current()
    typical = float(np.median(list(scales.values())))
    chosen = {}
    for k, (x, y, t, fit, status) in data.items():
        evidence, apart, axis = nuclei.elongation(fit, x, y, t, noise_s=typical, correlation_px=ctx.correlation_px)
        elongated = evidence > rules.split_evidence_bic and apart >= rules.pair_min_separation_px
        misfit = (scales[k] > rules.split_residual_ratio * typical or status == "nonlinear"
                  or abs(fit.slope_s_per_px / ctx.slope_s_per_px - 1) > rules.split_slope_tolerance)
        if misfit or elongated:  # elongated only: the harmonic's axis is the one start needed
            chosen[k] = (x, y, t, fit, status, None if misfit else axis)
    return chosen, typical


def _with_split_nuclei(ctx: Context, settings) -> Context:
    """Give markers to territories that hold two nuclei (nuclei.split_cones) or, around a
    crystal present in frame 0 (at least 20 px of it), two to six (nuclei.cluster_cones).

    Inside a crystal present in frame 0 the working map holds only a bound on the
    arrival (no front was seen there), so the split also redraws it from the fitted
    cones: each apex becomes a minimum and the flooding follows the Johnson-Mehl
    boundaries between them, which a later round can split again. A fitted cone on
    another detection's apex is that detection and gets no marker. A
    split inside such a crystal is undone when either half then has no cone fit: its
    apex was placed where no measured front can confirm it. Elsewhere such a half stays,
    as a rejected row: its territory keeps the other nucleus's pixels out of this one's
    fit (an arc entering from outside beside a nucleus at the edge). Any split is undone when a
    half's own fit lands on another detection's apex (within the split separation; onto
    its sibling's within their uncertainty, see _duplicates): the extra cone was
    explaining a neighbour's pixels, not a nucleus of its own.
    """
    result, fits, groups = _automatic_evaluation(ctx, settings)
    labels = ctx.markers.labels.copy()
    work = ctx.work.copy()
    next_id = ctx.markers.xy_px.shape[0] + 1
    splits = []  # (spots, marker values replaced, relief pixels redrawn) per split
    candidates, noise_s = _split_pixels(ctx, result, fits, groups, settings)
    for det_id, (x, y, t, fit, _, axis) in candidates.items():
        rows, cols = np.divmod(groups[det_id], ctx.shape[1])
        frame_0 = ctx.at_start[rows, cols]
        start_region = (cols[frame_0], rows[frame_0])
        if np.count_nonzero(frame_0) >= 20:
            cones = nuclei.cluster_cones(x, y, t, fit, slope_s_per_px=ctx.slope_s_per_px,
                                         f_scale_s=0.5 * ctx.interval_s, start_region=start_region,
                                         start_time_s=float(ctx.times_s[0]))
        else:  # memoised: later rounds ask again about every territory they left unchanged
            key = ("two cones", digest(x, y, t, start_region[0], start_region[1]), round(noise_s, 3),
                   axis is None)
            cones = cached(ctx, key, lambda: nuclei.split_cones(
                x, y, t, fit, slope_s_per_px=ctx.slope_s_per_px, f_scale_s=0.5 * ctx.interval_s,
                start_region=start_region, start_time_s=float(ctx.times_s[0]), noise_s=noise_s,
                correlation_px=ctx.correlation_px, axis_start=axis))
        if cones is None:
            continue
        apexes = np.asarray(cones[:-1]).reshape(-1, 3)[:, :2]
        # A cone on another detection's apex is that detection, reaching into this territory.
        known = np.array([(f.x_px, f.y_px) for k, f in fits.items() if k != det_id and f.ok]).reshape(-1, 2)
        new = [xy for xy in apexes if known.size == 0 or np.hypot(*(known - xy).T).min()
               >= heuristics.current().split_min_separation_px]
        if len(new) < 2:
            continue
        seeds = [int(np.argmin(np.hypot(cols - ax, rows - ay))) for ax, ay in new]
        spots = [(rows[k], cols[k]) for k in seeds]
        # A marker in the way that never gave a cone fit was a fragment of this nucleus.
        others = {int(labels[r, c]) for r, c in spots} - {0, det_id}
        if len(set(spots)) < len(spots) or any(k not in fits or fits[k].ok for k in others):
            continue
        labels[np.isin(labels, [det_id, *others])] = 0
        labels[spots[0]] = det_id
        for spot in spots[1:]:
            labels[spot] = next_id
            next_id += 1
        redrawn = (rows[frame_0], cols[frame_0])
        work[redrawn] = np.minimum(nuclei.cones_arrival(cones, redrawn[1], redrawn[0]),
                                   ctx.times_s[0])
        splits.append((spots, [det_id, *others], redrawn))
    if not splits:
        return ctx
    split_ctx = _with_marker_labels(dataclasses.replace(ctx, work=work), labels)
    _, split_fits, _ = _automatic_evaluation(split_ctx, settings)
    undone = False
    apexes = {k: f for k, f in split_fits.items() if f.ok}
    for spots, replaced, redrawn in splits:
        ids = [int(split_ctx.markers.labels[spot]) for spot in spots]
        duplicate = any(_duplicates(apexes, k, siblings=ids, shape=ctx.shape) for k in ids)
        if not duplicate and (all(split_fits[k].ok for k in ids)
                              or not any(ctx.at_start[spot] for spot in spots)):
            continue
        for spot in spots:
            labels[spot] = 0
        original = np.isin(ctx.markers.labels, replaced)
        labels[original] = ctx.markers.labels[original]
        work[redrawn] = ctx.work[redrawn]
        undone = True
    return _with_marker_labels(dataclasses.replace(ctx, work=work), labels) if undone else split_ctx


def _duplicates(fits: dict, label: int, siblings=(), shape=None) -> bool:
    """The fitted apex of ``label`` lies within the split separation of another's. Its
    ``siblings``, the other halves of its own split, may come closer (a close pair) but
    must stay ``pair_min_separation_px`` apart and farther than the 95 % uncertainty of
    the two fitted apexes: two cones that land on one point within their precision were
    one nucleus. A sibling whose apex lies outside the field (of ``shape``) is only an
    arc, located too poorly for that test; the edge rule judges it instead."""
    if label not in fits:
        return False
    here = fits[label]
    rules = heuristics.current()
    for k, other in fits.items():
        if k == label:
            continue
        apart = math.hypot(here.x_px - other.x_px, here.y_px - other.y_px)
        if k not in siblings:
            if apart < rules.split_min_separation_px:
                return True
            continue
        if shape is not None and not (_in_field(here.x_px, here.y_px, shape)
                                      and _in_field(other.x_px, other.y_px, shape)):
            continue
        spread = 1.96 * math.sqrt(here.se_x_px ** 2 + here.se_y_px ** 2 + other.se_x_px ** 2 + other.se_y_px ** 2)
        if apart < max(rules.pair_min_separation_px, spread):
            return True
    return False


def _in_field(x_px: float, y_px: float, shape) -> bool:
    """The point (px) lies on the field's pixels (edges at -0.5 and size - 0.5)."""
    h, w = shape
    return -0.5 <= x_px <= w - 0.5 and -0.5 <= y_px <= h - 0.5


def _with_marker_labels(ctx: Context, labels: np.ndarray) -> Context:
    """The context with new markers (label values need not be contiguous) and their flooding."""
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
    if geometry not in GEOMETRIES:
        raise InputError(f"unknown geometry {geometry!r} ({' or '.join(GEOMETRIES)})", path)


def analyze_arrival_iter(arrival, *, settings: AnalysisSettings = AnalysisSettings(), edits=(),
                         isothermal_start_s: float = 0.0, temperature_c: float | None = None,
                         thickness_um: float | None = None, stack: str = "",
                         geometry: str = DEFAULT_GEOMETRY) -> Generator[Progress, None, Analysis]:
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
    if analysis.context is None:
        raise ValueError("this Analysis carries no replay state")
    return _with_edits(analysis.arrival, analysis.context, analysis.settings, edits)


def split_nuclei(analysis: Analysis, spherulite_id: int):
    """Where the two nuclei of one detection would be if it is two spherulites: ((x, y),
    (x, y)) px, the first the nearer to its present centre, from its territory's measured
    arrival times (:func:`analysis.spherulites.nuclei.best_split`); None when
    its pixels cannot support two cones or the analysis keeps no replay state."""
    ctx, result = getattr(analysis, "context", None), getattr(analysis, "result", None)
    if ctx is None or result is None:
        return None
    labels = result.extra.get("territories")
    sph = next((s for s in result.spherulites if s.id == spherulite_id), None)
    if labels is None or sph is None:
        return None
    pix = np.flatnonzero(np.asarray(labels).ravel() == spherulite_id)
    usable = (np.isfinite(ctx.fit_arrival) & ~ctx.filled & ~ctx.near_start & (ctx.frame_index >= 0)).ravel()
    pix = pix[usable[pix]]
    rows, cols = np.divmod(pix, ctx.shape[1])
    pair = nuclei.best_split(cols, rows, ctx.fit_arrival.ravel()[pix], ctx.slope_s_per_px,
                                      f_scale_s=0.5 * ctx.interval_s)
    if pair is None:
        return None
    a, b = pair
    nearer_a = np.hypot(a[0] - sph.x_px, a[1] - sph.y_px) <= np.hypot(b[0] - sph.x_px, b[1] - sph.y_px)
    return (a, b) if nearer_a else (b, a)


def _with_edits(arrival, ctx, settings, edits) -> Analysis:
    edits = tuple(edits)
    result = ctx.cache.get(_AUTOMATIC) if not edits else None
    if result is None:
        dets, spans, unapplied = replay(ctx, edits, settings)
        result = result_of(ctx, dets, spans, unapplied, settings)
    quality = getattr(arrival, "image_quality", None)
    if quality is not None:
        warnings = result.warnings + ((quality.verdict,) if quality.too_poor else ())
        result = dataclasses.replace(result, image_quality=quality, warnings=warnings)
    return Analysis(arrival, result, settings, edits, ctx)


def analyze_iter(stack, *, settings: AnalysisSettings = AnalysisSettings(), edits=(),
                 isothermal_start_s: float = 0.0, temperature_c: float | None = None,
                 thickness_um: float | None = None, geometry: str = DEFAULT_GEOMETRY,
                 memory_budget_mb: float | None = None) -> Generator[Progress, None, Analysis]:
    """Analyse a :class:`FrameStack`: arrival map, nuclei, growth fits, nucleation, X(t).

    Yields :class:`Progress`; returns an :class:`Analysis`. Times in the result are
    seconds from ``isothermal_start_s`` (on the stack's clock). InputError when the
    stack lacks its calibration or its analysis would exceed the memory budget
    (``memory_budget_mb``, default from :mod:`analysis.stack.budget`), checked before
    any frame is decoded.
    """
    from analysis.arrival.arrival_map import arrival_map_iter
    from analysis.stack.budget import check_memory_budget

    stack.require_calibration()
    check_memory_budget(stack, memory_budget_mb)
    arrival = yield from scaled(arrival_map_iter(stack, settings=settings.arrival), 0.0, 0.85)
    analysis = yield from scaled(analyze_arrival_iter(
        arrival, settings=settings, edits=edits, isothermal_start_s=isothermal_start_s,
        temperature_c=temperature_c, thickness_um=thickness_um, stack=str(stack.path),
        geometry=geometry), 0.85, 1.0)
    return analysis


def analyze(stack, **kwargs) -> Analysis:
    return run_to_completion(analyze_iter(stack, **kwargs))


def analyze_experiment_iter(experiment) -> Generator[Progress, None, Analysis]:
    """Analyse a project :class:`Experiment` with its settings, calibration and edits."""
    from analysis.project.file import open_experiment_stack

    stack = open_experiment_stack(experiment)
    return (yield from analyze_iter(
        stack, settings=experiment.settings, edits=tuple(experiment.edits),
        isothermal_start_s=experiment.isothermal_start_s,
        temperature_c=experiment.temperature_c, thickness_um=experiment.thickness_um,
        geometry=experiment.geometry))


def analyze_experiment(experiment) -> Analysis:
    return run_to_completion(analyze_experiment_iter(experiment))
