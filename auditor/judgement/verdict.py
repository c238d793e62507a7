"""A panel's verdict: what was assessed, where modes overlap, and what the findings say.

Every panel states ``assessed_to_hz``: the frequency up to which every mode was computed
(``PanelModes.complete_to_hz``) and judged (the assessment limit,
``auditor.judgement.screening.assessment_limit_hz``). A tone reaching the panel whose caution
band reaches above it (``f_high × (1 + caution margin) > assessed_to_hz``) was not fully
judged, so the panel is never "clear" then: its verdict is "not assessed" (or "conflict" when
a conflict was found below), with the reason in words.

Verdicts, worst first: "conflict" (a conflict was found), "not assessed" (no conflict, but
tones above the assessed range), "caution" (cautions only), "clear".

Where modes crowd so that their half-power bands overlap (modal overlap ``M = η·f·n(f) ≥ 1``,
``n(f) = 2π f A ρs / T`` for a membrane from Weyl's law), a tone always lies near some mode;
the verdict says from which frequency, and the screen judges pairs there by participation and
response (``auditor.judgement.screening``).

For tones above the assessed range the verdict gives an estimate of what the modes not
computed could do: the participations of all modes of a panel sum to 1 (Parseval's identity
for the constant function in the orthonormal modes), so those not computed hold at most
``1 − Σ participation`` of it, and their response is at most that × ``1/η`` × the path's
transmissibility. It is an estimate, not a verdict (with air loading the sum holds only
approximately).

References
----------
.. [1] H. Weyl, Nachr. Ges. Wiss. Göttingen, 1911 (asymptotic mode count).
.. [2] L. Cremer, M. Heckl, B. A. T. Petersson, *Structure-Borne Sound*, 3rd ed., Springer,
   2005 (modal density, modal overlap).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from auditor.judgement.response import modal_overlap_frequency_hz
from auditor.judgement.screening import (
    ExcitationArrays,
    ModeArrays,
    ModeColumns,
    default_loss_factor,
    findings_of,
    judge_pairs,
)
from auditor.model import CircleCutout, Panel
from auditor.physics.geometry import signed_area
from auditor.results import Excitation, Finding, Mode
from auditor.rules import RuleSet

__all__ = ["PanelAssessment", "panel_area", "overlap_frequency_hz", "assess_panel",
           "tones_beyond"]


@dataclass(frozen=True)
class PanelAssessment:
    """The judgement of one panel (before its remedy).

    ``beyond_bound_db`` estimates the largest response the modes not computed could give the
    tones in ``beyond`` (None when no tone lies beyond the assessed range).
    """

    findings: tuple[Finding, ...]
    verdict: str
    reason: str
    assessed_to_hz: float
    overlap_from_hz: float | None
    beyond: tuple[Excitation, ...] = ()
    beyond_bound_db: float | None = None
    notes: tuple[str, ...] = ()


def panel_area(panel: Panel) -> float:
    """The panel's area less its cut-outs [m²]."""
    if panel.shape == "circle":
        area = math.pi * (panel.diameter or 0.0) ** 2 / 4.0
    elif panel.shape == "polygon":
        area = abs(signed_area(panel.outline or ()))
    else:
        area = (panel.width or 0.0) * (panel.length or 0.0)
    for cut in panel.cutouts:
        if isinstance(cut, CircleCutout):
            area -= math.pi * cut.diameter**2 / 4.0
        else:
            area -= abs(signed_area(cut.vertices))
    return max(area, 0.0)


def overlap_frequency_hz(panel: Panel, modes: ModeArrays) -> float | None:
    """Where the panel's modes begin to overlap (modal overlap η·f·n(f) = 1) [Hz].

    η is the median loss factor of the modes computed (the panel's structural one when none
    are); n(f) from Weyl's law with the panel's own mass (in vacuo: air loading adds mass and
    modes, so the true overlap begins lower). None when it cannot be placed.
    """
    eta = float(np.median(modes.response_loss_factor)) if len(modes.frequency) \
        else default_loss_factor(panel)
    tension = math.sqrt(max(panel.tension_x, 0.0) * max(panel.tension_y, 0.0))
    f = modal_overlap_frequency_hz(eta, panel_area(panel), panel.areal_density, tension,
                                   panel.bending_stiffness)
    return f if math.isfinite(f) else None


def tones_beyond(excitations: Sequence[Excitation], assessed_to_hz: float,
                 ruleset: RuleSet) -> tuple[Excitation, ...]:
    """The tones whose caution band reaches above ``assessed_to_hz``."""
    top = assessed_to_hz * (1 + 1e-9)
    return tuple(e for e in excitations if e.high_hz * (1 + ruleset.caution_margin) > top)


def _hz(f: float) -> str:
    return f"{f:.3g}" if f < 100 else f"{f:.0f}"


