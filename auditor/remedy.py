"""One remedy per panel: the tension that clears all its conflicts, else the fewest bays.

For a panel with findings the remedy is, in this order of preference:

1. **A tension** within the rated range (both tensions scaled together by a factor ``s``, so an
   orthotropic panel keeps its warp/weft ratio) at which the panel has no conflict with any
   tone reaching it and the fewest, then the weakest, cautions. The range runs from
   ``ruleset.min_tension_factor`` × scheduled up to the rated ``max_tension`` (on the larger
   tension), or ``ruleset.max_tension_factor`` × scheduled when no rating is given (the text
   says the ceiling was assumed). Every *clear window* (range of tension with no conflict) is
   reported.
2. **The fewest equal bays** (intermediate supports across the longer side, each bay a smaller
   panel of the same construction at the scheduled tension) that leave no conflict, up to
   ``ruleset.max_bays``, when no tension clears the panel.
3. Otherwise **a plain statement** of which tone blocks every option.

A panel with cautions but no conflict is left as scheduled: its remedy says so and names the
worst caution (no search, no windows); cautions are the consultant's to weigh.

How the windows are found. Each mode follows its frequency with tension, ``f_k(s)``; the pair
it makes with a tone is a conflict, a caution or nothing as ``f_k`` sweeps past the tone, and
the set of ``f`` where it is a conflict (or a finding at all) is an interval: the margin
window around the tone intersected with the range where its response reaches the rule set's
threshold (``auditor.judgement.screening``; the response ``20·log10(p·|H|·T)`` falls
monotonically away from resonance, so solving ``|H| = 10^(X/20)/(p·T)`` for ρ gives its edges
in closed form). Mapping these intervals through ``f_k(s)`` gives the blocked tensions.

- A **pure membrane** (no air on either side, no bending stiffness; any outline) scales
  exactly, ``f_k(s) = f_k(1)·√s`` with loss factor and participation unchanged, so the windows
  follow in closed form from the modes at two tensions (the scheduled one, and the lowest in
  range for the modes that come down into the assessed band).
- **Otherwise** (air loading, a cavity, bending, porosity) the full model is solved at the
  ends of the range as well as at the scheduled tension, and each mode's ``f²`` is interpolated
  linearly in ``s`` between them, matched by label (ω² is a Rayleigh quotient linear in the
  tension stiffness, so this is second-order accurate; exact for a prestressed plate); a mode
  not matched goes as ``f² ∝ s``. Participation and loss factor take their least favourable
  values along the mode (the windows err narrow).

The proposed tension is placed inside its window (at least ``INSET`` from the window's edges
where it is wide enough, else in its middle), rounded to three significant figures (a
tension an installer can set), and **verified**: the full model is solved again at that
tension and judged exactly as the audit judges; a failure adds that solution to the grid
and the search runs again (``VERIFY_ATTEMPTS`` times). The modes that matter, as the search
followed them when it found its windows, go with the remedy (``Remedy.curves``) for the
report's tuning chart.

Changing the tension of a stretched system changes the energy stored in it: every remedy that
is work on the panel (``Remedy.work``) goes with ``SAFETY_NOTE``.

References
----------
.. [1] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 (hysteretic amplification).
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, ch. 4 (membrane frequencies ∝ √T).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from auditor.judgement.screening import (
    CAUTION,
    CONFLICT,
    ExcitationArrays,
    ModeArrays,
    PairGrades,
    default_loss_factor,
    judge_pairs,
)
from auditor.judgement.tuning import (
    ModeTracks,
    blocked_intervals,
    caution_regions,
    complement,
    mode_tracks,
    modes_at,
    union,
)
from auditor.judgement.verdict import overlap_frequency_hz
from auditor.model import Panel
from auditor.results import Excitation, Remedy, TensionCurves
from auditor.rules import RuleSet

__all__ = ["panel_remedy", "remedy_advice", "bay_panel", "scales_exactly", "RemedyMemo",
           "SAFETY_NOTE"]

#: The full model: a panel → its modes (a ``PanelModes``, or a sequence of ``Mode``).
ModesOf = Callable[[Panel], Any]

#: How far inside a window's edges a proposed tension is placed, as a ratio of tensions.
INSET = 1.05

#: Solves at a proposed tension before the search gives up on tension.
VERIFY_ATTEMPTS = 3

#: Goes with every remedy that changes a tension or adds supports: the tables append it
#: (:func:`remedy_advice`), the PDF and the JSON document carry it once.
SAFETY_NOTE = ("Retensioning and added supports are work for trained installers, within the "
               "system maker's rating, local codes and licensed practice.")


def remedy_advice(remedy: Remedy | None) -> str:
    """The remedy in words, with the safety note when it is work on the panel."""
    if remedy is None:
        return ""
    return f"{remedy.text} {SAFETY_NOTE}" if remedy.work else remedy.text


def bay_panel(panel: Panel, bays: int) -> Panel | None:
    """One of ``bays`` equal bays of a rectangular panel, split across its longer side.

    Returns None for other outlines. Cut-outs are dropped (the bay is assessed as a plain
    rectangle).
    """
    if panel.shape != "rectangle" or not panel.width or not panel.length:
        return None
    if panel.width >= panel.length:
        return replace(panel, width=panel.width / bays, cutouts=())
    return replace(panel, length=panel.length / bays, cutouts=())


def scales_exactly(panel: Panel) -> bool:
    """True when every natural frequency scales exactly as √T: no air on either side and no
    bending stiffness (the membrane operator is then T times a fixed one)."""
    return (panel.room_side == "none" and panel.plenum_side == "none"
            and not panel.bending_stiffness)


# ---------------------------------------------------------------------------------------
# Solutions of the full model at given tensions
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class _State:
    """The full model at one tension scale."""

    scale: float
    modes: ModeArrays
    labels: tuple[str, ...]
    complete_to_hz: float
    overlap_from_hz: float


class RemedyMemo:
    """What the remedies of one panel (one type, judged in several tone groups with the same
    full model) share: its solution at each tension scale, and its modes followed over each
    set of scales. Each is a pure function of its key, so a remedy does not depend on which
    others ran before; every remedy still uses only the scales its own search solved."""

    def __init__(self) -> None:
        self.states: dict[float, _State] = {}
        self.tracks: dict[tuple, ModeTracks] = {}


class _Solver:
    """Solves the panel at tension scales (and bays) and judges them as the audit does."""

    def __init__(self, panel: Panel, excitations: ExcitationArrays, ruleset: RuleSet,
                 modes_of: ModesOf, limit_hz: float, memo: RemedyMemo | None = None):
        self.panel, self.excitations, self.ruleset = panel, excitations, ruleset
        self.modes_of, self.limit_hz = modes_of, limit_hz
        self.eta0 = default_loss_factor(panel)
        self.memo = RemedyMemo() if memo is None else memo
        self.scales: dict[float, None] = {}      # the scales this search solved, in order

    @property
    def states(self) -> list[_State]:
        return [self.memo.states[s] for s in self.scales]

    def tracks(self, low: float, high: float, limit: float) -> ModeTracks:
        """The modes followed over this search's scales (see ``mode_tracks``)."""
        key = (tuple(self.scales), low, high)
        if key not in self.memo.tracks:
            self.memo.tracks[key] = mode_tracks(self.states, low, high, limit)
        return replace(self.memo.tracks[key], limit_hz=limit)

    def candidate(self, scale: float) -> Panel:
        p = self.panel
        return replace(p, tension_x=p.tension_x * scale, tension_y=p.tension_y * scale)

    def solve(self, panel: Panel, scale: float) -> _State:
        """``panel`` (this one at ``scale``, or a bay of it) on the full model."""
        return self._state_of(self.modes_of(panel), panel, scale)

    def state(self, scale: float, given: Any = None) -> _State:
        """The panel at ``scale``, solved once (``given``: its modes, already solved)."""
        key = float(scale)
        if key not in self.memo.states:
            panel = self.candidate(key)
            solved = given if given is not None else self.modes_of(panel)
            self.memo.states[key] = self._state_of(solved, panel, key)
        self.scales.setdefault(key, None)
        return self.memo.states[key]

    def _state_of(self, solved: Any, panel: Panel, scale: float) -> _State:
        # ``solved`` is a PanelModes (arrays, labels and ``complete_to_hz``; no records are
        # made) or a plain sequence of Mode (a model complete to the limit, as the reference
        # models of the tests are).
        if isinstance(getattr(solved, "frequency_hz", None), np.ndarray):
            arrays = ModeArrays.of(solved, self.eta0, records=False)
            labels = tuple(solved.labels)
            frequency = np.asarray(solved.frequency_hz)
            if not np.all(frequency[1:] >= frequency[:-1]):
                order = np.argsort(frequency, kind="stable")
                labels = tuple(labels[k] for k in order)
        else:
            arrays = ModeArrays.of(tuple(getattr(solved, "modes", solved)), self.eta0)
            labels = tuple(m.label for m in arrays.modes)
        overlap = overlap_frequency_hz(panel, arrays)
        return _State(scale, arrays, labels,
                      float(getattr(solved, "complete_to_hz", math.inf)),
                      overlap if overlap is not None else math.inf)

    def judge(self, state: _State) -> PairGrades:
        return judge_pairs(state.modes, self.excitations, self.ruleset,
                           limit_hz=min(self.limit_hz, state.complete_to_hz),
                           overlap_from_hz=state.overlap_from_hz)


