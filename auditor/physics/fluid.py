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

The steps of :func:`loaded_modes`, each in a module of its own
------------------------------------------------------------------
1. the in-vacuo basis, far enough and not too long (:mod:`auditor.physics.basis_reach`);
2. the modal system: the basis's quadrature family (:mod:`auditor.physics.quadrature`), the
   incompressible added mass (:mod:`auditor.physics.added_mass`) and the sealed cavity
   (:mod:`auditor.physics.cavity`), assembled in :mod:`auditor.physics.coupled`;
3. the generalised eigen-solve with incompressible air and the cavity's low-frequency limit,
   then each mode followed on the frequency-dependent problem (:mod:`auditor.physics.coupled`;
   a porous sheet over a sealed cavity: :mod:`auditor.physics.porous`);
4. the compressible correction and radiation loss of each mode, by fixed-point iteration on
   its frequency (:mod:`auditor.physics.radiation`);
5. the modes up to fmax, the frequency up to which none is missing
   (:func:`auditor.physics.basis_reach.coupled_reach`), and the model in words
   (:mod:`auditor.physics.loading_description`).

For air on open sides only, the incompressible eigenproblem is solved once and each mode's
frequency and loss factor are corrected by its Rayleigh quotient with the compressible terms;
with a sealed cavity or a porous sheet, each mode is followed by Rayleigh-quotient iteration
on the frequency-dependent (complex, for porosity) problem. The baffle is infinite and rigid,
cavity walls are rigid and the cavity air has no absorption. A porous sheet's flow resistance
acts through the total impedance of the air on both sides; its vectors are the real part of
complex modes.

References
----------
.. [1] Lord Rayleigh, *The Theory of Sound*, vol. II, Macmillan, 1896, §278 (the Rayleigh
   integral for a baffled plane surface).
.. [2] F. Fahy and P. Gardonio, *Sound and Structural Vibration*, 2nd ed., Academic Press,
   2007 (wavenumber-domain radiation, radiation resistance, fluid loading of plates).
.. [3] E. H. Dowell, G. F. Gorman and D. A. Smith, "Acoustoelasticity: general theory,
   acoustic natural modes and forced response to sinusoidal excitation, including
   comparisons with experiment", J. Sound Vib. 52 (1977); E. H. Dowell, *Aeroelasticity of
   Plates and Shells*, Noordhoff, 1975.
.. [4] U. Ingard, *Notes on Acoustics*, Infinity Science Press, 2008 (flow resistance of
   porous screens in series with an air load).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from auditor.physics.added_mass import baffled_added_mass
from auditor.physics.basis import ModalBasis, complete_below, mode_names
from auditor.physics.basis_reach import choose_basis_limit, coupled_reach, loading_basis
from auditor.physics.cache import SolveCache
from auditor.physics.cavity import cavity_dynamic_mass, mass_air_mass_frequency
from auditor.physics.coupled import (
    assemble_system,
    distinct_modes,
    followed_modes,
    frequency_independent_solution,
    open_sided_modes,
    real_mode_vectors,
)
from auditor.physics.loading_description import describe_loading, describe_model
from auditor.physics.loading_inputs import AIR_DENSITY, SPEED_OF_SOUND, LoadingInputError
from auditor.physics.loading_inputs import non_negative as _non_negative
from auditor.physics.loading_inputs import positive as _positive
from auditor.physics.materials import structural_loss_factor
from auditor.physics.porous import porous_modes
from auditor.physics.radiation import AirImpedance, baffled_air_impedance, compressible_correction

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
        Label of the dominant basis mode, marked b, c, … on the second and later modes of
        one dominant mode (:func:`auditor.physics.basis.mode_names`; ascending frequency).
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
        raise LoadingInputError(
            f"plenum side must be 'air', 'sealed' or 'none', got {plenum_side!r}")
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
            raise LoadingInputError(
                f"max_modes must be a whole number ≥ 0 or None, got {max_modes!r}")
        max_modes = int(max_modes)
    # candidates followed beyond the count reported (None: every candidate)
    spare = None if max_modes is None else max_modes + max_modes // 2 + 8
    cache = SolveCache() if cache is None else cache

    # 1. the in-vacuo basis
    basis = loading_basis(basis_for, limit, max_modes or 0, rho_s, loaded_sides,
                          air_density=rho, extent=basis_extent, max_basis=max_basis,
                          cache=cache)
    model = describe_model(room_side, plenum_side, depth, resistance, material, open_mesh)
    if loaded_sides == 0 or len(basis) == 0:
        return _in_vacuo(basis, limit, max_modes, eta, model)
    # 2. the modal system: panel, air, cavity, porous sheet
    system = assemble_system(basis, rho_s, air_sides, depth, resistance, rho, c, eta, cache)
    # 3. the eigen-solve, then each mode followed as the air's terms change with frequency
    blocks = system.family.blocks()
    open_sides_only = system.cavity is None and system.resistance is None
    values, vectors = frequency_independent_solution(
        system, blocks, cache, 1.05 * limit if open_sides_only else None)
    frequencies = np.sqrt(np.maximum(values, 0.0)) / (2 * np.pi)
    if open_sides_only:
        followed = open_sided_modes(system, basis, vectors, frequencies, limit, max_modes)
    elif system.resistance is not None and system.cavity is not None:
        followed = porous_modes(system, blocks, limit, spare)
    else:
        followed = followed_modes(system, blocks, vectors, frequencies, limit, spare)
    # 4. the compressible correction and radiation loss
    f, eta_total, eta_rad = compressible_correction(system, followed, cache)
    # 5. the modes up to fmax, ascending, and how far the list is complete
    if open_sides_only:
        unique = np.arange(len(followed))
    else:
        unique = distinct_modes(f, [item.vector for item in followed])
    order = unique[np.argsort(f[unique], kind="stable")]
    order = order[f[order] <= limit]
    complete = min(limit, coupled_reach(system, basis),
                   complete_below(f[order], len(order[:max_modes])))
    order = order[:max_modes]
    q = real_mode_vectors(followed, order, len(basis))
    return _assemble(basis, f[order], eta_total[order], eta_rad[order], q, model, complete)


