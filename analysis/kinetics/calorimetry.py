"""Isothermal calorimetry: import delimited exports, baseline, X(t), Avrami fit.

Reading the files is in :mod:`analysis.kinetics.calorimetry_import`; its public names are
re-exported here.

Public API (stable; the GUI codes against it)
---------------------------------------------
``sniff_calorimetry_file(path, *, max_rows=8) -> CalorimetryPreview``
    Detected ``delimiter`` ("," ";" "\\t" or " " for whitespace), ``decimal`` ("." or ","),
    ``header_line`` (0-based line index of the column row, or None), ``columns``,
    ``metadata`` lines, first data ``rows`` (strings), suggested ``time_col`` /
    ``heat_flow_col`` (0-based indexes), ``time_unit`` / ``heat_flow_unit`` read from the
    column names (or None), ``mass_mg`` found in the metadata (or None).
``read_isotherm(path, *, time_col=None, heat_flow_col=None, time_unit=None,
heat_flow_unit=None) -> Isotherm``
    Columns by name (case-insensitive, with or without the unit) or 0-based index.
    ``Isotherm``: ``time_min``, ``heat_flow`` (in ``heat_flow_unit``: "mW" or "W/g"),
    ``mass_mg`` from the file's metadata, ``warnings``.
``analyze_isotherm(isotherm, *, exotherm="auto", window=DEFAULT_FIT_WINDOW, mass_mg=None,
material=None, baseline="linear", baseline_start_min=None, baseline_end_min=None,
transient_end_min=None) -> CalorimetryResult``
``analyze_calorimetry_file(path, **options) -> CalorimetryResult`` (read + analyse)
``analyze_source(source) -> CalorimetryResult`` for a ``project.CalorimetrySource``
``write_calorimetry_outputs(result, out_dir)``: ``calorimetry.json`` + ``conversion.csv``
``add_cli_arguments(parser)`` / ``run_cli(args) -> int`` for ``spherokin calorimetry``
(DESIGN options plus ``--lag-s`` for the optional thermal-lag correction).

All times are in minutes from the start of the isotherm. Any malformed input raises
``errors.InputError`` with one line naming the file and the problem.

Method
------
1. Start-up transient: the record is cut at the first minimum of the smoothed deviation
   from the final level (where the quench transient has died away and the exotherm has
   not begun), or at ``transient_end_min``; an exponential decay fitted before the
   exotherm is subtracted so that its tail does not lift the baseline start.
2. Exotherm direction: sign of the area between the signal and the final level
   (``exotherm="up"``/``"down"`` overrides).
3. Baseline: straight line between the mean signal at an automatic start (lowest
   smoothed point between transient and peak) and end (first point after the peak back
   within noise of the final level), both overridable; or ``"flat"`` at the end level.
4. X(t): cumulative trapezoid integral of the baseline-corrected heat flow, normalised.
5. Induction time t0: onset of a three-parameter fit X = 1 - exp(-k (t - t0)^n) to the
   primary conversion (2-80 %), which absorbs most of the instrument lag; the Avrami
   window fit (default 3-20 %, Lorenzo et al. 2007 Polymer Testing 26, 222, from memory),
   the whole-curve fit, the fitted t_half = (ln 2 / k)^(1/n) and the measured t_half
   (X = 0.5) are all counted from t0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
from scipy import integrate, ndimage, optimize, signal, stats

from analysis.errors import InputError
from analysis.intervals import DEFAULT_SEED
from analysis.kinetics.calorimetry_intervals import calorimetry_interval_steps, calorimetry_intervals
from analysis.units import write_csv_atomic, write_json_atomic
from analysis.outputs import staged_outputs
from analysis.kinetics.avrami import (
    AvramiFit,
    FitFailure,
    fit_avrami_curve,
    fit_avrami_window,
)
from analysis.kinetics.calorimetry_import import (  # re-exported: reading lives in its own module
    CalorimetryPreview,
    HeaderCheck,
    check_header,
    Isotherm,
    read_isotherm,
    sniff_calorimetry_file,
)
from analysis.settings import DEFAULT_FIT_WINDOW

__all__ = ["CalorimetryPreview", "CalorimetryResult", "Isotherm", "HeaderCheck", "check_header",
           "analyze_calorimetry_file", "analyze_isotherm", "analyze_source", "parse_window",
           "read_isotherm", "sniff_calorimetry_file", "write_calorimetry_outputs"]



# ---------------------------------------------------------------- analysis
@dataclass(frozen=True)
class CalorimetryResult:
    """Analysis of one isotherm. Times in min from the start of the isotherm.

    ``relative_crystallinity`` is aligned with ``time_min`` (0 before the baseline start,
    1 after its end). ``avrami`` (window fit) and ``avrami_curve`` (whole curve) are
    ``AvramiFit`` or a falsy ``FitFailure``, in (t - induction_time_min).
    """

    path: str
    time_min: np.ndarray
    heat_flow: np.ndarray
    heat_flow_unit: str
    baseline: np.ndarray
    exotherm: str
    transient_end_min: float
    baseline_start_min: float
    baseline_end_min: float
    induction_time_min: float
    relative_crystallinity: np.ndarray
    enthalpy_j_per_g: float | None
    crystallinity: float | None
    window: tuple[float, float]
    avrami: AvramiFit | FitFailure
    avrami_curve: AvramiFit | FitFailure
    t_half_measured_min: float | None
    material: str | None = None
    warnings: tuple[str, ...] = field(default=())
    # calorimetry_intervals.CalorimetryIntervals of the window fit, or None (not computed)
    intervals: object | None = None
    induction_time_se_min: float | None = None  # standard error of the onset fit's t0

    def conversion_table(self) -> tuple[np.ndarray, np.ndarray]:
        """(time_min, X) between the baseline start and end, X clipped to [0, 1]."""
        sel = (self.time_min >= self.baseline_start_min) & (self.time_min <= self.baseline_end_min)
        return self.time_min[sel], np.clip(self.relative_crystallinity[sel], 0.0, 1.0)

    def _interval_keys(self) -> dict:
        """``<name>_ci95_low`` / ``<name>_ci95_high`` of n, k and t_half (null: unknown)."""
        ci = self.intervals
        out = {}
        for name in ("n", "k_per_min_n", "t_half_min"):
            part = getattr(ci, name, None)
            out[f"{name}_ci95_low"] = None if part is None else part.low
            out[f"{name}_ci95_high"] = None if part is None else part.high
        if ci is not None:
            out["interval_seed"] = ci.seed
        return out
    def volume_conversion(self) -> tuple[np.ndarray, np.ndarray, str]:
        """(t_min from the induction time, X, basis in words) for comparison with microscopy.

        X is converted from the calorimeter's mass basis to a volume basis with the
        material's crystal/amorphous density ratio (docs/sources.md §4.1); without a
        material, or without densities for it, X stays on a mass basis and the basis
        says why. Points at or before the induction time are left out.
        """
        from analysis.kinetics.avrami import volume_fraction_from_mass

        t, x = self.conversion_table()
        tau = t - self.induction_time_min
        keep = tau > 0
        tau, x = tau[keep], x[keep]
        if self.material is None:
            return tau, x, "mass basis (choose a material for the density ratio)"
        try:
            return tau, volume_fraction_from_mass(x, material=self.material), "volume basis"
        except InputError as error:
            return tau, x, f"mass basis ({error.problem})"

    def to_json_dict(self) -> dict:
        """The ``calorimetry.json`` document (docs/design.md)."""
        fit = self.avrami
        return {
            "schema": 1, "file": self.path, "induction_time_min": self.induction_time_min,
            "enthalpy_j_per_g": self.enthalpy_j_per_g, "crystallinity": self.crystallinity,
            "window": list(self.window),
            "avrami": {"n": fit.n if fit else None, "k_per_min_n": fit.k_per_min_n if fit else None,
                       "t_half_min": fit.t_half_min if fit else None, "r2": fit.r2 if fit else None,
                       **self._interval_keys()},
            "t_half_measured_min": self.t_half_measured_min,
        }


def _smooth(y: np.ndarray, width: int) -> np.ndarray:
    width = max(1, int(width) | 1)
    return ndimage.uniform_filter1d(ndimage.median_filter(y, size=width, mode="nearest"),
                                    size=width, mode="nearest")


def _noise_sigma(y: np.ndarray) -> float:
    """Robust white-noise level from the median absolute successive difference."""
    return float(np.median(np.abs(np.diff(y))) / (0.6745 * math.sqrt(2.0))) or 1e-12


def white_noise_sigma(y) -> float:
    """White-noise level of a record from its second differences (robust MAD).

    The second difference y[i+1] - 2 y[i] + y[i-1] cancels the local slope of the signal,
    which on a steep exotherm dominates successive differences, and has variance 6 sigma^2
    for white noise; the median absolute value / 0.6745 is a robust sigma (Hampel 1974,
    J. Am. Stat. Assoc. 69, 383). Used where the noise itself matters (the intervals);
    the detection thresholds keep their own, deliberately conservative, level.
    """
    y = np.asarray(y, dtype=float)
    if y.size < 3:
        return 1e-12
    return float(np.median(np.abs(np.diff(y, 2))) / (0.6745 * math.sqrt(6.0))) or 1e-12


def _index_at(time_min: np.ndarray, value: float | None, default: int) -> int:
    if value is None:
        return default
    return int(np.clip(np.searchsorted(time_min, value), 0, time_min.size - 1))


def _first_local_minimum(y: np.ndarray) -> int:
    inner = np.nonzero((y[1:-1] <= y[:-2]) & (y[1:-1] < y[2:]))[0]
    return int(inner[0] + 1) if inner.size else int(np.argmin(y))


def _local_level(q: np.ndarray, i: int, half: int) -> float:
    return float(np.mean(q[max(0, i - half): i + half + 1]))


def _final_level(t: np.ndarray, q: np.ndarray):
    """Level after the exotherm (last 10 %), with its drift only when the drift is significant.

    An insignificant tail slope extrapolated over the whole record would invent exotherms
    in pure noise; a real drift left out would hide the exotherm's start.
    """
    tail = slice(min(int(0.9 * t.size), t.size - 10), t.size)
    fit = stats.linregress(t[tail], q[tail])
    if np.isfinite(fit.stderr) and abs(fit.slope) > 3 * fit.stderr:
        return fit.intercept + fit.slope * t
    return float(np.median(q[tail]))


def _locate_exotherm(t, q, exotherm, transient_end_min, path):
    """Transient end index, orientation sign, peak index and smoothed oriented deviation."""
    width = max(5, t.size // 100)
    smooth = _smooth(q, width)
    dev = smooth - _final_level(t, q)
    i_tr = _index_at(t, transient_end_min, _first_local_minimum(_smooth(np.abs(dev), 3 * width)))
    if exotherm == "auto":
        area = float(np.sum(dev[i_tr:]))
        sign = 1.0 if area > 0 else -1.0
    elif exotherm in ("up", "down"):
        sign = 1.0 if exotherm == "up" else -1.0
    else:
        raise InputError(f"exotherm must be up, down or auto, got {exotherm!r}", path)
    oriented = sign * dev
    if i_tr >= t.size - 3:
        raise InputError("no data left after the start-up transient", path)
    peak = i_tr + int(np.argmax(oriented[i_tr:]))
    sigma = _noise_sigma(q) / math.sqrt(width)
    if oriented[peak] < 5 * _noise_sigma(q):
        raise InputError("no crystallization exotherm stands out of the noise", path)
    return i_tr, sign, peak, oriented, width, sigma


def _baseline_anchors(t, oriented, i_tr, peak, width, sigma, start_min, end_min):
    start = i_tr + int(np.argmin(oriented[i_tr: peak + 1]))
    threshold = max(3 * sigma, 0.001 * oriented[peak])
    after = np.nonzero(oriented[peak:] < threshold)[0]
    end = peak + int(after[0]) if after.size else t.size - 1
    end = min(t.size - 1, end + width)
    return _index_at(t, start_min, start), _index_at(t, end_min, end)


#: Conversion range of the onset fit (fractions): skips the first per cent, where
#: instrument lag distorts the shape most.
ONSET_RANGE = (0.02, 0.80)


def _onset_fit(t, x, start_min, onset_range=ONSET_RANGE) -> tuple[float, float | None]:
    """Induction time: onset t0 of X = 1 - exp(-ln2 ((t - t0)/th)^n) fitted over
    ``onset_range`` of conversion (default 2-80 %).

    Returns t0 and its standard error (None when the fit fails). X is a running
    integral, so neighbouring residuals share their errors and the fit's own standard
    error understates the real one many times over; it is scaled by sqrt((1 + r)/(1 - r))
    with r the lag-1 autocorrelation of the residuals, the variance inflation of a mean of
    an AR(1) series (Bayley & Hammersley 1946, Suppl. J. R. Stat. Soc. 8, 184).
    """
    sel = (x >= onset_range[0]) & (x <= onset_range[1])
    if np.count_nonzero(sel) < 5:
        return start_min, None
    t_first = float(t[np.argmax(x >= 0.01)])
    half = float(np.interp(0.5, np.maximum.accumulate(x), t))

    def model(tt, n, th, t0):
        return -np.expm1(-math.log(2.0) * (np.clip(tt - t0, 0.0, None) / th) ** n)

    p0 = (3.0, max(half - start_min, 1e-6), min(start_min, 0.999 * t_first))
    bounds = ([0.5, 1e-9, min(0.0, p0[2])], [8.0, np.inf, t_first])
    try:
        params, cov = optimize.curve_fit(model, t[sel], x[sel], p0=p0, bounds=bounds)
    except (RuntimeError, ValueError):
        return start_min, None
    if not (np.isfinite(cov[2, 2]) and cov[2, 2] >= 0):
        return float(params[2]), None
    residual = x[sel] - model(t[sel], *params)
    return float(params[2]), math.sqrt(cov[2, 2]) * _ar1_inflation(residual)


def _ar1_inflation(residual: np.ndarray) -> float:
    """sqrt((1 + r) / (1 - r)) for the lag-1 autocorrelation r of the residuals (r <= 0: 1;
    r capped at 0.999 so that a perfectly smooth residual stays finite)."""
    centred = residual - residual.mean()
    denominator = float(np.dot(centred, centred))
    if centred.size < 3 or denominator <= 0:
        return 1.0
    r = min(float(np.dot(centred[1:], centred[:-1])) / denominator, 0.999)
    return math.sqrt((1 + r) / (1 - r)) if r > 0 else 1.0


def _lag_corrected(isotherm: Isotherm, lag_s: float) -> np.ndarray:
    """First-order lag (Tian) correction q + tau dq/dt, derivative by Savitzky-Golay."""
    if not lag_s:
        return isotherm.heat_flow
    if not (np.isfinite(lag_s) and lag_s > 0):
        raise InputError(f"lag time constant must be positive, got {lag_s!r} s", isotherm.path)
    t, q = isotherm.time_min, isotherm.heat_flow
    step = float(np.median(np.diff(t)))
    # cubic Savitzky-Golay over about two lag times: smooth enough for noise, short
    # enough to follow an exotherm only a few lag times wide
    window = max(7, int(round(2 * lag_s / 60.0 / step)) | 1)
    if window > t.size // 4:
        raise InputError(f"lag time constant {lag_s:g} s is too long for a record of "
                         f"{t.size} points at {step * 60:g} s", isotherm.path)
    slope = signal.savgol_filter(q, window, 3, deriv=1, delta=step, mode="interp")
    return q + (lag_s / 60.0) * slope


def _transient_tail(t, q, start) -> np.ndarray:
    """Start-up transient A exp(-t / tau) fitted before the exotherm, extended under it.

    The quench transient decays towards the isothermal baseline; its tail would otherwise
    lift the baseline start. Returns zeros when the decay cannot be resolved.
    """
    zeros = np.zeros_like(q)
    if start < 8:
        return zeros
    tt, qq = t[: start + 1] - t[0], q[: start + 1]

    def model(x, c, a, tau):
        return c + a * np.exp(-x / tau)

    span = float(tt[-1])
    p0 = (float(qq[-1]), float(qq[0] - qq[-1]), span / 5)
    try:
        (c, a, tau), _ = optimize.curve_fit(model, tt, qq, p0=p0,
                                            bounds=([-np.inf, -np.inf, span / 200], [np.inf, np.inf, span / 2]))
    except (RuntimeError, ValueError):
        return zeros
    if abs(a) < 3 * _noise_sigma(qq):
        return zeros
    return a * np.exp(-(t - t[0]) / tau)


def _enthalpy(area_unit_min: float, unit: str, mass_mg: float | None):
    if unit == "W/g":
        return area_unit_min * 60.0
    return area_unit_min * 60.0 / mass_mg if mass_mg else None


def analyze_isotherm(isotherm: Isotherm, *, exotherm: str = "auto", window=DEFAULT_FIT_WINDOW,
                     mass_mg: float | None = None, material: str | None = None,
                     baseline: str = "linear", baseline_start_min: float | None = None,
                     baseline_end_min: float | None = None,
                     transient_end_min: float | None = None,
                     lag_s: float = 0.0, onset_range=ONSET_RANGE) -> CalorimetryResult:
    """Baseline, X(t), induction time, enthalpy and Avrami fits of one isotherm (see module doc).

    ``lag_s`` is the instrument's first-order time constant (s, from a calibration such as
    the trailing edge of an indium melting peak); when given, the heat flow is corrected
    q + tau dq/dt before the analysis. 0 (default) means no correction.
    ``onset_range`` is the conversion range (fractions) of the induction-time fit.
    """
    path, t, q = isotherm.path, isotherm.time_min, _lag_corrected(isotherm, lag_s)
    window = parse_window(window, path)
    if mass_mg is not None and not (np.isfinite(mass_mg) and mass_mg > 0):
        raise InputError(f"sample mass must be a positive number of mg, got {mass_mg!r}", path)
    if baseline not in ("linear", "flat"):
        raise InputError(f"baseline must be linear or flat, got {baseline!r}", path)
    i_tr, sign, peak, oriented, width, sigma = _locate_exotherm(t, q, exotherm,
                                                                transient_end_min, path)
    start, end = _baseline_anchors(t, oriented, i_tr, peak, width, sigma, baseline_start_min,
                                   baseline_end_min)
    if not start < peak < end:
        raise InputError(f"baseline start {t[start]:g} min and end {t[end]:g} min do not "
                         f"bracket the exotherm peak at {t[peak]:g} min", path)
    half = max(1, width // 2)
    q = q - _transient_tail(t, q, start)
    level_s, level_e = _local_level(q, start, half), _local_level(q, end, half)
    if baseline == "flat":
        line = np.full_like(q, level_e)
    else:
        line = level_s + (level_e - level_s) * (t - t[start]) / (t[end] - t[start])
    signal = sign * (q - line)
    seg = slice(start, end + 1)
    cumulative = integrate.cumulative_trapezoid(signal[seg], t[seg], initial=0.0)
    total = float(cumulative[-1])
    if not total > 0:
        raise InputError("the exotherm area after baseline subtraction is not positive", path)
    x = np.zeros_like(t)
    x[seg] = cumulative / total
    x[end + 1:] = 1.0
    t0, t0_se = _onset_fit(t[seg], x[seg], float(t[start]), parse_window(onset_range, path))
    return replace(_finish(isotherm, t, q, line, sign, i_tr, start, end, t0, x, total, window,
                           mass_mg, material), induction_time_se_min=t0_se)


def _measured_half_time(t, x, t0) -> float | None:
    above = np.nonzero(x >= 0.5)[0]
    if not above.size or above[0] == 0:
        return None
    i = int(above[0])
    t_half = t[i - 1] + (0.5 - x[i - 1]) * (t[i] - t[i - 1]) / (x[i] - x[i - 1])
    return float(t_half - t0)


def _finish(iso, t, q, line, sign, i_tr, start, end, t0, x, total, window, mass_mg, material):
    warnings = list(iso.warnings)
    mass = mass_mg if mass_mg is not None else iso.mass_mg
    enthalpy = _enthalpy(total, iso.heat_flow_unit, mass)
    if enthalpy is None:
        warnings.append("no sample mass: enthalpy in J/g not computed")
    crystallinity = None
    if material is not None and enthalpy is not None:
        from analysis.kinetics.materials import get_material

        dh0 = get_material(material, path=iso.path).dh0_j_per_g
        crystallinity = None if dh0 is None else enthalpy / dh0
    seg = slice(start, end + 1)
    fit = fit_avrami_window(t[seg] - t0, x[seg], window)
    curve = fit_avrami_curve(t[seg] - t0, x[seg])
    for label, result in (("window", fit), ("whole-curve", curve)):
        if not result:
            warnings.append(f"Avrami {label} fit failed: {result.reason}")
    return CalorimetryResult(
        path=iso.path, time_min=t, heat_flow=q, heat_flow_unit=iso.heat_flow_unit, baseline=line,
        exotherm="up" if sign > 0 else "down", transient_end_min=float(t[i_tr]),
        baseline_start_min=float(t[start]), baseline_end_min=float(t[end]),
        induction_time_min=t0, relative_crystallinity=x, enthalpy_j_per_g=enthalpy,
        crystallinity=crystallinity, window=window, avrami=fit, avrami_curve=curve,
        t_half_measured_min=_measured_half_time(t, x, t0), material=material,
        warnings=tuple(warnings))


def parse_window(window, path=None) -> tuple[float, float]:
    """Conversion window as fractions. Accepts (lo, hi) or "lo,hi"; values > 1 are percent.

    "3,20" and 0.03,0.2 both mean 3-20 %.
    """
    if isinstance(window, str):
        parts = window.replace(";", ",").split(",")
        try:
            window = tuple(float(p) for p in parts)
        except ValueError:
            raise InputError(f"window {window!r} is not two numbers like 3,20", path) from None
    if len(window) != 2:
        raise InputError(f"window needs two values (low, high), got {window!r}", path)
    lo, hi = (float(v) for v in window)
    if lo > 1 or hi > 1:
        lo, hi = lo / 100.0, hi / 100.0
    if not (0 < lo < hi < 1):
        raise InputError(f"window {lo:.0%}-{hi:.0%} must satisfy 0 < low < high < 100 %", path)
    return lo, hi


def analyze_calorimetry_file(path, *, time_col=None, heat_flow_col=None, time_unit=None,
                             heat_flow_unit=None, intervals: bool = True, seed: int | None = None,
                             **options) -> CalorimetryResult:
    """``read_isotherm`` then ``analyze_isotherm`` (options as there); with ``intervals``
    also the 95 % intervals of n, k and t_half (``result.intervals``, see
    :mod:`analysis.kinetics.calorimetry_intervals`; ``seed`` None: the default seed)."""
    iso = read_isotherm(path, time_col=time_col, heat_flow_col=heat_flow_col,
                        time_unit=time_unit, heat_flow_unit=heat_flow_unit)
    result = analyze_isotherm(iso, **options)
    if not intervals:
        return result
    seed = DEFAULT_SEED if seed is None else seed
    found = calorimetry_intervals(iso, result, options, analyze_isotherm=analyze_isotherm,
                                  noise_sigma=white_noise_sigma(iso.heat_flow),
                                  seed=seed)
    return replace(result, intervals=found)


def _source_arguments(source) -> tuple[dict, dict]:
    """(how to read the file, how to analyse it) for a ``project.CalorimetrySource``."""
    read = dict(time_col=source.time_col, heat_flow_col=source.heat_flow_col,
                time_unit=source.time_unit, heat_flow_unit=source.heat_flow_unit)
    options = dict(exotherm=source.exotherm or "auto", window=source.window or DEFAULT_FIT_WINDOW,
                   mass_mg=source.mass_mg, material=source.material,
                   baseline_start_min=source.baseline_start_min,
                   baseline_end_min=source.baseline_end_min,
                   lag_s=getattr(source, "lag_s", None) or 0.0)
    return read, options


def analyze_source(source, *, seed: int | None = None, intervals: bool = True) -> CalorimetryResult:
    """Analyse a ``project.CalorimetrySource`` (column mapping, units, window, baseline),
    with the intervals of n, k and t_half unless ``intervals`` is False (then
    :func:`source_interval_steps` computes them)."""
    read, options = _source_arguments(source)
    return analyze_calorimetry_file(source.file, **read, intervals=intervals, seed=seed, **options)


def source_interval_steps(source, result: CalorimetryResult, *, seed: int | None = None):
    """Generator of the intervals of ``result`` = ``analyze_source(source, intervals=False)``
    (:mod:`analysis.kinetics.calorimetry_intervals`): yields ``Progress``, returns the
    ``CalorimetryIntervals`` (or None), the same as ``analyze_source`` attaches."""
    read, options = _source_arguments(source)
    iso = read_isotherm(source.file, **read)
    return calorimetry_interval_steps(iso, result, options, analyze_isotherm=analyze_isotherm,
                                      noise_sigma=white_noise_sigma(iso.heat_flow),
                                      seed=DEFAULT_SEED if seed is None else seed)


# ---------------------------------------------------------------- output and CLI
def write_calorimetry_outputs(result: CalorimetryResult, out_dir) -> tuple[Path, Path]:
    """Write ``calorimetry.json`` and ``conversion.csv`` (time_min, relative_crystallinity),
    all or nothing; NaN is written as null."""
    with staged_outputs(out_dir) as stage:
        write_json_atomic(stage / "calorimetry.json", result.to_json_dict())
        t, x = result.conversion_table()
        write_csv_atomic(stage / "conversion.csv", [("time_min", "relative_crystallinity"),
                                                    *((f"{a:.6g}", f"{b:.6g}") for a, b in zip(t, x))])
    out = Path(out_dir)
    return out / "calorimetry.json", out / "conversion.csv"
