"""Every value a user can set, described once: label, unit, default, valid range and help.

The typed settings objects (:class:`ArrivalSettings`, :class:`AnalysisSettings`) carry
their descriptions in their dataclass fields; the other values of a project (experiment
calibration, calorimetry source, Tc-series constants) are described by the
:class:`Spec` tables below. The project loader, the ``analyze`` command-line flags and
the application's settings form are all generated from these descriptions, so a range
or a default changes in exactly one place.

Parsing is strict (:func:`parse_value`): a value of the wrong type (``"x"``, ``36.5``
for an integer, ``true`` for a number), a non-finite number, a number outside its
physical range or an unknown key is an :class:`~analysis.errors.InputError` whose one
line names the file, the experiment and the key. Nothing is silently dropped.

Ranges are wide enough for any real hot-stage or DSC experiment and narrow enough to
stop values that would exhaust the machine later (10⁹ angular sectors) or make no
physical sense (a pixel of 1e300 µm); they are ``# common practice`` bounds, not
published limits.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping

from analysis.errors import InputError
from analysis.results import NUCLEATION_MODES  # the modes a user may force instead of the detected one

__all__ = [
    "Spec", "Place", "ArrivalSettings", "AnalysisSettings", "parse_value", "specs_of",
    "settings_from_dict", "EXPERIMENT_SPECS", "CALORIMETRY_SPECS", "SERIES_SPECS",
    "TEMPERATURE_SOURCE_SPECS", "EXPERIMENT_KINDS",
    "GEOMETRIES", "DEFAULT_GEOMETRY", "NUCLEATION_MODES", "CHANNEL_MODES", "REGISTRATION_MODES",
    "EXOTHERM_DIRECTIONS", "DEFAULT_FIT_WINDOW", "DEFAULT_U_STAR_J_PER_MOL", "T_INF_BELOW_TG_K",
    "t_inf_default_c", "check_fit_window", "check_hoffman_weeks_pairs", "check_series_order",
]

#: Geometry of the predicted Avrami kinetics. The default is the bulk (3-D) prediction:
#: it is what an isothermal DSC sample shows, and summary.json compares it with DSC.
EXPERIMENT_KINDS = ("isothermal", "ramp")
GEOMETRIES = ("film-2d", "bulk-3d")
DEFAULT_GEOMETRY = "bulk-3d"
CHANNEL_MODES = ("auto", "grey", "colour")
REGISTRATION_MODES = ("auto", "on", "off")
EXOTHERM_DIRECTIONS = ("auto", "up", "down")
#: Conversion window of an Avrami fit, fractions of the final conversion: the early,
#: impingement-light part of the isotherm (Lorenzo, Arnal, Albuquerque & Müller 2007,
#: Polymer Testing 26, 222 — from memory; docs/sources.md §4.2).
DEFAULT_FIT_WINDOW = (0.03, 0.20)
#: Transport activation energy of the "universal" constant set: 1500 cal/mol, usually
#: quoted as 6270 J/mol, used with T∞ = Tg − 30 K (Suzuki & Kovacs 1970; Hoffman, Davis &
#: Lauritzen 1976 — from memory; docs/sources.md §2.2).
DEFAULT_U_STAR_J_PER_MOL = 6270.0
T_INF_BELOW_TG_K = 30.0


def t_inf_default_c(tg_c: float) -> float:
    """T∞ (°C) when the user gives none: Tg − 30 K (docs/sources.md §2.2)."""
    return tg_c - T_INF_BELOW_TG_K


@dataclass(frozen=True)
class Place:
    """Where a value comes from, for error messages: file, experiment, section."""

    path: str | None = None
    experiment: str | None = None
    section: str = ""

    def key(self, key: str) -> str:
        return f"{self.section}.{key}" if self.section and key else (key or self.section)

    def error(self, key: str, problem: str) -> InputError:
        who = f"experiment {self.experiment!r}: " if self.experiment is not None else ""
        return InputError(f"{who}{self.key(key)} {problem}", self.path)

    def within(self, section: str) -> "Place":
        return dataclasses.replace(self, section=self.key(section))


@dataclass(frozen=True)
class Spec:
    """The description of one settable value.

    ``low``/``high`` are inclusive bounds unless ``low_open`` (then ``low`` itself is
    refused); ``choices`` lists the allowed strings; ``optional`` allows ``None`` ("not
    set", meaning the automatic value). ``flag`` is the command-line flag (without
    ``--``), ``aliases`` older flag names kept working.
    """

    key: str
    label: str
    kind: type
    default: Any
    unit: str = ""
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    choices: tuple[str, ...] = ()
    optional: bool = False
    help: str = ""
    flag: str = ""
    aliases: tuple[str, ...] = ()

    def range_text(self) -> str:
        """The allowed values in words, e.g. "a number in (0, 20] frame intervals"."""
        if self.choices:
            text = "one of " + ", ".join(self.choices)
        elif self.kind is bool:
            text = "true or false"
        else:
            noun = "an integer" if self.kind is int else "a number"
            left = "(" if self.low_open else "["
            low = "-inf" if self.low is None else f"{self.low:g}"
            high = "inf" if self.high is None else f"{self.high:g}"
            text = f"{noun} in {left}{low}, {high}]" + (f" {self.unit}" if self.unit else "")
        return text + (" or null" if self.optional else "")


def parse_value(spec: Spec, value: Any, place: Place) -> Any:
    """``value`` checked against ``spec`` (integral floats become int); InputError otherwise."""
    if value is None:
        if spec.optional:
            return None
        raise place.error(spec.key, f"must be {spec.range_text()}, got null")
    bad = place.error(spec.key, f"must be {spec.range_text()}, got {_shown(value)}")
    if spec.kind is bool:
        if not isinstance(value, bool):
            raise bad
        return value
    if spec.kind is str:
        if not isinstance(value, str) or (spec.choices and value not in spec.choices):
            raise bad
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise bad
    if spec.kind is int:
        if isinstance(value, float) and not (math.isfinite(value) and value.is_integer()):
            raise bad
        number: float = int(value)
    else:
        number = float(value)
        if not math.isfinite(number):
            raise bad
    if not _in_range(spec, number):
        raise bad
    return number


def _in_range(spec: Spec, number: float) -> bool:
    if spec.low is not None and (number < spec.low or (spec.low_open and number == spec.low)):
        return False
    return spec.high is None or number <= spec.high


def _shown(value: Any) -> str:
    """A bounded rendering of a bad value (a 3-million-character string stays one short line)."""
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def setting(default: Any, *, label: str, help: str, unit: str = "", kind: type | None = None,
            low: float | None = None, high: float | None = None, low_open: bool = False,
            choices: tuple[str, ...] = (), optional: bool = False, flag: str = "",
            aliases: tuple[str, ...] = ()) -> Any:
    """A dataclass field carrying its :class:`Spec` (the key is filled in by :func:`specs_of`)."""
    spec = Spec("", label, kind or type(default), default, unit, low, high, low_open, choices,
                optional, help, flag, aliases)
    return field(default=default, metadata={"spec": spec})


def specs_of(cls) -> tuple[Spec, ...]:
    """The specs of a settings dataclass's described fields, in declaration order."""
    out = []
    for f in dataclasses.fields(cls):
        spec = f.metadata.get("spec")
        if spec is not None:
            out.append(dataclasses.replace(spec, key=f.name, flag=spec.flag or f.name.replace("_", "-")))
    return tuple(out)


