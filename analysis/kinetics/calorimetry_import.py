"""Reading isothermal calorimetry exports: any delimited text, sniffed.

Handles comma / semicolon / tab / whitespace delimiters, decimal point or comma,
metadata lines before the column row, units in the column names ("Time (min)",
"Heat flow [W/g]"), columns chosen by name or 0-based index, time in s or min and heat
flow in mW or W/g. Malformed files raise :class:`analysis.errors.InputError` with one
line naming the file and the problem. The analysis of an isotherm lives in
:mod:`analysis.kinetics.calorimetry`, which re-exports the public names here.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass

import numpy as np

from analysis.errors import InputError
from analysis.textio import excerpt, read_text, split_fields

_DIALECTS = (("\t", "."), ("\t", ","), (";", "."), (";", ","), (",", "."), (" ", "."), (" ", ","))
_TIME_FACTORS = {"s": 1 / 60, "sec": 1 / 60, "second": 1 / 60, "seconds": 1 / 60,
                 "min": 1.0, "minute": 1.0, "minutes": 1.0, "h": 60.0, "hr": 60.0}
_FLOW_FACTORS = {"mw": ("mW", 1.0), "w": ("mW", 1e3), "uw": ("mW", 1e-3), "µw": ("mW", 1e-3),
                 "w/g": ("W/g", 1.0), "mw/mg": ("W/g", 1.0), "mw/g": ("W/g", 1e-3)}
_UNIT_RE = re.compile(r"(?:\(([^()]*)\)|\[([^\[\]]*)\]|/\s*([^/()\[\]]+)$|\bin\s+(\S+)$)\s*$")
MIN_ROWS = 20


# ---------------------------------------------------------------- reading
@dataclass(frozen=True)
class CalorimetryPreview:
    path: str
    delimiter: str
    decimal: str
    header_line: int | None
    columns: tuple[str, ...]
    metadata: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    data_line: int
    n_rows: int
    time_col: int | None
    heat_flow_col: int | None
    time_unit: str | None
    heat_flow_unit: str | None
    mass_mg: float | None
    sample_name: str | None = None  # from a "Sample" line above the data
    temperature_c: float | None = None  # from an "isothermal temperature" line above the data


@dataclass(frozen=True)
class Isotherm:
    path: str
    time_min: np.ndarray
    heat_flow: np.ndarray
    heat_flow_unit: str
    time_column: str
    heat_flow_column: str
    mass_mg: float | None = None
    warnings: tuple[str, ...] = ()


def _split(line: str, delimiter: str, line_no: int | None = None, path=None) -> list[str]:
    return split_fields(line, delimiter, line_no=line_no, path=path)


def _number(text: str, decimal: str) -> float | None:
    s = text.strip().strip('"').strip()
    if decimal == ",":
        if "." in s:
            return None
        s = s.replace(",", ".")
    try:
        return float(s)
    except ValueError:
        return None


def _numeric_row(fields: list[str], decimal: str) -> list[float] | None:
    """Values of a data row (empty fields -> NaN), or None if it is not a data row."""
    values = [math.nan if not f.strip() else _number(f, decimal) for f in fields]
    if len(values) < 2 or any(v is None for v in values):
        return None
    if sum(1 for f in fields if f.strip()) < 2:
        return None
    return values


def _runs(lines: list[str], delimiter: str, decimal: str, path=None):
    """Runs of consecutive data rows with equal field count: list of (start, stop, width)."""
    runs, start, width = [], None, None
    for i, line in enumerate([*lines, ""]):
        row = _numeric_row(_split(line, delimiter, i + 1, path), decimal) if line.strip() else None
        w = None if row is None else len(row)
        if start is not None and w != width:
            runs.append((start, i, width))
            start = None
        if w is not None and start is None:
            start, width = i, w
    return runs


def _read_lines(path) -> list[str]:
    """Lines of the export: a regular file within the text size limit, encoding detected."""
    return read_text(path, "calorimetry file").lstrip("\ufeff").splitlines()


def _best_dialect(lines: list[str], path):
    best = None
    for delimiter, decimal in _DIALECTS:
        runs = _runs(lines, delimiter, decimal, path)
        if runs:
            main = max(runs, key=lambda r: r[1] - r[0])
            score = main[1] - main[0]
            if best is None or score > best[0]:
                best = (score, delimiter, decimal, main, runs)
    if best is None:
        raise InputError("no numeric data rows found (need at least two numeric columns)", path)
    return best[1:]


def _check_rows_after_data(lines, stop: int, width: int, delimiter: str, decimal: str, path):
    """A numeric row after the data block is a row with the wrong field count: an error.

    Ignoring it would drop data silently; reading it by position would shift columns (a
    decimal comma in a comma-separated export splits one value into two fields).
    """
    for i in range(stop, len(lines)):
        if not lines[i].strip():
            continue
        fields = _split(lines[i], delimiter, i + 1, path)
        if _numeric_row(fields, decimal) is None:
            continue
        problem = (f"has {len(fields)} fields but the data rows have {width}" if len(fields) != width
                   else "continues the data after an interruption")
        raise InputError(f"line {i + 1} {problem}: {excerpt(lines[i].strip())}", path)


def _unit_of(name: str) -> str | None:
    match = _UNIT_RE.search(name.strip())
    if not match:
        return None
    return next(g for g in match.groups() if g is not None).strip()


def _bare_name(name: str) -> str:
    return _UNIT_RE.sub("", name.strip()).strip().casefold()


def _guess_columns(columns: list[str]) -> tuple[int | None, int | None]:
    bare = [_bare_name(c) for c in columns]
    time_col = next((i for i, b in enumerate(bare) if b in ("time", "t") or "time" in b), None)
    flow_col = next((i for i, b in enumerate(bare) if i != time_col and (
        "heat" in b or "flow" in b or b in ("hf", "dsc", "q"))), None)
    if len(columns) == 2 and flow_col is None:
        time_col = 0 if time_col is None else time_col
        flow_col = 1 - time_col
    return time_col, flow_col


def _mass_from_metadata(metadata: list[str]) -> float | None:
    for line in metadata:
        if "mass" in line.casefold() or "weight" in line.casefold():
            match = re.search(r"(-?\d+(?:[.,]\d+)?)\s*(mg|g)?\s*[\"']?\s*$", line.strip())
            if match:
                value = float(match.group(1).replace(",", "."))
                unit = match.group(2) or ("mg" if "mg" in line else None)
                if unit == "mg":
                    return value
                if unit == "g":
                    return value * 1e3
    return None


def _header_value(metadata: list[str], accept) -> str | None:
    """The value of the first ``label<delimiter>value`` line above the data whose label
    (case-folded, unit in brackets removed) ``accept`` takes; quotes stripped."""
    for line in metadata:
        parts = re.split(r"[;\t,:=]", line.strip(), maxsplit=1)
        if len(parts) != 2:
            continue
        label = re.sub(r"[(\[].*?[)\]]", "", parts[0]).strip().strip('"').casefold()
        value = parts[1].strip().strip('"').strip("'").strip()
        if value and accept(label):
            return value
    return None


def _temperature_from_metadata(metadata: list[str]) -> float | None:
    """The isothermal (or set) temperature of a header line in °C, if one is given."""
    text = _header_value(metadata, lambda label: label in (
        "isothermal temperature", "isotherm temperature", "set temperature",
        "crystallization temperature", "crystallisation temperature", "tc"))
    if text is None:
        return None
    match = re.match(r"^\s*(-?\d+(?:[.,]\d+)?)", text)
    return float(match.group(1).replace(",", ".")) if match else None


@dataclass(frozen=True)
class HeaderCheck:
    """How a file's header compares with the experiment it is imported into.

    ``conflicts`` contradict the experiment (ask before importing); ``notes`` are worth a
    look but common between instruments and notebooks (shown, not asked about).
    """

    conflicts: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()


def _temperature_in_name(name: str) -> float | None:
    """A temperature written in a sample name ("Tc 127 C", "127°C"), °C."""
    match = re.search(r"(-?\d+(?:[.,]\d+)?)\s*°?\s*C\b", name)
    return float(match.group(1).replace(",", ".")) if match else None


def check_header(preview: CalorimetryPreview, *, temperature_c: float | None,
                 experiment_name: str, mass_mg: float | None) -> HeaderCheck:
    """Compare the file's header with the experiment, where both sides are known.

    Conflicts: the isothermal temperature of a header line, or one written in the sample
    name, more than 0.5 °C from the experiment's Tc; a sample mass more than 1 % from the
    one stored for the experiment. Note: a sample name with no word of three or more
    letters in common with the experiment's name. Tolerances: common practice for a
    calibrated DSC and balance.
    """
    conflicts, notes = [], []
    file_tc = preview.temperature_c
    if file_tc is None and preview.sample_name:
        file_tc = _temperature_in_name(preview.sample_name)
    if file_tc is not None and temperature_c is not None and abs(file_tc - temperature_c) > 0.5:
        conflicts.append(f"the file is an isotherm at {file_tc:g} °C, the experiment's Tc is "
                         f"{temperature_c:g} °C")
    if preview.mass_mg and mass_mg and abs(preview.mass_mg - mass_mg) > 0.01 * mass_mg:
        conflicts.append(f"the file gives a sample mass of {preview.mass_mg:g} mg, the experiment "
                         f"has {mass_mg:g} mg")
    if preview.sample_name and experiment_name:
        words = lambda text: {w.casefold() for w in re.findall(r"[^\W\d_]{3,}", text)}
        if not words(preview.sample_name) & words(experiment_name):
            notes.append(f"the file's sample is “{preview.sample_name}”, the experiment is "
                         f"“{experiment_name}”")
    return HeaderCheck(tuple(conflicts), tuple(notes))


def sniff_calorimetry_file(path, *, max_rows: int = 8) -> CalorimetryPreview:
    """Detect the dialect, column row and columns of a delimited export (for a mapping dialog)."""
    lines = _read_lines(path)
    delimiter, decimal, (start, stop, width), runs = _best_dialect(lines, path)
    for other in runs:
        if other[0] != start and other[2] == width and other[1] - other[0] >= 5:
            cut = stop if other[0] > start else other[1]
            raise InputError(f"numeric data interrupted at line {cut + 1}: "
                             f"{excerpt(lines[cut].strip())}", path)
    _check_rows_after_data(lines, stop, width, delimiter, decimal, path)
    header = None
    for i in range(start - 1, -1, -1):
        if lines[i].strip():
            fields = [f.strip().strip('"') for f in _split(lines[i], delimiter)]
            if len(fields) == width:
                header = i
            elif _numeric_row(fields, decimal) is not None:
                raise InputError(f"line {i + 1} has {len(fields)} fields but the data rows have "
                                 f"{width}: {excerpt(lines[i].strip())}", path)
            break
    columns = ([f.strip().strip('"') for f in _split(lines[header], delimiter)]
               if header is not None else [f"column {j + 1}" for j in range(width)])
    metadata = [ln for ln in lines[: header if header is not None else start] if ln.strip()]
    time_col, flow_col = _guess_columns(columns)
    rows = tuple(tuple(f.strip() for f in _split(ln, delimiter)) for ln in lines[start:stop][:max_rows])
    return CalorimetryPreview(
        path=os.fspath(path), delimiter=delimiter, decimal=decimal, header_line=header,
        columns=tuple(columns), metadata=tuple(metadata), rows=rows, data_line=start,
        n_rows=stop - start,
        time_col=time_col, heat_flow_col=flow_col,
        time_unit=None if time_col is None else _time_unit(_unit_of(columns[time_col])),
        heat_flow_unit=None if flow_col is None else _flow_unit(_unit_of(columns[flow_col]))[0],
        mass_mg=_mass_from_metadata(metadata),
        sample_name=_header_value(metadata, lambda label: label in ("sample", "sample name",
                                                                    "sample id")),
        temperature_c=_temperature_from_metadata(metadata))


def _time_unit(unit: str | None) -> str | None:
    if unit is None:
        return None
    key = unit.casefold()
    return key if key in _TIME_FACTORS else None


def _flow_unit(unit: str | None) -> tuple[str | None, float]:
    if unit is None:
        return None, 1.0
    return _FLOW_FACTORS.get(unit.casefold().replace(" ", ""), (None, 1.0))


def _resolve_column(choice, columns: tuple[str, ...], role: str, path) -> int:
    if choice is None:
        raise InputError(f"no {role} column recognised among {list(columns)}; choose it by "
                         "name or 0-based index", path)
    if isinstance(choice, (int, np.integer)) or str(choice).strip().isdigit():
        index = int(choice)
        if not 0 <= index < len(columns):
            raise InputError(f"{role} column index {index} out of range (file has "
                             f"{len(columns)} columns: {list(columns)})", path)
        return index
    wanted = str(choice).strip().casefold()
    for i, name in enumerate(columns):
        if wanted in (name.casefold(), _bare_name(name)):
            return i
    raise InputError(f"{role} column {choice!r} not found; columns are {list(columns)}", path)


def _column_values(path, lines, preview, index: int, role: str) -> np.ndarray:
    block = lines[preview.data_line: preview.data_line + preview.n_rows]
    data = np.asarray([_numeric_row(_split(ln, preview.delimiter), preview.decimal)[index]
                       for ln in block], dtype=float)
    bad = ~np.isfinite(data)
    if bad.any():
        first = int(np.argmax(bad))
        raise InputError(f"{role} column {preview.columns[index]!r} has {int(bad.sum())} "
                         f"missing/NaN values (first at data row {first + 1})", path)
    return data


def read_isotherm(path, *, time_col=None, heat_flow_col=None, time_unit: str | None = None,
                  heat_flow_unit: str | None = None) -> Isotherm:
    """Read time (converted to min) and heat flow ("mW" or "W/g") from a delimited export."""
    preview = sniff_calorimetry_file(path)
    lines = _read_lines(path)
    t_idx = _resolve_column(time_col if time_col is not None else preview.time_col,
                            preview.columns, "time", path)
    q_idx = _resolve_column(heat_flow_col if heat_flow_col is not None else preview.heat_flow_col,
                            preview.columns, "heat-flow", path)
    if t_idx == q_idx:
        raise InputError(f"time and heat-flow columns are the same ({preview.columns[t_idx]!r})", path)
    warnings = []
    t_unit = time_unit or _time_unit(_unit_of(preview.columns[t_idx]))
    if t_unit is None:
        t_unit = "min"
        warnings.append("time unit not stated in the file; assumed min")
    if t_unit not in _TIME_FACTORS:
        raise InputError(f"time unit {t_unit!r} not supported (use s or min)", path)
    q_unit, q_factor = _flow_unit(heat_flow_unit or _unit_of(preview.columns[q_idx]))
    if q_unit is None:
        if heat_flow_unit:
            raise InputError(f"heat-flow unit {heat_flow_unit!r} not supported (use mW or W/g)", path)
        q_unit = "mW"
        warnings.append("heat-flow unit not stated in the file; assumed mW")
    time_min = _column_values(path, lines, preview, t_idx, "time") * _TIME_FACTORS[t_unit]
    heat = _column_values(path, lines, preview, q_idx, "heat-flow") * q_factor
    if time_min.size < MIN_ROWS:
        raise InputError(f"only {time_min.size} data rows; need at least {MIN_ROWS}", path)
    steps = np.diff(time_min)
    if np.any(steps <= 0):
        row = int(np.argmax(steps <= 0)) + 2
        raise InputError(f"time is not strictly increasing (data row {row})", path)
    return Isotherm(os.fspath(path), time_min, heat, q_unit, preview.columns[t_idx],
                    preview.columns[q_idx], preview.mass_mg, tuple(warnings))
