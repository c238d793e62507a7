"""The action page of one panel: its data, verdict, findings, remedy and the pictures.

Each page gives, in this order: the panel's data in the units its schedule used, its verdict
and why, its findings worst first, the one panel remedy, the interference chart, the mode
shapes that matter (those named by findings, and the fundamental), the tuning chart (modes
against tension across the rated range, with the clear windows and the proposed tension), the
assumptions the verdict rests on and the tap-test target for commissioning.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from reportlab.platypus import Flowable, KeepTogether, Spacer, Table, TableStyle

from auditor.model import Panel
from auditor.remedy import SAFETY_NOTE
from auditor.report import digest
from auditor.report.charts import TensionMark, interference_chart, tuning_chart
from auditor.report.figures import mode_shape_drawing, shape_legend
from auditor.report.text import format_hz
from auditor.results import PanelResult

if TYPE_CHECKING:
    from auditor.report.pdf import ReportBuilder

__all__ = ["panel_page", "in_column_unit", "FINDINGS_SHOWN", "SHAPES_SHOWN"]

#: Findings listed on a panel's page; the rest are counted (every one is in the exports).
FINDINGS_SHOWN = 8
#: Mode shapes drawn on a panel's page.
SHAPES_SHOWN = 3


def _rule(b: ReportBuilder, name: str, default: Any = None) -> Any:
    ruleset = b.result.ruleset
    return getattr(ruleset, name, default) if ruleset is not None else default


def panel_page(b: ReportBuilder, pr: PanelResult) -> list[Flowable]:
    """The flowables of one panel's page (two pages when its tuning chart is drawn)."""
    panel = pr.panel
    excitations = digest.excitations_reaching(b.result, panel)
    key = b.panel_keys.get(id(pr))
    rank = (f"{b.action_rank[id(pr)]} of {len(b.action)} needing action"
            if id(pr) in b.action_rank else "no action needed")
    out: list[Flowable] = [
        b.bookmark(f"Panel {panel.panel} ({pr.verdict})", tick=True, key=key),
        b.para(f"Panel {b.m(panel.panel)} &nbsp;<font size='11'>"
               f"{b.verdict_markup(pr.verdict)}</font>", "h1")]
    src = panel.source
    where = (b.paths.name(src.file) + (f", sheet {src.sheet}" if src.sheet else "")
             + f", row {src.row}")
    out.append(b.para(f"{b.m(where)} &nbsp;\u00b7&nbsp; zone {b.m(panel.zone or '-')} "
                      f"&nbsp;\u00b7&nbsp; {b.m(panel.shape)}, {b.m(panel.material)} "
                      f"&nbsp;\u00b7&nbsp; {rank}", "caption"))
    out.append(panel_data_table(b, panel))
    out.append(Spacer(1, 2))
    out.append(b.para(_facts(b, pr), "small"))

    out.append(b.para("Verdict", "h3"))
    out.append(b.para(b.ms(pr.verdict_reason or pr.verdict), "small"))
    if pr.findings:
        out.append(findings_table(b, pr))
    out += remedy_block(b, pr)

    ruleset_margin = (_rule(b, "conflict_margin"), _rule(b, "caution_margin"))
    chart = interference_chart(
        pr, excitations, conflict_margin=ruleset_margin[0], caution_margin=ruleset_margin[1],
        participation_threshold=float(_rule(b, "participation_threshold", 0.01)),
        width=b.frame_width, style=b.figure_style)
    out.append(KeepTogether([b.para("Interference chart", "h3"), chart]))
    out += shape_drawings(b, pr)
    out += tuning_block(b, pr, excitations)
    assumed = b.assumptions(pr)
    notes = [n for n in pr.notes if not n.startswith("Modes overlap from")]
    if assumed or notes:
        out.append(b.para("<b>Assumed and noted.</b> " + "; ".join(
            b.ms(text.rstrip(".")) for text in list(assumed) + notes) + ".", "small"))
    out += commissioning_line(b, pr)
    return out


