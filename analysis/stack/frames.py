"""Lazy time-lapse stacks with their calibration and frame times.

:func:`open_stack` opens a multi-page TIFF, a folder of frames or a video and returns a
:class:`FrameStack`: length, one frame by index, shape, dtype, frame times in seconds and
micrometres per pixel, each with a note of where it came from. Frames are read on
demand (memory-mapped where the TIFF layout allows), so opening a 4 GB stack costs only
its header.

Calibration precedence: values the user gives override the file's metadata; a file with
no scale stays *uncalibrated* (``um_per_px is None``), never a silent 1 µm/px. Callers
that need a calibration call :meth:`FrameStack.require_calibration`.
"""

from __future__ import annotations

import math
import re
from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np

from analysis.errors import InputError
from analysis.stack.sources import FolderSource, open_source

__all__ = ["FrameStack", "open_stack", "parse_times_from_names"]


class FrameStack:
    """A lazily read time-lapse stack.

    Frames are ``(H, W)`` (grey) or ``(H, W, 3)`` (RGB) arrays in the file's own dtype.
    ``times_s`` are on the recording clock in seconds (frame 0 at its recorded time,
    usually 0); the time the sample reached Tc is an experiment property, not the
    stack's.
    """

    def __init__(self, source, *, um_per_px, interval_s, times_s, sources):
        self._source = source
        self.path = str(source.path)
        self.um_per_px: float | None = um_per_px
        self.interval_s: float | None = interval_s
        self.times_s: np.ndarray | None = times_s
        self.sources: dict[str, str] = sources

    def __len__(self) -> int:
        return self._source.count

    def __getitem__(self, index: int) -> np.ndarray:
        index = int(index)
        if index < 0:
            index += len(self)
        if not 0 <= index < len(self):
            raise IndexError(f"frame {index} out of range for {len(self)} frames")
        return self._source.read(index)

    def __repr__(self) -> str:
        return f"FrameStack({self.path!r}, frames={len(self)}, frame_shape={self.frame_shape})"

    @property
    def kind(self) -> str:
        return self._source.kind

    @property
    def frame_shape(self) -> tuple[int, ...]:
        return tuple(self._source.frame_shape)

    @property
    def shape(self) -> tuple[int, ...]:
        return (len(self), *self.frame_shape)

    @property
    def dtype(self) -> np.dtype:
        return np.dtype(self._source.dtype)

    @property
    def is_rgb(self) -> bool:
        return len(self.frame_shape) == 3

    def iter_frames(self, start: int = 0, stop: int | None = None) -> Iterator[np.ndarray]:
        """Yield frames ``start..stop-1`` one at a time (streaming; nothing is kept)."""
        stop = len(self) if stop is None else min(stop, len(self))
        for index in range(start, stop):
            yield self._source.read(index)

    def to_array(self) -> np.ndarray:
        """Load the whole stack into memory. Only for small stacks and tests."""
        return np.stack(list(self.iter_frames()))

    def require_calibration(self) -> None:
        """Raise :class:`InputError` naming the file if scale or frame times are missing."""
        if self.um_per_px is None:
            raise InputError(
                "no pixel size in the file and none given; set µm/px (e.g. --um-per-px 0.65)",
                self.path,
            )
        if self.times_s is None:
            raise InputError(
                "no frame interval or times in the file and none given; set the interval "
                "(e.g. --interval-s 5)",
                self.path,
            )

    def close(self) -> None:
        self._source.close()


