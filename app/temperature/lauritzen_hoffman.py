"""Lauritzen-Hoffman constants and results, and the Hoffman-Weeks helper.

The widgets show the project's series constants and report edits as signals; the
temperature view turns each edit into one undoable command. Results come from
``analysis.kinetics.lauritzen_hoffman``.
"""

from __future__ import annotations

import math

from PySide6 import QtCore, QtWidgets

from analysis.kinetics.materials import list_materials
from analysis.reporting.report import HW_PAIRS_KEY
from analysis.settings import (
    DEFAULT_STAGE_UNCERTAINTY_K,
    DEFAULT_U_STAR_J_PER_MOL,
    MAX_STAGE_UNCERTAINTY_K,
    STAGE_UNCERTAINTY_KEY,
    T_INF_BELOW_TG_K,
    t_inf_default_c,
)
from app.widgets.formatting import DASH, fmt, fmt_estimate, fmt_pm
from app.widgets.forms import FormPanel
from app.widgets.help_panel import help_button

NOT_SET = -300.0  # spin-box minimum shown as "not set"
TRANSPORT_SETS = {
    "universal": (DEFAULT_U_STAR_J_PER_MOL, T_INF_BELOW_TG_K),  # U* J/mol, Tg - T_inf in K
    "WLF": (17238.0, 51.6),
}
HW_KEY = HW_PAIRS_KEY  # the series key the report reads
_SYMBOLS = {"tm0_c": "Tm0", "tg_c": "Tg", "u_star_j_per_mol": "U*", "t_inf_c": "T∞",
            STAGE_UNCERTAINTY_KEY: "stage-temperature uncertainty"}


def _spin(name: str, suffix: str, low: float, high: float, decimals: int = 1) -> QtWidgets.QDoubleSpinBox:
    spin = QtWidgets.QDoubleSpinBox(objectName=name)
    spin.setRange(low, high)
    spin.setDecimals(decimals)
    spin.setSuffix(suffix)
    spin.setKeyboardTracking(False)
    spin.setSpecialValueText("not set")
    return spin


