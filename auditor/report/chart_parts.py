"""Pieces the charts share: labels that never overlap, legends, hatching, axes.

Every string a chart draws goes through a ``LabelSpace``: its box is measured from the font's
own metrics (``pdfmetrics.stringWidth`` and the ascent and descent), and a place that touches
a box already taken is refused. Legends wrap their entries in rows; nothing is smaller than
``MIN_FONT_SIZE``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from reportlab.graphics.shapes import Circle, Drawing, Line, Path, Polygon, Rect, String
from reportlab.lib.colors import Color, HexColor, white
from reportlab.pdfbase.pdfmetrics import getAscentDescent, stringWidth

from auditor.report.figures import FigureStyle, log_frequency_ticks, participation_marker_radius

__all__ = ["MIN_FONT_SIZE", "LABEL_SIZE", "Box", "rgb", "light", "text_box", "LabelSpace",
           "string_boxes", "place_label", "LegendItem", "legend_height", "draw_legend",
           "hatch", "linear_ticks", "tick_text", "log_axis"]

MIN_FONT_SIZE = 7.0
LABEL_SIZE = 7.0
LEGEND_ROW = 11.0

Box = tuple[float, float, float, float]


def rgb(hex_string: str, alpha: float | None = None) -> Color:
    c = HexColor(hex_string)
    return c if alpha is None else Color(c.red, c.green, c.blue, alpha=alpha)


def light(hex_string: str, amount: float) -> Color:
    c = HexColor(hex_string)
    return Color(c.red + (1 - c.red) * amount, c.green + (1 - c.green) * amount,
                 c.blue + (1 - c.blue) * amount)


# ---------------------------------------------------------------------------------------------
# Labels that never overlap
# ---------------------------------------------------------------------------------------------

def text_box(x: float, y: float, text: str, font: str, size: float,
             anchor: str = "start") -> Box:
    """The box a one-line string covers [pt]: its advance width, and from the font's
    descent below the baseline ``y`` to its ascent above."""
    width = stringWidth(text, font, size)
    ascent, descent = getAscentDescent(font, size)
    x0 = x if anchor == "start" else (x - width if anchor == "end" else x - width / 2.0)
    return (x0, y + descent, x0 + width, y + ascent)


def _overlap(a: Box, b: Box, gap: float) -> bool:
    return a[0] < b[2] + gap and b[0] < a[2] + gap and a[1] < b[3] + gap and b[1] < a[3] + gap


class LabelSpace:
    """The boxes taken on a chart; a new label goes only where it touches none of them.

    ``bounds`` (x0, y0, x1, y1) keeps labels inside the drawing.
    """

    def __init__(self, bounds: Box, gap: float = 1.0) -> None:
        self.bounds = bounds
        self.gap = gap
        self.boxes: list[Box] = []

    def fits(self, *boxes: Box) -> bool:
        x0, y0, x1, y1 = self.bounds
        for box in boxes:
            if box[0] < x0 or box[2] > x1 or box[1] < y0 or box[3] > y1:
                return False
            if any(_overlap(box, taken, self.gap) for taken in self.boxes):
                return False
        return True

    def take(self, *boxes: Box) -> bool:
        """Take ``boxes`` when all of them fit; True when taken."""
        if not self.fits(*boxes):
            return False
        self.boxes.extend(boxes)
        return True

    def reserve(self, box: Box) -> None:
        """Mark a box taken whatever is there (a legend, an axis label)."""
        self.boxes.append(box)


def string_boxes(drawing: Drawing) -> list[tuple[str, float, Box]]:
    """Every string of a drawing with its font size and box [pt] (for checking overlaps)."""
    out: list[tuple[str, float, Box]] = []

    def walk(node) -> None:
        for item in getattr(node, "contents", []):
            if isinstance(item, String):
                out.append((item.text, item.fontSize,
                            text_box(item.x, item.y, item.text, item.fontName, item.fontSize,
                                     item.textAnchor)))
            else:
                walk(item)

    walk(drawing)
    return out


def place_label(d: Drawing, space: LabelSpace, x: float, y: float, text: str, style: FigureStyle,
           colour: Color, anchor: str = "start", size: float = LABEL_SIZE,
           extra: Sequence[Box] = (), bold: bool = False) -> bool:
    """Draw ``text`` at (x, y) when it fits in ``space`` (with ``extra`` boxes such as its
    leader line); True when drawn."""
    font = style.font_bold if bold else style.font
    box = text_box(x, y, text, font, size, anchor)
    if not space.take(box, *extra):
        return False
    d.add(String(x, y, text, fontName=font, fontSize=size, fillColor=colour, textAnchor=anchor))
    return True


# ---------------------------------------------------------------------------------------------
# Legend
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class LegendItem:
    """One entry of a chart's key: a symbol ``kind`` drawn in ``colour`` and its words.

    Kinds: "line", "dashed", "dotted", "thick", "rect", "hatch", "tick", "circle", "hollow",
    "triangle", "dot", "sizes" (circles sized by participation).
    """

    kind: str
    label: str
    colour: str
    alpha: float = 1.0


_SYMBOL_W = 12.0


def _item_width(item: LegendItem, style: FigureStyle) -> float:
    if item.kind == "sizes":
        return sum(2 * participation_marker_radius(p) + 2 + stringWidth(f"{p:g}", style.font,
                                                                          LABEL_SIZE) + 4
                   for p in _SIZES) + stringWidth(style.label(item.label), style.font,
                                                  LABEL_SIZE) + 4
    return _SYMBOL_W + 3 + stringWidth(style.label(item.label), style.font, LABEL_SIZE)


_SIZES = (0.05, 0.2, 0.6)


def _legend_rows(items: Sequence[LegendItem], width: float,
                 style: FigureStyle) -> list[list[tuple[LegendItem, float]]]:
    rows: list[list[tuple[LegendItem, float]]] = [[]]
    x = 0.0
    for item in items:
        w = _item_width(item, style)
        if rows[-1] and x + w > width:
            rows.append([])
            x = 0.0
        rows[-1].append((item, x))
        x += w + 11
    return [r for r in rows if r]


def legend_height(items: Sequence[LegendItem], width: float, style: FigureStyle) -> float:
    """The height [pt] the legend takes at this width."""
    return LEGEND_ROW * len(_legend_rows(items, width, style))


def draw_legend(d: Drawing, items: Sequence[LegendItem], x0: float, y_top: float,
                width: float, style: FigureStyle, space: LabelSpace | None = None) -> None:
    """Draw the key in rows from ``y_top`` down, wrapping at ``width``."""
    text = rgb(style.text)
    for r, row in enumerate(_legend_rows(items, width, style)):
        y = y_top - LEGEND_ROW * (r + 1) + 3.0
        for item, dx in row:
            x = x0 + dx
            c = rgb(item.colour, item.alpha if item.alpha < 1 else None)
            mid = y + 2.5
            if item.kind == "sizes":
                words = style.label(item.label)
                d.add(String(x, y, words, fontName=style.font, fontSize=LABEL_SIZE,
                             fillColor=text))
                x += stringWidth(words, style.font, LABEL_SIZE) + 4
                for p in _SIZES:
                    radius = participation_marker_radius(p)
                    d.add(Circle(x + radius, mid, radius, fillColor=c, strokeColor=None))
                    x += 2 * radius + 2
                    d.add(String(x, y, f"{p:g}", fontName=style.font, fontSize=LABEL_SIZE,
                                 fillColor=text))
                    x += stringWidth(f"{p:g}", style.font, LABEL_SIZE) + 4
                continue
            if item.kind in ("line", "dashed", "dotted", "thick"):
                dash = {"dashed": [3, 2], "dotted": [1, 1.5]}.get(item.kind)
                d.add(Line(x, mid, x + _SYMBOL_W, mid, strokeColor=c,
                           strokeWidth=1.6 if item.kind == "thick" else 1.0,
                           strokeDashArray=dash))
            elif item.kind == "rect":
                d.add(Rect(x, mid - 3.5, _SYMBOL_W, 7, fillColor=c, strokeColor=None))
            elif item.kind == "hatch":
                hatch(d, x, mid - 3.5, x + _SYMBOL_W, mid + 3.5, item.colour)
            elif item.kind == "tick":
                d.add(Line(x + 6, mid - 3, x + 6, mid + 3, strokeColor=c, strokeWidth=0.7))
                d.add(Line(x + 9, mid - 3, x + 9, mid + 3, strokeColor=c, strokeWidth=0.7))
            elif item.kind in ("circle", "hollow", "dot"):
                radius = 2.2 if item.kind == "dot" else 3.2
                d.add(Circle(x + 6, mid, radius, fillColor=white if item.kind == "hollow" else c,
                             strokeColor=c if item.kind == "hollow" else None, strokeWidth=0.8))
            elif item.kind == "triangle":
                d.add(Polygon([x + 2.8, mid + 2.8, x + 9.2, mid + 2.8, x + 6, mid - 3.0],
                              fillColor=c, strokeColor=None))
            d.add(String(x + _SYMBOL_W + 3, y, style.label(item.label), fontName=style.font,
                         fontSize=LABEL_SIZE, fillColor=text))
    if space is not None:
        space.reserve((x0, y_top - legend_height(items, width, style), x0 + width, y_top))


def hatch(d: Drawing, x0: float, y0: float, x1: float, y1: float, colour: str,
           step: float = 4.0) -> None:
    """A light grey region with diagonal hatching (vector)."""
    if x1 <= x0 or y1 <= y0:
        return
    d.add(Rect(x0, y0, x1 - x0, y1 - y0, fillColor=rgb(colour, 0.10), strokeColor=None))
    path = Path(strokeColor=rgb(colour, 0.55), strokeWidth=0.4, fillColor=None)
    h = y1 - y0
    c = x0 - h
    while c < x1:
        # the line x = c + (y - y0), clipped to the rectangle
        ya, yb = max(y0, y0 + (x0 - c)), min(y1, y0 + (x1 - c))
        if yb > ya:
            path.moveTo(c + (ya - y0), ya)
            path.lineTo(c + (yb - y0), yb)
        c += step
    d.add(path)


# ---------------------------------------------------------------------------------------------
# Axes
# ---------------------------------------------------------------------------------------------

def linear_ticks(low: float, high: float, count: int = 6) -> list[float]:
    """Round tick values (1, 2, 2.5 or 5 × 10^k apart) inside [low, high]: the spacing whose
    number of ticks is nearest ``count`` (at least three where the range allows)."""
    if not high > low:
        return [low]
    best: list[float] = []
    power = 10.0 ** math.floor(math.log10((high - low) / max(count, 1)))
    for p in (power / 10, power, power * 10):
        for m in (1.0, 2.0, 2.5, 5.0):
            step = m * p
            first = math.ceil(low / step - 1e-9) * step
            ticks = [round(first + k * step, 10)
                     for k in range(int((high - first) / step + 1e-9) + 1)]
            if not best or (len(ticks) < 3, abs(len(ticks) - count)) < \
                    (len(best) < 3, abs(len(best) - count)):
                best = ticks
    return best


def tick_text(value: float) -> str:
    if abs(value) >= 10000:
        return f"{value / 1000:g}k"
    if value >= 1000 and abs(value / 1000 - round(value / 1000)) < 1e-9:
        return f"{value / 1000:g}k"
    return f"{value:g}"


def log_axis(d: Drawing, space: LabelSpace, style: FigureStyle, low: float, high: float,
              position, start: float, horizontal: bool) -> None:
    """Ticks and labels of a log-frequency axis along x (``horizontal``) or y."""
    axis = rgb(style.axis)
    text = rgb(style.text)
    major, minor, labelled = log_frequency_ticks(low, high)
    marks = Path(strokeColor=axis, strokeWidth=0.6, fillColor=None)
    for f in major + minor:
        p = position(f)
        size = 3.5 if f in major else 2.0
        if horizontal:
            marks.moveTo(p, start)
            marks.lineTo(p, start - size)
        else:
            marks.moveTo(start, p)
            marks.lineTo(start - size, p)
    d.add(marks)
    for f in sorted(labelled, key=lambda f: (f not in major, f)):
        word = tick_text(f)
        if horizontal:
            place_label(d, space, position(f), start - 11, word, style, text, anchor="middle")
        else:
            place_label(d, space, start - 4, position(f) - 2.5, word, style, text, anchor="end")
