"""Growth rate over a temperature range from one ramp or step programme.

Model
-----
Every front of the film advances at the same rate G(T(t)) at a given moment, so along a
free direction the radius of spherulite i is

    R_i(t) = ∫_{t0_i}^{t} G(T(t')) dt' = S(t) − c_i,   S(t) = ∫_{t_ref}^{t} G(T(t')) dt',

with one offset c_i = S(t0_i) per spherulite (it absorbs the unknown birth time and any
constant bias of the measured radius). T(t) is the sample temperature on the recording
clock (:mod:`analysis.kinetics.temperature_programme`).

Two forms of ln G(T) are fitted jointly to all measured radii by non-linear least squares
(no numerical differentiation of the radii):

* a penalised cubic B-spline of ln G in T (second-difference penalty; Eilers & Marx 1996,
  Statistical Science 11, 89), the smoothing weight chosen by generalised cross-validation
  (Craven & Wahba 1979, Numerische Mathematik 31, 377); its 95 % band is the Bayesian
  posterior band σ²(JᵀJ + λP)⁻¹ (Wahba 1983, J. R. Stat. Soc. B 45, 133), which also
  covers the smoothing bias on average. See docs/sources.md, section "Temperature
  programmes and non-isothermal growth".
* the Lauritzen-Hoffman form ln G = ln G0 − U*/(R(T − T∞)) − Kg/(T ΔT f) (docs/sources.md
  §2.1) with the series' constants: Kg and G0 straight from all radii at once.

S(t) and its derivatives with respect to the coefficients are cumulative trapezoid
integrals on a fine time grid; the radius model at a frame time is interpolated from it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, stats
from scipy.interpolate import BSpline

from analysis.kinetics.avrami import FitFailure
from analysis.kinetics.lauritzen_hoffman import R_J_PER_MOL_K, LHConstants, lh_coordinates
from analysis.kinetics.temperature_programme import TemperatureProgramme

__all__ = ["RadiusTrack", "RampGrowth", "RampLHFit", "TrackFit", "fit_ramp_growth",
           "tracks_from_result", "RAMP_STATUSES"]

#: Spherulite statuses whose free-growth radii enter the ramp fit. "nonlinear" is what a
#: straight-cone test says of every spherulite on a ramp, so it is expected here.
RAMP_STATUSES = ("ok", "nonlinear")
_MIN_TRACK_POINTS = 3
_GRID_STEP_K = 0.5  # spacing of the reported temperatures
_LAMBDAS = 10.0 ** np.arange(-3.0, 5.0, 1.0)


@dataclass(frozen=True)
class RadiusTrack:
    """Free-growth radii of one spherulite: recording-clock times (s) and radii (µm)."""

    id: int
    time_s: np.ndarray
    radius_um: np.ndarray


@dataclass(frozen=True)
class TrackFit:
    """One spherulite's data with the joint fit: the modelled radii and its birth."""

    id: int
    time_s: np.ndarray
    radius_um: np.ndarray
    fitted_um: np.ndarray
    birth_time_s: float | None
    birth_temperature_c: float | None


@dataclass(frozen=True)
class RampLHFit:
    """Lauritzen-Hoffman parameters fitted directly to all radii of the run."""

    kg_k2: float
    kg_ci95: float
    g0_um_per_min: float
    constants: LHConstants
    residual_um: float


@dataclass(frozen=True)
class RampGrowth:
    """G(T) from one run (µm/min, °C), with the 95 % band and the data behind it."""

    temperature_c: np.ndarray
    growth_rate_um_per_min: np.ndarray
    ci95_low: np.ndarray
    ci95_high: np.ndarray
    n_spherulites: np.ndarray
    tracks: tuple[TrackFit, ...]
    lauritzen_hoffman: RampLHFit | FitFailure
    smoothing: float
    residual_um: float
    n_points: int
    warnings: tuple[str, ...] = field(default=())

    def growth_at(self, temperature_c) -> np.ndarray:
        """The smooth estimate at other temperatures (log-linear between grid points), µm/min."""
        return np.exp(np.interp(temperature_c, self.temperature_c, np.log(self.growth_rate_um_per_min),
                                left=np.nan, right=np.nan))


# ---------------------------------------------------------------- the growth integral
@dataclass(frozen=True)
class _Grid:
    """Fine time grid over the data, the temperature on it and where the data sit in it."""

    time_s: np.ndarray
    temperature_c: np.ndarray
    left: np.ndarray  # index of the grid interval holding each data time
    frac: np.ndarray  # position inside that interval, 0..1

    def at_data(self, values: np.ndarray) -> np.ndarray:
        """Linear interpolation of grid values (first axis) at the data times."""
        lo, hi = values[self.left], values[self.left + 1]
        f = self.frac.reshape((-1,) + (1,) * (values.ndim - 1))
        return lo + f * (hi - lo)


