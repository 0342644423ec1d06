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
  Statistical Science 11, 89), the smoothing weight chosen by cross-validation with whole
  spherulites left out (Rice & Silverman 1991, J. R. Stat. Soc. B 53, 233); its 95 % band
  is the Bayesian band of a penalised spline (Wahba 1983, J. R. Stat. Soc. B 45, 133) with
  the data part allowing for errors shared by a spherulite's radii and by a frame's radii
  (:func:`_band`). See docs/sources.md, section "Temperature programmes and
  non-isothermal growth".
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

__all__ = ["RadiusTrack", "RampGrowth", "RampLHFit", "TrackFit", "fit_ramp_growth", "growth_integral"]

_MIN_TRACK_POINTS = 3
_GRID_STEP_K = 0.5  # spacing of the reported temperatures
_LAMBDAS = 10.0 ** np.arange(-3.0, 5.0, 1.0)
_CV_FOLDS = 5
_OUTLIER_ROUNDS = 4
_OUTLIER_SIGMAS = 5.0  # a radius this many robust SDs off the joint fit is an outlier
_TRACK_RMS_FACTOR = 3.0  # a spherulite this many times the typical RMS off does not follow G(T)


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
    """Fine time grid over the data and the temperature on it."""

    time_s: np.ndarray
    temperature_c: np.ndarray

    def locate(self, times: np.ndarray):
        """(interval index, position 0..1) of each time in the grid."""
        step = self.time_s[1] - self.time_s[0]
        pos = np.clip((times - self.time_s[0]) / step, 0.0, self.time_s.size - 1 - 1e-9)
        left = np.minimum(pos.astype(int), self.time_s.size - 2)
        return left, pos - left


def _at(values: np.ndarray, where) -> np.ndarray:
    """Linear interpolation of grid values (first axis) at located times."""
    left, frac = where
    lo, hi = values[left], values[left + 1]
    return lo + frac.reshape((-1,) + (1,) * (values.ndim - 1)) * (hi - lo)


def _grid(programme: TemperatureProgramme, t0: float, t1: float, step_s: float) -> _Grid:
    n = int(np.clip(math.ceil((t1 - t0) / step_s), 200, 40_000)) + 1
    grid = np.linspace(t0, t1, n)
    return _Grid(grid, programme.temperature_at(grid))


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
    """Radius R = S(t) − c_track, with ln G(T) (µm/s) = basis(T) · β + offset(T)."""

    def __init__(self, grid: _Grid, basis: np.ndarray, offset: np.ndarray, data: "_Data",
                 penalty: np.ndarray | None):
        self.grid, self.basis, self.offset, self.data = grid, basis, offset, data
        self.track_of, self.radius = data.track_of, data.value
        self.n_tracks = int(data.track_of.max()) + 1
        self.n_beta = basis.shape[1]
        self.penalty = penalty  # (rows, n_beta) difference matrix, or None
        self.where = grid.locate(data.time_s)

    def split(self, params):
        return params[:self.n_beta], params[self.n_beta:]

    def growth_coordinate(self, beta):
        """S at the data times (µm) and its derivatives with respect to β."""
        g = np.exp(self.basis @ beta + self.offset)
        s = _cumulative(g, self.grid.time_s)
        ds = _cumulative(g[:, None] * self.basis, self.grid.time_s)
        return _at(s, self.where), _at(ds, self.where)

    def predict(self, params):
        beta, c = self.split(params)
        return self.growth_coordinate(beta)[0] - c[self.track_of]

    def offsets(self, beta) -> np.ndarray:
        """The least-squares offset of every track for given β (R is linear in c)."""
        s, _ = self.growth_coordinate(beta)
        return np.bincount(self.track_of, s - self.radius) / np.bincount(self.track_of)

    def residuals(self, params, lam):
        r = self.predict(params) - self.radius
        if self.penalty is None:
            return r
        return np.concatenate([r, math.sqrt(lam) * (self.penalty @ self.split(params)[0])])

    def data_jacobian(self, params):
        _, ds = self.growth_coordinate(self.split(params)[0])
        dc = np.zeros((ds.shape[0], self.n_tracks))
        dc[np.arange(ds.shape[0]), self.track_of] = -1.0
        return np.hstack([ds, dc])

    def jacobian(self, params, lam):
        jac = self.data_jacobian(params)
        if self.penalty is None:
            return jac
        pen = np.zeros((self.penalty.shape[0], jac.shape[1]))
        pen[:, :self.n_beta] = math.sqrt(lam) * self.penalty
        return np.vstack([jac, pen])

    def start(self, g0_um_per_s: float):
        """β for a constant G (least squares through the basis), offsets from it."""
        target = math.log(max(g0_um_per_s, 1e-9)) - self.offset
        beta, *_ = np.linalg.lstsq(self.basis, target, rcond=None)
        return np.concatenate([beta, self.offsets(beta)])

    def fit(self, start, lam):
        return optimize.least_squares(self.residuals, start, jac=self.jacobian, args=(lam,),
                                      method="trf", x_scale="jac", max_nfev=200)

    def penalised_hessian(self, jac_data, lam):
        h = jac_data.T @ jac_data
        if self.penalty is not None:
            h[:self.n_beta, :self.n_beta] += lam * (self.penalty.T @ self.penalty)
        return h


