"""Turning one row's values into a record, or saying what stops it.

The reader has already read each cell into SI (``auditor.schedule.cells``); here the row is
checked as a whole: required fields per shape and per kind, positive sizes, minimum not above
maximum, a sealed plenum with its depth, cut-outs inside their panel, and values outside the
usual range for a material (warnings, never rejections).

Each check yields a :class:`Note` naming the field it concerns (``None`` for the whole row);
the reader turns notes into ``auditor.model.RowProblem`` with the file, sheet, row and the
header as typed. Nothing here knows about files.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from auditor.model import CircleCutout, Equipment, Panel, PolygonCutout, SourceRef

__all__ = [
    "Note",
    "USUAL_AREAL_DENSITY",
    "USUAL_TENSION",
    "panel_from_values",
    "equipment_from_values",
    "polygon_area",
    "polygon_is_simple",
]


@dataclass(frozen=True)
class Note:
    """One finding about a row: ``severity`` "error" rejects it, "warning" keeps it."""

    severity: str
    field: str | None
    message: str


# Usual ranges by material, for warnings only. Common practice (values seen in manufacturers'
# data for stretched PVC/polyester film ceilings, coated and uncoated fabrics for wrapped
# panels and stretched fabric systems, woven and welded architectural wire mesh, and thin
# metal sheet); from memory, not from one published table.
USUAL_AREAL_DENSITY: dict[str, tuple[float, float]] = {  # [kg/m²]
    "film": (0.1, 0.6),
    "fabric": (0.1, 1.0),
    "mesh": (0.3, 30.0),
    "plate": (1.0, 100.0),
}
USUAL_TENSION: dict[str, tuple[float, float]] = {  # [N/m]
    "film": (100.0, 3000.0),
    "fabric": (50.0, 5000.0),
    "mesh": (200.0, 50000.0),
}
# [-] common practice: structural loss factors of these systems are well below this
USUAL_LOSS_FACTOR_MAX = 0.5
# [m] common practice: a larger panel dimension usually means mm typed in a column in m
LARGEST_USUAL_SPAN = 30.0
SMALLEST_USUAL_SPAN = 0.02  # [m] common practice: a smaller one usually means m typed as mm
DEEPEST_USUAL_CAVITY = 5.0  # [m] common practice
USUAL_LINE_FREQUENCIES = (50.0, 60.0)  # [Hz] common practice: public supply frequencies
LARGEST_USUAL_SLIP = 0.1  # [-] common practice: induction motors run at 1-8 % slip at load

_RANGE_NOTE = "(usual range, common practice)"


def _fmt(value: float) -> str:
    return f"{value:.4g}"


def polygon_area(vertices: tuple[tuple[float, float], ...]) -> float:
    """Signed area by the shoelace formula  [m²]; positive when counter-clockwise.

    References
    ----------
    Shoelace (surveyor's) formula, e.g. B. Braden, "The Surveyor's Area Formula",
    The College Mathematics Journal 17(4), 1986, 326-337.
    """
    total = 0.0
    n = len(vertices)
    for i in range(n):
        x0, y0 = vertices[i]
        x1, y1 = vertices[(i + 1) % n]
        total += x0 * y1 - x1 * y0
    return 0.5 * total


def _segments_cross(p1, p2, q1, q2) -> bool:
    """True when closed segments p1p2 and q1q2 share a point (orientation test)."""

    def orient(a, b, c) -> float:
        return (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])

    def on_segment(a, b, c) -> bool:
        return (min(a[0], b[0]) <= c[0] <= max(a[0], b[0])
                and min(a[1], b[1]) <= c[1] <= max(a[1], b[1]))

    d1, d2 = orient(q1, q2, p1), orient(q1, q2, p2)
    d3, d4 = orient(p1, p2, q1), orient(p1, p2, q2)
    if ((d1 > 0) != (d2 > 0)) and ((d3 > 0) != (d4 > 0)) and 0 not in (d1, d2, d3, d4):
        return True
    return ((d1 == 0 and on_segment(q1, q2, p1)) or (d2 == 0 and on_segment(q1, q2, p2))
            or (d3 == 0 and on_segment(p1, p2, q1)) or (d4 == 0 and on_segment(p1, p2, q2)))


def polygon_is_simple(vertices: tuple[tuple[float, float], ...]) -> bool:
    """True when no two non-adjacent edges of the closed polygon touch or cross."""
    n = len(vertices)
    edges = [(vertices[i], vertices[(i + 1) % n]) for i in range(n)]
    for i in range(n):
        for j in range(i + 1, n):
            if j == i + 1 or (i == 0 and j == n - 1):
                continue
            if _segments_cross(*edges[i], *edges[j]):
                return False
    return len(set(vertices)) == n


def _point_in_polygon(x: float, y: float, vertices) -> bool:
    """Ray casting (even-odd rule)."""
    inside = False
    n = len(vertices)
    for i in range(n):
        x0, y0 = vertices[i]
        x1, y1 = vertices[(i + 1) % n]
        if (y0 > y) != (y1 > y) and x < x0 + (y - y0) * (x1 - x0) / (y1 - y0):
            inside = not inside
    return inside


def _distance_to_edges(x: float, y: float, vertices) -> float:
    best = math.inf
    n = len(vertices)
    for i in range(n):
        (x0, y0), (x1, y1) = vertices[i], vertices[(i + 1) % n]
        dx, dy = x1 - x0, y1 - y0
        length2 = dx * dx + dy * dy
        t = 0.0 if length2 == 0 else max(0.0, min(1.0, ((x - x0) * dx + (y - y0) * dy) / length2))
        best = min(best, math.hypot(x - (x0 + t * dx), y - (y0 + t * dy)))
    return best


def _outline_of(shape: str, values: dict[str, Any]):
    """The panel's boundary as a polygon (rectangle, polygon) or None for a circle."""
    if shape == "rectangle":
        w, l = values["width"], values["length"]
        return ((0.0, 0.0), (w, 0.0), (w, l), (0.0, l))
    if shape == "polygon":
        return values["outline"]
    return None


def _check_cutouts(shape: str, values: dict[str, Any], notes: list[Note]) -> None:
    cutouts = values.get("cutouts") or ()
    outline = _outline_of(shape, values)
    radius = values["diameter"] / 2 if shape == "circle" else None

    def inside(x: float, y: float, clearance: float = 0.0) -> bool:
        if radius is not None:
            return math.hypot(x, y) + clearance < radius
        return _point_in_polygon(x, y, outline) and _distance_to_edges(x, y, outline) > clearance

    for k, cut in enumerate(cutouts, start=1):
        if isinstance(cut, CircleCutout):
            if not cut.diameter > 0:
                notes.append(Note("error", "cutouts", f"cut-out {k}: diameter must be positive"))
            elif not inside(cut.x, cut.y, cut.diameter / 2):
                notes.append(Note("error", "cutouts",
                                  f"cut-out {k} (circle at {_fmt(cut.x)}, {_fmt(cut.y)} m, "
                                  f"diameter {_fmt(cut.diameter)} m) reaches the panel's edge "
                                  "or lies outside it"))
        elif isinstance(cut, PolygonCutout):
            v = cut.vertices
            if len(v) < 3:
                notes.append(Note("error", "cutouts",
                                  f"cut-out {k} needs at least 3 vertices, has {len(v)}"))
            elif not polygon_is_simple(v) or abs(polygon_area(v)) <= 0:
                notes.append(Note("error", "cutouts",
                                  f"cut-out {k}: its edges cross or it has no area"))
            elif not all(inside(x, y) for x, y in v):
                notes.append(Note("error", "cutouts",
                                  f"cut-out {k} reaches the panel's edge or lies outside it"))


def _positive(values, field, label, notes, *, unit: str = "") -> bool:
    value = values.get(field)
    if value is None:
        return False
    if not value > 0:
        notes.append(Note("error", field, f"{label} must be positive, not {_fmt(value)}{unit}"))
        return False
    return True


def _span_warnings(values, field, label, notes) -> None:
    value = values.get(field)
    if value is None or not value > 0:
        return
    if value > LARGEST_USUAL_SPAN:
        notes.append(Note("warning", field,
                          f"{label} {_fmt(value)} m is larger than {LARGEST_USUAL_SPAN:g} m "
                          "(common practice); check the unit (mm typed in a column in m?)"))
    elif value < SMALLEST_USUAL_SPAN:
        notes.append(Note("warning", field,
                          f"{label} {_fmt(value)} m is smaller than {SMALLEST_USUAL_SPAN:g} m "
                          "(common practice); check the unit (m typed in a column in mm?)"))


def _range_warning(value, usual, field, label, unit, material, notes) -> None:
    low, high = usual
    if value is not None and value > 0 and not (low <= value <= high):
        notes.append(Note("warning", field,
                          f"{label} {_fmt(value)} {unit} is outside {_fmt(low)}-{_fmt(high)} "
                          f"{unit} for {material} {_RANGE_NOTE}; check the value and its unit"))


_GEOMETRY_FIELDS = {"rectangle": ("width", "length"), "circle": ("diameter",),
                    "polygon": ("outline",)}


def _infer_shape(values: dict[str, Any]) -> str:
    if values.get("outline"):
        return "polygon"
    if values.get("diameter") is not None and values.get("width") is None \
            and values.get("length") is None:
        return "circle"
    return "rectangle"


def panel_from_values(
    values: dict[str, Any], source: SourceRef, entered: tuple[tuple[str, str], ...] = ()
) -> tuple[Panel | None, list[Note]]:
    """Check one panel row and build its record.

    Parameters
    ----------
    values : dict
        Field name (``Panel`` attribute, or ``"tension"``) → value already in SI; only the
        cells that were filled and read.
    source : SourceRef
    entered : tuple of (header, text)

    Returns
    -------
    (Panel or None, list of Note)
        None when any note is an error.
    """
    notes: list[Note] = []
    panel_id = values.get("panel", "")
    if not panel_id:
        notes.append(Note("error", "panel", "the row has no panel id"))

    shape = values.get("shape") or _infer_shape(values)
    for field in _GEOMETRY_FIELDS[shape]:
        if values.get(field) is None:
            label = field if field != "outline" else "outline (x,y; x,y; ...)"
            notes.append(Note("error", field, f"a {shape} needs its {label}"))
    for other, fields in _GEOMETRY_FIELDS.items():
        if other == shape:
            continue
        for field in fields:
            if values.get(field) is not None and field not in _GEOMETRY_FIELDS[shape]:
                notes.append(Note("warning", field, f"{field} is not used for a {shape}; ignored"))
    geometry_ok = True
    for field in ("width", "length", "diameter"):
        if values.get(field) is not None:
            geometry_ok &= _positive(values, field, field, notes, unit=" m")
            _span_warnings(values, field, field, notes)
    if shape == "polygon" and values.get("outline") is not None:
        outline = values["outline"]
        if len(outline) < 3:
            notes.append(Note("error", "outline",
                              f"a polygon needs at least 3 vertices, has {len(outline)}"))
            geometry_ok = False
        elif not polygon_is_simple(outline):
            notes.append(Note("error", "outline",
                              "the outline's edges cross or touch (or a vertex repeats); list "
                              "the vertices in order around the panel"))
            geometry_ok = False
        elif abs(polygon_area(outline)) <= 0:
            notes.append(Note("error", "outline", "the outline encloses no area"))
            geometry_ok = False
    if geometry_ok and not any(n.severity == "error" and n.field in ("width", "length",
                                                                        "diameter", "outline")
                               for n in notes):
        _check_cutouts(shape, values, notes)

    material = values.get("material") or "film"
    areal_density = values.get("areal_density")
    if areal_density is None:
        notes.append(Note("error", "areal_density", "areal density is required"))
    elif _positive(values, "areal_density", "areal density", notes, unit=" kg/m²"):
        _range_warning(areal_density, USUAL_AREAL_DENSITY[material], "areal_density",
                       "areal density", "kg/m²", material, notes)

    bending = values.get("bending_stiffness")
    if bending is not None and bending < 0:
        notes.append(Note("error", "bending_stiffness",
                          f"bending stiffness must not be negative, not {_fmt(bending)} N·m"))
    may_be_slack = material == "plate" and bending is not None and bending > 0

    both = values.get("tension")
    tension_x = values.get("tension_x", both)
    tension_y = values.get("tension_y", both)
    if tension_x is None and tension_y is None:
        notes.append(Note("error", "tension",
                          "tension (or tension x and tension y) is required"))
        checks = []
    elif "tension_x" not in values and "tension_y" not in values:
        checks = [("tension", both, "tension")]
    else:
        checks = [("tension_x" if "tension_x" in values else "tension", tension_x, "tension x"),
                  ("tension_y" if "tension_y" in values else "tension", tension_y, "tension y")]
    for field, value, label in checks:
        if value is None:
            notes.append(Note("error", "tension_y" if label == "tension y" else "tension_x",
                              f"{label} is required (or give tension for both directions)"))
        elif value < 0 or (value == 0 and not may_be_slack):
            notes.append(Note("error", field, f"{label} must be positive, not {_fmt(value)} N/m"))
        elif material in USUAL_TENSION and value > 0:
            _range_warning(value, USUAL_TENSION[material], field, label, "N/m", material, notes)
    if material == "plate" and not (bending and bending > 0):
        notes.append(Note("warning", "bending_stiffness",
                          "a plate with no bending stiffness is treated as a membrane; give "
                          "its bending stiffness"))

    loss_factor = values.get("loss_factor")
    if loss_factor is not None:
        if loss_factor < 0:
            notes.append(Note("error", "loss_factor",
                              f"loss factor must not be negative, not {_fmt(loss_factor)}"))
        elif loss_factor > USUAL_LOSS_FACTOR_MAX:
            notes.append(Note("warning", "loss_factor",
                              f"loss factor {_fmt(loss_factor)} is above "
                              f"{USUAL_LOSS_FACTOR_MAX:g} {_RANGE_NOTE}; was a percentage "
                              "typed without %?"))
    airflow = values.get("airflow_resistance")
    if airflow is not None and airflow < 0:
        notes.append(Note("error", "airflow_resistance",
                          f"airflow resistance must not be negative, not {_fmt(airflow)} Pa·s/m"))

    plenum = values.get("plenum_side") or "air"
    depth = values.get("cavity_depth")
    if depth is not None:
        if _positive(values, "cavity_depth", "cavity depth", notes, unit=" m"):
            if depth > DEEPEST_USUAL_CAVITY:
                notes.append(Note("warning", "cavity_depth",
                                  f"cavity depth {_fmt(depth)} m is deeper than "
                                  f"{DEEPEST_USUAL_CAVITY:g} m (common practice); check the unit"))
            if plenum != "sealed":
                notes.append(Note("warning", "cavity_depth",
                                  f"cavity depth is used only with a sealed plenum (plenum side "
                                  f"is {plenum}); ignored"))
    elif plenum == "sealed":
        notes.append(Note("error", "cavity_depth",
                          "a sealed plenum needs its cavity depth"))

    max_tension = values.get("max_tension")
    if max_tension is not None and _positive(values, "max_tension", "max tension", notes,
                                             unit=" N/m"):
        for value, label in ((tension_x, "tension x"), (tension_y, "tension y")):
            if value is not None and value > max_tension:
                notes.append(Note("warning", "max_tension",
                                  f"{label} {_fmt(value)} N/m is above the rated maximum "
                                  f"{_fmt(max_tension)} N/m; confirm with the system's "
                                  "manufacturer and a competent installer"))

    if any(n.severity == "error" for n in notes):
        return None, notes
    panel = Panel(
        panel=panel_id,
        source=source,
        shape=shape,
        zone=values.get("zone", ""),
        width=values.get("width") if shape == "rectangle" else None,
        length=values.get("length") if shape == "rectangle" else None,
        diameter=values.get("diameter") if shape == "circle" else None,
        outline=values.get("outline") if shape == "polygon" else None,
        cutouts=values.get("cutouts") or (),
        material=material,
        areal_density=areal_density,
        tension_x=tension_x,
        tension_y=tension_y,
        bending_stiffness=bending or 0.0,
        loss_factor=loss_factor,
        airflow_resistance=airflow,
        room_side=values.get("room_side") or "air",
        plenum_side=plenum,
        cavity_depth=depth if plenum == "sealed" else None,
        max_tension=max_tension,
        tap_test=values.get("tap_test") or None,
        entered=entered,
    )
    return panel, notes


# What each kind needs; "speed" means rpm, or both rpm min and rpm max.
_KIND_NEEDS: dict[str, tuple[str, ...]] = {
    "fan": ("speed", "blades"),
    "pump": ("speed", "vanes"),
    "motor": ("speed|poles",),
    "compressor": ("speed", "cylinders"),
    "transformer": (),
    "belt": ("speed", "pulley_diameter", "belt_length"),
    "flow": ("velocity", "wire_diameter"),
    "tone": ("frequency",),
}
_SPEED = ("rpm", "rpm_min", "rpm_max")
_FREQUENCY = ("frequency", "frequency_min", "frequency_max")
_KIND_USES: dict[str, frozenset[str]] = {
    "fan": frozenset(_SPEED + ("blades",)),
    "pump": frozenset(_SPEED + ("vanes",)),
    "motor": frozenset(_SPEED + ("poles", "slip", "line_frequency")),
    "compressor": frozenset(_SPEED + ("cylinders",)),
    "transformer": frozenset(("line_frequency",)),
    "belt": frozenset(_SPEED + ("pulley_diameter", "belt_length")),
    "flow": frozenset(("velocity", "wire_diameter")),
    "tone": frozenset(_FREQUENCY),
}
_ALWAYS = frozenset(("equipment", "kind", "zones", "harmonics"))
_LABEL = {
    "rpm": "rpm", "rpm_min": "rpm min", "rpm_max": "rpm max", "blades": "blades",
    "vanes": "vanes", "cylinders": "cylinders", "poles": "poles", "slip": "slip",
    "line_frequency": "line frequency", "frequency": "frequency",
    "frequency_min": "frequency min", "frequency_max": "frequency max",
    "velocity": "velocity", "wire_diameter": "wire diameter",
    "pulley_diameter": "pulley diameter", "belt_length": "belt length",
    "harmonics": "harmonics",
}


def _range_pair(values, low: str, high: str, notes: list[Note]) -> bool:
    """Check a min/max pair; True when both are present and in order."""
    a, b = values.get(low), values.get(high)
    if a is None and b is None:
        return False
    if a is None or b is None:
        given, missing = (low, high) if b is None else (high, low)
        notes.append(Note("error", missing,
                          f"{_LABEL[given]} is given without {_LABEL[missing]}"))
        return False
    if a > b:
        notes.append(Note("error", low,
                          f"{_LABEL[low]} {_fmt(a)} is above {_LABEL[high]} {_fmt(b)}"))
        return False
    return True


def equipment_from_values(
    values: dict[str, Any], source: SourceRef, entered: tuple[tuple[str, str], ...] = ()
) -> tuple[Equipment | None, list[Note]]:
    """Check one equipment row and build its record.

    Parameters
    ----------
    values : dict
        Field name (``Equipment`` attribute) → value in SI (speeds in rpm).
    source : SourceRef
    entered : tuple of (header, text)

    Returns
    -------
    (Equipment or None, list of Note)
    """
    notes: list[Note] = []
    tag = values.get("equipment", "")
    if not tag:
        notes.append(Note("error", "equipment", "the row has no equipment tag"))
    kind = values.get("kind")
    if kind is None:
        notes.append(Note("error", "kind",
                          "kind is required (fan, pump, motor, compressor, transformer, belt, "
                          "flow or tone)"))

    for field in ("rpm", "rpm_min", "rpm_max", "frequency", "frequency_min", "frequency_max",
                  "velocity", "wire_diameter", "pulley_diameter", "belt_length",
                  "line_frequency"):
        if values.get(field) is not None:
            _positive(values, field, _LABEL[field], notes)
    for field in ("blades", "vanes", "cylinders", "poles", "harmonics"):
        value = values.get(field)
        if value is not None and value < 1:
            notes.append(Note("error", field, f"{_LABEL[field]} must be at least 1, not {value}"))
    poles = values.get("poles")
    if poles is not None and poles >= 1 and poles % 2:
        notes.append(Note("error", "poles",
                          f"poles must be an even number (2, 4, 6 ...), not {poles}"))
    slip = values.get("slip")
    if slip is not None:
        if not 0 <= slip < 1:
            notes.append(Note("error", "slip",
                              f"slip must be a fraction from 0 to below 1 (or a percentage "
                              f"with %), not {_fmt(slip)}"))
        elif slip > LARGEST_USUAL_SLIP:
            notes.append(Note("warning", "slip",
                              f"slip {_fmt(slip)} is above {LARGEST_USUAL_SLIP:g} "
                              f"{_RANGE_NOTE}"))
    line = values.get("line_frequency")
    if line is not None and line > 0 and line not in USUAL_LINE_FREQUENCIES:
        notes.append(Note("warning", "line_frequency",
                          f"line frequency {_fmt(line)} Hz is neither 50 nor 60 Hz "
                          "(common practice)"))

    has_range = _range_pair(values, "rpm_min", "rpm_max", notes)
    has_speed = values.get("rpm") is not None or has_range
    has_band = _range_pair(values, "frequency_min", "frequency_max", notes)
    has_frequency = values.get("frequency") is not None or has_band
    range_errors = any(n.field in _SPEED + _FREQUENCY and n.severity == "error" for n in notes)

    if kind is not None:
        for need in _KIND_NEEDS[kind]:
            if need == "speed":
                if not has_speed and not range_errors:
                    notes.append(Note("error", "rpm",
                                      f"a {kind} needs its rpm (or rpm min and rpm max)"))
            elif need == "speed|poles":
                if not has_speed and values.get("poles") is None and not range_errors:
                    notes.append(Note("error", "rpm",
                                      f"a {kind} needs its rpm (or rpm min and rpm max) or "
                                      "its poles"))
            elif need == "frequency":
                if not has_frequency and not range_errors:
                    notes.append(Note("error", "frequency",
                                      f"a {kind} needs its frequency (or frequency min and "
                                      "frequency max)"))
            elif values.get(need) is None:
                notes.append(Note("error", need, f"a {kind} needs its {_LABEL[need]}"))
        uses = _KIND_USES[kind] | _ALWAYS
        for field in values:
            if field not in uses and field in _LABEL:
                notes.append(Note("warning", field,
                                  f"{_LABEL[field]} is not used for a {kind}; ignored"))

    if any(n.severity == "error" for n in notes):
        return None, notes
    item = Equipment(
        equipment=tag,
        source=source,
        kind=kind,
        zones=values.get("zones"),
        entered=entered,
        **{f: values.get(f) for f in _LABEL},
    )
    return item, notes
