"""Command-line flags generated from the setting descriptions of :mod:`analysis.settings`.

Each described value becomes one flag with its help sentence, unit, range and default;
values typed on the command line go through the same strict check as values read from a
project file, so ``--n-sectors 1e9`` and ``--n-sectors 36.5`` are refused the same way.
"""

from __future__ import annotations

import argparse
import dataclasses
from typing import Any, Iterable

from analysis.settings import AnalysisSettings, ArrivalSettings, Place, Spec, parse_value, specs_of

#: Where each analysis setting lives inside :class:`AnalysisSettings` (``arrival.`` prefix).
ANALYSIS_SETTING_KEYS: tuple[tuple[str, Spec], ...] = (
    *((spec.key, spec) for spec in specs_of(AnalysisSettings)),
    *((f"arrival.{spec.key}", spec) for spec in specs_of(ArrivalSettings)),
)


def _dest(spec: Spec) -> str:
    return "setting_" + spec.flag.replace("-", "_")


def _number_text(text: str) -> float | int:
    """A number as typed: an int when it reads as one (so 36.5 is caught for an integer)."""
    try:
        return int(text)
    except ValueError:
        pass
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None


def _metavar(unit: str) -> str:
    """An ASCII placeholder from a unit: "µm/px" -> UM_PER_PX."""
    for symbol, word in (("µ", "u"), ("°", ""), ("×", "x"), ("/", "_per_"), (" ", "_")):
        unit = unit.replace(symbol, word)
    return unit.upper() or "VALUE"


def _help(spec: Spec) -> str:
    default = "automatic" if spec.default is None else f"{spec.default}"
    unit = f" {spec.unit}" if spec.unit and spec.default is not None and not spec.choices else ""
    allowed = dataclasses.replace(spec, optional=False).range_text()  # absent flag = automatic
    text = f"{spec.label}: {spec.help} Default {default}{unit}; {allowed}."
    return text.replace("%", "%%")


def add_spec_arguments(parser, specs: Iterable[Spec], *, keep_default: bool = False) -> None:
    """One flag per spec; ``keep_default`` stores the spec's default when the flag is absent."""
    for spec in specs:
        names = [f"--{spec.flag}", *(f"--{alias}" for alias in spec.aliases)]
        kwargs: dict[str, Any] = {"dest": _dest(spec), "help": _help(spec),
                                  "default": spec.default if keep_default else None}
        if spec.kind is bool:
            kwargs["action"] = argparse.BooleanOptionalAction
        elif spec.choices:
            kwargs["choices"] = spec.choices
        elif spec.kind is not str:
            kwargs["type"] = _number_text
            kwargs["metavar"] = _metavar(spec.unit)
        parser.add_argument(*names, **kwargs)


def value_of(args, spec: Spec) -> Any:
    """The checked value of ``spec``'s flag (None when absent); InputError naming the flag."""
    value = getattr(args, _dest(spec))
    if value is None:
        return None
    return parse_value(dataclasses.replace(spec, key=f"--{spec.flag}"), value, Place())


def add_analysis_settings_arguments(parser) -> None:
    """Every :class:`AnalysisSettings` value as a flag, in an argument group of its own."""
    group = parser.add_argument_group("analysis settings (defaults as in a new project)")
    add_spec_arguments(group, (spec for _, spec in ANALYSIS_SETTING_KEYS))


def analysis_settings_from_args(args, base: AnalysisSettings | None = None) -> AnalysisSettings:
    """``base`` (default: the defaults) with every flag given on the command line applied."""
    settings = base or AnalysisSettings()
    for key, spec in ANALYSIS_SETTING_KEYS:
        value = value_of(args, spec)
        if value is not None:
            settings = settings.changed(key, value)
    return settings


__all__ = ["ANALYSIS_SETTING_KEYS", "add_spec_arguments", "value_of", "add_analysis_settings_arguments",
           "analysis_settings_from_args"]
