"""Opening schedule files safely and getting their rows: .xlsx workbooks and .csv files.

A workbook is checked and inflated by ``auditor.schedule.archive`` (a zip holding a workbook,
its XML inflated a chunk at a time within a byte budget, whatever sizes the archive
declares), then read by ``auditor.schedule.xlsx``: openpyxl's conversion of each cell's
saved value (for formulas, the value a spreadsheet program saved), a formula with no saved
value told apart from an empty cell, cells merged down a column filling every row of the
merge, all in bounded time and memory.

A CSV file's encoding comes from its byte-order mark (UTF-8, UTF-16 or UTF-32, little- or
big-endian); without one it is UTF-8, else UTF-16 when every other byte is zero, else
Windows-1252 (with a warning). Its delimiter is whatever ``csv.Sniffer`` finds. A file
separated by semicolons is read with decimal commas ("0,25"), as the locales that use
semicolons write.

Every text cell is cleaned of control characters here (``cells.clean_text``), so nothing
downstream ever sees one; the cells cleaned are listed on the sheet for the reader to warn
about. Sizes are bounded: the file, the rows of a sheet, the cells of a row.

References
----------
.. [1] The Unicode Standard, version 15.0, §23.8 "Specials": byte order marks of UTF-8,
   UTF-16 and UTF-32.
"""

from __future__ import annotations

import codecs
import csv
import hashlib
import io
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from auditor.schedule.archive import (
    MAX_EXPANDED_BYTES,
    ScheduleFileError,
    verified_workbook_archive,
)
from auditor.schedule.cells import clean_text
from auditor.schedule.xlsx import MAX_COLUMNS, TooManyRows, read_workbook

__all__ = [
    "ScheduleFileError",
    "RawSheet",
    "LoadedFile",
    "MAX_EXPANDED_BYTES",
    "MAX_FILE_BYTES",
    "MAX_TEXT_BYTES",
    "MAX_ROWS",
    "MAX_COLUMNS",
    "load_file",
    "clean_sheet",
]

#: [bytes] Largest workbook file read (compressed, pictures included).
MAX_FILE_BYTES = 100_000_000
#: [bytes] Largest CSV file read: some 100 000 rows of a wide schedule.
MAX_TEXT_BYTES = 20_000_000
#: Most non-empty rows in one sheet or CSV file: five times the 20 000-panel benchmark.
MAX_ROWS = 100_000


@dataclass
class RawSheet:
    """One sheet (or CSV file) as rows of raw cell values.

    ``rows`` holds (row number as the spreadsheet shows it, values) for non-empty rows only;
    for a CSV file the row number is the line on which the record starts. ``cleaned`` lists
    the cells (row number, 0-based column) from which control characters were removed.
    ``name_cleaned`` is True when the sheet's own name had some.
    """

    name: str
    rows: list[tuple[int, list[Any]]]
    decimal_comma: bool = False
    csv: bool = False
    cleaned: list[tuple[int, int]] = field(default_factory=list)
    name_cleaned: bool = False


@dataclass
class LoadedFile:
    """One file as read: its name for messages, where it is, its SHA-256 and its sheets."""

    name: str
    location: str
    sha256: str
    sheets: list[RawSheet]
    warnings: list[str] = field(default_factory=list)


def clean_sheet(sheet: RawSheet) -> RawSheet:
    """Remove control characters from every text cell and the sheet's name, noting where."""
    for row, values in sheet.rows:
        for index, value in enumerate(values):
            if value.__class__ is str and not value.isprintable():
                text, removed = clean_text(value)
                values[index] = text
                if removed:
                    sheet.cleaned.append((row, index))
    sheet.name, sheet.name_cleaned = clean_text(sheet.name)
    return sheet


def _too_many_rows(name: str, where: str) -> ScheduleFileError:
    return ScheduleFileError(f"{name}: {where} has more than {MAX_ROWS} rows; refusing (split "
                             "the schedule into several files)")


def _check_size(sheet: RawSheet, name: str) -> RawSheet:
    if len(sheet.rows) > MAX_ROWS:
        raise _too_many_rows(name, "the file" if sheet.csv else f"sheet {sheet.name!r}")
    return sheet


def _load_workbook(data: bytes, name: str) -> list[RawSheet]:
    """A workbook's sheets: the verified archive, read by ``xlsx.read_workbook``."""
    buffer = verified_workbook_archive(data, name)
    try:
        sheets = read_workbook(buffer, name, MAX_ROWS)
    except TooManyRows as exc:
        raise _too_many_rows(name, f"sheet {exc.sheet!r}") from None
    return [clean_sheet(_check_size(RawSheet(sheet, rows), name)) for sheet, rows in sheets]


#: Characters of a CSV file its delimiter is guessed from: the header and first rows.
#: ``csv.Sniffer`` matches regular expressions whose time grows with the square of the
#: sample on some inputs (8 s for 32 kB of ',"' repeated); 4 kB keeps it near 0.2 s.
_SNIFF_CHARS = 4096
_DELIMITERS = ",;\t|"  # the delimiters a schedule's CSV file may use
# Byte-order marks, longest first (a UTF-32 LE mark begins with the UTF-16 LE one) [1].
_BOMS = (
    (codecs.BOM_UTF32_LE, "utf-32-le", "UTF-32"),
    (codecs.BOM_UTF32_BE, "utf-32-be", "UTF-32"),
    (codecs.BOM_UTF8, "utf-8", "UTF-8"),
    (codecs.BOM_UTF16_LE, "utf-16-le", "UTF-16"),
    (codecs.BOM_UTF16_BE, "utf-16-be", "UTF-16"),
)


