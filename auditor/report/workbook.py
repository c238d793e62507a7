"""``<schedule>-audited.xlsx``: a copy of each schedule file a reviewer can work in.

The copy keeps every original cell as it was (the input is never opened for writing) and adds:

- on each panel sheet, after the last used column: the panel's verdict ("Audit status", its
  cell filled in the verdict's colour; a rejected row says "rejected: …"), the frequency it
  was assessed to, its remedy (tension, bays, and the remedy in words with the safety note
  when it is work on the panel) and the reason for the verdict; the header row is frozen
  (unless the sheet already freezes panes) and the status header carries a note with the
  colours;
- a "Panel verdicts" sheet: a colour legend in row 1, then one row per audited panel of the
  file, worst first, with its verdict, assessed range, remedy, reason and assumptions;
- a "Findings" sheet: one row per finding, worst first, the columns of ``findings.csv``,
  severity and verdict filled in their colours;
- a "Rejected rows" sheet: the rows that were not audited, and the warnings.

The added sheets freeze their header rows (and the first columns) and carry auto-filters.
Every cell the auditor writes is safe to open (:func:`auditor.report.csv_table.neutralise`);
its text is a string cell, never a formula or an error value; numbers stay numbers.

References
----------
.. [1] ECMA-376, *Office Open XML File Formats*, Part 1, 5th ed., 2016: cell types (string
   "s", number "n"), pattern fills, frozen panes and auto-filters of a worksheet.
"""

from __future__ import annotations

import csv
import io
import re
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from auditor.atomic import write_atomic
from auditor.report.csv_table import (
    CSV_COLUMNS,
    finding_rows,
    neutralise,
    panel_values,
    problem_rows,
)
from auditor.report.provenance import input_file_location, local_paths
from auditor.report.records import PanelAssumptions, finite
from auditor.report.text import LocalPaths, clean_text
from auditor.results import VERDICTS, AuditResult, PanelResult

__all__ = ["VERDICT_COLOURS", "REJECTED_COLOUR", "STATUS_HEADERS", "VERDICT_SHEET_COLUMNS",
           "audited_workbook", "audited_workbook_bytes", "write_audited_workbooks"]

#: Fill colours (RGB hex) of the verdicts: red, grey, amber, green.
VERDICT_COLOURS = {
    "conflict": "F4A6A6",
    "not assessed": "C9C9C9",
    "caution": "FFD27F",
    "clear": "B5DDA4",
}
#: Fill colour of a rejected row's status (violet).
REJECTED_COLOUR = "D5C8E8"

#: The columns added to a panel sheet.
STATUS_HEADERS = ("Audit status", "Assessed to (Hz)", "Remedy tension (N/m)",
                  "Remedy tension y (N/m)", "Remedy bays", "Remedy", "Verdict reason")

#: The columns of the "Panel verdicts" sheet.
VERDICT_SHEET_COLUMNS = (
    "panel", "verdict", "zone", "conflicts", "cautions", "worst_response_db",
    "assessed_to_hz", "overlap_from_hz", "remedy_tension_n_per_m", "remedy_tension_y_n_per_m",
    "remedy_bays", "remedy_clear_windows_n_per_m", "remedy", "verdict_reason", "assumptions",
    "file", "sheet", "row",
)

#: Wide columns of the added sheets (the rest get ``_NARROW``) [characters].
_WIDE = {"remedy": 60, "verdict_reason": 60, "assumptions": 50, "message": 50,
         "excitation": 28, "mount": 36, "Remedy": 60, "Verdict reason": 60}
_NARROW = 13

_LEGEND_NOTE = ("Audit status colours: red conflict, grey not assessed (tones above the "
                "assessed range), amber caution, green clear, violet rejected row. Every "
                "panel, worst first: sheet 'Panel verdicts'; every finding: sheet 'Findings'.")


def _fill(colour: str):
    from openpyxl.styles import PatternFill

    return PatternFill(fill_type="solid", start_color=colour, end_color=colour)