@dataclass(frozen=True)
class _Data:
    """All tracks' points, flattened."""

    time_s: np.ndarray
    value: np.ndarray
    track_of: np.ndarray

    @classmethod
    def of(cls, tracks) -> "_Data":
        return cls(np.concatenate([t.time_s for t in tracks]), np.concatenate([t.radius_um for t in tracks]),
                   np.concatenate([np.full(t.time_s.size, k) for k, t in enumerate(tracks)]))

    def subset(self, keep: np.ndarray) -> "_Data":
        """The kept points, tracks renumbered from 0."""
        _, local = np.unique(self.track_of[keep], return_inverse=True)
        return _Data(self.time_s[keep], self.value[keep], local.ravel())


def _spline_basis(temperature_c, lo, hi, n_segments):
    step = (hi - lo) / n_segments
    knots = lo + step * np.arange(-3, n_segments + 4)
    t = np.clip(np.asarray(temperature_c, float), lo, hi - 1e-9 * step)
    return BSpline.design_matrix(t, knots, 3).toarray()


def _difference_matrix(n: int, order: int = 2) -> np.ndarray:
    return np.diff(np.eye(n), n=order, axis=0)


# ---------------------------------------------------------------- the spline fit
def _edf(model, jac_data, lam) -> float:
    h = model.penalised_hessian(jac_data, lam)
    return float(np.trace(np.linalg.solve(h, jac_data.T @ jac_data)))


def _folds(n_tracks: int) -> list[np.ndarray]:
    """Spherulites dealt round-robin into at most _CV_FOLDS groups (deterministic)."""
    k = min(_CV_FOLDS, n_tracks)
    return [np.arange(i, n_tracks, k) for i in range(k)]


def _held_out_error(model, start, lam, held) -> np.ndarray:
    """Squared error of each spherulite in ``held`` (an array over all spherulites, zero
    for the others) under a fit made without them; their own offsets (unknown birth) are
    fitted to the held-out radii with G(T) fixed."""
    train = ~np.isin(model.track_of, held)
    sub = _Model(model.grid, model.basis, model.offset, model.data.subset(train), model.penalty)
    keep_tracks = np.setdiff1d(np.arange(model.n_tracks), held)
    fit = sub.fit(np.concatenate([start[:model.n_beta], start[model.n_beta:][keep_tracks]]), lam)
    test = _Model(model.grid, model.basis, model.offset, model.data.subset(~train), None)
    beta = fit.x[:model.n_beta]
    squared = (test.predict(np.concatenate([beta, test.offsets(beta)])) - test.radius) ** 2
    out = np.zeros(model.n_tracks)
    out[np.sort(np.asarray(held))] = np.bincount(test.track_of, squared)
    return out


@dataclass(frozen=True)
class _Smoothing:
    """One smoothing weight's fit: the fit, λ, the data Jacobian and σ²."""

    fit: object
    lam: float
    jac: np.ndarray
    sigma2: float


