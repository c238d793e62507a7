"""The findings document (``findings.json``, ``auditor audit --json``) as plain data and JSON.

The document is built as plain Python data (dicts, lists, strings, numbers) and encoded by
``orjson`` (a maintained encoder, about ten times the speed of the standard library's ``json``
on a 45 MB document: 0.1 s against 1.1 s); SI units throughout (Hz, N/m, dB). Its shape::

    {"version", "created", "calibrated", "project", "files", "rules", "summary",
     "safety_note", "modes_listed",
     "panels": [                                   # worst first (verdict, then response)
       {"panel", "zone", "shape", "material", "verdict", "verdict_reason",
        "assessed_to_hz", "overlap_from_hz", "worst_response_db", "tones_beyond",
        "assumptions", "remedy", "loading", "notes", "source", "mode_count", "modes",
        "findings", "measured_peaks_hz"}],
     "problems": [...]}

Each panel's ``remedy`` is its one remedy (``{"tension", "tension_y", "bays",
"clear_windows", "text", "work", "verified", "cautions", "fundamental_hz"}`` or null;
``fundamental_hz`` is the full model's at the proposed tension, or of one bay); findings carry
none of their own. ``findings`` are worst first, each with its ``response_db`` and path
(``path``, ``mount``, ``transmissibility``, ``amplification``). ``modes`` lists the modes
``modes_listed`` names (``auditor.report.records``), ``mode_count`` counts them all.

References
----------
.. [1] T. Bray (ed.), "The JavaScript Object Notation (JSON) Data Interchange Format",
   RFC 8259, IETF, 2017: no infinity or NaN (§6), UTF-8 without a byte-order mark (§8.1).
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import orjson

from auditor.atomic import write_atomic
from auditor.remedy import SAFETY_NOTE
from auditor.report.provenance import (
    local_paths,
    prepared_path,
    problem_dict,
    ruleset_origin,
)
from auditor.report.records import (
    MODES_LISTED,
    PanelAssumptions,
    finite,
    listed_modes,
)
from auditor.report.text import LocalPaths
from auditor.results import AuditResult, Excitation, Finding, PanelResult, Remedy

__all__ = ["INDENT_PANELS", "finding_dict", "remedy_dict", "panel_dict", "panel_modes_dict",
           "findings_document", "findings_json", "write_json"]

#: Up to this many panels the JSON is indented for people to read; above it, compact (a
#: document that large is for programs).
INDENT_PANELS = 500


def remedy_dict(r: Remedy | None) -> dict[str, Any] | None:
    """A panel's remedy as the findings document gives it (SI: N/m)."""
    if r is None:
        return None
    return {
        "tension": r.tension,
        "tension_y": r.tension_y,
        "bays": r.bays,
        "clear_windows": [[low, high] for low, high in r.clear_windows],
        "text": r.text,
        "work": r.work,
        "verified": r.verified,
        "cautions": r.cautions,
        "fundamental_hz": r.fundamental_hz,
    }


def finding_dict(f: Finding) -> dict[str, Any]:
    """One finding as the findings document gives it (SI: Hz; response in dB)."""
    e = f.excitation
    return {
        "severity": f.severity,
        "response_db": finite(f.response_db),
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
        "path": e.path,
        "airborne": e.airborne,
        "mount": e.mount.description if e.mount is not None else None,
        "transmissibility": f.transmissibility,
        "amplification": f.amplification,
        "overlap": f.overlap,
        "separation": f.separation,
        "margin": f.margin,
    }


def _tone_dict(e: Excitation) -> dict[str, Any]:
    return {"equipment": e.equipment, "excitation": e.description,
            "excitation_hz": e.frequency_hz, "band_hz": list(e.band_hz) if e.band_hz else None}


def panel_dict(p: PanelResult, paths: LocalPaths | None = None,
               assumptions: tuple[str, ...] = ()) -> dict[str, Any]:
    """One panel as the findings document gives it: verdict, remedy, the modes
    ``modes_listed`` names and ``mode_count``, findings worst first."""
    paths = paths if paths is not None else LocalPaths({})
    return {
        "panel": p.panel.panel,
        "zone": p.panel.zone,
        "shape": p.panel.shape,
        "material": p.panel.material,
        "verdict": p.verdict,
        "verdict_reason": paths.scrub(p.verdict_reason),
        "assessed_to_hz": finite(p.assessed_to_hz),
        "overlap_from_hz": finite(p.overlap_from_hz),
        "worst_response_db": finite(p.worst_db),
        "tones_beyond": [_tone_dict(e) for e in p.beyond],
        "assumptions": list(assumptions),
        "remedy": remedy_dict(p.remedy),
        "loading": paths.scrub(p.loading),
        "notes": [paths.scrub(n) for n in p.notes],
        "source": {"file": paths.name(p.panel.source.file), "sheet": p.panel.source.sheet,
                   "row": p.panel.source.row},
        "mode_count": len(p.modes),
        "modes": [m.as_dict() for m in listed_modes(p)],
        "findings": [finding_dict(f) for f in p.findings],
        "measured_peaks_hz": list(p.measured_peaks_hz),
    }


def panel_modes_dict(panel, panel_modes) -> dict[str, Any]:
    """One panel's modes as ``auditor modes --json`` gives them (every mode asked for)."""
    return {
        "panel": panel.panel,
        "loading": panel_modes.loading,
        "notes": list(panel_modes.notes),
        "modes": [m.as_dict() for m in panel_modes.modes],
    }


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
        "modes_listed": MODES_LISTED,
    }


def findings_document(result: AuditResult) -> dict[str, Any]:
    """The findings document as plain data (see the module docstring for its shape)."""
    paths = local_paths(result)
    assumptions = PanelAssumptions(result)
    return {**_document_head(result, paths),
            "panels": [panel_dict(p, paths, assumptions(p)) for p in result.ranked_panels()],
            "problems": [problem_dict(q, paths) for q in result.problems]}


def findings_json(result: AuditResult) -> str:
    """The findings document as JSON text: indented up to ``INDENT_PANELS`` panels, compact
    above. No infinity or NaN is written (the document holds None instead, and the encoder
    would write null; RFC 8259, §6).

    ``orjson`` refuses text that UTF-8 cannot carry: a lone surrogate (from a damaged input).
    Such a document is written by the standard ``json`` module instead (the same content),
    which keeps the surrogate in the text as it is: written to a file it becomes its JSON
    escape (see :func:`write_json`).
    """
    document = findings_document(result)
    indent = len(result.panels) <= INDENT_PANELS
    try:
        return orjson.dumps(document, option=orjson.OPT_SERIALIZE_NUMPY
                            | (orjson.OPT_INDENT_2 if indent else 0)).decode("utf-8")
    except orjson.JSONEncodeError:
        return json.dumps(document, indent=2 if indent else None,
                          separators=None if indent else (",", ":"),
                          ensure_ascii=False, allow_nan=False)


def write_json(result: AuditResult, path: str | Path) -> Path:
    """``findings.json``, UTF-8 with no byte-order mark (RFC 8259, §8.1). A lone surrogate,
    which UTF-8 cannot carry, is written as its JSON escape (``\\udc80``): it can only stand
    inside a JSON string (RFC 8259, §7)."""
    data = findings_json(result).encode("utf-8", errors="backslashreplace")
    return write_atomic(prepared_path(path), data)
