"""Quadrature families of a modal basis: the analytic ones, else points on a triangulation.

The air-loading integrals (added mass, cavity coupling, spectra) are done per family of
shapes. Rectangles (``2 sin(mπx/Lx) sin(nπy/Ly)``) and discs (``J_m(j r/a) cos mθ``) carry
their own analytic family (:class:`auditor.physics.basis.RectangleShapes`,
:class:`auditor.physics.basis.DiscShapes`). Any other basis (polygons, cut-outs, shapes not
recognised) gets a :class:`PointShapes` family: its shapes at the centroids of a fine
triangulation of the region (the finite-element mesh subdivided, or one made here), with the
cells' areas as weights and their corners kept for the exact near-field integrals of
:mod:`auditor.physics.added_mass`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.spatial import Delaunay

from auditor.physics.basis import (
    CircleRegion,
    DiscShapes,
    ModalBasis,
    PolygonRegion,
    RectangleRegion,
    RectangleShapes,
    Region,
)
from auditor.physics.cache import SolveCache

__all__ = ["PointShapes", "point_shapes", "quadrature_family"]


@dataclass(frozen=True, eq=False)
class PointShapes:
    """A basis's shapes at the centroids of a triangulation of its region (point quadrature).

    Parameters
    ----------
    region : RectangleRegion, CircleRegion or PolygonRegion
        The basis's region (:mod:`auditor.physics.basis`).
    points : ndarray (P, 2)  [m]
        Cell centroids.
    weights : ndarray (P,)  [m²]
        Cell areas.
    corners : ndarray (P, 3, 2)  [m]
        Cell vertices, counter-clockwise.
    values : ndarray (P, n)
        The basis shapes at the centroids.
    cell_size : float  [m]
        √(2 × mean cell area).
    """

    region: Region
    points: np.ndarray      # (P, 2) cell centroids  [m]
    weights: np.ndarray     # (P,) cell areas  [m²]
    corners: np.ndarray     # (P, 3, 2) cell vertices, counter-clockwise  [m]
    values: np.ndarray      # (P, n) basis shapes at the centroids
    cell_size: float        # [m]

    @property
    def area(self) -> float:
        return float(self.weights.sum())

    def blocks(self) -> list[np.ndarray]:
        return [np.arange(self.values.shape[1])]


#: What the loading step integrates over: a basis's analytic family, else its point family.
QuadratureFamily = RectangleShapes | DiscShapes | PointShapes


def quadrature_family(basis: ModalBasis, cache: SolveCache) -> QuadratureFamily:
    """The quadrature family for a basis: its own analytic family (rectangle, disc), else
    a point family of its shapes, kept in ``cache`` by the shapes and region (bases that
    share their shapes, one outline at several tensions, share it and what is kept for it)."""
    if basis.family is not None:
        return basis.family
    return cache.families.get_for((basis.evaluate, basis.region), ("points", len(basis)),
                                  lambda: point_shapes(basis))


def _region_triangulation(region, spacing: float) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and triangles covering a region, with edges about ``spacing`` long."""
    if (isinstance(region, PolygonRegion) and region.nodes is not None
            and region.triangles is not None):
        return np.asarray(region.nodes, float), np.asarray(region.triangles, int)
    if isinstance(region, RectangleRegion):
        nx = max(2, int(math.ceil(region.width / spacing)))
        ny = max(2, int(math.ceil(region.length / spacing)))
        x, y = np.meshgrid(np.linspace(0, region.width, nx + 1),
                           np.linspace(0, region.length, ny + 1))
        nodes = np.column_stack([x.ravel(), y.ravel()])
        index = np.arange((nx + 1) * (ny + 1)).reshape(ny + 1, nx + 1)
        a, b = index[:-1, :-1].ravel(), index[:-1, 1:].ravel()
        c, d = index[1:, 1:].ravel(), index[1:, :-1].ravel()
        triangles = np.vstack([np.column_stack([a, b, c]), np.column_stack([a, c, d])])
        return nodes, triangles
    if isinstance(region, CircleRegion):
        radius = region.radius
        ring_count = max(2, int(math.ceil(radius / spacing)))
        ring_nodes = [np.zeros((1, 2))]
        for i in range(1, ring_count + 1):
            count = 6 * i
            angle = np.arange(count) * 2 * np.pi / count + (0.5 * np.pi / count) * (i % 2)
            ring_nodes.append(radius * i / ring_count
                              * np.column_stack([np.cos(angle), np.sin(angle)]))
        nodes = np.vstack(ring_nodes)
        return nodes, Delaunay(nodes).simplices
    # A polygon without a mesh: boundary samples and an interior lattice, Delaunay, keep
    # the triangles whose centroid lies inside.
    rings = [np.asarray(region.outline, float)] + [np.asarray(h, float) for h in region.holes]
    boundary = []
    for ring in rings:
        for start, end in zip(ring, np.roll(ring, -1, axis=0)):
            pieces = max(1, int(math.ceil(np.hypot(*(end - start)) / spacing)))
            t = np.arange(pieces)[:, None] / pieces
            boundary.append(start + t * (end - start))
    x0, y0, x1, y1 = region.bounds()
    x, y = np.meshgrid(np.arange(x0 + spacing / 2, x1, spacing),
                       np.arange(y0 + spacing / 2, y1, spacing))
    lattice = np.column_stack([x.ravel(), y.ravel()])
    lattice = lattice[region.contains(lattice)]
    nodes = np.vstack(boundary + [lattice])
    triangles = Delaunay(nodes).simplices
    centroids = nodes[triangles].mean(axis=1)
    return nodes, triangles[region.contains(centroids)]


