"""The pieces of the mode-shape drawings against analytic facts: nodal lines traced from
sampled shapes (``auditor.report.nodal_lines``) and the ± regions as merged raster cells
(``auditor.report.shape_regions``)."""

from __future__ import annotations

import numpy as np
import pytest
from report_factory import circle_shape, rectangle_shape
from scipy.special import jn_zeros

from auditor.report.nodal_lines import level_lines, settle_border_zeros, simplify_polyline
from auditor.report.shape_regions import layered_cell_runs, merged_cell_runs

# --- nodal lines -----------------------------------------------------------------------------


def test_rectangle_nodal_lines_where_rayleigh_puts_them():
    # Rayleigh, The Theory of Sound, vol. 1 ch. IX: mode (m, n) of a fixed rectangle,
    # sin(mπx/Lx) sin(nπy/Ly), has m-1 nodal lines x = k Lx/m and n-1 lines y = k Ly/n.
    width, length = 1.8, 1.2
    shape = rectangle_shape("(3,2)", width, length, nx=73, ny=49)
    lines = level_lines(shape.x, shape.y, shape.values)
    points = np.vstack(lines)
    cell = width / 72
    expected_x, expected_y = [width / 3, 2 * width / 3], [length / 2]
    distance = np.minimum(
        np.min(np.abs(points[:, :1] - np.array(expected_x)[None, :]), axis=1),
        np.abs(points[:, 1] - expected_y[0]))
    # interior points only: the fixed edge itself is not a nodal line to draw
    inner = ((points[:, 0] > cell) & (points[:, 0] < width - cell)
             & (points[:, 1] > cell) & (points[:, 1] < length - cell))
    assert inner.sum() > 100
    assert np.max(distance[inner]) < 0.5 * cell
    for xk in expected_x:  # each nodal line is drawn along its whole length
        on = points[np.abs(points[:, 0] - xk) < 0.5 * cell]
        assert on[:, 1].max() - on[:, 1].min() > 0.95 * length
    on = points[np.abs(points[:, 1] - length / 2) < 0.5 * cell]
    assert on[:, 0].max() - on[:, 0].min() > 0.95 * width


@pytest.mark.parametrize("m, n", [(2, 1), (5, 3), (7, 4)])
def test_rectangle_nodal_lines_between_the_samples(m, n):
    # Rayleigh, The Theory of Sound, vol. 1 ch. IX: nodal lines x = k Lx/m, y = k Ly/n. On a
    # 48 × 32 grid of a 1.8 m × 1.2 m panel they fall between the samples (the demo's grids
    # are this coarse). Along a cell edge the shape is sin of one coordinate times a constant,
    # and sin is straight to second order at its zero, so linear interpolation puts each
    # crossing within a small fraction of a cell of the exact line; every exact line is
    # traced along its length (one cell in from the fixed edge, which is not drawn).
    width, length, nx, ny = 1.8, 1.2, 48, 32
    shape = rectangle_shape(f"({m},{n})", width, length, nx=nx, ny=ny)
    hx, hy = width / (nx - 1), length / (ny - 1)
    points = np.vstack(level_lines(shape.x, shape.y, shape.values))
    xs = np.arange(1, m) * width / m
    ys = np.arange(1, n) * length / n
    to_x = (np.min(np.abs(points[:, :1] - xs[None, :]), axis=1) / hx if m > 1
            else np.full(len(points), np.inf))
    to_y = (np.min(np.abs(points[:, 1:] - ys[None, :]), axis=1) / hy if n > 1
            else np.full(len(points), np.inf))
    inner = ((points[:, 0] > hx) & (points[:, 0] < width - hx)
             & (points[:, 1] > hy) & (points[:, 1] < length - hy))
    assert np.max(np.minimum(to_x, to_y)[inner]) < 0.01
    # each line is covered: sample it finely, one cell in from the edges, and find a traced
    # point within one cell of each sample
    along_y = np.linspace(hy, length - hy, 200)
    along_x = np.linspace(hx, width - hx, 200)
    exact = [np.column_stack([np.full_like(along_y, xk), along_y]) for xk in xs]
    exact += [np.column_stack([along_x, np.full_like(along_x, yk)]) for yk in ys]
    for line in exact:
        gap = np.min(np.hypot((line[:, :1] - points[None, :, 0]) / hx,
                              (line[:, 1:] - points[None, :, 1]) / hy), axis=1)
        assert np.max(gap) < 1.0


