"""Plane geometry of panel outlines and cut-outs: validation, orientation, normalisation.

A polygonal panel arrives as ``auditor.model.Panel.outline`` (a tuple of (x, y) vertices in
metres, in order, either orientation) with ``auditor.model.CircleCutout`` and
``auditor.model.PolygonCutout`` records. This module checks that the shape can be meshed
(:func:`outline_problems` returns messages a user can act on), puts the boundaries in the
orientation the finite-element step expects (outline counter-clockwise, holes clockwise),
turns circles into polygons at a resolution suited to the mesh, and reduces a shape to a
hashable key (:func:`normalised_shape_key`) so that panels sharing an outline share one
eigen-solution.

Everything here is pure: plain numbers and arrays in, plain numbers, arrays and strings out.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterable, Sequence

import numpy as np

from auditor.model import CircleCutout, Cutout, PolygonCutout

#: Relative tolerance on lengths (times the outline's size) used by the validation.
LENGTH_TOLERANCE = 1e-9
#: An outline whose area is below this fraction of its perimeter squared is "near-zero".
THINNESS_LIMIT = 1e-5
#: Decimal places (in units of the characteristic length) kept by the shape key.
KEY_DECIMALS = 6
#: Significant digits of the tension ratio kept by the shape key.
KEY_RATIO_DIGITS = 6


# --------------------------------------------------------------------------------------
# Basic measures
# --------------------------------------------------------------------------------------
def as_vertices(vertices: Iterable[Sequence[float]]) -> np.ndarray:
    """Vertices as a float array (V, 2), with a repeated closing vertex dropped.

    Parameters
    ----------
    vertices : sequence of (x, y)  [m]

    Returns
    -------
    ndarray (V, 2)  [m]
    """
    array = np.asarray(list(vertices), dtype=float).reshape(-1, 2)
    if len(array) > 1 and np.array_equal(array[0], array[-1]):
        array = array[:-1]
    return array


def signed_area(vertices: Iterable[Sequence[float]]) -> float:
    """Signed area of a simple polygon, positive when counter-clockwise.

    Parameters
    ----------
    vertices : sequence of (x, y)  [m]

    Returns
    -------
    float  [m²]

    References
    ----------
    The shoelace (surveyor's) formula, e.g. B. Braden, "The surveyor's area formula",
    The College Mathematics Journal 17 (1986) 326-337.
    """
    v = as_vertices(vertices)
    if len(v) < 3:
        return 0.0
    x, y = v[:, 0], v[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))


def perimeter(vertices: Iterable[Sequence[float]]) -> float:
    """Perimeter of a closed polygon  [m]."""
    v = as_vertices(vertices)
    return float(np.sum(np.hypot(*(np.roll(v, -1, axis=0) - v).T)))


def counter_clockwise(vertices: Iterable[Sequence[float]]) -> np.ndarray:
    """The polygon with its vertices in counter-clockwise order (V, 2)  [m]."""
    v = as_vertices(vertices)
    return v[::-1].copy() if signed_area(v) < 0 else v


def clockwise(vertices: Iterable[Sequence[float]]) -> np.ndarray:
    """The polygon with its vertices in clockwise order (V, 2)  [m]."""
    v = as_vertices(vertices)
    return v[::-1].copy() if signed_area(v) > 0 else v


def interior_angles(vertices: Iterable[Sequence[float]]) -> np.ndarray:
    """Interior angle at each vertex of a simple polygon, in (0, 2π)  [rad].

    An angle above π marks a re-entrant (reflex) corner. The result does not depend on the
    orientation of ``vertices``.
    """
    v = counter_clockwise(vertices)
    incoming = v - np.roll(v, 1, axis=0)
    outgoing = np.roll(v, -1, axis=0) - v
    cross = incoming[:, 0] * outgoing[:, 1] - incoming[:, 1] * outgoing[:, 0]
    dot = np.sum(incoming * outgoing, axis=1)
    turn = np.arctan2(cross, dot)  # left turn positive for a counter-clockwise walk
    angles = np.pi - turn
    if signed_area(vertices) < 0:
        angles = angles[::-1]
    return angles


def points_in_polygon(points: np.ndarray, vertices: np.ndarray) -> np.ndarray:
    """Even-odd point-in-polygon test, vectorised over points.

    Parameters
    ----------
    points : ndarray (N, 2)  [m]
    vertices : ndarray (V, 2)  [m]

    Returns
    -------
    ndarray of bool (N,)
        Points exactly on an edge may fall either way.

    References
    ----------
    The crossing-number test: E. Haines, "Point in polygon strategies", Graphics Gems IV
    (1994) 24-46.
    """
    points = np.asarray(points, float).reshape(-1, 2)
    v = np.asarray(vertices, float)
    x, y = points[:, 0][:, None], points[:, 1][:, None]
    x0, y0 = v[:, 0][None, :], v[:, 1][None, :]
    x1, y1 = np.roll(v[:, 0], -1)[None, :], np.roll(v[:, 1], -1)[None, :]
    crosses = (y0 > y) != (y1 > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        x_at = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
    return (np.count_nonzero(crosses & (x < x_at), axis=1) % 2) == 1


def distance_to_segments(points: np.ndarray, starts: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """Shortest distance from each point to a set of segments  [m].

    Parameters
    ----------
    points : ndarray (N, 2)  [m]
    starts, ends : ndarray (S, 2)  [m]

    Returns
    -------
    ndarray (N,)  [m]
    """
    p = np.asarray(points, float).reshape(-1, 2)[:, None, :]
    a, b = np.asarray(starts, float)[None], np.asarray(ends, float)[None]
    ab = b - a
    length2 = np.maximum(np.sum(ab * ab, axis=-1), np.finfo(float).tiny)
    t = np.clip(np.sum((p - a) * ab, axis=-1) / length2, 0.0, 1.0)
    nearest = a + t[..., None] * ab
    return np.min(np.linalg.norm(p - nearest, axis=-1), axis=1)


def polygon_edges(vertices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Start and end points of the edges of a closed polygon, each (V, 2)  [m]."""
    v = np.asarray(vertices, float)
    return v, np.roll(v, -1, axis=0)


def _orientation(a: np.ndarray, b: np.ndarray, c: np.ndarray) -> np.ndarray:
    """Twice the signed area of triangles (a, b, c), broadcast."""
    return (b[..., 0] - a[..., 0]) * (c[..., 1] - a[..., 1]) - (b[..., 1] - a[..., 1]) * (
        c[..., 0] - a[..., 0]
    )


def segments_intersect(
    a0: np.ndarray, a1: np.ndarray, b0: np.ndarray, b1: np.ndarray, tolerance: float = 0.0
) -> np.ndarray:
    """Whether segments a0-a1 and b0-b1 touch or cross, broadcast over leading axes.

    ``tolerance`` [m] widens each segment slightly so that near-touching counts as touching.

    References
    ----------
    The orientation test: T. H. Cormen et al., Introduction to Algorithms, 3rd ed. (2009),
    section 33.1.
    """
    a0, a1, b0, b1 = (np.asarray(v, float) for v in (a0, a1, b0, b1))
    d1 = _orientation(b0, b1, a0)
    d2 = _orientation(b0, b1, a1)
    d3 = _orientation(a0, a1, b0)
    d4 = _orientation(a0, a1, b1)
    len_a = np.hypot(*np.moveaxis(a1 - a0, -1, 0))
    len_b = np.hypot(*np.moveaxis(b1 - b0, -1, 0))
    tol_a = tolerance * len_a  # |orientation| = distance × base length
    tol_b = tolerance * len_b
    proper = (
        ((d1 > tol_b) & (d2 < -tol_b)) | ((d1 < -tol_b) & (d2 > tol_b))
    ) & (((d3 > tol_a) & (d4 < -tol_a)) | ((d3 < -tol_a) & (d4 > tol_a)))

    def on_segment(p, q0, q1, d, tol_len):
        lo = np.minimum(q0, q1) - tolerance
        hi = np.maximum(q0, q1) + tolerance
        inside_box = np.all((p >= lo) & (p <= hi), axis=-1)
        return (np.abs(d) <= tol_len) & inside_box

    touching = (
        on_segment(a0, b0, b1, d1, tol_b)
        | on_segment(a1, b0, b1, d2, tol_b)
        | on_segment(b0, a0, a1, d3, tol_a)
        | on_segment(b1, a0, a1, d4, tol_a)
    )
    return proper | touching


# --------------------------------------------------------------------------------------
# Circles as polygons
# --------------------------------------------------------------------------------------
def circle_polygon_sides(diameter: float, max_edge: float, minimum: int = 16) -> int:
    """Number of sides for a circle drawn as a regular polygon with edges ≤ ``max_edge``.

    Parameters
    ----------
    diameter : float  [m]
    max_edge : float  [m]
        Longest edge wanted (the mesh size near the hole).
    minimum : int
        Fewest sides, whatever the mesh size.

    Returns
    -------
    int
        A multiple of 4 (so the polygon keeps the circle's two mirror axes along x and y).
    """
    if max_edge <= 0:
        raise ValueError("max_edge must be positive")
    sides = max(minimum, math.ceil(math.pi * diameter / max_edge))
    return int(4 * math.ceil(sides / 4))


def circle_to_polygon(
    cutout: CircleCutout, max_edge: float | None = None, sides: int | None = None
) -> np.ndarray:
    """A circular cut-out as a clockwise regular polygon inscribed in the circle.

    Parameters
    ----------
    cutout : CircleCutout  [m]
    max_edge : float, optional  [m]
        Longest polygon edge; sets the number of sides via :func:`circle_polygon_sides`.
    sides : int, optional
        Number of sides, overriding ``max_edge``. One of the two must be given.

    Returns
    -------
    ndarray (sides, 2)  [m]
        Vertices on the circle, clockwise (the orientation of a hole).

    Notes
    -----
    The inscribed polygon has area ``(sides/2π)·sin(2π/sides)`` times the circle's, so the
    hole is slightly smaller than the circle: a relative area deficit of about
    ``(2π/sides)²/6``.
    """
    if sides is None:
        if max_edge is None:
            raise ValueError("give max_edge or sides")
        sides = circle_polygon_sides(cutout.diameter, max_edge)
    angle = -2.0 * np.pi * np.arange(sides) / sides  # clockwise
    radius = 0.5 * cutout.diameter
    return np.column_stack((cutout.x + radius * np.cos(angle), cutout.y + radius * np.sin(angle)))


# --------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------
def describe_cutout(index: int, cutout: Cutout) -> str:
    """A cut-out as the messages name it, e.g. ``cut-out 2 (circle at 0.40, 0.30, Ø 0.20 m)``.

    ``index`` is 1-based.
    """
    if isinstance(cutout, CircleCutout):
        return (
            f"cut-out {index} (circle at {cutout.x:.2f}, {cutout.y:.2f}, "
            f"Ø {cutout.diameter:.2f} m)"
        )
    vertices = tuple(cutout.vertices) if cutout.vertices is not None else ()
    if vertices:
        x, y = vertices[0]
        return (
            f"cut-out {index} (polygon of {len(vertices)} vertices, first at "
            f"{x:.2f}, {y:.2f} m)"
        )
    return f"cut-out {index} (polygon with no vertices)"


def _polygon_problems(vertices: np.ndarray, name: str, scale: float) -> list[str]:
    """Problems of one polygon on its own: too few vertices, repeats, folds, crossings, area."""
    problems: list[str] = []
    count = len(vertices)
    if count < 3:
        return [f"{name} has fewer than 3 vertices ({count} given)"]
    if not np.all(np.isfinite(vertices)):
        return [f"{name} has a vertex that is not a finite number"]
    tol = LENGTH_TOLERANCE * scale
    starts, ends = polygon_edges(vertices)
    lengths = np.hypot(*(ends - starts).T)
    for i in np.flatnonzero(lengths <= tol):
        problems.append(
            f"{name} vertices {i + 1} and {(i + 1) % count + 1} coincide (repeated point)"
        )
    if problems:
        return problems
    # adjacent edges that fold back on each other (a spike of zero width)
    incoming = ends - starts
    outgoing = np.roll(incoming, -1, axis=0)
    cross = incoming[:, 0] * outgoing[:, 1] - incoming[:, 1] * outgoing[:, 0]
    dot = np.sum(incoming * outgoing, axis=1)
    folded = (np.abs(cross) <= 1e-9 * lengths * np.roll(lengths, -1)) & (dot < 0)
    for i in np.flatnonzero(folded):
        problems.append(
            f"{name} edges {i + 1} and {(i + 1) % count + 1} fold back on each other "
            f"at vertex {(i + 1) % count + 1}"
        )
    # non-adjacent edges that touch or cross
    if count > 3:
        i_index, j_index = np.triu_indices(count, k=2)
        keep = ~((i_index == 0) & (j_index == count - 1))
        i_index, j_index = i_index[keep], j_index[keep]
        hits = segments_intersect(
            starts[i_index], ends[i_index], starts[j_index], ends[j_index], tolerance=tol
        )
        for i, j in zip(i_index[hits], j_index[hits]):
            problems.append(f"{name} edges {i + 1} and {j + 1} cross (self-intersection)")
    if problems:  # the area of a crossed or folded polygon means nothing
        return problems
    area = abs(signed_area(vertices))
    length = perimeter(vertices)
    if area <= THINNESS_LIMIT * length**2 or area <= (1e3 * tol) ** 2:
        problems.append(f"{name} has near-zero area ({area:.3g} m²)")
    return problems


def _circle_polygon_relation(
    centre: np.ndarray, radius: float, vertices: np.ndarray, tol: float
) -> str:
    """'inside', 'outside', 'crossing' (circle against polygon) or 'contains'."""
    starts, ends = polygon_edges(vertices)
    gap = float(distance_to_segments(centre[None], starts, ends)[0])
    centre_inside = bool(points_in_polygon(centre[None], vertices)[0])
    if gap <= radius + tol:
        if not centre_inside and np.all(np.hypot(*(vertices - centre).T) < radius - tol):
            return "contains"  # the polygon lies inside the circle
        return "crossing"
    return "inside" if centre_inside else "outside"


def outline_problems(
    outline: Sequence[Sequence[float]] | np.ndarray | None, cutouts: Sequence[Cutout] = ()
) -> list[str]:
    """Everything that stops a polygonal panel with cut-outs from being meshed.

    Parameters
    ----------
    outline : sequence of (x, y) or None  [m]
        Vertices in order, either orientation; a repeated closing vertex is allowed.
    cutouts : sequence of CircleCutout or PolygonCutout  [m]

    Returns
    -------
    list of str
        One plain-language message per problem, naming what is wrong and where (1-based
        vertex, edge and cut-out numbers, edge ``k`` running from vertex ``k`` to ``k+1``).
        Empty when the shape is valid.

    Notes
    -----
    Checks: fewer than 3 vertices, non-finite coordinates, repeated consecutive vertices,
    edges folding back, self-intersection, near-zero area; for each cut-out, the same
    checks on its own plus lying outside the outline, crossing or touching it, and
    overlapping or touching another cut-out.
    """
    if outline is None:
        return ["outline has fewer than 3 vertices (none given)"]
    try:
        vertices = as_vertices(outline)
    except (TypeError, ValueError):
        return ["outline is not a list of (x, y) pairs of numbers"]
    finite = len(vertices) >= 3 and bool(np.all(np.isfinite(vertices)))
    scale = float(np.max(np.ptp(vertices, axis=0))) if finite else 1.0
    problems = _polygon_problems(vertices, "outline", scale)
    if problems:
        return problems
    tol = LENGTH_TOLERANCE * scale * 10
    out_starts, out_ends = polygon_edges(vertices)

    shapes: list[tuple[str, object]] = []  # ("circle", (centre, radius)) or ("polygon", v)
    for index, cutout in enumerate(cutouts, start=1):
        name = describe_cutout(index, cutout)
        if isinstance(cutout, CircleCutout):
            centre = np.array([cutout.x, cutout.y], float)
            radius = 0.5 * float(cutout.diameter)
            if not (np.all(np.isfinite(centre)) and math.isfinite(radius)):
                problems.append(f"{name} has a position or diameter that is not a number")
                shapes.append(("bad", None))
                continue
            if radius <= tol:
                problems.append(f"{name} has a diameter that is zero or negative")
                shapes.append(("bad", None))
                continue
            relation = _circle_polygon_relation(centre, radius, vertices, tol)
            if relation == "crossing":
                problems.append(f"{name} crosses the outline")
            elif relation == "contains":
                problems.append(f"{name} covers the whole outline")
            elif relation == "outside":
                problems.append(f"{name} lies outside the outline")
            shapes.append(("circle", (centre, radius)))
        elif isinstance(cutout, PolygonCutout):
            try:
                hole = as_vertices(cutout.vertices or ())
            except (TypeError, ValueError):
                problems.append(f"{name} is not a list of (x, y) pairs of numbers")
                shapes.append(("bad", None))
                continue
            own = _polygon_problems(hole, name, scale)
            if own:
                problems.extend(own)
                shapes.append(("bad", None))
                continue
            h_starts, h_ends = polygon_edges(hole)
            crossing = segments_intersect(
                h_starts[:, None], h_ends[:, None], out_starts[None], out_ends[None], tol
            ).any()
            if crossing:
                problems.append(f"{name} crosses the outline")
            elif not points_in_polygon(hole[:1], vertices)[0]:
                if points_in_polygon(vertices[:1], hole)[0]:
                    problems.append(f"{name} covers the whole outline")
                else:
                    problems.append(f"{name} lies outside the outline")
            shapes.append(("polygon", hole))
        else:
            problems.append(f"cut-out {index} is neither a circle nor a polygon")
            shapes.append(("bad", None))

    for i in range(len(shapes)):
        for j in range(i + 1, len(shapes)):
            if _shapes_overlap(shapes[i], shapes[j], tol):
                problems.append(f"cut-out {i + 1} overlaps cut-out {j + 1}")
    return problems


def _shapes_overlap(first, second, tol: float) -> bool:
    kind_a, a = first
    kind_b, b = second
    if "bad" in (kind_a, kind_b):
        return False
    if kind_a == "circle" and kind_b == "circle":
        return float(np.hypot(*(a[0] - b[0]))) <= a[1] + b[1] + tol
    if kind_a == "polygon" and kind_b == "circle":
        a, b = b, a
        kind_a, kind_b = kind_b, kind_a
    if kind_a == "circle":  # circle a against polygon b
        centre, radius = a
        starts, ends = polygon_edges(b)
        gap = float(distance_to_segments(centre[None], starts, ends)[0])
        return gap <= radius + tol or bool(points_in_polygon(centre[None], b)[0])
    a_starts, a_ends = polygon_edges(a)
    b_starts, b_ends = polygon_edges(b)
    if segments_intersect(
        a_starts[:, None], a_ends[:, None], b_starts[None], b_ends[None], tol
    ).any():
        return True
    return bool(points_in_polygon(a[:1], b)[0] or points_in_polygon(b[:1], a)[0])


# --------------------------------------------------------------------------------------
# Normalised shapes for the eigen-solution cache
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ShapeNormalisation:
    """The similarity that maps a panel's own coordinates onto its normalised shape.

    ``normalised = (physical - origin) / length``; ``origin`` [m] is the lower-left corner
    of the outline's bounding box and ``length`` [m] the square root of the area inside the
    outline (cut-outs not subtracted).
    """

    origin: tuple[float, float]
    length: float

    def to_normalised(self, points: np.ndarray) -> np.ndarray:
        return (np.asarray(points, float) - np.asarray(self.origin)) / self.length

    def to_physical(self, points: np.ndarray) -> np.ndarray:
        return np.asarray(points, float) * self.length + np.asarray(self.origin)


def shape_normalisation(outline: Sequence[Sequence[float]] | np.ndarray) -> ShapeNormalisation:
    """Origin and characteristic length of an outline (see :class:`ShapeNormalisation`)."""
    vertices = as_vertices(outline)
    origin = vertices.min(axis=0)
    length = math.sqrt(abs(signed_area(vertices)))
    if not length > 0:
        raise ValueError("outline has near-zero area")
    return ShapeNormalisation((float(origin[0]), float(origin[1])), length)


def _round(values: np.ndarray) -> tuple:
    rounded = np.round(np.asarray(values, float), KEY_DECIMALS) + 0.0  # no negative zeros
    return tuple(map(tuple, rounded.tolist())) if rounded.ndim == 2 else tuple(rounded.tolist())


def _canonical_ring(vertices: np.ndarray, counter: bool) -> np.ndarray:
    """Orient a ring and start it at its lexicographically smallest vertex."""
    ring = counter_clockwise(vertices) if counter else clockwise(vertices)
    rounded = np.round(ring, KEY_DECIMALS)
    start = int(np.lexsort((rounded[:, 1], rounded[:, 0]))[0])
    return np.roll(ring, -start, axis=0)


def normalised_shape_key(
    outline: Sequence[Sequence[float]] | np.ndarray, cutouts: Sequence[Cutout] = (),
    tension_ratio: float = 1.0,
) -> tuple:
    """A hashable key shared by every panel of the same shape (up to size and position).

    Parameters
    ----------
    outline : sequence of (x, y)  [m]
        A valid outline (see :func:`outline_problems`), either orientation.
    cutouts : sequence of CircleCutout or PolygonCutout  [m]
    tension_ratio : float  [-]
        ``tension_y / tension_x``.

    Returns
    -------
    tuple
        ``(outline, cutouts, tension_ratio)``: the outline translated so its bounding box
        starts at the origin, divided by :class:`ShapeNormalisation` ``length``,
        counter-clockwise from its lexicographically smallest vertex, rounded to
        ``KEY_DECIMALS`` places; each cut-out as ``("circle", x, y, diameter)`` or
        ``("polygon", vertices)`` (clockwise) in the same units, sorted; the ratio to
        ``KEY_RATIO_DIGITS`` significant digits. Translated, scaled and re-ordered copies
        of a shape share a key; rotated and mirrored copies do not.
    """
    normalisation = shape_normalisation(outline)
    ring = _canonical_ring(normalisation.to_normalised(as_vertices(outline)), counter=True)
    holes = []
    for cutout in cutouts:
        if isinstance(cutout, CircleCutout):
            centre = normalisation.to_normalised(np.array([cutout.x, cutout.y]))
            holes.append(
                ("circle",) + _round(np.array([centre[0], centre[1],
                                               cutout.diameter / normalisation.length]))
            )
        else:
            hole = _canonical_ring(
                normalisation.to_normalised(as_vertices(cutout.vertices)), counter=False
            )
            holes.append(("polygon", _round(hole)))
    ratio = float(f"{float(tension_ratio):.{KEY_RATIO_DIGITS}g}")
    return (_round(ring), tuple(sorted(holes, key=repr)), ratio)
