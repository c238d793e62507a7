"""Incompressible added mass of the air on one baffled side: the Rayleigh integral.

The air on one side of a panel in an infinite rigid baffle adds, in the panel's in-vacuo
modal basis (unit mean square shapes), the full mass matrix

    M_pq = ρ0/(2π) ∬∬ φp(x) φq(x') / |x − x'| dA dA'

(modes couple through the air; the wet modes follow from the dry ones in their basis, as for
a clamped plate in water). How the four-fold integral is done depends on the basis's
quadrature family (:mod:`auditor.physics.quadrature`):

- Rectangles (basis shapes ``2 sin(mπx/Lx) sin(nπy/Ly)``): the four-fold Rayleigh integral is
  reduced exactly to a two-fold integral over the separation (u, v) of the products of the
  one-dimensional cross-correlations of the sine shapes (closed form), whose only singularity
  (1/r at the origin) a Duffy transformation removes; tensor Gauss–Legendre quadrature then
  converges exponentially. The result, divided by ρ0 Lx³, depends only on the aspect ratio
  (and the table's size), so a caller's :class:`auditor.physics.cache.SolveCache` keeps it
  for every tension of the outline.
- Discs (shapes ``J_m(j r/a) cos mθ``): the wavenumber-domain form, with the Hankel transform
  of each Bessel shape in closed form (Lommel's integral); orders m do not couple.
- Any other basis: point quadrature on a fine triangulation, with the integral of 1/R over
  each nearby triangle taken exactly.

References
----------
.. [1] Lord Rayleigh, *The Theory of Sound*, vol. II, Macmillan, 1896, §278 (the Rayleigh
   integral for a baffled plane surface).
.. [2] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (fluid loading of plates).
.. [3] M. G. Duffy, "Quadrature over a pyramid or cube of integrands with a singularity at a
   vertex", SIAM J. Numer. Anal. 19 (1982) 1260–1262.
.. [4] G. N. Watson, *A Treatise on the Theory of Bessel Functions*, 2nd ed., Cambridge,
   1944, §5.11 (Lommel's integrals).
.. [5] H. Lamb, "On the vibrations of an elastic plate in contact with water", Proc. R. Soc.
   Lond. A 98 (1920) 205–216.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy import sparse, special
from scipy.spatial import cKDTree, distance

from auditor.physics.basis import DiscShapes, ModalBasis, RectangleShapes
from auditor.physics.bessel import bessel_zeros
from auditor.physics.cache import SolveCache
from auditor.physics.loading_inputs import AIR_DENSITY
from auditor.physics.loading_inputs import positive as _positive
from auditor.physics.quadrature import PointShapes, quadrature_family

__all__ = [
    "angular_weight",
    "baffled_added_mass",
    "bessel_transform",
    "gauss_panels",
    "hankel_rule",
    "rectangle_self_table",
    "rounded_up",
    "unit_added_mass",
]


# ============================================================================================
# Points: the midpoint rule, 1/R integrated exactly over nearby cells
# ============================================================================================

def _inverse_distance_over_triangles(points: np.ndarray, corners: np.ndarray) -> np.ndarray:
    """∫_T dA/|x − p| over triangles T (counter-clockwise corners (N, 3, 2)) for points p (N, 2).

    Sum over the edges of the signed sub-triangle (p, edge) integrals
    ``h [asinh(t₂/|h|) − asinh(t₁/|h|)]`` (h the signed distance from p to the edge line,
    t₁, t₂ the edge ends measured from the foot of the perpendicular).
    """
    total = np.zeros(len(points))
    for i in range(3):
        v1, v2 = corners[:, i], corners[:, (i + 1) % 3]
        edge = v2 - v1
        length = np.maximum(np.linalg.norm(edge, axis=1), 1e-300)
        tangent = edge / length[:, None]
        normal_inward = np.column_stack([-tangent[:, 1], tangent[:, 0]])
        h = np.einsum("ij,ij->i", v1 - points, -normal_inward)   # > 0 when p is inside
        t1 = np.einsum("ij,ij->i", v1 - points, tangent)
        t2 = np.einsum("ij,ij->i", v2 - points, tangent)
        habs = np.abs(h)
        ok = habs > 1e-12 * length
        safe = np.where(ok, habs, 1.0)
        total += np.where(ok, h * (np.arcsinh(t2 / safe) - np.arcsinh(t1 / safe)), 0.0)
    return total


def _points_added_mass_normalised(family: PointShapes) -> np.ndarray:
    """∬∬ φp φq / R dA dA' by point quadrature, exact 1/R integrals over nearby cells.  [m³]

    Far field: the midpoint rule, cell by cell (the kernel is symmetric, so each pair of
    cells is evaluated once). Near field: for each cell j, every quadrature point closer
    than three times the cell's own size √(2 w_j) takes the exact integral of 1/R over the
    cell instead (and the cell its own singular self term), so a mesh graded toward a
    corner gets exact integrals over its small cells without a near zone sized by the
    large ones.
    """
    x, w, phi = family.points, family.weights, family.values
    weighted = phi * w[:, None]
    count = len(x)
    half = np.zeros((phi.shape[1], phi.shape[1]))
    diagonal_blocks = np.zeros_like(half)
    chunk = max(1, 2_000_000 // max(count, 1))
    for start in range(0, count, chunk):
        stop = min(start + chunk, count)
        # the rows' block against itself and every later point
        kernel = distance.cdist(x[start:stop], x[start:])
        rows = np.arange(stop - start)
        kernel[rows, rows] = 1.0                # the self term is the near field's
        np.reciprocal(kernel, out=kernel)
        kernel[rows, rows] = 0.0
        part = weighted[start:stop].T @ (kernel @ weighted[start:])
        half += part
        diagonal_blocks += weighted[start:stop].T @ (kernel[:, :stop - start]
                                                     @ weighted[start:stop])
    result = half + half.T - diagonal_blocks
    # Near field: replace w_j/R_ij by the exact ∫_{T_j} dA/|x_i − x| (and add the self term).
    reach = 3.0 * np.sqrt(2.0 * w)
    near = cKDTree(x).query_ball_point(x, reach, return_sorted=False)
    sizes = np.fromiter((len(found) for found in near), dtype=int, count=count)
    j = np.repeat(np.arange(count), sizes)
    i = np.fromiter((k for found in near for k in found), dtype=int, count=int(sizes.sum()))
    exact = _inverse_distance_over_triangles(x[i], family.corners[j])
    gap = np.hypot(*(x[i] - x[j]).T)
    with np.errstate(divide="ignore"):
        approx = np.where(gap > 0, w[j] / np.where(gap > 0, gap, 1.0), 0.0)
    correction = (exact - approx) * w[i]
    # As a sparse matrix (a dense gather of the shapes at every pair would be large).
    matrix = sparse.csr_matrix((correction, (i, j)), shape=(count, count))
    result += phi.T @ (matrix @ phi)
    return 0.5 * (result + result.T)


# ============================================================================================
# Rectangle: cross-correlations of sines and a Duffy-transformed Gauss rule
# ============================================================================================

def _correlation_coefficients(count: int):
    """Coefficients of the folded cross-correlation of sines on [0, 1].

    ``D_mm'(s) = C_mm'(s) + C_m'm(s)``, ``C_ab(s) = ∫₀^{1−s} sin(aπξ) sin(bπ(ξ+s)) dξ``, is
    exactly ``α sin(mπs) + β sin(m'πs) + δ (1 − s) cos(mπs)`` with, for m ≠ m' of equal
    parity, ``α = v − u``, ``β = u + v`` (u = 1/((m − m')π), v = 1/((m + m')π)), δ = 0; for
    m = m', ``α = 1/(mπ)``, β = 0, δ = 1; and D ≡ 0 for m + m' odd (unlike symmetry).
    Returns α, β, δ as (count, count) arrays (indices m − 1, m' − 1).
    """
    m = np.arange(1, count + 1, dtype=float)
    diff = m[:, None] - m[None, :]
    same = diff == 0
    u = np.where(same, 0.0, 1.0 / (np.pi * np.where(same, 1.0, diff)))
    v = 1.0 / (np.pi * (m[:, None] + m[None, :]))
    even = ((m[:, None] + m[None, :]) % 2) == 0
    alpha = np.where(same, 1.0 / (np.pi * m[:, None]), np.where(even, v - u, 0.0))
    beta = np.where(same, 0.0, np.where(even, u + v, 0.0))
    delta = same.astype(float)
    return alpha, beta, delta


def _rectangle_table(aspect: float, m_count: int, n_count: int) -> np.ndarray:
    """Normalised added mass of the unit-width rectangle, T[m−1, n−1, m'−1, n'−1].

    ``M_pq = ρ0 Lx³ T`` for ``φ = 2 sin(mπx/Lx) sin(nπy/Ly)``, ``aspect = Ly/Lx``:
    ``T = (4α²/2π) ∫₀¹∫₀¹ D_mm'(s) D_nn'(t) / √(s² + α²t²) ds dt`` (α = aspect), the 1/r
    singularity at the origin removed by a Duffy transformation of each half of the square.
    """
    moments = _rectangle_moments(aspect, m_count, n_count)
    ax, bx, dx = _correlation_coefficients(m_count)
    ay, by, dy = _correlation_coefficients(n_count)
    # D_x = Σ_i c_i F_i with (c, F, index) = (α, S, m), (β, S, m'), (δ, C, m); D_y likewise.
    x_terms = ((ax, 0, "m"), (bx, 0, "mp"), (dx, 1, "m"))
    y_terms = ((ay, 0, "n"), (by, 0, "np"), (dy, 1, "n"))
    table = np.zeros((m_count, m_count, n_count, n_count))
    diagonal = np.arange(m_count)
    for cx, fi, ix in x_terms:
        # The y terms summed first: inner[k, n, n'], k the x index the moments carry.
        inner = np.zeros((m_count, n_count, n_count))
        for cy, fj, iy in y_terms:
            g = moments[fi, fj]                      # (M, N): rows m-index, columns n-index
            inner += cy[None, :, :] * (g[:, :, None] if iy == "n" else g[:, None, :])
        if cx is dx:   # δ = identity: only m = m'
            table[diagonal, diagonal] += inner
        elif ix == "m":
            table += cx[:, :, None, None] * inner[:, None, :, :]
        else:
            table += cx[:, :, None, None] * inner[None, :, :, :]
    table *= 4.0 * aspect**2 / (2.0 * np.pi)
    return np.ascontiguousarray(table.transpose(0, 2, 1, 3))


def rectangle_self_table(aspect: float, m_count: int, n_count: int) -> np.ndarray:
    """The diagonal of :func:`_rectangle_table`, S[m−1, n−1] = T[m−1, n−1, m−1, n−1].

    On the diagonal the correlations ``D_mm(s) = sin(mπs)/(mπ) + (1 − s) cos(mπs)`` (see
    :func:`_correlation_coefficients`) make the integrand separable once the kernel is
    written as a Gaussian integral, ``1/√(s² + α²t²) = (2/√π) ∫₀^∞ e^{−(s² + α²t²)u²} du``:

        S = (4α²/2π) (2/√π) ∫₀^∞ J_m(u) J_n(αu) du,   J_k(β) = ∫₀¹ D_kk(s) e^{−β²s²} ds,

    and ``J_k`` is in closed form (:func:`_gaussian_correlation_moments`), so the whole table
    is one matrix product over the nodes of the u integral (trapezoid rule in ln u, which
    converges exponentially; the ends in closed form). Agrees with the two-dimensional
    quadrature of :func:`_rectangle_table` to 1e-9 where that converges, and stays exact at
    table sizes where the fixed-order quadrature does not (10 % off at 192 half-waves).

    References
    ----------
    .. [1] M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*, 1964,
       §7.1 (the error function of complex argument, the Faddeeva function w and Dawson's
       integral) and §7.4.2 (∫₀^∞ e^{−r²u²} du = √π/(2r)).
    """
    half_waves_x = np.pi * np.arange(1, m_count + 1)
    half_waves_y = np.pi * np.arange(1, n_count + 1)
    top = max(float(half_waves_x[-1]), float(half_waves_y[-1]) / aspect)
    step = _SELF_STEP
    ln_u = np.arange(_SELF_LN_U_LOW, math.log(_SELF_U_REACH * top) + 0.5 * step, step)
    u = np.exp(ln_u)
    weights = step * u
    weights[[0, -1]] *= 0.5
    jx = _gaussian_correlation_moments(u, half_waves_x)
    jy = _gaussian_correlation_moments(aspect * u, half_waves_y)
    # Below the first node J is its value at 0, 2(1 − cos a)/a²; above the last, J ~ √π/(2β).
    head = u[0] * np.outer(2.0 * (1.0 - np.cos(half_waves_x)) / half_waves_x**2,
                           2.0 * (1.0 - np.cos(half_waves_y)) / half_waves_y**2)
    tail = math.pi / (4.0 * aspect * u[-1])
    integral = (jx * weights) @ jy.T + head + tail
    return integral * (4.0 * aspect**2 / (2.0 * np.pi)) * (2.0 / math.sqrt(math.pi))


#: The u integral of :func:`rectangle_self_table`: step in ln u, lowest ln u, and how far
#: beyond the highest half-wave wavenumber it reaches (its ends then add below 1e-9).
_SELF_STEP, _SELF_LN_U_LOW, _SELF_U_REACH = 0.1, -16.0, 1e6

#: Below this β the moments of :func:`_gaussian_correlation_moments` are summed by a
#: Gauss–Legendre rule in s (the closed form loses digits as 1/β² there).
_SMALL_BETA = 1.0


def _gaussian_correlation_moments(beta: np.ndarray, half_wave: np.ndarray) -> np.ndarray:
    """``J(β, a) = ∫₀¹ (sin(as)/a + (1 − s) cos(as)) e^{−β²s²} ds`` for a = mπ  (len(a), len(β)).

    Closed form through ``E0 = ∫₀¹ e^{−β²s² + ias} ds`` and ``E1 = ∫₀¹ s e^{−β²s² + ias} ds``:
    with y = a/(2β), ``E0 = (√π/2β) [e^{−y²} − e^{−β²} e^{ia} w(y + iβ) + (2i/√π) F(y)]``
    (w the Faddeeva function, F Dawson's integral) and, by parts,
    ``E1 = (1 − e^{−β²} e^{ia})/(2β²) + (ia/2β²) E0``; then ``J = Im E0/a + Re E0 − Re E1``.
    For β < ``_SMALL_BETA`` (a broad Gaussian) a Gauss–Legendre rule in s is exact to
    rounding instead.
    """
    beta = np.asarray(beta, float)
    a = np.asarray(half_wave, float)
    out = np.empty((len(a), len(beta)))
    small = beta < _SMALL_BETA
    if np.any(small):
        nodes, weights = _gauss_unit(int(0.6 * float(a.max())) + 40)
        phase = np.outer(a, nodes)
        correlation = np.sin(phase) / a[:, None] + (1.0 - nodes)[None, :] * np.cos(phase)
        out[:, small] = correlation @ (weights[:, None]
                                       * np.exp(-np.outer(nodes**2, beta[small] ** 2)))
    large = ~small
    if np.any(large):
        b = beta[large][None, :]
        aa = a[:, None]
        y = aa / (2.0 * b)
        turn = np.exp(-b * b) * np.exp(1j * aa)
        e0 = (math.sqrt(math.pi) / (2.0 * b)) * (
            np.exp(-y * y) - turn * special.wofz(y + 1j * b)
            + (2j / math.sqrt(math.pi)) * special.dawsn(y))
        e1 = (1.0 - turn) / (2.0 * b * b) + (1j * aa / (2.0 * b * b)) * e0
        out[:, large] = e0.imag / aa + e0.real - e1.real
    return out


def _rectangle_moments(aspect: float, m_count: int, n_count: int) -> dict:
    """G_ij[m−1, n−1] = ∫₀¹∫₀¹ F_i,m(s) F_j,n(t) / √(s² + α²t²) ds dt with F_0 = sin(kπs),
    F_1 = (1 − s) cos(kπs) (α = aspect; keys (i, j)), by tensor Gauss–Legendre rules on the
    two Duffy-transformed halves of the square.

    Half t ≤ s: s = σ, t = στ, r = σ √(1 + α²τ²), the Jacobian σ cancelling the 1/r; half
    s ≤ t likewise. The function of σ alone is taken out of the sum over τ, so the work is
    the functions on the σ·τ nodes and two small matrix products.
    """
    order = int(1.25 * max(m_count, n_count)) + 18
    nodes, weights = _gauss_unit(order)
    product = np.outer(nodes, nodes).ravel()            # σ_a τ_b, a-major
    alpha = aspect

    def functions(count, s):
        sines, cosines = _harmonics(count, s)
        return sines, (1.0 - s) * cosines

    moments: dict[tuple[int, int], np.ndarray] = {}
    # (count on σ, count on στ, weight of τ, whether σ carries the x index)
    for outer, inner, tau_weight, x_outer in (
            (m_count, n_count, weights / np.sqrt(1.0 + (alpha * nodes) ** 2), True),
            (n_count, m_count, weights / np.sqrt(nodes**2 + alpha**2), False)):
        on_sigma = [f * weights for f in functions(outer, nodes)]            # (count, a)
        # Σ_b F(σ_a τ_b) w_b for each function: (count, a)
        summed = [(f.reshape(inner, order, order) @ tau_weight)
                  for f in functions(inner, product)]
        for i in range(2):
            for j in range(2):
                if x_outer:
                    value = on_sigma[i] @ summed[j].T
                else:
                    value = (on_sigma[j] @ summed[i].T).T
                moments[i, j] = moments.get((i, j), 0.0) + value
    return moments


@lru_cache(maxsize=64)
def _gauss_unit(order: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights of ``order`` points on [0, 1] (cached, read-only)."""
    nodes, weights = np.polynomial.legendre.leggauss(order)
    nodes, weights = 0.5 * (nodes + 1.0), 0.5 * weights
    nodes.setflags(write=False)
    weights.setflags(write=False)
    return nodes, weights


def _harmonics(count: int, s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """sin(kπs) and cos(kπs) for k = 1 … count, (count, len(s)), by the Chebyshev
    recurrence ``u_{k+1} = 2 cos(πs) u_k − u_{k−1}`` (rounding grows about as k² ε)."""
    sines = np.empty((count, len(s)))
    cosines = np.empty((count, len(s)))
    c, si = np.cos(np.pi * s), np.sin(np.pi * s)
    two_c = 2.0 * c
    sines[0], cosines[0] = si, c
    if count > 1:
        sines[1], cosines[1] = two_c * si, two_c * c - 1.0
    for k in range(2, count):
        np.multiply(two_c, sines[k - 1], out=sines[k])
        sines[k] -= sines[k - 2]
        np.multiply(two_c, cosines[k - 1], out=cosines[k])
        cosines[k] -= cosines[k - 2]
    return sines, cosines


def rounded_up(count: int) -> int:
    """``count`` rounded up to a multiple of 8: the size of a kept table (rectangle, disc)
    holding ``count`` half-waves or zeros, so that nearby requests share one table."""
    return int(8 * math.ceil(count / 8))


def _rectangle_added_mass(family: RectangleShapes, cache: SolveCache) -> np.ndarray:
    """∬∬ φp φq / R dA dA' / (2π) for the rectangle basis  [m³].

    The normalised table depends on the aspect ratio (12 significant digits) and on its size
    (half-wave numbers rounded up to multiples of 8, which also sets its Gauss order): both
    are the key in ``cache``, so every tension of one outline whose basis needs the same
    table size shares it, and a table never depends on which panels came before.
    """
    aspect = float(f"{family.length / family.width:.12g}")
    m_count, n_count = rounded_up(int(family.m.max())), rounded_up(int(family.n.max()))
    table = cache.rectangle_tables.get((aspect, m_count, n_count),
                                       lambda: _rectangle_table(aspect, m_count, n_count))
    i, j = family.m - 1, family.n - 1
    block = table[i[:, None], j[:, None], i[None, :], j[None, :]]
    return family.width**3 * block


# ============================================================================================
# Disc: Hankel transforms of Bessel shapes (closed form)
# ============================================================================================

def bessel_transform(order: int, zeros: np.ndarray, x: np.ndarray,
                     bessel_at_x: np.ndarray | None = None) -> np.ndarray:
    """h(x) = ∫₀¹ J_m(j r) J_m(x r) r dr at a zero j of J_m: ``j J_{m+1}(j) J_m(x)/(j² − x²)``.

    Shape (len(zeros), len(x)); the removable singularity at x = j is taken in the limit
    ``J_{m+1}(j)²/2``. ``bessel_at_x``, when given, is J_m(x) (from a table of every order,
    :func:`auditor.physics.bessel.bessel_j_orders`).
    """
    j = zeros[:, None]
    next_order = special.jv(order + 1.0, zeros)[:, None]
    denominator = j * j - x[None, :] ** 2
    near = np.abs(denominator) < 1e-9 * j * j
    safe = np.where(near, 1.0, denominator)
    at_x = special.jv(order, x) if bessel_at_x is None else bessel_at_x
    value = j * next_order * at_x[None, :] / safe
    return np.where(near, 0.5 * next_order**2, value)


def angular_weight(order) -> np.ndarray:
    """∫₀^{2π} cos²(mθ) dθ: 2π for m = 0, π otherwise."""
    return np.where(np.asarray(order) == 0, 2.0 * np.pi, np.pi)


@lru_cache(maxsize=16)
def hankel_rule(x_max: float, per_panel: int = 10,
                width: float = 0.5 * np.pi) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights on [0, x_max] (rounded up to whole panels of
    ``width``), ``per_panel`` nodes a panel (cached, a pure function of its arguments)."""
    return gauss_panels(int(math.ceil(x_max / width)), per_panel, width)


def gauss_panels(panels: int, per_panel: int, width: float) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights on ``panels`` panels [k·width, (k + 1)·width]: the
    nodes of panel k do not depend on how many panels there are (a shorter rule is a prefix
    of a longer one)."""
    nodes, weights = np.polynomial.legendre.leggauss(per_panel)
    edges = np.arange(panels + 1) * width
    half = 0.5 * (edges[1:] - edges[:-1])
    x = ((edges[:-1] + half)[:, None] + half[:, None] * nodes[None, :]).ravel()
    w = (half[:, None] * weights[None, :]).ravel()
    return x, w


@lru_cache(maxsize=256)
def _disc_order_table(order: int, count: int) -> np.ndarray:
    """∫₀^∞ h_p h_q dx for the first ``count`` zeros of J_m (unit radius, unscaled shapes)."""
    zeros = bessel_zeros(order, count)
    x, w = hankel_rule(240.0 + 2.0 * float(zeros[-1]))
    tail_start = x[-1] + (x[-1] - x[-2])
    h = bessel_transform(order, zeros, x)
    integral = (h * w) @ h.T
    # Tail: h ≈ −j J_{m+1}(j) J_m(x)/x², and J_m(x)² ≈ 1/(πx) on average.
    c = zeros * special.jv(order + 1.0, zeros)
    return integral + np.outer(c, c) / (4.0 * np.pi * tail_start**4)


def _disc_added_mass(family: DiscShapes) -> np.ndarray:
    """The kernel integral ∬∬ φp φq /R dA dA' for the disc basis.  [m³]"""
    n = len(family.order)
    result = np.zeros((n, n))
    for block in family.blocks():
        m = int(family.order[block[0]])
        count = family.radial[block]
        table = _disc_order_table(m, rounded_up(int(count.max()) + 1))
        scale = family.scale[block]
        result[np.ix_(block, block)] = (angular_weight(m) * table[np.ix_(count, count)]
                                        * np.outer(scale, scale))
    # M = ρ0 a³ ε ∫ h h dx  ⇒  ∬∬ φφ'/R = 2π a³ ε ∫ h h dx
    return 2.0 * np.pi * family.radius**3 * result


# ============================================================================================
# Incompressible added mass (public)
# ============================================================================================

def _kernel_integral(family, cache: SolveCache) -> np.ndarray:
    """∬∬ φp(x) φq(x') / |x − x'| dA dA'  [m³] for the family's basis."""
    if isinstance(family, RectangleShapes):
        return 2.0 * np.pi * _rectangle_added_mass(family, cache)
    if isinstance(family, DiscShapes):
        return _disc_added_mass(family)
    return _points_added_mass_normalised(family)


def unit_added_mass(basis: ModalBasis, cache: SolveCache) -> np.ndarray:
    """Added mass per unit air density on one baffled side, ``M/ρ0``  [m³]."""
    family = quadrature_family(basis, cache)
    if isinstance(family, PointShapes):
        # The added mass depends on the shapes alone: bases that share their ``evaluate`` and
        # region (one outline at several tensions, see modes._scaled_polygon_basis) share it
        # through the cache, found by those objects.
        return cache.added_mass.get_for((basis.evaluate, basis.region), len(basis),
                                        lambda: _kernel_integral(family, cache) / (2.0 * np.pi))
    return _kernel_integral(family, cache) / (2.0 * np.pi)


def baffled_added_mass(basis: ModalBasis, air_density: float = AIR_DENSITY, *,
                       cache: SolveCache | None = None) -> np.ndarray:
    """Incompressible added-mass matrix of the air on one baffled side of a panel.

    Parameters
    ----------
    basis : ModalBasis
        In-vacuo modes, unit mean square (∫φ² dA = A).
    air_density : float  [kg/m³]
    cache : SolveCache, optional
        Keeps the integrals for later calls (see :mod:`auditor.physics.cache`).

    Returns
    -------
    added_mass : ndarray (n, n)  [kg]
        ``M_pq = ρ0/(2π) ∬∬ φp(x) φq(x') / |x − x'| dA dA'``, symmetric positive definite.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. II, §278; Fahy & Gardonio, *Sound and Structural
    Vibration*, 2nd ed. (fluid loading); Duffy, SIAM J. Numer. Anal. 19 (1982).
    """
    cache = SolveCache() if cache is None else cache
    return _positive(air_density, "air density", "kg/m³") * unit_added_mass(basis, cache)
