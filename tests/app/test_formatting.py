"""One way to write numbers, uncertainties, powers of ten and units in the application."""

from __future__ import annotations

from app.widgets.formatting import DASH, fmt, fmt_interval, fmt_pm, k_unit


def test_numbers_and_powers_of_ten():
    assert fmt(32.14, "µm/min") == "32.1 µm/min"
    assert fmt(4.6e5, "mm⁻²") == "4.6 × 10⁵ mm⁻²"
    assert fmt(4.6e-5) == "4.6 × 10⁻⁵"
    assert fmt(5000.0, digits=2) == "5 × 10³" and fmt(0.00215) == "0.00215"
    assert fmt(None, "s") == DASH and fmt(float("nan")) == DASH
    # below 10⁴ but more digits than three figures can show plainly: never "4.58e+03"
    assert fmt(4580.0, "mm⁻³") == "4.58 × 10³ mm⁻³" and fmt(999.4) == "999"


def test_uncertainty_is_the_95_ci_half_width_and_shares_the_power_of_ten():
    assert fmt_pm(32.14, 1.23, "µm/min") == "32.1 ± 1.2 µm/min (95 % CI)"
    assert fmt_pm(4.6e5, 3.4e2, "mm⁻²") == "(4.6 ± 0.0034) × 10⁵ mm⁻² (95 % CI)"
    assert fmt_pm(2.5, None) == "2.5"
    assert fmt_interval(12.0, 11.0, 13.5, "µm/min") == "12 µm/min (95 % CI 11 – 13.5)"
    # a narrow interval gets the figures that tell its limits from the value
    assert fmt_interval(1.2581, 1.2553, 1.2619, "min") == "1.258 min (95 % CI 1.255 – 1.262)"
    assert fmt_interval(3.0, 3.0, 3.0) == "3 (95 % CI 3 – 3)"  # an exact value stays short


def test_avrami_k_states_its_n():
    assert fmt(4.6e-5, k_unit(3.0)) == "4.6 × 10⁻⁵ min⁻ⁿ, n = 3.00"
    assert k_unit(None) == DASH


def test_logarithmic_axes_use_the_same_rule(qapp):
    from app.widgets.plotting import DecadeAxis

    axis = DecadeAxis("left")
    assert axis.logTickStrings([0.0, 1.30103, 1.5, 3.69897, 4.69897, -3.69897], 1.0, 1.0) == [
        "1", "20", "", "5 × 10³", "5 × 10⁴", "2 × 10⁻⁴"]


def test_a_logarithmic_axis_labels_each_decade_once(qapp):
    from app.widgets.plotting import DecadeAxis

    axis = DecadeAxis("left")
    axis.setLogMode(False, True)
    labels = [text for spacing, values in axis.tickValues(1.8, 4.8, 300)
              for text in axis.tickStrings(values, 1.0, spacing) if text]
    assert sorted(labels) == sorted(["1 × 10²", "1 × 10³", "1 × 10⁴", "2 × 10²", "5 × 10²",
                                     "2 × 10³", "5 × 10³", "2 × 10⁴", "5 × 10⁴"])
