"""The help panel: every topic sourced, cautions present, navigation works."""

from __future__ import annotations

import re

import pytest

from app.widgets.help_content import CAUTIONS, TOPICS, topic
from app.widgets.help_panel import HelpPanel, help_button, help_html, show_help

_YEAR = re.compile(r"\b(19|20)\d\d\b")


@pytest.mark.parametrize("entry", TOPICS, ids=lambda t: t.key)
def test_every_topic_has_definition_formula_assumptions_and_dated_source(entry):
    assert entry.definition and entry.formula and entry.assumptions
    assert entry.sources
    for source in entry.sources:
        assert _YEAR.search(source), f"{entry.key}: source without a year: {source}"


def test_cautions_cover_burns_fumes_and_the_labs_rules():
    text = " ".join(CAUTIONS).lower()
    assert "hot" in text and "burn" in text
    assert "fumes" in text and "degradation" in text
    assert "laboratory's own safety rules" in text


def test_numbers_shown_in_the_views_have_topics():
    for key in ("growth_rate", "density_areal", "density_volumetric", "predicted_k", "half_time",
                "fit_window", "comparison", "kg", "regimes", "sigma_sigma_e", "hoffman_weeks",
                "transport_constants", "calorimetry_conversion", "volume_mass", "density_used",
                "spherulites_detected", "nuclei_counted", "spherulites_in_pooled_g"):
        assert topic(key).title


def test_panel_navigates_to_a_topic(qtbot):
    panel = HelpPanel()
    qtbot.addWidget(panel)
    panel.resize(500, 400)
    panel.show()
    panel.show_topic("hoffman_weeks")
    assert panel.current_key == "hoffman_weeks"
    assert panel.picker.currentData() == "hoffman_weeks"
    assert panel.browser.verticalScrollBar().value() > 0  # scrolled away from the cautions
    with pytest.raises(KeyError):
        panel.show_topic("no-such-number")
    assert "Hoffman" in panel.browser.toPlainText()


def test_help_button_opens_shared_panel(qtbot):
    button = help_button("kg")
    qtbot.addWidget(button)
    button.click()
    panel = show_help("kg")
    assert panel.isVisible() and panel.current_key == "kg"
    panel.close()


def test_html_escapes_and_lists_every_topic():
    document = help_html()
    for entry in TOPICS:
        assert f'name="{entry.key}"' in document
