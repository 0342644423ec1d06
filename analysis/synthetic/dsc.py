"""Synthetic isothermal DSC runs: heat flow of a bulk (3-D) sample crystallizing.

The relative crystallinity follows the extended-volume law for spheres growing at a
constant radial rate G from nuclei that are either all present at the induction time
(athermal, density N_V) or appear at a constant rate (sporadic, Ndot_V), or both::

    X_ex(tau) = (4 pi / 3) N_V G^3 tau^3 + (pi / 3) Ndot_V G^3 tau^4,   X = 1 - exp(-X_ex)

with ``tau`` the time since the induction time. The instrument sees
``dH/dt = dH_total * m * dX/dt`` through a first-order lag, on a drifting baseline, after
an exponential start-up transient (the quench to Tc), with Gaussian noise.
"""

from __future__ import annotations

import argparse
import csv
import inspect
import math
import os
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, signal

from analysis.errors import InputError

_MAX_FINE_POINTS = 4_000_000


@dataclass(frozen=True)
class DscIsotherm:
    """A simulated isothermal DSC run and its true kinetics.

    Attributes
    ----------
    time_s : ndarray
        Time from the start of the isotherm (the moment the sample reached Tc), s.
    heat_flow_mw : ndarray
        Measured heat flow, mW (exotherm positive when ``exotherm == "up"``).
    relative_crystallinity : ndarray
        True relative crystallinity X at ``time_s`` (before instrument lag), 0..1.
    n : float or None
        Avrami exponent: 3 (athermal only), 4 (sporadic only), None when mixed.
    k_per_min_n : float or None
        Avrami rate constant in min^-n, time counted from the induction time; None when mixed.
    t_half_min : float
        True half-time counted from the induction time, min.
    induction_time_s : float
        Time at which nucleation and growth start, s.
    enthalpy_j_per_g, mass_mg : float
        Total crystallization enthalpy and sample mass.
    exotherm : str
        "up" or "down".
    params : dict
        Every input parameter, for ``truth.json``.
    """

    time_s: np.ndarray
    heat_flow_mw: np.ndarray
    relative_crystallinity: np.ndarray
    n: float | None
    k_per_min_n: float | None
    t_half_min: float
    induction_time_s: float
    enthalpy_j_per_g: float
    mass_mg: float
    exotherm: str
    params: dict[str, Any] = field(default_factory=dict)

    def truth_dict(self) -> dict[str, Any]:
        """JSON-ready summary of the true kinetics and the inputs."""
        return {
            "n": self.n,
            "k_per_min_n": self.k_per_min_n,
            "t_half_min": self.t_half_min,
            "induction_time_s": self.induction_time_s,
            "enthalpy_j_per_g": self.enthalpy_j_per_g,
            "mass_mg": self.mass_mg,
            "exotherm": self.exotherm,
            "params": dict(self.params),
        }


def extended_fraction_3d(tau_s, n_v_per_mm3, ndot_v_per_mm3_per_s, growth_mm_per_s):
    """Extended volume fraction of spheres, mixed athermal + sporadic nucleation.

    ``tau_s`` is the time since the induction time (negative values count as 0).
    """
    tau = np.clip(np.asarray(tau_s, dtype=float), 0.0, None)
    g3 = growth_mm_per_s**3
    return (4.0 * math.pi / 3.0) * n_v_per_mm3 * g3 * tau**3 + (
        math.pi / 3.0
    ) * ndot_v_per_mm3_per_s * g3 * tau**4


def _extended_rate_3d(tau_s, n_v, ndot_v, growth_mm_per_s):
    """d X_ex / d tau, per s."""
    tau = np.clip(np.asarray(tau_s, dtype=float), 0.0, None)
    g3 = growth_mm_per_s**3
    return 4.0 * math.pi * n_v * g3 * tau**2 + (4.0 * math.pi / 3.0) * ndot_v * g3 * tau**3


def _tau_at_fraction(fraction, n_v, ndot_v, growth_mm_per_s) -> float:
    """Time since induction (s) at which the true X reaches ``fraction``."""
    target = -math.log(1.0 - fraction)
    f = lambda tau: float(extended_fraction_3d(tau, n_v, ndot_v, growth_mm_per_s)) - target
    hi = 1.0
    while f(hi) < 0.0:
        hi *= 2.0
    return optimize.brentq(f, 0.0, hi, xtol=1e-12 * hi, rtol=1e-13)


