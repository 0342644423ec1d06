"""Report figures (PNG and SVG) drawn with matplotlib's object API, never pyplot.

Only ``matplotlib.figure.Figure`` is used, so no GUI backend (and no Qt) is ever loaded.
Every function returns a ``Figure``; ``save_figure(fig, stem)`` writes ``stem.png``
(300 dpi) and ``stem.svg``.

``growth_rate_figure(entries)``, ``lauritzen_hoffman_figure(lh)``,
``avrami_figure(curves, title)`` with ``AvramiCurve(label, t_min, x, fit)``,
``conversion_comparison_figure(entries)``,
``hoffman_weeks_figure(tc_c, tm_c, hw)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from analysis.units import write_atomic

__all__ = ["AvramiCurve", "avrami_figure", "conversion_comparison_figure", "growth_rate_figure",
           "hoffman_weeks_figure", "lauritzen_hoffman_figure", "save_figure"]

_SIZE_IN = (3.5, 2.7)  # single-column journal figure
_PALETTE = ("#1b4f72", "#b9770e", "#1e8449", "#922b21", "#6c3483", "#5d6d7e")


def _figure(width_in: float = _SIZE_IN[0]):
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width_in, _SIZE_IN[1]), layout="constrained")
    ax = fig.add_subplot()
    ax.tick_params(direction="in", which="both", top=True, right=True, labelsize=7)
    for side in ("top", "right"):
        ax.spines[side].set_linewidth(0.6)
    ax.xaxis.label.set_size(8)
    ax.yaxis.label.set_size(8)
    return fig, ax


def save_figure(fig, stem) -> tuple[Path, Path]:
    stem = Path(stem)
    png, svg = stem.with_suffix(".png"), stem.with_suffix(".svg")
    write_atomic(png, lambda temporary: fig.savefig(temporary, dpi=300, format="png"))
    write_atomic(svg, lambda temporary: fig.savefig(temporary, format="svg"))
    return png, svg


def _message(ax, text: str) -> None:
    ax.text(0.5, 0.5, text, ha="center", va="center", transform=ax.transAxes, fontsize=7,
            color="0.4", wrap=True)


def growth_rate_figure(entries):
    """G (log scale) against Tc with 95 % CI error bars."""
    fig, ax = _figure()
    pts = [(e.temperature_c, e.result.growth_rate) for e in entries
           if e.temperature_c is not None and e.result.growth_rate.value]
    ax.set_xlabel("Crystallization temperature (°C)")
    ax.set_ylabel("Growth rate G (µm/min)")
    if not pts:
        _message(ax, "no growth rates measured")
        return fig
    tc = np.array([p[0] for p in pts])
    g = np.array([p[1].value for p in pts])
    low = np.array([p[1].ci95_low if p[1].ci95_low is not None else p[1].value for p in pts])
    high = np.array([p[1].ci95_high if p[1].ci95_high is not None else p[1].value for p in pts])
    ax.errorbar(tc, g, yerr=[g - np.maximum(low, g * 1e-3), high - g], fmt="o", ms=3.5,
                color=_PALETTE[0], ecolor="0.3", elinewidth=0.7, capsize=2)
    ax.set_yscale("log")
    return fig


def lauritzen_hoffman_figure(lh, sources=None):
    """ln G + U*/(R(T - T_inf)) against 1/(T dT f), fitted regime lines and the break.

    ``sources``: one label per point; points whose label starts with "ramp" are drawn
    as open diamonds (smooth G(T) of a ramp), the others as filled circles."""
    from analysis.kinetics.lauritzen_hoffman import lh_coordinates

    fig, ax = _figure()
    x, y = lh_coordinates(lh.tc_c, lh.g_um_per_min, lh.constants)
    scale = 1e5
    yerr = None
    if lh.ci95_um_per_min is not None:
        yerr = lh.ci95_um_per_min / lh.g_um_per_min
    ramp = np.array([str(s).startswith("ramp") for s in sources]) if sources is not None and \
        len(sources) == x.size else np.zeros(x.size, bool)
    for mask, marker, face, label in ((~ramp, "o", "0.15", "isothermal"), (ramp, "D", "none", "ramp")):
        if mask.any():
            ax.errorbar(x[mask] * scale, y[mask], yerr=None if yerr is None else yerr[mask], fmt=marker,
                        ms=3.5, color="0.15", mfc=face, elinewidth=0.7, capsize=2,
                        label=label if ramp.any() else "data")
    for i, regime in enumerate(lh.regimes):
        t = np.linspace(regime.t_low_c, regime.t_high_c, 50)
        xs, y0 = lh_coordinates(t, np.ones_like(t), lh.constants)
        ax.plot(xs * scale, math.log(regime.g0_um_per_min) - regime.kg_k2 * xs, lw=1.2,
                color=_PALETTE[(i + 1) % len(_PALETTE)],
                label=f"{regime.name}: Kg = {regime.kg_k2:.3g} K²")
    if lh.break_c is not None:
        xb, _ = lh_coordinates([lh.break_c], [1.0], lh.constants)
        ax.axvline(xb[0] * scale, color="0.5", lw=0.7, ls="--")
    ax.set_xlabel("1/(T ΔT f) (10⁻⁵ K⁻²)")
    ax.set_ylabel("ln G + U*/R(T − T∞)  (G in µm/min)")
    ax.legend(fontsize=6, frameon=False)
    return fig


def _thin(values: np.ndarray, count: int) -> np.ndarray:
    """Indexes of about ``count`` points spread evenly along ``values`` (sorted ascending)."""
    if values.size <= count:
        return np.arange(values.size)
    targets = np.linspace(values[0], values[-1], count)
    return np.unique(np.clip(np.searchsorted(values, targets), 0, values.size - 1))


@dataclass(frozen=True)
class AvramiCurve:
    label: str
    t_min: np.ndarray  # from the start of crystallization
    x: np.ndarray
    fit: object = None  # AvramiFit or FitFailure


def avrami_figure(curves, title: str = ""):
    """ln(-ln(1 - X)) against ln t; fitted lines over each fit's window."""
    fig, ax = _figure()
    ax.set_xlabel("ln(t / min)")
    ax.set_ylabel("ln[−ln(1 − X)]")
    if title:
        ax.set_title(title, fontsize=8)
    drawn = 0
    for i, curve in enumerate(curves):
        t, x = np.asarray(curve.t_min, float), np.asarray(curve.x, float)
        ok = (t > 0) & (x > 1e-4) & (x < 1 - 1e-4)
        if np.count_nonzero(ok) < 2:
            continue
        color = _PALETTE[i % len(_PALETTE)]
        ln_t, y = np.log(t[ok]), np.log(-np.log1p(-x[ok]))
        keep = _thin(ln_t, 250)  # dense DSC records would bloat the SVG
        label = curve.label + (f" (n = {curve.fit.n:.2f})" if curve.fit else "")
        ax.plot(ln_t[keep], y[keep], ".", ms=1.8, color=color, label=label)
        if curve.fit:
            lo, hi = curve.fit.window if curve.fit.method == "window-linear" else (0.01, 0.99)
            span = np.log(curve.fit.t_half_min) + np.log(
                -np.log1p(-np.array([lo, hi])) / math.log(2)) / curve.fit.n
            ax.plot(span, math.log(curve.fit.k_per_min_n) + curve.fit.n * span, "-", lw=0.9,
                    color="0.05", zorder=3)
        drawn += 1
    if drawn:
        ax.legend(fontsize=6, frameon=False, markerscale=4, loc="lower right")
    else:
        _message(ax, "no conversion data")
    return fig


