"""The rule-set schema: the defaults, the checks and the documented tables all come from it."""

from __future__ import annotations

import inspect
import re
import tomllib
from dataclasses import fields

import pytest

from auditor.rule_schema import (
    RULE_KEYS,
    SECTIONS,
    Bounds,
    readme_with_schema_tables,
    schema_table,
)
from auditor.rules import SOURCES, RuleSet, RuleSetError, parse_ruleset, rules_dir

README = rules_dir() / "README.md"
REGENERATE = (
    "rules/README.md differs from the schema in auditor/rule_schema.py; regenerate its tables "
    "with: python -c \"from pathlib import Path; from auditor.rule_schema import "
    "readme_with_schema_tables as r; p = Path('rules/README.md'); "
    "p.write_text(r(p.read_text(encoding='utf-8')), encoding='utf-8')\"")


def test_the_readme_holds_exactly_the_tables_rendered_from_the_schema():
    text = README.read_text(encoding="utf-8")
    assert readme_with_schema_tables(text) == text, REGENERATE
    for section in SECTIONS:
        assert schema_table(section) in text
    # No table row for a key outside the generated blocks of the schema part: a hand-written
    # table there would be a second copy of the schema, free to drift.
    schema_part = text[text.index("## Schema"):text.index("## Verdicts")]
    outside = re.sub(r"<!-- schema \[[a-z]*\] -->.*?<!-- end schema -->", "", schema_part,
                     flags=re.DOTALL)
    assert not re.findall(r"^\| `", outside, flags=re.MULTILINE)


def test_a_table_edited_by_hand_is_put_back():
    # The check above can fail: a default changed in the README alone is caught and undone.
    text = README.read_text(encoding="utf-8")
    row = "| `conflict`"
    start = text.index(row)
    end = text.index("\n", start)
    stale = text[:start] + text[start:end].replace("`0.1`", "`0.15`") + text[end:]
    assert stale != text
    assert readme_with_schema_tables(stale) == text
    with pytest.raises(ValueError, match="not one per table"):
        readme_with_schema_tables(text.replace("<!-- schema [zones] -->", ""))


def test_every_attribute_but_the_origin_is_a_key_of_the_schema_and_documented():
    attributes = [f.name for f in fields(RuleSet)]
    assert set(attributes) - {"origin"} == {k.field for k in RULE_KEYS}
    doc = inspect.getdoc(RuleSet)
    for name in attributes:
        assert re.search(rf"^{name} : ", doc, flags=re.MULTILINE), name
    assert "fmax_hz : float or None  [Hz]" in doc and "conflict_db : float  [dB]" in doc


def test_a_rule_set_built_in_code_judges_like_an_empty_file():
    # The README promises that a key left out takes its default; a RuleSet built in code with
    # no values (as tests and scripts make them) must mean the same.
    from_file = parse_ruleset({}, source="empty.toml", default_name="empty")
    in_code = RuleSet(name="empty")
    for f in fields(RuleSet):
        if f.name not in ("harmonics", "paths"):
            assert getattr(in_code, f.name) == getattr(from_file, f.name), f.name
    for source in SOURCES:
        assert in_code.harmonics_for(source) == from_file.harmonics_for(source)
        assert in_code.is_airborne(source) == from_file.is_airborne(source)
    # ±10 % conflict and ±20 % caution (common practice, ASHRAE HVAC Applications, noise and
    # vibration chapter); a transformer hums at 2·f_line and its even harmonics, 4 of them to
    # 400 Hz at 50 Hz (common practice); blade-pass tones travel as sound (common practice).
    assert (in_code.conflict_margin, in_code.caution_margin) == (0.10, 0.20)
    assert in_code.harmonics_for("hum") == 4 and in_code.is_airborne("blade-pass")
    assert not in_code.is_airborne("shaft")


