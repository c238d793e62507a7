"""Wording, branding and fonts of the PDF audit, read from a template folder.

``templates/`` (bundled) holds ``report.toml`` (firm, title, footer, colours, fonts),
``methods.md`` and ``cautions.md``; a consultancy's own folder overrides any of them, and what
it lacks comes from the bundled one. Fonts: the template's TrueType family, else DejaVu Sans
when the system has it, else the PDF base fonts (Western European text only).
"""

from __future__ import annotations

import hashlib
import os
import tomllib
from dataclasses import dataclass, fields
from functools import lru_cache
from pathlib import Path
from typing import Any

from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont

from auditor.report.text import Block, parse_text_blocks

__all__ = [
    "ReportError",
    "ReportColours",
    "ReportTemplate",
    "Fonts",
    "bundled_template_dir",
    "load_report_template",
    "register_fonts",
]


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
    not_assessed: str = "#6a4c93"
    mode: str = "#3b5b7a"
    excitation: str = "#4a4a4a"
    conflict_window: str = "#e8a89f"
    caution_window: str = "#f3d9a6"
    band: str = "#9e9e9e"
    measured: str = "#2e7d32"
    positive: str = "#d6604d"
    negative: str = "#4393c3"
    nodal: str = "#111111"
    clear_window: str = "#a9d5a0"
    proposed: str = "#1f3f5b"


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
            raise ReportError(f"{toml_name}: colours.{key} = {value!r} is not a colour "
                              f"like \"#1f3f5b\"")
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
class Fonts:
    """The registered font names of the report (regular, bold, italic, mono); ``unicode``
    False for the PDF base fonts."""

    regular: str
    bold: str
    italic: str
    mono: str
    unicode: bool


@lru_cache(maxsize=8)
def register_fonts(paths: tuple[str, str, str, str]) -> Fonts:
    """Register a Unicode TrueType family (template's, else DejaVu Sans), else use Helvetica."""
    chosen = list(paths)
    if not chosen[0]:
        for folder in _SYSTEM_FONT_FOLDERS:
            if os.path.isfile(os.path.join(folder, _DEJAVU[0])):
                chosen = [p or (os.path.join(folder, name)
                                if os.path.isfile(os.path.join(folder, name)) else "")
                          for p, name in zip(chosen, _DEJAVU, strict=True)]
                break
    if not chosen[0]:
        return Fonts("Helvetica", "Helvetica-Bold", "Helvetica-Oblique", "Courier", False)
    names: list[str] = []
    for role, path in zip(("Regular", "Bold", "Italic", "Mono"), chosen, strict=False):
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
    return Fonts(names[0], names[1], names[2], names[3], True)


