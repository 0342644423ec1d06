"""Click-to-correct tools: turn clicks on the image into edit records on the model.

Each finished gesture pushes exactly one edit (one undo entry). Two-click gestures
(merge, move centre) remember their first click until the second one, or until Escape /
another tool cancels them. An edit names the detection the user clicked by its id and
its centre as shown; a nucleus added by hand sits exactly at the clicked point and
takes the next free id.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from PySide6.QtCore import QObject, Signal

from analysis.edits import (
    AddNucleus,
    DeleteDetection,
    ExcludeSpherulite,
    IgnoreFrames,
    IncludeSpherulite,
    MergeDetections,
    MoveCentre,
    nearest_index,
)

TOOLS = ("select", "add", "delete", "merge", "move", "exclude")
HINTS = {
    "select": "Click a spherulite to select it.",
    "add": "Click where a nucleus was missed.",
    "delete": "Click the detection to delete.",
    "merge": "Click the detection to keep.",
    "move": "Click the detection whose centre is wrong.",
    "exclude": "Click a spherulite to exclude it from (or include it in) the statistics.",
}
SECOND_HINTS = {
    "merge": "Now click the detection to merge into it (Esc cancels).",
    "move": "Now click the true centre (Esc cancels).",
}
#: Hit tolerance on screen, in screen pixels.
PICK_SCREEN_PX = 14.0


def pick_spherulite(spherulites, x_px: float, y_px: float, tolerance_px: float,
                    radii_px: np.ndarray | None = None) -> Any:
    """The spherulite whose centre is nearest (within tolerance), else the smallest
    whose current front contains the point, else None."""
    centres = [(s.x_px, s.y_px) for s in spherulites]
    hit = nearest_index(x_px, y_px, centres, tolerance_px)
    if hit is not None:
        return spherulites[hit]
    if radii_px is None:
        return None
    best, best_radius = None, np.inf
    for s, radius in zip(spherulites, radii_px):
        inside = np.hypot(s.x_px - x_px, s.y_px - y_px) <= radius
        if inside and radius < best_radius:
            best, best_radius = s, radius
    return best


class ToolController(QObject):
    """The active correction tool and its half-finished gesture."""

    tool_changed = Signal(str)
    hint_changed = Signal(str)

    def __init__(self, model: Any, viewer: Any, parent: QObject | None = None):
        super().__init__(parent)
        self._model, self._viewer = model, viewer
        self.tool = "select"
        self._first: Any = None  # first clicked spherulite of a two-click gesture
        viewer.image_clicked.connect(self.click)
        model.selection_changed.connect(lambda *_: self.cancel_gesture())

    def set_tool(self, tool: str) -> None:
        if tool not in TOOLS:
            raise ValueError(f"unknown tool {tool!r}")
        self.tool, self._first = tool, None
        self.tool_changed.emit(tool)
        self.hint_changed.emit(HINTS[tool])

    def cancel_gesture(self) -> None:
        if self._first is not None:
            self._first = None
            self.hint_changed.emit(HINTS[self.tool])

    def click(self, x_px: float, y_px: float) -> None:
        """Handle one click at image position (x = column, y = row) on frame 0's grid."""
        index = self._model.current_index
        if index < 0:
            return
        if self.tool == "add":
            result = self._model.result(index)
            new_id = result.next_detection_id() if result is not None else None
            self._model.push_edit(index, AddNucleus(round(x_px, 1), round(y_px, 1), id=new_id))
            return
        if self.tool == "move" and self._first is not None:
            first, self._first = self._first, None
            self._model.push_edit(index, MoveCentre(first.x_px, first.y_px, round(x_px, 1),
                                                    round(y_px, 1), id=first.id))
            self.hint_changed.emit(HINTS["move"])
            return
        target = self._pick(x_px, y_px)
        if target is None:
            self.hint_changed.emit("No spherulite there. " + HINTS[self.tool])
            if self.tool == "select":
                self._model.select_spherulite(-1)
            return
        self._apply(index, target)

    def ignore_frames_edit(self, first_frame: int, last_frame: int, whole: bool) -> IgnoreFrames:
        """The record for ignoring a frame range (selected spherulite or whole experiment)."""
        target = None if whole else self._model.selected_spherulite()
        if target is None:
            return IgnoreFrames(int(first_frame), int(last_frame))
        return IgnoreFrames(int(first_frame), int(last_frame), target.x_px, target.y_px,
                            id=target.id)

    # ---------------------------------------------------------------- internals
    def _apply(self, index: int, target: Any) -> None:
        if self.tool == "select":
            self._model.select_spherulite(target.id)
        elif self.tool == "delete":
            self._model.push_edit(index, DeleteDetection(target.x_px, target.y_px, id=target.id))
        elif self.tool == "exclude":
            cls = IncludeSpherulite if target.status in ("excluded", "rejected") else ExcludeSpherulite
            self._model.push_edit(index, cls(target.x_px, target.y_px, id=target.id))
        elif self._first is None:  # merge / move: first click
            self._model.select_spherulite(target.id)  # (a selection change resets _first)
            self._first = target
            self.hint_changed.emit(SECOND_HINTS[self.tool])
        elif self.tool == "merge":
            first, self._first = self._first, None
            if first.id != target.id:
                self._model.push_edit(index, MergeDetections(
                    first.x_px, first.y_px, target.x_px, target.y_px, id=first.id,
                    other_id=target.id))
            self.hint_changed.emit(HINTS["merge"])

    def _pick(self, x_px: float, y_px: float) -> Any:
        result = self._model.result(self._model.current_index)
        shown = [s for s in (result.spherulites if result is not None else ())
                 if s.status != "rejected" or getattr(self._viewer, "show_rejected", False)]
        if not shown:
            return None
        scale = self._viewer.view_box.viewPixelSize()[0] or 1.0
        tolerance = max(2.0, PICK_SCREEN_PX * scale)
        time_s = self._viewer.time_from_start_s()
        radii = None
        if time_s is not None and result.um_per_px:
            radii = np.array([(s.radius_um_at(time_s) or 0.0) / result.um_per_px for s in shown])
        return pick_spherulite(shown, x_px, y_px, tolerance, radii)
