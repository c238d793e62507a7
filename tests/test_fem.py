"""Finite-element membrane modes against published eigenvalues and exact solutions.

With tension T = 1 N/m and areal density ρs = 1 kg/m², λ = ω²ρs/T = (2πf)² is the Dirichlet
eigenvalue of −∇² on the outline.
"""

import math

import numpy as np
import pytest
from reference_models import triangle_angles_deg
from scipy.special import jn_zeros

from auditor.model import CircleCutout, PolygonCutout
from auditor.physics import fem
from auditor.physics.basis import ModalBasis, PolygonRegion
from auditor.physics.cache import SolveCache
from auditor.physics.geometry import circle_to_polygon, clockwise, signed_area

SQUARE = ((0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0))
L_SHAPE = ((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (1.0, 1.0), (1.0, 2.0), (0.0, 2.0))
# the shapes of tests/bench/test_bench_fem.py
TRIANGLE = ((0.0, 0.0), (1.0, 0.0), (0.5, 0.5 * math.sqrt(3.0)))
TRAPEZOID = ((0.0, 0.0), (3.0, 0.0), (2.5, 1.5), (0.5, 1.5))
TRAPEZOID_CUTOUTS = (
    CircleCutout(0.8, 0.7, 0.3),
    PolygonCutout(((1.8, 0.5), (2.2, 0.5), (2.2, 0.9), (1.8, 0.9))),
)


def eigenvalues(basis: ModalBasis) -> np.ndarray:
    return (2.0 * np.pi * basis.frequencies_hz) ** 2


@pytest.fixture(scope="module")
def square() -> ModalBasis:
    return fem.polygon_membrane_basis(SQUARE, (), 1.0, 1.0, 1.0, n_modes=6)


def test_l_shaped_membrane():
    basis = fem.polygon_membrane_basis(L_SHAPE, (), 1.0, 1.0, 1.0, n_modes=3)
    lam = eigenvalues(basis)
    # Fox, Henrici & Moler, SIAM J. Numer. Anal. 4 (1967); Betcke & Trefethen, SIAM Review
    # 47 (2005): λ1 = 9.6397238440, λ2 = 15.1972519265, λ3 = 2π² (= 19.7392088022).
    reference = np.array([9.6397238440, 15.1972519265, 2.0 * math.pi**2])
    assert lam == pytest.approx(reference, rel=5e-4)
    # conforming elements bound each eigenvalue from above (Rayleigh-Ritz; Strang & Fix,
    # An Analysis of the Finite Element Method, 1973, ch. 6)
    assert np.all(lam >= reference * (1 - 1e-12))
    assert basis.labels == ("#1", "#2", "#3")
    assert list(basis.multiplicity) == [1, 1, 1]
    # the third mode is the unit square's fundamental in each square, alternating in sign:
    # three nodal domains (Betcke & Trefethen 2005, fig. of the L-shape's modes)
    assert basis.nodal_lines[2] == (("nodal domains", 3),)


def test_equilateral_triangle():
    side = 0.8
    basis = fem.polygon_membrane_basis(
        ((0.0, 0.0), (side, 0.0), (0.5 * side, 0.5 * math.sqrt(3) * side)), (), 1.0, 1.0, 1.0,
        n_modes=8,
    )
    lam = eigenvalues(basis)
    # Lamé: λ = (16π²/(9a²))(m² + mn + n²), m, n ≥ 1 (M. Pinsky, SIAM J. Math. Anal. 11,
    # 1980): the lowest distinct values have m² + mn + n² = 3, 7 (twice), 12.
    factor = 16 * math.pi**2 / (9 * side**2)
    assert lam[0] == pytest.approx(3 * factor, rel=5e-4)
    assert lam[1:3] == pytest.approx([7 * factor] * 2, rel=5e-4)
    assert lam[3] == pytest.approx(12 * factor, rel=5e-4)


def test_unit_square(square):
    # f_mn = ½√(T/ρs)·√((m/a)² + (n/b)²) (Morse & Ingard, Theoretical Acoustics, §5.2):
    # λ/π² = m² + n² = 2, 5, 5, 8, 10, 10
    assert eigenvalues(square) / math.pi**2 == pytest.approx([2, 5, 5, 8, 10, 10], rel=5e-4)


def test_circle_as_many_sided_polygon():
    radius, sides = 0.5, 96
    angle = 2 * np.pi * np.arange(sides) / sides
    outline = tuple(zip(radius * np.cos(angle), radius * np.sin(angle)))
    basis = fem.polygon_membrane_basis(outline, (), 1.0, 1.0, 1.0, n_modes=6)
    root = np.sqrt(eigenvalues(basis)) * radius
    # f = j_mn √(T/ρs)/(2πa), j_mn the n-th zero of J_m (scipy.special.jn_zeros); m ≥ 1
    # modes come in pairs. The inscribed 96-gon has (2π/96)²/6 ≈ 7e-4 less area, so its
    # eigenvalues lie about that much above the disc's: allow 0.15 % on λ.
    j01, j02 = jn_zeros(0, 2)
    j11, j21 = jn_zeros(1, 1)[0], jn_zeros(2, 1)[0]
    expected = np.array([j01, j11, j11, j21, j21, j02])
    assert root**2 == pytest.approx(expected**2, rel=1.5e-3)
    # Domain monotonicity (the polygon lies inside the disc) and the Faber-Krahn inequality
    # (among shapes of equal area the disc has the lowest λ1: Faber 1923, Krahn 1925) bound
    # the polygon's fundamental from below; the FEM value, an upper bound, must respect both.
    polygon_area = abs(signed_area(outline))
    assert root[0] ** 2 >= j01**2
    assert eigenvalues(basis)[0] >= math.pi * j01**2 / polygon_area


def test_orthotropic_rectangle():
    width, length, tension_x, tension_y, density = 1.5, 1.0, 100.0, 400.0, 0.2
    outline = ((0, 0), (width, 0), (width, length), (0, length))
    basis = fem.polygon_membrane_basis(outline, (), tension_x, tension_y, density, n_modes=6)
    # f = ½√((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²) (orthotropic membrane; e.g. Leissa, Vibration
    # of Plates, NASA SP-160, 1969, via the coordinate stretch of the isotropic case)
    exact = sorted(
        0.5 * math.sqrt(tension_x / density * (m / width) ** 2
                        + tension_y / density * (n / length) ** 2)
        for m in range(1, 8)
        for n in range(1, 8)
    )[:6]
    assert basis.frequencies_hz == pytest.approx(exact, rel=5e-4)


def test_circular_cutout_raises_the_fundamental(square):
    with_hole = fem.polygon_membrane_basis(SQUARE, (CircleCutout(0.5, 0.5, 0.3),), 1.0, 1.0, 1.0,
                                           n_modes=2)
    # Domain monotonicity of Dirichlet eigenvalues (Courant & Hilbert, Methods of
    # Mathematical Physics I, 1953, ch. VI §2): removing a hole raises λ1.
    assert eigenvalues(with_hole)[0] > 2 * math.pi**2 * 1.1
    assert eigenvalues(with_hole)[0] > eigenvalues(square)[0]
    # the region meshed is the square less the 24-or-more-sided inscribed polygon
    region = with_hole.region
    assert isinstance(region, PolygonRegion) and len(region.holes) == 1
    assert region.area == pytest.approx(1.0 - abs(signed_area(region.holes[0])), rel=1e-12)
    assert region.area == pytest.approx(1.0 - math.pi * 0.15**2, rel=2e-3)
    # mode shapes vanish in the cut-out and outside the panel
    assert np.allclose(with_hole.evaluate(np.array([[0.5, 0.5], [0.45, 0.55], [1.5, 0.5]])), 0.0)


def test_participation_and_normalisation(square):
    # ∫φ dA/A for sin(πx)sin(πy) at unit mean square is 8/π² (DESIGN.md's rectangle factor
    # 64/(π⁴m²n²) = mean²; Morse & Ingard, Theoretical Acoustics, §5.2)
    assert abs(square.mean[0]) == pytest.approx(8 / math.pi**2, rel=1e-4)
    assert square.participation[0] == pytest.approx(64 / math.pi**4, rel=2e-4)
    # the (2,1)/(1,2) pair has zero mean: odd about a centre line (exact symmetry)
    assert np.all(np.abs(square.mean[1:3]) < 1e-3)
    # ∫φ² dA = A, checked by midpoint quadrature on a fine grid (independent of the mesh)
    n = 200
    grid = (np.stack(np.meshgrid(np.arange(n), np.arange(n)), -1).reshape(-1, 2) + 0.5) / n
    values = square.evaluate(grid)
    assert np.mean(values**2, axis=0) == pytest.approx(np.ones(6), rel=1e-3)
    # and the shape itself: 2 sin(πx) sin(πy) (unit mean square on the unit square)
    exact = 2 * np.sin(np.pi * grid[:, 0]) * np.sin(np.pi * grid[:, 1])
    assert np.max(np.abs(np.abs(values[:, 0]) - exact)) < 2e-3


def test_nodal_domains(square):
    # the (2,1)/(1,2) eigenspace: a cos πx + b cos πy = 0 is one nodal curve, 2 domains for
    # any combination; (2,2) has 4 (Courant & Hilbert 1953, ch. VI §6, the square membrane)
    domains = [dict(lines)["nodal domains"] for lines in square.nodal_lines]
    assert domains[:4] == [1, 2, 2, 4]


def test_frequency_limit_selects_modes():
    # with T/ρs = 4 m²/s², f_mn = √(m² + n²) on the unit square: 1.414, 2.236 (×2), 2.828,
    # 3.162 (×2) Hz; a 3.0 Hz limit keeps four modes
    basis = fem.polygon_membrane_basis(SQUARE, (), 4.0, 4.0, 1.0, fmax=3.0)
    assert len(basis) == 4
    assert basis.frequencies_hz == pytest.approx(np.sqrt([2, 5, 5, 8]), rel=5e-4)


def test_cache_scales_without_a_new_solve():
    outline = ((0.0, 0.0), (1.2, 0.0), (1.0, 0.7), (0.2, 0.9))
    cuts = (PolygonCutout(((0.4, 0.3), (0.6, 0.3), (0.6, 0.5), (0.4, 0.5))),)
    cache = SolveCache()
    first = fem.polygon_membrane_basis(outline, cuts, 200.0, 300.0, 0.25, n_modes=8, cache=cache)
    solves = cache.info()["dirichlet"].misses
    size, offset = 2.5, (4.0, -1.0)
    moved = tuple((size * x + offset[0], size * y + offset[1]) for x, y in outline)
    moved_cuts = (PolygonCutout(tuple((size * x + offset[0], size * y + offset[1])
                                      for x, y in cuts[0].vertices)),)
    tension_scale, density = 3.0, 0.4
    second = fem.polygon_membrane_basis(
        moved, moved_cuts, 200.0 * tension_scale, 300.0 * tension_scale, density, n_modes=8,
        cache=cache)
    assert cache.info()["dirichlet"].misses == solves  # no new solve
    # f ∝ √(T/ρs)/L (dimensional analysis of the membrane equation)
    factor = math.sqrt(tension_scale * 0.25 / density) / size
    assert second.frequencies_hz == pytest.approx(first.frequencies_hz * factor, rel=1e-12)
    point = np.array([[0.3, 0.2], [0.9, 0.6]])
    assert second.evaluate(point * size + offset) == pytest.approx(first.evaluate(point), abs=1e-9)
    assert second.region.area == pytest.approx(first.region.area * size**2, rel=1e-9)
    # a different tension ratio is a new solve
    fem.polygon_membrane_basis(outline, cuts, 200.0, 200.0, 0.25, n_modes=8, cache=cache)
    assert cache.info()["dirichlet"].misses == solves + 1
    # and without a cache nothing is kept between calls: the same numbers, solved again
    alone = fem.polygon_membrane_basis(outline, cuts, 200.0, 300.0, 0.25, n_modes=8)
    assert np.array_equal(alone.frequencies_hz, first.frequencies_hz)


def test_same_shape_same_frequencies_whatever_was_solved_before():
    # History independence (DESIGN.md: "the same input gives the same output whatever ran
    # before"): a larger request for the same normalised shape, solved first into the same
    # cache, must not change the answer to a smaller one (it once did, by 3e-5 to 6.5e-4).
    fresh = fem.polygon_membrane_basis(L_SHAPE, (), 1.0, 1.0, 1.0, n_modes=12)
    cache = SolveCache()
    scaled = tuple((3.0 * x, 3.0 * y) for x, y in L_SHAPE)
    fem.polygon_membrane_basis(scaled, (), 1.0, 1.0, 1.0, n_modes=30, cache=cache)
    again = fem.polygon_membrane_basis(L_SHAPE, (), 1.0, 1.0, 1.0, n_modes=12, cache=cache)
    assert np.array_equal(again.frequencies_hz, fresh.frequencies_hz)
    assert np.array_equal(again.mean, fresh.mean)


def test_region_mesh_is_a_quadrature(square):
    region = square.region
    nodes, triangles = region.nodes, region.triangles
    a, b, c = (nodes[triangles[:, i]] for i in range(3))
    areas = 0.5 * ((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1])
                   - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]))
    assert np.all(areas > 0)  # counter-clockwise, none degenerate
    assert areas.sum() == pytest.approx(1.0, rel=1e-12) and region.area == pytest.approx(1.0)
    assert signed_area(region.outline) > 0


