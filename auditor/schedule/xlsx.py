"""A fast reader of worksheet cell values, for large schedules.

openpyxl's read-only mode builds a Python object per cell through an XML event parser,
which costs several seconds for a 20 000-row schedule on a slow machine. This module reads
the same saved values straight from the sheet part of the archive with compiled regular
expressions: one match per cell. It reads only what the schedule needs (values, the saved
result of formulas, merged ranges, date formats) and gives up — raising
:class:`UnsupportedWorkbook` so the caller falls back to openpyxl — on anything it does not
recognise (namespace prefixes, cells without references, strict OOXML).

The small parts (workbook, relationships, styles) are parsed with ``defusedxml``, so no
entity expansion or external entity is ever processed; the large parts are never handed to
an XML parser at all.

References
----------
ECMA-376 Office Open XML File Formats, 5th edition (2016), Part 1, §18.3 (worksheets),
§18.4 (shared strings), §18.8.30 (number formats), §18.17.4.1 (date serial numbers).
"""

from __future__ import annotations

import datetime as _dt
import html
import posixpath
import re
import zipfile
from typing import Any

from auditor.schedule.cells import UNCACHED_FORMULA

__all__ = ["UnsupportedWorkbook", "TooManyRows", "read_workbook_rows"]

_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_WORKSHEET_TYPE = _REL + "/worksheet"
_SHARED_TYPE = _REL + "/sharedStrings"
_STYLES_TYPE = _REL + "/styles"
_OFFICE_DOCUMENT = _REL + "/officeDocument"

# Built-in number formats that show dates or times (ECMA-376 Part 1 §18.8.30).
_BUILTIN_DATE_FORMATS = frozenset({14, 15, 16, 17, 18, 19, 20, 21, 22, 27, 28, 29, 30, 31,
                                   32, 33, 34, 35, 36, 45, 46, 47, 50, 51, 52, 53, 54, 55, 56,
                                   57, 58})


class UnsupportedWorkbook(Exception):
    """The fast reader does not recognise this workbook's layout; use openpyxl instead."""


class TooManyRows(Exception):
    """A sheet has more rows with data than the reader takes (``limit``)."""

    def __init__(self, limit: int, sheet: str = "") -> None:
        super().__init__(f"sheet {sheet!r} has more than {limit} rows")
        self.limit, self.sheet = limit, sheet


def _xml(data: bytes):
    from defusedxml.ElementTree import fromstring

    return fromstring(data)


def _relationships(archive: zipfile.ZipFile, part: str) -> dict[str, tuple[str, str]]:
    """Id -> (type, absolute part name) of a part's relationships."""
    folder, name = posixpath.split(part)
    rels_name = posixpath.join(folder, "_rels", name + ".rels")
    try:
        root = _xml(archive.read(rels_name))
    except KeyError:
        return {}
    out = {}
    for rel in root.iter(f"{{{_PKG_REL}}}Relationship"):
        target = rel.get("Target", "")
        if rel.get("TargetMode") == "External":
            continue
        if target.startswith("/"):
            resolved = target.lstrip("/")
        else:
            resolved = posixpath.normpath(posixpath.join(folder, target))
        out[rel.get("Id", "")] = (rel.get("Type", ""), resolved)
    return out


def _unescape(text: str) -> str:
    if "&" in text:
        text = html.unescape(text)
    if "_x" in text:
        text = re.sub(r"_x([0-9A-Fa-f]{4})_", lambda m: chr(int(m.group(1), 16)), text)
    return text


_SI = re.compile(r"<si>(.*?)</si>|<si/>", re.S)
_T = re.compile(r"<t(?:\s[^>]*)?>(.*?)</t>", re.S)
_PHONETIC = re.compile(r"<rPh\b.*?</rPh>", re.S)


def _shared_strings(text: str) -> list[str]:
    if re.search(r"<\w+:sst\b", text[:500]):
        raise UnsupportedWorkbook("namespace prefix in shared strings")
    out = []
    for m in _SI.finditer(text):
        body = m.group(1) or ""
        if "<rPh" in body:
            body = _PHONETIC.sub("", body)
        out.append(_unescape("".join(_T.findall(body))))
    return out


