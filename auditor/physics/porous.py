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

import numpy as np
from scipy import linalg

from auditor.physics.coupled import (
    FollowedMode,
    ModalSystem,
    converged,
    solve_stack,
    stacked_forms,
)

__all__ = ["porous_modes"]


def _porous_roots(part: _Block, frequency: float):
    """Every nonzero root ω of one block's quadratic eigenproblem (``part``, a porous panel's
    symmetry block) with the air's matrices at ``frequency`` [Hz], and their vectors
    z = (q, u).

    With s = iω, the panel ``s² ρsA q + s r (q − u) + K_p q = 0`` (K_p diagonal) and the
    air ``s² M_a u + s r (u − q) + L S Lᵀ u = 0``, the cavity's stiffness held by the few
    modes that act as springs (``ModalSystem.cavity_springs``: at zero frequency the
    uniform mode alone). Divided by s, the air's equation is of first order in u with one
    coordinate ``w = S Lᵀ u / s`` per spring, so the state (q, v = s q, u, w) makes a standard
    eigenproblem of size 3n + J instead of the companion form's 4n (its four blocks on a
    240-mode rectangle: 0.16 s → 0.12 s, one thread): it drops only the n − J roots at
    ω = 0 of the air's rigid motion, which are no panel mode.
    ``s u = M_a⁻¹(r (q − u) − L w)`` and ``s v = (r (s u) − r v − K_p q)/ρsA``.
    """
    n = len(part.block)
    springs, stiffness, cavity_mass = part.system.cavity_springs(frequency, part.block)
    j = len(stiffness)
    r, m = part.r, part.panel_mass
    factor = linalg.cho_factor(part.air_mass + cavity_mass)
    inverse = linalg.cho_solve(factor, np.eye(n))                            # M_a⁻¹
    through = linalg.cho_solve(factor, springs)                              # M_a⁻¹ L
    q, v, u, w = (slice(0, n), slice(n, 2 * n), slice(2 * n, 3 * n),
                  slice(3 * n, 3 * n + j))
    operator = np.zeros((3 * n + j, 3 * n + j), dtype=complex)
    operator[q, v] = np.eye(n)
    operator[u, q] = r * inverse                                             # s u
    operator[u, u] = -r * inverse
    operator[u, w] = -through
    operator[v, q] = (r * operator[u, q] - np.diag(part.panel_stiffness)) / m  # s v
    operator[v, v] = -(r / m) * np.eye(n)
    operator[v, u] = (r / m) * operator[u, u]
    operator[v, w] = (r / m) * operator[u, w]
    operator[w, u] = stiffness[:, None] * springs.T                          # s w
    with np.errstate(all="ignore"):
        s, vectors = linalg.eig(operator, check_finite=False)
    finite = np.isfinite(s)
    z = np.concatenate([vectors[q], vectors[u]])
    return -1j * s[finite], z[:, finite]


class _Block:
    """The panel-and-air operator of one symmetry block, by its parts.

    ``T(ω) = [[P(ω), −iωr I], [−iωr I, Q(ω)]]`` on z = (q, u), with the panel's part
    diagonal, ``P = K_s(1 + iη) − ω² ρs A + iωr`` (the in-vacuo modal stiffness is diagonal
    and the structural mass ``ρs A I``), and the air's ``Q = K_cav(ω) − ω²(M_air + M_cav(ω))
    + iωr``, r = rA the sheet's resistance: ``T z = b`` is solved through the n × n Schur
    complement ``Q + ω²r²P⁻¹`` instead of the 2n × 2n operator (an eighth of the work).
    """

    def __init__(self, system: ModalSystem, block) -> None:
        self.system, self.block = system, block
        self.panel_stiffness = (np.diag(system.stiffness)[block]
                                * (1 + 1j * system.eta_structure))        # (n,)
        self.panel_mass = system.structural_mass                           # ρs A
        self.air_mass = system.air_mass[np.ix_(block, block)]               # (n, n)
        if system.resistance is None:   # only a porous panel's system is solved here
            raise ValueError("the panel is not porous: it has no airflow resistance")
        self.r = system.resistance

    def air_matrices(self, frequencies_hz: np.ndarray):
        """The air's stiffness and total mass at each frequency [Hz], (k, n, n)."""
        springs, masses = self.system.cavity_stack(np.asarray(frequencies_hz, float),
                                                   self.block)
        return springs, self.air_mass[None] + masses

    def solve(self, w: np.ndarray, springs, masses, bq: np.ndarray, bu: np.ndarray):
        """``T(w_k) y_k = b_k`` for each k (complex ω ``w`` (k,), right sides (k, n))."""
        r = self.r
        p = (self.panel_stiffness[None, :] - (w**2)[:, None] * self.panel_mass
             + 1j * w[:, None] * r)                                         # (k, n)
        n = bq.shape[1]
        schur = springs - (w**2)[:, None, None] * masses
        schur = schur + (1j * w * r)[:, None, None] * np.eye(n)[None]
        index = np.arange(n)
        schur[:, index, index] += (w**2)[:, None] * r * r / p
        yu = solve_stack(schur, (bu + 1j * w[:, None] * r * bq / p)[:, :, None])[:, :, 0]
        yq = (bq + 1j * w[:, None] * r * yu) / p
        return yq, yu


