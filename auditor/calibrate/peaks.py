"""Peak picking: the peaks of a power spectrum, with half-power bandwidths and loss factors.

A peak counts when it is prominent, stands well above the floor of the band and lies within a
dynamic range of the strongest one; its frequency and level come from a parabola through the
three bins at the top, its bandwidth from where the level falls 3 dB on either side (twice the
one side where a neighbour's rise hides the other), less the bandwidth the analysis window
added.

References
----------
Half-power bandwidth and η = Δf/f: common practice, e.g. L. L. Beranek and I. L. Vér (eds.),
*Noise and Vibration Control Engineering*, 2nd ed., Wiley, 2006. Peak prominence as in
``scipy.signal.peak_prominences``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from auditor.calibrate.spectrum import half_power_loss_factor

__all__ = ["Peak", "spectral_peaks"]

_HALF_POWER_DB = 10.0 * math.log10(2.0)  # 3.0103 dB


@dataclass(frozen=True)
class Peak:
    """One spectral peak of a tap test.

    Parameters
    ----------
    frequency_hz : float  [Hz]
        Interpolated peak frequency.
    level_db : float  [dB]
        Interpolated peak level (the spectrum's own reference).
    prominence_db : float  [dB]
        Height above the higher of the two surrounding valleys.
    bandwidth_hz : float or None  [Hz]
        Half-power (−3 dB) bandwidth of the mode itself, the analysis window's share removed;
        None when not resolved (neither side falls 3 dB before the next valley, or the
        window accounts for all of it).
    loss_factor : float or None  [-]
        bandwidth / frequency.
    """

    frequency_hz: float
    level_db: float
    prominence_db: float
    bandwidth_hz: float | None
    loss_factor: float | None


def _parabolic_peak(f: np.ndarray, level: np.ndarray, k: int) -> tuple[float, float]:
    if k <= 0 or k >= len(f) - 1:
        return float(f[k]), float(level[k])
    x = f[k - 1:k + 2] - f[k]
    a, b, c = np.polyfit(x, level[k - 1:k + 2], 2)
    if a >= 0:
        return float(f[k]), float(level[k])
    shift = float(np.clip(-b / (2 * a), x[0], x[2]))
    return float(f[k] + shift), float(c - b * b / (4 * a))


def _crossing(f: np.ndarray, level: np.ndarray, k: int, target: float, step: int,
              stop: int) -> float | None:
    """Frequency where the level first falls to ``target`` going from bin k by ``step``."""
    i = k
    while i != stop:
        j = i + step
        if level[j] <= target:
            fraction = (level[i] - target) / (level[i] - level[j])
            return float(f[i] + fraction * (f[j] - f[i]))
        if level[j] > level[i] + 1e-9 and level[i] < level[k] - 1e-9:
            return None  # rising again before the half-power point: a neighbouring peak
        i = j
    return None


def spectral_peaks(
    frequencies_hz: np.ndarray,
    levels_db: np.ndarray,
    *,
    window_bandwidth_hz: float = 0.0,
    fmin: float | None = None,
    fmax: float | None = None,
    min_prominence_db: float = 6.0,
    floor_margin_db: float = 20.0,
    dynamic_range_db: float = 50.0,
) -> tuple[Peak, ...]:
    """Peaks of a power spectrum, with half-power bandwidths and loss factors.

    A peak counts when its prominence reaches ``min_prominence_db``, it stands
    ``floor_margin_db`` above the floor of the band (its 10th-percentile level: the valleys
    between modes, or the noise; white noise in a power spectrum rarely rises 20 dB above its
    own 10th percentile) and it lies within ``dynamic_range_db`` of the strongest peak.

    Parameters
    ----------
    frequencies_hz : ndarray (k,)  [Hz]
        Ascending.
    levels_db : ndarray (k,)  [dB]
        Power-like levels (3 dB is a factor of two in power).
    window_bandwidth_hz : float  [Hz]
        Bandwidth the analysis window added to every peak (see ``tap_spectrum``).
    fmin, fmax : float or None  [Hz]
        The band searched.
    min_prominence_db, floor_margin_db, dynamic_range_db : float  [dB]

    Returns
    -------
    tuple of Peak
        Ascending in frequency.

    References
    ----------
    Half-power bandwidth and η = Δf/f: common practice, e.g. Beranek and Vér, *Noise and
    Vibration Control Engineering*, 2nd ed., 2006. Peak prominence as in
    ``scipy.signal.peak_prominences``.
    """
    from scipy.signal import find_peaks

    f = np.asarray(frequencies_hz, dtype=float)
    level = np.asarray(levels_db, dtype=float)
    band = np.ones(len(f), dtype=bool)
    if fmin is not None:
        band &= f >= fmin
    if fmax is not None:
        band &= f <= fmax
    if band.sum() < 3:
        return ()
    lo, hi = int(np.argmax(band)), int(len(band) - np.argmax(band[::-1]))
    indices, props = find_peaks(level, prominence=min_prominence_db)
    keep = (indices >= lo) & (indices < hi)
    indices, prominences = indices[keep], props["prominences"][keep]
    if indices.size == 0:
        return ()
    floor = float(np.percentile(level[lo:hi], 10.0))
    strongest = float(level[indices].max())
    peaks: list[Peak] = []
    for k, prominence in zip(indices, prominences):
        if level[k] < floor + floor_margin_db or level[k] < strongest - dynamic_range_db:
            continue
        centre, top = _parabolic_peak(f, level, int(k))
        target = top - _HALF_POWER_DB
        left = _crossing(f, level, int(k), target, -1, 0)
        right = _crossing(f, level, int(k), target, +1, len(f) - 1)
        if left is not None and right is not None:
            bandwidth: float | None = right - left
        elif left is not None:
            bandwidth = 2.0 * (centre - left)
        elif right is not None:
            bandwidth = 2.0 * (right - centre)
        else:
            bandwidth = None
        loss = (half_power_loss_factor(bandwidth, centre, window_bandwidth_hz)
                if bandwidth is not None else None)
        peaks.append(Peak(frequency_hz=centre, level_db=top, prominence_db=float(prominence),
                          bandwidth_hz=loss * centre if loss is not None else None,
                          loss_factor=loss))
    return tuple(peaks)
