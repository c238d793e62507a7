"""The schedule's vocabulary: which headers the reader knows, and which words in word columns.

One table of :class:`Column` entries drives the reader (header matching), the validation
(dimension and default unit of each column) and the blank template (its headers, drop-down
lists and "Read me" sheet), so the three never disagree.

Headers match case-, space- and punctuation-insensitively (``Areal density``,
``AREAL-DENSITY``, ``areal_density`` are one header) with an optional unit in parentheses,
brackets or braces, or after `` / `` or a comma (``Width (mm)``, ``Tension [lbf/in]``,
``Width / mm``).
"""

from __future__ import annotations

import difflib
import re
import unicodedata
from dataclasses import dataclass
from functools import lru_cache

from auditor.model import EQUIPMENT_KINDS, MATERIALS, PLENUM_SIDES, ROOM_SIDES, SHAPES

__all__ = [
    "Column",
    "PANEL_COLUMNS",
    "EQUIPMENT_COLUMNS",
    "PROJECT_KEYS",
    "WORDS",
    "NOTE_SHEET_NAMES",
    "IGNORED_HEADERS",
    "header_key",
    "split_header",
    "match_header",
    "match_project_key",
    "match_word",
    "suggest_header",
    "is_note_sheet",
]

PANELS = "panels"
EQUIPMENT = "equipment"
PROJECT = "project"


@dataclass(frozen=True)
class Column:
    """One column the reader understands.

    Parameters
    ----------
    name : str
        Canonical header, as the template writes it ("areal density").
    field : str
        The record's attribute it fills ("areal_density").
    table : {"panels", "equipment", "project"}
    kind : {"text", "word", "quantity", "count", "outline", "cutouts", "zones"}
        How a cell is read.
    dimension : str or None
        Key of ``auditor.units.DIMENSIONS`` for quantities, outlines and cut-outs.
    default_unit : str
        Unit of a bare number when the header names none ("" for none).
    synonyms : tuple of str
        Other headers that mean the same.
    meaning : str
        One line for the template's "Read me" sheet.
    """

    name: str
    field: str
    table: str
    kind: str
    dimension: str | None = None
    default_unit: str = ""
    synonyms: tuple[str, ...] = ()
    meaning: str = ""

    @property
    def header(self) -> str:
        """Template header: the name with its default unit, e.g. ``"Width (m)"``."""
        title = self.name[:1].upper() + self.name[1:]
        return f"{title} ({self.default_unit})" if self.default_unit else title


def _min_max(base: str, others: tuple[str, ...] = ()) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """Synonyms for the minimum and maximum of ``base`` (and of its other spellings)."""
    lows, highs = [], []
    for b in (base, *others):
        lows += [f"min {b}", f"minimum {b}", f"{b} minimum", f"{b} low", f"lowest {b}",
                 f"{b} (min)", f"{b} from"]
        highs += [f"max {b}", f"maximum {b}", f"{b} maximum", f"{b} high", f"highest {b}",
                  f"{b} (max)", f"{b} to"]
    return tuple(lows), tuple(highs)


_RPM_LOW, _RPM_HIGH = _min_max("rpm", ("speed", "shaft speed", "fan speed"))
_F_LOW, _F_HIGH = _min_max("frequency", ("freq", "tone frequency"))

