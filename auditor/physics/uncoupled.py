"""Air-loaded modes above the coupled basis: each mode with its own air load.

The full air loading (:func:`auditor.physics.fluid.loaded_modes`) couples the lowest few hundred
in-vacuo modes through the Rayleigh integral. A large light film has thousands of modes below
the highest frequency a rule set assesses; above the coupled basis this module loads each
in-vacuo mode p with its own (diagonal) air mass and solves the single-mode equation

    λ (ρs A + M_eff(ω)) = ρs A ω_p² (1 + iη),   ω = √Re λ,

by fixed-point iteration on ω, where the mass equivalent of the air is

- per baffled side, the Rayleigh self term ``M_pp = ρ0/(2π) ∬∬ φp φp / R dA dA'`` (exact for
  rectangles and discs, from the same integrals as the coupled solve), times the
  compressible factor ``k_p / √(k_p² − k0²)`` of a subsonic wave of wavenumber k_p; on
  polygons, where the self term would cost as much as the coupled solve, the infinite-panel
  value ``ρ0 A / √(k_p² − k0²)`` (Fahy & Gardonio, ch. on fluid loading, from memory) with
  k_p from Weyl's law on the panel's area and perimeter;
- a sealed cavity: ``ρ0 A coth(κ d)/κ``, κ = √(k_p² − k0²) (the mass-like cross modes of
  Dowell's coupling seen by a wave of wavenumber k_p), less the stiffness of the uniform
  cavity mode ``ρ0 c² A mean_p² / d`` over ω²;
- a porous sheet: the air's impedance Z = iω M through the flow resistance in series,
  ``Z r A / (Z + r A)``, as in the coupled model.

Accuracy, measured against the full coupled solve with 1500 basis modes on a 4.8 m × 3.2 m
film (0.25 kg/m², 1200 N/m, air both sides, incompressible): with the coupled basis of 200
modes and this estimate above it, the sorted frequencies of modes 200–800 (110–250 Hz) agree
within 0.5 % (mean −0.1 %); mode by mode (same dominant in-vacuo mode) within 1.2 % at modes
200–400, falling with frequency; including the compressible terms (against the coupled solve
with them), the number of modes below 100, 150, 200 and 240 Hz is the same. On the L-shaped
polygon of three 1 m squares (same film, finite elements), modes 64–117 by ρ0/k against all
128 basis modes coupled: +0.7 % on average, 1.6 % at most (ρ0/k leaves out the mass the edges
add), and the count below 100, 150, 200 Hz the same (one mode of 98 below 180 Hz lies just
above it). The coupling the estimate leaves out shifts each mode by about that much; a
conflict margin of ±10 % is far wider. Radiation damping is left out (a subsonic mode of a film
radiates mostly from its edges and corners: up to 0.003 at 250 Hz on the film above, against a
structural 0.03): the loss factor is structural (and porous flow). A mode whose wavenumber is
not clearly subsonic (k_p < 1.2 k0) is not estimated: the list is complete only below it.

References
----------
.. [1] Lord Rayleigh, *The Theory of Sound*, vol. II, Macmillan, 1896, §278.
.. [2] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (fluid loading of plates: added mass ρ0/√(k² − k0²) per side of a subsonic wave).
.. [3] E. H. Dowell, G. F. Gorman and D. A. Smith, J. Sound Vib. 52 (1977) (cavity coupling).
.. [4] H. P. Baltes and E. R. Hilf, *Spectra of Finite Systems*, Bibliographisches Institut,
   1976 (Weyl's law with the perimeter term).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from auditor.physics.added_mass import (
    angular_weight,
    bessel_transform,
    gauss_panels,
    rectangle_self_table,
)
from auditor.physics.basis import DiscShapes, ModalBasis, PolygonRegion, RectangleShapes
from auditor.physics.basis_reach import REACH_MASS_MARGIN
from auditor.physics.bessel import bessel_j_orders, bessel_zeros
from auditor.physics.cache import SolveCache, shared_size
from auditor.physics.loading_inputs import AIR_DENSITY, SPEED_OF_SOUND
from auditor.physics.quadrature import quadrature_family

__all__ = ["UncoupledModes", "SUBSONIC_MARGIN", "self_added_mass", "mode_wavenumbers",
           "uncoupled_loaded_modes"]

#: A mode is estimated only when its wavenumber exceeds the air's by this factor.
SUBSONIC_MARGIN = 1.2


@dataclass(frozen=True, eq=False)
class UncoupledModes:
    """Loaded modes estimated one basis mode at a time.

    Parameters
    ----------
    indices : ndarray of int (k,)
        The basis mode each estimate belongs to.
    frequencies_hz : ndarray (k,)  [Hz]
        Ascending, ≤ fmax.
    loss_factor : ndarray (k,)  [-]
        Structural (and porous flow).
    complete_to_hz : float  [Hz]
        No mode of the basis beyond ``first`` at or below it is missing (and none beyond the
        basis can come below it).
    """

    indices: np.ndarray
    frequencies_hz: np.ndarray
    loss_factor: np.ndarray
    complete_to_hz: float


def _perimeter(region: PolygonRegion) -> float:
    total = 0.0
    for ring in (region.outline, *region.holes):
        ring = np.asarray(ring, float)
        total += float(np.sum(np.hypot(*(np.roll(ring, -1, axis=0) - ring).T)))
    return total


def mode_wavenumbers(basis: ModalBasis, indices, cache: SolveCache | None = None) -> np.ndarray:
    """Wavenumber k_p of basis modes  [rad/m].

    ``π √((m/Lx)² + (n/Ly)²)`` on a rectangle, ``j_mn / a`` on a disc (exact); on any other
    outline the two-term Weyl law inverted at the mode's position p (counting from 1, less a
    half): ``A k²/(4π) − P k/(4π) = p − ½``, P the perimeter with the cut-outs' edges.
    """
    indices = np.asarray(indices, dtype=int)
    region = basis.region
    if not isinstance(region, PolygonRegion):
        family = quadrature_family(basis, SolveCache() if cache is None else cache)
        if isinstance(family, RectangleShapes):
            return np.pi * np.hypot(family.m[indices] / family.width,
                                    family.n[indices] / family.length)
        if isinstance(family, DiscShapes):
            return family.zero[indices] / family.radius
        area = float(region.area)
        perimeter = 0.0
    else:
        area, perimeter = float(region.area), _perimeter(region)
    count = indices + 0.5
    root = (perimeter + np.sqrt(perimeter**2 + 16.0 * math.pi * area * count)) / (2.0 * area)
    return root


def self_added_mass(basis: ModalBasis, indices, cache: SolveCache | None = None
                    ) -> tuple[np.ndarray, bool]:
    """The Rayleigh self term of basis modes per unit air density, one side  [m³].

    Returns ``M_pp/ρ0 = (1/2π) ∬∬ φp φp / R dA dA'`` and True where it is exact (rectangle,
    disc); on other outlines the infinite-panel value ``A/k_p`` and False.
    """
    cache = SolveCache() if cache is None else cache
    indices = np.asarray(indices, dtype=int)
    if len(indices) == 0:
        return np.zeros(0), True
    if not isinstance(basis.region, PolygonRegion):
        family = quadrature_family(basis, cache)
        if isinstance(family, RectangleShapes):
            m, n = family.m[indices], family.n[indices]
            aspect = float(f"{family.length / family.width:.12g}")
            m_count, n_count = shared_size(int(m.max())), shared_size(int(n.max()))
            table = cache.rectangle_tables.get(
                ("self", aspect, m_count, n_count),
                lambda: rectangle_self_table(aspect, m_count, n_count))
            return family.width**3 * table[m - 1, n - 1], True
        if isinstance(family, DiscShapes):
            result = np.empty(len(indices))
            order = family.order[indices]
            for m in np.unique(order):
                here = np.flatnonzero(order == m)
                rank = family.radial[indices[here]]
                # a power of two (at least 8): the orders of one disc ask for several
                # counts as its tension changes, and each count is a fresh quadrature
                count = max(8, 1 << int(rank.max()).bit_length())
                diagonal = _disc_self(int(m), count)[rank]
                scale = family.scale[indices[here]]
                # as added_mass._disc_added_mass, divided by 2π: a³ ε_m scale² ∫h_p² dx
                result[here] = (family.radius**3 * float(angular_weight(int(m)))
                                * scale**2 * diagonal)
            return result, True
    area = float(basis.region.area)
    return area / mode_wavenumbers(basis, indices, cache), False


#: Gauss points per π of the rule for a disc's self terms (the integrand's period): within
#: 1e-9 of ten per π/2, where the range's truncation leaves about 1e-6 (measured against a
#: range and a rule ten times longer and finer).
_SELF_RULE = 8
#: Orders whose J_m at the self terms' nodes are made together (by recurrence).
_ORDER_BLOCK = 32


@lru_cache(maxsize=1024)
def _disc_self(order: int, count: int) -> np.ndarray:
    """∫₀^∞ h_p(x)² dx for the first ``count`` zeros of J_m (the diagonal of
    ``added_mass._disc_order_table``)."""
    zeros = bessel_zeros(order, count)
    panels = int(math.ceil((240.0 + 2.0 * float(zeros[-1])) / np.pi))
    block = order // _ORDER_BLOCK
    x, w, table = _self_rule(block, 1 << (panels - 1).bit_length())
    used = _SELF_RULE * panels          # the rule over [0, panels·π] is a prefix of the table's
    x, w = x[:used], w[:used]
    tail_start = x[-1] + (x[-1] - x[-2])
    h = bessel_transform(order, zeros, x, table[order - block * _ORDER_BLOCK, :used])
    c = zeros * special.jv(order + 1.0, zeros)
    diagonal = (h * h) @ w + c * c / (4.0 * np.pi * tail_start**4)
    diagonal.setflags(write=False)   # memoised (a pure function of two whole numbers)
    return diagonal


@lru_cache(maxsize=8)
def _self_rule(block: int, panels: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The self terms' rule over ``panels`` panels of π, and J_m at its nodes for the orders
    of ``block`` (``_ORDER_BLOCK`` of them, from ``block · _ORDER_BLOCK``), each value a
    function of its order and node alone."""
    x, w = gauss_panels(panels, _SELF_RULE, np.pi)
    table = bessel_j_orders(block * _ORDER_BLOCK, _ORDER_BLOCK, x)
    for array in (x, w, table):
        array.setflags(write=False)
    return x, w, table


