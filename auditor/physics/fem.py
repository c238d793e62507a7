"""Finite-element modes of tensioned membranes of any polygonal outline, with cut-outs.

The clamped membrane under (possibly orthotropic) tension,

    −(Tx ∂²w/∂x² + Ty ∂²w/∂y²) = ρs ω² w   in the panel,   w = 0 on the outline and on
    every cut-out edge,

is solved with quadratic triangles (scikit-fem ``ElementTriP2``) on a mesh made here:
a conforming Delaunay triangulation of boundary and lattice points (``scipy.spatial``),
then red-green-blue refinement graded toward re-entrant corners, where the modes are
singular (``w ~ r^(π/ω)`` at a corner of interior angle ω), so that the eigenvalues keep the
quadratic element's fourth-order convergence. The eigenproblem is solved with
``scipy.sparse.linalg.eigsh`` in shift-invert mode.

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
import scipy.sparse as sparse
from scipy.sparse.csgraph import connected_components
from scipy.sparse.linalg import eigsh
from scipy.spatial import Delaunay, cKDTree

from auditor.model import CircleCutout, Cutout
from auditor.physics.basis import ModalBasis, PolygonRegion, complete_below
from auditor.physics.cache import SolveCache
from auditor.physics.geometry import (
    as_vertices,
    circle_polygon_sides,
    circle_to_polygon,
    clockwise,
    counter_clockwise,
    distance_to_segments,
    interior_angles,
    normalised_shape_key,
    outline_problems,
    points_in_polygon,
    polygon_edges,
    shape_normalisation,
    signed_area,
)

__all__ = [
    "MeshSettings",
    "ACCURACY",
    "MAX_MODES",
    "mesh_polygon",
    "polygon_membrane_basis",
    "neumann_modes",
]

#: Most modes one call may ask for (fmax is refused beyond it rather than truncated).
MAX_MODES = 400
#: Modes returned when neither ``fmax`` nor ``n_modes`` is given.
DEFAULT_MODES = 12


@dataclass(frozen=True)
class MeshSettings:
    """How fine the mesh is, in units of the normalised shape (outline area 1).

    Parameters
    ----------
    max_edge : float  [-]
        Largest element edge, relative to the square root of the outline's area.
    elements_per_wavelength : float  [-]
        At least this many element edges per wavelength of the highest mode solved.
    corner_size : float  [-]
        Element size at a re-entrant corner, as a fraction of ``max_edge``.
    grading_radius : float  [-]
        Distance (relative to the square root of the area) over which elements grow
        from ``corner_size`` back to ``max_edge``.
    """

    max_edge: float
    elements_per_wavelength: float
    corner_size: float
    grading_radius: float


#: The named accuracy levels. "default" meets 0.05 % on the L-shaped membrane's fundamental.
ACCURACY: dict[str, MeshSettings] = {
    "coarse": MeshSettings(0.20, 3.0, 2.0**-5, 0.4),
    "default": MeshSettings(0.10, 5.0, 2.0**-7, 0.5),
    "fine": MeshSettings(0.05, 7.0, 2.0**-10, 0.7),
}


# --------------------------------------------------------------------------------------
# Mesh
# --------------------------------------------------------------------------------------
def _subdivide_ring(ring: np.ndarray, max_edge: float) -> np.ndarray:
    """Points along a closed ring, each edge split into equal pieces no longer than max_edge."""
    starts, ends = polygon_edges(ring)
    pieces = []
    for a, b in zip(starts, ends):
        count = max(1, math.ceil(float(np.hypot(*(b - a))) / max_edge - 1e-9))
        t = np.arange(count)[:, None] / count
        pieces.append(a + t * (b - a))
    return np.vstack(pieces)


def _hex_lattice(bounds: tuple[float, float, float, float], spacing: float) -> np.ndarray:
    x0, y0, x1, y1 = bounds
    row = spacing * math.sqrt(3.0) / 2.0
    ys = np.arange(y0 + 0.5 * row, y1, row)
    rows = []
    for k, y in enumerate(ys):
        offset = 0.5 * spacing * (k % 2)
        xs = np.arange(x0 + 0.25 * spacing + offset, x1, spacing)
        rows.append(np.column_stack((xs, np.full_like(xs, y))))
    return np.vstack(rows) if rows else np.zeros((0, 2))


def _inside_region(points: np.ndarray, outline: np.ndarray, holes: Sequence[np.ndarray]) -> np.ndarray:
    inside = points_in_polygon(points, outline)
    for hole in holes:
        inside &= ~points_in_polygon(points, hole)
    return inside


def _triangle_areas(nodes: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    a, b, c = (nodes[triangles[:, i]] for i in range(3))
    return 0.5 * ((b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0]))


#: Growth of the element size with distance from a finely divided boundary [-].
SIZE_GRADATION = 0.4


def _interior_points(
    outline: np.ndarray,
    holes: Sequence[np.ndarray],
    boundary: np.ndarray,
    segments: np.ndarray,
    max_edge: float,
) -> np.ndarray:
    """Lattice points filling the region, finer near finely divided boundary pieces.

    The wanted spacing is h(p) = min(max_edge, min_i (s_i + g·|p − b_i|)) over boundary
    points b_i with local spacing s_i and gradation g; hexagonal lattices of spacing
    max_edge/2^level fill the bands s ≤ h < 2s, and points closer to the boundary than
    0.55·h are dropped.
    """
    starts, ends = boundary[segments[:, 0]], boundary[segments[:, 1]]
    lengths = np.hypot(*(ends - starts).T)
    spacing = np.full(len(boundary), np.inf)
    np.minimum.at(spacing, segments[:, 0], lengths)
    np.minimum.at(spacing, segments[:, 1], lengths)
    tree = cKDTree(boundary)
    neighbours = min(24, len(boundary))

    def wanted(points: np.ndarray) -> np.ndarray:
        distance, index = tree.query(points, k=neighbours)
        distance = distance.reshape(len(points), -1)
        index = index.reshape(len(points), -1)
        return np.minimum(max_edge, np.min(spacing[index] + SIZE_GRADATION * distance, axis=1))

    finest = float(spacing.min())
    levels = max(0, math.ceil(math.log2(max_edge / finest) - 1e-9))
    chunks = []
    for level in range(levels + 1):
        step = max_edge / 2.0**level
        if level == 0:
            boxes = [(*outline.min(axis=0), *outline.max(axis=0))]
        else:
            near = spacing < 2.0 * step
            reach = np.maximum(2.0 * step - spacing[near], 0.0) / SIZE_GRADATION + step
            centres = boundary[near]
            # one box per group of nearby fine points keeps small holes from filling the bbox
            groups = _cluster(centres, reach)
            boxes = [
                (*(centres[g] - reach[g, None]).min(axis=0), *(centres[g] + reach[g, None]).max(axis=0))
                for g in groups
            ]
        for box in boxes:
            points = _hex_lattice(box, step)
            if len(points) == 0:
                continue
            points = points[_inside_region(points, outline, holes)]
            if len(points) == 0:
                continue
            size = wanted(points)
            band = (size >= step * (1.0 - 1e-9)) & ((size < 2.0 * step) | (level == 0))
            points, size = points[band], size[band]
            gap = distance_to_segments(points, starts, ends) if len(points) else np.zeros(0)
            chunks.append(points[gap > 0.55 * size])
    return np.vstack(chunks) if chunks else np.zeros((0, 2))


def _cluster(centres: np.ndarray, reach: np.ndarray) -> list[np.ndarray]:
    """Groups of points whose reach discs overlap (connected components)."""
    if len(centres) == 0:
        return []
    pairs = cKDTree(centres).query_pairs(2.0 * float(reach.max()), output_type="ndarray")
    if len(pairs):
        d = np.hypot(*(centres[pairs[:, 0]] - centres[pairs[:, 1]]).T)
        pairs = pairs[d <= reach[pairs[:, 0]] + reach[pairs[:, 1]]]
    graph = sparse.coo_matrix(
        (np.ones(len(pairs)), (pairs[:, 0], pairs[:, 1]) if len(pairs) else ([], [])),
        shape=(len(centres), len(centres)),
    )
    count, labels = connected_components(graph, directed=False)
    return [np.flatnonzero(labels == k) for k in range(count)]


def _conforming_delaunay(
    outline: np.ndarray, holes: Sequence[np.ndarray], max_edge: float
) -> tuple[np.ndarray, np.ndarray]:
    """Quasi-uniform triangulation of a polygon with holes whose edges follow every boundary.

    Boundary rings are split into pieces ≤ ``max_edge``, a hexagonal lattice fills the inside,
    and a boundary piece missing from the Delaunay triangulation is split at its midpoint
    (lattice points inside its diametral circle removed) until every piece is an edge.
    """
    rings = [outline, *holes]
    boundary = []
    segments = []
    offset = 0
    for ring in rings:
        pts = _subdivide_ring(ring, max_edge)
        n = len(pts)
        boundary.append(pts)
        idx = offset + np.arange(n)
        segments.append(np.column_stack((idx, np.roll(idx, -1))))
        offset += n
    boundary = np.vstack(boundary)
    segments = np.vstack(segments)

    lattice = _interior_points(outline, holes, boundary, segments, max_edge)

    for _ in range(60):
        nodes = np.vstack((boundary, lattice))
        triangles = Delaunay(nodes).simplices
        centroids = nodes[triangles].mean(axis=1)
        triangles = triangles[_inside_region(centroids, outline, holes)]
        n = len(nodes)
        edges = np.sort(
            np.vstack((triangles[:, [0, 1]], triangles[:, [1, 2]], triangles[:, [2, 0]])), axis=1
        )
        present = np.isin(
            np.sort(segments, axis=1) @ np.array([n, 1]), edges @ np.array([n, 1])
        )
        if present.all():
            break
        missing = segments[~present]
        midpoints = 0.5 * (boundary[missing[:, 0]] + boundary[missing[:, 1]])
        radii = 0.5 * np.hypot(*(boundary[missing[:, 1]] - boundary[missing[:, 0]]).T)
        new_index = len(boundary) + np.arange(len(missing))
        boundary = np.vstack((boundary, midpoints))
        segments = np.vstack(
            (
                segments[present],
                np.column_stack((missing[:, 0], new_index)),
                np.column_stack((new_index, missing[:, 1])),
            )
        )
        if len(lattice):
            near = cKDTree(lattice).query_ball_point(midpoints, radii * 1.05)
            drop = np.unique(np.concatenate([np.asarray(i, int) for i in near] + [np.zeros(0, int)]))
            lattice = np.delete(lattice, drop, axis=0)
    else:  # pragma: no cover - only for pathological input the validation lets through
        raise ValueError("could not mesh the outline (boundary edges not recovered)")

    used, triangles = np.unique(triangles, return_inverse=True)
    triangles = triangles.reshape(-1, 3)
    nodes = nodes[used]
    fixed = used < len(boundary)
    nodes = _smooth(nodes, triangles, fixed)
    return nodes, triangles


def _smooth(nodes: np.ndarray, triangles: np.ndarray, fixed: np.ndarray, sweeps: int = 4) -> np.ndarray:
    """Laplacian smoothing of the free nodes, undone for any sweep that would fold a triangle."""
    edges = np.unique(
        np.sort(np.vstack((triangles[:, [0, 1]], triangles[:, [1, 2]], triangles[:, [2, 0]])), axis=1),
        axis=0,
    )
    n = len(nodes)
    adjacency = sparse.coo_matrix(
        (np.ones(2 * len(edges)), (np.r_[edges[:, 0], edges[:, 1]], np.r_[edges[:, 1], edges[:, 0]])),
        shape=(n, n),
    ).tocsr()
    degree = np.asarray(adjacency.sum(axis=1)).ravel()
    sign = np.sign(_triangle_areas(nodes, triangles))
    for _ in range(sweeps):
        moved = np.where(fixed[:, None], nodes, (adjacency @ nodes) / degree[:, None])
        if np.all(sign * _triangle_areas(moved, triangles) > 0):
            nodes = moved
        else:
            break
    return nodes


@dataclass(frozen=True)
class _Corner:
    point: np.ndarray
    exponent: float  # mesh size ∝ r**exponent near the corner
    radius: float


def _reentrant_corners(
    outline: np.ndarray,
    holes: Sequence[np.ndarray],
    polygonal_holes: Sequence[bool],
    settings: MeshSettings,
    scale: float,
) -> list[_Corner]:
    """Corners of the region with interior angle ω > π, with the grading exponent 1 − π/(2ω).

    References
    ----------
    The corner singularity w ~ r^(π/ω): P. Grisvard, Elliptic Problems in Nonsmooth Domains
    (Pitman, 1985), ch. 4. The grading h ~ r^(1 − α/p) that restores the optimal rate of
    degree-p elements for a singularity r^α: I. Babuška, R. B. Kellogg, J. Pitkäranta,
    "Direct and inverse error estimates for finite elements with mesh refinement",
    Numer. Math. 33 (1979) 447-471.
    """
    corners = []
    rings = [(outline, False)] + [(h, True) for h, poly in zip(holes, polygonal_holes) if poly]
    for ring, is_hole in rings:
        angles = interior_angles(ring)
        if is_hole:
            angles = 2.0 * np.pi - angles
        edge = np.hypot(*(np.roll(ring, -1, axis=0) - ring).T)
        longer_side = np.maximum(edge, np.roll(edge, 1))  # the two edges meeting at each vertex
        for vertex, angle, side in zip(ring, angles, longer_side):
            if angle > 1.05 * np.pi:
                alpha = np.pi / angle
                radius = min(settings.grading_radius * scale, float(side))
                corners.append(_Corner(vertex, max(0.0, 1.0 - alpha / 2.0), radius))
    return corners


def _size_at(points: np.ndarray, corners: Sequence[_Corner], max_edge: float, min_edge: float) -> np.ndarray:
    size = np.full(len(points), max_edge)
    for corner in corners:
        r = np.hypot(*(points - corner.point).T)
        size = np.minimum(size, max_edge * np.minimum(1.0, (r / corner.radius) ** corner.exponent))
    return np.maximum(size, min_edge)


def mesh_polygon(
    outline: np.ndarray,
    holes: Sequence[np.ndarray] = (),
    max_edge: float | None = None,
    *,
    polygonal_holes: Sequence[bool] | None = None,
    settings: MeshSettings = ACCURACY["default"],
) -> tuple[np.ndarray, np.ndarray]:
    """Triangulate a polygon with holes, graded toward its re-entrant corners.

    Parameters
    ----------
    outline : ndarray (V, 2)  [m]
        Outer boundary, counter-clockwise.
    holes : sequence of ndarray (Vi, 2)  [m]
        Hole boundaries, clockwise, inside the outline and apart from each other.
    max_edge : float, optional  [m]
        Largest element edge; ``settings.max_edge`` times √(outline area) when omitted.
    polygonal_holes : sequence of bool, optional
        False for a hole that stands for a circle (its many obtuse vertices are not graded).
    settings : MeshSettings

    Returns
    -------
    nodes : ndarray (N, 2)  [m]
    triangles : ndarray (M, 3)
        Counter-clockwise corner-node triangles.

    References
    ----------
    Delaunay triangulation with boundary recovery by splitting missing edges: J. Ruppert,
    "A Delaunay refinement algorithm for quality 2-dimensional mesh generation",
    J. Algorithms 18 (1995) 548-585. Red-green-blue refinement: R. E. Bank, A. H. Sherman,
    A. Weiser, "Refinement algorithms and data structures for regular local mesh
    refinement", Scientific Computing (IMACS, 1983) 3-17 (as implemented by scikit-fem).
    """
    from skfem import MeshTri

    outline = counter_clockwise(outline)
    holes = [clockwise(h) for h in holes]
    if polygonal_holes is None:
        polygonal_holes = [True] * len(holes)
    scale = math.sqrt(abs(signed_area(outline)))
    if max_edge is None:
        max_edge = settings.max_edge * scale
    nodes, triangles = _conforming_delaunay(outline, holes, max_edge)
    corners = _reentrant_corners(outline, holes, polygonal_holes, settings, scale)
    if corners:
        min_edge = settings.corner_size * max_edge
        mesh = MeshTri(np.ascontiguousarray(nodes.T), np.ascontiguousarray(triangles.T))
        for _ in range(40):
            p, t = mesh.p.T, mesh.t.T
            corners_of = p[t]  # (M, 3, 2)
            sides = corners_of - np.roll(corners_of, 1, axis=1)
            longest = np.max(np.hypot(sides[..., 0], sides[..., 1]), axis=1)
            wanted = np.minimum(
                _size_at(p, corners, max_edge, min_edge)[t].min(axis=1),
                _size_at(corners_of.mean(axis=1), corners, max_edge, min_edge),
            )
            marked = np.flatnonzero(longest > 1.2 * wanted)
            if len(marked) == 0:
                break
            mesh = mesh.refined(marked)
        nodes, triangles = mesh.p.T.copy(), mesh.t.T.copy()
    areas = _triangle_areas(nodes, triangles)
    flip = areas < 0
    triangles[flip] = triangles[flip][:, [0, 2, 1]]
    return nodes, triangles


# --------------------------------------------------------------------------------------
# P2 fields on a mesh: integrals, point values, nodal domains
# --------------------------------------------------------------------------------------
def _p2_derivative_table() -> np.ndarray:
    """∂N_j/∂λ_k of the six quadratic shape functions at the six nodes (6 × 6 × 3)."""
    nodes = np.array(
        [[1, 0, 0], [0, 1, 0], [0, 0, 1], [0.5, 0.5, 0], [0, 0.5, 0.5], [0.5, 0, 0.5]], float
    )
    table = np.zeros((6, 6, 3))
    for p, lam in enumerate(nodes):
        for i in range(3):
            table[p, i, i] = 4.0 * lam[i] - 1.0  # λi(2λi − 1)
        for j, (i, k) in enumerate(((0, 1), (1, 2), (0, 2)), start=3):  # 4 λi λk
            table[p, j, i] = 4.0 * lam[k]
            table[p, j, k] = 4.0 * lam[i]
    return table


_P2_DERIVATIVES = _p2_derivative_table()


@dataclass(frozen=True, eq=False)
class _P2Space:
    """A meshed region with its quadratic-element matrices (coordinates of the solve)."""

    outline: np.ndarray
    holes: tuple[np.ndarray, ...]
    nodes: np.ndarray  # (N, 2) vertices
    triangles: np.ndarray  # (M, 3) as scikit-fem ordered them
    element_dofs: np.ndarray  # (M, 6): 3 vertices then edges 0-1, 1-2, 0-2
    dof_count: int
    boundary_dofs: np.ndarray
    stiffness: sparse.csr_matrix
    mass: sparse.csr_matrix
    area: float
    centroid_tree: cKDTree

    def locate(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Triangle index (−1 outside) and barycentric coordinates (N, 3) of each point."""
        points = np.asarray(points, float).reshape(-1, 2)
        count = len(points)
        found = np.full(count, -1)
        bary = np.zeros((count, 3))
        if count == 0:
            return found, bary
        todo = np.arange(count)
        for k in (min(8, len(self.triangles)), min(40, len(self.triangles))):
            if len(todo) == 0:
                break
            _, candidates = self.centroid_tree.query(points[todo], k=k)
            candidates = np.asarray(candidates).reshape(len(todo), -1)
            lam = self._barycentric(points[todo], candidates)
            ok = lam.min(axis=2) >= -1e-10
            hit = ok.any(axis=1)
            first = ok.argmax(axis=1)
            rows = np.flatnonzero(hit)
            found[todo[rows]] = candidates[rows, first[rows]]
            bary[todo[rows]] = lam[rows, first[rows]]
            todo = todo[~hit]
        if len(todo):
            todo = todo[_inside_region(points[todo], self.outline, self.holes)]
        all_triangles = np.arange(len(self.triangles))
        for chunk in np.array_split(todo, max(1, len(todo) // 64)):
            if len(chunk) == 0:
                continue
            candidates = np.broadcast_to(all_triangles, (len(chunk), len(all_triangles)))
            lam = self._barycentric(points[chunk], candidates)
            score = lam.min(axis=2)
            best = score.argmax(axis=1)
            good = score[np.arange(len(chunk)), best] >= -1e-8
            found[chunk[good]] = best[good]
            bary[chunk[good]] = lam[np.flatnonzero(good), best[good]]
        return found, bary

    def _barycentric(self, points: np.ndarray, candidates: np.ndarray) -> np.ndarray:
        a, b, c = (self.nodes[self.triangles[candidates, i]] for i in range(3))
        p = points[:, None, :]
        ab, ac, ap = b - a, c - a, p - a
        det = ab[..., 0] * ac[..., 1] - ab[..., 1] * ac[..., 0]
        l1 = (ap[..., 0] * ac[..., 1] - ap[..., 1] * ac[..., 0]) / det
        l2 = (ab[..., 0] * ap[..., 1] - ab[..., 1] * ap[..., 0]) / det
        return np.stack((1.0 - l1 - l2, l1, l2), axis=-1)

    def values(self, coefficients: np.ndarray, points: np.ndarray) -> np.ndarray:
        """Quadratic-element field(s) at points (N, n); 0 outside the region."""
        triangle, lam = self.locate(points)
        out = np.zeros((len(triangle), coefficients.shape[1]))
        inside = triangle >= 0
        if not inside.any():
            return out
        l0, l1, l2 = lam[inside].T
        shape = np.column_stack(
            (l0 * (2 * l0 - 1), l1 * (2 * l1 - 1), l2 * (2 * l2 - 1), 4 * l0 * l1, 4 * l1 * l2, 4 * l0 * l2)
        )
        dofs = self.element_dofs[triangle[inside]]  # (K, 6)
        out[inside] = np.einsum("kj,kjm->km", shape, coefficients[dofs])
        return out

    def _zero_set_distance(self, fields: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per node and field: |φ|/|∇φ| (gradient averaged over its elements), and the
        node spacing (half the longest edge of the smallest element touching the node)."""
        ed = self.element_dofs
        a, b, c = (self.nodes[self.triangles[:, i]] for i in range(3))
        det = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])
        # gradients of the barycentric coordinates (M, 3, 2)
        grad_l1 = np.column_stack((c[:, 1] - a[:, 1], a[:, 0] - c[:, 0])) / det[:, None]
        grad_l2 = np.column_stack((a[:, 1] - b[:, 1], b[:, 0] - a[:, 0])) / det[:, None]
        grad_lambda = np.stack((-grad_l1 - grad_l2, grad_l1, grad_l2), axis=1)
        # ∇N_j at node p of each element (M, 6, 6, 2), then ∇φ at the element's nodes
        shape_gradients = np.einsum("pjk,mkd->mpjd", _P2_DERIVATIVES, grad_lambda, optimize=True)
        gradient = np.einsum("mpjd,mjn->mpnd", shape_gradients, fields[ed], optimize=True)
        magnitude = np.hypot(gradient[..., 0], gradient[..., 1])  # (M, 6, n)
        total = np.zeros((self.dof_count, fields.shape[1]))
        np.add.at(total, ed.ravel(), magnitude.reshape(-1, fields.shape[1]))
        count = np.bincount(ed.ravel(), minlength=self.dof_count)[:, None]
        sides = np.stack((b - a, c - b, a - c), axis=1)
        half_edge = 0.5 * np.max(np.hypot(sides[..., 0], sides[..., 1]), axis=1)
        spacing = np.full(self.dof_count, np.inf)
        np.minimum.at(spacing, ed.ravel(), np.repeat(half_edge, 6))
        with np.errstate(divide="ignore", invalid="ignore"):
            distance = np.abs(fields) / (total / np.maximum(count, 1))
        return np.nan_to_num(distance, nan=0.0, posinf=np.inf), spacing

    def nodal_domain_counts(self, fields: np.ndarray, chunk: int = 16) -> tuple[int, ...]:
        """Nodal domains of each column of ``fields`` (see :meth:`nodal_domains`), ``chunk``
        columns at a time (the gradients of every column at every element node at once would
        take tens of megabytes for a hundred modes)."""
        counts: list[int] = []
        for start in range(0, fields.shape[1], chunk):
            part = fields[:, start:start + chunk]
            distance, spacing = self._zero_set_distance(part)
            counts.extend(self.nodal_domains(part[:, m], distance[:, m], spacing)
                          for m in range(part.shape[1]))
        return tuple(counts)

    def nodal_domains(self, field: np.ndarray, distance: np.ndarray, spacing: np.ndarray) -> int:
        """Connected regions of one sign of a field, on the 4-to-1 sub-triangulation of the P2 nodes.

        References
        ----------
        Nodal domains as the connected components of {φ ≠ 0}: R. Courant, D. Hilbert,
        Methods of Mathematical Physics, vol. I (Interscience, 1953), ch. VI §6.
        """
        scale = np.max(np.abs(field))
        if scale == 0:
            return 0
        # A node whose distance to the zero set, estimated as |φ|/|∇φ|, is under a third of
        # the local node spacing counts as on a nodal line; this keeps two domains that meet
        # only at a crossing of nodal lines apart.
        on_line = (np.abs(field) <= 1e-8 * scale) | (distance < spacing / 3.0)
        sign = np.where(on_line, 0.0, np.sign(field))
        ed = self.element_dofs
        pairs = ((0, 3), (3, 1), (1, 4), (4, 2), (2, 5), (5, 0), (3, 4), (4, 5), (5, 3))
        rows = np.concatenate([ed[:, a] for a, _ in pairs])
        cols = np.concatenate([ed[:, b] for _, b in pairs])
        keep = (sign[rows] == sign[cols]) & (sign[rows] != 0)
        graph = sparse.coo_matrix(
            (np.ones(keep.sum()), (rows[keep], cols[keep])), shape=(self.dof_count, self.dof_count)
        )
        _, labels = connected_components(graph, directed=False)
        signed = sign != 0
        peak = np.zeros(labels.max() + 1)
        np.maximum.at(peak, labels[signed], np.abs(field[signed]))
        return int(np.count_nonzero(peak > 2e-3 * scale))


def _p2_space(
    outline: np.ndarray,
    holes: Sequence[np.ndarray],
    polygonal_holes: Sequence[bool],
    max_edge: float,
    settings: MeshSettings,
) -> _P2Space:
    from skfem import Basis, ElementTriP2, MeshTri
    from skfem.models.poisson import laplace, mass

    nodes, triangles = mesh_polygon(
        outline, holes, max_edge, polygonal_holes=polygonal_holes, settings=settings
    )
    mesh = MeshTri(np.ascontiguousarray(nodes.T), np.ascontiguousarray(triangles.T))
    basis = Basis(mesh, ElementTriP2())
    stiffness = laplace.assemble(basis).tocsr()
    mass_matrix = mass.assemble(basis).tocsr()
    nodes, triangles = mesh.p.T.copy(), mesh.t.T.copy()
    return _P2Space(
        outline=counter_clockwise(outline),
        holes=tuple(clockwise(h) for h in holes),
        nodes=nodes,
        triangles=triangles,
        element_dofs=np.asarray(basis.element_dofs).T.copy(),
        dof_count=basis.N,
        boundary_dofs=np.asarray(basis.get_dofs().all()),
        stiffness=stiffness,
        mass=mass_matrix,
        area=float(np.sum(np.abs(_triangle_areas(nodes, triangles)))),
        centroid_tree=cKDTree(nodes[triangles].mean(axis=1)),
    )


#: Seed of the start vector of the Lanczos iteration (any fixed value).
_START_SEED = 20240611


def _lowest_eigenpairs(stiffness, mass_matrix, count: int, shift: float) -> tuple[np.ndarray, np.ndarray]:
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
    space: _P2Space
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
                CircleCutout(x, y, diameter), sides=circle_polygon_sides(diameter, 0.5 * max_edge, 24)
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


def _fine_bucket(count: int) -> int:
    """The next of 16, 24, 32, 48, 64, 96, 128, 192, ... (steps of 1.5 and 4/3): the number of
    cavity modes solved for a request, so that nearby requests share a solve while the
    Lanczos iteration, whose cost grows steeply with the count, does little more than asked."""
    size = 16
    while size < count:
        size = size * 3 // 2 if size & (size - 1) == 0 else size * 4 // 3
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
    space = _p2_space(outline, holes, polygonal, max_edge, settings)
    free = np.setdiff1d(np.arange(space.dof_count), space.boundary_dofs)
    count = min(count, len(free))
    values, vectors = _lowest_eigenpairs(
        space.stiffness[free][:, free], space.mass[free][:, free], count, 0.0
    )
    coefficients = np.zeros((space.dof_count, count))
    coefficients[free] = vectors
    return _finish(space, values, coefficients, stretch)


def _finish(
    space: _P2Space, values: np.ndarray, coefficients: np.ndarray, stretch: float,
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
        np.sign(coefficients[np.argmax(np.abs(coefficients), axis=0), np.arange(coefficients.shape[1])]),
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
        estimate = area0 * lambda_max / (4.0 * math.pi) - perimeter0 * math.sqrt(lambda_max) / (4.0 * math.pi)
        wanted = max(1, int(1.2 * estimate) + 4)
        while True:
            if wanted > MAX_MODES:
                raise ValueError(
                    f"modes up to {fmax:.4g} Hz need more than {MAX_MODES}; lower the frequency limit"
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
        solve_points = normalisation.to_normalised(np.asarray(points, float).reshape(-1, 2)) * to_solve
        return space.values(coefficients, solve_points)

    def evaluate_some(points: np.ndarray, indices: np.ndarray) -> np.ndarray:
        """Mode shapes ``indices`` only at points (N, 2) [m] → (N, len(indices))."""
        solve_points = normalisation.to_normalised(np.asarray(points, float).reshape(-1, 2)) * to_solve
        return space.values(coefficients[:, np.asarray(indices, dtype=int)], solve_points)

    nodes = to_physical(space.nodes)
    triangles = space.triangles.copy()
    clockwise_triangles = _triangle_areas(nodes, triangles) < 0
    triangles[clockwise_triangles] = triangles[clockwise_triangles][:, [0, 2, 1]]
    region = PolygonRegion(
        outline=to_physical(space.outline),
        holes=tuple(to_physical(h) for h in space.holes),
        nodes=nodes,
        triangles=triangles,
        area=float(np.sum(np.abs(_triangle_areas(nodes, space.triangles)))),
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
    space = _p2_space(outline, [], [], max_edge, settings)
    count = min(count, space.dof_count)
    values, vectors = _lowest_eigenpairs(space.stiffness, space.mass, count, -1.0)
    solution = _finish(space, values, vectors, 1.0, nodal_domains=False)  # cavity modes
    values = solution.eigenvalues.copy()
    coefficients = solution.coefficients.copy()
    values[0] = 0.0  # the uniform mode, exactly
    coefficients[:, 0] = 1.0
    return _NormalisedSolution(space, values, coefficients, solution.mean, solution.nodal_domains, 1.0)


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
    count = _fine_bucket(int(n_modes))
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