def _write_row(ws, row: int, values: Iterable[Any]) -> None:
    """Write a row of spreadsheet-safe values (:func:`_put`) into row ``row``; None and ""
    leave the cell empty."""
    for column, value in enumerate(values, start=1):
        if value is not None and value != "":
            _put(ws, row, column, value)


def _put(ws, row: int, column: int, value: Any) -> Any:
    """Write one spreadsheet-safe value (:func:`neutralise`); text as a plain string cell.

    openpyxl reads a string starting with "=" as a formula and "#N/A", "#REF!" ... as error
    values; data type "s" keeps each exactly the text it is.
    """
    cell = ws.cell(row=row, column=column, value=neutralise(value))
    if isinstance(cell.value, str):
        cell.data_type = "s"
    return cell


# A plain decimal number as a CSV holds one: no leading zeros (an id like "007" stays text), no
# exponent, no thousands separators; the decimal comma only in a ";"-separated file.
_PLAIN_NUMBER = {
    False: re.compile(r"-?(?:0|[1-9]\d{0,14})(?:\.\d{1,15})?"),
    True: re.compile(r"-?(?:0|[1-9]\d{0,14})(?:,\d{1,15})?"),
}


def _csv_cell(text: str, decimal_comma: bool) -> Any:
    """A CSV schedule's cell as the workbook copy holds it: a number when it is plainly one."""
    plain = text.strip()
    if _PLAIN_NUMBER[decimal_comma].fullmatch(plain):
        number = plain.replace(",", ".")
        return float(number) if "." in number else int(number)
    return text


_SHEET_TITLE_FORBIDDEN = re.compile(r"[\[\]:*?/\\]")


def _sheet_title(stem: str) -> str:
    """A worksheet title from a file name: the characters Excel forbids in a sheet name
    ([ ] : * ? / \\) and unprintable ones removed, at most 31 characters, not blank."""
    title = _SHEET_TITLE_FORBIDDEN.sub("", clean_text(stem).replace("\ufffd", "")).strip("' ")
    return title[:31] or "Schedule"


def _panel_header_row(ws, first_data_row: int) -> int:
    """The header row of a panel table: the nearest row above its first record with text."""
    for r in range(first_data_row - 1, 0, -1):
        texts = [c.value for c in ws[r] if isinstance(c.value, str) and c.value.strip()]
        if len(texts) >= 2:
            return r
    return max(1, first_data_row - 1)


def _copy_of(location: str, source_file: str):
    """The schedule file as an ``openpyxl.Workbook`` in memory (a CSV file's table on the
    first sheet, plain numbers as numbers)."""
    import openpyxl

    path = Path(location)
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        return openpyxl.load_workbook(path)  # read into memory; the input is never written
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = _sheet_title(Path(source_file).stem)
    with open(path, newline="", encoding="utf-8-sig") as fh:
        sample = fh.read(65536)
        fh.seek(0)
        try:
            dialect = csv.Sniffer().sniff(sample, delimiters=",;\t|")
        except csv.Error:
            dialect = csv.excel
        decimal_comma = dialect.delimiter == ";"
        for r, row in enumerate(csv.reader(fh, dialect), start=1):
            _write_row(ws, r, [_csv_cell(v, decimal_comma) for v in row])
    return wb


def _status_values(p: PanelResult, shown: dict[str, Any]) -> list[Any]:
    """A panel's cells under ``STATUS_HEADERS``."""
    return [p.verdict, shown["assessed_to_hz"], shown["remedy_tension_n_per_m"],
            shown["remedy_tension_y_n_per_m"], shown["remedy_bays"], shown["remedy"],
            shown["verdict_reason"]]