def test_neumann_modes_of_a_rectangle():
    width, length = 1.5, 1.0
    outline = ((0, 0), (width, 0), (width, length), (0, length))
    k, evaluate = fem.neumann_modes(np.array(outline), 5)
    # rigid-walled rectangle: k² = π²((m/a)² + (n/b)²), m, n ≥ 0 (Morse & Ingard,
    # Theoretical Acoustics, §9.4): 0, (π/1.5)², π², π²(1/1.5² + 1), (π/0.75)²
    exact = np.pi * np.sqrt([0, 1 / width**2, 1 / length**2, 1 / width**2 + 1 / length**2,
                             4 / width**2])
    assert k[0] == 0.0
    assert k[1:] == pytest.approx(exact[1:], rel=5e-4)
    n = 150
    grid = ((np.stack(np.meshgrid(np.arange(n), np.arange(n)), -1).reshape(-1, 2) + 0.5) / n
            * [width, length])
    values = evaluate(grid)
    assert np.allclose(values[:, 0], 1.0)
    assert np.mean(values**2, axis=0) == pytest.approx(np.ones(5), rel=2e-3)
    # the (1,0) mode is √2 cos(πx/a)
    exact_10 = math.sqrt(2) * np.abs(np.cos(np.pi * grid[:, 0] / width))
    assert np.max(np.abs(np.abs(values[:, 1]) - exact_10)) < 5e-3
    assert np.allclose(evaluate(np.array([[2.0, 0.5], [-0.1, 0.5]])), 0.0)


