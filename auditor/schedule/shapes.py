"""Checking a panel's geometry: sizes within the physical limits, and a shape the physics
can mesh.

The exact solutions (a rectangle, a circle) take any positive sizes; a polygon, or any panel
with cut-outs, goes to the finite-element path, which meshes it only when
``auditor.physics.geometry.outline_problems`` finds nothing wrong with it. The same test is
run here, on the same outline, so that a panel accepted by ``auditor check`` is never
rejected by ``auditor audit``.
"""

from __future__ import annotations

import math
from typing import Any

from auditor.model import CircleCutout, PolygonCutout, ShapeKind
from auditor.physics.geometry import circle_to_polygon, outline_problems
from auditor.schedule.checks import LIMIT_NOTE, Note, fmt, span_warnings, within
from auditor.schedule.limits import LARGEST_SPAN, SMALLEST_SPAN

__all__ = ["GEOMETRY_FIELDS", "infer_shape", "geometry_notes"]

#: Sides of the polygon the finite-element path draws for a circular panel
#: (``auditor.physics.modes``); its cut-outs are checked against the same polygon.
_CIRCLE_SIDES = 96

#: The size fields each shape needs.
GEOMETRY_FIELDS = {"rectangle": ("width", "length"), "circle": ("diameter",),
                   "polygon": ("outline",)}


def infer_shape(values: dict[str, Any]) -> ShapeKind:
    """The shape the sizes given imply: an outline a polygon, a diameter alone a circle."""
    if values.get("outline"):
        return "polygon"
    if values.get("diameter") is not None and values.get("width") is None \
            and values.get("length") is None:
        return "circle"
    return "rectangle"


def _coordinates_within(points, field: str, what: str, notes: list[Note]) -> bool:
    for x, y in points:
        if not (math.isfinite(x) and math.isfinite(y)):
            notes.append(Note("error", field, f"{what} has a coordinate that is not a number"))
            return False
        if max(abs(x), abs(y)) > LARGEST_SPAN:
            notes.append(Note("error", field,
                              f"{what} has a point {fmt(max(abs(x), abs(y)))} m from the "
                              f"origin, farther than any panel reaches (the limit is "
                              f"{LARGEST_SPAN:g} m, {LIMIT_NOTE}); check the unit"))
            return False
    return True


def _outline_within(outline, notes: list[Note]) -> bool:
    if len(outline) < 3:
        notes.append(Note("error", "outline",
                          f"a polygon needs at least 3 vertices, has {len(outline)}"))
        return False
    if not _coordinates_within(outline, "outline", "the outline", notes):
        return False
    xs, ys = [x for x, _ in outline], [y for _, y in outline]
    extent = max(max(xs) - min(xs), max(ys) - min(ys))
    if extent < SMALLEST_SPAN:
        notes.append(Note("error", "outline",
                          f"the outline spans {fmt(extent)} m, smaller than any panel (the "
                          f"limit is {SMALLEST_SPAN:g} m, {LIMIT_NOTE}); check the unit"))
        return False
    span_warnings(extent, "outline", "outline span", notes)
    return True


def _cutouts_within(cutouts, notes: list[Note]) -> bool:
    ok = True
    for k, cut in enumerate(cutouts, start=1):
        what = f"cut-out {k}"
        if isinstance(cut, CircleCutout):
            ok &= _coordinates_within([(cut.x, cut.y)], "cutouts", what, notes) and within(
                cut.diameter, "cutouts", f"{what}: diameter", "m", notes, low=SMALLEST_SPAN,
                high=LARGEST_SPAN, what="any opening in a panel")
        elif isinstance(cut, PolygonCutout):
            ok &= _coordinates_within(cut.vertices, "cutouts", what, notes)
    return ok


def _mesh_outline(shape: str, values: dict[str, Any]) -> tuple[tuple[float, float], ...]:
    """The outline the finite-element path meshes (``auditor.physics.modes``)."""
    if shape == "polygon":
        return tuple(values["outline"])
    if shape == "circle":
        ring = circle_to_polygon(CircleCutout(0.0, 0.0, values["diameter"]),
                                 sides=_CIRCLE_SIDES)
        return tuple((float(x), float(y)) for x, y in ring)
    w, l = values["width"], values["length"]
    return ((0.0, 0.0), (w, 0.0), (w, l), (0.0, l))


def _mesh_notes(shape: str, values: dict[str, Any], notes: list[Note]) -> None:
    """The physics' own test of a shape it meshes: a polygon, or any panel with cut-outs."""
    cutouts = values.get("cutouts") or ()
    if shape != "polygon" and not cutouts:
        return  # the exact solutions take any positive sizes
    size_field = {"rectangle": "width", "circle": "diameter"}.get(shape, "outline")
    for message in outline_problems(_mesh_outline(shape, values), cutouts):
        field = "cutouts" if message.startswith("cut-out") else size_field
        if "cross (self-intersection)" in message:
            message += "; list the vertices in order around the edge"
        notes.append(Note("error", field, message))


def geometry_notes(shape: str, values: dict[str, Any], notes: list[Note]) -> None:
    """Check a panel's geometry fields for ``shape``; append what is wrong to ``notes``.

    Parameters
    ----------
    shape : {"rectangle", "circle", "polygon"}
    values : dict
        The row's values in SI (``width``, ``length``, ``diameter``, ``outline``,
        ``cutouts`` where given).
    notes : list of Note
        Appended to: missing sizes, sizes beyond the physical limits (errors), unusual
        sizes and sizes the shape does not use (warnings), and whatever stops the physics
        from meshing the shape (errors).
    """
    for field in GEOMETRY_FIELDS[shape]:
        if values.get(field) is None:
            label = field if field != "outline" else "outline (x,y; x,y; ...)"
            notes.append(Note("error", field, f"a {shape} needs its {label}"))
    for other, fields in GEOMETRY_FIELDS.items():
        if other == shape:
            continue
        for field in fields:
            if values.get(field) is not None and field not in GEOMETRY_FIELDS[shape]:
                notes.append(Note("warning", field, f"{field} is not used for a {shape}; ignored"))
    needed = GEOMETRY_FIELDS[shape]
    geometry_ok = not any(n.severity == "error" and n.field in needed for n in notes)
    for field in GEOMETRY_FIELDS[shape]:
        value = values.get(field)
        if value is None:
            continue
        if field == "outline":
            geometry_ok &= _outline_within(value, notes)
        elif within(value, field, field, "m", notes, low=SMALLEST_SPAN, high=LARGEST_SPAN,
                    what="any panel"):
            span_warnings(value, field, field, notes)
        else:
            geometry_ok = False
    geometry_ok &= _cutouts_within(values.get("cutouts") or (), notes)
    if geometry_ok:
        _mesh_notes(shape, values, notes)