def _date_styles(archive: zipfile.ZipFile, part: str | None) -> frozenset[int]:
    """Indices of cell formats (the ``s`` attribute) that show a date or time."""
    if part is None:
        return frozenset()
    from openpyxl.styles.numbers import is_date_format

    root = _xml(archive.read(part))
    custom = {}
    formats = root.find(f"{{{_MAIN}}}numFmts")
    if formats is not None:
        for fmt in formats:
            try:
                custom[int(fmt.get("numFmtId", "-1"))] = fmt.get("formatCode", "")
            except ValueError:
                continue
    out = set()
    xfs = root.find(f"{{{_MAIN}}}cellXfs")
    if xfs is not None:
        for index, xf in enumerate(xfs):
            try:
                number_format = int(xf.get("numFmtId", "0"))
            except ValueError:
                continue
            code = custom.get(number_format)
            if (code is not None and is_date_format(code)) or (
                    code is None and number_format in _BUILTIN_DATE_FORMATS):
                out.add(index)
    return frozenset(out)


_CELL = re.compile(
    r'<c\b(?P<pre>[^>]*?)\sr="(?P<col>[A-Z]{1,3})(?P<row>\d+)"(?P<post>[^>]*?)'
    r"(?:/>|>(?P<body>.*?)</c>)",
    re.S,
)
_CELL_OPEN = re.compile(r"<c[\s>/]")
_ATTR_T = re.compile(r'\st="(\w+)"')
_ATTR_S = re.compile(r'\ss="(\d+)"')
_V = re.compile(r"<v>(.*?)</v>|<v\s*/>", re.S)
_MERGE = re.compile(r'<mergeCell\b[^>]*\sref="([A-Z]{1,3})(\d+)(?::([A-Z]{1,3})(\d+))?"')

_COLUMN_INDEX: dict[str, int] = {}


def _column_index(letters: str) -> int:
    index = _COLUMN_INDEX.get(letters)
    if index is None:
        index = 0
        for ch in letters:
            index = index * 26 + (ord(ch) - 64)
        _COLUMN_INDEX[letters] = index
    return index


def _from_serial(serial: float, epoch: _dt.datetime) -> Any:
    from openpyxl.utils.datetime import from_excel

    try:
        return from_excel(serial, epoch)
    except (OverflowError, ValueError):
        return "#VALUE!"


def _sheet_rows(text: str, shared: list[str], date_styles: frozenset[int],
                epoch: _dt.datetime, max_rows: int) -> dict[int, list[Any]]:
    if re.search(r"<\w+:worksheet\b", text[:1000]):
        raise UnsupportedWorkbook("namespace prefix in a worksheet")
    start = text.find("<sheetData")
    end = text.rfind("</sheetData>")
    data = text[start:end] if start >= 0 and end > start else ""
    rows: dict[int, list[Any]] = {}
    attribute_cache: dict[str, tuple[str, int]] = {}
    column_index = _column_index
    matched = 0
    current_text = ""
    current: dict[int, Any] = {}
    for match in _CELL.finditer(data):  # one cell at a time: memory follows the values kept
        pre, col, row_text, post, body = match.groups()
        matched += 1
        if not body:
            continue
        attrs = pre + post
        parsed = attribute_cache.get(attrs)
        if parsed is None:
            t = _ATTR_T.search(attrs)
            s = _ATTR_S.search(attrs)
            parsed = (t.group(1) if t else "n", int(s.group(1)) if s else 0)
            attribute_cache[attrs] = parsed
        kind, style = parsed
        if row_text != current_text:
            current = rows.setdefault(int(row_text), {})
            current_text = row_text
            if len(rows) > max_rows:
                raise TooManyRows(max_rows)
        if kind == "inlineStr":
            if body.startswith("<is><t>") and body.endswith("</t></is>") and body.count("<") == 4:
                string = body[7:-9]
            else:
                string = "".join(_T.findall(_PHONETIC.sub("", body)))
            current[column_index(col)] = (_unescape(string) if ("&" in string or "_x" in string)
                                          else string)
            continue
        if body.startswith("<v>") and body.endswith("</v>") and body.count("<") == 2:
            raw: str | None = body[3:-4]
        else:
            m = _V.search(body)
            raw = m.group(1) if m else None
            if raw is None:
                if "<f" in body:
                    current[column_index(col)] = UNCACHED_FORMULA
                continue
        if not raw and kind != "str":
            if "<f" in body:
                current[column_index(col)] = UNCACHED_FORMULA
            continue
        if kind == "n":
            number = float(raw)
            value: Any = _from_serial(number, epoch) if style in date_styles else number
        elif kind == "s":
            value = shared[int(raw)]
        elif kind == "str":
            value = _unescape(raw or "")
        elif kind == "b":
            value = raw.strip() in ("1", "true")
        elif kind == "e":
            value = _unescape(raw or "#VALUE!")
        elif kind == "d":
            try:
                value = _dt.datetime.fromisoformat(raw)
            except (TypeError, ValueError):
                value = raw
        else:
            raise UnsupportedWorkbook(f"cell type {kind!r}")
        current[column_index(col)] = value
    if matched != len(_CELL_OPEN.findall(data)):
        raise UnsupportedWorkbook("cells without a reference")
    out: dict[int, list[Any]] = {}
    for index, cells in rows.items():
        if not cells:
            continue
        values: list[Any] = [None] * max(cells)
        for column, value in cells.items():
            values[column - 1] = value
        out[index] = values
    tail = text[end:] if end > 0 else ""
    last = max(out, default=0)  # a merge never makes rows below the last with data
    for col0, row0, _col1, row1 in _MERGE.findall(tail):
        top = out.get(int(row0))
        c = _column_index(col0)
        value = top[c - 1] if top and len(top) >= c else None
        if value is None or not row1:
            continue
        for r in range(int(row0) + 1, min(int(row1), last) + 1):
            row = out.setdefault(r, [])
            if len(row) < c:
                row.extend([None] * (c - len(row)))
            if row[c - 1] is None:
                row[c - 1] = value
    return out


