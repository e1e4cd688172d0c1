"""Tests of workbench.units: engineering quantities at the edges.

Reference for every prefix and unit factor below: BIPM, "The International System of Units
(SI)", 9th edition, 2019, Table 7 (SI prefixes) and section 3 (a prefix attached to a unit
with an exponent is raised with it: 1 cm3 = (1e-2 m)^3 = 1e-6 m3). Expected values are
written as decimal literals, not computed by the module.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from workbench.units import (
    format_quantity,
    parse_quantity,
    parse_unit,
    scale_by_power_of_ten,
    unit_exponent,
    unit_scale,
)

# (text, expected SI unit, expected value) -- SI brochure 9th ed. Table 7 prefixes
SI_BROCHURE_CASES = [
    ("100k", "Hz", 100e3),
    ("100 kHz", "Hz", 100e3),
    ("100kHz", "Hz", 100e3),
    ("1.5M", "Hz", 1.5e6),
    ("2 GHz", "Hz", 2e9),
    ("50mT", "T", 0.05),
    ("50 mT", "T", 0.05),
    ("50m", "T", 0.05),
    ("0.35mm", "m", 0.35e-3),
    ("0.35 mm", "m", 0.35e-3),
    ("0.35m", "m", 0.35),  # a suffix that spells the expected unit is the unit, not milli
    ("25 mm2", "m2", 25e-6),
    ("25 mm^2", "m2", 25e-6),
    ("25 mm²", "m2", 25e-6),
    ("3.2 cm3", "m3", 3.2e-6),
    ("3.2 cm^3", "m3", 3.2e-6),
    ("1.2e-3", "", 1.2e-3),
    ("1.2E-3", "", 1.2e-3),
    ("2u", "s", 2e-6),
    ("2 µs", "s", 2e-6),  # U+00B5 micro sign
    ("2 μs", "s", 2e-6),  # U+03BC Greek mu
    ("2 us", "s", 2e-6),
    ("500 n", "s", 500e-9),
    ("500ns", "s", 500e-9),
    ("12 ps", "s", 12e-12),
    ("400 V", "V", 400.0),
    ("2.5 kV", "V", 2.5e3),
    ("350 mA", "A", 0.35),
    ("2.50 kW/m3", "W/m3", 2.5e3),
    ("250 mW/cm3", "W/m3", 250e3),
    ("1.3 W/kg", "W/kg", 1.3),
    ("1.3 mW/g", "W/kg", 1.3),
    ("0.48 uohm m", "ohm m", 0.48e-6),
    ("48 µΩ·cm", "ohm m", 48e-8),
    ("0.5 ohm mm2/m", "ohm m", 0.5e-6),
    ("24", "", 24.0),
    ("2k", "", 2000.0),
    ("50 %", "", 0.5),
    ("100 degC", "degC", 100.0),
    ("100 °C", "degC", 100.0),
    ("-20 mT", "T", -0.02),
    ("+.5k", "Hz", 500.0),
    ("  7.5 kHz  ", "Hz", 7.5e3),
    ("1e-3 s", "s", 1e-3),
    ("10 ms", "s", 10e-3),
    ("12 mWb", "Wb", 12e-3),
]


@pytest.mark.parametrize(("text", "unit", "expected"), SI_BROCHURE_CASES)
def test_parse_quantity_si_prefixes(text, unit, expected):
    # exact equality: the parser turns "3.2 cm3" into the single literal float("3.2e-6")
    assert parse_quantity(text, unit, name="x") == expected


def test_area_and_volume_prefixes_are_raised_with_the_exponent():
    # SI brochure 9th ed. section 3: 1 mm2 = 1e-6 m2, 1 cm3 = 1e-6 m3, 1 mm3 = 1e-9 m3
    assert parse_quantity("1 mm2", "m2", name="area") == 1e-6
    assert parse_quantity("1 cm2", "m2", name="area") == 1e-4
    assert parse_quantity("1 cm3", "m3", name="volume") == 1e-6
    assert parse_quantity("1 mm3", "m3", name="volume") == 1e-9
    assert unit_scale("cm3", "m3") == 1e-6
    assert unit_exponent("mm2", "m2") == -6


def test_real_numbers_pass_through():
    assert parse_quantity(0.2, "T", name="b_peak") == 0.2
    assert parse_quantity(100000, "Hz", name="freq") == 100000.0


@pytest.mark.parametrize(
    ("text", "unit", "fragment"),
    [
        ("50 mm", "T", "not a unit of 'T'"),
        ("50 mT", "Hz", "not a unit of 'Hz'"),
        ("3.2 cm3", "m2", "not a unit of 'm2'"),
        ("2.5 W/kg", "W/m3", "not a unit of 'W/m3'"),
        ("abc", "Hz", "cannot read 'abc'"),
        ("", "T", "cannot read ''"),
        ("1,5", "T", "decimal point"),
        ("1,5 mT", "T", "decimal point"),
        ("5 parsecs", "m", "unknown unit 'parsecs'"),
        ("5 kV/furlong", "V", "unknown unit 'furlong'"),
        ("5 V/m/s", "V", "more than one '/'"),
        ("inf", "Hz", "finite"),
        ("-inf", "Hz", "finite"),
        ("nan", "T", "finite"),
        ("1e999", "Hz", "finite"),
        ("300 K", "degC", "unknown unit 'K'"),
        ("12 turns", "", "unknown unit 'turns'"),
        ("5 m0", "m", "zero exponent"),
    ],
)
def test_parse_quantity_errors_name_parameter_and_text(text, unit, fragment):
    with pytest.raises(ValueError) as info:
        parse_quantity(text, unit, name="b_peak")
    message = str(info.value)
    assert message.startswith("b_peak:")
    assert fragment in message
    assert repr(text) in message


@pytest.mark.parametrize("value", [math.inf, -math.inf, math.nan])
def test_nonfinite_numbers_rejected(value):
    with pytest.raises(ValueError, match="freq: value must be finite"):
        parse_quantity(value, "Hz", name="freq")


def test_non_text_rejected():
    with pytest.raises(ValueError, match="duty"):
        parse_quantity(True, "", name="duty")
    with pytest.raises(ValueError, match="duty"):
        parse_quantity([0.5], "", name="duty")  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("value", "unit", "expected"),
    [
        (2500.0, "W/m3", "2.50 kW/m3"),
        (0.035, "T", "35.0 mT"),
        (120e3, "Hz", "120 kHz"),
        (100e3, "Hz", "100 kHz"),
        (25e-6, "m2", "25.0 mm2"),
        (0.01, "m2", "100 cm2"),
        (3.2e-6, "m3", "3.20 cm3"),
        (0.35e-3, "m", "350 µm"),
        (5e-9, "s", "5.00 ns"),
        (0.48e-6, "ohm m", "0.480 µohm m"),
        (1.3, "W/kg", "1.30 W/kg"),
        (999.7, "Hz", "1.00 kHz"),  # rounds into the next prefix
        (0.0, "T", "0.00 T"),
        (-0.2, "T", "-200 mT"),
        (24.0, "", "24.0"),
        (85.0, "degC", "85.0 degC"),
        (1.2345e6, "W/m3", "1.23 MW/m3"),
    ],
)
def test_format_quantity(value, unit, expected):
    # expected strings written by hand with SI prefixes (SI brochure 9th ed. Table 7)
    assert format_quantity(value, unit) == expected


def test_format_digits():
    assert format_quantity(0.0351234, "T", digits=5) == "35.123 mT"
    assert format_quantity(0.0351234, "T", digits=1) == "40 mT"
    with pytest.raises(ValueError, match="digits"):
        format_quantity(1.0, "T", digits=0)
    with pytest.raises(ValueError, match="furlong"):
        format_quantity(1.0, "V/furlong")


def test_format_nonfinite_is_shown_not_raised():
    assert format_quantity(math.inf, "W/m3") == "inf W/m3"


@pytest.mark.parametrize("unit", ["Hz", "T", "m", "m2", "m3", "s", "V", "A", "W/m3", "W/kg",
                                  "ohm m"])
@given(x=st.floats(min_value=1e-10, max_value=1e10, allow_nan=False))
def test_format_then_parse_round_trips_to_the_digits_shown(unit, x):
    # closed form: a value shown with 6 significant figures is within 5e-6 relative of x
    shown = format_quantity(x, unit, digits=6)
    back = parse_quantity(shown, unit, name="x")
    assert math.isclose(back, x, rel_tol=5.0001e-6)


@given(x=st.floats(allow_nan=False, allow_infinity=False))
def test_bare_number_is_exact(x):
    # repr() of a float round-trips exactly (Python language reference, float repr)
    assert parse_quantity(repr(x), "T", name="x") == x


def test_parse_unit_dimensions():
    # W/m3 and W/kg are different quantities; ohm mm2/m is a resistivity
    assert parse_unit("W/m3").dimension != parse_unit("W/kg").dimension
    assert parse_unit("ohm mm2/m").dimension == parse_unit("ohm m").dimension
    assert parse_unit("").scale == 1.0
    assert parse_unit("mW/cm3").scale == 1e3
    with pytest.raises(ValueError, match="'m/s/s'"):
        parse_unit("m/s/s")


def test_scale_by_power_of_ten_is_one_rounding():
    # 500 / 1e9 is the correctly rounded 5e-7; 500 * 1e-9 is not (IEEE 754 arithmetic)
    assert scale_by_power_of_ten(500.0, -9) == 5e-7
    assert scale_by_power_of_ten(2.5, 3) == 2500.0
    assert scale_by_power_of_ten(7.0, 0) == 7.0


# --- plausibility at the edges (issue 11 item 5, issue 10 plausibility) -----------------------
# Ranges: common practice, no source (absolute zero is -273.15 degC by the SI definition of the
# kelvin; laminations are thinner than 10 mm; a winding has at least one turn).
@pytest.mark.parametrize("text, kind, word", [
    ("-300", "temperature", "too small"),
    ("-273.15", "temperature", "too small"),
    ("1e6", "temperature", "too large"),
    ("1e3", "thickness", "too large"),
    ("0.5", "thickness", "too large"),
    ("1e-300", "resistivity", "too small"),
    ("1e-300", "turns", "too small"),
    ("52", "area", "too large"),
    ("1e-13", "area", "too small"),
])
def test_parse_checked_refuses_values_orders_of_magnitude_off(text, kind, word):
    from workbench.units import parse_checked

    with pytest.raises(ValueError, match=word) as info:
        parse_checked(text, kind, name=f"--{kind}")
    msg = str(info.value)
    assert f"--{kind}" in msg and len(msg) < 300


@pytest.mark.parametrize("text, kind, si", [
    ("20mm", "thickness", 0.02),
    ("300", "temperature", 300.0),
    ("2 m2", "area", 2.0),
])
def test_parse_checked_warns_outside_the_usual_range(text, kind, si):
    from workbench.units import parse_checked

    value, warnings = parse_checked(text, kind, name=f"--{kind}")
    assert value == pytest.approx(si)
    assert len(warnings) == 1 and "usual range" in warnings[0]


@pytest.mark.parametrize("text, kind, si", [
    ("52mm2", "area", 52e-6), ("0.35mm", "thickness", 0.35e-3), ("-40", "temperature", -40.0),
    ("52 uohm cm", "resistivity", 52e-8), ("1", "turns", 1.0), ("7.65 g/cm3", "density", 7650.0),
])
def test_parse_checked_passes_ordinary_values_silently(text, kind, si):
    from workbench.units import parse_checked

    value, warnings = parse_checked(text, kind, name=kind)
    assert value == pytest.approx(si, rel=1e-12) and warnings == ()


@pytest.mark.parametrize("text, hint", [("５", "digits 0-9"), ("٣", "digits 0-9"), ("1_000", "digit separators")])
def test_non_ascii_digits_and_digit_separators_are_refused(text, hint):
    with pytest.raises(ValueError, match=hint):
        parse_quantity(text, "", name="x")


def test_booleans_are_not_numbers_anywhere():
    from workbench.checks import finite_number, positive_array, positive_number

    for fn in (positive_number, finite_number, positive_array):
        with pytest.raises(ValueError, match="must be a number"):
            fn(True, "turns")
    with pytest.raises(ValueError, match="must be a number"):
        positive_array(np.array([True, False]), "freq")


def test_finite_result_names_the_inputs():
    from workbench.checks import finite_result

    with pytest.raises(ValueError, match="freq=1e\\+308"):
        finite_result(np.float64(np.inf), "loss", freq=1e308)
    assert finite_result(2.0, "loss", freq=1.0) == 2.0
