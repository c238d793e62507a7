"""A small terminal drawing of one mode shape: its + and − regions and its nodal lines.

Works for any :class:`auditor.physics.basis.ModalBasis` (rectangle, circle, polygon with
cut-outs): the shape is sampled at the centre of each character cell with ``evaluate``, cells
outside the panel (``region.contains``) stay blank, and the nodal lines are drawn where the
sign changes between neighbouring cells, on the cell nearer the zero.
"""

from __future__ import annotations

import numpy as np

from auditor.physics.basis import ModalBasis

__all__ = ["POSITIVE", "NEGATIVE", "NODAL", "OUTSIDE", "sketch_mode"]

#: Characters of the drawing.
POSITIVE = "+"
NEGATIVE = "-"
NODAL = "·"
OUTSIDE = " "

# A terminal character cell is about twice as tall as it is wide.
_CELL_ASPECT = 2.0


def _drawing_size(width: float, height: float, columns: int, rows: int) -> tuple[int, int]:
    """Columns and rows that fit the panel's proportions inside ``columns`` × ``rows``."""
    if width <= 0.0 or height <= 0.0:
        return columns, rows
    # cells needed per metre so that both directions fit
    per_metre = min(columns / width, rows * _CELL_ASPECT / height)
    used_columns = int(round(width * per_metre))
    used_rows = int(round(height * per_metre / _CELL_ASPECT))
    return max(3, min(columns, used_columns)), max(3, min(rows, used_rows))


def sketch_mode(basis: ModalBasis, index: int, columns: int = 24, rows: int = 10,
                vector: np.ndarray | None = None) -> list[str]:
    """Draw mode ``index`` of ``basis`` in characters.

    Parameters
    ----------
    basis : ModalBasis
    index : int
        Position of the mode in the basis (0 is the lowest).
    columns, rows : int
        The largest drawing, in characters; the panel's proportions are kept (a character
        cell is taken as twice as tall as wide), never less than 3 × 3.
    vector : ndarray (n_basis,), optional
        Draw this combination of basis shapes instead (an air-loaded mode's coordinates);
        ``index`` is then ignored.

    Returns
    -------
    lines : list of str
        Top line first (largest y). ``+`` and ``-`` mark where the shape is positive or
        negative, ``·`` the nodal lines, blank is outside the panel.

    Raises
    ------
    IndexError
        ``index`` is not a mode of the basis.
    ValueError
        ``columns`` or ``rows`` is less than 3.
    """
    count = len(basis)
    if not -count <= index < count:
        raise IndexError(f"mode {index} is not in this basis ({count} modes)")
    if columns < 3 or rows < 3:
        raise ValueError(f"a sketch needs at least 3 columns and 3 rows, got {columns} × {rows}")
    x0, y0, x1, y1 = basis.region.bounds()
    used_columns, used_rows = _drawing_size(x1 - x0, y1 - y0, int(columns), int(rows))
    x = x0 + (np.arange(used_columns) + 0.5) * (x1 - x0) / used_columns
    y = y1 - (np.arange(used_rows) + 0.5) * (y1 - y0) / used_rows  # top row first
    xx, yy = np.meshgrid(x, y)
    points = np.column_stack([xx.ravel(), yy.ravel()])
    inside = np.asarray(basis.region.contains(points), bool)
    values: np.ndarray = np.zeros(points.shape[0])
    if inside.any():
        shapes = np.asarray(basis.evaluate(points[inside]))
        values[inside] = shapes[:, index] if vector is None else shapes @ np.asarray(vector)
    values = values.reshape(used_rows, used_columns)
    inside = inside.reshape(used_rows, used_columns)
    peak = np.max(np.abs(values[inside])) if inside.any() else 0.0
    nodal = _nodal_cells(values, inside, peak)

    grid = np.full((used_rows, used_columns), OUTSIDE, dtype="<U1")
    grid[inside & (values > 0.0)] = POSITIVE
    grid[inside & (values < 0.0)] = NEGATIVE
    grid[inside & nodal] = NODAL
    return ["".join(row) for row in grid]


def _nodal_cells(values: np.ndarray, inside: np.ndarray, peak: float) -> np.ndarray:
    """Cells on a nodal line: a neighbour (inside the panel) has the opposite sign and this
    cell is the nearer of the two to the zero (ties go to the left or upper cell); also any
    cell whose value is zero to rounding."""
    magnitude = np.abs(values)
    sign = np.sign(values)
    tiny = 1e-9 * peak
    sign[magnitude <= tiny] = 0.0
    nodal = inside & (sign == 0.0)
    for axis in (0, 1):
        here_parts = [slice(None), slice(None)]
        there_parts = [slice(None), slice(None)]
        here_parts[axis], there_parts[axis] = slice(None, -1), slice(1, None)
        here, there = tuple(here_parts), tuple(there_parts)
        change = (sign[here] * sign[there] < 0.0) & inside[here] & inside[there]
        nearer_here = magnitude[here] <= magnitude[there]
        mark_here = np.zeros_like(nodal)
        mark_there = np.zeros_like(nodal)
        mark_here[here] = change & nearer_here
        mark_there[there] = change & ~nearer_here
        nodal |= mark_here | mark_there
    return nodal
