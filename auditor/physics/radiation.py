"""The compressible part of the air on a baffled side: frequency correction and radiation.

The Rayleigh integral's compressible kernel ``e^{−ik0R}/R`` adds to the incompressible added
mass (:mod:`auditor.physics.added_mass`) a frequency-dependent correction (the
``(cos k0R − 1)/R`` part) and a radiation resistance (the ``sin(k0R)/R`` part). Both are
taken, for every shape, in the wavenumber domain: with the modal spectrum Φ(κ) and its
angular density g(κ) = ∫|Φ(κ, θ)|² dθ,

    R = ωρ0/(4π²) ∫₀^{k0} g κ/√(k0² − κ²) dκ,
    ΔM = ρ0/(4π²) [∫_{k0}^∞ g (κ/√(κ² − k0²) − 1) dκ − ∫₀^{k0} g dκ],

integrated exactly for g piecewise linear in κ (product integration). The spectra are closed
form for rectangles (sine transforms) and discs (Hankel transforms of the Bessel shapes), and
point sums for any other basis.

For the loaded modes the terms are applied per mode (:func:`compressible_correction`): each
mode's frequency and loss factor are corrected by its Rayleigh quotient with the compressible
terms, by fixed-point iteration on its frequency.

References
----------
.. [1] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, §7.4–7.5 (baffled piston, radiation impedance).
.. [2] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (wavenumber-domain radiation, radiation resistance).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from auditor.physics.added_mass import angular_weight, bessel_transform, unit_added_mass
from auditor.physics.basis import DiscShapes, ModalBasis, RectangleShapes
from auditor.physics.cache import SolveCache
from auditor.physics.loading_inputs import AIR_DENSITY, SPEED_OF_SOUND
from auditor.physics.loading_inputs import non_negative as _non_negative
from auditor.physics.loading_inputs import positive as _positive
from auditor.physics.quadrature import PointShapes, quadrature_family

if TYPE_CHECKING:
    from auditor.physics.coupled import FollowedMode, ModalSystem

__all__ = [
    "AirImpedance",
    "SpectralGrid",
    "baffled_air_impedance",
    "compressible_correction",
    "compressible_terms",
    "kappa_grid",
]


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


class SpectralGrid:
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
        if active is not None and not isinstance(family, PointShapes):
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
                h = bessel_transform(m, family.zero[b], kappa * a) * family.scale[b, None]
                self.shapes.append(h * math.sqrt((2 * np.pi) ** 2 * a**4 * angular_weight(m)))
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
                    density = (spectrum * spectrum).reshape(len(used), len(self.w_theta),
                                                            len(kappa))
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


def _point_spectra(family: PointShapes, kappa: np.ndarray, count: int):
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
    # The sums in single precision, as the rectangle's sine spectra (twice the speed of
    # double; the phases are stepped in double): about 1e-7 of the density, which enters
    # only the compressible correction and the radiation loss factor.
    weighted = (family.values * family.weights[:, None]).astype(np.float32)         # (P, n)
    n = weighted.shape[1]
    cosines = np.empty((n, count, len(kappa)), dtype=np.float32)
    sines = np.empty((n, count, len(kappa)), dtype=np.float32)
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
            cosines[:, :, node] = (phase.real.astype(np.float32) @ weighted).T
            sines[:, :, node] = (phase.imag.astype(np.float32) @ weighted).T
        j = stop
    return cosines.reshape(n, -1), sines.reshape(n, -1)


def _spectral_density(family, coefficients: np.ndarray, kappa: np.ndarray,
                      cache: SolveCache | None = None) -> np.ndarray:
    """g(κ) for each column of ``coefficients`` (see :class:`SpectralGrid`)."""
    return SpectralGrid(family, kappa, cache=cache).density(coefficients)


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
    supersonic = np.sum(np.where(below, offset * (b - a) + 0.5 * slope * (b * b - a * a), 0.0),
                        axis=1)
    # Above k: intervals clipped to [max(lo, k), hi].
    lo, hi = kappa[None, :-1], kappa[None, 1:]
    offset, slope = offset_all, slope_all
    a, b = np.maximum(lo, k), hi
    above = b > a
    a = np.where(above, a, b)
    root_a = np.sqrt(np.maximum(a * a - k2, 0.0))
    root_b = np.sqrt(np.maximum(b * b - k2, 0.0))
    # ∫ (κ/√(κ²−k²) − 1) = [−k²/(√ + κ)],
    # ∫ κ(κ/√(κ²−k²) − 1) = [−κk²/(2(√ + κ)) + (k²/2) ln(κ + √)]
    w0 = k2 / (root_a + a) - k2 / (root_b + b)
    w1 = (0.5 * (a * k2 / (root_a + a) - b * k2 / (root_b + b))
          + 0.5 * k2 * np.log((b + root_b) / (a + root_a)))
    subsonic = np.sum(np.where(above, offset * w0 + slope * w1, 0.0), axis=1)
    return resistive, subsonic, supersonic, total


@dataclass(frozen=True, eq=False)
class _Compressible:
    """Per-mode compressible terms on one baffled side (quadratic forms)."""

    mass_change: np.ndarray     # ΔM_ψ  [kg]
    resistance: np.ndarray      # R_ψ  [kg/s]


def compressible_terms(kappa, g, incompressible, wavenumber, air_density, speed_of_sound):
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
    family = quadrature_family(basis, cache)
    mass0 = rho * unit_added_mass(basis, cache)
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
        terms = compressible_terms(kappa, _spectral_density(family, columns, kappa, cache),
                                   np.array(incompressible), np.full(columns.shape[1], k), rho, c)
    mass = mass0.copy()
    resistance = np.zeros((n, n))
    mass[np.diag_indices(n)] += terms.mass_change[:n]
    resistance[np.diag_indices(n)] = terms.resistance[:n]
    for index, (p, q) in enumerate(pairs):
        plus, minus = n + 2 * index, n + 2 * index + 1
        mass[p, q] = mass[q, p] = mass0[p, q] + 0.25 * (terms.mass_change[plus]
                                                        - terms.mass_change[minus])
        resistance[p, q] = resistance[q, p] = 0.25 * (terms.resistance[plus]
                                                      - terms.resistance[minus])
    return AirImpedance(mass, resistance, f)


def _same_block(family, p: int, q: int) -> bool:
    if isinstance(family, RectangleShapes):
        return bool(family.m[p] % 2 == family.m[q] % 2 and family.n[p] % 2 == family.n[q] % 2)
    if isinstance(family, DiscShapes):
        return bool(family.order[p] == family.order[q])
    return True


# ============================================================================================
# Per loaded mode: fixed-point iteration with the compressible terms
# ============================================================================================

def kappa_grid(family, top_wavenumber: float) -> np.ndarray:
    """The radial nodes for modes up to the air wavenumber ``top_wavenumber``: reaching
    ``_GRID_REACH`` times it (at least 12/√A); for point quadrature that reach is rounded up
    to 12/√A × 2^(j/2), so solves of one outline at nearby tensions share a grid (and the
    spectra of its shapes on it)."""
    length = math.sqrt(family.area)
    reach = max(_GRID_REACH * top_wavenumber, 12.0 / length)
    if isinstance(family, PointShapes):
        steps = math.ceil(2.0 * math.log2(reach * length / 12.0) - 1e-9)
        reach = 12.0 * 2.0 ** (max(steps, 0) / 2.0) / length
    return _radial_nodes(length, reach)


def compressible_correction(system: ModalSystem, followed: list[FollowedMode],
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
    kappa = kappa_grid(system.family, 2 * np.pi * 1.5 * float(f.max()) / c)
    magnitude = np.abs(shapes)
    active = np.max(magnitude, axis=1) > 1e-5 * np.max(magnitude)
    shapes = np.where(active[:, None], shapes, 0.0)
    grid = SpectralGrid(system.family, kappa, active, cache)
    g = grid.density(shapes)
    unit = system.air_mass / system.air_sides
    incompressible = np.sum(shapes * (unit @ shapes), axis=0)
    sides = system.air_sides
    previous_change = math.inf
    for _ in range(8):
        k0 = 2 * np.pi * np.maximum(f, 1e-9) / c
        with np.errstate(all="ignore"):
            terms = compressible_terms(kappa, g, incompressible, k0, rho, c)
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
        power_mass = np.sum(shapes.real * (unit @ shapes.real)
                            + shapes.imag * (unit @ shapes.imag), axis=0)
        with np.errstate(all="ignore"):
            power = compressible_terms(kappa, g_power, power_mass, k0, rho, c)
        panel_norm = np.array([np.sum(np.abs(item.vector) ** 2) for item in followed])
        kinetic = np.array([item.kinetic_mass for item in followed]) * panel_norm
        eta_rad = sides * power.resistance / (omega * (kinetic + sides * power.mass_change))
    else:
        eta_rad = np.real(sides * terms.resistance) / (omega * np.real(total))
    return f, eta_total + eta_rad, eta_rad