def test_neumann_ignores_cutouts():
    # the cavity beneath a panel has the outline's walls only: same modes with or without holes
    with_hole = fem.polygon_membrane_basis(SQUARE, (CircleCutout(0.5, 0.5, 0.3),), 1.0, 1.0, 1.0,
                                           n_modes=1)
    k_region, _ = fem.neumann_modes(with_hole.region, 3)
    k_outline, _ = fem.neumann_modes(np.array(SQUARE), 3)
    assert k_region == pytest.approx(k_outline, rel=1e-12)
    assert k_region[1] == pytest.approx(math.pi, rel=5e-4)  # (1,0) of the unit square


def test_the_mesher_names_are_those_of_the_mesh_module():
    # fem is the public entry: the mesher's names it hands out are the mesh module's objects
    from auditor.physics import polygon_mesh

    for name in ("ACCURACY", "MeshSettings", "SIZE_GRADATION", "mesh_polygon"):
        assert getattr(fem, name) is getattr(polygon_mesh, name)


def test_user_errors_are_clear_messages():
    with pytest.raises(ValueError, match="edges 1 and 3 cross"):
        fem.polygon_membrane_basis(((0, 0), (1, 1), (1, 0), (0, 1)), (), 1.0, 1.0, 1.0)
    with pytest.raises(ValueError, match="crosses the outline"):
        fem.polygon_membrane_basis(SQUARE, (CircleCutout(0.95, 0.5, 0.2),), 1.0, 1.0, 1.0)
    with pytest.raises(ValueError, match="tension x must be a positive number"):
        fem.polygon_membrane_basis(SQUARE, (), 0.0, 1.0, 1.0)
    with pytest.raises(ValueError, match="areal density must be a positive number"):
        fem.polygon_membrane_basis(SQUARE, (), 1.0, 1.0, -2.0)
    with pytest.raises(ValueError, match="accuracy must be one of"):
        fem.polygon_membrane_basis(SQUARE, (), 1.0, 1.0, 1.0, accuracy="best")
    with pytest.raises(ValueError, match="lower the frequency limit"):
        fem.polygon_membrane_basis(SQUARE, (), 1.0, 1.0, 1.0, fmax=1e4)


