"""Files written by ``spherokin analyze``: spherulites.csv, radii.csv, summary.json,
overlay.png (formats in docs/design.md), and the ``analyze`` command line.
"""

from __future__ import annotations

import math
import os
from typing import Any

import numpy as np

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.prediction import film_avrami_fit, predict_from_result
from analysis.kinetics.uncertainty import prediction_intervals
from analysis.units import json_clean, write_csv_atomic, write_json_atomic
from analysis.outputs import clean_text, staged_outputs

SPHERULITE_COLUMNS = ("id", "x_px", "y_px", "x_um", "y_um", "nucleation_time_s", "first_seen_s",
                      "growth_rate_um_per_min", "growth_rate_ci95_um_per_min", "r2", "n_points",
                      "status", "source", "reason", "confidence")
RADII_COLUMNS = ("id", "time_s", "radius_um", "free_fraction")

# Overlay colours (BGR): our own palette, chosen to read on grey and on colour images.
_FRONT_OK = (80, 220, 250)
_FRONT_OTHER = (170, 120, 255)
_CENTRE = (255, 255, 90)
_LABEL = (255, 255, 255)


def _cell(value) -> str:
    """CSV cell text; a leading = + - @ is escaped with a quote (formula injection)."""
    if value is None:
        return ""
    if isinstance(value, float):
        text = "" if not math.isfinite(value) else repr(round(value, 6))
        return text
    text = clean_text(str(value))
    if text[:1] in ("=", "+", "-", "@"):
        return "'" + text
    return text


