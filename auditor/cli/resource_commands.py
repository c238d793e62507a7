"""``auditor rules`` (list, show or copy out a rule set) and ``auditor export-templates``
(copy out the bundled report wording): the files a consultancy edits."""

from __future__ import annotations

from pathlib import Path

import typer
from rich.markup import escape
from rich.text import Text

__all__ = ["rules_command", "export_templates"]


def rules_command(
    name: str = typer.Argument(None, help="A rule set to show in full (name or TOML path)."),
    as_json: bool = typer.Option(False, "--json", help="Print as JSON."),
    copy: Path = typer.Option(None, "--copy", help="Copy the rule set's TOML file to this "
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
        source = next((p for p in [Path(name), *named] if p.is_file()))
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


def export_templates(
    folder: Path = typer.Argument(..., help="Folder to write the report wording into."),
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
