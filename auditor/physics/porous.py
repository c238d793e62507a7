"""A porous sheet over a sealed cavity: the panel and air motions solved together.

A porous fabric or open mesh of specific airflow resistance r [Pa·s/m] lets air through: the
air on both sides moves with the velocity ``v − Δp/r``. Over open sides the air can be
eliminated (its impedance in series with the sheet's, :mod:`auditor.physics.coupled`). Over a
sealed cavity that elimination makes the cavity's stiffness a negative mass, and iterating on
frequency then runs off to the relaxation roots of air leaking through the sheet; so there the
panel and air coordinates are solved together, as a quadratic eigenproblem (every root at
once), and each panel root is then followed as the cavity's terms change with frequency. Its
frequencies are those of the complex roots, ``√Re(ω²)/2π``; its vectors are the real part of
complex modes.

References
----------
.. [1] U. Ingard, *Notes on Acoustics*, Infinity Science Press, 2008 (flow resistance of
   porous screens in series with an air load).
.. [2] E. H. Dowell, G. F. Gorman and D. A. Smith, J. Sound Vib. 52 (1977) (cavity coupling).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from scipy import linalg

from auditor.physics.coupled import FollowedMode, ModalSystem

__all__ = ["porous_modes"]


def _porous_operator(system: ModalSystem, block, frequency: float):
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
    stiffness[panel, panel] = (system.stiffness[np.ix_(block, block)]
                               * (1 + 1j * system.eta_structure))
    stiffness[air_part, air_part] = k_cav
    mass = np.zeros((2 * size, 2 * size))
    mass[panel, panel] = system.structural_mass * np.eye(size)
    mass[air_part, air_part] = system.air_mass[np.ix_(block, block)] + m_cav
    eye = system.resistance * np.eye(size)
    damping = np.block([[eye, -eye], [-eye, eye]])
    return stiffness, mass, damping


def _porous_roots(system: ModalSystem, block, frequency: float):
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


def _porous_operators(system: ModalSystem, block, frequencies: np.ndarray):
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


def _refine_porous(system: ModalSystem, block, vectors: np.ndarray, roots: np.ndarray,
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


def porous_modes(system: ModalSystem, blocks, f_reach: float, count: int) -> list[FollowedMode]:
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
    for block in blocks:
        mine = [j for j, item in enumerate(found) if item[1] is block]
        if mine:
            vectors = np.column_stack([found[j][2] / np.linalg.norm(found[j][2]) for j in mine])
            vectors, roots = _refine_porous(system, block, vectors,
                                            np.array([found[j][0] for j in mine]))
            refined.update({j: (vectors[:, i], complex(roots[i])) for i, j in enumerate(mine)})
    for j, (_, block, _) in enumerate(found):
        size = len(block)
        vector, root = refined[j]
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
        followed.append(FollowedMode(math.sqrt(max((root**2).real, 0.0)) / (2 * np.pi),
                                     full, air, numerator, numerator / root**2, kinetic))
    return followed
