"""The view registry: missing optional views are skipped, broken ones are reported."""

from __future__ import annotations

import sys
import types

from app.window.views import ViewSpec, build_optional_views, find_view_class


def test_missing_module_is_skipped_quietly():
    assert find_view_class(ViewSpec("x", "X", "app.no_such_view_module", "View")) == (None, "")


def test_broken_or_incomplete_module_is_reported(monkeypatch):
    broken = types.ModuleType("app.broken_view_for_test")
    monkeypatch.setitem(sys.modules, "app.broken_view_for_test", broken)
    cls, problem = find_view_class(ViewSpec("b", "B", "app.broken_view_for_test", "View"))
    assert cls is None and "has no View" in problem


def test_available_view_is_built_with_the_model(monkeypatch):
    module = types.ModuleType("app.sample_view_for_test")

    class View:
        def __init__(self, model):
            self.model = model

    module.View = View
    monkeypatch.setitem(sys.modules, "app.sample_view_for_test", module)
    monkeypatch.setattr("app.window.views.OPTIONAL_VIEWS",
                        (ViewSpec("s", "S", "app.sample_view_for_test", "View"),))
    ((spec, widget),) = build_optional_views("the model")
    assert spec.name == "s" and widget.model == "the model"