def _pair_text(f: Finding) -> str:
    e = f.excitation
    return (f"mode {f.mode.label} at {_hz(f.mode.frequency_hz)} Hz against {e.kind} "
            f"{e.equipment} {_source_text(e)} ({_band_text(e)}), {f.separation * 100:+.0f} %, "
            f"{f.response_db:+.0f} dB")


def _source_text(e: Excitation) -> str:
    rest = e.description
    return rest[len(e.kind) + 1:] if rest.startswith(e.kind + " ") else rest


def _band_text(e: Excitation) -> str:
    if e.band_hz:
        return f"{_hz(e.band_hz[0])}–{_hz(e.band_hz[1])} Hz"
    return f"{_hz(e.frequency_hz)} Hz"


def _beyond_text(beyond: Sequence[Excitation], limit: int = 3) -> str:
    names = [f"{e.kind} {e.equipment} {_source_text(e)} ({_band_text(e)})"
             for e in beyond[:limit]]
    rest = len(beyond) - limit
    return ", ".join(names) + (f" and {rest} more" if rest > 0 else "")


def assess_panel(panel: Panel, modes: Sequence[Mode] | ModeArrays | ModeColumns,
                 excitations: Sequence[Excitation] | ExcitationArrays, ruleset: RuleSet, *,
                 limit_hz: float, complete_to_hz: float = math.inf) -> PanelAssessment:
    """Findings, verdict and its reason for one panel.

    Parameters
    ----------
    panel : Panel
    modes : sequence of Mode, ModeArrays, or a PanelModes
        Every mode computed (up to ``limit_hz``).
    excitations : sequence of Excitation, or ExcitationArrays
        The excitations reaching the panel.
    ruleset : RuleSet
    limit_hz : float  [Hz]
        The assessment limit the modes were computed for.
    complete_to_hz : float  [Hz]
        The physics' word on how far no mode is missing (``PanelModes.complete_to_hz``).

    Returns
    -------
    PanelAssessment
    """
    arrays = ModeArrays.of(modes, default_loss_factor(panel))
    excs = ExcitationArrays.of(excitations)
    assessed = min(limit_hz, complete_to_hz)
    overlap = overlap_frequency_hz(panel, arrays)
    pairs = judge_pairs(arrays, excs, ruleset, limit_hz=assessed,
                        overlap_from_hz=overlap if overlap is not None else math.inf)
    findings = findings_of(arrays, excs, pairs)
    beyond = tones_beyond(excs.excitations, assessed, ruleset)
    notes: list[str] = []
    if overlap is not None and overlap < assessed:
        notes.append(
            f"Modes overlap from {_hz(overlap)} Hz (modal overlap η·f·n(f) ≥ 1, n(f) from "
            f"Weyl's law): above it every tone lies near some mode, so a pair there is judged "
            f"by the mode's participation and response, not by nearness alone.")

    bound = None
    beyond_text = ""
    if beyond:
        residual = max(0.0, 1.0 - float(np.sum(arrays.participation)))
        eta = float(np.min(arrays.response_loss_factor)) if len(arrays.frequency) \
            else default_loss_factor(panel)
        path = max(e.transmissibility for e in beyond)
        with np.errstate(divide="ignore"):
            bound = float(20 * np.log10(residual * path / max(eta, 1e-6)))
        many = len(beyond) != 1
        beyond_text = (
            f"{len(beyond)} tone{'s' if many else ''} reaching the panel lie{'' if many else 's'}"
            f" above the assessed range (modes complete to {_hz(assessed)} Hz): "
            f"{_beyond_text(beyond)}. The modes not computed hold about {residual * 100:.1f} % "
            f"of the panel's participation, so their response to "
            f"{'these tones' if many else 'it'} is at most about "
            + ("−∞" if not math.isfinite(bound) else f"{bound:+.0f}") + " dB (an estimate).")

    conflicts = [f for f in findings if f.severity == "conflict"]
    cautions = [f for f in findings if f.severity == "caution"]
    if conflicts:
        verdict = "conflict"
        reason = (f"{len(conflicts)} conflict{'s' if len(conflicts) != 1 else ''}; worst: "
                  f"{_pair_text(conflicts[0])}.")
        if beyond_text:
            reason += " " + beyond_text
    elif beyond:
        verdict = "not assessed"
        reason = f"No conflict up to {_hz(assessed)} Hz, but {beyond_text}"
    elif cautions:
        verdict = "caution"
        reason = (f"{len(cautions)} caution{'s' if len(cautions) != 1 else ''}, no conflict; "
                  f"worst: {_pair_text(cautions[0])}.")
    elif not excs.excitations:
        verdict = "clear"
        reason = "No equipment reaches this panel."
    else:
        verdict = "clear"
        reason = (f"No tone reaching the panel makes a finding with its modes "
                  f"(assessed to {_hz(assessed)} Hz).")
    return PanelAssessment(findings, verdict, reason, assessed, overlap, beyond, bound,
                           tuple(notes))
