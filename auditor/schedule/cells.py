"""Reading one cell: numbers with units, words, outlines, cut-outs, counts, zone lists.

Each ``*_reader`` function returns a small callable made once per column (so the unit
conversion factor of the header is looked up once, not per cell); the callable turns a cell's
raw value (what openpyxl or the csv module gives: ``float``, ``int``, ``str``, ``datetime``,
``None``) into the record's value in SI, or raises :class:`CellError` with a message a user
can act on.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from typing import Any, Callable

from openpyxl.utils import get_column_letter

from auditor.model import CircleCutout, Cutout, PolygonCutout
from auditor.schedule import vocabulary as vocab
from auditor.schedule.vocabulary import match_word
from auditor.units import UnitError, parse_number, split_number_unit, unit_factor

__all__ = [
    "MAX_CELL_CHARS",
    "CellError",
    "column_reader",
    "unreadable_header_reader",
    "too_long_message",
    "shortened",
    "UNCACHED_FORMULA",
    "cell_text",
    "clean_text",
    "column_letter",
    "is_blank",
    "quantity_reader",
    "count_reader",
    "text_reader",
    "word_reader",
    "zones_reader",
    "outline_reader",
    "cutouts_reader",
]


#: Most characters a cell may hold: the most a spreadsheet program's cell holds (Microsoft,
#: "Excel specifications and limits": 32 767). Longer text comes from no spreadsheet.
MAX_CELL_CHARS = 32_767
_SHOWN_CHARS = 60  # of a refused cell's text, in the problem


class CellError(ValueError):
    """A cell that cannot be read; the message says why and what would be accepted."""


class _UncachedFormula:
    """Marks a formula cell whose workbook holds no saved (calculated) value."""

    __slots__ = ()

    def __repr__(self) -> str:
        return "UNCACHED_FORMULA"

    def __str__(self) -> str:
        return "(formula with no saved value)"


UNCACHED_FORMULA = _UncachedFormula()

_FORMULA_MESSAGE = (
    "this formula has no saved value: the workbook was written by a program that does not "
    "calculate; open it in a spreadsheet program and save it, or type the value"
)
_SPREADSHEET_ERRORS = frozenset({
    "#DIV/0!", "#N/A", "#NAME?", "#NULL!", "#NUM!", "#REF!", "#VALUE!", "#GETTING_DATA",
    "#SPILL!", "#CALC!",
})


# Characters no output may carry: C0 controls other than tab and line feed (a carriage return
# is read as a line feed), DEL, C1 controls, lone UTF-16 surrogates (from a "_xD800_" escape)
# and the two non-characters XML 1.0 forbids (W3C XML 1.0, 5th edition, §2.2 "Char").
_CONTROL = re.compile("[\x00-\x08\x0b-\x1f\x7f-\x9f\ud800-\udfff\ufffe\uffff]")


def clean_text(text: str) -> tuple[str, bool]:
    """Text with control characters removed; and whether any were removed.

    Tabs and line breaks stay (a carriage return becomes a line feed, silently: it is how
    some programs end lines inside a cell); every other control character, which no one
    types on purpose and which would corrupt the XML, PDF and terminal outputs downstream,
    is removed.

    Parameters
    ----------
    text : str

    Returns
    -------
    (str, bool)
        The cleaned text, and True when a character other than a carriage return was
        removed (the caller warns, naming the cell).

    References
    ----------
    .. [1] W3C, *Extensible Markup Language (XML) 1.0*, 5th edition (2008), §2.2 "Char".
    """
    if text.isprintable():
        return text, False
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    cleaned = _CONTROL.sub("", text)
    return cleaned, len(cleaned) != len(text)


def column_letter(index: int) -> str:
    """Spreadsheet letters of a 0-based column index (0 → A, 25 → Z, 26 → AA)."""
    return get_column_letter(index + 1)


def is_blank(value: Any) -> bool:
    """True for an empty cell (None, or text of spaces only)."""
    return value is None or (isinstance(value, str) and not value.strip())


def _format_number(value: float) -> str:
    if isinstance(value, int):
        return str(value)
    return "%.15g" % value


def cell_text(value: Any) -> str:
    """The cell as a person sees it: numbers without a spurious ``.0``, text stripped."""
    if value is None:
        return ""
    if isinstance(value, str):
        return value.strip()
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, (int, float)):
        return _format_number(value)
    if isinstance(value, _dt.datetime) and value.time() == _dt.time(0):
        return value.date().isoformat()
    if isinstance(value, (_dt.date, _dt.time, _dt.datetime, _dt.timedelta)):
        return value.isoformat() if hasattr(value, "isoformat") else str(value)
    return str(value)


def _common_refusal(value: Any) -> None:
    """Raise for cells no reader accepts: uncached formulas, spreadsheet errors, dates."""
    if value is UNCACHED_FORMULA:
        raise CellError(_FORMULA_MESSAGE)
    if isinstance(value, str) and value.strip().upper() in _SPREADSHEET_ERRORS:
        raise CellError(f"the cell shows the spreadsheet error {value.strip()}")
    if isinstance(value, (_dt.date, _dt.time, _dt.timedelta)):
        raise CellError(
            f"the cell holds a date or time ({cell_text(value)}), not a number; format the "
            "cell as a number and retype it"
        )
    if isinstance(value, bool):
        raise CellError(f"the cell holds {cell_text(value)}, not a number")


def quantity_reader(
    dimension: str, unit: str, *, decimal_comma: bool = False
) -> Callable[[Any], float]:
    """A reader for a number column whose bare numbers are in ``unit``.

    Parameters
    ----------
    dimension : str
        Key of ``auditor.units.DIMENSIONS``.
    unit : str
        The header's unit, else the column's default unit.
    decimal_comma : bool
        Read "0,25" as 0.25 (semicolon-separated files).

    Returns
    -------
    callable
        ``read(value) -> float`` in SI; a cell may carry its own unit ("48 in").

    Raises
    ------
    auditor.units.UnitError
        At once, when ``unit`` itself is not a unit of ``dimension``.
    """
    factor = unit_factor(unit, dimension)

    def read(value: Any) -> float:
        kind = type(value)
        if kind is float or kind is int:
            if kind is float and not math.isfinite(value):
                raise CellError(f"{cell_text(value)!r} is not a finite number")
            return value * factor
        if kind is str:
            try:
                number = float(value)
            except ValueError:
                pass
            else:
                if math.isfinite(number):
                    return number * factor
                raise CellError(f"{value.strip()!r} is not a finite number")
            try:
                number, typed_unit = split_number_unit(value, decimal_comma=decimal_comma)
            except ValueError as exc:
                _common_refusal(value)  # a spreadsheet error says so
                raise CellError(str(exc)) from None
            if not typed_unit:
                return number * factor
            try:
                return number * unit_factor(typed_unit, dimension)
            except UnitError as exc:
                raise CellError(str(exc)) from None
        _common_refusal(value)
        raise CellError(f"{cell_text(value)!r} is not a number")

    return read


def count_reader() -> Callable[[Any], int]:
    """A reader for whole numbers (blades, vanes, poles, harmonics)."""

    def read(value: Any) -> int:
        _common_refusal(value)
        if isinstance(value, str):
            try:
                number = parse_number(value)
            except ValueError:
                raise CellError(f"{value.strip()!r} is not a whole number") from None
        elif isinstance(value, (int, float)):
            number = float(value)
        else:
            raise CellError(f"{cell_text(value)!r} is not a whole number")
        if not number.is_integer():
            raise CellError(f"{cell_text(value)!r} is not a whole number")
        return int(number)

    return read


def text_reader() -> Callable[[Any], str]:
    """A reader for free text (ids, zones, paths): the cell as a person sees it."""

    def read(value: Any) -> str:
        if value is UNCACHED_FORMULA:
            raise CellError(_FORMULA_MESSAGE)
        return cell_text(value)

    return read


def word_reader(column: str, label: str) -> Callable[[Any], str]:
    """A reader for a word column; unknown words are refused with the nearest known one.

    Parameters
    ----------
    column : {"shape", "material", "room_side", "plenum_side", "kind"}
    label : str
        The column in words, for the message ("shape", "room side").
    """
    from auditor.schedule.vocabulary import WORDS

    known = ", ".join(WORDS[column])
    seen: dict[str, str] = {}

    def read(value: Any) -> str:
        if value.__class__ is str:
            word = seen.get(value)
            if word is not None:
                return word
        _common_refusal(value)
        text = cell_text(value)
        word, suggestion = match_word(text, column)
        if word is not None:
            if value.__class__ is str and len(seen) < 1000:
                seen[value] = word
            return word
        if suggestion is not None:
            raise CellError(f"{label} {text!r} is not known; did you mean {suggestion!r}?")
        raise CellError(f"{label} {text!r} is not known; use one of: {known}")

    return read


def zones_reader() -> Callable[[Any], tuple[str, ...] | None]:
    """A reader for the zones an item reaches: "all" or blank gives None (every zone)."""

    def read(value: Any) -> tuple[str, ...] | None:
        if value is UNCACHED_FORMULA:
            raise CellError(_FORMULA_MESSAGE)
        text = cell_text(value)
        parts = [p.strip() for p in re.split(r"[,;/\n]", text) if p.strip()]
        if not parts or any(p.casefold() in ("all", "all zones", "*", "every") for p in parts):
            return None
        seen: dict[str, str] = {}
        for p in parts:
            seen.setdefault(p.casefold(), p)
        return tuple(seen.values())

    return read


_TRAILING_UNIT = re.compile(r"^(?P<body>.*?[\d.])\s*(?P<unit>[^\d\s,;|.+\-][^\d,;|]*)$", re.S)
_POINT_SPLIT = re.compile(r"\s*,\s*|\s+")


def _peel_unit(text: str, unit: str, dimension: str) -> tuple[str, float]:
    """Split an optional unit off the end of a list of numbers; return body and factor."""
    m = _TRAILING_UNIT.match(text.strip())
    if m is None:
        return text, unit_factor(unit, dimension)
    try:
        return m["body"], unit_factor(m["unit"], dimension)
    except UnitError as exc:
        raise CellError(str(exc)) from None


def _numbers(text: str, what: str) -> list[float]:
    parts = [p for p in _POINT_SPLIT.split(text.strip()) if p]
    out = []
    for p in parts:
        try:
            out.append(parse_number(p))
        except ValueError:
            raise CellError(f"{what}: {p!r} is not a number") from None
    return out


def _vertices(text: str, factor: float, what: str) -> tuple[tuple[float, float], ...]:
    pieces = [p for p in text.split(";") if p.strip()]
    vertices = []
    for k, piece in enumerate(pieces, start=1):
        xy = _numbers(piece, what)
        if len(xy) != 2:
            raise CellError(f"{what}: vertex {k} {piece.strip()!r} should be two numbers 'x,y'")
        vertices.append((xy[0] * factor, xy[1] * factor))
    if len(vertices) > 1 and vertices[0] == vertices[-1]:
        vertices.pop()  # a closed ring typed with its first vertex repeated
    return tuple(vertices)


def outline_reader(unit: str) -> Callable[[Any], tuple[tuple[float, float], ...]]:
    """A reader for polygon vertices ``"x,y; x,y; x,y"`` in ``unit`` (a unit may end the cell)."""
    unit_factor(unit, "length")  # fail at once on a bad header unit

    def read(value: Any) -> tuple[tuple[float, float], ...]:
        _common_refusal(value)
        body, factor = _peel_unit(cell_text(value), unit, "length")
        return _vertices(body, factor, "outline")

    return read


_CIRCLE_WORD = re.compile(r"^\s*(?:circle|circ|round|hole|c)\b\s*[:=]?\s*", re.I)


def cutouts_reader(unit: str) -> Callable[[Any], tuple[Cutout, ...]]:
    """A reader for cut-outs: ``"circle x,y,d | x,y; x,y; x,y"`` in ``unit``."""
    unit_factor(unit, "length")

    def read(value: Any) -> tuple[Cutout, ...]:
        _common_refusal(value)
        out: list[Cutout] = []
        for k, piece in enumerate((p for p in cell_text(value).split("|") if p.strip()), 1):
            what = f"cut-out {k}"
            m = _CIRCLE_WORD.match(piece)
            if m is not None:
                body, factor = _peel_unit(piece[m.end():], unit, "length")
                numbers = _numbers(body.replace(";", ","), what)
                if len(numbers) != 3:
                    raise CellError(f"{what}: a circle is 'circle x,y,d' (centre and diameter)")
                x, y, d = (n * factor for n in numbers)
                out.append(CircleCutout(x=x, y=y, diameter=d))
            else:
                body, factor = _peel_unit(piece, unit, "length")
                out.append(PolygonCutout(vertices=_vertices(body, factor, what)))
        return tuple(out)

    return read


def too_long_message(text: str) -> str:
    """Why a cell longer than :data:`MAX_CELL_CHARS` is not read."""
    return (f"the cell holds {len(text):,} characters, more than a spreadsheet cell can "
            f"({MAX_CELL_CHARS:,}); it is not read")


def shortened(text: str) -> str:
    """The start of a refused cell's text, as a problem shows it."""
    return text if len(text) <= _SHOWN_CHARS else text[:_SHOWN_CHARS] + "…"


def unreadable_header_reader(header: str, message: str) -> Callable[[Any], Any]:
    """A reader for a column whose header names an unknown unit: every cell is refused."""
    def read(value: Any) -> Any:
        raise CellError(f"the header {header!r} names a unit that is not known ({message})")

    return read


def column_reader(column: vocab.Column, unit: str | None,
                  decimal_comma: bool) -> Callable[[Any], Any]:
    """The cell reader of a column, its bare numbers in ``unit`` (else the column's default).

    Raises
    ------
    auditor.units.UnitError
        When the header's unit is not a unit of the column's dimension.
    """
    unit = unit if unit is not None else column.default_unit
    if column.kind == "quantity":
        if column.dimension is None:   # the vocabulary gives every quantity its dimension
            raise ValueError(f"the quantity column {column.name!r} names no dimension")
        return quantity_reader(column.dimension, unit, decimal_comma=decimal_comma)
    if column.kind == "outline":
        return outline_reader(unit)
    if column.kind == "cutouts":
        return cutouts_reader(unit)
    if column.kind == "count":
        return count_reader()
    if column.kind == "word":
        return word_reader(column.field, column.name)
    if column.kind == "zones":
        return zones_reader()
    return text_reader()
