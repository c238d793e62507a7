"""Reading a workbook's saved cell values through openpyxl, in bounded time and memory.

openpyxl reads the workbook's own parts (content types, workbook, relationships, styles and
so date formats, the 1900 or 1904 date system) and converts each cell through its worksheet
parser: types, shared strings, date-formatted numbers as dates, the saved result of a
formula, spreadsheet errors as their text. Beyond values the schedule needs two things the
public read-only iteration does not give, and the parser is taught them: a formula with no
saved value (told apart from an empty cell, so the cell readers can say so) and merged
ranges (a zone merged down several rows fills each of them).

The worksheets and the shared strings are walked as XML events by :func:`_elements`, which
keeps nothing once read: openpyxl's own loop keeps every element it does not know, so a 44 kB
workbook holding 11 million empty elements took 45 s and 1 GB there; here memory follows
the schedule's size, and the sheet's cells, merged cells, nesting and the size of the parts
read whole are bounded (the ``MAX_*`` constants). The archive (``archive.py``) has already
bounded the bytes and refused document types, so the standard library's compiled XML parser
is used.

References
----------
ECMA-376 Office Open XML File Formats, 5th edition (2016), Part 1, §18.3 (worksheets),
§18.4 (shared strings), §18.8.30 (number formats), §18.17.4.1 (date serial numbers),
§22.9.2.19 (the ``_xHHHH_`` escape).
"""

from __future__ import annotations

import io
import warnings
import zipfile
from typing import Any
from xml.etree.ElementTree import ParseError, iterparse

from auditor.schedule.archive import ScheduleFileError
from auditor.schedule.cells import UNCACHED_FORMULA, column_letter

__all__ = [
    "TooManyRows",
    "read_workbook",
    "MAX_COLUMNS",
    "MAX_SHEET_CELLS",
    "MAX_MERGED_CELLS",
    "MAX_WHOLE_PART_BYTES",
    "MAX_ELEMENTS_IN_ONE",
    "MAX_XML_DEPTH",
]

#: Most cells in one row: the widest sheet a spreadsheet program makes (column XFD).
MAX_COLUMNS = 16_384
#: Most cells one sheet holds, counted from column A to the last used in each row: 100 000
#: rows of 50 columns. Bounds the memory of a sheet whose few cells lie far apart.
MAX_SHEET_CELLS = 5_000_000
#: Most cells merged ranges may fill in one sheet (each fills its rows below the first).
MAX_MERGED_CELLS = 2_000_000
#: [bytes] Largest part read whole into a tree (content types, workbook, its relationships,
#: styles); a workbook's largest, its styles, stays well below this even when bloated.
MAX_WHOLE_PART_BYTES = 10_000_000
#: Most XML elements inside one row or one shared string: every cell of the widest row with
#: its value, formula and a few runs of formatted text.
MAX_ELEMENTS_IN_ONE = 8 * MAX_COLUMNS
#: Deepest nesting of XML elements in a worksheet or the shared strings (a worksheet's cells
#: nest about eight deep).
MAX_XML_DEPTH = 64


class TooManyRows(Exception):
    """A sheet has more rows with data than the reader takes (``limit``)."""

    def __init__(self, limit: int, sheet: str) -> None:
        super().__init__(f"sheet {sheet!r} has more than {limit} rows")
        self.limit, self.sheet = limit, sheet


class _UnreadableCell(Exception):
    """A cell whose saved value cannot be taken even as text (the message says which)."""


