"""Units at the edges: the project's one unit registry and the parsing of typed quantities.

Everything inside the auditor is SI (m, kg/m², N/m, N·m, Pa·s/m, Hz, m/s, kg/m³); shaft
speeds stay in revolutions per minute as the trade states them. This module turns what a
user types in a schedule (``48 in``, ``900 N/m``, ``2 oz/yd²``, ``Width (mm)``) into those
numbers, and says clearly what is wrong when it cannot.

The registry is ``pint``'s default registry with the spellings the trade types added
(``gsm``, ``fpm``, ``rayl``, ``"`` and ``'``, ``m2`` ...). Creating it takes about half a
second, so it is made once per process (:func:`registry`), and every conversion factor is
cached per (unit text, dimension) (:func:`unit_factor`): a column of 20 000 cells typed in
``mm`` costs one pint call.

References
----------
.. [1] A. Thompson and B. N. Taylor, "Guide for the Use of the International System of Units
   (SI)", NIST Special Publication 811, 2008 edition, Appendix B (conversion factors:
   1 in = 0.0254 m exactly, 1 lb = 0.453 592 37 kg exactly, 1 lbf = 4.448 221 615 260 5 N).
.. [2] ISO 9053-1:2018, Acoustics: Determination of airflow resistance. Specific airflow
   resistance in Pa·s/m, the MKS rayl.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from functools import lru_cache

__all__ = [
    "Dimension",
    "DIMENSIONS",
    "UnitError",
    "registry",
    "normalise_unit_text",
    "unit_factor",
    "split_number_unit",
    "parse_number",
    "parse_quantity",
    "format_quantity",
    "known_units",
]


@dataclass(frozen=True)
class Dimension:
    """A physical quantity a schedule column holds.

    Parameters
    ----------
    name : str
        Key in :data:`DIMENSIONS` (``"length"``, ``"tension"`` ...).
    description : str
        In words, for messages ("a tension").
    internal_unit : str
        The unit the auditor works in, as pint spells it.
    display_unit : str
        The same unit as a person writes it ("kg/m²").
    typical_units : tuple of str
        Spellings users type for this quantity (for messages, suggestions and the template).
    """

    name: str
    description: str
    internal_unit: str
    display_unit: str
    typical_units: tuple[str, ...]


DIMENSIONS: dict[str, Dimension] = {
    d.name: d
    for d in (
        Dimension("length", "a length", "meter", "m",
                  ("mm", "cm", "m", "in", "inch", '"', "ft", "'")),
        Dimension("areal_density", "an areal density (mass per area)", "kilogram / meter ** 2",
                  "kg/m²", ("kg/m²", "kg/m2", "g/m²", "gsm", "oz/yd²", "lb/ft²")),
        Dimension("tension", "a tension (force per length of edge)", "newton / meter", "N/m",
                  ("N/m", "kN/m", "N/mm", "lbf/in", "lbf/ft")),
        Dimension("bending_stiffness", "a bending stiffness (flexural rigidity)",
                  "newton * meter", "N·m", ("N·m", "N*m", "Nm", "lbf·in")),
        Dimension("airflow_resistance", "a specific airflow resistance", "pascal * second / meter",
                  "Pa·s/m", ("Pa·s/m", "Pa*s/m", "rayl", "kPa·s/m")),
        Dimension("frequency", "a frequency", "hertz", "Hz", ("Hz", "kHz")),
        Dimension("rotational_speed", "a rotational speed", "rpm", "rpm", ("rpm", "rps")),
        Dimension("velocity", "a velocity", "meter / second", "m/s",
                  ("m/s", "km/h", "ft/min", "fpm", "ft/s", "mph")),
        Dimension("density", "a density (mass per volume)", "kilogram / meter ** 3", "kg/m³",
                  ("kg/m³", "kg/m3", "g/l", "lb/ft³")),
        Dimension("dimensionless", "a plain number (no unit)", "dimensionless", "-",
                  ("-", "%")),
    )
}


class UnitError(ValueError):
    """A unit that is not known, or is known but measures the wrong thing.

    The message names the unit as typed, what the column expects, and the nearest known
    spelling when the unit looks like a typo.
    """


# Spellings the trade types, added to pint's default registry.
_DEFINITIONS = (
    "rpm = 1 / minute = revolution_per_minute_trade",  # shaft speed; 1 Hz of rotation = 60 rpm
    "rps = 1 / second",
    "gsm = gram / meter ** 2",
    "fpm = foot / minute",
    "rayl = pascal * second / meter = mks_rayl",  # MKS rayl [2]
)


@lru_cache(maxsize=1)
def registry():
    """The project's single ``pint.UnitRegistry`` (created once, on first use).

    Returns
    -------
    pint.UnitRegistry
        pint's default registry plus ``rpm`` (revolutions per minute, as 1/min so that a
        shaft rate in Hz converts to 60 rpm), ``rps``, ``gsm`` (g/m²), ``fpm`` (ft/min) and
        ``rayl`` (the MKS rayl, Pa·s/m).
    """
    import pint

    ureg = pint.UnitRegistry(on_redefinition="ignore", autoconvert_offset_to_baseunit=False)
    for line in _DEFINITIONS:
        ureg.define(line)
    return ureg


_SUPERSCRIPTS = str.maketrans({"²": "**2", "³": "**3", "¹": "", "⁻": "**-"})
_MULTIPLY = re.compile(r"\s*[·⋅•×]\s*|(?<=[A-Za-z])\.(?=[A-Za-z])")
_POWER_DIGIT = re.compile(r"(?<=[A-Za-z])([23])(?![\d.])")
_SQUARE = re.compile(r"\b(?:sq\.?\s*)(m|ft|in|yd|mm|cm)\b")
_SPACES = re.compile(r"\s+")

# Whole-text aliases (after case-preserving strip) that pint would misread or not know.
_ALIASES = {
    "": "dimensionless",
    "-": "dimensionless",
    "–": "dimensionless",
    "1": "dimensionless",
    "%": "percent",
    '"': "inch",
    "″": "inch",
    "''": "inch",
    "'": "foot",
    "′": "foot",
    "in.": "inch",
    "ft.": "foot",
    "nm": "newton * meter",  # N·m typed in lower case; nanometre makes no sense in a schedule
    "lbs": "pound",
    "rev/min": "rpm",
    "r/min": "rpm",
    "rev/s": "rps",
    "r/s": "rps",
    "cps": "hertz",
    "c/s": "hertz",
}


def normalise_unit_text(text: str) -> str:
    """Rewrite a typed unit into the spelling pint parses.

    Superscripts (``m²``), carets (``m^2``) and trailing digits (``m2``) become powers;
    middle dots and ``×`` become products; ``"`` and ``'`` become inch and foot.

    Parameters
    ----------
    text : str
        The unit as typed, e.g. ``"g/m²"``, ``"Pa·s/m"``, ``"kg/m2"``.

    Returns
    -------
    str
        A pint unit expression, e.g. ``"g/m**2"``.
    """
    t = text.strip()
    alias = _ALIASES.get(t) or _ALIASES.get(t.lower())
    if alias is not None:
        return alias
    t = t.translate(_SUPERSCRIPTS)
    t = t.replace("^", "**").replace("µ", "u").replace("μ", "u")
    t = _MULTIPLY.sub("*", t)
    t = _SQUARE.sub(lambda m: f"{m.group(1)}**2", t)
    t = _POWER_DIGIT.sub(r"**\1", t)
    t = _SPACES.sub(" ", t)
    return t


# Quantities no column holds, named only so that a wrong unit is explained in words.
_OTHER_QUANTITIES = (
    ("a pressure", "pascal"),
    ("an area", "meter ** 2"),
    ("a volume", "meter ** 3"),
    ("a mass", "kilogram"),
    ("a force", "newton"),
    ("a time", "second"),
    ("a temperature", "kelvin"),
)


def _dimension(name: str) -> Dimension:
    try:
        return DIMENSIONS[name]
    except KeyError:
        raise ValueError(
            f"dimension {name!r} is not one of: {', '.join(DIMENSIONS)}"
        ) from None


def _expects(dim: Dimension) -> str:
    return f"{dim.description} such as {', '.join(dim.typical_units[:4])}"


@lru_cache(maxsize=1)
def _all_typical_units() -> dict[str, str]:
    """Known spellings -> dimension name, for 'did you mean' suggestions."""
    out: dict[str, str] = {}
    for dim in DIMENSIONS.values():
        for unit in dim.typical_units:
            out.setdefault(unit, dim.name)
    extra = ("g/m2", "oz/yd2", "kN/m", "lbf/in", "lbf/ft", "N/mm", "kHz", "m/s", "Pa.s/m")
    for unit in extra:
        out.setdefault(unit, "")
    return out


def _suggest(text: str, dim: Dimension) -> str | None:
    own = list(dim.typical_units)
    pool = own + [u for u in _all_typical_units() if u not in own]
    match = difflib.get_close_matches(text, own, n=1, cutoff=0.5)
    match = match or difflib.get_close_matches(text, pool, n=1, cutoff=0.6)
    if not match:
        lowered = {u.lower(): u for u in pool}
        match = difflib.get_close_matches(text.lower(), list(lowered), n=1, cutoff=0.6)
        match = [lowered[m] for m in match]
    return match[0] if match else None


@lru_cache(maxsize=4096)
def unit_factor(unit_text: str, dimension: str) -> float:
    """Factor that turns a number in ``unit_text`` into the auditor's internal unit.

    Parameters
    ----------
    unit_text : str
        The unit as typed (``"mm"``, ``"lbf/in"``, ``"oz/yd²"``, ``""`` for none).
    dimension : str
        A key of :data:`DIMENSIONS` (``"length"``, ``"tension"`` ...).

    Returns
    -------
    float
        Multiply the typed number by this to get SI (rpm for ``rotational_speed``).

    Raises
    ------
    UnitError
        The unit is not known (the message suggests the nearest known one), or it
        measures something other than ``dimension``.

    References
    ----------
    NIST Special Publication 811 (2008), Appendix B, for the conversion factors pint holds.
    """
    dim = _dimension(dimension)
    shown = unit_text.strip()
    if len(shown) > 40:
        raise UnitError(f"unit text {shown[:40]!r}... is too long to be a unit; "
                        f"expected {_expects(dim)}")
    ureg = registry()
    try:
        unit = ureg.parse_units(normalise_unit_text(shown))
    except Exception:  # pint raises several kinds; all mean "not a unit"
        hint = _suggest(shown, dim)
        tail = f"; did you mean {hint!r}?" if hint else f"; expected {_expects(dim)}"
        raise UnitError(f"unit {shown!r} is not known{tail}") from None
    target = ureg.parse_units(dim.internal_unit)
    if unit.dimensionality != target.dimensionality:
        named = [(d.description, d.internal_unit) for d in DIMENSIONS.values()]
        named += list(_OTHER_QUANTITIES)
        what = next(
            (description for description, internal in named
             if ureg.parse_units(internal).dimensionality == unit.dimensionality),
            f"a quantity of dimension {unit.dimensionality}",
        )
        if not shown or shown in ("-", "1"):
            what = "a plain number"
        raise UnitError(f"unit {shown!r} measures {what}, but {_expects(dim)} is expected")
    factor = float(ureg.Quantity(1.0, unit).to(target).magnitude)
    if not math.isfinite(factor) or factor == 0.0:
        raise UnitError(f"unit {shown!r} cannot be converted to {dim.display_unit}")
    return factor


_NUMBER = re.compile(
    r"""^\s*(?P<num>[+-]?(?:\d[\d,]*(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(?P<unit>.*?)\s*$"""
)
_THOUSANDS = re.compile(r"^[+-]?\d{1,3}(?:,\d{3})+(?:\.\d*)?$")
_DECIMAL_COMMA = re.compile(r"^[+-]?\d*,\d+$")
_FEET_INCHES = re.compile(
    r"""^\s*(?P<ft>\d+(?:\.\d+)?)\s*(?:'|′|ft)\s*-?\s*(?P<inch>\d+(?:\.\d+)?)\s*(?:"|″|in)?\s*$"""
)


def parse_number(text: str, *, decimal_comma: bool = False) -> float:
    """Read a plain number as typed (``"1200"``, ``"1,200"``, ``"0.25"``, ``"1e3"``).

    Parameters
    ----------
    text : str
    decimal_comma : bool
        Read ``"0,25"`` as 0.25 (files whose lists are separated by semicolons). Otherwise
        a comma is a thousands separator (``"1,200"``) and ``"0,25"`` is refused as
        ambiguous.

    Returns
    -------
    float

    Raises
    ------
    ValueError
        Not a finite number; the message says why.
    """
    t = text.strip()
    if decimal_comma and _DECIMAL_COMMA.match(t):
        t = t.replace(",", ".")
    elif "," in t:
        if not _THOUSANDS.match(t):
            raise ValueError(f"{text!r} is not a number (use a point for decimals, e.g. 0.25)")
        t = t.replace(",", "")
    try:
        value = float(t)
    except ValueError:
        raise ValueError(f"{text!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueError(f"{text!r} is not a finite number")
    return value


def split_number_unit(text: str, *, decimal_comma: bool = False) -> tuple[float, str]:
    """Split a typed quantity into its number and its unit text.

    Parameters
    ----------
    text : str
        ``"48 in"``, ``"900N/m"``, ``"1,200 mm"``, ``"4' 6\\""`` (feet and inches), ``"0.3"``.
    decimal_comma : bool
        See :func:`parse_number`.

    Returns
    -------
    (float, str)
        The number and the unit text as typed (``""`` when none). Feet-and-inches come back
        in inches.

    Raises
    ------
    ValueError
        The text does not start with a number.
    """
    m = _NUMBER.match(text)
    if m is None:
        fi = _FEET_INCHES.match(text)
        if fi is None:
            raise ValueError(f"{text.strip()!r} is not a number")
        return float(fi["ft"]) * 12.0 + float(fi["inch"]), "in"
    num, unit = m["num"], m["unit"]
    if decimal_comma and _DECIMAL_COMMA.match(num):
        return parse_number(num, decimal_comma=True), unit
    if "," in num and not _THOUSANDS.match(num.split("e")[0].split("E")[0]):
        raise ValueError(f"{text.strip()!r} is not a number (use a point for decimals, e.g. 0.25)")
    if unit and unit[0] in "'′":
        fi = _FEET_INCHES.match(text)
        if fi is not None:
            return float(fi["ft"]) * 12.0 + float(fi["inch"]), "in"
    return parse_number(num), unit


def parse_quantity(
    text: str | float | int,
    default_unit: str,
    dimension: str,
    *,
    decimal_comma: bool = False,
) -> float:
    """Read a typed quantity and return it in the auditor's internal unit.

    Parameters
    ----------
    text : str or float
        What was typed: ``"48 in"``, ``"900 N/m"``, ``"2 oz/yd²"``, or a bare number.
    default_unit : str
        The unit a bare number is in (the header's unit, else the column's default).
    dimension : str
        A key of :data:`DIMENSIONS`; the unit must measure this.
    decimal_comma : bool
        See :func:`parse_number`.

    Returns
    -------
    float
        SI value (m, kg/m², N/m, N·m, Pa·s/m, Hz, m/s, kg/m³; rpm for rotational speed).

    Raises
    ------
    UnitError
        Unknown unit or wrong kind of unit.
    ValueError
        Not a number.

    Examples
    --------
    >>> parse_quantity("48 in", "m", "length")
    1.2192
    """
    if isinstance(text, bool):
        raise ValueError(f"{text!r} is not a number")
    if isinstance(text, (int, float)):
        value, unit = float(text), ""
        if not math.isfinite(value):
            raise ValueError(f"{text!r} is not a finite number")
    else:
        value, unit = split_number_unit(text, decimal_comma=decimal_comma)
    return value * unit_factor(unit or default_unit, dimension)


def format_quantity(value: float, dimension: str, digits: int = 4) -> str:
    """Show an internal value with its unit, e.g. ``"1.219 m"``, ``"175.1 N/m"``.

    Parameters
    ----------
    value : float
        In the internal unit of ``dimension``.
    dimension : str
    digits : int
        Significant figures.
    """
    dim = _dimension(dimension)
    number = f"{value:.{digits}g}"
    return number if dim.name == "dimensionless" else f"{number} {dim.display_unit}"


def known_units(dimension: str) -> tuple[str, ...]:
    """Spellings users commonly type for ``dimension`` (any unit pint knows also works)."""
    return _dimension(dimension).typical_units