def _spline_fit(model, start) -> tuple[_Smoothing, tuple[_Smoothing, ...]]:
    """The smoothing weight with the lowest cross-validated error, spherulites left out a
    fold at a time (radii of one spherulite are correlated, so leaving out single radii,
    as generalised cross-validation does, would under-smooth), and every weight the data
    cannot tell from it.

    The second are the weights whose cross-validated error exceeds the best by no more
    than one standard error of the difference (paired over spherulites; the one-standard-
    error rule, Hastie, Tibshirani & Friedman 2009, The Elements of Statistical Learning,
    2nd ed., §7.10): with a flat cross-validation curve the choice of λ is itself
    uncertain, and the band has to cover it (:func:`_band_envelope`).
    """
    folds = _folds(model.n_tracks)
    guess, runs = start, []
    for lam in _LAMBDAS:
        fit = model.fit(guess, lam)
        guess = fit.x
        errors = (sum(_held_out_error(model, fit.x, lam, held) for held in folds) if len(folds) > 1
                  else np.zeros(model.n_tracks))
        runs.append((errors, fit, lam))
    best = min(range(len(runs)), key=lambda k: runs[k][0].sum())
    plausible = []
    for k, (errors, fit, lam) in enumerate(runs):
        diff = errors - runs[best][0]
        if k == best or diff.sum() <= math.sqrt(diff.size) * float(np.std(diff, ddof=1)):
            plausible.append(_smoothing(model, fit, lam))
    chosen = next(p for p in plausible if p.lam == runs[best][2])
    return chosen, tuple(plausible)


def _smoothing(model, fit, lam) -> _Smoothing:
    n = model.radius.size
    jac = model.data_jacobian(fit.x)
    rss = float(np.sum(fit.fun[:n] ** 2))
    return _Smoothing(fit, float(lam), jac, rss / max(n - _edf(model, jac, lam), 1.0))


@dataclass(frozen=True)
class _SplineStage:
    model: _Model
    fit: object
    lam: float
    jac: np.ndarray
    sigma2: float
    lo: float
    hi: float
    n_segments: int
    rate_um_per_s: float
    plausible: tuple[_Smoothing, ...] = ()


def _spline_stage(programme, data: _Data, time_step_s):
    """One penalised-spline fit of the given points."""
    grid = _grid(programme, float(data.time_s.min()), float(data.time_s.max()), time_step_s)
    lo, hi = float(grid.temperature_c.min()), float(grid.temperature_c.max())
    if hi - lo < 1.0:
        return FitFailure(f"the run spans only {hi - lo:.2f} K while spherulites grow: no G(T)")
    n_segments = int(np.clip(round(hi - lo), 4, 30))
    model = _Model(grid, _spline_basis(grid.temperature_c, lo, hi, n_segments), np.zeros(grid.time_s.size),
                   data, _difference_matrix(n_segments + 3))
    slopes = []
    for k in range(model.n_tracks):
        mine = data.track_of == k
        span = np.ptp(data.time_s[mine])
        slopes.append(np.ptp(data.value[mine]) / span if span > 0 else 0.0)
    rate = float(np.median(np.clip(slopes, 1e-6, None)))
    chosen, plausible = _spline_fit(model, model.start(rate))
    return _SplineStage(model, chosen.fit, chosen.lam, chosen.jac, chosen.sigma2, lo, hi, n_segments, rate,
                        plausible)


def _clustered_meat(jac, residual, groups) -> np.ndarray:
    """Σ_g J_gᵀ r_g r_gᵀ J_g over the groups g (labels 0..m−1), times m/(m − 1)
    (Liang & Zeger 1986, Biometrika 73, 13)."""
    m = int(groups.max()) + 1
    per_group = np.zeros((m, jac.shape[1]))
    np.add.at(per_group, groups, jac * residual[:, None])
    return per_group.T @ per_group * m / max(m - 1, 1)


def _frame_of(time_s) -> np.ndarray:
    """Frame number (0..F−1) of every point: radii measured at the same moment."""
    _, frame_of = np.unique(np.round(time_s, 6), return_inverse=True)
    return frame_of.ravel()


def _frame_variance(residual, frame_of, hat) -> float:
    """σ_f² of an error shared by every radius of one frame, by matching two quadratic
    forms of the residuals to their expectations (Henderson's method, Searle, Casella &
    McCulloch 1992, Variance Components, ch. 5 `# from memory`).

    The fitted G(T) absorbs part of any error common to a frame, as many frame-level
    directions as it has effective parameters, so the spread of the per-frame mean
    residuals alone underestimates σ_f². With M = I − H (H the hat matrix of the
    penalised fit, linearised at the optimum) and Z the frame indicator, the residuals
    have covariance M(σ_f² ZZᵀ + σ² I)Mᵀ; the pooled frame means Q₁ = Σ_f n_f m̄_f² and
    the total Q₀ = Σ r² then have expectations linear in (σ_f², σ²), solved here.
    """
    n_frames = int(frame_of.max()) + 1
    counts = np.bincount(frame_of, minlength=n_frames).astype(float)
    z = np.zeros((residual.size, n_frames))
    z[np.arange(residual.size), frame_of] = 1.0
    m = np.eye(residual.size) - hat
    mz = m @ z
    scale = 1.0 / np.sqrt(counts)[:, None]
    a = np.array([[np.sum((scale * (z.T @ mz)) ** 2), np.sum((scale * (z.T @ m)) ** 2)],
                  [np.sum(mz ** 2), np.sum(m ** 2)]])
    sums = np.bincount(frame_of, residual, minlength=n_frames)
    q = np.array([np.sum(sums ** 2 / counts), np.sum(residual ** 2)])
    try:
        sigma_f2, _ = np.linalg.solve(a, q)
    except np.linalg.LinAlgError:
        return 0.0
    return max(float(sigma_f2), 0.0)