def _number_cell(value) -> str:
    """Numeric cell: numbers are never escaped (a negative time is data, not a formula)."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return ""
    return repr(round(float(value), 6)) if isinstance(value, float) else str(value)


def spherulite_rows(result) -> list[list[str]]:
    rows = []
    um = result.um_per_px
    for s in result.spherulites:
        numbers = [s.id, s.x_px, s.y_px, s.x_px * um, s.y_px * um, s.nucleation_time_s,
                   s.first_seen_s, s.growth_rate_um_per_min, s.growth_rate_ci95_um_per_min,
                   s.r2, s.n_points]
        rows.append([_number_cell(v) for v in numbers] + [_cell(s.status), _cell(s.source), _cell(s.reason),
                                                          _number_cell(s.confidence)])
    return rows


def radii_rows(result) -> list[list[str]]:
    rows = []
    for series in result.radii:
        for t, r, f in zip(series.time_s, series.radius_um, series.free_fraction):
            rows.append([_number_cell(series.id), _number_cell(float(t)), _number_cell(float(r)),
                         _number_cell(float(f))])
    return rows


def _avrami_dict(params) -> dict[str, Any]:
    if not params:
        return {"n": None, "k_per_min_n": None, "t_half_min": None}
    return {"n": params.n, "k_per_min_n": params.k_per_min_n, "t_half_min": params.t_half_min}


def _ci_keys(name: str, pair) -> dict[str, Any]:
    low, high = pair if pair is not None else (None, None)
    return {f"{name}_ci95_low": low, f"{name}_ci95_high": high}


def _interval_keys(intervals) -> dict[str, Any]:
    if intervals is None:
        return {}
    return {k: v for name in ("n", "k_per_min_n", "t_half_min")
            for k, v in _ci_keys(name, (getattr(intervals, name).low,
                                        getattr(intervals, name).high)).items()}


def _predicted(result, geometry: str):
    try:
        return predict_from_result(result, geometry)
    except InputError:
        return None


def summary_dict(result, geometry: str, *, seed: int = DEFAULT_SEED) -> dict[str, Any]:
    """The summary.json record of a result (schema 2, docs/design.md); NaN becomes null.

    Counts carry the keys of :data:`analysis.results.COUNTS`.

    ``avrami_predicted`` is the ``geometry`` prediction of
    :func:`analysis.kinetics.prediction.predict_from_result` (null values when an input is
    missing), ``avrami_film`` the whole-curve fit of the image's X(t). Every estimate
    carries its 95 % interval as ``<name>_ci95_low``/``_high`` siblings (pooled G inside
    its object); ``resampling`` holds the seed of the bootstrap.
    """
    g, nuc, counts = result.growth_rate, result.nucleation, result.counts()
    intervals = prediction_intervals(result, geometry, seed=seed)
    return json_clean({
        "schema": 2,
        "stack": result.stack,
        "frames": int(result.frames),
        "um_per_px": result.um_per_px,
        "interval_s": result.interval_s,
        "temperature_c": result.temperature_c,
        "thickness_um": result.thickness_um,
        "spherulites_detected": counts["spherulites_detected"],
        "growth_rate_um_per_min": {"value": g.value, "ci95_low": g.ci95_low,
                                   "ci95_high": g.ci95_high,
                                   "spherulites_in_pooled_g": counts["spherulites_in_pooled_g"],
                                   "shared_timing_uncertainty_rel": g.systematic_rel},
        "nucleation": {"nuclei_counted": counts["nuclei_counted"], "mode": nuc.mode,
                       "density_per_mm2": nuc.density_per_mm2,
                       **_ci_keys("density_per_mm2", nuc.density_per_mm2_ci95),
                       "density_per_mm3": nuc.density_per_mm3,
                       **_ci_keys("density_per_mm3", nuc.density_per_mm3_ci95),
                       "rate_per_mm2_per_min": nuc.rate_per_mm2_per_min,
                       **_ci_keys("rate_per_mm2_per_min", nuc.rate_per_mm2_per_min_ci95),
                       "rate_per_mm3_per_min": nuc.rate_per_mm3_per_min,
                       **_ci_keys("rate_per_mm3_per_min", nuc.rate_per_mm3_per_min_ci95),
                       "induction_time_s": nuc.induction_time_s},
        "area_fraction": {"time_s": result.area_fraction_time_s,
                          "value": result.area_fraction},
        "avrami_film": _avrami_dict(film_avrami_fit(result)),
        "avrami_predicted": {"geometry": geometry, **_avrami_dict(_predicted(result, geometry)),
                             **_interval_keys(intervals)},
        "image_quality": image_quality_dict(result.image_quality),
        "resampling": {"seed": seed, "resamples": None if intervals is None else intervals.resamples},
    })


def image_quality_dict(quality) -> dict[str, Any] | None:
    """The ``image_quality`` object of summary.json (None when not measured)."""
    if quality is None:
        return None
    return {"noise_fraction_of_full_scale": quality.noise,
            "crystal_noise_fraction_of_full_scale": quality.crystal_noise,
            "contrast_fraction_of_full_scale": quality.contrast,
            "signal_to_noise": quality.snr, "smoothing_px": quality.smoothing_px,
            "unresolved_fraction": quality.unresolved_fraction, "blur_px": quality.blur_px,
            "illumination_unevenness": quality.illumination_unevenness,
            "too_poor_for_automatic_counting": bool(quality.too_poor), "verdict": quality.verdict}


def _display_image(frame: np.ndarray) -> np.ndarray:
    """8-bit BGR copy of a frame, contrast-stretched between its 0.5 and 99.5 percentiles."""
    import cv2

    img = np.asarray(frame, dtype=np.float64)
    lo, hi = np.nanpercentile(img, [0.5, 99.5])
    scaled = np.clip((img - lo) / max(hi - lo, 1e-12) * 255.0, 0, 255).astype(np.uint8)
    if scaled.ndim == 2:
        return cv2.cvtColor(scaled, cv2.COLOR_GRAY2BGR)
    return cv2.cvtColor(scaled, cv2.COLOR_RGB2BGR)


def overlay_image(result, background: np.ndarray | None, *, shape=None) -> np.ndarray:
    """BGR image: the last frame (or black) with fronts at the last frame time, centres, ids.

    The drawn front is each spherulite's territory outline from the arrival map when the
    result carries it, else the fitted circle at the last frame time.
    """
    import cv2

    if background is None:
        h, w = shape
        img = np.zeros((h, w, 3), np.uint8)
    else:
        img = _display_image(background)
    labels = result.extra.get("territories") if isinstance(result.extra, dict) else None
    thickness = max(1, img.shape[1] // 600)
    for s in result.spherulites:
        colour = _FRONT_OK if s.status == "ok" else _FRONT_OTHER
        if labels is not None and labels.shape == img.shape[:2]:
            mask = (labels == s.id).astype(np.uint8)
            contours, _ = cv2.findContours(mask, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_SIMPLE)
            cv2.drawContours(img, contours, -1, colour, thickness)
        centre = (int(round(s.x_px)), int(round(s.y_px)))
        cv2.drawMarker(img, centre, _CENTRE, cv2.MARKER_TILTED_CROSS, 6 + 3 * thickness, thickness)
        cv2.putText(img, str(s.id), (centre[0] + 4, centre[1] - 4), cv2.FONT_HERSHEY_SIMPLEX,
                    0.35 * thickness + 0.1, _LABEL, 1, cv2.LINE_AA)
    return img


def write_analysis_outputs(result, out_dir, *, geometry: str, arrival=None,
                           stack=None) -> list[str]:
    """Write spherulites.csv, radii.csv, summary.json and overlay.png into ``out_dir``,
    all or nothing; ``geometry`` ("film-2d" or "bulk-3d") of the predicted kinetics.

    ``stack`` (a FrameStack) supplies the last frame for the overlay; without it the
    overlay is drawn on black at the arrival map's size. Returns the written paths.
    """
    names = ("spherulites.csv", "radii.csv", "summary.json", "overlay.png")
    with staged_outputs(out_dir) as stage:
        _write_analysis_files(result, [os.path.join(stage, name) for name in names], geometry, arrival, stack)
    return [os.path.join(os.fspath(out_dir), name) for name in names]


def _write_analysis_files(result, paths, geometry, arrival, stack) -> None:
    import cv2

    write_csv_atomic(paths[0], [SPHERULITE_COLUMNS, *spherulite_rows(result)])
    write_csv_atomic(paths[1], [RADII_COLUMNS, *radii_rows(result)])
    write_json_atomic(paths[2], summary_dict(result, geometry))
    background = stack[len(stack) - 1] if stack is not None and len(stack) else None
    shape = None if arrival is None else np.asarray(arrival.arrival_s).shape
    if background is None and shape is None:
        labels = result.extra.get("territories")
        shape = labels.shape if labels is not None else (256, 256)
    if not cv2.imwrite(paths[3], overlay_image(result, background, shape=shape)):
        raise InputError("could not write overlay.png", paths[3])
