"""The ``auditor`` typer application: its name, help, ``--version`` and the console entry."""

from __future__ import annotations

import typer

from auditor import __version__

__all__ = ["app", "main"]

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


def main() -> None:
    app()
