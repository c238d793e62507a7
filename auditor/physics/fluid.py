"""Air loading, backing cavities and porosity: from in-vacuo modes to the modes in air.

A light film or fabric moves a mass of air comparable to its own, so its natural frequencies
in air are far below those in vacuo. This module takes the in-vacuo modal basis of a panel
(:class:`auditor.physics.basis.ModalBasis`, unit mean square shapes ∫φ² dA = A) and solves

    [ K − ω² (M + M_air(ω) + M_cavity(ω)) + iω R(ω) ] q = 0,

with ``M = ρs·A·I`` and ``K = ρs·A·diag(ω_j²)`` (the structural modal mass and stiffness) and,
on each side of the panel:

- **baffled half-space** (room side ``"air"``, open plenum ``"air"``): the Rayleigh integral.
  Its incompressible part is the full added-mass matrix
  ``M_pq = ρ0/(2π) ∬∬ φp(x) φq(x') / |x − x'| dA dA'`` (modes couple through the air); the
  compressible kernel ``e^{−ik0R}/R`` adds a frequency-dependent correction (the
  ``(cos k0R − 1)/R`` part) and a radiation resistance (the ``sin(k0R)/R`` part);
- **sealed cavity** of depth d with rigid walls (plenum side ``"sealed"``): acoustoelastic
  coupling with the cross-section modes N_j of the cavity (Dowell's method), a modal pressure
  per unit displacement ``ρ0 ω² coth(κ_j d)/κ_j``, ``κ_j² = k_j² − k0²``, mass-like for the
  cross modes and, for the uniform mode at low frequency, the stiffness
  ``ρ0c² (∫φp)(∫φq)/V``;
- **nothing** (``"none"``).

A porous fabric or open mesh of specific airflow resistance r [Pa·s/m] lets air through: the
air on both sides moves with the velocity ``v − Δp/r``, so the impedance the panel feels is the
air's impedance Z (both sides together) in series with the sheet's flow resistance,
``Z_eff = (Z⁻¹ + (r·A·I)⁻¹)⁻¹`` in modal form (``Z r/(Z + r)`` for a single mode). A mesh with
no r given passes air freely and carries no air load.

How the quadrature is done
--------------------------
- Rectangles (basis shapes ``2 sin(mπx/Lx) sin(nπy/Ly)``): the four-fold Rayleigh integral is
  reduced exactly to a two-fold integral over the separation (u, v) of the products of the
  one-dimensional cross-correlations of the sine shapes (closed form), whose only singularity
  (1/r at the origin) a Duffy transformation removes; tensor Gauss–Legendre quadrature then
  converges exponentially. The result, divided by ρ0 Lx³, depends only on the aspect ratio
  (and the table's size), so a caller's :class:`auditor.physics.cache.SolveCache` keeps it
  for every tension of the outline.
- Discs (shapes ``J_m(j r/a) cos mθ``): the wavenumber-domain form, with the Hankel transform
  of each Bessel shape in closed form (Lommel's integral); orders m do not couple.
- Any other basis (polygons, cut-outs, shapes not recognised): point quadrature on a fine
  triangulation (the finite-element mesh subdivided, or one made here), with the integral of
  1/R over each nearby triangle taken exactly.
- The compressible part, for every shape, in the wavenumber domain: with the modal spectrum
  Φ(κ) and its angular density g(κ) = ∫|Φ(κ, θ)|² dθ,
  ``R = ωρ0/(4π²) ∫₀^{k0} g κ/√(k0² − κ²) dκ`` and
  ``ΔM = ρ0/(4π²) [∫_{k0}^∞ g (κ/√(κ² − k0²) − 1) dκ − ∫₀^{k0} g dκ]``, integrated exactly
  for g piecewise linear in κ (product integration).

Frequency dependence is handled per reported mode by fixed-point iteration on its frequency:
for air on open sides only, the incompressible eigenproblem is solved once and each mode's
frequency and loss factor are corrected by its Rayleigh quotient with the compressible terms;
with a sealed cavity or a porous sheet, each mode is followed by Rayleigh-quotient iteration
on the frequency-dependent (complex, for porosity) problem. A porous sheet over a sealed
cavity is solved on the panel and air coordinates together (a quadratic eigenproblem, every
root at once, then each panel root followed as the cavity's terms change with frequency):
eliminating the air there makes the cavity's stiffness a negative mass, and iterating on
frequency then runs off to the relaxation roots of air leaking through the sheet. Its
frequencies are those of the complex roots, ``√Re(ω²)/2π``.

Basis and limits
----------------
The in-vacuo basis reaches past the band reported (see :func:`choose_basis_limit`; at least
``MIN_BASIS`` modes, at most ``max_basis``); the loaded fundamental then agrees with a basis ten
times larger to better than 0.05 %. ``LoadedModes.complete_to_hz`` says up to which frequency
no loaded mode is missing (the basis's reach, less the most its top modes' air can lower a
mode left out); above it :mod:`auditor.physics.uncoupled` loads each further mode on its own.
The baffle is infinite and rigid, cavity walls are rigid and the cavity
air has no absorption, so near a depth resonance of a deep cavity the cavity-controlled roots
are not reported as panel modes. A porous sheet's flow resistance acts through the total
impedance of the air on both sides; its vectors are the real part of complex modes.

References
----------
.. [1] Lord Rayleigh, *The Theory of Sound*, vol. II, Macmillan, 1896, §278 (the Rayleigh
   integral for a baffled plane surface).
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, §7.4–7.5 (baffled piston, radiation impedance).
.. [3] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (wavenumber-domain radiation, radiation resistance, fluid loading of plates,
   the mass–air–mass resonance).
.. [4] E. H. Dowell, G. F. Gorman and D. A. Smith, "Acoustoelasticity: general theory,
   acoustic natural modes and forced response to sinusoidal excitation, including
   comparisons with experiment", J. Sound Vib. 52 (1977); E. H. Dowell, *Aeroelasticity of
   Plates and Shells*, Noordhoff, 1975.
.. [5] M. G. Duffy, "Quadrature over a pyramid or cube of integrands with a singularity at a
   vertex", SIAM J. Numer. Anal. 19 (1982) 1260–1262.
.. [6] G. N. Watson, *A Treatise on the Theory of Bessel Functions*, 2nd ed., Cambridge,
   1944, §5.11 (Lommel's integrals).
.. [7] H. Lamb, "On the vibrations of an elastic plate in contact with water", Proc. R. Soc.
   Lond. A 98 (1920) 205–216.
.. [8] U. Ingard, *Notes on Acoustics*, Infinity Science Press, 2008 (flow resistance of
   porous screens in series with an air load).
.. [9] P. M. Morse and K. U. Ingard, *Theoretical Acoustics*, McGraw-Hill, 1968, ch. 9
   (rigid-walled cavities and ducts).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Callable

import numpy as np
from scipy import linalg, sparse, special
from scipy.spatial import Delaunay, cKDTree, distance

from auditor.physics import arguments
from auditor.physics.basis import (
    CircleRegion,
    DiscShapes,
    ModalBasis,
    PolygonRegion,
    RectangleRegion,
    RectangleShapes,
    complete_below,
)
from auditor.physics.cache import SolveCache
from auditor.physics.materials import structural_loss_factor

__all__ = [
    "AIR_DENSITY",
    "SPEED_OF_SOUND",
    "AirImpedance",
    "LoadedModes",
    "LoadingInputError",
    "baffled_added_mass",
    "baffled_air_impedance",
    "cavity_dynamic_mass",
    "choose_basis_limit",
    "describe_loading",
    "loaded_modes",
    "mass_air_mass_frequency",
]

#: Density of air at 20 °C, 101.325 kPa  [kg/m³]
AIR_DENSITY = 1.204
#: Speed of sound in air at 20 °C  [m/s]
SPEED_OF_SOUND = 343.0

#: Fewest in-vacuo modes a loaded solve uses (when the basis function can give them).
MIN_BASIS = 40

class LoadingInputError(ValueError):
    """A loading input a user can get wrong (the message says which and why)."""


def _finite(value, name: str, unit: str) -> float:
    return arguments.finite(value, name, unit, LoadingInputError)


def _positive(value, name: str, unit: str) -> float:
    return arguments.positive(value, name, unit, LoadingInputError)


def _non_negative(value, name: str, unit: str) -> float:
    return arguments.non_negative(value, name, unit, LoadingInputError)


# ============================================================================================
# Records
# ============================================================================================

@dataclass(frozen=True, eq=False)
class AirImpedance:
    """Modal impedance of the air on one baffled side at one frequency.

    Parameters
    ----------
    added_mass : ndarray (n, n)  [kg]
        ``ρ0/(2π) ∬∬ φp φq cos(k0R)/R dA dA'`` (the reactive part over iω).
    resistance : ndarray (n, n)  [kg/s]
        ``ωρ0/(2π) ∬∬ φp φq sin(k0R)/R dA dA'`` (the radiation resistance).
    frequency_hz : float  [Hz]
    """

    added_mass: np.ndarray
    resistance: np.ndarray
    frequency_hz: float


@dataclass(frozen=True, eq=False)
class LoadedModes:
    """The modes of a panel in air, expressed in its in-vacuo basis.

    Parameters
    ----------
    frequencies_hz : ndarray (k,)  [Hz]
        Natural frequencies with the loading, ascending, ≤ fmax.
    loss_factor : ndarray (k,)  [-]
        Total loss factor: structural (weighted by the share of the mode's stiffness that is
        the panel's own, so a cavity's air stiffness dissipates nothing) + radiation into the
        open sides + porous flow.
    in_vacuo_hz : ndarray (k,)  [Hz]
        In-vacuo frequency of each mode's dominant basis mode.
    dominant : ndarray of int (k,)
        Index into ``basis`` of the largest modal coordinate.
    vectors : ndarray (n_basis, k)
        Real modal coordinates, normalised like the basis: Σ q_j² = 1 (so ψ = Σ q_j φ_j has unit
        mean square), the dominant coordinate positive. For a porous panel the complex
        vector is rotated to make its dominant coordinate real and its real part kept.
    participation : ndarray (k,)  [-]
        Uniform-pressure participation factor of ψ, ``(Σ q_j mean_j)² / Σ q_j²``.
    multiplicity : ndarray of int (k,)
        Of the dominant basis mode (2 for a cos/sin pair on a disc).
    labels : tuple of str (k,)
        Label of the dominant basis mode.
    basis : ModalBasis
        The in-vacuo basis (``vectors`` are its coordinates).
    model : str
        The loading model that applied and its assumptions, in words.
    radiation_loss_factor : ndarray (k,)  [-]
        The radiation part of ``loss_factor`` (for reports).
    complete_to_hz : float  [Hz]
        No loaded mode at or below this frequency is missing from ``frequencies_hz``: fmax when
        the basis reached far enough (and ``max_modes`` did not cut the list), else lower.
        Modes above it may be listed, but the list is not complete there. A mode left out of
        the basis has an in-vacuo frequency above the basis's reach ``f_b`` and, its own air
        (and cavity) mass ratio μ being at most that of the basis's top modes, a loaded
        frequency of at least ``f_b/√(1 + 1.25 μ)`` (a 25 % margin on μ).
    """

    frequencies_hz: np.ndarray
    loss_factor: np.ndarray
    in_vacuo_hz: np.ndarray
    dominant: np.ndarray
    vectors: np.ndarray
    participation: np.ndarray
    multiplicity: np.ndarray
    labels: tuple[str, ...]
    basis: ModalBasis
    model: str
    radiation_loss_factor: np.ndarray
    complete_to_hz: float = math.inf

    def __len__(self) -> int:
        return len(self.frequencies_hz)


# ============================================================================================
# Recognising the basis: analytic rectangle, analytic disc, or point quadrature
# ============================================================================================

@dataclass(frozen=True, eq=False)
class _Points:
    region: object
    points: np.ndarray      # (P, 2) cell centroids  [m]
    weights: np.ndarray     # (P,) cell areas  [m²]
    corners: np.ndarray     # (P, 3, 2) cell vertices, counter-clockwise  [m]
    values: np.ndarray      # (P, n) basis shapes at the centroids
    cell_size: float        # [m]

    @property
    def area(self) -> float:
        return float(self.weights.sum())

    def blocks(self) -> list[np.ndarray]:
        return [np.arange(self.values.shape[1])]


def _recognise(basis: ModalBasis, cache: SolveCache):
    """The quadrature family for a basis: its own analytic family (rectangle, disc), else
    a point family of its shapes, kept in ``cache`` by the shapes and region (bases that
    share their shapes, one outline at several tensions, share it and what is kept for it)."""
    if basis.family is not None:
        return basis.family
    return cache.families.get_for((basis.evaluate, basis.region), ("points", len(basis)),
                                  lambda: _point_family(basis))


# ============================================================================================
# Point quadrature for any region
# ============================================================================================

def _region_triangulation(region, spacing: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and triangles covering a region, with edges about ``spacing`` long."""
    if isinstance(region, PolygonRegion) and region.nodes is not None and region.triangles is not None:
        return np.asarray(region.nodes, float), np.asarray(region.triangles, int)
    if isinstance(region, RectangleRegion):
        nx = max(2, int(math.ceil(region.width / spacing)))
        ny = max(2, int(math.ceil(region.length / spacing)))
        x, y = np.meshgrid(np.linspace(0, region.width, nx + 1), np.linspace(0, region.length, ny + 1))
        nodes = np.column_stack([x.ravel(), y.ravel()])
        index = np.arange((nx + 1) * (ny + 1)).reshape(ny + 1, nx + 1)
        a, b = index[:-1, :-1].ravel(), index[:-1, 1:].ravel()
        c, d = index[1:, 1:].ravel(), index[1:, :-1].ravel()
        triangles = np.vstack([np.column_stack([a, b, c]), np.column_stack([a, c, d])])
        return nodes, triangles
    if isinstance(region, CircleRegion):
        a = region.radius
        rings = max(2, int(math.ceil(a / spacing)))
        nodes = [np.zeros((1, 2))]
        for i in range(1, rings + 1):
            count = 6 * i
            angle = np.arange(count) * 2 * np.pi / count + (0.5 * np.pi / count) * (i % 2)
            nodes.append(a * i / rings * np.column_stack([np.cos(angle), np.sin(angle)]))
        nodes = np.vstack(nodes)
        return nodes, Delaunay(nodes).simplices
    # A polygon without a mesh: boundary samples and an interior lattice, Delaunay, keep
    # the triangles whose centroid lies inside.
    rings = [np.asarray(region.outline, float)] + [np.asarray(h, float) for h in region.holes]
    boundary = []
    for ring in rings:
        for start, end in zip(ring, np.roll(ring, -1, axis=0)):
            pieces = max(1, int(math.ceil(np.hypot(*(end - start)) / spacing)))
            t = np.arange(pieces)[:, None] / pieces
            boundary.append(start + t * (end - start))
    x0, y0, x1, y1 = region.bounds()
    x, y = np.meshgrid(np.arange(x0 + spacing / 2, x1, spacing), np.arange(y0 + spacing / 2, y1, spacing))
    lattice = np.column_stack([x.ravel(), y.ravel()])
    lattice = lattice[region.contains(lattice)]
    nodes = np.vstack(boundary + [lattice])
    triangles = Delaunay(nodes).simplices
    centroids = nodes[triangles].mean(axis=1)
    return nodes, triangles[region.contains(centroids)]


