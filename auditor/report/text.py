"""Wording helpers for the report writers: escaping, number formats, a tiny text-file parser.

Everything here is pure string work; no reportlab import, no I/O.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import datetime
from typing import Iterable
from xml.sax.saxutils import escape

__all__ = [
    "Block",
    "markup",
    "inline_markup",
    "parse_text_blocks",
    "format_hz",
    "format_band_hz",
    "format_percent",
    "format_date",
    "format_si",
    "to_latin1",
]


def markup(text: object) -> str:
    """Escape a user string for reportlab's paragraph markup.

    ``<``, ``>`` and ``&`` become entities, so a panel id such as ``<b>&"x"`` prints as typed
    instead of being read as markup; line breaks become ``<br/>``.
    """
    return escape("" if text is None else str(text)).replace("\n", "<br/>")


_BOLD = re.compile(r"\*\*(.+?)\*\*")
_ITALIC = re.compile(r"(?<![\w*])\*(?!\s)(.+?)(?<!\s)\*(?![\w*])")
_CODE = re.compile(r"`(.+?)`")


def inline_markup(text: str, mono_font: str = "Courier") -> str:
    """Escape template text, then turn ``**bold**``, ``*italic*`` and ```code``` into markup."""
    out = escape(text)
    out = _BOLD.sub(r"<b>\1</b>", out)
    out = _ITALIC.sub(r"<i>\1</i>", out)
    out = _CODE.sub(lambda m: f"<font face='{mono_font}'>{m.group(1)}</font>", out)
    return out


@dataclass(frozen=True)
class Block:
    """One block of an editable text file: ``kind`` is "heading", "paragraph" or "bullet".

    ``level`` is the heading depth (number of ``#``), 0 for other blocks; ``text`` is raw
    template text (not yet escaped).
    """

    kind: str
    text: str
    level: int = 0


def parse_text_blocks(source: str) -> tuple[Block, ...]:
    """Parse the report's editable text files: a deliberately small subset of markdown.

    ``# Heading`` (one to three ``#``), paragraphs separated by blank lines (lines inside a
    paragraph are joined), ``- item`` bullets (continuation lines indented), and lines
    starting with ``<!--`` ... ``-->`` ignored as comments. Inline ``**bold**``, ``*italic*``
    and ```code``` are handled by :func:`inline_markup`.
    """
    blocks: list[Block] = []
    paragraph: list[str] = []
    bullet: list[str] | None = None
    in_comment = False

    def flush() -> None:
        nonlocal paragraph, bullet
        if paragraph:
            blocks.append(Block("paragraph", " ".join(paragraph)))
            paragraph = []
        if bullet is not None:
            blocks.append(Block("bullet", " ".join(bullet)))
            bullet = None

    for raw in source.splitlines():
        line = raw.rstrip()
        stripped = line.strip()
        if in_comment:
            if "-->" in stripped:
                in_comment = False
            continue
        if stripped.startswith("<!--"):
            in_comment = "-->" not in stripped
            continue
        if not stripped:
            flush()
            continue
        heading = re.match(r"^(#{1,3})\s+(.*)$", stripped)
        if heading:
            flush()
            blocks.append(Block("heading", heading.group(2).strip(), len(heading.group(1))))
            continue
        if stripped.startswith(("- ", "* ")):
            flush()
            bullet = [stripped[2:].strip()]
            continue
        if bullet is not None and line[:1].isspace():
            bullet.append(stripped)
            continue
        if bullet is not None:
            flush()
        paragraph.append(stripped)
    flush()
    return tuple(blocks)


def format_hz(frequency_hz: float | None) -> str:
    """A frequency to three significant figures or so, without the unit: 8.25, 43.2, 1250."""
    if frequency_hz is None:
        return "-"
    f = float(frequency_hz)
    if f != f:  # NaN
        return "-"
    a = abs(f)
    if a >= 100:
        return f"{f:.0f}"
    if a >= 10:
        return f"{f:.1f}"
    return f"{f:.2f}"


def format_band_hz(low_hz: float, high_hz: float) -> str:
    """A band as ``low-high`` (same rounding as :func:`format_hz`)."""
    return f"{format_hz(low_hz)}-{format_hz(high_hz)}"


def format_percent(fraction: float | None, *, signed: bool = False) -> str:
    """A fraction as a percentage to one decimal: 0.063 -> "6.3 %" (or "+6.3 %")."""
    if fraction is None:
        return "-"
    value = 100.0 * float(fraction)
    return f"{value:+.1f} %" if signed else f"{value:.1f} %"


def format_si(value: float | None, unit: str, digits: int = 3) -> str:
    """A plain SI value with its unit, ``digits`` significant figures; "-" for None."""
    if value is None:
        return "-"
    return f"{float(value):.{digits}g} {unit}"


def format_date(iso: str) -> str:
    """The date of an ISO 8601 date-time as "1 December 2025"; the text itself if unreadable."""
    text = (iso or "").strip()
    if not text:
        return "-"
    try:
        moment = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        return text
    return f"{moment.day} {moment:%B %Y}"


_LATIN1_FALLBACK = {
    "ρ": "rho", "η": "eta", "φ": "phi", "ω": "omega", "π": "pi", "κ": "kappa",
    "λ": "lambda", "σ": "sigma", "∇": "nabla ", "√": "sqrt", "∂": "d", "∫": "int",
    "∬": "int int", "≈": "~", "≤": "<=", "≥": ">=", "−": "-", "→": "->", "\u200b": "",
}


def to_latin1(text: str) -> str:
    """Replace characters the base-14 PDF fonts (WinAnsi) cannot show; used without a Unicode font."""
    out: list[str] = []
    for ch in text:
        try:
            ch.encode("cp1252")
            out.append(ch)
        except UnicodeEncodeError:
            out.append(_LATIN1_FALLBACK.get(ch, "?"))
    return "".join(out)


def join_nonempty(parts: Iterable[str], sep: str = ", ") -> str:
    """Join the non-empty strings of ``parts``."""
    return sep.join(p for p in parts if p)