def _two_way_meat(jac, residual, track_of, time_s, hat) -> np.ndarray:
    """Clustered by spherulite (Liang & Zeger 1986) plus a frame random effect.

    A spherulite's radii share its centre error; all radii of one frame share that frame's
    exposure (flicker, noise in the threshold crossing, the pixel grid seen by spherulites
    of the same size), an error common to every spherulite at that moment that no amount
    of spherulites averages away. Its variance σ_f² comes from :func:`_frame_variance`;
    the frame term is σ_f² Σ_f s_f s_fᵀ with s_f the summed Jacobian rows of frame f.
    ``hat``: the (n × n) hat matrix of the fit.
    """
    frame_of = _frame_of(time_s)
    n_frames = int(frame_of.max()) + 1
    sigma_f2 = _frame_variance(residual, frame_of, hat)
    summed = np.zeros((n_frames, jac.shape[1]))
    np.add.at(summed, frame_of, jac)
    return _clustered_meat(jac, residual, track_of) + sigma_f2 * (summed.T @ summed)


def _band(model, smoothing: _Smoothing, basis_report):
    """ln G (µm/s) and its standard error at the report temperatures for one smoothing weight.

    Bayesian band of a penalised spline, H⁻¹(σ²JᵀJ + σ²λPᵀP)H⁻¹ = σ²H⁻¹ with
    H = JᵀJ + λPᵀP (Wahba 1983), except that the data part σ²JᵀJ is replaced by one that
    lets radii of a spherulite, and radii of a frame, err together (:func:`_two_way_meat`);
    the penalty part keeps the allowance for the smoothing bias. Never narrower than the
    independent-error band.
    """
    jac, lam, sigma2 = smoothing.jac, smoothing.lam, smoothing.sigma2
    bread = np.linalg.pinv(model.penalised_hessian(jac, lam))
    meat = _two_way_meat(jac, smoothing.fit.fun[:model.radius.size], model.track_of, model.data.time_s,
                         jac @ bread @ jac.T)
    prior = np.zeros_like(meat)
    if model.penalty is not None:
        prior[:model.n_beta, :model.n_beta] = sigma2 * lam * (model.penalty.T @ model.penalty)
    cov = bread @ (meat + prior) @ bread
    naive = sigma2 * bread  # never claim more than the independent-error band
    beta = model.split(smoothing.fit.x)[0]
    nb = model.n_beta
    var = np.maximum(np.einsum("ij,jk,ik->i", basis_report, cov[:nb, :nb], basis_report),
                     np.einsum("ij,jk,ik->i", basis_report, naive[:nb, :nb], basis_report))
    return basis_report @ beta, np.sqrt(np.maximum(var, 0.0))


def _band_envelope(stage, basis_report, z: float):
    """(ln G, low, high) in ln(µm/s): the estimate at the chosen smoothing weight and the
    envelope of the ±z·SE bands of every weight the cross-validation cannot tell from it
    (:func:`_spline_fit`), so that the band allows for the choice of λ."""
    chosen = _Smoothing(stage.fit, stage.lam, stage.jac, stage.sigma2)
    log_g, sd = _band(stage.model, chosen, basis_report)
    low, high = log_g - z * sd, log_g + z * sd
    for other in stage.plausible:
        if other.lam == stage.lam:
            continue
        other_g, other_sd = _band(stage.model, other, basis_report)
        low, high = np.minimum(low, other_g - z * other_sd), np.maximum(high, other_g + z * other_sd)
    return log_g, low, high


def _outliers(residual: np.ndarray, track_of: np.ndarray) -> np.ndarray:
    """Points far off the joint fit, and every point of a spherulite that is far off as a whole."""
    sigma = 1.4826 * float(np.median(np.abs(residual))) + 1e-12
    out = np.abs(residual) > _OUTLIER_SIGMAS * sigma
    rms = np.sqrt(np.bincount(track_of, residual ** 2) / np.bincount(track_of))
    bad_track = rms > _TRACK_RMS_FACTOR * float(np.median(rms))
    return out | bad_track[track_of]


