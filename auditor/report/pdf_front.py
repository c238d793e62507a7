"""The front of the PDF audit: the cover with its document control, and the summary.

Functions of the report builder (``auditor.report.pdf.ReportBuilder``); what the summary says
comes from ``auditor.report.digest``.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from reportlab.lib import colors
from reportlab.lib.units import mm
from reportlab.platypus import Flowable, Image, Paragraph, Spacer, Table, TableStyle

from auditor.remedy import SAFETY_NOTE
from auditor.report import digest
from auditor.report.branding import ReportError
from auditor.report.provenance import ruleset_origin
from auditor.report.text import format_date

if TYPE_CHECKING:
    from auditor.report.pdf import ReportBuilder

__all__ = ["cover", "summary", "action_list", "SUMMARY_LIST_LIMIT"]

#: Panels the summary lists by name; the rest are counted (all have action pages).
SUMMARY_LIST_LIMIT = 16


def _rule(b: ReportBuilder, name: str, default: Any = None) -> Any:
    ruleset = b.result.ruleset
    return getattr(ruleset, name, default) if ruleset is not None else default


class _WriteOnLine(Flowable):
    """A line to write on (a name, a signature, a date), inset from its cell's right edge."""

    def __init__(self, width: float, colour: colors.Color, height: float = 14.0) -> None:
        super().__init__()
        self.line_width, self.colour, self.height = width, colour, height
        self.width = width

    def wrap(self, available_width: float, available_height: float) -> tuple[float, float]:
        return self.line_width, self.height

    def draw(self) -> None:
        self.canv.setStrokeColor(self.colour)
        self.canv.setLineWidth(0.7)
        self.canv.line(0, 0, self.line_width, 0)



