"""What the PDF says, worked out from an ``AuditResult``: pure functions, no reportlab, no I/O.

The report is ordered by what to do. This module decides which panels need action, says in one
line what is wrong with each and what to do about it, gathers the equipment table, follows
each panel's modes over its rated tension range for the tuning chart, and gives the
commissioning targets an installer checks with a tap test. It reads the result only; the one
piece of physics it applies is the exact scaling of a membrane's natural frequencies with
tension, ``f ∝ √T`` (the membrane operator is T times a fixed one, so every eigenvalue ω² is
proportional to T; with incompressible air on open sides the added mass does not depend on T
and the scaling still holds).

References
----------
.. [1] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, ch. 4 (membrane frequencies ∝ √(T/ρs)).
.. [2] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002, vibration isolation chapter (mount frequency from static deflection,
   transmissibility).
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from auditor.model import Equipment, Panel, Project
from auditor.report.records import fundamental, mode_columns, mode_frequency, modes_between
from auditor.report.text import format_hz
from auditor.results import AuditResult, Excitation, Finding, Mode, Mount, PanelResult

__all__ = [
    "ACTION_VERDICTS",
    "COMMISSIONING_TOLERANCE",
    "needs_action",
    "action_panels",
    "other_panels",
    "excitations_reaching",
    "fundamental",
    "tone_name",
    "tone_frequency_text",
    "problem_line",
    "action_line",
    "DocumentControl",
    "document_control",
    "EquipmentSource",
    "EquipmentRow",
    "equipment_rows",
    "assumptions",
    "tension_range",
    "scales_as_root_tension",
    "frequency_at_tension",
    "tuning_modes",
    "Commissioning",
    "commissioning",
    "TapTestRow",
    "tap_test_rows",
    "uncertainty_text",
]

#: Verdicts that put a panel on an action page: a conflict to clear, or tones that were not
#: assessed and must be verified. Cautions are the consultant's to weigh (no change proposed).
ACTION_VERDICTS = ("conflict", "not assessed")

#: Tolerance on the tap-test frequency at commissioning, as a fraction: ±5 % is common
#: practice. Since f ∝ √T it is about ±10 % of tension, the spread a tension gauge and a
#: stretched panel give on site, and it stays inside the ±10 % conflict margin of the rule set.
COMMISSIONING_TOLERANCE = 0.05


# ---------------------------------------------------------------------------------------------
# Which panels, in which order
# ---------------------------------------------------------------------------------------------

def needs_action(panel_result: PanelResult) -> bool:
    """True for a panel with a conflict, or with tones above its assessed range."""
    return panel_result.verdict in ACTION_VERDICTS


def action_panels(result: AuditResult) -> list[PanelResult]:
    """The panels that need action, worst first (``AuditResult.ranked_panels``)."""
    return [p for p in result.ranked_panels() if needs_action(p)]


def other_panels(result: AuditResult) -> list[PanelResult]:
    """The panels that need no action (cautions first, then clear), worst first."""
    return [p for p in result.ranked_panels() if not needs_action(p)]


def excitations_reaching(result: AuditResult, panel: Panel) -> tuple[Excitation, ...]:
    """The excitations that reach ``panel``, as the audit decided it (by zone when the rule
    set says so; ``auditor.judgement.screening.reaching``)."""
    from auditor.judgement.screening import reaching

    items = {e.equipment: e for e in result.schedule.equipment}
    pairs = [(items[tag], excs) for tag, excs in result.excitations if tag in items]
    if result.ruleset is None:
        return tuple(e for _, excs in result.excitations for e in excs)
    return reaching(panel, pairs, result.ruleset)


# ---------------------------------------------------------------------------------------------
# One line each: what is wrong, what to do
# ---------------------------------------------------------------------------------------------

def tone_name(e: Excitation) -> str:
    """An excitation in words: "BLT-1 belt-pass ×1"."""
    return f"{e.equipment} {e.source} \u00d7{e.order}"


def tone_frequency_text(e: Excitation) -> str:
    """Its frequency or band without the unit: "5.59" or "150-233"."""
    if e.band_hz is not None:
        return f"{format_hz(e.band_hz[0])}\u2013{format_hz(e.band_hz[1])}"
    return format_hz(e.frequency_hz)


def _finding_line(f: Finding) -> str:
    e = f.excitation
    return (f"mode {f.mode.label} at {format_hz(f.mode.frequency_hz)} Hz against "
            f"{tone_name(e)} at {tone_frequency_text(e)} Hz "
            f"({100 * f.separation:+.0f} %, {f.response_db:+.0f} dB)")


def problem_line(pr: PanelResult) -> str:
    """What is wrong, in one line."""
    conflicts = [f for f in pr.findings if f.severity == "conflict"]
    if conflicts:
        more = f"; {len(conflicts) - 1} more conflict{'s' if len(conflicts) > 2 else ''}" \
            if len(conflicts) > 1 else ""
        return _finding_line(conflicts[0]) + more
    if pr.verdict == "not assessed":
        reach = "tones"
        if pr.beyond:
            low = min(e.low_hz for e in pr.beyond)
            high = max(e.high_hz for e in pr.beyond)
            reach = (f"{len(pr.beyond)} tones at {format_hz(low)}\u2013{format_hz(high)} Hz"
                     if len(pr.beyond) > 1 else f"a tone at {format_hz(low)} Hz")
        return (f"{reach} above the assessed range (modes complete to "
                f"{format_hz(pr.assessed_to_hz)} Hz)")
    if pr.findings:
        return _finding_line(pr.findings[0])
    return "no finding"


def _tension_text(tx: float, ty: float | None) -> str:
    def t(v: float) -> str:
        return f"{v:.0f}" if v >= 100 else f"{v:.3g}"
    if ty is None or abs(ty - tx) <= 1e-9 * max(abs(tx), 1.0):
        return f"{t(tx)} N/m"
    return f"{t(tx)} \u00d7 {t(ty)} N/m"


def action_line(pr: PanelResult) -> str:
    """What to do, in one line (the panel remedy, shortened; its full text is on the action
    page)."""
    remedy, panel = pr.remedy, pr.panel
    unassessed = (f"; verify on site above {format_hz(pr.assessed_to_hz)} Hz"
                  if pr.beyond else "")
    if pr.verdict == "not assessed" and (remedy is None or not remedy.work):
        return (f"Verify on site (tap test, or measure in use) for the tones above "
                f"{format_hz(pr.assessed_to_hz)} Hz; no change proposed below it")
    if remedy is None:
        return "No remedy was computed; refer to the panel designer" + unassessed
    if remedy.tension is not None and remedy.work:
        verb = "Raise" if remedy.tension > panel.tension_x else "Lower"
        return (f"{verb} tension from {_tension_text(panel.tension_x, panel.tension_y)} to "
                f"{_tension_text(remedy.tension, remedy.tension_y)}" + unassessed)
    if remedy.bays is not None:
        longer = max(panel.width or 0.0, panel.length or 0.0)
        side = f" the {longer:.2f} m side" if longer else ""
        return (f"Add supports: split{side} into {remedy.bays} equal bays"
                + (f" ({longer / remedy.bays:.2f} m)" if longer else "") + unassessed)
    if not remedy.work:
        return "No change proposed" + unassessed
    return "No tension or bay split clears it: refer to the panel designer" + unassessed


# ---------------------------------------------------------------------------------------------
# Document control
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class DocumentControl:
    """The cover's document control; "" where the schedule gives nothing (a blank line)."""

    revision: str
    status: str
    prepared_by: str
    checked_by: str
    approved_by: str
    other: tuple[tuple[str, str], ...]


