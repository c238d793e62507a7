"""The blank schedule workbook: Panels, Equipment and Project sheets, and a "Read me".

Everything in it comes from ``auditor.schedule.vocabulary``, so the template always names the
columns, default units, accepted units, synonyms and words the reader understands.
"""

from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path

from auditor.atomic import write_atomic
from auditor.schedule import vocabulary as vocab
from auditor.units import known_units

__all__ = ["write_template", "build_template_workbook", "TEMPLATE_DATA_ROWS"]

TEMPLATE_DATA_ROWS = 1000  # rows that carry the drop-down lists
_FIXED_TIME = _dt.datetime(2024, 1, 1)

_PROJECT_ROWS = (
    ("project name", "", ""),
    ("reference", "", ""),
    ("client", "", ""),
    ("prepared by", "", ""),
    ("prepared for", "", ""),
    ("line frequency", "", "Electrical supply frequency: 50 or 60 Hz."),
    ("air density", 1.204, "Dry air at 20 °C."),
    ("speed of sound", 343, "Air at 20 °C."),
)

_CAUTION = (
    "The audit is advisory. Check natural frequencies on site (a tap test) before relying on "
    "them. Tensioning, re-tensioning and work at height involve stored energy and fall "
    "hazards: leave them to trained installers, following the system manufacturer's "
    "instructions, local codes and licensed professional practice. Fire ratings of "
    "membranes are outside this tool."
)


def _title(text: str) -> str:
    return text[:1].upper() + text[1:]


def _word_list(field: str) -> str:
    return ",".join(vocab.WORDS[field])


def _accepted_units(column: vocab.Column) -> str:
    if column.kind in ("quantity", "outline", "cutouts") and column.dimension:
        units = known_units(column.dimension)
        if column.dimension == "dimensionless":
            return "a plain number, or a percentage with %"
        return ", ".join(units) + " (or any unit of the same kind)"
    if column.kind == "count":
        return "a whole number"
    if column.kind == "word":
        return "one of: " + ", ".join(vocab.WORDS[column.field])
    return "text"


def build_template_workbook():
    """The blank schedule as an ``openpyxl.Workbook`` (not yet saved)."""
    from openpyxl import Workbook
    from openpyxl.styles import Alignment, Font, PatternFill
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation

    bold = Font(bold=True)
    fill = PatternFill("solid", fgColor="DDE6F0")
    wrap = Alignment(wrap_text=True, vertical="top")

    wb = Workbook()
    wb.properties.creator = "auditor"
    wb.properties.title = "Panel and equipment schedule"
    wb.properties.created = _FIXED_TIME
    wb.properties.modified = _FIXED_TIME

    def table_sheet(ws, columns: tuple[vocab.Column, ...]) -> None:
        for j, column in enumerate(columns, start=1):
            cell = ws.cell(row=1, column=j, value=column.header)
            cell.font, cell.fill = bold, fill
            ws.column_dimensions[get_column_letter(j)].width = max(12, len(column.header) + 2)
            if column.kind == "word":
                dv = DataValidation(type="list", formula1=f'"{_word_list(column.field)}"',
                                    allow_blank=True, showDropDown=False,
                                    errorStyle="warning", showErrorMessage=True,
                                    errorTitle=f"{_title(column.name)}",
                                    error="Not one of the listed words; the reader also "
                                          "accepts the synonyms in 'Read me'.",
                                    promptTitle=_title(column.name), prompt=column.meaning[:250],
                                    showInputMessage=True)
                letter = get_column_letter(j)
                dv.add(f"{letter}2:{letter}{TEMPLATE_DATA_ROWS + 1}")
                ws.add_data_validation(dv)
        ws.freeze_panes = "B2"

    panels = wb.active
    panels.title = "Panels"
    table_sheet(panels, vocab.PANEL_COLUMNS)
    equipment = wb.create_sheet("Equipment")
    table_sheet(equipment, vocab.EQUIPMENT_COLUMNS)

    project = wb.create_sheet("Project")
    for j, text in enumerate(("Key", "Value", "Notes"), start=1):
        cell = project.cell(row=1, column=j, value=text)
        cell.font, cell.fill = bold, fill
    by_name = {c.name: c for c in vocab.PROJECT_KEYS}
    for i, (name, value, note) in enumerate(_PROJECT_ROWS, start=2):
        column = by_name[name]
        project.cell(row=i, column=1, value=column.header)
        project.cell(row=i, column=2, value=value if value != "" else None)
        project.cell(row=i, column=3, value=note or column.meaning)
    project.column_dimensions["A"].width = 28
    project.column_dimensions["B"].width = 36
    project.column_dimensions["C"].width = 60

    readme = wb.create_sheet("Read me")
    lines: list[tuple] = [
        ("Panel and equipment schedule",),
        ("Fill the Panels and Equipment sheets (one row per panel or item) and the Project "
         "sheet. A header may carry its unit in brackets, e.g. 'Width (mm)'; a cell may carry "
         "its own unit, e.g. '48 in' or '900 N/m'; a bare number takes the header's unit, "
         "else the default unit below. Headers may be spelled as any synonym below, in any "
         "case; title rows above the header are allowed.",),
        (_CAUTION,),
        (),
        ("Sheet", "Column", "Default unit", "Accepted", "Also accepted as", "Meaning"),
    ]
    for sheet_name, columns in (("Panels", vocab.PANEL_COLUMNS),
                                ("Equipment", vocab.EQUIPMENT_COLUMNS),
                                ("Project", vocab.PROJECT_KEYS)):
        for column in columns:
            synonyms = [s for s in column.synonyms if "(" not in s]
            lines.append((sheet_name, _title(column.name), column.default_unit or "-",
                          _accepted_units(column), ", ".join(synonyms), column.meaning))
    lines += [(), ("Column", "Word", "Also accepted as")]
    labels = {"shape": "Shape", "material": "Material", "room_side": "Room side",
              "plenum_side": "Plenum side", "kind": "Kind"}
    for field, words in vocab.WORDS.items():
        for word, others in words.items():
            lines.append((labels[field], word, ", ".join(others)))
    for i, line in enumerate(lines, start=1):
        for j, value in enumerate(line, start=1):
            cell = readme.cell(row=i, column=j, value=value)
            cell.alignment = wrap
            if i == 1 or (line and line[0] in ("Sheet", "Column")):
                cell.font = bold
    for letter, width in zip("ABCDEF", (12, 22, 12, 40, 50, 70)):
        readme.column_dimensions[letter].width = width
    return wb


def write_template(path: str | os.PathLike, *, overwrite: bool = False) -> Path:
    """Write the blank schedule workbook.

    Parameters
    ----------
    path : path
        Where to write it (.xlsx).
    overwrite : bool
        Replace an existing file; otherwise an existing file raises ``FileExistsError``.

    Returns
    -------
    Path
        The file written (written to a temporary name first, then renamed).
    """
    target = Path(path)
    if target.exists() and not overwrite:
        raise FileExistsError(f"{target} exists already; choose another name or overwrite it")
    wb = build_template_workbook()
    return write_atomic(target, wb.save)