def _validate(values: dict[str, float]) -> None:
    for name in ("growth_rate_um_per_min", "enthalpy_j_per_g", "mass_mg", "interval_s"):
        if not values[name] > 0 or not math.isfinite(values[name]):
            raise InputError(f"{name} must be a positive finite number, got {values[name]}")
    for name in ("n_v_per_mm3", "ndot_v_per_mm3_per_s", "induction_time_s", "lag_s",
                 "transient_tau_s", "noise_mw"):
        if not values[name] >= 0 or not math.isfinite(values[name]):
            raise InputError(f"{name} must be zero or positive, got {values[name]}")
    if values["n_v_per_mm3"] == 0 and values["ndot_v_per_mm3_per_s"] == 0:
        raise InputError("no nucleation: n_v_per_mm3 and ndot_v_per_mm3_per_s are both 0")


def _lagged(rate: np.ndarray, dt_s: float, lag_s: float) -> np.ndarray:
    """First-order instrument response: convolution with exp(-t/lag)/lag."""
    if lag_s <= 0:
        return rate
    a = math.exp(-dt_s / lag_s)
    return signal.lfilter([1.0 - a], [1.0, -a], rate)


def simulate_dsc_isotherm(
    *,
    n_v_per_mm3: float = 2.0e4,
    ndot_v_per_mm3_per_s: float = 0.0,
    growth_rate_um_per_min: float = 10.0,
    induction_time_s: float = 30.0,
    enthalpy_j_per_g: float = 95.0,
    mass_mg: float = 5.0,
    lag_s: float = 6.0,
    baseline_drift_mw_per_min: float = 0.002,
    baseline_offset_mw: float = 0.0,
    transient_amplitude_mw: float = 0.6,
    transient_tau_s: float = 12.0,
    noise_mw: float = 0.003,
    interval_s: float = 1.0,
    duration_s: float | None = None,
    exotherm: str = "up",
    seed: int = 0,
) -> DscIsotherm:
    """Simulate the heat flow of an isothermal crystallization in a DSC.

    Parameters
    ----------
    n_v_per_mm3 : float
        Athermal nuclei per mm^3, all active at the induction time.
    ndot_v_per_mm3_per_s : float
        Sporadic nucleation rate, nuclei per mm^3 per s, from the induction time on.
    growth_rate_um_per_min : float
        Radial growth rate G, µm/min.
    induction_time_s : float
        Time from the start of the isotherm until nucleation and growth begin, s.
    enthalpy_j_per_g, mass_mg : float
        Total crystallization enthalpy (J/g) and sample mass (mg); their product is mJ.
    lag_s : float
        Time constant of the first-order instrument lag, s (0 = none).
    baseline_drift_mw_per_min, baseline_offset_mw : float
        Linear baseline: offset + drift * t.
    transient_amplitude_mw, transient_tau_s : float
        Start-up transient after the quench: amplitude * exp(-t / tau), mW.
    noise_mw : float
        Standard deviation of Gaussian noise, mW.
    interval_s : float
        Sampling interval, s.
    duration_s : float or None
        Length of the run, s. None: until X = 0.999 plus half that time again.
    exotherm : {"up", "down"}
        Sign convention of the exported heat flow.
    seed : int
        Seed of the noise generator.

    Returns
    -------
    DscIsotherm
    """
    params = dict(locals())
    _validate(params)
    if exotherm not in ("up", "down"):
        raise InputError(f"exotherm must be 'up' or 'down', got {exotherm!r}")
    g = growth_rate_um_per_min / 1000.0 / 60.0  # mm/s
    n_v, ndot_v = n_v_per_mm3, ndot_v_per_mm3_per_s
    tau_half = _tau_at_fraction(0.5, n_v, ndot_v, g)
    if duration_s is None:
        duration_s = induction_time_s + 1.5 * _tau_at_fraction(0.999, n_v, ndot_v, g)
        params["duration_s"] = duration_s
    if not duration_s > interval_s:
        raise InputError(f"duration_s ({duration_s}) must exceed interval_s ({interval_s})")
    time_s = np.arange(0.0, duration_s + 0.5 * interval_s, interval_s)
    heat_mw = _lagged_heat_flow(time_s, params, g, tau_half)
    sign = 1.0 if exotherm == "up" else -1.0
    rng = np.random.default_rng(seed)
    heat_mw = (
        sign * heat_mw
        + baseline_offset_mw
        + baseline_drift_mw_per_min * time_s / 60.0
        + transient_amplitude_mw * np.exp(-time_s / max(transient_tau_s, 1e-12))
        + noise_mw * rng.standard_normal(time_s.size)
    )
    x_true = 1.0 - np.exp(-extended_fraction_3d(time_s - induction_time_s, n_v, ndot_v, g))
    n, k = _pure_avrami(n_v, ndot_v, g)
    return DscIsotherm(
        time_s=time_s,
        heat_flow_mw=heat_mw,
        relative_crystallinity=x_true,
        n=n,
        k_per_min_n=k,
        t_half_min=tau_half / 60.0,
        induction_time_s=induction_time_s,
        enthalpy_j_per_g=enthalpy_j_per_g,
        mass_mg=mass_mg,
        exotherm=exotherm,
        params=params,
    )