def _mark_panel_sheets(wb, result: AuditResult, source_file: str, mine: Sequence[PanelResult],
                       paths: LocalPaths, assumptions: PanelAssumptions) -> None:
    """The status columns on each panel sheet of the copy (see the module docstring)."""
    from openpyxl.comments import Comment
    from openpyxl.styles import Font

    bold = Font(bold=True)
    marks: dict[tuple[str, int], tuple[list[Any], str]] = {}   # (sheet, row) → cells, colour
    for p in mine:
        shown = panel_values(p, paths, assumptions(p))
        marks[(p.panel.source.sheet, p.panel.source.row)] = (
            _status_values(p, shown), VERDICT_COLOURS.get(p.verdict, ""))
    for q in result.problems:
        if q.file == source_file and q.severity == "error" and q.row is not None:
            marks.setdefault((q.sheet, q.row),
                             ([f"rejected: {paths.scrub(q.message)}"], REJECTED_COLOUR))
    sheets: dict[str, list[int]] = {}
    for sheet, row in marks:
        sheets.setdefault(sheet, []).append(row)
    for sheet, rows in sheets.items():
        ws = wb[sheet] if sheet in wb.sheetnames else wb.worksheets[0]
        audited = [r for r in rows if marks[(sheet, r)][1] != REJECTED_COLOUR]
        if not audited:
            continue
        header = _panel_header_row(ws, min(audited))
        first = ws.max_column + 1
        for k, title in enumerate(STATUS_HEADERS):
            _put(ws, header, first + k, title).font = bold
            ws.column_dimensions[_letter(first + k)].width = _WIDE.get(title, _NARROW + 4)
        ws.cell(row=header, column=first).comment = Comment(_LEGEND_NOTE, "auditor")
        for r in rows:
            values, colour = marks[(sheet, r)]
            _write_row_at(ws, r, first, values)
            if colour:
                ws.cell(row=r, column=first).fill = _fill(colour)
        if ws.freeze_panes is None:
            ws.freeze_panes = f"A{header + 1}"


def _write_row_at(ws, row: int, first_column: int, values: Iterable[Any]) -> None:
    for k, value in enumerate(values):
        if value is not None and value != "":
            _put(ws, row, first_column + k, value)


def _letter(column: int) -> str:
    from openpyxl.utils import get_column_letter

    return get_column_letter(column)


def _add_sheet(wb, title: str, columns: Sequence[str], rows: Iterable[list[Any]], *,
               header_row: int = 1, freeze_columns: int = 0):
    """A new sheet (a number added to ``title`` if the schedule has one of that name): bold
    headers in ``header_row``, the rows below, header rows (and ``freeze_columns``
    columns) frozen, an auto-filter over the table."""
    from openpyxl.styles import Font

    name, n = title, 2
    while name in wb.sheetnames:
        name = f"{title} {n}"
        n += 1
    ws = wb.create_sheet(name)
    _write_row(ws, header_row, columns)
    bold = Font(bold=True)
    for c in ws[header_row]:
        c.font = bold
    last = header_row
    for last, row in enumerate(rows, start=header_row + 1):
        _write_row(ws, last, row)
    ws.freeze_panes = f"{_letter(freeze_columns + 1)}{header_row + 1}"
    ws.auto_filter.ref = f"A{header_row}:{_letter(len(columns))}{max(last, header_row)}"
    for k, column in enumerate(columns, start=1):
        ws.column_dimensions[_letter(k)].width = _WIDE.get(column, _NARROW)
    return ws


def _colour_column(ws, column_name: str, columns: Sequence[str], first_row: int,
                   colours: dict[str, str]) -> None:
    """Fill each cell of ``column_name`` whose text is a key of ``colours``."""
    column = columns.index(column_name) + 1
    fills = {word: _fill(colour) for word, colour in colours.items()}
    for r in range(first_row, ws.max_row + 1):
        cell = ws.cell(row=r, column=column)
        fill = fills.get(cell.value) if isinstance(cell.value, str) else None
        if fill is not None:
            cell.fill = fill


def _verdict_rows(panels: Sequence[PanelResult], paths: LocalPaths,
                  assumptions: PanelAssumptions) -> Iterable[list[Any]]:
    for p in panels:
        shown = panel_values(p, paths, assumptions(p))
        shown.update(
            conflicts=sum(1 for f in p.findings if f.severity == "conflict"),
            cautions=sum(1 for f in p.findings if f.severity == "caution"),
            worst_response_db=None if finite(p.worst_db) is None else round(p.worst_db, 1))
        yield [shown.get(c) for c in VERDICT_SHEET_COLUMNS]


