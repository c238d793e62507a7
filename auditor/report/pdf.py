"""The PDF audit a consultant can issue.

``write_pdf(result, path)`` lays out an ``AuditResult`` with reportlab: cover, summary, a page
per panel with findings (or every panel), the rejected rows and warnings, methods and
assumptions, and the cautions. Wording and branding come from a template folder
(``templates/`` by default: ``report.toml``, ``methods.md``, ``cautions.md``) so a consultancy
can change them without touching code. The writer only reads the result; it recomputes no
physics.
"""

from __future__ import annotations

import hashlib
import os
import tomllib
from dataclasses import dataclass, fields
from datetime import datetime
from functools import lru_cache
from pathlib import Path
from typing import Any, Callable, Iterable, Sequence

from reportlab import rl_config
from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.pdfgen.canvas import Canvas
from reportlab.platypus import (
    BaseDocTemplate,
    CondPageBreak,
    Flowable,
    Frame,
    Image,
    KeepTogether,
    LongTable,
    NextPageTemplate,
    PageBreak,
    PageTemplate,
    Paragraph,
    Spacer,
    Table,
    TableStyle,
)

from auditor.atomic import write_atomic
from auditor.model import AuditResult, Excitation, Finding, Panel, PanelResult
from auditor.remedy import SAFETY_NOTE
from auditor.report.exports import local_paths, ruleset_origin
from auditor.report.figures import FigureStyle, interference_chart, mode_shape_drawing, shape_legend
from auditor.report.text import (
    Block,
    clean_text,
    format_band_hz,
    format_date,
    format_hz,
    format_percent,
    inline_markup,
    markup,
    parse_text_blocks,
    to_latin1,
)

__all__ = [
    "ReportError",
    "ReportColours",
    "ReportTemplate",
    "bundled_template_dir",
    "load_report_template",
    "write_pdf",
]

DETAILS = ("findings", "all")
PAGE_WIDTH, PAGE_HEIGHT = A4
MARGIN_LEFT = MARGIN_RIGHT = 18 * mm
MARGIN_TOP, MARGIN_BOTTOM = 22 * mm, 20 * mm
FRAME_WIDTH = PAGE_WIDTH - MARGIN_LEFT - MARGIN_RIGHT
#: Panel status lists longer than this are summarised in a sentence instead.
STATUS_LIST_LIMIT = 60


class ReportError(ValueError):
    """A problem the user can fix: a template file, an output path, an option."""


# ---------------------------------------------------------------------------------------------
# Template
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class ReportColours:
    """Report colours as ``#rrggbb`` strings (``[colours]`` of report.toml)."""

    text: str = "#222222"
    accent: str = "#1f3f5b"
    muted: str = "#666666"
    table_header: str = "#e9eef3"
    table_rule: str = "#b9c3cc"
    conflict: str = "#b03a2e"
    caution: str = "#b7791f"
    clear: str = "#3c7a3c"
    mode: str = "#3b5b7a"
    excitation: str = "#4a4a4a"
    conflict_window: str = "#e8a89f"
    caution_window: str = "#f3d9a6"
    band: str = "#9e9e9e"
    measured: str = "#2e7d32"
    positive: str = "#d6604d"
    negative: str = "#4393c3"
    nodal: str = "#111111"


@dataclass(frozen=True)
class ReportTemplate:
    """Wording and branding of the report, read from a template folder.

    ``methods`` and ``cautions`` are the parsed blocks of the editable text files; ``fonts``
    the TrueType files (regular, bold, italic, mono), empty strings where not set.
    """

    directory: Path
    firm_name: str
    firm_address: str
    logo: Path | None
    title: str
    subtitle: str
    footer: str
    advisory: str
    colours: ReportColours
    fonts: tuple[str, str, str, str]
    methods: tuple[Block, ...]
    cautions: tuple[Block, ...]


def bundled_template_dir() -> Path:
    """The template folder shipped inside the package (``templates/`` in the repository)."""
    from auditor.resources import ResourceError, bundled_dir

    try:
        folder = bundled_dir("templates")
    except ResourceError as err:
        raise ReportError(str(err)) from None
    if not (folder / "report.toml").is_file():
        raise ReportError("the bundled report wording (report.toml) is missing from this "
                          "installation; reinstall the package or pass a templates folder")
    return folder


def _read_toml(path: Path) -> dict[str, Any]:
    try:
        with open(path, "rb") as handle:
            return tomllib.load(handle)
    except tomllib.TOMLDecodeError as err:
        raise ReportError(f"{path}: not valid TOML ({err})") from None
    except OSError as err:
        raise ReportError(f"{path}: cannot be read ({err.strerror or err})") from None


def _merge(base: dict[str, Any], override: dict[str, Any]) -> dict[str, Any]:
    out = dict(base)
    for key, value in override.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = value
    return out


def _is_hex_colour(value: object) -> bool:
    if not isinstance(value, str) or len(value) != 7 or not value.startswith("#"):
        return False
    try:
        int(value[1:], 16)
    except ValueError:
        return False
    return True


