"""The rule-set schema: every key a rule-set file may hold, declared once.

Each key's table, name, kind, unit, default, bounds and meaning are written in ``RULE_KEYS``
and nowhere else. From it come

- the defaults of ``auditor.rules.RuleSet`` (``DEFAULTS``, ``DEFAULT_HARMONICS``,
  ``DEFAULT_PATHS``) and the attribute list of its docstring (``attribute_doc``);
- the check of each value in a file (``RuleKey.check``; ``auditor.rules.parse_ruleset`` adds
  the file, table and key to the message);
- the tables of ``rules/README.md`` (``schema_block``, put in place by
  ``readme_with_schema_tables``; a test holds the README to them).

Checks that tie keys together (conflict < caution, report_db ≤ conflict_db, a limit on the
modes) are in ``auditor.rules``; the meaning of each key here says them in words.
"""

from __future__ import annotations

import difflib
import math
import re
import textwrap
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any, ClassVar, Protocol

__all__ = [
    "SOURCES", "PATHS", "REMOVED_KEYS", "Kind", "Number", "Count", "Flag", "Text", "Choice",
    "Bounds", "RuleKey", "RULE_KEYS", "SECTIONS", "SECTION_MEANINGS", "DEFAULTS",
    "DEFAULT_HARMONICS", "DEFAULT_PATHS", "rule_key", "section_of", "keys_of", "did_you_mean",
    "toml_key", "attribute_doc", "schema_table", "schema_block", "readme_with_schema_tables",
]

# source, harmonics by default, its fundamental, path by default, how it reaches a panel
_SOURCE_TABLE: tuple[tuple[str, int, str, str, str], ...] = (
    ("shaft", 2, "fan, pump, compressor or motor shaft rate `rpm/60`; an induction motor with "
     "no speed given runs at `(120·f_line/poles)(1 − slip)` rpm", "structure-borne",
     "shaft rate: through the fixings"),
    ("blade-pass", 3, "fan blade-pass `blades·rpm/60`", "airborne", "fan blade-pass: as sound"),
    ("vane-pass", 3, "pump vane-pass `vanes·rpm/60`", "airborne",
     "pump vane-pass: as sound (duct and pipe radiation)"),
    ("electromagnetic", 2, "motor electromagnetic tone `2·f_line`", "structure-borne",
     "motor electromagnetic tone: through the mounts"),
    ("hum", 4, "transformer hum `2·f_line`, harmonics `2k·f_line` (100, 200, 300, 400 Hz at "
     "50 Hz)", "airborne", "transformer hum: as sound"),
    ("cylinder", 3, "reciprocating compressor `cylinders·rpm/60`", "airborne",
     "compressor pulses: as sound"),
    ("belt-pass", 2, "belt `π·D·(rpm/60)/L`, D the pulley diameter at `rpm`, L the belt length",
     "structure-borne", "belt-pass: through the bearings"),
    ("vortex shedding", 1, "wire or bar in cross-flow `St·U/d` (Blevins, *Flow-Induced "
     "Vibration*, 2nd ed., ch. 3)", "structure-borne",
     "vortex shedding: acts directly on the wire or bar"),
    ("tone", 1, "a frequency or band typed in the schedule", "airborne", "typed tone: as sound"),
)

#: The sources of tone an excitation can have (``Excitation.source``), in the trade's words.
SOURCES: tuple[str, ...] = tuple(row[0] for row in _SOURCE_TABLE)

#: How a source reaches a panel: only as sound in air, or through the structure (or directly).
PATHS: tuple[str, ...] = ("airborne", "structure-borne")

#: Keys that older rule sets carried and that are no longer accepted, with why. A file still
#: holding one is refused with this message rather than silently judged differently.
REMOVED_KEYS: dict[tuple[str, str], str] = {
    ("modes", "max_modes"): (
        "was removed: a count of modes hid findings (a tone above a panel's Nth mode went "
        "unjudged). Every mode up to the assessment limit now counts (fmax_hz, or "
        "excitation_multiple × the highest tone reaching the panel, raised to cover the "
        "caution margin); delete this line."),
}


def toml_key(source: str) -> str:
    """The key of a source in ``[harmonics]`` and ``[paths]``: "blade-pass" → "blade_pass"."""
    return source.replace("-", "_").replace(" ", "_")


