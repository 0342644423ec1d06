"""The project file: the recipe of a temperature series, saved atomically as JSON.

A project lists experiments (one stack per crystallization temperature) with their
calibration, analysis settings, calorimetry source and the user's edits. Results are
not stored: they are always reproducible from this recipe.

File format (``*.spherokin.json``)::

    {"format": "spherokin-project", "schema_version": 3, "app_version": "...",
     "created": ISO-8601, "modified": ISO-8601, "material": "iPP" | null,
     "series": {"tm0_c": ..., "tg_c": ..., ...},
     "experiments": [{"name", "stack" (relative to the project file), "temperature_c",
                      "um_per_px", "interval_s", "times_s", "isothermal_start_s",
                      "thickness_um", "notes", "settings", "geometry", "mode_override",
                      "calorimetry": {...} | null,
                      "edits": [{"kind": ..., "id": detection id, ...}, ...]}]}

``settings`` holds :class:`analysis.settings.AnalysisSettings` (``{"arrival": {...}, ...}``);
every key and value is checked when the file loads (:mod:`analysis.project.reading`), with
the descriptions of :mod:`analysis.settings`. Older schemas are migrated step by step by
:data:`MIGRATIONS`; newer ones are refused.
Saving writes a temporary file in the same folder, flushes and fsyncs it, then renames it
over the target, so a crash never leaves a half-written project; temporaries of earlier
saves that were killed are removed by the next save.
"""

from __future__ import annotations

import json
import os
import re
import sys
from dataclasses import replace
from pathlib import Path
from typing import Any, Callable

from analysis import __version__
from analysis.edits import edit_to_dict
from analysis.errors import InputError
from analysis.outputs import remove_stale_temporaries
from analysis.project.model import (
    CalorimetrySource,
    Experiment,
    Project,
    TemperatureSource,
    new_project,
    now_stamp,
)
from analysis.project.reading import project_from_document
from analysis.textio import read_text
from analysis.units import write_json_atomic

__all__ = ["FORMAT", "SCHEMA_VERSION", "SUFFIX", "MIGRATIONS", "CalorimetrySource", "Experiment",
           "TemperatureSource",
           "Project", "new_project", "open_experiment_stack", "load_project", "project_from_dict",
           "parse_project_json", "migrate", "project_to_dict", "save_project"]

FORMAT = "spherokin-project"
SCHEMA_VERSION = 4
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


def _v2_settings_named_as_the_analysis_reads_them(document: dict) -> dict:
    """Schema 2 -> 3: settings are checked strictly; the one older name is renamed.

    The first version wrote the nucleus-depth setting under its command-line name
    ``sensitivity`` (``--sensitivity``, in frame intervals), where the analysis looked for
    ``sensitivity_frames``; the value was silently ignored. It now becomes
    ``sensitivity_frames`` so it reaches the analysis (schema-1 and schema-2 files may
    hold it). A file holding both names is refused rather than having one dropped. The
    version is bumped so that the rename runs exactly once, on files written before it;
    from schema 3 on every key and value is checked when the file loads.
    """
    for experiment in document.get("experiments") or []:
        settings = experiment.get("settings") if isinstance(experiment, dict) else None
        if not isinstance(settings, dict) or "sensitivity" not in settings:
            continue
        if "sensitivity_frames" in settings:
            raise InputError(f"experiment {experiment.get('name')!r}: settings hold both sensitivity "
                             "and sensitivity_frames (the same setting); keep one")
        settings = dict(settings)
        settings["sensitivity_frames"] = settings.pop("sensitivity")
        experiment["settings"] = settings
    return document


def _v3_experiments_have_a_kind(document: dict) -> dict:
    """Schema 3 -> 4: an experiment is of kind "isothermal" (one Tc) or "ramp" (a
    temperature programme, with a stage log or typed programme in ``temperature_source``).

    Every schema-3 experiment was isothermal. The version is bumped so that an older
    reader refuses a ramp experiment instead of analysing it as if it had one Tc.
    """
    for experiment in document.get("experiments") or []:
        if isinstance(experiment, dict):
            experiment.setdefault("kind", "isothermal")
            experiment.setdefault("temperature_source", None)
    return document


#: Step migrations: ``MIGRATIONS[v]`` turns a schema-v document into schema v+1.
#: Each function carries a docstring saying why the format changed.
MIGRATIONS: dict[int, Callable[[dict], dict]] = {
    1: _v1_edits_name_their_detection,
    2: _v2_settings_named_as_the_analysis_reads_them,
    3: _v3_experiments_have_a_kind,
}


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
    """Build a :class:`Project` from a parsed document, checking every key and value.

    Stack paths resolve against ``path``; an unknown key or a bad value is one
    :class:`InputError` line naming the file, the experiment and the key.
    """
    path = Path(path)
    return project_from_document(migrate(document, path), path)


def migrate(document: Any, path) -> dict:
    """Bring a document to :data:`SCHEMA_VERSION` or refuse it with a clear message."""
    if not isinstance(document, dict) or document.get("format") != FORMAT:
        raise InputError(f"not a spherokin project (missing \"format\": \"{FORMAT}\")", path)
    version = document.get("schema_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 1:
        raise InputError(f"project has an invalid schema_version {version!r:.40}", path)
    if version > SCHEMA_VERSION:
        raise InputError(
            f"project was saved by a newer spherokin (schema {version}; this version reads up "
            f"to {SCHEMA_VERSION}); update spherokin to open it", path)
    while version < SCHEMA_VERSION:
        try:
            document = MIGRATIONS[version](dict(document))
        except InputError as exc:
            raise InputError(exc.problem, path) from None
        version += 1
        document["schema_version"] = version
    return document


# ---------------------------------------------------------------- saving


def project_to_dict(project: Project, path) -> dict:
    """The JSON document for ``project`` saved at ``path`` (stack paths made relative)."""
    base = Path(path).resolve().parent
    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "app_version": __version__,
        "created": project.created or now_stamp(),
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
        "settings": e.settings.to_dict(),
        "geometry": e.geometry,
        "mode_override": e.mode_override,
        "calorimetry": calorimetry,
        "kind": e.kind,
        "temperature_source": _temperature_source_to_dict(e.temperature_source, base),
        "edits": [edit_to_dict(edit) for edit in e.edits],
    }


def _temperature_source_to_dict(source, base: Path) -> dict | None:
    if source is None:
        return None
    out = dict(source.__dict__)
    if source.log_file:
        out["log_file"] = _relative(source.log_file, base)
    return out


def save_project(project: Project, path) -> Project:
    """Write ``project`` atomically to ``path``; returns it with ``path`` and ``modified`` set."""
    path = Path(path)
    stamped = replace(project, modified=now_stamp(), created=project.created or now_stamp(),
                      path=str(path.resolve()))
    write_json_atomic(path, project_to_dict(stamped, path))
    remove_stale_temporaries(path.parent, path.name)  # left by saves that were killed
    return stamped