def _grid(programme: TemperatureProgramme, times: np.ndarray, step_s: float) -> _Grid:
    t0, t1 = float(times.min()), float(times.max())
    n = int(np.clip(math.ceil((t1 - t0) / step_s), 200, 40_000)) + 1
    grid = np.linspace(t0, t1, n)
    pos = np.clip((times - t0) / (grid[1] - grid[0]), 0.0, n - 1 - 1e-9)
    left = np.minimum(pos.astype(int), n - 2)
    return _Grid(grid, programme.temperature_at(grid), left, pos - left)


def _cumulative(values: np.ndarray, time_s: np.ndarray) -> np.ndarray:
    """Cumulative trapezoid integral along the first axis, starting at 0."""
    steps = 0.5 * (values[1:] + values[:-1]) * np.diff(time_s).reshape((-1,) + (1,) * (values.ndim - 1))
    return np.concatenate([np.zeros((1,) + values.shape[1:]), np.cumsum(steps, axis=0)])


def growth_integral(time_s, programme: TemperatureProgramme, growth_um_per_min) -> np.ndarray:
    """S(t) = ∫_{t[0]}^{t} G(T(t')) dt' in µm at the given increasing times (trapezoid on
    the programme's own samples and the given times). ``growth_um_per_min``: callable of T (°C)."""
    t = np.asarray(time_s, dtype=float)
    inner = programme.time_s[(programme.time_s > t[0]) & (programme.time_s < t[-1])]
    grid = np.union1d(np.linspace(t[0], t[-1], 20_001), np.concatenate([t, inner]))
    s = _cumulative(np.asarray(growth_um_per_min(programme.temperature_at(grid)), float) / 60.0, grid)
    return np.interp(t, grid, s)


class _Model:
    """R = S(t) − c_track with ln G(T) (µm/s) = basis(T) · β + offset(T)."""

    def __init__(self, grid: _Grid, basis: np.ndarray, offset: np.ndarray, track_of: np.ndarray,
                 radius: np.ndarray, n_tracks: int, penalty: np.ndarray | None):
        self.grid, self.basis, self.offset = grid, basis, offset
        self.track_of, self.radius, self.n_tracks = track_of, radius, n_tracks
        self.n_beta = basis.shape[1]
        self.penalty = penalty  # (rows, n_beta) difference matrix, or None

    def split(self, params):
        return params[:self.n_beta], params[self.n_beta:]

    def s_and_jac(self, beta):
        g = np.exp(self.basis @ beta + self.offset)
        s = _cumulative(g, self.grid.time_s)
        ds = _cumulative(g[:, None] * self.basis, self.grid.time_s)
        return self.grid.at_data(s), self.grid.at_data(ds)

    def residuals(self, params, lam):
        beta, c = self.split(params)
        s, _ = self.s_and_jac(beta)
        r = s - c[self.track_of] - self.radius
        if self.penalty is None:
            return r
        return np.concatenate([r, math.sqrt(lam) * (self.penalty @ beta)])

    def data_jacobian(self, beta):
        _, ds = self.s_and_jac(beta)
        dc = np.zeros((ds.shape[0], self.n_tracks))
        dc[np.arange(ds.shape[0]), self.track_of] = -1.0
        return np.hstack([ds, dc])

    def jacobian(self, params, lam):
        beta, _ = self.split(params)
        jac = self.data_jacobian(beta)
        if self.penalty is None:
            return jac
        pen = np.zeros((self.penalty.shape[0], jac.shape[1]))
        pen[:, :self.n_beta] = math.sqrt(lam) * self.penalty
        return np.vstack([jac, pen])

    def start(self, tracks_t, tracks_r, g0_um_per_s: float):
        """β for a constant G (least squares through the basis), offsets from it."""
        target = math.log(max(g0_um_per_s, 1e-9)) - self.offset
        beta, *_ = np.linalg.lstsq(self.basis, target, rcond=None)
        s, _ = self.s_and_jac(beta)
        c = np.array([np.mean(s[self.track_of == k] - self.radius[self.track_of == k])
                      for k in range(self.n_tracks)])
        return np.concatenate([beta, c])

    def fit(self, start, lam):
        return optimize.least_squares(self.residuals, start, jac=self.jacobian, args=(lam,),
                                      method="trf", x_scale="jac", max_nfev=200)

    def penalised_hessian(self, jac_data, lam):
        h = jac_data.T @ jac_data
        if self.penalty is not None:
            h[:self.n_beta, :self.n_beta] += lam * (self.penalty.T @ self.penalty)
        return h


