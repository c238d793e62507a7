"""``findings.csv``: one table with every finding, every panel and every rejected row.

Rows, in this order:

1. one row per finding, worst first (``auditor.results.finding_rank``), with its panel's
   verdict, assessed range, remedy (the panel's one remedy, its text with the safety note
   when it is work on the panel) and assumptions beside it;
2. one row per panel with no finding (``severity`` "no finding"), worst verdict first, so
   every audited panel is in the table;
3. the rejected rows and warnings (``severity`` "rejected row" / "warning").

What reaches a spreadsheet is made safe to open (:func:`neutralise`): characters no
spreadsheet file may hold become U+FFFD (:func:`auditor.report.text.clean_text`), and text a
spreadsheet would run as a formula (starting with = + - @, a tab or a carriage return) gets a
leading apostrophe (OWASP, "CSV Injection"); numbers stay numbers.

References
----------
.. [1] Y. Shafranovich, "Common Format and MIME Type for Comma-Separated Values (CSV)
   Files", RFC 4180, IETF, 2005 (CRLF line ends, quoting, one header line).
"""

from __future__ import annotations

import csv
import io
import numbers
from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import Any

from auditor.atomic import write_atomic
from auditor.model import RowProblem
from auditor.remedy import remedy_advice
from auditor.report.provenance import local_paths, prepared_path
from auditor.report.records import PanelAssumptions, finite, ranked_findings, windows_text
from auditor.report.text import LocalPaths, clean_text
from auditor.results import AuditResult, Finding, PanelResult

__all__ = ["CSV_COLUMNS", "PANEL_COLUMNS", "NO_FINDING", "neutralise", "finding_rows",
           "no_finding_rows", "problem_rows", "findings_csv", "write_csv"]

CSV_COLUMNS = (
    "severity", "panel", "zone", "verdict", "response_db", "mode", "mode_hz",
    "participation", "loss_factor", "equipment", "kind", "excitation", "path", "mount",
    "excitation_hz", "band_low_hz", "band_high_hz", "separation_percent", "margin_percent",
    "amplification", "transmissibility", "overlap", "assessed_to_hz", "overlap_from_hz",
    "remedy_tension_n_per_m", "remedy_tension_y_n_per_m", "remedy_bays",
    "remedy_clear_windows_n_per_m", "remedy", "verdict_reason", "assumptions",
    "file", "sheet", "row", "column", "message",
)

#: The columns that describe a panel (the same on each of its rows).
PANEL_COLUMNS = (
    "panel", "zone", "verdict", "assessed_to_hz", "overlap_from_hz",
    "remedy_tension_n_per_m", "remedy_tension_y_n_per_m", "remedy_bays",
    "remedy_clear_windows_n_per_m", "remedy", "verdict_reason", "assumptions",
    "file", "sheet", "row",
)

#: ``severity`` of the row of a panel that has no finding.
NO_FINDING = "no finding"

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER_TYPES = (float, int)  # the common case, before the slower check for any real number


def neutralise(value: Any) -> Any:
    """A cell value safe for a spreadsheet: numbers pass through, text is cleaned of
    unprintable characters and made inert when a spreadsheet would read it as a formula
    (a leading apostrophe; OWASP, "CSV Injection")."""
    if value is None or type(value) in _NUMBER_TYPES or isinstance(value, numbers.Real):
        return value  # numpy numbers too
    text = clean_text(value)
    return "'" + text if text.startswith(_FORMULA_START) else text


def _rounded(value: float | None, digits: int) -> float | None:
    value = finite(value)
    return None if value is None else round(value, digits)


def panel_values(p: PanelResult, paths: LocalPaths,
                 assumptions: tuple[str, ...]) -> dict[str, Any]:
    """The panel's columns (``PANEL_COLUMNS``) of a row. The remedy's tension and bays are
    shown only for a remedy that is work on the panel (a "no change needed" remedy carries
    the scheduled tension, which is no proposal); its text always."""
    r = p.remedy
    work = r if r is not None and r.work else None   # "no change needed" carries the tension
    return {
        "panel": p.panel.panel,
        "zone": p.panel.zone,
        "verdict": p.verdict,
        "assessed_to_hz": _rounded(p.assessed_to_hz, 1),
        "overlap_from_hz": _rounded(p.overlap_from_hz, 1),
        "remedy_tension_n_per_m": _rounded(work.tension, 1) if work is not None else None,
        "remedy_tension_y_n_per_m": _rounded(work.tension_y, 1) if work is not None else None,
        "remedy_bays": work.bays if work is not None else None,
        "remedy_clear_windows_n_per_m": windows_text(r),
        "remedy": remedy_advice(r),
        "verdict_reason": paths.scrub(p.verdict_reason),
        "assumptions": "; ".join(assumptions),
        "file": paths.name(p.panel.source.file),
        "sheet": p.panel.source.sheet,
        "row": p.panel.source.row,
    }