def _sheet_parser_class():
    """openpyxl's worksheet parser, taught what the schedule needs beyond its values.

    A formula cell with no saved value becomes ``UNCACHED_FORMULA`` (a formula whose saved
    result is the empty string, ``t="str"`` with an empty ``<v>``, stays blank); text cells
    have their ``_xHHHH_`` escapes undone (ECMA-376 Part 1 §22.9.2.19; shared strings are
    undone once, as they are read); and a saved value openpyxl cannot convert (``NaN``, a
    boolean of ``true``) is kept as its text, so the schedule's cell readers reject that one
    cell by name instead of the whole sheet.
    """
    from openpyxl.utils.cell import coordinate_to_tuple
    from openpyxl.utils.escape import unescape
    from openpyxl.worksheet._reader import (
        FORMULA_TAG,
        INLINE_STRING,
        VALUE_TAG,
        WorkSheetParser,
    )

    class _SavedValueParser(WorkSheetParser):
        def parse_cell(self, element):
            if element.get("t") == "inlineStr":  # read as a shared string is: same type
                text = element.find(INLINE_STRING)
                return self._at(element, None if text is None else _string_item_text(text))
            try:
                cell = super().parse_cell(element)
            except (ValueError, TypeError, IndexError, OverflowError):
                return self._as_text(element)
            value = cell["value"]
            if value is None:
                if element.find(FORMULA_TAG) is not None and not (
                        element.get("t") == "str" and element.find(VALUE_TAG) is not None):
                    cell["value"] = UNCACHED_FORMULA
            elif value.__class__ is str and element.get("t") != "s" and "_x" in value:
                cell["value"] = unescape(value)
            return cell

        def _at(self, element, value, counted: bool = False):
            """The cell as openpyxl gives one, placed by its reference or, without one,
            after the cell before it (``counted``: openpyxl has already moved on to it)."""
            reference = element.get("r")
            if reference:
                try:
                    row, column = coordinate_to_tuple(reference)
                except (ValueError, TypeError):
                    raise _UnreadableCell(
                        f"row {self.row_counter}: {reference[:20]!r} is not a cell "
                        "reference") from None
                self.col_counter = column
            else:
                if not counted:
                    self.col_counter += 1
                row, column = self.row_counter, self.col_counter
            return {"row": row, "column": column, "value": value, "data_type": "s",
                    "style_id": 0}

        def _as_text(self, element):
            text = element.findtext(VALUE_TAG)
            kind = element.get("t", "n")
            style = element.get("s")
            # openpyxl counts the cell once its style is read
            cell = self._at(element, text, counted=not style or style.isdigit())
            if kind == "s":
                raise _UnreadableCell(
                    f"cell {column_letter(cell['column'] - 1)}{cell['row']} names shared "
                    f"string {text!r}, which the workbook does not hold")
            if kind == "n" and text is not None:
                try:  # the lexical forms of xsd:double openpyxl does not take: NaN, INF
                    cell["value"] = float(text)
                except ValueError:
                    pass
            return cell

    return _SavedValueParser


def _elements(source, wanted: str, where: str):
    """Each ``wanted`` element of an XML part once complete, and each merged range's reference.

    The part is parsed as events and nothing is kept once read: every element outside a
    ``wanted`` one is dropped as it closes, so memory follows the largest single ``wanted``
    element (at most :data:`MAX_ELEMENTS_IN_ONE` elements), not the part's size, whatever a
    hostile part holds between them. Nesting is limited to :data:`MAX_XML_DEPTH`.

    Yields
    ------
    ("element", Element) or ("merge", str)
    """
    from openpyxl.worksheet._reader import MERGE_TAG

    merge_cell = MERGE_TAG[:-1]  # "{ns}mergeCells" -> "{ns}mergeCell"
    open_elements: list = []
    inside = 0  # depth within the current wanted element (0: outside one)
    count = 0  # elements in the current wanted element
    # the standard library's parser (compiled): the archive has refused every part that
    # declares a document type, in whatever encoding the part uses
    for event, element in iterparse(source, events=("start", "end")):
        if event == "start":
            open_elements.append(element)
            if len(open_elements) > MAX_XML_DEPTH:
                raise ScheduleFileError(f"{where} nests XML elements more than "
                                        f"{MAX_XML_DEPTH} deep; refusing")
            if inside:
                inside += 1
                count += 1
                if count > MAX_ELEMENTS_IN_ONE:
                    raise ScheduleFileError(
                        f"{where} has an element holding more than {MAX_ELEMENTS_IN_ONE:,} "
                        "others; refusing")
            elif element.tag == wanted:
                inside, count = 1, 1
            continue
        open_elements.pop()
        if inside:
            inside -= 1
            if inside:
                continue  # part of the wanted element: kept until it is complete
            yield "element", element
        elif element.tag == merge_cell:
            yield "merge", element.get("ref") or ""
        if open_elements:
            del open_elements[-1][:]  # the element just read, the only child left


def _string_item_text(item) -> str:
    """The text of a shared string (``<si>``): its text and its runs' text, not the phonetic
    runs (ECMA-376 Part 1 §18.4.8)."""
    from openpyxl.utils.escape import unescape
    from openpyxl.xml.constants import SHEET_MAIN_NS

    text_tag, run_tag = f"{{{SHEET_MAIN_NS}}}t", f"{{{SHEET_MAIN_NS}}}r"
    parts = []
    for child in item:
        if child.tag == text_tag:
            parts.append(child.text or "")
        elif child.tag == run_tag:
            parts.extend(t.text or "" for t in child if t.tag == text_tag)
    text = "".join(parts)
    return unescape(text) if "_x" in text else text