def _check_fields(obj, place: Place) -> None:
    for spec in specs_of(type(obj)):
        parse_value(spec, getattr(obj, spec.key), place)


def settings_from_dict(cls, data: Any, place: Place, nested: Mapping[str, Callable] | None = None):
    """Strictly build ``cls`` from a stored mapping: unknown keys and bad values raise."""
    if data is None:
        return cls()
    if not isinstance(data, dict):
        raise InputError(f"{place.section or 'settings'} must be an object, got {_shown(data)}", place.path)
    nested = dict(nested or {})
    specs = {s.key: s for s in specs_of(cls)}
    values = {}
    for key, value in data.items():
        if key in nested:
            values[key] = nested[key](value, place.within(key))
        elif key in specs:
            values[key] = parse_value(specs[key], value, place)
        else:
            raise place.error(str(key)[:40], f"is not a known setting (known: {', '.join([*nested, *specs])})")
    try:
        return cls(**values)
    except InputError as exc:  # a rule between two values: say where, as for one value
        who = f"experiment {place.experiment!r}: " if place.experiment is not None else ""
        raise InputError(f"{who}{exc.problem}", place.path) from None


@dataclass(frozen=True)
class ArrivalSettings:
    """Settings of the streaming arrival-time pass (``analysis.arrival.arrival_map``)."""

    sensitivity: float = setting(
        1.0, label="Evidence sensitivity", unit="×", low=0.05, high=20.0, flag="arrival-sensitivity",
        help="Scales the automatic detection threshold down (>1 finds fainter crystals and more "
             "false alarms) or up (<1).")
    min_size_px: int = setting(
        12, label="Smallest crystalline patch", unit="px", low=1, high=100_000,
        help="Crystalline patches smaller than this in the final map are noise and removed.")
    start_frame: int = setting(
        0, label="First frame analysed", unit="frame", low=0, high=1_000_000,
        help="Earlier frames (sample still settling at Tc, focus being adjusted) are skipped.")
    reference_frames: int = setting(
        3, label="Melt reference frames", unit="frames", low=1, high=100,
        help="Frames averaged (where still melt) into the melt reference.")
    channel: str = setting(
        "auto", label="Colour channels", choices=CHANNEL_MODES,
        help="'colour' for recordings with a retardation plate, 'grey' otherwise; 'auto' decides.")
    registration: str = setting(
        "auto", label="Drift correction", choices=REGISTRATION_MODES,
        help="Follow and undo specimen drift: 'auto' only when drift is measured.")
    register_every_frames: int = setting(
        4, label="Register every", unit="frames", low=1, high=1000,
        help="Once drift is measured, register every n-th frame and follow the drift in between.")
    persistence_frames: int = setting(
        2, label="Persistence", unit="frames", low=1, high=50,
        help="Consecutive frames the evidence must stay up before a pixel counts as crystalline.")
    hysteresis: float = setting(
        0.6, label="Hysteresis", unit="× threshold", low=0.0, low_open=True, high=1.0,
        help="Fraction of the threshold the evidence must keep during the persistence frames.")
    track_frames: int = setting(
        12, label="Tracked frames", unit="frames", low=3, high=200,
        help="Frames of evidence kept after detection to find the plateau and the half-way time; "
             "must exceed the persistence.")
    smoothing_px: float = setting(
        1.0, label="Evidence smoothing", unit="px", low=0.0, low_open=True, high=10.0,
        help="Gaussian sigma applied to the difference from the melt.")
    fill_wedges: bool = setting(
        True, label="Fill extinction wedges",
        help="Give pixels without evidence (extinction wedges, dark bands) the arrival the "
             "growth geometry implies.")

    def __post_init__(self):
        place = Place(section="arrival")
        _check_fields(self, place)
        if self.track_frames <= self.persistence_frames:
            raise place.error("track_frames", f"must exceed persistence_frames ({self.persistence_frames})")

    def to_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: Any, *, path: str | None = None) -> "ArrivalSettings":
        """Strictly from a stored dict: unknown keys and bad values raise InputError."""
        return settings_from_dict(cls, data, Place(path=path, section="arrival"))