def _quadratic_coefficients(part: _Block, springs, masses, q: np.ndarray, u: np.ndarray):
    """``zᵀMz``, ``zᵀCz`` and ``zᵀKz`` of each z = (q, u) (rows), the air's matrices given."""
    mass = part.panel_mass * np.sum(q * q, axis=1) + stacked_forms(u, masses, u)
    damping = part.r * np.sum((q - u) ** 2, axis=1)
    stiffness = (np.sum(q * part.panel_stiffness[None, :] * q, axis=1)
                 + stacked_forms(u, springs, u))
    return mass, damping, stiffness


#: How closely each root is followed, relative to itself (1e-8 in ω², as every followed mode).
_FOLLOWED_TO = 5e-9


def _refine_porous(part: _Block, vectors: np.ndarray, roots: np.ndarray,
                   iterations: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """Follow roots as the cavity's matrices change with frequency: nonlinear inverse
    iteration z ← T(ω)⁻¹ T'(ω) z, ω the root of the scalar quadratic zᵀT(ω)z = 0 nearest
    the last (the Rayleigh functional). A root found at zero frequency is kept when its
    iteration does not settle within 25 % of it.

    A root is followed to 5e-9 of itself, the accuracy of every other followed mode (1e-8 in
    ω², :func:`auditor.physics.coupled.follow_modes`), with the same test of convergence
    (:func:`auditor.physics.coupled.converged`).

    All roots of one block at once (``vectors`` (2n, k), ``roots`` (k,)): each iteration
    takes the air's matrices at every root's frequency and solves them as one stack
    (through :class:`_Block`).
    """
    n = len(part.block)
    z, omega = vectors.astype(complex), roots.astype(complex)
    start_z, start = z.copy(), omega.copy()
    active = np.arange(len(omega))
    last = np.full(len(omega), np.inf)      # each root's last relative change
    for _ in range(iterations):
        if len(active) == 0:
            break
        w = omega[active]
        springs, masses = part.air_matrices(np.maximum(w.real, 0.0) / (2 * np.pi))
        xq, xu = z[:n, active].T, z[n:, active].T                           # (k, n)
        # T'(ω) x = (−2ω M + iC) x
        relative = part.r * (xq - xu)
        bq = -2.0 * w[:, None] * part.panel_mass * xq + 1j * relative
        bu = (-2.0 * w[:, None] * (masses @ xu[:, :, None])[:, :, 0] - 1j * relative)
        # Near convergence the operators are singular by design (inverse iteration); one
        # that is exactly singular gives NaN, and its root keeps its last iterate.
        with np.errstate(all="ignore"):
            yq, yu = part.solve(w, springs, masses, bq, bu)
        y = np.concatenate([yq, yu], axis=1)
        norm = np.linalg.norm(y, axis=1)
        moving = np.all(np.isfinite(y), axis=1) & (norm > 0)
        y = y[moving] / norm[moving, None]
        # the quadratic −(zᵀMz) ω² + i(zᵀCz) ω + zᵀKz = 0, the root nearest the last
        m, d, k = _quadratic_coefficients(part, springs[moving], masses[moving],
                                          y[:, :n], y[:, n:])
        a, b, c = -m, 1j * d, k
        root = np.sqrt(b * b - 4 * a * c)
        first, second = (-b + root) / (2 * a), (-b - root) / (2 * a)
        previous = w[moving]
        new = np.where(np.abs(first - previous) <= np.abs(second - previous), first, second)
        index = active[moving]
        z[:, index] = y.T
        omega[index] = new
        change = np.abs(new - previous) / np.abs(new)
        done = converged(change, last[index], _FOLLOWED_TO)
        last[index] = change
        active = index[~done]
    settled = (omega.real > 0) & (np.abs(omega - start) <= 0.25 * np.abs(start))
    z[:, ~settled], omega[~settled] = start_z[:, ~settled], start[~settled]
    return z, omega


def porous_modes(system: ModalSystem, blocks, f_reach: float,
                 count: int | None) -> list[FollowedMode]:
    """The panel modes of a porous panel up to ``f_reach`` [Hz] (at most ``count``, when
    given).

    Every root of the panel-and-air problem (air's matrices at zero frequency) is found at
    once, so none is missed and none is confused with the relaxation roots (air leaking
    through the sheet, ω on the imaginary axis) or with the air's own resonances; those are
    set aside (a panel mode moves the panel at least as much as the air moves relative to
    it or to rest). Each panel root is then followed as the air's matrices change with
    frequency.
    """
    n = system.stiffness.shape[0]
    parts = [_Block(system, block) for block in blocks]
    found = []        # (ω at zero frequency, block's part, z) of every panel root in reach
    for part in parts:
        size = len(part.block)
        omega, z = _porous_roots(part, 0.0)
        q, u = z[:size], z[size:]
        panel = np.linalg.norm(q, axis=0)
        other = np.minimum(np.linalg.norm(u, axis=0), np.linalg.norm(u - q, axis=0))
        lam = omega**2
        keep = np.flatnonzero((omega.real > 0) & (panel > other) & (lam.real > 0)
                              & (omega.real <= 2 * np.pi * f_reach * 1.05))
        found += [(complex(omega[i]), part, z[:, i]) for i in keep]
    # the lowest ``count`` over all blocks (the caller's count has its own margin)
    found.sort(key=lambda item: item[0].real)
    found = found[:count]
    # the cavity's matrices are wanted near these roots (with a margin)
    system.series_reach_hz = 1.25 * max((item[0].real for item in found), default=0.0) \
        / (2 * np.pi)
    followed: list[FollowedMode | None] = [None] * len(found)
    for part in parts:
        mine = [j for j, item in enumerate(found) if item[1] is part]
        if not mine:
            continue
        block, size = part.block, len(part.block)
        vectors = np.column_stack([found[j][2] / np.linalg.norm(found[j][2]) for j in mine])
        vectors, roots = _refine_porous(part, vectors, np.array([found[j][0] for j in mine]))
        # Unit panel norm, dominant panel coordinate real and positive.
        q = vectors[:size]
        dominant = q[np.argmax(np.abs(q), axis=0), np.arange(q.shape[1])]
        vectors = vectors * (np.abs(dominant) / dominant) / np.linalg.norm(q, axis=0)
        q, u = vectors[:size].T, vectors[size:].T                          # (k, n)
        springs, masses = part.air_matrices(roots.real / (2 * np.pi))
        _, _, numerator = _quadratic_coefficients(part, springs, masses, q, u)
        # Kinetic mass of the panel and the air moving with it (radiation loss factor).
        kinetic = (part.panel_mass * np.sum(np.abs(q) ** 2, axis=1)
                   + np.real(stacked_forms(np.conj(u), masses.real, u)))
        for i, j in enumerate(mine):
            full, air = np.zeros(n, complex), np.zeros(n, complex)
            full[block], air[block] = q[i], u[i]
            root = complex(roots[i])
            followed[j] = FollowedMode(math.sqrt(max((root**2).real, 0.0)) / (2 * np.pi),
                                       full, air, complex(numerator[i]),
                                       complex(numerator[i]) / root**2, float(kinetic[i]))
    return followed  # type: ignore[return-value]
