"""The PDF's tables and text sections: equipment, panel status, site verification and
commissioning, rejected rows, methods and cautions.

Each function takes the report builder (``auditor.report.pdf.ReportBuilder``: fonts, styles,
table helpers) and returns flowables; what they say comes from ``auditor.report.digest``.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from reportlab.platypus import Flowable, KeepTogether, Paragraph

from auditor.remedy import SAFETY_NOTE
from auditor.report import digest
from auditor.report.provenance import ruleset_origin
from auditor.report.text import Block, format_hz, inline_markup

if TYPE_CHECKING:
    from auditor.report.pdf import ReportBuilder

__all__ = ["equipment_section", "status_section", "verification_section",
           "problems_appendix", "methods", "cautions", "STATUS_LIST_LIMIT"]

#: Panel status tables longer than this are summarised in a sentence (the exports list all).
STATUS_LIST_LIMIT = 300


def _rule(b: ReportBuilder, name: str, default: Any = None) -> Any:
    ruleset = b.result.ruleset
    return getattr(ruleset, name, default) if ruleset is not None else default


def _t_text(values: Sequence[float]) -> str:
    return ", ".join(f"{v:.2g}" if v < 0.995 else "1" for v in values)


# ---------------------------------------------------------------------------------------------
# Equipment
# ---------------------------------------------------------------------------------------------

def equipment_section(b: ReportBuilder) -> list[Flowable]:
    """Every item of equipment: speed, tones with harmonics, path, mount, transmissibility."""
    rows_data = digest.equipment_rows(b.result)
    out: list[Flowable] = [b.bookmark("Equipment"),
                           b.para("Equipment and the tones it makes", "h1")]
    if not rows_data:
        return out + [b.para("The schedule lists no equipment; no tone was assessed.", "body")]
    head = ["Tag", "Kind", "Zones", "Speed", "Source", "Tones \u00d71, \u00d72, \u2026 [Hz]",
            "Path", "Mount", "T"]
    texts = {"Zones": [r.zones for r in rows_data], "Speed": [r.speed for r in rows_data],
             "Source": [s.source for r in rows_data for s in r.sources],
             "Tones \u00d71, \u00d72, \u2026 [Hz]": [f + "," for r in rows_data
                                                 for s in r.sources for f in s.frequencies],
             "Mount": [r.mount for r in rows_data]}
    samples = {"Tag": max((r.tag for r in rows_data), key=len)[:16],
               "Kind": max((r.kind for r in rows_data), key=len),
               "Path": max((s.path for r in rows_data for s in r.sources), key=len,
                           default="airborne"),
               "T": max((_t_text(s.transmissibility) for r in rows_data for s in r.sources),
                        key=len, default="1 (rigid)")}
    widths = b.fit_widths(head, [0, 0, 0.55, 0.65, 0.5, 0.9, 0, 2.2, 0], samples, texts)
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]
    extra: list[tuple] = [("LINEBELOW", (0, 1), (-1, -1), 0, b.colour["table_rule"])]
    r = 1
    for item in rows_data:
        sources = item.sources or (digest.EquipmentSource("-", "-", (item.problem or "-",),
                                                          ()),)
        first = r
        for k, s in enumerate(sources):
            t = _t_text(s.transmissibility) if s.transmissibility else "-"
            if item.mount.startswith("rigid") and s.transmissibility:
                t = "1 (rigid)"
            row: list[Any] = ([b.cell(item.tag, widths[0], "cell_bold"), item.kind,
                               b.cell(item.zones, widths[2]), b.cell(item.speed, widths[3])]
                              if k == 0 else ["", "", "", ""])
            row += [b.cell(s.source, widths[4]), b.cell(", ".join(s.frequencies), widths[5]),
                    s.path, b.cell(item.mount, widths[7]) if k == 0 else "", t]
            rows.append(row)
            r += 1
        last = r - 1
        for col in (0, 1, 2, 3, 7):
            if last > first:
                extra.append(("SPAN", (col, first), (col, last)))
        extra.append(("LINEBELOW", (0, last), (-1, last), 0.5, b.colour["table_rule"]))
    out.append(b.table(rows, widths, long=True, extra=extra))
    out.append(b.para(
        "Tones are the harmonics the rule set counts (a band where the speed varies). Path: "
        "airborne tones drive a panel as sound, by each mode's participation; structure-borne "
        "ones reach it through the mounts and fixings; direct ones act on the panel itself "
        "(vortex shedding from the wires of a mesh). Mount: the isolators' static deflection "
        "and natural frequency f\u2080 = \u221a(g/\u03b4)/2\u03c0; \u201crigid (assumed)\u201d "
        "where the schedule gives none. T: the mount's force transmissibility at each "
        "harmonic (the largest over a band), the fraction of the force passed to the "
        "structure; 1 for a rigid mount.", "caption"))
    return out


# ---------------------------------------------------------------------------------------------
# Panel status
# ---------------------------------------------------------------------------------------------

def status_section(b: ReportBuilder) -> list[Flowable]:
    """One table for the panels that need no action (cautions first, then clear)."""
    panels = b.others
    out: list[Flowable] = [b.bookmark("Panel status"),
                           b.para("Panels that need no action", "h1")]
    if not b.result.panels:
        return out + [b.para("No panel was audited.", "body")]
    if not panels:
        return out + [b.para("Every panel audited needs action: see the pages that follow.",
                             "body")]
    intro = (f"{len(panels)} panel{'s' if len(panels) != 1 else ''}: no conflict with any tone "
             f"that reaches {'them' if len(panels) != 1 else 'it'} over the range assessed. "
             f"Cautions are modes near a tone that the rule set grades too weak to act on; no "
             f"change is proposed, and the consultant may weigh them.")
    out.append(b.para(intro, "small"))
    if len(panels) > STATUS_LIST_LIMIT:
        n_caution = sum(p.verdict == "caution" for p in panels)
        return out + [b.para(f"{n_caution} with cautions only, {len(panels) - n_caution} "
                             f"clear; findings.json, findings.csv and the audited workbook list "
                             f"every panel's verdict.", "body")]
    head = ["Panel", "Zone", "Construction", "Fundamental Hz", "Assessed to Hz", "Verdict",
            "Worst finding, or note"]
    widths = b.fit_widths(head, [0.8, 0.7, 0.9, 0, 0, 0, 2.6],
                          samples={"Verdict": "caution", "Fundamental Hz": "1250"})
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]
    extra: list[tuple] = []
    fitted = {r.panel: r for r in digest.tap_test_rows(b.result)}
    for r, p in enumerate(panels, start=1):
        first = digest.fundamental(p.modes)
        note = digest.problem_line(p) if p.findings else "no finding"
        tap = fitted.get(p.panel.panel)
        if tap is not None:
            note += (f"; tension fitted to a tap test: {tap.fitted_x:.0f} N/m "
                     f"(scheduled {tap.scheduled_x:.0f})")
        rows.append([b.cell(p.panel.panel, widths[0]), b.cell(p.panel.zone or "-", widths[1]),
                     b.cell(f"{p.panel.shape}, {p.panel.material}", widths[2]),
                     format_hz(first.frequency_hz if first else None),
                     format_hz(p.assessed_to_hz), p.verdict,
                     b.para(b.ms(note), "cell")])
        extra.append(("TEXTCOLOR", (5, r), (5, r), b.colour[p.verdict.replace(" ", "_")]))
    extra.append(("ALIGN", (3, 1), (4, -1), "RIGHT"))
    out.append(b.table(rows, widths, long=True, extra=extra))
    return out


# ---------------------------------------------------------------------------------------------
# Site verification and commissioning
# ---------------------------------------------------------------------------------------------

def verification_section(b: ReportBuilder) -> list[Flowable]:
    """Tap tests used by the audit, and the commissioning table for the panels that need
    action."""
    out: list[Flowable] = [b.bookmark("Site verification"),
                           b.para("Site verification and commissioning", "h1")]
    out += _tap_tests(b)
    out += _commissioning(b)
    return out


def _tap_tests(b: ReportBuilder) -> list[Flowable]:
    rows_data = digest.tap_test_rows(b.result)
    out: list[Flowable] = [b.para("Tap tests", "h2")]
    if not rows_data:
        used = "" if b.result.calibrated else " (the audit was not run with tap tests)"
        return out + [b.para(f"No tap-test recording was used{used}: every tension is as "
                             f"scheduled. Installed tension is rarely what was specified; a tap "
                             f"test of the panels that need action is the first check on site.",
                             "small")]
    out.append(b.para(
        "Each recording's peaks were matched to the panel's modes and the tension fitted on "
        "the full model (air loading included); the audit of these panels uses the fitted "
        "tension. Uncertainty: the standard error of the fitted tension, from the fit's "
        "residuals; \u03b7 measured: each peak's half-power bandwidth over its frequency.",
        "small"))
    head = ["Panel", "Recording", "Scheduled N/m", "Fitted N/m", "Change", "Uncertainty"]
    widths = b.fit_widths(head, [0.8, 1.2, 0, 0, 0, 1.0], samples={"Fitted N/m": "1000 × 1000"})
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]

    def tension(x: float, y: float) -> str:
        return f"{x:.0f}" if abs(x - y) <= 1e-9 * max(x, 1.0) else f"{x:.0f} \u00d7 {y:.0f}"

    for r in rows_data:
        change = f"{100 * (r.fitted_x / r.scheduled_x - 1):+.1f} %" if r.scheduled_x else "-"
        rows.append([b.cell(r.panel, widths[0]), b.cell(r.recording or "-", widths[1]),
                     tension(r.scheduled_x, r.scheduled_y), tension(r.fitted_x, r.fitted_y),
                     change, b.cell(r.uncertainty or "not in the audit result", widths[5])])
    out.append(b.table(rows, widths, extra=[("ALIGN", (2, 1), (4, -1), "RIGHT")]))
    for r in rows_data:
        for note in r.notes:
            out.append(b.para(f"{b.m(r.panel)}: {b.ms(note)}.", "caption"))
    head = ["Panel", "Peak Hz", "Mode", "Model Hz", "Residual", "\u03b7 measured",
            "\u03b7 model"]
    widths = b.fit_widths(head, [1, 0, 1, 0, 0, 0, 0], samples={"Residual": "+10.0 %"})
    rows = [[b.para(h, "head") for h in head]]
    for r in rows_data:
        for peak, label, predicted, residual, eta, eta_model in r.matched:
            rows.append([b.cell(r.panel, widths[0]), format_hz(peak), b.cell(label, widths[2]),
                         format_hz(predicted), f"{residual:+.1f} %",
                         "-" if eta is None else f"{eta:.3f}",
                         "-" if eta_model is None else f"{eta_model:.3f}"])
    if len(rows) > 1:
        out.append(b.para("Peaks and the modes they match", "h3"))
        out.append(b.table(rows, widths, long=True,
                           extra=[("ALIGN", (1, 1), (1, -1), "RIGHT"),
                                  ("ALIGN", (3, 1), (-1, -1), "RIGHT")]))
    if any(r.source != "calibration" for r in rows_data):
        out.append(b.para(
            "Model: the nearest mode of this audit at the fitted tension. The fit's uncertainty "
            "and the loss factors measured from each peak's half-power bandwidth are reported "
            "by <font face='%s'>auditor calibrate</font>; this audit result does not carry "
            "them." % b.fonts.mono, "caption"))
    return out


def _commissioning(b: ReportBuilder) -> list[Flowable]:
    out: list[Flowable] = [b.para("Commissioning: what a tap test should find", "h2")]
    if not b.action:
        return out + [b.para("No panel needs action, so there is nothing to commission.",
                             "small")]
    tol = 100 * digest.COMMISSIONING_TOLERANCE
    out.append(b.para(
        f"For each panel that needs action: the tension to set (or keep) and the fundamental a "
        f"tap test should then find, with the air the panel carries included. Accept a "
        f"fundamental within \u00b1{tol:g} % of the value (common practice): since the "
        f"frequency goes as \u221aT this is about \u00b1{2 * tol:g} % of tension, what a "
        f"tension gauge and a stretched panel give on site, and it stays inside the rule set's "
        f"conflict margin; where the clear window is narrower the range is narrowed to it. Tap "
        f"the panel lightly near its centre, record the ring-down, and read the lowest clear "
        f"peak.", "small"))
    head = ["Panel", "Work", "Target tension N/m", "Expected Hz", "Accept Hz", "Basis"]
    widths = b.fit_widths(head, [0.7, 1.3, 0, 0, 0, 2.2],
                          samples={"Target tension N/m": "1000 × 1000",
                                   "Accept Hz": "100.0\u2013110.0"})
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]

    def tension(x: float | None, y: float | None) -> str:
        if x is None:
            return "- (no tension)"
        return f"{x:.0f}" if y is None or abs(x - y) <= 1e-9 * max(x, 1.0) \
            else f"{x:.0f} \u00d7 {y:.0f}"

    approximate = False
    for pr in b.action:
        c = digest.commissioning(pr)
        approximate |= not c.exact
        expected = "-" if c.expected_hz is None else (
            ("\u2248" if not c.exact else "") + format_hz(c.expected_hz))
        accept = "-" if c.low_hz is None else f"{format_hz(c.low_hz)}\u2013{format_hz(c.high_hz)}"
        rows.append([b.cell(c.panel, widths[0]), b.cell(c.work, widths[1]),
                     tension(c.target_x, c.target_y), expected, accept,
                     b.para(b.ms(c.note), "cell")])
    out.append(b.table(rows, widths, long=True, extra=[("ALIGN", (2, 1), (4, -1), "RIGHT")]))
    approx = ("\u2248: the √T scaling of a construction whose stiffness does not all scale "
              "with tension (a sealed cavity, bending, a porous sheet); confirm with an audit "
              "at the target tension. " if approximate else "")
    out.append(b.para(approx + b.m(SAFETY_NOTE), "caption"))
    return out


# ---------------------------------------------------------------------------------------------
# Appendix, methods, cautions
# ---------------------------------------------------------------------------------------------

def problems_appendix(b: ReportBuilder) -> list[Flowable]:
    """Every rejected row and warning, with file, sheet, row, column, text and message."""
    problems = sorted(b.result.problems, key=lambda p: (
        p.severity != "error", p.file, p.sheet, p.row if p.row is not None else -1, p.column))
    out: list[Flowable] = [b.bookmark("Rejected rows and warnings"),
                           b.para("Appendix: rejected rows and warnings", "h1")]
    if not problems:
        return out + [b.para("Every schedule row was read; there were no warnings.", "body")]
    out.append(b.para(
        "Rejected rows (errors) were left out of the audit; rows with warnings were audited "
        "as read. Row numbers are those a spreadsheet program shows.", "small"))
    head = ["", "File", "Sheet", "Row", "Column", "Text", "Message"]
    cw = b.fit_widths(head, [0, 0, 0.6, 0, 0.8, 0.9, 2.2], samples={
        "": "warning", "File": max((b.paths.name(p.file) for p in problems), key=len)[:40],
        "Row": "99999"}, texts={"Sheet": [p.sheet for p in problems],
                                "Column": [p.column for p in problems]})
    rows = [[b.para(h, "head") for h in head]]
    extra: list[tuple] = []
    for r, p in enumerate(problems, start=1):
        message = b.paths.scrub(p.message) + (f" ({p.record})" if p.record else "")
        rows.append([p.severity, b.cell(b.paths.name(p.file) or "-", cw[1]),
                     b.cell(p.sheet or "-", cw[2]), "-" if p.row is None else str(p.row),
                     b.cell(p.column or "-", cw[4]), b.cell(p.text or "-", cw[5]),
                     b.cell(message, cw[6])])
        extra.append(("TEXTCOLOR", (0, r), (0, r),
                      b.colour["conflict"] if p.severity == "error" else b.colour["caution"]))
    extra.append(("ALIGN", (3, 1), (3, -1), "RIGHT"))
    out.append(b.table(rows, cw, long=True, extra=extra))
    return out


def blocks(b: ReportBuilder, items: Sequence[Block], bookmark: str) -> list[Flowable]:
    """The blocks of an editable text file (methods.md, cautions.md) as flowables."""
    out: list[Flowable] = []
    for k, block in enumerate(items):
        text = inline_markup(b.t(block.text), b.fonts.mono)
        if block.kind == "heading":
            style = {1: "h1", 2: "h2"}.get(block.level, "h3")
            if k == 0 and block.level == 1:
                out.append(b.bookmark(block.text or bookmark))
            out.append(b.para(text, style))
        elif block.kind == "bullet":
            out.append(Paragraph(text, b.style["small_bullet"], bulletText="\u2022"))
        else:
            out.append(b.para(text, "small"))
    if not (items and items[0].kind == "heading" and items[0].level == 1):
        out.insert(0, b.bookmark(bookmark))
    return out


def methods(b: ReportBuilder) -> list[Flowable]:
    """The methods text of the template, the rule set in full, and the loading models used."""
    out = blocks(b, b.template.methods, "Methods and assumptions")
    out += ruleset_table(b)
    # the physics states each panel's loading model in full; panels of one kind of loading
    # differ only in their numbers (a cavity's depth, a fabric's airflow resistance), so each
    # kind is given once, in the words of its first panel
    kinds: dict[str, tuple[str, list[str]]] = {}
    for pr in b.result.panels:
        sentence = b.paths.scrub(pr.loading or "not stated")
        kind = re.sub(r"\d+(?:\.\d+)?", "#", sentence)
        kinds.setdefault(kind, (sentence, []))[1].append(pr.panel.panel)
    if kinds:
        out.append(b.para("Loading models used", "h2"))
        for sentence, ids in kinds.values():
            shown = ", ".join(ids[:16]) + (f" and {len(ids) - 16} more" if len(ids) > 16
                                           else "")
            numbers = " (depths, resistances and counts as for each panel)" \
                if len(ids) > 1 and re.search(r"\d", sentence) else ""
            out.append(Paragraph(
                f"{b.m(sentence)} <font color='{b.colours.muted}'>{len(ids)} "
                f"panel{'s' if len(ids) != 1 else ''}{numbers}: {b.m(shown)}.</font>",
                b.style["small_bullet"], bulletText="\u2022"))
    return out


def _yes_no(value: Any) -> str:
    return "-" if value is None else ("yes" if value else "no")


def ruleset_table(b: ReportBuilder) -> list[Flowable]:
    """The rule set's values, as the audit used them."""
    rs = b.result.ruleset
    if rs is None:
        return []

    def pct(v: Any) -> str:
        return "-" if v is None else f"\u00b1{100 * float(v):g} %"

    fmax, multiple = _rule(b, "fmax_hz"), _rule(b, "excitation_multiple")
    limits = []
    if fmax is not None:
        limits.append(f"up to {format_hz(fmax)} Hz")
    if multiple is not None:
        limits.append(f"up to {multiple:g} \u00d7 the highest tone reaching the panel")
    limit_text = " or ".join(limits) + (" (the lower; raised to cover every tone reaching "
                                        "the panel)" if limits else "")
    harmonics = ", ".join(f"{kind} {count}" for kind, count in (_rule(b, "harmonics") or ()))
    paths = ", ".join(f"{kind}: {path}" for kind, path in (_rule(b, "paths") or ()))
    items = [
        ("Name", _rule(b, "name", "")), ("Description", _rule(b, "description", "")),
        ("Source", ruleset_origin(rs)),
        ("Modes assessed", limit_text or "all computed"),
        ("Harmonics by source", harmonics or "-"), ("Paths by source", paths or "-"),
        ("Conflict margin", pct(_rule(b, "conflict_margin"))),
        ("Caution margin", pct(_rule(b, "caution_margin"))),
        ("Participation threshold, airborne", _rule(b, "participation_threshold", "-")),
        ("Participation threshold, structure-borne",
         _rule(b, "support_participation_threshold", "-")),
        ("Response for a conflict, at least [dB]", _rule(b, "conflict_db", "-")),
        ("Response reported, at least [dB]", _rule(b, "report_db", "-")),
        ("Margins widened by half-power bandwidth", _yes_no(_rule(b, "bandwidth_widening"))),
        ("Equipment reaches panels by zone", _yes_no(_rule(b, "use_zones"))),
        ("Strouhal number for vortex shedding", _rule(b, "strouhal", "-")),
        ("Default motor slip", _rule(b, "default_slip", "-")),
        ("Remedy tension range, × scheduled",
         f"{_rule(b, 'min_tension_factor', '-')} to the rated maximum, else "
         f"{_rule(b, 'max_tension_factor', '-')}"),
        ("Remedy bays, at most", _rule(b, "max_bays", "-")),
    ]
    rows = [[b.para(f"<b>{k}</b>", "cell"), b.user(v)] for k, v in items if v not in (None, "")]
    return [KeepTogether([b.para("Rule set", "h2"),
                          b.table(rows, [0.38 * b.frame_width, 0.62 * b.frame_width],
                                  header=False)])]


def cautions(b: ReportBuilder) -> list[Flowable]:
    return [KeepTogether(blocks(b, b.template.cautions, "Cautions"))]