def _lagged_heat_flow(time_s, params, g_mm_per_s, tau_half_s) -> np.ndarray:
    """Crystallization heat flow (mW, exotherm positive) after the instrument lag.

    Computed on a fine grid so that the lag filter is accurate, then sampled.
    """
    interval_s, lag_s = params["interval_s"], params["lag_s"]
    dt_target = min(interval_s, tau_half_s / 400.0, lag_s / 20.0 if lag_s > 0 else math.inf)
    sub = max(1, math.ceil(interval_s / dt_target))
    sub = min(sub, max(1, _MAX_FINE_POINTS // max(time_s.size, 1)))
    dt = interval_s / sub
    fine_t = np.arange(time_s.size * sub) * dt
    tau = fine_t - params["induction_time_s"]
    x_ex = extended_fraction_3d(tau, params["n_v_per_mm3"], params["ndot_v_per_mm3_per_s"], g_mm_per_s)
    rate = np.exp(-x_ex) * _extended_rate_3d(
        tau, params["n_v_per_mm3"], params["ndot_v_per_mm3_per_s"], g_mm_per_s
    )
    total_mj = params["enthalpy_j_per_g"] * params["mass_mg"]  # J/g * mg = mJ
    return _lagged(total_mj * rate, dt, lag_s)[::sub]


def _pure_avrami(n_v, ndot_v, g_mm_per_s) -> tuple[float | None, float | None]:
    """(n, k in min^-n) when the nucleation is purely athermal or purely sporadic."""
    g_mm_per_min = g_mm_per_s * 60.0
    if ndot_v == 0:
        return 3.0, (4.0 * math.pi / 3.0) * n_v * g_mm_per_min**3
    if n_v == 0:
        return 4.0, (math.pi / 3.0) * (ndot_v * 60.0) * g_mm_per_min**3
    return None, None


def write_dsc_csv(
    isotherm: DscIsotherm,
    path: str | os.PathLike,
    *,
    delimiter: str = ",",
    decimal: str = ".",
    time_unit: str = "min",
    heat_flow_unit: str = "mW",
    sample_name: str = "simulated sample",
    temperature_c: float | None = None,
) -> None:
    """Write a delimited text export: a few ``key<delimiter>value`` header lines, then
    the column row (units in the names) and the data.

    Columns: ``Time (min)`` or ``Time (s)``, ``Heat flow (mW)`` or ``Heat flow (W/g)``
    and, when ``temperature_c`` is given, ``Sample temperature (°C)``. ``decimal=","``
    with ``delimiter=";"`` gives the decimal-comma dialect. Text containing the delimiter
    is quoted (RFC 4180).
    """
    if time_unit not in ("min", "s"):
        raise InputError(f"time_unit must be 'min' or 's', got {time_unit!r}", path)
    if heat_flow_unit not in ("mW", "W/g"):
        raise InputError(f"heat_flow_unit must be 'mW' or 'W/g', got {heat_flow_unit!r}", path)
    if decimal not in (".", ",") or delimiter == decimal or len(delimiter) != 1:
        raise InputError(f"delimiter {delimiter!r} and decimal mark {decimal!r} clash", path)
    fmt = lambda v, digits: f"{v:.{digits}f}".replace(".", decimal)
    rows = [
        ["Sample", sample_name],
        ["Mass (mg)", fmt(isotherm.mass_mg, 3)],
        ["Isothermal temperature (°C)", "" if temperature_c is None else fmt(temperature_c, 1)],
        ["Segment", "isothermal hold after quench from the melt"],
        ["Origin", "simulated data (spherokin synthetic generator)"],
        [f"Time ({time_unit})", f"Heat flow ({heat_flow_unit})"]
        + ([] if temperature_c is None else ["Sample temperature (°C)"]),
    ]
    times = isotherm.time_s / 60.0 if time_unit == "min" else isotherm.time_s
    flows = isotherm.heat_flow_mw / (isotherm.mass_mg if heat_flow_unit == "W/g" else 1.0)  # mW/mg = W/g
    rng = np.random.default_rng(int(isotherm.params.get("seed", 0)) + 1)
    for t, q in zip(times, flows):
        row = [fmt(t, 5 if time_unit == "min" else 2), fmt(q, 5 if heat_flow_unit == "mW" else 7)]
        if temperature_c is not None:
            row.append(fmt(temperature_c + 0.01 * rng.standard_normal(), 2))
        rows.append(row)
    try:
        with open(path, "w", encoding="utf-8", newline="") as handle:
            csv.writer(handle, delimiter=delimiter, lineterminator="\r\n").writerows(rows)
    except OSError as exc:
        raise InputError(f"cannot write the DSC export: {exc.strerror or exc}", path) from exc


# ----------------------------------------------------------------------------- command line

_DSC_HELP = {
    "mass_mg": "DSC sample mass, mg",
    "enthalpy_j_per_g": "total crystallization enthalpy, J/g",
    "lag_s": "first-order instrument lag, s",
    "baseline_drift_mw_per_min": "linear baseline drift, mW/min",
    "baseline_offset_mw": "baseline offset, mW",
    "transient_amplitude_mw": "start-up transient after the quench, mW",
    "transient_tau_s": "decay time of that transient, s",
    "noise_mw": "Gaussian noise, mW",
    "interval_s": "DSC sampling interval, s",
    "duration_s": "DSC run length, s (default: until X = 0.999, plus half again)",
}


def add_dsc_cli_arguments(parser: argparse.ArgumentParser) -> None:
    """DSC options of ``spherokin simulate`` (the isotherm of a bulk sample of the film's material)."""
    dsc = parser.add_argument_group("DSC isotherm (bulk sample, same Tc, G and induction time)")
    dsc.add_argument("--dsc", nargs="?", const="dsc.csv", metavar="NAME",
                     help="also write a DSC isotherm export (default name dsc.csv)")
    dsc.add_argument("--thickness-um", type=float, default=20.0,
                     help="film thickness h, µm: the DSC uses N_V = N_A / h, Ndot_V = Ndot_A / h")
    dsc.add_argument("--dsc-n-v-per-mm3", type=float, help="override N_V, nuclei per mm³")
    dsc.add_argument("--dsc-ndot-v-per-mm3-per-s", type=float, help="override Ndot_V, per mm³ per s")
    defaults = {name: p.default for name, p in inspect.signature(simulate_dsc_isotherm).parameters.items()}
    for name, text in _DSC_HELP.items():
        dsc.add_argument("--dsc-" + name.replace("_", "-"), dest="dsc_" + name, type=float,
                         default=defaults[name],
                         help=text if defaults[name] is None else f"{text} (default {defaults[name]})")
    dsc.add_argument("--dsc-exotherm", choices=("up", "down"), default="up", help="exotherm direction")
    dsc.add_argument("--dsc-dialect", choices=("comma", "semicolon"), default="comma",
                     help="comma: ',' and decimal point; semicolon: ';' and decimal comma")
    dsc.add_argument("--dsc-time-unit", choices=("min", "s"), default="min", help="time column unit")
    dsc.add_argument("--dsc-heat-flow-unit", choices=("mW", "W/g"), default="mW", help="heat-flow column unit")
    dsc.add_argument("--temperature-c", type=float, help="crystallization temperature, °C (metadata)")
    dsc.add_argument("--sample-name", default="simulated sample", help="sample name in the DSC header")


def simulate_dsc_for_film(params, args: argparse.Namespace) -> DscIsotherm:
    """DSC isotherm of a bulk sample with the film's kinetics (N_V = N_A / h)."""
    if not args.thickness_um > 0:
        raise InputError(f"--thickness-um must be positive, got {args.thickness_um}")
    h_mm = args.thickness_um * 1e-3
    n_v = args.dsc_n_v_per_mm3 if args.dsc_n_v_per_mm3 is not None else params.n_athermal_per_mm2 / h_mm
    ndot_v = (args.dsc_ndot_v_per_mm3_per_s if args.dsc_ndot_v_per_mm3_per_s is not None
              else params.ndot_per_mm2_per_s / h_mm)
    extra = {name: getattr(args, "dsc_" + name) for name in _DSC_HELP}
    return simulate_dsc_isotherm(
        n_v_per_mm3=n_v, ndot_v_per_mm3_per_s=ndot_v, growth_rate_um_per_min=params.growth_rate_um_per_min,
        induction_time_s=params.induction_time_s, exotherm=args.dsc_exotherm, seed=params.seed, **extra,
    )