def _subdivide(nodes: np.ndarray, triangles: np.ndarray, parts: int) -> np.ndarray:
    """Corners (T·parts², 3, 2) of each triangle cut into parts² similar triangles."""
    corners = nodes[triangles]                      # (T, 3, 2)
    p0, e1, e2 = corners[:, 0], corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0]
    pieces = []
    for i in range(parts):
        for j in range(parts - i):
            up = np.array([[i, j], [i + 1, j], [i, j + 1]], float) / parts
            pieces.append(up)
            if i + j < parts - 1:
                pieces.append(np.array([[i + 1, j], [i + 1, j + 1], [i, j + 1]], float) / parts)
    local = np.array(pieces)                        # (S, 3, 2) barycentric (s, t)
    return (p0[:, None, None, :] + local[None, :, :, 0:1] * e1[:, None, None, :]
            + local[None, :, :, 1:2] * e2[:, None, None, :]).reshape(-1, 3, 2)


def _point_family(basis: ModalBasis, cells_target: int | None = None) -> _Points:
    region = basis.region
    area = float(region.area) if getattr(region, "area", 0.0) else None
    if not area:
        x0, y0, x1, y1 = region.bounds()
        area = (x1 - x0) * (y1 - y0)
    n = max(len(basis), 1)
    # Weyl: n modes reach a wavenumber k ≈ √(4π n / A); about 7 cells per half-wavelength.
    wavenumber = math.sqrt(4 * math.pi * n / area)
    spacing = min(math.pi / wavenumber / 7.0, math.sqrt(area) / 40.0)
    if cells_target is not None:
        spacing = math.sqrt(2.0 * area / cells_target)
    spacing = max(spacing, math.sqrt(2.0 * area / 6000.0))   # at most about 6000 cells
    nodes, triangles = _region_triangulation(region, spacing)
    parts = 1
    if isinstance(region, PolygonRegion) and region.triangles is not None:
        # Subdivide the finite-element mesh to the spacing, within the cell budget.
        edge = float(np.mean(np.linalg.norm(nodes[triangles] - np.roll(nodes[triangles], 1, axis=1), axis=2)))
        parts = max(1, int(round(edge / spacing)))
        parts = max(1, min(parts, int(math.sqrt(6000.0 / max(len(triangles), 1)))))
    corners = _subdivide(nodes, triangles, parts)
    e1, e2 = corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0]
    signed = 0.5 * (e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])
    flip = signed < 0
    corners[flip] = corners[flip][:, [0, 2, 1]]
    weights = np.abs(signed)
    keep = weights > 1e-14 * area
    corners, weights = corners[keep], weights[keep]
    points = corners.mean(axis=1)
    values = np.asarray(basis.evaluate(points), float).reshape(len(points), len(basis))
    return _Points(region, points, weights, corners, values, float(np.sqrt(2.0 * weights.mean())))


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


def _points_added_mass_normalised(family: _Points) -> np.ndarray:
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


def _rectangle_self_table(aspect: float, m_count: int, n_count: int) -> np.ndarray:
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


#: The u integral of :func:`_rectangle_self_table`: step in ln u, lowest ln u, and how far
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

    moments = {}
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


def _rounded_up(count: int) -> int:
    return int(8 * math.ceil(count / 8))


def _rectangle_added_mass(family: RectangleShapes, cache: SolveCache) -> np.ndarray:
    """∬∬ φp φq / R dA dA' / (2π) for the rectangle basis  [m³].

    The normalised table depends on the aspect ratio (12 significant digits) and on its size
    (half-wave numbers rounded up to multiples of 8, which also sets its Gauss order): both
    are the key in ``cache``, so every tension of one outline whose basis needs the same
    table size shares it, and a table never depends on which panels came before.
    """
    aspect = float(f"{family.length / family.width:.12g}")
    m_count, n_count = _rounded_up(int(family.m.max())), _rounded_up(int(family.n.max()))
    table = cache.rectangle_tables.get((aspect, m_count, n_count),
                                       lambda: _rectangle_table(aspect, m_count, n_count))
    i, j = family.m - 1, family.n - 1
    block = table[i[:, None], j[:, None], i[None, :], j[None, :]]
    return family.width**3 * block


# ============================================================================================
# Disc: Hankel transforms of Bessel shapes (closed form)
# ============================================================================================

def _bessel_transform(order: int, zeros: np.ndarray, x: np.ndarray) -> np.ndarray:
    """h(x) = ∫₀¹ J_m(j r) J_m(x r) r dr at a zero j of J_m: ``j J_{m+1}(j) J_m(x)/(j² − x²)``.

    Shape (len(zeros), len(x)); the removable singularity at x = j is taken in the limit
    ``J_{m+1}(j)²/2``.
    """
    j = zeros[:, None]
    next_order = special.jv(order + 1.0, zeros)[:, None]
    denominator = j * j - x[None, :] ** 2
    near = np.abs(denominator) < 1e-9 * j * j
    safe = np.where(near, 1.0, denominator)
    value = j * next_order * special.jv(order, x)[None, :] / safe
    return np.where(near, 0.5 * next_order**2, value)


def _angular_weight(order) -> np.ndarray:
    """∫₀^{2π} cos²(mθ) dθ: 2π for m = 0, π otherwise."""
    return np.where(np.asarray(order) == 0, 2.0 * np.pi, np.pi)


@lru_cache(maxsize=16)
def _hankel_rule(x_max: float, per_panel: int = 10,
                 width: float = 0.5 * np.pi) -> tuple[np.ndarray, np.ndarray]:
    """Gauss–Legendre nodes and weights on [0, x_max] (rounded up to whole panels of
    ``width``), ``per_panel`` nodes a panel (cached, a pure function of its arguments)."""
    nodes, weights = np.polynomial.legendre.leggauss(per_panel)
    panels = int(math.ceil(x_max / width))
    edges = np.linspace(0.0, panels * width, panels + 1)
    half = 0.5 * (edges[1:] - edges[:-1])
    x = ((edges[:-1] + half)[:, None] + half[:, None] * nodes[None, :]).ravel()
    w = (half[:, None] * weights[None, :]).ravel()
    return x, w


@lru_cache(maxsize=512)
def _bessel_zeros(order: int, count: int) -> np.ndarray:
    """The first ``count`` positive zeros of J_m (cached)."""
    return special.jn_zeros(order, count)


