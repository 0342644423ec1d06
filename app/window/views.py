"""The registry of main views shown in the window's view rail.

The microscopy view ("viewer") is always present. Optional views live in their own
modules and are built with the shared :class:`app.core.model.ProjectModel`; a module that is
not installed is simply not shown, one that fails to import is reported (never hidden).
``spherokin gui --view NAME`` selects a view by its registry name.
"""

from __future__ import annotations

import importlib
import sys
from dataclasses import dataclass
from typing import Any, Callable


@dataclass(frozen=True)
class ViewSpec:
    """One entry of the view rail: registry name, rail label, where the widget class is."""

    name: str
    title: str
    module: str
    class_name: str
    tooltip: str = ""


OPTIONAL_VIEWS = (
    ViewSpec("kinetics", "Kinetics", "app.kinetics.view", "KineticsView",
             "Avrami kinetics of the current experiment, with calorimetry"),
    ViewSpec("temperature", "Tc series", "app.temperature.view", "TemperatureView",
             "Growth rate and nucleation across crystallization temperatures"),
)


def find_view_class(spec: ViewSpec) -> tuple[Any, str]:
    """Import ``spec``'s widget class: (class, "") or (None, reason it is unavailable).

    A missing module gives (None, "") so the rail hides it quietly; any other import
    failure returns the error text so the window can report it.
    """
    try:
        module = importlib.import_module(spec.module)
    except ModuleNotFoundError as exc:
        if exc.name == spec.module:
            return None, ""
        return None, f"{spec.module}: {exc}"
    except Exception as exc:  # a broken optional view must not stop the application
        return None, f"{spec.module}: {type(exc).__name__}: {exc}"
    cls = getattr(module, spec.class_name, None)
    if cls is None:
        return None, f"{spec.module} has no {spec.class_name}"
    return cls, ""


def build_optional_views(model: Any, report: Callable[[str], None] | None = None) -> list:
    """Instantiate every available optional view: a list of (spec, widget)."""
    built = []
    for spec in OPTIONAL_VIEWS:
        cls, problem = find_view_class(spec)
        if cls is None:
            if problem:
                (report or (lambda text: print(text, file=sys.stderr)))(problem)
            continue
        try:
            built.append((spec, cls(model)))
        except Exception as exc:
            (report or (lambda text: print(text, file=sys.stderr)))(
                f"{spec.module}: could not build {spec.class_name}: {exc}")
    return built