def uncoupled_loaded_modes(
    basis: ModalBasis,
    first: int,
    areal_density: float,
    *,
    fmax: float,
    room_side: str,
    plenum_side: str,
    cavity_depth: float | None,
    airflow_resistance: float | None,
    structural_loss_factor: float,
    air_density: float = AIR_DENSITY,
    speed_of_sound: float = SPEED_OF_SOUND,
    cache: SolveCache | None = None,
) -> UncoupledModes:
    """Loaded modes of basis modes ``first`` onward, each with its own air load.

    Parameters
    ----------
    basis : ModalBasis
        In-vacuo basis; modes before ``first`` are left to the coupled solve.
    first : int
    areal_density : float  [kg/m²]
    fmax : float  [Hz]
    room_side, plenum_side, cavity_depth, airflow_resistance :
        As :func:`auditor.physics.fluid.loaded_modes` (an open mesh has no air load and
        never reaches here).
    structural_loss_factor : float  [-]
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]
    cache : SolveCache, optional

    Returns
    -------
    UncoupledModes

    References
    ----------
    See the module docstring.
    """
    cache = SolveCache() if cache is None else cache
    rho, c = float(air_density), float(speed_of_sound)
    vacuum = np.asarray(basis.frequencies_hz, float)
    indices = np.arange(first, len(vacuum))
    sides = (room_side == "air") + (plenum_side == "air")
    reach = basis.complete_to
    if len(indices) == 0:
        return UncoupledModes(indices, np.zeros(0), np.zeros(0), min(fmax, reach))
    area = float(basis.region.area)
    structural = areal_density * area
    stiffness = structural * (2 * np.pi * vacuum[indices]) ** 2
    own, _ = self_added_mass(basis, indices, cache)
    wavenumber = mode_wavenumbers(basis, indices, cache)
    mean = np.asarray(basis.mean, float)[indices]
    depth = cavity_depth if plenum_side == "sealed" else None
    resistance = None if airflow_resistance is None else airflow_resistance * area
    omega = 2 * np.pi * vacuum[indices]
    for _ in range(60):
        k0 = omega / c
        kappa = np.sqrt(np.maximum(wavenumber**2 - k0**2, (0.1 * wavenumber) ** 2))
        mass = sides * rho * own * (wavenumber / kappa)
        if depth is not None:
            x = kappa * depth
            mass = mass + rho * area / (kappa * np.tanh(x))
            mass = mass - rho * c * c * area * mean**2 / depth / np.maximum(omega, 1e-9) ** 2
        effective = mass.astype(complex)
        if resistance is not None:
            impedance = 1j * omega * mass
            effective = impedance * resistance / (impedance + resistance) / (1j * omega)
        denominator = structural + effective
        valid = (wavenumber > SUBSONIC_MARGIN * k0) & (denominator.real > 0)
        lam = stiffness * (1 + 1j * structural_loss_factor) / np.where(valid, denominator, 1.0)
        updated = np.sqrt(np.maximum(lam.real, 0.0))
        change = np.max(np.abs(updated - omega) / np.maximum(omega, 1e-12))
        omega = updated
        if change < 1e-12:
            break
    frequencies = omega / (2 * np.pi)
    loss = lam.imag / np.where(lam.real > 0, lam.real, 1.0)
    # Completeness: every basis mode beyond ``first`` is estimated unless invalid; a mode
    # beyond the basis lies above its reach in vacuo, loaded by at most the top tenth's ratio.
    top = np.arange(max(0, len(indices) - max(1, len(indices) // 10)), len(indices))
    ratio = float(np.max(np.abs(effective[top]) / structural))
    complete = min(fmax, reach / math.sqrt(1.0 + REACH_MASS_MARGIN * ratio))
    if not np.all(valid):
        # a mode not estimated: the list stops below the lowest it could be loaded to
        largest = float(np.max(np.abs(effective) / structural))
        lowest = float(np.min(vacuum[indices][~valid]))
        complete = min(complete, lowest / math.sqrt(1.0 + REACH_MASS_MARGIN * largest))
    keep = np.flatnonzero(valid & (frequencies <= fmax))
    keep = keep[np.argsort(frequencies[keep], kind="stable")]
    return UncoupledModes(indices[keep], frequencies[keep], loss[keep], complete)
