"""The user's corrections as a declarative list of records.

Each edit is a small frozen dataclass with a ``kind`` name. An edit names the detection
it acts on by its identity: the detection's ``id`` *and* its centre in pixels when the
user acted (``x_px``, ``y_px``). Replaying the list finds the detection with that id when
its centre is still within the tolerance of the recorded one; only when the automatic
detections have changed (other settings, a new version) and the id now belongs to
another nucleus does it fall back on the detection nearest to the recorded centre. An
edit whose target cannot be found is reported as unapplied, never silently dropped.
Records without an ``id`` (written before ids were stored) are found by position only.

A nucleus added by hand carries the id it was given (``AddNucleus.id``) and sits exactly
at the clicked point, which later edits name it by.

Project files store edits as ``{"kind": "add_nucleus", ...}`` records keyed by name,
never by class path. Coordinates: x = column, y = row, pixel centres at integers.
Frame indices are 0-based and inclusive.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, fields, replace
from typing import Any, ClassVar, Sequence

from analysis.errors import InputError


@dataclass(frozen=True)
class AddNucleus:
    """A nucleus the automatic detection missed, fixed exactly at the clicked point.

    ``id`` is the identity it takes (None: the next free one when replayed).
    """

    kind: ClassVar[str] = "add_nucleus"
    x_px: float
    y_px: float
    id: int | None = None


@dataclass(frozen=True)
class DeleteDetection:
    """Remove the detection at (x_px, y_px): dust, a bubble, a scratch."""

    kind: ClassVar[str] = "delete_detection"
    x_px: float
    y_px: float
    id: int | None = None


@dataclass(frozen=True)
class MergeDetections:
    """Merge detection ``other_id`` (at other_x_px, other_y_px) into ``id`` (at x_px, y_px)."""

    kind: ClassVar[str] = "merge_detections"
    x_px: float
    y_px: float
    other_x_px: float
    other_y_px: float
    id: int | None = None
    other_id: int | None = None


@dataclass(frozen=True)
class MoveCentre:
    """Hold the centre of detection ``id`` (at x_px, y_px) exactly at (new_x_px, new_y_px)."""

    kind: ClassVar[str] = "move_centre"
    x_px: float
    y_px: float
    new_x_px: float
    new_y_px: float
    id: int | None = None


@dataclass(frozen=True)
class ExcludeSpherulite:
    """Keep the detection but leave it out of the pooled statistics."""

    kind: ClassVar[str] = "exclude"
    x_px: float
    y_px: float
    id: int | None = None


@dataclass(frozen=True)
class IncludeSpherulite:
    """Undo an exclusion made earlier in the list (or force an automatic reject in)."""

    kind: ClassVar[str] = "include"
    x_px: float
    y_px: float
    id: int | None = None


@dataclass(frozen=True)
class IgnoreFrames:
    """Ignore frames first_frame..last_frame (inclusive), for one spherulite or all.

    With ``x_px``/``y_px`` (and ``id``) set, only that spherulite's radius samples in the
    range are ignored; with both positions ``None`` the frames are ignored for the whole
    experiment (focus loss, a temperature overshoot).
    """

    kind: ClassVar[str] = "ignore_frames"
    first_frame: int
    last_frame: int
    x_px: float | None = None
    y_px: float | None = None
    id: int | None = None


Edit = (
    AddNucleus
    | DeleteDetection
    | MergeDetections
    | MoveCentre
    | ExcludeSpherulite
    | IncludeSpherulite
    | IgnoreFrames
)

EDIT_KINDS: dict[str, type] = {
    cls.kind: cls
    for cls in (
        AddNucleus,
        DeleteDetection,
        MergeDetections,
        MoveCentre,
        ExcludeSpherulite,
        IncludeSpherulite,
        IgnoreFrames,
    )
}


def edit_to_dict(edit: Edit) -> dict[str, Any]:
    """Serialise an edit as a JSON-ready record with its ``kind`` first."""
    return {"kind": edit.kind, **asdict(edit)}


def edit_from_dict(record: dict[str, Any], *, path: str | None = None) -> Edit:
    """Build an edit from a project-file record; :class:`InputError` if malformed."""
    if not isinstance(record, dict) or "kind" not in record:
        raise InputError(f"edit record without a 'kind': {record!r}", path)
    cls = EDIT_KINDS.get(record["kind"])
    if cls is None:
        raise InputError(f"unknown edit kind {record['kind']!r}", path)
    names = {f.name for f in fields(cls)}
    values = {k: v for k, v in record.items() if k in names}
    try:
        edit = cls(**values)
    except TypeError as exc:
        raise InputError(f"edit {record['kind']!r} is incomplete: {exc}", path) from None
    for name in names:
        value = getattr(edit, name)
        if value is not None and not (
            isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
        ):
            raise InputError(f"edit {record['kind']!r} has a bad {name}: {value!r}", path)
        if name in _ID_FIELDS and value is not None and (value != int(value) or value < 1):
            raise InputError(f"edit {record['kind']!r} has a bad {name}: {value!r}", path)
    if any(getattr(edit, name, None) is not None for name in _ID_FIELDS):
        edit = replace(edit, **{n: int(getattr(edit, n)) for n in _ID_FIELDS
                                if getattr(edit, n, None) is not None})
    return edit


#: Fields that hold a detection id (positive integers).
_ID_FIELDS = ("id", "other_id")


def target_ids(edit: Edit) -> tuple[int, ...]:
    """The ids of the detections an edit names (empty for a whole-experiment edit)."""
    return tuple(int(v) for n in _ID_FIELDS if (v := getattr(edit, n, None)) is not None)


def nearest_index(
    x_px: float,
    y_px: float,
    centres_xy: Sequence[tuple[float, float]],
    tolerance_px: float,
) -> int | None:
    """Index of the centre nearest to (x_px, y_px) within ``tolerance_px``, else None."""
    best, best_d2 = None, tolerance_px * tolerance_px
    for i, (cx, cy) in enumerate(centres_xy):
        d2 = (cx - x_px) ** 2 + (cy - y_px) ** 2
        if d2 <= best_d2:
            best, best_d2 = i, d2
    return best