_CONTROL_KEYS = {
    "revision": ("revision", "rev", "rev.", "issue", "revision number"),
    "status": ("issue status", "status", "purpose of issue", "issue purpose", "suitability"),
    "checked_by": ("checked by", "checker", "checked"),
    "approved_by": ("approved by", "approver", "approved", "authorised by", "authorized by"),
}


def document_control(project: Project) -> DocumentControl:
    """Revision, issue status and sign-off names from the project sheet.

    A field on ``Project`` of that name wins; else a Project-sheet entry under a usual
    heading ("Revision", "Issue status", "Checked by", "Approved by", ...), any case.
    """
    extra = [(str(k), str(v)) for k, v in project.extra]
    used: set[int] = set()
    found: dict[str, str] = {}
    for name, keys in _CONTROL_KEYS.items():
        value = getattr(project, name, None)
        if isinstance(value, str) and value.strip():
            found[name] = value.strip()
            continue
        for k, (key, text) in enumerate(extra):
            if k not in used and key.strip().casefold().rstrip(":") in keys:
                found[name] = text.strip()
                used.add(k)
                break
    return DocumentControl(
        revision=found.get("revision", ""), status=found.get("status", ""),
        prepared_by=project.prepared_by.strip(), checked_by=found.get("checked_by", ""),
        approved_by=found.get("approved_by", ""),
        other=tuple(pair for k, pair in enumerate(extra) if k not in used))


