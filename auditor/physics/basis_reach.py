"""How far the in-vacuo basis reaches, and up to which frequency the loaded modes are complete.

The in-vacuo basis reaches past the band reported (see :func:`choose_basis_limit`; at least
``MIN_BASIS`` modes, at most ``max_basis``); the loaded fundamental then agrees with a basis ten
times larger to better than 0.05 %. A basis longer than ``max_basis`` is cut to its lowest
modes (:func:`truncated_basis`). ``LoadedModes.complete_to_hz`` says up to which frequency no
loaded mode is missing (:func:`coupled_reach`: the basis's reach, less the most its top modes'
air can lower a mode left out); above it :mod:`auditor.physics.uncoupled` loads each further
mode on its own.

References
----------
.. [1] H. P. Baltes and E. R. Hilf, *Spectra of Finite Systems*, Bibliographisches Institut,
   1976 (Weyl's law: the count of modes below f grows as f²).
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Callable

import numpy as np

from auditor.physics.basis import ModalBasis, complete_below, names_at
from auditor.physics.cache import SolveCache
from auditor.physics.loading_inputs import AIR_DENSITY

if TYPE_CHECKING:
    from auditor.physics.coupled import ModalSystem

__all__ = [
    "MIN_BASIS",
    "REACH_MASS_MARGIN",
    "choose_basis_limit",
    "coupled_reach",
    "loading_basis",
    "truncated_basis",
]

#: Fewest in-vacuo modes a loaded solve uses (when the basis function can give them).
MIN_BASIS = 40

#: Margin on the air (and cavity) mass ratio of the modes left out of a coupled basis.
REACH_MASS_MARGIN = 1.25


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


def loading_basis(basis_for: Callable[[float], ModalBasis], fmax: float, max_modes: int,
                  areal_density: float, loaded_sides: int, *, air_density: float,
                  extent: float, max_basis: int, cache: SolveCache) -> ModalBasis:
    """The in-vacuo basis a loaded solve uses: far enough, at least ``MIN_BASIS`` modes, at
    most ``max_basis``.

    Parameters
    ----------
    basis_for : callable (f_limit [Hz]) -> ModalBasis
        The in-vacuo basis with every mode up to ``f_limit``; called at ``fmax`` (a probe),
        then at the limit :func:`choose_basis_limit` gives (and higher, while it holds fewer
        than ``MIN_BASIS`` modes; Weyl's law, count ∝ f², to aim).
    fmax : float  [Hz]
    max_modes : int
        Modes reported (0: every mode up to fmax).
    areal_density : float  [kg/m²]
    loaded_sides : int
        Sides with an air load (open air sides and a sealed cavity); 0: the probe itself.
    air_density : float  [kg/m³]
    extent : float
    max_basis : int
    cache : SolveCache
        Keeps the shapes of a truncated basis (see :func:`truncated_basis`).

    Returns
    -------
    ModalBasis
    """
    probe = basis_for(fmax)
    if loaded_sides == 0:
        return probe
    f_limit = choose_basis_limit(probe, fmax, max_modes, areal_density, loaded_sides,
                                 air_density=air_density, extent=extent, max_basis=max_basis)
    basis = basis_for(f_limit) if f_limit > fmax * (1 + 1e-12) else probe
    # A few modes are never enough for the coupling through the air: reach at least
    # MIN_BASIS modes (Weyl's law, count ∝ f², to aim).
    for _ in range(3):
        if len(basis) >= min(MIN_BASIS, max_basis):
            break
        f_limit *= 1.15 * math.sqrt(MIN_BASIS / max(len(basis), 1))
        basis = basis_for(f_limit)
    if len(basis) > max_basis:
        basis = truncated_basis(basis, max_basis, cache)
    return basis


def coupled_reach(system: ModalSystem, basis: ModalBasis) -> float:
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


def truncated_basis(basis: ModalBasis, count: int, cache: SolveCache) -> ModalBasis:
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
    shape_family = basis.family
    family = None if shape_family is None else cache.families.get_for(
        (shape_family,), ("truncated", keep.tobytes()), lambda: shape_family.subset(keep))

    return ModalBasis(
        region=basis.region,
        frequencies_hz=np.asarray(basis.frequencies_hz)[keep],
        labels=names_at(basis.labels, keep),
        multiplicity=np.asarray(basis.multiplicity)[keep],
        mean=np.asarray(basis.mean)[keep],
        nodal_lines=names_at(basis.nodal_lines, keep),
        evaluate=evaluate_kept,
        complete_to_hz=complete,
        evaluate_some=evaluate_some,
        family=family,
    )
