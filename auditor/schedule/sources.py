"""Opening schedule files safely and getting their rows: .xlsx workbooks and .csv files.

A workbook is checked as a zip archive before anything parses it (a valid zip, holding a
workbook, expanding to at most :data:`MAX_EXPANDED_BYTES`). Its saved cell values (for
formulas, the value a spreadsheet program saved) are then read by the fast reader in
``auditor.schedule.xlsx``; a layout that reader does not know falls back to openpyxl in
read-only mode with ``data_only=True``. Either way a formula cell that holds no saved value
is told apart from an empty cell in the same single pass, and cells merged down a column (a
zone merged over several rows) fill every row of the merge.

A CSV file is UTF-8 with or without a byte-order mark (other bytes are read as Windows-1252
with a warning); its delimiter is whatever ``csv.Sniffer`` finds. A file separated by
semicolons is read with decimal commas ("0,25"), as the locales that use semicolons write.
"""

from __future__ import annotations

import csv
import hashlib
import io
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from auditor.schedule.cells import UNCACHED_FORMULA
from auditor.schedule.xlsx import UnsupportedWorkbook, read_workbook_rows

__all__ = [
    "ScheduleFileError",
    "RawSheet",
    "LoadedFile",
    "MAX_EXPANDED_BYTES",
    "load_file",
    "inspect_workbook_archive",
]

MAX_EXPANDED_BYTES = 200_000_000  # [bytes] a schedule is far smaller; anything bigger is refused
MAX_ARCHIVE_MEMBERS = 10_000
MAX_FILE_BYTES = 200_000_000


class ScheduleFileError(Exception):
    """A whole file cannot be read (missing, not a workbook, too large); the message says why."""


@dataclass
class RawSheet:
    """One sheet (or CSV file) as rows of raw cell values.

    ``rows`` holds (row number as the spreadsheet shows it, values) for non-empty rows only;
    for a CSV file the row number is the line on which the record starts.
    """

    name: str
    rows: list[tuple[int, list[Any]]]
    decimal_comma: bool = False
    csv: bool = False


@dataclass
class LoadedFile:
    path: str
    sha256: str
    sheets: list[RawSheet]
    warnings: list[str] = field(default_factory=list)


def inspect_workbook_archive(data: bytes, name: str) -> None:
    """Refuse an .xlsx that is not a zip, not a workbook, or expands beyond the limit.

    Parameters
    ----------
    data : bytes
        The file's content.
    name : str
        The file as the user named it, for messages.

    Raises
    ------
    ScheduleFileError
    """
    if not data.startswith(b"PK"):
        if data.startswith(b"\xd0\xcf\x11\xe0"):
            raise ScheduleFileError(
                f"{name} is an Excel 97-2003 workbook (.xls); save it as .xlsx and try again")
        raise ScheduleFileError(f"{name} is not an Excel workbook (.xlsx): it is not a zip archive")
    try:
        archive = zipfile.ZipFile(io.BytesIO(data))
        infos = archive.infolist()
    except (zipfile.BadZipFile, zipfile.LargeZipFile, ValueError, OSError) as exc:
        raise ScheduleFileError(f"{name} is not a readable workbook: the zip archive is "
                                f"damaged ({exc})") from None
    if len(infos) > MAX_ARCHIVE_MEMBERS:
        raise ScheduleFileError(f"{name} holds {len(infos)} archive members; refusing "
                                f"(a workbook has far fewer than {MAX_ARCHIVE_MEMBERS})")
    expanded = sum(info.file_size for info in infos)
    if expanded > MAX_EXPANDED_BYTES:
        raise ScheduleFileError(
            f"{name}: archive expands to {expanded / 1e6:.0f} MB; refusing (the limit is "
            f"{MAX_EXPANDED_BYTES / 1e6:.0f} MB)")
    names = {info.filename for info in infos}
    if "[Content_Types].xml" not in names or not any(
            n.startswith("xl/workbook") and n.endswith((".xml", ".bin")) for n in names):
        raise ScheduleFileError(f"{name} is a zip archive but not an Excel workbook (.xlsx)")
    if "xl/workbook.bin" in names and "xl/workbook.xml" not in names:
        raise ScheduleFileError(f"{name} is a binary workbook (.xlsb); save it as .xlsx")


