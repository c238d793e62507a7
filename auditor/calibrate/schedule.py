"""Calibration of a schedule: every panel that names a tap-test recording.

Each panel's recording is found beside the schedule file it came from (and confined there,
``confinement``), read (``reader``) and fitted (``fit``); a recording that cannot be used
leaves the panel at its scheduled values and becomes a ``RowProblem`` naming the file, sheet,
row and the tap-test column as the user typed it.
"""

from __future__ import annotations

import os
from typing import Any, Mapping

from auditor.calibrate.calibration import Calibration, CalibrationError, FitParameter
from auditor.calibrate.confinement import OUTSIDE_FOLDER, locate_recording, schedule_folder
from auditor.calibrate.fit import ModesOf, calibrate_panel
from auditor.calibrate.reader import read_recording
from auditor.calibrate.recording import RecordingError
from auditor.model import Panel, RowProblem, Schedule, Severity

__all__ = ["calibrate_schedule"]


def _tap_test_column(panel: Panel) -> str:
    """The tap-test header as the user typed it (the one holding the cell, if several)."""
    headers = [column for column, _text in panel.entered if "tap" in column.casefold()]
    for column, text in panel.entered:
        if column in headers and text.strip() == (panel.tap_test or "").strip():
            return column
    return headers[0] if headers else "tap test"


def calibrate_schedule(
    schedule: Schedule,
    modes_of: ModesOf,
    *,
    panel_id: str | None = None,
    folders: Mapping[str, str | os.PathLike] | None = None,
    base_dir: str | os.PathLike | None = None,
    allow_outside: bool = False,
    line_frequency: float | None = None,
    fit: FitParameter = "tension",
    **options: Any,
) -> tuple[tuple[Calibration, ...], tuple[RowProblem, ...]]:
    """Calibrate every panel of a schedule that names a tap-test recording.

    A schedule is an untrusted file, so its tap-test cells are confined: each is a path
    relative to the folder of the schedule file it came from, and must resolve (links
    followed) to a file inside that folder or a folder below it. Any other path (absolute,
    climbing out with ``..``, or through a link that leads out) is not opened: it is an
    error ``RowProblem`` whose message does not show where the path leads. Recordings are
    named in every message and in ``Calibration.recording`` by the path as typed, never by
    an absolute path, and their content is never quoted.

    Parameters
    ----------
    schedule : Schedule
    modes_of : callable (Panel) -> sequence of Mode
    panel_id : str or None
        Calibrate only this panel.
    folders : mapping of str to path, or None
        The folder of each schedule file, keyed by the file as the panels name it
        (``Panel.source.file``). Not needed for a schedule from ``read_schedule``: by
        default the folder is that of the file the schedule records it read
        (``auditor.schedule.inputs.input_location``), or, for a schedule made in memory,
        the folder of an absolute ``Panel.source.file``. A panel whose folder is not known
        gets a warning and keeps its scheduled values.
    base_dir : path or None
        One folder for every panel instead of ``folders``.
    allow_outside : bool
        Open recordings wherever their paths lead. For an explicit choice of the user (a
        command-line flag); never the default.
    line_frequency : float or None  [Hz]
        Defaults to the project's line frequency.
    fit : {"tension", "tension_ratio", "areal_density"}
    **options
        Passed to ``calibrate_panel``.

    Returns
    -------
    calibrations : tuple of Calibration
    problems : tuple of RowProblem
        One per recording that was not used, naming the file, sheet, row and the tap-test
        column as typed. Severity "error" for a path outside the schedule's folder;
        "warning" for a recording that could not be read or fitted. Either way the panel is
        still audited at its scheduled values.
    """
    if line_frequency is None:
        line_frequency = schedule.project.line_frequency
    calibrations: list[Calibration] = []
    problems: list[RowProblem] = []
    panels = [p for p in schedule.panels if panel_id is None or p.panel == panel_id]
    if panel_id is not None and not panels:
        problems.append(RowProblem(file="", sheet="", row=None, column="",
                                   message=f"no panel '{panel_id}' in the schedule",
                                   severity="warning", record=panel_id))
    for panel in panels:
        if not panel.tap_test or not panel.tap_test.strip():
            continue

        def problem(message: str, severity: Severity = "warning", panel: Panel = panel) -> None:
            problems.append(RowProblem(
                file=panel.source.file, sheet=panel.source.sheet, row=panel.source.row,
                column=_tap_test_column(panel),
                message=f"tap test not used (scheduled values kept): {message}",
                severity=severity, text=panel.tap_test or "", record=panel.panel))

        folder = schedule_folder(schedule, panel, folders, base_dir)
        if folder is None:
            problem("the folder of this schedule file is not known, so the recording "
                    "cannot be found")
            continue
        located = locate_recording(panel.tap_test, folder, allow_outside)
        if located is None:
            problem(OUTSIDE_FOLDER + " (pass --recordings-anywhere to allow it)")
            continue
        path, shown = located
        try:
            recording = read_recording(path, name=shown)
            calibrations.append(calibrate_panel(panel, recording, modes_of,
                                                line_frequency=line_frequency, fit=fit,
                                                **options))
        except (RecordingError, CalibrationError) as error:
            problem(str(error))
    return tuple(calibrations), tuple(problems)