# ---------------------------------------------------------------------------------------------
# Equipment
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class EquipmentSource:
    """One source of tone of an item: its harmonics and how they reach the panels."""

    source: str
    path: str
    frequencies: tuple[str, ...]          # each harmonic's line or band, as text [Hz]
    transmissibility: tuple[float, ...]   # per harmonic; empty unless structure-borne


@dataclass(frozen=True)
class EquipmentRow:
    """One item of the equipment table."""

    tag: str
    kind: str
    zones: str
    speed: str
    mount: str
    sources: tuple[EquipmentSource, ...]
    problem: str = ""


def _speed_text(item: Equipment, line_frequency: float | None) -> str:
    if item.rpm_min is not None and item.rpm_max is not None:
        return f"{item.rpm_min:.0f}\u2013{item.rpm_max:.0f} rpm (variable)"
    if item.rpm is not None:
        return f"{item.rpm:.0f} rpm"
    if item.kind == "motor" and item.poles:
        slip = f", {100 * item.slip:.3g} % slip" if item.slip is not None else ""
        return f"{item.poles}-pole{slip}"
    line = item.line_frequency or line_frequency
    if item.kind == "transformer":
        return f"{line:g} Hz mains" if line else "mains"
    if item.kind == "flow" and item.velocity is not None:
        wire = f" past {1000 * item.wire_diameter:.3g} mm wire" if item.wire_diameter else ""
        return f"{item.velocity:.3g} m/s{wire}"
    if item.frequency_min is not None and item.frequency_max is not None:
        return "band"
    return "-"


def mount_text(mount: Mount | None, structure_borne: bool) -> str:
    """The mount in a few words; "rigid (assumed)" when no isolator deflection was given."""
    if mount is None or mount.static_deflection is None or mount.natural_frequency_hz is None:
        if mount is not None and not mount.rigid_assumed:
            return "rigid"
        return "rigid (assumed)" if structure_borne else "-"
    zeta = ""
    if mount.damping_ratio is not None:
        zeta = f", \u03b6 {mount.damping_ratio:g}" + (" (assumed)" if mount.damping_assumed
                                                     else "")
    return (f"{mount.kind}, {1000 * mount.static_deflection:.3g} mm "
            f"(f\u2080 {mount.natural_frequency_hz:.3g} Hz){zeta}")


