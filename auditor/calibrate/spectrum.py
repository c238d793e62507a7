"""The spectrum of a tap's ring-down, and the loss factor a half-power bandwidth gives.

A tap is a transient, so the spectrum is taken from one record: the whole ring-down from just
before the tap to the end of the recording, multiplied by an exponential window
``w(t) = exp(−t/τ)`` that falls to ``window_end`` (1 %) at the end of the record, and
zero-padded ×8 so each half-power bandwidth spans many bins. (Welch averaging of short
segments is the tool for steady signals; on a ring-down it would set the resolution by the
segment length and smear the decay.) The window adds the decay rate 1/τ to every mode, which
widens each half-power bandwidth by exactly ``1/(π τ)``; that amount is subtracted before
the loss factor is formed (the exponential-window correction of impact testing).

References
----------
Exponential window for impact tests, and the damping it adds (decay rate 1/τ): common
practice in modal testing, e.g. D. J. Ewins, *Modal Testing: Theory, Practice and
Application*, 2nd ed., Research Studies Press, 2000; A. Brandt, *Noise and Vibration
Analysis: Signal Analysis and Experimental Procedures*, Wiley, 2011. η = Δf/f for a lightly
damped mode: common practice, e.g. L. L. Beranek and I. L. Vér (eds.), *Noise and Vibration
Control Engineering*, 2nd ed., Wiley, 2006.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["TapSpectrum", "tap_spectrum", "half_power_loss_factor"]


@dataclass(frozen=True, eq=False)
class TapSpectrum:
    """Power spectrum of an exponentially windowed ring-down.

    ``levels_db`` is 10·log10 of the power, 0 dB at its maximum; ``window_bandwidth_hz``
    [Hz] is the half-power bandwidth the window adds to every peak; ``onset_s`` [s] the
    detected tap instant; ``record_s`` [s] the length of the record analysed; ``spectrum``
    the complex transform itself; ``sample_rate`` [Hz].
    """

    frequencies_hz: np.ndarray
    levels_db: np.ndarray
    window_bandwidth_hz: float
    onset_s: float
    record_s: float
    spectrum: np.ndarray | None = None
    sample_rate: float = 0.0


def tap_spectrum(
    samples: np.ndarray,
    sample_rate: float,
    *,
    window_end: float = 0.01,
    pre_trigger_s: float = 0.0,
    onset_fraction: float = 0.3,
    padding: int = 8,
    max_fft_size: int = 2**21,
) -> TapSpectrum:
    """Power spectrum of a tap's ring-down through an exponential window.

    Parameters
    ----------
    samples : ndarray (n,)  [any unit]
    sample_rate : float  [Hz]
    window_end : float  [-]
        Value of the exponential window at the end of the record (0 < window_end ≤ 1; 1 is
        no window).
    pre_trigger_s : float  [s]
        How long before the detected tap the record starts. 0 (the default) starts at the
        tap, so that the record is a pure sum of decaying sinusoids (what the modal
        refinement in ``measure_peaks`` assumes); starting a little late loses nothing.
    onset_fraction : float  [-]
        The tap is the first sample whose magnitude reaches this fraction of the largest.
    padding : int
        Zero-padding factor of the FFT.
    max_fft_size : int
        Largest FFT length (bounds memory and time for long recordings).

    Returns
    -------
    TapSpectrum

    References
    ----------
    Exponential window for impact tests, and the damping it adds (decay rate 1/τ): common
    practice in modal testing, e.g. D. J. Ewins, *Modal Testing: Theory, Practice and
    Application*, 2nd ed., Research Studies Press, 2000; A. Brandt, *Noise and Vibration
    Analysis: Signal Analysis and Experimental Procedures*, Wiley, 2011.
    """
    x = np.asarray(samples, dtype=float).ravel()
    if not 0 < window_end <= 1:
        raise ValueError("window_end must lie in (0, 1]")
    magnitude = np.abs(x - np.median(x))
    onset = int(np.argmax(magnitude >= onset_fraction * magnitude.max()))
    start = max(0, onset - int(round(pre_trigger_s * sample_rate)))
    record = x[start:] - np.mean(x[start:])
    n = len(record)
    length_s = n / sample_rate
    t = np.arange(n) / sample_rate
    if window_end < 1:
        tau = length_s / math.log(1.0 / window_end)
        record = record * np.exp(-t / tau)
        window_bandwidth = 1.0 / (math.pi * tau)
    else:
        window_bandwidth = 0.0
    size = 1 << max(int(math.ceil(math.log2(max(n, 2) * padding))), 1)
    size = max(min(size, max_fft_size), 1 << int(math.ceil(math.log2(max(n, 2)))))
    transform = np.fft.rfft(record, n=size)
    power = np.abs(transform) ** 2
    frequencies = np.fft.rfftfreq(size, d=1.0 / sample_rate)
    floor = power.max() * 1e-30 if power.max() > 0 else 1e-300
    levels = 10.0 * np.log10(np.maximum(power, floor))
    levels -= levels.max()
    return TapSpectrum(frequencies_hz=frequencies, levels_db=levels,
                       window_bandwidth_hz=window_bandwidth, onset_s=start / sample_rate,
                       record_s=length_s, spectrum=transform, sample_rate=float(sample_rate))


def half_power_loss_factor(bandwidth_hz: float, frequency_hz: float,
                           window_bandwidth_hz: float = 0.0) -> float | None:
    """Loss factor from a half-power bandwidth, less the bandwidth a window added.

    ``η = (Δf − Δf_window) / f``; None when the corrected bandwidth is not positive.

    Parameters
    ----------
    bandwidth_hz : float  [Hz]
        Measured −3 dB bandwidth.
    frequency_hz : float  [Hz]
    window_bandwidth_hz : float  [Hz]
        1/(π τ) for an exponential window of time constant τ.

    Returns
    -------
    float or None  [-]

    References
    ----------
    η = Δf/f for a lightly damped mode: common practice, e.g. L. L. Beranek and I. L. Vér
    (eds.), *Noise and Vibration Control Engineering*, 2nd ed., Wiley, 2006. Exponential-window
    correction: common practice in modal testing, e.g. D. J. Ewins, *Modal Testing*, 2000.
    """
    corrected = bandwidth_hz - window_bandwidth_hz
    if not corrected > 0 or not frequency_hz > 0:
        return None
    return corrected / frequency_hz
