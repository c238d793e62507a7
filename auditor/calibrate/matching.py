"""Matching measured peaks to predicted modes, robust to missing and spurious peaks.

For a trial parameter each peak is paired one-to-one with a predicted mode (an assignment
problem) if their frequencies differ by less than ``tolerance``; the cost is the sum of squared
log-frequency residuals with an unpaired peak costing as much as a residual at the tolerance
(a truncated quadratic, so spurious peaks such as room modes cannot pull the fit). A predicted
mode with no peak costs its ``missing_weight`` (the fit sets it from the mode's participation).

References
----------
The assignment is solved by ``scipy.optimize.linear_sum_assignment`` (a linear assignment
problem).
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

__all__ = ["match_peaks"]


def match_peaks(peak_hz: Sequence[float] | np.ndarray,
                predicted_hz: Sequence[float] | np.ndarray,
                tolerance: float = 0.05,
                missing_weight: Sequence[float] | np.ndarray | None = None,
                ) -> tuple[list[tuple[int, int]], float]:
    """Pair peaks one-to-one with predicted modes, robust to missing and spurious peaks.

    Minimises ``Σ r² + P·(unpaired peaks) + P·Σ w_j (unpaired modes)`` where
    ``r = ln(peak/predicted)`` for each pair, ``P = ln(1 + tolerance)²`` and ``w_j`` is
    ``missing_weight`` (0 for every mode when None); a pair is allowed only when
    ``|r| < ln(1 + tolerance)``.

    Parameters
    ----------
    peak_hz : sequence or ndarray of float  [Hz]
    predicted_hz : sequence or ndarray of float  [Hz]
    tolerance : float  [-]
        Largest relative frequency difference of a pair.
    missing_weight : sequence or ndarray of float, or None  [-]
        Cost of leaving each mode without a peak, as a fraction of an unpaired peak's cost.

    Returns
    -------
    pairs : list of (peak index, mode index)
    cost : float  [-]
        The minimised sum (squared natural-log residuals).

    References
    ----------
    The assignment is solved by ``scipy.optimize.linear_sum_assignment`` (a linear assignment
    problem).
    """
    from scipy.optimize import linear_sum_assignment

    peaks = np.asarray(peak_hz, dtype=float)
    modes = np.asarray(predicted_hz, dtype=float)
    weights = (np.zeros(modes.size) if missing_weight is None
               else np.asarray(missing_weight, dtype=float))
    limit = math.log1p(tolerance)
    penalty = limit**2
    missing = penalty * float(weights.sum())
    if peaks.size == 0:
        return [], missing
    if modes.size == 0:
        return [], penalty * peaks.size
    r = np.log(peaks[:, None]) - np.log(modes[None, :])
    allowed = np.abs(r) < limit
    # pairing a mode also saves its missing cost
    cost = np.where(allowed, r**2 - penalty * weights[None, :], 1e6)
    dummy = np.full((peaks.size, peaks.size), 1e6)
    np.fill_diagonal(dummy, penalty)
    rows, cols = linear_sum_assignment(np.hstack([cost, dummy]))
    pairs = [(int(i), int(j)) for i, j in zip(rows, cols) if j < modes.size]
    total = (float(sum(cost[i, j] for i, j in pairs)) + penalty * (peaks.size - len(pairs))
             + missing)
    return pairs, total