def test_neumann_modes_of_the_l_shape():
    k, _ = fem.neumann_modes(np.array(L_SHAPE), 5)
    # Neumann eigenvalues of the L of three unit squares: 1.4756218241, 3.5340313668, then
    # π² twice (cos πx / cos πy on the squares, exact); the first two from memory (M. Dauge,
    # benchmark computations of the Laplacian on the L-shaped domain).
    assert k**2 == pytest.approx([0.0, 1.4756218241, 3.5340313668, math.pi**2, math.pi**2],
                                 rel=1e-4)


# --------------------------------------------------------------------------------------
# The mesh: shape of its triangles, and convergence to published eigenvalues
# --------------------------------------------------------------------------------------
#: Smallest angle allowed in any triangle of a mesh  [degrees]. Measured worst: 16.1° in the
#: sweep below and over the 63 meshes of tests/bench/test_bench_fem.py's sweep, 20.3° on the
#: solver's nine meshes; 15.0° once on the trapezoid at the size a 128-mode solve asks for.
MIN_ANGLE_DEG = 15.0
LEVELS = ("coarse", "default", "fine")


def _signed_areas(nodes: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    a, b, c = (nodes[triangles[:, i]] for i in range(3))
    return 0.5 * ((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1])
                  - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]))


@pytest.fixture(scope="module")
def ladders() -> dict[str, list[ModalBasis]]:
    """The three benchmark shapes solved at each accuracy level (coarse, default, fine)."""
    shapes = {"L": (L_SHAPE, ()), "triangle": (TRIANGLE, ()),
              "trapezoid": (TRAPEZOID, TRAPEZOID_CUTOUTS)}
    return {
        name: [fem.polygon_membrane_basis(outline, cuts, 1.0, 1.0, 1.0, n_modes=3, accuracy=level)
               for level in LEVELS]
        for name, (outline, cuts) in shapes.items()
    }