# ---------------------------------------------------------------------------------------
# The proposal and its verification
# ---------------------------------------------------------------------------------------

def _placed(low: float, high: float) -> float:
    """The scale in [low, high] nearest the scheduled one (1), at least ``INSET`` inside the
    edges when the region is wide enough, else its geometric middle."""
    inner_low, inner_high = low * INSET, high / INSET
    if inner_low > inner_high:
        return math.sqrt(low * high)
    return min(max(1.0, inner_low), inner_high)


def _snapped(tension: float) -> float:
    """A tension that is three significant figures but for rounding error, made exact."""
    three = float(f"{tension:.3g}")
    return three if abs(three - tension) <= 1e-9 * abs(tension) else tension


def _installable(scale: float, tension: float, low: float, high: float) -> float:
    """``scale`` moved to a tension of three significant figures, if it stays in range."""
    if tension <= 0:
        return scale
    rounded = float(f"{scale * tension:.3g}") / tension
    return rounded if low <= rounded <= high else scale


def _ranked_candidates(solver: _Solver, tracks: ModeTracks,
                       regions: list[tuple[float, float, int]]) -> list[float]:
    """A placed, installable tension for each region, best first: fewest cautions, then the
    weakest (their summed response on the followed modes), then the smallest change."""
    if not regions:
        return []
    fewest = min(r[2] for r in regions)
    scored = []
    for a, b, count in regions:
        s = _installable(_placed(a, b), solver.panel.tension_x, a, b)
        strength = math.inf
        if count == fewest:
            strength = judge_pairs(modes_at(tracks, s, solver.eta0), solver.excitations,
                                   solver.ruleset, limit_hz=tracks.limit_hz,
                                   overlap_from_hz=tracks.overlap_hz * math.sqrt(s)
                                   ).caution_strength()
        scored.append((count, strength, abs(math.log(s)), s))
    return [s for *_, s in sorted(scored)]


