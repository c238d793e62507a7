"""Which (mode, excitation) pairs matter: the separation screen graded by estimated response.

Per pair (common practice of the trade for natural frequency against forcing frequency, then
the response estimate of ``auditor.judgement.response``):

- separation, signed: ``(f_mode − f_exc) / f_exc`` for a line; for a band, the distance from
  the mode to the band's nearest edge over that edge, 0 inside the band;
- screen: conflict when ``|separation| ≤ conflict margin``, caution when ``≤ caution margin``
  (both inclusive, with a rounding tolerance ``SEPARATION_TOLERANCE``); with bandwidth
  widening both margins grow by η/2, the half-width of the mode's half-power band;
- participation: a mode whose participation is below the rule set's threshold for the path
  (``participation_threshold`` airborne, ``support_participation_threshold`` structure-borne
  and direct) is judged one grade down: a caution inside the conflict margin, nothing beyond;
- modal overlap: for a mode at or above the frequency where modes overlap (``overlap_from_hz``,
  η·f·n(f) ≥ 1) every tone lies near some mode, so nearness alone says little: a pair there is
  reported only when the mode reaches its participation threshold (a mode below it makes no
  finding at all) and its response grades it;
- response: ``response_db = 20·log10(participation × |H| × T)``, ``|H|`` the mode's hysteretic
  amplification at ``ρ = f_near / f_mode`` (``f_near`` the tone's frequency nearest the mode: the
  line, the nearest band edge, or the mode itself inside a band), ``T`` the equipment mount's
  transmissibility at ``f_near`` (1 for airborne and direct tones and rigid mounts). A
  conflict whose response is below ``conflict_db`` is a caution; any pair below
  ``report_db`` is not reported.

Pairs are listed worst first: conflicts, then cautions, each by response (largest first),
then by |separation|.

References
----------
.. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control" (separation
   margins, common practice).
.. [2] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 (half-power bandwidth η·f,
   hysteretic amplification) and the vibration isolation chapter (transmissibility).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np

from auditor.judgement.response import modal_amplification, response_db, transmissibility
from auditor.model import Equipment, Panel
from auditor.physics.materials import structural_loss_factor
from auditor.results import Excitation, Finding, Mode
from auditor.rules import SEPARATION_TOLERANCE, RuleSet

if TYPE_CHECKING:
    from typing_extensions import TypeIs

__all__ = [
    "ExcitationArrays",
    "ModeArrays",
    "PairGrades",
    "CONFLICT",
    "CAUTION",
    "reaching",
    "separation",
    "margin_widening",
    "default_loss_factor",
    "assessment_limit_hz",
    "findings_of",
    "judge_pairs",
    "evaluate_panel",
]

#: Grades of a pair in ``PairGrades.grade``.
CONFLICT, CAUTION = 2, 1


def separation(mode_hz: Any, low_hz: Any, high_hz: Any) -> Any:
    """Signed separation of a natural frequency from a line or band.

    Parameters
    ----------
    mode_hz : float or ndarray  [Hz]
    low_hz, high_hz : float or ndarray  [Hz]
        Band edges; equal for a line.

    Returns
    -------
    float or ndarray  [-]
        ``(f − low)/low`` below the band, ``(f − high)/high`` above it, 0 inside; for a line
        ``(f − f_exc)/f_exc``.
    """
    f = np.asarray(mode_hz, dtype=float)
    lo = np.asarray(low_hz, dtype=float)
    hi = np.asarray(high_hz, dtype=float)
    out = np.where(f < lo, (f - lo) / lo, np.where(f > hi, (f - hi) / hi, 0.0))
    return float(out) if out.ndim == 0 else out


def reaching(panel: Panel, items: Iterable[tuple[Equipment, Sequence[Excitation]]],
             ruleset: RuleSet) -> tuple[Excitation, ...]:
    """The excitations reaching ``panel``: by zone when the rule set says so."""
    out: list[Excitation] = []
    for item, excitations in items:
        if not ruleset.use_zones or item.reaches(panel.zone):
            out.extend(excitations)
    return tuple(out)


@dataclass(frozen=True, eq=False)
class ExcitationArrays:
    """The excitations reaching one panel, sorted by lower edge, as arrays.

    Build it once for all panels of a zone (``ExcitationArrays.of``).
    """

    excitations: tuple[Excitation, ...]
    low: np.ndarray
    high: np.ndarray
    airborne: np.ndarray
    mount_hz: np.ndarray       # the mount's natural frequency [Hz], NaN for no mount or rigid
    mount_damping: np.ndarray  # its damping ratio [-]

    @classmethod
    def of(cls, excitations: Sequence[Excitation] | ExcitationArrays) -> ExcitationArrays:
        if isinstance(excitations, ExcitationArrays):
            return excitations
        ordered = tuple(sorted(excitations, key=lambda e: e.low_hz))

        def mount_value(e: Excitation, name: str) -> float:
            value = getattr(e.mount, name, None) if e.mount is not None else None
            return math.nan if value is None else float(value)

        return cls(
            ordered,
            np.array([e.low_hz for e in ordered], dtype=float),
            np.array([e.high_hz for e in ordered], dtype=float),
            np.array([e.airborne for e in ordered], dtype=bool),
            np.array([mount_value(e, "natural_frequency_hz") for e in ordered], dtype=float),
            np.array([mount_value(e, "damping_ratio") for e in ordered], dtype=float),
        )

    @property
    def top_hz(self) -> float | None:
        """The highest frequency reaching the panel (upper band edge) [Hz]."""
        return float(self.high.max()) if len(self.high) else None


class ModeColumns(Protocol):
    """A solve that holds a panel's modes as arrays (a ``PanelModes``): ``frequency_hz``,
    ``participation`` and ``loss_factor`` (n,), and the ``Mode`` records as ``modes``."""

    @property
    def frequency_hz(self) -> np.ndarray: ...
    @property
    def participation(self) -> np.ndarray: ...
    @property
    def loss_factor(self) -> np.ndarray: ...
    @property
    def modes(self) -> Sequence[Mode]: ...


def holds_mode_columns(modes: Sequence[Mode] | ModeColumns) -> TypeIs[ModeColumns]:
    """Whether ``modes`` holds its modes as arrays (its ``frequency_hz`` is an ndarray)."""
    return isinstance(getattr(modes, "frequency_hz", None), np.ndarray)


@dataclass(frozen=True, eq=False)
class ModeArrays:
    """A panel's modes sorted by frequency, with their frequency, participation and loss factor
    as arrays. ``loss_factor`` is NaN where unknown (no widening there); ``response_loss_factor``
    fills those with the panel's structural default for the response estimate."""

    modes: Sequence[Mode]
    frequency: np.ndarray
    participation: np.ndarray
    loss_factor: np.ndarray
    response_loss_factor: np.ndarray

    @classmethod
    def of(cls, modes: Sequence[Mode] | ModeArrays | ModeColumns, default_loss_factor: float,
           records: bool = True) -> ModeArrays:
        """From ``Mode`` records, or from a solve that holds its modes as arrays (a
        ``PanelModes``: ascending, with ``frequency_hz``, ``participation`` and
        ``loss_factor`` arrays), whose records are taken only when ``records``."""
        if isinstance(modes, ModeArrays):
            return modes
        if holds_mode_columns(modes):
            frequency = np.asarray(modes.frequency_hz, float)
            eta = np.asarray(modes.loss_factor, float)
            ascending = bool(np.all(frequency[1:] >= frequency[:-1]))
            order: slice | np.ndarray = (slice(None) if ascending
                                         else np.argsort(frequency, kind="stable"))
            listed: Sequence[Mode] = modes.modes if records else ()   # made when read
            if records and isinstance(order, np.ndarray):   # i.e. not ascending
                listed = tuple(listed[k] for k in order)
            return cls(listed, frequency[order], np.asarray(modes.participation, float)[order],
                       eta[order], np.where(np.isfinite(eta[order]), np.abs(eta[order]),
                                            default_loss_factor))
        ordered = tuple(sorted(getattr(modes, "modes", modes), key=lambda m: m.frequency_hz))
        eta = np.array([math.nan if m.loss_factor is None else m.loss_factor for m in ordered],
                       dtype=float)
        return cls(
            ordered,
            np.array([m.frequency_hz for m in ordered], dtype=float),
            np.array([m.participation for m in ordered], dtype=float),
            eta,
            np.where(np.isfinite(eta), np.abs(eta), default_loss_factor),
        )

    @classmethod
    def from_arrays(cls, frequency: np.ndarray, participation: np.ndarray,
                    loss_factor: np.ndarray, default_loss_factor: float) -> ModeArrays:
        """From plain arrays (any order; no ``Mode`` records): for scans over tension."""
        order = np.argsort(frequency, kind="stable")
        eta = np.asarray(loss_factor, float)[order]
        return cls((), np.asarray(frequency, float)[order],
                   np.asarray(participation, float)[order], eta,
                   np.where(np.isfinite(eta), np.abs(eta), default_loss_factor))


