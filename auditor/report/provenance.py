"""Where the inputs and the rule set came from, named without any folder of the machine.

No output names a folder of the machine that ran the audit: inputs go by their file name (and
SHA-256), a bundled rule set by its name, a rule set of the user's by its file name and
SHA-256. Every writer (JSON, CSV, the audited workbook, the PDF) names things through here.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path
from typing import Any

from auditor.model import RowProblem
from auditor.report.text import LocalPaths, file_name, is_absolute_path
from auditor.results import AuditResult

__all__ = ["local_paths", "input_file_location", "ruleset_origin", "problem_dict",
           "prepared_path"]


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


def prepared_path(path: str | Path) -> Path:
    """``path`` as a ``Path``, its folder made if missing."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    return path