def _decode(data: bytes) -> tuple[str, list[str]]:
    """The text of a CSV file and any warning about how it was decoded."""
    for bom, codec, label in _BOMS:
        if data.startswith(bom):
            try:
                return data[len(bom):].decode(codec), []
            except UnicodeDecodeError:
                return data[len(bom):].decode(codec, errors="replace"), [
                    f"some bytes are not valid {label} (the byte-order mark says {label}); "
                    "they are shown as \ufffd"]
    head = data[:4096]
    if head.count(0) * 3 > len(head):  # every other byte zero: UTF-16 with no mark
        big_endian = head[0::2].count(0) > head[1::2].count(0)  # zero high bytes first
        codec, label = ("utf-16-be", "UTF-16 BE") if big_endian else ("utf-16-le", "UTF-16 LE")
        return data.decode(codec, errors="replace"), [
            f"the file has no byte-order mark; it was read as {label} (save it as 'CSV UTF-8' "
            "to be sure)"]
    try:
        return data.decode("utf-8"), []
    except UnicodeDecodeError:
        return data.decode("cp1252", errors="replace"), [
            "the file is not UTF-8; it was read as Windows-1252 (save it as 'CSV UTF-8' to be "
            "sure of accented characters)"]


def _load_csv(data: bytes, name: str, stem: str) -> tuple[list[RawSheet], list[str]]:
    text, warnings = _decode(data)
    sample = text[:_SNIFF_CHARS]
    if len(text) > _SNIFF_CHARS and "\n" in sample:
        sample = sample[: sample.rindex("\n")]
    dialect: type[csv.Dialect] | csv.Dialect
    try:
        dialect = csv.Sniffer().sniff(sample, delimiters=_DELIMITERS)
    except csv.Error:  # rows of unequal length: the delimiter the first line uses most
        first = sample.split("\n", 1)[0]
        dialect = csv.excel()
        dialect.delimiter = max(_DELIMITERS, key=first.count) if any(
            d in first for d in _DELIMITERS) else ","
    reader = csv.reader(io.StringIO(text, newline=""), dialect)
    rows = []
    last_line = 0
    try:
        for record in reader:
            start = last_line + 1
            last_line = reader.line_num
            if len(record) > MAX_COLUMNS:
                raise ScheduleFileError(
                    f"{name}: line {start} has {len(record)} cells; refusing (the limit is "
                    f"{MAX_COLUMNS})")
            while record and not record[-1].strip():
                record.pop()
            if record:
                rows.append((start, record))
                if len(rows) > MAX_ROWS:
                    break
    except csv.Error as exc:
        raise ScheduleFileError(f"{name} could not be read as CSV near line {last_line + 1} "
                                f"({exc})") from None
    delimiter = getattr(dialect, "delimiter", ",")
    sheet = RawSheet(stem, rows, decimal_comma=delimiter == ";", csv=True)
    return [clean_sheet(_check_size(sheet, name))], warnings


def load_file(path: str | os.PathLike[str], name: str | None = None) -> LoadedFile:
    """Read one schedule file into raw sheets, with its SHA-256.

    Parameters
    ----------
    path : str or path-like
        An .xlsx/.xlsm workbook or a .csv/.txt/.tsv file (a zip file of another name is
        tried as a workbook).
    name : str, optional
        The file as messages name it (default: its base name; never the folders above it,
        so no message shows where on the machine it was).

    Returns
    -------
    LoadedFile

    Raises
    ------
    ScheduleFileError
        Missing, unreadable, not a workbook, too large, damaged.
    """
    p = Path(path)
    shown = name if name is not None else (clean_text(p.name)[0] or str(path))
    try:
        exists, folder = p.exists(), p.is_dir()
    except (OSError, ValueError):  # a name with a NUL character, or too long
        raise ScheduleFileError(f"{shown!r} is not a file name this system can open") from None
    if not exists:
        raise ScheduleFileError(f"{shown} does not exist")
    if folder:
        raise ScheduleFileError(f"{shown} is a folder, not a schedule file")
    suffix = p.suffix.lower()
    text_like = suffix in (".csv", ".txt", ".tsv")
    try:
        size = p.stat().st_size
        limit = MAX_TEXT_BYTES if text_like else MAX_FILE_BYTES
        if size > limit:
            raise ScheduleFileError(f"{shown} is {size / 1e6:.0f} MB; refusing (the limit is "
                                    f"{limit / 1e6:.0f} MB)")
        data = p.read_bytes()
    except OSError as exc:
        raise ScheduleFileError(f"{shown} could not be read ({exc.strerror or exc})") from None
    digest = hashlib.sha256(data).hexdigest()
    location = str(p.resolve())  # it exists: resolving it cannot fail
    if text_like and not data.startswith(b"PK"):
        sheets, warnings = _load_csv(data, shown, clean_text(p.stem)[0])
        return LoadedFile(shown, location, digest, sheets, warnings)
    if suffix in (".xlsx", ".xlsm", ".xltx", ".xltm") or data.startswith(b"PK"):
        return LoadedFile(shown, location, digest, _load_workbook(data, shown))
    if suffix == ".xls" or data.startswith(b"\xd0\xcf\x11\xe0"):
        raise ScheduleFileError(
            f"{shown} is an Excel 97-2003 workbook (.xls); save it as .xlsx and try again")
    if suffix == ".ods":
        raise ScheduleFileError(f"{shown} is an OpenDocument spreadsheet; save it as .xlsx")
    raise ScheduleFileError(f"{shown} is neither an Excel workbook (.xlsx) nor a CSV file")