def _facts(b: ReportBuilder, pr: PanelResult) -> str:
    first = digest.fundamental(pr.modes)
    parts = []
    if first is not None:
        parts.append(f"<b>Fundamental</b> {format_hz(first.frequency_hz)} Hz "
                     f"(mode {b.m(first.label)})")
    count = len(pr.modes)
    parts.append(f"<b>{count} mode{'s' if count != 1 else ''}</b> assessed up to "
                 f"{format_hz(pr.assessed_to_hz)} Hz")
    if pr.overlap_from_hz is not None and pr.overlap_from_hz < pr.assessed_to_hz:
        parts.append(f"modes overlap from {format_hz(pr.overlap_from_hz)} Hz (judged there by "
                     f"participation and response)")
    loading = _loading_words(pr.panel)
    if loading:
        parts.append(f"<b>Model</b> {b.m(loading)} (see Methods)")
    return " &nbsp;\u00b7&nbsp; ".join(parts)


def _loading_words(panel: Panel) -> str:
    sides = []
    if panel.room_side == "air":
        sides.append("air on the room side")
    if panel.plenum_side == "air":
        sides.append("open plenum")
    elif panel.plenum_side == "sealed":
        depth = f" {1000 * panel.cavity_depth:.0f} mm" if panel.cavity_depth else ""
        sides.append(f"sealed cavity{depth}")
    if panel.airflow_resistance is not None and sides:
        sides.append(f"porous {panel.airflow_resistance:.4g} Pa\u00b7s/m")
    if panel.bending_stiffness:
        sides.append("bending stiffness")
    return ", ".join(sides) if sides else "in vacuo"


# ---------------------------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------------------------

def panel_data_table(b: ReportBuilder, panel: Panel) -> Table:
    """The panel's cells as typed, in the units of their columns (two pairs a row)."""
    w = b.frame_width
    pairs = [(header, in_column_unit(header, text)) for header, text in panel.entered]
    pairs = pairs or _panel_si_fields(panel)
    rows: list[list[Any]] = []
    for k in range(0, len(pairs), 2):
        row: list[Any] = []
        for column, text in pairs[k:k + 2]:
            row += [b.cell(column, 0.17 * w, "cell_bold"), b.cell(text, 0.33 * w)]
        while len(row) < 4:
            row.append("")
        rows.append(row)
    return b.table(rows or [["", "", "", ""]], [0.17 * w, 0.33 * w, 0.17 * w, 0.33 * w],
                   header=False, extra=[
                       ("BACKGROUND", (0, 0), (0, -1), b.colour["table_header"]),
                       ("BACKGROUND", (2, 0), (2, -1), b.colour["table_header"]),
                       ("FONT", (0, 0), (0, -1), b.fonts.bold, 7.6, 9.2),
                       ("FONT", (2, 0), (2, -1), b.fonts.bold, 7.6, 9.2),
                       ("TOPPADDING", (0, 0), (-1, -1), 1.5),
                       ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)])


def findings_table(b: ReportBuilder, pr: PanelResult) -> Flowable:
    """The panel's findings worst first (conflicts, then by estimated response)."""
    head = ["", "Mode", "Mode Hz", "Tone", "Tone Hz", "Path", "Separation", "Response dB",
            "Severity"]
    widths = b.fit_widths(head, [0, 0.55, 0, 1.6, 0, 1.1, 0, 0, 0],
                          samples={"": "99", "Tone Hz": "150\u2013233", "Separation": "+10 %",
                                   "Severity": "conflict"})
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]
    extra: list[tuple] = []
    shown = pr.findings[:FINDINGS_SHOWN]
    for r, f in enumerate(shown, start=1):
        e = f.excitation
        path = e.path
        if e.path == "structure-borne":
            path += f", T {e.transmissibility:.2g}"
        mode = f.mode.label + (" pair" if f.mode.multiplicity == 2 else "")
        rows.append([str(r), b.cell(mode, widths[1]), format_hz(f.mode.frequency_hz),
                     b.cell(digest.tone_name(e), widths[3]), digest.tone_frequency_text(e),
                     b.cell(path + (", overlap" if f.overlap else ""), widths[5]),
                     f"{100 * f.separation:+.0f} %", f"{f.response_db:+.0f}", f.severity])
        extra.append(("TEXTCOLOR", (8, r), (8, r), b.colour[f.severity]))
    for c in (2, 4, 6, 7):
        extra.append(("ALIGN", (c, 1), (c, -1), "RIGHT"))
    out: list[Flowable] = [b.table(rows, widths, long=True, extra=extra)]
    rest = len(pr.findings) - len(shown)
    if rest > 0:
        out.append(b.para(f"\u2026 and {rest} more finding{'s' if rest != 1 else ''}, weaker "
                          f"(all are in findings.json and findings.csv).", "caption"))
    return KeepTogether(out)