PANEL_COLUMNS: tuple[Column, ...] = (
    Column("panel", "panel", PANELS, "text",
           synonyms=("id", "panel id", "panel ref", "panel reference", "ref", "reference",
                     "panel no", "panel number", "panel name", "mark", "panel mark"),
           meaning="Unique id of the panel (required)."),
    Column("zone", "zone", PANELS, "text",
           synonyms=("area", "room", "space", "location", "panel zone"),
           meaning="Zone or room; equipment reaches panels by zone."),
    Column("shape", "shape", PANELS, "word",
           synonyms=("panel shape", "geometry", "form"),
           meaning="rectangle, circle or polygon (blank: rectangle, or what the "
                   "dimensions given imply)."),
    Column("width", "width", PANELS, "quantity", "length", "m",
           synonyms=("x", "span x", "width x", "dimension x", "size x", "lx"),
           meaning="Rectangle side along x (the direction of tension x)."),
    Column("length", "length", PANELS, "quantity", "length", "m",
           synonyms=("y", "span y", "length y", "dimension y", "size y", "ly", "height"),
           meaning="Rectangle side along y."),
    Column("diameter", "diameter", PANELS, "quantity", "length", "m",
           synonyms=("dia", "panel diameter", "circle diameter"),
           meaning="Circle diameter."),
    Column("outline", "outline", PANELS, "outline", "length", "m",
           synonyms=("vertices", "polygon", "corners", "outline vertices", "coordinates",
                     "points"),
           meaning='Polygon vertices in order, "x,y; x,y; x,y; ..." (a unit may follow the '
                   'last number, e.g. "...; 1200,600 mm").'),
    Column("cut-outs", "cutouts", PANELS, "cutouts", "length", "m",
           synonyms=("cutouts", "cut outs", "holes", "openings", "penetrations"),
           meaning='Openings, separated by " | ": a polygon "x,y; x,y; ..." or '
                   '"circle x,y,d" (centre and diameter). Coordinates as for the outline; '
                   "a rectangle's origin is a corner, a circle's its centre."),
    Column("material", "material", PANELS, "word",
           synonyms=("membrane", "membrane type", "material type", "skin", "finish"),
           meaning="film, fabric, mesh or plate (blank: film)."),
    Column("areal density", "areal_density", PANELS, "quantity", "areal_density", "kg/m²",
           synonyms=("weight", "mass per area", "surface density", "surface mass",
                     "mass per unit area", "areal mass", "grammage", "mass", "density"),
           meaning="Mass per unit area of the membrane (required)."),
    Column("tension", "tension", PANELS, "quantity", "tension", "N/m",
           synonyms=("membrane tension", "pretension", "prestress", "tension xy"),
           meaning="Tension per unit edge length, both directions (or give tension x and y)."),
    Column("tension x", "tension_x", PANELS, "quantity", "tension", "N/m",
           synonyms=("tx", "warp tension", "tension warp", "tension along x",
                     "tension width"),
           meaning="Tension acting along x (the width); warp of a fabric."),
    Column("tension y", "tension_y", PANELS, "quantity", "tension", "N/m",
           synonyms=("ty", "weft tension", "tension weft", "tension along y",
                     "tension length", "fill tension"),
           meaning="Tension acting along y (the length); weft of a fabric."),
    Column("bending stiffness", "bending_stiffness", PANELS, "quantity", "bending_stiffness",
           "N·m", synonyms=("flexural rigidity", "bending rigidity", "plate stiffness"),
           meaning="Flexural rigidity D (blank: 0, a pure membrane)."),
    Column("loss factor", "loss_factor", PANELS, "quantity", "dimensionless", "",
           synonyms=("damping", "eta", "structural loss factor", "damping loss factor",
                     "η"),
           meaning="Structural loss factor (blank: the material's usual value)."),
    Column("airflow resistance", "airflow_resistance", PANELS, "quantity",
           "airflow_resistance", "Pa·s/m",
           synonyms=("flow resistance", "specific airflow resistance", "air flow resistance",
                     "airflow resistivity", "porosity resistance"),
           meaning="Specific airflow resistance of a porous fabric or mesh (blank: "
                   "impervious film/fabric, freely open mesh)."),
    Column("room side", "room_side", PANELS, "word",
           synonyms=("front", "room face", "face", "room backing"),
           meaning="air (open to the room) or none."),
    Column("plenum side", "plenum_side", PANELS, "word",
           synonyms=("plenum", "back", "backing", "rear", "plenum backing"),
           meaning="air (open plenum), sealed (closed cavity; give its depth) or none."),
    Column("cavity depth", "cavity_depth", PANELS, "quantity", "length", "m",
           synonyms=("plenum depth", "air gap", "gap", "cavity", "void depth",
                     "backing depth"),
           meaning="Depth of the sealed cavity behind the panel (required when sealed)."),
    Column("max tension", "max_tension", PANELS, "quantity", "tension", "N/m",
           synonyms=("maximum tension", "rated tension", "tension limit", "allowable tension",
                     "max allowable tension", "tension max"),
           meaning="Rated maximum tension of the system (limits any retuning)."),
    Column("tap test", "tap_test", PANELS, "text",
           synonyms=("tap test file", "recording", "tap recording", "measurement",
                     "tap test recording"),
           meaning="Path of a tap-test recording, relative to the schedule file."),
)

