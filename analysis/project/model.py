"""The project's values: frozen dataclasses for a temperature series and its experiments.

Defaults come from :mod:`analysis.settings`, where every settable value is described
once; reading and checking a stored document is :mod:`analysis.project.reading`, the
file itself :mod:`analysis.project.file`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from typing import Any

from analysis import __version__
from analysis.edits import Edit
from analysis.settings import DEFAULT_FIT_WINDOW, DEFAULT_GEOMETRY, AnalysisSettings


@dataclass(frozen=True)
class CalorimetrySource:
    """Where an experiment's isothermal DSC run lives and how to read it."""

    file: str  # absolute in memory; stored relative to the project file
    time_col: str | int | None = None
    heat_flow_col: str | int | None = None
    time_unit: str | None = None  # "s" | "min" | None (from the column name)
    heat_flow_unit: str | None = None  # "mW" | "W/g" | None
    exotherm: str = "auto"  # "up" | "down" | "auto"
    window: tuple[float, float] = DEFAULT_FIT_WINDOW
    mass_mg: float | None = None
    material: str | None = None
    baseline_start_min: float | None = None
    baseline_end_min: float | None = None
    lag_s: float = 0.0  # the instrument's thermal lag constant, from its calibration


@dataclass(frozen=True)
class TemperatureSource:
    """The temperature of a ramp experiment: a stage log, or a typed block programme.

    Times of the log (or the programme's start) plus ``clock_offset_s`` are on the
    recording clock; ``lag_s`` is the film's first-order lag behind the stage sensor.
    Read it with ``analysis.kinetics.temperature_programme.programme_of_source``.
    """

    log_file: str | None = None  # absolute in memory; stored relative to the project file
    programme: str | None = None  # "START, RATE:END, hold:SECONDS, ..."
    time_col: str | int | None = None
    temperature_col: str | int | None = None
    time_unit: str | None = None
    temperature_unit: str | None = None
    clock_offset_s: float = 0.0
    lag_s: float = 0.0


@dataclass(frozen=True)
class Experiment:
    """One crystallization run: a stack at one Tc (kind "isothermal") or along a
    temperature programme (kind "ramp"), and how to analyse it."""

    name: str
    stack_path: str  # absolute in memory; stored relative to the project file
    temperature_c: float | None = None
    um_per_px: float | None = None
    interval_s: float | None = None
    times_s: tuple[float, ...] | None = None
    isothermal_start_s: float = 0.0
    thickness_um: float | None = None
    notes: str = ""
    settings: AnalysisSettings = field(default_factory=AnalysisSettings)
    edits: tuple[Edit, ...] = ()
    calorimetry: CalorimetrySource | None = None
    geometry: str = DEFAULT_GEOMETRY
    mode_override: str | None = None
    kind: str = "isothermal"
    temperature_source: TemperatureSource | None = None


@dataclass(frozen=True)
class Project:
    """A temperature series: experiments plus series-wide constants (checked at load)."""

    experiments: tuple[Experiment, ...] = ()
    material: str | None = None
    series: dict[str, Any] = field(default_factory=dict)
    app_version: str = __version__
    created: str = ""
    modified: str = ""
    path: str | None = None

    def with_experiment(self, index: int, experiment: Experiment) -> "Project":
        """A copy with experiment ``index`` replaced."""
        experiments = list(self.experiments)
        experiments[index] = experiment
        return replace(self, experiments=tuple(experiments))


def now_stamp() -> str:
    """The current UTC time, ISO 8601 to the second."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def new_project() -> Project:
    """An empty project stamped with the current time."""
    stamp = now_stamp()
    return Project(created=stamp, modified=stamp)
