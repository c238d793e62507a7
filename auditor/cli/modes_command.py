"""``auditor modes``: natural frequencies, patterns and participation of scheduled panels,
or of one panel described by options."""

from __future__ import annotations

from pathlib import Path

import typer

from auditor.cli.options import PANEL_OPTIONS
from auditor.cli.terminal import mode_table, print_problems, progress_bar

__all__ = ["modes"]


def modes(
    schedule: list[Path] = typer.Argument(None, help="Schedule files (.xlsx or .csv)."),
    panel: str = typer.Option(None, "--panel", help="Only this panel id."),
    fmax: float = typer.Option(500.0, "--fmax", help="Highest frequency [Hz]."),
    max_modes: int = typer.Option(30, "--max-modes", help="At most this many modes a panel."),
    as_json: bool = typer.Option(False, "--json", help="Print the modes as JSON."),
    sketch: int = typer.Option(4, "--sketch", help="Sketch this many modes a panel (text form)."),
    shape: str = typer.Option(None, help="One-off panel: rectangle, circle or polygon."),
    width: str = typer.Option(None, help="One-off: width along x, e.g. '2400 mm'."),
    length: str = typer.Option(None, help="One-off: length along y."),
    diameter: str = typer.Option(None, help="One-off: diameter of a circle."),
    outline: str = typer.Option(None, help="One-off: polygon 'x,y; x,y; ...' [m]."),
    cutouts: str = typer.Option(None, "--cut-outs", help="One-off: 'circle x,y,d | x,y; ...'."),
    material: str = typer.Option(None, help="One-off: film, fabric, mesh or plate."),
    areal_density: str = typer.Option(None, help="One-off: e.g. '250 g/m^2'."),
    tension: str = typer.Option(None, help="One-off: e.g. '800 N/m' (both directions)."),
    tension_x: str = typer.Option(None, help="One-off: tension along the width."),
    tension_y: str = typer.Option(None, help="One-off: tension along the length."),
    bending_stiffness: str = typer.Option(None, help="One-off: flexural rigidity [N·m]."),
    loss_factor: str = typer.Option(None, help="One-off: structural loss factor."),
    airflow_resistance: str = typer.Option(None, help="One-off: [Pa·s/m]."),
    room_side: str = typer.Option(None, help="One-off: air or none."),
    plenum_side: str = typer.Option(None, help="One-off: air, sealed or none."),
    cavity_depth: str = typer.Option(None, help="One-off: depth of a sealed plenum."),
) -> None:
    """Natural frequencies, patterns and participation of panels (from a schedule, or one-off)."""
    import json

    from rich.console import Console

    from auditor.audit import unsolvable_problem
    from auditor.physics.modes import modes_for
    from auditor.report.exports import panel_modes_dict
    from auditor.report.sketch import sketch_mode
    from auditor.schedule import read_rows, read_schedule

    given = locals()
    one_off = {header: given[name] for name, header in PANEL_OPTIONS if given[name] is not None}
    console = Console(stderr=as_json)
    if one_off and schedule:
        console.print("[red]give either schedule files or one-off panel options, not both[/]")
        raise typer.Exit(2)
    if one_off:
        read = read_rows(["panel", *one_off], [["one-off", *one_off.values()]])
    elif schedule:
        read = read_schedule(schedule)
        if not read.files:
            print_problems(console, read.problems)
            raise typer.Exit(2)
    else:
        console.print("[red]give schedule files, or a one-off panel[/] "
                      "(e.g. --width '2400 mm' --length 1.2 --tension '800 N/m' "
                      "--areal-density '250 g/m^2')")
        raise typer.Exit(2)
    panels = [p for p in read.panels if panel is None or p.panel == panel]
    if panel is not None and not panels:
        console.print(f"[red]no panel {panel!r} in the schedule[/]")
        raise typer.Exit(2)
    problems = list(read.problems)
    out = []
    bar, update = progress_bar("Solving modes")
    with bar:
        for done, p in enumerate(panels, start=1):
            try:
                result = modes_for(p, fmax, max_modes=max_modes,
                                   air_density=read.project.air_density,
                                   speed_of_sound=read.project.speed_of_sound)
            except ValueError as exc:  # GeometryError included
                problems.append(unsolvable_problem(p, exc))
                continue
            out.append((p, result))
            update(done, len(panels))
    if as_json:
        doc = {"panels": [panel_modes_dict(p, r) for p, r in out],
               "problems": [q.as_dict() for q in problems]}
        typer.echo(json.dumps(doc, indent=1, ensure_ascii=False))
    else:
        for p, r in out:
            console.print(mode_table(p.panel, r.modes, r.loading))
            for note in r.notes:
                console.print(f"  note: {note}")
            for k, m in enumerate(r.modes[:max(0, sketch)]):
                console.print(f"  {m.label}  {m.frequency_hz:.1f} Hz")
                for line in sketch_mode(r.basis, m.index, vector=r.vectors[:, k]):
                    console.print("    " + line, markup=False, highlight=False)
        print_problems(console, problems)
    raise typer.Exit(0 if out or not problems else 2)
