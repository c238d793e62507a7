"""The audit pipeline: schedule → modes and excitations → findings with remedies → AuditResult.

One direction of data flow (DESIGN.md). Nothing here reads or writes files except through
``read_schedule`` (and the tap-test recordings when calibrating); the writers in
``auditor.report`` only read the ``AuditResult``.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Callable, Sequence
from pathlib import Path

from auditor import __version__
from auditor._gc import collector_paused
from auditor.excitation import excitations_for_schedule
from auditor.model import (
    AuditResult, Equipment, Excitation, Finding, Panel, PanelResult, RowProblem, Schedule,
)
from auditor.physics.modes import GeometryError, PanelModes, modes_for, physics_signature
from auditor.rules import (
    RuleSet, findings_for_panel, findings_with_remedies, load_ruleset, mode_frequency_limit,
)
from auditor.schedule import read_schedule

Progress = Callable[[int, int], None]

#: Modes computed for fitting tap tests: up to this frequency [Hz] and this many.
CALIBRATION_FMAX_HZ = 1500.0
CALIBRATION_MAX_MODES = 40


def equipment_excitations(
    schedule: Schedule, ruleset: RuleSet
) -> tuple[dict[str, tuple[Excitation, ...]], list[RowProblem]]:
    """Excitations of every equipment item by tag, and a problem for each item that has none."""
    pairs, problems = excitations_for_schedule(
        schedule.equipment, ruleset, project_line_frequency=schedule.project.line_frequency)
    return {item.equipment: excitations for item, excitations in pairs}, list(problems)


def reaching(panel: Panel, equipment: Sequence[Equipment],
             table: dict[str, tuple[Excitation, ...]], ruleset: RuleSet) -> tuple[Excitation, ...]:
    """The excitations that reach ``panel`` (by zone when the rule set says so)."""
    out: list[Excitation] = []
    for item in equipment:
        if item.equipment in table and (not ruleset.use_zones or item.reaches(panel.zone)):
            out.extend(table[item.equipment])
    return tuple(out)


def audit_schedule(
    schedule: Schedule,
    ruleset: RuleSet,
    *,
    calibrated: Sequence[Panel] = (),
    measured_peaks: dict[str, tuple[float, ...]] | None = None,
    with_shapes: bool = True,
    progress: Progress | None = None,
    created: str | None = None,
) -> AuditResult:
    """Audit every panel of a schedule against every excitation that reaches it.

    Parameters
    ----------
    schedule : Schedule
    ruleset : RuleSet
    calibrated : sequence of Panel
        Panels whose tension was fitted to a tap test; they replace the scheduled records
        with the same id.
    measured_peaks : dict panel id → peaks [Hz]
        Tap-test peaks, shown on the report's interference chart.
    with_shapes : bool
        Sample the shapes of the modes named in findings (needed by the PDF only).
    progress : callable(done, total), optional
    created : str, optional
        ISO 8601 time stamp for the result (default: now, local time).
    """
    air_density = schedule.project.air_density
    speed_of_sound = schedule.project.speed_of_sound
    table, problems = equipment_excitations(schedule, ruleset)
    problems = list(schedule.problems) + problems
    replaced = {p.panel: p for p in calibrated}
    peaks = measured_peaks or {}
    cache: dict[tuple, tuple[PanelModes | None, tuple[Finding, ...], str | None]] = {}
    results: list[PanelResult] = []
    total = len(schedule.panels)
    by_zone: dict[str, tuple[tuple[Excitation, ...], float]] = {}
    # Findings are many small acyclic records (see auditor._gc).
    with collector_paused():
        for done, scheduled in enumerate(schedule.panels, start=1):
            panel = replaced.get(scheduled.panel, scheduled)
            zone = panel.zone.strip().casefold() if ruleset.use_zones else ""
            if zone not in by_zone:
                excitations = reaching(panel, schedule.equipment, table, ruleset)
                # A panel no equipment reaches still has its modes listed, up to the fixed limit.
                fmax = mode_frequency_limit(ruleset, excitations) or (ruleset.fmax_hz or 500.0)
                by_zone[zone] = (excitations, fmax)
            excitations, fmax = by_zone[zone]
            key = (physics_signature(panel), panel.max_tension, zone)
            if key not in cache:
                cache[key] = _solve(panel, excitations, fmax, ruleset, air_density, speed_of_sound)
            panel_modes, findings, error = cache[key]
            if error is not None:
                problems.append(unsolvable_problem(panel, error))
            else:
                findings = findings_for_panel(findings, panel.panel)
                shapes = _shapes(panel_modes, findings) if with_shapes else ()
                notes = panel_modes.notes + (
                    ("Tension fitted to the site tap test.",) if panel is not scheduled else ())
                results.append(PanelResult(
                    panel=panel, modes=panel_modes.modes, findings=findings,
                    loading=panel_modes.loading, notes=notes, shapes=shapes,
                    measured_peaks_hz=tuple(peaks.get(panel.panel, ())),
                ))
            if progress is not None:
                progress(done, total)
    return AuditResult(
        schedule=schedule,
        panels=tuple(results),
        excitations=tuple(table.items()),
        ruleset=ruleset,
        problems=tuple(problems),
        version=__version__,
        created=created or _dt.datetime.now().astimezone().isoformat(timespec="seconds"),
        calibrated=bool(calibrated),
    )


def _solve(panel: Panel, excitations: tuple[Excitation, ...], fmax: float, ruleset: RuleSet,
           air_density: float, speed_of_sound: float):
    def solve(candidate: Panel) -> PanelModes:
        return modes_for(candidate, fmax, max_modes=ruleset.max_modes,
                         air_density=air_density, speed_of_sound=speed_of_sound)

    try:
        panel_modes = solve(panel)
    except ValueError as exc:  # GeometryError included: the message says what is wrong
        return None, (), exc
    findings = findings_with_remedies(panel, panel_modes.modes, excitations, ruleset,
                                      lambda candidate: solve(candidate).modes)
    return panel_modes, tuple(findings), None


def unsolvable_problem(panel: Panel, error: ValueError) -> RowProblem:
    """A panel the physics could not solve, as a rejected row (never a traceback).

    A ``GeometryError`` names the outline or cut-outs column; any other ``ValueError`` (a
    value the physics cannot take) names no column.
    """
    if isinstance(error, GeometryError):
        column = "outline" if panel.shape == "polygon" else "cut-outs"
    else:
        column = ""
    return RowProblem(
        file=panel.source.file, sheet=panel.source.sheet, row=panel.source.row,
        column=column, message=f"panel {panel.panel}: {error}; not audited",
        severity="error", text=_typed(panel, column), record=panel.panel,
    )


def calibration_modes(project) -> Callable[[Panel], tuple]:
    """The full model for fitting tap tests: a panel's modes up to ``CALIBRATION_FMAX_HZ``."""
    def modes_of(panel: Panel):
        return modes_for(panel, CALIBRATION_FMAX_HZ, max_modes=CALIBRATION_MAX_MODES,
                         air_density=project.air_density,
                         speed_of_sound=project.speed_of_sound).modes
    return modes_of