def load_report_template(template_dir: str | os.PathLike[str] | None = None) -> ReportTemplate:
    """Read the report wording and branding from ``template_dir`` (None: the bundled folder).

    Keys missing from the folder's ``report.toml``, and text files missing from the folder,
    fall back to the bundled defaults, so a consultancy may override only its firm name.

    Raises
    ------
    ReportError
        The folder does not exist, a file is not valid TOML, a colour is not ``#rrggbb``, or a
        named logo, font or text file cannot be found.
    """
    bundled = bundled_template_dir()
    folder = bundled if template_dir is None else Path(template_dir)
    if not folder.is_dir():
        raise ReportError(f"template folder {folder} does not exist")
    settings = _read_toml(bundled / "report.toml")
    if (folder / "report.toml").is_file() and folder.resolve() != bundled.resolve():
        settings = _merge(settings, _read_toml(folder / "report.toml"))
    toml_name = folder / "report.toml"

    def section(name: str) -> dict[str, Any]:
        value = settings.get(name, {})
        if not isinstance(value, dict):
            raise ReportError(f"{toml_name}: [{name}] must be a table of keys")
        return value

    def text_value(table: dict[str, Any], key: str, where: str) -> str:
        value = table.get(key, "")
        if not isinstance(value, str):
            raise ReportError(f"{toml_name}: {where}.{key} must be text in quotes")
        return value.strip()

    firm, report, text_files, fonts, colour_table = (
        section("firm"), section("report"), section("text"), section("fonts"), section("colours"))

    colour_values: dict[str, str] = {}
    known = {f.name for f in fields(ReportColours)}
    for key, value in colour_table.items():
        if key not in known:
            raise ReportError(f"{toml_name}: unknown colour '{key}' in [colours] "
                              f"(known: {', '.join(sorted(known))})")
        if not _is_hex_colour(value):
            raise ReportError(f"{toml_name}: colours.{key} = {value!r} is not a colour like \"#1f3f5b\"")
        colour_values[key] = value

    def locate(name: str, what: str) -> Path:
        for base in (folder, bundled):
            candidate = base / name
            if candidate.is_file():
                return candidate
        raise ReportError(f"{toml_name}: the {what} file '{name}' was not found in {folder}")

    def read_blocks(key: str, default: str) -> tuple[Block, ...]:
        name = text_value(text_files, key, "text") or default
        path = locate(name, key)
        try:
            return parse_text_blocks(path.read_text(encoding="utf-8"))
        except (OSError, UnicodeDecodeError) as err:
            raise ReportError(f"{path}: cannot be read as UTF-8 text ({err})") from None

    logo_name = text_value(firm, "logo", "firm")
    logo = None
    if logo_name:
        logo = folder / logo_name
        if not logo.is_file():
            raise ReportError(f"{toml_name}: the logo file '{logo_name}' was not found in {folder}")
    font_paths = []
    for key in ("regular", "bold", "italic", "mono"):
        name = text_value(fonts, key, "fonts")
        if name:
            path = Path(name) if Path(name).is_absolute() else folder / name
            if not path.is_file():
                raise ReportError(f"{toml_name}: the font file '{name}' was not found")
            font_paths.append(str(path))
        else:
            font_paths.append("")

    return ReportTemplate(
        directory=folder,
        firm_name=text_value(firm, "name", "firm"),
        firm_address=text_value(firm, "address", "firm"),
        logo=logo,
        title=text_value(report, "title", "report") or "Resonance audit",
        subtitle=text_value(report, "subtitle", "report"),
        footer=text_value(report, "footer", "report"),
        advisory=text_value(report, "advisory", "report"),
        colours=ReportColours(**colour_values),
        fonts=(font_paths[0], font_paths[1], font_paths[2], font_paths[3]),
        methods=read_blocks("methods", "methods.md"),
        cautions=read_blocks("cautions", "cautions.md"),
    )


# ---------------------------------------------------------------------------------------------
# Fonts
# ---------------------------------------------------------------------------------------------

_SYSTEM_FONT_FOLDERS = (
    "/usr/share/fonts/truetype/dejavu",
    "/usr/share/fonts/dejavu",
    "/usr/share/fonts/TTF",
    "/usr/local/share/fonts",
    "/Library/Fonts",
    os.path.expanduser("~/Library/Fonts"),
    "C:/Windows/Fonts",
)
_DEJAVU = ("DejaVuSans.ttf", "DejaVuSans-Bold.ttf", "DejaVuSans-Oblique.ttf", "DejaVuSansMono.ttf")


@dataclass(frozen=True)
class _Fonts:
    regular: str
    bold: str
    italic: str
    mono: str
    unicode: bool


@lru_cache(maxsize=8)
def _register_fonts(paths: tuple[str, str, str, str]) -> _Fonts:
    """Register a Unicode TrueType family (template's, else DejaVu Sans), else use Helvetica."""
    chosen = list(paths)
    if not chosen[0]:
        for folder in _SYSTEM_FONT_FOLDERS:
            if os.path.isfile(os.path.join(folder, _DEJAVU[0])):
                chosen = [p or (os.path.join(folder, name) if os.path.isfile(os.path.join(folder, name)) else "")
                          for p, name in zip(chosen, _DEJAVU)]
                break
    if not chosen[0]:
        return _Fonts("Helvetica", "Helvetica-Bold", "Helvetica-Oblique", "Courier", False)
    names = []
    for role, path in zip(("Regular", "Bold", "Italic", "Mono"), chosen):
        if not path:
            names.append(names[0] if names else "Helvetica")
            continue
        # named by a digest of the file's path: the same in every run (hash() of a str is
        # salted per process), and the path itself never appears in the document
        name = f"AuditorFont-{role}-{hashlib.sha256(path.encode()).hexdigest()[:8]}"
        if name not in pdfmetrics.getRegisteredFontNames():
            try:
                pdfmetrics.registerFont(TTFont(name, path))
            except Exception as err:  # a damaged or unsupported font file
                raise ReportError(f"the font file {os.path.basename(path)} cannot be used "
                                  f"({err})") from None
        names.append(name)
    pdfmetrics.registerFontFamily(names[0], normal=names[0], bold=names[1], italic=names[2],
                                  boldItalic=names[1])
    return _Fonts(names[0], names[1], names[2], names[3], True)


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


