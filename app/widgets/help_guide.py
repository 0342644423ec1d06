"""Help on using the application: the viewer, the correction tools, the statuses and the
keyboard shortcuts.

The statuses come from their one definition (``analysis.spherulites.statuses``); the
shortcuts from the window's action table, which registers them here when it is built
(widgets sit below the window, so they cannot read the table themselves).
"""

from __future__ import annotations

import html

from analysis.spherulites.statuses import STATUSES

#: Anchors of the sections, in order, with their titles.
GUIDE_SECTIONS = (("viewer", "Using the image viewer"), ("tools", "Correction tools"),
                  ("statuses", "Spherulite statuses"), ("shortcuts", "Keyboard shortcuts"))

_VIEWER = (
    "The viewer shows the selected experiment's frames with each spherulite's fitted front at the "
    "current frame, its centre and its id. Drag the frame slider or press Space to play; the "
    "comma and full-stop keys step one frame. Scroll to zoom about the pointer, drag to pan.",
    "A centre marked + was found by the analysis; a marker ◆ was placed by you. Colours give the "
    "status (legend under the image; hover it for the meanings). Click a spherulite with the "
    "Select tool to see its numbers in the Details panel: centre in px and µm, nucleation time "
    "from the isothermal start, G with its 95 % confidence interval, R² of the cone fit, the "
    "frames in the cone fit and the free-growth radii, and the status with its reason.",
    "The Spherulites tab lists every detection; open it as a wide tab beside the viewer "
    "(View menu) to see all columns.",
    "Candidates the analysis rejected (no growing front, a growth rate unlike the field, a "
    "centre that cannot be placed...) are hidden; View ▸ Show rejected candidates (Shift+R) "
    "lists and draws them, dashed, with their reasons. Every detection has a confidence "
    "between 0 and 1 from its evidence: frames of growth, fit residuals, agreement with the "
    "field's growth rate, precision of its nucleation time, closeness to another nucleus and to "
    "the edge.",
    "Review queue: J and K go to the next and previous doubtful detection (lowest confidence "
    "first), zoomed, in the frame where its front is half-way to its nearest neighbour. A "
    "accepts it (counts it; promotes a rejected candidate), X rejects it (deletes it as "
    "false), Shift+N splits it into two spherulites at the two nuclei that fit its growth "
    "best (when its growth shows one front only, click the second nucleus). Each is one undo step.",
)

_TOOLS = (
    ("Add nucleus", "Click where a nucleus was missed. The nucleus sits exactly where you "
     "clicked and takes the next free id; the analysis never moves it."),
    ("Delete detection", "Click a false detection (dust, a bubble, a scratch). Its area is left "
     "unassigned rather than given to a neighbour."),
    ("Merge two", "Click the detection to keep, then the one to merge into it. The kept one's "
     "centre is fitted afresh on the joined territory."),
    ("Move centre", "Click a detection, then its true centre. The centre is held exactly there; "
     "its nucleation time and G are refitted."),
    ("Exclude / include", "Click a spherulite to leave it out of the pooled statistics, or to "
     "put it back."),
    ("Ignore frames", "Ignore a frame range for the selected spherulite, or for the whole "
     "experiment (focus loss, a temperature overshoot)."),
)

_TOOL_RULES = (
    "Every correction names the spherulite you clicked by its id and changes only that one: "
    "its neighbours keep their ids and centres (their territories, and so their fits, may "
    "follow). Each correction is one undo step (Edit ▸ Undo), is listed with its id and "
    "position in the Edits tab, is saved in the project and is replayed when the analysis is "
    "run again; one that no longer finds its spherulite is listed in red, never dropped.")

_shortcut_rows: list[tuple[str, str]] = []


def register_shortcuts(rows) -> None:
    """(key sequence, what it does) pairs, from the window's action table."""
    _shortcut_rows[:] = [(str(key), str(text)) for key, text in rows]


def _anchor(key: str, title: str) -> str:
    return f'<a name="{key}"></a><h3>{html.escape(title)}</h3>'


def guide_html() -> str:
    """The four sections as HTML."""
    titles = dict(GUIDE_SECTIONS)
    viewer = "".join(f"<p>{html.escape(p)}</p>" for p in _VIEWER)
    tools = "".join(f"<li><b>{html.escape(n)}</b>: {html.escape(t)}</li>" for n, t in _TOOLS)
    statuses = "".join(
        f"<tr><td><b>{html.escape(s.name)}</b></td><td>{html.escape(s.meaning)}."
        + (f" <i>Decided by: {html.escape(s.threshold)}.</i>" if s.threshold else "")
        + "</td></tr>" for s in STATUSES.values())
    keys = "".join(f"<tr><td><code>{html.escape(k)}</code></td><td>{html.escape(t)}</td></tr>"
                   for k, t in _shortcut_rows) or "<tr><td colspan=2>(listed in each menu)</td></tr>"
    return (
        _anchor("viewer", titles["viewer"]) + viewer
        + _anchor("tools", titles["tools"]) + f"<ul>{tools}</ul><p>{html.escape(_TOOL_RULES)}</p>"
        + _anchor("statuses", titles["statuses"])
        + "<p>Each spherulite has one status; the Details panel gives the reason with the "
          "numbers that decided it. A note is added when the fitted nucleation time lies "
          "before the isothermal start beyond its 95 % confidence interval (the nucleus formed "
          "while the sample was still cooling).</p>"
        + f'<table cellpadding="3">{statuses}</table>'
        + _anchor("shortcuts", titles["shortcuts"]) + f'<table cellpadding="2">{keys}</table><hr>'
    )
