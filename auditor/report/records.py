"""What every machine-readable output says about a panel, as plain values.

The JSON document, the CSV table and the audited workbook give the same facts in the same
order; this module decides them once:

- panels worst first (``AuditResult.ranked_panels``: verdict, then worst response), findings
  worst first (``auditor.results.finding_rank``);
- which modes are listed: a panel may have tens of thousands of modes up to its assessment
  limit (no count cap), so the outputs give its mode count, its ``LOWEST_MODES_LISTED``
  lowest modes and every mode a finding names (``MODES_LISTED`` says so in the document);
- how a panel's modes are read: they are ascending in frequency, so the fundamental is the
  first and a frequency window is found by bisection (``fundamental``, ``modes_between``);
- the assumptions a panel's verdict rests on, in words (a mount taken as rigid, a default
  loss factor, a sheet taken as impervious);
- numbers JSON can carry: no infinity or NaN (RFC 8259, §6), ``None`` instead.
"""

from __future__ import annotations

import bisect
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from auditor.physics.materials import structural_loss_factor
from auditor.physics.modes import ModeList
from auditor.results import AuditResult, Finding, Mode, PanelResult, Remedy, finding_rank

__all__ = ["LOWEST_MODES_LISTED", "MODES_LISTED", "finite", "fundamental", "listed_modes",
           "mode_columns", "mode_frequency", "modes_between", "modes_named",
           "ranked_findings", "windows_text", "PanelAssumptions"]

#: How many of a panel's lowest modes the outputs list (besides those findings name).
LOWEST_MODES_LISTED = 12

#: Which modes a panel's ``modes`` list holds, in words (the findings document's
#: ``modes_listed``).
MODES_LISTED = f"lowest {LOWEST_MODES_LISTED} and those named in findings"


def finite(value: float | None) -> float | None:
    """``value``, or None when it is missing, infinite or NaN (JSON has no such numbers)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def listed_modes(panel: PanelResult, lowest: int = LOWEST_MODES_LISTED) -> tuple[Mode, ...]:
    """The panel's ``lowest`` lowest modes and every mode its findings name, by frequency.

    ``panel.modes`` is ascending in frequency, as the physics gives them
    (``auditor.physics.modes.PanelModes``), so the lowest are the first; a mode named by a
    finding is listed once however many findings name it (matched by label and frequency).
    """
    chosen: dict[tuple[str, float], Mode] = {
        (m.label, m.frequency_hz): m for m in panel.modes[:lowest]}
    for f in panel.findings:
        chosen.setdefault((f.mode.label, f.mode.frequency_hz), f.mode)
    return tuple(sorted(chosen.values(), key=lambda m: m.frequency_hz))


def fundamental(modes: Sequence[Mode]) -> Mode | None:
    """The lowest mode (the one a tap test shows first), or None; ``modes`` ascending in
    frequency, as ``PanelResult.modes`` are."""
    return modes[0] if len(modes) else None


def modes_between(modes: Sequence[Mode], low_hz: float, high_hz: float) -> Sequence[Mode]:
    """The modes with ``low_hz`` ≤ f ≤ ``high_hz`` [Hz] of ``modes`` ascending in frequency
    (as ``PanelResult.modes``), found by bisection: a panel may have tens of thousands of
    modes, held as arrays (``auditor.physics.modes.ModeList``), and a chart reads a few."""
    start = bisect.bisect_left(modes, low_hz, key=mode_frequency)
    stop = bisect.bisect_right(modes, high_hz, key=mode_frequency)
    return modes[start:max(start, stop)]


def mode_columns(modes: Sequence[Mode]) -> tuple[np.ndarray, np.ndarray]:
    """The frequencies [Hz] and participations [-] of ``modes`` as arrays: a ``ModeList``'s
    own (no ``Mode`` record made), any other sequence's gathered."""
    if isinstance(modes, ModeList):
        return modes.frequency_hz, modes.participation
    return (np.array([m.frequency_hz for m in modes], dtype=float),
            np.array([m.participation for m in modes], dtype=float))


