"""Outline validation, orientation, circle polygons and the normalised shape key."""

import math

import numpy as np
import pytest

from auditor.model import CircleCutout, PolygonCutout
from auditor.physics.geometry import (
    circle_to_polygon,
    clockwise,
    counter_clockwise,
    interior_angles,
    normalised_shape_key,
    outline_problems,
    signed_area,
)

SQUARE = ((0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0))
L_SHAPE = ((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (1.0, 1.0), (1.0, 2.0), (0.0, 2.0))
PANEL = ((0.0, 0.0), (1.2, 0.0), (1.2, 0.6), (0.0, 0.6))


# ---- measures -------------------------------------------------------------------------
def test_signed_area_follows_orientation():
    # Shoelace formula (B. Braden, College Math. J. 17, 1986): unit square area 1, sign by
    # orientation; three unit squares make the L.
    assert signed_area(SQUARE) == pytest.approx(1.0)
    assert signed_area(SQUARE[::-1]) == pytest.approx(-1.0)
    assert signed_area(L_SHAPE) == pytest.approx(3.0)
    # a repeated closing vertex changes nothing
    assert signed_area(SQUARE + (SQUARE[0],)) == pytest.approx(1.0)


def test_orientation_helpers():
    assert signed_area(counter_clockwise(SQUARE[::-1])) > 0
    assert signed_area(clockwise(SQUARE)) < 0
    assert signed_area(counter_clockwise(SQUARE)) > 0


def test_interior_angles_sum_and_reentrant_corner():
    # Angle sum of a simple n-gon is (n − 2)π (Euclid, Elements I.32 and its corollary).
    for shape in (SQUARE, L_SHAPE, L_SHAPE[::-1]):
        angles = interior_angles(shape)
        assert angles.sum() == pytest.approx((len(shape) - 2) * math.pi)
    angles = interior_angles(L_SHAPE)
    # the L of three unit squares has one re-entrant corner of 3π/2, at (1, 1)
    assert np.count_nonzero(angles > math.pi) == 1
    assert angles[3] == pytest.approx(1.5 * math.pi)
    assert np.allclose(interior_angles(L_SHAPE[::-1])[::-1], angles)


def test_circle_polygon_area_and_orientation():
    # Area of a regular n-gon inscribed in radius r: (n/2) r² sin(2π/n) (standard formula,
    # e.g. CRC Standard Mathematical Tables, regular polygons).
    cut = CircleCutout(0.4, 0.3, 0.2)
    ring = circle_to_polygon(cut, sides=32)
    assert len(ring) == 32
    assert signed_area(ring) < 0  # holes are clockwise
    assert -signed_area(ring) == pytest.approx(16 * 0.1**2 * math.sin(2 * math.pi / 32))
    assert np.allclose(np.hypot(ring[:, 0] - 0.4, ring[:, 1] - 0.3), 0.1)
    # the resolution follows the mesh size: edges no longer than asked, a multiple of 4 sides
    fine = circle_to_polygon(cut, max_edge=0.005)
    edges = np.hypot(*(np.roll(fine, -1, axis=0) - fine).T)
    assert edges.max() <= 0.005 and len(fine) % 4 == 0


# ---- validation -----------------------------------------------------------------------
def test_valid_shapes_pass():
    assert outline_problems(SQUARE) == []
    assert outline_problems(L_SHAPE[::-1]) == []
    assert outline_problems(SQUARE + (SQUARE[0],)) == []  # closed by repeating vertex 1
    cuts = (
        CircleCutout(0.3, 0.3, 0.2),
        PolygonCutout(((0.6, 0.6), (0.8, 0.6), (0.8, 0.8), (0.6, 0.8))),
    )
    assert outline_problems(SQUARE, cuts) == []


def test_too_few_vertices():
    assert outline_problems(((0, 0), (1, 0))) == ["outline has fewer than 3 vertices (2 given)"]
    assert "fewer than 3 vertices" in outline_problems(None)[0]


def test_self_intersection_names_the_edges():
    bow_tie = ((0, 0), (1, 1), (1, 0), (0, 1))  # edges 1 and 3 cross
    assert outline_problems(bow_tie) == ["outline edges 1 and 3 cross (self-intersection)"]
    # a six-vertex outline whose edges 2 and 5 cross (and no others)
    shape = ((0, 0), (4, 0), (4, 4), (6, 4), (6, 2), (2, 2))
    assert outline_problems(shape) == ["outline edges 2 and 5 cross (self-intersection)"]


def test_near_zero_area_and_repeated_points():
    sliver = ((0, 0), (1, 0), (1, 1e-7), (0, 1e-7))
    assert any("near-zero area" in p for p in outline_problems(sliver))
    repeated = ((0, 0), (1, 0), (1, 0), (1, 1), (0, 1))
    assert outline_problems(repeated) == ["outline vertices 2 and 3 coincide (repeated point)"]
    spike = ((0, 0), (2, 0), (1, 0), (1, 1), (0, 1))
    assert any("fold back" in p for p in outline_problems(spike))


def test_circle_cutout_crossing_outside_and_overlap():
    crossing = (CircleCutout(0.40, 0.30, 0.20), CircleCutout(1.15, 0.30, 0.20))
    assert outline_problems(PANEL, crossing) == [
        "cut-out 2 (circle at 1.15, 0.30, Ø 0.20 m) crosses the outline"
    ]
    outside = (CircleCutout(3.0, 3.0, 0.1),)
    assert outline_problems(PANEL, outside) == [
        "cut-out 1 (circle at 3.00, 3.00, Ø 0.10 m) lies outside the outline"
    ]
    overlap = (
        CircleCutout(0.3, 0.3, 0.2),
        CircleCutout(0.9, 0.3, 0.1),
        CircleCutout(0.38, 0.3, 0.1),
    )
    assert outline_problems(PANEL, overlap) == ["cut-out 1 overlaps cut-out 3"]
    assert "zero or negative" in outline_problems(PANEL, (CircleCutout(0.3, 0.3, 0.0),))[0]


def test_polygon_cutout_problems():
    square_hole = PolygonCutout(((0.2, 0.2), (0.4, 0.2), (0.4, 0.4), (0.2, 0.4)))
    through = PolygonCutout(((1.0, 0.2), (1.4, 0.2), (1.4, 0.4), (1.0, 0.4)))
    problems = outline_problems(PANEL, (square_hole, through))
    assert problems == [
        "cut-out 2 (polygon of 4 vertices, first at 1.00, 0.20 m) crosses the outline"]
    inner = PolygonCutout(((0.25, 0.25), (0.35, 0.25), (0.35, 0.35)))  # inside cut-out 1
    assert outline_problems(PANEL, (square_hole, inner)) == ["cut-out 1 overlaps cut-out 2"]
    circle_on_polygon = CircleCutout(0.45, 0.3, 0.2)
    assert outline_problems(PANEL, (square_hole, circle_on_polygon)) == [
        "cut-out 1 overlaps cut-out 2"
    ]
    twisted = PolygonCutout(((0.6, 0.2), (0.8, 0.4), (0.8, 0.2), (0.6, 0.4)))
    assert outline_problems(PANEL, (twisted,)) == [
        "cut-out 1 (polygon of 4 vertices, first at 0.60, 0.20 m) edges 1 and 3 cross "
        "(self-intersection)"
    ]
    two_points = PolygonCutout(((0.6, 0.2), (0.8, 0.4)))
    assert "fewer than 3 vertices" in outline_problems(PANEL, (two_points,))[0]


# ---- the shape key --------------------------------------------------------------------
def test_key_shared_by_translated_scaled_reordered_copies():
    cuts = (CircleCutout(0.3, 0.3, 0.2), CircleCutout(0.9, 0.3, 0.1))
    key = normalised_shape_key(PANEL, cuts, 1.0)
    moved = tuple((2.5 * x + 10.0, 2.5 * y - 3.0) for x, y in PANEL)
    moved_cuts = tuple(CircleCutout(2.5 * c.x + 10.0, 2.5 * c.y - 3.0, 2.5 * c.diameter)
                       for c in cuts)
    assert normalised_shape_key(moved, moved_cuts[::-1], 1.0) == key
    # other orientation and another starting vertex
    assert normalised_shape_key(PANEL[::-1][1:] + PANEL[::-1][:1], cuts, 1.0) == key
    # a different tension ratio, shape or cut-out is a different key
    assert normalised_shape_key(PANEL, cuts, 2.0) != key
    assert normalised_shape_key(L_SHAPE, cuts, 1.0) != key
    assert normalised_shape_key(PANEL, cuts[:1], 1.0) != key
    hash(key)
