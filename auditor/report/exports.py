"""Machine-readable findings: JSON document, CSV table, and the audited copy of the workbook.

Writers only read the ``AuditResult``. Every file is written atomically (a temporary file in
the same folder, then a rename), and the input workbook is never opened for writing.
Text that a spreadsheet would run as a formula (starting with = + - @, or a tab or carriage
return) is neutralised with a leading apostrophe in CSV and xlsx output.
"""

from __future__ import annotations

import csv
import io
import json
import os
import tempfile
from collections.abc import Iterable
from pathlib import Path
from typing import Any

from auditor._gc import collector_paused
from auditor.model import AuditResult, Finding, PanelResult, RowProblem
from auditor.remedy import SAFETY_NOTE, remedy_advice

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise(value: Any) -> Any:
    """Make a text cell inert for spreadsheets (CSV/formula injection); numbers pass through."""
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
    return value


def write_atomic(path: str | Path, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder, then rename."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise
    return path


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


def _panel_head(p: PanelResult) -> dict[str, Any]:
    return {
        "panel": p.panel.panel,
        "zone": p.panel.zone,
        "shape": p.panel.shape,
        "material": p.panel.material,
        "status": p.status,
        "loading": p.loading,
        "notes": list(p.notes),
        "source": {"file": p.panel.source.file, "sheet": p.panel.source.sheet,
                   "row": p.panel.source.row},
    }


def panel_dict(p: PanelResult) -> dict[str, Any]:
    """One panel as the findings document gives it."""
    return {
        **_panel_head(p),
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
    return {**_document_head(result),
            "panels": [panel_dict(p) for p in result.panels],
            "problems": [p.as_dict() for p in result.problems]}


def _document_head(result: AuditResult) -> dict[str, Any]:
    project = result.schedule.project
    rules = result.ruleset.as_dict() if hasattr(result.ruleset, "as_dict") else {}
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
        "files": [{"path": f.path, "sha256": f.sha256} for f in result.schedule.files],
        "rules": rules,
        "summary": result.summary(),
        "safety_note": SAFETY_NOTE,
    }


#: Above this many panels the JSON is written compact: the indenting encoder is pure Python
#: and several times slower than the compact one (50 s against a few for 20,000 panels).
INDENT_PANELS = 500


def findings_json(result: AuditResult) -> str:
    """The findings document as JSON text (indented for small projects, compact for large)."""
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

    with collector_paused():   # many small acyclic records (see auditor._gc)
        parts = [encode(_document_head(result))[:-1], ',"panels":[']
        for i, p in enumerate(result.panels):
            parts.extend((
                "," if i else "", encode(_panel_head(p))[:-1], ',"modes":', modes_of(p),
                ',"findings":[', findings_of(p),
                '],"measured_peaks_hz":', encode(list(p.measured_peaks_hz)), "}"))
        parts.append('],"problems":' + encode([q.as_dict() for q in result.problems]) + "}")
        return "".join(parts)


def write_json(result: AuditResult, path: str | Path) -> Path:
    return write_atomic(path, findings_json(result).encode("utf-8"))


CSV_COLUMNS = (
    "severity", "panel", "zone", "mode", "mode_hz", "participation", "loss_factor",
    "equipment", "kind", "excitation", "excitation_hz", "band_low_hz", "band_high_hz",
    "separation_percent", "margin_percent", "remedy_tension_n_per_m", "remedy_bays", "remedy",
    "file", "sheet", "row", "column", "message",
)


def _finding_rows(panels: Iterable[PanelResult]) -> Iterable[list[Any]]:
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
                p.panel.source.file, p.panel.source.sheet, p.panel.source.row, "", "",
            ]


def _problem_rows(problems: Iterable[RowProblem]) -> Iterable[list[Any]]:
    for q in problems:
        kind = "rejected row" if q.severity == "error" else "warning"
        yield [kind, q.record, "", "", None, None, None, "", "", "", None, None, None,
               None, None, None, None, "", q.file, q.sheet, q.row, q.column, q.message]


def findings_csv(result: AuditResult) -> str:
    """Findings, then rejected rows and warnings (severity "rejected row" / "warning")."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for row in _finding_rows(result.panels):
        writer.writerow([neutralise(v) for v in row])
    for row in _problem_rows(result.problems):
        writer.writerow([neutralise(v) for v in row])
    return buf.getvalue()


def write_csv(result: AuditResult, path: str | Path) -> Path:
    return write_atomic(path, findings_csv(result).encode("utf-8-sig"))


def _panel_header_row(ws, first_data_row: int) -> int:
    """The header row of a panel table: the nearest row above its first record with text."""
    for r in range(first_data_row - 1, 0, -1):
        texts = [c.value for c in ws[r] if isinstance(c.value, str) and c.value.strip()]
        if len(texts) >= 2:
            return r
    return max(1, first_data_row - 1)


def audited_workbook_bytes(result: AuditResult, source_file: str) -> bytes:
    """A copy of ``source_file`` plus a status column on its panel sheets and Findings sheets.

    The original cells are left exactly as they were; the status column goes after the last
    used column. A CSV schedule becomes a workbook with its table on the first sheet.
    """
    import openpyxl
    from openpyxl.styles import Font

    path = Path(source_file)
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        wb = openpyxl.load_workbook(path)  # read into memory; the input is never written
    else:
        wb = openpyxl.Workbook()
        ws = wb.active
        ws.title = path.stem[:31] or "Schedule"
        with open(path, newline="", encoding="utf-8-sig") as fh:
            sample = fh.read(65536)
            fh.seek(0)
            try:
                dialect = csv.Sniffer().sniff(sample, delimiters=",;\t|")
            except csv.Error:
                dialect = csv.excel
            for row in csv.reader(fh, dialect):
                ws.append([neutralise(v) for v in row])

    bold = Font(bold=True)
    status_of: dict[tuple[str, int], str] = {}
    for p in result.panels:
        if p.panel.source.file == source_file:
            status_of[(p.panel.source.sheet, p.panel.source.row)] = p.status
    for q in result.problems:
        if q.file == source_file and q.severity == "error" and q.row is not None:
            status_of.setdefault((q.sheet, q.row), f"rejected: {q.message}")
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
        ws.cell(row=header, column=col, value="Audit status").font = bold
        for r in rows:
            ws.cell(row=r, column=col, value=neutralise(status_of[(sheet, r)]))

    def add_sheet(title: str, columns, rows) -> None:
        name = title
        n = 2
        while name in wb.sheetnames:
            name = f"{title} {n}"
            n += 1
        ws = wb.create_sheet(name)
        ws.append(list(columns))
        for c in ws[1]:
            c.font = bold
        for row in rows:
            ws.append([neutralise(v) for v in row])
        ws.freeze_panes = "A2"

    mine = [p for p in result.panels if p.panel.source.file == source_file]
    add_sheet("Findings", CSV_COLUMNS, _finding_rows(mine))
    add_sheet("Rejected rows", CSV_COLUMNS,
              _problem_rows(q for q in result.problems if q.file == source_file))
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def write_audited_workbooks(result: AuditResult, out_dir: str | Path) -> list[Path]:
    """``<schedule name>-audited.xlsx`` in ``out_dir`` for each input file."""
    out: list[Path] = []
    for f in result.schedule.files:
        target = Path(out_dir) / f"{Path(f.path).stem}-audited.xlsx"
        if Path(f.path).resolve() == target.resolve():
            raise ValueError(f"refusing to overwrite the input {f.path}")
        out.append(write_atomic(target, audited_workbook_bytes(result, f.path)))
    return out