def did_you_mean(word: str, choices: Iterable[str]) -> str:
    """The suffix naming the nearest of ``choices`` to ``word`` ("; did you mean 'x'?"), or
    "" when none is close."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f"; did you mean '{close[0]}'?" if close else ""


# ---------------------------------------------------------------------------------------
# Kinds of value: how a value in the file is checked, named and written
# ---------------------------------------------------------------------------------------

class Kind(Protocol):
    """What a key holds. ``convert`` returns the value for the ``RuleSet`` or raises
    ``ValueError("must be …, not …")``; ``literal`` spells a value as it is typed in TOML."""

    title: ClassVar[str]   # in the documented table
    python: ClassVar[str]  # type of the RuleSet attribute, for its docstring

    def convert(self, value: Any) -> Any: ...

    def literal(self, value: Any) -> str: ...


@dataclass(frozen=True)
class Number:
    """A finite number (an integer is taken as a float)."""

    title: ClassVar[str] = "number"
    python: ClassVar[str] = "float"

    def convert(self, value: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise ValueError(f"must be a number, not {value!r}")
        if not math.isfinite(value):
            raise ValueError(f"must be a finite number, not {value!r}")
        return float(value)

    def literal(self, value: Any) -> str:
        return repr(float(value))


@dataclass(frozen=True)
class Count:
    """A whole number."""

    title: ClassVar[str] = "whole number"
    python: ClassVar[str] = "int"

    def convert(self, value: Any) -> int:
        if isinstance(value, bool) or not isinstance(value, int):
            raise ValueError(f"must be a whole number, not {value!r}")
        return int(value)

    def literal(self, value: Any) -> str:
        return str(value)


@dataclass(frozen=True)
class Flag:
    """true or false."""

    title: ClassVar[str] = "true/false"
    python: ClassVar[str] = "bool"

    def convert(self, value: Any) -> bool:
        if not isinstance(value, bool):
            raise ValueError(f"must be true or false, not {value!r}")
        return value

    def literal(self, value: Any) -> str:
        return "true" if value else "false"


@dataclass(frozen=True)
class Text:
    """Text in quotes."""

    title: ClassVar[str] = "text"
    python: ClassVar[str] = "str"

    def convert(self, value: Any) -> str:
        if not isinstance(value, str):
            raise ValueError(f"must be text in quotes, not {value!r}")
        return value

    def literal(self, value: Any) -> str:
        return f'"{value}"'


@dataclass(frozen=True)
class Choice:
    """One of a few words, in quotes."""

    choices: tuple[str, ...]
    title: ClassVar[str] = "text"
    python: ClassVar[str] = "str"

    def convert(self, value: Any) -> str:
        if value not in self.choices:
            words = " or ".join(f'"{c}"' for c in self.choices)
            raise ValueError(f"must be {words}, not {value!r}"
                             + (did_you_mean(value, self.choices) if isinstance(value, str)
                                else ""))
        return value

    def literal(self, value: Any) -> str:
        return f'"{value}"'


@dataclass(frozen=True)
class Bounds:
    """The range a number may take: at most one lower bound (``above`` or ``at_least``) and at
    most one upper bound (``below`` or ``at_most``)."""

    above: float | None = None
    at_least: float | None = None
    below: float | None = None
    at_most: float | None = None

    def __post_init__(self) -> None:
        if (self.above is not None and self.at_least is not None) or \
                (self.below is not None and self.at_most is not None):
            raise ValueError("one lower and one upper bound at most")

    def _low(self) -> tuple[float, bool] | None:  # (bound, whether it is allowed)
        if self.at_least is not None:
            return self.at_least, True
        return None if self.above is None else (self.above, False)

    def _high(self) -> tuple[float, bool] | None:
        if self.at_most is not None:
            return self.at_most, True
        return None if self.below is None else (self.below, False)

    def __contains__(self, value: float) -> bool:
        low, high = self._low(), self._high()
        return (low is None or value > low[0] or (low[1] and value == low[0])) and \
            (high is None or value < high[0] or (high[1] and value == high[0]))

    def words(self) -> str:
        """The range in words, for messages: "from 0 up to 1", "2 or more"."""
        low, high = self._low(), self._high()
        if low and high:
            a, b = f"{low[0]:g}", f"{high[0]:g}"
            return {(True, False): f"from {a} up to {b}", (False, False): f"between {a} and {b}",
                    (False, True): f"above {a} and at most {b}",
                    (True, True): f"from {a} to {b}"}[(low[1], high[1])]
        if low:
            return f"{low[0]:g} or more" if low[1] else f"above {low[0]:g}"
        if high:
            return f"at most {high[0]:g}" if high[1] else f"below {high[0]:g}"
        return "any number"

    def symbols(self) -> str:
        """The range in symbols, for the documented table: "in [0, 1)", "≥ 2"."""
        low, high = self._low(), self._high()
        if low and high:
            return (f"in {'[' if low[1] else '('}{low[0]:g}, {high[0]:g}"
                    f"{']' if high[1] else ')'}")
        if low:
            return f"{'≥' if low[1] else '>'} {low[0]:g}"
        if high:
            return f"{'≤' if high[1] else '<'} {high[0]:g}"
        return ""


# ---------------------------------------------------------------------------------------
# One key of a rule-set file
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class RuleKey:
    """One key of a rule-set file and the ``RuleSet`` attribute it sets.

    Parameters
    ----------
    section : str
        Its table (``[margins]`` → "margins"); "" at the top level.
    key : str
        Its name in the file.
    kind : Kind
    default
        Its value when the file leaves it out, as typed in the file.
    meaning : str
        What it does, in Markdown, for the README and the ``RuleSet`` docstring.
    unit : str
        "Hz", "dB", "-" for a pure number; "" for text and true/false.
    bounds : Bounds or None
        The range of a number; a value outside it is refused.
    hint : str
        A typical value, said in the message that refuses one out of range.
    attribute : str
        The ``RuleSet`` attribute ("" when it is the key).
    source : str
        For a per-source key (``[harmonics]``, ``[paths]``): the source it sets within the
        attribute, a tuple of (source, value) pairs.
    zero_is_off : bool
        0 in the file switches the key off: the attribute is None.
    default_text : str
        How the default is shown in the docs when it is not a value ("the file name").
    """

    section: str
    key: str
    kind: Kind
    default: Any
    meaning: str
    unit: str = ""
    bounds: Bounds | None = None
    hint: str = ""
    attribute: str = ""
    source: str = ""
    zero_is_off: bool = False
    default_text: str = ""

    @property
    def field(self) -> str:
        """The ``RuleSet`` attribute this key sets."""
        return self.attribute or self.key

    @property
    def where(self) -> str:
        """Where the key is, for messages: "[section] key", or the key at the top level."""
        return f"[{self.section}] {self.key}" if self.section else self.key

    def check(self, value: Any) -> Any:
        """The value checked and converted, as typed in the file (0 stays 0).

        Raises
        ------
        ValueError
            "must be …, not …": the rest of the message after the file and key.
        """
        value = self.kind.convert(value)
        if self.bounds is not None and value not in self.bounds:
            hint = f" ({self.hint})" if self.hint else ""
            raise ValueError(f"must be {self.bounds.words()}{hint}, not {value:g}")
        return value

    def value_of(self, value: Any) -> Any:
        """The ``RuleSet`` value of a checked file value (None for a 0 that switches off)."""
        return None if self.zero_is_off and value == 0 else value

    def type_text(self) -> str:
        """The type column of the documented table: "number in [0, 1)"."""
        bounds = self.bounds.symbols() if self.bounds is not None else ""
        return f"{self.kind.title} {bounds}".strip()

    def default_literal(self) -> str:
        """The default as the docs show it: a TOML literal in backticks, or its text."""
        return self.default_text or f"`{self.kind.literal(self.default)}`"


# ---------------------------------------------------------------------------------------
# The schema
# ---------------------------------------------------------------------------------------

#: What each table is for, said above its documented table.
SECTION_MEANINGS: dict[str, str] = {
    "": "the rule set's name and description",
    "modes": "which natural modes are assessed",
    "margins": "severity of a (mode, excitation) pair",
    "response": "how strongly the mode must answer",
    "harmonics": (
        "how many harmonics of each source (1 = the fundamental only, 0 = ignore the source); "
        "harmonic k is k × the fundamental. The fundamentals are common practice unless a "
        "source is named."),
    "paths": (
        'how each source reaches a panel: `"airborne"` (only as sound in air, so the '
        'participation threshold applies) or `"structure-borne"` (through the structure, or '
        "directly on the panel; the threshold does not apply). Keys as in `[harmonics]`."),
    "equipment": "constants of the equipment's tones",
    "zones": "which equipment reaches which panel",
    "remedy": "what the panel remedy may propose",
}

_DIMENSIONLESS = "-"
_FROM_0_UP_TO_1 = Bounds(at_least=0.0, below=1.0)

#: Every key of a rule-set file, table by table, in the order of the docs.
RULE_KEYS: tuple[RuleKey, ...] = (
    RuleKey("", "name", Text(), None, "name shown in reports", default_text="the file name"),
    RuleKey("", "description", Text(), "", "one line shown in reports"),
    RuleKey("modes", "fmax_hz", Number(), 1000.0,
            "assess modes up to this frequency; `0` = no fixed limit",
            unit="Hz", bounds=Bounds(at_least=0.0), hint="0 = no fixed limit", zero_is_off=True),
    RuleKey("modes", "excitation_multiple", Number(), 2.0,
            "or up to this multiple of the highest excitation reaching the panel (its upper band "
            "edge); when both limits are set the smaller applies; `0` = off; if set, at least "
            "1 + caution margin",
            unit=_DIMENSIONLESS, bounds=Bounds(at_least=0.0), hint="0 = off", zero_is_off=True),
    RuleKey("margins", "conflict", Number(), 0.10,
            "conflict when |separation| ≤ this, as a fraction of the excitation frequency",
            unit=_DIMENSIONLESS, attribute="conflict_margin"),
    RuleKey("margins", "caution", Number(), 0.20,
            "caution when |separation| ≤ this; `0 < conflict < caution < 1`",
            unit=_DIMENSIONLESS, attribute="caution_margin"),
    RuleKey("margins", "participation_threshold", Number(), 0.01,
            "a mode whose uniform-pressure participation factor is below this cannot make a "
            "conflict with an *airborne* excitation (at most a caution)",
            unit=_DIMENSIONLESS, bounds=_FROM_0_UP_TO_1),
    RuleKey("margins", "support_participation_threshold", Number(), 0.0,
            "the same for *structure-borne* excitation through the fixings (a frame moving as "
            "one drives a mode by the same inertial participation); 0 demotes no pair for its "
            "participation alone (the response thresholds still grade it)",
            unit=_DIMENSIONLESS, bounds=_FROM_0_UP_TO_1),
    RuleKey("margins", "bandwidth_widening", Flag(), True,
            "widen both margins by η/2 when the mode's loss factor η is known"),
    RuleKey("response", "conflict_db", Number(), 0.0,
            "a pair inside the conflict margin whose response is below this is a caution, not "
            "a conflict", unit="dB"),
    RuleKey("response", "report_db", Number(), -20.0,
            "a pair whose response is below this is not reported; at most `conflict_db`",
            unit="dB"),
    *(RuleKey("harmonics", toml_key(source), Count(), count, fundamental, unit=_DIMENSIONLESS,
              bounds=Bounds(at_least=0), attribute="harmonics", source=source)
      for source, count, fundamental, _, _ in _SOURCE_TABLE),
    *(RuleKey("paths", toml_key(source), Choice(PATHS), path, how, attribute="paths",
              source=source)
      for source, _, _, path, how in _SOURCE_TABLE),
    RuleKey("equipment", "strouhal", Number(), 0.2,
            "Strouhal number for vortex shedding from wires and bars; ≈ 0.2 for a round wire in "
            "the subcritical range (Blevins)",
            unit=_DIMENSIONLESS, bounds=Bounds(above=0.0, below=1.0),
            hint="about 0.2 for a round wire"),
    RuleKey("equipment", "default_slip", Number(), 0.03,
            "induction-motor slip when the schedule gives none",
            unit=_DIMENSIONLESS, bounds=_FROM_0_UP_TO_1, hint="e.g. 0.03"),
    RuleKey("zones", "use_zones", Flag(), True,
            "equipment reaches only the panels in its zones (an item with no zone reaches all); "
            "`false`: every item reaches every panel"),
    RuleKey("remedy", "max_tension_factor", Number(), 1.5,
            "for a panel with no rated maximum tension, the highest tension proposed, × "
            "scheduled (the text says the ceiling was assumed)",
            unit=_DIMENSIONLESS, bounds=Bounds(at_least=1.0)),
    RuleKey("remedy", "min_tension_factor", Number(), 0.5,
            "the lowest tension proposed, × scheduled",
            unit=_DIMENSIONLESS, bounds=Bounds(above=0.0, at_most=1.0)),
    RuleKey("remedy", "max_bays", Count(), 8,
            "the most equal bays (intermediate supports across the longer side) proposed when "
            "no tension in range clears the panel",
            unit=_DIMENSIONLESS, bounds=Bounds(at_least=2)),
)

#: The tables, in the order of the docs ("" is the top level).
SECTIONS: tuple[str, ...] = tuple(dict.fromkeys(k.section for k in RULE_KEYS))

_BY_PLACE: dict[tuple[str, str], RuleKey] = {(k.section, k.key): k for k in RULE_KEYS}
# the table a key belongs in (for a key shared by two tables, the later one)
_SECTION_OF: dict[str, str] = {k.key: k.section for k in RULE_KEYS}

#: ``RuleSet`` attribute → its value when the file leaves the key out (one key per attribute).
DEFAULTS: dict[str, Any] = {k.field: k.value_of(k.default) for k in RULE_KEYS if not k.source}
#: Harmonics and path of each source when the rule set is silent.
DEFAULT_HARMONICS: dict[str, int] = {
    k.source: k.default for k in RULE_KEYS if k.source and k.section == "harmonics"}
DEFAULT_PATHS: dict[str, str] = {
    k.source: k.default for k in RULE_KEYS if k.source and k.section == "paths"}


def rule_key(section: str, key: str) -> RuleKey | None:
    """The key ``key`` of table ``section`` ("" = top level), or None when there is none."""
    return _BY_PLACE.get((section, key))


def section_of(key: str) -> str | None:
    """The table a key belongs in ("" = the top level), or None for an unknown key."""
    return _SECTION_OF.get(key)


def keys_of(section: str) -> tuple[str, ...]:
    """The keys of one table."""
    return tuple(k.key for k in RULE_KEYS if k.section == section)


# ---------------------------------------------------------------------------------------
# Docs derived from the schema
# ---------------------------------------------------------------------------------------

def attribute_doc(attribute: str) -> str:
    """The numpydoc entry of one ``RuleSet`` attribute, indented for a class docstring.

    A per-source attribute (``harmonics``, ``paths``) is described by its table.
    """
    keys = [k for k in RULE_KEYS if k.field == attribute]
    if not keys:
        raise KeyError(attribute)
    first = keys[0]
    if first.source:
        head = f"{attribute} : tuple of (source, {first.kind.python})"
        text = f"[{first.section}]: {SECTION_MEANINGS[first.section]}"
    else:
        kind = first.kind.python + (" or None" if first.zero_is_off else "")
        unit = f"  [{first.unit}]" if first.unit else ""
        head = f"{attribute} : {kind}{unit}"
        off = " (None when the file says 0)" if first.zero_is_off else ""
        text = f"{first.where}: {first.meaning}{off}."
    body = textwrap.fill(text.replace("`", "``"), width=88, initial_indent=" " * 8,
                         subsequent_indent=" " * 8)
    return f"    {head}\n{body}\n"


def _cell(text: str) -> str:
    return text.replace("|", r"\|")


def schema_table(section: str) -> str:
    """The Markdown table of one table's keys: key, type, unit, default and meaning."""
    rows = [("key", "type", "unit", "default", "meaning")]
    rows += [(f"`{k.key}`", k.type_text(), k.unit, k.default_literal(), _cell(k.meaning))
             for k in RULE_KEYS if k.section == section]
    widths = [max(len(r[c]) for r in rows) for c in range(4)]

    def line(cells: Iterable[str]) -> str:
        cells = list(cells)
        padded = [c.ljust(w) for c, w in zip(cells, widths)] + cells[4:]
        return "| " + " | ".join(padded) + " |"

    rule = "|" + "|".join("-" * (w + 2) for w in widths) + "|---------|"
    return "\n".join([line(rows[0]), rule, *(line(r) for r in rows[1:])])


