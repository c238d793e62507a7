"""The ± regions of a sampled mode shape, as rectangles of merged raster cells for the PDF.

A cell between four samples takes the sign (and, optionally, the strength) of the mean of its
corners; equal neighbouring cells merge into runs along a row, and a run repeated on the next
row grows downwards, so a region is painted with few rectangles. The nodal lines that bound
the regions are traced in ``auditor.report.nodal_lines``.
"""

from __future__ import annotations

import numpy as np

__all__ = ["cell_means", "merged_cell_runs", "layered_cell_runs"]


def cell_means(values: np.ndarray, partial: bool = False) -> np.ndarray:
    """Mean of the corners of each cell between samples, NaN for a cell outside the region.

    Only cells with all four corners inside count, or with ``partial`` every cell with at
    least one (for drawing under a clipping outline). Shape (ny-1, nx-1).
    """
    v = np.asarray(values, float)
    corners = np.stack([v[:-1, :-1], v[:-1, 1:], v[1:, 1:], v[1:, :-1]])
    valid = np.isfinite(corners)
    count = valid.sum(axis=0)
    total = np.where(valid, corners, 0.0).sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count >= (1 if partial else 4), total / np.maximum(count, 1), np.nan)


def _classes(mean: np.ndarray, strong: float | None) -> np.ndarray:
    cls = np.zeros(mean.shape, dtype=np.int8)
    finite = np.isfinite(mean)
    m = np.where(finite, mean, 0.0)
    cls[finite & (m > 0)] = 1
    cls[finite & (m < 0)] = -1
    if strong is not None:
        cls[finite & (np.abs(m) >= strong)] *= 2
    return cls


def _runs(cls: np.ndarray) -> dict[int, list[tuple[int, int, int, int]]]:
    """Rectangles of equal non-zero class: runs along rows, grown down while repeated."""
    out: dict[int, list[tuple[int, int, int, int]]] = {}
    n_rows, n_cols = cls.shape
    if n_rows == 0 or n_cols == 0:
        return out
    starts = np.ones(cls.shape, dtype=bool)
    starts[:, 1:] = cls[:, 1:] != cls[:, :-1]
    rows, cols = np.nonzero(starts)                     # row-major order
    ends = np.r_[cols[1:], n_cols]
    ends[np.r_[rows[1:] != rows[:-1], True]] = n_cols   # a row's last run ends at the edge
    kinds = cls[rows, cols]
    open_runs: dict[tuple[int, int, int], int] = {}
    current: dict[tuple[int, int, int], int] = {}
    row_now = 0
    for j, i0, i1, k in zip(rows.tolist(), cols.tolist(), ends.tolist(), kinds.tolist(),
                            strict=True):
        if j != row_now:
            for (a, b, kk), j0 in open_runs.items():
                out.setdefault(kk, []).append((a, j0, b, row_now))
            open_runs, current = current, {}
            row_now = j
        if k == 0:
            continue
        key = (i0, i1, k)
        current[key] = open_runs.pop(key, j)
    for (a, b, kk), j0 in open_runs.items():
        out.setdefault(kk, []).append((a, j0, b, row_now))
    for (a, b, kk), j0 in current.items():
        out.setdefault(kk, []).append((a, j0, b, row_now + 1))
    return out


def merged_cell_runs(values: np.ndarray, strong: float = 0.5,
                     partial: bool = False) -> dict[int, list[tuple[int, int, int, int]]]:
    """Group the cells between samples into rectangles of equal class.

    A cell takes the class of the mean of its corners inside the region (see
    :func:`cell_means`): +2 / -2 where that mean is at least ``strong`` in magnitude, +1 / -1
    otherwise. Equal neighbouring cells along a row merge into a run; a run repeated exactly on
    the next row grows downwards instead of starting a new rectangle.

    Returns
    -------
    dict class -> list of (i0, j0, i1, j1)
        Cell-index rectangles, half-open: columns i0..i1-1, rows j0..j1-1.
    """
    return _runs(_classes(cell_means(values, partial), strong))


def layered_cell_runs(values: np.ndarray, strong: float = 0.5, partial: bool = False
                      ) -> tuple[dict[int, list[tuple[int, int, int, int]]],
                                 dict[int, list[tuple[int, int, int, int]]]]:
    """The same picture as :func:`merged_cell_runs` in two layers, for painting in order.

    First the sign regions (classes +1 / -1 over every cell), then the strong parts (+2 / -2)
    on top. Sign regions are bounded by the nodal lines only, so they merge into far fewer
    rectangles than the four-class picture.
    """
    mean = cell_means(values, partial)
    signs = _classes(mean, None)
    strong_only = np.where(np.abs(np.nan_to_num(mean)) >= strong, 2 * signs, 0).astype(np.int8)
    return _runs(signs), _runs(strong_only)