@dataclass
class _Search:
    windows: list[tuple[float, float]]
    chosen: float | None
    verified: PairGrades | None
    conflicts_by_tone: dict[int, list[tuple[float, float]]]
    tracks: ModeTracks | None = None     # the modes followed, as the windows were found


def _search(solver: _Solver, low: float, high: float, exact: bool) -> _Search:
    """Windows from the modes followed over tension, the best placed tension, verified."""
    if exact:
        for s in sorted({1.0, low}):
            solver.state(s)
    else:
        for s in sorted({low, 1.0, high}):
            solver.state(s)
    tried: set[float] = set()
    search = _Search([], None, None, {})
    for _ in range(VERIFY_ATTEMPTS):
        states = solver.states
        limit = min([solver.limit_hz] + [st.complete_to_hz for st in states])
        tracks = solver.tracks(low, high, limit)
        search.tracks = tracks
        (c_lo, c_hi), (f_lo, f_hi), tone = blocked_intervals(tracks, solver.excitations,
                                                              solver.ruleset)
        windows = complement(union(c_lo, c_hi), low, high)
        search.windows = windows
        search.conflicts_by_tone = {
            int(t): union(c_lo[tone == t], c_hi[tone == t]) for t in np.unique(tone)}
        candidate = None
        for s in _ranked_candidates(solver, tracks, caution_regions(windows, f_lo, f_hi)):
            if s not in tried:
                candidate = s
                break
        if candidate is None:
            return search
        tried.add(candidate)
        grades = solver.judge(solver.state(candidate))
        if grades.conflicts == 0:
            search.chosen, search.verified = candidate, grades
            return search
    return search


