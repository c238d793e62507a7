"""What a recording measures: its peaks, and the mains hum lines among them.

recording → spectrum of the ring-down (``spectrum``) → peaks (``peaks``) → refined by modal
terms (``modal_terms``); a recording that already holds a spectrum goes straight to the peak
picking. Peaks on a hum line (twice the line frequency and its harmonics) are then set aside
by the caller.

References
----------
Magnetostriction hum at twice the line frequency and its harmonics: common practice of the
trade.
"""

from __future__ import annotations

from typing import TypedDict

import numpy as np

from auditor.calibrate.modal_terms import refine_modal_fit
from auditor.calibrate.peaks import Peak, spectral_peaks
from auditor.calibrate.recording import Recording
from auditor.calibrate.spectrum import tap_spectrum

__all__ = ["measure_peaks", "hum_lines"]


class _SpectrumOptions(TypedDict, total=False):
    """The options of ``measure_peaks`` that go to ``tap_spectrum``."""

    window_end: float


def measure_peaks(recording: Recording, *, fmin: float | None = None,
                  fmax: float | None = None, refine: bool = True,
                  **options: float) -> tuple[Peak, ...]:
    """Peaks of a recording: of its ring-down spectrum, or of the spectrum it holds.

    Parameters
    ----------
    recording : Recording
    fmin, fmax : float or None  [Hz]
    refine : bool
        For a time series, refine the half-power estimates by ``refine_modal_fit``.
    **options
        ``window_end`` goes to ``tap_spectrum``; ``min_prominence_db``, ``floor_margin_db``
        and ``dynamic_range_db`` to ``spectral_peaks``.

    Returns
    -------
    tuple of Peak
    """
    spectrum_options: _SpectrumOptions = {}
    if "window_end" in options:
        spectrum_options["window_end"] = options.pop("window_end")
    # a Recording holds samples with their rate, or a spectrum (Recording.__post_init__)
    if recording.samples is not None and recording.sample_rate is not None:
        spectrum = tap_spectrum(recording.samples, float(recording.sample_rate),
                                **spectrum_options)
        peaks = spectral_peaks(spectrum.frequencies_hz, spectrum.levels_db,
                               window_bandwidth_hz=spectrum.window_bandwidth_hz,
                               fmin=fmin, fmax=fmax, **options)
        return refine_modal_fit(spectrum, peaks) if refine else peaks
    if recording.frequencies_hz is None or recording.levels_db is None:
        raise ValueError("a Recording holds either samples or a spectrum")
    return spectral_peaks(recording.frequencies_hz, recording.levels_db, fmin=fmin, fmax=fmax,
                          **options)


def hum_lines(line_frequency: float, fmax: float) -> np.ndarray:
    """Mains hum lines up to ``fmax``: twice the line frequency and its harmonics.

    Parameters
    ----------
    line_frequency : float  [Hz]
        50 or 60 Hz.
    fmax : float  [Hz]

    Returns
    -------
    ndarray  [Hz]
        2·f_line·k for k = 1, 2, ... up to fmax.

    References
    ----------
    Magnetostriction hum at twice the line frequency and its harmonics: common practice of
    the trade.
    """
    if not line_frequency > 0:
        raise ValueError("line_frequency must be positive")
    count = int(fmax // (2.0 * line_frequency))
    return 2.0 * line_frequency * np.arange(1, count + 1)
