"""The frequency limit and mode cap of a request for a membrane's analytic spectrum.

Every analytic spectrum (:mod:`auditor.physics.rectangular_membrane`,
:mod:`auditor.physics.circular_membrane`) is asked for "every mode up to ``fmax`` [Hz]",
optionally "at most ``max_modes``"; :func:`frequency_limit` checks the pair once, with a
message a user can act on rather than a traceback from deep inside numpy, and
:data:`BOUND_SLACK` widens the exact index bounds so that rounding never drops a mode at
``fmax``.
"""

from __future__ import annotations

import math

__all__ = ["BOUND_SLACK", "frequency_limit"]

#: Relative slack on the exact index bounds so that rounding never drops a mode at fmax; the
#: mask on the computed frequency decides membership.
BOUND_SLACK = 1e-9


def frequency_limit(fmax, max_modes) -> tuple[float, int | None]:
    """The checked frequency limit and mode cap of a spectrum request.

    Parameters
    ----------
    fmax : float  [Hz]
        Highest frequency kept, ≥ 0; infinite only with a cap.
    max_modes : int or None
        At most this many modes (a whole number ≥ 0), or no cap.

    Returns
    -------
    limit : float  [Hz]
    cap : int or None

    Raises
    ------
    ValueError
        Naming the argument and the value given.
    """
    if max_modes is not None:
        try:
            whole = float(max_modes).is_integer() and not isinstance(max_modes, bool)
        except (TypeError, ValueError):
            whole = False
        if not whole or max_modes < 0:
            raise ValueError(f"max_modes must be a whole number ≥ 0, got {max_modes!r}")
        max_modes = int(max_modes)
    try:
        limit = float(fmax)
    except (TypeError, ValueError):
        raise ValueError(f"fmax must be a number in Hz, got {fmax!r}") from None
    if math.isnan(limit) or limit < 0.0:
        raise ValueError(f"fmax must be zero or more, got {limit!r} Hz")
    if math.isinf(limit) and max_modes is None:
        raise ValueError("fmax is infinite: give a finite fmax [Hz] or a max_modes cap")
    return limit, max_modes