def conversion_comparison_figure(entries):
    """Measured DSC X(t) (converted to volume fraction) against the 3-D microscopy prediction."""
    fig, ax = _figure(4.2)
    ax.set_xlabel("Time from onset (min)")
    ax.set_ylabel("Relative crystallinity X")
    drawn, halves = 0, []
    for entry in entries:
        pred, cal = entry.bulk_prediction(), entry.calorimetry
        if pred is None or cal is None:
            continue
        color = _PALETTE[drawn % len(_PALETTE)]
        tt, xv, basis = cal.volume_conversion()
        label = f"DSC ({basis.split(' (')[0]})"
        keep = _thin(tt, 400)
        tt, xv = tt[keep], xv[keep]
        tc = entry.temperature_c
        name = f"{tc:g} °C" if tc is not None else entry.name
        ax.plot(tt, xv, "-", lw=1.2, color=color, label=f"{name} {label}")
        t_end = max(float(tt.max()), 3 * pred.t_half_min)
        grid = np.linspace(0, t_end, 300)
        ax.plot(grid, pred.conversion(grid), "--", lw=1.0, color=color, label=f"{name} predicted 3-D")
        halves.append(pred.t_half_min)
        drawn += 1
    if drawn:
        ax.legend(fontsize=6, frameon=False)
        ax.set_ylim(-0.02, 1.02)
        if max(halves) > 10 * min(halves):  # several decades of time: a log axis keeps all legible
            ax.set_xscale("log")
            ax.set_xlim(left=0.2 * min(halves))
        else:
            ax.set_xlim(left=0)
    else:
        _message(ax, "no temperature with both microscopy and calorimetry")
    return fig


def hoffman_weeks_figure(tc_c, tm_c, hw):
    """Tm against Tc, the fitted line extended to its crossing with Tm = Tc."""
    fig, ax = _figure()
    tc, tm = np.asarray(tc_c, float), np.asarray(tm_c, float)
    ax.plot(tc, tm, "o", ms=3.5, color=_PALETTE[0], label="data")
    span = np.array([tc.min() - 5.0, hw.tm0_c + 5.0])
    ax.plot(span, hw.intercept_c + hw.slope * span, "-", lw=1.2, color=_PALETTE[1],
            label=f"Tm = {hw.intercept_c:.1f} + {hw.slope:.3f} Tc")
    ax.plot(span, span, "--", lw=0.8, color="0.4", label="Tm = Tc")
    ax.plot([hw.tm0_c], [hw.tm0_c], "s", ms=4, color=_PALETTE[3],
            label=f"Tm0 = {hw.tm0_c:.1f} °C (γ = {hw.gamma:.2f})")
    ax.set_xlabel("Crystallization temperature Tc (°C)")
    ax.set_ylabel("Melting temperature Tm (°C)")
    ax.legend(fontsize=6, frameon=False)
    return fig
