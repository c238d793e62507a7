"""Vector figures for the PDF audit: the mode-shape drawings, and the pieces the charts share.

Drawings are ``reportlab.graphics.shapes.Drawing`` objects (vector, placed in the document as
flowables). The writers only read the audit result: frequencies, participation factors and
sampled shapes come from the records; nothing here recomputes physics. The interference and
tuning charts are in ``auditor.report.charts``.

The style and the log-axis pieces the charts share come first; the mode-shape drawing then
assembles the ± regions (``auditor.report.shape_regions``) and the nodal lines
(``auditor.report.nodal_lines``) under the panel's outline.
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

from auditor.model import CircleCutout, Panel
from auditor.report.nodal_lines import level_lines, simplify_polyline
from auditor.report.shape_regions import layered_cell_runs
from auditor.report.text import clean_text, format_hz, to_latin1
from auditor.results import Mode, ShapeGrid

__all__ = [
    "FigureStyle",
    "log_frequency_ticks",
    "frequency_axis_range",
    "participation_marker_radius",
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
            loops = level_lines(x, y, sign * values, STRONG_LEVEL)
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
        for line in level_lines(x, y, values, 0.0):
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
