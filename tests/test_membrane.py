"""Exact membrane modes checked against published tables, worked values and reference libraries."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special

from auditor.physics import basis as basis_module
from auditor.physics import membrane
from auditor.physics.basis import ModalBasis, PolygonRegion
from auditor.physics.membrane import (
    bessel_zeros_below,
    circular_membrane_basis,
    circular_membrane_frequencies,
    rectangular_membrane_basis,
    rectangular_membrane_frequencies,
    rectangular_membrane_spectra,
    rectangular_participation,
)
from auditor.report.sketch import NEGATIVE, NODAL, OUTSIDE, POSITIVE, sketch_mode

PROPERTY = settings(max_examples=40, deadline=None)


def _mn(label: str) -> tuple[int, int]:
    m, n = re.fullmatch(r"\((\d+),(\d+)\)", label).groups()
    return int(m), int(n)


def test_the_membrane_module_gathers_the_rectangle_and_the_disc():
    # One definition of each name: the module callers import from hands out the objects of
    # the family modules, never a copy that could drift from them.
    from auditor.physics import circular_membrane, rectangular_membrane

    for name in membrane.__all__:
        family = rectangular_membrane if name in rectangular_membrane.__all__ else circular_membrane
        assert name in family.__all__
        assert getattr(membrane, name) is getattr(family, name)
    families = set(rectangular_membrane.__all__) | set(circular_membrane.__all__)
    assert set(membrane.__all__) == families


# --------------------------------------------------------------------------------------------
# Bessel zeros
# --------------------------------------------------------------------------------------------

# Abramowitz & Stegun, Handbook of Mathematical Functions, Table 9.5 (zeros of J_m), typed
# from memory of the table.
TABLE_9_5 = {
    (0, 1): 2.404825558, (0, 2): 5.520078110, (0, 3): 8.653727913,
    (1, 1): 3.831705970, (1, 2): 7.015586670,
    (2, 1): 5.135622302, (2, 2): 8.417244140,
}


def test_bessel_zeros_match_abramowitz_stegun_table_9_5():
    order, rank, zero = bessel_zeros_below(9.0)
    found = {(int(m), int(n)): z for m, n, z in zip(order, rank, zero)}
    for key, value in TABLE_9_5.items():
        # A&S Table 9.5 (from memory), printed to 9 decimals
        assert found[key] == pytest.approx(value, abs=2e-9)
        # cross-check: scipy.special.jn_zeros
        assert found[key] == pytest.approx(special.jn_zeros(key[0], key[1])[-1], rel=1e-14)


def test_bessel_zeros_below_finds_every_zero_scipy_reference():
    # scipy.special.jn_zeros as the reference: every order, every zero below x_max, none more.
    x_max = 60.0
    order, rank, zero = bessel_zeros_below(x_max)
    assert np.all(zero <= x_max)
    for m in range(int(x_max) + 1):
        mine = zero[order == m]
        reference = special.jn_zeros(m, len(mine) + 1)
        assert reference[-1] > x_max  # nothing missed at the top
        np.testing.assert_allclose(mine, reference[:-1], rtol=1e-14)
        np.testing.assert_array_equal(rank[order == m], np.arange(1, len(mine) + 1))
    # j_{m,1} > m (A&S §9.5): orders beyond x_max have no zero below it
    assert order.max() < x_max


def test_bessel_zeros_below_nothing_under_first_zero():
    # A&S Table 9.5 (from memory): j_{0,1} = 2.404825558 is the smallest positive zero
    assert bessel_zeros_below(2.4048)[2].size == 0
    assert bessel_zeros_below(2.4049)[2].size == 1


# --------------------------------------------------------------------------------------------
# Circular membrane
# --------------------------------------------------------------------------------------------

def test_circular_membrane_frequency_ratios_kinsler():
    # Kinsler, Frey, Coppens & Sanders, Fundamentals of Acoustics, 4th ed., §4.5:
    # f11/f01 = 1.593, f21/f01 = 2.136, f02/f01 = 2.295 (printed to 3 decimals).
    frequency, m, n, multiplicity = circular_membrane_frequencies(900.0, 0.3, 0.45, 400.0)
    f = {(int(a), int(b)): value for a, b, value in zip(m, n, frequency)}
    assert round(f[1, 1] / f[0, 1], 3) == 1.593
    assert round(f[2, 1] / f[0, 1], 3) == 2.136
    assert round(f[0, 2] / f[0, 1], 3) == 2.295
    # degenerate cos/sin pairs for m ≥ 1 (Rayleigh, The Theory of Sound, vol. I, §200)
    np.testing.assert_array_equal(multiplicity, np.where(m >= 1, 2, 1))


def test_circular_membrane_fundamental_worked_value():
    # f01 = j01 √(T/ρs)/(2πa) (Kinsler et al. §4.5); by hand: T = 1000 N/m, ρs = 0.25 kg/m²,
    # c = √4000 = 63.2456 m/s, a = 0.5 m: f01 = 2.404826 × 63.2456 / π = 48.413 Hz.
    frequency, m, n, _ = circular_membrane_frequencies(1000.0, 0.25, 0.5, 60.0)
    assert (int(m[0]), int(n[0])) == (0, 1)
    assert frequency.size == 1
    assert frequency[0] == pytest.approx(48.413, abs=1e-3)


def test_circular_membrane_empty_and_capped():
    # fundamental 48.413 Hz (worked above): nothing below 40 Hz
    f, m, n, mult = circular_membrane_frequencies(1000.0, 0.25, 0.5, 40.0)
    assert f.size == m.size == n.size == mult.size == 0
    full = circular_membrane_frequencies(1000.0, 0.25, 0.5, 800.0)
    capped = circular_membrane_frequencies(1000.0, 0.25, 0.5, math.inf, max_modes=7)
    # the same modes; the zeros of the two bounds are polished from different matrix
    # sections, so they may differ in the last place or two
    np.testing.assert_allclose(full[0][:7], capped[0], rtol=1e-14)
    for a, b in zip(full[1:], capped[1:]):
        np.testing.assert_array_equal(a[:7], b)


# --------------------------------------------------------------------------------------------
# Rectangular membrane and prestressed plate
# --------------------------------------------------------------------------------------------

def test_square_membrane_degeneracy_rayleigh():
    # Rayleigh, The Theory of Sound, vol. I, §§194–199: on a square, f12 = f21 = √(5/2) f11
    frequency, m, n = rectangular_membrane_frequencies(1000.0, 1000.0, 0.25, 1.0, 1.0, 80.0)
    pairs = list(zip(m.tolist(), n.tolist()))
    assert pairs == [(1, 1), (1, 2), (2, 1)]  # equal frequencies ordered by m, then n
    assert frequency[1] == frequency[2]
    assert frequency[1] / frequency[0] == pytest.approx(math.sqrt(2.5), rel=1e-14)
    # worked by hand: f11 = ½ √(2 × 1000/0.25) = ½ √8000 = 44.72136 Hz
    assert frequency[0] == pytest.approx(44.72136, abs=1e-5)


def test_orthotropic_rectangle_worked_values():
    # f_mn = ½ √((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²) (Rayleigh §194); by hand for Lx = 1.2 m,
    # Ly = 0.8 m, Tx = 800 N/m, Ty = 500 N/m, ρs = 0.2 kg/m²:
    #   (Tx/ρs)/Lx² = 4000/1.44 = 2777.78,  (Ty/ρs)/Ly² = 2500/0.64 = 3906.25
    #   f11 = ½ √(2777.78 + 3906.25)     = ½ √6684.03  = 40.878 Hz
    #   f21 = ½ √(4·2777.78 + 3906.25)   = ½ √15017.36 = 61.273 Hz
    #   f12 = ½ √(2777.78 + 4·3906.25)   = ½ √18402.78 = 67.828 Hz
    frequency, m, n = rectangular_membrane_frequencies(800.0, 500.0, 0.2, 1.2, 0.8, 70.0)
    assert list(zip(m.tolist(), n.tolist())) == [(1, 1), (2, 1), (1, 2)]
    np.testing.assert_allclose(frequency, [40.878, 61.273, 67.828], atol=1e-3)


def test_fmax_is_inclusive_at_the_edge_of_the_index_bound():
    # A long strip: mode (12, 1) lies just inside the exact bound m ≤ 2 fmax Lx √(ρs/Tx)
    # (Rayleigh §194 formula); it must be listed when fmax is (a hair above) its frequency.
    args = (1000.0, 1000.0, 0.25, 0.6, 30.0)
    edge = float(membrane.rectangular_mode_frequency(12, 1, *args))
    frequency, m, n = rectangular_membrane_frequencies(*args, edge * (1 + 1e-12))
    assert (12, 1) in set(zip(m.tolist(), n.tolist()))
    assert m.max() == 12
    assert frequency[-1] == pytest.approx(edge, rel=1e-14)


def test_fmax_below_fundamental_gives_empty_arrays():
    # fundamental 44.72 Hz (worked above)
    frequency, m, n = rectangular_membrane_frequencies(1000.0, 1000.0, 0.25, 1.0, 1.0, 44.0)
    assert frequency.size == m.size == n.size == 0
    basis = rectangular_membrane_basis(1000.0, 1000.0, 0.25, 1.0, 1.0, 44.0)
    assert len(basis) == 0
    assert basis.evaluate(np.array([[0.5, 0.5]])).shape == (1, 0)


@pytest.mark.parametrize("panel", [(700.0, 1300.0, 0.3, 2.1, 1.3), (900.0, 900.0, 0.2, 1.0, 1.0)])
def test_max_modes_cap_is_the_lowest_modes(panel):
    full = rectangular_membrane_frequencies(*panel, 600.0)
    for cap in (1, 4, 5, 16, 17, 25):
        capped = rectangular_membrane_frequencies(*panel, math.inf, max_modes=cap)
        assert capped[0].size == cap
        for a, b in zip(full, capped):
            np.testing.assert_array_equal(a[:cap], b)
    panel = (700.0, 1300.0, 0.3, 2.1, 1.3)
    assert rectangular_membrane_frequencies(700.0, 1300.0, 0.3, 2.1, 1.3, 400.0,
                                            max_modes=0)[0].size == 0


@pytest.mark.parametrize("tx, ty, rho, lx, ly, fmax", [
    (650.0, 1400.0, 0.35, 2.3, 0.9, 300.0),
    (1000.0, 1000.0, 0.25, 1.0, 1.0, 600.0),  # a square: many equal frequencies
    (1000.0, 250.0, 0.25, 1.0, 0.5, 600.0),  # the same spectrum with other exact ties
])
def test_spectrum_is_complete_against_brute_force(tx, ty, rho, lx, ly, fmax):
    # Reference: every (m, n) on a generous grid, f² from Rayleigh's formula (§194) in exact
    # rational arithmetic (fractions.Fraction), sorted by frequency, then m, then n.
    from fractions import Fraction

    a = Fraction(tx) / (4 * Fraction(rho) * Fraction(lx) ** 2)
    b = Fraction(ty) / (4 * Fraction(rho) * Fraction(ly) ** 2)
    m, n = np.meshgrid(np.arange(1, 200), np.arange(1, 200), indexing="ij")
    rough = 0.5 * np.sqrt(tx / rho * (m / lx) ** 2 + ty / rho * (n / ly) ** 2)
    candidates = zip(m[rough <= 1.01 * fmax].tolist(), n[rough <= 1.01 * fmax].tolist())
    exact = sorted((a * i * i + b * j * j, i, j) for i, j in candidates)
    exact = [row for row in exact if row[0] <= Fraction(fmax) ** 2]
    frequency, mm, nn = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, fmax)
    np.testing.assert_allclose(frequency, [math.sqrt(row[0]) for row in exact], rtol=1e-14)
    np.testing.assert_array_equal(mm, [row[1] for row in exact])
    np.testing.assert_array_equal(nn, [row[2] for row in exact])
    # exactly equal frequencies come out exactly equal
    ties = np.array([exact[k][0] == exact[k + 1][0] for k in range(len(exact) - 1)])
    np.testing.assert_array_equal(np.diff(frequency)[ties], 0.0)


# Leissa, Vibration of Plates, NASA SP-160, ch. 4, frequency parameters ω a² √(ρ/D) of the
# simply supported (SSSS) rectangular plate, lowest six, from memory of the table.
LEISSA_SSSS = {
    0.4: [11.4487, 16.1862, 24.0818, 35.1358, 41.0576, 45.7950],
    2 / 3: [14.2561, 27.4156, 43.8649, 49.3480, 57.0244, 78.9568],
    1.0: [19.7392, 49.3480, 49.3480, 78.9568, 98.6960, 98.6960],
}


@pytest.mark.parametrize("aspect", sorted(LEISSA_SSSS))
def test_simply_supported_plate_frequency_parameters_leissa(aspect):
    a, b, rho, rigidity = 1.3, 1.3 / aspect, 12.0, 85.0
    frequency, m, n = rectangular_membrane_frequencies(
        0.0, 0.0, rho, a, b, math.inf, bending_stiffness=rigidity, max_modes=6)
    parameter = 2 * np.pi * frequency * a**2 * np.sqrt(rho / rigidity)
    # Leissa, NASA SP-160, ch. 4, SSSS table (from memory), 4 decimals
    np.testing.assert_allclose(parameter, LEISSA_SSSS[aspect], atol=1e-4)


def test_prestressed_plate_adds_membrane_and_bending_stiffness():
    # Simply supported plate with in-plane tension (Leissa, NASA SP-160, ch. 10):
    # ω² ρs = T k² + D k⁴ for the same sin·sin shape, so f² = f_membrane² + f_plate² mode by mode.
    args = (900.0, 600.0, 1.8, 1.5, 1.1)
    both = rectangular_membrane_frequencies(*args, math.inf, bending_stiffness=3.0,
                                            max_modes=40)
    f_t = membrane.rectangular_mode_frequency(both[1], both[2], *args)
    f_d = membrane.rectangular_mode_frequency(both[1], both[2], 0.0, 0.0, *args[2:],
                                              bending_stiffness=3.0)
    np.testing.assert_allclose(both[0] ** 2, f_t**2 + f_d**2, rtol=1e-13)
    assert np.all(np.diff(both[0]) >= 0.0)


def test_batched_spectra_equal_single_panel_calls():
    rng = np.random.default_rng(3)
    tx, ty = rng.uniform(300, 2000, 25), rng.uniform(300, 2000, 25)
    rho, lx, ly = rng.uniform(0.15, 0.5, 25), rng.uniform(0.6, 3, 25), rng.uniform(0.6, 3, 25)
    spectra = rectangular_membrane_spectra(tx, ty, rho, lx, ly, 150.0)
    assert len(spectra) == 25
    for i in range(25):
        single = rectangular_membrane_frequencies(tx[i], ty[i], rho[i], lx[i], ly[i], 150.0)
        for a, b in zip(spectra.panel(i), single):
            np.testing.assert_array_equal(a, b)
    with pytest.raises(ValueError, match="panel 1: width"):
        rectangular_membrane_spectra(1000.0, 1000.0, 0.25, [1.0, -2.0], 1.0, 100.0)


@pytest.mark.parametrize("kwargs, words", [
    (dict(width=-1.0), "width"),
    (dict(areal_density=0.0), "areal_density"),
    (dict(tension_x=-5.0), "tension_x"),
    (dict(tension_y=0.0), "slack"),
    (dict(fmax=math.inf), "max_modes"),
    (dict(fmax=float("nan")), "fmax"),
    (dict(width="wide"), "width"),
    (dict(fmax=1e7), "lower fmax"),
])
def test_user_errors_are_clear_messages(kwargs, words):
    args = dict(tension_x=1000.0, tension_y=1000.0, areal_density=0.25, width=1.0,
                length=1.0, fmax=100.0)
    args.update(kwargs)
    with pytest.raises(ValueError, match=words):
        rectangular_membrane_frequencies(**args)


def test_circle_user_errors_are_clear_messages():
    with pytest.raises(ValueError, match="radius"):
        circular_membrane_frequencies(1000.0, 0.25, 0.0, 100.0)
    with pytest.raises(ValueError, match="tension"):
        circular_membrane_basis(-1.0, 0.25, 0.5, 100.0)


# --------------------------------------------------------------------------------------------
# Scaling properties (consequences of f = ½ √((T/ρs)((m/Lx)² + (n/Ly)²)), Rayleigh §194)
# --------------------------------------------------------------------------------------------

panel_sizes = st.floats(0.3, 4.0)
tensions = st.floats(100.0, 3000.0)
densities = st.floats(0.05, 2.0)
factors = st.floats(0.2, 5.0)


@PROPERTY
@given(tensions, tensions, densities, panel_sizes, panel_sizes, factors)
def test_frequency_scales_with_square_root_of_tension(tx, ty, rho, lx, ly, s):
    base = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, math.inf, max_modes=15)[0]
    scaled = rectangular_membrane_frequencies(s * tx, s * ty, rho, lx, ly, math.inf,
                                              max_modes=15)[0]
    np.testing.assert_allclose(scaled, math.sqrt(s) * base, rtol=1e-12)


@PROPERTY
@given(tensions, tensions, densities, panel_sizes, panel_sizes, factors)
def test_frequency_scales_inversely_with_size(tx, ty, rho, lx, ly, s):
    base = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, math.inf, max_modes=15)[0]
    scaled = rectangular_membrane_frequencies(tx, ty, rho, s * lx, s * ly, math.inf,
                                              max_modes=15)[0]
    np.testing.assert_allclose(scaled, base / s, rtol=1e-12)
    r = 0.5 * lx
    circle = circular_membrane_frequencies(tx, rho, r, math.inf, max_modes=10)[0]
    bigger = circular_membrane_frequencies(tx, rho, s * r, math.inf, max_modes=10)[0]
    np.testing.assert_allclose(bigger, circle / s, rtol=1e-12)


@PROPERTY
@given(tensions, tensions, densities, panel_sizes, panel_sizes, factors)
def test_frequency_scales_inversely_with_root_of_areal_density(tx, ty, rho, lx, ly, s):
    base = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, math.inf, max_modes=15)[0]
    scaled = rectangular_membrane_frequencies(tx, ty, s * rho, lx, ly, math.inf,
                                              max_modes=15)[0]
    np.testing.assert_allclose(scaled, base / math.sqrt(s), rtol=1e-12)


@PROPERTY
@given(tensions, tensions, densities, panel_sizes, panel_sizes, st.floats(10.0, 400.0))
def test_swapping_axes_leaves_spectrum_unchanged(tx, ty, rho, lx, ly, fmax):
    f1, m1, n1 = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, math.inf, max_modes=20)
    f2, m2, n2 = rectangular_membrane_frequencies(ty, tx, rho, ly, lx, math.inf, max_modes=20)
    np.testing.assert_allclose(f1, f2, rtol=1e-12)
    # (m, n) becomes (n, m): compare as sets of (frequency, pair) away from near-ties
    assert sorted(zip(np.round(f1, 6), m1, n1)) == sorted(zip(np.round(f2, 6), n2, m2))


@PROPERTY
@given(densities, panel_sizes, panel_sizes, factors)
def test_plate_frequency_scales_inversely_with_square_of_size(rho, lx, ly, s):
    # pure plate: ω = √(D/ρs) k² (Leissa, NASA SP-160, ch. 4), so f ∝ 1/L²
    base = rectangular_membrane_frequencies(0.0, 0.0, rho, lx, ly, math.inf,
                                            bending_stiffness=2.0, max_modes=10)[0]
    scaled = rectangular_membrane_frequencies(0.0, 0.0, rho, s * lx, s * ly, math.inf,
                                              bending_stiffness=2.0, max_modes=10)[0]
    np.testing.assert_allclose(scaled, base / s**2, rtol=1e-12)


# --------------------------------------------------------------------------------------------
# Bases: normalisation, means and participation by numerical quadrature
# --------------------------------------------------------------------------------------------

def _rectangle_quadrature(width, length, order=40):
    t, w = np.polynomial.legendre.leggauss(order)
    x, wx = 0.5 * width * (t + 1), 0.5 * width * w
    y, wy = 0.5 * length * (t + 1), 0.5 * length * w
    xx, yy = np.meshgrid(x, y, indexing="ij")
    return np.column_stack([xx.ravel(), yy.ravel()]), np.outer(wx, wy).ravel()


def _disc_quadrature(radius, radial=60, angular=96):
    t, w = np.polynomial.legendre.leggauss(radial)
    r, wr = 0.5 * radius * (t + 1), 0.5 * radius * w
    theta = 2 * np.pi * np.arange(angular) / angular  # periodic trapezoid: exact for cos(kθ)
    rr, tt = np.meshgrid(r, theta, indexing="ij")
    weights = np.outer(wr * r, np.full(angular, 2 * np.pi / angular)).ravel()
    return np.column_stack([(rr * np.cos(tt)).ravel(), (rr * np.sin(tt)).ravel()]), weights


@settings(max_examples=15, deadline=None)
@given(tensions, tensions, densities, panel_sizes, panel_sizes, st.sampled_from([0.0, 4.0]))
def test_rectangle_basis_normalisation_and_means_by_quadrature(tx, ty, rho, width, length,
                                                               bending):
    basis = rectangular_membrane_basis(tx, ty, rho, width, length, math.inf,
                                       bending_stiffness=bending, max_modes=16)
    assert isinstance(basis, ModalBasis) and len(basis) == 16
    assert max(max(_mn(label)) for label in basis.labels) <= 16  # within the quadrature's reach
    points, weights = _rectangle_quadrature(width, length)
    phi = basis.evaluate(points)
    area = width * length
    gram = phi.T @ (phi * weights[:, None])
    # unit mean square and orthogonality: ∫ φp φq dA = A δpq (auditor.physics.basis)
    np.testing.assert_allclose(gram, area * np.eye(len(basis)), atol=1e-10 * area)
    np.testing.assert_allclose(weights @ phi, area * basis.mean, atol=1e-12)
    for k, label in enumerate(basis.labels):
        m, n = _mn(label)
        expected = 64 / (np.pi**4 * m**2 * n**2) if m % 2 and n % 2 else 0.0
        # 64/(π⁴m²n²) for odd m, n, else 0 (elementary integration of sin·sin)
        assert (weights @ phi[:, k]) ** 2 / (area * gram[k, k]) == pytest.approx(
            expected, abs=1e-12)
        assert basis.participation[k] == pytest.approx(expected, abs=1e-15)
    np.testing.assert_allclose(basis.frequencies_hz, np.sort(basis.frequencies_hz))
    np.testing.assert_array_equal(basis.multiplicity, 1)


def test_rectangle_basis_is_zero_outside_and_nodal_counts():
    basis = rectangular_membrane_basis(1000.0, 1000.0, 0.25, 1.4, 0.9, 260.0)
    outside = np.array([[-0.01, 0.4], [1.41, 0.4], [0.7, -0.2], [0.7, 0.95]])
    np.testing.assert_array_equal(basis.evaluate(outside), 0.0)
    # mode (m, n) has m − 1 nodal lines x = const and n − 1 lines y = const (Rayleigh §195):
    # count sign changes along a generic horizontal and vertical line
    x = np.linspace(0.001, 1.399, 2001)
    y = np.linspace(0.001, 0.899, 2001)
    along_x = basis.evaluate(np.column_stack([x, np.full_like(x, 0.3137)]))
    along_y = basis.evaluate(np.column_stack([np.full_like(y, 0.5171), y]))
    for k, label in enumerate(basis.labels):
        m, n = _mn(label)
        lines = dict(basis.nodal_lines[k])
        assert lines["parallel to length"] == m - 1
        assert lines["parallel to width"] == n - 1
        assert np.count_nonzero(np.diff(np.sign(along_x[:, k])) != 0) == m - 1
        assert np.count_nonzero(np.diff(np.sign(along_y[:, k])) != 0) == n - 1


def test_circle_basis_normalisation_and_means_by_quadrature():
    radius = 0.6
    basis = circular_membrane_basis(1000.0, 0.25, radius, 420.0)
    assert len(basis) >= 12
    points, weights = _disc_quadrature(radius)
    phi = basis.evaluate(points)
    area = np.pi * radius**2
    gram = phi.T @ (phi * weights[:, None])
    np.testing.assert_allclose(gram, area * np.eye(len(basis)), atol=1e-10 * area)
    np.testing.assert_allclose(weights @ phi, area * basis.mean, atol=1e-12)
    for k, label in enumerate(basis.labels):
        m, n = _mn(label)
        if m == 0:
            j = special.jn_zeros(0, n)[-1]
            # participation 4/j0n² (from ∫ r J0 = a² J1(j)/j, ∫ r J0² = a² J1(j)²/2;
            # A&S §9.1.30, Watson §5.11), checked here by quadrature
            assert (weights @ phi[:, k]) ** 2 / (area * gram[k, k]) == pytest.approx(
                4 / j**2, rel=1e-10)
            assert phi[0, k] * np.sign(basis.mean[k]) * (-1) ** (n + 1) > 0  # sign of J1(j)
        else:
            assert basis.mean[k] == 0.0
            assert abs(weights @ phi[:, k]) < 1e-12
        assert basis.multiplicity[k] == (2 if m >= 1 else 1)


def test_circle_basis_nodal_counts_and_outside():
    radius = 0.5
    basis = circular_membrane_basis(800.0, 0.2, radius, 500.0)
    far = np.array([[0.51, 0.0], [0.0, -0.6], [0.4, 0.4]])
    np.testing.assert_array_equal(basis.evaluate(far), 0.0)
    # m nodal diameters and n − 1 nodal circles (Kinsler et al. §4.5): sign changes along a
    # radius at a generic angle, and around a generic circle (2m crossings)
    r = np.linspace(1e-4, radius - 1e-4, 4001)
    angle = 0.1234
    along_r = basis.evaluate(np.column_stack([r * np.cos(angle), r * np.sin(angle)]))
    theta = np.linspace(0, 2 * np.pi, 4001)[:-1] + 0.01
    around = basis.evaluate(np.column_stack([0.3 * np.cos(theta), 0.3 * np.sin(theta)]))
    for k, label in enumerate(basis.labels):
        m, n = _mn(label)
        assert dict(basis.nodal_lines[k]) == {"diameters": m, "circles": n - 1}
        assert np.count_nonzero(np.diff(np.sign(along_r[:, k])) != 0) == n - 1
        ring = np.sign(around[:, k])
        if ring.any():
            crossings = np.count_nonzero(ring != np.roll(ring, 1))
            assert crossings == 2 * m


# --------------------------------------------------------------------------------------------
# Completeness of the uniform-pressure participation
# --------------------------------------------------------------------------------------------

@pytest.mark.parametrize("largest", [11, 51, 401])
def test_rectangle_participation_sums_to_one_with_expected_tail(largest):
    m, n = np.meshgrid(np.arange(1, largest + 1), np.arange(1, largest + 1))
    total = rectangular_participation(m, n).sum()
    # Σ_{odd m ≤ N} 1/m² = π²/8 − ψ₁(K + ½)/4 with K = (N+1)/2 odd terms (A&S 6.4.10 and
    # 23.2.20; scipy.special.polygamma as the reference), so the square block sums to
    # (1 − 2ψ₁(K + ½)/π²)², which tends to 1 like 1 − 8/(π² (N + 2)) (ψ₁(x) ≈ 1/x)
    odd_terms = (largest + 1) // 2
    expected = (1 - 2 * special.polygamma(1, odd_terms + 0.5) / np.pi**2) ** 2
    assert total == pytest.approx(expected, rel=1e-12)
    assert 1 - total == pytest.approx(8 / (np.pi**2 * (largest + 2)), rel=0.1)
    assert total < 1


def test_circle_participation_sums_to_one_with_expected_tail():
    # Rayleigh's sum Σ_n j_{0,n}⁻² = 1/4 (Watson §15.51) makes Σ 4/j² = 1; with McMahon's
    # j_{0,n} ≈ (n − ¼)π (A&S 9.5.12) the tail after N terms is ≈ 4 ψ₁(N + ¾)/π².
    radius, tension, rho = 0.5, 1000.0, 0.25
    basis = circular_membrane_basis(tension, rho, radius, 40.5 * math.sqrt(tension / rho)
                                    / (2 * radius))
    axisymmetric = [k for k, label in enumerate(basis.labels) if _mn(label)[0] == 0]
    count = len(axisymmetric)
    assert count == 40
    total = basis.participation.sum()  # m ≥ 1 modes add exactly 0
    tail = 4 * special.polygamma(1, count + 0.75) / np.pi**2
    assert 1 - total == pytest.approx(tail, rel=1e-3)


# --------------------------------------------------------------------------------------------
# Terminal sketch
# --------------------------------------------------------------------------------------------

def test_sketch_of_rectangle_modes():
    basis = rectangular_membrane_basis(1000.0, 1000.0, 0.25, 1.2, 0.6, 200.0)
    index = {label: k for k, label in enumerate(basis.labels)}
    fundamental = sketch_mode(basis, index["(1,1)"], columns=24, rows=10)
    assert len(fundamental) >= 3 and len({len(line) for line in fundamental}) == 1
    assert set("".join(fundamental)) == {POSITIVE}  # no interior nodal line (Rayleigh §195)
    second = sketch_mode(basis, index["(2,1)"], columns=24, rows=10)
    width = len(second[0])
    for line in second:
        # one nodal line at x = Lx/2: + on the left, − on the right
        assert line.count(NODAL) == 1
        assert abs(line.index(NODAL) - (width - 1) / 2) <= 1
        assert set(line[:line.index(NODAL)]) == {POSITIVE}
        assert set(line[line.index(NODAL) + 1:]) == {NEGATIVE}


def test_sketch_of_circle_is_blank_outside():
    basis = circular_membrane_basis(1000.0, 0.25, 0.5, 300.0)
    lines = sketch_mode(basis, 0, columns=20, rows=10)
    assert lines[0][0] == OUTSIDE and lines[-1][-1] == OUTSIDE  # corners lie outside the disc
    assert POSITIVE in lines[len(lines) // 2]
    index = {label: k for k, label in enumerate(basis.labels)}
    pair = sketch_mode(basis, index["(1,1)"], columns=20, rows=10)
    text = "".join(pair)
    assert NODAL in text and POSITIVE in text and NEGATIVE in text


def test_sketch_works_for_any_basis_with_a_polygon():
    # An L-shaped outline with a made-up shape function: the sketch uses only the interface.
    outline = np.array([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], float)
    region = PolygonRegion(outline=outline, area=3.0)

    def evaluate(points):
        values = np.sin(np.pi * points[:, 0] / 2) * (points[:, 1] - 0.5)
        return np.where(region.contains(points), values, 0.0)[:, None]

    basis = ModalBasis(region=region, frequencies_hz=np.array([10.0]), labels=("#1",),
                       multiplicity=np.array([1]), mean=np.array([0.0]),
                       nodal_lines=((),), evaluate=evaluate)
    lines = sketch_mode(basis, 0, columns=20, rows=10)
    top, bottom = lines[0], lines[-1]
    assert set(top[len(top) // 2 + 1:]) == {OUTSIDE}  # the notch (x > 1, y > 1) is blank
    assert OUTSIDE not in bottom
    assert NODAL in "".join(lines)  # the sign change at y = 0.5
    with pytest.raises(IndexError):
        sketch_mode(basis, 3)


# --------------------------------------------------------------------------------------------
# Every mode up to the limit: no count cap, and how far the list is complete
# --------------------------------------------------------------------------------------------

def _panel(**fields):
    from auditor.model import Panel, SourceRef

    defaults = dict(panel="P1", source=SourceRef("test.csv", "", 2), areal_density=0.25,
                    tension_x=1200.0, tension_y=1200.0, room_side="none", plenum_side="none")
    return Panel(**{**defaults, **fields})


def _weyl_count(area, perimeter, wavenumber):
    # N(k) ≈ A k²/(4π) − P k/(4π) for the Dirichlet Laplacian (H. Weyl, Math. Ann. 71, 1912;
    # the perimeter term: H. P. Baltes and E. R. Hilf, Spectra of Finite Systems, 1976)
    return area * wavenumber**2 / (4 * math.pi) - perimeter * wavenumber / (4 * math.pi)


def test_every_mode_of_a_large_film_to_500_hz_weyl_and_brute_force():
    from auditor.physics.modes import modes_for

    width, length, rho, tension, fmax = 4.8, 3.2, 0.25, 1200.0, 500.0
    result = modes_for(_panel(shape="rectangle", width=width, length=length), fmax)
    count = sum(m.multiplicity for m in result.modes)
    # exact: every (m, n) with ½√(T/ρs)·√((m/a)² + (n/b)²) ≤ fmax (Kinsler et al.,
    # Fundamentals of Acoustics, 4th ed., §4.4), enumerated by brute force
    m, n = np.meshgrid(np.arange(1, 400), np.arange(1, 400))
    exact = 0.5 * math.sqrt(tension / rho) * np.hypot(m / width, n / length)
    assert count == np.count_nonzero(exact <= fmax) > 2000
    assert sorted(_mn(mode.label) for mode in result.modes) == sorted(
        zip(m[exact <= fmax].tolist(), n[exact <= fmax].tolist()))
    k = 2 * math.pi * fmax * math.sqrt(rho / tension)
    assert count == pytest.approx(_weyl_count(width * length, 2 * (width + length), k), rel=0.02)
    assert result.complete_to_hz == fmax
    assert all(a.frequency_hz <= b.frequency_hz for a, b in zip(result.modes, result.modes[1:]))


def test_every_mode_of_a_circle_to_500_hz_weyl_and_bessel_zeros():
    from auditor.physics.modes import modes_for

    radius, rho, tension, fmax = 1.5, 0.25, 1200.0, 500.0
    result = modes_for(_panel(shape="circle", diameter=2 * radius), fmax)
    count = sum(m.multiplicity for m in result.modes)
    # exact: zeros j_mn ≤ 2π a fmax √(ρs/T) of every J_m (scipy.special.jn_zeros), m ≥ 1
    # twice (cos and sin); Kinsler et al., Fundamentals of Acoustics, 4th ed., §4.5
    x_max = 2 * math.pi * radius * fmax * math.sqrt(rho / tension)
    exact = 0
    for order in range(int(x_max) + 1):
        below = int(np.count_nonzero(special.jn_zeros(order, int(x_max / 3) + 2) <= x_max))
        exact += below * (1 if order == 0 else 2)
    assert count == exact > 1000
    k = x_max / radius
    assert count == pytest.approx(_weyl_count(math.pi * radius**2, 2 * math.pi * radius, k),
                                  rel=0.02)
    assert result.complete_to_hz == fmax


def test_a_tone_35_percent_above_the_twelfth_mode_gets_every_mode_below_it():
    from auditor.physics.modes import modes_for

    # A large film (4.8 m × 3.2 m, 0.25 kg/m², 1200 N/m, no air) with a tone 35 % above its
    # twelfth mode: a count cap of 12 would hide the modes between (common practice: every
    # mode up to the assessment limit is judged).
    width, length = 4.8, 3.2
    film = _panel(shape="rectangle", width=width, length=length)
    frequency, _, _ = rectangular_membrane_frequencies(1200.0, 1200.0, 0.25, width, length,
                                                       math.inf, max_modes=200)
    tone = 1.35 * frequency[11]
    result = modes_for(film, tone)
    # exact count by the closed form (Kinsler et al., §4.4)
    assert len(result.modes) == np.count_nonzero(frequency <= tone) > 12
    assert result.complete_to_hz == tone
    capped = modes_for(film, tone, max_modes=12)
    assert len(capped.modes) == 12
    # with a cap the list is complete only to its last mode
    assert capped.complete_to_hz == pytest.approx(frequency[11], rel=1e-12)
    assert capped.complete_to_hz < tone


def test_analytic_bases_say_what_their_shapes_are():
    # The loading step integrates a basis in closed form on the strength of its family alone,
    # so the family must name exactly the shapes the basis evaluates: 2 sin(mπx/Lx) sin(nπy/Ly)
    # on a rectangle (Rayleigh, The Theory of Sound, vol. I, §194) and
    # c J_m(j_mn r/a) cos(mθ) on a disc with c = 1/|J₁(j)| (m = 0), √2/|J_{m+1}(j)| (m ≥ 1)
    # (Rayleigh §200; Lommel's integral, Watson §5.11), the zeros from scipy.special.jn_zeros.
    rng = np.random.default_rng(7)
    rect = membrane.rectangular_membrane_basis(700.0, 500.0, 0.25, 1.6, 1.1, 150.0)
    family = rect.family
    assert isinstance(family, basis_module.RectangleShapes)
    assert (family.width, family.length) == (1.6, 1.1)
    points = rng.uniform([0, 0], [1.6, 1.1], size=(40, 2))
    expected = 2 * np.sin(np.outer(points[:, 0], family.m * np.pi / 1.6)) * np.sin(
        np.outer(points[:, 1], family.n * np.pi / 1.1))
    assert np.allclose(rect.evaluate(points), expected, atol=1e-12)
    assert [f"({m},{n})" for m, n in zip(family.m, family.n)] == list(rect.labels)

    disc = membrane.circular_membrane_basis(600.0, 0.3, 0.75, 150.0)
    family = disc.family
    assert isinstance(family, basis_module.DiscShapes) and family.radius == 0.75
    radius = 0.75 * np.sqrt(rng.uniform(size=40))
    theta = rng.uniform(0, 2 * np.pi, size=40)
    points = np.column_stack([radius * np.cos(theta), radius * np.sin(theta)])
    zeros = np.array([special.jn_zeros(int(m), int(k) + 1)[k]
                      for m, k in zip(family.order, family.radial)])
    scale = np.where(family.order == 0, 1.0, math.sqrt(2.0)) / np.abs(
        special.jv(family.order + 1, zeros))
    expected = special.jv(family.order[None, :], np.outer(radius / 0.75, zeros)) * np.cos(
        np.outer(theta, family.order)) * scale[None, :]
    assert np.allclose(disc.evaluate(points), expected, atol=1e-10)
    assert np.allclose(family.zero, zeros, rtol=1e-13)
    # a cut to the lowest modes keeps its family, cut the same way
    kept = np.arange(5)
    assert np.array_equal(family.subset(kept).order, family.order[kept])