# ---------------------------------------------------------------------------------------
# The remedy in words
# ---------------------------------------------------------------------------------------

def _t(t: float) -> str:
    return f"{t:.0f}" if t >= 100 else f"{t:.3g}"


def _naming(e: Excitation) -> str:
    rest = e.description[len(e.kind) + 1:] if e.description.startswith(e.kind + " ") \
        else e.description
    return f"{e.kind} {e.equipment} {rest}"


def _tensions(panel: Panel, scale: float) -> str:
    tx, ty = panel.tension_x * scale, panel.tension_y * scale
    return _t(tx) if panel.isotropic else f"{_t(tx)} × {_t(ty)}"


def _windows_text(windows: Sequence[tuple[float, float]]) -> str:
    if not windows:
        return "none"
    return ", ".join(f"{_t(a)}–{_t(b)}" for a, b in windows) + " N/m"


def _blockers(search: _Search, excitations: ExcitationArrays, low: float,
              high: float) -> str:
    """Which tones block every tension in range, in words."""
    whole = [t for t, spans in search.conflicts_by_tone.items()
             if complement(spans, low, high) == []]
    if whole:
        names = ", ".join(_naming(excitations.excitations[t]) for t in whole[:3])
        more = f" and {len(whole) - 3} more" if len(whole) > 3 else ""
        return f"{names}{more} conflict{'s' if len(whole) == 1 else ''} at every tension in range"
    tones = sorted(search.conflicts_by_tone, key=lambda t: -sum(
        b - a for a, b in search.conflicts_by_tone[t]))
    names = ", ".join(_naming(excitations.excitations[t]) for t in tones[:3])
    more = f" and {len(tones) - 3} more" if len(tones) > 3 else ""
    return f"every tension in range conflicts with at least one of {names}{more}"


def _caution_text(grades: PairGrades, state: _State, excitations: ExcitationArrays) -> str:
    n = grades.cautions
    if n == 0:
        return "no caution remains"
    k = int(np.flatnonzero(grades.grade == CAUTION)[0])
    e = excitations.excitations[int(grades.excitation[k])]
    f = float(state.modes.frequency[int(grades.mode[k])])
    return (f"{n} caution{'s' if n != 1 else ''} remain{'s' if n == 1 else ''} (worst: "
            f"{_naming(e)} near a mode at {f:.3g} Hz, {float(grades.response_db[k]):+.0f} dB)")


