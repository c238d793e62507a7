"""The audit pipeline: schedule → modes and excitations → verdicts and remedies → AuditResult.

One direction of data flow (DESIGN.md). Nothing here reads or writes files except through
``read_schedule`` (and the tap-test recordings when calibrating); the writers in
``auditor.report`` only read the ``AuditResult``.

The steps, for each panel:

1. the tones reaching it (by zone), and from them its assessment limit
   (``auditor.judgement.screening.assessment_limit_hz``): every mode up to it counts;
2. its modes up to that limit on the full model (``auditor.physics.modes.modes_for``, no count
   of modes), with the frequency up to which none is missing (``complete_to_hz``);
3. its findings, ranked by response, and its verdict (``auditor.judgement.verdict``);
4. for a panel with findings, its one remedy (``auditor.remedy.panel_remedy``), verified on
   the full model.

Panels of one construction in one zone share steps 2–4. The audit owns one solve cache and
passes it to every solve, so the result does not depend on what ran before.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from auditor import __version__
from auditor.excitation import excitations_for_schedule, mount_of
from auditor.judgement.screening import ExcitationArrays, assessment_limit_hz, reaching
from auditor.judgement.verdict import PanelAssessment, assess_panel
from auditor.model import (
    AuditResult, Equipment, Excitation, Finding, Mode, Panel, PanelResult, Remedy, RowProblem,
    Schedule, ShapeGrid, finding_rank,
)
from auditor.physics.cache import SolveCache
from auditor.physics.modes import GeometryError, PanelModes, modes_for, physics_signature
from auditor.remedy import panel_remedy
from auditor.rules import RuleSet, load_ruleset
from auditor.schedule import read_schedule

Progress = Callable[[int, int], None]

#: Modes computed for fitting tap tests: up to this frequency [Hz] and this many (fitting
#: needs the lowest modes only; the judgement has no count of modes).
CALIBRATION_FMAX_HZ = 1500.0
CALIBRATION_MAX_MODES = 40


def equipment_excitations(
    schedule: Schedule, ruleset: RuleSet
) -> tuple[tuple[tuple[Equipment, tuple[Excitation, ...]], ...], list[RowProblem]]:
    """Every equipment item with its excitations, and the problems (an error for each item
    that has none, a warning for each tone a mount amplifies)."""
    pairs, problems = excitations_for_schedule(
        schedule.equipment, ruleset, project_line_frequency=schedule.project.line_frequency)
    return pairs, list(problems)


def panel_solver(fmax: float, air_density: float, speed_of_sound: float,
                 cache: SolveCache) -> Callable[[Panel], PanelModes]:
    """The full model for one assessment limit: a panel → every one of its modes up to
    ``fmax`` (no count of modes), sharing the audit's solve cache."""
    def solve(panel: Panel) -> PanelModes:
        return modes_for(panel, fmax, max_modes=None, air_density=air_density,
                         speed_of_sound=speed_of_sound, cache=cache)
    return solve


@dataclass(frozen=True)
class _Judged:
    """What panels of one construction in one zone share (the solve itself is not kept)."""

    modes: tuple[Mode, ...]
    loading: str
    notes: tuple[str, ...]
    shapes: tuple[ShapeGrid, ...]
    assessment: PanelAssessment
    remedy: Remedy | None


def judge_panel(panel: Panel, excitations: ExcitationArrays, ruleset: RuleSet,
                solve: Callable[[Panel], PanelModes], limit_hz: float, *,
                with_shapes: bool = True) -> _Judged:
    """Steps 2–4 for one panel (see the module docstring).

    ``solve`` may compute modes above ``limit_hz`` (panels of one construction in zones with
    different limits share one solve); only those up to the limit are judged and listed.

    Raises
    ------
    ValueError
        When the physics cannot solve the panel (``GeometryError`` included).
    """
    panel_modes = solve(panel)
    assessment = assess_panel(panel, panel_modes.modes, excitations, ruleset,
                              limit_hz=limit_hz, complete_to_hz=panel_modes.complete_to_hz)
    remedy = None
    if assessment.findings:
        remedy = panel_remedy(
            panel, excitations, ruleset, solve, limit_hz=limit_hz, solved=panel_modes,
            beyond_hz=assessment.assessed_to_hz if assessment.beyond else None)
    listed = tuple(m for m in panel_modes.modes if m.frequency_hz <= limit_hz)
    return _Judged(listed, panel_modes.loading, panel_modes.notes + assessment.notes,
                   _shapes(panel_modes, assessment.findings) if with_shapes else (),
                   assessment, remedy)