@lru_cache(maxsize=256)
def _disc_order_table(order: int, count: int) -> np.ndarray:
    """∫₀^∞ h_p h_q dx for the first ``count`` zeros of J_m (unit radius, unscaled shapes)."""
    zeros = special.jn_zeros(order, count)
    x, w = _hankel_rule(240.0 + 2.0 * float(zeros[-1]))
    tail_start = x[-1] + (x[-1] - x[-2])
    h = _bessel_transform(order, zeros, x)
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
        table = _disc_order_table(m, _rounded_up(int(count.max()) + 1))
        scale = family.scale[block]
        result[np.ix_(block, block)] = (_angular_weight(m) * table[np.ix_(count, count)]
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


def _unit_added_mass(basis: ModalBasis, cache: SolveCache) -> np.ndarray:
    """Added mass per unit air density on one baffled side, ``M/ρ0``  [m³]."""
    family = _recognise(basis, cache)
    if isinstance(family, _Points):
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
    return _positive(air_density, "air density", "kg/m³") * _unit_added_mass(basis, cache)


# ============================================================================================
# Wavenumber domain: spectra, angular densities and product integration
# ============================================================================================

#: Radial spacing of the wavenumber grid, times the panel's size √A: fine up to _FINE_REACH,
#: coarse beyond; angular nodes per quadrant: _ANGLES_BASE + _ANGLES_PER_KL · κ_max √A.
_FINE_STEP, _FINE_REACH, _COARSE_STEP = 0.1, 8.0, 0.25
_ANGLES_BASE, _ANGLES_PER_KL = 8, 0.5
#: The grid reaches _GRID_REACH times the largest air wavenumber of interest (at least 12/√A).
_GRID_REACH = 4.0


def _radial_nodes(length: float, kappa_max: float) -> np.ndarray:
    """κ nodes, finer at low wavenumbers where the radiating part lies.  [rad/m]"""
    fine = np.arange(0.0, _FINE_REACH, _FINE_STEP) / length
    coarse = np.arange(_FINE_REACH, max(kappa_max * length, _FINE_REACH) + _COARSE_STEP,
                       _COARSE_STEP) / length
    return np.concatenate([fine, coarse])


def _quarter_angles(count: int) -> tuple[np.ndarray, np.ndarray]:
    """Trapezoid nodes and weights on [0, π/2] that integrate a function over [0, 2π] with the
    symmetry of a rectangle (even in κx and in κy): weights sum to 2π."""
    theta = np.linspace(0.0, 0.5 * np.pi, count)
    w = np.full(count, 0.5 * np.pi / (count - 1))
    w[[0, -1]] *= 0.5
    return theta, 4.0 * w


def _angle_count(length: float, kappa_max: float) -> int:
    return int(_ANGLES_BASE + _ANGLES_PER_KL * kappa_max * length)


def _sine_spectrum(index: np.ndarray, side: float, kappa: np.ndarray) -> np.ndarray:
    """Real part-spectrum T_m(κ) of sin(mπx/L) on [0, L], up to the common phase e^{iκL/2}.

    ``∫₀^L sin(mπx/L) e^{iκx} dx = e^{iκL/2} · T_m(κ) · (1 for odd m, −i for even m)``,
    ``T_m = 2a cos(κL/2)/(a² − κ²)`` (m odd), ``2a sin(κL/2)/(a² − κ²)`` (m even), a = mπ/L.
    Shape (len(index), len(kappa)).
    """
    a = (np.pi * index / side)[:, None]
    k = kappa[None, :]
    half = 0.5 * k * side
    odd = (index % 2 == 1)[:, None]
    numerator = np.where(odd, np.cos(half), np.sin(half))
    denominator = a * a - k * k
    near = np.abs(denominator) < 1e-9 * a * a
    limit = 0.5 * side * np.where(odd, np.sin(0.5 * a * side), -np.cos(0.5 * a * side))
    safe = np.where(near, 1.0, denominator)
    return np.where(near, limit, 2.0 * a * numerator / safe)


class _SpectralGrid:
    """The basis spectra on a polar wavenumber grid, ready to give angular densities.

    ``density(c)`` returns g(κ) = ∫₀^{2π} Φψ(κ, θ) Φψ(−κ, θ) dθ [m⁴] on the radial nodes for
    each column ψ = Σ_j c_j φ_j of ``c`` (n, k) (real or complex; the unconjugated product, so
    that for a real ψ it is ∫|Φψ|² dθ). Every column must lie in one symmetry block of the
    basis, as every loaded mode does.
    """

    def __init__(self, family, kappa: np.ndarray, active: np.ndarray | None = None,
                 cache: SolveCache | None = None):
        self.family = family
        self.kappa = kappa
        self.blocks = family.blocks()
        if active is not None and not isinstance(family, _Points):
            # Only the basis modes that take part (coefficients below the threshold dropped).
            self.blocks = [b[active[b]] for b in self.blocks]
            self.blocks = [b for b in self.blocks if len(b)]
        length = math.sqrt(family.area)
        if isinstance(family, RectangleShapes):
            theta, self.w_theta = _quarter_angles(_angle_count(length, float(kappa[-1])))
            kx = np.outer(np.cos(theta), kappa).ravel()
            ky = np.outer(np.sin(theta), kappa).ravel()
            tx = _sine_spectrum(np.arange(1, family.m.max() + 1), family.width, kx)
            ty = _sine_spectrum(np.arange(1, family.n.max() + 1), family.length, ky)
            tx, ty = tx.astype(np.float32), ty.astype(np.float32)
            self.shapes = [tx[family.m[b] - 1] * ty[family.n[b] - 1] * np.float32(2.0)
                           for b in self.blocks]
        elif isinstance(family, DiscShapes):
            a = family.radius
            self.shapes = []
            for b in self.blocks:
                m = int(family.order[b[0]])
                h = _bessel_transform(m, family.zero[b], kappa * a) * family.scale[b, None]
                self.shapes.append(h * math.sqrt((2 * np.pi) ** 2 * a**4 * _angular_weight(m)))
        else:
            count = 2 * _angle_count(length, float(kappa[-1]))
            self.w_theta = np.full(count, 2.0 * np.pi / count)
            store = SolveCache() if cache is None else cache
            # The spectra of the basis shapes themselves (not of the loaded modes), so every
            # tension of one outline (same shapes) reuses them.
            self.cosines, self.sines = store.spectra.get_for(
                (family,), (kappa.tobytes(), count), lambda: _point_spectra(family, kappa, count))

    def density(self, coefficients: np.ndarray) -> np.ndarray:
        coefficients = np.asarray(coefficients)
        family, kappa = self.family, self.kappa
        result = np.zeros((coefficients.shape[1], len(kappa)),
                          dtype=np.result_type(coefficients.dtype, float))
        if isinstance(family, (RectangleShapes, DiscShapes)):
            for block, shapes in zip(self.blocks, self.shapes):
                used = np.flatnonzero(np.any(coefficients[block] != 0, axis=0))
                if len(used) == 0:
                    continue
                spectrum = coefficients[np.ix_(block, used)].T.astype(
                    np.complex64 if np.iscomplexobj(coefficients) else shapes.dtype) @ shapes
                if isinstance(family, RectangleShapes):
                    density = (spectrum * spectrum).reshape(len(used), len(self.w_theta), len(kappa))
                    result[used] += np.tensordot(density, self.w_theta, axes=([1], [0]))
                else:
                    result[used] += spectrum * spectrum
            return result
        # Point quadrature: Φψ(κ) = C − iS with C = Σ_j c_j C_j, S = Σ_j c_j S_j (the basis
        # spectra); Φψ(κ)Φψ(−κ) = C² + S².
        shape = (coefficients.shape[1], len(self.w_theta), len(kappa))
        real = (coefficients.T @ self.cosines).reshape(shape)
        imag = (coefficients.T @ self.sines).reshape(shape)
        return np.einsum("kdr,d->kr", real * real + imag * imag, self.w_theta)


def _point_spectra(family: _Points, kappa: np.ndarray, count: int):
    """Cosine and sine transforms of the basis shapes on a polar grid of ``count`` directions
    over [0, π) and the radial nodes ``kappa``: ``C_j(κ, θ) = Σ_P w φ_j cos(κ x·e_θ)`` and the
    same with sin, each (n, count·len(kappa)) (direction-major).

    The phases ``e^{iκ x·e_θ}`` are stepped from node to node along κ (one rotation
    ``e^{iΔκ x·e_θ}`` per step, restarted exactly at the start of each evenly spaced stretch
    of the nodes) rather than evaluated one by one: rounding grows by about one unit in the
    last place a step.
    """
    theta = np.arange(count) * np.pi / count
    projection = np.column_stack([np.cos(theta), np.sin(theta)]) @ family.points.T  # (D, P)
    weighted = family.values * family.weights[:, None]                             # (P, n)
    n = weighted.shape[1]
    cosines = np.empty((n, count, len(kappa)))
    sines = np.empty((n, count, len(kappa)))
    steps = np.diff(kappa)
    j = 0
    while j < len(kappa):
        # an evenly spaced stretch j .. stop−1 (to within rounding of the nodes)
        stop = j + 1
        if j + 1 < len(kappa):
            step = steps[j]
            while stop < len(kappa) and abs(steps[stop - 1] - step) <= 1e-9 * step:
                stop += 1
        else:
            step = 0.0
        phase = np.exp(1j * kappa[j] * projection)
        turn = np.exp(1j * step * projection)
        for node in range(j, stop):
            if node > j:
                phase *= turn
            cosines[:, :, node] = (np.ascontiguousarray(phase.real) @ weighted).T
            sines[:, :, node] = (np.ascontiguousarray(phase.imag) @ weighted).T
        j = stop
    return cosines.reshape(n, -1), sines.reshape(n, -1)


def _spectral_density(family, coefficients: np.ndarray, kappa: np.ndarray,
                      cache: SolveCache | None = None) -> np.ndarray:
    """g(κ) for each column of ``coefficients`` (see :class:`_SpectralGrid`)."""
    return _SpectralGrid(family, kappa, cache=cache).density(coefficients)


def _product_integrals(kappa: np.ndarray, g: np.ndarray, k: np.ndarray):
    """Exact integrals of the piecewise-linear g(κ) against the radiation weights.

    Returns, for each row of g (one mode) and its wavenumber k (k0 of that mode):
    ``resistive = ∫₀^k g κ/√(k² − κ²) dκ``, ``subsonic = ∫_k^{κmax} g (κ/√(κ² − k²) − 1) dκ``,
    ``supersonic = ∫₀^k g dκ`` and ``total = ∫₀^{κmax} g dκ``.
    """
    k = np.maximum(np.asarray(k, float), 1e-12)[:, None]
    lo, hi = kappa[None, :-1], kappa[None, 1:]
    slope = (g[:, 1:] - g[:, :-1]) / (hi - lo)
    offset = g[:, :-1] - slope * lo
    total = np.sum(0.5 * (g[:, 1:] + g[:, :-1]) * (hi - lo), axis=1)
    k2 = k * k
    # Below k: intervals clipped to [lo, min(hi, k)] (only the first few intervals matter).
    reach = int(np.searchsorted(kappa, float(k.max()), side="right"))
    lo, hi = lo[:, :reach], hi[:, :reach]
    offset_all, slope_all = offset, slope
    offset, slope = offset[:, :reach], slope[:, :reach]
    a, b = lo, np.minimum(hi, k)
    below = b > a
    b = np.where(below, b, a)
    root_a = np.sqrt(np.maximum(k2 - a * a, 0.0))
    root_b = np.sqrt(np.maximum(k2 - b * b, 0.0))
    w0 = root_a - root_b                                         # ∫ κ/√(k²−κ²)
    w1 = 0.5 * (k2 * (np.arcsin(np.minimum(b / k, 1.0)) - np.arcsin(np.minimum(a / k, 1.0)))
                - b * root_b + a * root_a)                         # ∫ κ²/√(k²−κ²)
    resistive = np.sum(np.where(below, offset * w0 + slope * w1, 0.0), axis=1)
    supersonic = np.sum(np.where(below, offset * (b - a) + 0.5 * slope * (b * b - a * a), 0.0), axis=1)
    # Above k: intervals clipped to [max(lo, k), hi].
    lo, hi = kappa[None, :-1], kappa[None, 1:]
    offset, slope = offset_all, slope_all
    a, b = np.maximum(lo, k), hi
    above = b > a
    a = np.where(above, a, b)
    root_a = np.sqrt(np.maximum(a * a - k2, 0.0))
    root_b = np.sqrt(np.maximum(b * b - k2, 0.0))
    # ∫ (κ/√(κ²−k²) − 1) = [−k²/(√ + κ)],  ∫ κ(κ/√(κ²−k²) − 1) = [−κk²/(2(√ + κ)) + (k²/2) ln(κ + √)]
    w0 = k2 / (root_a + a) - k2 / (root_b + b)
    w1 = 0.5 * (a * k2 / (root_a + a) - b * k2 / (root_b + b)) + 0.5 * k2 * np.log((b + root_b) / (a + root_a))
    subsonic = np.sum(np.where(above, offset * w0 + slope * w1, 0.0), axis=1)
    return resistive, subsonic, supersonic, total


@dataclass(frozen=True, eq=False)
class _Compressible:
    """Per-mode compressible terms on one baffled side (quadratic forms)."""

    mass_change: np.ndarray     # ΔM_ψ  [kg]
    resistance: np.ndarray      # R_ψ  [kg/s]


def _compressible_terms(kappa, g, incompressible, wavenumber, air_density, speed_of_sound):
    """ΔM and R of each mode from its angular density g on the nodes ``kappa``.

    The part of the added mass carried by wavenumbers beyond the last node (the exact
    incompressible value less the integral of g up to it) is given the subsonic factor of the
    last node, an upper bound on its small compressible change.
    """
    resistive, subsonic, supersonic, total = _product_integrals(kappa, g, wavenumber)
    scale = air_density / (4.0 * np.pi**2)
    kappa_max = kappa[-1]
    beyond = incompressible - scale * total
    factor = kappa_max / np.sqrt(kappa_max**2 - wavenumber**2) - 1.0
    mass_change = scale * (subsonic - supersonic) + beyond * factor
    omega = wavenumber * speed_of_sound
    resistance = omega * scale * resistive
    return _Compressible(mass_change, resistance)


def baffled_air_impedance(basis: ModalBasis, frequency_hz: float, *,
                          air_density: float = AIR_DENSITY,
                          speed_of_sound: float = SPEED_OF_SOUND,
                          cache: SolveCache | None = None) -> AirImpedance:
    """Full modal impedance matrices of the air on one baffled side at one frequency.

    The modal force on the panel per unit modal velocity is ``iω M(ω) + R(ω)`` with

    - ``M_pq = ρ0/(2π) ∬∬ φp φq cos(k0R)/R dA dA'``  (incompressible part + correction),
    - ``R_pq = ωρ0/(2π) ∬∬ φp φq sin(k0R)/R dA dA'``  (radiation resistance),

    ``k0 = ω/c``. For testing and inspection (the loaded-mode solver uses the same integrals
    as per-mode quadratic forms).

    Parameters
    ----------
    basis : ModalBasis
    frequency_hz : float  [Hz]
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]

    Returns
    -------
    AirImpedance

    References
    ----------
    Kinsler et al., *Fundamentals of Acoustics*, 4th ed., §7.4–7.5; Fahy & Gardonio, *Sound
    and Structural Vibration*, 2nd ed. (wavenumber-domain radiation).
    """
    rho = _positive(air_density, "air density", "kg/m³")
    c = _positive(speed_of_sound, "speed of sound", "m/s")
    f = _non_negative(frequency_hz, "frequency", "Hz")
    cache = SolveCache() if cache is None else cache
    family = _recognise(basis, cache)
    mass0 = rho * _unit_added_mass(basis, cache)
    n = len(basis)
    k = 2.0 * np.pi * f / c
    if k == 0.0 or n == 0:
        return AirImpedance(mass0, np.zeros((n, n)), f)
    length = math.sqrt(family.area)
    kappa = _radial_nodes(length, max(4.0 * k, 12.0 / length))
    # Polarisation: the cross terms from the densities of φp + φq and φp − φq.
    pairs = [(p, q) for p in range(n) for q in range(p + 1, n) if _same_block(family, p, q)]
    columns = np.zeros((n, n + 2 * len(pairs)))
    columns[:, :n] = np.eye(n)
    incompressible = list(np.diag(mass0))
    for index, (p, q) in enumerate(pairs):
        plus, minus = n + 2 * index, n + 2 * index + 1
        columns[[p, q], plus] = 1.0
        columns[p, minus], columns[q, minus] = 1.0, -1.0
        incompressible += [mass0[p, p] + mass0[q, q] + 2 * mass0[p, q],
                           mass0[p, p] + mass0[q, q] - 2 * mass0[p, q]]
    with np.errstate(all="ignore"):
        terms = _compressible_terms(kappa, _spectral_density(family, columns, kappa, cache),
                                    np.array(incompressible), np.full(columns.shape[1], k), rho, c)
    mass = mass0.copy()
    resistance = np.zeros((n, n))
    mass[np.diag_indices(n)] += terms.mass_change[:n]
    resistance[np.diag_indices(n)] = terms.resistance[:n]
    for index, (p, q) in enumerate(pairs):
        plus, minus = n + 2 * index, n + 2 * index + 1
        mass[p, q] = mass[q, p] = mass0[p, q] + 0.25 * (terms.mass_change[plus] - terms.mass_change[minus])
        resistance[p, q] = resistance[q, p] = 0.25 * (terms.resistance[plus] - terms.resistance[minus])
    return AirImpedance(mass, resistance, f)


def _same_block(family, p: int, q: int) -> bool:
    if isinstance(family, RectangleShapes):
        return bool(family.m[p] % 2 == family.m[q] % 2 and family.n[p] % 2 == family.n[q] % 2)
    if isinstance(family, DiscShapes):
        return bool(family.order[p] == family.order[q])
    return True


# ============================================================================================
# Sealed cavity (Dowell's acoustoelastic coupling)
# ============================================================================================

@dataclass(frozen=True, eq=False)
class _Cavity:
    """Cross-section modes of a rigid-walled cavity and their coupling with the basis."""

    wavenumbers: np.ndarray   # k_j  [rad/m]
    coupling: np.ndarray      # (n, J)  ∫ φp N_j dA / √(∫ N_j² dA)  [m]
    depth: float              # [m]


def _rectangle_cavity(family: RectangleShapes, depth: float) -> _Cavity:
    lx, ly = family.width, family.length
    p = np.arange(0, family.m.max() + 12)
    q = np.arange(0, family.n.max() + 12)

    def sine_cosine(m, p, side):
        diff = m[:, None] ** 2 - p[None, :] ** 2
        odd = (m[:, None] + p[None, :]) % 2 == 1
        safe = np.where(diff == 0, 1, diff)
        return np.where(odd, side * 2.0 * m[:, None] / (np.pi * safe), 0.0)

    ix = sine_cosine(family.m, p, lx)          # (n, P)
    iy = sine_cosine(family.n, q, ly)          # (n, Q)
    norm_x = np.where(p == 0, lx, 0.5 * lx)
    norm_y = np.where(q == 0, ly, 0.5 * ly)
    coupling = (2.0 * ix[:, :, None] * iy[:, None, :]
                / np.sqrt(np.outer(norm_x, norm_y))[None, :, :]).reshape(len(family.m), -1)
    wavenumbers = np.hypot.outer(np.pi * p / lx, np.pi * q / ly).ravel()
    used = np.any(coupling != 0, axis=0)
    return _Cavity(wavenumbers[used], coupling[:, used], depth)


def _disc_cavity(family: DiscShapes, depth: float) -> _Cavity:
    a = family.radius
    columns, wavenumbers = [], []
    n = len(family.order)
    for block in family.blocks():
        m = int(family.order[block[0]])
        count = int(np.sum(family.order == m)) + 12
        beta = special.jnp_zeros(m, count) if m > 0 else np.concatenate([[0.0], special.jnp_zeros(0, count)])
        radial = []
        j = family.zero[block][:, None]
        jm1 = special.jv(m + 1.0, family.zero[block])[:, None]
        b = beta[None, :]
        radial = j * jm1 * special.jv(m, b) / (j * j - b * b)          # ∫₀¹ J_m(jr) J_m(βr) r dr
        norm = np.where(beta == 0, 0.5, 0.5 * (1.0 - m * m / np.where(beta == 0, 1.0, beta**2))
                        * special.jv(m, beta) ** 2)
        eps = float(_angular_weight(m))
        column = np.zeros((n, len(beta)))
        column[block] = (family.scale[block, None] * eps * a * a * radial
                         / np.sqrt(eps * a * a * norm)[None, :])
        columns.append(column)
        wavenumbers.append(beta / a)
    return _Cavity(np.concatenate(wavenumbers), np.hstack(columns), depth)


def _points_cavity(family: _Points, depth: float, cache: SolveCache) -> _Cavity:
    region = family.region
    n = family.values.shape[1]
    count = min(400, max(40, 2 * n + 20))
    x, w = family.points, family.weights
    if isinstance(region, RectangleRegion):
        side = int(math.ceil(math.sqrt(count))) + 2
        p, q = np.meshgrid(np.arange(side), np.arange(side), indexing="ij")
        p, q = p.ravel(), q.ravel()
        shapes = np.cos(np.outer(x[:, 0], p * np.pi / region.width)) * np.cos(
            np.outer(x[:, 1], q * np.pi / region.length))
        wavenumbers = np.hypot(p * np.pi / region.width, q * np.pi / region.length)
    elif isinstance(region, CircleRegion):
        a = region.radius
        r, theta = np.hypot(x[:, 0], x[:, 1]) / a, np.arctan2(x[:, 1], x[:, 0])
        shapes, wavenumbers = [], []
        for m in range(0, 12):
            beta = special.jnp_zeros(m, 8) if m > 0 else np.concatenate([[0.0], special.jnp_zeros(0, 8)])
            radial = special.jv(m, np.outer(r, beta))
            for angular in ((np.cos,) if m == 0 else (np.cos, np.sin)):
                shapes.append(radial * angular(m * theta)[:, None])
                wavenumbers.append(beta / a)
        shapes, wavenumbers = np.hstack(shapes), np.concatenate(wavenumbers)
    else:
        from auditor.physics import fem  # the finite-element path owns polygon cavities

        # The coarse mesh, as for the panel's own basis of many modes (the cavity's
        # frequencies change the panel's by about 2e-4 on the gable-end demo panel).
        wavenumbers, evaluate = fem.neumann_modes(region, count, accuracy="coarse",
                                                  cache=cache)
        shapes = np.asarray(evaluate(x), float).reshape(len(x), -1)
    norm = np.sqrt(np.maximum((shapes**2 * w[:, None]).sum(axis=0), 1e-300))
    coupling = (family.values * w[:, None]).T @ shapes / norm[None, :]
    return _Cavity(np.asarray(wavenumbers, float), coupling, depth)


def _cavity_for(family, depth: float, cache: SolveCache) -> _Cavity:
    if isinstance(family, RectangleShapes):
        return _rectangle_cavity(family, depth)
    if isinstance(family, DiscShapes):
        return _disc_cavity(family, depth)
    return _points_cavity(family, depth, cache)


def _cavity_split(cavity: _Cavity, wavenumber: float, air_density: float, speed_of_sound: float):
    """Per cavity mode: stiffness s_j [N/m per m²·…] and mass μ_j with −ω²ρ0G_j = s_j − ω²μ_j.

    ``G_j = coth(κ_j d)/κ_j`` for κ_j² = k_j² − k0² > 0 (mass-like), ``−cot(κ'd)/κ'`` with
    κ'² = k0² − k_j² otherwise; a negative G is a stiffness (the uniform mode at low frequency:
    ``ρ0c²/d``).
    """
    stiffness, mass = _cavity_splits(cavity, np.array([float(wavenumber)]), air_density,
                                     speed_of_sound)
    return stiffness[0], mass[0]


def _cavity_splits(cavity: _Cavity, wavenumbers: np.ndarray, air_density: float,
                   speed_of_sound: float) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_cavity_split` at several air wavenumbers k0 (F,): stiffness and mass (F, J)."""
    d = cavity.depth
    k0 = np.asarray(wavenumbers, float)[:, None]
    kj = cavity.wavenumbers[None, :]
    kappa2 = kj**2 - k0 * k0
    stiffness = np.zeros_like(kappa2)
    mass = np.zeros_like(kappa2)
    above = kappa2 > 1e-12 * np.maximum(k0 * k0, 1.0 / d**2)
    kappa = np.sqrt(np.where(above, kappa2, 1.0))
    x = kappa * d
    with np.errstate(over="ignore"):
        g_above = d / (x * np.tanh(x))
    mass[above] = air_density * g_above[above]
    below = ~above
    kp = np.sqrt(np.maximum(-kappa2, 0.0))
    xp = kp * d
    # −ω²ρ0G = ρ0 ω² cot(κ'd)/κ' = ρ0 c² (k0² d/x'²) · x' cot x' /d ... written stably:
    small = xp < 1e-6
    x_cot = np.where(small, 1.0 - xp**2 / 3.0, xp / np.tan(np.where(small, 1.0, xp)))
    # ω² cot(x')/κ' = c² k0² · d · x'cot x' / x'²  (for k_j = 0: k0 = κ', giving c² x'cot x'/d)
    ratio = np.where(small, 1.0, k0 * k0 / np.where(kp > 0, kp * kp, 1.0))
    ratio = np.where((kj == 0) | small, 1.0, ratio)
    s = air_density * speed_of_sound**2 * ratio * x_cot / d
    positive = s >= 0
    stiffness[below & positive] = s[below & positive]
    # a negative stiffness is a positive mass: μ = −s/ω² (never at ω = 0)
    omega2 = np.broadcast_to((k0 * speed_of_sound) ** 2, kappa2.shape)
    negative = below & ~positive & (omega2 > 0)
    mass[negative] = -s[negative] / omega2[negative]
    return stiffness, mass


def cavity_dynamic_mass(basis: ModalBasis, depth: float, frequency_hz: float, *,
                        air_density: float = AIR_DENSITY,
                        speed_of_sound: float = SPEED_OF_SOUND,
                        cache: SolveCache | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Stiffness and mass the air in a sealed rigid-walled cavity adds, in the modal basis.

    The cavity has the panel's outline as its cross-section and depth d. With its
    cross-section modes N_j (rigid walls, wavenumber k_j) the modal pressure per unit modal
    displacement is ``ρ0 ω² coth(κ_j d)/κ_j``, κ_j² = k_j² − k0², so the cavity adds the
    dynamic mass ``D(ω) = ρ0 Σ_j G_j (∫φp N_j)(∫φq N_j)/∫N_j²``. Terms with G_j < 0 (the
    uniform mode below the first depth resonance: ``−ω²ρ0G₀ → ρ0c²/d``) are returned as
    stiffness, the others as mass, so both matrices are positive semidefinite.

    Parameters
    ----------
    basis : ModalBasis
    depth : float  [m]
    frequency_hz : float  [Hz]
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]

    Returns
    -------
    stiffness : ndarray (n, n)  [N/m]
        At low frequency ``ρ0c² (∫φp)(∫φq)/V`` with V = A·d.
    mass : ndarray (n, n)  [kg]

    References
    ----------
    Dowell, Gorman & Smith, J. Sound Vib. 52 (1977); Dowell, *Aeroelasticity of Plates and
    Shells*, 1975; cavity modes: Morse & Ingard, *Theoretical Acoustics*, 1968, ch. 9.
    """
    d = _positive(depth, "cavity depth", "m")
    rho = _positive(air_density, "air density", "kg/m³")
    c = _positive(speed_of_sound, "speed of sound", "m/s")
    f = _non_negative(frequency_hz, "frequency", "Hz")
    cache = SolveCache() if cache is None else cache
    cavity = _cavity_for(_recognise(basis, cache), d, cache)
    s, mu = _cavity_split(cavity, 2 * np.pi * f / c, rho, c)
    L = cavity.coupling
    return (L * s) @ L.T, (L * mu) @ L.T


def mass_air_mass_frequency(areal_density: float, cavity_depth: float, *,
                            air_density: float = AIR_DENSITY,
                            speed_of_sound: float = SPEED_OF_SOUND) -> float:
    """Mass–air–mass (panel on a sealed cavity) resonance of a limp panel, piston motion.

    Parameters
    ----------
    areal_density : float  [kg/m²]
    cavity_depth : float  [m]
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]

    Returns
    -------
    frequency_hz : float  [Hz]
        ``f0 = (1/2π) √(ρ0c²/(m d))`` (≈ 60/√(m d) with 1.204 kg/m³ and 343 m/s).

    References
    ----------
    Common practice in building acoustics (the air in the cavity as a spring ρ0c²/d); e.g.
    Fahy & Gardonio, *Sound and Structural Vibration*, 2nd ed.
    """
    m = _positive(areal_density, "areal density", "kg/m²")
    d = _positive(cavity_depth, "cavity depth", "m")
    rho = _positive(air_density, "air density", "kg/m³")
    c = _positive(speed_of_sound, "speed of sound", "m/s")
    return math.sqrt(rho * c * c / (m * d)) / (2 * math.pi)


# ============================================================================================
# Choosing the basis
# ============================================================================================

def choose_basis_limit(probe: ModalBasis, fmax: float, max_modes: int, areal_density: float,
                       air_sides: int, *, air_density: float = AIR_DENSITY,
                       extent: float = 1.0, max_basis: int = 200) -> float:
    """The in-vacuo frequency up to which the basis must reach for the loaded modes to converge.

    The reported band ends at ``f_top``: fmax, or the in-vacuo frequency of the ``max_modes``-th
    mode when that is lower (loading only lowers frequencies of open-sided panels, so the
    ``max_modes``-th loaded mode lies below it). A mode loaded down to ``f_top`` has an in-vacuo
    frequency up to ``f_top √(1 + μ)``, μ the added-to-structural mass ratio of the fundamental
    (about ``ρ0 √A / (2 ρs)`` per air side); the basis reaches ``extent`` times that, capped so
    that it holds about ``max_basis`` modes (Weyl's law, count ∝ f²).

    Parameters
    ----------
    probe : ModalBasis
        The in-vacuo basis up to fmax (any extent; used for its count and area).
    fmax : float  [Hz]
    max_modes : int
    areal_density : float  [kg/m²]
    air_sides : int
        Number of air-loaded sides (0, 1 or 2; a sealed cavity counts as one).
    air_density : float  [kg/m³]
    extent : float
        Ratio of basis reach to the in-vacuo frequency of the highest reported mode.
    max_basis : int

    Returns
    -------
    f_limit : float  [Hz]
    """
    area = float(probe.region.area)
    mu = air_sides * air_density * math.sqrt(area) / (2.0 * areal_density)
    freqs = np.asarray(probe.frequencies_hz, float)
    top = fmax * math.sqrt(1.0 + mu)
    if len(freqs) >= max_modes > 0:
        top = min(top, float(freqs[max_modes - 1]))
    limit = extent * top
    if len(freqs) > 0 and freqs[-1] > 0:
        reach = float(freqs[-1])
        estimated = len(freqs) * (limit / reach) ** 2
        if estimated > max_basis:
            limit = reach * math.sqrt(max_basis / len(freqs))
    return limit


# ============================================================================================
# The loaded-mode solver
# ============================================================================================

def describe_loading(room_side: str, plenum_side: str, cavity_depth: float | None,
                     airflow_resistance: float | None, material: str) -> str:
    """The loading model :func:`loaded_modes` applies to a panel, in words."""
    open_mesh = material == "mesh" and airflow_resistance is None
    depth = cavity_depth if plenum_side == "sealed" else None
    return _describe(room_side, plenum_side, depth, airflow_resistance, material, open_mesh)


def _describe(room_side, plenum_side, depth, resistance, material, open_mesh):
    if open_mesh:
        return ("Open mesh with no airflow resistance given: air passes freely, so no air mass "
                "loading; structural loss factor only (in-vacuo frequencies).")
    parts = []
    sides = []
    if room_side == "air":
        sides.append("room side")
    if plenum_side == "air":
        sides.append("open plenum side")
    if sides:
        parts.append(
            "Air on the " + " and ".join(sides) + " as a baffled half-space (Rayleigh integral, "
            "full added-mass matrix in the in-vacuo modal basis, modes coupled through the air; "
            "compressible kernel: frequency correction and radiation resistance, per-mode "
            "fixed-point iteration on frequency; infinite rigid baffle assumed)")
    if plenum_side == "sealed":
        parts.append(
            f"sealed plenum {depth:g} m deep with rigid walls and the panel's outline as "
            "cross-section (Dowell's acoustoelastic modal coupling: cavity stiffness "
            "ρ0c²(∫φ)²/V at low frequency, cross modes mass-like; no absorption in the cavity)")
    if not parts:
        return "In vacuo: no air on either side; structural loss factor only."
    text = "; ".join(parts)
    if resistance is not None:
        text += (f"; porous sheet with airflow resistance {resistance:g} Pa·s/m in series with "
                 "the air's impedance (both sides together), complex modes")
    text += f". Loss factor = structural ({material} default unless given) + radiation"
    text += " + porous flow." if resistance is not None else "."
    return text


@dataclass
class _System:
    """Frequency-dependent modal matrices of one panel (internal)."""

    family: object
    stiffness: np.ndarray      # K_s  [N/m]
    mass: np.ndarray           # M_s + air sides (incompressible)  [kg]
    structural_mass: float     # ρs A  [kg]
    air_mass: np.ndarray       # air sides only, incompressible  [kg]
    air_sides: int
    cavity: _Cavity | None
    resistance: float | None   # r A  [kg/s]
    air_density: float
    speed_of_sound: float
    eta_structure: float
    # The cavity restricted to the rows of one block and the cavity modes they couple with,
    # by the block's indices (a symmetry block of a rectangle meets a quarter of them).
    _cavity_blocks: dict = field(default_factory=dict, repr=False)

    def _cavity_of(self, index) -> _Cavity:
        index = np.asarray(index)
        key = index.tobytes()
        sub = self._cavity_blocks.get(key)
        if sub is None:
            rows = self.cavity.coupling[index]
            coupled = np.any(rows != 0, axis=0)
            sub = self._cavity_blocks[key] = _Cavity(self.cavity.wavenumbers[coupled],
                                                     rows[:, coupled], self.cavity.depth)
        return sub

    #: Up to which frequency [Hz] the cavity's matrices are wanted often (the modes being
    #: followed): set by the solver; within it they come from :class:`_CavitySeries`.
    series_reach_hz: float = 0.0
    _series: dict = field(default_factory=dict, repr=False)

    def cavity_stack(self, frequencies_hz: np.ndarray, index):
        """:meth:`cavity_matrices` at several frequencies: stiffness and mass (F, n, n).

        Below ``series_reach_hz`` the mass of the cavity modes far above the air's
        wavenumber comes from its Chebyshev series in k0² (:class:`_CavitySeries`, within
        1e-11 of the direct sum), the others' terms directly.
        """
        count, n = len(frequencies_hz), len(index)
        if self.cavity is None:
            return np.zeros((count, n, n)), np.zeros((count, n, n))
        cavity = self._cavity_of(index)
        k0 = 2 * np.pi * np.asarray(frequencies_hz, float) / self.speed_of_sound
        top = 2 * np.pi * self.series_reach_hz / self.speed_of_sound
        if top > 0 and len(k0) and float(k0.max()) <= top:
            key = (np.asarray(index).tobytes(), top)
            series = self._series.get(key)
            if series is None:
                series = self._series[key] = _CavitySeries.of(
                    cavity, top, self.air_density, self.speed_of_sound)
            return series.matrices(k0, self.air_density, self.speed_of_sound)
        return _cavity_sums(cavity, k0, self.air_density, self.speed_of_sound)

    def cavity_matrices(self, frequency_hz: float, index):
        if self.cavity is None:
            n = len(index)
            return np.zeros((n, n)), np.zeros((n, n))
        cavity = self._cavity_of(index)
        k0 = 2 * np.pi * frequency_hz / self.speed_of_sound
        s, mu = _cavity_split(cavity, k0, self.air_density, self.speed_of_sound)
        L = cavity.coupling
        return (L * s) @ L.T, (L * mu) @ L.T


def _cavity_sums(cavity: _Cavity, k0: np.ndarray, air_density: float,
                 speed_of_sound: float) -> tuple[np.ndarray, np.ndarray]:
    """``Σ_j s_j(k0) L_j L_jᵀ`` and ``Σ_j μ_j(k0) L_j L_jᵀ`` at each air wavenumber (F, n, n)."""
    count, (n, modes) = len(k0), cavity.coupling.shape
    s, mu = _cavity_splits(cavity, k0, air_density, speed_of_sound)
    L = cavity.coupling
    stiffness = ((L[None] * s[:, None, :]).reshape(count * n, modes) @ L.T).reshape(count, n, n)
    mass = ((L[None] * mu[:, None, :]).reshape(count * n, modes) @ L.T).reshape(count, n, n)
    return stiffness, mass


@dataclass(frozen=True, eq=False)
class _CavitySeries:
    """A cavity's matrices for air wavenumbers k0 ≤ ``top``, fast.

    The cavity modes with k_j ≥ ``FAR``·top are mass-like throughout (κ_j² = k_j² − k0² > 0),
    and their mass ``ρ0 coth(κ_j d)/κ_j`` is analytic in k0² beyond [0, top²] (its nearest
    singularity at k0² = k_j²), so a Chebyshev series in k0² holds it to rounding; their
    summed matrix is then
    ``Σ_r T_r(t) P_r`` with the ``P_r`` made once. The modes below (the uniform mode and the
    lowest few) are summed directly at each k0.

    References
    ----------
    .. [1] L. N. Trefethen, *Approximation Theory and Approximation Practice*, SIAM, 2013,
       ch. 8 (convergence of Chebyshev interpolants of analytic functions, Bernstein
       ellipses).
    """

    near: _Cavity
    terms: np.ndarray        # (R + 1, n, n)
    top: float               # [rad/m]

    #: Modes from this multiple of ``top`` up are taken by their series: mapped to [−1, 1],
    #: the singularity at k0² ≥ 1.5625 top² lies on or beyond the Bernstein ellipse of
    #: parameter 4, so ``TERMS`` = 32 terms leave below 4⁻³² ≈ 1e-19 of the mass.
    FAR = 1.25
    TERMS = 32

    @classmethod
    def of(cls, cavity: _Cavity, top: float, air_density: float,
           speed_of_sound: float) -> _CavitySeries:
        far = cavity.wavenumbers >= cls.FAR * top
        near = _Cavity(cavity.wavenumbers[~far], cavity.coupling[:, ~far], cavity.depth)
        remote = _Cavity(cavity.wavenumbers[far], cavity.coupling[:, far], cavity.depth)
        count = cls.TERMS
        t = np.cos(np.pi * (np.arange(count) + 0.5) / count)             # Chebyshev nodes
        k0 = top * np.sqrt(0.5 * (t + 1.0))
        _, mass = _cavity_splits(remote, k0, air_density, speed_of_sound)   # (count, J)
        basis = np.cos(np.outer(np.arange(count), np.arccos(t)))          # T_r(t_i)
        coefficients = (2.0 / count) * basis @ mass                       # (count, J)
        coefficients[0] *= 0.5
        L = remote.coupling
        n = L.shape[0]
        terms = ((L[None] * coefficients[:, None, :]).reshape(count * n, -1) @ L.T
                 ).reshape(count, n, n)
        return cls(near, terms, float(top))

    def matrices(self, k0: np.ndarray, air_density: float,
                 speed_of_sound: float) -> tuple[np.ndarray, np.ndarray]:
        stiffness, mass = _cavity_sums(self.near, k0, air_density, speed_of_sound)
        t = 2.0 * (np.asarray(k0, float) / self.top) ** 2 - 1.0
        weights = np.cos(np.outer(np.arccos(np.clip(t, -1.0, 1.0)), np.arange(len(self.terms))))
        n = self.terms.shape[1]
        mass = mass + (weights @ self.terms.reshape(len(self.terms), n * n)).reshape(-1, n, n)
        return stiffness, mass


def _kappa_grid(family, top_wavenumber: float) -> np.ndarray:
    """The radial nodes for modes up to the air wavenumber ``top_wavenumber``: reaching
    ``_GRID_REACH`` times it (at least 12/√A); for point quadrature that reach is rounded up
    to 12/√A × 2^(j/2), so solves of one outline at nearby tensions share a grid (and the
    spectra of its shapes on it)."""
    length = math.sqrt(family.area)
    reach = max(_GRID_REACH * top_wavenumber, 12.0 / length)
    if isinstance(family, _Points):
        steps = math.ceil(2.0 * math.log2(reach * length / 12.0) - 1e-9)
        reach = 12.0 * 2.0 ** (max(steps, 0) / 2.0) / length
    return _radial_nodes(length, reach)


def _frequency_independent_solution(system: _System, blocks, cache: SolveCache,
                                    f_keep: float | None = None):
    """Eigenpairs of the panel with incompressible air and the cavity's low-frequency limit,
    block by block, ascending in eigenvalue (only those up to ``f_keep`` [Hz] when given)."""
    values, vectors = [], []
    n = system.stiffness.shape[0]
    for block, (w, v) in zip(blocks, _block_eigenpairs(system, blocks, cache)):
        if f_keep is not None:
            kept = w <= (2 * np.pi * f_keep) ** 2
            w, v = w[kept], v[:, kept]
        full = np.zeros((n, v.shape[1]))
        full[block] = v
        values.append(w)
        vectors.append(full)
    values = np.concatenate(values)
    vectors = np.hstack(vectors)
    order = np.argsort(values)
    return values[order], vectors[:, order]


#: Significant digits kept of the open-sided stiffness (relative to its first entry) before
#: the eigen-solve: the same panel at another tension (the remedy scan) then has the same
#: normalised problem, whose solution it reuses exactly (eigenvalues scaled, same vectors).
_STIFFNESS_DIGITS = 12


def _significant(values: np.ndarray, digits: int) -> np.ndarray:
    """Positive ``values`` rounded to ``digits`` significant decimal digits."""
    unit = 10.0 ** (np.floor(np.log10(values)) - (digits - 1))
    return np.round(values / unit) * unit


def _block_eigenpairs(system: _System, blocks, cache: SolveCache) -> list[tuple[np.ndarray, np.ndarray]]:
    """All eigenpairs (λ [rad²/s²], vectors) of ``K q = λ M q`` in each block.

    With open sides only, K is diagonal (the in-vacuo modal stiffness): the problem is solved
    as ``(K/K₀₀) q = (λ/K₀₀) M q`` with K/K₀₀ rounded to ``_STIFFNESS_DIGITS`` digits (a change
    of 1e-12 in λ at most), kept in ``cache`` by that normalised problem, so every tension of
    one panel shares the solve and a hit equals a fresh solve bit for bit.
    """
    diagonal = np.diag(system.stiffness)   # the in-vacuo modal stiffness is diagonal
    if system.cavity is None and len(diagonal) and np.all(diagonal > 0):
        first = float(diagonal[0])
        normalised = _significant(diagonal / first, _STIFFNESS_DIGITS)
        key = (normalised.tobytes(), system.mass.tobytes(),
               tuple(np.asarray(b).tobytes() for b in blocks))

        def solve():
            return [linalg.eigh(np.diag(normalised[block]), system.mass[np.ix_(block, block)],
                                driver="gvd", check_finite=False) for block in blocks]

        pairs = cache.eigenpairs.get(key, solve)
        return [(w * first, v) for w, v in pairs]
    pairs = []
    for block in blocks:
        k_b = system.stiffness[np.ix_(block, block)]
        m_b = system.mass[np.ix_(block, block)]
        if system.cavity is not None:
            ks, ms = system.cavity_matrices(0.0, block)
            k_b, m_b = k_b + ks, m_b + ms
        # The divide-and-conquer driver on the whole block is faster here than the subset
        # driver on part of it (blocks of tens of modes).
        pairs.append(linalg.eigh(k_b, m_b, driver="gvd", check_finite=False))
    return pairs


def _normalise(vectors: np.ndarray) -> np.ndarray:
    """Unit Euclidean norm, dominant coordinate real and positive (columns)."""
    norms = np.sqrt(np.sum(np.abs(vectors) ** 2, axis=0))
    vectors = vectors / np.where(norms > 0, norms, 1.0)
    if vectors.shape[1] == 0:
        return vectors
    dominant = np.argmax(np.abs(vectors), axis=0)
    phase = vectors[dominant, np.arange(vectors.shape[1])]
    phase = phase / np.where(np.abs(phase) > 0, np.abs(phase), 1.0)
    return vectors / phase


@dataclass(frozen=True, eq=False)
class _Followed:
    """One mode after following the frequency-dependent (incompressible) problem."""

    frequency: float
    vector: np.ndarray        # (n,) panel coordinates
    air_shape: np.ndarray     # (n,) coordinates of the air's velocity shape (= vector if impervious)
    numerator: complex        # xᵀ K x
    denominator: complex      # xᵀ M_total x  (structure + air + cavity, porous-modified)
    kinetic_mass: float       # xᴴ Re(M_total) x / xᴴx, for the radiation loss factor  [kg]


def _porous_operator(system: _System, block, frequency: float):
    """Stiffness, mass and damping of the panel and air coordinates z = (q, u) of a porous
    panel, the air's matrices (both sides and the cavity) taken at ``frequency`` [Hz].

    ``(K_s − ω² M_s) q + iω rA (q − u) = 0`` and ``(K_cav − ω² M_air) u − iω rA (q − u) = 0``:
    the air on both sides moves with u, the sheet's flow resistance r passes the relative
    velocity. Eliminating u gives the series impedance ``Z r/(Z + r)``.
    """
    size = len(block)
    panel, air_part = slice(0, size), slice(size, 2 * size)
    k_cav, m_cav = system.cavity_matrices(frequency, block)
    stiffness = np.zeros((2 * size, 2 * size), dtype=complex)
    stiffness[panel, panel] = system.stiffness[np.ix_(block, block)] * (1 + 1j * system.eta_structure)
    stiffness[air_part, air_part] = k_cav
    mass = np.zeros((2 * size, 2 * size))
    mass[panel, panel] = system.structural_mass * np.eye(size)
    mass[air_part, air_part] = system.air_mass[np.ix_(block, block)] + m_cav
    eye = system.resistance * np.eye(size)
    damping = np.block([[eye, -eye], [-eye, eye]])
    return stiffness, mass, damping


def _porous_roots(system: _System, block, frequency: float):
    """All roots ω of the porous panel's quadratic eigenproblem with the air's matrices at
    ``frequency`` (companion linearisation), and their vectors z = (q, u)."""
    stiffness, mass, damping = _porous_operator(system, block, frequency)
    size = stiffness.shape[0]
    half = size // 2
    # (s² M + s C + K) z = 0 with s = iω: [[0, I], [−M⁻¹K, −M⁻¹C]] w = s w. M is block
    # diagonal (the panel's ρs A I and the air's positive definite mass), so M⁻¹ costs two
    # small factorisations and the standard eigenproblem replaces the generalised one of
    # twice its size's pencil (about three times faster).
    inverse = np.zeros((size, size))
    inverse[:half, :half] = np.eye(half) / system.structural_mass
    inverse[half:, half:] = linalg.cho_solve(linalg.cho_factor(mass[half:, half:].real),
                                             np.eye(half))
    operator = np.zeros((2 * size, 2 * size), dtype=complex)
    operator[:size, size:] = np.eye(size)
    operator[size:, :size] = -inverse @ stiffness
    operator[size:, size:] = -inverse @ damping
    with np.errstate(all="ignore"):
        s, w = linalg.eig(operator, check_finite=False)
    finite = np.isfinite(s)
    return -1j * s[finite], w[:size, finite]


def _porous_operators(system: _System, block, frequencies: np.ndarray):
    """:func:`_porous_operator` at many frequencies [Hz]: stacked (k, 2n, 2n) stiffness and
    mass, and the (frequency-independent) damping."""
    size = len(block)
    count = len(frequencies)
    panel, air_part = slice(0, size), slice(size, 2 * size)
    stiffness = np.zeros((count, 2 * size, 2 * size), dtype=complex)
    stiffness[:, panel, panel] = (system.stiffness[np.ix_(block, block)]
                                  * (1 + 1j * system.eta_structure))
    mass = np.zeros((count, 2 * size, 2 * size))
    mass[:, panel, panel] = system.structural_mass * np.eye(size)
    mass[:, air_part, air_part] = system.air_mass[np.ix_(block, block)]
    if system.cavity is not None:
        springs, masses = system.cavity_stack(np.asarray(frequencies, float), block)
        stiffness[:, air_part, air_part] += springs
        mass[:, air_part, air_part] += masses
    eye = system.resistance * np.eye(size)
    damping = np.block([[eye, -eye], [-eye, eye]])
    return stiffness, mass, damping


def _refine_porous(system: _System, block, vectors: np.ndarray, roots: np.ndarray,
                   iterations: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """Follow roots as the cavity's matrices change with frequency: nonlinear inverse
    iteration z ← T(ω)⁻¹ T'(ω) z, ω the root of the scalar quadratic zᵀT(ω)z = 0 nearest
    the last (the Rayleigh functional). A root found at zero frequency is kept when its
    iteration does not settle within 25 % of it.

    All roots of one block at once (``vectors`` (2n, k), ``roots`` (k,)): each iteration
    builds the operators at every root's frequency and solves them as one stack.
    """
    z, omega = vectors.astype(complex), roots.astype(complex)
    start_z, start = z.copy(), omega.copy()
    active = np.arange(len(omega))
    for _ in range(iterations):
        if len(active) == 0:
            break
        w = omega[active]
        stiffness, mass, damping = _porous_operators(
            system, block, np.maximum(w.real, 0.0) / (2 * np.pi))
        operator = stiffness - (w**2)[:, None, None] * mass + 1j * w[:, None, None] * damping
        x = z[:, active].T                                            # (k, 2n)
        rhs = (-2.0 * w[:, None, None] * mass + 1j * damping) @ x[:, :, None]
        with np.errstate(all="ignore"), warnings.catch_warnings():
            # Near convergence the operators are singular by design (inverse iteration).
            warnings.simplefilter("ignore", linalg.LinAlgWarning)
            try:
                y = np.linalg.solve(operator, rhs)[:, :, 0]
            except np.linalg.LinAlgError:
                y = np.full(x.shape, np.nan, dtype=complex)
                for j in range(len(active)):
                    try:
                        y[j] = linalg.solve(operator[j], rhs[j, :, 0], check_finite=False)
                    except (linalg.LinAlgError, ValueError):
                        pass
        norm = np.linalg.norm(y, axis=1)
        moving = np.all(np.isfinite(y), axis=1) & (norm > 0)
        y = y[moving] / norm[moving, None]
        # the quadratic −(zᵀMz) ω² + i(zᵀCz) ω + zᵀKz = 0, the root nearest the last
        a = -np.sum(y * (mass[moving] @ y[:, :, None])[:, :, 0], axis=1)
        b = 1j * np.sum(y * (y @ damping.T), axis=1)
        c = np.sum(y * (stiffness[moving] @ y[:, :, None])[:, :, 0], axis=1)
        root = np.sqrt(b * b - 4 * a * c)
        first, second = (-b + root) / (2 * a), (-b - root) / (2 * a)
        previous = w[moving]
        new = np.where(np.abs(first - previous) <= np.abs(second - previous), first, second)
        index = active[moving]
        z[:, index] = y.T
        omega[index] = new
        done = np.abs(new - previous) <= 1e-10 * np.abs(new)
        active = index[~done]
    settled = (omega.real > 0) & (np.abs(omega - start) <= 0.25 * np.abs(start))
    z[:, ~settled], omega[~settled] = start_z[:, ~settled], start[~settled]
    return z, omega


def _porous_modes(system: _System, blocks, f_reach: float, count: int) -> list[_Followed]:
    """The panel modes of a porous panel up to ``f_reach`` [Hz] (at most ``count``).

    Every root of the panel-and-air problem (air's matrices at zero frequency) is found at
    once, so none is missed and none is confused with the relaxation roots (air leaking
    through the sheet, ω on the imaginary axis) or with the air's own resonances; those are
    set aside (a panel mode moves the panel at least as much as the air moves relative to
    it or to rest). Each panel root is then followed as the air's matrices change with
    frequency.
    """
    n = system.stiffness.shape[0]
    followed = []
    found = []        # (ω at zero frequency, block, z) of every panel root in reach
    for block in blocks:
        size = len(block)
        omega, z = _porous_roots(system, block, 0.0)
        q, u = z[:size], z[size:]
        panel = np.linalg.norm(q, axis=0)
        other = np.minimum(np.linalg.norm(u, axis=0), np.linalg.norm(u - q, axis=0))
        lam = omega**2
        keep = np.flatnonzero((omega.real > 0) & (panel > other) & (lam.real > 0)
                              & (omega.real <= 2 * np.pi * f_reach * 1.05))
        found += [(complex(omega[i]), block, z[:, i]) for i in keep]
    # the lowest ``count`` over all blocks (the caller's count has its own margin)
    found.sort(key=lambda item: item[0].real)
    found = found[:count]
    # the cavity's matrices are wanted near these roots (with a margin)
    system.series_reach_hz = 1.25 * max((item[0].real for item in found), default=0.0) \
        / (2 * np.pi)
    refined = {}
    for number, block in enumerate(blocks):
        mine = [j for j, item in enumerate(found) if item[1] is block]
        if mine:
            vectors = np.column_stack([found[j][2] / np.linalg.norm(found[j][2]) for j in mine])
            vectors, roots = _refine_porous(system, block, vectors,
                                            np.array([found[j][0] for j in mine]))
            refined.update({j: (vectors[:, i], complex(roots[i])) for i, j in enumerate(mine)})
    for j, (_, block, _) in enumerate(found):
        size = len(block)
        vector, root = refined[j]
        if True:
            # Unit panel norm, dominant panel coordinate real and positive.
            dominant = vector[np.argmax(np.abs(vector[:size]))]
            vector = vector * (abs(dominant) / dominant) / np.linalg.norm(vector[:size])
            q, u = vector[:size], vector[size:]
            frequency = root.real / (2 * np.pi)
            stiffness, mass, _ = _porous_operator(system, block, frequency)
            numerator = complex(q @ stiffness[:size, :size] @ q + u @ stiffness[size:, size:] @ u)
            full, air = np.zeros(n, complex), np.zeros(n, complex)
            full[block], air[block] = q, u
            # Kinetic mass of the panel and the air moving with it (radiation loss factor).
            kinetic = float(np.real(np.conj(vector) @ (mass.real @ vector)))
            followed.append(_Followed(math.sqrt(max((root**2).real, 0.0)) / (2 * np.pi), full, air,
                                      numerator, numerator / root**2, kinetic))
    return followed


def _matrices_stack(system: _System, frequencies: np.ndarray, block):
    """Stiffness, mass and transfer of one block at several frequencies [Hz] (incompressible
    air), stacked (F, n, n); transfer is None for an impervious panel.

    A porous sheet: the air on both sides (and the cavity) in series with the sheet's flow
    resistance, ``Z = iω M_air + K_cav/(iω)``, ``Z_eff = rA Z (rA I + Z)⁻¹``; the panel
    feels ``Z_eff/(iω)`` as mass, and the air moves with ``transfer`` times the panel.
    """
    omega = 2 * np.pi * np.maximum(np.asarray(frequencies, float), 1e-9)[:, None, None]
    eye = np.eye(len(block))
    k_s = system.stiffness[np.ix_(block, block)] * (1 + 1j * system.eta_structure)
    k_cav, m_cav = system.cavity_stack(frequencies, block)
    air = system.air_mass[np.ix_(block, block)][None] + m_cav
    if system.resistance is None:
        return k_s[None] + k_cav, system.structural_mass * eye[None] + air, None
    z = 1j * omega * air - 1j * k_cav / omega
    ra = system.resistance
    transfer = _solved(ra * eye[None] + z, np.broadcast_to(ra * eye, z.shape))
    mass = system.structural_mass * eye[None] - 1j * (z @ transfer) / omega
    return np.broadcast_to(k_s, mass.shape), mass, transfer


def _solved(matrices: np.ndarray, right: np.ndarray) -> np.ndarray:
    """``matrices⁻¹ right`` for a stack; a matrix that is exactly singular gives NaN (the
    caller keeps its previous iterate), the others their solution."""
    with np.errstate(all="ignore"):
        try:
            return np.linalg.solve(matrices, right)
        except np.linalg.LinAlgError:
            out = np.full(np.broadcast_shapes(matrices.shape[:-1], right.shape[:-2] + (1,))
                          + right.shape[-1:], np.nan, dtype=np.result_type(matrices, right))
            for j in range(len(matrices)):
                try:
                    out[j] = np.linalg.solve(matrices[j], right[j])
                except np.linalg.LinAlgError:
                    pass
            return out


def _follow_modes(system: _System, blocks, vectors: np.ndarray, frequencies: np.ndarray,
                  iterations: int = 12) -> list[_Followed]:
    """Inverse iteration of each mode (columns of ``vectors``, starting at ``frequencies``
    [Hz]) on the frequency-dependent problem, its frequency made self-consistent (Rayleigh
    functional) at each step: ``x ← (K(f) − λ M(f))⁻¹ M(f) x``, ``λ = xᵀKx / xᵀMx``, until λ
    changes by at most 1e-10. The modes of one symmetry block are iterated together (their
    matrices stacked), each stopping when it has converged."""
    n, count = vectors.shape
    result: list[_Followed | None] = [None] * count
    dominant = np.argmax(np.abs(vectors), axis=0)
    owner = np.full(n, -1)
    for number, block in enumerate(blocks):
        owner[block] = number
    for number, block in enumerate(blocks):
        mine = np.flatnonzero(owner[dominant] == number)
        if len(mine) == 0:
            continue
        x = vectors[np.ix_(block, mine)].T.astype(complex)          # (k, nb)
        f = np.maximum(np.asarray(frequencies, float)[mine], 1e-9)
        lam = (2 * np.pi * f).astype(complex) ** 2
        active = np.arange(len(mine))
        for _ in range(iterations):
            if len(active) == 0:
                break
            stiffness, mass, _ = _matrices_stack(system, f[active], block)
            xa = x[active]
            y = _solved(stiffness - lam[active, None, None] * mass,
                        (mass @ xa[:, :, None]))[:, :, 0]
            norm = np.linalg.norm(y, axis=1)
            good = np.all(np.isfinite(y), axis=1) & (norm > 0)
            xa = np.where(good[:, None], y / np.where(good, norm, 1.0)[:, None], xa)
            x[active] = xa
            lam_new = (np.einsum("ki,kij,kj->k", xa, stiffness, xa)
                       / np.einsum("ki,kij,kj->k", xa, mass, xa))
            done = np.abs(lam_new - lam[active]) <= 1e-10 * np.abs(lam_new)
            lam[active] = lam_new
            f[active] = np.sqrt(np.maximum(lam_new.real, 0.0)) / (2 * np.pi)
            active = active[~done]
        # The phase of an inverse iterate is arbitrary (near convergence it is set by the
        # rounding of a nearly singular solve): turn each so its largest coordinate is real
        # and positive before an impervious panel's vector is made real.
        peak = x[np.arange(len(x)), np.argmax(np.abs(x), axis=1)]
        x = x * (np.abs(peak) / np.where(peak != 0, peak, 1.0))[:, None]
        stiffness, mass, transfer = _matrices_stack(system, f, block)
        air_shape = x if transfer is None else (transfer @ x[:, :, None])[:, :, 0]
        if system.resistance is None:
            x, air_shape = x.real.astype(complex), air_shape.real.astype(complex)
        numerator = np.einsum("ki,kij,kj->k", x, stiffness, x)
        denominator = np.einsum("ki,kij,kj->k", x, mass, x)
        kinetic = (np.real(np.einsum("ki,kij,kj->k", np.conj(x), mass.real, x))
                   / np.real(np.sum(np.conj(x) * x, axis=1)))
        for j, column in enumerate(mine):
            full, air = np.zeros(n, complex), np.zeros(n, complex)
            full[block], air[block] = x[j], air_shape[j]
            result[column] = _Followed(float(f[j]), full, air, complex(numerator[j]),
                                       complex(denominator[j]), float(kinetic[j]))
    return result  # type: ignore[return-value]


def _distinct(frequencies: np.ndarray, vectors) -> np.ndarray:
    """Indices of the modes left once modes followed to the same root are merged."""
    kept: list[int] = []
    f = np.asarray(frequencies, float).tolist()
    for i in np.argsort(frequencies, kind="stable").tolist():
        same = False
        # the modes kept are ascending: only the last few can lie within 1e-5 of this one
        for j in reversed(kept):
            if f[i] - f[j] > 1e-5 * max(f[j], 1e-12):
                break
            if abs(f[i] - f[j]) <= 1e-5 * max(f[j], 1e-12):
                a, b = vectors[i], vectors[j]
                overlap = abs(np.vdot(a, b)) / max(np.linalg.norm(a) * np.linalg.norm(b), 1e-300)
                if overlap > 0.9:
                    same = True
                    break
        if not same:
            kept.append(i)
    return np.array(kept, dtype=int)


def _compressible_correction(system: _System, followed: list[_Followed],
                             cache: SolveCache | None = None):
    """Fixed-point iteration of each mode's frequency with the compressible terms of the open
    sides (first order in the change of shape): ``λ = xᵀKx / (xᵀMx + Σ_sides (ΔM − iR/ω))``.

    Returns frequencies [Hz], total and radiation loss factors.
    """
    numerator = np.array([item.numerator for item in followed])
    denominator = np.array([item.denominator for item in followed])
    f = np.array([item.frequency for item in followed])
    if system.air_sides == 0 or len(followed) == 0:
        lam = numerator / denominator
        return f, lam.imag / lam.real, np.zeros(len(f))
    rho, c = system.air_density, system.speed_of_sound
    shapes = np.column_stack([item.air_shape for item in followed])
    if np.iscomplexobj(shapes) and np.all(shapes.imag == 0):
        shapes = shapes.real
    kappa = _kappa_grid(system.family, 2 * np.pi * 1.5 * float(f.max()) / c)
    magnitude = np.abs(shapes)
    active = np.max(magnitude, axis=1) > 1e-5 * np.max(magnitude)
    shapes = np.where(active[:, None], shapes, 0.0)
    grid = _SpectralGrid(system.family, kappa, active, cache)
    g = grid.density(shapes)
    unit = system.air_mass / system.air_sides
    incompressible = np.sum(shapes * (unit @ shapes), axis=0)
    sides = system.air_sides
    previous_change = math.inf
    for _ in range(8):
        k0 = 2 * np.pi * np.maximum(f, 1e-9) / c
        with np.errstate(all="ignore"):
            terms = _compressible_terms(kappa, g, incompressible, k0, rho, c)
        omega = k0 * c
        total = denominator + sides * (terms.mass_change - 1j * terms.resistance / omega)
        lam = numerator / total
        f_new = np.sqrt(np.maximum(lam.real, 0.0)) / (2 * np.pi)
        change = np.max(np.abs(f_new - f) / np.maximum(f, 1e-12))
        f = f_new
        # The iteration contracts linearly (ratio ρ ≈ 0.02): the error left in f_new is about
        # change·ρ/(1 − ρ), ρ estimated from the last two changes.
        left = math.inf   # no estimate on the first pass
        if math.isfinite(previous_change) and previous_change > 0:
            ratio = change / previous_change
            if ratio < 0.5:
                left = change * ratio / (1.0 - ratio)
        if change < 1e-7 or left < 1e-7:
            break
        previous_change = change
    # Loss factors add (to first order, as the trade quotes them): structural (weighted by the
    # panel's share of the stiffness) and porous flow from the eigenvalue without radiation,
    # plus the radiation loss factor.
    without_radiation = numerator / (denominator + sides * terms.mass_change)
    eta_total = without_radiation.imag / without_radiation.real
    if np.iscomplexobj(shapes):
        # Radiated power of a complex (porous) shape: ∫|Φ|² = g(Re ψ) + g(Im ψ).
        g_power = grid.density(shapes.real) + grid.density(shapes.imag)
        power_mass = np.sum(shapes.real * (unit @ shapes.real) + shapes.imag * (unit @ shapes.imag), axis=0)
        with np.errstate(all="ignore"):
            power = _compressible_terms(kappa, g_power, power_mass, k0, rho, c)
        panel_norm = np.array([np.sum(np.abs(item.vector) ** 2) for item in followed])
        kinetic = np.array([item.kinetic_mass for item in followed]) * panel_norm
        eta_rad = sides * power.resistance / (omega * (kinetic + sides * power.mass_change))
    else:
        eta_rad = np.real(sides * terms.resistance) / (omega * np.real(total))
    return f, eta_total + eta_rad, eta_rad


def loaded_modes(
    basis_for: Callable[[float], ModalBasis],
    areal_density: float,
    *,
    fmax: float,
    max_modes: int | None = 60,
    room_side: str = "air",
    plenum_side: str = "air",
    cavity_depth: float | None = None,
    airflow_resistance: float | None = None,
    material: str = "film",
    loss_factor: float | None = None,
    air_density: float = AIR_DENSITY,
    speed_of_sound: float = SPEED_OF_SOUND,
    basis_extent: float = 1.0,
    max_basis: int = 200,
    cache: SolveCache | None = None,
) -> LoadedModes:
    """Natural modes of a panel with its air: baffled half-spaces, a sealed cavity, porosity.

    Solves ``[K − ω²(M + M_air + M_cav(ω)) + iωR(ω)] q = 0`` in the panel's in-vacuo modal
    basis (structural modal mass ``ρs A I``, stiffness ``ρs A diag(ω_j²)``), with the
    frequency dependence followed mode by mode (see the module docstring).

    Parameters
    ----------
    basis_for : callable (f_limit [Hz]) -> ModalBasis
        The in-vacuo basis with every mode up to ``f_limit`` (more is allowed: the lowest
        ``max_basis`` are kept). It is called twice: at ``fmax`` (a probe) and at the limit
        :func:`choose_basis_limit` gives.
    areal_density : float  [kg/m²]
    fmax : float  [Hz]
        Highest frequency reported.
    max_modes : int or None
        Report at most this many (the lowest); None: every mode up to ``fmax``.
    room_side : {"air", "none"}
    plenum_side : {"air", "sealed", "none"}
    cavity_depth : float or None  [m]
        Required for a sealed plenum.
    airflow_resistance : float or None  [Pa·s/m]
        Specific airflow resistance of a porous sheet; None: impervious film or fabric, and
        a freely open mesh (no air load) for ``material="mesh"``.
    material : {"film", "fabric", "mesh", "plate"}
    loss_factor : float or None  [-]
        Structural loss factor; None uses the material default (:mod:`materials`).
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]
    basis_extent, max_basis :
        Reach and cap of the in-vacuo basis (see :func:`choose_basis_limit`).
    cache : SolveCache, optional
        Keeps the air's integrals and eigen-solutions for later calls (see
        :mod:`auditor.physics.cache`); the result does not depend on what it holds.

    Returns
    -------
    LoadedModes
        ``loss_factor`` is ``Im(ω²)/Re(ω²)`` of each complex eigenvalue: the structural loss
        factor weighted by the panel's share of the modal stiffness, plus the radiation loss
        factor ``η_rad = R_ψ/(ω M_ψ)`` (R_ψ = ψᵀRψ the modal radiation resistance of the open
        sides [kg/s], M_ψ = ψᵀ(M + M_air + M_cav)ψ the modal total mass [kg], ω [rad/s]),
        plus the porous-flow loss.

    Raises
    ------
    LoadingInputError
        A non-positive areal density, an unknown side, a sealed plenum without a positive
        depth, a negative airflow resistance.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. II, §278; Kinsler et al., *Fundamentals of
    Acoustics*, 4th ed., §7.5; Fahy & Gardonio, *Sound and Structural Vibration*, 2nd ed.;
    Dowell, Gorman & Smith, J. Sound Vib. 52 (1977); Ingard, *Notes on Acoustics* (flow
    resistance in series).
    """
    rho_s = _positive(areal_density, "areal density", "kg/m²")
    rho = _positive(air_density, "air density", "kg/m³")
    c = _positive(speed_of_sound, "speed of sound", "m/s")
    limit = _non_negative(fmax, "fmax", "Hz")
    if room_side not in ("air", "none"):
        raise LoadingInputError(f"room side must be 'air' or 'none', got {room_side!r}")
    if plenum_side not in ("air", "sealed", "none"):
        raise LoadingInputError(f"plenum side must be 'air', 'sealed' or 'none', got {plenum_side!r}")
    depth = None
    if plenum_side == "sealed":
        if cavity_depth is None:
            raise LoadingInputError("a sealed plenum needs a cavity depth [m]")
        depth = _positive(cavity_depth, "cavity depth", "m")
    try:
        eta = structural_loss_factor(material, loss_factor)
    except ValueError as error:
        raise LoadingInputError(str(error)) from None
    resistance = None
    if airflow_resistance is not None:
        resistance = _non_negative(airflow_resistance, "airflow resistance", "Pa·s/m")
    open_mesh = material == "mesh" and airflow_resistance is None
    air_sides = (room_side == "air") + (plenum_side == "air")
    loaded_sides = 0 if open_mesh else air_sides + (plenum_side == "sealed")
    if max_modes is not None:
        if isinstance(max_modes, bool) or int(max_modes) != max_modes or max_modes < 0:
            raise LoadingInputError(f"max_modes must be a whole number ≥ 0 or None, got {max_modes!r}")
        max_modes = int(max_modes)
    # candidates followed beyond the count reported (None: every candidate)
    spare = None if max_modes is None else max_modes + max_modes // 2 + 8

    probe = basis_for(limit)
    if loaded_sides == 0:
        basis = probe
    else:
        f_limit = choose_basis_limit(probe, limit, max_modes or 0, rho_s, loaded_sides,
                                     air_density=rho, extent=basis_extent, max_basis=max_basis)
        basis = basis_for(f_limit) if f_limit > limit * (1 + 1e-12) else probe
        # A few modes are never enough for the coupling through the air: reach at least
        # MIN_BASIS modes (Weyl's law, count ∝ f², to aim).
        for _ in range(3):
            if len(basis) >= min(MIN_BASIS, max_basis):
                break
            f_limit *= 1.15 * math.sqrt(MIN_BASIS / max(len(basis), 1))
            basis = basis_for(f_limit)
    cache = SolveCache() if cache is None else cache
    if len(basis) > max_basis and loaded_sides:
        basis = _truncated(basis, max_basis, cache)
    model = _describe(room_side, plenum_side, depth, resistance, material, open_mesh)
    n = len(basis)
    omega_vac = 2 * np.pi * np.asarray(basis.frequencies_hz, float)
    if loaded_sides == 0 or n == 0:
        vacuum = np.asarray(basis.frequencies_hz)
        below = np.flatnonzero(vacuum <= limit)
        keep = below[:max_modes]
        complete = min(limit, basis.complete_to, complete_below(vacuum[below], len(keep)))
        vectors = np.zeros((n, len(keep)))
        vectors[keep, np.arange(len(keep))] = 1.0
        return _assemble(basis, vacuum[keep], np.full(len(keep), eta), np.zeros(len(keep)),
                         vectors, model, complete)

    family = _recognise(basis, cache)
    area = family.area
    structural = rho_s * area
    air_mass = rho * air_sides * _unit_added_mass(basis, cache)
    system = _System(
        family=family,
        stiffness=np.diag(structural * omega_vac**2),
        mass=structural * np.eye(n) + air_mass,
        structural_mass=structural,
        air_mass=air_mass,
        air_sides=air_sides,
        cavity=_cavity_for(family, depth, cache) if depth is not None else None,
        resistance=None if resistance is None else resistance * area,
        air_density=rho,
        speed_of_sound=c,
        eta_structure=eta,
    )
    blocks = family.blocks()
    open_sides_only = system.cavity is None and system.resistance is None
    values, vectors = _frequency_independent_solution(
        system, blocks, cache, 1.05 * limit if open_sides_only else None)
    frequencies = np.sqrt(np.maximum(values, 0.0)) / (2 * np.pi)
    if open_sides_only:
        # Nothing depends on frequency but the compressible terms: no re-solve needed.
        candidates = np.flatnonzero(frequencies <= limit * 1.02)[:None if max_modes is None
                                                                 else max_modes + 8]
        x = vectors[:, candidates]
        stiffness = structural * (omega_vac**2 @ (x * x)) * (1 + 1j * eta)
        mass = np.sum(x * (system.mass @ x), axis=0)
        followed = [_Followed(float(frequencies[i]), x[:, j], x[:, j], complex(stiffness[j]),
                              complex(mass[j]), float(mass[j]))
                    for j, i in enumerate(candidates)]
    else:
        # Enough candidates that every mode at or below fmax after following is among them:
        # the cavity's stiffness and mass-like terms both lower frequencies as they rise, and
        # a porous sheet raises them at most to the in-vacuo value.
        if system.resistance is not None and system.cavity is not None:
            followed = _porous_modes(system, blocks, limit, spare)
        else:
            reach = 1.0 if system.resistance is not None else 1.5
            candidates = np.flatnonzero(frequencies <= reach * limit)[:spare]
            # the cavity's matrices are wanted near the candidates (with a margin)
            system.series_reach_hz = 1.25 * float(frequencies[candidates].max()) \
                if len(candidates) else 0.0
            followed = _follow_modes(system, blocks, vectors[:, candidates],
                                     frequencies[candidates])
    f, eta_total, eta_rad = _compressible_correction(system, followed, cache)
    if open_sides_only:
        unique = np.arange(len(followed))
    else:
        unique = _distinct(f, [item.vector for item in followed])
    order = unique[np.argsort(f[unique], kind="stable")]
    order = order[f[order] <= limit]
    complete = min(limit, _coupled_reach(system, basis), complete_below(f[order], len(order[:max_modes])))
    order = order[:max_modes]
    q = np.column_stack([followed[i].vector for i in order]) if len(order) else np.zeros((n, 0))
    q = np.real(_normalise(q))
    norms = np.sqrt(np.sum(q * q, axis=0))
    q = q / np.where(norms > 0, norms, 1.0)
    return _assemble(basis, f[order], eta_total[order], eta_rad[order], q, model, complete)


#: Margin on the air (and cavity) mass ratio of the modes left out of a coupled basis.
REACH_MASS_MARGIN = 1.25


def _coupled_reach(system: _System, basis: ModalBasis) -> float:
    """Lowest loaded frequency a mode left out of the basis can have  [Hz].

    Its in-vacuo frequency exceeds the basis's reach and its own air and cavity mass ratio is
    at most that of the top tenth of the basis (added mass per unit area falls as the
    wavenumber rises, about ρ0/k a side), taken with the margin ``REACH_MASS_MARGIN``.
    """
    reach = basis.complete_to
    n = len(basis)
    top = np.arange(max(0, n - max(1, n // 10)), n)
    added = np.diag(system.air_mass)[top]
    if system.cavity is not None:
        added = added + np.diag(system.cavity_matrices(0.0, top)[1])
    ratio = float(np.max(added)) / system.structural_mass
    return reach / math.sqrt(1.0 + REACH_MASS_MARGIN * ratio)


def _truncated(basis: ModalBasis, count: int, cache: SolveCache) -> ModalBasis:
    """The lowest ``count`` modes of a basis (the first ``count``: bases are ascending).

    The shapes of the truncated basis are kept in ``cache`` by the basis's shape objects, so
    that the same panel at another tension (same shapes, frequencies scaled) gets the same
    shape objects again, and with them its air matrices.
    """
    frequencies = np.asarray(basis.frequencies_hz)
    keep = np.argsort(frequencies, kind="stable")[:count]
    keep.sort()
    complete = min(basis.complete_to, complete_below(np.sort(frequencies), count))

    def shapes():
        def evaluate_kept(points, _keep=keep, _basis=basis):
            return _basis.shapes(points, _keep)

        def evaluate_some(points, indices, _keep=keep, _basis=basis):
            return _basis.shapes(points, _keep[np.asarray(indices, dtype=int)])

        return evaluate_kept, evaluate_some

    evaluate_kept, evaluate_some = cache.families.get_for(
        (basis.evaluate, basis.region), ("truncated", keep.tobytes()), shapes)
    family = None if basis.family is None else cache.families.get_for(
        (basis.family,), ("truncated", keep.tobytes()), lambda: basis.family.subset(keep))

    return ModalBasis(
        region=basis.region,
        frequencies_hz=np.asarray(basis.frequencies_hz)[keep],
        labels=tuple(basis.labels[i] for i in keep),
        multiplicity=np.asarray(basis.multiplicity)[keep],
        mean=np.asarray(basis.mean)[keep],
        nodal_lines=tuple(basis.nodal_lines[i] for i in keep),
        evaluate=evaluate_kept,
        complete_to_hz=complete,
        evaluate_some=evaluate_some,
        family=family,
    )


def _assemble(basis: ModalBasis, frequencies, eta_total, eta_rad, vectors, model,
              complete: float = math.inf) -> LoadedModes:
    vectors = np.asarray(vectors, float)
    vectors = vectors.reshape(len(basis), -1) if vectors.size else np.zeros((len(basis), 0))
    dominant = np.argmax(np.abs(vectors), axis=0) if vectors.shape[1] else np.zeros(0, int)
    mean = np.asarray(basis.mean, float)
    norm2 = np.sum(vectors**2, axis=0)
    participation = (mean @ vectors) ** 2 / np.where(norm2 > 0, norm2, 1.0)
    return LoadedModes(
        frequencies_hz=np.asarray(frequencies, float),
        loss_factor=np.asarray(eta_total, float),
        in_vacuo_hz=np.asarray(basis.frequencies_hz, float)[dominant],
        dominant=dominant.astype(int),
        vectors=vectors,
        participation=participation,
        multiplicity=np.asarray(basis.multiplicity, int)[dominant],
        labels=tuple(basis.labels[i] for i in dominant),
        basis=basis,
        model=model,
        radiation_loss_factor=np.asarray(eta_rad, float),
        complete_to_hz=float(complete),
    )
