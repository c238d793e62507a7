"""What the audit works out: small frozen dataclasses, SI inside.

Data flows one way (DESIGN.md): physics turns a panel (:mod:`auditor.model`) into ``Mode``
records; the excitation module turns equipment into ``Excitation`` records; the rules turn
pairs into ``Finding`` records; the remedy search gives each panel with findings a
``Remedy``; ``PanelResult`` holds one panel's and ``AuditResult`` gathers everything for the
writers.

Every quantity is in SI: metres, kilograms per square metre, newtons per metre, pascal-seconds
per metre, hertz. Units exist only at the edges (``auditor.units``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

from auditor.model import Panel, RowProblem, Schedule

FindingSeverity = Literal["conflict", "caution"]
Verdict = Literal["clear", "caution", "conflict", "not assessed"]

#: A panel's verdicts, worst first.
VERDICTS: tuple[str, ...] = ("conflict", "not assessed", "caution", "clear")


@dataclass(frozen=True, slots=True)
class Mode:
    """One natural mode of a panel, as reported.

    Parameters
    ----------
    label : str
        "(m,n)" on a rectangle (m half-waves along the width, n along the length); "(m,n)" on a
        circle (m nodal diameters, n−1 interior nodal circles); "#k" on other outlines.
        A loaded mode takes the label of the in-vacuo mode that dominates it; where an
        earlier mode of the panel has that label too (a cavity split, or near-degenerate
        modes mixed by the air), it is marked b, c, …: "(0,5)", then "(0,5)b".
    frequency_hz : float  [Hz]
        Natural frequency (with air loading where the loading model applies).
    multiplicity : int
        2 for the cos/sin pair of a circular mode with nodal diameters, else 1.
    participation : float  [-]
        Uniform-pressure participation factor (∫φ dA)² / (A ∫φ² dA).
    nodal_lines : tuple of (family, count)
        e.g. (("parallel to length", m−1), ("parallel to width", n−1)) on a rectangle,
        (("diameters", m), ("circles", n−1)) on a circle, (("nodal domains", k),) otherwise.
    loss_factor : float or None  [-]
        Total loss factor (structural + radiation) when known.
    in_vacuo_hz : float or None  [Hz]
        The same mode's frequency with no air, for comparison.
    index : int
        Position of this mode in its panel's modal basis (for shape drawings).
    """

    label: str
    frequency_hz: float
    multiplicity: int = 1
    participation: float = 0.0
    nodal_lines: tuple[tuple[str, int], ...] = ()
    loss_factor: float | None = None
    in_vacuo_hz: float | None = None
    index: int = 0

    def as_dict(self) -> dict[str, Any]:
        return {
            "label": self.label,
            "frequency_hz": self.frequency_hz,
            "multiplicity": self.multiplicity,
            "participation": self.participation,
            "nodal_lines": dict(self.nodal_lines),
            "loss_factor": self.loss_factor,
            "in_vacuo_hz": self.in_vacuo_hz,
        }


@dataclass(frozen=True)
class Mount:
    """How an item of equipment stands on the structure, as far as its tones are concerned.

    Parameters
    ----------
    kind : {"rigid", "steel spring", "elastomer"}
        "rigid" when the schedule gives no isolator deflection (an assumption the report
        states: ``rigid_assumed``).
    static_deflection : float or None  [m]
    damping_ratio : float or None  [-]
        ζ of the isolators; the default for the kind when the schedule gives none
        (``damping_assumed``).
    natural_frequency_hz : float or None  [Hz]
        ``√(g/δ)/2π``; None when rigid.
    rigid_assumed : bool
        True when no deflection was given and the item was taken as rigidly mounted.
    damping_assumed : bool
        True when ζ is the default for the kind (common practice), not the schedule's.
    """

    kind: str = "rigid"
    static_deflection: float | None = None
    damping_ratio: float | None = None
    natural_frequency_hz: float | None = None
    rigid_assumed: bool = True
    damping_assumed: bool = False

    @property
    def description(self) -> str:
        """In words, e.g. "steel spring, 25 mm static deflection (3.15 Hz), ζ 0.01 assumed"."""
        if self.static_deflection is None or self.natural_frequency_hz is None:
            return "rigid (assumed: no isolator deflection given)" if self.rigid_assumed \
                else "rigid"
        zeta = "" if self.damping_ratio is None else (
            f", ζ {self.damping_ratio:g}" + (" assumed" if self.damping_assumed else ""))
        return (f"{self.kind}, {self.static_deflection * 1e3:.3g} mm static deflection "
                f"({self.natural_frequency_hz:.3g} Hz){zeta}")


@dataclass(frozen=True)
class Excitation:
    """One forcing line or band from one item of equipment.

    Parameters
    ----------
    equipment : str
        Equipment tag.
    kind : str
        Equipment kind ("fan", ...).
    source : str
        What makes the tone in the trade's words: "shaft", "blade-pass", "vane-pass",
        "electromagnetic", "hum", "cylinder", "belt-pass", "vortex shedding", "tone".
    order : int
        Harmonic number (1 for the fundamental of that source).
    description : str
        In words, e.g. "fan blade-pass ×2".
    frequency_hz : float  [Hz]
        The line; for a band, its geometric centre.
    band_hz : (float, float) or None  [Hz]
        Lower and upper edge of a band (variable speed, a typed range); None for a line.
    airborne : bool
        True when the excitation reaches a panel only as sound in air (then a mode with a
        small uniform-pressure participation cannot be driven hard); False for
        structure-borne paths (shaft and electromagnetic forces through fixings).
    mount : Mount or None
        The equipment's mount when the tone reaches the structure through it (structure-borne
        tones of equipment); None for airborne tones and direct ones (vortex shedding on a
        wire acts on the panel itself).
    transmissibility : float  [-]
        The largest fraction of the force the mount passes over the line or band (1 for a
        rigid mount and for tones that do not go through a mount).
    """

    equipment: str
    kind: str
    source: str
    order: int
    description: str
    frequency_hz: float
    band_hz: tuple[float, float] | None = None
    airborne: bool = True
    mount: Mount | None = None
    transmissibility: float = 1.0

    @property
    def path(self) -> str:
        """"airborne", "structure-borne" (through the equipment's mount) or "direct"."""
        if self.airborne:
            return "airborne"
        return "structure-borne" if self.mount is not None else "direct"

    @property
    def low_hz(self) -> float:
        return self.band_hz[0] if self.band_hz else self.frequency_hz

    @property
    def high_hz(self) -> float:
        return self.band_hz[1] if self.band_hz else self.frequency_hz


@dataclass(frozen=True)
class TensionCurves:
    """A panel's modes followed over the range of tension a remedy searched, on the full model
    (what the tuning chart draws).

    Parameters
    ----------
    tension : tuple of float  [N/m]
        Tension x at which the modes are given, ascending: the ends of the range, the
        scheduled tension and any tension whose check failed before the search's choice
        (tension y in proportion).
    labels : tuple of str
        The modes followed (each as at the scheduled tension).
    frequency_hz : tuple of tuple of float  [Hz]
        ``frequency_hz[k][j]``: mode ``labels[k]`` at ``tension[j]``; solved there, or where a
        mode was not found at a tension, filled as the search fills it (f² linear in
        tension between the tensions it was solved at, ∝ tension beyond).
    exact : bool
        True when the frequencies scale exactly as √T (a membrane with no air on either
        face and no bending stiffness): then they are the scheduled solve's, scaled.
    """

    tension: tuple[float, ...]
    labels: tuple[str, ...]
    frequency_hz: tuple[tuple[float, ...], ...]
    exact: bool = False

    def follows(self, label: str) -> bool:
        """Whether mode ``label`` is followed."""
        return label in self.labels

    def frequency_at(self, label: str, tension: float) -> float | None:
        """Mode ``label`` at ``tension`` [N/m]: f² linear in tension between the given
        tensions, ∝ tension beyond them (as the remedy search interpolates); None for a
        mode not followed."""
        if not self.follows(label):
            return None
        row, t = self.frequency_hz[self.labels.index(label)], self.tension
        if tension < t[0] or tension > t[-1]:
            end = 0 if tension < t[0] else -1
            return row[end] * math.sqrt(max(tension, 0.0) / t[end])
        return math.sqrt(float(np.interp(tension, t, np.square(row))))


@dataclass(frozen=True)
class Remedy:
    """One panel's remedy: the tension, or the support spacing, that clears its conflicts.

    Parameters
    ----------
    tension : float or None  [N/m]
        The proposed tension along x (both tensions scaled together for an orthotropic
        panel); None when no tension within the rated range clears the conflicts.
    bays : int or None
        The fewest equal bays (intermediate supports across the longer side) that clear them
        at the scheduled tension, when no tension does; None otherwise.
    text : str
        The remedy in words.
    tension_y : float or None  [N/m]
        The proposed tension along y.
    work : bool
        True when the remedy changes a tension or adds supports: work on a stretched system,
        to which the safety note (``auditor.remedy.SAFETY_NOTE``) applies.
    clear_windows : tuple of (low, high)  [N/m]
        Every range of tension_x within the rated range at which the panel has no conflict.
    verified : bool
        True when the proposed tension (or bay size) was solved again on the full model and
        judged clear of conflicts.
    cautions : int
        Cautions left at the proposed tension (or bays).
    fundamental_hz : float or None  [Hz]
        The full model's lowest natural frequency at the proposed tension, or of one bay at
        the scheduled tension: what a commissioning tap test should find after the work.
        None when no work is proposed.
    curves : TensionCurves or None
        The modes that matter (in findings, the fundamental, and those driven at the rule
        set's participation threshold or more), followed over the range searched, when a
        tension search ran.
    """

    tension: float | None
    bays: int | None
    text: str
    tension_y: float | None = None
    work: bool = False
    clear_windows: tuple[tuple[float, float], ...] = ()
    verified: bool = False
    cautions: int = 0
    fundamental_hz: float | None = None
    curves: TensionCurves | None = None


@dataclass(frozen=True, slots=True)
class Finding:
    """A (mode, excitation) pair that matters to the rule set.

    A finding belongs to the :class:`PanelResult` that holds it and names no panel: the
    panels of one type in one tone group share one judgement, and so one tuple of findings.

    ``separation`` is signed: (mode − excitation) / excitation for a line; for a band, the
    distance to its nearest edge over that edge, 0 inside the band. ``margin`` is the
    (widened) margin the pair was judged by.

    ``response_db`` estimates how strongly the mode answers:
    ``20·log10(participation × amplification × transmissibility)``, 0 dB being a fully
    participating mode driven quasi-statically through a rigid path (see
    ``auditor.judgement.response``). ``amplification`` is the mode's hysteretic
    single-degree-of-freedom amplification at this separation, ``transmissibility`` the
    equipment mount's at the tone's frequency nearest the mode (1 for airborne and direct
    tones). ``overlap`` is True when the mode lies where modes overlap (modal overlap ≥ 1),
    where the pair was judged by its participation and response rather than nearness.

    ``remedy`` is kept for the writers and is always None: the remedy is the panel's
    (``PanelResult.remedy``).
    """

    mode: Mode
    excitation: Excitation
    separation: float
    severity: FindingSeverity
    margin: float
    remedy: Remedy | None = None
    response_db: float = 0.0
    amplification: float = 1.0
    transmissibility: float = 1.0
    overlap: bool = False


def finding_rank(finding: Finding) -> tuple:
    """Sort key, worst first: conflicts before cautions, then by response (largest first),
    then by |separation|."""
    return (finding.severity != "conflict", -finding.response_db, abs(finding.separation))


@dataclass(frozen=True, eq=False)
class ShapeGrid:
    """A mode shape sampled for drawing.

    ``x`` (nx,) and ``y`` (ny,) [m] in the panel's own coordinates (see
    ``auditor.physics.basis``); ``values`` (ny, nx) scaled so max |φ| = 1, NaN outside the
    panel (cut-outs included).
    """

    label: str
    x: Any
    y: Any
    values: Any


@dataclass(frozen=True)
class PanelResult:
    """One panel's modes, findings, verdict and remedy, and which model gave them.

    Parameters
    ----------
    panel : Panel
    modes : sequence of Mode
        Every mode computed for the panel (up to the assessment limit), ascending. From the
        audit it is a ``ModeList`` (``auditor.physics.modes``): arrays, each record made when
        read.
    findings : tuple of Finding
        Worst first (``finding_rank``).
    loading : str
        The loading model that applied, in words.
    notes : tuple of str
    shapes : tuple of ShapeGrid
        Drawings of the modes named in findings (and the fundamental).
    measured_peaks_hz : tuple of float  [Hz]
        The tap-test peaks when a recording was used.
    assessed_to_hz : float  [Hz]
        Every mode up to this frequency was computed and judged; no verdict is given above it.
    verdict : {"clear", "caution", "conflict", "not assessed"}
        "not assessed" when a tone reaching the panel lies (with its caution margin) above
        ``assessed_to_hz`` and the panel has no conflict; never "clear" then.
    verdict_reason : str
        Why, in words.
    overlap_from_hz : float or None  [Hz]
        Where the modes begin to overlap (modal overlap η·f·n(f) ≥ 1), when known.
    beyond : tuple of Excitation
        The tones reaching the panel above ``assessed_to_hz``.
    remedy : Remedy or None
        The panel's one remedy (None for a panel with no finding).
    """

    panel: Panel
    modes: Sequence[Mode]
    findings: tuple[Finding, ...]
    loading: str  # the loading model that applied, in words
    notes: tuple[str, ...] = ()
    shapes: tuple[ShapeGrid, ...] = ()
    measured_peaks_hz: tuple[float, ...] = ()
    assessed_to_hz: float = float("inf")
    verdict: Verdict = "clear"
    verdict_reason: str = ""
    overlap_from_hz: float | None = None
    beyond: tuple[Excitation, ...] = ()
    remedy: Remedy | None = None

    @property
    def status(self) -> str:
        """The three-way status the writers knew ("conflict", "caution", "clear"): the
        verdict with "not assessed" shown as "caution", never milder than the findings say,
        and never "clear" above the assessed range. Prefer ``verdict``."""
        severities = {f.severity for f in self.findings}
        if "conflict" in severities or self.verdict == "conflict":
            return "conflict"
        if "caution" in severities or self.verdict in ("caution", "not assessed"):
            return "caution"
        return "clear"

    @property
    def worst_db(self) -> float:
        """The largest response among the findings [dB] (−inf with none)."""
        return max((f.response_db for f in self.findings), default=float("-inf"))

    def rank(self) -> tuple:
        """Sort key, worst first: by verdict (conflict, not assessed, caution, clear), then by
        the worst finding's response."""
        return (VERDICTS.index(self.verdict), -self.worst_db)


@dataclass(frozen=True)
class AuditResult:
    """Everything the writers need; they only read it.

    ``ruleset`` is an ``auditor.rules.RuleSet``; ``excitations`` maps each equipment tag to
    its excitations (each structure-borne one carries its ``Mount``); ``mounts`` maps each
    equipment tag to its mount; ``problems`` holds the schedule's problems plus any raised
    while auditing (a panel whose geometry the physics could not mesh, a mount that
    amplifies a tone, say).
    """

    schedule: Schedule
    panels: tuple[PanelResult, ...]
    excitations: tuple[tuple[str, tuple[Excitation, ...]], ...]
    ruleset: Any
    problems: tuple[RowProblem, ...]
    version: str
    created: str  # ISO 8601 date-time of the audit
    calibrated: bool = False
    mounts: tuple[tuple[str, Mount], ...] = ()
    calibrations: tuple[Any, ...] = ()  # auditor.calibrate.Calibration, one per tap test used

    @property
    def findings(self) -> tuple[Finding, ...]:
        """Every finding, worst first (``finding_rank``)."""
        return tuple(sorted((f for p in self.panels for f in p.findings), key=finding_rank))

    def ranked_panels(self) -> tuple[PanelResult, ...]:
        """The panels worst first (``PanelResult.rank``); schedule order among equals."""
        return tuple(sorted(self.panels, key=PanelResult.rank))

    def summary(self) -> dict[str, int]:
        conflicts = cautions = with_conflicts = clear = not_assessed = 0
        for p in self.panels:
            c = sum(1 for f in p.findings if f.severity == "conflict")
            conflicts += c
            cautions += sum(1 for f in p.findings if f.severity == "caution")
            with_conflicts += c > 0
            clear += p.verdict == "clear"
            not_assessed += p.verdict == "not assessed"
        rejected = {(p.file, p.sheet, p.row) for p in self.problems if p.severity == "error"}
        return {
            "panels": len(self.schedule.panels),
            "equipment": len(self.schedule.equipment),
            "rejected_rows": len(rejected),
            "warnings": sum(1 for p in self.problems if p.severity == "warning"),
            "conflicts": conflicts,
            "cautions": cautions,
            "panels_with_conflicts": with_conflicts,
            "panels_clear": clear,
            "panels_not_assessed": not_assessed,
        }
