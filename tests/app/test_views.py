"""The page registry: every page is built; one that cannot be is an internal error."""

from __future__ import annotations

import sys
import types

import pytest

from app.window.views import PAGE_VIEWS, ViewBuildError, ViewSpec, build_views, find_view_class


def test_a_missing_page_module_is_an_error_not_a_hidden_page():
    with pytest.raises(ViewBuildError, match="X page .*cannot be imported: ModuleNotFoundError"):
        find_view_class(ViewSpec("x", "X", "app.no_such_view_module", "View"))


def test_an_incomplete_module_is_an_error(monkeypatch):
    monkeypatch.setitem(sys.modules, "app.broken_view_for_test", types.ModuleType("app.broken_view_for_test"))
    with pytest.raises(ViewBuildError, match="has no View"):
        find_view_class(ViewSpec("b", "B", "app.broken_view_for_test", "View"))


def test_every_page_is_built_with_the_model(monkeypatch):
    module = types.ModuleType("app.sample_view_for_test")

    class View:
        def __init__(self, model):
            self.model = model

    module.View = View
    monkeypatch.setitem(sys.modules, "app.sample_view_for_test", module)
    monkeypatch.setattr("app.window.views.PAGE_VIEWS", (ViewSpec("s", "S", "app.sample_view_for_test", "View"),))
    reported = []
    ((spec, widget),) = build_views("the model", lambda title, exc: reported.append(exc))
    assert spec.name == "s" and widget.model == "the model" and reported == []


def test_a_page_that_fails_to_build_is_reported_with_its_exception(monkeypatch):
    module = types.ModuleType("app.failing_view_for_test")

    class View:
        def __init__(self, model):
            raise KeyError("missing widget")

    module.View = View
    monkeypatch.setitem(sys.modules, "app.failing_view_for_test", module)
    monkeypatch.setattr("app.window.views.PAGE_VIEWS", (ViewSpec("f", "F", "app.failing_view_for_test", "View"),))
    reported = []
    assert build_views("the model", lambda title, exc: reported.append((title, exc))) == []
    ((title, exc),) = reported
    assert "F page could not be built" in title and isinstance(exc, KeyError)


def test_the_product_pages_import():
    for spec in PAGE_VIEWS:
        assert find_view_class(spec).__name__ == spec.class_name