EQUIPMENT_COLUMNS: tuple[Column, ...] = (
    Column("equipment", "equipment", EQUIPMENT, "text",
           synonyms=("tag", "equipment tag", "equipment id", "plant", "plant tag", "item",
                     "equipment ref", "plant ref"),
           meaning="Unique tag of the item (required)."),
    Column("kind", "kind", EQUIPMENT, "word",
           synonyms=("type", "equipment type", "plant type", "source", "category"),
           meaning="fan, pump, motor, compressor, transformer, belt, flow or tone."),
    Column("zone", "zones", EQUIPMENT, "zones",
           synonyms=("zones", "reaches", "serves", "areas", "zones reached"),
           meaning='Zones it reaches, comma-separated, or "all" (blank: all).'),
    Column("rpm", "rpm", EQUIPMENT, "quantity", "rotational_speed", "rpm",
           synonyms=("speed", "shaft speed", "fan speed", "running speed", "rotational speed"),
           meaning="Shaft speed."),
    Column("rpm min", "rpm_min", EQUIPMENT, "quantity", "rotational_speed", "rpm",
           synonyms=_RPM_LOW, meaning="Lowest speed of a variable-speed drive."),
    Column("rpm max", "rpm_max", EQUIPMENT, "quantity", "rotational_speed", "rpm",
           synonyms=_RPM_HIGH, meaning="Highest speed of a variable-speed drive."),
    Column("blades", "blades", EQUIPMENT, "count",
           synonyms=("blade count", "number of blades", "no of blades", "fan blades"),
           meaning="Number of fan blades."),
    Column("vanes", "vanes", EQUIPMENT, "count",
           synonyms=("vane count", "number of vanes", "no of vanes", "impeller vanes"),
           meaning="Number of pump impeller vanes."),
    Column("cylinders", "cylinders", EQUIPMENT, "count",
           synonyms=("cylinder count", "number of cylinders", "no of cylinders", "pistons"),
           meaning="Number of compressor cylinders."),
    Column("poles", "poles", EQUIPMENT, "count",
           synonyms=("pole count", "number of poles", "no of poles", "motor poles"),
           meaning="Number of motor poles (even)."),
    Column("slip", "slip", EQUIPMENT, "quantity", "dimensionless", "",
           synonyms=("motor slip", "slip fraction"),
           meaning="Induction-motor slip as a fraction (0.03) or percent (3 %)."),
    Column("line frequency", "line_frequency", EQUIPMENT, "quantity", "frequency", "Hz",
           synonyms=("mains frequency", "supply frequency", "grid frequency", "line freq"),
           meaning="Electrical supply frequency (blank: the Project sheet's)."),
    Column("frequency", "frequency", EQUIPMENT, "quantity", "frequency", "Hz",
           synonyms=("freq", "tone frequency", "tone"),
           meaning="A tone's frequency."),
    Column("frequency min", "frequency_min", EQUIPMENT, "quantity", "frequency", "Hz",
           synonyms=_F_LOW, meaning="Lower edge of a band."),
    Column("frequency max", "frequency_max", EQUIPMENT, "quantity", "frequency", "Hz",
           synonyms=_F_HIGH, meaning="Upper edge of a band."),
    Column("velocity", "velocity", EQUIPMENT, "quantity", "velocity", "m/s",
           synonyms=("wind speed", "flow velocity", "air velocity", "air speed"),
           meaning="Flow speed past the wires or bars (flow)."),
    Column("wire diameter", "wire_diameter", EQUIPMENT, "quantity", "length", "m",
           synonyms=("wire", "bar diameter", "strand diameter", "wire size"),
           meaning="Diameter of the wire or bar the flow passes (flow)."),
    Column("pulley diameter", "pulley_diameter", EQUIPMENT, "quantity", "length", "m",
           synonyms=("pulley", "sheave diameter", "pulley dia"),
           meaning="Diameter of the pulley turning at the given speed (belt)."),
    Column("belt length", "belt_length", EQUIPMENT, "quantity", "length", "m",
           synonyms=("belt", "belt pitch length"),
           meaning="Length of the belt (belt)."),
    Column("harmonics", "harmonics", EQUIPMENT, "count",
           synonyms=("number of harmonics", "no of harmonics", "orders"),
           meaning="Harmonics to consider for this item (blank: the rule set's)."),
    Column("isolator deflection", "isolator_deflection", EQUIPMENT, "quantity", "length", "mm",
           synonyms=("static deflection", "mount deflection", "isolator static deflection",
                     "mount static deflection", "spring deflection", "deflection",
                     "isolation deflection"),
           meaning="Static deflection of the item's vibration isolators under its weight "
                   "(blank: rigidly mounted; the report states that assumption)."),
    Column("isolator damping", "isolator_damping", EQUIPMENT, "quantity", "dimensionless", "",
           synonyms=("damping ratio", "mount damping", "isolator damping ratio",
                     "mount damping ratio", "zeta", "ζ"),
           meaning="Damping ratio ζ of the isolators, a fraction (0.05) or percent (5 %) "
                   "(blank: the usual value for the mount; used only with a deflection)."),
)

