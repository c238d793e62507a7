"""Checks of physical arguments shared by the physics modules: clear messages, no tracebacks
a user could cause from a schedule (the message names the quantity and its unit)."""

from __future__ import annotations

import math


def finite(value, name: str, unit: str, error: type[Exception] = ValueError) -> float:
    """``value`` as a float, or ``error`` saying that ``name`` [``unit``] must be a number."""
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise error(f"{name} must be a number in {unit}, got {value!r}") from None
    if not math.isfinite(number):
        raise error(f"{name} must be a finite number in {unit}, got {value!r}")
    return number


def positive(value, name: str, unit: str, error: type[Exception] = ValueError) -> float:
    """``value`` as a float greater than zero, or ``error``."""
    number = finite(value, name, unit, error)
    if number <= 0.0:
        raise error(f"{name} must be greater than zero, got {number:g} {unit}")
    return number


def non_negative(value, name: str, unit: str, error: type[Exception] = ValueError) -> float:
    """``value`` as a float of zero or more, or ``error``."""
    number = finite(value, name, unit, error)
    if number < 0.0:
        raise error(f"{name} must not be negative, got {number:g} {unit}")
    return number
