"""Header and word matching: case, spaces, punctuation and units in brackets."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from auditor.schedule.vocabulary import (
    EQUIPMENT_COLUMNS,
    PANEL_COLUMNS,
    match_header,
    match_word,
    split_header,
    suggest_header,
)
from auditor.units import unit_factor

_SPELLINGS = [(c, s, "panels") for c in PANEL_COLUMNS for s in (c.name, *c.synonyms)
              if "(" not in s]
_SPELLINGS += [(c, s, "equipment") for c in EQUIPMENT_COLUMNS for s in (c.name, *c.synonyms)
               if "(" not in s]


def _mangle(text: str, data) -> str:
    """Re-case each letter and put random spaces or punctuation between words."""
    out = []
    for ch in text:
        if ch == " ":
            out.append(data.draw(st.sampled_from([" ", "  ", "_", "-", ". ", "", "/"])))
        elif ch.isalpha():
            out.append(ch.upper() if data.draw(st.booleans()) else ch.lower())
        else:
            out.append(ch)
    return "".join(out)


@settings(max_examples=300, deadline=None)
@given(data=st.data())
def test_property_header_spellings(data):
    column, spelling, table = data.draw(st.sampled_from(_SPELLINGS))
    header = _mangle(spelling, data)
    if data.draw(st.booleans()):
        header = " " + header + " "
    hit = match_header(header, table)
    assert hit is not None, header
    assert hit[0] is column, header


_UNITS = {"length": ["mm", "m", "in", "ft", "cm"], "areal_density": ["g/m²", "oz/yd²", "kg/m2"],
          "tension": ["N/m", "kN/m", "lbf/in"], "rotational_speed": ["rpm"],
          "frequency": ["Hz", "kHz"], "velocity": ["m/s", "fpm"],
          "bending_stiffness": ["N·m", "lbf·in"], "airflow_resistance": ["rayl", "Pa·s/m"],
          "dimensionless": ["-", "%"]}
_QUANTITIES = [(c, s, t) for c, s, t in _SPELLINGS if c.kind == "quantity"]


@settings(max_examples=300, deadline=None)
@given(data=st.data())
def test_property_header_with_unit_in_brackets(data):
    column, spelling, table = data.draw(st.sampled_from(_QUANTITIES))
    unit = data.draw(st.sampled_from(_UNITS[column.dimension]))
    left, right = data.draw(st.sampled_from([("(", ")"), ("[", "]"), ("{", "}")]))
    gap = data.draw(st.sampled_from(["", " ", "  "]))
    header = f"{_mangle(spelling, data)}{gap}{left}{unit}{right}"
    hit = match_header(header, table)
    assert hit is not None, header
    assert hit[0] is column and hit[1] == unit, header
    unit_factor(hit[1], column.dimension)  # the unit is one the column accepts


@pytest.mark.parametrize(("header", "name", "unit"), [
    ("Width (mm)", "Width", "mm"),
    ("Tension [lbf/in]", "Tension", "lbf/in"),
    ("Width / mm", "Width", "mm"),
    ("Width, mm", "Width", "mm"),
    ("Width in mm", "Width", "mm"),
    ("Zone", "Zone", None),
])
def test_split_header(header, name, unit):
    assert split_header(header) == (name, unit)


def test_min_max_headers_are_not_units():
    # "(min)" names the minimum speed, not minutes
    assert match_header("rpm (min)", "equipment")[0].field == "rpm_min"
    assert match_header("Speed max (rpm)", "equipment")[0].field == "rpm_max"


def test_words_and_suggestions():
    assert match_word("Rectangular", "shape") == ("rectangle", None)
    assert match_word("PVC film", "material") == ("film", None)
    assert match_word("rectangel", "shape") == (None, "rectangle")
    assert match_word("sealed cavity", "plenum_side") == ("sealed", None)
    assert match_word("xyzzy", "kind") == (None, None)
    assert suggest_header("Tenson", "panels") == "tension"


def test_isolator_headers():
    # the equipment sheet's mount columns, by the names the trade gives them (common practice)
    for header, field, unit in (("Isolator deflection (mm)", "isolator_deflection", "mm"),
                                ("Static deflection [in]", "isolator_deflection", "in"),
                                ("Mount deflection", "isolator_deflection", None),
                                ("Isolator damping", "isolator_damping", None),
                                ("Damping ratio (%)", "isolator_damping", "%"),
                                ("ζ", "isolator_damping", None)):
        column, typed = match_header(header, "equipment")
        assert (column.field, typed) == (field, unit), header
    # on the panel sheet "damping" is still the panel's loss factor
    assert match_header("Damping", "panels")[0].field == "loss_factor"
    assert match_header("Static deflection", "panels") is None
