"""The two charts of an action page: the interference chart and the tuning chart.

Both are vector drawings (``reportlab.graphics``). No label overlaps another: every string is
placed in a ``LabelSpace`` that measures it (``pdfmetrics.stringWidth`` and the font's ascent
and descent) and refuses a place that touches one already taken; a label that finds no place
is left out (the tables beside the chart name everything). Every kind of mark drawn has an
entry in the chart's legend, and no string is smaller than ``MIN_FONT_SIZE``.

The writers only read the result. The tuning chart follows each mode over tension by the exact
membrane scaling ``f = f₀·√(T/T₀)`` (Kinsler et al., *Fundamentals of Acoustics*, 4th ed.,
ch. 4) from the modes computed at the scheduled tension; its clear windows and proposed
tension are the remedy's, found on the full model.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from reportlab.graphics.shapes import Circle, Drawing, Line, Path, Polygon, Rect, String
from reportlab.lib.colors import Color, white
from reportlab.pdfbase.pdfmetrics import stringWidth

from auditor.report.chart_parts import (
    LABEL_SIZE,
    MIN_FONT_SIZE,
    LabelSpace,
    LegendItem,
    draw_legend,
    hatch,
    legend_height,
    light,
    linear_ticks,
    log_axis,
    place_label,
    rgb,
    string_boxes,
    text_box,
)
from auditor.report.figures import (
    FigureStyle,
    frequency_axis_range,
    log_frequency_ticks,
    participation_marker_radius,
)
from auditor.report.records import mode_columns, modes_between, modes_named
from auditor.report.text import format_hz
from auditor.results import Excitation, Mode, PanelResult, TensionCurves

__all__ = [
    "MIN_FONT_SIZE",
    "LabelSpace",
    "text_box",
    "string_boxes",
    "LegendItem",
    "legend_height",
    "draw_legend",
    "linear_ticks",
    "TensionMark",
    "interference_chart",
    "tuning_chart",
]

#: The smallest type on any chart [pt].
# ---------------------------------------------------------------------------------------------
# Interference chart
# ---------------------------------------------------------------------------------------------

def _excitation_key(e: Excitation) -> tuple[str, str, int, float]:
    return (e.equipment, e.source, e.order, round(e.frequency_hz, 9))


def interference_chart(result: PanelResult, excitations: Sequence[Excitation], *,
                       conflict_margin: float | None, caution_margin: float | None,
                       participation_threshold: float = 0.01, width: float = 480.0,
                       plot_height: float = 72.0,
                       style: FigureStyle | None = None) -> Drawing:
    """Modes against the tones reaching a panel, on a log-frequency axis.

    Modes a uniform pressure drives (participation at ``participation_threshold`` or more)
    are circles sized by their participation; the others short ticks. Modes and tones in a
    finding take the finding's colour. Shaded: each tone's caution and conflict windows,
    speed bands, and (hatched) the range above what was assessed. Tap-test peaks, when
    given, are triangles in their own lane. Tone labels are placed above the plot in lanes,
    worst first, and left out where they would touch another.
    """
    style = style or FigureStyle()
    left, right, lanes, lane_h = 46.0, 8.0, 3, 9.0
    axis_h = 24.0
    plot_w = width - left - right
    has_tap = bool(result.measured_peaks_hz)
    plot_h = plot_height + (18.0 if has_tap else 0.0)

    findings = result.findings
    severity_of: dict[tuple, str] = {}
    mode_severity: dict[tuple[str, float], str] = {}
    for finding in findings:
        key = _excitation_key(finding.excitation)
        if severity_of.get(key) != "conflict":
            severity_of[key] = finding.severity
        mkey = (finding.mode.label, round(finding.mode.frequency_hz, 9))
        if mode_severity.get(mkey) != "conflict":
            mode_severity[mkey] = finding.severity

    tone_f = [v for e in excitations for v in (e.low_hz, e.high_hz)]
    span = tone_f + [f.mode.frequency_hz for f in findings] + list(result.measured_peaks_hz)
    modes = result.modes                  # ascending in frequency
    if len(modes):
        span.append(modes[0].frequency_hz)
    if not tone_f and len(modes):
        span.append(modes[-1].frequency_hz)
    f_low, f_high = frequency_axis_range(span)
    log_low, log_span = math.log10(f_low), math.log10(f_high / f_low)

    legend = _interference_legend(result, excitations, conflict_margin, caution_margin,
                                  participation_threshold, f_low, f_high, style)
    legend_h = legend_height(legend, plot_w, style)
    plot_y0 = legend_h + axis_h
    plot_y1 = plot_y0 + plot_h
    height = plot_y1 + lanes * lane_h + 4.0
    d = Drawing(width, height)
    space = LabelSpace((0.0, 0.0, width, height))

    def fx(f: float) -> float:
        return left + plot_w * (math.log10(f) - log_low) / log_span

    def clip_x(f: float) -> float:
        return min(max(fx(max(f, 1e-12)), left), left + plot_w)

    d.add(Rect(left, plot_y0, plot_w, plot_h, fillColor=None, strokeColor=rgb(style.grid),
               strokeWidth=0.6))
    major, minor, _ = log_frequency_ticks(f_low, f_high)
    for ticks, weight in ((minor, 0.3), (major, 0.6)):
        grid = Path(strokeColor=rgb(style.grid), strokeWidth=weight, fillColor=None)
        for f in ticks:
            grid.moveTo(fx(f), plot_y0)
            grid.lineTo(fx(f), plot_y1)
        d.add(grid)

    # not assessed: everything above the assessed range
    if math.isfinite(result.assessed_to_hz) and result.assessed_to_hz < f_high:
        x0 = clip_x(result.assessed_to_hz)
        hatch(d, x0, plot_y0, left + plot_w, plot_y1, style.not_assessed)

    for margin, window_colour in ((caution_margin, style.caution_window),
                                  (conflict_margin, style.conflict_window)):
        if not margin or margin <= 0:
            continue
        shade = Path(fillColor=rgb(window_colour, 0.4), strokeColor=None, strokeWidth=0)
        for e in excitations:
            lo, hi = e.low_hz * (1 - margin), e.high_hz * (1 + margin)
            if hi < f_low or lo > f_high or lo <= 0:
                continue
            x0, x1 = clip_x(lo), clip_x(hi)
            shade.moveTo(x0, plot_y0)
            shade.lineTo(x1, plot_y0)
            shade.lineTo(x1, plot_y1)
            shade.lineTo(x0, plot_y1)
            shade.closePath()
        d.add(shade)

    severity_colour: dict[str | None, Color] = {"conflict": rgb(style.conflict),
                                               "caution": rgb(style.caution)}
    plain_line = rgb(style.excitation)
    placed: list[tuple[tuple, float, Excitation, Color]] = []
    tone_rank: dict[str | None, int] = {"conflict": 0, "caution": 1}
    for e in sorted(excitations, key=lambda e: e.low_hz):
        if e.high_hz < f_low or e.low_hz > f_high:
            continue
        sev = severity_of.get(_excitation_key(e))
        colour = severity_colour.get(sev, plain_line)
        weight = 1.1 if sev else 0.7
        if e.band_hz is not None and e.high_hz > e.low_hz:
            x0, x1 = clip_x(e.low_hz), clip_x(e.high_hz)
            d.add(Rect(x0, plot_y0, x1 - x0, plot_h, fillColor=rgb(style.band, 0.25),
                       strokeColor=None, strokeWidth=0))
            for xe in (x0, x1):
                d.add(Line(xe, plot_y0, xe, plot_y1, strokeColor=colour, strokeWidth=weight * 0.7))
            anchor_x = x0
        else:
            anchor_x = fx(e.frequency_hz)
            d.add(Line(anchor_x, plot_y0, anchor_x, plot_y1, strokeColor=colour,
                       strokeWidth=weight))
        rank = (tone_rank.get(sev, 2), e.order, e.low_hz)
        placed.append((rank, anchor_x, e, colour))

    # tone labels above the plot: worst first, each in the lowest free lane, else shortened,
    # else left out; a dotted leader joins label and line without crossing another label
    for _, xe, e, colour in sorted(placed, key=lambda item: item[0]):
        for text in (style.label(f"{e.equipment} {e.source} \u00d7{e.order}"),
                     style.label(f"{e.equipment} \u00d7{e.order}")):
            done = False
            for lane in reversed(range(lanes)):  # from the top: a leader blocks little
                y = plot_y1 + 3.0 + lane * lane_h
                w = stringWidth(text, style.font, LABEL_SIZE)
                x_text = xe + 1.5 if xe + 1.5 + w <= width else xe - 1.5 - w
                leader = (xe - 0.3, plot_y1, xe + 0.3, y + 5.0)
                if place_label(d, space, x_text, y, text, style, colour, extra=(leader,)):
                    d.add(Line(xe, plot_y1, xe, y + 5.0, strokeColor=colour, strokeWidth=0.3,
                               strokeDashArray=[1, 1.5]))
                    done = True
                    break
            if done:
                break

    # lanes inside the plot
    mode_y = plot_y0 + (plot_h * 0.62 if has_tap else plot_h * 0.5)
    tap_y = plot_y0 + 11.0
    text = rgb(style.text)
    place_label(d, space, left - 4, mode_y - 2.5, "modes", style, text, anchor="end")
    if has_tap:
        place_label(d, space, left - 4, tap_y - 2.5, "tap test", style, text, anchor="end")

    if result.overlap_from_hz is not None and result.overlap_from_hz < f_high:
        x0 = clip_x(result.overlap_from_hz)
        d.add(Line(x0, mode_y - 9, left + plot_w, mode_y - 9, strokeColor=rgb(style.axis),
                   strokeWidth=1.4))

    weak = light(style.mode, 0.35)
    ticks = Path(strokeColor=weak, strokeWidth=0.5, fillColor=None)
    # A film may have thousands of modes in range: they are read as arrays, the driven ones
    # (and those in findings) made into records, the others one tick per quarter point.
    shown = modes_between(modes, f_low, f_high)
    frequency, participation = mode_columns(shown)
    is_driven = (participation >= participation_threshold) | modes_named(
        shown, set(mode_severity))
    driven: list[Mode] = [shown[i] for i in np.flatnonzero(is_driven).tolist()]
    quiet = np.flatnonzero(~is_driven)
    if len(quiet):
        cells = np.rint(4.0 * (left + plot_w * (np.log10(frequency[quiet]) - log_low)
                               / log_span))
        _, first = np.unique(cells, return_index=True)
        for i in quiet[np.sort(first)].tolist():
            x = fx(float(frequency[i]))
            ticks.moveTo(x, mode_y - 3.5)
            ticks.lineTo(x, mode_y + 3.5)
    d.add(ticks)
    plain = rgb(style.mode)
    for mode in sorted(driven, key=lambda m: (-m.participation)):
        sev = mode_severity.get((mode.label, round(mode.frequency_hz, 9)))
        colour = severity_colour.get(sev, plain)
        r = participation_marker_radius(mode.participation)
        x = fx(mode.frequency_hz)
        if mode.participation <= 0:
            d.add(Circle(x, mode_y, r, fillColor=white, strokeColor=colour, strokeWidth=0.8))
        else:
            d.add(Circle(x, mode_y, r, fillColor=colour, strokeColor=white, strokeWidth=0.4))
    # labels of the modes in findings, worst first, above their markers
    def key_of(m: Mode) -> tuple[str, float]:
        return (m.label, round(m.frequency_hz, 9))

    labelled = sorted({key_of(m): m for m in driven if key_of(m) in mode_severity}.values(),
                      key=lambda m: mode_severity[key_of(m)] != "conflict")
    for mode in labelled:
        sev = mode_severity[key_of(mode)]
        r = participation_marker_radius(mode.participation)
        x = fx(mode.frequency_hz)
        for y in (mode_y + r + 3.0, mode_y + r + 12.0, mode_y - r - 9.5):
            if place_label(d, space, x, y, style.label(mode.label), style, severity_colour[sev],
                      anchor="middle"):
                break

    measured = rgb(style.measured)
    for f in result.measured_peaks_hz:
        if f_low <= f <= f_high:
            x = fx(f)
            d.add(Polygon([x - 3.2, tap_y + 2.8, x + 3.2, tap_y + 2.8, x, tap_y - 3.0],
                          fillColor=measured, strokeColor=None, strokeWidth=0))

    axis = rgb(style.axis)
    d.add(Line(left, plot_y0, left + plot_w, plot_y0, strokeColor=axis, strokeWidth=0.8))
    place_label(d, space, left + plot_w, plot_y0 - 21, "frequency [Hz]", style, text, anchor="end")
    log_axis(d, space, style, f_low, f_high, fx, plot_y0, horizontal=True)
    draw_legend(d, legend, left, legend_h, plot_w, style, space)
    return d


def _interference_legend(result: PanelResult, excitations: Sequence[Excitation],
                         conflict_margin: float | None, caution_margin: float | None,
                         threshold: float, f_low: float, f_high: float,
                         style: FigureStyle) -> list[LegendItem]:
    items = [LegendItem("sizes", "mode, sized by participation", style.mode)]
    if np.any(mode_columns(modes_between(result.modes, f_low, f_high))[1] < threshold):
        items.append(LegendItem("tick", f"mode hardly driven (participation < {threshold:g})",
                                style.mode))
    severities = {f.severity for f in result.findings}
    if "conflict" in severities:
        items.append(LegendItem("circle", "conflict (mode, tone)", style.conflict))
    if "caution" in severities:
        items.append(LegendItem("circle", "caution (mode, tone)", style.caution))
    if any(e.band_hz is None for e in excitations):
        items.append(LegendItem("line", "tone", style.excitation))
    if any(e.band_hz is not None for e in excitations):
        items.append(LegendItem("rect", "speed or frequency band", style.band, 0.4))
    if conflict_margin:
        items.append(LegendItem("rect", f"conflict window \u00b1{100 * conflict_margin:g} %",
                                style.conflict_window, 0.7))
    if caution_margin:
        items.append(LegendItem("rect", f"caution window \u00b1{100 * caution_margin:g} %",
                                style.caution_window, 0.7))
    if result.overlap_from_hz is not None and result.overlap_from_hz < f_high:
        items.append(LegendItem("thick", "modes overlap (\u03b7\u00b7f\u00b7n(f) \u2265 1)",
                                style.axis))
    if math.isfinite(result.assessed_to_hz) and result.assessed_to_hz < f_high:
        items.append(LegendItem("hatch", f"not assessed (above "
                                f"{format_hz(result.assessed_to_hz)} Hz)",
                                style.not_assessed))
    if result.measured_peaks_hz:
        items.append(LegendItem("triangle", "tap-test peak", style.measured))
    return items


# ---------------------------------------------------------------------------------------------
# Tuning chart
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class TensionMark:
    """A vertical mark on the tuning chart: a tension [N/m], its words, and "dashed" (a
    tension as it is), "solid" (the proposal) or "dotted"."""

    tension: float
    label: str
    kind: str = "dashed"


def tuning_chart(modes: Sequence[Mode], excitations: Sequence[Excitation], *,
                 scheduled: float, low: float, high: float,
                 marks: Sequence[TensionMark] = (), proposed: float | None = None,
                 clear_windows: Sequence[tuple[float, float]] = (),
                 conflict_margin: float | None = 0.1, conflict_db: float | None = None,
                 severities: dict[tuple[str, float], str] | None = None,
                 width: float = 480.0, plot_height: float = 150.0,
                 style: FigureStyle | None = None, tension_title: str = "tension [N/m]",
                 curves: TensionCurves | None = None) -> Drawing:
    """Each mode's frequency against tension over the rated range, with the tones.

    Parameters
    ----------
    modes : sequence of Mode
        The modes at ``scheduled`` tension; each is drawn along its curve in ``curves``
        (the full model's, as the remedy search followed it), or as ``f·√(T/scheduled)``
        where it has none (dashed, unless ``curves`` scale exactly as √T).
    excitations : sequence of Excitation
        Tones (horizontal lines) and bands (shaded) reaching the panel; those outside the
        frequency range of the curves are left out.
    scheduled, low, high : float  [N/m]
        The tension the modes were computed at, and the range drawn.
    marks : sequence of TensionMark
        Tensions to mark (scheduled, fitted to a tap test).
    proposed : float or None  [N/m]
        The remedy's tension: a solid line, with a dot where each curve crosses it.
    clear_windows : sequence of (low, high)  [N/m]
        Tensions with no conflict on the full model (shaded).
    conflict_db : float or None  [dB]
        The rule set's response for a conflict. A tone that cannot reach it with any mode
        drawn, even at resonance (``20·log10(participation × transmissibility / η)`` below
        it by 3 dB or more: a structure-borne tone through good isolators, say), gets no
        conflict window and a grey dotted line.
    severities : dict (label, rounded frequency) → "conflict" | "caution"
        The modes in findings at the scheduled tension (coloured).
    curves : TensionCurves or None
        The modes followed over the range on the full model (``Remedy.curves``).
    """
    severities = severities or {}
    followed = {m.label for m in modes if curves is not None and curves.follows(m.label)}
    # without curves, or with curves that scale exactly, √T is the model itself
    exact = curves is None or curves.exact
    weak = {id(e) for e in excitations if _too_weak(e, modes, conflict_db)}
    style = style or FigureStyle()
    left, right = 40.0, 6.0
    axis_h, top_h = 24.0, 12.0
    text = rgb(style.text)
    label_w = max((stringWidth(style.label(m.label), style.font, LABEL_SIZE) for m in modes),
                  default=0.0) + 6.0
    plot_x0 = left
    plot_x1 = width - right - label_w
    plot_w = plot_x1 - plot_x0

    def freq(m: Mode, t: float) -> float:
        if curves is not None and m.label in followed:
            return curves.frequency_at(m.label, t) or 0.0
        return m.frequency_hz * math.sqrt(t / scheduled)

    ends = [freq(m, t) for m in modes for t in (low, high)]
    f_low, f_high = frequency_axis_range(ends, pad=1.12)
    log_low, log_span = math.log10(f_low), math.log10(f_high / f_low)

    legend = _tuning_legend(modes, excitations, severities, marks, proposed, clear_windows,
                            conflict_margin, f_low, f_high, style, weak,
                            "exact" if exact else "full" if len(followed) == len(
                                {m.label for m in modes}) else "mixed")
    legend_h = legend_height(legend, width - left - right, style)
    plot_y0 = legend_h + axis_h
    plot_y1 = plot_y0 + plot_height
    height = plot_y1 + top_h + 10.0
    d = Drawing(width, height)
    space = LabelSpace((0.0, 0.0, width, height))

    def fy(f: float) -> float:
        return plot_y0 + plot_height * (math.log10(f) - log_low) / log_span

    def tx(t: float) -> float:
        return plot_x0 + plot_w * (t - low) / (high - low)

    d.add(Rect(plot_x0, plot_y0, plot_w, plot_height, fillColor=None,
               strokeColor=rgb(style.grid), strokeWidth=0.6))
    major, minor, _ = log_frequency_ticks(f_low, f_high)
    grid = Path(strokeColor=rgb(style.grid), strokeWidth=0.4, fillColor=None)
    for f in major + minor:
        grid.moveTo(plot_x0, fy(f))
        grid.lineTo(plot_x1, fy(f))
    xt = linear_ticks(low, high)
    for t in xt:
        grid.moveTo(tx(t), plot_y0)
        grid.lineTo(tx(t), plot_y1)
    d.add(grid)

    for a, b in clear_windows:
        a, b = max(a, low), min(b, high)
        if b > a:
            d.add(Rect(tx(a), plot_y0, tx(b) - tx(a), plot_height,
                       fillColor=rgb(style.clear_window, 0.45), strokeColor=None))

    shown = [e for e in excitations if e.high_hz * (1 + (conflict_margin or 0)) >= f_low
             and e.low_hz * (1 - (conflict_margin or 0)) <= f_high]
    if conflict_margin:
        shade = Path(fillColor=rgb(style.conflict_window, 0.45), strokeColor=None,
                     strokeWidth=0)
        for e in shown:
            if id(e) in weak:
                continue
            y0 = fy(max(e.low_hz * (1 - conflict_margin), f_low))
            y1 = fy(min(e.high_hz * (1 + conflict_margin), f_high))
            shade.moveTo(plot_x0, y0)
            shade.lineTo(plot_x1, y0)
            shade.lineTo(plot_x1, y1)
            shade.lineTo(plot_x0, y1)
            shade.closePath()
        d.add(shade)
    line_colour = rgb(style.excitation)
    for e in shown:
        if e.band_hz is not None and e.high_hz > e.low_hz:
            y0, y1 = fy(max(e.low_hz, f_low)), fy(min(e.high_hz, f_high))
            d.add(Rect(plot_x0, y0, plot_w, y1 - y0, fillColor=rgb(style.band, 0.3),
                       strokeColor=None))
        if f_low <= e.frequency_hz <= f_high:
            y = fy(e.frequency_hz)
            if id(e) in weak:
                d.add(Line(plot_x0, y, plot_x1, y, strokeColor=rgb(style.band),
                           strokeWidth=0.9, strokeDashArray=[1, 1.5]))
            else:
                d.add(Line(plot_x0, y, plot_x1, y, strokeColor=line_colour, strokeWidth=0.7))

    severity_colour: dict[str | None, Color] = {"conflict": rgb(style.conflict),
                                               "caution": rgb(style.caution)}
    plain = rgb(style.mode)
    t_grid = np.linspace(low, high, 48)
    ends_y = []
    for m in modes:
        sev = severities.get((m.label, round(m.frequency_hz, 9)))
        colour = severity_colour.get(sev, plain)
        dashes = None if exact or m.label in followed else [3, 2]
        path = Path(strokeColor=colour, strokeWidth=1.2 if sev else 0.9, fillColor=None,
                    strokeLineJoin=1, strokeDashArray=dashes)
        points = [(tx(float(t)), fy(freq(m, float(t)))) for t in t_grid]
        points = [(x, y) for x, y in points if plot_y0 <= y <= plot_y1]
        if len(points) < 2:
            continue
        path.moveTo(*points[0])
        for x, y in points[1:]:
            path.lineTo(x, y)
        d.add(path)
        ends_y.append((points[-1][1], m, colour, points[-1][0]))

    for mark in marks:
        if low <= mark.tension <= high:
            x = tx(mark.tension)
            d.add(Line(x, plot_y0, x, plot_y1, strokeColor=text, strokeWidth=0.8,
                       strokeDashArray=[3, 2] if mark.kind == "dashed" else [1, 1.5]))
    if proposed is not None and low <= proposed <= high:
        x = tx(proposed)
        d.add(Line(x, plot_y0, x, plot_y1, strokeColor=rgb(style.proposed), strokeWidth=1.5))
        for m in modes:
            f = freq(m, proposed)
            if f_low <= f <= f_high:
                d.add(Circle(x, fy(f), 2.2, fillColor=rgb(style.proposed), strokeColor=white,
                             strokeWidth=0.4))

    # words above the plot: the proposal first, then the marks, then "clear"
    y_top = plot_y1 + 3.0
    heads: list[tuple[float, str, Color]] = []
    if proposed is not None and low <= proposed <= high:
        heads.append((tx(proposed), style.label(f"proposed {proposed:.0f}"),
                      rgb(style.proposed)))
    for mark in marks:
        if low <= mark.tension <= high:
            heads.append((tx(mark.tension), style.label(f"{mark.label} {mark.tension:.0f}"),
                          text))
    for x, words, colour in heads:
        for anchor in ("middle", "start", "end"):
            if place_label(d, space, x, y_top, words, style, colour, anchor=anchor, bold=True):
                break
    for a, b in clear_windows:
        a, b = max(a, low), min(b, high)
        if b > a:
            place_label(d, space, (tx(a) + tx(b)) / 2, y_top, "clear", style,
                   rgb(style.clear_label), anchor="middle")
    if not clear_windows:
        place_label(d, space, (plot_x0 + plot_x1) / 2, y_top, "no clear window in the range",
               style, rgb(style.conflict), anchor="middle")
    place_label(d, space, plot_x0 - 4, y_top, "Hz", style, text, anchor="end")

    # curve labels at the right end, nudged apart so none touches another
    ends_y.sort(key=lambda item: item[0])
    gap = LABEL_SIZE + 1.5
    ys = [y - 2.5 for y, *_ in ends_y]
    for k in range(1, len(ys)):
        ys[k] = max(ys[k], ys[k - 1] + gap)
    for k in range(len(ys) - 2, -1, -1):
        ys[k] = min(ys[k], ys[k + 1] - gap)
    for (_, m, colour, _), y in zip(ends_y, ys, strict=True):
        place_label(d, space, plot_x1 + 3, y, style.label(m.label), style, colour)

    # tone labels at the left, inside the plot, thinned where they would touch
    for e in sorted(shown, key=lambda e: (e.order, e.low_hz)):
        tone_hz = e.frequency_hz if f_low <= e.frequency_hz <= f_high else None
        if tone_hz is None:
            continue
        words = style.label(f"{e.equipment} {e.source} \u00d7{e.order}")
        y = fy(tone_hz) + 2.5
        box = text_box(plot_x0 + 2, y, words, style.font, LABEL_SIZE)
        if box[3] > plot_y1:  # no room above the line inside the plot: below it
            y = fy(tone_hz) - 7.5
            box = text_box(plot_x0 + 2, y, words, style.font, LABEL_SIZE)
        if box[1] >= plot_y0 and space.take(box):
            d.add(Rect(box[0] - 1, box[1], box[2] - box[0] + 2, box[3] - box[1],
                       fillColor=Color(1, 1, 1, alpha=0.75), strokeColor=None))
            d.add(String(plot_x0 + 2, y, words, fontName=style.font, fontSize=LABEL_SIZE,
                         fillColor=line_colour))

    axis = rgb(style.axis)
    d.add(Line(plot_x0, plot_y0, plot_x1, plot_y0, strokeColor=axis, strokeWidth=0.8))
    d.add(Line(plot_x0, plot_y0, plot_x0, plot_y1, strokeColor=axis, strokeWidth=0.8))
    log_axis(d, space, style, f_low, f_high, fy, plot_x0, horizontal=False)
    marks_path = Path(strokeColor=axis, strokeWidth=0.6, fillColor=None)
    for t in xt:
        marks_path.moveTo(tx(t), plot_y0)
        marks_path.lineTo(tx(t), plot_y0 - 3.5)
        place_label(d, space, tx(t), plot_y0 - 11, f"{t:.0f}", style, text, anchor="middle")
    d.add(marks_path)
    place_label(d, space, plot_x1, plot_y0 - 21, style.label(tension_title), style, text,
           anchor="end")
    draw_legend(d, legend, left, legend_h, width - left - right, style, space)
    return d


def _too_weak(e: Excitation, modes: Sequence[Mode], conflict_db: float | None) -> bool:
    """True when no mode drawn can answer ``e`` with a conflict even at resonance: its
    largest response ``20·log10(p·T/η)`` (Harris' Shock and Vibration Handbook, ch. 2:
    ``|H| = 1/η`` at resonance) falls 3 dB or more short of ``conflict_db``."""
    if conflict_db is None or not modes:
        return False
    for m in modes:
        if m.loss_factor is None or m.loss_factor <= 0 or m.participation <= 0:
            return False
        if 20 * math.log10(m.participation * e.transmissibility / m.loss_factor) \
                > conflict_db - 3.0:
            return False
    return True


def _tuning_legend(modes, excitations, severities, marks, proposed, clear_windows,
                   conflict_margin, f_low, f_high, style, weak,
                   model: str = "exact") -> list[LegendItem]:
    if model == "exact":
        items = [LegendItem("line", "mode frequency, f \u221d \u221aT", style.mode)]
    else:
        items = [LegendItem("line", "mode frequency (full model)", style.mode)]
        if model == "mixed":
            items.append(LegendItem("dashed", "mode frequency, f \u221d \u221aT (not "
                                    "followed)", style.mode))
    found = {severities.get((m.label, round(m.frequency_hz, 9))) for m in modes}
    if "conflict" in found:
        items.append(LegendItem("line", "mode in a conflict as scheduled", style.conflict))
    if "caution" in found:
        items.append(LegendItem("line", "mode in a caution as scheduled", style.caution))
    shown = [e for e in excitations if e.high_hz >= f_low and e.low_hz <= f_high]
    if any(id(e) not in weak for e in shown):
        items.append(LegendItem("line", "tone", style.excitation))
    if any(id(e) in weak for e in shown):
        items.append(LegendItem("dotted", "tone too weak for a conflict (isolated)",
                                style.band))
    if any(e.band_hz is not None for e in shown):
        items.append(LegendItem("rect", "speed or frequency band", style.band, 0.45))
    if conflict_margin and shown:
        items.append(LegendItem("rect", f"conflict window \u00b1{100 * conflict_margin:g} %",
                                style.conflict_window, 0.7))
    if clear_windows:
        items.append(LegendItem("rect", "clear window (full model)", style.clear_window, 0.7))
    for kind in dict.fromkeys(m.kind for m in marks):
        names = " / ".join(m.label for m in marks if m.kind == kind)
        items.append(LegendItem(kind, f"{names} tension", style.text))
    if proposed is not None:
        items.append(LegendItem("thick", "proposed tension", style.proposed))
        items.append(LegendItem("dot", "mode frequency at the proposed tension", style.proposed))
    return items