def equipment_rows(result: AuditResult) -> list[EquipmentRow]:
    """Every equipment item in schedule order, with its tones grouped by source."""
    by_tag = dict(result.excitations)
    mounts = dict(result.mounts)
    rows: list[EquipmentRow] = []
    for item in result.schedule.equipment:
        excitations = by_tag.get(item.equipment, ())
        sources: dict[tuple[str, str], list[Excitation]] = {}
        for e in excitations:
            sources.setdefault((e.source, e.path), []).append(e)
        groups = []
        for (source, path), excs in sources.items():
            excs = sorted(excs, key=lambda e: e.order)
            groups.append(EquipmentSource(
                source, path, tuple(tone_frequency_text(e) for e in excs),
                tuple(e.transmissibility for e in excs) if path == "structure-borne" else ()))
        structure = any(e.path == "structure-borne" for e in excitations)
        mount = mounts.get(item.equipment)
        zones = "all" if item.zones is None else ", ".join(item.zones)
        problem = "" if excitations else "no tone: see the rejected rows and warnings"
        rows.append(EquipmentRow(item.equipment, item.kind, zones,
                                 _speed_text(item, result.schedule.project.line_frequency),
                                 mount_text(mount, structure), tuple(groups), problem))
    return rows


# ---------------------------------------------------------------------------------------------
# What was assumed
# ---------------------------------------------------------------------------------------------

def _names(items: Sequence[str], limit: int = 8) -> str:
    shown = ", ".join(items[:limit])
    return shown + (f" and {len(items) - limit} more" if len(items) > limit else "")


def assumptions(result: AuditResult) -> list[str]:
    """The assumptions a reader must know, in words (mounts, materials, assessed range)."""
    out: list[str] = []
    by_tag = dict(result.excitations)
    rigid = [tag for tag, m in result.mounts if m.rigid_assumed
             and any(e.path == "structure-borne" for e in by_tag.get(tag, ()))]
    if rigid:
        out.append(f"Mounts assumed rigid (no isolator deflection in the schedule), so their "
                   f"structure-borne tones reach the panels in full: {_names(rigid)}.")
    damping = [tag for tag, m in result.mounts if m.damping_assumed]
    if damping:
        out.append(f"Isolator damping assumed from the kind of isolator (common practice): "
                   f"{_names(damping)}.")
    defaults: dict[str, list[str]] = {}
    for pr in result.panels:
        if pr.panel.loss_factor is None:
            defaults.setdefault(pr.panel.material, []).append(pr.panel.panel)
    if defaults:
        from auditor.physics.materials import DEFAULT_LOSS_FACTORS

        parts = [f"{material} \u03b7 {DEFAULT_LOSS_FACTORS.get(material, float('nan')):g} "
                 f"({len(ids)} panel{'s' if len(ids) != 1 else ''})"
                 for material, ids in sorted(defaults.items())]
        out.append("Structural loss factor not scheduled, so the material default was used "
                   "(common practice): " + "; ".join(parts) + ".")
    if result.panels:
        limits = [p.assessed_to_hz for p in result.panels if math.isfinite(p.assessed_to_hz)]
        if limits:
            low, high = min(limits), max(limits)
            span = (f"{format_hz(low)} Hz" if abs(high - low) < 1e-9 * high
                    else f"{format_hz(low)} to {format_hz(high)} Hz depending on the panel")
            text = (f"Modes assessed from the lowest up to {span} (the rule set's limit, raised "
                    f"to cover every tone reaching the panel)")
            short = [p.panel.panel for p in result.panels if p.beyond]
            if short:
                text += (f"; the model of {_names(short)} is complete to a lower frequency "
                         f"than some tones reaching {'them' if len(short) > 1 else 'it'}")
            out.append(text + ".")
    fitted = [p.panel.panel for p in result.panels
              if any(n.startswith("Tension fitted") for n in p.notes)]
    if fitted:
        out.append(f"Tension fitted to a site tap test instead of the schedule's: "
                   f"{_names(fitted)} (see Site verification).")
    elif not result.calibrated:
        out.append("Tensions as scheduled: installed tension is rarely what was specified, "
                   "so verify on site.")
    return out


# ---------------------------------------------------------------------------------------------
# Tuning: modes against tension
# ---------------------------------------------------------------------------------------------