def read_workbook_rows(archive: zipfile.ZipFile, max_rows: int
                       ) -> list[tuple[str, dict[int, list[Any]]]]:
    """Every worksheet's saved cell values, by sheet, in workbook order.

    Parameters
    ----------
    archive : zipfile.ZipFile
        An archive already verified by ``archive.verified_workbook_archive``.
    max_rows : int
        Most rows with data a sheet may have.

    Returns
    -------
    list of (sheet name, {row number: values})
        Values are ``float``, ``str``, ``bool``, ``datetime`` (date-formatted numbers),
        spreadsheet error text ("#DIV/0!") or ``UNCACHED_FORMULA``; a cell merged down a
        column fills every row of the merge.

    Raises
    ------
    UnsupportedWorkbook
        The layout is not one this reader knows; read the workbook with openpyxl.
    TooManyRows
        A sheet has more than ``max_rows`` rows with data (found while reading it, so the
        rest of it is never parsed).
    """
    try:
        package = _relationships(archive, "")
        workbook_part = next((p for t, p in package.values() if t == _OFFICE_DOCUMENT),
                             "xl/workbook.xml")
        root = _xml(archive.read(workbook_part))
        if root.tag != f"{{{_MAIN}}}workbook":
            raise UnsupportedWorkbook(f"workbook root {root.tag!r}")
        properties = root.find(f"{{{_MAIN}}}workbookPr")
        use_1904 = properties is not None and properties.get("date1904", "0") in ("1", "true")
        epoch = _dt.datetime(1904, 1, 1) if use_1904 else _dt.datetime(1899, 12, 30)
        rels = _relationships(archive, workbook_part)
        shared_part = next((p for t, p in rels.values() if t == _SHARED_TYPE), None)
        styles_part = next((p for t, p in rels.values() if t == _STYLES_TYPE), None)
        shared = (_shared_strings(archive.read(shared_part).decode("utf-8"))
                  if shared_part else [])
        date_styles = _date_styles(archive, styles_part)
        sheets = root.find(f"{{{_MAIN}}}sheets")
        out = []
        for sheet in (sheets if sheets is not None else ()):
            rel_type, part = rels.get(sheet.get(f"{{{_REL}}}id", ""), ("", ""))
            if rel_type != _WORKSHEET_TYPE:
                continue  # chart sheets and dialog sheets hold no table
            text = archive.read(part).decode("utf-8")
            name = sheet.get("name", "")
            try:
                out.append((name, _sheet_rows(text, shared, date_styles, epoch, max_rows)))
            except TooManyRows as exc:
                raise TooManyRows(exc.limit, name) from None
        return out
    except (UnsupportedWorkbook, TooManyRows):
        raise
    except Exception as exc:  # anything unexpected: let openpyxl try
        raise UnsupportedWorkbook(f"{type(exc).__name__}: {exc}") from None
