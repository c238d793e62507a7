"""The audit pipeline: schedule → modes and excitations → verdicts and remedies → AuditResult.

One direction of data flow (DESIGN.md). Nothing here reads or writes files except through
``read_schedule`` (and the tap-test recordings when calibrating); the writers in
``auditor.report`` only read the ``AuditResult``.

The steps:

1. **Tone groups.** The tones reaching each zone (``auditor.judgement.screening.reaching``);
   zones reached by the same equipment share one :class:`ToneGroup`, its excitations as
   arrays and its assessment limit (``assessment_limit_hz``: every mode up to it counts).
2. **Panel types.** Panels that share their physics (every field that sets their modes, and
   the rated maximum tension their remedy may use; not their id, zone or how they were typed)
   are one :class:`PanelType`, solved once up to the highest limit among its tone groups
   (``auditor.physics.modes.modes_for``, no count of modes).
3. **Judgement per type and tone group**: findings of every mode against every tone at once
   (arrays over modes × excitation lines and bands), ranked by response, the verdict
   (``auditor.judgement.verdict``) and, for a type with findings, its one remedy
   (``auditor.remedy.panel_remedy``), verified on the full model.
4. **Attribution**: each panel, in schedule order, takes its type's judgement in its tone
   group (modes, findings and remedy shared, not copied: a finding names no panel, its
   ``PanelResult`` does).

Step 3 is :class:`auditor.judging.TypeJudges`: types are independent, so it runs them in a
process pool (``jobs``), each task one panel type or the types of one finite-element outline
(which share its basis), judged with a :class:`auditor.physics.cache.SolveCache` made for the
task and dropped after it. :func:`audit` hands the types that no tap test can change to the
pool first, and fits the tap tests while they are judged. The results are put back in
schedule order in the calling process, which also reports progress. The result is the same,
bit for bit, for any number of jobs and whatever ran before in the process: every cache entry
is a pure function of its key, and nothing else is kept between calls.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path

from auditor import __version__
from auditor.excitation import excitations_for_schedule, mount_of
from auditor.judgement.response import weyl_mode_count
from auditor.judgement.screening import ExcitationArrays, assessment_limit_hz, reaching
from auditor.judgement.verdict import panel_area
from auditor.judging import (
    Judged,
    TypeJudges,
    TypeWork,
    judge_panel,
    panel_solver,
    resolved_jobs,
    start_worker_server,
)
from auditor.model import Equipment, Panel, RowProblem, Schedule
from auditor.physics.cache import SolveCache
from auditor.physics.modes import GeometryError, modes_for, physics_key, physics_signature
from auditor.results import AuditResult, Excitation, PanelResult
from auditor.rules import RuleSet, load_ruleset
from auditor.schedule import read_schedule

Progress = Callable[[int, int], None]

__all__ = ["PanelType", "ToneGroup", "audit", "audit_schedule", "judge_panel",
           "panel_solver", "panel_types", "tone_groups", "type_works", "resolved_jobs",
           "unsolvable_problem", "calibration_modes", "equipment_excitations"]

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


# ---------------------------------------------------------------------------------------
# Tone groups and panel types
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class ToneGroup:
    """The tones reaching one or more zones (the same equipment reaches them all).

    ``reached_by`` holds the indices, in the schedule's equipment list, of the items that
    reach the zones; ``limit_hz`` is the assessment limit of panels there [Hz].
    """

    reached_by: tuple[int, ...]
    excitations: ExcitationArrays
    limit_hz: float


@dataclass(frozen=True, eq=False)
class PanelType:
    """Panels that share their physics and remedy range: one solve, one judgement per tone
    group.

    ``panel`` is the type's physics alone (id, zone, source, typed cells and tap test blank;
    the rated ``max_tension`` kept), so it does not depend on which panel of the type comes
    first; ``groups`` are the indices of the tone groups its panels are in (ascending) and
    ``solve_to_hz`` the highest of their limits [Hz]; ``count`` is how many panels it has.
    """

    key: tuple
    panel: Panel
    groups: tuple[int, ...]
    solve_to_hz: float
    count: int

    def cost(self) -> float:
        """A rough relative cost of judging the type, to hand out the dearest first (measured
        on the demo project: finite elements about ten times an analytic rectangle in air, a
        disc about four times, a sealed cavity or a porous sheet about twice; many modes add)."""
        p = self.panel
        finite_elements = p.shape == "polygon" or bool(p.cutouts) or (
            p.shape == "circle" and p.tension_x != p.tension_y)
        weight = 10.0 if finite_elements else 4.0 if p.shape == "circle" else 1.0
        open_mesh = p.material == "mesh" and p.airflow_resistance is None
        if open_mesh or (p.room_side == "none" and p.plenum_side == "none"):
            weight *= 0.05
        else:
            weight *= (2.0 if p.plenum_side == "sealed" else 1.0) * (
                2.0 if p.airflow_resistance is not None else 1.0)
        modes = weyl_mode_count(self.solve_to_hz, panel_area(p), p.areal_density,
                                max((p.tension_x * p.tension_y) ** 0.5, 1e-9),
                                p.bending_stiffness)
        return weight * (1.0 + min(float(modes), 1e6) / 50000.0)


def _zone(panel: Panel, ruleset: RuleSet) -> str:
    return panel.zone.strip().casefold() if ruleset.use_zones else ""


def tone_groups(panels: Sequence[Panel], pairs, ruleset: RuleSet
                ) -> tuple[list[ToneGroup], dict[str, int]]:
    """The tone groups of the panels' zones, and each zone's group (by the zone's key)."""
    groups: list[ToneGroup] = []
    by_reach: dict[tuple[int, ...], int] = {}
    zone_group: dict[str, int] = {}
    for panel in panels:
        zone = _zone(panel, ruleset)
        if zone in zone_group:
            continue
        reached = tuple(i for i, (item, _) in enumerate(pairs)
                        if not ruleset.use_zones or item.reaches(panel.zone))
        if reached not in by_reach:
            excitations = ExcitationArrays.of(reaching(panel, pairs, ruleset))
            by_reach[reached] = len(groups)
            groups.append(ToneGroup(reached, excitations,
                                    assessment_limit_hz(ruleset, excitations.top_hz)))
        zone_group[zone] = by_reach[reached]
    return groups, zone_group


def panel_types(panels: Sequence[Panel], groups: Sequence[ToneGroup],
                zone_group: dict[str, int], ruleset: RuleSet
                ) -> tuple[list[PanelType], list[tuple[int, int]]]:
    """The panel types in order of first appearance, and for each panel its (type, group)."""
    found: dict[tuple, tuple[Panel, set[int], int]] = {}
    order: list[tuple] = []
    placed: list[tuple[int, int]] = []
    index: dict[tuple, int] = {}
    for panel in panels:
        key = (physics_signature(panel), panel.max_tension)
        group = zone_group[_zone(panel, ruleset)]
        if key not in found:
            index[key] = len(order)
            order.append(key)
            # the representative: its physics and its remedy range, nothing of the panel
            representative = dataclasses.replace(physics_key(panel),
                                                 max_tension=panel.max_tension)
            found[key] = (representative, set(), 0)
        representative, used, count = found[key]
        used.add(group)
        found[key] = (representative, used, count + 1)
        placed.append((index[key], group))
    types = []
    for key in order:
        representative, used, count = found[key]
        ordered = tuple(sorted(used))
        types.append(PanelType(key, representative, ordered,
                               max(groups[g].limit_hz for g in ordered), count))
    return types, placed


# ---------------------------------------------------------------------------------------
# The audit
# ---------------------------------------------------------------------------------------

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
    jobs: int | None = None,
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
        Called in the calling process, with the number of panels judged so far, as each
        panel type is done (and once more at the end).
    created : str, optional
        ISO 8601 time stamp for the result (default: now, local time).
    jobs : int or None
        Worker processes for the panel types: None (the default) uses every core
        (``os.cpu_count()``), 1 judges in this process (as does any number when the work is
        too little to be worth starting processes, ``POOL_WORTH``). The result is the same
        for any.

    Raises
    ------
    ValueError
        For ``jobs`` below 1.
    """
    project = schedule.project
    with TypeJudges(ruleset, project.air_density, project.speed_of_sound, with_shapes,
                    jobs) as judges:
        return _audited(schedule, ruleset, judges, calibrated=calibrated,
                        measured_peaks=measured_peaks, calibrations=calibrations,
                        progress=progress, created=created)


def type_works(types: Sequence[PanelType], groups: Sequence[ToneGroup]) -> list[TypeWork]:
    """What the judges are sent for each type: its representative, solve limit, tone groups
    (number, excitations, limit) and cost, and its identity (the type's key, its solve limit
    and, for each group, the equipment reaching it and its limit)."""
    return [TypeWork((t.key, t.solve_to_hz,
                      tuple((groups[g].reached_by, groups[g].limit_hz) for g in t.groups)),
                     t.panel, t.solve_to_hz,
                     tuple((g, groups[g].excitations, groups[g].limit_hz) for g in t.groups),
                     t.cost())
            for t in types]


def _audited(schedule: Schedule, ruleset: RuleSet, judges: TypeJudges, *,
             calibrated: Sequence[Panel], measured_peaks: dict[str, tuple[float, ...]] | None,
             calibrations: Sequence, progress: Progress | None,
             created: str | None) -> AuditResult:
    """:func:`audit_schedule` with its types judged by ``judges`` (which may hold some
    already)."""
    pairs, problems = equipment_excitations(schedule, ruleset)
    problems = list(schedule.problems) + problems
    replaced = {p.panel: p for p in calibrated}
    panels = [replaced.get(p.panel, p) for p in schedule.panels]
    groups, zone_group = tone_groups(panels, pairs, ruleset)
    types, placed = panel_types(panels, groups, zone_group, ruleset)
    total = len(panels)
    done = [0]

    def advance(k: int) -> None:
        done[0] += types[k].count
        if progress is not None:
            progress(done[0], total)

    works = type_works(types, groups)
    # by position: a work judged before (same identity) may have numbered its groups otherwise
    judged = [{g: got for (g, _, _), (_, got) in zip(work.groups, outcome)}
              for work, outcome in zip(works, judges.judged(works, advance))]
    peaks = measured_peaks or {}
    results: list[PanelResult] = []
    for (scheduled, panel), (kind, group) in zip(zip(schedule.panels, panels), placed):
        got = judged[kind][group]
        if isinstance(got, ValueError):
            problems.append(unsolvable_problem(panel, got))
        else:
            results.append(_panel_result(panel, scheduled, got, peaks))
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


def _panel_result(panel: Panel, scheduled: Panel, got: Judged,
                  peaks: dict[str, tuple[float, ...]]) -> PanelResult:
    assessment = got.assessment
    notes = got.notes + (("Tension fitted to the site tap test.",)
                         if panel is not scheduled else ())
    return PanelResult(
        panel=panel, modes=got.modes, findings=got.findings, loading=got.loading, notes=notes,
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


def calibration_modes(project, cache: SolveCache | None = None) -> Callable[[Panel], tuple]:
    """The full model for fitting tap tests: a panel's lowest modes up to
    ``CALIBRATION_FMAX_HZ`` (sharing ``cache`` between the tensions tried, when given)."""
    def modes_of(panel: Panel):
        return modes_for(panel, CALIBRATION_FMAX_HZ, max_modes=CALIBRATION_MAX_MODES,
                         air_density=project.air_density,
                         speed_of_sound=project.speed_of_sound, cache=cache).modes
    return modes_of


def _typed(panel: Panel, column: str) -> str:
    """The cell text the user typed under ``column`` (headers carry units: "Outline (mm)")."""
    key = column.replace("-", "").casefold()
    for header, text in panel.entered:
        if key and header.replace("-", "").casefold().startswith(key):
            return text
    return ""


def audit(
    paths: Sequence[str | Path],
    *,
    rules: str | Path = "standard",
    calibrated: bool = False,
    recordings_anywhere: bool = False,
    with_shapes: bool = True,
    progress: Progress | None = None,
    jobs: int | None = None,
) -> AuditResult:
    """Read schedule files and audit them: the whole job from Python.

    ``calibrated`` fits each panel's tension to its tap-test recording first; recordings are
    read only from inside each schedule's folder unless ``recordings_anywhere``. ``jobs``:
    worker processes (None: every core; see :func:`audit_schedule`).

    >>> from auditor.audit import audit
    >>> result = audit(["project.xlsx"], rules="standard")     # doctest: +SKIP
    >>> result.summary()["conflicts"]                          # doctest: +SKIP
    """
    start_worker_server(jobs)   # a bad value is reported before any work
    schedule = read_schedule([str(p) for p in paths])
    ruleset = load_ruleset(rules)
    project = schedule.project
    fitted: list[Panel] = []
    peaks: dict[str, tuple[float, ...]] = {}
    calibrations: Sequence = ()
    with TypeJudges(ruleset, project.air_density, project.speed_of_sound, with_shapes,
                    jobs) as judges:
        if calibrated:
            from auditor.calibrate import apply_calibration, calibrate_schedule

            # The types no tap test can change are judged (in the pool) while the tap tests
            # are fitted here; the rest are sent once the fitted tensions are known.
            judges.start(_untapped_works(schedule, ruleset))
            calibrations, cal_problems = calibrate_schedule(
                schedule, calibration_modes(project, SolveCache()),
                allow_outside=recordings_anywhere)
            by_id = {p.panel: p for p in schedule.panels}
            for c in calibrations:
                fitted.append(apply_calibration(by_id[c.panel], c))
                peaks[c.panel] = tuple(c.peaks_hz)
            schedule = dataclasses.replace(
                schedule, problems=schedule.problems + tuple(cal_problems))
        return _audited(schedule, ruleset, judges, calibrated=fitted, measured_peaks=peaks,
                        calibrations=calibrations, progress=progress, created=None)


def _untapped_works(schedule: Schedule, ruleset: RuleSet) -> list[TypeWork]:
    """The works of the panel types whose panels name no tap test (calibration cannot
    change them: it replaces panels by id, and only those that name a recording)."""
    tapped = {p.panel for p in schedule.panels if p.tap_test and p.tap_test.strip()}
    pairs, _ = equipment_excitations(schedule, ruleset)
    groups, zone_group = tone_groups(schedule.panels, pairs, ruleset)
    types, _ = panel_types([p for p in schedule.panels if p.panel not in tapped], groups,
                           zone_group, ruleset)
    return type_works(types, groups)