def audit_schedule(
    schedule: Schedule,
    ruleset: RuleSet,
    *,
    calibrated: Sequence[Panel] = (),
    measured_peaks: dict[str, tuple[float, ...]] | None = None,
    calibrations: Sequence = (),
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
    calibrations : sequence of auditor.calibrate.Calibration
        The tap-test fits behind ``calibrated``, kept for the report's site-verification page.
    with_shapes : bool
        Sample the shapes of the modes named in findings (needed by the PDF only).
    progress : callable(done, total), optional
    created : str, optional
        ISO 8601 time stamp for the result (default: now, local time).
    """
    project = schedule.project
    pairs, problems = equipment_excitations(schedule, ruleset)
    problems = list(schedule.problems) + problems
    replaced = {p.panel: p for p in calibrated}
    panels = [replaced.get(p.panel, p) for p in schedule.panels]
    # The tones reaching each zone and its assessment limit; each construction is solved once,
    # up to the highest limit among the zones it is used in.
    zones: dict[str, tuple[ExcitationArrays, float]] = {}
    solve_to: dict[tuple, float] = {}
    for panel in panels:
        zone = _zone(panel, ruleset)
        if zone not in zones:
            excitations = ExcitationArrays.of(reaching(panel, pairs, ruleset))
            zones[zone] = (excitations, assessment_limit_hz(ruleset, excitations.top_hz))
        signature = physics_signature(panel)
        solve_to[signature] = max(solve_to.get(signature, 0.0), zones[zone][1])
    peaks = measured_peaks or {}
    cache = SolveCache()
    judged: dict[tuple, _Judged | ValueError] = {}
    results: list[PanelResult] = []
    for done, (scheduled, panel) in enumerate(zip(schedule.panels, panels), start=1):
        zone = _zone(panel, ruleset)
        excitations, limit = zones[zone]
        signature = physics_signature(panel)
        key = (signature, panel.max_tension, zone)
        if key not in judged:
            solve = panel_solver(solve_to[signature], project.air_density,
                                 project.speed_of_sound, cache)
            try:
                judged[key] = judge_panel(panel, excitations, ruleset, solve, limit,
                                          with_shapes=with_shapes)
            except ValueError as exc:  # GeometryError included: the message says what is wrong
                judged[key] = exc
        got = judged[key]
        if isinstance(got, ValueError):
            problems.append(unsolvable_problem(panel, got))
        else:
            results.append(_panel_result(panel, scheduled, got, peaks))
        if progress is not None:
            progress(done, len(panels))
    return AuditResult(
        schedule=schedule,
        panels=tuple(results),
        excitations=tuple((item.equipment, excs) for item, excs in pairs),
        ruleset=ruleset,
        problems=tuple(problems),
        version=__version__,
        created=created or _dt.datetime.now().astimezone().isoformat(timespec="seconds"),
        calibrated=bool(calibrated),
        mounts=tuple((item.equipment, mount_of(item)) for item, _ in pairs),
        calibrations=tuple(calibrations),
    )


def _zone(panel: Panel, ruleset: RuleSet) -> str:
    return panel.zone.strip().casefold() if ruleset.use_zones else ""


def _panel_result(panel: Panel, scheduled: Panel, got: _Judged,
                  peaks: dict[str, tuple[float, ...]]) -> PanelResult:
    assessment = got.assessment
    findings = tuple(f if f.panel == panel.panel else dataclasses.replace(f, panel=panel.panel)
                     for f in sorted(assessment.findings, key=finding_rank))
    notes = got.notes + (("Tension fitted to the site tap test.",)
                         if panel is not scheduled else ())
    return PanelResult(
        panel=panel, modes=got.modes, findings=findings, loading=got.loading, notes=notes,
        shapes=got.shapes, measured_peaks_hz=tuple(peaks.get(panel.panel, ())),
        assessed_to_hz=assessment.assessed_to_hz, verdict=assessment.verdict,  # type: ignore[arg-type]
        verdict_reason=assessment.reason, overlap_from_hz=assessment.overlap_from_hz,
        beyond=assessment.beyond, remedy=got.remedy,
    )


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
    """The full model for fitting tap tests: a panel's lowest modes up to
    ``CALIBRATION_FMAX_HZ``."""
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
    recordings_anywhere: bool = False,
    with_shapes: bool = True,
    progress: Progress | None = None,
) -> AuditResult:
    """Read schedule files and audit them: the whole job from Python.

    ``calibrated`` fits each panel's tension to its tap-test recording first; recordings are
    read only from inside each schedule's folder unless ``recordings_anywhere``.

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

        calibrations, cal_problems = calibrate_schedule(
            schedule, calibration_modes(schedule.project), allow_outside=recordings_anywhere)
        by_id = {p.panel: p for p in schedule.panels}
        for c in calibrations:
            fitted.append(apply_calibration(by_id[c.panel], c))
            peaks[c.panel] = tuple(c.peaks_hz)
        schedule = dataclasses.replace(schedule, problems=schedule.problems + tuple(cal_problems))
    else:
        calibrations = ()
    return audit_schedule(schedule, ruleset, calibrated=fitted, measured_peaks=peaks,
                          calibrations=calibrations, with_shapes=with_shapes,
                          progress=progress)
