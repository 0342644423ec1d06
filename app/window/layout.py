"""Where the main window's parts go: the size it opens at, the layout it resets to, and
which tools each page shows.

The window opens within the screen it appears on (at most 1600 × 1000, at least the
1280 × 760 the toolbars and plot titles are laid out for). The correction tools act on
the microscopy image only, so their toolbar, menu entries and hint are shown on that page
alone. "Reset layout" puts panels, toolbars and splitters back where they start and
forgets the stored ones.
"""

from __future__ import annotations

from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtGui import QGuiApplication

from app.microscopy.tools import HINTS

PREFERRED_SIZE = (1600, 1000)
SMALLEST_SUPPORTED = (1280, 760)
#: Share of the microscopy page the image takes beside the plots.
IMAGE_SHARE = 0.6
#: Shares of the window width for the experiments (left) and details (right) docks.
DOCK_SHARES = (0.17, 0.21)
LAYOUT_KEYS = ("window/geometry", "window/state", "window/viewer_splitter")


def fitted_size(available: tuple[int, int], preferred=PREFERRED_SIZE) -> tuple[int, int]:
    """The preferred size, shrunk to 95 % of the available screen area when smaller."""
    return (min(preferred[0], int(available[0] * 0.95)),
            min(preferred[1], int(available[1] * 0.95)))


def dock_widths(window: Any) -> list[int]:
    """Experiments and details dock widths for the window's width, px."""
    return [int(window.width() * share) for share in DOCK_SHARES]


def fit_to_screen(window: Any) -> None:
    """Size the window to the screen it opens on and centre it there."""
    screen = window.screen() or QGuiApplication.primaryScreen()
    if screen is None:
        window.resize(*PREFERRED_SIZE)
        return
    area = screen.availableGeometry()
    width, height = fitted_size((area.width(), area.height()))
    window.resize(width, height)
    window.move(area.x() + (area.width() - width) // 2, area.y() + (area.height() - height) // 2)


def show_page_tools(window: Any, on_microscopy: bool) -> None:
    """Correction tools (toolbar, menu entries, hint) only where they act: the image."""
    bar = window.toolbars.get("tools")
    if bar is not None:
        bar.setVisible(on_microscopy)
    for key, action in window.actions_by_id.items():
        if key.startswith("tool_") or key in ("cancel_gesture", "ignore_frames"):
            action.setVisible(on_microscopy)
    if not on_microscopy:
        window.tools.cancel_gesture()
    window.hint_label.setText(HINTS[window.tools.tool] if on_microscopy else "")


def default_dock_layout(window: Any) -> None:
    """Every panel and toolbar where it starts: experiments left, details and history
    tabbed right, the image beside the plots."""
    docks = window.docks
    for name, area in (("experiments", Qt.LeftDockWidgetArea), ("details", Qt.RightDockWidgetArea),
                       ("history", Qt.RightDockWidgetArea)):
        dock = docks[name]
        dock.setFloating(False)
        window.addDockWidget(area, dock)
        dock.show()
    window.tabifyDockWidget(docks["details"], docks["history"])
    docks["details"].raise_()
    for bar in window.toolbars.values():
        window.addToolBar(Qt.TopToolBarArea, bar)
        bar.show()
    window.resizeDocks([docks["experiments"], docks["details"]], dock_widths(window), Qt.Horizontal)
    total = max(600, window.viewer_splitter.width())
    window.viewer_splitter.setSizes([int(total * IMAGE_SHARE), int(total * (1 - IMAGE_SHARE))])


def reset_layout(window: Any) -> None:
    """Back to the starting layout and size; the stored layout is forgotten."""
    for key in LAYOUT_KEYS:
        window.settings.remove(key)
    window._hidden_docks = None
    window.show_view(window.view_names[0])
    default_dock_layout(window)
    fit_to_screen(window)
