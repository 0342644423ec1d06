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
    #: Gaussian sigma (px) shared by neighbouring arrival times: the evidence smoothing and
    #: the edge blur of the recording (0 when unknown, e.g. an exact map).
    correlation_px: float = 0.0
    cache: dict = field(default_factory=dict, compare=False, repr=False)
    #: Cache keys of the automatic result's cone fits: a held detection whose fit has
    #: one of these keys is unchanged and keeps its automatic fit exactly.
    auto_fit_keys: frozenset = frozenset()
    #: Collects the cone-fit keys an evaluation uses (set only while recording them).
    fit_key_recorder: set | None = field(default=None, compare=False, repr=False)



@dataclass
class Detection:
    """One detection while the edits are replayed.

    ``fixed_xy`` is a centre the user set (a manual nucleus or a moved centre): the fit
    keeps it exactly. ``anchor_xy`` is the centre the automatic analysis found; while
    ``held``, the fit keeps it whenever the detection's pixels differ from the automatic
    ones (a neighbour was edited), so an edit never moves a detection it does not name.
    A merge frees the centre of the detection it keeps (its territory is a new one).
    """

    id: int
    seeds: list  # flat pixel indices of the marker(s)
    anchor_xy: tuple[float, float]
    held: bool = False
    source: str = "auto"
    fixed_xy: tuple[float, float] | None = None
    excluded: bool | None = None
    ignored: list = field(default_factory=list)
    deleted: bool = False
    merged: bool = False
    absorbed: list = field(default_factory=list)  # ids merged into this one

    @property
    def centre_xy(self) -> tuple[float, float]:
        """Where the user saw the detection when acting: its fixed or automatic centre."""
        return self.fixed_xy if self.fixed_xy is not None else self.anchor_xy

    @property
    def hold_xy(self) -> tuple[float, float] | None:
        """The centre its fit must keep, if any: fixed by the user, else held automatic."""
        return self.fixed_xy if self.fixed_xy is not None else (self.anchor_xy if self.held else None)

    @property
    def live(self) -> bool:
        return not (self.deleted or self.merged)


def auto_detections(ctx: Context, *, anchored: bool = False) -> list[Detection]:
    """The automatic detections, ids 1..n in marker order; ``anchored``: their centres
    held at the automatic result's (for the replay of edits)."""
    marked = np.flatnonzero(ctx.markers.labels)  # markers are small: sort only their pixels
    which = ctx.markers.labels.ravel()[marked]
    ranked = nuclei.label_order(which)
    order = marked[ranked]
    bounds = np.searchsorted(which[ranked], np.arange(1, ctx.markers.xy_px.shape[0] + 2))
    return [Detection(k + 1, [order[bounds[k]:bounds[k + 1]]],
                      tuple(map(float, ctx.auto_lookup_xy[k])), held=anchored)
            for k in range(ctx.markers.xy_px.shape[0])]


class _Targets:
    """Resolves the detection an edit names: by id while the id is still at the recorded
    place, else (the automatic detections changed) the nearest live one to that place.

    Handles are the ids the user saw when acting; once resolved, a handle keeps pointing
    to the same detection for the rest of the list.
    """

    def __init__(self, dets: list[Detection], tolerance_px: float):
        self.dets, self.tol = dets, tolerance_px
        self.by_handle = {d.id: d for d in dets}

    def find(self, handle: int | None, x_px, y_px) -> Detection | None:
        det = self.by_handle.get(handle) if handle is not None else None
        # A merged territory's centre is only known once fitted: trust its id alone.
        if det is not None and det.live and (self._near(det, x_px, y_px) or det.absorbed):
            return det
        live = [d for d in self.dets if d.live]
        k = nearest_index(x_px, y_px, [d.centre_xy for d in live], self.tol)
        det = None if k is None else live[k]
        if det is not None and handle is not None:
            self.by_handle[handle] = det
        return det

    def _near(self, det, x_px, y_px) -> bool:
        cx, cy = det.centre_xy
        return (cx - x_px) ** 2 + (cy - y_px) ** 2 <= self.tol ** 2

    def add(self, handle: int | None, det: Detection) -> None:
        self.dets.append(det)
        if handle is not None:
            self.by_handle[handle] = det

    def next_id(self) -> int:
        return max((d.id for d in self.dets), default=0) + 1


