"""Where a schedule's tap-test recordings may be read from.

A schedule is an untrusted file, so its tap-test cells are confined: each is a path relative
to the folder of the schedule file it came from, and must resolve (links followed) to a file
inside that folder or a folder below it. Any other path (absolute, climbing out with ``..``,
or through a link that leads out) is not opened, and the message that says so does not show
where the path leads. A recording is named by the path as typed, never by an absolute path.
Only an explicit choice of the user (a command-line flag) opens recordings wherever their
paths lead.
"""

from __future__ import annotations

import os
import posixpath
from pathlib import Path
from typing import Mapping

from auditor.model import Panel, Schedule
from auditor.schedule.inputs import input_location

__all__ = ["OUTSIDE_FOLDER", "locate_recording", "schedule_folder"]

#: Why a recording outside the schedule's folder is not opened (no path is echoed).
OUTSIDE_FOLDER = (
    "the recording must be inside the schedule's folder (or a folder below it); an absolute "
    "path, a path that climbs out with '..', or a link that leads out is not opened")


def locate_recording(cell: str, folder: Path, allow_outside: bool) -> tuple[Path, str] | None:
    """Where a tap-test cell points, and how to name it; None when it leads out of ``folder``.

    The cell is a path relative to the schedule's folder (``\\`` is taken for ``/``, as a
    schedule typed on Windows writes it). Unless ``allow_outside``, the path is resolved,
    links followed, and must lie inside the resolved folder; the resolved path, with no
    link left in it, is what is then opened.
    """
    typed = cell.strip().replace("\\", "/")
    if allow_outside:
        absolute = Path(typed).is_absolute()
        return folder / typed, Path(typed).name if absolute else posixpath.normpath(typed)
    try:
        root = folder.resolve()
        target = (root / typed).resolve()
    except (OSError, RuntimeError, ValueError):  # a link loop, a NUL byte, a name too long
        return None
    if Path(typed).is_absolute() or not target.is_relative_to(root):
        return None
    return target, posixpath.normpath(typed)


def schedule_folder(schedule: Schedule, panel: Panel,
                    folders: Mapping[str, str | os.PathLike] | None,
                    base_dir: str | os.PathLike | None) -> Path | None:
    """The folder a panel's tap-test path is relative to, or None when it is not known."""
    if base_dir is not None:
        return Path(base_dir)
    if folders is not None:
        folder = folders.get(panel.source.file)
        return Path(folder) if folder is not None else None
    location = input_location(schedule, panel.source.file)
    if location is not None:
        return location.parent
    if os.path.isabs(panel.source.file):  # a schedule made in memory, naming its file in full
        return Path(panel.source.file).parent
    return None
