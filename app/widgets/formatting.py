"""How the application writes numbers: the one rule for significant figures, powers of
ten, uncertainties, units and unknown values.

- A number has three significant figures; beyond 10⁴ or below 10⁻³ it is written with a
  power of ten in superscript: ``4.6 × 10⁵``.
- An uncertainty is always the half-width of the 95 % confidence interval, written
  ``value ± half-width unit (95 % CI)``; with a power of ten both share it:
  ``(4.60 ± 0.03) × 10⁵ mm⁻² (95 % CI)``. An interval that is not symmetric is written
  ``value unit (95 % CI low – high)``, with as many more figures as it takes (up to six)
  for the limits to differ from the value: ``1.258 min (95 % CI 1.255 – 1.262)``.
- Units follow the value after a space, with superscript exponents (µm/min, mm⁻², K²);
  the Avrami rate constant is in ``min⁻ⁿ`` with its n stated beside it.
- Unknown values are a dash.
"""

from __future__ import annotations

import math

DASH = "—"
#: Most significant figures an interval is written with (see fmt_interval).
MAX_DIGITS = 6
CI = "95 % CI"
_SUPERSCRIPT = str.maketrans("0123456789-+", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻⁺")


def _known(value) -> bool:
    return value is not None and not (isinstance(value, float) and not math.isfinite(value))


def power_of_ten(exponent: int) -> str:
    """``10⁵``, ``10⁻³``."""
    return "10" + str(int(exponent)).translate(_SUPERSCRIPT)


def _exponent(value: float) -> int:
    """The power of ten a value is written with (0: plain)."""
    magnitude = abs(value)
    if magnitude == 0 or 1e-3 <= magnitude < 1e4:
        return 0
    return int(math.floor(math.log10(magnitude)))


def _exponent_for(value: float, digits: int) -> int:
    """:func:`_exponent`, or the value's own power of ten when ``digits`` significant figures
    cannot be written plainly (4580 to three figures is 4.58 × 10³, never "4.58e+03")."""
    exponent = _exponent(value)
    if not exponent and "e" in f"{value:.{digits}g}":
        exponent = int(math.floor(math.log10(abs(value))))
    return exponent


def fmt(value, unit: str = "", digits: int = 3) -> str:
    """A number with ``digits`` significant figures and its unit; a dash when unknown."""
    if not _known(value):
        return DASH
    exponent = _exponent_for(float(value), digits)
    if exponent:
        text = f"{value / 10 ** exponent:.{digits}g} × {power_of_ten(exponent)}"
    else:
        text = f"{value:.{digits}g}"
    return f"{text} {unit}".strip()


def fmt_pm(value, half_width, unit: str = "", digits: int = 3) -> str:
    """``value ± half-width unit (95 % CI)``; the value alone when the width is unknown."""
    if not _known(value):
        return DASH
    if not _known(half_width):
        return fmt(value, unit, digits)
    exponent = _exponent_for(float(value), digits)
    scale = 10.0 ** exponent
    body = f"{value / scale:.{digits}g} ± {half_width / scale:.2g}"
    if exponent:
        body = f"({body}) × {power_of_ten(exponent)}"
    return f"{body} {unit}".strip() + f" ({CI})"


def fmt_interval(value, low, high, unit: str = "", digits: int = 3) -> str:
    """``value unit (95 % CI low – high)`` for an interval that need not be symmetric."""
    if not _known(value):
        return DASH
    if not (_known(low) and _known(high)):
        return fmt(value, unit, digits)
    shown = fmt(value, "", digits)
    while digits < MAX_DIGITS and (low != value and fmt(low, "", digits) == shown
                                   or high != value and fmt(high, "", digits) == shown):
        digits += 1  # a narrow interval: more figures, or it would read "1.26 – 1.26"
        shown = fmt(value, "", digits)
    return f"{fmt(value, unit, digits)} ({CI} {fmt(low, '', digits)} – {fmt(high, '', digits)})"


def fmt_estimate(est, unit: str = "", digits: int = 3) -> str:
    """:func:`fmt_interval` of an ``analysis.intervals.Estimate`` (None: a dash)."""
    return DASH if est is None else fmt_interval(est.value, est.low, est.high, unit, digits)


def k_unit(n) -> str:
    """The unit of the Avrami k with its n stated: ``min⁻ⁿ, n = 3.00``."""
    return DASH if not _known(n) else f"min⁻ⁿ, n = {n:.2f}"