def _arrival_from(value: Any, place: Place) -> ArrivalSettings:
    if isinstance(value, ArrivalSettings):
        return value
    return settings_from_dict(ArrivalSettings, value, place)


@dataclass(frozen=True)
class AnalysisSettings:
    """Settings of one experiment's analysis: the arrival pass plus nuclei, fits and tests."""

    arrival: ArrivalSettings = field(default_factory=ArrivalSettings)
    sensitivity_frames: float = setting(
        0.5, label="Nucleus depth", unit="frame intervals", low=0.05, high=20.0,
        aliases=("sensitivity",),
        help="Minimum depth of an arrival-map minimum below its saddle for it to count as a "
             "nucleus. Lower finds later and closer nuclei but risks splits.")
    min_territory_px: int = setting(
        20, label="Smallest territory", unit="px", low=1, high=1_000_000,
        help="Territories smaller than this are not kept as spherulites.")
    smooth_px: float = setting(
        1.0, label="Map smoothing", unit="px", low=0.0, high=20.0,
        help="Gaussian smoothing of the arrival map before nuclei are detected.")
    boundary_band_px: int = setting(
        2, label="Boundary band", unit="px", low=0, high=50,
        help="Pixels this close to another territory are left out of the cone fit.")
    apex_exclusion_px: float = setting(
        6.0, label="Apex exclusion", unit="px", low=0.0, high=200.0,
        help="Pixels this close to the fitted centre are left out of a second fit (0 = none).")
    max_fit_pixels: int = setting(
        4000, label="Pixels per fit", unit="px", low=50, high=1_000_000,
        help="Territories with more usable pixels are subsampled evenly for the cone fit.")
    n_sectors: int = setting(
        36, label="Radius sectors", unit="sectors", low=8, high=720,
        help="Angular sectors in which radii are measured along free directions.")
    min_free_fraction: float = setting(
        0.25, label="Free directions needed", unit="fraction", low=0.0, high=1.0,
        help="A radius enters the linearity test when at least this fraction of directions is free.")
    min_points: int = setting(
        4, label="Fewest growth points", unit="frames", low=2, high=10_000,
        help="Fewer frames of free growth than this gives the status 'few-points'.")
    nonlinear_alpha: float = setting(
        0.01, label="Non-linearity significance", unit="", low=0.0, low_open=True, high=0.5,
        help="Significance level of the test for non-linear growth.")
    nonlinear_min_change: float = setting(
        0.20, label="Non-linearity minimum change", unit="fraction", low=0.0, high=10.0,
        help="Smallest relative change of slope the non-linear growth test reports.")
    edit_tolerance_px: float = setting(
        15.0, label="Edit reach", unit="px", low=0.0, low_open=True, high=1000.0,
        help="How far from a detection's centre a correction may point and still find it.")

    def __post_init__(self):
        if isinstance(self.arrival, dict):  # programmatic use: AnalysisSettings(arrival={...})
            object.__setattr__(self, "arrival", ArrivalSettings.from_dict(self.arrival))
        if not isinstance(self.arrival, ArrivalSettings):
            raise InputError(f"arrival must be an object, got {_shown(self.arrival)}")
        _check_fields(self, Place())

    def to_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)

    @classmethod
    def from_dict(cls, data: Any, *, path: str | None = None, experiment: str | None = None,
                  section: str = "") -> "AnalysisSettings":
        """Strictly from a stored dict: unknown keys and bad values raise InputError."""
        return settings_from_dict(cls, data, Place(path, experiment, section), {"arrival": _arrival_from})

    def changed(self, key: str, value: Any) -> "AnalysisSettings":
        """A copy with one setting changed; ``key`` is ``name`` or ``arrival.name``."""
        if key.startswith("arrival."):
            arrival = dataclasses.replace(self.arrival, **{key.split(".", 1)[1]: value})
            return dataclasses.replace(self, arrival=arrival)
        return dataclasses.replace(self, **{key: value})


