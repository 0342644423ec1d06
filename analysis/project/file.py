"""The project file: the recipe of a temperature series, saved atomically as JSON.

A project lists experiments (one stack per crystallization temperature) with their
calibration, analysis settings, calorimetry source and the user's edits. Results are
not stored: they are always reproducible from this recipe.

File format (``*.spherokin.json``)::

    {"format": "spherokin-project", "schema_version": 2, "app_version": "...",
     "created": ISO-8601, "modified": ISO-8601, "material": "iPP" | null,
     "series": {"tm0_c": ..., "tg_c": ..., ...},
     "experiments": [{"name", "stack" (relative to the project file), "temperature_c",
                      "um_per_px", "interval_s", "times_s", "isothermal_start_s",
                      "thickness_um", "notes", "settings", "geometry", "mode_override",
                      "calorimetry": {...} | null,
                      "edits": [{"kind": ..., "id": detection id, ...}, ...]}]}

Older schemas are migrated step by step by :data:`MIGRATIONS`; newer ones are refused.
Saving writes a temporary file in the same folder, flushes and fsyncs it, then renames it
over the target, so a crash never leaves a half-written project.
"""

from __future__ import annotations

import json
import math
import os
import re
import sys
from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable

from analysis import __version__
from analysis.edits import Edit, edit_from_dict, edit_to_dict
from analysis.errors import InputError
from analysis.units import write_json_atomic
from analysis.textio import read_text

FORMAT = "spherokin-project"
SCHEMA_VERSION = 2
SUFFIX = ".spherokin.json"

#: Edit kinds that name a detection (their records carry ``id`` from schema 2 on).
_TARGETED_EDITS = ("add_nucleus", "delete_detection", "merge_detections", "move_centre",
                   "exclude", "include", "ignore_frames")


def _v1_edits_name_their_detection(document: dict) -> dict:
    """Schema 1 -> 2: edits name the detection they act on by its id.

    Schema-1 edits found their target as the detection nearest to a point when replayed,
    which could land on a neighbour once other edits had moved things. From schema 2
    each record also stores the detection's ``id`` (``other_id`` for the one merged
    away); ids did not exist in schema 1, so migrated records get ``null`` and keep
    being found by their point. A schema-1 ``add_nucleus`` was seeded at the arrival
    map's minimum near the click; from schema 2 the nucleus sits exactly at the click.
    The version is bumped so that an older reader refuses a schema-2 file instead of
    ignoring the ids and misplacing the edits.
    """
    experiments = []
    for experiment in document.get("experiments") or []:
        if isinstance(experiment, dict) and isinstance(experiment.get("edits"), list):
            edits = []
            for record in experiment["edits"]:
                if isinstance(record, dict) and record.get("kind") in _TARGETED_EDITS:
                    record = {**record, "id": record.get("id")}
                    if record["kind"] == "merge_detections":
                        record["other_id"] = record.get("other_id")
                edits.append(record)
            experiment = {**experiment, "edits": edits}
        experiments.append(experiment)
    if "experiments" in document:
        document["experiments"] = experiments
    return document


#: Step migrations: ``MIGRATIONS[v]`` turns a schema-v document into schema v+1.
#: Each function carries a docstring saying why the format changed.
MIGRATIONS: dict[int, Callable[[dict], dict]] = {1: _v1_edits_name_their_detection}


@dataclass(frozen=True)
class CalorimetrySource:
    """Where an experiment's isothermal DSC run lives and how to read it."""

    file: str  # absolute in memory; stored relative to the project file
    time_col: str | int | None = None
    heat_flow_col: str | int | None = None
    time_unit: str | None = None  # "s" | "min" | None (from the column name)
    heat_flow_unit: str | None = None  # "mW" | "W/g" | None
    exotherm: str = "auto"  # "up" | "down" | "auto"
    window: tuple[float, float] = (0.03, 0.20)
    mass_mg: float | None = None
    material: str | None = None
    baseline_start_min: float | None = None
    baseline_end_min: float | None = None
    lag_s: float = 0.0  # the instrument's thermal lag constant, from its calibration


@dataclass(frozen=True)
class Experiment:
    """One isothermal crystallization: a stack at one Tc and how to analyse it."""

    name: str
    stack_path: str  # absolute in memory; stored relative to the project file
    temperature_c: float | None = None
    um_per_px: float | None = None
    interval_s: float | None = None
    times_s: tuple[float, ...] | None = None
    isothermal_start_s: float = 0.0
    thickness_um: float | None = None
    notes: str = ""
    settings: dict[str, Any] = field(default_factory=dict)
    edits: tuple[Edit, ...] = ()
    calorimetry: CalorimetrySource | None = None
    geometry: str = "bulk-3d"
    mode_override: str | None = None


