"""``auditor check`` (what was read from a schedule, and every problem) and ``auditor
template`` (a blank schedule workbook)."""

from __future__ import annotations

from pathlib import Path

import typer

__all__ = ["check", "template"]

_CHECK_ROWS_SHOWN = 200


def _with_si(typed: dict[str, str], field: str, value, dimension: str) -> str:
    from auditor.units import format_quantity

    if value is None:
        return ""
    si = format_quantity(value, dimension)
    text = typed.get(field)
    return si if text is None or text == si else f"{text} → {si}"


def _panel_rows(schedule):
    from auditor.schedule.serialise import typed_values

    for p in schedule.panels:
        typed = typed_values(p)
        if p.shape == "rectangle":
            size = " × ".join(x for x in (_with_si(typed, "width", p.width, "length"),
                                         _with_si(typed, "length", p.length, "length")))
        elif p.shape == "circle":
            size = "⌀ " + _with_si(typed, "diameter", p.diameter, "length")
        else:
            size = f"{len(p.outline or ())} vertices"
        if p.cutouts:
            size += f", {len(p.cutouts)} cut-out{'s' if len(p.cutouts) > 1 else ''}"
        if p.isotropic:
            tension = _with_si(typed, "tension", p.tension_x, "tension") if "tension" in typed \
                else _with_si(typed, "tension_x", p.tension_x, "tension")
        else:
            tension = (f"x {_with_si(typed, 'tension_x', p.tension_x, 'tension')}; "
                       f"y {_with_si(typed, 'tension_y', p.tension_y, 'tension')}")
        plenum = p.plenum_side
        if p.cavity_depth is not None:
            plenum += f" {_with_si(typed, 'cavity_depth', p.cavity_depth, 'length')}"
        yield (f"{p.source.sheet}:{p.source.row}", p.panel, p.zone, p.shape, p.material, size,
               _with_si(typed, "areal_density", p.areal_density, "areal_density"), tension,
               f"room {p.room_side}; plenum {plenum}")


def _equipment_rows(schedule):
    from auditor.schedule.serialise import typed_values

    for e in schedule.equipment:
        typed = typed_values(e)
        speed = _with_si(typed, "rpm", e.rpm, "rotational_speed")
        if e.rpm_min is not None:
            speed = (speed + "; " if speed else "") + (
                f"{_with_si(typed, 'rpm_min', e.rpm_min, 'rotational_speed')} to "
                f"{_with_si(typed, 'rpm_max', e.rpm_max, 'rotational_speed')}")
        counts = ", ".join(f"{getattr(e, n)} {n}" for n in ("blades", "vanes", "cylinders",
                                                           "poles") if getattr(e, n) is not None)
        other = []
        for field, dimension in (("frequency", "frequency"), ("frequency_min", "frequency"),
                                 ("frequency_max", "frequency"), ("line_frequency", "frequency"),
                                 ("velocity", "velocity"), ("wire_diameter", "length"),
                                 ("pulley_diameter", "length"), ("belt_length", "length"),
                                 ("slip", "dimensionless")):
            value = getattr(e, field)
            if value is not None:
                shown = _with_si(typed, field, value, dimension)
                other.append(f"{field.replace('_', ' ')} {shown}")
        zones = "all" if e.zones is None else ", ".join(e.zones)
        yield (f"{e.source.sheet}:{e.source.row}", e.equipment, e.kind, zones, speed, counts,
               "; ".join(other))


def check(
    schedule: list[Path] = typer.Argument(..., help="Schedule files (.xlsx or .csv)."),
    as_json: bool = typer.Option(False, "--json", help="Print what was read as JSON."),
) -> None:
    """Read schedule files and show what was understood, and every problem."""
    import json

    from rich.console import Console
    from rich.progress import Progress
    from rich.table import Table
    from rich.text import Text

    from auditor.schedule import read_schedule, schedule_to_dict

    console = Console(stderr=as_json)
    with Progress(console=Console(stderr=True), transient=True) as bar:
        task = bar.add_task("Reading", total=None)
        result = read_schedule(schedule, progress=lambda done, total: bar.update(
            task, completed=done, total=total))
    if as_json:
        typer.echo(json.dumps(schedule_to_dict(result), indent=2, ensure_ascii=False))
        raise typer.Exit(0 if result.files else 2)

    def show(title: str, headers: tuple[str, ...], rows) -> None:
        rows = list(rows)
        if not rows:
            return
        table = Table(title=title, title_justify="left", show_lines=False)
        for h in headers:
            table.add_column(h, overflow="fold")
        for r in rows[:_CHECK_ROWS_SHOWN]:
            # user text is shown literally (a header like "Tension [lbf/in]" is not markup)
            table.add_row(*(x if isinstance(x, Text) else Text(str(x)) for x in r))
        console.print(table)
        if len(rows) > _CHECK_ROWS_SHOWN:
            console.print(f"… and {len(rows) - _CHECK_ROWS_SHOWN} more (see --json)")

    show("Panels", ("Row", "Panel", "Zone", "Shape", "Material", "Size", "Areal density",
                    "Tension", "Backing"), _panel_rows(result))
    show("Equipment", ("Row", "Tag", "Kind", "Zones", "Speed", "Counts", "Other"),
         _equipment_rows(result))
    p = result.project
    facts = [(k, v) for k, v in (("Project name", p.name), ("Reference", p.reference),
                                 ("Client", p.client), ("Prepared by", p.prepared_by),
                                 ("Prepared for", p.prepared_for),
                                 ("Line frequency", "" if p.line_frequency is None
                                  else f"{p.line_frequency:g} Hz"),
                                 ("Air density", f"{p.air_density:g} kg/m³"),
                                 ("Speed of sound", f"{p.speed_of_sound:g} m/s")) if v]
    if result.files:
        show("Project", ("Key", "Value"), facts + list(p.extra))
    show("Problems", ("", "File", "Sheet", "Row", "Column", "Record", "Message", "Cell"),
         ((Text("error", style="red") if q.severity == "error"
           else Text("warning", style="yellow"), q.file, q.sheet,
           "" if q.row is None else q.row, q.column, q.record, q.message, q.text)
          for q in result.problems))
    errors = sum(1 for q in result.problems if q.severity == "error")
    warnings = len(result.problems) - errors
    console.print(f"{len(result.panels)} panels, {len(result.equipment)} equipment items "
                  f"from {len(result.files)} of {len(schedule)} files; {errors} errors, "
                  f"{warnings} warnings.")
    raise typer.Exit(0 if result.files else 2)


def template(
    path: Path = typer.Argument(..., help="Workbook to write (.xlsx)."),
    force: bool = typer.Option(False, "--force", help="Overwrite an existing file."),
) -> None:
    """Write a blank schedule workbook with drop-down lists and a 'Read me' sheet."""
    from rich.console import Console

    from auditor.schedule import write_template

    console = Console()
    try:
        written = write_template(path, overwrite=force)
    except FileExistsError:
        console.print(f"[red]{path} exists already[/]; use --force to overwrite it.")
        raise typer.Exit(1) from None
    except OSError as exc:
        console.print(f"[red]could not write {path}[/]: {exc.strerror or exc}")
        raise typer.Exit(1) from None
    console.print(f"Wrote {written}")
