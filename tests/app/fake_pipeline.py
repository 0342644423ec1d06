"""A fake analysis engine for the model, runner and window tests.

It satisfies :class:`app.core.engine.AnalysisEngine` with trivial, predictable
detections (two spherulites per experiment) and returns real
:class:`analysis.spherulites.pipeline.Analysis` values, so the model and command logic
can be tested in milliseconds, independently of the image analysis. It is handed to
the model (``ProjectModel(engine=FakeEngine())``); no module is replaced.
"""

from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace
from typing import Generator, Sequence

import numpy as np

from analysis.edits import Edit, nearest_index
from analysis.progress import Progress
from analysis.project.file import Experiment
from analysis.results import (
    ExperimentResult,
    Nucleation,
    PooledGrowthRate,
    Spherulite,
)
from analysis.spherulites.pipeline import Analysis


def _spherulite(i, x, y, source="auto"):
    return Spherulite(i, x, y, 0.0, 10.0, 12.0, 0.5, 0.99, 5, "ok", source)


def _result(experiment, spherulites, unapplied=()):
    return ExperimentResult(
        stack=experiment.stack_path, frames=6, um_per_px=experiment.um_per_px or 2.0,
        interval_s=10.0, temperature_c=experiment.temperature_c, thickness_um=None,
        spherulites=tuple(spherulites), radii=(),
        growth_rate=PooledGrowthRate(12.0, 11.0, 13.0, len(spherulites)),
        nucleation=Nucleation(len(spherulites), "athermal", 1.0, None, None, None, 0.0),
        area_fraction_time_s=np.zeros(0), area_fraction=np.zeros(0), unapplied_edits=tuple(unapplied))


class FakeEngine:
    """Two automatic detections per stack; add_nucleus, delete_detection and exclude edits."""

    def __init__(self, fail_with: BaseException | None = None):
        self.calls = {"analyze": 0, "apply_edits": 0}
        self.fail_with = fail_with  # raised by analyze_iter, to test error reporting
        self._base: dict[str, tuple[Spherulite, ...]] = {}

    def analyze_iter(self, experiment: Experiment) -> Generator[Progress, None, Analysis]:
        self.calls["analyze"] += 1
        for k in range(3):
            yield Progress("fake stage", k / 3)
        if self.fail_with is not None:
            raise self.fail_with
        base = (_spherulite(1, 24.0, 20.0), _spherulite(2, 40.0, 44.0))
        self._base[experiment.stack_path] = base
        arrival = SimpleNamespace(shifts_px=np.zeros((6, 2)))
        analysis = Analysis(arrival, _result(experiment, base), experiment.settings)
        return self.apply_edits(analysis, tuple(experiment.edits))

    def apply_edits(self, analysis: Analysis, edits: Sequence[Edit]) -> Analysis:
        self.calls["apply_edits"] += 1
        spherulites, unapplied = list(self._base[analysis.result.stack]), []
        for edit in edits:
            centres = [(s.x_px, s.y_px) for s in spherulites]
            if edit.kind == "add_nucleus":
                spherulites.append(_spherulite(100 + len(spherulites), edit.x_px, edit.y_px, "manual"))
                continue
            hit = nearest_index(edit.x_px, edit.y_px, centres, 5.0)
            if hit is None:
                unapplied.append(edit)
            elif edit.kind == "delete_detection":
                spherulites.pop(hit)
            elif edit.kind == "exclude":
                spherulites[hit] = replace(spherulites[hit], status="excluded")
        result = replace(analysis.result, spherulites=tuple(spherulites), unapplied_edits=tuple(unapplied))
        return replace(analysis, result=result, edits=tuple(edits))
