"""The growth data of a ramp experiment: free-growth radii of its usable spherulites.

Radii come from the crystallised area per free sector
(:func:`analysis.spherulites.fronts.area_radii`), which has no small-radius bias, on the
recording clock; they feed :func:`analysis.kinetics.nonisothermal.fit_ramp_growth`.
"""

from __future__ import annotations

import numpy as np

from analysis.kinetics.nonisothermal import RadiusTrack

__all__ = ["MIN_RADIUS_PX", "RAMP_STATUSES", "area_tracks"]

#: Spherulite statuses whose free-growth radii enter the ramp fit. "nonlinear" is what a
#: straight-cone test says of every spherulite on a ramp, so it is expected here.
RAMP_STATUSES = ("ok", "nonlinear")
_MIN_TRACK_POINTS = 3
#: Radii below this many pixels are not used: a crystal a few pixels across is seen late
#: (common practice).
MIN_RADIUS_PX = 4.0


def area_tracks(result, frame_index: np.ndarray, times_s, *, time_offset_s: float = 0.0,
                statuses=RAMP_STATUSES, n_sectors: int = 36,
                min_radius_px: float = MIN_RADIUS_PX) -> list[RadiusTrack]:
    """Free-growth radii of the usable spherulites from the crystallised area per sector
    (:func:`analysis.spherulites.fronts.area_radii`, no small-radius bias).

    Parameters
    ----------
    result : ExperimentResult
        Needs ``extra["territories"]`` (label = spherulite id) and the radius series
        (their ``used`` flags carry ignored frames and the free-fraction test).
    frame_index : ndarray (H, W)
        First crystalline frame of each pixel (-1: never), as in the arrival map.
    times_s : array
        Frame times, recording clock, s.
    """
    from analysis.spherulites.fronts import area_radii

    labels = result.extra["territories"]
    times = np.asarray(times_s, float)
    spherulites = {s.id: s for s in result.spherulites}
    tracks = []
    for series in result.radii:
        sph = spherulites.get(series.id)
        if sph is None or sph.status not in statuses:
            continue
        rows, cols = np.nonzero(labels == series.id)
        radius_px = area_radii(cols, rows, np.asarray(frame_index)[rows, cols], labels, series.id,
                               sph.x_px, sph.y_px, times.size, n_sectors=n_sectors)
        used_times = np.round(np.asarray(series.time_s)[np.asarray(series.used, bool)] + time_offset_s, 6)
        ok = np.isfinite(radius_px) & np.isin(np.round(times, 6), used_times)
        ok &= np.nan_to_num(radius_px) >= min_radius_px
        if np.count_nonzero(ok) >= _MIN_TRACK_POINTS:
            tracks.append(RadiusTrack(series.id, times[ok], radius_px[ok] * result.um_per_px))
    return tracks