def tension_range(panel: Panel, ruleset: Any) -> tuple[float, float, bool] | None:
    """The range of ``tension_x`` a remedy may propose, as the remedy searched it.

    From ``min_tension_factor`` × scheduled up to the rated ``max_tension`` (on the larger
    tension), or ``max_tension_factor`` × scheduled with no rating. Returns (low, high,
    rated) [N/m], or None for a panel with no tension.
    """
    tx, ty = panel.tension_x, panel.tension_y
    if not (tx > 0 and ty > 0):
        return None
    top = max(tx, ty)
    rating = panel.max_tension if panel.max_tension is not None and panel.max_tension > 0 \
        else None
    high = rating / top if rating is not None else float(
        getattr(ruleset, "max_tension_factor", 1.5))
    low = min(float(getattr(ruleset, "min_tension_factor", 0.5)), high)
    return tx * low, tx * high, rating is not None


def scales_as_root_tension(panel: Panel) -> tuple[bool, str]:
    """Whether the panel's frequencies scale exactly as √T, and why not when they do not.

    Exact for a membrane in vacuo or with air on open sides (the incompressible added mass
    does not depend on tension; the compressible correction is small). A sealed cavity and
    bending stiffness add stiffness that does not scale with tension (``f² = a·T + b``), and
    a porous sheet's air loading depends on frequency: then √T is an approximation.
    """
    reasons = []
    if panel.bending_stiffness:
        reasons.append("bending stiffness")
    if panel.plenum_side == "sealed":
        reasons.append("sealed cavity")
    if panel.airflow_resistance is not None and "air" in (panel.room_side, panel.plenum_side):
        reasons.append("porous sheet")
    return (not reasons, ", ".join(reasons))


def frequency_at_tension(frequency_hz: float, tension: float, scheduled: float) -> float:
    """A mode's frequency at another tension, ``f·√(T/T₀)``  [Hz] (Kinsler et al., ch. 4)."""
    return frequency_hz * math.sqrt(tension / scheduled)


def tuning_modes(pr: PanelResult, excitations: Sequence[Excitation], ruleset: Any,
                 limit: int = 7) -> list[Mode]:
    """The lowest modes that matter for retuning, at most ``limit``: those in findings, the
    fundamental, and the driven modes (participation at the rule set's threshold or more)
    that pass through a tone's conflict window somewhere in the tension range, most
    participating first."""
    span = tension_range(pr.panel, ruleset)
    modes = pr.modes                      # ascending in frequency
    if span is None or not len(modes):
        return []
    low, high, _ = span
    t0 = pr.panel.tension_x
    chosen: list[Mode] = []

    def add(mode: Mode) -> None:
        if all(not (m.label == mode.label and abs(m.frequency_hz - mode.frequency_hz) < 1e-9)
               for m in chosen):
            chosen.append(mode)

    for f in pr.findings:
        add(f.mode)
    add(modes[0])
    margin = float(getattr(ruleset, "conflict_margin", 0.1))
    threshold = float(getattr(ruleset, "participation_threshold", 0.01))
    scale_low, scale_high = math.sqrt(low / t0), math.sqrt(high / t0)
    top = max((e.high_hz for e in excitations), default=0.0) * (1 + margin)
    # only modes that reach the top tone's window at the lowest tension can cross one (read
    # as arrays: a film has thousands below it)
    candidates = modes_between(modes, 0.0, top / scale_low * (1 + 1e-9))
    frequency, participation = mode_columns(candidates)
    f_low, f_high = frequency * scale_low, frequency * scale_high
    crosses = np.zeros(len(candidates), dtype=bool)
    for e in excitations:
        crosses |= (f_high >= e.low_hz * (1 - margin)) & (f_low <= e.high_hz * (1 + margin))
    crossing = np.flatnonzero(crosses & (participation >= threshold))
    # most participating first (ties in frequency order)
    for i in crossing[np.argsort(-participation[crossing], kind="stable")].tolist():
        if len(chosen) >= limit:
            break
        add(candidates[i])
    return sorted(chosen[:max(limit, 1)], key=lambda m: m.frequency_hz)


