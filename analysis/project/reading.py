"""A stored project document (already migrated) checked value by value into a :class:`Project`.

Every key is known and every value is checked against its description in
:mod:`analysis.settings`; anything else is one :class:`~analysis.errors.InputError`
line naming the file, the experiment and the key. Nothing is dropped or guessed.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from analysis.edits import edit_from_dict
from analysis.errors import InputError
from analysis.project.model import CalorimetrySource, Experiment, Project, TemperatureSource
from analysis.settings import (
    CALORIMETRY_SPECS,
    EXPERIMENT_SPECS,
    FRAME_TIME_SPEC,
    HW_PAIRS_KEY,
    SERIES_SPECS,
    TEMPERATURE_SOURCE_SPECS,
    AnalysisSettings,
    Place,
    Spec,
    check_fit_window,
    check_hoffman_weeks_pairs,
    check_series_order,
    parse_value,
)

#: Top-level keys besides ``experiments`` and ``series``.
_PROJECT_TEXT_KEYS = ("format", "schema_version", "app_version", "created", "modified")
_EXPERIMENT_OTHER_KEYS = ("name", "stack", "notes", "times_s", "settings", "edits", "calorimetry",
                          "temperature_source")
_TEMPERATURE_SOURCE_OTHER_KEYS = ("log_file", "time_col", "temperature_col")
_CALORIMETRY_OTHER_KEYS = ("file", "time_col", "heat_flow_col", "window")
#: Most frames a stored frame-time list may hold (a week at 1 frame/s is 6e5).
MAX_FRAME_TIMES = 10_000_000
#: Longest free text (names, notes, paths) a project may store, characters.
MAX_TEXT_CHARS = 100_000
#: Largest column index a calorimetry source may name.
MAX_COLUMN_INDEX = 10_000


def project_from_document(document: dict, path: Path) -> Project:
    """The :class:`Project` of a migrated document; stack paths resolve against ``path``."""
    place = Place(str(path))
    _refuse_unknown(document, (*_PROJECT_TEXT_KEYS, "material", "series", "experiments"), place)
    experiments = document.get("experiments", [])
    if not isinstance(experiments, list):
        raise place.error("experiments", f"must be a list, got {type(experiments).__name__}")
    base = path.resolve().parent
    return Project(
        experiments=tuple(_experiment(e, k, base, place) for k, e in enumerate(experiments)),
        material=_text(document.get("material"), "material", place, optional=True),
        series=series_from_dict(document.get("series"), place.within("series")),
        app_version=_text(document.get("app_version", ""), "app_version", place),
        created=_text(document.get("created", ""), "created", place),
        modified=_text(document.get("modified", ""), "modified", place),
        path=str(path.resolve()),
    )


def series_from_dict(data: Any, place: Place) -> dict[str, Any]:
    """Series constants checked against ``SERIES_SPECS`` (and Tg < Tm0, T∞ < Tg)."""
    if data is None:
        return {}
    if not isinstance(data, dict):
        raise InputError(f"series must be an object, got {type(data).__name__}", place.path)
    specs = {s.key: s for s in SERIES_SPECS}
    _refuse_unknown(data, (*specs, HW_PAIRS_KEY), place)
    series = {key: parse_value(specs[key], value, place) for key, value in data.items() if key in specs}
    if HW_PAIRS_KEY in data:
        series[HW_PAIRS_KEY] = check_hoffman_weeks_pairs(data[HW_PAIRS_KEY], place)
    check_series_order(series, place)
    return series


def _experiment(d: Any, position: int, base: Path, project: Place) -> Experiment:
    if not isinstance(d, dict):
        raise InputError(f"experiment {position + 1} must be an object, got {type(d).__name__}", project.path)
    name = _text(d.get("name") or f"experiment {position + 1}", "name", project)
    place = Place(project.path, name)
    _refuse_unknown(d, (*_EXPERIMENT_OTHER_KEYS, *(s.key for s in EXPERIMENT_SPECS)), place)
    if "stack" not in d:
        raise InputError(f"experiment {name!r} has no stack path", project.path)
    values = _checked(d, EXPERIMENT_SPECS, place)
    edits = d.get("edits", [])
    if not isinstance(edits, list):
        raise place.error("edits", f"must be a list, got {type(edits).__name__}")
    return Experiment(
        name=name,
        stack_path=_resolve(_text(d["stack"], "stack", place), base),
        times_s=_frame_times(d.get("times_s"), place),
        notes=_text(d.get("notes", ""), "notes", place),
        settings=AnalysisSettings.from_dict(d.get("settings"), path=project.path, experiment=name,
                                            section="settings"),
        edits=tuple(edit_from_dict(e, path=project.path) for e in edits),
        calorimetry=_calorimetry(d.get("calorimetry"), base, place.within("calorimetry")),
        temperature_source=_temperature_source(d.get("temperature_source"), base,
                                               place.within("temperature_source")),
        **values,
    )


def _temperature_source(d: Any, base: Path, place: Place) -> TemperatureSource | None:
    if d is None:
        return None
    if not isinstance(d, dict):
        raise place.error("", f"must be an object, got {type(d).__name__}")
    _refuse_unknown(d, (*_TEMPERATURE_SOURCE_OTHER_KEYS, *(s.key for s in TEMPERATURE_SOURCE_SPECS)), place)
    values = _checked(d, TEMPERATURE_SOURCE_SPECS, place)
    log_file = _text(d.get("log_file"), "log_file", place, optional=True)
    if not log_file and not values.get("programme"):
        raise place.error("log_file", "is missing: a ramp needs a temperature log or a typed programme")
    return TemperatureSource(log_file=None if not log_file else _resolve(log_file, base),
                             time_col=_column(d.get("time_col"), "time_col", place),
                             temperature_col=_column(d.get("temperature_col"), "temperature_col", place),
                             **values)


def _calorimetry(d: Any, base: Path, place: Place) -> CalorimetrySource | None:
    if d is None:
        return None
    if not isinstance(d, dict):
        raise place.error("", f"must be an object, got {type(d).__name__}")
    _refuse_unknown(d, (*_CALORIMETRY_OTHER_KEYS, *(s.key for s in CALORIMETRY_SPECS)), place)
    if "file" not in d:
        raise place.error("file", "is missing: a calorimetry entry needs its file")
    values = _checked(d, CALORIMETRY_SPECS, place)
    if "window" in d:
        values["window"] = check_fit_window(d["window"], place)
    low, high = values.get("baseline_start_min"), values.get("baseline_end_min")
    if low is not None and high is not None and not low < high:
        raise place.error("baseline_end_min", f"({high:g} min) must be after baseline_start_min ({low:g} min)")
    return CalorimetrySource(file=_resolve(_text(d["file"], "file", place), base),
                             time_col=_column(d.get("time_col"), "time_col", place),
                             heat_flow_col=_column(d.get("heat_flow_col"), "heat_flow_col", place),
                             **values)


def _checked(d: dict, specs: tuple[Spec, ...], place: Place) -> dict[str, Any]:
    """The values of ``d`` described by ``specs`` (absent keys take the dataclass default)."""
    return {s.key: parse_value(s, d[s.key], place) for s in specs if s.key in d}


def _refuse_unknown(d: dict, known, place: Place) -> None:
    unknown = [str(key) for key in d if key not in known]
    if unknown:
        raise place.error(unknown[0][:40], f"is not a known key (known: {', '.join(known)})")


def _text(value: Any, key: str, place: Place, *, optional: bool = False) -> Any:
    if value is None and optional:
        return None
    if not isinstance(value, str) or len(value) > MAX_TEXT_CHARS:
        shown = type(value).__name__ if not isinstance(value, str) else f"{len(value)} characters"
        raise place.error(key, f"must be text of at most {MAX_TEXT_CHARS} characters, got {shown}")
    return value


def _column(value: Any, key: str, place: Place) -> str | int | None:
    """A column named by its header text or its 0-based index."""
    if value is None or (isinstance(value, str) and len(value) <= 1000):
        return value
    if isinstance(value, int) and not isinstance(value, bool) and 0 <= value <= MAX_COLUMN_INDEX:
        return value
    raise place.error(key, f"must be a column name or an index in [0, {MAX_COLUMN_INDEX}], got {value!r:.40}")


def _frame_times(value: Any, place: Place) -> tuple[float, ...] | None:
    if value is None:
        return None
    if not isinstance(value, list) or not 2 <= len(value) <= MAX_FRAME_TIMES:
        raise place.error("times_s", f"must be a list of 2 to {MAX_FRAME_TIMES} frame times in s")
    times = tuple(parse_value(FRAME_TIME_SPEC, t, place) for t in value)
    if any(b <= a for a, b in zip(times, times[1:])):
        raise place.error("times_s", "must increase from frame to frame")
    return times


def _resolve(stored: str, base: Path) -> str:
    candidate = Path(stored)
    return str(candidate if candidate.is_absolute() else (base / candidate).resolve())
