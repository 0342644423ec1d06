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


def k_unit(n) -> str:
    return DASH if n is None else f"min^-{n:.2f}"