def remedy_block(b: ReportBuilder, pr: PanelResult) -> list[Flowable]:
    """The panel's one remedy: what to do in one line, then the remedy in full."""
    remedy = pr.remedy
    if remedy is None and not digest.needs_action(pr):
        return []
    lines = [b.para(f"<b>{b.ms(digest.action_line(pr))}</b>", "body")]
    if remedy is not None:
        checked = " Verified on the full model." if remedy.verified and remedy.work else ""
        lines.append(b.para(b.ms(remedy.text) + checked, "small"))
        if remedy.work:
            lines.append(b.para(b.m(SAFETY_NOTE), "caption"))
    box = Table([[line] for line in lines], colWidths=[b.frame_width], hAlign="LEFT")
    box.setStyle(TableStyle([
        ("BACKGROUND", (0, 0), (-1, -1), b.colour["table_header"]),
        ("LINEBEFORE", (0, 0), (0, -1), 2.5, b.colour[
            "conflict" if pr.verdict == "conflict" else "not_assessed"
            if pr.verdict == "not assessed" else "accent"]),
        ("LEFTPADDING", (0, 0), (-1, -1), 7), ("TOPPADDING", (0, 0), (-1, -1), 1.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)]))
    return [KeepTogether([b.para("Remedy", "h3"), box])]


# ---------------------------------------------------------------------------------------------
# Pictures
# ---------------------------------------------------------------------------------------------

def shape_drawings(b: ReportBuilder, pr: PanelResult) -> list[Flowable]:
    """The mode shapes that matter: those of the worst findings, and the fundamental."""
    if not pr.shapes:
        return []
    note: dict[str, str] = {}
    order: list[str] = []
    for f in pr.findings:  # worst first
        if f.mode.label not in note:
            note[f.mode.label] = f"{f.severity}: {digest.tone_name(f.excitation)}"
            order.append(f.mode.label)
    first = digest.fundamental(pr.modes)
    if first is not None and first.label not in note:
        note[first.label] = "fundamental"
        order.append(first.label)
    available = {s.label: s for s in pr.shapes}
    chosen = [available[label] for label in order if label in available][:SHAPES_SHOWN]
    if not chosen:
        chosen = list(pr.shapes[:SHAPES_SHOWN])
    # the lowest mode of each label drawn (the modes are ascending; stop once all are found)
    wanted = {s.label for s in chosen}
    by_label: dict[str, Any] = {}
    for mode in pr.modes:
        if mode.label in wanted:
            by_label.setdefault(mode.label, mode)
            if len(by_label) == len(wanted):
                break
    cell_w = b.frame_width / SHAPES_SHOWN
    drawings = [mode_shape_drawing(s, pr.panel, by_label.get(s.label), width=cell_w - 6,
                                   height=98, style=b.figure_style,
                                   note=b.t(note.get(s.label, ""))) for s in chosen]
    row = drawings + [""] * (SHAPES_SHOWN - len(drawings))
    grid = Table([row], colWidths=[cell_w] * SHAPES_SHOWN, hAlign="LEFT")
    grid.setStyle(TableStyle([("LEFTPADDING", (0, 0), (-1, -1), 0),
                              ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                              ("TOPPADDING", (0, 0), (-1, -1), 2),
                              ("BOTTOMPADDING", (0, 0), (-1, -1), 0)]))
    return [KeepTogether([b.para("Mode shapes that matter", "h3"),
                          shape_legend(b.figure_style), grid])]


