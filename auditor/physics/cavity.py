"""A sealed cavity behind the panel: Dowell's acoustoelastic coupling.

The plenum side ``"sealed"`` is a cavity of depth d with rigid walls and the panel's outline as
its cross-section. With the cavity's cross-section modes N_j (rigid walls, wavenumber k_j) the
modal pressure per unit displacement is ``ρ0 ω² coth(κ_j d)/κ_j``, ``κ_j² = k_j² − k0²``:
mass-like for the cross modes and, for the uniform mode at low frequency, the stiffness
``ρ0c² (∫φp)(∫φq)/V``. The cross-section modes are closed form on rectangles (cosines) and
discs (``J_m(β r/a)``, β the zeros of J_m'), and finite-element Neumann modes on any other
outline. The cavity air has no absorption, so near a depth resonance of a deep cavity the
cavity-controlled roots are not reported as panel modes.

References
----------
.. [1] E. H. Dowell, G. F. Gorman and D. A. Smith, "Acoustoelasticity: general theory,
   acoustic natural modes and forced response to sinusoidal excitation, including
   comparisons with experiment", J. Sound Vib. 52 (1977); E. H. Dowell, *Aeroelasticity of
   Plates and Shells*, Noordhoff, 1975.
.. [2] P. M. Morse and K. U. Ingard, *Theoretical Acoustics*, McGraw-Hill, 1968, ch. 9
   (rigid-walled cavities and ducts).
.. [3] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (the mass–air–mass resonance).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from auditor.physics import fem
from auditor.physics.added_mass import angular_weight
from auditor.physics.basis import (
    CircleRegion,
    DiscShapes,
    ModalBasis,
    RectangleRegion,
    RectangleShapes,
)
from auditor.physics.cache import SolveCache
from auditor.physics.loading_inputs import AIR_DENSITY, SPEED_OF_SOUND
from auditor.physics.loading_inputs import non_negative as _non_negative
from auditor.physics.loading_inputs import positive as _positive
from auditor.physics.quadrature import PointShapes, quadrature_family

__all__ = [
    "CavityCoupling",
    "CavitySeries",
    "cavity_coupling",
    "cavity_dynamic_mass",
    "cavity_split",
    "cavity_sums",
    "mass_air_mass_frequency",
]


@dataclass(frozen=True, eq=False)
class CavityCoupling:
    """Cross-section modes of a rigid-walled cavity and their coupling with the basis."""

    wavenumbers: np.ndarray   # k_j  [rad/m]
    coupling: np.ndarray      # (n, J)  ∫ φp N_j dA / √(∫ N_j² dA)  [m]
    depth: float              # [m]


def _rectangle_cavity(family: RectangleShapes, depth: float) -> CavityCoupling:
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
    return CavityCoupling(wavenumbers[used], coupling[:, used], depth)


def _disc_cavity(family: DiscShapes, depth: float) -> CavityCoupling:
    a = family.radius
    columns, wavenumbers = [], []
    n = len(family.order)
    for block in family.blocks():
        m = int(family.order[block[0]])
        count = int(np.sum(family.order == m)) + 12
        beta = (special.jnp_zeros(m, count) if m > 0
                else np.concatenate([[0.0], special.jnp_zeros(0, count)]))
        j = family.zero[block][:, None]
        jm1 = special.jv(m + 1.0, family.zero[block])[:, None]
        b = beta[None, :]
        radial = j * jm1 * special.jv(m, b) / (j * j - b * b)          # ∫₀¹ J_m(jr) J_m(βr) r dr
        norm = np.where(beta == 0, 0.5, 0.5 * (1.0 - m * m / np.where(beta == 0, 1.0, beta**2))
                        * special.jv(m, beta) ** 2)
        eps = float(angular_weight(m))
        column = np.zeros((n, len(beta)))
        column[block] = (family.scale[block, None] * eps * a * a * radial
                         / np.sqrt(eps * a * a * norm)[None, :])
        columns.append(column)
        wavenumbers.append(beta / a)
    return CavityCoupling(np.concatenate(wavenumbers), np.hstack(columns), depth)


def _points_cavity(family: PointShapes, depth: float, cache: SolveCache) -> CavityCoupling:
    region = family.region
    n = family.values.shape[1]
    count = min(400, max(40, 2 * n + 20))
    x, w = family.points, family.weights
    shapes: np.ndarray
    wavenumbers: np.ndarray
    if isinstance(region, RectangleRegion):
        side = int(math.ceil(math.sqrt(count))) + 2
        p_grid, q_grid = np.meshgrid(np.arange(side), np.arange(side), indexing="ij")
        p, q = p_grid.ravel(), q_grid.ravel()
        shapes = np.cos(np.outer(x[:, 0], p * np.pi / region.width)) * np.cos(
            np.outer(x[:, 1], q * np.pi / region.length))
        wavenumbers = np.hypot(p * np.pi / region.width, q * np.pi / region.length)
    elif isinstance(region, CircleRegion):
        a = region.radius
        r, theta = np.hypot(x[:, 0], x[:, 1]) / a, np.arctan2(x[:, 1], x[:, 0])
        shape_parts: list[np.ndarray] = []
        wavenumber_parts: list[np.ndarray] = []
        for m in range(0, 12):
            beta = (special.jnp_zeros(m, 8) if m > 0
                    else np.concatenate([[0.0], special.jnp_zeros(0, 8)]))
            radial = special.jv(m, np.outer(r, beta))
            for angular in ((np.cos,) if m == 0 else (np.cos, np.sin)):
                shape_parts.append(radial * angular(m * theta)[:, None])
                wavenumber_parts.append(beta / a)
        shapes, wavenumbers = np.hstack(shape_parts), np.concatenate(wavenumber_parts)
    else:
        # The finite-element path owns polygon cavities. The coarse mesh, as for the panel's
        # own basis of many modes (the cavity's frequencies change the panel's by about 2e-4
        # on the gable-end demo panel).
        wavenumbers, evaluate = fem.neumann_modes(region, count, accuracy="coarse",
                                                  cache=cache)
        shapes = np.asarray(evaluate(x), float).reshape(len(x), -1)
    norm = np.sqrt(np.maximum((shapes**2 * w[:, None]).sum(axis=0), 1e-300))
    coupling = (family.values * w[:, None]).T @ shapes / norm[None, :]
    return CavityCoupling(np.asarray(wavenumbers, float), coupling, depth)


def cavity_coupling(family, depth: float, cache: SolveCache) -> CavityCoupling:
    if isinstance(family, RectangleShapes):
        return _rectangle_cavity(family, depth)
    if isinstance(family, DiscShapes):
        return _disc_cavity(family, depth)
    return _points_cavity(family, depth, cache)


def cavity_split(cavity: CavityCoupling, wavenumber: float, air_density: float,
                 speed_of_sound: float):
    """Per cavity mode: stiffness s_j [N/m per m²·…] and mass μ_j with −ω²ρ0G_j = s_j − ω²μ_j.

    ``G_j = coth(κ_j d)/κ_j`` for κ_j² = k_j² − k0² > 0 (mass-like), ``−cot(κ'd)/κ'`` with
    κ'² = k0² − k_j² otherwise; a negative G is a stiffness (the uniform mode at low frequency:
    ``ρ0c²/d``).
    """
    stiffness, mass = _cavity_splits(cavity, np.array([float(wavenumber)]), air_density,
                                     speed_of_sound)
    return stiffness[0], mass[0]


def _cavity_splits(cavity: CavityCoupling, wavenumbers: np.ndarray, air_density: float,
                   speed_of_sound: float) -> tuple[np.ndarray, np.ndarray]:
    """:func:`cavity_split` at several air wavenumbers k0 (F,): stiffness and mass (F, J)."""
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


def cavity_sums(cavity: CavityCoupling, k0: np.ndarray, air_density: float,
                speed_of_sound: float) -> tuple[np.ndarray, np.ndarray]:
    """``Σ_j s_j(k0) L_j L_jᵀ`` and ``Σ_j μ_j(k0) L_j L_jᵀ`` at each air wavenumber (F, n, n)."""
    count, (n, modes) = len(k0), cavity.coupling.shape
    s, mu = _cavity_splits(cavity, k0, air_density, speed_of_sound)
    L = cavity.coupling
    stiffness = ((L[None] * s[:, None, :]).reshape(count * n, modes) @ L.T).reshape(count, n, n)
    mass = ((L[None] * mu[:, None, :]).reshape(count * n, modes) @ L.T).reshape(count, n, n)
    return stiffness, mass


@dataclass(frozen=True, eq=False)
class CavitySeries:
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

    near: CavityCoupling
    terms: np.ndarray        # (R + 1, n, n)
    top: float               # [rad/m]

    #: Modes from this multiple of ``top`` up are taken by their series: mapped to [−1, 1],
    #: the singularity at k0² ≥ 1.5625 top² lies on or beyond the Bernstein ellipse of
    #: parameter 4, so ``TERMS`` = 32 terms leave below 4⁻³² ≈ 1e-19 of the mass.
    FAR = 1.25
    TERMS = 32

    @classmethod
    def of(cls, cavity: CavityCoupling, top: float, air_density: float,
           speed_of_sound: float) -> CavitySeries:
        far = cavity.wavenumbers >= cls.FAR * top
        near = CavityCoupling(cavity.wavenumbers[~far], cavity.coupling[:, ~far], cavity.depth)
        remote = CavityCoupling(cavity.wavenumbers[far], cavity.coupling[:, far], cavity.depth)
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
        stiffness, mass = cavity_sums(self.near, k0, air_density, speed_of_sound)
        t = 2.0 * (np.asarray(k0, float) / self.top) ** 2 - 1.0
        weights = np.cos(np.outer(np.arccos(np.clip(t, -1.0, 1.0)), np.arange(len(self.terms))))
        n = self.terms.shape[1]
        mass = mass + (weights @ self.terms.reshape(len(self.terms), n * n)).reshape(-1, n, n)
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
    cavity = cavity_coupling(quadrature_family(basis, cache), d, cache)
    s, mu = cavity_split(cavity, 2 * np.pi * f / c, rho, c)
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
