"""The PDF audit a consultant signs: short, ordered by what to do.

``write_pdf(result, path)`` lays out an ``AuditResult`` with reportlab:

1. cover with document control (project, reference, revision and issue status, prepared /
   checked / approved by with lines to sign, date, rule set, program version, inputs by file
   name and SHA-256; ``auditor.report.pdf_front``);
2. a one-minute summary: how many panels need action, those panels worst first with one line
   each (what is wrong, what to do), and what was assumed (``pdf_front``);
3. the equipment table (tones with harmonics, path, mount, transmissibility), then one status
   table for the panels that need no action;
4. an action page for each panel that needs action (``auditor.report.pdf_panels``);
5. site verification: tap tests, and the commissioning table (target tension → expected
   tap-test frequency);
6. the rejected rows, the methods with their sources, and the cautions
   (``auditor.report.pdf_sections``).

Wording and branding come from a template folder (``auditor.report.branding``); the charts
are ``auditor.report.charts`` (on ``chart_parts``) and the mode shapes ``figures``. The writer
only reads the result; what it says is worked out in ``auditor.report.digest``.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Mapping, Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from reportlab import rl_config
from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    LongTable,
    NextPageTemplate,
    PageBreak,
    PageTemplate,
    Paragraph,
    Table,
    TableStyle,
)

from auditor.atomic import write_atomic
from auditor.report import digest, pdf_front, pdf_panels, pdf_sections
from auditor.report.branding import (
    ReportColours,
    ReportError,
    ReportTemplate,
    bundled_template_dir,
    load_report_template,
    register_fonts,
)
from auditor.report.figures import FigureStyle
from auditor.report.pdf_panels import in_column_unit
from auditor.report.provenance import local_paths
from auditor.report.records import PanelAssumptions
from auditor.report.text import clean_text, markup, to_latin1
from auditor.results import AuditResult

__all__ = [
    "ReportError",
    "ReportColours",
    "ReportTemplate",
    "bundled_template_dir",
    "load_report_template",
    "in_column_unit",
    "write_pdf",
]

DETAILS = ("findings", "all")
PAGE_WIDTH, PAGE_HEIGHT = A4
MARGIN_LEFT = MARGIN_RIGHT = 18 * mm
MARGIN_TOP, MARGIN_BOTTOM = 22 * mm, 20 * mm
FRAME_WIDTH = PAGE_WIDTH - MARGIN_LEFT - MARGIN_RIGHT
#: The smallest type in the document [pt].
MIN_FONT_SIZE = 7.0


# ---------------------------------------------------------------------------------------------
# Page furniture: header, footer, "page N of M"
# ---------------------------------------------------------------------------------------------

def _pdf_date(iso: str) -> str | None:
    """An ISO 8601 date-time as a PDF date string ("D:20240514103200"), None if unreadable."""
    try:
        moment = datetime.fromisoformat((iso or "").strip().replace("Z", "+00:00"))
    except ValueError:
        return None
    text = f"D:{moment:%Y%m%d%H%M%S}"
    offset = moment.utcoffset()
    if offset is not None:
        minutes = int(offset.total_seconds() // 60)
        sign = "+" if minutes >= 0 else "-"
        text += f"{sign}{abs(minutes) // 60:02d}'{abs(minutes) % 60:02d}'"
    return text


def _numbered_canvas(font: str, colour: colors.Color, created: str = "") -> type[Canvas]:
    pdf_date = _pdf_date(created)

    class NumberedCanvas(Canvas):
        """Keeps each finished page until the end, then stamps "page N of M" on all of them.

        The document's creation date is the audit's (``AuditResult.created``), not the clock's,
        so one result always gives the same file.
        """

        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self._saved_pages: list[dict[str, Any]] = []
            if pdf_date is not None:
                self.setDateFormatter(lambda *_: pdf_date)

        def showPage(self) -> None:  # noqa: N802 (reportlab's name)
            self._saved_pages.append(dict(self.__dict__))
            self._startPage()

        def save(self) -> None:
            total = len(self._saved_pages)
            for number, state in enumerate(self._saved_pages, start=1):
                self.__dict__.update(state)
                self.setFont(font, 7.5)
                self.setFillColor(colour)
                self.drawRightString(PAGE_WIDTH - MARGIN_RIGHT, 11 * mm,
                                     f"page {number} of {total}")
                super().showPage()
            super().save()

    return NumberedCanvas


class _Bookmark(Flowable):
    """Invisible flowable: a PDF outline entry and link target, and a progress tick."""

    def __init__(self, title: str, key: str, level: int = 0,
                 tick: Callable[[], None] | None = None) -> None:
        super().__init__()
        self.title, self.key, self.level, self.tick = title, key, level, tick
        self.width = self.height = 0

    def wrap(self, available_width: float, available_height: float) -> tuple[float, float]:
        return 0, 0

    def draw(self) -> None:
        self.canv.bookmarkPage(self.key)
        self.canv.addOutlineEntry(self.title, self.key, level=self.level, closed=self.level > 0)
        if self.tick is not None:
            self.tick()
            self.tick = None


# ---------------------------------------------------------------------------------------------
# The writer
# ---------------------------------------------------------------------------------------------

def write_pdf(result: AuditResult, path: str | os.PathLike[str], *, detail: str = "findings",
              template_dir: str | os.PathLike[str] | None = None,
              progress: Callable[[int, int], None] | None = None) -> Path:
    """Write the audit as a PDF report.

    Parameters
    ----------
    result : AuditResult
        Read only.
    path : path-like
        The PDF to write; written to a temporary file in the same folder, then renamed, so a
        reader never sees half a report.
    detail : {"findings", "all"}
        "findings": an action page for each panel that needs action (a conflict, or tones
        above its assessed range); "all": a page for every panel.
    template_dir : path-like or None
        Folder with report.toml, methods.md, cautions.md; None for the bundled templates.
    progress : callable (done, total) or None
        Called as panel pages are laid out (``total`` = panel pages + 1 for the rest).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    ReportError
        Unknown ``detail``, a missing output folder, an unreadable template.
    """
    if detail not in DETAILS:
        raise ReportError(f"detail must be one of {', '.join(DETAILS)}, not {detail!r}")
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise ReportError(f"cannot write {target}: the folder {folder} does not exist")
    if target.is_dir():
        raise ReportError(f"cannot write {target}: it is a folder")
    template = load_report_template(template_dir)
    builder = ReportBuilder(result, template, detail, progress)
    try:
        write_atomic(target, builder.build)
    except PermissionError as err:
        raise ReportError(f"cannot write {target}: permission denied ({err.strerror})") from None
    except OSError as err:
        raise ReportError(f"cannot write {target}: {err.strerror or err}") from None
    return target


def rule(name: str, ruleset: Any, default: Any = None) -> Any:
    """A rule-set value, or ``default`` when the result carries no rule set."""
    return getattr(ruleset, name, default) if ruleset is not None else default


class ReportBuilder:
    """Turns one AuditResult into reportlab flowables; one instance per report.

    It holds what every section needs (fonts, styles, colours, local-path scrubbing) and the
    small table and text helpers; the sections themselves are in ``pdf_panels`` and
    ``pdf_sections``.
    """

    frame_width = FRAME_WIDTH

    def __init__(self, result: AuditResult, template: ReportTemplate, detail: str,
                 progress: Callable[[int, int], None] | None) -> None:
        self.result = result
        self.template = template
        self.detail = detail
        self.progress = progress
        self.fonts = register_fonts(template.fonts)
        c = template.colours
        self.colours = c
        self.colour = {name: colors.HexColor(getattr(c, name))
                       for name in ReportColours.__dataclass_fields__}
        self.figure_style = FigureStyle(
            font=self.fonts.regular, font_bold=self.fonts.bold, text=c.text, axis=c.muted,
            mode=c.mode, conflict=c.conflict, caution=c.caution, excitation=c.excitation,
            conflict_window=c.conflict_window, caution_window=c.caution_window, band=c.band,
            measured=c.measured, positive=c.positive, negative=c.negative, nodal=c.nodal,
            outline=c.text, not_assessed=c.not_assessed, clear_window=c.clear_window,
            proposed=c.proposed, clear_label=c.clear, latin1=not self.fonts.unicode,
        )
        self.paths = local_paths(result)
        self.control = digest.document_control(result.schedule.project)
        self._styles()
        self.action = digest.action_panels(result)
        self.others = digest.other_panels(result)
        self.page_panels = self.action + (self.others if detail == "all" else [])
        self.done = 0
        self.total = len(self.page_panels) + 1
        self._bookmarks = 0
        self.panel_keys = {id(p): f"panel{k}" for k, p in enumerate(self.page_panels)}
        self.action_rank = {id(p): k for k, p in enumerate(self.action, start=1)}
        self.assumptions = PanelAssumptions(result)

    # -- text -------------------------------------------------------------------------------
    def t(self, value: object) -> str:
        """Plain text for canvas and table strings (not markup): unprintable characters shown
        as U+FFFD, tabs as spaces, any line break as a new line."""
        text = clean_text(value)
        if "\t" in text or "\r" in text:
            text = text.replace("\r\n", "\n").replace("\r", "\n").replace("\t", " ")
        return text if self.fonts.unicode else to_latin1(text)

    def m(self, value: object) -> str:
        """A user string as paragraph markup: escaped, shown literally."""
        return markup(self.t(value))

    def ms(self, value: object) -> str:
        """A program message as markup, local folders taken out."""
        return self.m(self.paths.scrub(clean_text(value)))

    def cell(self, value: object, width: float, style: str = "cell") -> Any:
        """A table cell: the plain string when it fits on one line of ``width`` [pt], else a
        wrapping paragraph (plain strings are drawn as typed; paragraphs are escaped)."""
        text = self.t(value)
        font = self.fonts.bold if style == "cell_bold" else self.fonts.regular
        if "\n" not in text and pdfmetrics.stringWidth(text, font, 7.6) <= width - 6.5:
            return text
        return Paragraph(markup(text), self.style[style])

    def para(self, markup_text: str, style: str = "body") -> Paragraph:
        return Paragraph(markup_text, self.style[style])

    def user(self, value: object, style: str = "cell") -> Paragraph:
        return Paragraph(self.m(value), self.style[style])

    def verdict_colour(self, verdict: str) -> str:
        c = self.colours
        return {"conflict": c.conflict, "caution": c.caution, "clear": c.clear,
                "not assessed": c.not_assessed}.get(verdict, c.text)

    def verdict_markup(self, verdict: str) -> str:
        return f"<font color='{self.verdict_colour(verdict)}'><b>{verdict}</b></font>"

    def _styles(self) -> None:
        f = self.fonts
        text, accent, muted = self.colour["text"], self.colour["accent"], self.colour["muted"]
        base = dict(fontName=f.regular, textColor=text, alignment=TA_LEFT, splitLongWords=1)
        bold = {**base, "fontName": f.bold}
        self.style = {
            "body": ParagraphStyle("body", fontSize=9.2, leading=12.4, spaceAfter=5, **base),
            "small": ParagraphStyle("small", fontSize=8, leading=10.4, spaceAfter=3, **base),
            "bullet": ParagraphStyle("bullet", fontSize=9.2, leading=12.4, spaceAfter=4,
                                     leftIndent=12, bulletIndent=2, **base),
            "small_bullet": ParagraphStyle("small_bullet", fontSize=8.2, leading=10.6,
                                           spaceAfter=2.5, leftIndent=11, bulletIndent=2,
                                           **base),
            "cell": ParagraphStyle("cell", fontSize=7.6, leading=9.2, **base),
            "cell_bold": ParagraphStyle("cell_bold", fontSize=7.6, leading=9.2, **bold),
            "head": ParagraphStyle("head", fontSize=7.6, leading=9.2, **bold),
            "h1": ParagraphStyle("h1", fontSize=15, leading=19, spaceBefore=4, spaceAfter=6,
                                 keepWithNext=1, **{**bold, "textColor": accent}),
            "h2": ParagraphStyle("h2", fontSize=11, leading=14, spaceBefore=7, spaceAfter=4,
                                 keepWithNext=1, **{**bold, "textColor": accent}),
            "h3": ParagraphStyle("h3", fontSize=9.5, leading=12, spaceBefore=5, spaceAfter=2.5,
                                 keepWithNext=1, **bold),
            "title": ParagraphStyle("title", fontSize=22, leading=27, spaceAfter=6,
                                    **{**bold, "textColor": accent}),
            "subtitle": ParagraphStyle("subtitle", fontSize=10.5, leading=14, spaceAfter=10,
                                       **{**base, "textColor": muted}),
            "caption": ParagraphStyle("caption", fontSize=7.6, leading=9.6, spaceAfter=4,
                                      **{**base, "textColor": muted}),
            "mono": ParagraphStyle("mono", fontSize=7.2, leading=8.8,
                                   **{**base, "fontName": f.mono}),
            "tile_number": ParagraphStyle("tile_number", fontSize=17, leading=20,
                                          alignment=1, **{k: v for k, v in bold.items()
                                                          if k != "alignment"}),
            "tile_label": ParagraphStyle("tile_label", fontSize=7.4, leading=8.8,
                                         alignment=1, **{k: v for k, v in base.items()
                                                         if k != "alignment"}),
        }

    # -- tables -----------------------------------------------------------------------------
    def table(self, rows: list[list[Any]], widths: Sequence[float], *, header: bool = True,
              long: bool = False, extra: Iterable[tuple] = ()) -> Table:
        cls = LongTable if long else Table
        table = cls(rows, colWidths=list(widths), repeatRows=1 if header else 0, hAlign="LEFT")
        commands: list[tuple] = [
            ("FONT", (0, 0), (-1, -1), self.fonts.regular, 7.6, 9.2),
            ("TEXTCOLOR", (0, 0), (-1, -1), self.colour["text"]),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("RIGHTPADDING", (0, 0), (-1, -1), 3),
            ("TOPPADDING", (0, 0), (-1, -1), 2),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 2.5),
            ("LINEBELOW", (0, 0), (-1, -1), 0.25, self.colour["table_rule"]),
        ]
        if header:
            commands += [
                ("BACKGROUND", (0, 0), (-1, 0), self.colour["table_header"]),
                ("FONT", (0, 0), (-1, 0), self.fonts.bold, 7.6, 9.2),
                ("LINEBELOW", (0, 0), (-1, 0), 0.6, self.colour["accent"]),
            ]
        table.setStyle(TableStyle(commands + list(extra)))
        return table

    def fit_widths(self, headers: Sequence[str], weights: Sequence[float],
                   samples: dict[str, str] | None = None,
                   texts: Mapping[str, Iterable[str]] | None = None) -> list[float]:
        """Column widths [pt] that split no word.

        Weight-0 columns fit their header words or ``samples[header]`` (kept on one line);
        the others share the rest of the frame in proportion to their weights, each at least
        as wide as its longest header word and the longest word of ``texts[header]``.
        """
        pad = 7.0
        samples, texts = samples or {}, texts or {}

        def widest(words: Iterable[str], font: str) -> float:
            return max((pdfmetrics.stringWidth(w, font, 7.6) for w in words), default=0.0)

        need = []
        for header, weight in zip(headers, weights, strict=True):
            words = header.split()
            if weight == 0:
                need.append(max(widest(words, self.fonts.bold),
                                widest([samples.get(header, "")], self.fonts.bold)) + pad)
            else:
                body = [w for text in texts.get(header, ()) for w in str(text).split()]
                need.append(max(widest(words, self.fonts.bold),
                                widest(body, self.fonts.regular)) + pad)
        widths = [n if w == 0 else 0.0 for n, w in zip(need, weights, strict=True)]
        free = [k for k, w in enumerate(weights) if w]
        while free:
            room = max(FRAME_WIDTH - sum(widths[k] for k in range(len(widths))
                                         if k not in free), 0.0)
            total = sum(weights[k] for k in free)
            short = [k for k in free if room * weights[k] / total < need[k]]
            if not short:
                for k in free:
                    widths[k] = room * weights[k] / total
                break
            for k in short:
                widths[k] = need[k]
            free = [k for k in free if k not in short]
        return widths

    def bookmark(self, title: str, level: int = 0, tick: bool = False,
                 key: str | None = None) -> _Bookmark:
        self._bookmarks += 1
        return _Bookmark(self.t(title), key or f"b{self._bookmarks}", level,
                         self._tick if tick else None)

    def _tick(self) -> None:
        self.done += 1
        if self.progress is not None:
            self.progress(min(self.done, self.total - 1), self.total)

    # -- document ---------------------------------------------------------------------------
    def build(self, output: Any) -> None:
        """Lay out the report and write it to ``output`` (a file name or a binary file)."""
        result, template = self.result, self.template
        project = result.schedule.project
        doc = BaseDocTemplate(
            output, pagesize=A4, leftMargin=MARGIN_LEFT, rightMargin=MARGIN_RIGHT,
            topMargin=MARGIN_TOP, bottomMargin=MARGIN_BOTTOM,
            title=self.t(f"{template.title}: {project.name}" if project.name else template.title),
            author=self.t(self.firm_name()),
            subject=self.t(project.reference), creator=self.t(f"auditor {result.version}"),
            # a document id from the content alone (not the clock): same result, same file
            invariant=1,
        )
        frame = Frame(MARGIN_LEFT, MARGIN_BOTTOM, FRAME_WIDTH,
                      PAGE_HEIGHT - MARGIN_TOP - MARGIN_BOTTOM,
                      leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0, id="body")
        doc.addPageTemplates([
            PageTemplate(id="cover", frames=[frame], onPage=self._cover_page),
            PageTemplate(id="body", frames=[frame], onPage=self._body_page),
        ])
        if self.progress is not None:
            self.progress(0, self.total)
        story: list[Flowable] = []
        story += pdf_front.cover(self)
        story += [NextPageTemplate("body"), PageBreak()]
        story += pdf_front.summary(self)
        # the equipment follows the summary on its page when a table's start fits there (a
        # summary that spills a few lines over must not leave the rest of a page blank)
        story += [CondPageBreak(200)]
        story += pdf_sections.equipment_section(self)
        story += [CondPageBreak(150)]
        story += pdf_sections.status_section(self)
        for panel_result in self.page_panels:
            story += [PageBreak()]
            story += pdf_panels.panel_page(self, panel_result)
        story += [PageBreak()]
        story += pdf_sections.verification_section(self)
        story += [CondPageBreak(200)]
        story += pdf_sections.problems_appendix(self)
        story += [CondPageBreak(300)]
        story += pdf_sections.methods(self)
        story += [CondPageBreak(230)]
        story += pdf_sections.cautions(self)
        # binary (zlib only) page streams: smaller files, and the pure-Python ASCII85 encoder
        # reportlab would otherwise run on every page is skipped
        saved_a85 = rl_config.useA85
        rl_config.useA85 = 0
        try:
            doc.build(story, canvasmaker=_numbered_canvas(self.fonts.regular,
                                                          self.colour["muted"], result.created))
        finally:
            rl_config.useA85 = saved_a85
        if self.progress is not None:
            self.progress(self.total, self.total)

    def _footer(self, canvas: Canvas) -> None:
        project = self.result.schedule.project
        canvas.saveState()
        canvas.setStrokeColor(self.colour["table_rule"])
        canvas.setLineWidth(0.4)
        canvas.line(MARGIN_LEFT, 14.5 * mm, PAGE_WIDTH - MARGIN_RIGHT, 14.5 * mm)
        canvas.setFillColor(self.colour["muted"])
        canvas.setFont(self.fonts.regular, 7.5)
        reference = project.reference or "no reference"
        revision = f" rev. {self.control.revision}" if self.control.revision else ""
        left = f"Ref. {reference}{revision}" + (f"  \u00b7  {project.name}" if project.name
                                                 else "")
        canvas.drawString(MARGIN_LEFT, 11 * mm,
                          clip(self.t(left), self.fonts.regular, 7.5, FRAME_WIDTH - 80))
        if self.template.footer:
            canvas.setFont(self.fonts.regular, MIN_FONT_SIZE)
            canvas.drawString(MARGIN_LEFT, 7.5 * mm, clip(self.t(self.template.footer),
                                                          self.fonts.regular, MIN_FONT_SIZE,
                                                          FRAME_WIDTH))
        canvas.restoreState()

    def _cover_page(self, canvas: Canvas, doc: BaseDocTemplate) -> None:
        self._footer(canvas)
        canvas.saveState()
        canvas.setFillColor(self.colour["accent"])
        canvas.rect(0, PAGE_HEIGHT - 9 * mm, PAGE_WIDTH, 9 * mm, stroke=0, fill=1)
        canvas.restoreState()

    def firm_name(self) -> str:
        """The template's firm, or the schedule's "prepared by" when the template names none."""
        return self.template.firm_name or self.result.schedule.project.prepared_by

    def _body_page(self, canvas: Canvas, doc: BaseDocTemplate) -> None:
        self._footer(canvas)
        canvas.saveState()
        canvas.setFillColor(self.colour["muted"])
        canvas.setFont(self.fonts.bold, 7.5)
        y = PAGE_HEIGHT - 13 * mm
        canvas.drawString(MARGIN_LEFT, y, clip(self.t(self.firm_name()), self.fonts.bold, 7.5,
                                               FRAME_WIDTH / 2 - 10))
        canvas.setFont(self.fonts.regular, 7.5)
        canvas.drawRightString(PAGE_WIDTH - MARGIN_RIGHT, y, clip(
            self.t(self.template.title), self.fonts.regular, 7.5, FRAME_WIDTH / 2 - 10))
        canvas.setStrokeColor(self.colour["accent"])
        canvas.setLineWidth(0.6)
        canvas.line(MARGIN_LEFT, y - 3.5, PAGE_WIDTH - MARGIN_RIGHT, y - 3.5)
        canvas.restoreState()

def clip(text: str, font: str, size: float, width: float) -> str:
    """Shorten a one-line canvas string to ``width`` [pt] with an ellipsis."""
    if pdfmetrics.stringWidth(text, font, size) <= width:
        return text
    while text and pdfmetrics.stringWidth(text + "...", font, size) > width:
        text = text[:-1]
    return text + "..."
