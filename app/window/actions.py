"""Every menu, toolbar and shortcut action of the main window, declared in one table.

The window builds QActions, menus and the toolbars from :data:`ACTIONS`; a handler is
the name of a window method (``handler(checked)`` for checkable actions). Tools of the
correction toolbar form one exclusive group.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from PySide6.QtGui import QAction, QActionGroup, QKeySequence


@dataclass(frozen=True)
class ActionSpec:
    id: str
    text: str
    handler: str
    menu: str
    shortcut: str | QKeySequence.StandardKey | None = None
    toolbar: str | None = None  # "file", "analysis", "tools"
    checkable: bool = False
    group: str | None = None
    tip: str = ""
    argument: str | int | None = None  # passed to the handler, e.g. the tool name
    short: str = ""  # the toolbar button's label, when shorter than the menu text


def _tool(name: str, text: str, shortcut: str, tip: str, short: str) -> ActionSpec:
    """A checkable correction tool; all tools share one handler and one exclusive group."""
    return ActionSpec(f"tool_{name}", text, "set_tool", "Tools", shortcut, "tools", True, "tool",
                      tip, argument=name, short=short)


K = QKeySequence.StandardKey

ACTIONS: tuple[ActionSpec, ...] = (
    ActionSpec("new", "&New project", "new_project", "File", K.New, "file", short="New"),
    ActionSpec("open", "&Open project…", "open_project_dialog", "File", K.Open, "file",
               short="Open"),
    ActionSpec("save", "&Save", "save_project", "File", K.Save, "file"),
    ActionSpec("save_as", "Save &as…", "save_project_as", "File", "Ctrl+Shift+S"),
    ActionSpec("add_stacks", "Add &stacks…", "add_stacks_dialog", "File", "Ctrl+I", "file",
               tip="Add TIFF stacks or videos, one experiment each (or drop them on the window)",
               short="Add stacks"),
    ActionSpec("add_folder", "Add a &folder of frames…", "add_folder_dialog", "File"),
    ActionSpec("locate_stack", "&Locate stack file…", "locate_stack", "File",
               tip="Point the current experiment to its stack where the file is now"),
    ActionSpec("quit", "&Quit", "close", "File", K.Quit),
    ActionSpec("undo", "&Undo", "undo", "Edit", K.Undo),
    ActionSpec("redo", "&Redo", "redo", "Edit", "Ctrl+Shift+Z"),
    ActionSpec("properties", "Experiment &properties…", "edit_properties", "Edit", "Ctrl+P",
               tip="Tc, µm per pixel, frame times, isothermal start, thickness, notes"),
    ActionSpec("temperature_source", "Experiment &kind and temperature…", "edit_temperature_source", "Edit",
               tip="Isothermal or ramp; for a ramp, the stage temperature log or a typed programme"),
    ActionSpec("calibrate", "&Calibrate from a stage micrometer…", "calibrate", "Edit", "Ctrl+K"),
    ActionSpec("remove_experiment", "Remove e&xperiment", "remove_experiment", "Edit"),
    ActionSpec("run", "&Analyse this experiment", "run_current", "Analysis", "F5", "analysis",
               short="Analyse"),
    ActionSpec("run_all", "Analyse &all experiments", "run_all", "Analysis", "Shift+F5", "analysis",
               short="Analyse all"),
    ActionSpec("cancel", "&Cancel analysis", "cancel_analysis", "Analysis", "Ctrl+.", "analysis",
               short="Cancel"),
    ActionSpec("analysis_settings", "Analysis &settings…", "edit_analysis_settings", "Analysis",
               "Ctrl+Shift+A", tip="Detection and fit settings of this experiment; applying them "
                                   "analyses it again (one undo step)"),
    _tool("select", "&Select", "S", "Click a spherulite to select it", "Select"),
    _tool("add", "&Add nucleus", "N", "Click where a nucleus was missed", "Add"),
    _tool("delete", "&Delete detection", "D", "Click a false detection (dust, bubble) to remove it",
          "Delete"),
    _tool("merge", "&Merge two", "M", "Click the detection to keep, then the one to merge into it",
          "Merge"),
    _tool("move", "Mo&ve centre", "C", "Click a detection, then its true centre", "Move"),
    _tool("exclude", "E&xclude / include", "E",
          "Click a spherulite to leave it out of (or put it back into) the statistics", "Exclude"),
    ActionSpec("cancel_gesture", "Cancel the &gesture", "cancel_gesture", "Tools", "Esc",
               tip="Forget the first click of a merge or a centre move"),
    ActionSpec("ignore_frames", "&Ignore frames…", "ignore_frames", "Tools", "I", "tools",
               tip="Ignore a frame range for the selected spherulite or the whole experiment",
               short="Ignore frames"),
    ActionSpec("next_doubtful", "Next &doubtful detection", "review_step", "Tools", "J", argument=1,
               tip="Jump to the next detection whose evidence is weakest, zoomed, in the frame "
                   "where it is best judged"),
    ActionSpec("previous_doubtful", "Previous doubtful detection", "review_step", "Tools", "K", argument=-1),
    ActionSpec("accept_detection", "&Accept the detection", "review_accept", "Tools", "A",
               tip="Count the selected detection (promotes a rejected candidate); one undo step"),
    ActionSpec("reject_detection", "Re&ject the detection", "review_reject", "Tools", "X",
               tip="Delete the selected detection as false (dust, bubble, noise); one undo step"),
    ActionSpec("split_detection", "S&plit the detection", "review_split", "Tools", "Shift+N",
               tip="Split the selected detection into two spherulites at the nuclei its growth fits best; one undo step"),
    ActionSpec("show_rejected", "Show &rejected candidates", "set_show_rejected", "View", "Shift+R",
               checkable=True, tip="Show the candidates the analysis rejected, with their reasons"),
    ActionSpec("play", "&Play / pause", "toggle_playing", "View", "Space"),
    ActionSpec("next_frame", "&Next frame", "next_frame", "View", "."),
    ActionSpec("previous_frame", "P&revious frame", "previous_frame", "View", ","),
    ActionSpec("spherulite_table", "Spherulites &table", "show_spherulite_table", "View",
               "Ctrl+T", tip="Every detection with all its columns, as a wide tab beside the "
               "image"),
    ActionSpec("reset_layout", "Reset &layout", "reset_layout", "View",
               tip="Panels, toolbars and splitters back to where they start"),
    ActionSpec("help", "&Help and cautions", "show_help_panel", "Help", K.HelpContents,
               tip="What each number means, how it is computed, and hot-stage cautions"),
    ActionSpec("about", "&About spherokin", "show_about", "Help"),
)

MENU_ORDER = ("File", "Edit", "Analysis", "Tools", "View", "Help")


def build_actions(window: Any) -> dict[str, QAction]:
    """QActions for :data:`ACTIONS`, connected to the window's handler methods."""
    actions, groups = {}, {}
    for spec in ACTIONS:
        action = QAction(spec.text, window)
        if spec.shortcut is not None:
            action.setShortcut(QKeySequence(spec.shortcut))
        tip = spec.tip or spec.text.replace("&", "").rstrip("…")
        if spec.shortcut is not None:
            tip += f"  ({QKeySequence(spec.shortcut).toString()})"
        action.setToolTip(tip)
        action.setStatusTip(tip)
        action.setCheckable(spec.checkable)
        if spec.short:
            action.setIconText(spec.short)
        if spec.group:
            groups.setdefault(spec.group, QActionGroup(window)).addAction(action)
        handler = getattr(window, spec.handler)
        arguments = () if spec.argument is None else (spec.argument,)
        if spec.checkable and spec.group is None:  # an on/off switch: the handler gets the state
            action.toggled.connect(lambda on, h=handler: h(on))
        elif spec.checkable:
            action.toggled.connect(lambda on, h=handler, a=arguments: on and h(*a))
        else:
            action.triggered.connect(lambda _checked=False, h=handler, a=arguments: h(*a))
        actions[spec.id] = action
    return actions


def shortcut_rows(actions: dict[str, QAction]) -> list[tuple[str, str]]:
    """(key sequence as shown on this platform, what it does) for every action with a key."""
    rows = []
    for spec in ACTIONS:
        keys = actions[spec.id].shortcut().toString(QKeySequence.SequenceFormat.NativeText)
        if keys:
            rows.append((keys, spec.tip or spec.text.replace("&", "").rstrip("…")))
    return rows


def populate_menus(window: Any, actions: dict[str, QAction]) -> dict[str, Any]:
    menus = {name: window.menuBar().addMenu(f"&{name}") for name in MENU_ORDER}
    for spec in ACTIONS:
        menus[spec.menu].addAction(actions[spec.id])
    return menus


def populate_toolbars(window: Any, actions: dict[str, QAction]) -> dict[str, Any]:
    bars = {}
    for spec in ACTIONS:
        if spec.toolbar:
            if spec.toolbar not in bars:
                bar = window.addToolBar(spec.toolbar.capitalize())
                bar.setObjectName(f"toolbar_{spec.toolbar}")
                bars[spec.toolbar] = bar
            bars[spec.toolbar].addAction(actions[spec.id])
    return bars
