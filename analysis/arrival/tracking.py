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

from analysis import heuristics

MELT, TRACKING, DONE = 0, 1, 2
_MIN_HISTORY = 4    # columns of evidence (pre-detection frame included) needed to judge a plateau
_NEARBY_PX = 3.0    # reach of the dated crystal a pixel cut short by the record's end is compared with, px


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

    @property
    def full(self) -> bool:
        return self.count >= self.history.shape[1]

    def extended(self, chosen, extra_columns: int) -> "_Cohort":
        """The ``chosen`` pixels, their history kept, with room for ``extra_columns`` more frames."""
        longer = _Cohort.__new__(_Cohort)
        longer.index, longer.first, longer.count = self.index[chosen], self.first, self.count
        longer.history = np.zeros((longer.index.size, self.history.shape[1] + extra_columns), np.float32)
        longer.history[:, :self.count] = self.history[chosen, :self.count]
        return longer


def _own_plateau(history, count):
    """Mean of the last (up to) three filled columns of each history."""
    tail = np.arange(count) >= max(count - 3, 1)
    return history[:, :count][:, tail].mean(axis=1)


def _still_rising(history, count, threshold):
    """Pixels whose evidence still climbs: the mean of the last three columns exceeds that
    of the three before by more than ``rise_thresholds`` detection thresholds and by more
    than ``rise_fraction`` of itself (:mod:`analysis.heuristics`)."""
    if count < 7:
        return np.ones(history.shape[0], bool)
    rules = heuristics.current()
    last, before = history[:, count - 3:count].mean(axis=1), history[:, count - 6:count - 3].mean(axis=1)
    return (last - before > rules.rise_thresholds * threshold) & (last - before > rules.rise_fraction * last)


def _half_plateau_times(history, count, first, times, threshold, plateau_floor=None):
    """Arrival time and plateau of retired pixels from their evidence histories.

    Column j of a history holds frame ``first + j - 1``; ``count`` columns are filled.
    The plateau is the mean of the last (up to) three columns, or ``plateau_floor`` (per
    pixel) where that is higher; the arrival is where the evidence first reached half of
    it (never before the pre-detection value), linearly interpolated in time.
    """
    n, width = history.shape
    cols = np.arange(count)
    history = history[:, :count]
    plateau = _own_plateau(history, count)
    if plateau_floor is not None:
        plateau = np.maximum(plateau, plateau_floor)
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
        self.cohorts: list[_Cohort] = []        # tracked for ``width`` columns, oldest first
        self.extended: list[_Cohort] = []       # pixels still rising when their window ended
        self.gate = np.zeros(size, np.float32)   # detection level: threshold on melt, inf elsewhere
        self.width = settings.track_frames + 1
        self.threshold = float("nan")
        self.settings = settings



def step_frame(state, evidence_flat, k, times, threshold):
    """Detect, track and retire pixels for frame k."""
    settings = state.settings
    for cohort in state.extended:
        cohort.record(evidence_flat)
    for done in [c for c in state.extended if c.full]:
        state.extended.remove(done)
        _retire(state, done, times)
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
    """Date the cohort's pixels; those still rising are followed for another window
    (up to ``max_tracking_windows`` in all): a front that takes longer to pass a pixel than one
    window would have its plateau, and so its half-way time, read too early."""
    if cohort.history.shape[1] < heuristics.current().max_tracking_windows * state.width:
        rising = _still_rising(cohort.history, cohort.count, state.threshold)
        if rising.any():
            state.extended.append(cohort.extended(rising, state.width - 1))
            cohort.keep(~rising)
    _date(state, cohort, times)


def _date(state, cohort, times, plateau_floor=None):
    if cohort.index.size == 0:
        return
    arrival, plateau = _half_plateau_times(cohort.history, cohort.count, cohort.first, times, state.threshold,
                                           plateau_floor)
    state.arrival[cohort.index] = arrival
    state.contrast[cohort.index] = plateau
    state.status[cohort.index] = DONE


def retire_all(state, times, threshold):
    """End of the record: pixels detected in the last two frames have no plateau yet and
    stay uncounted; the others count if their evidence held up.

    A pixel still rising when the record ends has not reached its plateau: half of the
    rise so far would date it early (by several frames once fronts move under half a
    pixel per frame). Its plateau is at least that of the finished crystal around it
    (:func:`_finished_plateau_at`); a pixel whose evidence has not reached half of that
    has not been passed by the middle of the front yet and stays melt.
    """
    for cohort in state.extended + state.cohorts:
        if cohort.count < _MIN_HISTORY:
            _release(state, cohort.index, threshold)
            continue
        low = cohort.history[:, 1:cohort.count] < state.settings.hysteresis * threshold
        held = ~low.any(axis=1)
        _release(state, cohort.index[~held], threshold)
        cohort.keep(held)
        rising = _still_rising(cohort.history, cohort.count, threshold)
        floor = np.where(rising, _finished_plateau_at(state, cohort.index), 0.0)
        plateau = np.maximum(_own_plateau(cohort.history, cohort.count), floor)
        passed = (cohort.history[:, 1:cohort.count] >= 0.5 * plateau[:, None]).any(axis=1)
        _release(state, cohort.index[~passed], threshold)
        cohort.keep(passed)
        _date(state, cohort, times, floor[passed])
    state.cohorts, state.extended = [], []


def _finished_plateau_at(state, index) -> np.ndarray:
    """Mean plateau of the dated pixels within ``_NEARBY_PX`` of each pixel in ``index``
    (0 where there are none): the crystal just behind a front, whose birefringence (bright
    quadrants, dark extinction arms) changes with azimuth on the scale of the spherulite,
    not from one pixel to the next."""
    h, w = state.shape
    rows, cols = np.divmod(np.asarray(index), w)
    reach = int(_NEARBY_PX)
    total, count = np.zeros(rows.size), np.zeros(rows.size)
    for dy in range(-reach, reach + 1):
        for dx in range(-reach, reach + 1):
            flat = np.clip(rows + dy, 0, h - 1) * w + np.clip(cols + dx, 0, w - 1)
            dated = (state.status[flat] == DONE) & (state.contrast[flat] > 0)
            total += np.where(dated, state.contrast[flat], 0.0)
            count += dated
    return np.where(count > 0, total / np.maximum(count, 1), 0.0)

