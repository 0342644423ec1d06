"""How the application writes numbers: significant figures, units, unknown values."""

from __future__ import annotations

import math

DASH = "—"


def fmt(value, unit: str = "", digits: int = 3) -> str:
    """A number with ``digits`` significant figures and its unit; a dash when unknown."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return DASH
    text = f"{value:.{digits}g}"
    if "e" in text:
        mantissa, exponent = text.split("e")
        text = f"{mantissa} × 10^{int(exponent)}"
    return f"{text} {unit}".strip()


def fmt_pm(value, half_width, unit: str = "", digits: int = 3) -> str:
    if value is None:
        return DASH
    if half_width is None:
        return fmt(value, unit, digits)
    return f"{fmt(value, '', digits)} ± {fmt(half_width, unit, 2)}"


def fmt_ci(value, low, high, unit: str = "", digits: int = 3) -> str:
    """The one way an estimate is written: "value (95 % CI low–high) unit"; the value
    alone when its interval is unknown, a dash when the value is."""
    if value is None or (isinstance(value, float) and not math.isfinite(value)):
        return DASH
    if low is None or high is None:
        return fmt(value, unit, digits)
    return f"{fmt(value, '', digits)} (95 % CI {fmt(low, '', digits)}–{fmt(high, '', digits)}) {unit}".rstrip()


def fmt_estimate(est, unit: str = "", digits: int = 3) -> str:
    """:func:`fmt_ci` of an ``analysis.intervals.Estimate`` (None: a dash)."""
    return DASH if est is None else fmt_ci(est.value, est.low, est.high, unit, digits)


def k_unit(n) -> str:
    return DASH if n is None else f"min^-{n:.2f}"