def modes_named(modes: Sequence[Mode], keys: set[tuple[str, float]]) -> np.ndarray:
    """Which of ``modes`` are named by ``keys`` (label, frequency [Hz] rounded to 9 decimals),
    a boolean array; only the modes within 1e-6 Hz of a named frequency are read."""
    named = np.zeros(len(modes), dtype=bool)
    if not keys or not len(modes):
        return named
    frequency, _ = mode_columns(modes)
    wanted = np.array(sorted({f for _, f in keys}), dtype=float)
    near = np.searchsorted(wanted, frequency)
    gap = np.minimum(np.abs(frequency - wanted[np.minimum(near, len(wanted) - 1)]),
                     np.abs(frequency - wanted[np.maximum(near - 1, 0)]))
    for i in np.flatnonzero(gap <= 1e-6).tolist():
        mode = modes[i]
        named[i] = (mode.label, round(mode.frequency_hz, 9)) in keys
    return named


def mode_frequency(mode: Mode) -> float:
    """A mode's frequency [Hz] (the key of the bisections over ascending modes)."""
    return mode.frequency_hz


def ranked_findings(panels: Sequence[PanelResult]) -> list[tuple[int, Finding]]:
    """Every finding with the index of its panel in ``panels``, worst first
    (``finding_rank``); among equals, in the order of ``panels`` (give them ranked)."""
    pairs = [(k, f) for k, p in enumerate(panels) for f in p.findings]
    pairs.sort(key=lambda pair: (finding_rank(pair[1]), pair[0]))
    return pairs


def windows_text(remedy: Remedy | None) -> str:
    """The remedy's clear windows of tension as "611–912; 1000–1600" [N/m] ("" with none)."""
    if remedy is None or not remedy.clear_windows:
        return ""
    return "; ".join(f"{low:.0f}\u2013{high:.0f}" for low, high in remedy.clear_windows)


class PanelAssumptions:
    """The assumptions each panel's verdict rests on, in words, for one audit result.

    - each equipment item reaching the panel (by zone, when the rule set judges by zone)
      whose structure-borne tones pass through a mount taken as rigid, or whose isolator
      damping is the default for the mount (``Mount.rigid_assumed``, ``damping_assumed``);
    - a structural loss factor the schedule did not give (the material's default, common
      practice);
    - a fabric or mesh with no airflow resistance (fabric taken as impervious, mesh as freely
      open; ``auditor.model.Panel``).

    Build one per result and call it for each panel; the mount wording is worked out once
    per zone.
    """

    def __init__(self, result: AuditResult) -> None:
        self._by_zone = bool(getattr(result.ruleset, "use_zones", True))
        items = {e.equipment: e for e in result.schedule.equipment}
        self._mounts: list[tuple[Any, str]] = []   # (equipment or None, words)
        for tag, excitations in result.excitations:
            mount = next((e.mount for e in excitations if e.mount is not None), None)
            if mount is not None and (mount.rigid_assumed or mount.damping_assumed):
                self._mounts.append((items.get(tag), f"{tag} mount: {mount.description}"))
        self._zones: dict[str, tuple[str, ...]] = {}

    def _mount_words(self, zone: str) -> tuple[str, ...]:
        key = zone.strip().casefold() if self._by_zone else ""
        words = self._zones.get(key)
        if words is None:
            words = self._zones[key] = tuple(
                text for item, text in self._mounts
                if item is None or not self._by_zone or item.reaches(zone))
        return words

    def __call__(self, p: PanelResult) -> tuple[str, ...]:
        panel = p.panel
        out = list(self._mount_words(panel.zone))
        if panel.loss_factor is None:
            try:
                eta = structural_loss_factor(panel.material)
            except ValueError:
                eta = None
            if eta is not None:
                out.append(f"structural loss factor not given: the {panel.material} default "
                           f"{eta:g} (common practice)")
        if panel.airflow_resistance is None and panel.material == "fabric":
            out.append("fabric taken as impervious (no airflow resistance given)")
        elif panel.airflow_resistance is None and panel.material == "mesh":
            out.append("mesh taken as freely open (no airflow resistance given)")
        return tuple(out)