# ---------------------------------------------------------------- public
def tracks_from_result(result, *, time_offset_s: float = 0.0, statuses=RAMP_STATUSES) -> list[RadiusTrack]:
    """Free-growth radii of the usable spherulites of an ExperimentResult.

    ``time_offset_s`` turns the result's times into recording-clock times (the
    experiment's isothermal start; 0 for a ramp experiment).
    """
    status = {s.id: s.status for s in result.spherulites}
    tracks = []
    for series in result.radii:
        if status.get(series.id) not in statuses:
            continue
        used = np.asarray(series.used, bool) & np.isfinite(series.radius_um)
        if np.count_nonzero(used) >= _MIN_TRACK_POINTS:
            tracks.append(RadiusTrack(series.id, np.asarray(series.time_s)[used] + time_offset_s,
                                      np.asarray(series.radius_um)[used]))
    return tracks


def _spline_basis(temperature_c, lo, hi, n_segments):
    step = (hi - lo) / n_segments
    knots = lo + step * np.arange(-3, n_segments + 4)
    t = np.clip(np.asarray(temperature_c, float), lo, hi - 1e-9 * step)
    return BSpline.design_matrix(t, knots, 3).toarray()


def _difference_matrix(n: int, order: int = 2) -> np.ndarray:
    return np.diff(np.eye(n), n=order, axis=0)


def _data(tracks):
    time = np.concatenate([t.time_s for t in tracks])
    radius = np.concatenate([t.radius_um for t in tracks])
    track_of = np.concatenate([np.full(t.time_s.size, k) for k, t in enumerate(tracks)])
    return time, radius, track_of


def _rough_rate_um_per_s(tracks) -> float:
    slopes = [np.polyfit(t.time_s, t.radius_um, 1)[0] for t in tracks]
    return float(np.median(np.clip(slopes, 1e-6, None)))


def _edf(model, jac_data, lam) -> float:
    h = model.penalised_hessian(jac_data, lam)
    return float(np.trace(np.linalg.solve(h, jac_data.T @ jac_data)))


def _spline_fit(model, start):
    """The GCV-best smoothing weight; returns (fit, lam, jac_data, sigma2)."""
    best = None
    guess = start
    n = model.radius.size
    for lam in _LAMBDAS:
        fit = model.fit(guess, lam)
        guess = fit.x
        jac = model.data_jacobian(model.split(fit.x)[0])
        rss = float(np.sum(fit.fun[:n] ** 2))
        edf = _edf(model, jac, lam)
        gcv = n * rss / max(n - edf, 1.0) ** 2
        if best is None or gcv < best[0]:
            best = (gcv, fit, lam, jac, rss / max(n - edf, 1.0))
    return best[1:]


def _band(model, fit, lam, jac, sigma2, basis_report):
    cov = sigma2 * np.linalg.pinv(model.penalised_hessian(jac, lam))
    beta = model.split(fit.x)[0]
    log_g = basis_report @ beta
    sd = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", basis_report, cov[:model.n_beta, :model.n_beta],
                                      basis_report), 0.0))
    return log_g, sd


def _coverage(tracks, programme, temps):
    """Per reported temperature, how many spherulites grew through it."""
    counts = np.zeros(temps.size, int)
    for track in tracks:
        t = np.linspace(track.time_s.min(), track.time_s.max(), 200)
        seen = programme.temperature_at(t)
        counts += (temps >= seen.min() - _GRID_STEP_K / 2) & (temps <= seen.max() + _GRID_STEP_K / 2)
    return counts


def _births(model, fit, grid, programme):
    """Time and temperature where each track's modelled radius is zero (None before the grid)."""
    beta, offsets = model.split(fit.x)
    s = _cumulative(np.exp(model.basis @ beta + model.offset), grid.time_s)
    out = []
    for c in offsets:
        if c < s[0] or c > s[-1]:
            out.append((None, None))
            continue
        t = float(np.interp(c, s + np.arange(s.size) * 1e-12, grid.time_s))
        out.append((t, float(programme.temperature_at(t))))
    return out