class ConstantsForm(QtWidgets.QGroupBox):
    """Material, Tm0, Tg, U*, T∞: every edit is reported once, when it is finished."""

    series_edited = QtCore.Signal(dict, str)  # the new series values, undo text
    material_chosen = QtCore.Signal(object)  # material name or None (custom values)

    def __init__(self, parent=None):
        super().__init__("Lauritzen-Hoffman constants", parent)
        self._filling = False
        self.material = QtWidgets.QComboBox(objectName="material")
        self.material.addItem("custom values", None)
        for material in list_materials():
            self.material.addItem(f"{material.name} ({material.full_name})", material.name)
        self.material.activated.connect(lambda _i: self._emit_material())
        for combo in (self.material,):
            combo.setSizeAdjustPolicy(QtWidgets.QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.setMinimumContentsLength(10)
        self.tm0 = _spin("tm0_c", " °C", NOT_SET, 500.0)
        self.tg = _spin("tg_c", " °C", NOT_SET, 400.0)
        self.u_star = _spin("u_star_j_per_mol", " J/mol", 0.0, 100000.0, 0)
        self.t_inf_auto = QtWidgets.QCheckBox(f"Tg − {T_INF_BELOW_TG_K:g} K", objectName="t_inf_auto")
        self.tm0.setToolTip("Equilibrium melting temperature (Hoffman-Weeks helper below)")
        self.tg.setToolTip("Glass transition temperature")
        self.u_star.setToolTip("Activation energy of chain transport to the growth front")
        self.t_inf = _spin("t_inf_c", " °C", NOT_SET, 400.0)
        self.transport = QtWidgets.QComboBox(objectName="transport_set")
        self.transport.addItem("set U* and T∞…", None)
        self.transport.addItem(f"universal: {DEFAULT_U_STAR_J_PER_MOL:g} J/mol, Tg − {T_INF_BELOW_TG_K:g} K",
                               "universal")
        self.transport.addItem("WLF: 17 238 J/mol, Tg − 51.6 K", "WLF")
        self.transport.activated.connect(self._transport_chosen)
        self.transport.setSizeAdjustPolicy(QtWidgets.QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.transport.setMinimumContentsLength(10)
        self.stage_u = QtWidgets.QDoubleSpinBox(objectName=STAGE_UNCERTAINTY_KEY)
        self.stage_u.setRange(0.0, MAX_STAGE_UNCERTAINTY_K)
        self.stage_u.setDecimals(2)
        self.stage_u.setSingleStep(0.1)
        self.stage_u.setPrefix("± ")
        self.stage_u.setSuffix(" K")
        self.stage_u.setKeyboardTracking(False)
        self.stage_u.setToolTip(f"Standard uncertainty of every Tc of the project (default ±"
                                f"{DEFAULT_STAGE_UNCERTAINTY_K:g} K, common practice for a calibrated "
                                "stage); an experiment's Properties can override it")
        for key, spin in (("tm0_c", self.tm0), ("tg_c", self.tg), ("u_star_j_per_mol", self.u_star),
                          ("t_inf_c", self.t_inf), (STAGE_UNCERTAINTY_KEY, self.stage_u)):
            spin.editingFinished.connect(lambda key=key, spin=spin: self._spin_done(key, spin))
        self.t_inf_auto.toggled.connect(self._auto_toggled)
        form = QtWidgets.QFormLayout(self)
        form.addRow("Material", self._with_help(self.material, "lauritzen_hoffman"))
        form.addRow("Tm0", self._with_help(self.tm0, "hoffman_weeks"))
        form.addRow("Tg", self._with_help(self.tg, "transport_constants"))
        form.addRow("U*", self._with_help(self.u_star, "transport_constants"))
        t_inf_row = QtWidgets.QHBoxLayout()
        t_inf_row.addWidget(self.t_inf, 1)
        t_inf_row.addWidget(self.t_inf_auto)
        form.addRow("T∞", t_inf_row)
        form.addRow("", self.transport)
        form.addRow("Stage uncertainty", self._with_help(self.stage_u, "intervals"))
        self.series: dict = {}

    def _with_help(self, widget, key) -> QtWidgets.QWidget:
        box = QtWidgets.QWidget()
        row = QtWidgets.QHBoxLayout(box)
        row.setContentsMargins(0, 0, 0, 0)
        row.addWidget(widget, 1)
        row.addWidget(help_button(key, box))
        return box

    def fill(self, material: str | None, series: dict) -> None:
        """Show the project's values (no signals)."""
        self._filling = True
        try:
            self.series = dict(series)
            self.material.setCurrentIndex(max(0, self.material.findData(material)))
            for key, spin in (("tm0_c", self.tm0), ("tg_c", self.tg), ("t_inf_c", self.t_inf)):
                value = series.get(key)
                spin.setValue(NOT_SET if value is None else float(value))
            self.u_star.setValue(float(series.get("u_star_j_per_mol", DEFAULT_U_STAR_J_PER_MOL)))
            stage_u = series.get(STAGE_UNCERTAINTY_KEY)
            self.stage_u.setValue(DEFAULT_STAGE_UNCERTAINTY_K if stage_u is None else float(stage_u))
            auto = series.get("t_inf_c") is None
            self.t_inf_auto.setChecked(auto)
            self.t_inf.setEnabled(not auto)
            if auto and series.get("tg_c") is not None:
                self.t_inf.setValue(t_inf_default_c(float(series["tg_c"])))
        finally:
            self._filling = False

    def _changed(self, changes: dict, text: str) -> None:
        if self._filling:
            return
        new = {**self.series, **changes}
        if new != self.series:
            self.series_edited.emit(new, text)

    def _spin_done(self, key: str, spin: QtWidgets.QDoubleSpinBox) -> None:
        value = None if spin.value() <= NOT_SET else round(spin.value(), spin.decimals())
        if key == STAGE_UNCERTAINTY_KEY:
            current = self.series.get(key)
            if value == (DEFAULT_STAGE_UNCERTAINTY_K if current is None else current):
                return  # the default shown, not changed: nothing to store
        if key == "t_inf_c" and self.t_inf_auto.isChecked():
            return
        if self.series.get(key) != value:
            shown = "not set" if value is None else f"{value:g}{spin.suffix()}"
            self._changed({key: value}, f"Set {_SYMBOLS[key]} = {shown}")

    def _auto_toggled(self, auto: bool) -> None:
        self.t_inf.setEnabled(not auto)
        value = None if auto else (None if self.t_inf.value() <= NOT_SET else self.t_inf.value())
        self._changed({"t_inf_c": value}, "T∞ = Tg − 30 K" if auto else "Set T∞")

    def _transport_chosen(self, _row: int) -> None:
        key = self.transport.currentData()
        self.transport.setCurrentIndex(0)
        if key is None:
            return
        u_star, offset = TRANSPORT_SETS[key]
        tg = self.series.get("tg_c")
        t_inf = None if (tg is None or key == "universal") else round(float(tg) - offset, 2)
        self._changed({"u_star_j_per_mol": u_star, "t_inf_c": t_inf}, f"Use the {key} transport constants")

    def _emit_material(self) -> None:
        if not self._filling:
            self.material_chosen.emit(self.material.currentData())


class LHResults(FormPanel):
    TITLE = "Lauritzen-Hoffman fit"
    ROWS = [
        ("kg", "Kg", "kg"),
        ("g0", "G0", "lauritzen_hoffman"),
        ("regimes", "regimes", "regimes"),
        ("ratio", "slope ratio (theory 2)", "regimes"),
        ("sigma_sigma_e", "σσe", "sigma_sigma_e"),
        ("sigma", "σ, σe", "sigma_sigma_e"),
    ]

    def __init__(self, parent=None):
        super().__init__(parent, problem_name="lh_message")
        self.message = self.problem
        self.add_full_row(self.problem)

    def show_fit(self, fit, intervals=None) -> None:
        """``fit``: ``analysis.kinetics.lauritzen_hoffman.LHAnalysis``; ``intervals``: its
        ``analysis.kinetics.lh_intervals.LHIntervals`` (None: not known yet, point values
        only). The intervals are those of the one-line fit; with regimes each regime's Kg
        keeps the ± of its own line."""
        overall = fit.overall
        one_line_kg = _kg(overall) if intervals is None else fmt_estimate(intervals.kg_k2, "K²")
        one_line_g0 = (fmt(overall.g0_um_per_min, "µm/min") if intervals is None
                       else fmt_estimate(intervals.g0_um_per_min, "µm/min"))
        if len(fit.regimes) > 1:
            kg = [f"{_kg(r)} ({r.name}, {r.t_low_c:.1f}-{r.t_high_c:.1f} °C)" for r in fit.regimes]
            self.form.set("kg", "\n".join(kg + [f"one line: {one_line_kg}"]))
            g0 = "; ".join(fmt(r.g0_um_per_min, "µm/min") for r in fit.regimes)
            self.form.set("g0", f"{g0}\none line: {one_line_g0}")
        else:
            self.form.set("kg", one_line_kg)
            self.form.set("g0", one_line_g0)
        self.form.set("regimes", _regimes_text(fit, intervals))
        self.form.set("ratio", DASH if fit.regime_ratio is None else f"{fit.regime_ratio:.2f}")
        if intervals is None:
            self.form.set("sigma_sigma_e", fmt(fit.sigma_sigma_e_j2_per_m4, "J²/m⁴"))
            sigma_e = fmt(None if fit.sigma_e_j_m2 is None else fit.sigma_e_j_m2 * 1e3, "mJ/m²")
        else:
            self.form.set("sigma_sigma_e", fmt_estimate(intervals.sigma_sigma_e_j2_per_m4, "J²/m⁴"))
            sigma_e = (DASH if fit.sigma_e_j_m2 is None
                       else fmt_estimate(intervals.sigma_e_j_m2.scaled(1e3), "mJ/m²"))
        sigma = fmt(None if fit.sigma_j_m2 is None else fit.sigma_j_m2 * 1e3, "mJ/m²")
        self.form.set("sigma", f"σ {sigma} (from the material), σe {sigma_e}")
        self.message.setText("; ".join(fit.warnings))


def _kg(regime) -> str:
    return fmt_pm(regime.kg_k2, regime.kg_ci95, "K²")


def _regimes_text(fit, intervals) -> str:
    """The break temperature with its interval and how often the draws find a break."""
    if fit.break_c is None:
        text = "one line suffices"
    elif intervals is None:
        text = f"break at {fmt(fit.break_c, '°C')}"
    else:
        text = f"break at {fmt_estimate(intervals.break_c, '°C')}"
    if intervals is not None and intervals.break_fraction is not None:
        text += f"\na break in {intervals.break_fraction:.0%} of the resampled series"
    return text


class HoffmanWeeksHelper(QtWidgets.QGroupBox):
    """(Tc, Tm) pairs typed in a small table; Tm0 by the Hoffman-Weeks extrapolation."""

    pairs_edited = QtCore.Signal(list)  # [[tc or None, tm or None], ...]
    tm0_adopted = QtCore.Signal(float)

    def __init__(self, parent=None):
        super().__init__("Hoffman-Weeks: Tm0 from melting points", parent)
        self._filling = False
        self.table = QtWidgets.QTableWidget(0, 2, objectName="hw_table")
        self.table.setHorizontalHeaderLabels(["Tc (°C)", "Tm (°C)"])
        self.table.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().setVisible(False)
        self.table.setMaximumHeight(150)
        self.table.cellChanged.connect(lambda *_: self._emit())
        add, remove = QtWidgets.QPushButton("Add row"), QtWidgets.QPushButton("Remove row")
        add.clicked.connect(self.add_row)
        remove.clicked.connect(self.remove_row)
        self.adopt = QtWidgets.QPushButton("Use as Tm0", objectName="hw_adopt")
        self.adopt.setEnabled(False)
        self.adopt.clicked.connect(lambda: self.tm0_adopted.emit(self.estimate.tm0_c))
        self.result = QtWidgets.QLabel(DASH, objectName="hw_result")
        self.result.setWordWrap(True)
        self.estimate = None
        buttons = QtWidgets.QHBoxLayout()
        for widget in (add, remove):
            buttons.addWidget(widget)
        buttons.addWidget(help_button("hoffman_weeks", self))
        layout = QtWidgets.QVBoxLayout(self)
        layout.addWidget(self.table)
        layout.addLayout(buttons)
        layout.addWidget(self.adopt)
        layout.addWidget(self.result)

    def fill(self, pairs) -> None:
        self._filling = True
        try:
            self.table.setRowCount(len(pairs))
            for row, pair in enumerate(pairs):
                for column, value in enumerate(pair):
                    self.table.setItem(row, column, QtWidgets.QTableWidgetItem("" if value is None else f"{value:g}"))
        finally:
            self._filling = False

    def pairs(self) -> list:
        rows = []
        for row in range(self.table.rowCount()):
            rows.append([_number(self.table.item(row, column)) for column in (0, 1)])
        return rows

    def complete_pairs(self) -> tuple[list[float], list[float]]:
        done = [p for p in self.pairs() if None not in p]
        return [p[0] for p in done], [p[1] for p in done]

    def add_row(self) -> None:
        self.pairs_edited.emit(self.pairs() + [[None, None]])

    def remove_row(self) -> None:
        pairs = self.pairs()
        if pairs:
            row = self.table.currentRow()
            pairs.pop(row if 0 <= row < len(pairs) else -1)
            self.pairs_edited.emit(pairs)

    def _emit(self) -> None:
        if not self._filling:
            self.pairs_edited.emit(self.pairs())

    def show_estimate(self, estimate, problem: str = "") -> None:
        """``estimate``: ``HoffmanWeeks`` or a falsy failure (its reason shown)."""
        self.estimate = estimate if estimate else None
        self.adopt.setEnabled(bool(estimate))
        if not estimate:
            self.result.setText(problem or getattr(estimate, "reason", DASH))
            return
        self.result.setText(f"Tm0 = {estimate.tm0_c:.1f} °C, γ = {estimate.gamma:.2f}, "
                            f"R² = {estimate.r2:.4f}.\n{estimate.caveat}")


def _number(item) -> float | None:
    if item is None or not item.text().strip():
        return None
    try:
        value = float(item.text().replace(",", "."))
    except ValueError:
        return None
    return value if math.isfinite(value) else None