def _shared_strings(reader, name: str) -> list[str]:
    from openpyxl.xml.constants import SHARED_STRINGS, SHEET_MAIN_NS

    found = reader.package.find(SHARED_STRINGS)
    if found is None:
        return []
    part = found.PartName[1:]
    try:
        source = reader.archive.open(part)
    except KeyError:
        raise ScheduleFileError(f"{name} is not a readable workbook: it names a shared-strings "
                                f"part ({part}) that it does not hold") from None
    with source:
        return [_string_item_text(item) for _, item in
                _elements(source, f"{{{SHEET_MAIN_NS}}}si", f"{name}: the shared strings")]


def _worksheet_rows(parser, source, sheet: str, name: str, max_rows: int
                    ) -> list[tuple[int, list[Any]]]:
    """One worksheet's rows of saved values, merged cells filled down their column."""
    from openpyxl.utils.cell import range_boundaries
    from openpyxl.worksheet._reader import ROW_TAG

    where = f"{name}: sheet {sheet!r}"
    rows: dict[int, list[Any]] = {}
    merges: list[str] = []
    cells_held = 0

    def row_of(index: int, width: int) -> list[Any]:
        """Row ``index`` (made if new), at least ``width`` cells wide, within the limits."""
        nonlocal cells_held
        values = rows.get(index)
        if values is None:
            if len(rows) >= max_rows:
                raise TooManyRows(max_rows, sheet)
            values = rows[index] = []
        if len(values) < width:
            cells_held += width - len(values)
            values.extend([None] * (width - len(values)))
            if cells_held > MAX_SHEET_CELLS:
                raise _too_many_cells(where, index, width)
        return values

    for kind, item in _elements(source, ROW_TAG, where):
        if kind == "merge":
            merges.append(item)
            continue
        try:
            index, cells = parser.parse_row(item)
        except _UnreadableCell as exc:
            raise ScheduleFileError(f"{where}: {exc}; refusing") from None
        parser.row_dimensions.clear()  # row heights: not needed, never kept
        valued = [(cell["column"], cell["value"]) for cell in cells if cell["value"] is not None]
        if not valued:
            continue
        width = max(column for column, _ in valued)
        if width > MAX_COLUMNS:
            raise ScheduleFileError(
                f"{where}, row {index}: a cell lies beyond column {column_letter(MAX_COLUMNS - 1)}"
                f", where no spreadsheet program puts one; refusing")
        values = row_of(index, width)
        for column, value in valued:
            values[column - 1] = value
    last = max(rows, default=0)  # a merge never makes rows below the last with data
    filled = 0
    for ref in merges:
        try:
            min_col, min_row, _max_col, max_row = range_boundaries(ref)
        except (TypeError, ValueError):
            continue
        if min_col > MAX_COLUMNS:
            continue  # beyond the last column: no cell there holds a value
        top = rows.get(min_row)
        value = top[min_col - 1] if top and len(top) >= min_col else None
        if value is None:
            continue
        for r in range(min_row + 1, min(max_row or min_row, last) + 1):
            filled += 1
            if filled > MAX_MERGED_CELLS:
                raise ScheduleFileError(f"{where}: merged ranges fill more than "
                                        f"{MAX_MERGED_CELLS:,} cells; refusing")
            row = row_of(r, min_col)
            if row[min_col - 1] is None:
                row[min_col - 1] = value
    return _finish_rows(rows)


def _too_many_cells(where: str, row: int, width: int) -> ScheduleFileError:
    return ScheduleFileError(
        f"{where}, row {row} (reaching column {column_letter(width - 1)}): the sheet holds more "
        f"than {MAX_SHEET_CELLS:,} cells from column A to the last one used in each row; "
        "refusing (split the schedule into several files)")


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


def _check_whole_part(archive: zipfile.ZipFile, part: str, name: str) -> None:
    """Refuse a part openpyxl reads whole into a tree when it is larger than any workbook's."""
    try:
        size = archive.getinfo(part).file_size
    except KeyError:
        return  # openpyxl says what is missing
    if size > MAX_WHOLE_PART_BYTES:
        raise ScheduleFileError(
            f"{name}: part {part} is {size / 1e6:.0f} MB; refusing (no workbook's "
            f"{part.rsplit('/', 1)[-1]} is larger than {MAX_WHOLE_PART_BYTES / 1e6:.0f} MB)")