def _sheet_parser_class():
    """openpyxl's sheet parser, taught to mark formulas with no saved value."""
    from openpyxl.worksheet._reader import FORMULA_TAG, WorkSheetParser

    class _SavedValueParser(WorkSheetParser):
        def parse_cell(self, element):
            cell = super().parse_cell(element)
            if cell["value"] is None and element.find(FORMULA_TAG) is not None:
                cell["value"] = UNCACHED_FORMULA
            return cell

    return _SavedValueParser


def _rows_of_sheet(workbook, worksheet) -> list[tuple[int, list[Any]]]:
    from openpyxl.utils.cell import range_boundaries

    rows: dict[int, list[Any]] = {}
    merged = None
    try:
        parser_class = _sheet_parser_class()
        source = worksheet._get_source()
        parser = parser_class(source, workbook.shared_strings, data_only=True,
                              epoch=workbook.epoch, date_formats=workbook._date_formats,
                              timedelta_formats=workbook._timedelta_formats)
        try:
            for index, cells in parser.parse():
                if not cells:
                    continue
                values: list[Any] = [None] * cells[-1]["column"]
                for cell in cells:
                    values[cell["column"] - 1] = cell["value"]
                rows[index] = values
        finally:
            source.close()
        merged = parser.merged_cells
    except (AttributeError, ImportError, TypeError):  # private API changed: public path
        worksheet.reset_dimensions()
        for index, values in enumerate(worksheet.iter_rows(values_only=True), start=1):
            if values:
                rows[index] = list(values)
    if merged is not None:
        for rng in getattr(merged, "mergeCell", ()):
            try:
                min_col, min_row, _max_col, max_row = range_boundaries(rng.ref)
            except (TypeError, ValueError):
                continue
            top = rows.get(min_row)
            value = top[min_col - 1] if top and len(top) >= min_col else None
            if value is None:
                continue
            for r in range(min_row + 1, (max_row or min_row) + 1):
                row = rows.setdefault(r, [])
                if len(row) < min_col:
                    row.extend([None] * (min_col - len(row)))
                if row[min_col - 1] is None:
                    row[min_col - 1] = value
    return _finish_rows(rows)


def _finish_rows(rows: dict[int, list[Any]]) -> list[tuple[int, list[Any]]]:
    """Rows in order, trailing blank cells trimmed, empty rows dropped."""
    out = []
    for index in sorted(rows):
        values = rows[index]
        while values and (values[-1] is None
                          or (isinstance(values[-1], str) and not values[-1].strip())):
            values.pop()
        if values:
            out.append((index, values))
    return out


def _load_workbook(data: bytes, name: str) -> list[RawSheet]:
    inspect_workbook_archive(data, name)
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            return [RawSheet(sheet, _finish_rows(rows))
                    for sheet, rows in read_workbook_rows(archive)]
    except UnsupportedWorkbook:
        return _load_workbook_with_openpyxl(data, name)
    except (zipfile.BadZipFile, OSError, EOFError) as exc:
        raise ScheduleFileError(f"{name} is not a readable workbook: the zip archive is "
                                f"damaged ({exc})") from None


def _load_workbook_with_openpyxl(data: bytes, name: str) -> list[RawSheet]:
    """The general path: openpyxl in read-only mode, saved formula values (data_only)."""
    import openpyxl

    try:
        workbook = openpyxl.load_workbook(io.BytesIO(data), read_only=True, data_only=True,
                                          keep_links=False)
    except Exception as exc:  # openpyxl raises many kinds for a damaged workbook
        raise ScheduleFileError(f"{name} could not be read as a workbook "
                                f"({type(exc).__name__}: {exc})") from None
    try:
        sheets = []
        for worksheet in workbook.worksheets:
            try:
                rows = _rows_of_sheet(workbook, worksheet)
            except Exception as exc:  # a damaged sheet: the file cannot be trusted
                raise ScheduleFileError(f"{name}: sheet {worksheet.title!r} could not be read "
                                        f"({type(exc).__name__}: {exc})") from None
            sheets.append(RawSheet(worksheet.title, rows))
        return sheets
    finally:
        workbook.close()


