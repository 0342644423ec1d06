"""The registry of the pages shown in the window's view rail.

The microscopy page ("viewer") is built by the window itself; the other pages live in
their own packages and are built here with the shared :class:`app.core.model.ProjectModel`.
Every page is part of the product: one that fails to import or to build is an internal
error, reported through :mod:`app.core.errors` (traceback logged, dialog shown), never a
page that silently goes missing. ``spherokin gui --view NAME`` selects a page by name.
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from typing import TYPE_CHECKING, Callable

from PySide6.QtWidgets import QWidget

if TYPE_CHECKING:
    from app.core.model import ProjectModel


@dataclass(frozen=True)
class ViewSpec:
    """One entry of the view rail: registry name, rail label, where the widget class is."""

    name: str
    title: str
    module: str
    class_name: str
    tooltip: str = ""


PAGE_VIEWS = (
    ViewSpec("kinetics", "Kinetics", "app.kinetics.view", "KineticsView",
             "Avrami kinetics of the current experiment, with calorimetry"),
    ViewSpec("temperature", "Tc series", "app.temperature.view", "TemperatureView",
             "Growth rate and nucleation across crystallization temperatures"),
)


class ViewBuildError(RuntimeError):
    """A page could not be imported or built (the cause is chained)."""


def find_view_class(spec: ViewSpec) -> type:
    """Import ``spec``'s widget class; :class:`ViewBuildError` (cause chained) when it cannot."""
    try:
        module = importlib.import_module(spec.module)
    except Exception as exc:  # re-raised with the page named; the cause keeps its traceback
        raise ViewBuildError(f"the {spec.title} page ({spec.module}) cannot be imported: "
                             f"{type(exc).__name__}: {exc}") from exc
    cls = getattr(module, spec.class_name, None)
    if cls is None:
        raise ViewBuildError(f"the {spec.title} page: {spec.module} has no {spec.class_name}")
    return cls


def build_views(model: ProjectModel, report: Callable[[str, BaseException], None]) -> list:
    """Build every page: a list of (spec, widget). A page that fails is passed to ``report``
    (title, exception) and left out, so the rest of the window still works."""
    built = []
    for spec in PAGE_VIEWS:
        try:
            widget: QWidget = find_view_class(spec)(model)
        except Exception as exc:  # reported as an internal error by the caller, never hidden
            report(f"The {spec.title} page could not be built", exc)
            continue
        built.append((spec, widget))
    return built