# -----------------------------------------------------------------------------
def cover(b: ReportBuilder) -> list[Flowable]:
    """The cover: document control, sign-off lines, inputs by name and SHA-256."""
    result, template, control = b.result, b.template, b.control
    project = result.schedule.project
    w = b.frame_width
    out: list[Flowable] = [Spacer(1, 6 * mm)]
    if template.logo is not None:
        out += [_logo(template.logo), Spacer(1, 5 * mm)]
    if b.firm_name():
        out.append(b.para(f"<b>{b.m(b.firm_name())}</b>", "body"))
    if template.firm_address:
        out.append(b.para(b.m(template.firm_address), "small"))
    out += [Spacer(1, 8 * mm), b.bookmark(template.title),
            b.para(b.m(template.title), "title")]
    if template.subtitle:
        out.append(b.para(b.m(template.subtitle), "subtitle"))

    origin = ruleset_origin(result.ruleset) if result.ruleset is not None else ""
    rule_text = b.m(_rule(b, "name", "") or "-")
    if _rule(b, "description", ""):
        rule_text += f" \u2014 {b.m(_rule(b, 'description', ''))}"
    if origin:
        rule_text += f"<br/><font size='7.2'>{b.m(origin)}</font>"
    version = f"auditor {result.version}"
    if result.calibrated:
        version += " (tensions fitted to site tap tests where recorded)"
    pairs = [
        ("Project", project.name, "Reference", project.reference),
        ("Client", project.client, "Prepared for", project.prepared_for),
        ("Revision", control.revision, "Issue status", control.status),
        ("Date", format_date(result.created), "Program", version),
    ]
    to_fill = ("Revision", "Issue status")  # a blank line to write on when not given
    rows: list[list[Any]] = []
    extra: list[tuple] = []
    for r, (k1, v1, k2, v2) in enumerate(pairs):
        row: list[Any] = []
        for col, (key, value) in enumerate(((k1, v1), (k2, v2))):
            row.append(b.para(f"<b>{key}</b>", "cell"))
            if value:
                row.append(b.user(value, "cell"))
            elif key in to_fill:
                row.append("")
                extra.append(("LINEBELOW", (2 * col + 1, r), (2 * col + 1, r), 0.8,
                              b.colour["text"]))
            else:
                row.append("-")
        rows.append(row)
    rows.append([b.para("<b>Rule set</b>", "cell"), b.para(rule_text, "cell"), "", ""])
    extra.append(("SPAN", (1, len(rows) - 1), (3, len(rows) - 1)))
    widths = [0.15 * w, 0.35 * w, 0.15 * w, 0.35 * w]
    out.append(b.table(rows, widths, header=False, extra=extra + [
        ("BACKGROUND", (0, 0), (0, -1), b.colour["table_header"]),
        ("BACKGROUND", (2, 0), (2, -2), b.colour["table_header"]),
        ("TOPPADDING", (0, 0), (-1, -1), 3.5)]))

    out += [Spacer(1, 5 * mm), b.para("Document control", "h3")]
    sign = [[b.para(h, "head") for h in ("", "Name", "Signature", "Date")]]
    sign_widths = [0.16 * w, 0.36 * w, 0.28 * w, 0.2 * w]

    def line(col: int) -> _WriteOnLine:
        return _WriteOnLine(sign_widths[col] - 16, b.colour["text"])

    for role, name in (("Prepared by", control.prepared_by),
                       ("Checked by", control.checked_by),
                       ("Approved by", control.approved_by)):
        sign.append([b.para(f"<b>{role}</b>", "cell"),
                     b.user(name, "cell") if name else line(1), line(2), line(3)])
    out.append(b.table(sign, sign_widths, extra=[
        ("TOPPADDING", (0, 1), (-1, -1), 8), ("BOTTOMPADDING", (0, 1), (-1, -1), 3),
        ("VALIGN", (0, 1), (-1, -1), "BOTTOM"),
        ("LINEBELOW", (0, 1), (-1, -1), 0, colors.white)]))
    if control.other:
        rows = [[b.user(k, "cell_bold"), b.user(v, "cell")] for k, v in control.other]
        out.append(Spacer(1, 2 * mm))
        out.append(b.table(rows, [0.3 * w, 0.7 * w], header=False))

    out += [Spacer(1, 5 * mm), b.para("Inputs", "h3")]
    files = result.schedule.files
    if files:
        rows = [[b.para("File", "head"), b.para("SHA-256", "head")]]
        for f in files:
            rows.append([b.user(b.paths.name(f.path), "cell"),
                         b.para(b.m(f.sha256), "mono")])
        out.append(b.table(rows, [0.3 * w, 0.7 * w], long=True))
    else:
        out.append(b.para("No input files were recorded.", "small"))
    if template.advisory:
        out += [Spacer(1, 5 * mm), b.para(b.m(template.advisory), "caption")]
    return out

def _logo(path: Path) -> Flowable:
    try:
        image = Image(str(path))
        scale = min(50 * mm / image.imageWidth, 18 * mm / image.imageHeight, 1.0)
        image.drawWidth, image.drawHeight = image.imageWidth * scale, image.imageHeight * scale
        image.hAlign = "LEFT"
        return image
    except Exception as err:
        raise ReportError(f"the logo {path.name} cannot be read as an image ({err})") \
            from None