def schema_block(section: str) -> str:
    """What ``rules/README.md`` holds for one table: the line saying what it is for, then
    its table."""
    table = f"`[{section}]`" if section else "Top level"
    heading = textwrap.fill(f"{table} — {SECTION_MEANINGS[section]}", width=96,
                            break_on_hyphens=False, break_long_words=False)
    return f"{heading}\n\n{schema_table(section)}"


_MARKED = re.compile(r"(<!-- schema \[(?P<section>[a-z]*)\] -->\n)(.*?)(\n<!-- end schema -->)",
                     re.DOTALL)


def readme_with_schema_tables(text: str) -> str:
    """``text`` (``rules/README.md``) with each block between ``<!-- schema [section] -->`` and
    ``<!-- end schema -->`` rendered afresh from the schema.

    To regenerate the README::

        python -c "from pathlib import Path; from auditor.rule_schema import \\
        readme_with_schema_tables as r; p = Path('rules/README.md'); \\
        p.write_text(r(p.read_text(encoding='utf-8')), encoding='utf-8')"

    Raises
    ------
    ValueError
        When a table of the schema has no block in ``text``, or a block names no table.
    """
    found = [m.group("section") for m in _MARKED.finditer(text)]
    if sorted(found) != sorted(SECTIONS):
        raise ValueError(f"the README's schema blocks {found} are not one per table "
                         f"{list(SECTIONS)}")
    return _MARKED.sub(
        lambda m: f"{m.group(1)}\n{schema_block(m.group('section'))}\n{m.group(4)}", text)
