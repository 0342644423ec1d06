"""Cached state of an analysed arrival map, and the user's edits replayed onto its detections.

:class:`Context` holds everything about one experiment that a re-partition and refit
need (no frames). The automatic detections are the markers of its arrival map;
:func:`replay` applies the edits in list order (see :mod:`analysis.spherulites.pipeline` for their
semantics) and :func:`edited_territories` turns the result into territory labels by
editing the automatic flooding locally, so a click stays fast.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field

import numpy as np
from scipy import ndimage as ndi
from skimage.segmentation import watershed

from analysis.edits import Edit, nearest_index
from analysis.spherulites import nuclei


@dataclass(frozen=True)
class Context:
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
    registered_drift_px: float = 0.0  # largest drift the registration removed, px
    cache: dict = field(default_factory=dict, compare=False, repr=False)



@dataclass
class Detection:
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


def auto_detections(ctx: Context) -> list[Detection]:
    marked = np.flatnonzero(ctx.markers.labels)  # markers are small: sort only their pixels
    which = ctx.markers.labels.ravel()[marked]
    ranked = nuclei.label_order(which)
    order = marked[ranked]
    bounds = np.searchsorted(which[ranked], np.arange(1, ctx.markers.xy_px.shape[0] + 2))
    return [Detection(k + 1, [order[bounds[k]:bounds[k + 1]]], tuple(ctx.auto_lookup_xy[k]))
            for k in range(ctx.markers.xy_px.shape[0])]


def _find(dets, x, y, tol) -> Detection | None:
    live = [d for d in dets if not (d.deleted or d.merged)]
    k = nearest_index(x, y, [d.lookup_xy for d in live], tol)
    return None if k is None else live[k]


def replay(ctx, edits, settings) -> tuple[list[Detection], list, list]:
    dets = auto_detections(ctx)
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
    dets.append(Detection(new_id, [np.array([free[0]])], (float(x), float(y)), source="manual"))
    return True


def edited_territories(ctx, dets) -> np.ndarray:
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


def _raw(array: np.ndarray) -> memoryview:
    """The array's bytes without a copy (when it is contiguous)."""
    return memoryview(np.ascontiguousarray(array)).cast("B") if array.size else b""


def digest(*parts) -> str:
    key = hashlib.sha1()
    for part in parts:
        key.update(_raw(part) if isinstance(part, np.ndarray) else repr(part).encode())
    return key.hexdigest()


def cached(ctx, key, compute):
    """Memoise ``compute()`` in the analysis cache (bounded)."""
    if key not in ctx.cache:
        if len(ctx.cache) > 5000:
            ctx.cache.clear()
        ctx.cache[key] = compute()
    return ctx.cache[key]

