"""Calibration found inside TIFF files: pixel size and frame timing.

Three places are read, most specific first:

1. ImageJ tags (the image description ImageJ and many acquisition programs write):
   ``unit`` plus the XResolution tag (pixels per unit) and ``finterval`` (s).
2. OME-XML: ``PhysicalSizeX`` (+ unit), ``TimeIncrement`` (+ unit) or per-plane ``DeltaT``.
3. Plain TIFF resolution tags with ResolutionUnit = centimetre.

Resolution in dots per inch is what image editors write for printing (72, 96, 300 dpi
...), not a microscope calibration, so it is deliberately ignored.
"""

from __future__ import annotations

import math
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import numpy as np

#: Length units to micrometres, keyed by the spellings found in the wild.
_UM_PER_UNIT = {
    "um": 1.0, "µm": 1.0, "μm": 1.0, "micron": 1.0, "microns": 1.0, "micrometer": 1.0,
    "micrometre": 1.0, "\\u00b5m": 1.0, "nm": 1e-3, "nanometer": 1e-3, "mm": 1e3,
    "millimeter": 1e3, "cm": 1e4, "centimeter": 1e4, "m": 1e6, "meter": 1e6,
}
_S_PER_UNIT = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "min": 60.0, "h": 3600.0, "µs": 1e-6, "us": 1e-6}


@dataclass(frozen=True)
class TiffCalibration:
    """What a TIFF file says about its calibration; ``None`` where it says nothing."""

    um_per_px: float | None = None
    um_per_px_source: str | None = None
    interval_s: float | None = None
    interval_source: str | None = None
    times_s: tuple[float, ...] | None = None
    times_source: str | None = None


def read_tiff_calibration(tif) -> TiffCalibration:
    """Collect pixel size and timing from an open ``tifffile.TiffFile``."""
    found: dict = {}
    for reader in (_from_imagej, _from_ome, _from_resolution_tags):
        for key, value in reader(tif).items():
            found.setdefault(key, value)
    return TiffCalibration(**found)


def _valid(value) -> bool:
    return value is not None and math.isfinite(value) and value > 0


def _x_resolution(page) -> float | None:
    tag = page.tags.get("XResolution")
    if tag is None:
        return None
    value = tag.value
    if isinstance(value, tuple):
        num, den = value
        return num / den if den else None
    return float(value)


def _from_imagej(tif) -> dict:
    meta = tif.imagej_metadata if tif.is_imagej else None
    if not meta:
        return {}
    found = {}
    unit = str(meta.get("unit", "")).strip().lower()
    px_per_unit = _x_resolution(tif.pages.first)
    if unit in _UM_PER_UNIT and _valid(px_per_unit):
        found["um_per_px"] = _UM_PER_UNIT[unit] / px_per_unit
        found["um_per_px_source"] = "file (ImageJ tags)"
    interval = meta.get("finterval")
    if interval is not None and _valid(float(interval)):
        found["interval_s"] = float(interval)
        found["interval_source"] = "file (ImageJ tags)"
    return found


def _ome_pixels(tif):
    text = tif.ome_metadata if tif.is_ome else None
    if not text:
        return None
    try:
        root = ET.fromstring(text)
    except ET.ParseError:
        return None
    for element in root.iter():
        if element.tag.endswith("}Pixels") or element.tag == "Pixels":
            return element
    return None


def _from_ome(tif) -> dict:
    pixels = _ome_pixels(tif)
    if pixels is None:
        return {}
    found = {}
    size = pixels.get("PhysicalSizeX")
    unit = pixels.get("PhysicalSizeXUnit", "µm").strip().lower()
    if size is not None and unit in _UM_PER_UNIT and _valid(float(size)):
        found["um_per_px"] = float(size) * _UM_PER_UNIT[unit]
        found["um_per_px_source"] = "file (OME-XML)"
    increment = pixels.get("TimeIncrement")
    t_unit = pixels.get("TimeIncrementUnit", "s").strip().lower()
    if increment is not None and t_unit in _S_PER_UNIT and _valid(float(increment)):
        found["interval_s"] = float(increment) * _S_PER_UNIT[t_unit]
        found["interval_source"] = "file (OME-XML)"
    times = _ome_plane_times(pixels)
    if times is not None:
        found["times_s"] = times
        found["times_source"] = "file (OME-XML plane times)"
    return found


def _ome_plane_times(pixels) -> tuple[float, ...] | None:
    planes = [p for p in pixels if p.tag.endswith("Plane") and p.get("DeltaT") is not None]
    if len(planes) < 2:
        return None
    planes.sort(key=lambda p: int(p.get("TheT", 0)))
    scale = _S_PER_UNIT.get(planes[0].get("DeltaTUnit", "s").strip().lower())
    if scale is None:
        return None
    times = np.array([float(p.get("DeltaT")) * scale for p in planes])
    if not np.all(np.diff(times) > 0):
        return None
    return tuple(times.tolist())


def _from_resolution_tags(tif) -> dict:
    page = tif.pages.first
    unit_tag = page.tags.get("ResolutionUnit")
    px_per_unit = _x_resolution(page)
    if unit_tag is None or int(unit_tag.value) != 3 or not _valid(px_per_unit):
        return {}
    return {"um_per_px": 1e4 / px_per_unit, "um_per_px_source": "file (TIFF resolution tags)"}
