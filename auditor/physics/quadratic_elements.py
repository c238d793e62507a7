"""Quadratic (P2) triangle elements on a polygon mesh: matrices, point values, nodal domains.

:func:`quadratic_space` meshes a region (:func:`auditor.physics.polygon_mesh.mesh_polygon`)
and assembles the stiffness ``K_ij = ∫∇N_i·∇N_j dA`` and mass ``M_ij = ∫N_i N_j dA`` matrices
of the six-node quadratic triangle with scikit-fem (``ElementTriP2``, ``laplace``, ``mass``).
The :class:`QuadraticSpace` it returns evaluates fields given by their nodal coefficients at
any points (0 outside the region) and counts the nodal domains of a mode shape. Units are
those of the mesh coordinates (the solve's normalised ones in :mod:`auditor.physics.fem`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Sequence

import numpy as np
import scipy.sparse as sparse
from scipy.sparse.csgraph import connected_components
from scipy.spatial import cKDTree

from auditor.physics.geometry import clockwise, counter_clockwise
from auditor.physics.polygon_mesh import MeshSettings, inside_region, mesh_polygon, triangle_areas

__all__ = ["QuadraticSpace", "quadratic_space"]

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
class QuadraticSpace:
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
            todo = todo[inside_region(points[todo], self.outline, self.holes)]
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
            (l0 * (2 * l0 - 1), l1 * (2 * l1 - 1), l2 * (2 * l2 - 1),
             4 * l0 * l1, 4 * l1 * l2, 4 * l0 * l2)
        )
        dofs = self.element_dofs[triangle[inside]]  # (K, 6)
        out[inside] = np.einsum("kj,kjm->km", shape, coefficients[dofs])
        return out

    @cached_property
    def _node_geometry(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """What :meth:`_zero_set_distance` needs of the mesh alone, made once: ∇N_j at node p
        of each element (M, 6, 6, 2), the number of elements at each node (N, 1), and the
        node spacing (N,) (half the longest edge of the smallest element touching it)."""
        ed = self.element_dofs
        a, b, c = (self.nodes[self.triangles[:, i]] for i in range(3))
        det = (b[:, 0] - a[:, 0]) * (c[:, 1] - a[:, 1]) - (b[:, 1] - a[:, 1]) * (c[:, 0] - a[:, 0])
        # gradients of the barycentric coordinates (M, 3, 2)
        grad_l1 = np.column_stack((c[:, 1] - a[:, 1], a[:, 0] - c[:, 0])) / det[:, None]
        grad_l2 = np.column_stack((a[:, 1] - b[:, 1], b[:, 0] - a[:, 0])) / det[:, None]
        grad_lambda = np.stack((-grad_l1 - grad_l2, grad_l1, grad_l2), axis=1)
        shape_gradients = np.einsum("pjk,mkd->mpjd", _P2_DERIVATIVES, grad_lambda, optimize=True)
        count = np.bincount(ed.ravel(), minlength=self.dof_count)[:, None]
        sides = np.stack((b - a, c - b, a - c), axis=1)
        half_edge = 0.5 * np.max(np.hypot(sides[..., 0], sides[..., 1]), axis=1)
        spacing = np.full(self.dof_count, np.inf)
        np.minimum.at(spacing, ed.ravel(), np.repeat(half_edge, 6))
        return shape_gradients, count, spacing

    def _zero_set_distance(self, fields: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per node and field: |φ|/|∇φ| (gradient averaged over its elements), and the
        node spacing (half the longest edge of the smallest element touching the node)."""
        ed = self.element_dofs
        shape_gradients, count, spacing = self._node_geometry
        # ∇φ at the element's nodes (M, 6, n)
        gradient = np.einsum("mpjd,mjn->mpnd", shape_gradients, fields[ed], optimize=True)
        magnitude = np.hypot(gradient[..., 0], gradient[..., 1])  # (M, 6, n)
        total = np.zeros((self.dof_count, fields.shape[1]))
        np.add.at(total, ed.ravel(), magnitude.reshape(-1, fields.shape[1]))
        with np.errstate(divide="ignore", invalid="ignore"):
            distance = np.abs(fields) / (total / np.maximum(count, 1))
        return np.nan_to_num(distance, nan=0.0, posinf=np.inf), spacing

    def nodal_domain_counts(self, fields: np.ndarray, chunk: int = 16) -> tuple[int, ...]:
        """Nodal domains of each column of ``fields`` (see :meth:`_domain_counts`),
        ``chunk`` columns at a time (the gradients of every column at every element node at
        once would take tens of megabytes for a hundred modes): the columns of a chunk as one
        graph of ``chunk`` disjoint copies of the node graph, one connected-components pass
        for all of them."""
        counts: list[int] = []
        for start in range(0, fields.shape[1], chunk):
            part = fields[:, start:start + chunk]
            distance, spacing = self._zero_set_distance(part)
            counts.extend(self._domain_counts(part, distance, spacing))
        return tuple(counts)

    def _domain_counts(self, fields: np.ndarray, distance: np.ndarray,
                       spacing: np.ndarray) -> list[int]:
        """Nodal domains of each column of ``fields`` (N, k): connected regions of one sign,
        on the 4-to-1 sub-triangulation of the quadratic element's nodes, node m·N + i of
        the joint graph standing for node i of column m.

        References
        ----------
        Nodal domains as the connected components of {φ ≠ 0}: R. Courant, D. Hilbert,
        Methods of Mathematical Physics, vol. I (Interscience, 1953), ch. VI §6.
        """
        n, k = fields.shape
        scale = np.max(np.abs(fields), axis=0)                             # (k,)
        # A node whose distance to the zero set, estimated as |φ|/|∇φ|, is under a third of
        # the local node spacing counts as on a nodal line; this keeps two domains that meet
        # only at a crossing of nodal lines apart.
        on_line = (np.abs(fields) <= 1e-8 * scale) | (distance < spacing[:, None] / 3.0)
        sign = np.where(on_line, 0.0, np.sign(fields))
        rows, cols = self._sub_edges
        keep = (sign[rows] == sign[cols]) & (sign[rows] != 0)               # (E, k)
        edge, column = np.nonzero(keep)
        offset = column * n
        graph = sparse.coo_matrix((np.ones(len(edge)), (offset + rows[edge], offset + cols[edge])),
                                  shape=(n * k, n * k))
        _, labels = connected_components(graph, directed=False)
        signed = (sign != 0).T.ravel()                                      # column-major
        magnitude = np.abs(fields).T.ravel()
        peak = np.zeros(labels.max() + 1)
        np.maximum.at(peak, labels[signed], magnitude[signed])
        owner = np.zeros(labels.max() + 1, dtype=int)                       # each one column's
        owner[labels] = np.repeat(np.arange(k), n)
        counted = peak > 2e-3 * scale[owner]
        return np.bincount(owner[counted], minlength=k).tolist()

    @cached_property
    def _sub_edges(self) -> tuple[np.ndarray, np.ndarray]:
        """The edges (node pairs) of the 4-to-1 sub-triangulation of every element, made
        once."""
        ed = self.element_dofs
        pairs = ((0, 3), (3, 1), (1, 4), (4, 2), (2, 5), (5, 0), (3, 4), (4, 5), (5, 3))
        return (np.concatenate([ed[:, a] for a, _ in pairs]),
                np.concatenate([ed[:, b] for _, b in pairs]))


