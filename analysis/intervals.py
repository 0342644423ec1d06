"""Confidence-interval primitives shared by every reported number.

Pure numpy/scipy, no analysis imports (a leaf module). Every reported estimate carries a
95 % interval as an :class:`Estimate`; how each interval is built (a formula where one
holds, resampling where formulas fail) is documented beside the function that builds it.
Sources: docs/sources.md, section "Uncertainty".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import stats

LEVEL = 0.95
Z95 = float(stats.norm.ppf(0.975))

#: Default seed of every resampling; stored with the results so that a re-run repeats them.
DEFAULT_SEED = 14_2026
#: Default number of bootstrap resamples (Efron & Tibshirani 1993, ch. 13: about 1000
#: for percentile intervals).
DEFAULT_RESAMPLES = 1000


@dataclass(frozen=True)
class Estimate:
    """A value with its 95 % interval; ``None`` where unknown."""

    value: float | None
    low: float | None = None
    high: float | None = None

    @property
    def half_width(self) -> float | None:
        if self.low is None or self.high is None:
            return None
        return 0.5 * (self.high - self.low)

    def covers(self, truth: float) -> bool:
        return self.low is not None and self.high is not None and self.low <= truth <= self.high

    def scaled(self, factor: float) -> "Estimate":
        """The estimate times a positive factor (a change of unit)."""
        return Estimate(*(None if v is None else v * factor for v in (self.value, self.low, self.high)))


UNKNOWN = Estimate(None)


def finite_or_none(value) -> float | None:
    return None if value is None or not math.isfinite(float(value)) else float(value)


def estimate(value, low, high) -> Estimate:
    """An Estimate with non-finite parts replaced by None."""
    return Estimate(finite_or_none(value), finite_or_none(low), finite_or_none(high))


def poisson_count_interval(count: int, level: float = LEVEL) -> tuple[float, float]:
    """Exact (Garwood) interval for the mean of a Poisson count.

    low = chi2(a/2; 2k) / 2, high = chi2(1 - a/2; 2k + 2) / 2, low = 0 for k = 0
    (Garwood 1936, Biometrika 28, 437; Ulm 1990, Am. J. Epidemiol. 131, 373).
    """
    if count < 0:
        raise ValueError(f"a count cannot be negative: {count}")
    alpha = 1.0 - level
    low = 0.0 if count == 0 else float(stats.chi2.ppf(alpha / 2, 2 * count)) / 2
    high = float(stats.chi2.ppf(1 - alpha / 2, 2 * count + 2)) / 2
    return low, high


def rate_estimate(count: int, exposure: float) -> Estimate:
    """A Poisson rate count / exposure with the Garwood interval (exposure > 0)."""
    if not exposure > 0:
        return UNKNOWN
    low, high = poisson_count_interval(count)
    return Estimate(count / exposure, low / exposure, high / exposure)


def percentile_interval(samples, level: float = LEVEL) -> tuple[float | None, float | None]:
    """Bootstrap percentile interval of the finite samples (Efron & Tibshirani 1993,
    An Introduction to the Bootstrap, Chapman & Hall, ch. 13)."""
    s = np.asarray(samples, dtype=float)
    s = s[np.isfinite(s)]
    if s.size < 20:
        return None, None
    alpha = 1.0 - level
    low, high = np.quantile(s, [alpha / 2, 1 - alpha / 2])
    return float(low), float(high)


def basic_interval(point: float, samples,
                   level: float = LEVEL) -> tuple[float | None, float | None]:
    """Basic (reflected-percentile) bootstrap interval 2*point - q(1 - a/2) ..
    2*point - q(a/2) (Davison & Hinkley 1997, Bootstrap Methods and their Application,
    Cambridge, eq. 5.6). Where the estimator is biased, as a slope is flattened by errors
    in the abscissa, the draws are biased again by about as much, and reflecting them
    about the estimate moves the interval towards the truth; the percentile interval
    would move it away."""
    low, high = percentile_interval(samples, level)
    if low is None:
        return None, None
    return 2 * point - high, 2 * point - low


def bootstrap(statistic: Callable[[np.random.Generator], float], rng: np.random.Generator,
              resamples: int = DEFAULT_RESAMPLES) -> np.ndarray:
    """``resamples`` draws of ``statistic(rng)``; a draw that fails (ValueError, ZeroDivision
    or a non-finite value) is NaN and is left out of the interval."""
    out = np.full(resamples, np.nan)
    for i in range(resamples):
        try:
            out[i] = statistic(rng)
        except (ValueError, ZeroDivisionError, FloatingPointError):
            continue
    return out


def poisson_resample(rng: np.random.Generator, n: int) -> np.ndarray:
    """Indices of a bootstrap resample whose size is itself Poisson(n).

    Resampling n items with replacement fixes the count; drawing the count from Poisson(n)
    first carries the counting error of a Poisson process into anything computed from
    the resample (the 'Poisson bootstrap', Hanley & MacGibbon 2006, Comput. Methods
    Programs Biomed. 83, 57).
    """
    m = int(rng.poisson(n)) if n > 0 else 0
    return rng.integers(0, n, size=m) if n > 0 else np.zeros(0, int)


def t_half_width(standard_error: float, dof: int, level: float = LEVEL) -> float:
    """Half-width t(1 - a/2; dof) * se of a Student-t interval."""
    return float(stats.t.ppf(0.5 + level / 2, max(int(dof), 1)) * standard_error)


def quadrature(*half_widths) -> float:
    """Independent contributions to a half-width combined as the root sum of squares
    (JCGM 100:2008, Guide to the expression of uncertainty in measurement, 5.1.2)."""
    return float(math.sqrt(sum(float(h) ** 2 for h in half_widths if h is not None)))
