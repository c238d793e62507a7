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
   group, with its own id.

Types are independent, so step 3 runs in a process pool (``jobs``): each task is one panel
type, or the types of one finite-element outline (which share its basis), judged with a
:class:`auditor.physics.cache.SolveCache` made for the task and dropped after it; the
results are put back in schedule order in the calling process, which also reports progress.
The result is the same, bit for bit, for any number of jobs and whatever ran before in the
process: every cache entry is a pure function of its key, and nothing else is kept between
calls.
"""

from __future__ import annotations

import dataclasses
import datetime as _dt
import multiprocessing
import os
from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from auditor import __version__
from auditor.excitation import excitations_for_schedule, mount_of
from auditor.judgement.response import weyl_mode_count
from auditor.judgement.screening import ExcitationArrays, assessment_limit_hz, reaching
from auditor.judgement.verdict import PanelAssessment, assess_panel, panel_area
from auditor.model import (
    AuditResult,
    Equipment,
    Excitation,
    Finding,
    Mode,
    Panel,
    PanelResult,
    Remedy,
    RowProblem,
    Schedule,
    ShapeGrid,
    finding_rank,
)
from auditor.physics.cache import SolveCache
from auditor.physics.modes import GeometryError, PanelModes, modes_for, physics_signature
from auditor.remedy import RemedyMemo, panel_remedy
from auditor.rules import RuleSet, load_ruleset
from auditor.schedule import read_schedule

Progress = Callable[[int, int], None]

__all__ = ["PanelType", "ToneGroup", "audit", "audit_schedule", "judge_panel",
           "panel_solver", "panel_types", "tone_groups", "resolved_jobs", "unsolvable_problem",
           "calibration_modes", "equipment_excitations"]

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


#: The panel fields blanked in a type's representative (see :class:`PanelType`).
_NOT_PHYSICS = {"panel": "", "zone": "", "entered": (), "tap_test": None}


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
            found[key] = (dataclasses.replace(panel, source=None, **_NOT_PHYSICS), set(), 0)
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
# Judging a type
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Judged:
    """What the panels of one type in one tone group share (the solve itself is not kept).

    ``findings`` are ranked worst first and name no panel (each panel's own id is put in
    when it is attributed)."""

    modes: tuple[Mode, ...]
    loading: str
    notes: tuple[str, ...]
    shapes: tuple[ShapeGrid, ...]
    assessment: PanelAssessment
    findings: tuple[Finding, ...]
    remedy: Remedy | None


def judge_panel(panel: Panel, excitations: ExcitationArrays, ruleset: RuleSet,
                solve: Callable[[Panel], PanelModes], limit_hz: float, *,
                with_shapes: bool = True, memo: RemedyMemo | None = None) -> _Judged:
    """Steps 2–4 for one panel (see the module docstring).

    ``solve`` may compute modes above ``limit_hz`` (panels of one type in tone groups with
    different limits share one solve); only those up to the limit are judged and listed.
    ``memo`` is shared by the calls for one panel type (see ``auditor.remedy.RemedyMemo``).

    Raises
    ------
    ValueError
        When the physics cannot solve the panel (``GeometryError`` included).
    """
    panel_modes = solve(panel)
    assessment = assess_panel(panel, panel_modes, excitations, ruleset,
                              limit_hz=limit_hz, complete_to_hz=panel_modes.complete_to_hz)
    remedy = None
    if assessment.findings:
        remedy = panel_remedy(
            panel, excitations, ruleset, solve, limit_hz=limit_hz, solved=panel_modes,
            beyond_hz=assessment.assessed_to_hz if assessment.beyond else None, memo=memo)
    modes = panel_modes.modes
    count = int(np.searchsorted(panel_modes.frequency_hz, limit_hz, side="right"))
    listed = modes if count == len(modes) else modes[:count]
    return _Judged(listed, panel_modes.loading, panel_modes.notes + assessment.notes,
                   _shapes(panel_modes, assessment.findings) if with_shapes else (),
                   assessment, tuple(sorted(assessment.findings, key=finding_rank)), remedy)


@dataclass(frozen=True)
class _TypeWork:
    """One panel type to judge in each of its tone groups (what a worker is sent)."""

    number: int
    panel: Panel
    solve_to_hz: float
    groups: tuple[tuple[int, ExcitationArrays, float], ...]


def _judge_type(work: _TypeWork, ruleset: RuleSet, air_density: float,
                speed_of_sound: float, with_shapes: bool, cache: SolveCache
                ) -> tuple[int, tuple[tuple[int, _Judged | ValueError], ...]]:
    solve = panel_solver(work.solve_to_hz, air_density, speed_of_sound, cache)
    memo = RemedyMemo()
    out = []
    for group, excitations, limit in work.groups:
        try:
            got: _Judged | ValueError = judge_panel(work.panel, excitations, ruleset, solve,
                                                    limit, with_shapes=with_shapes, memo=memo)
        except ValueError as exc:  # GeometryError included: the message says what is wrong
            got = exc
        out.append((group, got))
    return work.number, tuple(out)


def _judge_family(family: tuple[_TypeWork, ...], ruleset: RuleSet, air_density: float,
                  speed_of_sound: float, with_shapes: bool):
    """One task: panel types that share their geometry (one outline at several tensions and
    densities, one rectangle's aspect ratio), judged with one solve cache made for them
    (finite-element bases and air-loading integrals are shared; the cache is dropped after)."""
    cache = SolveCache()
    return [_judge_type(work, ruleset, air_density, speed_of_sound, with_shapes, cache)
            for work in family]


def resolved_jobs(jobs: int | None) -> int:
    """The number of worker processes for ``jobs``: None → every core (``os.cpu_count()``).

    Raises
    ------
    ValueError
        For a number below 1.
    """
    if jobs is None:
        return max(1, os.cpu_count() or 1)
    if isinstance(jobs, bool) or int(jobs) != jobs or jobs < 1:
        raise ValueError(f"jobs must be a whole number ≥ 1 or None (every core), got {jobs!r}")
    return int(jobs)


def _geometry(panel: Panel) -> tuple:
    """What panel types must share to save much in the physics' cache: a finite-element
    outline (its basis at one tension ratio, and the air's integrals over it, serve every
    tension and density: a second or more each). Analytic shapes share little beyond a
    table of a few tens of milliseconds, and are judged apart (the load spreads better)."""
    if panel.shape == "polygon" or panel.cutouts or (
            panel.shape == "circle" and panel.tension_x != panel.tension_y):
        return ("outline", panel.shape, panel.outline, panel.width, panel.length,
                panel.diameter, panel.cutouts, round(panel.tension_y / panel.tension_x, 9)
                if panel.tension_x else None)
    return ("type", physics_signature(panel), panel.max_tension)


def _tasks(works: list[_TypeWork], costs: list[float], jobs: int) -> list[tuple]:
    """The types as tasks, dearest first: the types of one geometry together (see
    :func:`_geometry`), cheap families gathered in tasks of at least a 64th of a worker's
    share (so that hundreds of cheap types are not sent one by one); a pool hands each task
    to the next free worker."""
    families: dict[tuple, list[int]] = {}
    for k, work in enumerate(works):
        families.setdefault(_geometry(work.panel), []).append(k)
    weight = {key: sum(costs[k] for k in members) for key, members in families.items()}
    order = sorted(families, key=lambda key: (-weight[key], families[key][0]))
    least = sum(costs) / (64.0 * jobs)
    tasks: list[tuple] = []
    current: list[_TypeWork] = []
    gathered = 0.0
    for key in order:
        current.extend(works[k] for k in families[key])
        gathered += weight[key]
        if gathered >= least:
            tasks.append(tuple(current))
            current, gathered = [], 0.0
    if current:
        tasks.append(tuple(current))
    return tasks


def _pool(jobs: int) -> ProcessPoolExecutor:
    """A process pool of ``jobs`` workers (each task makes its own solve cache).

    Workers start from a clean server process (``forkserver``, with this module loaded once
    in it) where the system has one, else from fresh interpreters (``spawn``); never as forks
    of the caller, which may be running threads (a progress bar) and whose linear-algebra
    library may have started its own threads (``auditor`` keeps it to one thread only when
    imported before numpy; a fresh worker always imports it first). Like any use of
    :mod:`multiprocessing` that starts processes this way, a script that audits at its top
    level must do it under ``if __name__ == "__main__":``.
    """
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" in methods:
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(["auditor.audit"])
    else:
        context = multiprocessing.get_context("spawn")
    return ProcessPoolExecutor(max_workers=jobs, mp_context=context)


#: The least estimated work (in :meth:`PanelType.cost` units, about 0.15 s of one core each
#: as measured on the demo project) for which worker processes are started: starting them
#: and warming their caches takes about a second.
POOL_WORTH = 20.0


def _judge_all(types: list[PanelType], groups: list[ToneGroup], ruleset: RuleSet,
               air_density: float, speed_of_sound: float, with_shapes: bool, jobs: int,
               progress: Callable[[int], None]) -> dict[int, dict[int, _Judged | ValueError]]:
    works = [_TypeWork(k, t.panel, t.solve_to_hz,
                       tuple((g, groups[g].excitations, groups[g].limit_hz) for g in t.groups))
             for k, t in enumerate(types)]
    judged: dict[int, dict[int, _Judged | ValueError]] = {}

    def take(results) -> None:
        for number, outcome in results:
            judged[number] = dict(outcome)
            progress(types[number].count)

    costs = [t.cost() for t in types]
    tasks = _tasks(works, costs, jobs)
    if jobs <= 1 or len(tasks) <= 1 or sum(costs) < POOL_WORTH:
        for task in tasks:
            take(_judge_family(task, ruleset, air_density, speed_of_sound, with_shapes))
        return judged
    with _pool(min(jobs, len(tasks))) as pool:
        pending = {pool.submit(_judge_family, task, ruleset, air_density, speed_of_sound,
                               with_shapes) for task in tasks}
        while pending:
            done, pending = wait(pending, return_when=FIRST_COMPLETED)
            for future in done:
                take(future.result())
    return judged


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
    workers = resolved_jobs(jobs)
    project = schedule.project
    pairs, problems = equipment_excitations(schedule, ruleset)
    problems = list(schedule.problems) + problems
    replaced = {p.panel: p for p in calibrated}
    panels = [replaced.get(p.panel, p) for p in schedule.panels]
    groups, zone_group = tone_groups(panels, pairs, ruleset)
    types, placed = panel_types(panels, groups, zone_group, ruleset)
    total = len(panels)
    done = [0]

    def advance(count: int) -> None:
        done[0] += count
        if progress is not None:
            progress(done[0], total)

    judged = _judge_all(types, groups, ruleset, project.air_density, project.speed_of_sound,
                        with_shapes, workers, advance)
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


def _panel_result(panel: Panel, scheduled: Panel, got: _Judged,
                  peaks: dict[str, tuple[float, ...]]) -> PanelResult:
    assessment = got.assessment
    findings = tuple(_attributed(f, panel.panel) for f in got.findings)
    notes = got.notes + (("Tension fitted to the site tap test.",)
                         if panel is not scheduled else ())
    return PanelResult(
        panel=panel, modes=got.modes, findings=findings, loading=got.loading, notes=notes,
        shapes=got.shapes, measured_peaks_hz=tuple(peaks.get(panel.panel, ())),
        assessed_to_hz=assessment.assessed_to_hz, verdict=assessment.verdict,  # type: ignore[arg-type]
        verdict_reason=assessment.reason, overlap_from_hz=assessment.overlap_from_hz,
        beyond=assessment.beyond, remedy=got.remedy,
    )


def _attributed(finding: Finding, panel_id: str) -> Finding:
    """A finding of a panel type, named for one of its panels."""
    return Finding(panel=panel_id, mode=finding.mode, excitation=finding.excitation,
                   separation=finding.separation, severity=finding.severity,
                   margin=finding.margin, remedy=finding.remedy,
                   response_db=finding.response_db, amplification=finding.amplification,
                   transmissibility=finding.transmissibility, overlap=finding.overlap)


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


def _shapes(panel_modes: PanelModes, findings: tuple[Finding, ...]):
    wanted: list[int] = [0] if len(panel_modes) else []
    labels = {label: k for k, label in enumerate(panel_modes.labels)}
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
    resolved_jobs(jobs)     # a bad value is reported before any work
    schedule = read_schedule([str(p) for p in paths])
    ruleset = load_ruleset(rules)
    fitted: list[Panel] = []
    peaks: dict[str, tuple[float, ...]] = {}
    if calibrated:
        from auditor.calibrate import apply_calibration, calibrate_schedule

        calibrations, cal_problems = calibrate_schedule(
            schedule, calibration_modes(schedule.project, SolveCache()),
            allow_outside=recordings_anywhere)
        by_id = {p.panel: p for p in schedule.panels}
        for c in calibrations:
            fitted.append(apply_calibration(by_id[c.panel], c))
            peaks[c.panel] = tuple(c.peaks_hz)
        schedule = dataclasses.replace(schedule, problems=schedule.problems + tuple(cal_problems))
    else:
        calibrations = ()
    return audit_schedule(schedule, ruleset, calibrated=fitted, measured_peaks=peaks,
                          calibrations=calibrations, with_shapes=with_shapes,
                          progress=progress, jobs=jobs)
