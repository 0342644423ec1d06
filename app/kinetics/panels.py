"""Number panels of the kinetics view: microscopy prediction, calorimetry fit, comparison.

These widgets only display values computed by ``analysis``; each number has a "?" that
opens its help topic.
"""

from __future__ import annotations

from PySide6 import QtCore, QtWidgets

from analysis.results import COUNTS
from app.widgets.formatting import DASH, fmt, fmt_pm, k_unit
from app.widgets.forms import FormPanel
from app.widgets.help_panel import help_button

#: Plain-notation formulas for the predicted rate constant, by (geometry, mode).
FORMULAS = {
    ("bulk-3d", "athermal"): "k = (4π/3) · N_V · G³,   n = 3",
    ("bulk-3d", "thermal"): "k = (π/3) · Ṅ_V · G³,   n = 4",
    ("bulk-3d", "mixed"): "X = 1 − exp(−[(4π/3)·N₀·G³·t³ + (π/3)·Ṅ_V·G³·t⁴]),  N₀ = initial burst per mm³",
    ("film-2d", "athermal"): "k = π · N_A · G²,   n = 2",
    ("film-2d", "thermal"): "k = (π/3) · Ṅ_A · G²,   n = 3",
    ("film-2d", "mixed"): "X = 1 − exp(−[π·N₀·G²·t² + (π/3)·Ṅ_A·G²·t³]),  N₀ = initial burst per mm²",
}
HALF_TIME_FORMULA = "t½ = (ln 2 / k)^(1/n)"


class PredictionPanel(FormPanel):
    """N, G, predicted n, k, t½ and the formula used."""

    TITLE = "Microscopy → Avrami prediction"
    ROWS = [
        ("mode", "Nucleation mode", "nucleation_mode"),
        ("nuclei_counted", COUNTS["nuclei_counted"][0], "nuclei_counted"),
        ("density_areal", "N_A (areal)", "density_areal"),
        ("thickness", "film thickness h", "density_volumetric"),
        ("density_volumetric", "N_V = N_A / h", "density_volumetric"),
        ("density_used", "N in the prediction", "density_used"),
        ("rate", "Ṅ (rate)", "nucleation_rate"),
        ("growth_rate", "Growth rate G", "growth_rate"),
        ("spherulites_in_pooled_g", COUNTS["spherulites_in_pooled_g"][0], "spherulites_in_pooled_g"),
        ("n", "predicted n", "predicted_k"),
        ("k", "predicted k", "predicted_k"),
        ("t_half", "predicted t½", "half_time"),
    ]

    def __init__(self, parent=None):
        super().__init__(parent, problem_name="prediction_problem")
        self.formula = QtWidgets.QLabel(DASH, objectName="formula")
        self.formula.setWordWrap(True)
        self.formula.setTextInteractionFlags(QtCore.Qt.TextInteractionFlag.TextSelectableByMouse)
        self.formula.setStyleSheet("font-family: monospace; padding: 4px;")
        self.add_full_row(self.formula)
        self.add_full_row(self.problem)

    def show_inputs(self, entry) -> None:
        """The inputs of ``entry``'s prediction (``analysis.reporting.tables.ReportEntry``)."""
        result, inputs = entry.result, entry.prediction_inputs()
        nuc = result.nucleation
        found = nuc.mode or "not determined"
        self.form.set("mode", f"{inputs.mode} (analysis: {found})")
        self.form.values["mode"].setToolTip(nuc.mode_test or "")
        self.form.set("density_areal", fmt(nuc.density_per_mm2, "mm⁻²"))
        h = entry.thickness_um
        self.form.set("thickness", fmt(h, "µm") if h else "not set (needed for N_V)")
        self.form.set("density_volumetric", fmt(entry.density_per_mm3, "mm⁻³"))
        per = "mm⁻³" if inputs.geometry == "bulk-3d" else "mm⁻²"
        used = {"athermal": "every nucleus", "mixed": "initial burst",
                "thermal": "none: rate only"}[inputs.mode]
        self.form.set("density_used", f"{fmt(inputs.density_per_mm_d, per)} ({used})"
                      if inputs.mode != "thermal" else used)
        rates = [fmt(value, unit) for value, unit in ((nuc.rate_per_mm2_per_min, "mm⁻² min⁻¹"),
                                                      (entry.rate_per_mm3_per_min, "mm⁻³ min⁻¹"))
                 if value is not None]
        self.form.set("rate", "; ".join(rates) or f"{DASH} (not measured)")
        g = result.growth_rate
        self.form.set("growth_rate", fmt_pm(g.value, g.ci95_half_width, "µm/min"))
        for key, value in result.counts().items():
            if key in self.form.values:
                self.form.set(key, str(value))

    def show_prediction(self, model, geometry: str) -> None:
        """``model``: analysis.kinetics.avrami.AvramiPrediction, or None with ``problem`` set."""
        self.problem.setText("")
        self.form.set("n", f"{model.n:.3g}")
        self.form.set("k", fmt(model.k_per_min_n, k_unit(model.n)))
        self.form.set("t_half", fmt(model.t_half_min, "min"))
        self.formula.setText(f"{FORMULAS[(geometry, model.mode)]}\n{HALF_TIME_FORMULA}")

    def show_problem(self, text: str, geometry: str | None = None, mode: str | None = None) -> None:
        for key in ("n", "k", "t_half"):
            self.form.set(key, DASH)
        formula = FORMULAS.get((geometry, mode))
        self.formula.setText(f"{formula}\n{HALF_TIME_FORMULA}" if formula else DASH)
        self.problem.setText(text)

    def clear(self, text: str = "") -> None:
        super().clear(text)
        self.formula.setText(DASH)


