"""Nucleation statistics and the transformed area fraction X(t) of one field.

Times here are seconds from the isothermal start unless a name says otherwise. Areas in
mm^2; densities per mm^2 (areal, N_A) and per mm^3 (volumetric, N_V = N_A / h).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import stats

from analysis.results import Nucleation
from analysis.units import per_mm3_from_per_mm2


def area_fraction(arrival_s: np.ndarray, times_s: np.ndarray) -> np.ndarray:
    """Crystallised fraction of the usable field at each frame time.

    A pixel counts as crystalline at t_f when its arrival time is at or before t_f;
    unusable pixels (NaN) are left out of numerator and denominator. What a
    transmission image shows is projected area, which follows the 2-D law whatever the
    film thickness (docs/sources.md §1.7).
    """
    arrival = np.asarray(arrival_s)
    usable = arrival[~np.isnan(arrival)]
    if usable.size == 0:
        return np.full(np.shape(times_s), np.nan)
    finite = np.sort(usable[np.isfinite(usable)].astype(np.float64))
    tol = 1e-9 * max(1.0, float(np.max(np.abs(times_s))))
    counts = np.searchsorted(finite, np.asarray(times_s, dtype=float) + tol, side="right")
    return counts / usable.size


@dataclass(frozen=True)
class MeltExposure:
    """Cumulative untransformed area-time ∫ (1 - X) A dt, mm^2 s, from the X(t) samples."""

    time_s: np.ndarray
    cumulative_mm2_s: np.ndarray

    @classmethod
    def from_fraction(cls, time_s, fraction, field_area_mm2: float) -> "MeltExposure":
        t = np.asarray(time_s, dtype=float)
        melt = (1.0 - np.clip(np.asarray(fraction, dtype=float), 0.0, 1.0)) * field_area_mm2
        steps = 0.5 * (melt[1:] + melt[:-1]) * np.diff(t)
        return cls(t, np.concatenate([[0.0], np.cumsum(steps)]))

    def between(self, t_a: float, t_b: float) -> float:
        """∫ from t_a to t_b (clipped to the record), mm^2 s."""
        if self.time_s.size < 2 or t_b <= t_a:
            return 0.0
        a, b = np.interp([t_a, t_b], self.time_s, self.cumulative_mm2_s)
        return float(b - a)


def _poisson_tail(observed: int, expected: float) -> float:
    """P(Poisson(expected) >= observed)."""
    return 1.0 if observed <= 0 else float(stats.poisson.sf(observed - 1, max(expected, 0.0)))


def classify_mode(t0_s: np.ndarray, exposure: MeltExposure, *, burst_window_s: float,
                  end_s: float, alpha: float = 0.001) -> tuple[str, float | None, int, str]:
    """Nucleation mode from the nucleation times; returns (mode, rate per mm^2 per s,
    number of nuclei in the initial burst, the criterion and its outcome in words).

    Criterion. The initial burst is the densest group of births within
    ``burst_window_s`` among windows opening at one of the earliest quarter (at least
    three) of the nucleation times, so that a stray early estimate cannot move it; births
    after it are late births, births before it count with the burst. (1) If at most max(1, 5 %) of the nuclei are late
    births, nucleation is *athermal* (all nuclei predetermined). (2) Otherwise the late
    births estimate a constant nucleation rate per untransformed area,
    Ndot = n_late / ∫ (1 - X) A dt over (end of burst, end of record) — nuclei cannot
    form inside spherulites (Avrami 1939, J. Chem. Phys. 7, 1103). If the burst holds
    more nuclei than that rate explains (Poisson tail probability P(K >= n_burst - 1)
    below ``alpha``, the first nucleus only opening the window), nucleation is *mixed*,
    else *thermal*. The late births are also tested for a homogeneous process in
    untransformed area-time (Kolmogorov-Smirnov against uniform), which is reported.
    """
    t = np.sort(np.asarray(t0_s, dtype=float))
    n = t.size
    early = max(3, n // 4)
    in_window = np.searchsorted(t, t[:early] + burst_window_s, side="right") - np.arange(min(early, n))
    t_first = float(t[int(np.argmax(in_window))])
    burst_end = t_first + burst_window_s
    n_burst = int(np.count_nonzero(t <= burst_end))
    late = t[t > burst_end]
    allowed = max(1, int(0.10 * n))
    head = (f"{n} nuclei; {n_burst} up to {burst_window_s:.3g} s after the start of the densest "
            f"burst, {late.size} later")
    if late.size <= allowed:
        return "athermal", None, n_burst, f"{head} (at most {allowed} allowed): athermal"
    melt_late = exposure.between(burst_end, end_s)
    if melt_late <= 0:
        return "athermal", None, n_burst, f"{head}; no melt left after the burst: athermal"
    rate = late.size / melt_late
    expected = rate * exposure.between(float(t[0]), burst_end)
    p_burst = _poisson_tail(n_burst - 1, expected)
    mode = "mixed" if p_burst < alpha else "thermal"
    u = np.array([exposure.between(burst_end, ti) for ti in late]) / melt_late
    p_ks = float(stats.kstest(u, "uniform").pvalue)
    text = (f"{head}; later births give {rate * 60:.4g} per mm^2 per min of melt; the burst "
            f"exceeds that rate with Poisson p = {p_burst:.3g} ({mode} at p < {alpha}); "
            f"constant-rate KS p = {p_ks:.3g}")
    if mode == "thermal":
        rate = (n - 1) / max(exposure.between(float(t[0]), end_s), 1e-300)
    return mode, rate, n_burst, text


def nucleation_statistics(t0_s, *, exposure: MeltExposure, field_area_mm2: float,
                          interval_s: float, thickness_um: float | None, end_s: float,
                          t0_se_s=None) -> Nucleation:
    """Count, densities, rate, induction time and mode of the nuclei inside the field.

    ``t0_s`` are the nucleation times (s from the isothermal start) of the nuclei whose
    centre lies inside the field (docs/sources.md §1.6: count by centre). N_V = N_A / h
    assumes that all nuclei through the film thickness h are seen in transmission and
    none sit on the glass surfaces (docs/sources.md §1.7). The burst window for the mode test
    is two frame intervals plus twice the median standard error of t0 (common practice).
    The density of the initial burst (the predetermined part, for mixed-mode kinetics)
    is ``burst_density_per_mm2``.
    """
    t = np.asarray(t0_s, dtype=float)
    t = t[np.isfinite(t)]
    if t.size == 0:
        return Nucleation(0, None, 0.0, per_mm3_from_per_mm2(0.0, thickness_um), None, None, None,
                          "no nuclei inside the field")
    se = np.asarray(t0_se_s if t0_se_s is not None else [], dtype=float)
    se = se[np.isfinite(se)]
    window = 2.0 * interval_s + (2.0 * float(np.median(se)) if se.size else 0.0)
    mode, rate_s, n_burst, text = classify_mode(t, exposure, burst_window_s=window, end_s=end_s)
    n_a = t.size / field_area_mm2
    rate_min = None if rate_s is None else rate_s * 60.0
    nucleation = Nucleation(
        count=int(t.size), mode=mode, density_per_mm2=n_a,
        density_per_mm3=per_mm3_from_per_mm2(n_a, thickness_um),
        rate_per_mm2_per_min=rate_min,
        rate_per_mm3_per_min=per_mm3_from_per_mm2(rate_min, thickness_um),
        induction_time_s=max(0.0, float(t.min())), mode_test=text,
        burst_density_per_mm2=None if mode == "thermal" else n_burst / field_area_mm2,
        times_s=tuple(float(v) for v in np.sort(t)))
    return nucleation


def field_area_mm2(shape: tuple[int, int], um_per_px: float) -> float:
    """Area of the whole field of view, mm^2."""
    return shape[0] * shape[1] * (um_per_px * 1e-3) ** 2