@pytest.mark.parametrize("path", sorted(rules_dir().glob("*.toml")), ids=lambda p: p.name)
def test_the_bundled_files_set_every_key_of_the_schema(path):
    # The README tells users to copy a bundled file and edit it: each must show every key.
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    found = {("", k) for k, v in data.items() if not isinstance(v, dict)}
    found |= {(s, k) for s, table in data.items() if isinstance(table, dict) for k in table}
    assert found == {(k.section, k.key) for k in RULE_KEYS}


def test_every_default_lies_within_its_bounds():
    for spec in RULE_KEYS:
        if spec.default is not None:
            assert spec.check(spec.default) == spec.default, spec.where


def _outside(bounds: Bounds) -> list[float]:
    """Values just outside a range: an excluded end itself, or one past an included end."""
    values = []
    if bounds.above is not None:
        values.append(bounds.above)
    if bounds.at_least is not None:
        values.append(bounds.at_least - 1)
    if bounds.below is not None:
        values.append(bounds.below)
    if bounds.at_most is not None:
        values.append(bounds.at_most + 1)
    return values


@pytest.mark.parametrize("spec", [k for k in RULE_KEYS if k.bounds is not None],
                         ids=lambda k: k.where)
def test_a_value_out_of_range_is_refused_naming_file_table_and_key(spec):
    for value in _outside(spec.bounds):
        value = type(spec.default)(value)
        with pytest.raises(RuleSetError) as info:
            parse_ruleset({spec.section: {spec.key: value}}, source="mine.toml")
        assert str(info.value).startswith(f"mine.toml: [{spec.section}] {spec.key} must be "), \
            str(info.value)
        assert str(info.value).endswith(f", not {value:g}")
    # an included end is accepted
    for end in (spec.bounds.at_least, spec.bounds.at_most):
        if end is not None:
            parse_ruleset({spec.section: {spec.key: type(spec.default)(end)}}, source="ok.toml")


@pytest.mark.parametrize("bounds, words, symbols", [
    (Bounds(at_least=0, below=1), "from 0 up to 1", "in [0, 1)"),
    (Bounds(above=0, below=1), "between 0 and 1", "in (0, 1)"),
    (Bounds(above=0, at_most=1), "above 0 and at most 1", "in (0, 1]"),
    (Bounds(at_least=2), "2 or more", "≥ 2"),
    (Bounds(above=0), "above 0", "> 0"),
    (Bounds(at_most=1), "at most 1", "≤ 1"),
])
def test_bounds_in_words_and_interval_notation(bounds, words, symbols):
    # Interval notation: "[" includes an end, "(" excludes it (common mathematical practice).
    assert (bounds.words(), bounds.symbols()) == (words, symbols)
    low = bounds.above if bounds.above is not None else bounds.at_least
    if low is not None:
        assert (low in bounds) == (bounds.at_least is not None)
        assert low - 0.5 not in bounds
    high = bounds.below if bounds.below is not None else bounds.at_most
    if high is not None:
        assert (high in bounds) == (bounds.at_most is not None)
        assert high + 0.5 not in bounds
    with pytest.raises(ValueError):
        Bounds(above=0, at_least=0)


@pytest.mark.parametrize("data, message", [
    ({"modes": {"fmax_hz": -1.0}}, r"^mine\.toml: \[modes\] fmax_hz must be 0 or more "
                                   r"\(0 = no fixed limit\), not -1$"),
    ({"remedy": {"max_bays": -1}}, r"\[remedy\] max_bays must be 2 or more, not -1$"),
    ({"margins": {"name": "x"}}, r"unknown key 'name' in \[margins\]; 'name' belongs at the "
                                 r"top level$"),
    ({"use_zones": True}, r"key 'use_zones' belongs in section \[zones\]$"),
    ({"equipment": {"default_slip": 1.0}},
     r"\[equipment\] default_slip must be from 0 up to 1 \(e\.g\. 0\.03\), not 1$"),
])
def test_messages_of_checks_made_from_the_schema(data, message):
    with pytest.raises(RuleSetError, match=message):
        parse_ruleset(data, source="mine.toml")