PROJECT_KEYS: tuple[Column, ...] = (
    Column("project name", "name", PROJECT, "text",
           synonyms=("project", "name", "job", "job name", "project title", "title"),
           meaning="Name of the project."),
    Column("reference", "reference", PROJECT, "text",
           synonyms=("ref", "project reference", "project number", "project no", "job number",
                     "job no", "job reference"),
           meaning="Project or job number."),
    Column("client", "client", PROJECT, "text", synonyms=("customer", "owner"),
           meaning="Client."),
    Column("prepared by", "prepared_by", PROJECT, "text",
           synonyms=("author", "engineer", "consultant", "checked by"),
           meaning="Who prepared the audit."),
    Column("prepared for", "prepared_for", PROJECT, "text", synonyms=("for", "recipient"),
           meaning="Who the audit is for."),
    Column("line frequency", "line_frequency", PROJECT, "quantity", "frequency", "Hz",
           synonyms=("mains frequency", "supply frequency", "grid frequency"),
           meaning="Electrical supply frequency (50 or 60 Hz)."),
    Column("air density", "air_density", PROJECT, "quantity", "density", "kg/m³",
           synonyms=("density of air", "rho air", "air density rho"),
           meaning="Density of air (blank: 1.204 kg/m³, dry air at 20 °C)."),
    Column("speed of sound", "speed_of_sound", PROJECT, "quantity", "velocity", "m/s",
           synonyms=("sound speed", "speed of sound in air", "c0", "c"),
           meaning="Speed of sound in air (blank: 343 m/s)."),
)