def finding_values(f: Finding) -> dict[str, Any]:
    """The finding's own columns of a row."""
    e = f.excitation
    return {
        "severity": f.severity,
        "response_db": _rounded(f.response_db, 1),
        "mode": f.mode.label,
        "mode_hz": _rounded(f.mode.frequency_hz, 3),
        "participation": _rounded(f.mode.participation, 5),
        "loss_factor": _rounded(f.mode.loss_factor, 5),
        "equipment": e.equipment,
        "kind": e.kind,
        "excitation": e.description,
        "path": e.path,
        "mount": e.mount.description if e.mount is not None else "",
        "excitation_hz": _rounded(e.frequency_hz, 3),
        "band_low_hz": _rounded(e.band_hz[0], 3) if e.band_hz else None,
        "band_high_hz": _rounded(e.band_hz[1], 3) if e.band_hz else None,
        "separation_percent": round(100 * f.separation, 2),
        "margin_percent": round(100 * f.margin, 2),
        "amplification": _rounded(f.amplification, 3),
        "transmissibility": _rounded(f.transmissibility, 4),
        "overlap": "yes" if f.overlap else "",
    }


def _safe(values: dict[str, Any]) -> dict[str, Any]:
    """Every value made spreadsheet-safe (:func:`neutralise`; doing it twice changes nothing)."""
    return {k: neutralise(v) for k, v in values.items()}


def _row(values: dict[str, Any]) -> list[Any]:
    return [values.get(c) for c in CSV_COLUMNS]


def finding_rows(panels: Sequence[PanelResult], paths: LocalPaths,
                 assumptions: PanelAssumptions) -> Iterable[list[Any]]:
    """One row per finding of ``panels``, worst first, with its panel's columns beside it
    (values in the order of ``CSV_COLUMNS``, spreadsheet-safe)."""
    heads: list[dict[str, Any] | None] = [None] * len(panels)   # each panel's, made once
    for k, f in ranked_findings(panels):
        head = heads[k]
        if head is None:
            head = heads[k] = _safe(panel_values(panels[k], paths, assumptions(panels[k])))
        yield _row({**head, **_safe(finding_values(f))})


def no_finding_rows(panels: Iterable[PanelResult], paths: LocalPaths,
                    assumptions: PanelAssumptions) -> Iterable[list[Any]]:
    """One row for each of ``panels`` that has no finding: its verdict and why."""
    for p in panels:
        if not p.findings:
            yield _row(_safe({"severity": NO_FINDING, **panel_values(p, paths, assumptions(p))}))


def problem_rows(problems: Iterable[RowProblem], paths: LocalPaths) -> Iterable[list[Any]]:
    """One row per rejected row ("rejected row") or warning ("warning")."""
    for q in problems:
        yield _row(_safe({"severity": "rejected row" if q.severity == "error" else "warning",
                          "panel": q.record, "file": paths.name(q.file), "sheet": q.sheet,
                          "row": q.row, "column": q.column, "message": paths.scrub(q.message)}))


def findings_csv(result: AuditResult) -> str:
    """Findings, panels with no finding, then rejected rows and warnings, as CSV text (RFC
    4180: CRLF line ends, a field with a comma, quote or line break quoted)."""
    paths = local_paths(result)
    assumptions = PanelAssumptions(result)
    ranked = result.ranked_panels()
    buf = io.StringIO()
    # RFC 4180 line ends (CRLF): the writer then quotes a field holding either break
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(CSV_COLUMNS)
    for rows in (finding_rows(ranked, paths, assumptions),
                 no_finding_rows(ranked, paths, assumptions),
                 problem_rows(result.problems, paths)):
        writer.writerows(rows)
    return buf.getvalue()


def write_csv(result: AuditResult, path: str | Path) -> Path:
    """``findings.csv``, UTF-8 with a byte-order mark (so a spreadsheet reads it as UTF-8)."""
    return write_atomic(prepared_path(path), findings_csv(result), encoding="utf-8-sig")
