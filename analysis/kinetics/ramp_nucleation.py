"""Nucleation against temperature during a ramp or step programme.

Each nucleus is dated where its growth model reaches zero radius (the joint G(T) fit of
:mod:`analysis.kinetics.nonisothermal`; the cone fit's time, or the first sighting, for
spherulites that did not enter it) and given the sample temperature at that moment.
N(T) is the cumulative count per mm² of the field, accumulated over the temperature bins
in the order the film first reaches them: hottest first on cooling, coldest first on
heating, and for a step programme the order of its segments (a hold adds its time to one
bin). The nucleation rate in a bin is the number born in it divided by the untransformed
area-time spent in it, ΔN / ∫_{T(t) in bin} (1 − X(t)) A dt, because nuclei can only
appear in melt (docs/sources.md §1.2); a hold or a slow segment gives its bin more
area-time, so rates of any programme are comparable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from analysis.kinetics.temperature_programme import TemperatureProgramme

__all__ = ["RampNucleation", "nucleation_vs_temperature", "COUNTED_STATUSES"]

#: Statuses whose nuclei are counted (a nucleus outside the field, or one the user
#: excluded, is not).
COUNTED_STATUSES = ("ok", "nonlinear", "few-points")
_EXPOSURE_STEP_S = 0.05  # time step of the melt area-time integral, s


@dataclass(frozen=True)
class RampNucleation:
    """Per temperature bin (°C, bin centres) in the order the film first reaches them."""

    temperature_c: np.ndarray
    n_nuclei: np.ndarray
    cumulative_per_mm2: np.ndarray
    rate_per_mm2_per_min: np.ndarray  # NaN where the bin saw no melt time
    birth_temperature_c: np.ndarray  # one per counted nucleus
    bin_k: float
    direction: str = "cooling"  # "cooling", "heating" or "mixed": the order of the bins


def _birth_times(result, growth, time_offset_s):
    fitted = {t.id: t.birth_time_s for t in getattr(growth, "tracks", ())}
    times = []
    for s in result.spherulites:
        if s.status not in COUNTED_STATUSES:
            continue
        t = fitted.get(s.id)
        if t is None:
            t = s.nucleation_time_s if s.nucleation_time_s is not None else s.first_seen_s
            t = None if t is None else t + time_offset_s
        if t is not None:
            times.append(t)
    return np.asarray(times, float)


def nucleation_vs_temperature(result, growth, programme: TemperatureProgramme, *, field_shape,
                              time_offset_s: float = 0.0, bin_k: float = 1.0) -> RampNucleation:
    """N(T) and the nucleation rate per untransformed area in ``bin_k`` kelvin bins.

    ``growth`` is the :class:`RampGrowth` (or a FitFailure: cone-fit times are used);
    ``field_shape`` the (rows, columns) of the field; times of ``result`` plus
    ``time_offset_s`` are recording-clock times.
    """
    area_mm2 = float(np.prod(field_shape)) * (result.um_per_px * 1e-3) ** 2
    births = _birth_times(result, growth, time_offset_s)
    t_x = np.asarray(result.area_fraction_time_s, float) + time_offset_s
    x = np.asarray(result.area_fraction, float)
    start = min(float(t_x.min()) if t_x.size else 0.0, float(births.min()) if births.size else 0.0)
    start = max(start, float(programme.time_s[0]))
    end = max(float(t_x.max()) if t_x.size else 0.0, start + 1.0)
    # fine enough that a bin crossed in a few seconds gets its time to about 1 %
    grid = np.linspace(start, end, int(np.clip(math.ceil((end - start) / _EXPOSURE_STEP_S), 4000, 400_000)) + 1)
    temp = programme.temperature_at(grid)
    melt = 1.0 - np.interp(grid, t_x, x, left=0.0, right=float(x[-1]) if x.size else 0.0) if t_x.size \
        else np.ones_like(grid)
    born_t = programme.temperature_at(births) if births.size else births
    lo = np.floor(min(temp.min(), born_t.min() if born_t.size else temp.min()) / bin_k) * bin_k
    hi = np.ceil(max(temp.max(), born_t.max() if born_t.size else temp.max()) / bin_k) * bin_k
    edges = np.arange(lo, hi + bin_k * 0.5, bin_k)
    counts, _ = np.histogram(born_t, bins=edges)
    dt = np.gradient(grid)
    exposure_min, _ = np.histogram(temp, bins=edges, weights=melt * dt / 60.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        rate = np.where(exposure_min > 0, counts / (exposure_min * area_mm2), np.nan)
    order = _passage_order(edges, grid, temp, births, born_t)
    centres = 0.5 * (edges[:-1] + edges[1:])[order]
    counts, rate = counts[order], rate[order]
    steps = np.diff(centres)
    direction = "cooling" if np.all(steps < 0) else "heating" if np.all(steps > 0) else "mixed"
    return RampNucleation(centres, counts, np.cumsum(counts) / area_mm2, rate, born_t, float(bin_k), direction)


def _passage_order(edges, grid, temp, births, born_t) -> np.ndarray:
    """Bin indices sorted by the first time the film is in each bin (on the exposure grid,
    or at the first birth in it); bins never reached go last, hottest first."""
    n_bins = edges.size - 1
    first = np.full(n_bins, np.inf)
    where = np.clip(np.searchsorted(edges, temp, side="right") - 1, 0, n_bins - 1)
    np.minimum.at(first, where, grid)
    if births.size:
        np.minimum.at(first, np.clip(np.searchsorted(edges, born_t, side="right") - 1, 0, n_bins - 1), births)
    return np.lexsort((-edges[:-1], first))