# ---------------------------------------------------------------- other project values

def _spec(key: str, label: str, kind: type, default: Any, unit: str = "", *, help: str,
          low: float | None = None, high: float | None = None, low_open: bool = False,
          choices: tuple[str, ...] = (), optional: bool = False) -> Spec:
    return Spec(key, label, kind, default, unit, low, high, low_open, choices, optional, help,
                key.replace("_", "-"))


#: An experiment's own values (besides its settings, edits and calorimetry).
EXPERIMENT_SPECS: tuple[Spec, ...] = (
    _spec("temperature_c", "Crystallization temperature", float, None, "°C", low=-150.0, high=450.0,
          optional=True, help="The isothermal crystallization temperature Tc."),
    _spec("um_per_px", "Pixel size", float, None, "µm/px", low=1e-4, low_open=True, high=1000.0,
          optional=True, help="Overrides the calibration stored in the stack."),
    _spec("interval_s", "Frame interval", float, None, "s", low=1e-4, low_open=True, high=1e6,
          optional=True, help="Overrides the frame interval stored in the stack."),
    _spec("isothermal_start_s", "Isothermal start", float, 0.0, "s", low=-1e7, high=1e7,
          help="Time on the recording clock when the sample reached Tc; result times count from it."),
    _spec("thickness_um", "Film thickness", float, None, "µm", low=0.01, high=100_000.0, optional=True,
          help="Film thickness h, for the volumetric density N_V = N_A / h of the bulk prediction."),
    _spec("geometry", "Prediction geometry", str, DEFAULT_GEOMETRY, choices=GEOMETRIES,
          help="Geometry of the Avrami kinetics predicted from N and G: bulk-3d is what a DSC "
               "sample shows, film-2d what the film itself shows."),
    _spec("mode_override", "Nucleation mode", str, None, choices=NUCLEATION_MODES, optional=True,
          help="Force the nucleation mode of the prediction instead of the detected one."),
    _spec("kind", "Experiment kind", str, "isothermal", choices=EXPERIMENT_KINDS,
          help="isothermal: one Tc; ramp: the film follows a temperature programme (stage log or "
               "typed programme) and one run gives G over a range of temperatures."),
)
#: The temperature source of a ramp experiment (besides its log file and columns).
TEMPERATURE_SOURCE_SPECS: tuple[Spec, ...] = (
    _spec("programme", "Typed programme", str, None, optional=True,
          help="Block programme 'START, RATE:END, hold:SECONDS, ...' (°C, K/min, °C, s) when there is no log."),
    _spec("time_unit", "Log time unit", str, None, choices=("s", "min", "h"), optional=True,
          help="Unit of the log's time column; null reads it from the column name (else s)."),
    _spec("temperature_unit", "Log temperature unit", str, None, choices=("C", "K"), optional=True,
          help="Unit of the log's temperature column; null reads it from the column name (else °C)."),
    _spec("clock_offset_s", "Log clock offset", float, 0.0, "s", low=-1e7, high=1e7,
          help="Added to the log's times (or the programme's start) to give the recording clock."),
    _spec("lag_s", "Sensor lag", float, 0.0, "s", low=0.0, high=600.0,
          help="First-order lag of the film behind the stage sensor (0 = none)."),
)
#: One frame time (each entry of an experiment's ``times_s``).
FRAME_TIME_SPEC = _spec("times_s", "Frame time", float, None, "s", low=-1e7, high=1e8,
                        help="Time of each frame on the recording clock.")

