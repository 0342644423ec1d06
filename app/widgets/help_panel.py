"""The help panel: what each number means, how it is computed, and the hot-stage cautions.

``HelpPanel`` is an ordinary widget (embed it anywhere); ``show_help(key)`` opens one
shared floating panel scrolled to a topic, and ``help_button(key)`` makes the small "?"
button the kinetics and temperature views put beside their numbers.
"""

from __future__ import annotations

import html

from PySide6 import QtCore, QtWidgets

from app.widgets.help_content import CAUTIONS, CAUTIONS_TITLE, TOPICS, HelpTopic, topic
from app.widgets.help_guide import GUIDE_SECTIONS, guide_html

_shared_panel: "HelpPanel | None" = None


def _topic_html(entry: HelpTopic) -> str:
    sources = "".join(f"<li>{html.escape(s)}</li>" for s in entry.sources)
    formula = html.escape(entry.formula).replace("\n", "<br>")
    return (
        f'<a name="{entry.key}"></a><h3>{html.escape(entry.title)}</h3>'
        f"<p>{html.escape(entry.definition)}</p>"
        f'<p><b>Formula</b><br><span style="font-family: monospace">{formula}</span></p>'
        f"<p><b>Assumptions</b> {html.escape(entry.assumptions)}</p>"
        f"<p><b>Sources</b></p><ul>{sources}</ul><hr>"
    )


def help_html() -> str:
    """The whole help text as one HTML document (cautions first, then using the
    application, then every number)."""
    contents = "".join(f'<li><a href="#{t.key}">{html.escape(t.title)}</a></li>' for t in TOPICS)
    guide = "".join(f'<li><a href="#{k}">{html.escape(t)}</a></li>' for k, t in GUIDE_SECTIONS)
    cautions = "".join(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)
    return (
        '<a name="cautions"></a>'
        f'<h2 style="color:#9a3412">{html.escape(CAUTIONS_TITLE)}</h2><ul>{cautions}</ul><hr>'
        f"<h2>Using spherokin</h2><ul>{guide}</ul>" + guide_html()
        + f"<h2>The numbers</h2><ul>{contents}</ul><hr>"
        + "".join(_topic_html(t) for t in TOPICS)
        + "<p><i>Citations marked (from memory) were not checked against the original paper.</i></p>"
    )


class HelpPanel(QtWidgets.QWidget):
    """Browsable help: a topic picker above the text."""

    def __init__(self, parent: QtWidgets.QWidget | None = None):
        super().__init__(parent)
        self.setWindowTitle("spherokin help")
        self.picker = QtWidgets.QComboBox()
        self.picker.addItem(CAUTIONS_TITLE, "cautions")
        for key, title in GUIDE_SECTIONS:
            self.picker.addItem(title, key)
        for entry in TOPICS:
            self.picker.addItem(entry.title, entry.key)
        self.picker.activated.connect(lambda i: self.show_topic(self.picker.itemData(i)))
        self.browser = QtWidgets.QTextBrowser()
        self.browser.setOpenLinks(False)
        self.browser.anchorClicked.connect(self._follow)
        self.refresh()
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addWidget(self.picker)
        layout.addWidget(self.browser)
        self.current_key = "cautions"

    def refresh(self) -> None:
        """Render the text again (after the window registered its shortcuts)."""
        self.browser.setHtml(help_html())

    def show_topic(self, key: str) -> None:
        """Scroll to a topic ("cautions", a guide section or a key of ``help_content.TOPICS``)."""
        if key != "cautions" and key not in dict(GUIDE_SECTIONS):
            topic(key)  # KeyError for an unknown topic: a programming error, not user input
        self.current_key = key
        index = self.picker.findData(key)
        if index >= 0:
            self.picker.setCurrentIndex(index)
        self.browser.scrollToAnchor(key)

    def _follow(self, url: QtCore.QUrl) -> None:
        if url.fragment():
            self.show_topic(url.fragment())


def shared_panel() -> HelpPanel:
    global _shared_panel
    if _shared_panel is None:
        _shared_panel = HelpPanel()
        _shared_panel.setWindowFlag(QtCore.Qt.WindowType.Tool, True)
        _shared_panel.resize(560, 720)
    return _shared_panel


def show_help(key: str = "cautions") -> HelpPanel:
    panel = shared_panel()
    panel.show()
    panel.raise_()
    panel.show_topic(key)
    return panel


def help_button(key: str, parent: QtWidgets.QWidget | None = None) -> QtWidgets.QToolButton:
    """A small "?" button that opens the help at ``key``."""
    button = QtWidgets.QToolButton(parent)
    button.setText("?")
    button.setAutoRaise(True)
    button.setToolTip(f"What is this? {topic(key).title}")
    button.setObjectName(f"help_{key}")
    button.clicked.connect(lambda: show_help(key))
    return button


if __name__ == "__main__":  # pragma: no cover - quick look
    app = QtWidgets.QApplication([])
    show_help("cautions")
    app.exec()