def _coverage(tracks, programme, temps):
    """Per reported temperature, how many spherulites grew through it."""
    counts = np.zeros(temps.size, int)
    for track in tracks:
        t = np.linspace(track.time_s.min(), track.time_s.max(), 200)
        seen = programme.temperature_at(t)
        counts += (temps >= seen.min() - _GRID_STEP_K / 2) & (temps <= seen.max() + _GRID_STEP_K / 2)
    return counts


def _births(stage, programme):
    """Time and temperature where each track's modelled radius is zero.

    Before the first data, ln G is continued linearly in T from the edge of the fitted
    range (a short extrapolation: the first radii are small). None when the birth lies
    before the programme starts.
    """
    model = stage.model
    beta, offsets = model.split(stage.fit.x)
    grid = model.grid
    start = max(float(programme.time_s[0]), float(grid.time_s[0]) - float(np.ptp(grid.time_s)) - 60.0)
    early = np.linspace(start, float(grid.time_s[0]), 2001)
    t_all = np.concatenate([early[:-1], grid.time_s])
    temps = programme.temperature_at(t_all)
    edges = np.array([stage.lo, stage.lo + 0.25, stage.hi - 0.25, stage.hi])
    log_edges = _spline_basis(edges, stage.lo, stage.hi, stage.n_segments) @ beta
    slope_lo, slope_hi = (log_edges[1] - log_edges[0]) / 0.25, (log_edges[3] - log_edges[2]) / 0.25
    log_g = _spline_basis(temps, stage.lo, stage.hi, stage.n_segments) @ beta
    log_g = np.where(temps < stage.lo, log_edges[0] + slope_lo * (temps - stage.lo), log_g)
    log_g = np.where(temps > stage.hi, log_edges[3] + slope_hi * (temps - stage.hi), log_g)
    s = _cumulative(np.exp(log_g), t_all)
    s = s - s[early.size - 1] + np.arange(s.size) * 1e-12  # S = 0 at the grid start, as in the model
    out = []
    for c in offsets:
        if c < s[0]:
            out.append((None, None))
            continue
        t = float(np.interp(c, s, t_all))
        out.append((t, float(programme.temperature_at(t))))
    return out


def _lh_fit(grid, constants, data: _Data, start_rate):
    """Direct Lauritzen-Hoffman fit of all radii: (RampLHFit | FitFailure)."""
    t_inf_k = constants.t_inf + 273.15
    temp_k = grid.temperature_c + 273.15
    if np.any(temp_k <= t_inf_k) or np.any(temp_k >= constants.tm0_k):
        return FitFailure("the run leaves (T_inf, Tm0): no Lauritzen-Hoffman fit")
    x, _ = lh_coordinates(grid.temperature_c, np.ones_like(temp_k), constants)
    offset = -constants.u_star_j_per_mol / (R_J_PER_MOL_K * (temp_k - t_inf_k)) - math.log(60.0)
    model = _Model(grid, np.column_stack([np.ones_like(x), -x]), offset, data, None)
    start = model.start(start_rate)
    start[1] = 4e5  # any sensible Kg; ln G0 then follows from the typical rate
    start[0] = math.log(start_rate) + 4e5 * float(np.median(x)) - float(np.median(offset))
    fit = model.fit(start, 0.0)
    dof = max(data.value.size - fit.x.size, 1)
    jac = model.data_jacobian(fit.x)
    bread = np.linalg.pinv(jac.T @ jac)
    naive = bread * float(np.sum(fit.fun ** 2)) / dof
    clustered = bread @ _two_way_meat(jac, fit.fun, data.track_of, data.time_s, jac @ bread @ jac.T) @ bread
    # spherulites are the independent units: t quantile on their number, clustered variance
    kg_ci = float(stats.t.ppf(0.975, max(model.n_tracks - 1, 1)) *
                  math.sqrt(max(clustered[1, 1], naive[1, 1], 0.0)))
    return RampLHFit(float(fit.x[1]), kg_ci, float(math.exp(fit.x[0])), constants,
                     float(math.sqrt(np.mean(fit.fun ** 2))))