@pytest.mark.parametrize("relative_edge", [0.2, 0.1, 0.07, 0.05, 0.035])
@pytest.mark.parametrize("outline, cutouts",
                         [(L_SHAPE, ()), (TRIANGLE, ()), (TRAPEZOID, TRAPEZOID_CUTOUTS)],
                         ids=["L", "triangle", "trapezoid"])
def test_mesh_polygon_makes_no_slivers_and_covers_the_region(outline, cutouts, relative_edge):
    # A triangle's smallest angle bounds the interpolation error of its elements from above
    # (the minimum-angle condition: M. Zlámal, Numer. Math. 12 (1968) 394-409; from memory);
    # the region is covered once: every triangle counter-clockwise and their areas adding to
    # the outline's less the holes' (shoelace formula).
    area = abs(signed_area(outline))
    edge = relative_edge * math.sqrt(area)
    holes = [circle_to_polygon(c, max_edge=0.5 * edge) if isinstance(c, CircleCutout)
             else clockwise(c.vertices) for c in cutouts]
    polygonal = [isinstance(c, PolygonCutout) for c in cutouts]
    nodes, triangles = fem.mesh_polygon(np.array(outline), holes, edge, polygonal_holes=polygonal)
    assert triangle_angles_deg(nodes, triangles).min() > MIN_ANGLE_DEG
    areas = _signed_areas(nodes, triangles)
    assert np.all(areas > 0)
    assert areas.sum() == pytest.approx(area - sum(abs(signed_area(h)) for h in holes), rel=1e-12)
    # the asked size is the spacing of the boundary division and of the lattice: no edge of
    # the triangulation exceeds 1.5 times it (measured at most 1.40 times)
    sides = nodes[triangles] - nodes[np.roll(triangles, 1, axis=1)]
    assert np.hypot(sides[..., 0], sides[..., 1]).max() < 1.5 * edge