def _workbook_reader(buffer: io.BytesIO, name: str):
    """openpyxl's reader of the workbook's own parts: content types, workbook, relationships,
    styles (date formats) and the 1900 or 1904 date system; the worksheets are not opened."""
    from openpyxl.packaging.relationship import get_rels_path
    from openpyxl.reader.excel import ExcelReader, _find_workbook_part
    from openpyxl.styles.stylesheet import apply_stylesheet
    from openpyxl.xml.constants import ARC_CONTENT_TYPES, ARC_STYLE

    reader = ExcelReader(buffer, read_only=True, data_only=True, keep_links=False)
    _check_whole_part(reader.archive, ARC_CONTENT_TYPES, name)
    reader.read_manifest()
    workbook_part = _find_workbook_part(reader.package).PartName[1:]
    for part in (workbook_part, get_rels_path(workbook_part), ARC_STYLE):
        _check_whole_part(reader.archive, part, name)
    reader.read_workbook()
    try:
        apply_stylesheet(reader.archive, reader.wb)
    except Exception as exc:  # openpyxl raises many kinds for a stylesheet it cannot take
        raise ScheduleFileError(
            f"{name}: its styles ({ARC_STYLE}) could not be read ({type(exc).__name__}: "
            f"{exc}); open it in a spreadsheet program and save it again") from None
    return reader


def read_workbook(buffer: io.BytesIO, name: str, max_rows: int
                  ) -> list[tuple[str, list[tuple[int, list[Any]]]]]:
    """Every worksheet's saved cell values, by sheet, in workbook order.

    openpyxl reads the workbook's parts and converts each cell (types, shared strings, date
    formats, saved formula results, spreadsheet errors); the worksheets and shared strings
    are walked as XML events that keep nothing once read (:func:`_elements`).

    Parameters
    ----------
    buffer : io.BytesIO
        The archive as ``archive.verified_workbook_archive`` returns it.
    name : str
        The file as messages name it.
    max_rows : int
        Most rows with data a sheet may have.

    Returns
    -------
    list of (sheet name, [(row number, values)])
        Rows in order, empty ones left out, trailing blank cells trimmed. Values are
        ``int``, ``float``, ``str``, ``bool``, ``datetime`` (date-formatted numbers),
        spreadsheet error text ("#DIV/0!") or ``UNCACHED_FORMULA``; a cell merged down a
        column fills every row of the merge, down to the sheet's last row with data.

    Raises
    ------
    ScheduleFileError
        A damaged or hostile workbook, naming the sheet and, where one is to blame, the row
        and column; a sheet beyond :data:`MAX_SHEET_CELLS` or :data:`MAX_MERGED_CELLS`.
    TooManyRows
        A sheet has more than ``max_rows`` rows with data (the rest is never read).
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # openpyxl's notes on what it drops: never shown
        try:
            reader = _workbook_reader(buffer, name)
            worksheets = [(sheet, rel) for sheet, rel in reader.parser.find_sheets()
                          if (rel.Type or "").endswith("/worksheet")
                          and rel.target in reader.valid_files]  # not chart or dialog sheets
        except ScheduleFileError:
            raise
        except Exception as exc:  # openpyxl raises many kinds for a damaged workbook
            raise ScheduleFileError(f"{name} could not be read as a workbook "
                                    f"({type(exc).__name__}: {exc})") from None
        try:
            shared = _shared_strings(reader, name)
        except ScheduleFileError:
            raise
        except Exception as exc:  # ParseError and what openpyxl raises for damaged text
            raise ScheduleFileError(f"{name}: its shared strings could not be read "
                                    f"({type(exc).__name__}: {exc})") from None
        parser_class = _sheet_parser_class()
        sheets = []
        for sheet, rel in worksheets:
            try:
                with reader.archive.open(rel.target) as source:
                    parser = parser_class(
                        source, shared, data_only=True, epoch=reader.wb.epoch,
                        date_formats=reader.wb._date_formats,
                        timedelta_formats=reader.wb._timedelta_formats)
                    rows = _worksheet_rows(parser, source, sheet.name, name, max_rows)
            except (ScheduleFileError, TooManyRows):
                raise
            except ParseError as exc:
                raise ScheduleFileError(f"{name}: sheet {sheet.name!r} is damaged: its XML is "
                                        f"not well-formed ({exc})") from None
            except Exception as exc:  # a damaged sheet: the file cannot be trusted
                raise ScheduleFileError(f"{name}: sheet {sheet.name!r} could not be read "
                                        f"({type(exc).__name__}: {exc})") from None
            sheets.append((sheet.name, rows))
    return sheets
