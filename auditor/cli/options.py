"""Choices, help texts and checks of the options the commands share.

Every option a user can get wrong is checked by its callback before any work starts, so a
wrong option fails at once with the choices (exit 2) and nothing is written.
"""

from __future__ import annotations

from enum import Enum
from pathlib import Path

import typer

__all__ = ["FORMATS", "AUDIT_HELP", "PANEL_OPTIONS", "Detail", "FailOn", "Fit",
           "check_formats", "check_rules", "check_out", "check_templates"]

#: The outputs ``--format`` may name, in the order they are written.
FORMATS = ("pdf", "json", "csv", "xlsx")

AUDIT_HELP = {
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

PANEL_OPTIONS = (
    # (option name, canonical header) for the one-off form of ``auditor modes``
    ("shape", "shape"), ("width", "width"), ("length", "length"), ("diameter", "diameter"),
    ("outline", "outline"), ("cutouts", "cut-outs"), ("material", "material"),
    ("areal_density", "areal density"), ("tension", "tension"), ("tension_x", "tension x"),
    ("tension_y", "tension y"), ("bending_stiffness", "bending stiffness"),
    ("loss_factor", "loss factor"), ("airflow_resistance", "airflow resistance"),
    ("room_side", "room side"), ("plenum_side", "plenum side"),
    ("cavity_depth", "cavity depth"),
)


class Detail(str, Enum):
    """How many panels get a page of their own in the PDF."""

    findings = "findings"
    all = "all"


class FailOn(str, Enum):
    """What makes ``audit`` exit 1."""

    conflict = "conflict"
    caution = "caution"


class Fit(str, Enum):
    """What ``calibrate`` fits to the measured peaks."""

    tension = "tension"
    tension_ratio = "tension-ratio"
    areal_density = "areal-density"


def check_formats(value: str) -> str:
    """``--format``: a comma-separated list of known outputs, checked before any work."""
    wanted = [f.strip().lower() for f in value.split(",") if f.strip()]
    unknown = [f for f in wanted if f not in FORMATS]
    if unknown or not wanted:
        raise typer.BadParameter(
            f"{', '.join(repr(u) for u in unknown) or 'nothing'} is not an output; "
            f"choose one or more of {', '.join(FORMATS)}, separated by commas")
    return ",".join(dict.fromkeys(wanted))


def check_rules(value: str) -> str:
    """``--rules``: a known rule-set name or a readable TOML file, checked before any work."""
    from auditor.rules import RuleSetError, load_ruleset

    try:
        load_ruleset(value)
    except (RuleSetError, OSError) as exc:
        raise typer.BadParameter(str(exc)) from None
    return value


def check_out(value: Path | None) -> Path | None:
    """``--out``: a folder (created when missing), never an existing file."""
    if value is not None and value.exists() and not value.is_dir():
        raise typer.BadParameter(f"{value} is a file; --out takes a folder")
    return value


def check_templates(value: Path | None) -> Path | None:
    """``--templates`` (or AUDITOR_TEMPLATES): an existing folder of report wording."""
    if value is not None and not value.is_dir():
        raise typer.BadParameter(f"the templates folder {value} does not exist")
    return value
