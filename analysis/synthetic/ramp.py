"""Simulated hot-stage recordings on a temperature programme (cooling ramps, steps).

The block (stage heater) follows a typed programme; the film follows the block through
a first-order thermal lag (:func:`analysis.kinetics.temperature_programme.apply_sensor_lag`).
The growth rate at the film temperature follows the Lauritzen-Hoffman equation with the
given constants, Kg and G at a reference temperature (docs/sources.md §2.1).

Growth along a programme: every front advances at the same G(T(t)), so the radius of a
spherulite born at t0 is R(t) = S(t) − S(t0) with the growth coordinate
S(t) = ∫ G(T(t')) dt' (px). S is increasing, so "earliest arrival wins" in time is
"smallest S(t0) + |p − c|" in growth coordinate: the exact Johnson-Mehl arrival of the
isothermal simulator, run with births S(t0) and unit rate, gives the arrival in S, and
S⁻¹ turns it back into time.

Nucleation: an athermal population per mm², all born when the film first cools below
``athermal_onset_c``, plus a sporadic rate per mm² per s that rises tenfold for every
``ndot_decade_k`` kelvin below ``ndot_ref_c`` (an empirical form, common practice), zero
at and above Tm0. Births are an inhomogeneous Poisson process (inverse of the
cumulative rate). Nuclei born inside crystalline material are dropped.

The stage log is what the block sensor reads: the programme, sampled every
``log_interval_s`` from ``log_start_s`` (recording clock) with Gaussian noise, on a clock
that starts at the first sample (so the clock offset to enter is ``log_start_s``).
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path

import numpy as np

from analysis.errors import InputError
from analysis.kinetics.lauritzen_hoffman import LHConstants, lh_growth_rate
from analysis.kinetics.temperature_programme import (
    TemperatureProgramme,
    apply_sensor_lag,
    parse_programme,
    programme_from_segments,
)
from analysis.synthetic import optics
from analysis.synthetic.hot_stage import (
    FilmKinetics,
    StackParams,
    _arrival_on_grid,
    _check_output_folder,
    drift_path_px,
    johnson_mehl_arrival,
    recording_times_s,
    stack_truth,
    validate_params,
    write_stack,
)

__all__ = ["RampParams", "RampStack", "simulate_ramp_stack", "write_ramp", "true_growth_rate",
           "block_programme", "RAMP_FIELD_HELP"]

_STEP_S = 0.1  # time grid of the growth coordinate, s


def _p(default, help_text):
    return field(default=default, metadata={"help": help_text})


@dataclass(frozen=True)
class RampParams:
    """Kinetics and programme of a simulated non-isothermal recording (units in the names)."""

    programme: str = _p("140, 5:110", "block programme 'START, RATE:END, hold:SECONDS, ...' (°C, K/min)")
    programme_start_s: float = _p(-60.0, "recording-clock time at which the programme starts, s")
    lag_s: float = _p(5.0, "first-order lag of the film behind the block sensor, s")
    kg_k2: float = _p(4.6e5, "Lauritzen-Hoffman Kg, K²")
    g_ref_um_per_min: float = _p(6.775, "growth rate at the reference temperature, µm/min")
    g_ref_c: float = _p(130.0, "reference temperature of the growth rate, °C")
    tm0_c: float = _p(185.0, "equilibrium melting temperature Tm0, °C")
    tg_c: float = _p(-10.0, "glass transition Tg, °C")
    u_star_j_per_mol: float = _p(6270.0, "transport activation energy U*, J/mol")
    athermal_onset_c: float = _p(135.0, "film temperature at which the athermal nuclei appear, °C")
    ndot_ref_per_mm2_per_s: float = _p(0.0, "sporadic nucleation rate at ndot_ref_c, per mm² per s")
    ndot_ref_c: float = _p(130.0, "reference temperature of the sporadic rate, °C")
    ndot_decade_k: float = _p(5.0, "kelvin of extra undercooling for a tenfold sporadic rate")
    log_interval_s: float = _p(1.0, "sampling interval of the stage log, s")
    log_noise_k: float = _p(0.05, "noise of the stage log (std), K")
    log_start_s: float = _p(-120.0, "recording-clock time of the first log sample, s")

    @property
    def constants(self) -> LHConstants:
        return LHConstants(self.tm0_c, self.tg_c, self.u_star_j_per_mol)

    @property
    def g0_um_per_min(self) -> float:
        """G0 such that G(g_ref_c) = g_ref_um_per_min."""
        unit = float(lh_growth_rate(np.array([self.g_ref_c]), 1.0, self.kg_k2, self.constants)[0])
        return self.g_ref_um_per_min / unit


RAMP_FIELD_HELP = {name: f.metadata["help"] for name, f in RampParams.__dataclass_fields__.items()}


def true_growth_rate(params: RampParams, temperature_c) -> np.ndarray:
    """True G (µm/min) at film temperatures (°C); 0 outside (T_inf, Tm0)."""
    t = np.asarray(temperature_c, dtype=float)
    c = params.constants
    inside = (t > c.t_inf + 0.5) & (t < c.tm0_c - 0.5)
    g = np.zeros_like(t)
    if inside.any():
        g[inside] = lh_growth_rate(t[inside], params.g0_um_per_min, params.kg_k2, c)
    return g


def block_programme(params: RampParams, end_s: float) -> TemperatureProgramme:
    """The block temperature (no lag) on the recording clock."""
    start, segments = parse_programme(params.programme)
    return programme_from_segments(start, segments, start_s=params.programme_start_s, end_s=end_s)


def _validate(params: RampParams, stack: StackParams) -> None:
    checks = [("lag_s", params.lag_s >= 0), ("kg_k2", params.kg_k2 > 0),
              ("g_ref_um_per_min", params.g_ref_um_per_min > 0),
              ("g_ref_c", params.constants.t_inf < params.g_ref_c < params.tm0_c),
              ("ndot_ref_per_mm2_per_s", params.ndot_ref_per_mm2_per_s >= 0),
              ("ndot_decade_k", params.ndot_decade_k > 0), ("log_interval_s", params.log_interval_s > 0),
              ("log_noise_k", params.log_noise_k >= 0),
              ("programme_start_s", params.programme_start_s <= 0),
              ("log_start_s", params.log_start_s <= 0)]
    for name, ok in checks:
        if not (ok and math.isfinite(getattr(params, name)) if not isinstance(getattr(params, name), str)
                else ok):
            raise InputError(f"ramp setting {name} = {getattr(params, name)!r} is out of range")
    validate_params(stack)


@dataclass(frozen=True)
class GrowthClock:
    """The film temperature and growth coordinate on a fine time grid (recording clock)."""

    time_s: np.ndarray
    temperature_c: np.ndarray
    growth_px: np.ndarray  # S(t), px, increasing

    def s_at(self, time_s) -> np.ndarray:
        return np.interp(time_s, self.time_s, self.growth_px)

    def time_at(self, growth_px) -> np.ndarray:
        """S⁻¹; +inf beyond the grid."""
        s = np.asarray(growth_px, dtype=float)
        t = np.interp(s, self.growth_px, self.time_s)
        return np.where(s > self.growth_px[-1], np.inf, t)


def growth_clock(params: RampParams, stack: StackParams, end_s: float) -> GrowthClock:
    start = min(params.programme_start_s, 0.0)
    t = np.arange(start, end_s + _STEP_S, _STEP_S)
    block = block_programme(params, end_s)
    film = apply_sensor_lag(t, block.temperature_at(t), params.lag_s, start="rest")
    g_px_per_s = true_growth_rate(params, film) / 60.0 / stack.um_per_px
    s = np.concatenate([[0.0], np.cumsum(0.5 * (g_px_per_s[1:] + g_px_per_s[:-1]) * np.diff(t))])
    s += np.arange(s.size) * 1e-12  # strictly increasing for the inverse
    return GrowthClock(t, film, s)


def _birth_times(params, stack, clock, area_mm2, rng):
    """Athermal births at the onset crossing plus sporadic births from Ndot(T(t))."""
    below = np.flatnonzero(clock.temperature_c < params.athermal_onset_c)
    births = []
    if below.size and stack.n_athermal_per_mm2 > 0:
        births.append(np.full(rng.poisson(stack.n_athermal_per_mm2 * area_mm2), clock.time_s[below[0]]))
    if params.ndot_ref_per_mm2_per_s > 0:
        temp = clock.temperature_c
        rate = params.ndot_ref_per_mm2_per_s * 10.0 ** ((params.ndot_ref_c - temp) / params.ndot_decade_k)
        rate = np.where(temp < params.tm0_c, rate, 0.0) * area_mm2
        cumulative = np.concatenate([[0.0], np.cumsum(0.5 * (rate[1:] + rate[:-1]) * np.diff(clock.time_s))])
        n = rng.poisson(cumulative[-1])
        if n > 2_000_000:
            raise InputError(f"{n} sporadic nuclei to simulate: lower the nucleation rate")
        births.append(np.interp(rng.random(n) * cumulative[-1], cumulative, clock.time_s))
    return np.concatenate(births) if births else np.zeros(0)


@dataclass(frozen=True)
class RampStack:
    """A simulated ramp recording: the rendered stack, its growth clock and the stage log."""

    params: RampParams
    sim: optics.SyntheticStack
    clock: GrowthClock
    log_time_s: np.ndarray  # on the log's own clock (first sample at 0)
    log_temperature_c: np.ndarray

    @property
    def frame_temperature_c(self) -> np.ndarray:
        return np.interp(self.sim.times_s, self.clock.time_s, self.clock.temperature_c)


def simulate_ramp_stack(params: RampParams, stack: StackParams) -> RampStack:
    """Nuclei, arrival map and lazily rendered frames of a film on a temperature programme.

    ``stack.growth_rate_um_per_min``, ``induction_time_s`` and ``ndot_per_mm2_per_s`` are
    not used (the programme sets them); ``n_athermal_per_mm2`` is the athermal density.
    """
    stack = replace(stack, isothermal_start_s=0.0)
    _validate(params, stack)
    times = recording_times_s(stack)
    end_s = float(times[-1]) + 1.0
    clock = growth_clock(params, stack, end_s)
    pad = int(math.ceil(np.abs(drift_path_px(stack)).max())) + 2
    shape = (stack.height_px + 2 * pad, stack.width_px + 2 * pad)
    rng = np.random.default_rng([stack.seed, 0])
    births = _birth_times(params, stack, clock, 1.0, np.random.default_rng([stack.seed, 5]))
    s_birth_all = clock.s_at(births) if births.size else births
    reach = float(clock.growth_px[-1] - (s_birth_all.min() if births.size else 0.0))
    guard = min(reach, float(max(stack.height_px, stack.width_px)))
    lo = np.array([-pad - 0.5 - guard] * 2)
    hi = np.array([stack.height_px + pad - 0.5 + guard, stack.width_px + pad - 0.5 + guard])
    area_mm2 = float(np.prod(hi - lo)) * (stack.um_per_px * 1e-3) ** 2
    births = np.sort(_birth_times(params, stack, clock, area_mm2, rng))
    centres = rng.uniform(lo, hi, size=(births.size, 2))
    s_birth = clock.s_at(births)
    if births.size > 1 and np.ptp(s_birth) > 0:
        covered, _ = johnson_mehl_arrival(centres, centres, s_birth, 1.0, exclude_self=True)
        keep = ~(covered < s_birth - 1e-9)
    else:
        keep = np.ones(births.size, bool)
    arrival_s_px, owner = _arrival_on_grid(shape, pad, centres[keep], s_birth[keep], 1.0,
                                           float(clock.growth_px[-1]))
    arrival = clock.time_at(arrival_s_px).astype(np.float32)
    kinetics = FilmKinetics(params=stack, centres_yx=centres[keep], birth_s=births[keep],
                            arrival_pad_s=arrival, owner_pad=owner, pad_px=pad,
                            guard_band_um=guard * stack.um_per_px,
                            phantom_centres_yx=centres[~keep], phantom_birth_s=births[~keep])
    sim = _render(stack, kinetics, times, clock.s_at(times), arrival_s_px)
    log_t, log_c = _stage_log(params, stack, end_s)
    return RampStack(params, sim, clock, log_t, log_c)


def _render(stack, kinetics, times, s_frames, s_pad):
    rng = np.random.default_rng([stack.seed, 1])
    origin = (-kinetics.pad_px, -kinetics.pad_px)
    crystal = optics.crystal_appearance(kinetics.owner_pad, kinetics.centres_yx, origin, stack, rng)
    melt = np.asarray(optics.melt_colour(stack), np.float32)
    sensor = optics.sensor_transmission((stack.height_px, stack.width_px), stack, rng)
    gain = 1.0 + stack.flicker * np.random.default_rng([stack.seed, 4]).standard_normal(stack.n_frames)
    return optics.SyntheticStack(
        params=stack, kinetics=kinetics, times_s=times, drift_px=drift_path_px(stack),
        area_fraction=kinetics.area_fraction(times), melt=melt, contrast=crystal - melt,
        sensor=sensor[..., None] if stack.retardation_plate else sensor, gain=gain.astype(np.float32),
        growth_px=(np.asarray(s_frames, np.float32), s_pad.astype(np.float32)))


def _stage_log(params, stack, end_s):
    """What the block sensor logs, on its own clock (first sample at 0 s)."""
    t = np.arange(params.log_start_s, end_s + 10.0 + params.log_interval_s, params.log_interval_s)
    block = block_programme(params, end_s + 20.0).temperature_at(t)
    noise = np.random.default_rng([stack.seed, 6]).normal(0.0, params.log_noise_k, t.size)
    return t - params.log_start_s, block + noise


def ramp_truth(ramp: RampStack) -> dict:
    """truth.json of a ramp: the isothermal truth plus the programme, the LH set and the film T."""
    truth = stack_truth(ramp.sim)
    p = ramp.params
    truth.update({
        "kind": "ramp", "ramp": asdict(p), "g0_um_per_min": p.g0_um_per_min,
        "growth_rate_um_per_min": None,
        "log_clock_offset_s": p.log_start_s,
        "frame_temperature_c": [float(v) for v in ramp.frame_temperature_c],
        "clocks": "all times are on the recording clock (frame 0 at 0 s); the stage log's clock "
                  "starts at its first sample, log_clock_offset_s on the recording clock",
    })
    for nucleus in truth["nuclei"]:
        nucleus["temperature_c"] = float(np.interp(nucleus["t_s"], ramp.clock.time_s,
                                                   ramp.clock.temperature_c))
    return truth


def write_ramp(ramp: RampStack, out_dir, *, compression: str | None = None,
               write_maps: bool = False) -> Path:
    """stack.tif, truth.json (kind "ramp") and stage_log.csv in ``out_dir``."""
    out = Path(out_dir)
    _check_output_folder(out)
    write_stack(ramp.sim, out, compression=compression, write_maps=write_maps)
    try:
        (out / "truth.json").write_text(json.dumps(ramp_truth(ramp), indent=1), encoding="utf-8")
        rows = "".join(f"{t:.2f},{c:.3f}\n" for t, c in zip(ramp.log_time_s, ramp.log_temperature_c))
        (out / "stage_log.csv").write_text("# simulated stage temperature log (block sensor)\n"
                                           "Time (s),Stage temperature (°C)\n" + rows, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write the simulated ramp: {exc.strerror or exc}", out) from exc
    return out
