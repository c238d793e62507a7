"""The ``auditor`` command: a thin layer over the library (parse, call, show, exit code)."""

from __future__ import annotations

from enum import Enum
from pathlib import Path as _Path

import typer
from rich.markup import escape
from rich.text import Text

from auditor import __version__

app = typer.Typer(
    name="auditor",
    help="Resonance audit of tensioned panels and mesh screens against equipment tones.",
    no_args_is_help=True,
    add_completion=False,
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"auditor {__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                 help="Show the version and exit."),
) -> None:
    """Resonance audit of tensioned panels and mesh screens against equipment tones."""


# --- schedule commands: check, template ---------------------------------------------------

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


@app.command("check")
def check(
    schedule: list[_Path] = typer.Argument(..., help="Schedule files (.xlsx or .csv)."),
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


@app.command("template")
def template(
    path: _Path = typer.Argument(..., help="Workbook to write (.xlsx)."),
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


# --------------------------------------------------------------------------- modes, audit


def _progress_bar(description: str):
    """A rich progress bar and the ``progress(done, total)`` callable that drives it."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    bar = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                   TimeElapsedColumn(), console=_err_console(), transient=True)
    task = bar.add_task(description, total=None)

    def update(done: int, total: int) -> None:
        bar.update(task, completed=done, total=total)

    return bar, update


def _err_console():
    from rich.console import Console

    return Console(stderr=True)


_FAMILY_SHORT = {"parallel to length": "∥L", "parallel to width": "∥W",
                 "diameters": " diam.", "circles": " circ.", "nodal domains": " domains"}


def _mode_table(panel_id: str, modes, loading: str):
    from rich.markup import escape
    from rich.table import Table

    table = Table(title=f"Panel {escape(panel_id)}", title_justify="left",
                  caption=loading + "  Nodal lines: ∥L parallel to the length, ∥W to the "
                  "width.", caption_justify="left")
    for head in ("mode", "f [Hz]", "in vacuo [Hz]", "×", "participation", "loss factor",
                 "nodal lines"):
        table.add_column(head, justify="right" if head not in ("mode", "nodal lines") else "left")
    for m in modes:
        table.add_row(
            m.label, f"{m.frequency_hz:.2f}",
            "" if m.in_vacuo_hz is None else f"{m.in_vacuo_hz:.2f}",
            str(m.multiplicity), f"{m.participation:.4f}",
            "" if m.loss_factor is None else f"{m.loss_factor:.4f}",
            " ".join(f"{n}{_FAMILY_SHORT.get(family, ' ' + family)}"
                     for family, n in m.nodal_lines),
        )
    return table


_PANEL_OPTIONS = (
    # (option name, canonical header) for the one-off form of ``auditor modes``
    ("shape", "shape"), ("width", "width"), ("length", "length"), ("diameter", "diameter"),
    ("outline", "outline"), ("cutouts", "cut-outs"), ("material", "material"),
    ("areal_density", "areal density"), ("tension", "tension"), ("tension_x", "tension x"),
    ("tension_y", "tension y"), ("bending_stiffness", "bending stiffness"),
    ("loss_factor", "loss factor"), ("airflow_resistance", "airflow resistance"),
    ("room_side", "room side"), ("plenum_side", "plenum side"),
    ("cavity_depth", "cavity depth"),
)


def _print_problems(console, problems) -> None:
    from rich.table import Table
    from rich.text import Text

    if not problems:
        return
    table = Table(title="Rejected rows and warnings", title_justify="left")
    for head in ("", "File", "Sheet", "Row", "Column", "Record", "Message"):
        table.add_column(head, overflow="fold")
    for q in problems:
        table.add_row(Text(q.severity, style="red" if q.severity == "error" else "yellow"),
                      Text(q.file), Text(q.sheet), "" if q.row is None else str(q.row),
                      Text(q.column), Text(q.record), Text(q.message))
    console.print(table)


@app.command("modes")
def modes(
    schedule: list[_Path] = typer.Argument(None, help="Schedule files (.xlsx or .csv)."),
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
    one_off = {header: given[name] for name, header in _PANEL_OPTIONS if given[name] is not None}
    console = Console(stderr=as_json)
    if one_off and schedule:
        console.print("[red]give either schedule files or one-off panel options, not both[/]")
        raise typer.Exit(2)
    if one_off:
        read = read_rows(["panel", *one_off], [["one-off", *one_off.values()]])
    elif schedule:
        read = read_schedule(schedule)
        if not read.files:
            _print_problems(console, read.problems)
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
    bar, update = _progress_bar("Solving modes")
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
            console.print(_mode_table(p.panel, r.modes, r.loading))
            for note in r.notes:
                console.print(f"  note: {note}")
            for k, m in enumerate(r.modes[:max(0, sketch)]):
                console.print(f"  {m.label}  {m.frequency_hz:.1f} Hz")
                for line in sketch_mode(r.basis, m.index, vector=r.vectors[:, k]):
                    console.print("    " + line, markup=False, highlight=False)
        _print_problems(console, problems)
    raise typer.Exit(0 if out or not problems else 2)


_FORMATS = ("pdf", "json", "csv", "xlsx")


class Detail(str, Enum):
    """How many panels get a page of their own in the PDF."""

    findings = "findings"
    all = "all"


class FailOn(str, Enum):
    """What makes ``audit`` exit 1."""

    conflict = "conflict"
    caution = "caution"


def _check_formats(value: str) -> str:
    """``--format``: a comma-separated list of known outputs, checked before any work."""
    wanted = [f.strip().lower() for f in value.split(",") if f.strip()]
    unknown = [f for f in wanted if f not in _FORMATS]
    if unknown or not wanted:
        raise typer.BadParameter(
            f"{', '.join(repr(u) for u in unknown) or 'nothing'} is not an output; "
            f"choose one or more of {', '.join(_FORMATS)}, separated by commas")
    return ",".join(dict.fromkeys(wanted))


def _check_rules(value: str) -> str:
    """``--rules``: a known rule-set name or a readable TOML file, checked before any work."""
    from auditor.rules import RuleSetError, load_ruleset

    try:
        load_ruleset(value)
    except (RuleSetError, OSError) as exc:
        raise typer.BadParameter(str(exc)) from None
    return value


def _check_out(value: _Path | None) -> _Path | None:
    """``--out``: a folder (created when missing), never an existing file."""
    if value is not None and value.exists() and not value.is_dir():
        raise typer.BadParameter(f"{value} is a file; --out takes a folder")
    return value


def _check_templates(value: _Path | None) -> _Path | None:
    """``--templates`` (or AUDITOR_TEMPLATES): an existing folder of report wording."""
    if value is not None and not value.is_dir():
        raise typer.BadParameter(f"the templates folder {value} does not exist")
    return value


def _run_audit(schedule, rules, out, as_json, fail_on, formats, detail, calibrated,
               console, templates=None, recordings_anywhere=False, jobs=None) -> int:
    """The shared body of ``audit`` and ``demo``; returns the exit code.

    Every option was checked by its callback before this runs.
    """
    from auditor.audit import audit as run
    from auditor.report import exports
    from auditor.rules import RuleSetError

    wanted = formats.split(",")
    bar, update = _progress_bar("Auditing panels")
    try:
        with bar:
            result = run(schedule, rules=rules, calibrated=calibrated,
                         recordings_anywhere=recordings_anywhere, jobs=jobs,
                         with_shapes=out is not None and "pdf" in wanted, progress=update)
    except RuleSetError as exc:
        console.print(f"[red]rule set:[/] {escape(str(exc))}", highlight=False)
        return 2
    if not result.schedule.files:
        _print_problems(console, result.problems)
        console.print("[red]no schedule file could be read[/]")
        return 2
    written = []
    if out is not None:
        out = _Path(out)
        try:
            out.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            console.print(f"[red]cannot create the folder {escape(str(out))}[/]: "
                          f"{escape(exc.strerror or str(exc))}")
            return 2
        if "json" in wanted:
            written.append(exports.write_json(result, out / "findings.json"))
        if "csv" in wanted:
            written.append(exports.write_csv(result, out / "findings.csv"))
        if "xlsx" in wanted:
            written.extend(exports.write_audited_workbooks(result, out))
        if "pdf" in wanted:
            from auditor.report.pdf import write_pdf

            bar, update = _progress_bar("Writing the PDF")
            with bar:
                written.append(write_pdf(result, out / "audit.pdf", detail=detail,
                                         template_dir=templates, progress=update))
    if as_json:
        typer.echo(exports.findings_json(result))
    else:
        _print_summary(console, result)
        for path in written:
            console.print(Text(f"wrote {path}"))
    summary = result.summary()
    if fail_on == "conflict" and summary["conflicts"]:
        return 1
    if fail_on == "caution" and (summary["conflicts"] or summary["cautions"]):
        return 1
    return 0


#: How many panels the terminal summary lists (the PDF and the exports list them all).
_SUMMARY_PANELS = 40

_VERDICT_STYLE = {"conflict": "bold red", "not assessed": "magenta", "caution": "yellow",
                  "clear": "green"}


def _worst_line(panel_result) -> str:
    """The panel's worst finding in one line (findings are worst first)."""
    if not panel_result.findings:
        return panel_result.verdict_reason
    f = panel_result.findings[0]
    e = f.excitation
    tone = (f"{e.band_hz[0]:.1f}–{e.band_hz[1]:.1f} Hz" if e.band_hz
            else f"{e.frequency_hz:.1f} Hz")
    return (f"mode {f.mode.label} {f.mode.frequency_hz:.1f} Hz against {e.equipment} "
            f"{e.description} {tone} ({100 * f.separation:+.1f} %, {f.response_db:+.0f} dB)")


def _print_summary(console, result) -> None:
    """The panels that need action, worst first, each with its one remedy; then the totals."""
    from rich.table import Table

    from auditor.remedy import SAFETY_NOTE

    s = result.summary()
    action = [p for p in result.ranked_panels() if p.verdict != "clear"]
    if action:
        table = Table(title="Panels that need attention, worst first", title_justify="left")
        for head in ("Panel", "Verdict", "Assessed to", "Worst finding", "Remedy"):
            table.add_column(head, overflow="fold")
        for p in action[:_SUMMARY_PANELS]:
            table.add_row(Text(p.panel.panel),
                          Text(p.verdict, style=_VERDICT_STYLE.get(p.verdict, "")),
                          f"{p.assessed_to_hz:.0f} Hz", Text(_worst_line(p)),
                          Text(p.remedy.text if p.remedy else ""))
        console.print(table)
        if len(action) > _SUMMARY_PANELS:
            console.print(f"… and {len(action) - _SUMMARY_PANELS} more (see the PDF or JSON)")
        if any(p.remedy is not None and p.remedy.work for p in action):
            console.print(Text(SAFETY_NOTE))
    _print_problems(console, result.problems)
    console.print(
        f"{s['panels']} panels, {s['equipment']} equipment items, rule set "
        f"'{escape(result.ruleset.name)}': [bold red]{s['conflicts']} conflicts[/] on "
        f"{s['panels_with_conflicts']} panels, [yellow]{s['cautions']} cautions[/], "
        f"[magenta]{s['panels_not_assessed']} panels not assessed[/], "
        f"[green]{s['panels_clear']} panels clear[/]; {s['rejected_rows']} rejected rows, "
        f"{s['warnings']} warnings.")


_AUDIT_HELP = {
    "rules": "Rule set: a name (standard, strict, or one in the AUDITOR_RULES folder) or a "
             "TOML file.",
    "out": "Write findings.json, findings.csv, <schedule>-audited.xlsx and audit.pdf into "
           "this folder (created if missing).",
    "json": "Print the findings document as JSON.",
    "fail_on": "Exit 1 when a conflict (or a caution) is found.",
    "format": "Comma-separated outputs for --out, any of: pdf, json, csv, xlsx.",
    "detail": "PDF: a page for each panel with findings, or for all panels.",
    "calibrated": "Use tensions fitted to the schedule's tap-test recordings.",
    "templates": "Folder with your own report wording (report.toml, methods.md, cautions.md); "
                 "files it lacks come from the bundled ones.",
    "jobs": "Worker processes for the panel types (default: every core); the result is the "
            "same for any number.",
    "recordings_anywhere": "Allow tap-test recordings outside the schedule's folder "
                           "(by default only files inside it are read).",
}


@app.command("audit")
def audit_command(
    schedule: list[_Path] = typer.Argument(..., help="Schedule files (.xlsx or .csv)."),
    rules: str = typer.Option("standard", "--rules", help=_AUDIT_HELP["rules"],
                              callback=_check_rules),
    out: _Path = typer.Option(None, "--out", help=_AUDIT_HELP["out"], callback=_check_out),
    as_json: bool = typer.Option(False, "--json", help=_AUDIT_HELP["json"]),
    fail_on: FailOn = typer.Option(None, "--fail-on", help=_AUDIT_HELP["fail_on"]),
    formats: str = typer.Option("pdf,json,csv,xlsx", "--format", help=_AUDIT_HELP["format"],
                                callback=_check_formats),
    detail: Detail = typer.Option(Detail.findings, "--detail", help=_AUDIT_HELP["detail"]),
    calibrated: bool = typer.Option(False, "--calibrated", help=_AUDIT_HELP["calibrated"]),
    templates: _Path = typer.Option(None, "--templates", envvar="AUDITOR_TEMPLATES",
                                    help=_AUDIT_HELP["templates"], callback=_check_templates),
    recordings_anywhere: bool = typer.Option(False, "--recordings-anywhere",
                                             help=_AUDIT_HELP["recordings_anywhere"]),
    jobs: int = typer.Option(None, "--jobs", min=1, help=_AUDIT_HELP["jobs"]),
) -> None:
    """Audit every panel against every equipment tone that reaches it."""
    from rich.console import Console

    console = Console(stderr=as_json)
    raise typer.Exit(_run_audit(schedule, rules, out, as_json,
                                None if fail_on is None else fail_on.value, formats,
                                detail.value, calibrated, console, templates,
                                recordings_anywhere, jobs))


@app.command("demo")
def demo(
    out: _Path = typer.Option(_Path("demo-audit"), "--out", help=_AUDIT_HELP["out"],
                              callback=_check_out),
    rules: str = typer.Option("standard", "--rules", help=_AUDIT_HELP["rules"],
                              callback=_check_rules),
    detail: Detail = typer.Option(Detail.findings, "--detail", help=_AUDIT_HELP["detail"]),
    templates: _Path = typer.Option(None, "--templates", envvar="AUDITOR_TEMPLATES",
                                    help=_AUDIT_HELP["templates"], callback=_check_templates),
) -> None:
    """Audit the bundled, invented demo project (its workbook and tap-test recording)."""
    from rich.console import Console

    from auditor.resources import ResourceError, demo_workbook

    console = Console()
    try:
        workbook = demo_workbook()
    except ResourceError as exc:
        console.print(Text(str(exc), style="red"))
        raise typer.Exit(2) from None
    console.print(f"Auditing the invented demo project ({workbook.name}) into {escape(str(out))}")
    raise typer.Exit(_run_audit([workbook], rules, out, False, None, ",".join(_FORMATS),
                                detail.value, True, console, templates))


@app.command("rules")
def rules_command(
    name: str = typer.Argument(None, help="A rule set to show in full (name or TOML path)."),
    as_json: bool = typer.Option(False, "--json", help="Print as JSON."),
    copy: _Path = typer.Option(None, "--copy", help="Copy the rule set's TOML file to this "
                               "path, to edit it and pass it to --rules."),
) -> None:
    """List the rule sets, or show one (or copy it out for editing)."""
    import json

    from rich.console import Console
    from rich.table import Table

    from auditor.rules import RuleSetError, list_rulesets, load_ruleset

    console = Console()
    if name is None:
        if copy is not None:
            console.print("[red]--copy needs the name of the rule set to copy[/]")
            raise typer.Exit(2)
        try:
            sets = list_rulesets()
        except RuleSetError as exc:
            console.print(Text(f"rule set: {exc}", style="red"))
            raise typer.Exit(2) from None
        if as_json:
            typer.echo(json.dumps([r.as_dict() for r in sets], indent=1, ensure_ascii=False))
            return
        table = Table(title="Rule sets", title_justify="left")
        for head in ("Name", "Conflict", "Caution", "Description", "From"):
            table.add_column(head, overflow="fold")
        for r in sets:
            table.add_row(Text(r.name), f"±{100 * r.conflict_margin:g} %",
                          f"±{100 * r.caution_margin:g} %", Text(r.description),
                          Text(r.origin))
        console.print(table)
        return
    try:
        ruleset = load_ruleset(name)
    except (RuleSetError, OSError) as exc:
        console.print(Text(f"rule set: {exc}", style="red"))
        raise typer.Exit(2) from None
    if copy is not None:
        from auditor.atomic import write_atomic
        from auditor.resources import rules_search_path

        named = [folder / f"{name}.toml" for folder in rules_search_path()]
        source = next((p for p in [_Path(name), *named] if p.is_file()))
        target = copy / source.name if copy.is_dir() else copy
        if target.exists():
            console.print(Text(f"{target} exists already; choose another path", style="red"))
            raise typer.Exit(1)
        try:
            write_atomic(target, source.read_bytes())
        except OSError as exc:
            console.print(Text(f"could not write {target}: {exc.strerror or exc}", style="red"))
            raise typer.Exit(1) from None
        console.print(Text(f"Wrote {target}; edit it and pass it with --rules {target}"))
        return
    if as_json:
        typer.echo(json.dumps(ruleset.as_dict(), indent=1, ensure_ascii=False))
        return
    table = Table(title=f"Rule set {escape(ruleset.name)}", title_justify="left",
                  show_header=False)
    table.add_column("key")
    table.add_column("value", overflow="fold")
    for key, value in ruleset.as_dict().items():
        table.add_row(Text(str(key)), Text(json.dumps(value, ensure_ascii=False)
                                           if not isinstance(value, str) else value))
    console.print(table)


@app.command("export-templates")
def export_templates(
    folder: _Path = typer.Argument(..., help="Folder to write the report wording into."),
    force: bool = typer.Option(False, "--force", help="Overwrite files already there."),
) -> None:
    """Copy the bundled report wording (report.toml, methods.md, cautions.md) out for editing.

    Pass the folder back with --templates (or set AUDITOR_TEMPLATES) to use your wording.
    """
    from rich.console import Console

    from auditor.atomic import write_atomic
    from auditor.resources import REPORT_WORDING_FILES, bundled_dir

    console = Console()
    if folder.exists() and not folder.is_dir():
        console.print(Text(f"{folder} is a file; give a folder", style="red"))
        raise typer.Exit(2)
    targets = [folder / name for name in REPORT_WORDING_FILES]
    existing = [t.name for t in targets if t.exists()]
    if existing and not force:
        console.print(Text(f"{', '.join(existing)} exist already in {folder}; use --force "
                           "to overwrite", style="red"))
        raise typer.Exit(1)
    try:
        folder.mkdir(parents=True, exist_ok=True)
        for name, target in zip(REPORT_WORDING_FILES, targets):
            write_atomic(target, (bundled_dir("templates") / name).read_bytes())
    except OSError as exc:
        console.print(Text(f"could not write into {folder}: {exc.strerror or exc}", style="red"))
        raise typer.Exit(1) from None
    console.print(Text(f"Wrote {', '.join(REPORT_WORDING_FILES)} into {folder}; use it with "
                       f"--templates {folder} or AUDITOR_TEMPLATES={folder}"))


class Fit(str, Enum):
    """What ``calibrate`` fits to the measured peaks."""

    tension = "tension"
    tension_ratio = "tension-ratio"
    areal_density = "areal-density"


@app.command("calibrate")
def calibrate_command(
    schedule: list[_Path] = typer.Argument(..., help="Schedule files with a 'tap test' column."),
    panel: str = typer.Option(None, "--panel", help="Only this panel id."),
    fit: Fit = typer.Option(Fit.tension, "--fit", help="What to fit from the peaks."),
    as_json: bool = typer.Option(False, "--json", help="Print the calibrations as JSON."),
    recordings_anywhere: bool = typer.Option(False, "--recordings-anywhere",
                                             help=_AUDIT_HELP["recordings_anywhere"]),
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
        _print_problems(console, read.problems)
        raise typer.Exit(2)

    with console.status("Fitting tap tests"):
        calibrations, problems = calibrate_schedule(read, calibration_modes(read.project),
                                                    panel_id=panel, fit=fit.value.replace("-", "_"),
                                                    allow_outside=recordings_anywhere)
    problems = list(read.problems) + list(problems)
    if as_json:
        typer.echo(json.dumps({"panels": [calibration_to_dict(c) for c in calibrations],
                               "problems": [q.as_dict() for q in problems]},
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
        _print_problems(console, problems)
    raise typer.Exit(0 if calibrations or not problems else 2)


def main() -> None:
    app()