@dataclass(frozen=True)
class Project:
    """A temperature series: experiments plus series-wide settings."""

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


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def new_project() -> Project:
    """An empty project stamped with the current time."""
    stamp = _now()
    return Project(created=stamp, modified=stamp)


def open_experiment_stack(experiment: Experiment):
    """Open an experiment's stack with its calibration overrides applied."""
    from analysis.stack.frames import (
        open_stack,  # deferred: keeps project I/O light to import
    )

    return open_stack(
        experiment.stack_path,
        um_per_px=experiment.um_per_px,
        interval_s=None if experiment.times_s else experiment.interval_s,
        times_s=experiment.times_s,
    )


# ---------------------------------------------------------------- loading


#: Deepest nesting of a project document; ours is 5 deep (edits inside experiments).
#: Deeper documents are refused before anything recursive walks them.
MAX_JSON_DEPTH = 64


def load_project(path) -> Project:
    """Read a project file, migrating older schemas; :class:`InputError` when unusable."""
    path = Path(path)
    text = read_text(path, "project file").lstrip("\ufeff")
    return project_from_dict(parse_project_json(text, path), path)


def parse_project_json(text: str, path) -> Any:
    """The parsed document, or :class:`InputError` naming the file for bad or hostile JSON.

    Nesting is checked before parsing (the parser recurses) and numbers after it: an
    integer of more than 4300 digits or beyond the float range is refused here rather
    than failing deep inside the analysis.
    """
    depth = _bracket_depth(text)
    if depth > MAX_JSON_DEPTH:
        raise InputError(f"project file is nested {depth} levels deep (at most {MAX_JSON_DEPTH})", path)
    try:
        document = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"project file is not valid JSON (line {exc.lineno}: {exc.msg})", path) from None
    except (ValueError, RecursionError) as exc:
        if "digits" in str(exc):  # Python refuses integers over sys.get_int_max_str_digits()
            raise InputError(f"project file holds an integer with more than "
                             f"{getattr(sys, 'get_int_max_str_digits', lambda: 4300)()} digits", path) from None
        raise InputError(f"project file cannot be parsed ({str(exc)[:80]})", path) from None
    _check_numbers(document, path)
    return document


def _bracket_depth(text: str) -> int:
    """Deepest nesting of [ and { outside strings (a linear scan, no recursion)."""
    depth = deepest = 0
    for token in re.finditer(r'"(?:[^"\\]|\\.)*"|[\[\]{}]', text):
        char = token.group()
        if char in "[{":
            depth += 1
            deepest = max(deepest, depth)
        elif char in "]}":
            depth -= 1
    return deepest


def _check_numbers(document: Any, path) -> None:
    """Integers that do not fit a float are refused (they would overflow every formula)."""
    pending = [document]
    while pending:
        value = pending.pop()
        if isinstance(value, dict):
            pending.extend(value.values())
        elif isinstance(value, list):
            pending.extend(value)
        elif isinstance(value, int) and not isinstance(value, bool) and abs(value) > 2**1023:
            raise InputError(f"project file holds an integer too large for any setting "
                             f"({len(str(abs(value)))} digits)", path)


def project_from_dict(document: Any, path) -> Project:
    """Build a :class:`Project` from a parsed document; stack paths resolve against ``path``."""
    path = Path(path)
    document = migrate(document, path)
    base = path.resolve().parent
    try:
        experiments = tuple(_experiment_from_dict(e, base, path) for e in document.get("experiments", []))
        return Project(
            experiments=experiments,
            material=document.get("material"),
            series=dict(document.get("series") or {}),
            app_version=str(document.get("app_version", "")),
            created=str(document.get("created", "")),
            modified=str(document.get("modified", "")),
            path=str(path.resolve()),
        )
    except InputError:
        raise
    except (TypeError, ValueError, AttributeError, KeyError) as exc:
        raise InputError(f"project file has a malformed entry ({exc})", path) from None


def migrate(document: Any, path) -> dict:
    """Bring a document to :data:`SCHEMA_VERSION` or refuse it with a clear message."""
    if not isinstance(document, dict) or document.get("format") != FORMAT:
        raise InputError(f"not a spherokin project (missing \"format\": \"{FORMAT}\")", path)
    version = document.get("schema_version")
    if not isinstance(version, int) or version < 1:
        raise InputError(f"project has an invalid schema_version {version!r}", path)
    if version > SCHEMA_VERSION:
        raise InputError(
            f"project was saved by a newer spherokin (schema {version}; this version reads up "
            f"to {SCHEMA_VERSION}); update spherokin to open it", path)
    while version < SCHEMA_VERSION:
        document = MIGRATIONS[version](dict(document))
        version += 1
        document["schema_version"] = version
    return document


