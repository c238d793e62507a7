"""Judging panel types: one type in its tone groups, and many at once in worker processes.

A panel type (``auditor.audit.PanelType``) is judged in each tone group its panels are in by
:func:`judge_panel`: its modes up to the group's assessment limit against every tone at once,
the verdict and, when there are findings, its one remedy. What a worker is sent for one type
is a :class:`TypeWork`; what comes back for each group is a :class:`Judged` (or the
``ValueError`` that says why the physics could not solve it).

:class:`TypeJudges` hands the works to a process pool (``jobs``), the types of one
finite-element outline together (they share its basis), the dearest first, or judges them in
the calling process when the work is too little to be worth starting processes
(``POOL_WORTH``). Works can be handed in before the rest of the audit is known (the audit
starts the types that no tap test can change, then fits the tap tests while they are judged):
a work is judged once, found again by what it is (:attr:`TypeWork.identity`), never by when
it was sent. Each task judges with a :class:`auditor.physics.cache.SolveCache` made for it and
dropped after it, so a judgement is a pure function of its work: the result is the same, bit
for bit, for any number of jobs, any order of handing in, and whatever ran before in the
process.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from dataclasses import dataclass

import numpy as np

from auditor.judgement.screening import ExcitationArrays
from auditor.judgement.verdict import PanelAssessment, assess_panel
from auditor.model import Panel
from auditor.physics.cache import SolveCache
from auditor.physics.modes import PanelModes, modes_for, physics_signature
from auditor.remedy import RemedyMemo, panel_remedy
from auditor.results import Finding, Mode, Remedy, ShapeGrid, finding_rank
from auditor.rules import RuleSet
from auditor.worker_server import resolved_jobs, start_worker_server, worker_context

__all__ = ["Judged", "TypeJudges", "TypeWork", "POOL_WORTH", "judge_panel", "panel_solver",
           "resolved_jobs", "start_worker_server"]


def panel_solver(fmax: float, air_density: float, speed_of_sound: float,
                 cache: SolveCache) -> Callable[[Panel], PanelModes]:
    """The full model for one assessment limit: a panel → every one of its modes up to
    ``fmax`` (no count of modes), sharing the audit's solve cache."""
    def solve(panel: Panel) -> PanelModes:
        return modes_for(panel, fmax, max_modes=None, air_density=air_density,
                         speed_of_sound=speed_of_sound, cache=cache)
    return solve


@dataclass(frozen=True)
class Judged:
    """What the panels of one type in one tone group share (the solve itself is not kept).

    ``findings`` are ranked worst first and name no panel (every panel of the type in the
    group holds the same tuple in its ``PanelResult``)."""

    modes: Sequence[Mode]
    loading: str
    notes: tuple[str, ...]
    shapes: tuple[ShapeGrid, ...]
    assessment: PanelAssessment
    findings: tuple[Finding, ...]
    remedy: Remedy | None


