"""Machine-readable findings: JSON document, CSV table, and the audited copy of the workbook.

Writers only read the ``AuditResult``. Every file is written atomically
(:func:`auditor.atomic.write_atomic`), and the input workbook is never opened for writing.

What reaches a spreadsheet is made safe to open:

- characters no spreadsheet file may hold (control characters, lone surrogates) become
  U+FFFD (:func:`auditor.report.text.clean_text`);
- text a spreadsheet would run as a formula (starting with = + - @, a tab or a carriage
  return) gets a leading apostrophe in CSV and xlsx, and every text cell of the xlsx is a
  string cell, never a formula or an error value (the OWASP guidance on CSV injection);
  numbers stay numbers.

No output names a folder of the machine that ran the audit: inputs go by their file name (and
SHA-256), a bundled rule set by its name, a rule set of the user's by its file name and
SHA-256.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import numbers
import os
import re
from collections.abc import Iterable
from pathlib import Path
from typing import Any

from auditor._gc import collector_paused
from auditor.atomic import write_atomic
from auditor.model import AuditResult, Finding, PanelResult, RowProblem
from auditor.remedy import SAFETY_NOTE, remedy_advice
from auditor.report.text import LocalPaths, clean_text, file_name, is_absolute_path

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise(value: Any) -> Any:
    """A cell value safe for a spreadsheet: numbers pass through, text is cleaned of
    unprintable characters and made inert when a spreadsheet would read it as a formula
    (a leading apostrophe; OWASP, "CSV Injection")."""
    if value is None or isinstance(value, numbers.Real):  # numpy numbers too
        return value
    text = clean_text(value)
    return "'" + text if text.startswith(_FORMULA_START) else text


def local_paths(result: AuditResult) -> LocalPaths:
    """The names the outputs give the input files, and what to take out of messages.

    The reader names each file as outputs show it (``InputFile.path``, ``SourceRef.file``,
    ``RowProblem.file``) and keeps where it was read in memory (``location``); that place
    and its folder are taken out of any message. A record that carries an absolute path
    instead (one built in code) goes by its file name.
    """
    files: dict[str, str] = {"": ""}
    folders: set[str] = set()
    for f in result.schedule.files:
        location = getattr(f, "location", "") or ""
        absolute = is_absolute_path(f.path)
        name = file_name(f.path) if absolute else f.path
        files[f.path] = name
        place = location or (f.path if absolute else "")
        if place:
            files[place] = name
            folders.add(os.path.dirname(place))
    return LocalPaths(files, folders)


def input_file_location(item: Any) -> str:
    """Where an input file was read (the reader's ``location``, else its path)."""
    return getattr(item, "location", "") or item.path


def ruleset_origin(ruleset: Any) -> str:
    """Where the rule set came from, with no folder: its ``origin`` ("standard (bundled),
    SHA-256 …", "our-office.toml, SHA-256 …"); for a rule-set record that carries only a
    ``path``, the same words made here from the file. "" for one built in code."""
    origin = getattr(ruleset, "origin", None)
    if isinstance(origin, str):
        return origin
    path = getattr(ruleset, "path", "") or ""
    if not path:
        return ""
    try:
        from auditor.resources import bundled_dir

        bundled = Path(path).resolve().parent == bundled_dir("rules").resolve()
    except (OSError, ValueError):
        bundled = False
    where = f"{Path(path).stem} (bundled)" if bundled else Path(path).name
    try:
        with open(path, "rb") as fh:
            digest = hashlib.file_digest(fh, "sha256").hexdigest()
    except OSError:
        return where
    return f"{where}, SHA-256 {digest[:12]}\u2026"


def problem_dict(q: RowProblem, paths: LocalPaths) -> dict[str, Any]:
    """A rejected row or warning as the findings document gives it (file by name)."""
    return {**q.as_dict(), "file": paths.name(q.file), "message": paths.scrub(q.message)}


def finding_dict(f: Finding) -> dict[str, Any]:
    """One finding as the JSON document gives it (SI: Hz, N/m)."""
    e = f.excitation
    remedy = None
    if f.remedy is not None:
        remedy = {"tension": f.remedy.tension, "tension_y": f.remedy.tension_y,
                  "bays": f.remedy.bays, "text": f.remedy.text, "work": f.remedy.work}
    return {
        "mode": f.mode.label,
        "mode_hz": f.mode.frequency_hz,
        "participation": f.mode.participation,
        "loss_factor": f.mode.loss_factor,
        "equipment": e.equipment,
        "kind": e.kind,
        "source": e.source,
        "order": e.order,
        "excitation": e.description,
        "excitation_hz": e.frequency_hz,
        "band_hz": list(e.band_hz) if e.band_hz else None,
        "airborne": e.airborne,
        "separation": f.separation,
        "margin": f.margin,
        "severity": f.severity,
        "remedy": remedy,
    }


def _panel_head(p: PanelResult, paths: LocalPaths) -> dict[str, Any]:
    return {
        "panel": p.panel.panel,
        "zone": p.panel.zone,
        "shape": p.panel.shape,
        "material": p.panel.material,
        "status": p.status,
        "loading": paths.scrub(p.loading),
        "notes": [paths.scrub(n) for n in p.notes],
        "source": {"file": paths.name(p.panel.source.file), "sheet": p.panel.source.sheet,
                   "row": p.panel.source.row},
    }


def panel_dict(p: PanelResult, paths: LocalPaths | None = None) -> dict[str, Any]:
    """One panel as the findings document gives it."""
    paths = paths if paths is not None else LocalPaths({})
    return {
        **_panel_head(p, paths),
        "modes": [m.as_dict() for m in p.modes],
        "findings": [finding_dict(f) for f in p.findings],
        "measured_peaks_hz": list(p.measured_peaks_hz),
    }


def panel_modes_dict(panel, panel_modes) -> dict[str, Any]:
    """One panel's modes as ``auditor modes --json`` gives them."""
    return {
        "panel": panel.panel,
        "loading": panel_modes.loading,
        "notes": list(panel_modes.notes),
        "modes": [m.as_dict() for m in panel_modes.modes],
    }


def findings_document(result: AuditResult) -> dict[str, Any]:
    """The findings document: ``{"panels", "problems", "summary", "rules", ...}``."""
    paths = local_paths(result)
    return {**_document_head(result, paths),
            "panels": [panel_dict(p, paths) for p in result.panels],
            "problems": [problem_dict(q, paths) for q in result.problems]}


def _document_head(result: AuditResult, paths: LocalPaths) -> dict[str, Any]:
    project = result.schedule.project
    rules = dict(result.ruleset.as_dict()) if hasattr(result.ruleset, "as_dict") else {}
    if "path" in rules or "origin" in rules:  # a folder never goes out: name and SHA-256
        rules.pop("path", None)
        rules["origin"] = ruleset_origin(result.ruleset)
    return {
        "version": result.version,
        "created": result.created,
        "calibrated": result.calibrated,
        "project": {
            "name": project.name, "reference": project.reference, "client": project.client,
            "prepared_by": project.prepared_by, "prepared_for": project.prepared_for,
            "line_frequency": project.line_frequency, "air_density": project.air_density,
            "speed_of_sound": project.speed_of_sound,
        },
        "files": [{"name": paths.name(f.path), "sha256": f.sha256} for f in result.schedule.files],
        "rules": rules,
        "summary": result.summary(),
        "safety_note": SAFETY_NOTE,
    }


#: Above this many panels the JSON is written compact: the indenting encoder is pure Python
#: and several times slower than the compact one (50 s against a few for 20,000 panels).
INDENT_PANELS = 500


def findings_json(result: AuditResult) -> str:
    """The findings document as JSON text (indented for small projects, compact for large).

    A lone surrogate (from a damaged input) stays in the text as it is: written to a file it
    becomes its JSON escape (see :func:`write_json`).
    """
    if len(result.panels) <= INDENT_PANELS:
        return json.dumps(findings_document(result), indent=1, ensure_ascii=False,
                          allow_nan=False)
    return compact_findings_json(result)


def compact_findings_json(result: AuditResult) -> str:
    """The findings document as compact JSON text, the same document as
    ``json.dumps(findings_document(result))`` gives.

    Panels of one type share their modes and their findings but for the panel id (the audit
    solves each type once), so each distinct modes list and finding is encoded once and its
    text reused: a 20,000-panel project repeats a few hundred distinct findings tens of
    thousands of times.
    """
    # ASCII escapes: the C encoder is a third faster with them than without
    encode = json.JSONEncoder(allow_nan=False, separators=(",", ":")).encode
    modes_text: dict[int, tuple[Any, str]] = {}
    # Keyed by object ids and values: every object keyed is held by ``result`` while this
    # runs, and the key is everything a finding's text depends on (the panel id is not in it).
    finding_text: dict[tuple, str] = {}

    def modes_of(p: PanelResult) -> str:
        hit = modes_text.get(id(p.modes))
        if hit is None or hit[0] is not p.modes:
            hit = modes_text[id(p.modes)] = (p.modes, encode([m.as_dict() for m in p.modes]))
        return hit[1]

    def finding_of(f: Finding) -> str:
        key = (id(f.mode), id(f.excitation), id(f.remedy), f.separation, f.severity, f.margin)
        text = finding_text.get(key)
        if text is None:
            text = finding_text[key] = encode(finding_dict(f))
        return text

    # The findings of one panel joined, by the ids of their (cached, so lasting) texts: panels
    # of one type share the joined text too, and the document is copied together only once.
    list_text: dict[tuple[int, ...], str] = {}

    def findings_of(p: PanelResult) -> str:
        texts = [finding_of(f) for f in p.findings]
        key = tuple(map(id, texts))
        text = list_text.get(key)
        if text is None:
            text = list_text[key] = ",".join(texts)
        return text

    paths = local_paths(result)
    with collector_paused():   # many small acyclic records (see auditor._gc)
        parts = [encode(_document_head(result, paths))[:-1], ',"panels":[']
        for i, p in enumerate(result.panels):
            parts.extend((
                "," if i else "", encode(_panel_head(p, paths))[:-1], ',"modes":', modes_of(p),
                ',"findings":[', findings_of(p),
                '],"measured_peaks_hz":', encode(list(p.measured_peaks_hz)), "}"))
        parts.append('],"problems":'
                     + encode([problem_dict(q, paths) for q in result.problems]) + "}")
        return "".join(parts)


def _prepared(path: str | Path) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    return path


def write_json(result: AuditResult, path: str | Path) -> Path:
    """``findings.json``, UTF-8. A lone surrogate, which UTF-8 cannot carry, is written as
    its JSON escape (``\\udc80``): it can only stand inside a JSON string (RFC 8259, §7)."""
    data = findings_json(result).encode("utf-8", errors="backslashreplace")
    return write_atomic(_prepared(path), data)


CSV_COLUMNS = (
    "severity", "panel", "zone", "mode", "mode_hz", "participation", "loss_factor",
    "equipment", "kind", "excitation", "excitation_hz", "band_low_hz", "band_high_hz",
    "separation_percent", "margin_percent", "remedy_tension_n_per_m", "remedy_bays", "remedy",
    "file", "sheet", "row", "column", "message",
)


def _finding_rows(panels: Iterable[PanelResult], paths: LocalPaths) -> Iterable[list[Any]]:
    for p in panels:
        for f in p.findings:
            e = f.excitation
            r = f.remedy
            yield [
                f.severity, p.panel.panel, p.panel.zone, f.mode.label,
                round(f.mode.frequency_hz, 3), round(f.mode.participation, 5),
                None if f.mode.loss_factor is None else round(f.mode.loss_factor, 5),
                e.equipment, e.kind, e.description, round(e.frequency_hz, 3),
                round(e.band_hz[0], 3) if e.band_hz else None,
                round(e.band_hz[1], 3) if e.band_hz else None,
                round(100 * f.separation, 2), round(100 * f.margin, 2),
                None if r is None or r.tension is None else round(r.tension, 1),
                None if r is None else r.bays, remedy_advice(r),
                paths.name(p.panel.source.file), p.panel.source.sheet, p.panel.source.row, "", "",
            ]


def _problem_rows(problems: Iterable[RowProblem], paths: LocalPaths) -> Iterable[list[Any]]:
    for q in problems:
        kind = "rejected row" if q.severity == "error" else "warning"
        yield [kind, q.record, "", "", None, None, None, "", "", "", None, None, None,
               None, None, None, None, "", paths.name(q.file), q.sheet, q.row, q.column,
               paths.scrub(q.message)]


def findings_csv(result: AuditResult) -> str:
    """Findings, then rejected rows and warnings (severity "rejected row" / "warning"), as
    CSV text (RFC 4180: CRLF line ends, a field with a comma, quote or line break quoted)."""
    paths = local_paths(result)
    buf = io.StringIO()
    # RFC 4180 line ends (CRLF): the writer then quotes a field holding either break
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(CSV_COLUMNS)
    for row in _finding_rows(result.panels, paths):
        writer.writerow([neutralise(v) for v in row])
    for row in _problem_rows(result.problems, paths):
        writer.writerow([neutralise(v) for v in row])
    return buf.getvalue()


def write_csv(result: AuditResult, path: str | Path) -> Path:
    return write_atomic(_prepared(path), findings_csv(result), encoding="utf-8-sig")


# --- the audited workbook ---------------------------------------------------------------------

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


def audited_workbook(result: AuditResult, source_file: str, paths: LocalPaths | None = None,
                     location: str | None = None):
    """A copy of the schedule file ``source_file`` plus a status column on its panel sheets
    and Findings sheets, as an ``openpyxl.Workbook``.

    ``source_file`` is the file's name as its records give it (``SourceRef.file``);
    ``location`` where to read it (by default the reader's ``location`` of that file). The
    original cells are left exactly as they were; the status column goes after the last used
    column. A CSV schedule becomes a workbook with its table on the first sheet (plain numbers
    as numbers, the rest as text).
    """
    import openpyxl
    from openpyxl.styles import Font

    paths = paths if paths is not None else local_paths(result)
    if location is None:
        location = next((input_file_location(f) for f in result.schedule.files
                         if f.path == source_file), source_file)
    path = Path(location)
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        wb = openpyxl.load_workbook(path)  # read into memory; the input is never written
    else:
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

    bold = Font(bold=True)
    status_of: dict[tuple[str, int], str] = {}
    for p in result.panels:
        if p.panel.source.file == source_file:
            status_of[(p.panel.source.sheet, p.panel.source.row)] = p.status
    for q in result.problems:
        if q.file == source_file and q.severity == "error" and q.row is not None:
            status_of.setdefault((q.sheet, q.row), f"rejected: {paths.scrub(q.message)}")
    sheets: dict[str, list[int]] = {}
    for (sheet, row) in status_of:
        sheets.setdefault(sheet, []).append(row)
    for sheet, rows in sheets.items():
        ws = wb[sheet] if sheet in wb.sheetnames else wb.worksheets[0]
        panel_rows = [r for r in rows if not status_of[(sheet, r)].startswith("rejected")]
        if not panel_rows:
            continue
        header = _panel_header_row(ws, min(panel_rows))
        col = ws.max_column + 1
        _put(ws, header, col, "Audit status").font = bold
        for r in rows:
            _put(ws, r, col, status_of[(sheet, r)])

    def add_sheet(title: str, columns, rows) -> None:
        name = title
        n = 2
        while name in wb.sheetnames:
            name = f"{title} {n}"
            n += 1
        ws = wb.create_sheet(name)
        _write_row(ws, 1, columns)
        for c in ws[1]:
            c.font = bold
        for r, row in enumerate(rows, start=2):
            _write_row(ws, r, row)
        ws.freeze_panes = "A2"

    mine = [p for p in result.panels if p.panel.source.file == source_file]
    add_sheet("Findings", CSV_COLUMNS, _finding_rows(mine, paths))
    add_sheet("Rejected rows", CSV_COLUMNS,
              _problem_rows((q for q in result.problems if q.file == source_file), paths))
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