def tuning_block(b: ReportBuilder, pr: PanelResult, excitations) -> list[Flowable]:
    """The tuning chart of a panel with a conflict (or a retensioning remedy)."""
    remedy = pr.remedy
    if not (pr.verdict == "conflict" or (remedy is not None and remedy.work
                                         and remedy.tension is not None)):
        return []
    span = digest.tension_range(pr.panel, b.result.ruleset)
    if span is None:  # no tension to tune (a plate held by its bending stiffness)
        return []
    low, high, rated = span
    modes = digest.tuning_modes(pr, excitations, b.result.ruleset)
    if not modes:
        return []
    t0 = pr.panel.tension_x
    scheduled = {p.panel: p for p in b.result.schedule.panels}.get(pr.panel.panel, pr.panel)
    fitted = abs(scheduled.tension_x - t0) > 1e-9 * t0
    marks = [TensionMark(t0, "fitted" if fitted else "scheduled", "dashed")]
    if fitted:
        marks.append(TensionMark(scheduled.tension_x, "scheduled", "dotted"))
    proposed = remedy.tension if remedy is not None and remedy.work else None
    severities: dict[tuple[str, float], str] = {}
    for f in pr.findings:
        k = (f.mode.label, round(f.mode.frequency_hz, 9))
        if severities.get(k) != "conflict":
            severities[k] = f.severity
    title = "tension [N/m]" if pr.panel.isotropic else \
        "tension x [N/m] (tension y kept in proportion)"
    curves = remedy.curves if remedy is not None else None
    chart = tuning_chart(modes, excitations, scheduled=t0, low=low, high=high, marks=marks,
                         proposed=proposed, clear_windows=remedy.clear_windows if remedy else (),
                         conflict_margin=_rule(b, "conflict_margin"),
                         conflict_db=_rule(b, "conflict_db"), severities=severities,
                         width=b.frame_width, plot_height=150, style=b.figure_style,
                         tension_title=title, curves=curves)
    exact, why = digest.scales_as_root_tension(pr.panel)
    ceiling = "rated maximum" if rated else \
        f"no rating scheduled: {_rule(b, 'max_tension_factor', 1.5):g} \u00d7 scheduled"
    if curves is not None and not curves.exact:
        solved = ", ".join(f"{t:.0f}" for t in curves.tension)
        unfollowed = [m for m in modes if not curves.follows(m.label)]
        how = (f"on the full model: solved at {solved} N/m, with f\u00b2 linear in tension "
               f"between those tensions, as the remedy search takes it"
               + ("" if exact else f" ({why}: part of its stiffness does not scale with "
                  f"tension, so the curves are flatter than \u221aT)")
               + ("; a dashed mode was not followed and is drawn by "
                  "f = f\u2080\u00b7\u221a(T/T\u2080)" if unfollowed else ""))
    else:
        how = (f"by f = f\u2080\u00b7\u221a(T/T\u2080) from the modes computed at {t0:.0f} N/m: "
               + ("exact for this construction (a membrane, with the air on its open faces "
                  "moving as an added mass that does not depend on tension; the small "
                  "compressible correction aside)" if exact else
                  f"approximate for this construction ({why}: part of its stiffness does not "
                  f"scale with tension, so the true curves are flatter)"))
    caption = (f"The lowest modes that matter, followed over the range a remedy may propose "
               f"({low:.0f}\u2013{high:.0f} N/m; {ceiling}) {how}. A mode inside a shaded "
               f"conflict window is a conflict where it also responds strongly enough (see "
               f"Methods); the clear windows and the proposed tension are the full model's, "
               f"verified by a solve at the proposed tension.")
    return [KeepTogether([b.para("Tuning chart: modes against tension", "h3"), chart,
                          b.para(b.m(caption), "caption")])]


def commissioning_line(b: ReportBuilder, pr: PanelResult) -> list[Flowable]:
    """The tap-test target after the work, or to verify the panel as it is (also in the
    commissioning table)."""
    if not digest.needs_action(pr):
        return []
    c = digest.commissioning(pr)
    tol = f"\u00b1{100 * digest.COMMISSIONING_TOLERANCE:g} %, common practice"
    if c.expected_hz is None:  # the commissioning table says why there is no target
        return []
    if c.work == "no change":
        text = (f"<b>Site check.</b> At the scheduled tension a tap test should find the "
                f"fundamental at {format_hz(c.expected_hz)} Hz (accept "
                f"{format_hz(c.low_hz)}\u2013{format_hz(c.high_hz)} Hz, {tol}); outside it, the "
                f"installed tension differs from the schedule: audit again with the recording.")
    elif "bays" in c.work:
        at = ""
        if c.target_x:
            same = c.target_y is None or abs(c.target_x - c.target_y) <= 1e-9 * c.target_x
            at = (f", at the scheduled {c.target_x:.0f}"
                  f"{'' if same else f' × {c.target_y:.0f}'} N/m")
        text = (f"<b>Commissioning.</b> After the work ({b.m(c.work)}{at}), a tap test on "
                f"each bay should find the fundamental at {format_hz(c.expected_hz)} Hz; "
                f"accept {format_hz(c.low_hz)}\u2013{format_hz(c.high_hz)} Hz ({tol}; "
                f"{b.m(c.note)}).")
    else:
        approx = "about " if not c.exact else ""
        text = (f"<b>Commissioning.</b> After the work ({b.m(c.work)} to "
                f"{c.target_x:.0f} N/m), a tap test should find the fundamental at {approx}"
                f"{format_hz(c.expected_hz)} Hz; accept {format_hz(c.low_hz)}\u2013"
                f"{format_hz(c.high_hz)} Hz ({tol}; {b.m(c.note)}).")
    return [Spacer(1, 3), b.para(text, "small")]