def _in_vacuo(basis: ModalBasis, fmax: float, max_modes: int | None, loss_factor: float,
              model: str) -> LoadedModes:
    """The in-vacuo modes up to ``fmax`` [Hz] (the lowest ``max_modes``), each its own basis
    mode, with the structural ``loss_factor`` only."""
    n = len(basis)
    vacuum = np.asarray(basis.frequencies_hz)
    below = np.flatnonzero(vacuum <= fmax)
    keep = below[:max_modes]
    complete = min(fmax, basis.complete_to, complete_below(vacuum[below], len(keep)))
    vectors = np.zeros((n, len(keep)))
    vectors[keep, np.arange(len(keep))] = 1.0
    return _assemble(basis, vacuum[keep], np.full(len(keep), loss_factor), np.zeros(len(keep)),
                     vectors, model, complete)


def _dominant_modes(basis_hz: np.ndarray, vectors: np.ndarray) -> np.ndarray:
    """The basis mode each loaded mode (column of ``vectors``) is named after: its largest
    coordinate, except within a group of degenerate basis modes (in-vacuo frequencies [Hz]
    equal to 1e-9, such as a square's (m, n) and (n, m)). The air mixes such a group's modes
    evenly, and rounding would decide which the mixed modes are named after, often the same
    one twice; so the loaded modes named after a group take its members one each, the
    largest share |q|² first. Loaded modes beyond the group's size keep their own largest
    coordinate (a cavity may split a panel mode in two), and so do modes mixed with a
    neighbour that is near but not exactly degenerate (see DEVELOPERS.md, Conventions)."""
    if vectors.shape[1] == 0:
        return np.zeros(0, dtype=int)
    dominant = np.argmax(np.abs(vectors), axis=0)
    names, counts = np.unique(dominant, return_counts=True)
    done: set[int] = set()
    for name in names[counts > 1].tolist():
        group = np.flatnonzero(np.abs(basis_hz - basis_hz[name]) <= 1e-9 * basis_hz[name])
        if len(group) < 2 or int(group[0]) in done:
            continue
        done.add(int(group[0]))
        loaded = np.flatnonzero(np.isin(dominant, group))
        share = np.abs(vectors[np.ix_(group, loaded)]) ** 2          # (members, loaded)
        for _ in range(min(len(group), len(loaded))):
            member, mode = np.unravel_index(int(np.argmax(share)), share.shape)
            dominant[loaded[mode]] = group[member]
            share[member, :] = -1.0
            share[:, mode] = -1.0
    return dominant


def _assemble(basis: ModalBasis, frequencies, eta_total, eta_rad, vectors, model,
              complete: float = math.inf) -> LoadedModes:
    """The :class:`LoadedModes` record of modes given by their basis coordinates ``vectors``
    (n_basis, k), with their dominant basis mode and uniform-pressure participation."""
    vectors = np.asarray(vectors, float)
    vectors = vectors.reshape(len(basis), -1) if vectors.size else np.zeros((len(basis), 0))
    dominant = _dominant_modes(np.asarray(basis.frequencies_hz, float), vectors)
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
        labels=tuple(mode_names(basis.labels, dominant)),
        basis=basis,
        model=model,
        radiation_loss_factor=np.asarray(eta_rad, float),
        complete_to_hz=float(complete),
    )
