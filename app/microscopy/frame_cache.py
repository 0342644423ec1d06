"""A small LRU cache of display-ready frames, read lazily from a FrameStack.

Frames are read on demand and converted once to what the image item draws fastest
(float32 grey or uint8/float32 RGB), so scrubbing back and forth over recent frames
costs no file access.
"""

from __future__ import annotations

from collections import OrderedDict
from typing import Any

import numpy as np


def to_grey(frame: np.ndarray) -> np.ndarray:
    """Luminance of an RGB frame (Rec. 601 weights), float32; grey frames pass through."""
    if frame.ndim == 3:
        weights = np.array([0.299, 0.587, 0.114], dtype=np.float32)
        return frame[..., :3].astype(np.float32) @ weights
    return frame


def auto_levels(frame: np.ndarray, low_pct: float = 0.5, high_pct: float = 99.5) -> tuple:
    """Percentile black/white levels from a subsample of the frame (fast on big frames)."""
    step = max(1, int(np.sqrt(frame.shape[0] * frame.shape[1] / 65536)))
    sample = frame[::step, ::step]
    sample = sample[np.isfinite(sample)] if sample.dtype.kind == "f" else sample.ravel()
    if sample.size == 0:
        return 0.0, 1.0
    low, high = np.percentile(sample, [low_pct, high_pct])
    if high <= low:
        high = low + 1.0
    return float(low), float(high)


class FrameCache:
    """LRU cache over ``stack[i]`` with an optional grey conversion."""

    def __init__(self, stack: Any, capacity: int = 24):
        self.stack = stack
        self.capacity = capacity
        self.grey = False
        self._frames: OrderedDict = OrderedDict()

    def __len__(self) -> int:
        return len(self.stack)

    def set_grey(self, grey: bool) -> None:
        if grey != self.grey:
            self.grey = grey
            self._frames.clear()

    def frame(self, index: int) -> np.ndarray:
        key = int(index)
        if key in self._frames:
            self._frames.move_to_end(key)
            return self._frames[key]
        frame = np.asarray(self.stack[key])
        if self.grey:
            frame = to_grey(frame)
        self._frames[key] = frame
        if len(self._frames) > self.capacity:
            self._frames.popitem(last=False)
        return frame
