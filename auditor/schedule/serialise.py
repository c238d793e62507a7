"""A schedule as plain data (for ``auditor check --json`` and machine-readable exports).

Quantities are in SI under the record's attribute names (``areal_density`` [kg/m²],
``tension_x`` [N/m], ``width`` [m], ``rpm`` [rpm] ...); ``entered`` keeps each cell as the user
typed it, beside its header as typed.
"""

from __future__ import annotations

from dataclasses import fields
from typing import Any

from auditor.model import CircleCutout, Equipment, Panel, PolygonCutout, Schedule

__all__ = ["schedule_to_dict", "panel_to_dict", "equipment_to_dict", "typed_values"]


def _cutout(cut) -> dict[str, Any]:
    if isinstance(cut, CircleCutout):
        return {"type": "circle", "x": cut.x, "y": cut.y, "diameter": cut.diameter}
    if isinstance(cut, PolygonCutout):
        return {"type": "polygon", "vertices": [list(v) for v in cut.vertices]}
    raise TypeError(f"not a cut-out: {cut!r}")


def _record(record) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for f in fields(record):
        value = getattr(record, f.name)
        if f.name == "source":
            value = {"file": value.file, "sheet": value.sheet, "row": value.row}
        elif f.name == "entered":
            value = [[header, text] for header, text in value]
        elif f.name == "cutouts":
            value = [_cutout(c) for c in value]
        elif f.name == "outline" and value is not None:
            value = [list(v) for v in value]
        elif f.name == "zones" and value is not None:
            value = list(value)
        out[f.name] = value
    return out


def panel_to_dict(panel: Panel) -> dict[str, Any]:
    """One panel as a dict of SI values (plus ``source`` and ``entered``)."""
    return _record(panel)


def equipment_to_dict(item: Equipment) -> dict[str, Any]:
    """One item of equipment as a dict (``zones`` None means every zone)."""
    return _record(item)


def schedule_to_dict(schedule: Schedule) -> dict[str, Any]:
    """The whole schedule as JSON-ready data.

    Parameters
    ----------
    schedule : Schedule

    Returns
    -------
    dict
        ``{"panels": [...], "equipment": [...], "project": {...}, "problems": [...],
        "files": [...]}``; each problem has ``file, sheet, row, column, message, severity,
        text, record``; ``project["extra"]`` maps each unknown key as typed to its value;
        each file is its ``name`` (never a folder) and ``sha256``.
    """
    project = schedule.project
    project_dict = {f.name: getattr(project, f.name) for f in fields(project)}
    project_dict["extra"] = {key: value for key, value in project.extra}
    return {
        "panels": [panel_to_dict(p) for p in schedule.panels],
        "equipment": [equipment_to_dict(e) for e in schedule.equipment],
        "project": project_dict,
        "problems": [p.as_dict() for p in schedule.problems],
        "files": [{"name": f.path, "sha256": f.sha256} for f in schedule.files],
    }


def typed_values(record: Panel | Equipment) -> dict[str, str]:
    """Each filled field of a record as the user typed it, with the header's unit added.

    Parameters
    ----------
    record : Panel or Equipment

    Returns
    -------
    dict
        Field name → text, e.g. ``{"width": "1200 mm", "tension": "5 lbf/in"}``: a bare
        number typed under ``Width (mm)`` comes back as ``"1200 mm"``.
    """
    from auditor.schedule import vocabulary as vocab

    table = vocab.PANELS if isinstance(record, Panel) else vocab.EQUIPMENT
    out: dict[str, str] = {}
    for header, text in record.entered:
        hit = vocab.match_header(header, table)
        if hit is None:
            continue
        column, unit = hit
        shown = text
        if column.kind == "quantity":
            try:
                float(text)
            except ValueError:
                pass
            else:
                unit = unit if unit is not None else column.default_unit
                shown = f"{text} {unit}" if unit and unit != "-" else text
        out[column.field] = shown
    return out