# Words accepted in word columns: canonical word -> other spellings (all matched like headers).
WORDS: dict[str, dict[str, tuple[str, ...]]] = {
    "shape": {
        "rectangle": ("rectangular", "rect", "square", "oblong", "box"),
        "circle": ("circular", "round", "disc", "disk"),
        "polygon": ("poly", "polygonal", "custom", "free form", "freeform", "outline",
                    "irregular"),
    },
    "material": {
        "film": ("foil", "pvc", "pvc film", "stretch film", "stretched film", "membrane",
                 "etfe", "ptfe film"),
        "fabric": ("textile", "cloth", "woven fabric", "knit", "polyester fabric",
                   "glass fabric", "fibreglass fabric", "fiberglass fabric"),
        "mesh": ("wire mesh", "woven mesh", "screen", "wire", "grille", "welded mesh",
                 "metal mesh", "expanded mesh"),
        "plate": ("sheet", "metal", "metal sheet", "perforated plate", "board", "panel"),
    },
    "room_side": {
        "air": ("open", "room", "free", "yes"),
        "none": ("no", "blocked", "solid", "closed", "-", "n/a"),
    },
    "plenum_side": {
        "air": ("open", "open plenum", "plenum", "free", "yes", "void"),
        "sealed": ("closed", "cavity", "sealed cavity", "closed cavity", "box", "enclosed"),
        "none": ("no", "solid", "blocked", "-", "n/a"),
    },
    "kind": {
        "fan": ("fans", "axial fan", "centrifugal fan", "ahu fan", "extract fan",
                "supply fan", "blower"),
        "pump": ("pumps", "centrifugal pump", "circulator"),
        "motor": ("motors", "induction motor", "electric motor"),
        "compressor": ("reciprocating compressor", "recip compressor", "chiller compressor"),
        "transformer": ("transformers", "tx", "xfmr", "substation"),
        "belt": ("belt drive", "belts", "v belt"),
        "flow": ("wind", "vortex", "vortex shedding", "airflow", "air flow"),
        "tone": ("band", "other", "user tone", "frequency"),
    },
}
assert tuple(WORDS["shape"]) == SHAPES
assert tuple(WORDS["material"]) == MATERIALS
assert tuple(WORDS["room_side"]) == ROOM_SIDES
assert tuple(WORDS["plenum_side"]) == PLENUM_SIDES
assert tuple(WORDS["kind"]) == EQUIPMENT_KINDS

# Headers of columns kept for people (remarks); read by no one and never warned about.
IGNORED_HEADERS = frozenset({
    "notes", "note", "remarks", "remark", "comments", "comment", "description", "memo",
})

# Sheets that hold notes for people, not tables: never warned about.
NOTE_SHEET_NAMES = frozenset({
    "readme", "notes", "note", "instructions", "help", "about", "cover", "legend", "key",
    "changelog", "changes", "revisions", "revision", "history", "info", "information",
    "guide", "howto", "contents",
})

_NON_ALNUM = re.compile(r"[\W_]+", re.UNICODE)


@lru_cache(maxsize=8192)
def header_key(text: str) -> str:
    """Header or word reduced to its letters and digits, case-folded.

    ``"Tension-X"`` → ``"tensionx"``; ``"Areal density"`` → ``"arealdensity"``.
    """
    folded = unicodedata.normalize("NFKC", text).casefold()
    return _NON_ALNUM.sub("", folded)


_UNIT_TAIL = re.compile(
    r"""^(?P<name>.*?\S)\s*(?:
          [(\[{]\s*(?P<u1>[^()\[\]{}]*?)\s*[)\]}]      # Width (mm), Tension [lbf/in]
        | \s/\s*(?P<u2>[^/\s][^()]*?)                  # Width / mm
        | ,\s*(?P<u3>[^,]+?)                           # Width, mm
        | \s+in\s+(?P<u4>[^\s()]+)                     # Width in mm
    )\s*$""",
    re.VERBOSE,
)


