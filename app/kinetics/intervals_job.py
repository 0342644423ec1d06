"""The prediction's bootstrap intervals for the kinetics page, off the GUI thread.

The resampling (``app.kinetics.logic.interval_steps``) runs in the shared worker
(``app.widgets.background.BackgroundResults``: progress bar and Cancel) with the
project's stored seed, so the page shows the same numbers as the report and a re-run
repeats them. Results are kept per input (the result object, geometry, mode, thickness,
seed): coming back to an experiment does not resample again.
"""

from __future__ import annotations

from app.kinetics import logic
from app.widgets.background import BackgroundResults


def intervals_key(result, experiment, seed: int) -> tuple:
    """What the intervals depend on (the result by identity: a re-analysis is a new object)."""
    return (id(result), experiment.geometry, experiment.mode_override, experiment.thickness_um, seed)


class IntervalsJob(BackgroundResults):
    """The (prediction, bulk prediction) intervals of the current experiment."""

    def __init__(self, parent):
        super().__init__(parent, "95 % intervals", object_name="intervals_bar")

    def request_for(self, result, experiment, seed: int):
        """The intervals if known; otherwise they start in the worker and this is None."""
        return self.request(intervals_key(result, experiment, seed),
                            lambda: logic.interval_steps(result, experiment, seed=seed), keep=result)
