"""Default structural loss factors of tensioned-panel materials.

A schedule may give a panel's structural loss factor; when it does not, the material class
decides a default. The defaults are common practice for the internal (material and fixing)
damping of each class, read as mid-range values; they are not measured properties of any
product, and a measured value (a tap test, a supplier's figure) should always replace them.

Ranges in common practice (from memory, not from a single published table):

============  ==============  ========  ===================================================
class         range  [-]      default   what it covers
============  ==============  ========  ===================================================
film          0.02 – 0.05     0.03      PVC or polyester stretched film (viscoelastic)
fabric        0.05 – 0.10     0.07      woven or knitted fabric (fibre friction, coating)
mesh          0.005 – 0.02    0.01      woven or welded metal mesh (friction at crossings)
plate         0.005 – 0.02    0.01      thin metal or composite sheet (with fixings)
============  ==============  ========  ===================================================

Air adds its own losses (sound radiation, flow through a porous fabric); those are computed by
the loading step (:mod:`auditor.physics.radiation` for radiation, :mod:`auditor.physics.porous`
for flow through fabric), not included here.
"""

from __future__ import annotations

import math
from types import MappingProxyType

__all__ = ["DEFAULT_LOSS_FACTORS", "LOSS_FACTOR_RANGES", "structural_loss_factor"]

#: Mid-range structural loss factor by material class (common practice, from memory)  [-]
DEFAULT_LOSS_FACTORS = MappingProxyType({
    "film": 0.03,
    "fabric": 0.07,
    "mesh": 0.01,
    "plate": 0.01,
})

#: Range of structural loss factors met in common practice, by material class  [-]
LOSS_FACTOR_RANGES = MappingProxyType({
    "film": (0.02, 0.05),
    "fabric": (0.05, 0.10),
    "mesh": (0.005, 0.02),
    "plate": (0.005, 0.02),
})


def structural_loss_factor(material: str, given: float | None = None) -> float:
    """The structural loss factor of a panel: the given value, else its class default.

    Parameters
    ----------
    material : {"film", "fabric", "mesh", "plate"}
        Material class (case and surrounding spaces are ignored).
    given : float or None  [-]
        A loss factor from the schedule; None (or NaN) means "use the class default".

    Returns
    -------
    loss_factor : float  [-]
        η of the structure alone; Q = 1/η.

    Raises
    ------
    ValueError
        An unknown material class, or a given value that is not a number in [0, 1).

    References
    ----------
    Default values are common practice (see the module docstring for the ranges); the loss
    factor as a measure of damping, Q = 1/η and the half-power bandwidth η·f: L. Cremer,
    M. Heckl and B. A. T. Petersson, *Structure-Borne Sound*, 3rd ed., Springer, 2005, ch. 3.
    """
    key = str(material).strip().casefold()
    if key not in DEFAULT_LOSS_FACTORS:
        known = ", ".join(DEFAULT_LOSS_FACTORS)
        raise ValueError(f"unknown material class {material!r}: use one of {known}")
    if given is None:
        return DEFAULT_LOSS_FACTORS[key]
    try:
        value = float(given)
    except (TypeError, ValueError):
        raise ValueError(f"loss factor must be a number, got {given!r}") from None
    if math.isnan(value):
        return DEFAULT_LOSS_FACTORS[key]
    if not 0.0 <= value < 1.0:
        raise ValueError(f"loss factor must lie between 0 and 1 (got {value:g}); "
                         "a loss factor is 1/Q, e.g. 0.03 for Q ≈ 33")
    return value
