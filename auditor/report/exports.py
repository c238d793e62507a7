"""Machine-readable outputs: the findings document, the CSV table, the audited workbook.

One module per format; this one gathers their public names so callers import from one place:

- ``auditor.report.json_doc``: ``findings.json`` / ``auditor audit --json`` (plain data encoded by
  ``orjson``);
- ``auditor.report.csv_table``: ``findings.csv`` (one row per finding, per panel with no
  finding, per rejected row);
- ``auditor.report.workbook``: ``<schedule>-audited.xlsx`` (the schedule copy with verdict
  colours, Panel verdicts, Findings and Rejected rows sheets);
- ``auditor.report.records``: what all three say about a panel (order, listed modes,
  assumptions); ``auditor.report.provenance``: names without folders.

Writers only read the ``AuditResult``; every file is written atomically
(:func:`auditor.atomic.write_atomic`), and the input workbook is never opened for writing.
"""

from __future__ import annotations

from auditor.report.csv_table import CSV_COLUMNS, findings_csv, neutralise, write_csv
from auditor.report.json_doc import (
    INDENT_PANELS,
    finding_dict,
    findings_document,
    findings_json,
    panel_dict,
    panel_modes_dict,
    remedy_dict,
    write_json,
)
from auditor.report.provenance import (
    input_file_location,
    local_paths,
    problem_dict,
    ruleset_origin,
)
from auditor.report.records import LOWEST_MODES_LISTED, MODES_LISTED, listed_modes
from auditor.report.workbook import (
    audited_workbook,
    audited_workbook_bytes,
    write_audited_workbooks,
)

__all__ = [
    "write_json", "write_csv", "write_audited_workbooks", "findings_json", "panel_modes_dict",
    "findings_document", "findings_csv", "audited_workbook", "audited_workbook_bytes",
    "finding_dict", "panel_dict", "remedy_dict", "problem_dict", "neutralise", "CSV_COLUMNS",
    "INDENT_PANELS", "LOWEST_MODES_LISTED", "MODES_LISTED", "listed_modes", "local_paths",
    "input_file_location", "ruleset_origin",
]