def _numbered_canvas(fonts: _Fonts, colour: colors.Color, created: str = "") -> type[Canvas]:
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
                self.setFont(fonts.regular, 7.5)
                self.setFillColor(colour)
                self.drawRightString(PAGE_WIDTH - MARGIN_RIGHT, 11 * mm, f"page {number} of {total}")
                super().showPage()
            super().save()

    return NumberedCanvas


class _Bookmark(Flowable):
    """Invisible flowable: a PDF outline entry, and a progress tick for panel pages."""

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
        "findings": a page per panel with findings; "all": a page for every panel.
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
    builder = _ReportBuilder(result, template, detail, progress)
    try:
        write_atomic(target, builder.build)
    except PermissionError as err:
        raise ReportError(f"cannot write {target}: permission denied ({err.strerror})") from None
    except OSError as err:
        raise ReportError(f"cannot write {target}: {err.strerror or err}") from None
    return target


def _rule(name: str, ruleset: Any, default: Any = None) -> Any:
    return getattr(ruleset, name, default) if ruleset is not None else default


class _ReportBuilder:
    """Turns one AuditResult into reportlab flowables; one instance per report."""

    def __init__(self, result: AuditResult, template: ReportTemplate, detail: str,
                 progress: Callable[[int, int], None] | None) -> None:
        self.result = result
        self.template = template
        self.detail = detail
        self.progress = progress
        self.fonts = _register_fonts(template.fonts)
        c = template.colours
        self.colours = c
        self.colour = {name: colors.HexColor(getattr(c, name)) for name in
                       (f.name for f in fields(ReportColours))}
        self.figure_style = FigureStyle(
            font=self.fonts.regular, font_bold=self.fonts.bold, text=c.text, axis=c.muted,
            mode=c.mode, conflict=c.conflict, caution=c.caution, excitation=c.excitation,
            conflict_window=c.conflict_window, caution_window=c.caution_window, band=c.band,
            measured=c.measured, positive=c.positive, negative=c.negative, nodal=c.nodal,
            outline=c.text, latin1=not self.fonts.unicode,
        )
        self.paths = local_paths(result)
        self._styles()
        self.report_panels = [p for p in result.panels if detail == "all" or p.findings]
        self.done = 0
        self.total = len(self.report_panels) + 1
        self.equipment = {e.equipment: e for e in result.schedule.equipment}
        self._bookmarks = 0

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

    def _styles(self) -> None:
        f, text, accent, muted = self.fonts, self.colour["text"], self.colour["accent"], self.colour["muted"]
        base = dict(fontName=f.regular, textColor=text, alignment=TA_LEFT, splitLongWords=1)
        self.style = {
            "body": ParagraphStyle("body", fontSize=9.2, leading=12.4, spaceAfter=5, **base),
            "small": ParagraphStyle("small", fontSize=8, leading=10.4, spaceAfter=3, **base),
            "bullet": ParagraphStyle("bullet", fontSize=9.2, leading=12.4, spaceAfter=4,
                                     leftIndent=12, bulletIndent=2, **base),
            "cell": ParagraphStyle("cell", fontSize=7.6, leading=9.2, **base),
            "cell_bold": ParagraphStyle("cell_bold", fontSize=7.6, leading=9.2,
                                        **{**base, "fontName": f.bold}),
            "head": ParagraphStyle("head", fontSize=7.6, leading=9.2,
                                   **{**base, "fontName": f.bold}),
            "h1": ParagraphStyle("h1", fontSize=15, leading=19, spaceBefore=10, spaceAfter=8,
                                 keepWithNext=1,
                                 **{**base, "fontName": f.bold, "textColor": accent}),
            "h2": ParagraphStyle("h2", fontSize=11, leading=14, spaceBefore=8, spaceAfter=4,
                                 keepWithNext=1,
                                 **{**base, "fontName": f.bold, "textColor": accent}),
            "h3": ParagraphStyle("h3", fontSize=9.5, leading=12, spaceBefore=6, spaceAfter=3,
                                 keepWithNext=1,
                                 **{**base, "fontName": f.bold}),
            "title": ParagraphStyle("title", fontSize=24, leading=29, spaceAfter=10,
                                    **{**base, "fontName": f.bold, "textColor": accent}),
            "subtitle": ParagraphStyle("subtitle", fontSize=11, leading=15, spaceAfter=18,
                                       **{**base, "textColor": muted}),
            "caption": ParagraphStyle("caption", fontSize=7.6, leading=9.6, spaceAfter=4,
                                      **{**base, "textColor": muted}),
            "mono": ParagraphStyle("mono", fontSize=7, leading=8.6,
                                   **{**base, "fontName": f.mono}),
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
                   samples: dict[str, str] | None = None) -> list[float]:
        """Column widths [pt]: weight-0 columns fit their header words (or a sample value),
        the others share the rest of the frame in proportion to their weights."""
        pad = 7.0
        samples = samples or {}
        fixed = []
        for header, weight in zip(headers, weights):
            words = header.split() + [samples.get(header, "")]
            need = max(pdfmetrics.stringWidth(w, self.fonts.bold, 7.6) for w in words) + pad
            fixed.append(need if weight == 0 else 0.0)
        minimum = [max(pdfmetrics.stringWidth(w, self.fonts.bold, 7.6) for w in h.split()) + pad
                   for h in headers]
        free = max(FRAME_WIDTH - sum(fixed), 0.0)
        total_weight = sum(weights) or 1.0
        widths = [f if w == 0 else free * w / total_weight for f, w in zip(fixed, weights)]
        # no header word is split: a text column below its header's width takes it from the
        # widest text column
        for k, (width, weight) in enumerate(zip(widths, weights)):
            if weight and width < minimum[k]:
                widest = max(range(len(widths)), key=lambda j: widths[j] if weights[j] else -1)
                widths[widest] -= minimum[k] - width
                widths[k] = minimum[k]
        return widths

    def bookmark(self, title: str, level: int = 0, tick: bool = False) -> _Bookmark:
        self._bookmarks += 1
        return _Bookmark(self.t(title), f"b{self._bookmarks}", level, self._tick if tick else None)

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
            author=self.t(self._firm_name()),
            subject=self.t(project.reference), creator=self.t(f"auditor {result.version}"),
            # a document id from the content alone (not the clock): same result, same file
            invariant=1,
        )
        frame = Frame(MARGIN_LEFT, MARGIN_BOTTOM, FRAME_WIDTH, PAGE_HEIGHT - MARGIN_TOP - MARGIN_BOTTOM,
                      leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0, id="body")
        doc.addPageTemplates([
            PageTemplate(id="cover", frames=[frame], onPage=self._cover_page),
            PageTemplate(id="body", frames=[frame], onPage=self._body_page),
        ])
        if self.progress is not None:
            self.progress(0, self.total)
        story: list[Flowable] = []
        story += self.cover()
        story += [NextPageTemplate("body"), PageBreak()]
        story += self.summary()
        for panel_result in self.report_panels:
            story += [PageBreak()]
            story += self.panel_section(panel_result)
        story += [PageBreak()]
        story += self.problems_appendix()
        story += [CondPageBreak(120)]
        story += self.methods()
        story += [CondPageBreak(160)]
        story += self.cautions()
        # binary (zlib only) page streams: smaller files, and the pure-Python ASCII85 encoder
        # reportlab would otherwise run on every page is skipped
        saved_a85 = rl_config.useA85
        rl_config.useA85 = 0
        try:
            doc.build(story, canvasmaker=_numbered_canvas(self.fonts, self.colour["muted"],
                                                          result.created))
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
        left = f"Ref. {reference}" + (f"  \u00b7  {project.name}" if project.name else "")
        canvas.drawString(MARGIN_LEFT, 11 * mm, _clip(self.t(left), self.fonts.regular, 7.5, FRAME_WIDTH - 80))
        if self.template.footer:
            canvas.setFont(self.fonts.regular, 6.8)
            canvas.drawString(MARGIN_LEFT, 7.5 * mm,
                              _clip(self.t(self.template.footer), self.fonts.regular, 6.8, FRAME_WIDTH))
        canvas.restoreState()

    def _cover_page(self, canvas: Canvas, doc: BaseDocTemplate) -> None:
        self._footer(canvas)
        canvas.saveState()
        canvas.setFillColor(self.colour["accent"])
        canvas.rect(0, PAGE_HEIGHT - 9 * mm, PAGE_WIDTH, 9 * mm, stroke=0, fill=1)
        canvas.restoreState()

    def _firm_name(self) -> str:
        """The template's firm, or the schedule's "prepared by" when the template names none."""
        return self.template.firm_name or self.result.schedule.project.prepared_by

    def _body_page(self, canvas: Canvas, doc: BaseDocTemplate) -> None:
        self._footer(canvas)
        canvas.saveState()
        canvas.setFillColor(self.colour["muted"])
        canvas.setFont(self.fonts.bold, 7.5)
        y = PAGE_HEIGHT - 13 * mm
        canvas.drawString(MARGIN_LEFT, y, _clip(self.t(self._firm_name()), self.fonts.bold, 7.5,
                                                FRAME_WIDTH / 2 - 10))
        canvas.setFont(self.fonts.regular, 7.5)
        canvas.drawRightString(PAGE_WIDTH - MARGIN_RIGHT, y,
                               _clip(self.t(self.template.title), self.fonts.regular, 7.5, FRAME_WIDTH / 2 - 10))
        canvas.setStrokeColor(self.colour["accent"])
        canvas.setLineWidth(0.6)
        canvas.line(MARGIN_LEFT, y - 3.5, PAGE_WIDTH - MARGIN_RIGHT, y - 3.5)
        canvas.restoreState()

    # -- cover ------------------------------------------------------------------------------
    def cover(self) -> list[Flowable]:
        result, template = self.result, self.template
        project = result.schedule.project
        out: list[Flowable] = [Spacer(1, 14 * mm)]
        if template.logo is not None:
            out += [self._logo(template.logo), Spacer(1, 8 * mm)]
        if self._firm_name():
            out.append(self.para(f"<b>{self.m(self._firm_name())}</b>", "body"))
        if template.firm_address:
            out.append(self.para(self.m(template.firm_address), "small"))
        out += [Spacer(1, 16 * mm), self.bookmark(template.title),
                self.para(self.m(template.title), "title")]
        if template.subtitle:
            out.append(self.para(self.m(template.subtitle), "subtitle"))
        ruleset = result.ruleset
        rule_text = self.m(_rule("name", ruleset, "") or "-")
        description = _rule("description", ruleset, "")
        if description:
            rule_text += f"<br/>{self.m(description)}"
        origin = ruleset_origin(ruleset) if ruleset is not None else ""
        if origin:
            rule_text += f"<br/><font size='6.8'>{self.m(origin)}</font>"
        facts = [
            ("Project", project.name), ("Reference", project.reference), ("Client", project.client),
            ("Prepared by", project.prepared_by), ("Prepared for", project.prepared_for),
            ("Date", format_date(result.created)),
        ]
        rows = [[self.para(f"<b>{k}</b>", "cell"), self.user(v or "-", "body")] for k, v in facts]
        for key, value in project.extra:
            rows.append([self.user(key, "cell_bold"), self.user(value, "body")])
        rows.append([self.para("<b>Rule set</b>", "cell"), self.para(rule_text, "body")])
        version = f"auditor {result.version}"
        if result.calibrated:
            version += " (modes calibrated from tap-test recordings)"
        rows.append([self.para("<b>Program</b>", "cell"), self.user(version, "body")])
        out.append(self.table(rows, [32 * mm, FRAME_WIDTH - 32 * mm], header=False,
                              extra=[("LINEBELOW", (0, 0), (-1, -1), 0.25, self.colour["table_rule"]),
                                     ("TOPPADDING", (0, 0), (-1, -1), 4)]))
        files = result.schedule.files
        out += [Spacer(1, 8 * mm), self.para("Input files", "h3")]
        if files:
            rows = [[self.para("File", "head"), self.para("SHA-256", "head")]]
            for f in files:
                rows.append([self.para(self.m(self.paths.name(f.path)), "cell"),
                             self.para(self.m(f.sha256), "mono")])
            out.append(self.table(rows, [0.36 * FRAME_WIDTH, 0.64 * FRAME_WIDTH], long=True))
        else:
            out.append(self.para("No input files were recorded.", "small"))
        if template.advisory:
            out += [Spacer(1, 8 * mm), self.para(self.m(template.advisory), "caption")]
        return out

    def _logo(self, path: Path) -> Flowable:
        try:
            image = Image(str(path))
            scale = min(50 * mm / image.imageWidth, 18 * mm / image.imageHeight, 1.0)
            image.drawWidth, image.drawHeight = image.imageWidth * scale, image.imageHeight * scale
            image.hAlign = "LEFT"
            return image
        except Exception as err:
            raise ReportError(f"the logo {path} cannot be read as an image ({err})") from None

    # -- summary ----------------------------------------------------------------------------
    def summary(self) -> list[Flowable]:
        result = self.result
        counts = result.summary()
        out: list[Flowable] = [self.bookmark("Summary"), self.para("Summary", "h1")]
        labels = [
            ("panels", "Panels audited"), ("equipment", "Equipment items"),
            ("conflicts", "Conflicts (mode and excitation pairs)"),
            ("cautions", "Cautions (mode and excitation pairs)"),
            ("panels_with_conflicts", "Panels with a conflict"), ("panels_clear", "Panels clear"),
            ("rejected_rows", "Rejected schedule rows"), ("warnings", "Warnings"),
        ]
        rows = [[self.para("Count", "head"), self.para("", "head")]]
        extra: list[tuple] = []
        for i, (key, label) in enumerate(labels, start=1):
            rows.append([label, str(counts.get(key, 0))])
            if key == "conflicts" and counts.get(key):
                extra.append(("TEXTCOLOR", (1, i), (1, i), self.colour["conflict"]))
            if key == "cautions" and counts.get(key):
                extra.append(("TEXTCOLOR", (1, i), (1, i), self.colour["caution"]))
        extra += [("ALIGN", (1, 0), (1, -1), "RIGHT"), ("FONT", (1, 1), (1, -1), self.fonts.bold, 8.5, 10)]
        out.append(self.table(rows, [70 * mm, 20 * mm], extra=extra))
        out.append(Spacer(1, 5 * mm))
        ruleset = result.ruleset
        cm, um = _rule("conflict_margin", ruleset), _rule("caution_margin", ruleset)
        if cm is not None and um is not None:
            out.append(self.para(
                f"Rule set <b>{self.m(_rule('name', ruleset, ''))}</b>: a mode within "
                f"\u00b1{100 * cm:g} % of an excitation is a conflict, within \u00b1{100 * um:g} % a "
                "caution (before the adjustments described under Methods).", "small"))
        if self.template.advisory:
            out.append(self.para(self.m(self.template.advisory), "small"))

        findings = sorted(
            ((i, f) for i, p in enumerate(result.panels) for f in p.findings),
            key=lambda item: (item[1].severity != "conflict", item[0], abs(item[1].separation)))
        conflicts = [f for _, f in findings if f.severity == "conflict"]
        out.append(self.para("Conflicts and remedies", "h2"))
        if conflicts:
            out.append(self.findings_table(conflicts, with_panel=True))
            out.append(self.para(self.m(SAFETY_NOTE), "small"))
        else:
            out.append(self.para("No mode of any audited panel lies within the conflict margin "
                                 "of an excitation that reaches it.", "body"))
        cautions = len(findings) - len(conflicts)
        if cautions:
            out.append(self.para(f"{cautions} caution{'s' if cautions != 1 else ''} (modes "
                                 "between the conflict and caution margins, or weakly driven "
                                 "modes inside the conflict margin) are listed on the panel "
                                 "pages.", "body"))
        out += self.status_list()
        return out

    def findings_table(self, findings: Sequence[Finding], *, with_panel: bool) -> Table:
        head = (["Panel"] if with_panel else []) + [
            "Mode", "Mode Hz", "Equipment", "Excitation", "Excitation Hz", "Separation",
            "Severity", "Remedy"]
        # text columns share what the numeric ones (sized to their header) leave
        weights = ([1.25] if with_panel else []) + [0, 0, 0.8, 1.25, 0, 0, 0, 2.6]
        widths = self.fit_widths(head, weights, samples={"Excitation Hz": "1000-1200",
                                                          "Separation": "+10.0 %"})
        w = dict(zip(head, widths))
        rows: list[list[Any]] = [[self.para(h, "head") for h in head]]
        extra: list[tuple] = []
        for r, f in enumerate(findings, start=1):
            e = f.excitation
            band = format_band_hz(*e.band_hz) if e.band_hz else format_hz(e.frequency_hz)
            # the installers' caution is said once under the table, not in every row
            remedy = f.remedy.text if f.remedy is not None and f.remedy.text else (
                "none found" if f.severity == "conflict" else "-")
            row: list[Any] = [self.cell(f.panel, w["Panel"])] if with_panel else []
            mode = f.mode.label + (" pair" if f.mode.multiplicity == 2 else "")
            row += [self.cell(mode, w["Mode"]), format_hz(f.mode.frequency_hz),
                    self.cell(e.equipment, w["Equipment"]),
                    self.cell(e.description or f"{e.source} \u00d7{e.order}", w["Excitation"]),
                    band, format_percent(f.separation, signed=True), f.severity,
                    self.cell(remedy, w["Remedy"])]
            rows.append(row)
            col = len(row) - 2
            extra.append(("TEXTCOLOR", (col, r), (col, r),
                          self.colour["conflict"] if f.severity == "conflict" else self.colour["caution"]))
        numeric = [2, 5, 6] if with_panel else [1, 4, 5]
        for c in numeric:
            extra.append(("ALIGN", (c, 1), (c, -1), "RIGHT"))
        return self.table(rows, widths, long=True, extra=extra)

    def status_list(self) -> list[Flowable]:
        panels = self.result.panels
        out: list[Flowable] = [self.para("Panel status", "h2")]
        if not panels:
            return out + [self.para("No panel was audited.", "body")]
        if len(panels) > STATUS_LIST_LIMIT:
            n_conflict = sum(1 for p in panels if p.status == "conflict")
            n_caution = sum(1 for p in panels if p.status == "caution")
            n_clear = len(panels) - n_conflict - n_caution
            pages = "every panel" if self.detail == "all" else "each panel with a finding"
            out.append(self.para(
                f"{len(panels)} panels: {n_conflict} with a conflict, {n_caution} with cautions "
                f"only, {n_clear} clear. A page follows for {pages}; the machine-readable exports "
                "list the status of every panel.", "body"))
            return out
        rows = [[self.para(h, "head") for h in ("Panel", "Zone", "Shape", "Lowest mode Hz",
                                                 "Findings", "Status")]]
        extra: list[tuple] = []
        status_colour = {"conflict": self.colour["conflict"], "caution": self.colour["caution"],
                         "clear": self.colour["clear"]}
        for r, p in enumerate(panels, start=1):
            lowest = min((m.frequency_hz for m in p.modes), default=None)
            rows.append([self.cell(p.panel.panel, 0.26 * FRAME_WIDTH),
                         self.cell(p.panel.zone or "-", 0.16 * FRAME_WIDTH), p.panel.shape,
                         format_hz(lowest), str(len(p.findings)), p.status])
            extra.append(("TEXTCOLOR", (5, r), (5, r), status_colour[p.status]))
        extra.append(("ALIGN", (3, 1), (4, -1), "RIGHT"))
        widths = [w * FRAME_WIDTH for w in (0.26, 0.16, 0.14, 0.16, 0.12, 0.16)]
        out.append(self.table(rows, widths, long=True, extra=extra))
        return out

    # -- panel pages ------------------------------------------------------------------------
    def excitations_reaching(self, panel: Panel) -> list[Excitation]:
        use_zones = bool(_rule("use_zones", self.result.ruleset, False))
        out: list[Excitation] = []
        for tag, excitations in self.result.excitations:
            equipment = self.equipment.get(tag)
            if use_zones and equipment is not None and not equipment.reaches(panel.zone):
                continue
            out.extend(excitations)
        return out

    def panel_section(self, pr: PanelResult) -> list[Flowable]:
        panel = pr.panel
        status_colour = {"conflict": self.colours.conflict, "caution": self.colours.caution,
                         "clear": self.colours.clear}[pr.status]
        title = (f"Panel {self.m(panel.panel)} &nbsp;<font size='10' color='{status_colour}'>"
                 f"{pr.status}</font>")
        out: list[Flowable] = [self.bookmark(f"Panel {panel.panel}", level=0, tick=True),
                               self.para(title, "h1")]
        src = panel.source
        where = (self.paths.name(src.file) + (f", sheet {src.sheet}" if src.sheet else "")
                 + f", row {src.row}")
        out.append(self.para(f"Schedule: {self.m(where)}" + (f" &nbsp;\u00b7&nbsp; zone {self.m(panel.zone)}"
                                                              if panel.zone else ""), "caption"))
        out.append(self.panel_data_table(panel))
        out.append(Spacer(1, 3 * mm))
        loading = self.paths.scrub(pr.loading or "not stated")
        out.append(self.para(f"<b>Loading model.</b> {self.m(loading)}", "small"))
        for note in pr.notes:
            out.append(self.para(self.m(self.paths.scrub(note)), "small"))
        modes = sorted(pr.modes, key=lambda m: m.frequency_hz)
        if modes:
            listed = ", ".join(f"{self.m(m.label)} {format_hz(m.frequency_hz)}" for m in modes[:14])
            more = f", and {len(modes) - 14} more" if len(modes) > 14 else ""
            out.append(self.para(f"<b>Modes considered</b> [Hz]: {listed}{more}.", "small"))

        ruleset = self.result.ruleset
        chart = interference_chart(
            pr, self.excitations_reaching(panel),
            conflict_margin=_rule("conflict_margin", ruleset),
            caution_margin=_rule("caution_margin", ruleset),
            width=FRAME_WIDTH, height=178, style=self.figure_style)
        out.append(KeepTogether([
            self.para("Interference chart", "h3"), chart,
            self.para("Modes (circles, larger for a larger uniform-pressure participation "
                      "factor; hollow where it is zero) against the excitations reaching this "
                      "panel (lines, or shaded bands), with the nominal conflict and caution "
                      "windows around each. Coloured items are part of a finding.", "caption")]))
        out += self.shape_drawings(pr)
        heading = self.para("Findings", "h3")
        if pr.findings:
            findings = sorted(pr.findings, key=lambda f: (f.severity != "conflict", abs(f.separation)))
            out.append(KeepTogether([heading, self.findings_table(findings, with_panel=False)]))
        else:
            out += [heading, self.para("No mode lies within the margins of an excitation that "
                                       "reaches this panel.", "small")]
        return out

    def panel_data_table(self, panel: Panel) -> Table:
        pairs = [(header, in_column_unit(header, text)) for header, text in panel.entered]
        pairs = pairs or _panel_si_fields(panel)
        rows: list[list[Any]] = []
        w = FRAME_WIDTH
        for k in range(0, len(pairs), 2):
            row: list[Any] = []
            for column, text in pairs[k:k + 2]:
                row += [self.cell(column, 0.17 * w, "cell_bold"), self.cell(text, 0.33 * w)]
            while len(row) < 4:
                row.append("")
            rows.append(row)
        return self.table(rows or [["", "", "", ""]], [0.17 * w, 0.33 * w, 0.17 * w, 0.33 * w],
                          header=False, extra=[("BACKGROUND", (0, 0), (0, -1), self.colour["table_header"]),
                                               ("BACKGROUND", (2, 0), (2, -1), self.colour["table_header"]),
                                               ("FONT", (0, 0), (0, -1), self.fonts.bold, 7.6, 9.2),
                                               ("FONT", (2, 0), (2, -1), self.fonts.bold, 7.6, 9.2)])

    def shape_drawings(self, pr: PanelResult) -> list[Flowable]:
        if not pr.shapes:
            return []
        by_label: dict[str, Any] = {}
        for mode in pr.modes:
            by_label.setdefault(mode.label, mode)
        severity_note: dict[str, str] = {}
        for f in sorted(pr.findings, key=lambda f: f.severity != "conflict"):
            severity_note.setdefault(f.mode.label, f"{f.severity}: {f.excitation.equipment} "
                                                   f"{f.excitation.source} \u00d7{f.excitation.order}")
        fundamental = min(pr.modes, key=lambda m: m.frequency_hz).label if pr.modes else None
        shapes = sorted(pr.shapes, key=lambda s: (by_label[s.label].frequency_hz
                                                  if s.label in by_label else float("inf")))
        per_row = 3
        cell_w = FRAME_WIDTH / per_row
        drawings = []
        for shape in shapes:
            mode = by_label.get(shape.label)
            note = severity_note.get(shape.label, "fundamental" if shape.label == fundamental else "")
            drawings.append(mode_shape_drawing(shape, pr.panel, mode, width=cell_w - 6, height=128,
                                               style=self.figure_style, note=self.t(note)))
        rows = [drawings[k:k + per_row] for k in range(0, len(drawings), per_row)]
        for row in rows:
            row += [""] * (per_row - len(row))
        grid = Table(rows, colWidths=[cell_w] * per_row, hAlign="LEFT")
        grid.setStyle(TableStyle([("LEFTPADDING", (0, 0), (-1, -1), 0), ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                                  ("TOPPADDING", (0, 0), (-1, -1), 2), ("BOTTOMPADDING", (0, 0), (-1, -1), 2)]))
        return [KeepTogether([self.para("Mode shapes", "h3"), shape_legend(self.figure_style), grid])]

    # -- appendix ---------------------------------------------------------------------------
    def problems_appendix(self) -> list[Flowable]:
        problems = sorted(self.result.problems, key=lambda p: (
            p.severity != "error", p.file, p.sheet, p.row if p.row is not None else -1, p.column))
        out: list[Flowable] = [self.bookmark("Rejected rows and warnings"),
                               self.para("Appendix: rejected rows and warnings", "h1")]
        if not problems:
            return out + [self.para("Every schedule row was read; there were no warnings.", "body")]
        out.append(self.para(
            "Rejected rows (errors) were left out of the audit; rows with warnings were audited "
            "as read. Row numbers are those a spreadsheet program shows.", "small"))
        widths = [0.08, 0.15, 0.1, 0.06, 0.13, 0.16, 0.32]
        rows = [[self.para(h, "head") for h in ("", "File", "Sheet", "Row", "Column", "Text", "Message")]]
        extra: list[tuple] = []
        for r, p in enumerate(problems, start=1):
            cw = [w * FRAME_WIDTH for w in widths]
            message = self.paths.scrub(p.message) + (f" ({p.record})" if p.record else "")
            rows.append([p.severity, self.cell(self.paths.name(p.file) or "-", cw[1]),
                         self.cell(p.sheet or "-", cw[2]), "-" if p.row is None else str(p.row),
                         self.cell(p.column or "-", cw[4]), self.cell(p.text or "-", cw[5]),
                         self.cell(message, cw[6])])
            extra.append(("TEXTCOLOR", (0, r), (0, r),
                          self.colour["conflict"] if p.severity == "error" else self.colour["caution"]))
        extra.append(("ALIGN", (3, 1), (3, -1), "RIGHT"))
        out.append(self.table(rows, [w * FRAME_WIDTH for w in widths], long=True, extra=extra))
        return out

    # -- methods and cautions ----------------------------------------------------------------
    def blocks(self, blocks: Sequence[Block], bookmark: str) -> list[Flowable]:
        out: list[Flowable] = []
        first = True
        for block in blocks:
            text = inline_markup(self.t(block.text), self.fonts.mono)
            if block.kind == "heading":
                style = {1: "h1", 2: "h2"}.get(block.level, "h3")
                if first and block.level == 1:
                    out.append(self.bookmark(block.text or bookmark))
                out.append(self.para(text, style))
            elif block.kind == "bullet":
                out.append(Paragraph(text, self.style["bullet"], bulletText="\u2022"))
            else:
                out.append(self.para(text, "body"))
            first = False
        if not any(b.kind == "heading" and b.level == 1 for b in blocks[:1]):
            out.insert(0, self.bookmark(bookmark))
        return out

    def methods(self) -> list[Flowable]:
        out = self.blocks(self.template.methods, "Methods and assumptions")
        out += self.ruleset_section()
        loadings: dict[str, list[str]] = {}
        for pr in self.report_panels:
            loadings.setdefault(self.paths.scrub(pr.loading or "not stated"), []).append(
                pr.panel.panel)
        if loadings:
            out.append(self.para("Loading models used for the panels in this report", "h2"))
            for sentence, ids in loadings.items():
                shown = ", ".join(ids[:12]) + (f" and {len(ids) - 12} more" if len(ids) > 12 else "")
                out.append(Paragraph(f"{self.m(sentence)} <font color='{self.colours.muted}'>"
                                     f"({len(ids)} panel{'s' if len(ids) != 1 else ''}: "
                                     f"{self.m(shown)})</font>", self.style["bullet"], bulletText="\u2022"))
        return out

    def ruleset_section(self) -> list[Flowable]:
        rs = self.result.ruleset
        if rs is None:
            return []
        out: list[Flowable] = [self.para("Rule set", "h2")]

        def pct(v: Any) -> str:
            return "-" if v is None else f"\u00b1{100 * float(v):g} %"

        fmax, multiple = _rule("fmax_hz", rs), _rule("excitation_multiple", rs)
        limits = []
        if fmax is not None:
            limits.append(f"up to {format_hz(fmax)} Hz")
        if multiple is not None:
            limits.append(f"up to {multiple:g} \u00d7 the highest excitation reaching the panel")
        limit_text = " and ".join(limits) + (" (the lower limit applies)" if len(limits) == 2 else "")
        harmonics = ", ".join(f"{kind} {count}" for kind, count in (_rule("harmonics", rs, ()) or ()))
        items = [
            ("Name", _rule("name", rs, "")), ("Description", _rule("description", rs, "")),
            ("Source", ruleset_origin(rs)),
            ("Modes considered", limit_text or "all computed"),
            ("Modes per panel, at most", _rule("max_modes", rs)),
            ("Harmonics by equipment kind", harmonics or "-"),
            ("Conflict margin", pct(_rule("conflict_margin", rs))),
            ("Caution margin", pct(_rule("caution_margin", rs))),
            ("Participation threshold", _rule("participation_threshold", rs, "-")),
            ("Margins widened by half-power bandwidth", _yes_no(_rule("bandwidth_widening", rs))),
            ("Equipment reaches panels by zone", _yes_no(_rule("use_zones", rs))),
            ("Strouhal number for vortex shedding", _rule("strouhal", rs, "-")),
            ("Default motor slip", _rule("default_slip", rs, "-")),
        ]
        rows = [[self.para(f"<b>{k}</b>", "cell"), self.user(v)]
                for k, v in items if v not in (None, "")]
        out.append(self.table(rows, [0.38 * FRAME_WIDTH, 0.62 * FRAME_WIDTH], header=False))
        return out

    def cautions(self) -> list[Flowable]:
        return [KeepTogether(self.blocks(self.template.cautions, "Cautions"))]


def _yes_no(value: Any) -> str:
    return "-" if value is None else ("yes" if value else "no")


def _clip(text: str, font: str, size: float, width: float) -> str:
    """Shorten a one-line canvas string to ``width`` [pt] with an ellipsis."""
    if pdfmetrics.stringWidth(text, font, size) <= width:
        return text
    while text and pdfmetrics.stringWidth(text + "...", font, size) > width:
        text = text[:-1]
    return text + "..."


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

    out = [("Shape", panel.shape), ("Material", panel.material)]
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