def test_the_solver_meshes_make_no_slivers(ladders):
    for name, bases in ladders.items():
        for level, basis in zip(LEVELS, bases):
            smallest = triangle_angles_deg(basis.region.nodes, basis.region.triangles).min()
            assert smallest > MIN_ANGLE_DEG, (name, level, smallest)


def _longest_edge(basis: ModalBasis) -> float:
    corners = basis.region.nodes[basis.region.triangles]
    sides = corners - np.roll(corners, 1, axis=1)
    return float(np.hypot(sides[..., 0], sides[..., 1]).max())


@pytest.mark.parametrize("name, reference", [
    # Fox, Henrici & Moler, SIAM J. Numer. Anal. 4 (1967) 89-102, and Betcke & Trefethen,
    # SIAM Review 47 (2005) 469-491 (values from memory): the L of three unit squares,
    # λ1 = 9.6397238440219, λ2 = 15.1972519265, λ3 = 2π² (exact: the unit square's
    # fundamental in each square).
    ("L", [9.6397238440219, 15.1972519265, 2.0 * math.pi**2]),
    # Lamé's equilateral triangle of side a = 1: λ = (16π²/(9a²))(m² + mn + n²), m, n ≥ 1,
    # so 16π²/3 and 112π²/9 twice (M. A. Pinsky, SIAM J. Math. Anal. 11 (1980) 819-827;
    # B. J. McCartin, SIAM Review 45 (2003) 267-287; from memory).
    ("triangle", [16.0 * math.pi**2 / 3.0, 112.0 * math.pi**2 / 9.0, 112.0 * math.pi**2 / 9.0]),
])
def test_eigenvalues_converge_at_fourth_order_to_published_values(ladders, name, reference):
    bases = ladders[name]
    errors = np.array([eigenvalues(b)[:3] / reference - 1.0 for b in bases])  # (level, mode)
    # conforming elements bound every eigenvalue from above (Rayleigh-Ritz; Strang & Fix, An
    # Analysis of the Finite Element Method, 1973, ch. 6)
    assert np.all(errors > 0)
    # quadratic elements converge like h^4 in the eigenvalue (Strang & Fix, ch. 6), which the
    # grading at the re-entrant corner keeps for the L (Babuška, Kellogg & Pitkäranta, Numer.
    # Math. 33, 1979): each level must show an observed order of at least 3 (measured 3.3 to 4.2)
    edges = np.array([_longest_edge(b) for b in bases])
    order = np.log(errors[:-1] / errors[1:]) / np.log(edges[:-1] / edges[1:])[:, None]
    assert np.all(order > 3.0), order
    # and the finest level is within 1e-5 (measured 1.6e-6 to 9.3e-6)
    assert np.all(errors[-1] < 1e-5)


def test_the_trapezoid_with_cutouts_converges(ladders):
    # No published value: a Cauchy check. Both the mesh and the polygon standing for the
    # circular cut-out refine from level to level; the change must shrink by at least 4× per
    # level for λ1 and λ2 (fourth order in the mesh, second in the polygon's area; measured 9.6×
    # and 14×), and the finest two levels agree within 5e-4 (as the benchmark asks).
    lam = np.array([eigenvalues(b)[:2] for b in ladders["trapezoid"]])
    steps = np.abs(np.diff(lam, axis=0))
    assert np.all(steps[1] * 4.0 < steps[0])
    assert np.all(steps[1] / lam[-1] < 5e-4)


# --------------------------------------------------------------------------------------
# Through modes_for: history independence and every mode up to the limit
# --------------------------------------------------------------------------------------
def _polygon_panel(outline, **fields):
    from auditor.model import Panel, SourceRef

    defaults = dict(panel="P1", source=SourceRef("test.csv", "", 2), shape="polygon",
                    outline=tuple(outline), areal_density=0.25, tension_x=1000.0,
                    tension_y=1000.0, room_side="none", plenum_side="none")
    return Panel(**{**defaults, **fields})


