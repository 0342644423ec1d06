"""The review queue: doubtful detections one after another, judged by keyboard.

The analysis ranks the detections by confidence
(:func:`analysis.spherulites.evidence_checks.review_order`); the queue walks that list
(next / previous), and for each one selects it, shows the frame in which it is best
judged (its front half-way to the nearest other nucleus) and zooms on it. Accept, reject
and split each push exactly one edit, so each is one undo step:

- accept: an ``include`` edit (counts it, and promotes a rejected candidate);
- reject: a ``delete`` edit (a false detection: dust, a bubble, noise);
- split: the detection becomes two spherulites at the nuclei of the best two-cone fit to
  its arrival times (:func:`analysis.spherulites.pipeline.split_nuclei`): its centre
  moves to the first, a nucleus is added at the second; both edits are one undo step,
  kept in the project and replayed after every re-analysis. When its pixels cannot
  support two cones, the add-nucleus tool is offered so the second nucleus can be clicked.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import QObject, Signal

from analysis.edits import AddNucleus, DeleteDetection, IncludeSpherulite, MoveCentre
from analysis.spherulites.evidence_checks import best_frame, nearest_other_px, review_order
from analysis.spherulites.pipeline import split_nuclei


class ReviewQueue(QObject):
    """Walks the doubtful detections of the current experiment."""

    message = Signal(str)  # one line for the status bar

    def __init__(self, model: Any, viewer: Any, tools: Any, parent: QObject | None = None):
        super().__init__(parent)
        self._model, self._viewer, self._tools = model, viewer, tools
        self._position = -1

    def queue(self) -> list[int]:
        """Ids in review order for the current experiment (empty without a result)."""
        index = self._model.current_index
        result = self._model.result(index) if index >= 0 else None
        if result is None:
            return []
        return review_order(result.spherulites, include_rejected=self._viewer.show_rejected)

    def step(self, delta: int) -> int | None:
        """Go to the next (+1) or previous (−1) doubtful detection; its id, or None."""
        ids = self.queue()
        if not ids:
            self.message.emit("No doubtful detection to review.")
            return None
        current = self._model.selected_id
        self._position = ids.index(current) + delta if current in ids else (0 if delta > 0 else len(ids) - 1)
        self._position %= len(ids)
        chosen = ids[self._position]
        self._show(chosen, len(ids))
        return chosen

    def accept(self) -> None:
        self._edit(IncludeSpherulite, "accepted")

    def reject(self) -> None:
        self._edit(DeleteDetection, "rejected")

    def split(self) -> None:
        index, target = self._model.current_index, self._model.selected_spherulite()
        if index < 0 or target is None:
            self.message.emit("Select a detection first (next doubtful: J).")
            return
        analysis = self._model.analysis(index)
        pair = split_nuclei(analysis, target.id) if analysis is not None else None
        if pair is None:
            self._tools.set_tool("add")
            self.message.emit(f"#{target.id} shows one growing front only; click the second nucleus "
                              "yourself (S: back to select).")
            return
        (ax, ay), (bx, by) = pair
        self._model.push_edits(index, (MoveCentre(target.x_px, target.y_px, ax, ay, id=target.id),
                                       AddNucleus(bx, by)),
                               f"Split #{target.id} into nuclei at ({ax:.1f}, {ay:.1f}) and ({bx:.1f}, {by:.1f}) px")
        self.message.emit(f"#{target.id} split in two; J for the next doubtful detection.")

    # ---------------------------------------------------------------- internals
    def _edit(self, kind, word: str) -> None:
        index, target = self._model.current_index, self._model.selected_spherulite()
        if index < 0 or target is None:
            self.message.emit("Select a detection first (next doubtful: J).")
            return
        self._model.push_edit(index, kind(target.x_px, target.y_px, id=target.id))
        self.message.emit(f"#{target.id} {word}; J for the next doubtful detection.")

    def _show(self, spherulite_id: int, total: int) -> None:
        index = self._model.current_index
        result = self._model.result(index)
        sph = result.spherulite(spherulite_id)
        self._model.select_spherulite(spherulite_id)
        nearest = nearest_other_px(result.spherulites, spherulite_id)
        times = getattr(getattr(self._model.analysis(index), "arrival", None), "times_s", None)
        if times is not None and self._viewer.frame_count():
            slope = (60.0 * result.um_per_px / sph.growth_rate_um_per_min
                     if sph.growth_rate_um_per_min else float("nan"))
            start = self._model.experiment(index).isothermal_start_s or 0.0
            frame = best_frame(sph, times, start, nearest, slope)
            self._viewer.focus_on(sph.x_px, sph.y_px, frame, min(max(nearest, 30.0), 150.0))
        confidence = "—" if sph.confidence is None else f"{sph.confidence:.2f}"
        why = f": {sph.reason}" if sph.reason else ""
        self.message.emit(f"Review {self._position + 1}/{total}: #{sph.id} {sph.status}{why}, "
                          f"confidence {confidence}. A accept · X reject · Shift+N split · J/K next/previous")
