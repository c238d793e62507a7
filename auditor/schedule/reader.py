"""``read_schedule``: files → ``auditor.model.Schedule``.

Each sheet (or CSV file) is recognised by its header row, which may sit below title rows:
a panel table (it has a panel id column), an equipment table (an equipment tag column), or a
project table (key | value rows). Each data row becomes exactly one record, or at least one
error ``RowProblem``; a bad row never stops the good ones.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Callable, Iterable

from auditor.model import (
    Equipment,
    Panel,
    Project,
    RowProblem,
    Schedule,
    Severity,
    SourceRef,
)
from auditor.schedule import vocabulary as vocab
from auditor.schedule.cells import (
    MAX_CELL_CHARS,
    CellError,
    cell_text,
    column_letter,
    column_reader,
    shortened,
    too_long_message,
    unreadable_header_reader,
)
from auditor.schedule.inputs import ScheduleFile, display_names, resolved, unread_file_message
from auditor.schedule.sources import RawSheet, ScheduleFileError, clean_sheet, load_file
from auditor.schedule.validate import (
    USUAL_LINE_FREQUENCIES,
    equipment_from_values,
    line_frequency_note,
    panel_from_values,
    project_value_note,
)
from auditor.units import UnitError

__all__ = ["read_schedule", "ScheduleFileError"]

HEADER_SEARCH_ROWS = 50  # non-empty rows searched for a header before a sheet is given up
_PROGRESS_EVERY = 2000  # rows between progress calls
_UNKNOWN_COLUMNS_NAMED = 20  # unknown columns of one header warned about one by one

Progress = Callable[[int, int], None]

_PROJECT_KEY_HEADERS = frozenset(vocab.header_key(t) for t in (
    "key", "item", "field", "parameter", "property", "name", "description", "setting",
    "project", "attribute"))
_PROJECT_VALUE_HEADERS = frozenset(vocab.header_key(t) for t in (
    "value", "entry", "data", "details", "setting", "content"))
_KEY_COLUMN = {vocab.PANELS: "panel", vocab.EQUIPMENT: "equipment"}
_KEY_SPELLINGS = frozenset(
    vocab.header_key(s)
    for col in (vocab.PANEL_COLUMNS[0], vocab.EQUIPMENT_COLUMNS[0])
    for s in (col.name, *col.synonyms)
)


@dataclass(frozen=True)
class _ColumnSpec:
    index: int
    column: vocab.Column
    header: str  # as typed
    read: Callable[[Any], Any]
    field: str


def _texts(values: list[Any]) -> list[tuple[int, str]]:
    return [(i, v.strip()) for i, v in enumerate(values) if isinstance(v, str) and v.strip()]


def _classify(values: list[Any]) -> tuple[str, dict[int, tuple[vocab.Column, str | None]]] | None:
    """Which table (panels or equipment) a row heads, with the columns it names; None when it
    heads neither (it may still be a project header: :func:`_project_header`)."""
    texts = _texts(values)
    if len(texts) < 2:
        return None
    best = None
    for table in (vocab.PANELS, vocab.EQUIPMENT):
        matched = {}
        for i, text in texts:
            hit = vocab.match_header(text, table)
            if hit is not None:
                matched[i] = hit
        has_key = any(col.field == _KEY_COLUMN[table] for col, _ in matched.values())
        if has_key and len(matched) >= 2 and (best is None or len(matched) > len(best[1])):
            best = (table, matched)
    return best


def _project_header(values: list[Any]) -> tuple[int, int] | None:
    """The key and value columns of a 'Key | Value' project header; None when the row is not
    one."""
    texts = _texts(values)
    if len(texts) < 2:
        return None
    first, second = vocab.header_key(texts[0][1]), vocab.header_key(texts[1][1])
    if first in _PROJECT_KEY_HEADERS and second in _PROJECT_VALUE_HEADERS:
        return texts[0][0], texts[1][0]
    return None


class _Collector:
    """Records and problems from every file of one run, with the ids seen so far."""

    def __init__(self) -> None:
        self.panels: list[Panel] = []
        self.equipment: list[Equipment] = []
        self.problems: list[RowProblem] = []
        self.panel_ids: dict[str, SourceRef] = {}
        self.equipment_tags: dict[str, SourceRef] = {}
        self.project: dict[str, tuple[Any, SourceRef]] = {}
        self.extra: dict[str, tuple[str, str]] = {}

    def problem(self, file: str, sheet: str, row: int | None, column: str, message: str,
                severity: Severity = "error", text: str = "", record: str = "") -> None:
        self.problems.append(RowProblem(file=file, sheet=sheet, row=row, column=column,
                                        message=message, severity=severity, text=text,
                                        record=record))


def _where(ref: SourceRef, here: SourceRef) -> str:
    if ref.file != here.file:
        return f"row {ref.row} of sheet {ref.sheet!r} in {ref.file}"
    if ref.sheet != here.sheet:
        return f"row {ref.row} of sheet {ref.sheet!r}"
    return f"row {ref.row}"


class _TableReader:
    """Reads the data rows under one panel or equipment header."""

    def __init__(self, table: str, header_row: int, values: list[Any],
                 matched: dict[int, tuple[vocab.Column, str | None]], sheet: RawSheet,
                 file: str, out: _Collector) -> None:
        self.table = table
        self.file = file
        self.sheet = sheet.name
        self.out = out
        self.specs: list[_ColumnSpec] = []
        self.header_of: dict[str, str] = {}
        seen: dict[str, str] = {}
        unknown = 0
        for i, text in _texts(values):
            hit = matched.get(i)
            if hit is None and (vocab.header_key(vocab.split_header(text)[0])
                                in vocab.IGNORED_HEADERS):
                continue  # remarks for people
            if hit is None:
                unknown += 1
                if unknown <= _UNKNOWN_COLUMNS_NAMED:
                    shown = shortened(text)
                    hint = vocab.suggest_header(text, table) if len(text) <= 60 else None
                    tail = f"; did you mean {hint!r}?" if hint else ""
                    out.problem(file, sheet.name, header_row, shown,
                                f"column {shown!r} is not one the auditor reads; ignored{tail}",
                                "warning", shown)
                continue
            column, unit = hit
            if column.field in seen:
                out.problem(file, sheet.name, header_row, text,
                            f"column {text!r} repeats {seen[column.field]!r} "
                            f"({column.name}); the first is used", "warning", text)
                continue
            seen[column.field] = text
            try:
                read = column_reader(column, unit, sheet.decimal_comma)
            except UnitError as exc:
                out.problem(file, sheet.name, header_row, text,
                            f"the header's unit is not usable: {exc}", "error", text)
                read = unreadable_header_reader(text, str(exc))
            self.specs.append(_ColumnSpec(i, column, text, read, column.field))
            self.header_of[column.field] = text
        if unknown > _UNKNOWN_COLUMNS_NAMED:
            out.problem(file, sheet.name, header_row, "",
                        f"{unknown - _UNKNOWN_COLUMNS_NAMED} more columns are not ones the "
                        "auditor reads; ignored", "warning")
        self.key_field = _KEY_COLUMN[table]
        self.key_index = next(s.index for s in self.specs if s.column.field == self.key_field)
        self.build = panel_from_values if table == vocab.PANELS else equipment_from_values
        self.seen_ids = out.panel_ids if table == vocab.PANELS else out.equipment_tags
        self.kind = "panel id" if table == vocab.PANELS else "equipment tag"
        labels = vocab.PANEL_COLUMNS if table == vocab.PANELS else vocab.EQUIPMENT_COLUMNS
        self.label_of = {c.field: c.name for c in labels}
        self.label_of["tension_x"] = "tension x"
        self.label_of["tension_y"] = "tension y"
        self.header_row = header_row
        self.rows_read = 0

    def finish(self) -> None:
        """Warn when the table has a header but no data rows."""
        if self.rows_read == 0:
            what = "panel" if self.table == vocab.PANELS else "equipment"
            self.out.problem(self.file, self.sheet, self.header_row, "",
                             f"the {what} table under this header has no data rows", "warning")

    def looks_like_header(self, values: list[Any]) -> bool:
        key = values[self.key_index] if self.key_index < len(values) else None
        return isinstance(key, str) and vocab.header_key(key) in _KEY_SPELLINGS

    def _column_for(self, field: str | None) -> str:
        if field is None:
            return ""
        if field in self.header_of:
            return self.header_of[field]
        if field in ("tension_x", "tension_y") and "tension" in self.header_of:
            return self.header_of["tension"]
        return self.label_of.get(field, field)

    def read_row(self, row: int, values: list[Any]) -> None:
        self.rows_read += 1
        parsed: dict[str, Any] = {}
        texts: dict[str, str] = {}
        entered: list[tuple[str, str]] = []
        append = entered.append
        failures: list[tuple[str, str, str]] = []
        width = len(values)
        for spec in self.specs:
            if spec.index >= width:
                continue
            raw = values[spec.index]
            kind = raw.__class__
            if kind is str:
                text = raw.strip()
                if not text:
                    continue
                if len(text) > MAX_CELL_CHARS:
                    failures.append((spec.header, too_long_message(text), shortened(text)))
                    continue
            elif kind is float:
                text = "%.15g" % raw
            elif raw is None:
                continue
            else:
                text = cell_text(raw)
            append((spec.header, text))
            texts[spec.field] = text
            try:
                parsed[spec.field] = spec.read(raw)
            except CellError as exc:
                failures.append((spec.header, str(exc), text))
        record_id = parsed.get(self.key_field, "")
        file, sheet = self.file, self.sheet
        if not parsed and not failures:
            self.out.problem(file, sheet, row, "",
                             "none of the columns the auditor reads is filled in this row; "
                             "it is not read")
            return
        source = SourceRef(file, sheet, row)
        for header, message, text in failures:
            self.out.problem(file, sheet, row, header, message, "error", text, record_id)
        duplicate = None
        if record_id:
            key = record_id.casefold()
            first = self.seen_ids.get(key)
            if first is None:
                self.seen_ids[key] = source
            else:
                duplicate = first
        record, notes = self.build(parsed, source, tuple(entered))
        if failures:
            # a failed cell must not also be reported as "missing"
            failed = {h for h, _, _ in failures}
            notes = [n for n in notes
                     if not (n.severity == "error" and self._column_for(n.field) in failed)]
        for note in notes:
            self.out.problem(file, sheet, row, self._column_for(note.field), note.message,
                             note.severity,
                             "" if note.field is None else texts.get(note.field, ""), record_id)
        if duplicate is not None:
            self.out.problem(file, sheet, row, self.header_of[self.key_field],
                             f"{self.kind} {record_id!r} is already used in "
                             f"{_where(duplicate, source)}; this row is rejected",
                             "error", record_id, record_id)
            return
        if record is None or failures:
            if not failures and not any(n.severity == "error" for n in notes):
                self.out.problem(file, sheet, row, "", "the row could not be read", "error",
                                 "", record_id)
            return
        if isinstance(record, Panel):   # the panels table builds panels
            self.out.panels.append(record)
        else:
            self.out.equipment.append(record)


class _ProjectReader:
    """Reads key | value rows into the project facts."""

    def __init__(self, key_index: int, value_index: int, sheet: RawSheet, file: str,
                 out: _Collector) -> None:
        self.key_index, self.value_index = key_index, value_index
        self.sheet, self.file, self.out = sheet, file, out

    def read_row(self, row: int, values: list[Any]) -> None:
        key_raw = values[self.key_index] if self.key_index < len(values) else None
        value = values[self.value_index] if self.value_index < len(values) else None
        key = cell_text(key_raw)
        text = cell_text(value)
        file, sheet = self.file, self.sheet.name
        for cell in (key, text):
            if len(cell) > MAX_CELL_CHARS:
                self.out.problem(file, sheet, row, "", too_long_message(cell), "error",
                                 shortened(cell))
                return
        if not key:
            if text:
                self.out.problem(file, sheet, row, "", "this row has a value but no key", "error",
                                 text)
            return
        if not text:
            return  # a key left blank (the template's placeholders): nothing given
        hit = vocab.match_project_key(key)
        source = SourceRef(file, sheet, row)
        if hit is None:
            self.out.extra[vocab.header_key(key) or key] = (key, text)
            return
        column, unit = hit
        try:
            reader = column_reader(column, unit, self.sheet.decimal_comma)
            parsed = reader(value)
        except (CellError, UnitError) as exc:
            self.out.problem(file, sheet, row, key, str(exc), "error", text)
            return
        refused = project_value_note(column.field, parsed) if column.kind == "quantity" else None
        if refused is not None:
            self.out.problem(file, sheet, row, key, refused.message, "error", text)
            return
        if column.field == "line_frequency" and parsed not in USUAL_LINE_FREQUENCIES:
            self.out.problem(file, sheet, row, key,
                             f"line frequency {parsed:g} Hz is neither 50 nor 60 Hz "
                             "(common practice)", "warning", text)
        earlier = self.out.project.get(column.field)
        if earlier is not None:
            self.out.problem(file, sheet, row, key,
                             f"{column.name} is also given in {_where(earlier[1], source)}; "
                             "this row's value is used", "warning", text)
        self.out.project[column.field] = (parsed, source)


def _warn_cleaned(sheet: RawSheet, file: str, out: _Collector,
                  headers: list[tuple[int, dict[int, str]]] | None) -> None:
    """One warning per cell from which control characters were removed, naming its column
    by the header above it (or by its letter, outside any table); ``headers`` None for a
    sheet from which nothing is read (only its name is warned about)."""
    if sheet.name_cleaned:
        out.problem(file, sheet.name, None, "",
                    "control characters were removed from this sheet's name", "warning")
    if headers is None:
        return
    texts = {row: values for row, values in sheet.rows}
    for row, index in sheet.cleaned:
        names = next((h for start, h in reversed(headers) if start <= row), {})
        column = names.get(index) or (f"column {index + 1}" if sheet.csv
                                      else f"column {column_letter(index)}")
        value = texts[row][index]
        out.problem(file, sheet.name, row, column,
                    "control characters (invisible, and harmful to the outputs) were removed "
                    "from this cell; check its text", "warning", cell_text(value))


def _header_names(values: list[Any]) -> dict[int, str]:
    return dict(_texts(values))


def _read_sheet(sheet: RawSheet, file: str, out: _Collector,
                tick: Callable[[int], None]) -> list[str]:
    """Read the tables of one sheet; return the kinds of table found ("panels", ...)."""
    rows = sheet.rows
    if not rows or (not sheet.csv and vocab.is_note_sheet(sheet.name)):
        tick(len(rows))  # sheets for people ("Read me", "Notes") are never read as tables
        _warn_cleaned(sheet, file, out, None)
        return []
    reader: _TableReader | _ProjectReader | None = None
    start = 0
    headers: list[tuple[int, dict[int, str]]] = []
    for position, (row, values) in enumerate(rows[:HEADER_SEARCH_ROWS]):
        found = _classify(values)
        project = _project_header(values) if found is None else None
        if found is not None:
            table, matched = found
            reader = _TableReader(table, row, values, matched, sheet, file, out)
        elif project is not None:
            key_index, value_index = project
            reader = _ProjectReader(key_index, value_index, sheet, file, out)
        if reader is not None:
            headers.append((row, _header_names(values)))
            start = position + 1
            break
        texts = _texts(values)
        if texts:  # key | value rows with no header: the first cell names a project key
            key_index = texts[0][0]
            has_value = key_index + 1 < len(values) and values[key_index + 1] is not None
            if has_value and vocab.match_project_key(texts[0][1]) is not None:
                reader = _ProjectReader(key_index, key_index + 1, sheet, file, out)
                start = position
                break
    if reader is None:
        out.problem(file, sheet.name, None, "",
                    f"no table found in {'this file' if sheet.csv else 'this sheet'}: none "
                    f"of its first {HEADER_SEARCH_ROWS} rows is a panel header (e.g. "
                    "'Panel | Width (m) | Length (m) | Areal density (kg/m²) | Tension "
                    "(N/m)'), an equipment header ('Equipment | Kind | rpm | Blades') or "
                    "a 'Key | Value' project header; not read", "warning")
        tick(len(rows))
        _warn_cleaned(sheet, file, out, None)
        return []
    found_tables = [vocab.PROJECT if isinstance(reader, _ProjectReader) else reader.table]
    done = 0
    for row, values in rows[start:]:
        if isinstance(reader, _TableReader) and reader.looks_like_header(values):
            found = _classify(values)
            if found is not None:
                reader.finish()
                reader = _TableReader(found[0], row, values, found[1], sheet, file, out)
                headers.append((row, _header_names(values)))
                found_tables.append(reader.table)
                continue
        reader.read_row(row, values)
        done += 1
        if done % _PROGRESS_EVERY == 0:
            tick(_PROGRESS_EVERY)
    if isinstance(reader, _TableReader):
        reader.finish()
    tick(len(rows) - done + done % _PROGRESS_EVERY)
    _warn_cleaned(sheet, file, out, headers)
    return found_tables


def _as_paths(paths) -> list[str | os.PathLike]:
    if isinstance(paths, (str, os.PathLike)):
        return [paths]
    return list(paths)


def _project(out: _Collector) -> Project:
    facts = {field: value for field, (value, _) in out.project.items()}
    return Project(extra=tuple(out.extra.values()), **facts)


def _check_line_frequencies(out: _Collector) -> None:
    """Reject motors and transformers whose line frequency is in neither the row nor the
    project (the Project sheet may come after the equipment, or from another file)."""
    project = out.project.get("line_frequency")
    project_value = project[0] if project is not None else None
    kept = []
    for item in out.equipment:
        note = line_frequency_note(item, project_value)
        if note is None:
            kept.append(item)
            continue
        src = item.source
        out.problem(src.file, src.sheet, src.row, "line frequency", note.message, "error",
                    "", item.equipment)
    out.equipment = kept


def read_schedule(
    paths: str | os.PathLike | Iterable[str | os.PathLike],
    *,
    progress: Progress | None = None,
) -> Schedule:
    """Read one or more schedule files (.xlsx, .csv) into a ``Schedule``.

    Parameters
    ----------
    paths : path or iterable of paths
        Workbooks and CSV files; their panels, equipment and project facts are gathered
        (panel ids and equipment tags must be unique across all of them). A file given
        twice is read once.
    progress : callable(done, total), optional
        Called as reading advances; ``done`` reaches ``total`` at the end. The units are
        arbitrary (rows, weighted by file); only the ratio means anything.

    Returns
    -------
    Schedule
        ``panels``, ``equipment``, ``project``, every problem found, and ``files``.

        Files are named by their file name (``auditor.schedule.inputs``), never by where
        they lie: ``SourceRef.file``, ``RowProblem.file`` and ``InputFile.path`` hold that
        name, and ``files`` holds :class:`~auditor.schedule.inputs.ScheduleFile` entries
        whose ``location`` (in memory only) says where each was read.

        ``files`` lists the files something was read from: a file in which a panel table
        or an equipment table was found (even one with a header and no rows, which is
        warned about), and a file of project facts alone when another file of the run has
        such a table. A file that cannot be opened, or in which no panel or equipment
        table was found, is one error problem with no sheet or row, and is not in
        ``files``; when no file has such a table, ``files`` is empty (``auditor check``
        and ``audit`` then exit with status 2: nothing could be read). When no file has
        a panel table, each file read says so in a warning.
    """
    items = _as_paths(paths)
    names = display_names(items)
    out = _Collector()
    read: list[tuple[ScheduleFile, set[str], list[RawSheet]]] = []
    per_file = 1_000_000
    total = max(1, per_file * len(items))
    done = 0
    seen: dict[str, str] = {}

    def report(value: int) -> None:
        if progress is not None:
            progress(min(value, total), total)

    for path, shown in zip(items, names):
        where = str(resolved(path))
        if where in seen:
            out.problem(shown, "", None, "", f"{shown} is given more than once; it is read once",
                        "warning")
            done += per_file
            report(done)
            continue
        seen[where] = shown
        try:
            loaded = load_file(path, shown)
        except ScheduleFileError as exc:
            out.problem(shown, "", None, "", str(exc), "error")
            done += per_file
            report(done)
            continue
        for message in loaded.warnings:
            out.problem(shown, "", None, "", message, "warning")
        base = done + per_file // 5  # loading is about a fifth of the work
        report(base)
        rows_total = max(1, sum(len(s.rows) for s in loaded.sheets))
        counted = 0

        def tick(n: int, base: int = base, rows_total: int = rows_total) -> None:
            nonlocal counted
            counted += n
            report(base + (per_file - per_file // 5) * min(counted, rows_total) // rows_total)

        tables: set[str] = set()
        for sheet in loaded.sheets:
            tables.update(_read_sheet(sheet, shown, out, tick))
        read.append((ScheduleFile(path=shown, sha256=loaded.sha256, location=loaded.location),
                     tables, loaded.sheets))
        done += per_file
        report(done)

    any_table = any(t & {vocab.PANELS, vocab.EQUIPMENT} for _, t, _ in read)
    any_panels = any(vocab.PANELS in t for _, t, _ in read)
    files = []
    for item, tables, sheets in read:
        error = unread_file_message(item.path, sheets, tables)
        if error is not None and not (any_table and vocab.PROJECT in tables):
            out.problem(item.path, "", None, "", error, "error")
            continue
        files.append(item)
        if any_table and not any_panels:
            looked = ", ".join(repr(s.name) for s in sheets
                               if s.csv or not vocab.is_note_sheet(s.name)) or "none"
            out.problem(item.path, "", None, "",
                        f"no panel table was found in {item.path} (sheets looked at: "
                        f"{looked}); there is no panel to audit", "warning")
    _check_line_frequencies(out)
    return Schedule(
        panels=tuple(out.panels),
        equipment=tuple(out.equipment),
        project=_project(out),
        problems=tuple(out.problems),
        files=tuple(files),
    )


def read_rows(
    headers: Iterable[str],
    rows: Iterable[Iterable[Any]],
    *,
    name: str = "command line",
) -> Schedule:
    """Read one table given as header texts and rows of cells, with the same rules as a file.

    For tables that do not come from a file (the command line's one-off panel, say): headers
    may carry units (``"Width (mm)"``), cells may carry their own (``"48 in"``), and every
    problem is reported as for a sheet called ``name``.
    """
    out = _Collector()
    table = [(1, list(headers))] + [(i, list(r)) for i, r in enumerate(rows, start=2)]
    _read_sheet(clean_sheet(RawSheet(name=name, rows=table, csv=True)), name, out,
                lambda n: None)
    _check_line_frequencies(out)
    return Schedule(
        panels=tuple(out.panels),
        equipment=tuple(out.equipment),
        project=_project(out),
        problems=tuple(out.problems),
    )
