"""``auditor calibrate``: each panel's tension fitted to its tap-test recording, against the
schedule."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import typer

from auditor.cli.options import AUDIT_HELP, Fit
from auditor.cli.terminal import print_problems

if TYPE_CHECKING:
    from auditor.calibrate.calibration import FitParameter

__all__ = ["calibrate_command"]

#: Each ``--fit`` choice as ``auditor.calibrate`` names its parameter.
_FIT_PARAMETER: dict[Fit, FitParameter] = {
    Fit.tension: "tension", Fit.tension_ratio: "tension_ratio",
    Fit.areal_density: "areal_density"}


def calibrate_command(
    schedule: list[Path] = typer.Argument(..., help="Schedule files with a 'tap test' column."),
    panel: str = typer.Option(None, "--panel", help="Only this panel id."),
    fit: Fit = typer.Option(Fit.tension, "--fit", help="What to fit from the peaks."),
    as_json: bool = typer.Option(False, "--json", help="Print the calibrations as JSON."),
    recordings_anywhere: bool = typer.Option(False, "--recordings-anywhere",
                                             help=AUDIT_HELP["recordings_anywhere"]),
) -> None:
    """Fit each panel's tension to its tap-test recording and compare with the schedule."""
    import json

    from rich.console import Console
    from rich.table import Table
    from rich.text import Text

    from auditor.audit import calibration_modes
    from auditor.calibrate import calibrate_schedule, calibration_to_dict, format_uncertainty
    from auditor.schedule import read_schedule

    console = Console(stderr=as_json)
    read = read_schedule(schedule)
    if not read.files:
        print_problems(console, read.problems)
        raise typer.Exit(2)

    with console.status("Fitting tap tests"):
        calibrations, problems = calibrate_schedule(read, calibration_modes(read.project),
                                                    panel_id=panel, fit=_FIT_PARAMETER[fit],
                                                    allow_outside=recordings_anywhere)
    every_problem = list(read.problems) + list(problems)
    if as_json:
        typer.echo(json.dumps({"panels": [calibration_to_dict(c) for c in calibrations],
                               "problems": [q.as_dict() for q in every_problem]},
                              indent=1, ensure_ascii=False))
    else:
        table = Table(title="Tap-test calibration", title_justify="left")
        for head in ("Panel", "Scheduled [N/m]", "Fitted [N/m]", "Change", "±", "Peaks",
                     "Matched", "Residual"):
            table.add_column(head, overflow="fold")
        for c in calibrations:
            table.add_row(Text(c.panel), f"{c.scheduled_tension:.0f}", f"{c.tension:.0f}",
                          f"{100 * (c.tension / c.scheduled_tension - 1):+.1f} %",
                          format_uncertainty(c), str(len(c.peaks_hz)),
                          str(len(c.matched)), f"{c.residual:.2f} %")
        console.print(table)
        print_problems(console, every_problem)
    raise typer.Exit(0 if calibrations or not every_problem else 2)