_SNIFF_BYTES = 32_768


def _load_csv(data: bytes, path: Path) -> tuple[list[RawSheet], list[str]]:
    warnings = []
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = data.decode("cp1252", errors="replace")
        warnings.append("the file is not UTF-8; it was read as Windows-1252 (save it as "
                        "'CSV UTF-8' to be sure of accented characters)")
    sample = text[:_SNIFF_BYTES]
    if len(text) > _SNIFF_BYTES and "\n" in sample:
        sample = sample[: sample.rindex("\n")]
    sniffer = csv.Sniffer()
    try:
        dialect = sniffer.sniff(sample, delimiters=",;\t|")
    except csv.Error:
        try:
            dialect = sniffer.sniff(sample)
        except csv.Error:
            dialect = csv.excel
    reader = csv.reader(io.StringIO(text, newline=""), dialect)
    rows = []
    last_line = 0
    try:
        for record in reader:
            start = last_line + 1
            last_line = reader.line_num
            while record and not record[-1].strip():
                record.pop()
            if record:
                rows.append((start, record))
    except csv.Error as exc:
        raise ScheduleFileError(f"{path} could not be read as CSV near line {last_line + 1} "
                                f"({exc})") from None
    delimiter = getattr(dialect, "delimiter", ",")
    return [RawSheet(path.stem, rows, decimal_comma=delimiter == ";", csv=True)], warnings


def load_file(path: str | Path) -> LoadedFile:
    """Read one schedule file into raw sheets, with its SHA-256.

    Parameters
    ----------
    path : str or Path
        An .xlsx/.xlsm workbook or a .csv/.txt/.tsv file (a zip file of another name is
        tried as a workbook).

    Returns
    -------
    LoadedFile

    Raises
    ------
    ScheduleFileError
        Missing, unreadable, not a workbook, too large.
    """
    p = Path(path)
    shown = str(path)
    if not p.exists():
        raise ScheduleFileError(f"{shown} does not exist")
    if p.is_dir():
        raise ScheduleFileError(f"{shown} is a folder, not a schedule file")
    try:
        size = p.stat().st_size
        if size > MAX_FILE_BYTES:
            raise ScheduleFileError(f"{shown} is {size / 1e6:.0f} MB; refusing (the limit is "
                                    f"{MAX_FILE_BYTES / 1e6:.0f} MB)")
        data = p.read_bytes()
    except OSError as exc:
        raise ScheduleFileError(f"{shown} could not be read ({exc.strerror or exc})") from None
    digest = hashlib.sha256(data).hexdigest()
    suffix = p.suffix.lower()
    if suffix in (".csv", ".txt", ".tsv") and not data.startswith(b"PK"):
        sheets, warnings = _load_csv(data, p)
        return LoadedFile(shown, digest, sheets, warnings)
    if suffix in (".xlsx", ".xlsm", ".xltx", ".xltm") or data.startswith(b"PK"):
        return LoadedFile(shown, digest, _load_workbook(data, shown))
    if suffix == ".xls" or data.startswith(b"\xd0\xcf\x11\xe0"):
        raise ScheduleFileError(
            f"{shown} is an Excel 97-2003 workbook (.xls); save it as .xlsx and try again")
    if suffix == ".ods":
        raise ScheduleFileError(f"{shown} is an OpenDocument spreadsheet; save it as .xlsx")
    raise ScheduleFileError(f"{shown} is neither an Excel workbook (.xlsx) nor a CSV file")