def _typed(panel: Panel, column: str) -> str:
    """The cell text the user typed under ``column`` (headers carry units: "Outline (mm)")."""
    key = column.replace("-", "").casefold()
    for header, text in panel.entered:
        if key and header.replace("-", "").casefold().startswith(key):
            return text
    return ""


def _shapes(panel_modes: PanelModes, findings: tuple[Finding, ...]):
    wanted: list[int] = [0] if panel_modes.modes else []
    labels = {m.label: k for k, m in enumerate(panel_modes.modes)}
    for f in findings:
        k = labels.get(f.mode.label)
        if k is not None and k not in wanted:
            wanted.append(k)
    return tuple(panel_modes.shape_grid(k) for k in wanted[:6])


def audit(
    paths: Sequence[str | Path],
    *,
    rules: str | Path = "standard",
    calibrated: bool = False,
    with_shapes: bool = True,
    progress: Progress | None = None,
) -> AuditResult:
    """Read schedule files and audit them: the whole job from Python.

    >>> from auditor.audit import audit
    >>> result = audit(["project.xlsx"], rules="standard")     # doctest: +SKIP
    >>> result.summary()["conflicts"]                          # doctest: +SKIP
    """
    schedule = read_schedule([str(p) for p in paths])
    ruleset = load_ruleset(rules)
    fitted: list[Panel] = []
    peaks: dict[str, tuple[float, ...]] = {}
    if calibrated:
        from auditor.calibrate import apply_calibration, calibrate_schedule

        calibrations, cal_problems = calibrate_schedule(schedule,
                                                        calibration_modes(schedule.project))
        by_id = {p.panel: p for p in schedule.panels}
        for c in calibrations:
            fitted.append(apply_calibration(by_id[c.panel], c))
            peaks[c.panel] = tuple(c.peaks_hz)
        schedule = dataclasses.replace(schedule, problems=schedule.problems + tuple(cal_problems))
    return audit_schedule(schedule, ruleset, calibrated=fitted, measured_peaks=peaks,
                          with_shapes=with_shapes, progress=progress)
