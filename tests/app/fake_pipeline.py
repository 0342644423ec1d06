"""A tiny stand-in for analysis.spherulites.pipeline used by the model tests only.

It follows the pipeline's API (analyze_experiment_iter, apply_edits, Analysis with
.arrival and .result) with trivial, predictable detections so the model and command
logic can be tested in milliseconds, independently of the image analysis.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from types import SimpleNamespace

import numpy as np

from analysis.edits import nearest_index
from analysis.progress import Progress
from analysis.results import (
    ExperimentResult,
    Nucleation,
    PooledGrowthRate,
    Spherulite,
)

CALLS = {"analyze": 0, "apply_edits": 0}


@dataclass(frozen=True)
class Analysis:
    arrival: object
    result: ExperimentResult
    base: tuple  # automatic detections before edits


def _spherulite(i, x, y, source="auto"):
    return Spherulite(i, x, y, 0.0, 10.0, 12.0, 0.5, 0.99, 5, "ok", source)


def _result(experiment, spherulites, unapplied=()):
    return ExperimentResult(
        stack=experiment.stack_path, frames=6, um_per_px=experiment.um_per_px or 2.0,
        interval_s=10.0, temperature_c=experiment.temperature_c, thickness_um=None,
        spherulites=tuple(spherulites), radii=(),
        growth_rate=PooledGrowthRate(12.0, 11.0, 13.0, len(spherulites)),
        nucleation=Nucleation(len(spherulites), "athermal", 1.0, None, None, None, 0.0),
        area_fraction_time_s=np.zeros(0), area_fraction=np.zeros(0),
        unapplied_edits=tuple(unapplied))


def analyze_experiment_iter(experiment):
    CALLS["analyze"] += 1
    for k in range(3):
        yield Progress("fake stage", k / 3)
    base = (_spherulite(1, 24.0, 20.0), _spherulite(2, 40.0, 44.0))
    arrival = SimpleNamespace(shifts_px=np.zeros((6, 2)))
    analysis = Analysis(arrival, _result(experiment, base), base)
    analysis = replace(analysis, result=replace(analysis.result, stack=experiment.stack_path))
    return apply_edits(analysis, tuple(experiment.edits), experiment=experiment)


def apply_edits(analysis, edits, experiment=None):
    CALLS["apply_edits"] += 1
    spherulites, unapplied = list(analysis.base), []
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
    return replace(analysis, result=result)
