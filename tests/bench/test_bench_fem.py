"""Time and accuracy of the polygon membrane solver at default settings.

Run with: python -m pytest tests/bench/test_bench_fem.py -m bench -s
Each timing is the best of three cold solves (no cache is passed, so nothing is kept between
them), measured after import.
"""

import math
import time

import numpy as np
import pytest
from reference_models import triangle_angles_deg

from auditor.model import CircleCutout, PolygonCutout
from auditor.physics import fem

pytestmark = pytest.mark.bench

L_SHAPE = ((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (1.0, 1.0), (1.0, 2.0), (0.0, 2.0))
TRIANGLE = ((0.0, 0.0), (1.0, 0.0), (0.5, 0.5 * math.sqrt(3.0)))
TRAPEZOID = ((0.0, 0.0), (3.0, 0.0), (2.5, 1.5), (0.5, 1.5))
TRAPEZOID_CUTOUTS = (
    CircleCutout(0.8, 0.7, 0.3),
    PolygonCutout(((1.8, 0.5), (2.2, 0.5), (2.2, 0.9), (1.8, 0.9))),
)


def cold_solve(outline, cutouts, accuracy="default", n_modes=None):
    best, basis = math.inf, None
    for _ in range(3):
        start = time.perf_counter()
        basis = fem.polygon_membrane_basis(outline, cutouts, 1.0, 1.0, 1.0, n_modes=n_modes,
                                           accuracy=accuracy)
        best = min(best, time.perf_counter() - start)
    return basis, best


def report(name, basis, seconds, reference):
    lam = (2 * np.pi * basis.frequencies_hz[: len(reference)]) ** 2
    error = lam / np.asarray(reference) - 1
    print(
        f"\n{name}: {seconds:.3f} s, {len(basis.region.triangles)} triangles, "
        f"{len(basis)} modes; relative error of λ: "
        + ", ".join(f"{e:+.1e}" for e in error)
    )
    return error


def test_bench_l_shape():
    basis, seconds = cold_solve(L_SHAPE, ())
    # Fox, Henrici & Moler (1967); Betcke & Trefethen, SIAM Review 47 (2005)
    error = report("L-shape", basis, seconds, [9.6397238440, 15.1972519265, 2 * math.pi**2])
    assert abs(error[0]) < 5e-4
    assert seconds < 2.0


def test_bench_equilateral_triangle():
    basis, seconds = cold_solve(TRIANGLE, ())
    # Lamé: λ = (16π²/9)(m² + mn + n²) for side 1 (Pinsky, SIAM J. Math. Anal. 11, 1980)
    reference = 16 * math.pi**2 / 9 * np.array([3, 7, 7, 12, 13, 13])
    error = report("equilateral triangle", basis, seconds, reference)
    assert np.all(np.abs(error) < 5e-4)


def test_bench_trapezoid_with_two_cutouts():
    # no published value: the reference is the "fine" solve of the same shape
    fine, fine_seconds = cold_solve(TRAPEZOID, TRAPEZOID_CUTOUTS, accuracy="fine")
    reference = (2 * np.pi * fine.frequencies_hz[:6]) ** 2
    print(f"\ntrapezoid reference ('fine'): {fine_seconds:.3f} s, "
          f"{len(fine.region.triangles)} triangles")
    basis, seconds = cold_solve(TRAPEZOID, TRAPEZOID_CUTOUTS)
    error = report("trapezoid with two cut-outs (against 'fine')", basis, seconds, reference)
    assert np.all(np.abs(error) < 5e-4)


def test_bench_many_modes_of_the_l_shape():
    # The cost of the largest finite-element solve modes_for makes (FEM_MAX_MODES) against
    # smaller ones, on the coarse mesh the air-loading and in-vacuo paths use.
    from auditor.physics.modes import FEM_MAX_MODES

    lines = []
    for count in (32, 64, FEM_MAX_MODES):
        basis, seconds = cold_solve(L_SHAPE, (), accuracy="coarse", n_modes=count)
        lines.append(f"{count:4d} modes: {seconds:6.2f} s, {len(basis.region.triangles)} triangles")
        # Fox, Henrici & Moler (1967): the fundamental stays within 0.1 % on the coarse mesh
        assert (2 * np.pi * basis.frequencies_hz[0]) ** 2 == pytest.approx(9.6397238440, rel=1e-3)
    print("\nL-shape, coarse mesh:\n  " + "\n  ".join(lines))
    assert seconds < 20.0


def test_bench_mesh_quality_sweep():
    # The mesher alone over a range of sizes on the three shapes: smallest angle, triangles
    # and time. The smallest angle bounds the elements' interpolation error (the minimum-angle
    # condition: M. Zlámal, Numer. Math. 12, 1968; from memory).
    from auditor.physics.geometry import circle_to_polygon, clockwise, signed_area

    lines, worst = [], math.inf
    for name, outline, cutouts in (("L-shape", L_SHAPE, ()), ("triangle", TRIANGLE, ()),
                                   ("trapezoid", TRAPEZOID, TRAPEZOID_CUTOUTS)):
        for accuracy in ("coarse", "default", "fine"):
            for relative_edge in (0.2, 0.14, 0.1, 0.07, 0.05, 0.035, 0.025):
                edge = relative_edge * math.sqrt(abs(signed_area(outline)))
                holes = [circle_to_polygon(c, max_edge=0.5 * edge) if isinstance(c, CircleCutout)
                         else clockwise(c.vertices) for c in cutouts]
                polygonal = [isinstance(c, PolygonCutout) for c in cutouts]
                start = time.perf_counter()
                nodes, triangles = fem.mesh_polygon(np.array(outline), holes, edge,
                                                    polygonal_holes=polygonal,
                                                    settings=fem.ACCURACY[accuracy])
                seconds = time.perf_counter() - start
                smallest = float(triangle_angles_deg(nodes, triangles).min())
                worst = min(worst, smallest)
                lines.append(f"{name:9s} {accuracy:7s} edge {relative_edge:5.3f}·√A: "
                             f"{len(triangles):6d} triangles, smallest angle {smallest:5.1f}°, "
                             f"{1e3 * seconds:7.1f} ms")
    print("\nmesh_polygon sweep:\n  " + "\n  ".join(lines) + f"\nworst angle {worst:.1f}°")
    assert worst > 15.0  # as tests/test_fem.py's MIN_ANGLE_DEG (measured 16.1°)