def _frequencies(result) -> np.ndarray:
    return np.array([mode.frequency_hz for mode in result.modes])


def test_a_polygon_gives_the_same_frequencies_after_a_scaled_copy():
    from auditor.physics.modes import modes_for

    # DESIGN.md: the same input gives the same output whatever ran before. A scaled copy of
    # the outline, solved first into the same cache, asks for more modes of the same
    # normalised shape; the panel solved after it must not see that larger solve.
    panel = _polygon_panel(L_SHAPE)
    fresh = modes_for(panel, 80.0)
    cache = SolveCache()
    scaled = _polygon_panel(tuple((1.5 * x, 1.5 * y) for x, y in L_SHAPE))
    modes_for(scaled, 80.0, cache=cache)
    again = modes_for(panel, 80.0, cache=cache)
    assert len(fresh.modes) > 5
    assert np.array_equal(_frequencies(again), _frequencies(fresh))
    assert [m.participation for m in again.modes] == [m.participation for m in fresh.modes]
    # and a second call without a cache solves again, to the same bits
    assert np.array_equal(_frequencies(modes_for(panel, 80.0)), _frequencies(fresh))


def test_every_mode_of_the_l_shape_weyl_and_dirichlet_bracketing():
    from auditor.physics.modes import modes_for

    rho, tension, fmax = 0.25, 1000.0, 145.0
    result = modes_for(_polygon_panel(L_SHAPE, areal_density=rho, tension_x=tension,
                                      tension_y=tension), fmax)
    count = len(result.modes)
    assert result.complete_to_hz == fmax
    k = 2 * math.pi * fmax * math.sqrt(rho / tension)
    # Weyl's law with the perimeter term (H. Weyl, Math. Ann. 71, 1912; H. P. Baltes and E. R.
    # Hilf, Spectra of Finite Systems, 1976), area 3, perimeter 8, and the constant corner
    # term Σ (π² − θ²)/(24πθ) (five right angles, one of 3π/2; Baltes & Hilf): within 5 %
    angles = np.array([np.pi / 2] * 5 + [1.5 * np.pi])
    weyl = 3 * k**2 / (4 * math.pi) - 8 * k / (4 * math.pi) + float(
        np.sum((np.pi**2 - angles**2) / (24 * np.pi * angles)))
    assert count == pytest.approx(weyl, rel=0.05) and count > 30
    # Dirichlet bracketing (Courant & Hilbert, Methods of Mathematical Physics I, 1953,
    # ch. VI §2): the L holds a 2 × 1 rectangle and a unit square apart, and lies in the
    # 2 × 2 square, so N(2×1) + N(1×1) ≤ N(L) ≤ N(2×2), each with λ = π²((m/a)² + (n/b)²)
    m, n = np.meshgrid(np.arange(1, 60), np.arange(1, 60))
    inner = (np.count_nonzero(np.pi**2 * (m**2 / 4 + n**2) <= k**2)
             + np.count_nonzero(np.pi**2 * (m**2 + n**2) <= k**2))
    outer = np.count_nonzero(np.pi**2 * (m**2 + n**2) / 4 <= k**2)
    assert inner <= count <= outer
    # the lowest three against the published eigenvalues (Fox, Henrici & Moler 1967)
    lam = (2 * np.pi * _frequencies(result)[:3]) ** 2 * rho / tension
    assert lam == pytest.approx([9.6397238440, 15.1972519265, 2 * math.pi**2], rel=1e-3)


def test_a_polygon_beyond_the_largest_solve_says_where_its_list_stops(monkeypatch):
    from auditor.physics import modes

    # Far more modes than one finite-element solve holds (its limit lowered to 32 to keep the
    # test quick): the list stops at the solve's top, and says so, rather than claim fmax.
    monkeypatch.setattr(modes, "FEM_MAX_MODES", 32)
    result = modes.modes_for(_polygon_panel(L_SHAPE), 600.0)
    assert len(result.modes) == 32
    assert result.complete_to_hz == pytest.approx(result.modes[-1].frequency_hz, rel=1e-12)
    assert result.complete_to_hz < 600.0