# ---------------------------------------------------------------------------------------------
# Panel data in the schedule's own units
# ---------------------------------------------------------------------------------------------

def _plain_number(value: float) -> str:
    """Four significant figures, and no exponent for a value of 1 or more: 2438, 0.25, 12192."""
    text = f"{value:.4g}"
    if "e" in text and 1.0 <= abs(value) < 1e12:
        text = f"{value:.0f}"
    return text


def in_column_unit(header: str, text: str) -> str:
    """A panel's cell as typed, shown in the unit its column heading states.

    ``"96 in"`` under ``Diameter (mm)`` becomes ``"2438 (typed 96 in)"``, so the heading and
    the value agree; a bare number under a heading with no unit gets the column's default unit
    (``"800"`` under ``Tension x`` becomes ``"800 N/m"``, as the audit read it). Anything
    else (a number in the heading's own unit, a word, an outline, text that is not a plain
    quantity) is shown as typed.
    """
    from auditor.schedule import vocabulary
    from auditor.units import split_number_unit, unit_factor

    hit = vocabulary.match_header(header, vocabulary.PANELS)
    if hit is None or hit[0].kind != "quantity" or not hit[0].dimension or "," in text:
        return text
    column, header_unit = hit
    try:
        value, typed_unit = split_number_unit(text.strip())
        if not typed_unit:
            default = column.default_unit
            return f"{text.strip()} {default}" if header_unit is None and default else text
        if header_unit is None:
            return text
        factor = unit_factor(typed_unit, column.dimension) / unit_factor(header_unit,
                                                                           column.dimension)
    except ValueError:  # not a plain quantity, or a unit the reader would have refused
        return text
    if abs(factor - 1.0) < 1e-12:
        return text
    return f"{_plain_number(value * factor)} (typed {text.strip()})"


def _panel_si_fields(panel: Panel) -> list[tuple[str, str]]:
    """The panel's data in SI, for a panel record that carries no cells as typed."""
    def si(value: float | None, unit: str, digits: int = 4) -> str:
        return "-" if value is None else f"{value:.{digits}g} {unit}"

    out: list[tuple[str, str]] = [("Shape", panel.shape), ("Material", panel.material)]
    if panel.shape == "rectangle":
        out += [("Width", si(panel.width, "m")), ("Length", si(panel.length, "m"))]
    elif panel.shape == "circle":
        out += [("Diameter", si(panel.diameter, "m"))]
    else:
        out += [("Outline vertices", str(len(panel.outline or ())))]
    if panel.cutouts:
        out.append(("Cut-outs", str(len(panel.cutouts))))
    out += [("Areal density", si(panel.areal_density, "kg/m\u00b2")),
            ("Tension x", si(panel.tension_x, "N/m")), ("Tension y", si(panel.tension_y, "N/m"))]
    if panel.bending_stiffness:
        out.append(("Bending stiffness", si(panel.bending_stiffness, "N\u00b7m")))
    if panel.loss_factor is not None:
        out.append(("Loss factor", f"{panel.loss_factor:g}"))
    if panel.airflow_resistance is not None:
        out.append(("Airflow resistance", si(panel.airflow_resistance, "Pa\u00b7s/m")))
    out += [("Room side", panel.room_side), ("Plenum side", panel.plenum_side)]
    if panel.cavity_depth is not None:
        out.append(("Cavity depth", si(panel.cavity_depth, "m")))
    if panel.max_tension is not None:
        out.append(("Rated maximum tension", si(panel.max_tension, "N/m")))
    return out
