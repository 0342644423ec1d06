"""The "Analysis settings…" dialog, generated from the setting descriptions.

Every field of :class:`analysis.settings.AnalysisSettings` (and of its arrival pass)
becomes one row: its label and unit, an editor limited to the valid range, the default
and the help sentence in the tooltip. The window applies the result to one experiment
(or all) as one undo step and analyses again.

Run alone (``python -m app.window.settings_dialog``) to look at it.
"""

from __future__ import annotations

import math
from typing import Any

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (
    QAbstractSpinBox,
    QCheckBox,
    QComboBox,
    QDialog,
    QDialogButtonBox,
    QDoubleSpinBox,
    QFormLayout,
    QGroupBox,
    QLabel,
    QMessageBox,
    QScrollArea,
    QSpinBox,
    QVBoxLayout,
    QWidget,
)

from analysis.errors import InputError
from analysis.settings import AnalysisSettings, ArrivalSettings, Spec, specs_of
from app.core.errors import one_line

#: (group title, key prefix, settings class) in the order the dialog shows them.
GROUPS = (
    ("Nuclei, territories and growth fits", "", AnalysisSettings),
    ("Arrival times (the pass over the frames)", "arrival.", ArrivalSettings),
)
_INT_LIMIT = 2**31 - 1  # QSpinBox holds a C int


def tooltip(spec: Spec) -> str:
    """Help sentence, allowed values and default of one setting."""
    default = spec.default if spec.kind is not bool else ("on" if spec.default else "off")
    unit = f" {spec.unit}" if spec.unit and spec.kind in (int, float) else ""
    return f"{spec.help}\nAllowed: {spec.range_text()}.\nDefault: {default}{unit}."


def _decimals(spec: Spec) -> int:
    """Enough decimals to show the default and the lower bound exactly (at least 2)."""
    values = [abs(v) for v in (spec.default, spec.low) if v]
    smallest = min(values) if values else 1.0
    return max(2, min(6, 1 - math.floor(math.log10(smallest)) if smallest < 1 else 2))


def make_editor(spec: Spec) -> QWidget:
    """An editor for ``spec`` that can only hold allowed values."""
    if spec.kind is bool:
        return QCheckBox()
    if spec.choices:
        box = QComboBox()
        box.addItems(list(spec.choices))
        return box
    if spec.kind is int:
        spin = QSpinBox()
        spin.setRange(int(spec.low if spec.low is not None else -_INT_LIMIT),
                      int(min(spec.high if spec.high is not None else _INT_LIMIT, _INT_LIMIT)))
    else:
        spin = QDoubleSpinBox()
        decimals = _decimals(spec)
        spin.setDecimals(decimals)
        low = spec.low if spec.low is not None else -1e12
        spin.setRange(low + (10 ** -decimals if spec.low_open else 0.0),
                      spec.high if spec.high is not None else 1e12)
        spin.setStepType(QAbstractSpinBox.StepType.AdaptiveDecimalStepType)
    if spec.unit:
        spin.setSuffix(f" {spec.unit}")
    spin.setKeyboardTracking(False)
    return spin


def set_editor_value(editor: QWidget, value: Any) -> None:
    if isinstance(editor, QCheckBox):
        editor.setChecked(bool(value))
    elif isinstance(editor, QComboBox):
        editor.setCurrentIndex(editor.findText(str(value)))
    else:
        editor.setValue(value)


def editor_value(editor: QWidget) -> Any:
    if isinstance(editor, QCheckBox):
        return editor.isChecked()
    if isinstance(editor, QComboBox):
        return editor.currentText()
    return editor.value()


class AnalysisSettingsDialog(QDialog):
    """Edit one experiment's analysis settings; :meth:`settings` gives the result."""

    def __init__(self, name: str, settings: AnalysisSettings, *, several: bool = False,
                 parent: QWidget | None = None):
        super().__init__(parent)
        self.setWindowTitle(f"Analysis settings — {name}")
        self.setObjectName("analysisSettingsDialog")
        self.editors: dict[str, QWidget] = {}
        self.specs: dict[str, Spec] = {}
        layout = QVBoxLayout(self)
        intro = QLabel("Applying new settings analyses the experiment again; Undo restores the "
                       "previous ones. Hover over a setting for what it does and its range.")
        intro.setWordWrap(True)
        layout.addWidget(intro)
        layout.addWidget(self._scrolling_groups(), 1)
        self.apply_to_all = QCheckBox("Apply to every experiment of the project")
        self.apply_to_all.setObjectName("apply_to_all")
        self.apply_to_all.setVisible(several)
        layout.addWidget(self.apply_to_all)
        buttons = QDialogButtonBox(QDialogButtonBox.Ok | QDialogButtonBox.Cancel
                                   | QDialogButtonBox.RestoreDefaults)
        buttons.button(QDialogButtonBox.Ok).setText("Apply and analyse")
        buttons.button(QDialogButtonBox.RestoreDefaults).clicked.connect(self.restore_defaults)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout.addWidget(buttons)
        self.show_settings(settings)
        self.resize(560, 640)

    def _scrolling_groups(self) -> QScrollArea:
        inner = QWidget()
        column = QVBoxLayout(inner)
        for title, prefix, cls in GROUPS:
            box = QGroupBox(title)
            form = QFormLayout(box)
            for spec in specs_of(cls):
                key = prefix + spec.key
                editor = make_editor(spec)
                editor.setObjectName(key)
                editor.setToolTip(tooltip(spec))
                label = QLabel(spec.label)
                label.setToolTip(tooltip(spec))
                label.setBuddy(editor)
                form.addRow(label, editor)
                self.editors[key], self.specs[key] = editor, spec
            column.addWidget(box)
        column.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(inner)
        return scroll

    def show_settings(self, settings: AnalysisSettings) -> None:
        for key, editor in self.editors.items():
            value = getattr(settings.arrival, key[len("arrival."):]) if key.startswith("arrival.") \
                else getattr(settings, key)
            set_editor_value(editor, value)

    def restore_defaults(self) -> None:
        self.show_settings(AnalysisSettings())

    def settings(self) -> AnalysisSettings:
        """The settings shown; InputError when two values contradict each other."""
        values = {key: editor_value(editor) for key, editor in self.editors.items()}
        arrival = {key[len("arrival."):]: v for key, v in values.items() if key.startswith("arrival.")}
        top = {key: v for key, v in values.items() if not key.startswith("arrival.")}
        return AnalysisSettings(arrival=ArrivalSettings(**arrival), **top)  # checked as a whole

    def accept(self) -> None:
        try:
            self.settings()
        except InputError as exc:  # e.g. tracked frames not above the persistence
            QMessageBox.warning(self, "Check the settings", one_line(exc))
            return
        super().accept()


if __name__ == "__main__":  # pragma: no cover - a quick look
    from PySide6.QtWidgets import QApplication

    app = QApplication([])
    dialog = AnalysisSettingsDialog("demo experiment", AnalysisSettings(), several=True)
    dialog.setAttribute(Qt.WA_DeleteOnClose)
    dialog.exec()
    print(dialog.settings())
