"""The small checks every row validation is made of: one :class:`Note` per finding.

A value outside a physical limit (``auditor.schedule.limits``) is an error that states the
limit; a value outside the usual range is a warning asking for the unit to be checked.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from auditor.model import Severity
from auditor.schedule.limits import LARGEST_USUAL_SPAN, SMALLEST_USUAL_SPAN

__all__ = ["Note", "fmt", "within", "span_warnings", "range_warning", "RANGE_NOTE", "LIMIT_NOTE"]

RANGE_NOTE = "(usual range, common practice)"
LIMIT_NOTE = "common practice"


@dataclass(frozen=True)
class Note:
    """One finding about a row: ``severity`` "error" rejects it, "warning" keeps it."""

    severity: Severity
    field: str | None
    message: str


def fmt(value: float) -> str:
    """A value as messages show it: four significant figures."""
    return f"{value:.4g}"


def within(value: float, field: str, label: str, unit: str, notes: list[Note], *,
            low: float | None = None, high: float | None = None, what: str = "",
            positive: bool = True) -> bool:
    """Check ``value`` against a physical range; append an error and return False if outside.

    Parameters
    ----------
    value : float
        In SI (or rpm).
    field, label, unit : str
        The field the note concerns, its name in words and its unit, for the message.
    notes : list of Note
        Appended to.
    low, high : float, optional
        The physical limits, inclusive (``auditor.schedule.limits``).
    what : str
        What lies inside the limits, for the message ("any panel").
    positive : bool
        Also require ``value > 0``.

    Returns
    -------
    bool
        True when the value is finite and inside the limits.
    """
    shown = f"{fmt(value)} {unit}".rstrip()
    if not math.isfinite(value):
        notes.append(Note("error", field, f"{label} must be a finite number, not {shown}"))
        return False
    if positive and not value > 0:
        notes.append(Note("error", field, f"{label} must be positive, not {shown}"))
        return False
    if high is not None and value > high:
        notes.append(Note("error", field,
                          f"{label} {shown} is larger than {what or 'anything it describes'} "
                          f"(the limit is {fmt(high)} {unit}, {LIMIT_NOTE}); check the value "
                          "and its unit"))
        return False
    if low is not None and value < low:
        notes.append(Note("error", field,
                          f"{label} {shown} is smaller than {what or 'anything it describes'} "
                          f"(the limit is {fmt(low)} {unit}, {LIMIT_NOTE}); check the value "
                          "and its unit"))
        return False
    return True


def span_warnings(value: float, field: str, label: str, notes: list[Note]) -> None:
    """Warn about a panel size outside the usual range [m] (a unit typed wrongly, usually)."""
    if value > LARGEST_USUAL_SPAN:
        notes.append(Note("warning", field,
                          f"{label} {fmt(value)} m is larger than {LARGEST_USUAL_SPAN:g} m "
                          "(common practice); check the unit (mm typed in a column in m?)"))
    elif value < SMALLEST_USUAL_SPAN:
        notes.append(Note("warning", field,
                          f"{label} {fmt(value)} m is smaller than {SMALLEST_USUAL_SPAN:g} m "
                          "(common practice); check the unit (m typed in a column in mm?)"))


def range_warning(value, usual, field, label, unit, material, notes) -> None:
    """Warn about a value outside the usual range ``usual`` (low, high) for ``material``."""
    low, high = usual
    if not (low <= value <= high):
        notes.append(Note("warning", field,
                          f"{label} {fmt(value)} {unit} is outside {fmt(low)}-{fmt(high)} "
                          f"{unit} for {material} {RANGE_NOTE}; check the value and its unit"))