#: An experiment's isothermal DSC source (besides its file and columns).
CALORIMETRY_SPECS: tuple[Spec, ...] = (
    _spec("time_unit", "Time unit", str, None, choices=("s", "min"), optional=True,
          help="Unit of the time column; null reads it from the column name."),
    _spec("heat_flow_unit", "Heat-flow unit", str, None, choices=("mW", "W/g"), optional=True,
          help="Unit of the heat-flow column; null reads it from the column name."),
    _spec("exotherm", "Exotherm direction", str, "auto", choices=EXOTHERM_DIRECTIONS,
          help="Whether the crystallization exotherm points up or down in the file."),
    _spec("mass_mg", "Sample mass", float, None, "mg", low=1e-3, high=10_000.0, optional=True,
          help="Sample mass, to normalise heat flow in mW to W/g."),
    _spec("material", "Material", str, None, optional=True,
          help="Material table entry for the enthalpy of fusion (crystallinity)."),
    _spec("baseline_start_min", "Baseline start", float, None, "min", low=0.0, high=1e5, optional=True,
          help="Start of the baseline segment; null finds it automatically."),
    _spec("baseline_end_min", "Baseline end", float, None, "min", low=0.0, high=1e5, optional=True,
          help="End of the baseline segment; null finds it automatically."),
    _spec("lag_s", "Thermal lag", float, 0.0, "s", low=0.0, high=600.0,
          help="The instrument's thermal lag time constant, from its calibration (0 = none)."),
)
#: One end of the calorimetry conversion window (the ``window`` pair).
FIT_WINDOW_SPEC = _spec("window", "Avrami fit window", float, None, "fraction", low=0.0, high=1.0,
                        help="Conversion range (fractions of the final conversion) of the Avrami fit.")

