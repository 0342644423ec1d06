"""Progress reports yielded by long computations, and the eager driver.

Every per-frame loop in ``analysis`` is a generator that yields :class:`Progress` and
*returns* its result (``return value`` inside the generator). The GUI drives such a
generator in a worker thread and can stop between yields; scripts call
:func:`run_to_completion`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Generator, TypeVar

T = TypeVar("T")


@dataclass(frozen=True)
class Progress:
    """One progress report.

    Attributes
    ----------
    stage : str
        Short human-readable name of the current stage ("reading frames", "fitting").
    fraction : float
        Overall completion in [0, 1].
    message : str
        Optional detail ("frame 120 of 300").
    """

    stage: str
    fraction: float
    message: str = ""


def run_to_completion(
    gen: Generator[Progress, None, T],
    on_progress: Callable[[Progress], None] | None = None,
) -> T:
    """Drive a progress generator to its end and return its result."""
    while True:
        try:
            report = next(gen)
        except StopIteration as stop:
            return stop.value
        if on_progress is not None:
            on_progress(report)


def scaled(
    gen: Generator[Progress, None, T], start: float, stop: float
) -> Generator[Progress, None, T]:
    """Map a sub-stage's fractions in [0, 1] onto [start, stop] of the whole job."""
    span = stop - start
    while True:
        try:
            report = next(gen)
        except StopIteration as done:
            return done.value
        yield Progress(report.stage, start + span * report.fraction, report.message)