def default_loss_factor(panel: Panel) -> float:
    """The panel's structural loss factor (its own, or its material's default)."""
    return structural_loss_factor(panel.material, panel.loss_factor)


@dataclass(frozen=True, eq=False)
class PairGrades:
    """The pairs that make a finding, worst first, as arrays (indices into the sorted
    ``ModeArrays`` and ``ExcitationArrays``)."""

    mode: np.ndarray
    excitation: np.ndarray
    separation: np.ndarray
    grade: np.ndarray            # CONFLICT or CAUTION
    margin: np.ndarray
    response_db: np.ndarray
    amplification: np.ndarray
    transmissibility: np.ndarray
    overlap: np.ndarray

    @property
    def conflicts(self) -> int:
        return int(np.count_nonzero(self.grade == CONFLICT))

    @property
    def cautions(self) -> int:
        return int(np.count_nonzero(self.grade == CAUTION))

    def caution_strength(self) -> float:
        """Sum of the cautions' responses as squared amplitude (10^(dB/10)): how much the
        cautions that remain answer, together."""
        r = self.response_db[self.grade == CAUTION]
        return float(np.sum(10.0 ** (r[np.isfinite(r)] / 10.0)))


def margin_widening(eta: np.ndarray, ruleset: RuleSet) -> np.ndarray:
    """Half-power half-width η/2 per mode (0 when unknown or not asked for)."""
    if not ruleset.bandwidth_widening:
        return np.zeros_like(eta)
    return np.where(np.isfinite(eta), 0.5 * np.abs(eta), 0.0)


