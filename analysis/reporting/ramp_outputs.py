"""Files of a ramp experiment: growth_vs_temperature.csv/.xlsx, nucleation_vs_temperature.csv,
ramp.json, and the figures growth_radii (R(t) with the fit) and growth_vs_temperature
(G(T) with its 95 % band), PNG and SVG."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from analysis.errors import InputError
from analysis.reporting.figures import _PALETTE, _figure, _message, save_figure
from analysis.reporting.tables import Table, write_csv, write_xlsx
from analysis.units import write_json_atomic

__all__ = ["GROWTH_COLUMNS", "NUCLEATION_COLUMNS", "growth_table", "nucleation_table", "ramp_summary",
           "radii_figure", "growth_figure", "write_ramp_outputs"]

GROWTH_COLUMNS = ["temperature_c", "growth_rate_um_per_min", "growth_rate_um_per_min_ci95_low",
                  "growth_rate_um_per_min_ci95_high", "n_spherulites", "front_advance_px_per_frame"]
NUCLEATION_COLUMNS = ["temperature_c", "n_nuclei", "cumulative_per_mm2", "rate_per_mm2_per_min"]


def growth_table(ramp) -> Table:
    """G(T) with its band, the spherulites behind each temperature and the front's advance
    per frame (px) of a ramp analysis whose G(T) did not fail."""
    growth = ramp.growth
    rows = [[float(t), float(g), float(lo), float(hi), int(n), float(a)] for t, g, lo, hi, n, a in zip(
        growth.temperature_c, growth.growth_rate_um_per_min, growth.ci95_low, growth.ci95_high,
        growth.n_spherulites, ramp.front_advance_px_per_frame)]
    return Table(list(GROWTH_COLUMNS), rows)


def nucleation_table(nucleation) -> Table:
    rows = [[float(t), int(n), float(c), float(r) if math.isfinite(r) else None] for t, n, c, r in zip(
        nucleation.temperature_c, nucleation.n_nuclei, nucleation.cumulative_per_mm2,
        nucleation.rate_per_mm2_per_min)]
    return Table(list(NUCLEATION_COLUMNS), rows)


def ramp_summary(ramp) -> dict:
    """ramp.json: the programme's corrections, the fit's figures of merit and Kg."""
    g, p = ramp.growth, ramp.programme
    out = {"schema": 1, "temperature_source": p.source, "temperature_log": p.path,
           "sensor_lag_s": p.lag_s, "clock_offset_s": p.clock_offset_s,
           "frame_temperature_c": [float(v) for v in ramp.frame_temperature_c],
           "nucleation_bins": {"order": ramp.nucleation.direction, "bin_k": ramp.nucleation.bin_k}}
    if not g:
        out["growth"] = {"failure": g.reason}
        return out
    lh = g.lauritzen_hoffman
    out["growth"] = {"n_spherulites": len(g.tracks), "n_points": g.n_points,
                     "residual_um": g.residual_um, "smoothing": g.smoothing,
                     "temperature_range_c": [float(g.temperature_c.min()), float(g.temperature_c.max())],
                     "warnings": ramp.warnings()}
    out["lauritzen_hoffman"] = ({"failure": lh.reason} if not lh else {
        "kg_k2": lh.kg_k2, "kg_ci95": lh.kg_ci95, "g0_um_per_min": lh.g0_um_per_min,
        "tm0_c": lh.constants.tm0_c, "tg_c": lh.constants.tg_c, "t_inf_c": lh.constants.t_inf,
        "u_star_j_per_mol": lh.constants.u_star_j_per_mol, "residual_um": lh.residual_um})
    return out


def radii_figure(growth, programme):
    """Measured radii against time, each spherulite with its fitted curve; film T on top."""
    fig, ax = _figure(4.5)
    ax.set_xlabel("Time (s)")
    ax.set_ylabel("Radius (µm)")
    if not growth:
        _message(ax, growth.reason)
        return fig
    for i, track in enumerate(growth.tracks):
        colour = _PALETTE[i % len(_PALETTE)]
        ax.plot(track.time_s, track.radius_um, "o", ms=2.0, color=colour, alpha=0.7)
        ok = np.isfinite(track.fitted_um)
        ax.plot(track.time_s[ok], track.fitted_um[ok], "-", lw=0.8, color=colour)
    # the film temperature on a second axis: any programme (cooling, heating, holds)
    first = min(float(t.time_s.min()) for t in growth.tracks)
    last = max(float(t.time_s.max()) for t in growth.tracks)
    times = np.linspace(first, last, 400)
    twin = ax.twinx()
    twin.plot(times, programme.temperature_at(times), "--", lw=0.8, color="0.45")
    twin.set_ylabel("Film temperature (°C), dashed", fontsize=7)
    twin.tick_params(labelsize=6)
    ax.text(0.02, 0.97, "points: measured; lines: joint G(T) fit", transform=ax.transAxes,
            fontsize=6, va="top", color="0.35")
    return fig


def growth_figure(growth, isothermal=None):
    """G(T) (log scale) with its 95 % band; optional isothermal points (T, G, CI95)."""
    fig, ax = _figure()
    ax.set_xlabel("Temperature (°C)")
    ax.set_ylabel("Growth rate G (µm/min)")
    if not growth:
        _message(ax, growth.reason)
        return fig
    ax.fill_between(growth.temperature_c, growth.ci95_low, growth.ci95_high, color=_PALETTE[1],
                    alpha=0.25, lw=0, label="ramp, 95 % band")
    ax.plot(growth.temperature_c, growth.growth_rate_um_per_min, color=_PALETTE[1], lw=1.2, label="ramp")
    if isothermal is not None and len(isothermal[0]):
        t, g, ci = (np.asarray(v, float) for v in isothermal)
        ax.errorbar(t, g, yerr=ci, fmt="s", ms=3.5, color=_PALETTE[0], elinewidth=0.7, capsize=2,
                    label="isothermal")
    ax.set_yscale("log")
    ax.legend(fontsize=6, frameon=False)
    return fig


def write_ramp_outputs(ramp, out_dir, *, prefix: str = "") -> list[str]:
    """Write every ramp file into ``out_dir`` (names start with ``prefix``); returns their names."""
    out = Path(out_dir)
    try:
        out.mkdir(parents=True, exist_ok=True)
        written = []
        tables = {"nucleation_vs_temperature": nucleation_table(ramp.nucleation)}
        if ramp.growth:
            tables = {"growth_vs_temperature": growth_table(ramp), **tables}
        for name, table in tables.items():
            written.append(write_csv(table, out / f"{prefix}{name}.csv").name)
        written.append(write_xlsx(tables, out / f"{prefix}growth_vs_temperature.xlsx").name)
        write_json_atomic(out / f"{prefix}ramp.json", ramp_summary(ramp))
        written.append(f"{prefix}ramp.json")
        for stem, fig in (("growth_radii", radii_figure(ramp.growth, ramp.programme)),
                          ("growth_vs_temperature", growth_figure(ramp.growth))):
            written += [p.name for p in save_figure(fig, out / f"{prefix}{stem}")]
    except OSError as exc:
        raise InputError(f"cannot write the ramp outputs: {exc.strerror or exc}", out) from exc
    return written
