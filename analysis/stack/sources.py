"""Readers behind :class:`analysis.stack.frames.FrameStack`: TIFF, folder of images, video.

Each source knows its frame count, frame shape and dtype after opening and reads one
frame on request; nothing reads the whole stack. Every failure of the underlying
libraries is turned into :class:`analysis.errors.InputError` naming the file.
"""

from __future__ import annotations

import logging
import os
import re
from contextlib import contextmanager
from pathlib import Path

import cv2
import numpy as np
import tifffile

from analysis.errors import InputError
from analysis.textio import require_regular_file
from analysis.stack.tiff_metadata import TiffCalibration, read_tiff_calibration

TIFF_SUFFIXES = {".tif", ".tiff"}
IMAGE_SUFFIXES = TIFF_SUFFIXES | {".png", ".jpg", ".jpeg", ".bmp"}
VIDEO_SUFFIXES = {".avi", ".mp4", ".mov", ".mkv", ".m4v"}


def _rgb_or_grey(frame: np.ndarray) -> np.ndarray:
    """Convert an OpenCV BGR(A) frame to RGB, or to grey when all channels agree.

    Lossy codecs leave a grey recording's channels a count or two apart, hence the
    small tolerance.
    """
    if frame.ndim == 2:
        return frame
    frame = frame[..., :3]
    spread = np.ptp(frame.astype(np.int32), axis=2).max()
    if spread <= 2 * max(1, np.iinfo(frame.dtype).max // 255 if frame.dtype.kind == "u" else 1):
        return np.ascontiguousarray(frame[..., 1])
    return np.ascontiguousarray(frame[..., ::-1])


class TiffSource:
    """A multi-page TIFF (grey or RGB), memory-mapped when the file allows it."""

    kind = "tiff"

    def __init__(self, path: Path):
        self.path = path
        try:
            with _tifffile_complaints() as complaints:
                self._tif = tifffile.TiffFile(path)
                series = self._tif.series[0]
            if complaints:
                raise InputError(f"file is damaged or truncated ({complaints[0]})", path)
            self._axes, shape = series.axes, tuple(series.shape)
            self._file_dtype = np.dtype(series.dtype)
            self.dtype = self._file_dtype.newbyteorder("=")
            self.calibration = read_tiff_calibration(self._tif)
            self._frame_axes, self._stored_shape, self._channel_first = _split_axes(self._axes, shape, path)
            self.frame_shape = self._stored_shape[:2] + ((3,) if len(self._stored_shape) == 3 else ())
            self.count = int(np.prod([shape[i] for i in range(len(self._frame_axes))], dtype=np.int64))
            self._check_size(series)
            self._data = self._memmap(series)
        except InputError:
            raise
        except Exception as exc:  # tifffile raises many types on corrupt files
            raise InputError(f"not a readable TIFF stack ({_why(exc)})", path) from None
        if self.count < 1:
            raise InputError("the TIFF holds no frames", path)

    def _check_size(self, series) -> None:
        """Refuse truncated files up front instead of failing on frame 900."""
        meta = self._tif.imagej_metadata if self._tif.is_imagej else None
        if meta and int(meta.get("images", 1)) > self.count:
            raise InputError(
                f"file is truncated: ImageJ header promises {meta['images']} images, "
                f"{self.count} found", self.path)
        size = os.path.getsize(self.path)
        if series.dataoffset is not None:
            end = series.dataoffset + series.nbytes
            if end > size:
                raise InputError(f"file is truncated: {size} bytes, image data needs {end}", self.path)
            return
        for page in self._tif.pages:
            offsets, counts = page.dataoffsets, page.databytecounts
            if offsets and max(o + c for o, c in zip(offsets, counts)) > size:
                raise InputError(f"file is truncated: page {page.index} ends past the file end", self.path)

    def _memmap(self, series):
        if series.dataoffset is None or not self._file_dtype.isnative:
            return None
        shape = (self.count, *self._stored_frame_shape())
        return np.memmap(self.path, dtype=self._file_dtype, mode="r", offset=series.dataoffset, shape=shape)

    def _stored_frame_shape(self) -> tuple[int, ...]:
        if self._channel_first:
            return (self._stored_shape[2], *self._stored_shape[:2])
        return self._stored_shape

    def read(self, index: int) -> np.ndarray:
        try:
            if self._data is not None:
                frame = np.asarray(self._data[index])
            else:
                frame = self._tif.asarray(key=index, series=0)
        except Exception as exc:
            raise InputError(f"frame {index} cannot be read ({_why(exc)})", self.path) from None
        frame = frame.reshape(self._stored_frame_shape())
        if self._channel_first:
            frame = np.moveaxis(frame, 0, -1)
        if frame.ndim == 3:
            frame = frame[..., :3]  # drop alpha
        return frame.astype(frame.dtype.newbyteorder("="), copy=False)

    def close(self) -> None:
        self._tif.close()


@contextmanager
def _tifffile_complaints():
    """Collect what tifffile logs while parsing: it warns, not raises, on broken files."""
    complaints: list[str] = []

    class _Collector(logging.Handler):
        def emit(self, record):
            if record.levelno >= logging.WARNING:
                message = re.sub(r"<tifffile\.[^>]*>\s*", "", record.getMessage())
                complaints.append(message.split("\n")[0][:160])

    logger = logging.getLogger("tifffile")
    handler, propagate = _Collector(), logger.propagate
    logger.addHandler(handler)
    logger.propagate = False
    try:
        yield complaints
    finally:
        logger.removeHandler(handler)
        logger.propagate = propagate


def _split_axes(axes: str, shape: tuple[int, ...], path=None):
    """Split tifffile axes into frame axes and one frame's shape (H, W) or (H, W, 3)."""
    if "Y" not in axes or "X" not in axes:
        raise InputError(f"image axes {axes!r} have no Y and X", path)
    y = axes.index("Y")
    if axes.endswith("YXS"):
        frame_shape, channel_first, frame_axes = shape[y:], False, axes[:y]
    elif axes.endswith("CYX") and shape[y - 1] in (3, 4):
        frame_shape, channel_first, frame_axes = (*shape[y:], shape[y - 1]), True, axes[: y - 1]
    elif axes.endswith("YX"):
        frame_shape, channel_first, frame_axes = shape[y:], False, axes[:y]
    else:
        raise InputError(f"image axes {axes!r} are not supported (expected frames of YX or YXS)", path)
    if "C" in frame_axes and shape[axes.index("C")] > 1:
        raise InputError(
            f"stack has {shape[axes.index('C')]} channels; export one channel or an RGB stack", path)
    if len(frame_shape) == 3 and frame_shape[2] not in (3, 4):
        raise InputError(f"frames have {frame_shape[2]} samples per pixel; expected grey or RGB", path)
    return frame_axes, tuple(int(s) for s in frame_shape), channel_first


def _why(exc: Exception) -> str:
    text = str(exc).strip().splitlines()
    return text[0][:160] if text else type(exc).__name__


def _natural_key(name: str):
    return [int(part) if part.isdigit() else part.lower() for part in re.split(r"(\d+)", name)]


#: Largest single image of a folder stack that is decoded (8192 x 8192 px). Its size is
#: read from the PNG or TIFF header first, so a small file declaring a huge image is
#: refused before any memory is taken; larger frames belong in a TIFF stack, whose
#: analysis is checked against the memory budget (analysis.stack.budget).
MAX_FOLDER_FRAME_PIXELS = 2**26
_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _declared_pixels(file: Path) -> tuple[int, int] | None:
    """(width, height) from a PNG or TIFF header without decoding; None for other formats."""
    suffix = file.suffix.lower()
    if suffix == ".png":
        with open(file, "rb") as stream:
            head = stream.read(24)
        if len(head) == 24 and head.startswith(_PNG_SIGNATURE) and head[12:16] == b"IHDR":
            return int.from_bytes(head[16:20], "big"), int.from_bytes(head[20:24], "big")
        return None
    if suffix in TIFF_SUFFIXES:
        try:
            with tifffile.TiffFile(file) as tif:
                page = tif.pages[0]
                return int(page.imagewidth), int(page.imagelength)
        except Exception:  # unreadable: the decoder's own error names it
            return None
    return None


def _check_declared_size(file: Path) -> None:
    size = _declared_pixels(file)
    if size is not None and size[0] * size[1] > MAX_FOLDER_FRAME_PIXELS:
        raise InputError(f"image of {size[0]} x {size[1]} px is larger than the "
                         f"{MAX_FOLDER_FRAME_PIXELS / 1e6:.0f} Mpx limit for one frame of a "
                         "folder (save large frames as a TIFF stack)", file)


class FolderSource:
    """A folder of single-frame images in natural sort order (frame2 before frame10)."""

    kind = "folder"

    def __init__(self, path: Path):
        self.path = path
        self.files = sorted(
            (p for p in path.iterdir() if p.is_file() and p.suffix.lower() in IMAGE_SUFFIXES),
            key=lambda p: _natural_key(p.name),
        )
        if not self.files:
            raise InputError("folder holds no images (tif, png, jpg or bmp)", path)
        first = self._read_file(self.files[0])
        self.frame_shape, self.dtype = first.shape, first.dtype
        self.count = len(self.files)
        self.calibration = self._calibration_of_first()
        self._check_last_frame()

    def _calibration_of_first(self) -> TiffCalibration:
        first = self.files[0]
        if first.suffix.lower() not in TIFF_SUFFIXES:
            return TiffCalibration()
        with tifffile.TiffFile(first) as tif:
            found = read_tiff_calibration(tif)
        # a single frame's interval says nothing about the spacing between files
        return TiffCalibration(um_per_px=found.um_per_px, um_per_px_source=found.um_per_px_source)

    def _check_last_frame(self) -> None:
        if self.count > 1:
            self.read(self.count - 1)

    def _read_file(self, file: Path) -> np.ndarray:
        _check_declared_size(file)
        try:
            if file.suffix.lower() in TIFF_SUFFIXES:
                frame = tifffile.imread(file, key=0)
            else:
                frame = cv2.imread(str(file), cv2.IMREAD_UNCHANGED)
                if frame is None:
                    raise ValueError("unreadable image")
                frame = _rgb_or_grey(frame)
        except Exception as exc:
            raise InputError(f"image cannot be read ({_why(exc)})", file) from None
        return frame

    def read(self, index: int) -> np.ndarray:
        file = self.files[index]
        frame = self._read_file(file)
        if frame.shape != self.frame_shape:
            raise InputError(
                f"frame size {frame.shape} differs from the first frame's {self.frame_shape}", file
            )
        return frame

    def close(self) -> None:
        pass


class VideoSource:
    """An AVI/MP4 video read with OpenCV; the frame rate gives the interval."""

    kind = "video"

    def __init__(self, path: Path):
        self.path = path
        self._capture = cv2.VideoCapture(str(path))
        if not self._capture.isOpened():
            raise InputError("video cannot be opened (unknown codec or not a video)", path)
        self.count = int(self._capture.get(cv2.CAP_PROP_FRAME_COUNT))
        ok, frame = self._capture.read()
        if not ok or frame is None or self.count < 1:
            raise InputError("video holds no frames", path)
        first = _rgb_or_grey(frame)
        self._grey = first.ndim == 2  # decided once, from the first frame
        self.frame_shape, self.dtype = first.shape, first.dtype
        self._next = 1
        fps = self._capture.get(cv2.CAP_PROP_FPS)
        self.calibration = TiffCalibration(
            interval_s=1.0 / fps if fps and np.isfinite(fps) and fps > 0 else None,
            interval_source="file (video frame rate)",
        )

    def read(self, index: int) -> np.ndarray:
        if index != self._next:
            self._capture.set(cv2.CAP_PROP_POS_FRAMES, index)
        ok, frame = self._capture.read()
        if not ok or frame is None:
            raise InputError(f"frame {index} cannot be read (the video may be truncated)", self.path)
        self._next = index + 1
        frame = frame[..., 1].copy() if self._grey else np.ascontiguousarray(frame[..., 2::-1])
        return frame

    def close(self) -> None:
        self._capture.release()


def open_source(path: Path):
    """Pick the reader for a path: folder, TIFF or video (by suffix)."""
    if not path.exists():
        raise InputError("no such file or folder", path)
    if path.is_dir():
        return FolderSource(path)
    require_regular_file(path, "stack")  # a FIFO or a device would block or never end
    suffix = path.suffix.lower()
    if suffix in TIFF_SUFFIXES:
        return TiffSource(path)
    if suffix in VIDEO_SUFFIXES:
        return VideoSource(path)
    if suffix in IMAGE_SUFFIXES:
        raise InputError("a single image is not a time-lapse; choose the folder that holds the frames", path)
    raise InputError(f"unknown stack type {suffix!r} (use TIFF, a folder of images, AVI or MP4)", path)