def split_header(text: str) -> tuple[str, str | None]:
    """Split a header into its name and the unit it names, if any.

    Parameters
    ----------
    text : str
        ``"Width (mm)"``, ``"Tension [lbf/in]"``, ``"Width / mm"``, ``"Zone"``.

    Returns
    -------
    (str, str or None)
        ``("Width", "mm")``; the unit is None when the header names none.
    """
    t = " ".join(str(text).split())
    m = _UNIT_TAIL.match(t)
    if m is None:
        return t, None
    unit = next(g for g in (m["u1"], m["u2"], m["u3"], m["u4"]) if g is not None)
    return m["name"], unit


def _build_lookup(columns: tuple[Column, ...]) -> dict[str, Column]:
    lookup: dict[str, Column] = {}
    for col in columns:
        for spelling in (col.name, col.field, *col.synonyms):
            key = header_key(spelling)
            if key in lookup and lookup[key] is not col:
                raise AssertionError(f"header {spelling!r} is ambiguous in {col.table}")
            lookup[key] = col
    return lookup


_LOOKUP = {
    PANELS: _build_lookup(PANEL_COLUMNS),
    EQUIPMENT: _build_lookup(EQUIPMENT_COLUMNS),
    PROJECT: _build_lookup(PROJECT_KEYS),
}


def match_header(text: str, table: str) -> tuple[Column, str | None] | None:
    """The column a header names in ``table``, and the unit it states.

    Parameters
    ----------
    text : str
        The header as typed.
    table : {"panels", "equipment", "project"}

    Returns
    -------
    (Column, str or None) or None
        None when the header is not one the table knows. When the text less a trailing
        unit names a different column than the whole text, the whole text wins (so
        ``"rpm (min)"`` is the minimum speed, not rpm in minutes).
    """
    lookup = _LOOKUP[table]
    whole = lookup.get(header_key(text))
    name, unit = split_header(text)
    part = lookup.get(header_key(name)) if unit is not None else None
    if part is not None and (whole is None or whole is part):
        return part, unit
    if whole is not None:
        return whole, None
    return None


def match_project_key(text: str) -> tuple[Column, str | None] | None:
    """The project key a cell names (``"Line frequency (Hz)"``), like :func:`match_header`."""
    return match_header(text, PROJECT)


def suggest_header(text: str, table: str) -> str | None:
    """The nearest known header of ``table`` to an unknown one, or None."""
    name, _ = split_header(text)
    key = header_key(name)
    if not key:
        return None
    lookup = _LOOKUP[table]
    match = difflib.get_close_matches(key, list(lookup), n=1, cutoff=0.8)
    return lookup[match[0]].name if match else None


def _word_lookup(column: str) -> dict[str, str]:
    out: dict[str, str] = {}
    for word, others in WORDS[column].items():
        for spelling in (word, *others):
            out[header_key(spelling) or spelling] = word
    return out


_WORD_LOOKUP = {column: _word_lookup(column) for column in WORDS}


def match_word(text: str, column: str) -> tuple[str | None, str | None]:
    """The canonical word a cell means in a word column.

    Parameters
    ----------
    text : str
        As typed ("Rectangular", "PVC film").
    column : {"shape", "material", "room_side", "plenum_side", "kind"}

    Returns
    -------
    (str or None, str or None)
        ``(word, None)`` when known; ``(None, suggestion)`` when not, with the nearest known
        word (or None when nothing is near).
    """
    lookup = _WORD_LOOKUP[column]
    stripped = text.strip()
    key = header_key(stripped) or stripped
    word = lookup.get(key)
    if word is not None:
        return word, None
    match = difflib.get_close_matches(key, list(lookup), n=1, cutoff=0.6)
    return None, (lookup[match[0]] if match else None)


def is_note_sheet(name: str) -> bool:
    """True for sheets meant for people ("Read me", "Notes"), which need no table."""
    key = header_key(name)
    return key in NOTE_SHEET_NAMES or key.startswith(("readme", "note", "instruction"))