def open_stack(
    path,
    *,
    um_per_px: float | None = None,
    interval_s: float | None = None,
    times_s: Sequence[float] | None = None,
    name_pattern: str | None = None,
) -> FrameStack:
    """Open a stack; user-given calibration overrides what the file says.

    Parameters
    ----------
    path : path-like
        A multi-page TIFF, a folder of images, or an AVI/MP4 video.
    um_per_px : float, optional
        Micrometres per pixel (from a stage micrometer).
    interval_s : float, optional
        Time between frames in seconds (uniform sampling).
    times_s : sequence of float, optional
        Explicit frame times in seconds, one per frame, strictly increasing.
    name_pattern : str, optional
        For folders: a regular expression whose first group (or a group named ``s``,
        ``ms`` or ``min``) is the frame time in the file name, e.g. ``r"_t(\\d+)s"``.
    """
    path = Path(path)
    source = open_source(path)
    meta = source.calibration
    sources: dict[str, str] = {}

    scale = _checked_positive(um_per_px, "µm/px", path)
    if scale is not None:
        sources["um_per_px"] = "user"
    elif meta.um_per_px is not None:
        scale, sources["um_per_px"] = meta.um_per_px, meta.um_per_px_source
    else:
        sources["um_per_px"] = "missing"

    times, interval = _frame_times(source, path, interval_s, times_s, name_pattern, sources)
    return FrameStack(source, um_per_px=scale, interval_s=interval, times_s=times, sources=sources)


def _checked_positive(value, what: str, path) -> float | None:
    if value is None:
        return None
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise InputError(f"{what} must be a positive number, got {value:g}", path)
    return value


def _frame_times(source, path, interval_s, times_s, name_pattern, sources):
    """Frame times and interval by precedence: explicit list, interval, names, file."""
    count, meta = source.count, source.calibration
    interval = _checked_positive(interval_s, "frame interval (s)", path)
    if times_s is not None:
        times = _checked_times(times_s, count, path)
        sources["times_s"] = "user (explicit list)"
        return times, _uniform_interval(times)
    if interval is not None:
        sources["times_s"] = sources["interval_s"] = "user"
        return interval * np.arange(count, dtype=float), interval
    if name_pattern is not None:
        if not isinstance(source, FolderSource):
            raise InputError("frame times from file names need a folder of frames", path)
        times = _checked_times(parse_times_from_names(source.files, name_pattern), count, path)
        sources["times_s"] = "file names"
        return times, _uniform_interval(times)
    if meta.times_s is not None and len(meta.times_s) == count:
        sources["times_s"] = meta.times_source
        times = np.asarray(meta.times_s, dtype=float)
        return times, _uniform_interval(times)
    if meta.interval_s is not None:
        sources["times_s"] = sources["interval_s"] = meta.interval_source
        return meta.interval_s * np.arange(count, dtype=float), meta.interval_s
    sources["times_s"] = "missing"
    return None, None


def _checked_times(times, count: int, path) -> np.ndarray:
    times = np.asarray(times, dtype=float)
    if times.shape != (count,):
        raise InputError(f"{len(times)} frame times given for {count} frames", path)
    if not np.all(np.isfinite(times)):
        raise InputError("frame times contain NaN or infinity", path)
    if count > 1 and not np.all(np.diff(times) > 0):
        raise InputError("frame times must increase strictly", path)
    return times


def _uniform_interval(times: np.ndarray) -> float | None:
    """The interval if the times are evenly spaced (to 1 %), else None."""
    if len(times) < 2:
        return None
    steps = np.diff(times)
    return float(np.mean(steps)) if np.ptp(steps) <= 0.01 * np.mean(steps) else None


def parse_times_from_names(files: Sequence[Path], pattern: str) -> np.ndarray:
    """Frame times in seconds parsed from file names with a regular expression.

    The first capture group is taken as seconds unless the group is named ``ms``,
    ``s`` or ``min``.
    """
    try:
        regex = re.compile(pattern)
    except re.error as exc:
        raise InputError(f"bad file-name pattern {pattern!r}: {exc}") from None
    scale = {"ms": 1e-3, "s": 1.0, "min": 60.0}
    times = []
    for file in files:
        match = regex.search(Path(file).name)
        if match is None or not match.groups():
            raise InputError(f"file name does not match the time pattern {pattern!r}", file)
        named = {k: v for k, v in match.groupdict().items() if v is not None and k in scale}
        unit, text = next(iter(named.items())) if named else ("s", match.group(1))
        try:
            times.append(float(text.replace(",", ".")) * scale[unit])
        except ValueError:
            raise InputError(f"time {text!r} in the file name is not a number", file) from None
    return np.asarray(times)