def panel_remedy(panel: Panel, excitations: Sequence[Excitation] | ExcitationArrays,
                 ruleset: RuleSet, modes_of: ModesOf, *, limit_hz: float,
                 solved: Any = None, beyond_hz: float | None = None,
                 memo: RemedyMemo | None = None) -> Remedy:
    """The one remedy for a panel with findings (see the module docstring).

    Parameters
    ----------
    panel : Panel
    excitations : sequence of Excitation, or ExcitationArrays
        Every excitation reaching the panel.
    ruleset : RuleSet
        Margins, response thresholds and the remedy range (``min_tension_factor``,
        ``max_tension_factor`` when the panel has no ``max_tension``, ``max_bays``).
    modes_of : callable (Panel) -> PanelModes or sequence of Mode
        The full model (air loading, cavity, bending) of a panel at any tension or size,
        solved up to ``limit_hz``.
    limit_hz : float  [Hz]
        The assessment limit of the panel.
    solved : PanelModes or sequence of Mode, optional
        The panel's modes at the scheduled tension, when already solved.
    beyond_hz : float, optional  [Hz]
        Set when tones reach the panel above its assessed range (the text says the remedy
        is judged up to that frequency).
    memo : RemedyMemo, optional
        Shared by the remedies of one panel with one ``modes_of`` in several tone groups
        (the solutions at each tension are made once); the result does not depend on it.

    Returns
    -------
    Remedy
    """
    excs = ExcitationArrays.of(excitations)
    solver = _Solver(panel, excs, ruleset, modes_of, limit_hz, memo)
    base = solver.state(1.0, given=solved)
    now = solver.judge(base)
    tail = (f" Tones above {beyond_hz:.0f} Hz were not assessed; this remedy is judged up to "
            f"{beyond_hz:.0f} Hz." if beyond_hz is not None else "")
    tx, ty = panel.tension_x, panel.tension_y
    if now.conflicts == 0:
        return Remedy(tension=tx, tension_y=ty, bays=None, verified=True, cautions=now.cautions,
                      text=(f"No change needed: no conflict at the scheduled tension"
                            f"{'' if panel.isotropic else 's'}; {_caution_text(now, base, excs)}."
                            f"{tail}"))
    if tx <= 0 or ty <= 0:
        return _bays_or_statement(solver, None, panel, tail, now)
    top = max(tx, ty)
    rated = panel.max_tension if top > 0 else None      # the rated maximum, when given
    high = rated / top if rated is not None else ruleset.max_tension_factor
    low = min(ruleset.min_tension_factor, high)
    exact = scales_exactly(panel)
    search = _search(solver, low, high, exact)
    windows = tuple((a * tx, b * tx) for a, b in search.windows)
    curves = _curves(solver, search, now, base, exact)
    if rated is not None:
        ceiling = f"rated maximum {_t(rated)} N/m"
    else:
        ceiling = (f"no rated maximum in the schedule; ceiling taken as "
                   f"{ruleset.max_tension_factor:g} × scheduled = {_t(top * high)} N/m")
    if search.chosen is None or search.verified is None:   # both are set, or neither
        return _bays_or_statement(solver, search, panel, tail, now, low=low, high=high,
                                  windows=windows, curves=curves)
    s, grades = search.chosen, search.verified
    state = solver.state(s)
    plural = "" if panel.isotropic else "s"
    ratio = "" if panel.isotropic else " (x × y, ratio kept)"
    windows_text = f" Clear windows: {_windows_text(windows)}."
    verb = "Raise" if s > 1 else "Lower"
    text = (f"{verb} the tension{plural} from {_tensions(panel, 1.0)} to "
            f"{_tensions(panel, s)} N/m{ratio} ({ceiling}): no conflict, verified on the full "
            f"model; {_caution_text(grades, state, excs)}.{windows_text}{tail}")
    if s < 1 and not any(b > 1 for a, b in search.windows):
        text += " No higher tension in range clears it: check the system maker's minimum tension."
    return Remedy(tension=_snapped(tx * s), bays=None, tension_y=_snapped(ty * s), text=text,
                  work=True, clear_windows=windows, verified=True, cautions=grades.cautions,
                  fundamental_hz=_lowest_hz(state), curves=curves)