def _subdivide(nodes: np.ndarray, triangles: np.ndarray, parts: int) -> np.ndarray:
    """Corners (T·parts², 3, 2) of each triangle cut into parts² similar triangles."""
    corners = nodes[triangles]                      # (T, 3, 2)
    p0, e1, e2 = corners[:, 0], corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0]
    pieces = []
    for i in range(parts):
        for j in range(parts - i):
            up = np.array([[i, j], [i + 1, j], [i, j + 1]], float) / parts
            pieces.append(up)
            if i + j < parts - 1:
                pieces.append(np.array([[i + 1, j], [i + 1, j + 1], [i, j + 1]], float) / parts)
    local = np.array(pieces)                        # (S, 3, 2) barycentric (s, t)
    return (p0[:, None, None, :] + local[None, :, :, 0:1] * e1[:, None, None, :]
            + local[None, :, :, 1:2] * e2[:, None, None, :]).reshape(-1, 3, 2)


def point_shapes(basis: ModalBasis, cells_target: int | None = None) -> PointShapes:
    """The point family of a basis: about seven cells per half-wavelength of its highest mode
    (Weyl's law on the region's area) and at least 40 across, at most about 6000 cells;
    ``cells_target`` asks for about that many cells instead (within the same cap). A region
    with a finite-element mesh has that mesh subdivided."""
    region = basis.region
    area = float(region.area) if getattr(region, "area", 0.0) else None
    if not area:
        x0, y0, x1, y1 = region.bounds()
        area = (x1 - x0) * (y1 - y0)
    n = max(len(basis), 1)
    # Weyl: n modes reach a wavenumber k ≈ √(4π n / A); about 7 cells per half-wavelength.
    wavenumber = math.sqrt(4 * math.pi * n / area)
    spacing = min(math.pi / wavenumber / 7.0, math.sqrt(area) / 40.0)
    if cells_target is not None:
        spacing = math.sqrt(2.0 * area / cells_target)
    spacing = max(spacing, math.sqrt(2.0 * area / 6000.0))   # at most about 6000 cells
    nodes, triangles = _region_triangulation(region, spacing)
    parts = 1
    if isinstance(region, PolygonRegion) and region.triangles is not None:
        # Subdivide the finite-element mesh to the spacing, within the cell budget.
        edge = float(np.mean(np.linalg.norm(
            nodes[triangles] - np.roll(nodes[triangles], 1, axis=1), axis=2)))
        parts = max(1, int(round(edge / spacing)))
        parts = max(1, min(parts, int(math.sqrt(6000.0 / max(len(triangles), 1)))))
    corners = _subdivide(nodes, triangles, parts)
    e1, e2 = corners[:, 1] - corners[:, 0], corners[:, 2] - corners[:, 0]
    signed = 0.5 * (e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0])
    flip = signed < 0
    corners[flip] = corners[flip][:, [0, 2, 1]]
    weights = np.abs(signed)
    keep = weights > 1e-14 * area
    corners, weights = corners[keep], weights[keep]
    points = corners.mean(axis=1)
    values = np.asarray(basis.evaluate(points), float).reshape(len(points), len(basis))
    return PointShapes(region, points, weights, corners, values,
                       float(np.sqrt(2.0 * weights.mean())))