def _lh_fit(tracks, programme, grid, constants, time, radius, track_of, start_rate):
    """Direct Lauritzen-Hoffman fit of all radii: (RampLHFit | FitFailure)."""
    t_inf_k = constants.t_inf + 273.15
    temp_k = grid.temperature_c + 273.15
    if np.any(temp_k <= t_inf_k) or np.any(temp_k >= constants.tm0_k):
        return FitFailure("the run leaves (T_inf, Tm0): no Lauritzen-Hoffman fit")
    x, _ = lh_coordinates(grid.temperature_c, np.ones_like(temp_k), constants)
    offset = -constants.u_star_j_per_mol / (R_J_PER_MOL_K * (temp_k - t_inf_k)) - math.log(60.0)
    model = _Model(grid, np.column_stack([np.ones_like(x), -x]), offset, track_of, radius,
                   len(tracks), None)
    start = model.start(None, None, start_rate)
    start[1] = 4e5  # any sensible Kg; ln G0 then follows
    start[0] = math.log(start_rate) + 4e5 * float(np.median(x)) - float(np.median(offset))
    try:
        fit = model.fit(start, 0.0)
    except (ValueError, np.linalg.LinAlgError) as err:
        return FitFailure(f"Lauritzen-Hoffman fit failed: {err}")
    n = radius.size
    dof = max(n - fit.x.size, 1)
    jac = model.data_jacobian(fit.x[:2])
    cov = np.linalg.pinv(jac.T @ jac) * float(np.sum(fit.fun ** 2)) / dof
    kg_ci = float(stats.t.ppf(0.975, dof) * math.sqrt(max(cov[1, 1], 0.0)))
    return RampLHFit(float(fit.x[1]), kg_ci, float(math.exp(fit.x[0])), constants,
                     float(math.sqrt(np.mean(fit.fun ** 2))))


def fit_ramp_growth(tracks, programme: TemperatureProgramme, *, constants: LHConstants | None = None,
                    time_step_s: float = 0.25) -> RampGrowth | FitFailure:
    """G(T) from the radii of all spherulites of one run on a temperature programme.

    Parameters
    ----------
    tracks : sequence of RadiusTrack
        Free-growth radii (µm) at recording-clock times (s), at least 3 per spherulite.
    programme : TemperatureProgramme
        Sample temperature on the recording clock; must cover the data.
    constants : LHConstants, optional
        Tm0, Tg, U*, T∞ for the direct Lauritzen-Hoffman fit (skipped without them).
    time_step_s : float
        Step of the integration grid, s.
    """
    tracks = [t for t in tracks if t.time_s.size >= _MIN_TRACK_POINTS]
    if len(tracks) < 2:
        return FitFailure(f"{len(tracks)} spherulite(s) with {_MIN_TRACK_POINTS}+ free-growth radii; "
                          "need at least 2")
    time, radius, track_of = _data(tracks)
    programme.require_coverage(float(time.min()), float(time.max()))
    grid = _grid(programme, time, time_step_s)
    lo, hi = float(grid.temperature_c.min()), float(grid.temperature_c.max())
    if hi - lo < 1.0:
        return FitFailure(f"the run spans only {hi - lo:.2f} K while spherulites grow: no G(T)")
    n_segments = int(np.clip(round(hi - lo), 4, 30))
    model = _Model(grid, _spline_basis(grid.temperature_c, lo, hi, n_segments), np.zeros(grid.time_s.size),
                   track_of, radius, len(tracks), _difference_matrix(n_segments + 3))
    rate = _rough_rate_um_per_s(tracks)
    fit, lam, jac, sigma2 = _spline_fit(model, model.start(None, None, rate))
    temps = np.arange(math.ceil(lo / _GRID_STEP_K) * _GRID_STEP_K, hi + 1e-9, _GRID_STEP_K)
    log_g, sd = _band(model, fit, lam, jac, sigma2, _spline_basis(temps, lo, hi, n_segments))
    z = stats.norm.ppf(0.975)
    to_min = math.log(60.0)
    fitted = radius + fit.fun[:radius.size]
    births = _births(model, fit, grid, programme)
    track_fits = tuple(TrackFit(t.id, t.time_s, t.radius_um, fitted[track_of == k], *births[k])
                       for k, t in enumerate(tracks))
    lh = (_lh_fit(tracks, programme, grid, constants, time, radius, track_of, rate)
          if constants is not None else FitFailure("no Lauritzen-Hoffman constants given"))
    warnings = []
    if fit.status <= 0:
        warnings.append(f"the G(T) fit did not converge ({fit.message})")
    return RampGrowth(temps, np.exp(log_g + to_min), np.exp(log_g - z * sd + to_min),
                      np.exp(log_g + z * sd + to_min), _coverage(tracks, programme, temps),
                      track_fits, lh, float(lam), float(math.sqrt(sigma2)), int(radius.size),
                      tuple(warnings))