def _curves(solver: _Solver, search: _Search, now: PairGrades, base: _State,
            exact: bool) -> TensionCurves | None:
    """The modes that matter followed over the range, as the search followed them when it
    found its windows (for the tuning chart): those in findings at the scheduled tension,
    the fundamental, and those driven at the rule set's participation threshold or more
    somewhere along the range."""
    tracks = search.tracks
    if tracks is None:
        return None
    rows = tracks.base_rows
    driven = tracks.participation[rows] >= solver.ruleset.participation_threshold
    wanted = np.flatnonzero(driven).tolist() + now.mode.tolist() + [0]
    keep = sorted({int(k) for k in wanted if k < len(rows)})
    tension = solver.panel.tension_x
    frequency = np.sqrt(tracks.f2[rows[keep]])
    return TensionCurves(tuple(float(s * tension) for s in tracks.scales),
                         tuple(base.labels[k] for k in keep),
                         tuple(tuple(row) for row in frequency.tolist()), exact)


def _lowest_hz(state: _State) -> float | None:
    """The lowest natural frequency of a solved state  [Hz] (its modes are ascending)."""
    frequency = state.modes.frequency
    return float(frequency[0]) if len(frequency) else None


def _bays_or_statement(solver: _Solver, search: _Search | None, panel: Panel, tail: str,
                       now: PairGrades, *, low: float = 1.0, high: float = 1.0,
                       windows: tuple = (), curves: TensionCurves | None = None) -> Remedy:
    """The fewest equal bays that clear the conflicts, or what blocks every option."""
    if search is None:
        head = "The panel has no scheduled tension to change"
    else:
        both = "" if panel.isotropic else " (both tensions scaled together)"
        head = (f"No tension from {_tensions(panel, low)} to {_tensions(panel, high)} N/m"
                f"{both} clears its conflicts ("
                f"{_blockers(search, solver.excitations, low, high)})")
    last = None
    for k in range(2, solver.ruleset.max_bays + 1):
        bay = bay_panel(panel, k)
        if bay is None:
            break
        state = solver.solve(bay, 1.0)
        grades = solver.judge(state)
        last = (k, grades)
        if grades.conflicts == 0:
            longer = max(panel.width or 0.0, panel.length or 0.0)
            at = (f" at the scheduled {_tensions(panel, 1.0)} N/m"
                  if panel.tension_x > 0 and panel.tension_y > 0 else "")
            text = (f"{head}; split the {longer:.2f} m side into {k} equal bays (supports "
                    f"every {longer / k:.2f} m){at}: "
                    f"no conflict, verified on the model; "
                    f"{_caution_text(grades, state, solver.excitations)}.")
            if panel.cutouts:
                text += " The bays were assessed without the panel's cut-outs."
            return Remedy(tension=None, bays=k, text=text + tail, work=True,
                          clear_windows=windows, verified=True, cautions=grades.cautions,
                          fundamental_hz=_lowest_hz(state), curves=curves)
    if last is None:
        rest = "support changes for this outline need the panel designer."
    else:
        k, grades = last
        tones = sorted({int(e) for e, g in zip(grades.excitation, grades.grade)
                        if g == CONFLICT})
        names = ", ".join(_naming(solver.excitations.excitations[t]) for t in tones[:3])
        rest = (f"nor does a split into up to {k} equal bays ({names} still conflict"
                f"{'s' if len(tones) == 1 else ''} with {k} bays); refer to the panel designer.")
    return Remedy(tension=None, bays=None, clear_windows=windows, cautions=now.cautions,
                  text=f"{head}; {rest}{tail}", curves=curves)
