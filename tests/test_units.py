"""Unit parsing against NIST SP 811 conversion factors."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditor.units import (
    UnitError,
    format_quantity,
    normalise_unit_text,
    parse_quantity,
    registry,
    split_number_unit,
    unit_factor,
)

# NIST Special Publication 811 (2008), Appendix B: exact definitions.
INCH = 0.0254  # m, exact
FOOT = 12 * INCH  # m, exact
YARD = 3 * FOOT  # m, exact
POUND = 0.45359237  # kg, exact (avoirdupois)
OUNCE = POUND / 16  # kg, exact (avoirdupois)
STANDARD_GRAVITY = 9.80665  # m/s², exact (NIST SP 811 / CGPM 1901)
POUND_FORCE = POUND * STANDARD_GRAVITY  # N = 4.448 221 615 260 5 N (NIST SP 811 B.9)
MINUTE = 60.0  # s


def test_pound_force_matches_nist_value():
    # NIST SP 811 Appendix B.9: 1 lbf = 4.448 221 615 260 5 N
    assert POUND_FORCE == pytest.approx(4.4482216152605, rel=1e-15)
    with pytest.raises(UnitError, match="measures a force"):
        unit_factor("lbf", "tension")  # a tension is a force per length of edge
    assert parse_quantity("1 lbf*in", "N*m", "bending_stiffness") == pytest.approx(
        POUND_FORCE * INCH, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "default", "dimension", "expected"),
    [
        # lengths, NIST SP 811 B.9: 1 in = 0.0254 m, 1 ft = 0.3048 m
        ("48 in", "m", "length", 48 * INCH),
        ('48"', "m", "length", 48 * INCH),
        ("48 inch", "m", "length", 48 * INCH),
        ("10 ft", "m", "length", 10 * FOOT),
        ("10'", "m", "length", 10 * FOOT),
        ("4' 6\"", "m", "length", 4 * FOOT + 6 * INCH),
        ("1200", "mm", "length", 1.2),
        ("1,200 mm", "m", "length", 1.2),
        ("120 cm", "m", "length", 1.2),
        ("1.2", "m", "length", 1.2),
        # areal density: 1 oz/yd² = 0.028 349 523 125 kg / 0.836 127 36 m² (NIST SP 811 B.9)
        ("1 oz/yd²", "kg/m²", "areal_density", OUNCE / YARD**2),
        ("1 oz/yd^2", "kg/m²", "areal_density", OUNCE / YARD**2),
        ("1 oz/yd2", "kg/m²", "areal_density", OUNCE / YARD**2),
        ("250 g/m²", "kg/m²", "areal_density", 0.25),
        ("250 gsm", "kg/m²", "areal_density", 0.25),
        ("0.25 kg/m2", "g/m²", "areal_density", 0.25),
        ("1 lb/ft²", "kg/m²", "areal_density", POUND / FOOT**2),
        # tension (force per length): 1 lbf/in = 175.126 835 ... N/m
        ("1 lbf/in", "N/m", "tension", POUND_FORCE / INCH),
        ("1 lbf/ft", "N/m", "tension", POUND_FORCE / FOOT),
        ("2.5 kN/m", "N/m", "tension", 2500.0),
        ("900", "N/m", "tension", 900.0),
        ("3", "kN/m", "tension", 3000.0),
        # bending stiffness
        ("5 N·m", "N·m", "bending_stiffness", 5.0),
        ("5 Nm", "N·m", "bending_stiffness", 5.0),
        ("10 lbf·in", "N·m", "bending_stiffness", 10 * POUND_FORCE * INCH),
        # specific airflow resistance: the MKS rayl is 1 Pa·s/m (ISO 9053-1)
        ("800 rayl", "Pa·s/m", "airflow_resistance", 800.0),
        ("800 Pa·s/m", "Pa·s/m", "airflow_resistance", 800.0),
        ("800 Pa.s/m", "Pa·s/m", "airflow_resistance", 800.0),
        ("0.8", "kPa·s/m", "airflow_resistance", 800.0),
        # frequency and speed: 1 Hz of shaft rotation is 60 rpm (common practice)
        ("2 kHz", "Hz", "frequency", 2000.0),
        ("1450", "rpm", "rotational_speed", 1450.0),
        ("25 Hz", "rpm", "rotational_speed", 25 * MINUTE),
        # velocity: 1 ft/min = 0.00508 m/s (NIST SP 811 B.9)
        ("1000 ft/min", "m/s", "velocity", 1000 * FOOT / MINUTE),
        ("1000 fpm", "m/s", "velocity", 1000 * FOOT / MINUTE),
        ("36 km/h", "m/s", "velocity", 10.0),
        # density and plain numbers
        ("1.2 kg/m³", "kg/m³", "density", 1.2),
        ("1.2 kg/m3", "kg/m³", "density", 1.2),
        ("3 %", "", "dimensionless", 0.03),
        ("0.03", "-", "dimensionless", 0.03),
    ],
)
def test_parse_quantity_against_nist_factors(text, default, dimension, expected):
    assert parse_quantity(text, default, dimension) == pytest.approx(expected, rel=1e-12)


def test_lbf_per_inch_value():
    # 1 lbf/in = 4.4482216152605 N / 0.0254 m = 175.126 835 246 ... N/m (NIST SP 811 factors)
    assert parse_quantity("1 lbf/in", "N/m", "tension") == pytest.approx(175.126835246,
                                                                           rel=1e-10)
    # 1 oz/yd² = 0.033 905 747 ... kg/m² (NIST SP 811 factors)
    assert parse_quantity("1 oz/yd²", "kg/m²", "areal_density") == pytest.approx(
        0.0339057475, rel=1e-9)


def test_bare_number_takes_the_default_unit():
    assert parse_quantity(1200, "mm", "length") == pytest.approx(1.2)
    assert parse_quantity(1200.0, "mm", "length") == pytest.approx(1.2)


def test_typo_suggests_the_nearest_unit():
    with pytest.raises(UnitError) as info:
        parse_quantity("3 mmm", "m", "length")
    assert "'mmm'" in str(info.value) and "did you mean 'mm'" in str(info.value)
    with pytest.raises(UnitError, match="did you mean 'gsm'"):
        parse_quantity("250 gms", "kg/m²", "areal_density")


def test_wrong_kind_of_unit_is_named():
    with pytest.raises(UnitError) as info:
        parse_quantity("3 mm", "N/m", "tension")
    message = str(info.value)
    assert "'mm' measures a length" in message and "tension" in message
    with pytest.raises(UnitError, match="measures a pressure"):
        parse_quantity("3 lbf/in²", "N/m", "tension")
    with pytest.raises(UnitError, match="measures a force"):
        parse_quantity("3 N", "N/m", "tension")


def test_not_a_number():
    with pytest.raises(ValueError, match="not a number"):
        parse_quantity("wide", "m", "length")
    with pytest.raises(ValueError, match="decimal"):
        parse_quantity("0,25", "m", "length")
    with pytest.raises(ValueError):
        parse_quantity("nan", "m", "length")
    assert parse_quantity("0,25", "m", "length", decimal_comma=True) == pytest.approx(0.25)


def test_registry_is_created_once():
    assert registry() is registry()


def test_split_number_unit():
    assert split_number_unit("48in") == (48.0, "in")
    assert split_number_unit(" 900 N/m ") == (900.0, "N/m")
    assert split_number_unit("1e3 N/m") == (1000.0, "N/m")
    assert split_number_unit("-3") == (-3.0, "")


def test_normalise_unit_text():
    assert normalise_unit_text("g/m²") == "g/m**2"
    assert normalise_unit_text("kg/m2") == "kg/m**2"
    assert normalise_unit_text("Pa·s/m") == "Pa*s/m"
    assert normalise_unit_text('"') == "inch"


def test_format_quantity():
    assert format_quantity(1.2192, "length") == "1.219 m"
    assert format_quantity(0.25, "areal_density") == "0.25 kg/m²"


_SPELLINGS = {
    # spelling -> factor to SI, from the NIST SP 811 exact definitions above
    ("length", "mm"): 1e-3, ("length", "cm"): 1e-2, ("length", "m"): 1.0,
    ("length", "in"): INCH, ("length", "inch"): INCH, ("length", '"'): INCH,
    ("length", "ft"): FOOT, ("length", "'"): FOOT,
    ("areal_density", "g/m²"): 1e-3, ("areal_density", "g/m^2"): 1e-3,
    ("areal_density", "g/m2"): 1e-3, ("areal_density", "gsm"): 1e-3,
    ("areal_density", "kg/m²"): 1.0, ("areal_density", "oz/yd²"): OUNCE / YARD**2,
    ("tension", "N/m"): 1.0, ("tension", "kN/m"): 1e3, ("tension", "lbf/in"): POUND_FORCE / INCH,
    ("tension", "lbf/ft"): POUND_FORCE / FOOT,
    ("velocity", "m/s"): 1.0, ("velocity", "ft/min"): FOOT / MINUTE,
    ("velocity", "fpm"): FOOT / MINUTE,
}


@settings(max_examples=150, deadline=None)
@given(
    key=st.sampled_from(sorted(_SPELLINGS)),
    number=st.floats(min_value=1e-3, max_value=1e5, allow_nan=False),
    space=st.sampled_from(["", " ", "  "]),
    pad=st.sampled_from(["", " ", "\t"]),
)
def test_property_number_and_unit_spellings(key, number, space, pad):
    dimension, unit = key
    if unit in ('"', "'") and space:
        space = ""
    text = f"{pad}{number!r}{space}{unit}{pad}"
    value = parse_quantity(text, "m", dimension)
    assert math.isclose(value, number * _SPELLINGS[key], rel_tol=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.text(alphabet="qwzxjvk", min_size=2, max_size=6))
def test_property_nonsense_units_raise_unit_error(unit):
    with pytest.raises(UnitError):
        unit_factor(unit, "length")


@pytest.mark.parametrize(
    ("text", "default", "dimension", "expected"),
    [
        # isolator static deflection, as spring catalogues state it (NIST SP 811 B.9: the
        # inch is exactly 0.0254 m); a bare number takes the column's default unit, mm
        ("25 mm", "mm", "length", 0.025),
        ("1 in", "mm", "length", INCH),
        ("1\"", "mm", "length", INCH),
        ("25", "mm", "length", 0.025),
        # isolator damping ratio ζ: SI Brochure (9th ed., 2019) §5.4.7, 1 % = 0.01
        ("5 %", "", "dimensionless", 0.05),
        ("0.05", "", "dimensionless", 0.05),
    ],
)
def test_isolator_quantities(text, default, dimension, expected):
    assert parse_quantity(text, default, dimension) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("value", [float("nan"), float("inf"), float("-inf")])
def test_a_number_cell_that_is_not_finite_is_refused(value):
    # a workbook cell may hold a non-finite float (IEEE 754 NaN or infinity); no reading of
    # a length may pass one on, in any unit
    from auditor.schedule.cells import CellError, quantity_reader

    for unit in ("m", "mm", "in"):
        with pytest.raises(CellError, match="not a finite number"):
            quantity_reader("length", unit)(value)
        with pytest.raises(CellError, match="not a finite number"):
            quantity_reader("length", unit)(str(value))
