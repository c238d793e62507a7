"""``auditor audit`` and ``auditor demo``: the whole job, with the outputs written to a folder
and the exit code set by ``--fail-on``."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.markup import escape
from rich.text import Text

from auditor.cli.options import (
    AUDIT_HELP,
    FORMATS,
    Detail,
    FailOn,
    check_formats,
    check_out,
    check_rules,
    check_templates,
)
from auditor.cli.terminal import print_problems, print_summary, progress_bar

__all__ = ["audit_command", "demo", "run_audit"]


def run_audit(schedule, rules, out, as_json, fail_on, formats, detail, calibrated,
              console, templates=None, recordings_anywhere=False, jobs=None) -> int:
    """The shared body of ``audit`` and ``demo``; returns the exit code.

    Every option was checked by its callback before this runs.
    """
    from auditor.worker_server import start_worker_server

    # first, so that the workers' server loads the physics while this process does
    start_worker_server(jobs)
    from auditor.audit import audit as run
    from auditor.report import exports
    from auditor.rules import RuleSetError

    wanted = formats.split(",")
    bar, update = progress_bar("Auditing panels")
    try:
        with bar:
            result = run(schedule, rules=rules, calibrated=calibrated,
                         recordings_anywhere=recordings_anywhere, jobs=jobs,
                         with_shapes=out is not None and "pdf" in wanted, progress=update)
    except RuleSetError as exc:
        console.print(f"[red]rule set:[/] {escape(str(exc))}", highlight=False)
        return 2
    if not result.schedule.files:
        print_problems(console, result.problems)
        console.print("[red]no schedule file could be read[/]")
        return 2
    written = []
    if out is not None:
        out = Path(out)
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

            bar, update = progress_bar("Writing the PDF")
            with bar:
                written.append(write_pdf(result, out / "audit.pdf", detail=detail,
                                         template_dir=templates, progress=update))
    if as_json:
        typer.echo(exports.findings_json(result))
    else:
        print_summary(console, result)
        for path in written:
            console.print(Text(f"wrote {path}"))
    summary = result.summary()
    if fail_on == "conflict" and summary["conflicts"]:
        return 1
    if fail_on == "caution" and (summary["conflicts"] or summary["cautions"]):
        return 1
    return 0


def audit_command(
    schedule: list[Path] = typer.Argument(..., help="Schedule files (.xlsx or .csv)."),
    rules: str = typer.Option("standard", "--rules", help=AUDIT_HELP["rules"],
                              callback=check_rules),
    out: Path = typer.Option(None, "--out", help=AUDIT_HELP["out"], callback=check_out),
    as_json: bool = typer.Option(False, "--json", help=AUDIT_HELP["json"]),
    fail_on: FailOn = typer.Option(None, "--fail-on", help=AUDIT_HELP["fail_on"]),
    formats: str = typer.Option("pdf,json,csv,xlsx", "--format", help=AUDIT_HELP["format"],
                                callback=check_formats),
    detail: Detail = typer.Option(Detail.findings, "--detail", help=AUDIT_HELP["detail"]),
    calibrated: bool = typer.Option(False, "--calibrated", help=AUDIT_HELP["calibrated"]),
    templates: Path = typer.Option(None, "--templates", envvar="AUDITOR_TEMPLATES",
                                   help=AUDIT_HELP["templates"], callback=check_templates),
    recordings_anywhere: bool = typer.Option(False, "--recordings-anywhere",
                                             help=AUDIT_HELP["recordings_anywhere"]),
    jobs: int = typer.Option(None, "--jobs", min=1, help=AUDIT_HELP["jobs"]),
) -> None:
    """Audit every panel against every equipment tone that reaches it."""
    from rich.console import Console

    console = Console(stderr=as_json)
    raise typer.Exit(run_audit(schedule, rules, out, as_json,
                               None if fail_on is None else fail_on.value, formats,
                               detail.value, calibrated, console, templates,
                               recordings_anywhere, jobs))


def demo(
    out: Path = typer.Option(Path("demo-audit"), "--out", help=AUDIT_HELP["out"],
                             callback=check_out),
    rules: str = typer.Option("standard", "--rules", help=AUDIT_HELP["rules"],
                              callback=check_rules),
    detail: Detail = typer.Option(Detail.findings, "--detail", help=AUDIT_HELP["detail"]),
    templates: Path = typer.Option(None, "--templates", envvar="AUDITOR_TEMPLATES",
                                   help=AUDIT_HELP["templates"], callback=check_templates),
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
    raise typer.Exit(run_audit([workbook], rules, out, False, None, ",".join(FORMATS),
                               detail.value, True, console, templates))
