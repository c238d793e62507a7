"""Standard air and the checks of air-loading inputs, shared by the air-loading modules.

Every air-loading function takes the air's density and speed of sound (defaults: air at 20 °C
and 101.325 kPa) and raises :class:`LoadingInputError` for an input a user can get wrong, with
a message that names the quantity and its unit.
"""

from __future__ import annotations

from auditor.physics import arguments

__all__ = ["AIR_DENSITY", "SPEED_OF_SOUND", "LoadingInputError", "non_negative", "positive"]

#: Density of air at 20 °C, 101.325 kPa  [kg/m³]
AIR_DENSITY = 1.204
#: Speed of sound in air at 20 °C  [m/s]
SPEED_OF_SOUND = 343.0


class LoadingInputError(ValueError):
    """A loading input a user can get wrong (the message says which and why)."""


def positive(value, name: str, unit: str) -> float:
    """``value`` as a float greater than zero, or :class:`LoadingInputError`."""
    return arguments.positive(value, name, unit, LoadingInputError)


def non_negative(value, name: str, unit: str) -> float:
    """``value`` as a float of zero or more, or :class:`LoadingInputError`."""
    return arguments.non_negative(value, name, unit, LoadingInputError)
