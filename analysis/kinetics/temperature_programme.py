"""The sample temperature during a recording: a stage temperature log or a typed programme.

A ramp or step experiment needs T(t) on the recording clock (frame 0 at 0 s). It comes
either from the stage's own log (any delimited text: a time and a temperature column,
chosen by name or 0-based index, units read from the header) or from the programme the
user typed (start temperature, then segments of "rate to end temperature" or "hold for
a time").

Clock offset: ``clock_offset_s`` is added to the log's times to put them on the recording
clock (a log started 12 s before the camera has offset -12 s).

Sensor lag: the stage sensor sits in the heating block; the film on its glass slide
follows the block with a first-order thermal lag of time constant ``lag_s``,
lag_s · dT_sample/dt = T_block − T_sample. For a constant rate q the sample trails the
block by q · lag_s once the transient has died out. The correction runs that low-pass
exactly for a log that is linear between samples (docs/sources.md, section "Temperature
programmes and non-isothermal growth"). A typed programme describes the block too, so
the same correction applies.

Bad logs raise :class:`analysis.errors.InputError` naming the file and the line: time
not increasing, a gap much longer than the usual sampling interval, NaN or missing
values, or a log that does not cover the recording.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from analysis.errors import InputError
from analysis.textio import check_field_count, excerpt, read_text, split_fields

__all__ = ["TemperatureProgramme", "ProgrammeSegment", "parse_programme", "programme_from_segments",
           "programme_of_source", "LogPreview", "sniff_temperature_log", "format_programme",
           "read_temperature_log", "apply_sensor_lag", "MAX_GAP_FACTOR"]

#: A gap longer than this many median sampling intervals (and longer than 10 s) is refused:
#: the log lost samples and T(t) across the gap would be a guess (common practice).
MAX_GAP_FACTOR = 10.0
_MIN_GAP_S = 10.0
_DELIMITERS = ("\t", ";", ",", " ")
_TIME_FACTORS_S = {"s": 1.0, "sec": 1.0, "second": 1.0, "seconds": 1.0, "ms": 1e-3,
                   "min": 60.0, "minute": 60.0, "minutes": 60.0, "h": 3600.0, "hr": 3600.0}
_UNIT_RE = re.compile(r"(?:\(([^()]*)\)|\[([^\[\]]*)\]|/\s*([^/()\[\]]+)$)\s*$")


@dataclass(frozen=True)
class TemperatureProgramme:
    """Sample temperature on the recording clock, piecewise linear between samples.

    Attributes
    ----------
    time_s : ndarray
        Increasing times, recording clock, s.
    temperature_c : ndarray
        Sample temperature at those times, °C (lag already corrected).
    source : str
        "log" or "typed".
    path : str or None
        The log file, for messages.
    lag_s, clock_offset_s : float
        The corrections applied, s.
    """

    time_s: np.ndarray
    temperature_c: np.ndarray
    source: str = "typed"
    path: str | None = None
    lag_s: float = 0.0
    clock_offset_s: float = 0.0

    def temperature_at(self, time_s) -> np.ndarray:
        """Sample temperature (°C) at recording-clock times (s), linear between samples."""
        return np.interp(np.asarray(time_s, dtype=float), self.time_s, self.temperature_c)

    def require_coverage(self, first_s: float, last_s: float) -> None:
        """InputError unless the programme spans [first_s, last_s] of the recording."""
        if self.time_s[0] > first_s + 1e-9 or self.time_s[-1] < last_s - 1e-9:
            raise InputError(
                f"the temperature {'log' if self.source == 'log' else 'programme'} covers "
                f"{self.time_s[0]:.1f}..{self.time_s[-1]:.1f} s of the recording clock but the frames "
                f"span {first_s:.1f}..{last_s:.1f} s (check the clock offset)", self.path)

    def rate_k_per_min(self, time_s) -> np.ndarray:
        """dT/dt of the sample, K/min (central differences over ±5 log samples, which
        averages the log's rounding and noise)."""
        t = np.asarray(time_s, dtype=float)
        h = 5.0 * max(float(np.median(np.diff(self.time_s))), 1e-3)
        return (self.temperature_at(t + h) - self.temperature_at(t - h)) / (2 * h) * 60.0


# ---------------------------------------------------------------- the lag
def apply_sensor_lag(time_s, block_c, lag_s: float, *, start: str = "steady") -> np.ndarray:
    """Sample temperature (°C) from the block temperature through a first-order lag.

    Exact for a block temperature linear between samples: over a step h with slope s,
    y(t+h) = u(t+h) − τ s + (y(t) − u(t) + τ s) e^(−h/τ). ``start``: "steady" takes the
    steady state of the first slope (y = u − τ s), so a log that begins mid-ramp has no
    artificial transient; "rest" starts at the block temperature (a hold before).
    """
    t, u = np.asarray(time_s, float), np.asarray(block_c, float)
    if lag_s <= 0 or t.size < 2:
        return u.copy()
    h = np.diff(t)
    slope = np.diff(u) / h
    head = min(slope.size, max(3, int(math.ceil(3 * lag_s / float(np.median(h))))))
    y = np.empty_like(u)
    y[0] = u[0] - (lag_s * float(np.median(slope[:head])) if start == "steady" else 0.0)
    decay = np.exp(-h / lag_s)
    for i in range(h.size):  # a short recursion: one step per log sample
        y[i + 1] = u[i + 1] - lag_s * slope[i] + (y[i] - u[i] + lag_s * slope[i]) * decay[i]
    return y


# ---------------------------------------------------------------- typed programme
@dataclass(frozen=True)
class ProgrammeSegment:
    """One segment: a ramp at ``rate_k_per_min`` (magnitude) to ``end_c``, or a hold of ``hold_s``."""

    rate_k_per_min: float | None = None
    end_c: float | None = None
    hold_s: float | None = None

    def describe(self) -> str:
        if self.hold_s is not None:
            return f"hold:{self.hold_s:g}"
        return f"{self.rate_k_per_min:g}:{self.end_c:g}"


def programme_from_segments(start_c: float, segments, *, start_s: float = 0.0, lag_s: float = 0.0,
                            end_s: float | None = None) -> TemperatureProgramme:
    """A typed programme: the block starts at ``start_c`` at ``start_s`` (recording clock).

    The last temperature is held until ``end_s`` (default: one hour after the last segment).
    The sensor lag, when given, turns the block programme into the sample temperature.
    """
    if not math.isfinite(start_c):
        raise InputError(f"start temperature {start_c!r} must be a number")
    times, temps = [float(start_s)], [float(start_c)]
    for seg in segments:
        if seg.hold_s is not None:
            if not (math.isfinite(seg.hold_s) and seg.hold_s > 0):
                raise InputError(f"hold time {seg.hold_s!r} s must be positive")
            times.append(times[-1] + seg.hold_s)
            temps.append(temps[-1])
            continue
        if not (seg.rate_k_per_min and math.isfinite(seg.rate_k_per_min) and seg.rate_k_per_min > 0):
            raise InputError(f"ramp rate {seg.rate_k_per_min!r} K/min must be positive (the direction "
                             "comes from the end temperature)")
        if seg.end_c is None or not math.isfinite(seg.end_c) or seg.end_c == temps[-1]:
            raise InputError(f"ramp end temperature {seg.end_c!r} must differ from {temps[-1]:g} °C")
        times.append(times[-1] + abs(seg.end_c - temps[-1]) / seg.rate_k_per_min * 60.0)
        temps.append(float(seg.end_c))
    last = max(times[-1] + 3600.0, end_s if end_s is not None else -math.inf)
    times.append(last)
    temps.append(temps[-1])
    t, block = _dense(np.array(times), np.array(temps), lag_s)
    return TemperatureProgramme(t, apply_sensor_lag(t, block, lag_s, start="rest"), "typed", None, float(lag_s),
                                float(start_s))


def _dense(times, temps, lag_s):
    """Resample a few corners on a fine grid so that the lagged curve is resolved (0.5 s or lag/10)."""
    if lag_s <= 0:
        return times, temps
    step = min(0.5, lag_s / 10.0)
    n = int(min(2_000_000, math.ceil((times[-1] - times[0]) / step) + 1))
    grid = np.unique(np.concatenate([np.linspace(times[0], times[-1], n), times]))
    return grid, np.interp(grid, times, temps)


def format_programme(start_c: float, segments) -> str:
    """The text :func:`parse_programme` reads back: "START, RATE:END, hold:SECONDS, ..."."""
    return ", ".join([f"{start_c:g}"] + [seg.describe() for seg in segments])


def parse_programme(text: str) -> tuple[float, tuple[ProgrammeSegment, ...]]:
    """Parse "START, RATE:END, hold:SECONDS, ..." (°C, K/min, °C, s).

    Example: "150, 5:120, hold:60, 2:110" starts at 150 °C, cools at 5 K/min to 120 °C,
    holds 60 s, then cools at 2 K/min to 110 °C (and holds there).
    """
    parts = [p.strip() for p in str(text).split(",") if p.strip()]
    if not parts:
        raise InputError("empty temperature programme; expected e.g. '150, 5:120, hold:60'")
    try:
        start = float(parts[0])
    except ValueError:
        raise InputError(f"programme must start with a temperature in °C, got {parts[0]!r}") from None
    segments = []
    for part in parts[1:]:
        head, sep, tail = part.partition(":")
        try:
            if not sep:
                raise ValueError
            if head.strip().lower() == "hold":
                segments.append(ProgrammeSegment(hold_s=float(tail)))
            else:
                segments.append(ProgrammeSegment(rate_k_per_min=float(head), end_c=float(tail)))
        except ValueError:
            raise InputError(f"programme segment {part!r} should be RATE:END (K/min:°C) or "
                             "hold:SECONDS") from None
    return start, tuple(segments)


# ---------------------------------------------------------------- the log
def _split(line: str, delimiter: str, line_no: int | None = None, path=None) -> list[str]:
    return [f.strip().strip('"') for f in split_fields(line, delimiter, line_no=line_no, path=path)]


def _is_number(text: str) -> bool:
    try:
        float(text)
        return True
    except ValueError:
        return text.strip().lower() in ("nan", "")


def _layout(lines: list[tuple[int, str]], path):
    """Delimiter and the index (into ``lines``) of the header row: the last non-numeric row
    before the first run of numeric rows with at least two fields."""
    for delimiter in _DELIMITERS:
        rows = [_split(text, delimiter) for _, text in lines[:200]]
        numeric = [len(r) >= 2 and all(_is_number(f) for f in r) and any(f.strip() for f in r)
                   for r in rows]
        if not any(numeric):
            continue
        first = numeric.index(True)
        width = len(rows[first])
        if first > 0 and len(rows[first - 1]) == width:
            return delimiter, first - 1
        if first == 0:
            return delimiter, None
    raise InputError("no rows of numbers separated by tab, semicolon, comma or spaces: "
                     "is this a temperature log?", path)


def _unit(name: str) -> str | None:
    m = _UNIT_RE.search(name.strip())
    return next((g.strip() for g in m.groups() if g), None) if m else None


def _column(choice, header: list[str], keywords, role: str, path, exclude: int = -1) -> int:
    if choice is not None:
        if isinstance(choice, int) or str(choice).strip().isdigit():
            index = int(choice)
            if not 0 <= index < len(header):
                raise InputError(f"{role} column {index} does not exist (the log has {len(header)})", path)
            return index
        names = [h.casefold() for h in header]
        if str(choice).casefold() in names:
            return names.index(str(choice).casefold())
        raise InputError(f"no {role} column named {choice!r}; columns are {header}", path)
    for keyword in keywords:
        for index, name in enumerate(header):
            bare = re.sub(_UNIT_RE, "", name).strip().casefold()
            if index != exclude and bare.startswith(keyword):
                return index
    raise InputError(f"cannot tell which column holds the {role}; columns are {header} "
                     f"(choose it by name or number)", path)


def _time_factor(unit: str | None, given: str | None, path) -> float:
    key = (given or unit or "s").strip().casefold()
    if key not in _TIME_FACTORS_S:
        raise InputError(f"unknown time unit {key!r} (s, min or h)", path)
    return _TIME_FACTORS_S[key]


def _temperature_offset(unit: str | None, given: str | None, path) -> float:
    key = (given or unit or "c").replace("°", "").replace("deg", "").strip().casefold()
    if key in ("c", "celsius"):
        return 0.0
    if key in ("k", "kelvin"):
        return -273.15
    raise InputError(f"unknown temperature unit {given or unit!r} (°C or K)", path)


def _table(path):
    """(delimiter, header row index or None, data lines, width, column names) of a log."""
    lines = [(no, text) for no, text in enumerate(read_text(path, "temperature log").splitlines(), start=1)
             if text.strip() and not text.lstrip().startswith("#")]
    if not lines:
        raise InputError("temperature log is empty", path)
    delimiter, header_at = _layout(lines, path)
    body = lines[(header_at + 1) if header_at is not None else 0:]
    width = len(_split(body[0][1], delimiter))
    header = (_split(lines[header_at][1], delimiter) if header_at is not None
              else [f"column {i}" for i in range(width)])
    return delimiter, header_at, body, width, header


@dataclass(frozen=True)
class LogPreview:
    """The first rows of a temperature log as :func:`read_temperature_log` splits them, for
    a column-mapping form: column names (``"column i"`` without a header row), rows of
    text, the delimiter, and the guessed time / temperature columns (None: no guess) with
    the units their names carry (None: none given)."""

    path: str
    columns: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    delimiter: str
    has_header: bool
    time_col: int | None
    temperature_col: int | None
    time_unit: str | None
    temperature_unit: str | None
    n_rows: int


def sniff_temperature_log(path, *, max_rows: int = 10) -> LogPreview:
    """Layout and guessed columns of a log (InputError for a file that holds no table)."""
    path = Path(path)
    delimiter, header_at, body, width, header = _table(path)

    def guess(keywords, role, exclude=-1):
        try:
            return _column(None, header, keywords, role, path, exclude=exclude)
        except InputError:
            return None

    if header_at is None:
        t_index, c_index = 0, (1 if width > 1 else None)
    else:
        t_index = guess(("time", "t"), "time")
        c_index = guess(("temp", "sample", "stage", "block", "t"), "temperature",
                        -1 if t_index is None else t_index)
    rows = tuple(tuple(_split(text, delimiter)) for _, text in body[:max_rows])
    return LogPreview(str(path), tuple(header), rows, delimiter, header_at is not None, t_index, c_index,
                      _unit(header[t_index]) if t_index is not None else None,
                      _unit(header[c_index]) if c_index is not None else None, len(body))


def read_temperature_log(path, *, time_col=None, temperature_col=None, time_unit: str | None = None,
                         temperature_unit: str | None = None, clock_offset_s: float = 0.0,
                         lag_s: float = 0.0) -> TemperatureProgramme:
    """Read a stage temperature log into the sample temperature on the recording clock.

    Parameters
    ----------
    path : path-like
        Delimited text; lines starting with '#' are comments; metadata may precede the header.
    time_col, temperature_col : int or str, optional
        0-based index or header name; guessed from names starting with "time"/"t" and
        "temp"/"T" when omitted (time first, temperature second without a header).
    time_unit, temperature_unit : str, optional
        Override the units read from the header ("Time (min)", "Temp [K]"); default s and °C.
    clock_offset_s : float
        Added to the log times to put them on the recording clock, s.
    lag_s : float
        Sensor-to-sample lag time constant, s (0: none).
    """
    path = Path(path)
    if not (math.isfinite(clock_offset_s) and math.isfinite(lag_s) and lag_s >= 0):
        raise InputError("clock offset must be finite and the sensor lag non-negative", path)
    delimiter, header_at, body, width, header = _table(path)
    if header_at is None and time_col is None and temperature_col is None:
        time_col, temperature_col = 0, 1
    t_index = _column(time_col, header, ("time", "t"), "time", path)
    c_index = _column(temperature_col, header, ("temp", "sample", "stage", "block", "t"),
                      "temperature", path, exclude=t_index)
    times, temps = _values(body, delimiter, width, t_index, c_index, path)
    times = times * _time_factor(_unit(header[t_index]), time_unit, path) + clock_offset_s
    temps = temps + _temperature_offset(_unit(header[c_index]), temperature_unit, path)
    _check_times(times, [no for no, _ in body], path)
    return TemperatureProgramme(times, apply_sensor_lag(times, temps, lag_s), "log", str(path),
                                float(lag_s), float(clock_offset_s))


def _values(body, delimiter, width, t_index, c_index, path):
    times, temps = np.empty(len(body)), np.empty(len(body))
    for k, (line_no, text) in enumerate(body):
        fields = _split(text, delimiter, line_no, path)
        check_field_count(fields, width, line_no=line_no, line=text, path=path, delimiter=delimiter)
        for role, index, out in (("time", t_index, times), ("temperature", c_index, temps)):
            try:
                value = float(fields[index])
            except ValueError:
                raise InputError(f"line {line_no}: {role} {excerpt(fields[index])} is not a number",
                                 path) from None
            if not math.isfinite(value):
                raise InputError(f"line {line_no}: {role} is NaN or infinite", path)
            out[k] = value
    if len(body) < 2:
        raise InputError("temperature log holds fewer than 2 samples", path)
    return times, temps


def _check_times(times: np.ndarray, line_numbers: list[int], path) -> None:
    steps = np.diff(times)
    bad = np.flatnonzero(steps <= 0)
    if bad.size:
        i = int(bad[0]) + 1
        raise InputError(f"line {line_numbers[i]}: time {times[i]:g} s does not increase "
                         f"(previous {times[i - 1]:g} s)", path)
    limit = max(MAX_GAP_FACTOR * float(np.median(steps)), _MIN_GAP_S)
    gaps = np.flatnonzero(steps > limit)
    if gaps.size:
        i = int(gaps[0]) + 1
        raise InputError(f"line {line_numbers[i]}: a gap of {steps[i - 1]:.1f} s in the log "
                         f"(usual sampling {np.median(steps):.2f} s)", path)


def programme_of_source(source) -> TemperatureProgramme:
    """The programme a project's ``TemperatureSource`` describes: its log (columns, units,
    clock offset and lag as stored) or its typed programme."""
    if source.log_file:
        return read_temperature_log(source.log_file, time_col=source.time_col,
                                    temperature_col=source.temperature_col, time_unit=source.time_unit,
                                    temperature_unit=source.temperature_unit,
                                    clock_offset_s=source.clock_offset_s, lag_s=source.lag_s)
    if source.programme:
        start, segments = parse_programme(source.programme)
        return programme_from_segments(start, segments, start_s=source.clock_offset_s, lag_s=source.lag_s)
    raise InputError("a ramp experiment needs a temperature log or a typed programme")
