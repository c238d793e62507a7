"""An invented tap test: the ring-down of decaying modes, with noise and mains hum.

What the tests and the demo project's recordings are made from: each mode the impulse
response of a lightly damped oscillator, so its half-power bandwidth is ``η f`` exactly.

References
----------
Half-power bandwidth of a lightly damped mode, Δf = η f: common practice, e.g.
L. L. Beranek and I. L. Vér (eds.), *Noise and Vibration Control Engineering*, 2nd ed.,
Wiley, 2006 (chapter on damping).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = ["synthesise_tap_test"]


def synthesise_tap_test(
    frequencies_hz: Sequence[float],
    loss_factors: Sequence[float] | float,
    amplitudes: Sequence[float] | None = None,
    *,
    sample_rate: float = 48000,
    duration: float = 2.0,
    noise: float = 0.001,
    hum_hz: float | Sequence[float] | None = None,
    hum_level: float = 0.02,
    tap_time: float = 0.05,
    peak: float = 0.5,
    seed: int = 0,
) -> np.ndarray:
    """An invented tap-test ring-down: decaying modes, white noise and optional mains hum.

    Each mode is the impulse response of a lightly damped oscillator,
    ``a·exp(−π f η t)·sin(2π f t)`` from the tap instant on, so its amplitude decays at
    ``σ = π f η`` [1/s] and its half-power bandwidth is ``Δf = σ/π = η f``.

    Parameters
    ----------
    frequencies_hz : sequence of float  [Hz]
    loss_factors : sequence of float or float  [-]
        One per mode, or one for all.
    amplitudes : sequence of float or None  [-]
        Relative initial amplitudes; all 1 when None.
    sample_rate : float  [Hz]
    duration : float  [s]
    noise : float  [-]
        Standard deviation of white noise, relative to the largest mode amplitude.
    hum_hz : float or sequence of float or None  [Hz]
        Steady tones present throughout (mains hum at twice the line frequency and its
        harmonics, say).
    hum_level : float  [-]
        Amplitude of each hum tone, relative to the largest mode amplitude.
    tap_time : float  [s]
        When the tap happens.
    peak : float  [-]
        The result is scaled so that its largest magnitude is ``peak`` (below full scale 1).
    seed : int
        Seed of the noise generator (the result is reproducible).

    Returns
    -------
    ndarray (n,)  [full scale = 1]

    References
    ----------
    Half-power bandwidth of a lightly damped mode, Δf = η f: common practice, e.g.
    L. L. Beranek and I. L. Vér (eds.), *Noise and Vibration Control Engineering*, 2nd ed.,
    Wiley, 2006 (chapter on damping).
    """
    frequencies = np.atleast_1d(np.asarray(frequencies_hz, dtype=float))
    eta = np.broadcast_to(np.asarray(loss_factors, dtype=float), frequencies.shape)
    if amplitudes is None:
        amp = np.ones_like(frequencies)
    else:
        amp = np.broadcast_to(np.asarray(amplitudes, dtype=float), frequencies.shape)
    if np.any(frequencies <= 0) or np.any(frequencies >= sample_rate / 2):
        raise ValueError("each frequency must lie between 0 and half the sample rate")
    if np.any(eta <= 0):
        raise ValueError("loss factors must be positive")
    if not 0 < peak < 1:
        raise ValueError("peak must lie between 0 and 1 (below full scale)")
    n = int(round(duration * sample_rate))
    t = np.arange(n) / sample_rate
    after = t >= tap_time
    tau = t[after] - tap_time
    signal = np.zeros(n)
    for f, loss, a in zip(frequencies, eta, amp):
        signal[after] += a * np.exp(-np.pi * f * loss * tau) * np.sin(2 * np.pi * f * tau)
    scale = float(np.max(np.abs(amp))) if amp.size else 1.0
    rng = np.random.default_rng(seed)
    signal += noise * scale * rng.standard_normal(n)
    if hum_hz is not None:
        for f in np.atleast_1d(np.asarray(hum_hz, dtype=float)):
            signal += hum_level * scale * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    largest = float(np.max(np.abs(signal)))
    return signal * (peak / largest) if largest > 0 else signal