class CalorimetryPanel(FormPanel):
    """The calorimetry isotherm's fit results."""

    TITLE = "Calorimetry isotherm → Avrami fit"
    ROWS = [
        ("file", "isotherm file", "calorimetry_conversion"),
        ("induction", "induction time t₀", "induction_time"),
        ("enthalpy", "enthalpy ΔH", "enthalpy"),
        ("crystallinity", "crystallinity ΔH/ΔH0", "enthalpy"),
        ("window", "fit window", "fit_window"),
        ("n", "Avrami n", "fit_window"),
        ("k", "Avrami k", "avrami"),
        ("t_half", "t½ fit / read at X = 0.5", "half_time"),
        ("r2", "R²", "fit_window"),
    ]

    def __init__(self, parent=None):
        super().__init__(parent, problem_name="calorimetry_problem")
        self.add_full_row(self.problem)


class ComparisonTable(QtWidgets.QWidget):
    """n, k, t½ side by side (microscopy prediction, calorimetry), their ratio, and a note."""

    QUANTITIES = ("n", "k", "t½ (min)")

    def __init__(self, parent=None):
        super().__init__(parent)
        box = QtWidgets.QGroupBox("Microscopy (bulk prediction) against calorimetry", self)
        self.table = QtWidgets.QTableWidget(len(self.QUANTITIES), 3, box)
        self.table.setObjectName("comparison_table")
        self.table.setHorizontalHeaderLabels(["microscopy", "calorimetry", "ratio"])
        self.table.horizontalHeaderItem(2).setToolTip("calorimetry / microscopy")
        self.table.setVerticalHeaderLabels(list(self.QUANTITIES))
        self.table.setEditTriggers(QtWidgets.QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QtWidgets.QHeaderView.ResizeMode.Stretch)
        self.table.setFixedHeight(self.table.verticalHeader().length() + self.table.horizontalHeader().height() + 6)
        self.note = QtWidgets.QLabel("")
        self.note.setObjectName("comparison_note")
        self.note.setWordWrap(True)
        inner = QtWidgets.QVBoxLayout(box)
        inner.setContentsMargins(6, 6, 6, 6)
        header = QtWidgets.QHBoxLayout()
        header.addStretch(1)
        header.addWidget(help_button("comparison", box))
        inner.addLayout(header)
        inner.addWidget(self.table)
        inner.addWidget(self.note)
        layout = QtWidgets.QVBoxLayout(self)
        layout.setContentsMargins(0, 0, 0, 0)
        layout.addWidget(box)

    def set_row(self, row: int, cells: tuple[str, str, str]) -> None:
        for column, text in enumerate(cells):
            item = QtWidgets.QTableWidgetItem(text)
            item.setTextAlignment(QtCore.Qt.AlignmentFlag.AlignCenter)
            self.table.setItem(row, column, item)

    def cell(self, row: int, column: int) -> str:
        item = self.table.item(row, column)
        return item.text() if item else ""

    def clear(self, text: str = "") -> None:
        for row in range(len(self.QUANTITIES)):
            self.set_row(row, (DASH, DASH, DASH))
        self.note.setText(text)