# ---------------------------------------------------------------------------
def summary(b: ReportBuilder) -> list[Flowable]:
    """The one-minute summary: counts, the panels needing action worst first, assumptions."""
    result = b.result
    counts = result.summary()
    panels = result.panels
    n_conflict = sum(p.verdict == "conflict" for p in panels)
    n_open = sum(p.verdict == "not assessed" for p in panels)
    n_caution = sum(p.verdict == "caution" for p in panels)
    n_clear = sum(p.verdict == "clear" for p in panels)
    out: list[Flowable] = [b.bookmark("Summary"), b.para("Summary", "h1")]
    tiles = [("Panels audited", len(panels), b.colours.text),
             ("Need action", len(b.action), b.colours.accent),
             ("Conflict", n_conflict, b.colours.conflict),
             ("Not assessed", n_open, b.colours.not_assessed),
             ("Cautions only", n_caution, b.colours.caution),
             ("Clear", n_clear, b.colours.clear),
             ("Rejected rows", counts["rejected_rows"], b.colours.muted)]
    cells = [[b.para(f"<font color='{c}'>{n}</font>", "tile_number") for _, n, c in tiles],
             [b.para(b.m(label), "tile_label") for label, _, _ in tiles]]
    tile_w = b.frame_width / len(tiles)
    grid = Table(cells, colWidths=[tile_w] * len(tiles), hAlign="LEFT")
    grid.setStyle(TableStyle([
        ("BOX", (0, 0), (-1, -1), 0.4, b.colour["table_rule"]),
        ("LINEAFTER", (0, 0), (-2, -1), 0.4, b.colour["table_rule"]),
        ("BACKGROUND", (1, 0), (1, -1), b.colour["table_header"]),
        ("TOPPADDING", (0, 0), (-1, 0), 5), ("BOTTOMPADDING", (0, -1), (-1, -1), 5)]))
    out += [grid, Spacer(1, 3 * mm)]
    equipment = len(result.schedule.equipment)
    sentence = (f"{len(panels)} panel{'s' if len(panels) != 1 else ''} audited against "
                f"{equipment} item{'s' if equipment != 1 else ''} of equipment with rule "
                f"set <b>{b.m(_rule(b, 'name', '-'))}</b>. ")
    if b.action:
        sentence += (f"<b>{len(b.action)} need action</b>: {n_conflict} with a "
                     f"conflict to clear, {n_open} with tones above the range their "
                     f"modes were assessed to, to verify on site. ")
    else:
        sentence += "<b>No panel needs action.</b> "
    sentence += (f"{n_caution} ha{'ve' if n_caution != 1 else 's'} cautions only (no "
                 f"change proposed; listed in the status table) and {n_clear} "
                 f"{'are' if n_clear != 1 else 'is'} clear.")
    out.append(b.para(sentence, "body"))
    out += action_list(b)
    out.append(b.para("What was assumed", "h2"))
    for text in digest.assumptions(result):
        out.append(Paragraph(b.ms(text), b.style["small_bullet"], bulletText="\u2022"))
    cm, um = _rule(b, "conflict_margin"), _rule(b, "caution_margin")
    if cm is not None and um is not None:
        out.append(Paragraph(
            f"A mode within \u00b1{100 * cm:g} % of a tone is a conflict and within "
            f"\u00b1{100 * um:g} % a caution, graded by the estimated response "
            f"(see Methods).", b.style["small_bullet"], bulletText="\u2022"))
    rejected, warnings = counts["rejected_rows"], counts["warnings"]
    if rejected or warnings:
        out.append(Paragraph(
            f"{rejected} schedule row{'s' if rejected != 1 else ''} rejected and "
            f"{warnings} warning{'s' if warnings != 1 else ''}: listed in the appendix.",
            b.style["small_bullet"], bulletText="\u2022"))
    return out

def action_list(b: ReportBuilder) -> list[Flowable]:
    """The panels needing action, worst first, one line each."""
    if not b.action:
        return []
    out: list[Flowable] = [b.para("Panels needing action, worst first", "h2")]
    head = ["", "Panel", "Zone", "Verdict", "What is wrong", "What to do"]
    widths = b.fit_widths(head, [0, 0.55, 0.5, 0, 2.1, 1.9],
                             samples={"": "99", "Verdict": "not assessed"})
    rows: list[list[Any]] = [[b.para(h, "head") for h in head]]
    shown = b.action[:SUMMARY_LIST_LIMIT]
    for k, pr in enumerate(shown, start=1):
        key = b.panel_keys.get(id(pr))
        name = b.m(pr.panel.panel)
        link = f"<a href='#{key}' color='{b.colours.accent}'>{name}</a>" if key else name
        rows.append([str(k), b.para(link, "cell"), b.user(pr.panel.zone or "-"),
                     b.para(b.verdict_markup(pr.verdict), "cell"),
                     b.para(b.ms(digest.problem_line(pr)), "cell"),
                     b.para(b.ms(digest.action_line(pr)), "cell")])
    out.append(b.table(rows, widths, long=True))
    if len(b.action) > len(shown):
        out.append(b.para(f"\u2026 and {len(b.action) - len(shown)} more, each with "
                             f"an action page in the same order.", "small"))
    if any(p.remedy is not None and p.remedy.work for p in b.action):
        out.append(b.para(b.m(SAFETY_NOTE), "caption"))
    return out


