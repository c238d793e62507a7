"""Finite-element modes of tensioned membranes of any polygonal outline, with cut-outs.

The clamped membrane under (possibly orthotropic) tension,

    −(Tx ∂²w/∂x² + Ty ∂²w/∂y²) = ρs ω² w   in the panel,   w = 0 on the outline and on
    every cut-out edge,

is solved with quadratic triangles (:mod:`auditor.physics.quadratic_elements`, scikit-fem's
``ElementTriP2``) on a mesh graded toward re-entrant corners, where the modes are singular
(``w ~ r^(π/ω)`` at a corner of interior angle ω), so that the eigenvalues keep the quadratic
element's fourth-order convergence (:mod:`auditor.physics.polygon_mesh`). This module holds
the solves and the public bases: the eigenproblem is solved with
``scipy.sparse.linalg.eigsh`` in shift-invert mode. ``MeshSettings``, ``ACCURACY`` and
``mesh_polygon`` are importable from here as well.

Orthotropy is removed by a change of coordinates (y' = y·√(Tx/Ty)), size, tension and
density by scaling (ω² = (Tx/ρs L²)·λ with λ the eigenvalue of the normalised shape), so one
solve serves every panel with the same normalised shape and tension ratio
(:func:`auditor.physics.geometry.normalised_shape_key`); a caller's
:class:`auditor.physics.cache.SolveCache` keeps those solves (keyed on the shape, the mesh
accuracy and the number of modes, exactly) when one is passed.

:func:`neumann_modes` gives the rigid-wall (Neumann) modes of the outline, for the air in a
sealed cavity beneath a polygonal panel.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import eigsh

from auditor.model import CircleCutout, Cutout
from auditor.physics.basis import ModalBasis, PolygonRegion, complete_below
from auditor.physics.cache import SolveCache, shared_size
from auditor.physics.geometry import (
    as_vertices,
    circle_polygon_sides,
    circle_to_polygon,
    normalised_shape_key,
    outline_problems,
    shape_normalisation,
    signed_area,
)
from auditor.physics.polygon_mesh import (
    ACCURACY,
    SIZE_GRADATION,
    MeshSettings,
    mesh_polygon,
    triangle_areas,
)
from auditor.physics.quadratic_elements import QuadraticSpace, quadratic_space

__all__ = [
    "MeshSettings",
    "ACCURACY",
    "MAX_MODES",
    "SIZE_GRADATION",
    "mesh_polygon",
    "polygon_membrane_basis",
    "neumann_modes",
]

#: Most modes one call may ask for (fmax is refused beyond it rather than truncated).
MAX_MODES = 400
#: Modes returned when neither ``fmax`` nor ``n_modes`` is given.
DEFAULT_MODES = 12

# --------------------------------------------------------------------------------------
# The eigen-solve
# --------------------------------------------------------------------------------------
#: Seed of the start vector of the Lanczos iteration (any fixed value).
_START_SEED = 20240611


def _lowest_eigenpairs(
    stiffness, mass_matrix, count: int, shift: float
) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``count`` eigenpairs of K x = λ M x (shift-invert about ``shift``)."""
    size = stiffness.shape[0]
    if count >= size - 1 or size <= 400:
        values, vectors = scipy.linalg.eigh(stiffness.toarray(), mass_matrix.toarray())
        return values[:count], vectors[:, :count]
    # A fixed start vector: ARPACK's default is random, and its generator's state carries over
    # from call to call, so results would depend (in the last digits) on the solves before.
    # Pseudo-random (not, say, all ones) so that it has a part along every mode, whatever the
    # symmetry of the shape.
    start = np.random.default_rng(_START_SEED).standard_normal(size)
    # A Lanczos basis of 1.5 times the modes wanted (ARPACK's default is twice): measured
    # 2 to 4 times faster for 64 to 128 modes, the orthogonalisation dominating.
    basis_size = min(size - 1, max(count + count // 2, count + 20))
    values, vectors = eigsh(stiffness, k=count, M=mass_matrix, sigma=shift, which="LM",
                            v0=start, ncv=basis_size)
    order = np.argsort(values)
    return values[order], vectors[:, order]


def _weyl_eigenvalue(index: int, area: float, boundary_length: float, dirichlet: bool) -> float:
    """Estimated ``index``-th eigenvalue from the two-term Weyl law  [1/m²].

    References
    ----------
    N(λ) ≈ Aλ/(4π) ∓ L√λ/(4π) (Dirichlet −, Neumann +): H. P. Baltes, E. R. Hilf, Spectra of
    Finite Systems (Bibliographisches Institut, 1976); V. Ivrii, Funct. Anal. Appl. 14 (1980).
    """
    p = boundary_length if dirichlet else -boundary_length
    root = (p + math.sqrt(max(p * p + 16.0 * math.pi * area * index, 0.0))) / (2.0 * area)
    return root * root


# --------------------------------------------------------------------------------------
# The normalised solve (kept in the caller's SolveCache)
# --------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class _NormalisedSolution:
    space: QuadraticSpace
    eigenvalues: np.ndarray  # [-] for the normalised, stretched shape (T = ρs = 1)
    coefficients: np.ndarray  # (dofs, n), unit mean square
    mean: np.ndarray
    nodal_domains: tuple[int, ...]
    stretch: float  # y_solve = y_normalised * stretch


def _key_geometry(key: tuple, stretch: float, settings: MeshSettings, max_edge: float):
    """Outline and holes of a normalised key, in the (stretched) solve coordinates."""
    outline = np.asarray(key[0], float) * np.array([1.0, stretch])
    holes, polygonal = [], []
    for hole in key[1]:
        if hole[0] == "circle":
            _, x, y, diameter = hole
            ring = circle_to_polygon(
                CircleCutout(x, y, diameter),
                sides=circle_polygon_sides(diameter, 0.5 * max_edge, 24),
            )
            polygonal.append(False)
        else:
            ring = np.asarray(hole[1], float)
            polygonal.append(True)
        holes.append(ring * np.array([1.0, stretch]))
    return outline, holes, polygonal


def _bucket(count: int) -> int:
    size = 16
    while size < count:
        size *= 2
    return size


def _mesh_edge_for(
    count: int, area: float, boundary_length: float, settings: MeshSettings, dirichlet: bool
) -> float:
    """Largest element edge that resolves the first ``count`` modes  [normalised units]."""
    highest = _weyl_eigenvalue(count, area, boundary_length, dirichlet)
    wavelength = 2.0 * math.pi / math.sqrt(max(highest, 1e-12))
    edge = min(settings.max_edge * math.sqrt(area), wavelength / settings.elements_per_wavelength)
    # quantise (to quarter-octaves) so nearby requests share a mesh
    return 2.0 ** (math.floor(4.0 * math.log2(edge)) / 4.0)




def _normalised_dirichlet_solution(key: tuple, accuracy: str, count: int) -> _NormalisedSolution:
    settings = ACCURACY[accuracy]
    stretch = 1.0 / math.sqrt(key[2])  # y' = y √(Tx/Ty)
    outline0 = np.asarray(key[0], float) * np.array([1.0, stretch])
    area = abs(signed_area(outline0))
    boundary_length = float(np.sum(np.hypot(*(np.roll(outline0, -1, axis=0) - outline0).T)))
    max_edge = _mesh_edge_for(count, area, boundary_length, settings, True)
    outline, holes, polygonal = _key_geometry(key, stretch, settings, max_edge)
    space = quadratic_space(outline, holes, polygonal, max_edge, settings)
    free = np.setdiff1d(np.arange(space.dof_count), space.boundary_dofs)
    count = min(count, len(free))
    values, vectors = _lowest_eigenpairs(
        space.stiffness[free][:, free], space.mass[free][:, free], count, 0.0
    )
    coefficients = np.zeros((space.dof_count, count))
    coefficients[free] = vectors
    return _finish(space, values, coefficients, stretch)


def _finish(
    space: QuadraticSpace, values: np.ndarray, coefficients: np.ndarray, stretch: float,
    nodal_domains: bool = True,
) -> _NormalisedSolution:
    mean_square = np.einsum("im,im->m", coefficients, space.mass @ coefficients) / space.area
    coefficients = coefficients / np.sqrt(mean_square)
    integral = np.ones(space.dof_count) @ (space.mass @ coefficients)
    mean = integral / space.area
    # a fixed sign convention: positive mean, or positive largest value when the mean is ~0
    flip = np.where(
        np.abs(mean) > 1e-6,
        np.sign(mean),
        np.sign(coefficients[np.argmax(np.abs(coefficients), axis=0),
                             np.arange(coefficients.shape[1])]),
    )
    flip[flip == 0] = 1.0
    coefficients = coefficients * flip
    mean = mean * flip
    domains = space.nodal_domain_counts(coefficients) if nodal_domains else ()
    return _NormalisedSolution(space, np.maximum(values, 0.0), coefficients, mean, domains, stretch)


def _dirichlet_solution(key: tuple, accuracy: str, wanted: int,
                        cache: SolveCache) -> _NormalisedSolution:
    """The normalised solve with at least ``wanted`` modes: the mesh and the number of modes
    depend on ``wanted`` only through its bucket (a power of two), never on earlier calls."""
    count = _bucket(wanted)
    return cache.dirichlet.get((key, accuracy, count),
                               lambda: _normalised_dirichlet_solution(key, accuracy, count))


# --------------------------------------------------------------------------------------
# Public entry points
# --------------------------------------------------------------------------------------
def _check_positive(**values: float) -> None:
    for name, value in values.items():
        number = isinstance(value, (int, float, np.floating, np.integer))
        if not (number and math.isfinite(value) and value > 0):
            raise ValueError(f"{name.replace('_', ' ')} must be a positive number (got {value!r})")


def polygon_membrane_basis(
    outline: Sequence[Sequence[float]],
    cutouts: Sequence[Cutout],
    tension_x: float,
    tension_y: float,
    areal_density: float,
    fmax: float | None = None,
    n_modes: int | None = None,
    *,
    accuracy: str = "default",
    cache: SolveCache | None = None,
) -> ModalBasis:
    """In-vacuo modes of a clamped polygonal membrane with fixed-edge cut-outs.

    Parameters
    ----------
    outline : sequence of (x, y)  [m]
        Panel outline in the schedule's coordinates, either orientation.
    cutouts : sequence of CircleCutout or PolygonCutout  [m]
        Holes whose edges are fixed (luminaires, diffusers, sprinklers).
    tension_x, tension_y : float  [N/m]
        Membrane tension per unit length acting along x and along y.
    areal_density : float  [kg/m²]
    fmax : float, optional  [Hz]
        Return every mode up to this frequency (at least the fundamental).
    n_modes : int, optional
        Return at most this many modes. With neither given, the lowest ``DEFAULT_MODES``.
    accuracy : {"coarse", "default", "fine"}
        Mesh settings (see ``ACCURACY``).
    cache : SolveCache, optional
        Keeps the normalised solve for later calls with the same shape (any size, position,
        tension and density at the same tension ratio); without one nothing is kept. The
        result does not depend on what the cache already holds.

    Returns
    -------
    ModalBasis
        Frequencies ascending [Hz]; labels "#1", "#2", ...; multiplicity 1 for each mode
        (near-degenerate modes are kept apart); ``mean`` = ∫φ dA / A with ∫φ² dA = A over
        the meshed area; nodal lines as ``(("nodal domains", count),)``; ``evaluate``
        interpolates the quadratic-element shapes (0 outside the panel and in cut-outs);
        the region is a ``PolygonRegion`` carrying the corner-node triangulation. Circular
        cut-outs are meshed as inscribed regular polygons (their area slightly smaller).

    Raises
    ------
    ValueError
        With a plain-language message when the geometry is invalid (see
        :func:`auditor.physics.geometry.outline_problems`), a tension or density is not
        positive, or more than ``MAX_MODES`` modes would be needed.

    Notes
    -----
    Bending stiffness is not modelled here. With y' = y·√(Tx/Ty) the operator becomes
    Tx·(−∇'²), so the modes follow from the isotropic Laplacian on the stretched shape; with
    the shape normalised by a length L, ω² = Tx·λ/(ρs·L²), so one solve (kept in ``cache``)
    serves every panel sharing the normalised shape and the ratio Ty/Tx (rounded to 6
    significant digits).

    References
    ----------
    Membrane equation: P. M. Morse, K. U. Ingard, Theoretical Acoustics (McGraw-Hill, 1968),
    §5.2. Quadratic finite elements for the Laplace eigenproblem and their convergence:
    G. Strang, G. J. Fix, An Analysis of the Finite Element Method (Prentice-Hall, 1973), ch. 6.
    Shift-invert Lanczos: R. B. Lehoucq, D. C. Sorensen, C. Yang, ARPACK Users' Guide
    (SIAM, 1998).
    """
    if accuracy not in ACCURACY:
        raise ValueError(f"accuracy must be one of {', '.join(ACCURACY)} (got {accuracy!r})")
    _check_positive(tension_x=tension_x, tension_y=tension_y, areal_density=areal_density)
    if fmax is not None:
        _check_positive(fmax=fmax)
    if n_modes is not None and (int(n_modes) != n_modes or n_modes < 1):
        raise ValueError(f"number of modes must be a whole number of at least 1 (got {n_modes!r})")
    problems = outline_problems(outline, cutouts)
    if problems:
        raise ValueError("; ".join(problems))

    cache = SolveCache() if cache is None else cache
    ratio = float(tension_y) / float(tension_x)
    key = normalised_shape_key(outline, cutouts, ratio)
    normalisation = shape_normalisation(outline)
    length = normalisation.length
    scale = float(tension_x) / (float(areal_density) * length**2)  # ω² = scale · λ

    stretch = 1.0 / math.sqrt(key[2])
    outline0 = np.asarray(key[0], float) * np.array([1.0, stretch])
    area0 = abs(signed_area(outline0))
    perimeter0 = float(np.sum(np.hypot(*(np.roll(outline0, -1, axis=0) - outline0).T)))

    if fmax is None:
        wanted = int(n_modes) if n_modes is not None else DEFAULT_MODES
        if wanted > MAX_MODES:
            raise ValueError(f"at most {MAX_MODES} modes can be computed (asked for {wanted})")
        solution = _dirichlet_solution(key, accuracy, wanted, cache)
        keep = min(wanted, len(solution.eigenvalues))
    else:
        lambda_max = (2.0 * math.pi * float(fmax)) ** 2 / scale
        estimate = (area0 * lambda_max / (4.0 * math.pi)
                    - perimeter0 * math.sqrt(lambda_max) / (4.0 * math.pi))
        wanted = max(1, int(1.2 * estimate) + 4)
        while True:
            if wanted > MAX_MODES:
                raise ValueError(
                    f"modes up to {fmax:.4g} Hz need more than {MAX_MODES}; "
                    "lower the frequency limit"
                )
            solution = _dirichlet_solution(key, accuracy, wanted, cache)
            below = int(np.count_nonzero(solution.eigenvalues <= lambda_max))
            if below < len(solution.eigenvalues) or len(solution.eigenvalues) < _bucket(wanted):
                break
            wanted = 2 * len(solution.eigenvalues)
        keep = max(1, below)
        if n_modes is not None:
            keep = min(keep, int(n_modes))

    space = solution.space
    all_frequencies = np.sqrt(scale * solution.eigenvalues) / (2.0 * math.pi)
    frequencies = all_frequencies[:keep]
    # The solve holds the lowest len(eigenvalues) modes: complete to the top one, or to where
    # the modes kept stop short of the next one; never less than fmax when fmax decided.
    complete = min(float(all_frequencies[-1]), complete_below(all_frequencies, keep))
    if fmax is not None and (n_modes is None or keep < int(n_modes)):
        complete = max(complete, float(fmax)) if keep < len(all_frequencies) else complete
    coefficients = solution.coefficients[:, :keep]
    to_solve = np.array([1.0, solution.stretch])

    def to_physical(points: np.ndarray) -> np.ndarray:
        return normalisation.to_physical(np.asarray(points, float) / to_solve)

    def evaluate(points: np.ndarray) -> np.ndarray:
        """Mode shapes at points (N, 2) [m] → (N, n), unit mean square, 0 outside."""
        solve_points = normalisation.to_normalised(
            np.asarray(points, float).reshape(-1, 2)) * to_solve
        return space.values(coefficients, solve_points)

    def evaluate_some(points: np.ndarray, indices: np.ndarray) -> np.ndarray:
        """Mode shapes ``indices`` only at points (N, 2) [m] → (N, len(indices))."""
        solve_points = normalisation.to_normalised(
            np.asarray(points, float).reshape(-1, 2)) * to_solve
        return space.values(coefficients[:, np.asarray(indices, dtype=int)], solve_points)

    nodes = to_physical(space.nodes)
    triangles = space.triangles.copy()
    clockwise_triangles = triangle_areas(nodes, triangles) < 0
    triangles[clockwise_triangles] = triangles[clockwise_triangles][:, [0, 2, 1]]
    region = PolygonRegion(
        outline=to_physical(space.outline),
        holes=tuple(to_physical(h) for h in space.holes),
        nodes=nodes,
        triangles=triangles,
        area=float(np.sum(np.abs(triangle_areas(nodes, space.triangles)))),
    )
    return ModalBasis(
        region=region,
        frequencies_hz=frequencies,
        labels=tuple(f"#{k + 1}" for k in range(keep)),
        multiplicity=np.ones(keep, dtype=int),
        mean=solution.mean[:keep].copy(),
        nodal_lines=tuple((("nodal domains", d),) for d in solution.nodal_domains[:keep]),
        evaluate=evaluate,
        complete_to_hz=complete,
        evaluate_some=evaluate_some,
    )


def _normalised_neumann_solution(key: tuple, accuracy: str, count: int) -> _NormalisedSolution:
    settings = ACCURACY[accuracy]
    outline = np.asarray(key[0], float)
    area = abs(signed_area(outline))
    boundary_length = float(np.sum(np.hypot(*(np.roll(outline, -1, axis=0) - outline).T)))
    max_edge = _mesh_edge_for(count, area, boundary_length, settings, False)
    space = quadratic_space(outline, [], [], max_edge, settings)
    count = min(count, space.dof_count)
    values, vectors = _lowest_eigenpairs(space.stiffness, space.mass, count, -1.0)
    solution = _finish(space, values, vectors, 1.0, nodal_domains=False)  # cavity modes
    values = solution.eigenvalues.copy()
    coefficients = solution.coefficients.copy()
    values[0] = 0.0  # the uniform mode, exactly
    coefficients[:, 0] = 1.0
    return _NormalisedSolution(space, values, coefficients, solution.mean,
                               solution.nodal_domains, 1.0)


def neumann_modes(
    region: PolygonRegion | np.ndarray | Sequence[Sequence[float]],
    n_modes: int,
    *,
    accuracy: str = "default",
    cache: SolveCache | None = None,
) -> tuple[np.ndarray, Callable[[np.ndarray], np.ndarray]]:
    """Rigid-wall (Neumann) modes of a polygonal outline, for the air in a cavity beneath it.

    Solves −∇²ψ = k²ψ in the outline with ∂ψ/∂n = 0 on it. Only the outline counts: the
    cut-outs of the panel above are not holes in the cavity (its walls are the perimeter
    framing), so a ``PolygonRegion``'s ``holes`` are ignored.

    Parameters
    ----------
    region : PolygonRegion or sequence of (x, y)  [m]
        The panel's region (its ``outline`` is used) or an outline itself.
    n_modes : int
        Number of modes, the uniform mode (k = 0) first.
    accuracy : {"coarse", "default", "fine"}
    cache : SolveCache, optional
        Keeps the normalised solve for later calls with the same outline; without one
        nothing is kept.

    Returns
    -------
    wavenumbers : ndarray (n_modes,)  [rad/m]
        Ascending, ``wavenumbers[0] == 0``.
    evaluate : callable (points (N, 2) [m]) -> ndarray (N, n_modes)
        Mode shapes normalised to unit mean square (∫ψ² dA = A), 0 outside the outline; the
        uniform mode is 1.

    References
    ----------
    Rigid-walled cavity modes: P. M. Morse, K. U. Ingard, Theoretical Acoustics
    (McGraw-Hill, 1968), §9.4.
    """
    if accuracy not in ACCURACY:
        raise ValueError(f"accuracy must be one of {', '.join(ACCURACY)} (got {accuracy!r})")
    if int(n_modes) != n_modes or n_modes < 1:
        raise ValueError(f"number of modes must be a whole number of at least 1 (got {n_modes!r})")
    if n_modes > MAX_MODES:
        raise ValueError(f"at most {MAX_MODES} cavity modes can be computed (asked for {n_modes})")
    outline = region.outline if isinstance(region, PolygonRegion) else region
    outline = as_vertices(outline)
    problems = outline_problems(outline, ())
    if problems:
        raise ValueError("; ".join(problems))
    key = normalised_shape_key(outline, (), 1.0)
    normalisation = shape_normalisation(outline)
    count = shared_size(int(n_modes))
    cache = SolveCache() if cache is None else cache
    solution = cache.neumann.get((key, accuracy, count),
                                 lambda: _normalised_neumann_solution(key, accuracy, count))
    keep = min(int(n_modes), len(solution.eigenvalues))
    wavenumbers = np.sqrt(solution.eigenvalues[:keep]) / normalisation.length
    coefficients = solution.coefficients[:, :keep]
    space = solution.space

    def evaluate(points: np.ndarray) -> np.ndarray:
        """Cavity mode shapes at points (N, 2) [m] → (N, n), unit mean square, 0 outside."""
        points = np.asarray(points, float).reshape(-1, 2)
        return space.values(coefficients, normalisation.to_normalised(points))

    return wavenumbers, evaluate