#: Series-wide constants of a temperature series (``Project.series``).
SERIES_SPECS: tuple[Spec, ...] = (
    _spec("tm0_c", "Equilibrium melting point Tm0", float, None, "°C", low=-100.0, high=500.0,
          optional=True, help="Tm0 for the undercooling ΔT = Tm0 − Tc."),
    _spec("tg_c", "Glass transition Tg", float, None, "°C", low=-200.0, high=400.0, optional=True,
          help="Tg; the transport term uses T∞ = Tg − 30 K unless T∞ is given."),
    _spec("u_star_j_per_mol", "Transport energy U*", float, DEFAULT_U_STAR_J_PER_MOL, "J/mol",
          low=0.0, high=200_000.0, help="Activation energy of segmental transport to the growth front."),
    _spec("t_inf_c", "T∞", float, None, "°C", low=-273.15, high=400.0, optional=True,
          help="Temperature where transport ceases; null means Tg − 30 K."),
    _spec("lh_include_ramps", "Ramps in the Lauritzen-Hoffman fit", bool, False,
          help="Add a point every 2 K of each ramp experiment's G(T) to the fit, beside the isothermal points."),
)
#: Key of the Hoffman-Weeks (Tc, Tm) pairs in ``Project.series``, °C.
HW_PAIRS_KEY = "hoffman_weeks_pairs"
HW_TEMPERATURE_SPEC = _spec(HW_PAIRS_KEY, "Hoffman-Weeks temperature", float, None, "°C",
                            low=-150.0, high=500.0, help="Tc and the melting point Tm of each pair.")


def check_fit_window(value: Any, place: Place) -> tuple[float, float]:
    """A conversion window ``[low, high]`` of fractions with 0 <= low < high <= 1."""
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise place.error("window", f"must be a pair [low, high] of fractions, got {_shown(value)}")
    low, high = (parse_value(FIT_WINDOW_SPEC, v, place) for v in value)
    if not low < high:
        raise place.error("window", f"must have low < high, got {_shown(list(value))}")
    return low, high


def check_hoffman_weeks_pairs(value: Any, place: Place) -> list[list[float]]:
    """Hoffman-Weeks pairs ``[[Tc, Tm], ...]`` in °C, each Tm above its Tc."""
    if not isinstance(value, list) or len(value) > 10_000:
        raise place.error(HW_PAIRS_KEY, f"must be a list of [Tc, Tm] pairs, got {_shown(value)}")
    pairs = []
    for number, pair in enumerate(value, start=1):
        entry = f"{HW_PAIRS_KEY} entry {number}"
        if not isinstance(pair, (list, tuple)) or len(pair) != 2:
            raise place.error(entry, f"must be a [Tc, Tm] pair, got {_shown(pair)}")
        spec = dataclasses.replace(HW_TEMPERATURE_SPEC, key=entry)
        pairs.append([parse_value(spec, v, place) for v in pair])
    return pairs


def check_series_order(series: Mapping[str, Any], place: Place) -> None:
    """Tg < Tm0 and T∞ < Tg when given: the LH transport and driving-force terms need it."""
    tm0, tg, t_inf = series.get("tm0_c"), series.get("tg_c"), series.get("t_inf_c")
    if tm0 is not None and tg is not None and not tg < tm0:
        raise place.error("tg_c", f"({tg:g} °C) must be below tm0_c ({tm0:g} °C)")
    if t_inf is not None and tg is not None and not t_inf < tg:
        raise place.error("t_inf_c", f"({t_inf:g} °C) must be below tg_c ({tg:g} °C)")
