"""Vector figures for the PDF audit: the mode-shape drawings, and the pieces the charts share.

Drawings are ``reportlab.graphics.shapes.Drawing`` objects (vector, placed in the document as
flowables). The writers only read the audit result: frequencies, participation factors and
sampled shapes come from the records; nothing here recomputes physics. The interference and
tuning charts are in ``auditor.report.charts``.

Small pure pieces come first (log-axis ticks, marching squares for the nodal lines, merged runs
of raster cells for the ± regions); the drawing functions assemble them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import numpy as np
from reportlab.graphics.shapes import (
    FILL_EVEN_ODD,
    Circle,
    Drawing,
    Group,
    Line,
    Path,
    Polygon,
    Rect,
    String,
)
from reportlab.lib.colors import Color, HexColor
from reportlab.pdfbase.pdfmetrics import stringWidth

from auditor.model import CircleCutout, Mode, Panel, ShapeGrid
from auditor.report.text import clean_text, format_hz, to_latin1

__all__ = [
    "FigureStyle",
    "log_frequency_ticks",
    "frequency_axis_range",
    "participation_marker_radius",
    "marching_squares",
    "cell_means",
    "merged_cell_runs",
    "layered_cell_runs",
    "simplify_polyline",
    "mode_shape_drawing",
    "shape_legend",
]

#: Largest uniform-pressure participation factor of a clamped membrane fundamental, used as the
#: top of the marker-size scale: 4/j01² ≈ 0.69 for a circle, 64/π⁴ ≈ 0.66 for a rectangle.
PARTICIPATION_SCALE_TOP = 0.7
#: |φ| above which a mode-shape region is drawn in the deeper tone.
STRONG_LEVEL = 0.5


@dataclass(frozen=True)
class FigureStyle:
    """Fonts and colours of the figures (hex strings ``#rrggbb``), from the report template."""

    font: str = "Helvetica"
    font_bold: str = "Helvetica-Bold"
    text: str = "#222222"
    axis: str = "#555555"
    grid: str = "#e3e3e3"
    mode: str = "#3b5b7a"
    conflict: str = "#b03a2e"
    caution: str = "#c98a1b"
    excitation: str = "#4a4a4a"
    conflict_window: str = "#e8a89f"
    caution_window: str = "#f3d9a6"
    band: str = "#9e9e9e"
    measured: str = "#2e7d32"
    positive: str = "#d6604d"
    negative: str = "#4393c3"
    nodal: str = "#111111"
    outline: str = "#111111"
    cutout: str = "#eeeeee"
    not_assessed: str = "#6a4c93"
    clear_window: str = "#a9d5a0"
    clear_label: str = "#3c7a3c"
    proposed: str = "#1f3f5b"
    #: True when the fonts are the PDF base fonts, which show only Western European text
    latin1: bool = False

    def label(self, text: object) -> str:
        """A string as a figure draws it: literally (a drawing's strings are never markup),
        unprintable characters as U+FFFD (or "?" with the base fonts)."""
        shown = clean_text(text)
        return to_latin1(shown) if self.latin1 else shown


def _fit(text: str, font: str, size: float, width: float) -> str:
    """A one-line label shortened with an ellipsis to ``width`` [pt]."""
    if stringWidth(text, font, size) <= width:
        return text
    while text and stringWidth(text + "\u2026", font, size) > width:
        text = text[:-1]
    return text + "\u2026"


def _colour(hex_string: str, alpha: float | None = None) -> Color:
    c = HexColor(hex_string)
    if alpha is not None:
        c = Color(c.red, c.green, c.blue, alpha=alpha)
    return c


def _lighten(hex_string: str, amount: float) -> Color:
    """Mix a colour with white: ``amount`` 0 keeps it, 1 gives white."""
    c = HexColor(hex_string)
    return Color(c.red + (1 - c.red) * amount, c.green + (1 - c.green) * amount,
                 c.blue + (1 - c.blue) * amount)


# ---------------------------------------------------------------------------------------------
# Axis
# ---------------------------------------------------------------------------------------------

def frequency_axis_range(frequencies_hz: Iterable[float], pad: float = 1.25) -> tuple[float, float]:
    """A log-axis range [Hz] that holds every frequency with a margin, snapped to 1-2-5 values.

    Parameters
    ----------
    frequencies_hz : iterable of float  [Hz]
        Positive values only are used; with none, 10-1000 Hz.
    pad : float  [-]
        Factor of space kept beyond the lowest and the highest frequency.
    """
    values = [float(f) for f in frequencies_hz if f is not None and math.isfinite(f) and f > 0]
    if not values:
        return 10.0, 1000.0
    low, high = min(values) / pad, max(values) * pad
    steps = (1.0, 2.0, 5.0, 10.0)
    decade = 10.0 ** math.floor(math.log10(low))
    low_snapped = max(s * decade for s in steps if s * decade <= low * (1 + 1e-12))
    decade = 10.0 ** math.floor(math.log10(high))
    high_snapped = min(s * decade for s in steps if s * decade >= high * (1 - 1e-12))
    if high_snapped / low_snapped < 10.0 ** 0.5:  # keep at least half a decade on the page
        mid = math.sqrt(high_snapped * low_snapped)
        return frequency_axis_range([mid / 1.8, mid * 1.8], pad=1.0)
    return low_snapped, high_snapped


def log_frequency_ticks(low_hz: float,
                        high_hz: float) -> tuple[list[float], list[float], list[float]]:
    """Tick positions for a log-frequency axis from ``low_hz`` to ``high_hz``  [Hz].

    Returns
    -------
    major : list of float  [Hz]
        Decades (1, 10, 100 ... Hz) inside the range.
    minor : list of float  [Hz]
        Sub-decade ticks 2×, 3× ... 9× a decade inside the range.
    labelled : list of float  [Hz]
        The ticks that carry a label: decades, plus 2× and 5× when the range spans fewer than
        about three decades, plus every sub-decade tick when it spans less than one decade; the
        range ends are labelled when no decade falls inside.

    References
    ----------
    Common practice of log-scale plotting: decade ticks labelled, with 1-2-5 sub-decade labels
    on short ranges.
    """
    if not (0 < low_hz < high_hz):
        raise ValueError("the axis needs 0 < low_hz < high_hz")
    tol = 1e-9
    span = math.log10(high_hz / low_hz)
    major: list[float] = []
    minor: list[float] = []
    for exponent in range(math.floor(math.log10(low_hz)), math.ceil(math.log10(high_hz)) + 1):
        decade = 10.0 ** exponent
        for step in range(1, 10):
            f = step * decade
            if f < low_hz * (1 - tol) or f > high_hz * (1 + tol):
                continue
            (major if step == 1 else minor).append(f)
    labelled = list(major)
    if span < 3.2:
        labelled += [f for f in minor if _leading_digit(f) in (2, 5)]
    if span < 1.0:
        labelled += [f for f in minor if f not in labelled]
    if not major:
        for end in (low_hz, high_hz):
            if not any(abs(end / f - 1) < 1e-9 for f in labelled):
                labelled.append(end)
    return major, minor, sorted(labelled)


def _leading_digit(value: float) -> int:
    return int(round(value / 10.0 ** math.floor(math.log10(value) + 1e-12)))


def _tick_label(value: float) -> str:
    if value >= 1000 and abs(value / 1000 - round(value / 1000)) < 1e-9:
        return f"{value / 1000:g}k"
    return f"{value:g}"


def participation_marker_radius(participation: float, smallest: float = 1.8,
                                largest: float = 6.0) -> float:
    """Marker radius [pt] for a mode: the area above the smallest marker's grows in proportion
    to the participation factor.

    ``participation`` 0 gives the smallest radius (drawn hollow); the scale tops out at
    ``PARTICIPATION_SCALE_TOP``.
    """
    share = min(max(float(participation), 0.0) / PARTICIPATION_SCALE_TOP, 1.0)
    return math.sqrt(smallest**2 + (largest**2 - smallest**2) * share)


# ---------------------------------------------------------------------------------------------
# Nodal lines: marching squares
# ---------------------------------------------------------------------------------------------

# Edges of a cell: 0 bottom (a-b), 1 right (b-c), 2 top (d-c), 3 left (a-d), with corners
# a (x_i, y_j), b (x_i+1, y_j), c (x_i+1, y_j+1), d (x_i, y_j+1) and case bits a=1 b=2 c=4 d=8.
_SEGMENTS: dict[int, tuple[tuple[int, int], ...]] = {
    1: ((3, 0),), 2: ((0, 1),), 3: ((3, 1),), 4: ((1, 2),), 6: ((0, 2),), 7: ((3, 2),),
    8: ((3, 2),), 9: ((0, 2),), 11: ((1, 2),), 12: ((3, 1),), 13: ((0, 1),), 14: ((3, 0),),
}
# Saddles: (centre above the level, centre below it)
_SADDLES: dict[int, tuple[tuple[tuple[int, int], ...], tuple[tuple[int, int], ...]]] = {
    5: (((0, 1), (3, 2)), ((3, 0), (1, 2))),
    10: (((3, 0), (1, 2)), ((0, 1), (3, 2))),
}


def marching_squares(x: np.ndarray, y: np.ndarray, values: np.ndarray,
                     level: float = 0.0) -> list[np.ndarray]:
    """Contour lines of a sampled field at ``level``, joined into polylines.

    Parameters
    ----------
    x : ndarray (nx,)  [m]
    y : ndarray (ny,)  [m]
    values : ndarray (ny, nx)
        Samples; NaN marks points outside the region (cells touching one are skipped).
    level : float

    Returns
    -------
    list of ndarray (k, 2)
        Each polyline's points [m], in order; a closed loop repeats its first point.

    Notes
    -----
    Linear interpolation along cell edges; the two ambiguous (saddle) cases are resolved by
    the mean of the four corners.

    References
    ----------
    W. E. Lorensen and H. E. Cline, "Marching cubes: a high resolution 3D surface construction
    algorithm", Computer Graphics 21(4), 1987 (its two-dimensional form, marching squares).
    """
    x = np.asarray(x, float)
    y = np.asarray(y, float)
    v = _settle_border_zeros(np.asarray(values, float) - level)
    ny, nx = v.shape
    if ny < 2 or nx < 2:
        return []
    a, b, c, d = v[:-1, :-1], v[:-1, 1:], v[1:, 1:], v[1:, :-1]
    valid = np.isfinite(a) & np.isfinite(b) & np.isfinite(c) & np.isfinite(d)
    case = ((a > 0) * 1 + (b > 0) * 2 + (c > 0) * 4 + (d > 0) * 8).astype(np.int8)
    case[~valid] = 0
    centre_above = (a + b + c + d) > 0
    jj, ii = np.nonzero((case != 0) & (case != 15))
    if jj.size == 0:
        return []

    n_horizontal = ny * (nx - 1)
    # crossing point and id of each of the four edges of every cell the level passes through
    with np.errstate(divide="ignore", invalid="ignore"):
        def crossing(p: np.ndarray, q: np.ndarray) -> np.ndarray:
            return np.clip(np.where(p != q, p / (p - q), 0.5), 0.0, 1.0)

        va, vb, vc, vd = v[jj, ii], v[jj, ii + 1], v[jj + 1, ii + 1], v[jj + 1, ii]
        x0, x1, y0, y1 = x[ii], x[ii + 1], y[jj], y[jj + 1]
        t_bottom, t_right = crossing(va, vb), crossing(vb, vc)
        t_top, t_left = crossing(vd, vc), crossing(va, vd)
    points = (
        np.column_stack([x0 + t_bottom * (x1 - x0), y0]),
        np.column_stack([x1, y0 + t_right * (y1 - y0)]),
        np.column_stack([x0 + t_top * (x1 - x0), y1]),
        np.column_stack([x0, y0 + t_left * (y1 - y0)]),
    )
    ids = (
        jj * (nx - 1) + ii,
        n_horizontal + jj * nx + ii + 1,
        (jj + 1) * (nx - 1) + ii,
        n_horizontal + jj * nx + ii,
    )

    cases = case[jj, ii]
    centre = centre_above[jj, ii]
    starts_id: list[np.ndarray] = []
    ends_id: list[np.ndarray] = []
    starts_pt: list[np.ndarray] = []
    ends_pt: list[np.ndarray] = []

    def add(mask: np.ndarray, pair: tuple[int, int]) -> None:
        if not mask.any():
            return
        starts_id.append(ids[pair[0]][mask])
        ends_id.append(ids[pair[1]][mask])
        starts_pt.append(points[pair[0]][mask])
        ends_pt.append(points[pair[1]][mask])

    for k, pairs in _SEGMENTS.items():
        mask = cases == k
        for pair in pairs:
            add(mask, pair)
    for k, (above, below) in _SADDLES.items():
        saddle = cases == k
        for pair in above:
            add(saddle & centre, pair)
        for pair in below:
            add(saddle & ~centre, pair)

    s_id = np.concatenate(starts_id)
    e_id = np.concatenate(ends_id)
    point_of: dict[int, np.ndarray] = {}
    for key_list, pts in ((s_id.tolist(), np.concatenate(starts_pt)),
                          (e_id.tolist(), np.concatenate(ends_pt))):
        point_of.update(zip(key_list, pts, strict=False))
    return _join_segments(s_id.tolist(), e_id.tolist(), point_of)


def _settle_border_zeros(v: np.ndarray, tiny: float = 1e-9) -> np.ndarray:
    """Give samples sitting exactly on the level (a fixed edge) the sign of their neighbours.

    A clamped edge samples as exact zeros; left alone, marching squares would trace the edge
    itself and cut the corners of the panel. A zero whose significant neighbours (8 around it)
    all share one sign takes that sign at a negligible magnitude; a zero between both signs (a
    true nodal line through the samples) stays on the level.
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


def _join_segments(starts: list[int], ends: list[int],
                   point_of: dict[int, np.ndarray]) -> list[np.ndarray]:
    """Chain segments (pairs of edge ids) into polylines; each edge id joins at most two."""
    neighbours: dict[int, list[int]] = {}
    for s, e in zip(starts, ends, strict=False):
        if s == e:
            continue
        neighbours.setdefault(s, []).append(e)
        neighbours.setdefault(e, []).append(s)
    lines: list[np.ndarray] = []

    def take(a: int, b: int) -> None:
        neighbours[a].remove(b)
        neighbours[b].remove(a)

    def walk(start: int) -> list[int]:
        chain = [start]
        current = start
        while neighbours[current]:
            nxt = neighbours[current][0]
            take(current, nxt)
            chain.append(nxt)
            current = nxt
        return chain

    # open chains first (ends of degree 1), then the closed loops
    for node in [n for n, adjacent in neighbours.items() if len(adjacent) == 1]:
        if neighbours[node]:
            lines.append(np.array([point_of[k] for k in walk(node)]))
    for node in list(neighbours):
        if neighbours[node]:
            lines.append(np.array([point_of[k] for k in walk(node)]))
    return [line for line in lines if len(line) >= 2]


# ---------------------------------------------------------------------------------------------
# ± regions: raster cells merged into rectangles
# ---------------------------------------------------------------------------------------------

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


def simplify_polyline(points: np.ndarray, tolerance: float) -> np.ndarray:
    """Drop points closer than ``tolerance`` to the chord of their neighbours
    (Ramer-Douglas-Peucker).

    References
    ----------
    D. H. Douglas and T. K. Peucker, "Algorithms for the reduction of the number of points
    required to represent a digitized line or its caricature", The Canadian Cartographer
    10(2), 1973.
    """
    pts = np.asarray(points, float)
    if len(pts) < 3:
        return pts
    # exactly collinear interior points go first, in one vectorised pass (shape unchanged)
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


# ---------------------------------------------------------------------------------------------
# Mode-shape drawing
# ---------------------------------------------------------------------------------------------

def _panel_bounds(panel: Panel | None,
                  shape: ShapeGrid | None) -> tuple[float, float, float, float]:
    if panel is not None:
        if panel.shape == "rectangle" and panel.width and panel.length:
            return 0.0, 0.0, float(panel.width), float(panel.length)
        if panel.shape == "circle" and panel.diameter:
            r = panel.diameter / 2.0
            return -r, -r, r, r
        if panel.shape == "polygon" and panel.outline:
            o = np.asarray(panel.outline, float)
            return (float(o[:, 0].min()), float(o[:, 1].min()), float(o[:, 0].max()),
                    float(o[:, 1].max()))
    if shape is not None:
        x, y = np.asarray(shape.x, float), np.asarray(shape.y, float)
        return float(x.min()), float(y.min()), float(x.max()), float(y.max())
    return 0.0, 0.0, 1.0, 1.0


def _circle_points(cx: float, cy: float, r: float, n: int = 72) -> list[float]:
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.column_stack([cx + r * np.cos(t), cy + r * np.sin(t)]).ravel().tolist()


def mode_shape_drawing(shape: ShapeGrid, panel: Panel | None, mode: Mode | None, *,
                       width: float = 150.0, height: float = 130.0,
                       style: FigureStyle = FigureStyle(), note: str = "") -> Drawing:
    """A mode shape as a vector drawing: ± regions, nodal lines, the panel outline, a caption.

    Parameters
    ----------
    shape : ShapeGrid
        Sampled shape (NaN outside the panel), max |φ| = 1.
    panel : Panel or None
        For the outline (rectangle, circle, or polygon) and its cut-outs.
    mode : Mode or None
        For the caption (label and frequency); the grid's label is used without it.
    width, height : float  [pt]
    note : str
        Optional second caption line (e.g. the severity of the finding it is drawn for).
    """
    caption_height = 24.0 if note else 16.0
    drawing = Drawing(width, height)
    pad = 4.0
    box_w, box_h = width - 2 * pad, height - caption_height - 2 * pad
    xmin, ymin, xmax, ymax = _panel_bounds(panel, shape)
    span_x, span_y = max(xmax - xmin, 1e-9), max(ymax - ymin, 1e-9)
    scale = min(box_w / span_x, box_h / span_y)
    ox = pad + (box_w - scale * span_x) / 2.0 - scale * xmin
    oy = caption_height + pad + (box_h - scale * span_y) / 2.0 - scale * ymin

    x = np.asarray(shape.x, float)
    y = np.asarray(shape.y, float)
    values = np.asarray(shape.values, float)
    # a cell finer than about 1.5 pt adds nothing on paper: thin out a fine grid
    step = max(1, int(max(len(x), len(y)) / max(box_w, box_h) * 1.5))
    if step > 1 and values.shape == (len(y), len(x)):
        keep_x = np.unique(np.r_[np.arange(0, len(x), step), len(x) - 1])
        keep_y = np.unique(np.r_[np.arange(0, len(y), step), len(y) - 1])
        x, y, values = x[keep_x], y[keep_y], values[np.ix_(keep_y, keep_x)]
    px, py = ox + scale * x, oy + scale * y

    fills = {
        2: _colour(style.positive), 1: _lighten(style.positive, 0.55),
        -2: _colour(style.negative), -1: _lighten(style.negative, 0.55),
    }
    if values.ndim == 2 and values.shape == (len(y), len(x)) and len(x) > 1 and len(y) > 1:
        # everything inside the panel is clipped to its outline (less the cut-outs)
        group = Group()
        clip = _outline_path(panel, ox, oy, scale) if panel is not None else None
        if clip is not None:
            group.add(clip)
        signs, strong = layered_cell_runs(values, strong=STRONG_LEVEL, partial=clip is not None)
        # strong parts as smooth outlines where their contour closes, else as cell runs
        smooth: dict[int, list[np.ndarray]] = {}
        for sign in (1, -1):
            loops = marching_squares(x, y, sign * values, STRONG_LEVEL)
            if loops and all(len(p) > 3 and np.allclose(p[0], p[-1]) for p in loops):
                smooth[2 * sign] = loops
        for k in smooth:
            strong.pop(k, None)
        for layer in (signs, strong):
            for k, rects in layer.items():
                path = Path(fillColor=fills[k], strokeColor=None, strokeWidth=0)
                for i0, j0, i1, j1 in rects:
                    path.moveTo(px[i0], py[j0])
                    path.lineTo(px[i1], py[j0])
                    path.lineTo(px[i1], py[j1])
                    path.lineTo(px[i0], py[j1])
                    path.closePath()
                group.add(path)
        for k, loops in smooth.items():
            path = Path(fillColor=fills[k], strokeColor=None, strokeWidth=0, fillMode=FILL_EVEN_ODD)
            for loop in loops:
                pts = simplify_polyline(np.column_stack([ox + scale * loop[:, 0],
                                                         oy + scale * loop[:, 1]]), 0.2)
                path.moveTo(float(pts[0, 0]), float(pts[0, 1]))
                for px_, py_ in pts[1:].tolist():
                    path.lineTo(px_, py_)
                path.closePath()
            group.add(path)
        nodal = Path(strokeColor=_colour(style.nodal), strokeWidth=0.8, fillColor=None,
                     strokeLineJoin=1, strokeLineCap=1)
        for line in marching_squares(x, y, values, 0.0):
            pts = simplify_polyline(np.column_stack([ox + scale * line[:, 0],
                                                     oy + scale * line[:, 1]]), 0.15)
            nodal.moveTo(float(pts[0, 0]), float(pts[0, 1]))
            for px_, py_ in pts[1:].tolist():
                nodal.lineTo(px_, py_)
        group.add(nodal)
        drawing.add(group)

    outline = _colour(style.outline)
    if panel is not None:
        _add_outline(drawing, panel, ox, oy, scale, outline, _colour(style.cutout))
    else:
        drawing.add(Rect(ox + scale * xmin, oy + scale * ymin, scale * span_x, scale * span_y,
                         fillColor=None, strokeColor=outline, strokeWidth=1.0))

    label = mode.label if mode is not None else shape.label
    text = style.label(f"mode {label}")
    if mode is not None:
        text += f"   {format_hz(mode.frequency_hz)} Hz"
    drawing.add(String(width / 2.0, caption_height - 10.0, text, fontName=style.font_bold,
                       fontSize=7.5, fillColor=_colour(style.text), textAnchor="middle"))
    if note:
        drawing.add(String(width / 2.0, caption_height - 19.5,
                           _fit(style.label(note), style.font, 7.0, width - 2),
                           fontName=style.font, fontSize=7.0, fillColor=_colour(style.axis),
                           textAnchor="middle"))
    return drawing


def _outline_path(panel: Panel, ox: float, oy: float, scale: float) -> Path | None:
    """The panel's area as a clipping path: outline with the cut-outs as holes (even-odd)."""
    rings: list[list[float]] = []
    if panel.shape == "circle" and panel.diameter:
        rings.append(_circle_points(ox, oy, scale * panel.diameter / 2.0, 120))
    elif panel.shape == "polygon" and panel.outline:
        rings.append([v for (px, py) in panel.outline for v in (ox + scale * px, oy + scale * py)])
    elif panel.width and panel.length:
        w, h = scale * panel.width, scale * panel.length
        rings.append([ox, oy, ox + w, oy, ox + w, oy + h, ox, oy + h])
    else:
        return None
    for cut in panel.cutouts:
        if isinstance(cut, CircleCutout):
            rings.append(_circle_points(ox + scale * cut.x, oy + scale * cut.y,
                                        scale * cut.diameter / 2.0, 72))
        else:
            rings.append([v for (px, py) in cut.vertices
                          for v in (ox + scale * px, oy + scale * py)])
    path = Path(isClipPath=1, fillMode=FILL_EVEN_ODD, strokeColor=None, fillColor=None)
    for ring in rings:
        path.moveTo(ring[0], ring[1])
        for k in range(2, len(ring), 2):
            path.lineTo(ring[k], ring[k + 1])
        path.closePath()
    return path


def _add_outline(drawing: Drawing, panel: Panel, ox: float, oy: float, scale: float,
                 outline: Color, cutout_fill: Color) -> None:
    def tx(px: float) -> float:
        return ox + scale * px

    def ty(py: float) -> float:
        return oy + scale * py

    for cut in panel.cutouts:
        if isinstance(cut, CircleCutout):
            drawing.add(Circle(tx(cut.x), ty(cut.y), scale * cut.diameter / 2.0,
                               fillColor=cutout_fill, strokeColor=outline, strokeWidth=0.7))
        else:
            pts = [v for (px, py) in cut.vertices for v in (tx(px), ty(py))]
            drawing.add(Polygon(pts, fillColor=cutout_fill, strokeColor=outline, strokeWidth=0.7))
    if panel.shape == "circle" and panel.diameter:
        drawing.add(Circle(tx(0.0), ty(0.0), scale * panel.diameter / 2.0, fillColor=None,
                           strokeColor=outline, strokeWidth=1.1))
    elif panel.shape == "polygon" and panel.outline:
        pts = [v for (px, py) in panel.outline for v in (tx(px), ty(py))]
        drawing.add(Polygon(pts, fillColor=None, strokeColor=outline, strokeWidth=1.1))
    elif panel.width and panel.length:
        drawing.add(Rect(tx(0.0), ty(0.0), scale * panel.width, scale * panel.length,
                         fillColor=None, strokeColor=outline, strokeWidth=1.1))


def shape_legend(style: FigureStyle = FigureStyle(), width: float = 300.0) -> Drawing:
    """The key to the mode-shape drawings: + and − regions, nodal line, cut-out."""
    d = Drawing(width, 14)
    text = _colour(style.text)
    x = 0.0
    items: list[tuple[str, Any]] = [
        ("displacement +", _colour(style.positive)),
        ("displacement \u2212", _colour(style.negative)),
    ]
    for label, fill in items:
        d.add(Rect(x, 3, 14, 8, fillColor=fill, strokeColor=None))
        d.add(String(x + 18, 4, label, fontName=style.font, fontSize=7, fillColor=text))
        x += 22 + stringWidth(label, style.font, 7) + 10
    d.add(Line(x, 7, x + 14, 7, strokeColor=_colour(style.nodal), strokeWidth=0.8))
    d.add(String(x + 18, 4, "nodal line", fontName=style.font, fontSize=7, fillColor=text))
    x += 22 + stringWidth("nodal line", style.font, 7) + 10
    d.add(Rect(x, 3, 14, 8, fillColor=_colour(style.cutout), strokeColor=_colour(style.outline),
               strokeWidth=0.6))
    d.add(String(x + 18, 4, "cut-out", fontName=style.font, fontSize=7, fillColor=text))
    return d