# ---------------------------------------------------------------------------------------------
# Commissioning: what a tap test should find after the work
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Commissioning:
    """The target of one panel's commissioning tap test.

    ``target_x``/``target_y`` [N/m] (None for a panel with no tension); ``expected_hz`` the
    fundamental a tap test should find there [Hz] (None when the audit result does not give
    it: a panel split into bays); ``low_hz``/``high_hz`` the accepted range; ``exact`` False
    when the value is the √T scaling of a construction that does not scale exactly;
    ``note`` says how the values were found.
    """

    panel: str
    work: str
    target_x: float | None
    target_y: float | None
    expected_hz: float | None
    low_hz: float | None
    high_hz: float | None
    exact: bool
    note: str


def commissioning(pr: PanelResult, tolerance: float = COMMISSIONING_TOLERANCE) -> Commissioning:
    """Target tension and expected tap-test fundamental for one panel (air loading included).

    The expected fundamental is the full model's (air, cavity, bending): at the scheduled
    tension when nothing changes, and at the proposed tension or of one bay when the remedy
    carries it (``Remedy.fundamental_hz``, solved when the remedy was verified). A remedy
    without it (made elsewhere) has the scheduled fundamental scaled by √(T/T₀), exact where
    ``scales_as_root_tension`` says so. The accepted range is ±``tolerance``, narrowed to the
    frequencies of the clear window that holds the target (its edges mapped by √T from the
    target).
    """
    panel, remedy = pr.panel, pr.remedy
    first = fundamental(pr.modes)
    exact, why = scales_as_root_tension(panel)
    f0 = first.frequency_hz if first is not None else None
    tx, ty = panel.tension_x, panel.tension_y
    if remedy is not None and remedy.bays is not None:
        longer = max(panel.width or 0.0, panel.length or 0.0)
        work = f"{remedy.bays} equal bays" + (f" of {longer / remedy.bays:.2f} m" if longer
                                               else "")
        bay = remedy.fundamental_hz
        if bay is None:
            return Commissioning(panel.panel, work, tx if tx > 0 else None,
                                 ty if ty > 0 else None, None, None, None, True,
                                 "each bay's fundamental is not in the audit result: re-audit "
                                 "the bay as built")
        return Commissioning(panel.panel, work, tx if tx > 0 else None, ty if ty > 0 else None,
                             bay, bay * (1 - tolerance), bay * (1 + tolerance), True,
                             "full-model fundamental of one bay"
                             + (" at the scheduled tension" if tx > 0 else ""))
    if remedy is not None and remedy.work and remedy.tension is not None and tx > 0 and f0:
        target_x = remedy.tension
        target_y = remedy.tension_y if remedy.tension_y is not None else target_x * ty / tx
        solved = remedy.fundamental_hz
        if solved is not None:
            expected, exact = solved, True
            note = "full-model fundamental at the proposed tension"
        else:
            expected = frequency_at_tension(f0, target_x, tx)
            note = "\u221aT from the full-model fundamental at the scheduled tension"
        low, high = expected * (1 - tolerance), expected * (1 + tolerance)
        window = next(((a, b) for a, b in remedy.clear_windows
                       if a * (1 - 1e-9) <= target_x <= b * (1 + 1e-9)), None)
        if window is not None:
            low = max(low, frequency_at_tension(expected, window[0], target_x))
            high = min(high, frequency_at_tension(expected, window[1], target_x))
            if high - low < 2 * tolerance * expected * (1 - 1e-6):
                note += "; range narrowed to the clear window"
        if not exact:
            note += f"; approximate ({why})"
        verb = "raise" if target_x > tx else "lower"
        return Commissioning(panel.panel, f"{verb} tension", target_x, target_y, expected, low,
                             high, exact, note)
    if f0 is None:
        return Commissioning(panel.panel, "none", tx or None, ty or None, None, None, None,
                             True, "no mode computed")
    return Commissioning(panel.panel, "no change", tx if tx > 0 else None,
                         ty if ty > 0 else None, f0, f0 * (1 - tolerance),
                         f0 * (1 + tolerance), True,
                         "full-model fundamental at the scheduled tension")


