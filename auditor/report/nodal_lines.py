"""Nodal lines and other level lines of a sampled mode shape, for the PDF's drawings.

The contour tracing is ``contourpy``'s (the serial marching-squares algorithm); this module
prepares the samples for it, so that a clamped edge, which samples as exact zeros, is not
traced as a nodal line, and thins the traced polylines to what paper can show.
"""

from __future__ import annotations

import math

import numpy as np
from contourpy import LineType, contour_generator

__all__ = ["level_lines", "simplify_polyline"]


def level_lines(x: np.ndarray, y: np.ndarray, values: np.ndarray,
                level: float = 0.0) -> list[np.ndarray]:
    """Contour lines of a sampled field at ``level``, joined into polylines.

    Parameters
    ----------
    x : ndarray (nx,)  [m]
    y : ndarray (ny,)  [m]
    values : ndarray (ny, nx)
        Samples; NaN marks points outside the region (cells touching one are skipped).
    level : float
        In the units of ``values`` (a mode shape is scaled to max |φ| = 1).

    Returns
    -------
    list of ndarray (k, 2)
        Each polyline's points [m], in order; a closed loop repeats its first point.

    Notes
    -----
    Linear interpolation along cell edges; ambiguous (saddle) cells are resolved by the mean
    of their four corners. Samples exactly on the level whose neighbours all lie on one side
    (the fixed edge of a panel) are first moved a negligible step to that side (see
    :func:`settle_border_zeros`).

    References
    ----------
    W. E. Lorensen and H. E. Cline, "Marching cubes: a high resolution 3D surface construction
    algorithm", Computer Graphics 21(4), 1987 (its two-dimensional form, marching squares).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    v = np.asarray(values, float)
    if v.ndim != 2 or v.shape[0] < 2 or v.shape[1] < 2:
        return []
    settled = settle_border_zeros(v - level)
    if not np.isfinite(settled).any():
        return []
    generator = contour_generator(x, y, settled, name="serial", corner_mask=False,
                                  line_type=LineType.Separate)
    # contourpy types lines() as the union over every LineType; Separate gives (k, 2) arrays
    lines = generator.lines(0.0)
    return [line for line in lines if len(line) >= 2]  # type: ignore[misc]  # see above


def settle_border_zeros(v: np.ndarray, tiny: float = 1e-9) -> np.ndarray:
    """Give samples sitting exactly on the level (a fixed edge) the sign of their neighbours.

    A clamped edge samples as exact zeros; left alone, the contour would follow the edge
    itself and cut the corners of the panel. A zero whose significant neighbours (8 around it)
    all share one sign takes that sign at a negligible magnitude; a zero between both signs (a
    true nodal line through the samples) stays on the level.

    Parameters
    ----------
    v : ndarray (ny, nx)
        Samples less the level; NaN outside the region.
    tiny : float  [-]
        What counts as zero, relative to the largest |v|.
    """
    scale = np.nanmax(np.abs(v)) if np.isfinite(v).any() else 0.0
    if scale == 0.0:
        return v
    threshold = tiny * scale
    flat = np.isfinite(v) & (np.abs(v) <= threshold)
    if not flat.any():
        return v
    padded = np.pad(v, 1, constant_values=np.nan)
    positive = np.zeros(v.shape, dtype=np.int16)
    negative = np.zeros(v.shape, dtype=np.int16)
    ny, nx = v.shape
    for dj in (-1, 0, 1):
        for di in (-1, 0, 1):
            if dj == 0 and di == 0:
                continue
            neighbour = padded[1 + dj:1 + dj + ny, 1 + di:1 + di + nx]
            with np.errstate(invalid="ignore"):
                positive += neighbour > threshold
                negative += neighbour < -threshold
    out = v.copy()
    out[flat & (positive > 0) & (negative == 0)] = 0.5 * threshold
    out[flat & (negative > 0) & (positive == 0)] = -0.5 * threshold
    mixed = flat & ~((positive > 0) & (negative == 0)) & ~((negative > 0) & (positive == 0))
    out[mixed] = 0.0
    return out


def simplify_polyline(points: np.ndarray, tolerance: float) -> np.ndarray:
    """Drop points closer than ``tolerance`` to the chord of their neighbours
    (Ramer-Douglas-Peucker).

    Parameters
    ----------
    points : ndarray (k, 2)
        In drawing units [pt].
    tolerance : float  [pt]

    References
    ----------
    D. H. Douglas and T. K. Peucker, "Algorithms for the reduction of the number of points
    required to represent a digitized line or its caricature", The Canadian Cartographer
    10(2), 1973.
    """
    pts = np.asarray(points, float)
    if len(pts) < 3:
        return pts
    # repeated points (a line through a sample crosses two cell edges there) go first: a
    # corner and its copy would each look collinear with the other and both be dropped
    pts = pts[np.r_[True, np.any(pts[1:] != pts[:-1], axis=1)]]
    if len(pts) < 3:
        return pts
    # exactly collinear interior points go next, in one vectorised pass (shape unchanged)
    before, here, after = pts[:-2], pts[1:-1], pts[2:]
    chord = after - before
    cross = np.abs(chord[:, 0] * (here[:, 1] - before[:, 1])
                   - chord[:, 1] * (here[:, 0] - before[:, 0]))
    straight = cross <= 1e-9 * (np.hypot(chord[:, 0], chord[:, 1]) ** 2 + 1e-300)
    if straight.any():
        pts = pts[np.r_[True, ~straight, True]]
        if len(pts) < 3:
            return pts
    keep = np.zeros(len(pts), dtype=bool)
    keep[0] = keep[-1] = True
    stack = [(0, len(pts) - 1)]
    while stack:
        first, last = stack.pop()
        if last <= first + 1:
            continue
        a, b = pts[first], pts[last]
        seg = pts[first + 1:last]
        d = b - a
        length = math.hypot(d[0], d[1])
        if length == 0.0:
            dist = np.hypot(seg[:, 0] - a[0], seg[:, 1] - a[1])
        else:
            dist = np.abs(d[0] * (seg[:, 1] - a[1]) - d[1] * (seg[:, 0] - a[0])) / length
        k = int(np.argmax(dist))
        if dist[k] > tolerance:
            mid = first + 1 + k
            keep[mid] = True
            stack += [(first, mid), (mid, last)]
    return pts[keep]
