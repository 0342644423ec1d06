"""Pixels followed through the streaming pass: detection, persistence and half-plateau timing.

A melt pixel whose evidence reaches the threshold starts being *tracked* with the other
pixels detected in the same frame (a cohort). It must stay above ``hysteresis ×
threshold`` for ``persistence_frames`` frames, otherwise it goes back to melt; a tracked
pixel keeps the evidence of the frame before detection and of the next ``track_frames``
frames, and when it retires its arrival is where the evidence crossed half of its own
plateau (see :mod:`analysis.arrival.arrival_map`). All state is O(H·W).
"""

from __future__ import annotations

import numpy as np

MELT, TRACKING, DONE = 0, 1, 2
_MIN_HISTORY = 4    # columns of evidence (pre-detection frame included) needed to judge a plateau


class _Cohort:
    """Pixels detected in the same frame, tracked together until they retire."""

    def __init__(self, index, frame, before, now, width):
        self.index = index
        self.first = frame                      # frame index of detection
        self.history = np.zeros((index.size, width), np.float32)
        self.history[:, 0], self.history[:, 1] = before, now
        self.count = 2                          # filled history columns

    def record(self, evidence_flat):
        self.history[:, self.count] = evidence_flat[self.index]
        self.count += 1

    def keep(self, chosen):
        self.index, self.history = self.index[chosen], self.history[chosen]


def _half_plateau_times(history, count, first, times, threshold):
    """Arrival time and plateau of retired pixels from their evidence histories.

    Column j of a history holds frame ``first + j - 1``; ``count`` columns are filled.
    The plateau is the mean of the last (up to) three columns; the arrival is where the
    evidence first reached half of it (never before the pre-detection value), linearly
    interpolated in time.
    """
    n, width = history.shape
    cols = np.arange(count)
    history = history[:, :count]
    tail = cols >= max(count - 3, 1)
    plateau = history[:, tail].mean(axis=1)
    level = np.maximum(0.5 * plateau, np.minimum(history[:, 0] + 1e-3 * threshold, history[:, 1]))
    above = (cols[None, :] >= 1) & (history >= level[:, None])
    j = np.argmax(above, axis=1)
    j = np.where(above.any(axis=1), j, 1)
    rows = np.arange(n)
    lo, hi = history[rows, j - 1], history[rows, j]
    fraction = np.clip((level - lo) / np.maximum(hi - lo, 1e-6), 0.0, 1.0)
    frame_hi = np.minimum(first + j - 1, times.size - 1)
    frame_lo = np.maximum(frame_hi - 1, 0)
    arrival = times[frame_lo] + fraction * (times[frame_hi] - times[frame_lo])
    return arrival.astype(np.float32), plateau.astype(np.float32)


class PassState:
    """Everything the streaming pass keeps between frames (all O(H·W))."""

    def __init__(self, shape, n_frames, settings):
        size = shape[0] * shape[1]
        self.shape = shape
        self.status = np.zeros(size, np.uint8)
        self.arrival = np.full(size, np.inf, np.float32)
        self.contrast = np.zeros(size, np.float32)
        self.previous = np.zeros(size, np.float32)
        self.detected = np.full(size, np.iinfo(np.int32).max, np.int32)   # frame of detection
        self.shifts = np.zeros((n_frames, 2))
        self.measured = np.zeros(n_frames, bool)
        self.cohorts: list[_Cohort] = []
        self.gate = np.zeros(size, np.float32)   # detection level: threshold on melt, inf elsewhere
        self.width = settings.track_frames + 1
        self.threshold = float("nan")
        self.settings = settings



def step_frame(state, evidence_flat, k, times, threshold):
    """Detect, track and retire pixels for frame k."""
    settings = state.settings
    for cohort in state.cohorts:
        cohort.record(evidence_flat)
        if cohort.count - 2 <= settings.persistence_frames - 1:  # still proving it persists
            held = cohort.history[:, cohort.count - 1] >= settings.hysteresis * threshold
            if not held.all():
                _release(state, cohort.index[~held], threshold)
                cohort.keep(held)
    while state.cohorts and state.cohorts[0].count >= state.width:
        _retire(state, state.cohorts.pop(0), times)
    fresh = np.flatnonzero(evidence_flat >= state.gate)
    if fresh.size:
        state.cohorts.append(_Cohort(fresh, k, state.previous[fresh], evidence_flat[fresh], state.width))
        state.status[fresh] = TRACKING
        state.gate[fresh] = np.inf
        state.detected[fresh] = k
    state.previous = evidence_flat


def _release(state, index, threshold):
    """Pixels whose evidence did not persist go back to melt."""
    state.status[index] = MELT
    state.gate[index] = threshold
    state.detected[index] = np.iinfo(np.int32).max


def _retire(state, cohort, times):
    if cohort.index.size == 0:
        return
    arrival, plateau = _half_plateau_times(cohort.history, cohort.count, cohort.first, times, state.threshold)
    state.arrival[cohort.index] = arrival
    state.contrast[cohort.index] = plateau
    state.status[cohort.index] = DONE


def retire_all(state, times, threshold):
    """End of the record: pixels detected in the last two frames have no plateau yet and
    stay uncounted; the others count if their evidence held up."""
    for cohort in state.cohorts:
        if cohort.count < _MIN_HISTORY:
            _release(state, cohort.index, threshold)
            continue
        low = cohort.history[:, 1:cohort.count] < state.settings.hysteresis * threshold
        held = ~low.any(axis=1)
        _release(state, cohort.index[~held], threshold)
        cohort.keep(held)
        _retire(state, cohort, times)
    state.cohorts = []