def _legend(ws) -> None:
    """Row 1 of the "Panel verdicts" sheet: each verdict in its colour."""
    from openpyxl.styles import Font

    _put(ws, 1, 1, "Verdict colours").font = Font(bold=True)
    words = [*VERDICTS, "rejected row"]
    colours = [*(VERDICT_COLOURS[v] for v in VERDICTS), REJECTED_COLOUR]
    for k, (word, colour) in enumerate(zip(words, colours, strict=True), start=2):
        _put(ws, 1, k, word).fill = _fill(colour)


def audited_workbook(result: AuditResult, source_file: str, paths: LocalPaths | None = None,
                     location: str | None = None):
    """A copy of the schedule file ``source_file`` with the status columns on its panel
    sheets and the Panel verdicts, Findings and Rejected rows sheets, as an
    ``openpyxl.Workbook``.

    ``source_file`` is the file's name as its records give it (``SourceRef.file``);
    ``location`` where to read it (by default the reader's ``location`` of that file). The
    original cells are left exactly as they were; the status columns go after the last used
    column. A CSV schedule becomes a workbook with its table on the first sheet (plain
    numbers as numbers, the rest as text).
    """
    paths = paths if paths is not None else local_paths(result)
    if location is None:
        location = next((input_file_location(f) for f in result.schedule.files
                         if f.path == source_file), source_file)
    wb = _copy_of(location, source_file)
    assumptions = PanelAssumptions(result)
    mine = [p for p in result.ranked_panels() if p.panel.source.file == source_file]
    _mark_panel_sheets(wb, result, source_file, mine, paths, assumptions)

    verdicts = _add_sheet(wb, "Panel verdicts", VERDICT_SHEET_COLUMNS,
                          _verdict_rows(mine, paths, assumptions), header_row=2,
                          freeze_columns=2)
    _legend(verdicts)
    _colour_column(verdicts, "verdict", VERDICT_SHEET_COLUMNS, 3, VERDICT_COLOURS)
    findings = _add_sheet(wb, "Findings", CSV_COLUMNS, finding_rows(mine, paths, assumptions),
                          freeze_columns=2)
    _colour_column(findings, "severity", CSV_COLUMNS, 2, VERDICT_COLOURS)
    _colour_column(findings, "verdict", CSV_COLUMNS, 2, VERDICT_COLOURS)
    rejected = [q for q in result.problems if q.file == source_file]
    _add_sheet(wb, "Rejected rows", CSV_COLUMNS, problem_rows(rejected, paths),
               freeze_columns=2)
    return wb


def audited_workbook_bytes(result: AuditResult, source_file: str) -> bytes:
    """:func:`audited_workbook` as the bytes of an .xlsx file."""
    buf = io.BytesIO()
    audited_workbook(result, source_file).save(buf)
    return buf.getvalue()


def write_audited_workbooks(result: AuditResult, out_dir: str | Path) -> list[Path]:
    """``<schedule name>-audited.xlsx`` in ``out_dir`` for each input file.

    A file shown with its folder ("site-a/schedule.xlsx") becomes
    ``site-a-schedule-audited.xlsx``; two inputs that would still share a name (``s.csv`` and
    ``s.xlsx``) are told apart by a number: ``s-audited.xlsx``, ``s (2)-audited.xlsx``.
    """
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    paths = local_paths(result)
    out: list[Path] = []
    taken: set[str] = set()
    for f in result.schedule.files:
        shown = paths.name(f.path)
        stem = re.sub(r"[\\/]+", "-", str(Path(shown).with_suffix(""))).strip("-. ") or "schedule"
        name, k = f"{stem}-audited.xlsx", 1
        while name.casefold() in taken:
            k += 1
            name = f"{stem} ({k})-audited.xlsx"
        taken.add(name.casefold())
        target = out_dir / name
        location = input_file_location(f)
        if Path(location).resolve() == target.resolve():
            raise ValueError(f"refusing to overwrite the input {shown}")
        workbook = audited_workbook(result, f.path, paths, location)
        out.append(write_atomic(target, workbook.save))
    return out
