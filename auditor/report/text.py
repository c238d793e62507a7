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
    "clean_text",
    "file_name",
    "is_absolute_path",
    "LocalPaths",
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


#: Characters no output may carry: the C0 controls but tab, line feed and carriage return, DEL
#: and the C1 controls, lone surrogates, and the non-characters U+FFFE and U+FFFF. XML 1.0
#: (so an xlsx part) allows none of the C0 ones nor the last two (W3C XML 1.0, 5th ed., §2.2
#: "Char"), openpyxl refuses them (``IllegalCharacterError``), a lone surrogate cannot be
#: encoded as UTF-8, and a PDF font draws a control character as an empty box.
_UNPRINTABLE = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ud800-\udfff\ufffe\uffff]")
#: What an unprintable character becomes: the Unicode replacement character, so a reader sees
#: that something was there rather than two neighbours run together.
REPLACEMENT = "\ufffd"


def clean_text(value: object) -> str:
    """A string any writer can carry: each unprintable character becomes U+FFFD.

    ``None`` becomes "". Tabs and line breaks are kept (each writer decides what they mean).
    """
    text = "" if value is None else str(value)
    return _UNPRINTABLE.sub(REPLACEMENT, text) if _UNPRINTABLE.search(text) else text


def file_name(path: str) -> str:
    """The last part of a POSIX or Windows path."""
    return re.split(r"[\\/]", path.rstrip("/\\"))[-1]


def is_absolute_path(path: str) -> bool:
    """True for a POSIX (/a, ~/a) or Windows (C:\\a, \\\\server\\a) absolute path."""
    return bool(re.match(r"~?/|[A-Za-z]:[\\/]|\\\\", path))


# An absolute path left in a message: POSIX (/a/b...), home (~/a...) or Windows (C:\a\...,
# \\server\share\...), up to the first blank or quote. Used only on the program's own
# messages, after the known input paths were replaced by their names.
_ABSOLUTE_PATH = re.compile(
    r"""(?<![\w./\\~:])(?:~?/|[A-Za-z]:[\\/]|\\\\)(?:[^\s/\\'"<>|]+[/\\])+[^\s/\\'"<>|]*""")


class LocalPaths:
    """Takes the local folders out of the program's messages, notes and file columns.

    ``files`` maps each place an input file was read from (and its name as shown) to the name
    outputs show; in a message, such a place becomes that name, a path inside one of
    ``folders`` (a tap-test recording next to the schedule, say) loses the folder, and any
    other absolute path keeps only its last part.
    """

    def __init__(self, files: dict[str, str], folders: Iterable[str] = ()) -> None:
        self.files = dict(files)
        known = sorted((p for p in self.files if p), key=len, reverse=True)
        places = sorted({f.rstrip("/\\") for f in folders if f.rstrip("/\\")},
                        key=len, reverse=True)
        # a known path or folder only where it starts (not inside a longer word or path)
        self._known = re.compile("(?<![\\w.~/\\\\])(?:" + "|".join(
            [f"(?P<file>{'|'.join(map(re.escape, known))})" if known else "(?P<file>(?!))",
             f"(?P<folder>(?:{'|'.join(map(re.escape, places))})[/\\\\])" if places
             else "(?P<folder>(?!))"]) + ")")
        self._done: dict[str, str] = {}  # texts already scrubbed (loadings repeat per panel)

    def name(self, path: str) -> str:
        """The name an input file goes by: as listed, else the name itself, or the file name
        alone of an absolute path."""
        hit = self.files.get(path)
        if hit is not None:
            return hit
        return (file_name(path) or path) if is_absolute_path(path) else path

    def scrub(self, text: str) -> str:
        """``text`` with every local path replaced by a file name (or a relative path)."""
        if not text or not ("/" in text or "\\" in text):
            return text
        done = self._done.get(text)
        if done is None:
            done = self._done[text] = self._scrub(text)
        return done

    def _scrub(self, text: str) -> str:
        text = self._known.sub(lambda m: self.files[m["file"]] if m["file"] else "", text)
        return _ABSOLUTE_PATH.sub(lambda m: file_name(m.group(0)), text)


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
    """Replace characters the base-14 PDF fonts (WinAnsi) cannot show (used without a
    Unicode font)."""
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