def quadratic_space(
    outline: np.ndarray,
    holes: Sequence[np.ndarray],
    polygonal_holes: Sequence[bool],
    max_edge: float,
    settings: MeshSettings,
) -> QuadraticSpace:
    """Mesh a polygon with holes and assemble its quadratic-element matrices.

    Parameters
    ----------
    outline : ndarray (V, 2)  [m]
        Outer boundary, either orientation.
    holes : sequence of ndarray (Vi, 2)  [m]
        Hole boundaries, either orientation.
    polygonal_holes : sequence of bool
        False for a hole that stands for a circle (see :func:`mesh_polygon`).
    max_edge : float  [m]
        Largest element edge.
    settings : MeshSettings

    Returns
    -------
    QuadraticSpace
        Stiffness ``∫∇N_i·∇N_j dA`` [-] and mass ``∫N_i N_j dA`` [m²] matrices over every
        node (boundary nodes included: ``boundary_dofs`` lists them for a Dirichlet solve).

    References
    ----------
    Quadratic (six-node) triangles: O. C. Zienkiewicz, R. L. Taylor, The Finite Element
    Method, vol. 1 (Butterworth-Heinemann, 5th ed., 2000), ch. 8; assembly by scikit-fem
    (T. Gustafsson, G. D. McBain, "scikit-fem: A Python package for finite element
    assembly", J. Open Source Softw. 5 (2020) 2369).
    """
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
    return QuadraticSpace(
        outline=counter_clockwise(outline),
        holes=tuple(clockwise(h) for h in holes),
        nodes=nodes,
        triangles=triangles,
        element_dofs=np.asarray(basis.element_dofs).T.copy(),
        dof_count=basis.N,
        boundary_dofs=np.asarray(basis.get_dofs().all()),
        stiffness=stiffness,
        mass=mass_matrix,
        area=float(np.sum(np.abs(triangle_areas(nodes, triangles)))),
        centroid_tree=cKDTree(nodes[triangles].mean(axis=1)),
    )
