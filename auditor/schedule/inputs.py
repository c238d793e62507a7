"""Schedule files by name: what outputs show, and where the reader found them.

No output names a file by where it lies on the machine that ran the audit (DESIGN.md,
"Report"): a schedule is named by its file name as the user knows it ("schedule.xlsx"), and
only when two files of one run share a name by as many of their folders as tell them apart
("site-a/schedule.xlsx", "site-b/schedule.xlsx"), never from the root. ``SourceRef.file``,
``RowProblem.file`` and ``InputFile.path`` hold that name.

Where the file was read stays in memory only, on :class:`ScheduleFile` (an ``InputFile``
with its ``location``): the tap-test recordings beside a schedule and the audited copy of a
workbook are found through :func:`input_location`, never through the name.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Sequence

from auditor.model import InputFile, Schedule
from auditor.schedule import vocabulary as vocab
from auditor.schedule.cells import clean_text
from auditor.schedule.sources import RawSheet

__all__ = ["ScheduleFile", "display_names", "input_location", "resolved", "unread_file_message"]


@dataclass(frozen=True)
class ScheduleFile(InputFile):
    """An input file as read: ``path`` is its name as outputs show it (see the module's
    notes), ``sha256`` its hash, and ``location`` the absolute path it was read from, for
    use in memory only: no writer may put it in an output."""

    location: str = field(default="", repr=False, compare=False)


def resolved(path: str | os.PathLike) -> Path:
    """The absolute path of ``path`` (links followed); as typed when it cannot be resolved
    (a name with a NUL character, a link loop): opening it then fails with a clear message."""
    try:
        return Path(path).resolve()
    except (OSError, RuntimeError, ValueError):
        return Path(os.fspath(path))


def _parts(path: str | os.PathLike) -> tuple[str, ...]:
    parts = resolved(path).parts
    parts = parts[1:] if parts and Path(parts[0]).anchor == parts[0] and len(parts) > 1 else parts
    return tuple(clean_text(part)[0] for part in parts) or (clean_text(os.fspath(path))[0],)


def display_names(paths: Sequence[str | os.PathLike]) -> list[str]:
    """The name each file is shown by: its base name, with as many folders as tell apart
    two different files of one name (the same file given twice keeps one name).

    Parameters
    ----------
    paths : sequence of path

    Returns
    -------
    list of str
        One name per path, in order; never an absolute path.
    """
    parts = [_parts(p) for p in paths]
    names = []
    for mine in parts:
        others = [p for p in parts if p != mine]
        depth = 1
        while depth < len(mine) and any(p[-depth:] == mine[-depth:] for p in others):
            depth += 1
        names.append("/".join(mine[-depth:]))
    return names


def input_location(schedule: Schedule, name: str) -> Path | None:
    """Where the schedule file shown as ``name`` was read from, or None when unknown.

    Parameters
    ----------
    schedule : Schedule
        As ``read_schedule`` made it.
    name : str
        ``SourceRef.file`` of a record, ``RowProblem.file`` or ``InputFile.path``.

    Returns
    -------
    Path or None
        The absolute path of the file (its folder holds the tap-test recordings the
        schedule names); None for a schedule not read from files.
    """
    for item in schedule.files:
        location = getattr(item, "location", "")   # a ScheduleFile's; "" for an InputFile
        if item.path == name and location:
            return Path(location)
    return None


def unread_file_message(name: str, sheets: list[RawSheet], tables: set[str]) -> str | None:
    """Why nothing was read from a file in which no panel or equipment table was found
    (naming the sheets looked at); None when one was found.

    Parameters
    ----------
    name : str
        The file as shown.
    sheets : list of RawSheet
        Its sheets (one for a CSV file).
    tables : set of str
        The kinds of table found in it ("panels", "equipment", "project").
    """
    if tables & {vocab.PANELS, vocab.EQUIPMENT}:
        return None
    looked = [s.name for s in sheets if s.csv or not vocab.is_note_sheet(s.name)]
    skipped = [s.name for s in sheets if not s.csv and vocab.is_note_sheet(s.name)]
    where = ("the file" if any(s.csv for s in sheets) else
             "sheets looked at: " + (", ".join(repr(n) for n in looked) or "none"))
    if skipped:
        where += "; skipped as notes for people: " + ", ".join(repr(n) for n in skipped)
    found = " (only project facts)" if vocab.PROJECT in tables else ""
    return (f"no panel table and no equipment table was found in {name}{found} ({where}); a "
            "panel table has a header row naming a panel id column and its sizes, e.g. "
            "'Panel | Width (m) | Length (m) | Areal density (kg/m²) | Tension (N/m)'; "
            "nothing was read from this file")
