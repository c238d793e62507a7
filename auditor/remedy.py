"""Remedies: the retensioning, or the support spacing, that clears a panel of an excitation.

The remedy for a (panel, excitation) pair is found on the full model (``modes_of``: any
callable from a ``Panel`` to its modes, with air loading, bending stiffness, cavities...), never
by assuming that natural frequencies scale as √T:

1. Both tensions are scaled together by a factor ``s`` (an orthotropic panel keeps its
   warp/weft ratio). The allowed range is from ``ruleset.min_tension_factor`` × scheduled up to
   the panel's rated ``max_tension`` (on the larger of its two tensions); a panel with no
   rated maximum gets a ceiling of ``ruleset.max_tension_factor`` × scheduled (1.5 in the
   bundled rule sets), and the text says the ceiling was assumed.
2. The *excess* ``g(s) = max over modes of (margin − |separation|)`` is positive while any
   mode makes a finding (a conflict or a caution) with the excitation and negative once all
   are clear; the margin is the caution margin (widened by η/2 when the rule set says so),
   or the conflict margin for a mode below the participation threshold against an airborne
   excitation, exactly as ``auditor.rules.evaluate_panel`` judges the pair.
   ``g`` is scanned on a geometric grid of ``s`` (steps of about 3 %, about 1.5 % in
   frequency), upwards from the scheduled tension first; each grid tension is rounded to three
   significant figures (a tension an installer can set), the ends of the range excepted. The
   boundary of the clear set is refined with ``scipy.optimize.brentq`` on ``g`` between the
   last unclear and the first clear grid point, and the root is rounded to three significant
   figures away from the boundary and checked again on the model.
   To save solves, a grid scale is first screened with an estimate of the modes (each mode's
   f² interpolated linearly in ``s`` between the full-model solutions at the scheduled tension
   and at the end of the range, see ``TensionScan.predicted_excess``); the full model is
   solved where the estimate is within ``SCREEN_BAND`` (``SCREEN_BAND_SCALING`` for an
   open-sided membrane) of clear, and only full-model values decide.
3. An increase is preferred (a tauter panel is less prone to sag and flutter); a decrease is
   offered when only a decrease works, and the text says so.
4. Among the clear tensions, one that brings no *new* conflict with the panel's other
   excitations (one that is not already there at the scheduled tension) is preferred even if
   it means a decrease; when none exists the first clear tension is given and the text names
   the new conflict.
5. When no tension in range clears the pair, a rectangle is split into k = 2 … ``max_bays``
   equal bays by intermediate supports across its longer side (each bay a smaller panel of the
   same construction at the scheduled tension); the smallest k that clears it is given.

Clear windows narrower than the 3 % grid step can be missed, and so can one the screen's
estimate passes over (a loss factor that changes fast with tension near a cavity coupling):
the remedy then errs toward a larger change or "cannot be cleared by tension"; every tension
proposed has been checked on the model.

Changing the tension of a stretched system changes the energy stored in it: every remedy that
is work on the panel carries ``SAFETY_NOTE`` (retensioning is for trained installers, within
the system maker's rating and local codes).
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import brentq

from auditor.model import Excitation, Mode, Panel, Remedy
from auditor.rules import SEPARATION_TOLERANCE, RuleSet, _build_mode_arrays, _pairs, _widening

__all__ = ["TensionScan", "remedy_for", "remedy_advice", "excitation_excess", "bay_panel",
           "SAFETY_NOTE"]

ModesOf = Callable[[Panel], Sequence[Mode]]

#: Step of the tension-scale grid (ratio between neighbouring scales).
SCALE_STEP = 1.03

#: Grid scales whose estimated excess (``TensionScan.predicted_excess``) is above this, in
#: separation, are taken as unclear without solving the full model there.
SCREEN_BAND = 0.04

#: The same for a membrane with open sides (no sealed cavity, bending or porous sheet),
#: whose frequencies scale exactly as √T but for the small compressible terms: the estimate
#: was within 0.0011 of the model at every scale solved in the 20,000-panel benchmark.
SCREEN_BAND_SCALING = 0.01

#: Goes with every remedy that changes a tension or adds supports (``Remedy.work``): the
#: tables append it (:func:`remedy_advice`), the PDF and the JSON document carry it once.
SAFETY_NOTE = ("Retensioning and added supports are work for trained installers, within the "
               "system maker's rating, local codes and licensed practice.")


def remedy_advice(remedy: Remedy | None) -> str:
    """The remedy in words, with the safety note when it is work on the panel."""
    if remedy is None:
        return ""
    return f"{remedy.text} {SAFETY_NOTE}" if remedy.work else remedy.text


def excitation_excess(f: np.ndarray, eta: np.ndarray, excitation: Excitation,
                      ruleset: RuleSet, participation: np.ndarray | None = None) -> float:
    """How far the worst mode sits inside the margin that makes a finding with one excitation.

    Parameters
    ----------
    f : ndarray  [Hz]
        Natural frequencies.
    eta : ndarray  [-]
        Loss factors (NaN where unknown).
    excitation : Excitation
    ruleset : RuleSet
    participation : ndarray, optional  [-]
        Uniform-pressure participation factors; with an airborne excitation, a mode below the
        rule set's threshold makes a finding only inside the conflict margin (as in
        ``auditor.rules.evaluate_panel``). Without it every mode is held to the caution margin.

    Returns
    -------
    float  [-]
        ``max(margin − |separation|)`` over modes, the margin widened by η/2 when the rule set
        says so: ≥ 0 when some mode makes a conflict or caution, < 0 when all are clear
        (−inf with no modes).
    """
    if len(f) == 0:
        return -math.inf
    return float(_excess(np.asarray(f, float), eta, excitation, ruleset, participation))


def _excess(f: np.ndarray, eta: np.ndarray, excitation: Excitation, ruleset: RuleSet,
            participation: np.ndarray | None) -> np.ndarray:
    """:func:`excitation_excess` of each row of ``f`` (..., modes)  [-]."""
    lo, hi = excitation.low_hz, excitation.high_hz
    sep = np.where(f < lo, (f - lo) / lo, np.where(f > hi, (f - hi) / hi, 0.0))
    margin = ruleset.caution_margin + _widening(eta, ruleset) + SEPARATION_TOLERANCE
    if participation is not None:
        threshold = (ruleset.participation_threshold if excitation.airborne
                     else ruleset.support_participation_threshold)
        margin = margin - np.where(participation < threshold,
                                   ruleset.caution_margin - ruleset.conflict_margin, 0.0)
    return np.max(margin - np.abs(sep), axis=-1)


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


@dataclass
class _State:
    f: np.ndarray
    participation: np.ndarray
    eta: np.ndarray
    labels: tuple[str, ...] = ()


class TensionScan:
    """A panel's modes over a range of tension scales, computed on demand and kept.

    Shared by every excitation of one panel so the full model is solved once per scale.

    Parameters
    ----------
    panel : Panel
    modes_of : callable (Panel) -> sequence of Mode
    ruleset : RuleSet
    """

    def __init__(self, panel: Panel, modes_of: ModesOf, ruleset: RuleSet):
        self.panel = panel
        self.modes_of = modes_of
        self.ruleset = ruleset
        self._states: dict[float, _State] = {}
        self._bays: dict[int, _State | None] = {}
        self._estimates: dict[float, tuple] = {}   # interpolants of the modes, by end of range
        top = max(panel.tension_x, panel.tension_y)
        self.assumed_ceiling = panel.max_tension is None
        if panel.max_tension is not None and top > 0:
            self.highest = panel.max_tension / top
        else:
            self.highest = ruleset.max_tension_factor
        self.lowest = min(ruleset.min_tension_factor, self.highest)
        self.up = self._grid(1.0, self.highest) if self.highest > 1 else np.array([1.0])
        self.down = self._grid(min(1.0, self.highest), self.lowest)

    def _grid(self, start: float, stop: float) -> np.ndarray:
        """Scales from ``start`` to ``stop`` in steps of about ``SCALE_STEP``, the interior
        ones moved to the nearest tension of three significant figures."""
        if stop == start:
            return np.array([start])
        steps = max(2, math.ceil(abs(math.log(stop / start)) / math.log(SCALE_STEP)) + 1)
        raw = np.geomspace(start, stop, steps)
        tx = self.panel.tension_x
        scales = [float(start)]
        for s in raw[1:-1]:
            r = float(f"{s * tx:.3g}") / tx if tx > 0 else float(s)
            if (r - scales[-1]) * (stop - start) > 0 and (stop - r) * (stop - start) > 0:
                scales.append(r)
        scales.append(float(stop))
        return np.array(scales)

    def tensions(self, scale: float) -> tuple[float, float]:
        """(tension_x, tension_y) at ``scale``  [N/m]."""
        return self.panel.tension_x * scale, self.panel.tension_y * scale

    def state(self, scale: float) -> _State:
        key = float(scale)
        got = self._states.get(key)
        if got is None:
            tx, ty = self.tensions(key)
            modes, f, p, eta = _build_mode_arrays(self.modes_of(replace(self.panel, tension_x=tx,
                                                                  tension_y=ty)))
            got = self._states[key] = _State(f, p, eta, tuple(m.label for m in modes))
        return got

    def bay_state(self, bays: int) -> _State | None:
        if bays not in self._bays:
            sub = bay_panel(self.panel, bays)
            if sub is None:
                self._bays[bays] = None
            else:
                _, f, p, eta = _build_mode_arrays(self.modes_of(sub))
                self._bays[bays] = _State(f, p, eta)
        return self._bays[bays]

    def excess(self, scale: float, excitation: Excitation) -> float:
        s = self.state(scale)
        return excitation_excess(s.f, s.eta, excitation, self.ruleset, s.participation)

    @property
    def screen_band(self) -> float:
        """How far above clear, in separation, an estimate may be and the full model still
        be solved there (see :meth:`predicted_excess`)."""
        p = self.panel
        scales_exactly = (p.plenum_side != "sealed" and not p.bending_stiffness
                          and p.airflow_resistance is None)
        return SCREEN_BAND_SCALING if scales_exactly else SCREEN_BAND

    def predicted_excess(self, scales: np.ndarray, excitation: Excitation) -> np.ndarray:
        """A cheap estimate of the excess at each of ``scales`` (all on one side of 1), used
        only to decide where the full model is worth solving.

        A mode's ω² is its Rayleigh quotient ``(s·k_T + k_0)/m``: the tension stiffness
        scales with ``s``, the rest (a sealed cavity's air spring, bending) does not, and the
        quotient is stationary in the shape, so to second order in the change of shape ω² is
        linear in ``s`` (and exactly ∝ s for a membrane with open sides, but for the small
        compressible terms). Each mode's f², loss factor and participation are therefore
        interpolated linearly in ``s`` between their full-model values at the scheduled
        tension and at the end of the range on that side (modes matched by label, where the
        label is unique at both); a mode not matched goes as f² ∝ s from where it was found.
        Participation is not interpolated: each mode takes the lesser of its two values,
        which errs toward solving (a pair below the participation threshold is judged by the
        narrower conflict margin).
        """
        scales = np.asarray(scales, float)
        end = self.highest if np.all(scales >= 1.0) else self.lowest
        laws = self._estimates.get(end)
        if laws is None:
            laws = self._estimates[end] = self._interpolants(end)
        value, slope, proportional = laws
        if value.shape[1] == 0:
            return np.full(len(scales), -math.inf)
        t = scales[:, None] - 1.0
        f2 = np.where(proportional, value[0] * scales[:, None], value[0] + slope[0] * t)
        return _excess(np.sqrt(np.maximum(f2, 0.0)), value[1] + slope[1] * t, excitation,
                       self.ruleset, value[2] + slope[2] * t)

    def _interpolants(self, end: float):
        """For :meth:`predicted_excess`, per mode found at the scheduled tension or at
        ``end``: (f² [Hz²], η, participation) at s = 1 and their slopes in s, (3, modes) each,
        and whether f² is taken ∝ s instead (then the first row is f² per unit s)."""
        base = self.state(1.0)
        far = self.state(end) if end != 1.0 else base
        value = np.vstack([base.f**2, base.eta, base.participation])
        slope = np.zeros_like(value)
        proportional = np.ones(len(base.f), dtype=bool)
        matched: set[int] = set()
        if end != 1.0:
            at_base, at_far = Counter(base.labels), Counter(far.labels)
            unique_far = {label: k for k, label in enumerate(far.labels) if at_far[label] == 1}
            for i, label in enumerate(base.labels):
                k = unique_far.get(label)
                if k is None or at_base[label] != 1:
                    continue
                slope[:2, i] = (np.array([far.f[k] ** 2, far.eta[k]]) - value[:2, i]) / (end - 1.0)
                # Participation can change fast near a coupling with the air (a cavity): the
                # lesser value is taken throughout, the one that demotes airborne pairs.
                value[2, i] = min(value[2, i], far.participation[k])
                proportional[i] = False
                matched.add(k)
        slope[1] = np.nan_to_num(slope[1])   # an unknown loss factor stays unknown
        rest = [k for k in range(len(far.f)) if end != 1.0 and k not in matched]
        extra = np.vstack([far.f[rest] ** 2 / end, far.eta[rest], far.participation[rest]])
        return (np.hstack([value, extra]), np.hstack([slope, np.zeros_like(extra)]),
                np.concatenate([proportional, np.ones(len(rest), dtype=bool)]))


def _conflicting(state: _State, others: Sequence[Excitation], ruleset: RuleSet) -> set[int]:
    """Indices of ``others`` with at least one conflict against ``state``'s modes."""
    if not others or len(state.f) == 0:
        return set()
    low = np.array([e.low_hz for e in others])
    high = np.array([e.high_hz for e in others])
    airborne = np.array([e.airborne for e in others], dtype=bool)
    _, exc, _, conflict, _ = _pairs(state.f, state.participation, state.eta, low, high,
                                    airborne, ruleset)
    return set(exc[conflict].tolist())


def _round_away(tension: float, direction: int) -> float:
    """Round to three significant figures, up (direction +1) or down (−1)."""
    if tension <= 0:
        return tension
    step = 10.0 ** (math.floor(math.log10(tension)) - 2)
    q = tension / step
    q = math.ceil(q - 1e-9) if direction > 0 else math.floor(q + 1e-9)
    return q * step


def _refine(scan: TensionScan, excitation: Excitation, unclear: float, clear: float,
            direction: int) -> float:
    """A clear scale just past the boundary between ``unclear`` and ``clear`` (practical
    rounding when it stays clear and in range)."""
    def g(s: float) -> float:
        return scan.excess(s, excitation)

    g_unclear = g(unclear)
    if g_unclear < 0:  # screened as unclear, but the model says clear: the boundary is nearer
        return unclear
    # 1e-3 of the tension is finer than any installer sets it (the result is rounded to three
    # significant figures away from the boundary and checked again on the model).
    root = unclear if g_unclear == 0 else brentq(g, unclear, clear, xtol=1e-3 * clear,
                                                  rtol=1e-6)
    lo, hi = min(scan.lowest, scan.highest), scan.highest
    past = root * (1 + direction * 4e-4)
    tx = scan.panel.tension_x
    rounded = _round_away(past * tx, direction) / tx if tx > 0 else past
    for s in (rounded, past):
        if lo * (1 - 1e-12) <= s <= hi * (1 + 1e-12) and g(s) < 0:
            return s
    return clear


def _candidates(scan: TensionScan, excitation: Excitation, grid: np.ndarray,
                direction: int) -> Iterator[float]:
    """Clear scales along ``grid`` (from the scheduled tension outwards): the entry into each
    clear stretch first, then the stretch's own grid points."""
    previous = float(grid[0])
    was_clear = scan.excess(previous, excitation) < 0
    if was_clear:  # only when the scheduled tension is above the rated maximum
        yield previous
    estimate = scan.predicted_excess(grid[1:], excitation)
    for s, estimated in zip(grid[1:], estimate):
        s = float(s)
        # The full model is solved only where the estimate says the pair is clear or nearly
        # so (the screen band, in separation): every scale proposed is judged on the model.
        if estimated > scan.screen_band:
            clear = False
        else:
            clear = scan.excess(s, excitation) < 0
        if clear and not was_clear:
            yield _refine(scan, excitation, previous, s, direction)
        if clear:
            yield s
        was_clear, previous = clear, s


def _fmt_tension(t: float) -> str:
    return f"{t:.0f}" if t >= 100 else f"{t:.3g}"


def _pair_text(panel: Panel, tx: float, ty: float) -> str:
    if panel.isotropic:
        return _fmt_tension(tx)
    return f"{_fmt_tension(tx)} × {_fmt_tension(ty)}"


def _naming(excitation: Excitation) -> str:
    """e.g. "fan AHU-2 blade-pass ×1"."""
    rest = excitation.description
    if rest.startswith(excitation.kind + " "):
        rest = rest[len(excitation.kind) + 1:]
    return f"{excitation.kind} {excitation.equipment} {rest}"


#: A remedy text names at most this many of the new conflicts it brings (the re-audit of the
#: remedied schedule lists them all).
NAMED_CONFLICTS = 3


def _listing(excitations: Sequence[Excitation]) -> str:
    """e.g. "fan F1 shaft ×1, pump P2 vane-pass ×1, motor M3 2× line and 4 more"."""
    names = ", ".join(_naming(e) for e in excitations[:NAMED_CONFLICTS])
    rest = len(excitations) - NAMED_CONFLICTS
    return f"{names} and {rest} more" if rest > 0 else names


def _margin_text(ruleset: RuleSet) -> str:
    return f"by ≥{ruleset.caution_margin * 100:.0f} %"


def remedy_for(panel: Panel, excitation: Excitation, modes_of: ModesOf, ruleset: RuleSet, *,
               other_excitations: Sequence[Excitation] = (),
               scan: TensionScan | None = None) -> Remedy:
    """The tension (or the support spacing) that clears ``panel`` of ``excitation``.

    Parameters
    ----------
    panel : Panel
    excitation : Excitation
    modes_of : callable (Panel) -> sequence of Mode
        The full model: modes of a panel with any tension or size.
    ruleset : RuleSet
        Margins (the caution margin, widened by η/2 when set, must be cleared), remedy range
        (``min_tension_factor``, ``max_tension_factor`` when the panel has no ``max_tension``,
        ``max_bays``).
    other_excitations : sequence of Excitation
        The panel's other excitations: a remedy that brings no new conflict with them is
        preferred.
    scan : TensionScan, optional
        Shared modes over tension scales (``findings_with_remedies`` passes one per panel).

    Returns
    -------
    Remedy
        ``tension``/``tension_y`` [N/m] the new tensions (the scheduled ones when already
        clear), or ``bays`` the number of equal bays, or neither; ``text`` in words.

    References
    ----------
    .. [1] R. P. Brent, *Algorithms for Minimization without Derivatives*, Prentice-Hall,
       1973, ch. 4 (the root finder, ``scipy.optimize.brentq``).
    """
    scan = scan or TensionScan(panel, modes_of, ruleset)
    what = _naming(excitation)
    margin = _margin_text(ruleset)
    t0x, t0y = panel.tension_x, panel.tension_y
    if t0x <= 0 or t0y <= 0:
        return Remedy(tension=None, bays=None,
                      text=f"No tension is scheduled for panel {panel.panel}; "
                           f"it cannot be retuned to clear {what}.")
    if scan.excess(1.0, excitation) < 0:
        return Remedy(tension=t0x, bays=None, tension_y=t0y,
                      text=f"No change needed: clear of {what} {margin} at the scheduled "
                           f"tension.")
    others = [e for e in other_excitations if e != excitation]
    baseline = _conflicting(scan.state(1.0), others, ruleset)

    def new_conflicts(state) -> set[int]:
        return _conflicting(state, others, ruleset) - baseline

    top_t = max(t0x, t0y) * scan.highest
    if scan.assumed_ceiling:
        ceiling = (f"no rated maximum in the schedule; ceiling taken as "
                   f"{ruleset.max_tension_factor:g} × scheduled = {_fmt_tension(top_t)} N/m")
    else:
        ceiling = f"max {_fmt_tension(panel.max_tension)} N/m"
    plural = "" if panel.isotropic else "s"
    ratio = "" if panel.isotropic else " (x × y, ratio kept)"

    fallback: tuple[float, int, set[int]] | None = None
    chosen: tuple[float, int, set[int]] | None = None
    for direction, grid in ((+1, scan.up), (-1, scan.down)):
        if len(grid) < 2:
            continue
        for s in _candidates(scan, excitation, grid, direction):
            extra = new_conflicts(scan.state(s))
            if fallback is None:
                fallback = (s, direction, extra)
            if not extra:
                chosen = (s, direction, extra)
                break
        if chosen:
            break
    pick = chosen or fallback
    if pick is not None:
        s, direction, extra = pick
        tx, ty = scan.tensions(s)
        before, after = _pair_text(panel, t0x, t0y), _pair_text(panel, tx, ty)
        if direction > 0:
            text = (f"Raise tension{plural} from {before} to {after} N/m{ratio} ({ceiling}) "
                    f"to clear {what} {margin}.")
        else:
            text = (f"Lower tension{plural} from {before} to {after} N/m{ratio} to clear {what} "
                    f"{margin}; no tension up to {_fmt_tension(top_t)} N/m clears it. "
                    f"Check the system maker's minimum tension.")
        if extra:
            names = _listing([others[k] for k in sorted(extra)])
            text += f" This tension brings a new conflict with {names}; none in range avoids it."
        return Remedy(tension=tx, bays=None, text=text, tension_y=ty, work=True)

    low_t = min(t0x, t0y) * scan.lowest
    range_text = f"No tension from {_fmt_tension(low_t)} to {_fmt_tension(top_t)} N/m"
    first_bays: tuple[int, set[int]] | None = None
    for k in range(2, ruleset.max_bays + 1):
        state = scan.bay_state(k)
        if state is None:
            break
        if excitation_excess(state.f, state.eta, excitation, ruleset, state.participation) < 0:
            extra = new_conflicts(state)
            if first_bays is None:
                first_bays = (k, extra)
            if not extra:
                first_bays = (k, extra)
                break
    if first_bays is not None:
        k, extra = first_bays
        longer = max(panel.width or 0.0, panel.length or 0.0)
        text = (f"{range_text} clears {what}; split the {longer:.2f} m side into {k} equal "
                f"bays (supports every {longer / k:.2f} m) at the scheduled "
                f"{_pair_text(panel, t0x, t0y)} N/m to clear it {margin}.")
        if panel.cutouts:
            text += " The bays were assessed without the panel's cut-outs."
        if extra:
            names = _listing([others[j] for j in sorted(extra)])
            text += f" This brings a new conflict with {names}."
        return Remedy(tension=None, bays=k, text=text, work=True)
    if bay_panel(panel, 2) is None:
        tail = "support changes for this outline need the panel designer."
    else:
        tail = (f"nor does a split into up to {ruleset.max_bays} equal bays; "
                f"refer to the panel designer.")
    return Remedy(tension=None, bays=None, text=f"{range_text} clears {what}; {tail}")