# ---------------------------------------------------------------------------------------------
# Tap tests
# ---------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class TapTestRow:
    """A tap-tested panel: scheduled against fitted tension, the peaks and what they match.

    ``uncertainty`` (as text) and the measured loss factors come from the calibration records
    (``AuditResult.calibrations``); for a panel with peaks but no record, None. ``matched`` holds
    (peak [Hz], mode label, predicted [Hz], residual [%], measured η or None, predicted η or
    None).
    """

    panel: str
    recording: str
    scheduled_x: float
    scheduled_y: float
    fitted_x: float
    fitted_y: float
    uncertainty: str | None
    matched: tuple[tuple[float, str, float, float, float | None, float | None], ...]
    source: str
    notes: tuple[str, ...] = ()


def uncertainty_text(calibration: Any) -> str:
    """A fit's standard error as a percentage of the fitted tension, to two significant
    figures ("±0.025 %"; "±1.2 % / ±3.4 %" for warp and weft), or why there is none."""
    if calibration.uncertainty is None:
        from auditor.calibrate import format_uncertainty

        return format_uncertainty(calibration)
    text = f"\u00b1{100.0 * calibration.uncertainty:.2g} %"
    if calibration.uncertainty_y is not None:
        text += f" / \u00b1{100.0 * calibration.uncertainty_y:.2g} %"
    return text


def _calibrations(result: AuditResult) -> dict[str, Any]:
    """The tap-test fits the audit used (``auditor.calibrate.Calibration``), by panel."""
    return {c.panel: c for c in result.calibrations}


def tap_test_rows(result: AuditResult) -> list[TapTestRow]:
    """Every panel whose audit used or showed a tap test, in schedule order."""
    scheduled = {p.panel: p for p in result.schedule.panels}
    records = _calibrations(result)
    rows = []
    for pr in result.panels:
        fitted = any(n.startswith("Tension fitted") for n in pr.notes)
        if not (pr.measured_peaks_hz or fitted or pr.panel.panel in records):
            continue
        before = scheduled.get(pr.panel.panel, pr.panel)
        record = records.get(pr.panel.panel)
        recording = (record.recording if record is not None and record.recording
                     else (pr.panel.tap_test or ""))
        if record is not None:
            matched = tuple((m.peak_hz, m.mode, m.predicted_hz, m.residual_percent,
                             m.loss_factor, m.predicted_loss_factor) for m in record.matched)
            rows.append(TapTestRow(pr.panel.panel, recording, record.scheduled_tension,
                                   record.scheduled_tension_y, record.tension, record.tension_y,
                                   uncertainty_text(record), matched, "calibration",
                                   tuple(record.notes)))
            continue
        modes = pr.modes                  # ascending: the nearest is a neighbour of the peak
        matched_list = []
        for peak in pr.measured_peaks_hz:
            at = bisect.bisect_left(modes, peak, key=mode_frequency)
            near = min(modes[max(at - 1, 0):at + 1],
                       key=lambda m: abs(math.log(m.frequency_hz / peak)), default=None)
            if near is None:
                continue
            matched_list.append((peak, near.label, near.frequency_hz,
                                 100.0 * (peak - near.frequency_hz) / near.frequency_hz,
                                 None, near.loss_factor))
        rows.append(TapTestRow(pr.panel.panel, recording, before.tension_x, before.tension_y,
                               pr.panel.tension_x, pr.panel.tension_y, None,
                               tuple(matched_list), "nearest mode"))
    return rows
