"""A calibration: a panel's parameters fitted to a tap test, and what the auditor does with one.

``Calibration`` holds the fitted and scheduled values, the uncertainty and the evidence (peaks,
matched pairs, hum, residual); ``calibration_to_dict`` gives its JSON values,
``format_uncertainty`` the uncertainty as a table shows it, ``apply_calibration`` the panel
with its fitted values in place of the scheduled ones.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any, Literal

from auditor.model import Panel

__all__ = [
    "FIT_PARAMETERS",
    "CalibrationError",
    "MatchedPeak",
    "Calibration",
    "calibration_to_dict",
    "format_uncertainty",
    "apply_calibration",
]

FitParameter = Literal["tension", "tension_ratio", "areal_density"]
#: What a calibration can fit, and how many parameters each has.
FIT_PARAMETERS: dict[str, int] = {"tension": 1, "tension_ratio": 2, "areal_density": 1}


class CalibrationError(ValueError):
    """A recording could be read but could not calibrate the panel; the message says why."""


@dataclass(frozen=True)
class MatchedPeak:
    """A measured peak paired with a predicted mode at the fitted parameter.

    ``residual_percent`` is 100·(peak − predicted)/predicted; ``loss_factor`` the measured
    one, ``predicted_loss_factor`` the model's (None when the model gives none).
    """

    peak_hz: float
    mode: str
    predicted_hz: float
    residual_percent: float
    loss_factor: float | None
    predicted_loss_factor: float | None = None

    def as_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class Calibration:
    """A panel's parameters fitted to a tap test.

    Parameters
    ----------
    panel : str
        Panel id.
    fitted : {"tension", "tension_ratio", "areal_density"}
        What was fitted: both tensions by one factor, each tension separately, or the areal
        density.
    tension, tension_y : float  [N/m]
        Fitted ``tension_x`` and ``tension_y`` (the scheduled ones when ``fitted`` is
        "areal_density").
    scheduled_tension, scheduled_tension_y : float  [N/m]
    areal_density, scheduled_areal_density : float  [kg/m²]
    uncertainty : float or None  [-]
        Standard error of the fitted parameter (of ``tension`` for "tension_ratio") as a
        fraction of its value, from the Jacobian and the residual variance. **None** when it
        cannot be estimated: with no more matched peaks than fitted parameters (one peak,
        or two peaks for "tension_ratio"; a note says so) or a singular Jacobian. Format it
        with ``format_uncertainty``; JSON gives null.
    uncertainty_y : float or None  [-]
        The same for ``tension_y`` when "tension_ratio" was fitted, else None.
    peaks_hz : tuple of float  [Hz]
        Every peak found in the model's frequency range.
    matched : tuple of MatchedPeak
    unmatched_hz : tuple of float  [Hz]
        Peaks no mode accounts for (room modes, other sources).
    hum_hz : tuple of float  [Hz]
        Peaks set aside as mains hum.
    residual : float  [%]
        Root-mean-square of the matched residuals, in percent of frequency.
    residual_cents : float  [cent]
        The same in cents (1200 per octave).
    loss_factors : tuple of (mode label, loss factor or None)
        Measured loss factor of each matched mode.
    recording : str
        The recording as the schedule names it (its path relative to the schedule's
        folder), or its file name alone; never an absolute path.
    notes : tuple of str
    """

    panel: str
    fitted: str
    tension: float
    tension_y: float
    scheduled_tension: float
    scheduled_tension_y: float
    areal_density: float
    scheduled_areal_density: float
    uncertainty: float | None
    uncertainty_y: float | None
    peaks_hz: tuple[float, ...]
    matched: tuple[MatchedPeak, ...]
    unmatched_hz: tuple[float, ...]
    hum_hz: tuple[float, ...]
    residual: float
    residual_cents: float
    loss_factors: tuple[tuple[str, float | None], ...]
    recording: str = ""
    notes: tuple[str, ...] = ()

    @property
    def tension_change(self) -> float:
        """Fitted over scheduled ``tension_x``, less one  [-]."""
        return self.tension / self.scheduled_tension - 1.0


def calibration_to_dict(calibration: Calibration) -> dict[str, Any]:
    """A calibration as plain JSON-ready values (SI units, residual in percent)."""
    c = calibration
    return {
        "panel": c.panel,
        "fitted": c.fitted,
        "tension": c.tension,
        "tension_y": c.tension_y,
        "scheduled_tension": c.scheduled_tension,
        "scheduled_tension_y": c.scheduled_tension_y,
        "areal_density": c.areal_density,
        "scheduled_areal_density": c.scheduled_areal_density,
        "uncertainty": c.uncertainty,
        "uncertainty_y": c.uncertainty_y,
        "peaks_hz": list(c.peaks_hz),
        "matched": [m.as_dict() for m in c.matched],
        "unmatched_hz": list(c.unmatched_hz),
        "hum_hz": list(c.hum_hz),
        "residual": c.residual,
        "residual_cents": c.residual_cents,
        "loss_factors": {label: value for label, value in c.loss_factors},
        "recording": c.recording,
        "notes": list(c.notes),
    }


def format_uncertainty(calibration: Calibration) -> str:
    """The fitted value's standard error as a table shows it.

    "±1.2 %"; "±1.2 % / ±3.4 %" (``tension`` / ``tension_y``) when both tensions were
    fitted; "n/a (1 matched peak)" when it cannot be estimated (``uncertainty`` is None:
    no more matched peaks than fitted parameters), or "n/a" (a singular fit).
    """
    c = calibration
    if c.uncertainty is None:
        count = len(c.matched)
        if count <= FIT_PARAMETERS.get(c.fitted, 1):
            return f"n/a ({count} matched peak{'' if count == 1 else 's'})"
        return "n/a"
    text = f"±{100.0 * c.uncertainty:.1f} %"
    if c.uncertainty_y is not None:
        text += f" / ±{100.0 * c.uncertainty_y:.1f} %"
    return text


def apply_calibration(panel: Panel, calibration: Calibration) -> Panel:
    """The panel with its fitted tensions and areal density in place of the scheduled ones.

    Raises
    ------
    ValueError
        When the calibration belongs to another panel.
    """
    if calibration.panel != panel.panel:
        raise ValueError(
            f"calibration of panel {calibration.panel} cannot be applied to panel {panel.panel}")
    return dataclasses.replace(panel, tension_x=calibration.tension,
                               tension_y=calibration.tension_y,
                               areal_density=calibration.areal_density)