def judge_pairs(modes: ModeArrays, excitations: ExcitationArrays, ruleset: RuleSet, *,
                limit_hz: float = math.inf, overlap_from_hz: float = math.inf) -> PairGrades:
    """Every (mode, excitation) pair that makes a finding, graded and worst first.

    Parameters
    ----------
    modes : ModeArrays
    excitations : ExcitationArrays
        The excitations reaching the panel.
    ruleset : RuleSet
    limit_hz : float  [Hz]
        Modes above this do not count (the assessment limit).
    overlap_from_hz : float  [Hz]
        Modes at or above this lie where modes overlap (see the module docstring).

    Returns
    -------
    PairGrades
    """
    count = int(np.searchsorted(modes.frequency, limit_hz * (1 + 1e-12), side="right"))
    f = modes.frequency[:count]
    low, high = excitations.low, excitations.high
    widen = margin_widening(modes.loss_factor[:count], ruleset)
    reach = ruleset.caution_margin + (float(widen.max()) if len(widen) else 0.0) \
        + SEPARATION_TOLERANCE
    first = np.searchsorted(f, low * max(1.0 - reach, 0.0), side="left")
    stop = np.searchsorted(f, high * (1.0 + reach), side="right")
    counts = np.maximum(stop - first, 0)
    total = int(counts.sum())
    if total == 0:
        empty = np.zeros(0)
        return PairGrades(empty.astype(int), empty.astype(int), empty, empty.astype(np.int8),
                          empty, empty, empty, empty, empty.astype(bool))
    exc = np.repeat(np.arange(len(low)), counts)
    offsets = np.cumsum(counts) - counts
    mode = np.arange(total) - np.repeat(offsets - first, counts)
    fm, lo, hi = f[mode], low[exc], high[exc]
    sep = np.where(fm < lo, (fm - lo) / lo, np.where(fm > hi, (fm - hi) / hi, 0.0))
    size = np.abs(sep)
    w = widen[mode]
    conflict_margin = ruleset.conflict_margin + w
    caution_margin = ruleset.caution_margin + w
    within_conflict = size <= conflict_margin + SEPARATION_TOLERANCE
    within_caution = size <= caution_margin + SEPARATION_TOLERANCE
    participation = modes.participation[mode]
    threshold = np.where(excitations.airborne[exc], ruleset.participation_threshold,
                         ruleset.support_participation_threshold)
    weak = participation < threshold
    overlap = fm >= overlap_from_hz
    # The screen: a weak pair is one grade down (a caution inside the conflict margin, nothing
    # beyond it); where modes overlap a weak pair makes no finding at all.
    grade = np.where(within_conflict & ~weak, CONFLICT,
                     np.where(within_caution & ~weak, CAUTION,
                              np.where(within_conflict & weak & ~overlap, CAUTION, 0)))
    margin = np.where(within_conflict, conflict_margin, caution_margin)
    # The response estimate.
    near = np.clip(fm, lo, hi)
    amplification = modal_amplification(near / fm, modes.response_loss_factor[mode])
    path = transmissibility(near, excitations.mount_hz[exc], excitations.mount_damping[exc])
    response = response_db(participation, amplification, path)
    grade = np.where((grade == CONFLICT) & (response < ruleset.conflict_db), CAUTION, grade)
    grade = np.where(response < ruleset.report_db, 0, grade).astype(np.int8)
    idx = np.flatnonzero(grade > 0)
    idx = idx[np.lexsort((size[idx], -response[idx], -grade[idx]))]
    return PairGrades(mode[idx], exc[idx], sep[idx], grade[idx], margin[idx], response[idx],
                      np.asarray(amplification)[idx], np.asarray(path)[idx], overlap[idx])


