"""The Details panel and Help show each status with its reason and the numbers behind it."""

from __future__ import annotations

from analysis.results import Spherulite
from analysis.spherulites.statuses import STATUSES
from app.microscopy.details_panel import spherulite_html
from app.widgets import help_guide
from app.widgets.help_panel import HelpPanel, help_html


def test_details_give_the_reason_and_both_point_counts():
    s = Spherulite(57, 91.0, 149.0, 21.9, 0.0, 40.1, 2.0, 0.999, 30, "few-points", "auto",
                   "2 free-growth radii (radius ≥ 3 px with ≥ 25% of the directions free; needs 4)")
    text = spherulite_html(s, 0.8, free_radii=2)
    assert "Frames in the cone fit" in text and "<td>30</td>" in text.replace(" ", "")
    assert "Free-growth radii" in text and "2 free-growth radii" in text
    assert "too few radius points" not in text


def test_help_explains_viewer_tools_statuses_and_shortcuts(qapp):
    help_guide.register_shortcuts([("N", "Click where a nucleus was missed")])
    text = help_html()
    for name, status in STATUSES.items():
        assert f"<b>{name}</b>" in text and status.meaning.split(":")[0] in text
    assert "Using the image viewer" in text and "Move centre" in text
    assert "<code>N</code>" in text
    panel = HelpPanel()
    panel.show_topic("statuses")
    assert panel.current_key == "statuses"