def replay(ctx, edits, settings) -> tuple[list[Detection], list, list]:
    """The detections after ``edits`` (in list order), the frame spans ignored for the
    whole experiment, and the edits that found no target."""
    targets = _Targets(auto_detections(ctx, anchored=True), settings.edit_tolerance_px)
    global_ignored: list[tuple[int, int]] = []
    unapplied: list[Edit] = []
    for edit in edits:
        if not _apply_one(ctx, targets, global_ignored, edit):
            unapplied.append(edit)
    return targets.dets, global_ignored, unapplied


def _frame_range(ctx, edit) -> tuple[int, int] | None:
    first, last = int(edit.first_frame), int(edit.last_frame)
    if first > last or last < 0 or first >= ctx.frames:
        return None
    return max(first, 0), min(last, ctx.frames - 1)


def _inside(ctx, x, y) -> bool:
    h, w = ctx.shape
    return -0.5 <= x <= w - 0.5 and -0.5 <= y <= h - 0.5


def _apply_one(ctx, targets: _Targets, global_ignored, edit) -> bool:
    kind = edit.kind
    if kind == "add_nucleus":
        return _add_nucleus(ctx, targets, edit)
    if kind == "ignore_frames":
        span = _frame_range(ctx, edit)
        if span is None:
            return False
        if edit.x_px is None or edit.y_px is None:
            global_ignored.append(span)
            return True
        target = targets.find(edit.id, edit.x_px, edit.y_px)
        return target is not None and (target.ignored.append(span) or True)
    target = targets.find(edit.id, edit.x_px, edit.y_px)
    if target is None:
        return False
    if kind == "delete_detection":
        target.deleted = True
    elif kind == "merge_detections":
        other = targets.find(edit.other_id, edit.other_x_px, edit.other_y_px)
        if other is None or other is target:
            return False
        target.seeds.extend(other.seeds)
        target.absorbed.extend([other.id, *other.absorbed])
        target.ignored.extend(other.ignored)
        target.held = False  # a new territory: its centre is fitted afresh
        other.merged = True
    elif kind == "move_centre":
        if not _inside(ctx, edit.new_x_px, edit.new_y_px):
            return False
        target.fixed_xy = (float(edit.new_x_px), float(edit.new_y_px))
    elif kind in ("exclude", "include"):
        target.excluded = kind == "exclude"
    else:
        return False
    return True


def _add_nucleus(ctx, targets: _Targets, edit) -> bool:
    """A manual nucleus fixed at the clicked point. Its watershed seed is the nearest
    pixel that is crystallised and free of other seeds (within 3 px); the centre is
    the click itself, never snapped."""
    x, y = float(edit.x_px), float(edit.y_px)
    if not _inside(ctx, x, y):
        return False
    seed = _free_seed_pixel(ctx, targets.dets, x, y, 3)
    if seed is None:
        return False
    new_id = edit.id
    if new_id is None or any(d.id == new_id for d in targets.dets):
        new_id = targets.next_id()
    det = Detection(new_id, [np.array([seed])], (x, y), source="manual", fixed_xy=(x, y))
    targets.add(edit.id, det)
    return True


def _free_seed_pixel(ctx, dets, x, y, radius_px) -> int | None:
    h, w = ctx.shape
    taken = np.concatenate([s for d in dets if not d.deleted for s in d.seeds] or
                           [np.zeros(0, np.int64)])
    row, col = min(max(int(round(y)), 0), h - 1), min(max(int(round(x)), 0), w - 1)
    y0, y1 = max(row - radius_px, 0), min(row + radius_px + 1, h)
    x0, x1 = max(col - radius_px, 0), min(col + radius_px + 1, w)
    yy, xx = np.mgrid[y0:y1, x0:x1]
    flat = (yy * w + xx).ravel()
    ok = nuclei.crystallised_mask(ctx.arrival_s).ravel()[flat] & ~np.isin(flat, taken)
    if not ok.any():
        return None
    d2 = ((yy - y) ** 2 + (xx - x) ** 2).ravel()
    d2[~ok] = np.inf
    return int(flat[int(np.argmin(d2))])


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

