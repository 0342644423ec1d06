"""Avrami (JMAK) kinetics: predictions from nucleation and growth, and fits of X(t).

Public API (stable; the GUI codes against it)
---------------------------------------------
Model and prediction
    ``AvramiPrediction`` (frozen): ``dimension``, ``athermal_k``, ``sporadic_k`` (min^-d and
    min^-(d+1)), ``mode``, ``geometry``; methods ``extended_fraction(t_min)``,
    ``conversion(t_min)``, ``t_half_min``, ``n``/``k_per_min_n`` (apparent for mixed),
    ``to_parameters() -> results.AvramiParameters``.
    ``predict_avrami(geometry, growth_rate_um_per_min, *, density_per_mm_d=None,
    rate_per_mm_d_per_min=None) -> AvramiPrediction``
    (the prediction for an experiment's result is ``analysis.kinetics.prediction``)
Closed forms
    ``avrami_conversion(t_min, n, k, t0_min=0)``, ``half_time(n, k)``, ``k_from_half_time(n,
    t_half)``, ``k_per_second(k_per_min_n, n)``
Fits (a failed fit is a falsy ``FitFailure(reason)``, never an exception)
    ``fit_avrami_window(t_min, x, window=DEFAULT_FIT_WINDOW) -> AvramiFit | FitFailure``
    ``fit_avrami_curve(t_min, x, *, x_range=(0.005, 0.995)) -> AvramiFit | FitFailure``
Crystallinity bases
    ``volume_fraction_from_mass(w, *, density_ratio=None, material=None)`` and
    ``mass_fraction_from_volume(phi, ...)``; the ratio rho_c/rho_a defaults from the
    material table (``analysis.kinetics.materials``).

Units
-----
Time in minutes, G in um/min, densities per mm^d (d = 2 for ``film-2d``, 3 for
``bulk-3d``), rates per mm^d per min. k is reported in min^-n with n stated;
k[s^-n] = k[min^-n] / 60^n.

Derivation of the prefactors (extended volume)
----------------------------------------------
Nuclei are Poisson-distributed through all space, phantom nuclei included; each grows as a
d-ball of radius G (t - tau) from its birth time tau. The extended fraction is

    X_ex(t) = integral_0^t nu(tau) C_d [G (t - tau)]^d dtau,   X = 1 - exp(-X_ex),

with C_d the measure of the unit d-ball (C_2 = pi, C_3 = 4 pi / 3) and nu the nucleation
rate per unit d-volume.

* Athermal (all N nuclei present at t = 0): nu = N delta(tau), so X_ex = C_d N G^d t^d:
  k = C_d N G^d, n = d  ->  3-D: (4 pi/3) N_V G^3, n = 3; 2-D: pi N_A G^2, n = 2.
* Sporadic (constant rate Ndot): X_ex = C_d Ndot G^d integral_0^t (t - tau)^d dtau
  = C_d Ndot G^d t^(d+1) / (d + 1): k = C_d Ndot G^d / (d + 1), n = d + 1
  ->  3-D: (4 pi/3)/4 = pi/3, so k = (pi/3) Ndot_V G^3, n = 4; 2-D: (pi/3) Ndot_A G^2, n = 3.
* Mixed (N0 predetermined plus Ndot): the integral is linear in nu, so the two terms add,
  X_ex = k_a t^d + k_s t^(d+1). This is not a power law; t_half solves X_ex = ln 2 (root
  finding) and the reported n is the local slope d ln X_ex / d ln t at t_half, with
  k = ln 2 / t_half^n so that n, k and t_half stay mutually consistent.

The half-time follows from X = 1/2: t_half = (ln 2 / k)^(1/n).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, stats

from analysis.errors import InputError
from analysis.results import AvramiParameters
from analysis.settings import DEFAULT_FIT_WINDOW

__all__ = [
    "AvramiFit", "AvramiPrediction", "FitFailure", "GEOMETRIES", "avrami_conversion",
    "fit_avrami_curve", "fit_avrami_window", "half_time", "k_from_half_time", "k_per_second",
    "mass_fraction_from_volume", "predict_avrami", "volume_fraction_from_mass",
]

LN2 = math.log(2.0)
GEOMETRIES = {"film-2d": 2, "bulk-3d": 3}
_UNIT_BALL = {2: math.pi, 3: 4.0 * math.pi / 3.0}


# ---------------------------------------------------------------- closed forms
def avrami_conversion(t_min, n: float, k_per_min_n: float, t0_min: float = 0.0) -> np.ndarray:
    """X(t) = 1 - exp(-k (t - t0)^n) for t > t0, 0 before. Times in min."""
    dt = np.clip(np.asarray(t_min, dtype=float) - t0_min, 0.0, None)
    return -np.expm1(-k_per_min_n * dt ** n)


def half_time(n: float, k_per_min_n: float) -> float:
    """t_half = (ln 2 / k)^(1/n), in min for k in min^-n."""
    return (LN2 / k_per_min_n) ** (1.0 / n)


def k_from_half_time(n: float, t_half_min: float) -> float:
    """k = ln 2 / t_half^n, in min^-n."""
    return LN2 / t_half_min ** n


def k_per_second(k_per_min_n: float, n: float) -> float:
    """Convert k from min^-n to s^-n (divide by 60^n)."""
    return k_per_min_n / 60.0 ** n


# ---------------------------------------------------------------- prediction
@dataclass(frozen=True)
class AvramiPrediction:
    """Extended-volume model X_ex = athermal_k t^d + sporadic_k t^(d+1), t in min.

    ``athermal_k`` = C_d N G^d (min^-d); ``sporadic_k`` = C_d Ndot G^d / (d + 1)
    (min^-(d+1)). ``mode`` is "athermal", "thermal" or "mixed".
    """

    geometry: str
    dimension: int
    mode: str
    athermal_k: float
    sporadic_k: float

    def extended_fraction(self, t_min) -> np.ndarray:
        t = np.clip(np.asarray(t_min, dtype=float), 0.0, None)
        d = self.dimension
        return self.athermal_k * t ** d + self.sporadic_k * t ** (d + 1)

    def conversion(self, t_min) -> np.ndarray:
        """Predicted volume fraction X(t), t in min from the start of growth."""
        return -np.expm1(-self.extended_fraction(t_min))

    @property
    def t_half_min(self) -> float:
        """Half-time, by root finding on X_ex(t) = ln 2 (exact for pure modes too)."""
        if self.sporadic_k == 0.0:
            return half_time(self.dimension, self.athermal_k)
        if self.athermal_k == 0.0:
            return half_time(self.dimension + 1, self.sporadic_k)
        upper = min(half_time(self.dimension, self.athermal_k),
                    half_time(self.dimension + 1, self.sporadic_k))
        return optimize.brentq(lambda t: float(self.extended_fraction(t)) - LN2, 0.0, upper,
                               xtol=1e-14 * upper, rtol=1e-14)

    @property
    def n(self) -> float:
        """Exponent: d or d + 1, or for mixed the local slope d ln X_ex / d ln t at t_half."""
        d, t = self.dimension, self.t_half_min
        if self.sporadic_k == 0.0 or self.athermal_k == 0.0:
            return float(d if self.sporadic_k == 0.0 else d + 1)
        a, s = self.athermal_k * t ** d, self.sporadic_k * t ** (d + 1)
        return (d * a + (d + 1) * s) / (a + s)

    @property
    def k_per_min_n(self) -> float:
        """k in min^-n, consistent with ``n`` and ``t_half_min`` (ln 2 / t_half^n)."""
        return k_from_half_time(self.n, self.t_half_min)

    def to_parameters(self) -> AvramiParameters:
        return AvramiParameters(n=self.n, k_per_min_n=self.k_per_min_n,
                                t_half_min=self.t_half_min, geometry=self.geometry)


def _dimension(geometry: str) -> int:
    try:
        return GEOMETRIES[geometry]
    except KeyError:
        raise InputError(f"unknown geometry {geometry!r}; use one of {sorted(GEOMETRIES)}") from None


def predict_avrami(geometry: str, growth_rate_um_per_min: float, *,
                   density_per_mm_d: float | None = None,
                   rate_per_mm_d_per_min: float | None = None) -> AvramiPrediction:
    """Avrami model from nucleation and growth.

    Parameters
    ----------
    geometry : "bulk-3d" or "film-2d"
        Sets d = 3 (densities per mm^3) or d = 2 (per mm^2).
    growth_rate_um_per_min : float
        Radial growth rate G, um/min.
    density_per_mm_d : float, optional
        Athermal nucleus density N, per mm^d.
    rate_per_mm_d_per_min : float, optional
        Sporadic nucleation rate Ndot, per mm^d per min. Give one or both (mixed).
    """
    d = _dimension(geometry)
    n0 = float(density_per_mm_d or 0.0)
    ndot = float(rate_per_mm_d_per_min or 0.0)
    g = growth_rate_um_per_min
    if g is None or not np.isfinite(g) or g <= 0:
        raise InputError(f"growth rate must be positive and finite, got {g!r} um/min")
    if n0 < 0 or ndot < 0 or not (np.isfinite(n0) and np.isfinite(ndot)) or n0 + ndot == 0:
        raise InputError("need a positive nucleus density and/or nucleation rate for an "
                         f"Avrami prediction (got density {n0!r}, rate {ndot!r})")
    g_mm = g * 1e-3
    mode = "mixed" if (n0 > 0 and ndot > 0) else ("athermal" if n0 > 0 else "thermal")
    return AvramiPrediction(geometry=geometry, dimension=d, mode=mode,
                            athermal_k=_UNIT_BALL[d] * n0 * g_mm ** d,
                            sporadic_k=_UNIT_BALL[d] * ndot * g_mm ** d / (d + 1))


# ---------------------------------------------------------------- fits
@dataclass(frozen=True)
class FitFailure:
    """A fit that could not be made; falsy, with the reason in words."""

    reason: str

    def __bool__(self) -> bool:
        return False


@dataclass(frozen=True)
class AvramiFit:
    """Fitted X = 1 - exp(-k t^n), t in min (from the induction time if one was removed).

    ``n_ci95`` is the 95 % half-width of n; ``method`` is "window-linear" or "nonlinear".
    """

    n: float
    k_per_min_n: float
    t_half_min: float
    r2: float
    n_points: int
    window: tuple[float, float]
    method: str
    n_ci95: float | None = None

    def conversion(self, t_min) -> np.ndarray:
        return avrami_conversion(t_min, self.n, self.k_per_min_n)

    def to_parameters(self, geometry: str | None = None) -> AvramiParameters:
        return AvramiParameters(n=self.n, k_per_min_n=self.k_per_min_n,
                                t_half_min=self.t_half_min, geometry=geometry, r2=self.r2)


def _clean_pairs(t_min, x) -> tuple[np.ndarray, np.ndarray]:
    t = np.asarray(t_min, dtype=float).ravel()
    x = np.asarray(x, dtype=float).ravel()
    if t.shape != x.shape:
        raise InputError(f"time and conversion arrays differ in length ({t.size} vs {x.size})")
    keep = np.isfinite(t) & np.isfinite(x)
    return t[keep], x[keep]


def _check_window(window) -> tuple[float, float] | FitFailure:
    lo, hi = (float(v) for v in window)
    if not (0.0 < lo < hi < 1.0):
        return FitFailure(f"conversion window {lo:g}-{hi:g} must satisfy 0 < low < high < 1")
    return lo, hi


def fit_avrami_window(t_min, x, window=DEFAULT_FIT_WINDOW) -> AvramiFit | FitFailure:
    """Linear fit of ln(-ln(1 - X)) against ln t for window[0] <= X <= window[1].

    Parameters
    ----------
    t_min : array
        Times in min, counted from the induction time (t <= 0 points are ignored).
    x : array
        Relative crystallinity in [0, 1].
    window : (low, high)
        Conversion window as fractions (default 3-20 %).

    Returns
    -------
    AvramiFit (slope n, k = exp(intercept) in min^-n, t_half = (ln 2 / k)^(1/n), R^2)
    or FitFailure when fewer than 3 usable points remain or the slope is not positive.
    """
    checked = _check_window(window)
    if not checked:
        return checked
    lo, hi = checked
    t, x = _clean_pairs(t_min, x)
    sel = (t > 0) & (x >= lo) & (x <= hi)
    if np.count_nonzero(sel) < 3:
        return FitFailure(f"fewer than 3 points with {lo:.0%}-{hi:.0%} conversion and t > 0")
    ln_t = np.log(t[sel])
    y = np.log(-np.log1p(-x[sel]))
    if np.ptp(ln_t) == 0:
        return FitFailure("all points in the window share one time")
    fit = stats.linregress(ln_t, y)
    if not np.isfinite(fit.slope) or fit.slope <= 0:
        return FitFailure(f"Avrami slope {fit.slope:.3g} is not positive")
    m = int(np.count_nonzero(sel))
    ci = float(stats.t.ppf(0.975, m - 2) * fit.stderr) if m > 2 else None
    with np.errstate(over="ignore"):
        k = float(np.exp(fit.intercept))
        t_half = float(np.float64(LN2 / k) ** (1.0 / fit.slope)) if k > 0 else math.inf
    if not (np.isfinite(k) and np.isfinite(t_half) and k > 0):
        return FitFailure("Avrami fit gives no finite rate constant and half-time")
    r2 = float(fit.rvalue ** 2) if np.isfinite(fit.rvalue) else 1.0
    return AvramiFit(n=float(fit.slope), k_per_min_n=k, t_half_min=t_half,
                     r2=r2, n_points=m, window=(lo, hi), method="window-linear", n_ci95=ci)


def _crude_half_time(t: np.ndarray, x: np.ndarray) -> float | None:
    above = np.nonzero(x >= 0.5)[0]
    return float(t[above[0]]) if above.size and t[above[0]] > 0 else None


def fit_avrami_curve(t_min, x, *, x_range=(0.005, 0.995)) -> AvramiFit | FitFailure:
    """Nonlinear least-squares fit of X(t) = 1 - exp(-ln 2 (t / t_half)^n) over the curve.

    Parametrised by (n, t_half) because that pair is far less correlated than (n, k).
    Points with X outside ``x_range`` are left out (baseline noise at both ends); times
    in min from the induction time.
    """
    t, x = _clean_pairs(t_min, x)
    sel = (t > 0) & (x >= x_range[0]) & (x <= x_range[1])
    t, x = t[sel], x[sel]
    if t.size < 4:
        return FitFailure("fewer than 4 usable points for a whole-curve fit")
    t_half0 = _crude_half_time(t, x)
    if t_half0 is None:
        return FitFailure("conversion never reaches 50 %; no whole-curve fit")

    def model(tt, n, th):
        return -np.expm1(-LN2 * (tt / th) ** n)

    try:
        (n, th), cov = optimize.curve_fit(model, t, x, p0=(3.0, t_half0),
                                          bounds=([0.2, 1e-12], [10.0, np.inf]))
    except (RuntimeError, ValueError) as err:
        return FitFailure(f"whole-curve fit did not converge ({err})")
    resid = x - model(t, n, th)
    ss_tot = float(np.sum((x - x.mean()) ** 2))
    r2 = 1.0 - float(np.sum(resid ** 2)) / ss_tot if ss_tot > 0 else 1.0
    sd = math.sqrt(cov[0, 0]) if np.isfinite(cov[0, 0]) else float("nan")
    ci = float(stats.t.ppf(0.975, t.size - 2) * sd) if np.isfinite(sd) else None
    return AvramiFit(n=float(n), k_per_min_n=k_from_half_time(n, th), t_half_min=float(th),
                     r2=r2, n_points=int(t.size), window=tuple(x_range), method="nonlinear",
                     n_ci95=ci)


# ---------------------------------------------------------------- crystallinity bases
def _density_ratio(density_ratio: float | None, material: str | None) -> float:
    if density_ratio is None:
        if material is None:
            raise InputError("give a density ratio rho_c/rho_a or a material name")
        from analysis.kinetics.materials import get_material

        density_ratio = get_material(material).density_ratio
        if density_ratio is None:
            raise InputError(f"material {material!r} has no crystal/amorphous densities")
    if not np.isfinite(density_ratio) or density_ratio <= 0:
        raise InputError(f"density ratio rho_c/rho_a must be positive, got {density_ratio!r}")
    return float(density_ratio)


def volume_fraction_from_mass(w, *, density_ratio: float | None = None,
                              material: str | None = None):
    """phi = w / (w + (rho_c/rho_a)(1 - w)): mass to volume fraction crystallinity.

    Applied to relative crystallinity X(t) this is the usual conversion before comparing
    calorimetry (mass based) with microscopy (volume/area based).
    """
    r = _density_ratio(density_ratio, material)
    w = np.asarray(w, dtype=float)
    return w / (w + r * (1.0 - w))


def mass_fraction_from_volume(phi, *, density_ratio: float | None = None,
                              material: str | None = None):
    """Inverse of ``volume_fraction_from_mass``: w = r phi / (1 - phi + r phi)."""
    r = _density_ratio(density_ratio, material)
    phi = np.asarray(phi, dtype=float)
    return r * phi / (1.0 - phi + r * phi)