def judge_panel(panel: Panel, excitations: ExcitationArrays, ruleset: RuleSet,
                solve: Callable[[Panel], PanelModes], limit_hz: float, *,
                with_shapes: bool = True, memo: RemedyMemo | None = None) -> Judged:
    """One panel (a type's representative) judged in one tone group: solved, assessed
    and, when it has findings, given its remedy (steps 2–4 of ``auditor.audit``).

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
    return Judged(listed, panel_modes.loading, panel_modes.notes + assessment.notes,
                  _shapes(panel_modes, assessment.findings) if with_shapes else (),
                  assessment, tuple(sorted(assessment.findings, key=finding_rank)), remedy)


@dataclass(frozen=True)
class TypeWork:
    """One panel type to judge in each of its tone groups (what a worker is sent).

    ``groups`` holds, for each tone group, its number in the audit, its excitations and its
    assessment limit [Hz]; ``cost`` is the type's estimated cost (``PanelType.cost``).
    ``identity`` says what the work is (the type's key, ``solve_to_hz`` and, for each group,
    the equipment reaching it and its limit): works of equal identity have equal judgements.
    """

    identity: tuple
    panel: Panel
    solve_to_hz: float
    groups: tuple[tuple[int, ExcitationArrays, float], ...]
    cost: float


#: What a work is judged to: for each of its groups, the group's number and its judgement
#: (or the error that says why the physics could not solve the type).
Outcome = tuple[tuple[int, "Judged | ValueError"], ...]


def _judge_type(work: TypeWork, ruleset: RuleSet, air_density: float,
                speed_of_sound: float, with_shapes: bool, cache: SolveCache) -> Outcome:
    solve = panel_solver(work.solve_to_hz, air_density, speed_of_sound, cache)
    memo = RemedyMemo()
    out = []
    for group, excitations, limit in work.groups:
        try:
            got: Judged | ValueError = judge_panel(work.panel, excitations, ruleset, solve,
                                                   limit, with_shapes=with_shapes, memo=memo)
        except ValueError as exc:  # GeometryError included: the message says what is wrong
            got = exc
        out.append((group, got))
    return tuple(out)


def _judge_family(family: tuple[TypeWork, ...], ruleset: RuleSet, air_density: float,
                  speed_of_sound: float, with_shapes: bool) -> list[Outcome]:
    """One task: panel types that share their geometry (one outline at several tensions and
    densities, one rectangle's aspect ratio), judged with one solve cache made for them
    (finite-element bases and air-loading integrals are shared; the cache is dropped after).
    The outcomes are in the order of ``family``."""
    cache = SolveCache()
    return [_judge_type(work, ruleset, air_density, speed_of_sound, with_shapes, cache)
            for work in family]


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


def _tasks(works: Sequence[TypeWork], jobs: int) -> list[tuple[TypeWork, ...]]:
    """The types as tasks, dearest first: the types of one geometry together (see
    :func:`_geometry`), cheap families gathered in tasks of at least a 64th of a worker's
    share (so that hundreds of cheap types are not sent one by one); a pool hands each task
    to the next free worker."""
    families: dict[tuple, list[int]] = {}
    for k, work in enumerate(works):
        families.setdefault(_geometry(work.panel), []).append(k)
    weight = {key: sum(works[k].cost for k in members) for key, members in families.items()}
    order = sorted(families, key=lambda key: (-weight[key], families[key][0]))
    least = sum(work.cost for work in works) / (64.0 * jobs)
    tasks: list[tuple[TypeWork, ...]] = []
    current: list[TypeWork] = []
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
    in it, :func:`worker_context`) where the system has one, else from fresh interpreters
    (``spawn``); never as forks of the caller, which may be running threads (a progress bar)
    and whose linear-algebra library may have started its own threads (``auditor`` asks for
    one thread in the environment when it is imported, which binds a process only if numpy
    loads after; the server, started later, inherits that environment). Like any use of
    :mod:`multiprocessing` that starts processes this way, a script that audits at its top
    level must do it under ``if __name__ == "__main__":``.
    """
    return ProcessPoolExecutor(max_workers=jobs, mp_context=worker_context())


#: The least estimated work (in :meth:`PanelType.cost` units, about 0.15 s of one core each
#: as measured on the demo project) for which worker processes are started: starting them
#: and warming their caches takes about a second.
POOL_WORTH = 20.0


class TypeJudges:
    """Judges panel types, each work once, in a pool of ``jobs`` worker processes when the
    work is worth starting them (``POOL_WORTH``), else in the calling process.

    Use it as a context manager: a pool it started is shut down on leaving (works handed in
    and never asked for are cancelled, or waited for when already running)::

        with TypeJudges(ruleset, 1.204, 343.0, with_shapes=True, jobs=2) as judges:
            judges.start(early)            # judged in the pool while the caller goes on
            outcomes = judges.judged(every_work)

    Parameters
    ----------
    ruleset : RuleSet
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]
    with_shapes : bool
        Sample the shapes of the modes named in findings (for the PDF).
    jobs : int or None
        Worker processes (None: every core, see :func:`resolved_jobs`).
    """

    def __init__(self, ruleset: RuleSet, air_density: float, speed_of_sound: float,
                 with_shapes: bool, jobs: int | None) -> None:
        self.jobs = resolved_jobs(jobs)
        self._arguments = (ruleset, air_density, speed_of_sound, with_shapes)
        self._pool: ProcessPoolExecutor | None = None
        self._running: dict[Future, tuple[TypeWork, ...]] = {}
        self._sent: set[tuple] = set()
        self._outcomes: dict[tuple, Outcome] = {}

    def __enter__(self) -> TypeJudges:
        return self

    def __exit__(self, *exc_info) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def start(self, works: Sequence[TypeWork]) -> None:
        """Hand ``works`` to the worker processes now, to be judged while the caller goes on
        (when they are worth starting processes for; otherwise they are judged when asked
        for)."""
        fresh = self._fresh(works)
        if self._pool is not None or self._worth(fresh):
            self._send(fresh)

    def judged(self, works: Sequence[TypeWork],
               progress: Callable[[int], None] | None = None) -> list[Outcome]:
        """The outcome of each of ``works``, in their order (each outcome lists, for each of
        the work's groups in order, the group's number and its judgement or error).

        ``progress(k)`` is called in the calling process once for each work ``works[k]``, as
        its outcome becomes known.
        """
        positions: dict[tuple, list[int]] = {}
        for k, work in enumerate(works):
            positions.setdefault(work.identity, []).append(k)

        def report(identities) -> None:
            if progress is not None:
                for identity in identities:
                    for k in positions.get(identity, ()):
                        progress(k)

        report([identity for identity in positions if identity in self._outcomes])
        fresh = self._fresh(works)
        if self._pool is None and not self._worth(fresh):
            for task in _tasks(fresh, 1):
                for work, outcome in zip(task, _judge_family(task, *self._arguments)):
                    self._outcomes[work.identity] = outcome
                report(work.identity for work in task)
        else:
            self._send(fresh)
            pending = {future for future, task in self._running.items()
                       if any(work.identity in positions for work in task)}
            while pending:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    task = self._running.pop(future)
                    for work, outcome in zip(task, future.result()):
                        self._outcomes[work.identity] = outcome
                    report(work.identity for work in task)
        return [self._outcomes[work.identity] for work in works]

    def _fresh(self, works: Sequence[TypeWork]) -> list[TypeWork]:
        """The works neither judged nor sent yet, each identity once, in their order."""
        fresh: dict[tuple, TypeWork] = {}
        for work in works:
            if work.identity not in self._outcomes and work.identity not in self._sent:
                fresh.setdefault(work.identity, work)
        return list(fresh.values())

    def _worth(self, works: Sequence[TypeWork]) -> bool:
        return (self.jobs > 1 and sum(work.cost for work in works) >= POOL_WORTH
                and len(_tasks(works, self.jobs)) > 1)

    def _send(self, works: Sequence[TypeWork]) -> None:
        if not works:
            return
        if self._pool is None:
            self._pool = _pool(self.jobs)
        for task in _tasks(works, self.jobs):
            self._running[self._pool.submit(_judge_family, task, *self._arguments)] = task
            self._sent.update(work.identity for work in task)


def _shapes(panel_modes: PanelModes, findings: tuple[Finding, ...]):
    """Sampled shapes (for the PDF) of the fundamental and the modes named in findings, at
    most six."""
    wanted: list[int] = [0] if len(panel_modes) else []
    labels = {label: k for k, label in enumerate(panel_modes.labels)}
    for f in findings:
        k = labels.get(f.mode.label)
        if k is not None and k not in wanted:
            wanted.append(k)
    return tuple(panel_modes.shape_grid(k) for k in wanted[:6])