def evaluate_panel(panel: Panel, modes: Sequence[Mode] | ModeArrays,
                   excitations: Sequence[Excitation] | ExcitationArrays, ruleset: RuleSet, *,
                   limit_hz: float | None = None,
                   overlap_from_hz: float | None = None) -> tuple[Finding, ...]:
    """Findings for one panel, worst first.

    Parameters
    ----------
    panel : Panel
    modes : sequence of Mode, or ModeArrays
    excitations : sequence of Excitation, or ExcitationArrays
        The excitations reaching the panel (zones already applied: ``reaching``).
    ruleset : RuleSet
    limit_hz : float, optional  [Hz]
        The assessment limit (default: ``assessment_limit_hz`` of these excitations).
    overlap_from_hz : float, optional  [Hz]
        Where modes overlap (default: nowhere).

    Returns
    -------
    tuple of Finding
        Conflicts first, then cautions; each by response (largest first), then |separation|.

    References
    ----------
    .. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control" (margins).
    .. [2] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 and the vibration isolation
       chapter.
    """
    excs = ExcitationArrays.of(excitations)
    if not excs.excitations:
        return ()
    arrays = ModeArrays.of(modes, default_loss_factor(panel))
    if limit_hz is None:
        limit_hz = assessment_limit_hz(ruleset, excs.top_hz)
    pairs = judge_pairs(arrays, excs, ruleset, limit_hz=limit_hz,
                        overlap_from_hz=math.inf if overlap_from_hz is None else overlap_from_hz)
    return findings_of(arrays, excs, pairs)


def findings_of(modes: ModeArrays, excitations: ExcitationArrays,
                pairs: PairGrades) -> tuple[Finding, ...]:
    """The ``Finding`` records of graded pairs (in their order)."""
    return tuple(
        Finding(mode=modes.modes[m], excitation=excitations.excitations[e],
                separation=s, severity="conflict" if g == CONFLICT else "caution", margin=w,
                response_db=r, amplification=a, transmissibility=t, overlap=o)
        for m, e, s, g, w, r, a, t, o in zip(
            pairs.mode.tolist(), pairs.excitation.tolist(), pairs.separation.tolist(),
            pairs.grade.tolist(), pairs.margin.tolist(), pairs.response_db.tolist(),
            pairs.amplification.tolist(), pairs.transmissibility.tolist(),
            pairs.overlap.tolist()))


#: Above the caution margin, how much further up modes are computed, so that a well-damped
#: mode whose widened margin reaches down to the tone is not left out  [-].
WIDENING_ALLOWANCE = 0.1

#: Modes listed for a panel no tone reaches, when the rule set gives no fixed limit  [Hz].
UNREACHED_LIMIT_HZ = 500.0


def assessment_limit_hz(ruleset: RuleSet, top_hz: float | None) -> float:
    """The highest natural frequency that counts for a panel whose highest tone is ``top_hz``.

    Parameters
    ----------
    ruleset : RuleSet
    top_hz : float or None  [Hz]
        The highest excitation frequency reaching the panel (upper band edge); None when
        nothing reaches it.

    Returns
    -------
    float  [Hz]
        ``fmax_hz``, or ``excitation_multiple × top_hz``, the smaller when both are set, and
        never below ``top_hz × (1 + caution margin + WIDENING_ALLOWANCE)``: every mode that
        can make a finding with a tone reaching the panel is assessed, whatever the rule set's
        limit. With nothing reaching the panel: ``fmax_hz`` (``UNREACHED_LIMIT_HZ`` when unset).
    """
    if not top_hz:
        return ruleset.fmax_hz or UNREACHED_LIMIT_HZ
    limits = [math.inf]
    if ruleset.fmax_hz is not None:
        limits.append(ruleset.fmax_hz)
    if ruleset.excitation_multiple is not None:
        limits.append(ruleset.excitation_multiple * top_hz)
    rule = min(limits)
    return max(rule, top_hz * (1.0 + ruleset.caution_margin + WIDENING_ALLOWANCE))