# ---------------------------------------------------------------- public
def fit_ramp_growth(tracks, programme: TemperatureProgramme, *, constants: LHConstants | None = None,
                    time_step_s: float = 0.25) -> RampGrowth | FitFailure:
    """G(T) from the growth data of all spherulites of one run on a temperature programme.

    Parameters
    ----------
    tracks : sequence of RadiusTrack
        Radii (µm) at recording-clock times (s), at least 3 per spherulite.
    programme : TemperatureProgramme
        Sample temperature on the recording clock; must cover the data.
    constants : LHConstants, optional
        Tm0, Tg, U*, T∞ for the direct Lauritzen-Hoffman fit (skipped without them).
    time_step_s : float
        Step of the integration grid, s.

    Points far off the joint fit (more than 5 robust standard deviations), and spherulites
    whose data miss it by more than 3 times the typical spherulite's scatter (a merged or
    mis-split territory), are left out and named in ``warnings``; the fit is then repeated.
    """
    tracks = [t for t in tracks if t.time_s.size >= _MIN_TRACK_POINTS]
    if len(tracks) < 2:
        return FitFailure(f"{len(tracks)} spherulite(s) with {_MIN_TRACK_POINTS}+ free-growth radii; "
                          "need at least 2")
    data = _Data.of(tracks)
    programme.require_coverage(float(data.time_s.min()), float(data.time_s.max()))
    keep = np.ones(data.value.size, bool)
    for round_number in range(_OUTLIER_ROUNDS):
        counts = np.bincount(data.track_of[keep], minlength=len(tracks))
        keep &= counts[data.track_of] >= _MIN_TRACK_POINTS
        if np.count_nonzero(counts >= _MIN_TRACK_POINTS) < 2:
            return FitFailure("fewer than 2 spherulites follow a common growth rate")
        kept = data.subset(keep)
        stage = _spline_stage(programme, kept, time_step_s)
        if isinstance(stage, FitFailure):
            return stage
        bad = _outliers(stage.fit.fun[:kept.value.size], kept.track_of)
        if not bad.any() or round_number == _OUTLIER_ROUNDS - 1:  # keep matches the last fit
            break
        keep[np.flatnonzero(keep)[bad]] = False
    return _ramp_growth(tracks, programme, constants, data, keep, stage)


def _ramp_growth(tracks, programme, constants, data, keep, stage):
    temps = np.arange(math.ceil(stage.lo / _GRID_STEP_K) * _GRID_STEP_K, stage.hi + 1e-9, _GRID_STEP_K)
    # spherulites are the independent units of a clustered variance: t quantile on their
    # number less one (Bell & McCaffrey 2002, Survey Methodology 28, 169, `# from memory`)
    z = stats.t.ppf(0.975, max(stage.model.n_tracks - 1, 1))
    log_g, low, high = _band_envelope(stage, _spline_basis(temps, stage.lo, stage.hi, stage.n_segments), z)
    to_min = math.log(60.0)
    used = [k for k in range(len(tracks)) if np.any(keep & (data.track_of == k))]
    fitted = np.full(data.value.size, np.nan)
    fitted[keep] = stage.model.predict(stage.fit.x)
    births = _births(stage, programme)
    track_fits = tuple(TrackFit(tracks[k].id, tracks[k].time_s, tracks[k].radius_um,
                                fitted[data.track_of == k], *births[j]) for j, k in enumerate(used))
    lh = FitFailure("no Lauritzen-Hoffman constants given")
    if constants is not None:
        lh = _lh_fit(stage.model.grid, constants, data.subset(keep), stage.rate_um_per_s)
    return RampGrowth(temps, np.exp(log_g + to_min), np.exp(low + to_min),
                      np.exp(high + to_min), _coverage([tracks[k] for k in used], programme, temps),
                      track_fits, lh, float(stage.lam), float(math.sqrt(stage.sigma2)),
                      int(np.count_nonzero(keep)), tuple(_warnings(tracks, used, keep, stage.fit)))


def _warnings(tracks, used, keep, fit) -> list[str]:
    warnings = []
    lost = [str(t.id) for k, t in enumerate(tracks) if k not in used]
    if lost:
        warnings.append(f"spherulite(s) {', '.join(lost)} left out of G(T): their growth does not "
                        "follow the common rate (merged or split territories?)")
    n_out = int(np.count_nonzero(~keep))
    if n_out:
        warnings.append(f"{n_out} of {keep.size} points left out of G(T) as outliers")
    if fit.status <= 0:
        warnings.append(f"the G(T) fit did not converge ({fit.message})")
    return warnings