def test_circle_nodal_circle_and_diameters_from_bessel_zeros():
    # Kinsler et al., Fundamentals of Acoustics, ch. 4: mode (m, n) = J_m(j_mn r/a) cos(mθ) has m
    # nodal diameters and n-1 nodal circles at r = a j_mk / j_mn; zeros from scipy.special.
    diameter = 1.2
    a = diameter / 2
    shape = circle_shape("(2,2)", diameter, nx=121)
    points = np.vstack(level_lines(shape.x, shape.y, shape.values))
    r, theta = np.hypot(points[:, 0], points[:, 1]), np.arctan2(points[:, 1], points[:, 0])
    circle_radius = a * jn_zeros(2, 2)[0] / jn_zeros(2, 2)[1]
    cell = diameter / 120
    to_circle = np.abs(r - circle_radius)
    # cos 2θ = 0 on the diameters θ = π/4 + kπ/2: distance of a point from the nearest one
    nearest = np.pi / 4 + np.round((theta - np.pi / 4) / (np.pi / 2)) * np.pi / 2
    to_diameter = r * np.abs(np.sin(theta - nearest))
    inner = r < a - 2 * cell
    assert np.max(np.minimum(to_circle, to_diameter)[inner]) < cell
    assert np.sum(to_circle[inner] < cell) > 50           # the nodal circle is traced
    quadrants = {int(np.round((t - np.pi / 4) / (np.pi / 2))) % 4
                 for t in theta[inner & (to_diameter < cell) & (r > 0.5 * a)]}
    assert quadrants == {0, 1, 2, 3}                       # both diameters, all four arms


def test_level_line_of_a_paraboloid_is_one_closed_circle():
    # Level set of x² + y² (plain geometry): one closed curve of radius 0.7.
    x = y = np.linspace(-1, 1, 81)
    xx, yy = np.meshgrid(x, y)
    lines = level_lines(x, y, xx**2 + yy**2, level=0.49)
    assert len(lines) == 1
    loop = lines[0]
    assert np.allclose(loop[0], loop[-1])
    assert np.max(np.abs(np.hypot(loop[:, 0], loop[:, 1]) - 0.7)) < 2e-3


def test_fixed_edge_is_not_a_nodal_line():
    # A clamped edge samples as exact zeros (the (1,1) mode of a rectangle, Rayleigh): it has
    # no interior nodal line, so nothing is traced; the zeros take the sign of the inside.
    shape = rectangle_shape("(1,1)", 1.0, 1.0, nx=21, ny=21)
    values = np.array(shape.values, float)
    values[0, :] = values[-1, :] = values[:, 0] = values[:, -1] = 0.0
    assert level_lines(shape.x, shape.y, values) == []
    settled = settle_border_zeros(values)
    assert np.all(settled > 0)
    # a zero between both signs (a nodal line through a sample) stays on the level
    odd = np.array([[1.0, 0.0, -1.0]] * 3)
    assert np.array_equal(settle_border_zeros(odd)[:, 1], np.zeros(3))


def test_no_line_outside_the_region_or_on_a_tiny_grid():
    x = y = np.linspace(0.0, 1.0, 5)
    assert level_lines(x, y, np.full((5, 5), np.nan)) == []
    assert level_lines(x[:1], y, np.zeros((5, 1))) == []


def test_simplified_polyline_keeps_the_corners_of_a_square():
    # Douglas and Peucker (1973): points nearer the chord than the tolerance are dropped, the
    # corners of a square stay (plain geometry).
    side = np.linspace(0.0, 1.0, 11)
    square = np.vstack([np.column_stack([side, 0 * side]), np.column_stack([1 + 0 * side, side]),
                        np.column_stack([side[::-1], 1 + 0 * side])])
    kept = simplify_polyline(square, 0.01)
    assert kept.tolist() == [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]]


# --- ± regions -------------------------------------------------------------------------------


def test_positive_and_negative_regions_split_evenly_for_an_antisymmetric_mode():
    # Mode (2,1) of a rectangle is odd about x = Lx/2 (Rayleigh): + and - areas are equal,
    # and the merged rectangles cover every cell exactly once.
    shape = rectangle_shape("(2,1)", 2.0, 1.0, nx=61, ny=31)  # 60 × 30 cells
    runs = merged_cell_runs(shape.values)
    area = {k: sum((i1 - i0) * (j1 - j0) for i0, j0, i1, j1 in rects) for k, rects in runs.items()}
    positive = area.get(1, 0) + area.get(2, 0)
    negative = area.get(-1, 0) + area.get(-2, 0)
    assert positive == negative and positive + negative == 60 * 30
    n_rects = sum(len(r) for r in runs.values())
    assert n_rects < 60 * 30 / 8  # merged, not one rectangle per cell


def test_sign_layer_splits_at_the_nodal_line():
    # Mode (2,1) (Rayleigh): the sign changes at x = Lx/2 only, so each sign is one rectangle
    # of half the cells; the strong layer lies inside the sign layer of the same sign.
    shape = rectangle_shape("(2,1)", 2.0, 1.0, nx=61, ny=31)
    signs, strong = layered_cell_runs(shape.values, strong=0.5)
    assert signs == {1: [(0, 0, 30, 30)], -1: [(30, 0, 60, 30)]}
    for k, rects in strong.items():
        (i0, _, i1, _), = signs[k // 2]
        assert all(i0 <= a and b <= i1 for a, _, b, _ in rects)