def _number(value, what: str, path, *, positive: bool = False) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError(f"{what} must be a number, got {value!r}", path)
    if positive and value <= 0:
        raise InputError(f"{what} must be positive, got {value!r}", path)
    return float(value)


def _resolve(stored: str, base: Path) -> str:
    candidate = Path(stored)
    return str(candidate if candidate.is_absolute() else (base / candidate).resolve())


def _experiment_from_dict(d: dict, base: Path, path) -> Experiment:
    name = str(d.get("name") or "unnamed")
    if "stack" not in d:
        raise InputError(f"experiment {name!r} has no stack path", path)
    times = d.get("times_s")
    return Experiment(
        name=name,
        stack_path=_resolve(str(d["stack"]), base),
        temperature_c=_number(d.get("temperature_c"), f"{name}: temperature_c", path),
        um_per_px=_number(d.get("um_per_px"), f"{name}: um_per_px", path, positive=True),
        interval_s=_number(d.get("interval_s"), f"{name}: interval_s", path, positive=True),
        times_s=None if times is None else tuple(_number(t, f"{name}: times_s", path) for t in times),
        isothermal_start_s=_number(d.get("isothermal_start_s", 0.0), f"{name}: isothermal_start_s", path) or 0.0,
        thickness_um=_number(d.get("thickness_um"), f"{name}: thickness_um", path, positive=True),
        notes=str(d.get("notes", "")),
        settings=dict(d.get("settings") or {}),
        edits=tuple(edit_from_dict(e, path=str(path)) for e in d.get("edits", [])),
        calorimetry=_calorimetry_from_dict(d.get("calorimetry"), base, path),
        geometry=str(d.get("geometry", "bulk-3d")),
        mode_override=d.get("mode_override"),
    )


def _calorimetry_from_dict(d: dict | None, base: Path, path) -> CalorimetrySource | None:
    if d is None:
        return None
    if "file" not in d:
        raise InputError("calorimetry entry has no file", path)
    values = dict(d)
    values["file"] = _resolve(str(d["file"]), base)
    if "window" in values:
        values["window"] = tuple(float(v) for v in values["window"])
    known = CalorimetrySource.__dataclass_fields__
    return CalorimetrySource(**{k: v for k, v in values.items() if k in known})


# ---------------------------------------------------------------- saving


def project_to_dict(project: Project, path) -> dict:
    """The JSON document for ``project`` saved at ``path`` (stack paths made relative)."""
    base = Path(path).resolve().parent
    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "app_version": __version__,
        "created": project.created or _now(),
        "modified": project.modified,
        "material": project.material,
        "series": project.series,
        "experiments": [_experiment_to_dict(e, base) for e in project.experiments],
    }


def _relative(target: str, base: Path) -> str:
    try:
        return Path(os.path.relpath(Path(target).resolve(), base)).as_posix()
    except ValueError:  # another drive on Windows
        return Path(target).as_posix()


def _experiment_to_dict(e: Experiment, base: Path) -> dict:
    calorimetry = None
    if e.calorimetry is not None:
        calorimetry = {**e.calorimetry.__dict__, "file": _relative(e.calorimetry.file, base)}
        calorimetry["window"] = list(e.calorimetry.window)
    return {
        "name": e.name,
        "stack": _relative(e.stack_path, base),
        "temperature_c": e.temperature_c,
        "um_per_px": e.um_per_px,
        "interval_s": e.interval_s,
        "times_s": None if e.times_s is None else list(e.times_s),
        "isothermal_start_s": e.isothermal_start_s,
        "thickness_um": e.thickness_um,
        "notes": e.notes,
        "settings": e.settings,
        "geometry": e.geometry,
        "mode_override": e.mode_override,
        "calorimetry": calorimetry,
        "edits": [edit_to_dict(edit) for edit in e.edits],
    }


def save_project(project: Project, path) -> Project:
    """Write ``project`` atomically to ``path``; returns it with ``path`` and ``modified`` set."""
    path = Path(path)
    stamped = replace(project, modified=_now(), created=project.created or _now(),
                      path=str(path.resolve()))
    write_json_atomic(path, project_to_dict(stamped, path))
    return stamped
