"""Site verification: a tap-test recording calibrates a panel's tension and measures damping.

recording → spectrum of the ring-down → peaks (frequency, half-power bandwidth, loss factor)
→ hum set aside → peaks matched to the full model's modes → the panel parameter (tension,
both tensions, or areal density) fitted so the model's frequencies meet the measured ones.

The fit never assumes a scaling law such as f ∝ √T: every trial value goes through the model
(``modes_of``), air loading, bending stiffness and all, so whatever the model knows about how
frequencies depend on tension the fit respects.

Spectrum
--------
A tap is a transient, so the spectrum is taken from one record: the whole ring-down from just
before the tap to the end of the recording, multiplied by an exponential window
``w(t) = exp(−t/τ)`` that falls to ``window_end`` (1 %) at the end of the record, and
zero-padded ×8 so each half-power bandwidth spans many bins. (Welch averaging of short
segments is the tool for steady signals; on a ring-down it would set the resolution by the
segment length and smear the decay.) The window adds the decay rate 1/τ to every mode, which
widens each half-power bandwidth by exactly ``1/(π τ)``; that amount is subtracted before
the loss factor is formed (the exponential-window correction of impact testing). Where
modes overlap, half-power bandwidths read off the power spectrum are biased by the
neighbours' tails, so for a time series each peak is then refined by fitting modal terms
(the peak, two neighbours each side, a smooth background) to the complex spectrum.

Matching
--------
For a trial parameter each peak is paired one-to-one with a predicted mode (an assignment
problem) if their frequencies differ by less than ``tolerance``; the cost is the sum of squared
log-frequency residuals with an unpaired peak costing as much as a residual at the tolerance
(a truncated quadratic, so spurious peaks such as room modes cannot pull the fit). A
predicted mode with no peak costs in proportion to its uniform-pressure participation (a
microphone hears odd-odd modes best; a missing fundamental is strong evidence, a missing
even mode none), and a weak log-normal prior on the scheduled value breaks ties. A log grid
over the search range finds the basin; least squares in log frequency on the matched pairs
(no prior) refines it, re-pairing, and dropping pairs far outside the consensus, until the
pairs settle.
"""

from __future__ import annotations

import dataclasses
import math
import os
import posixpath
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Literal, Mapping, Sequence

import numpy as np

from auditor.model import Mode, Panel, RowProblem, Schedule
from auditor.recording import Recording, RecordingError, read_recording
from auditor.schedule.inputs import input_location

__all__ = [
    "Peak",
    "TapSpectrum",
    "MatchedPeak",
    "Calibration",
    "CalibrationError",
    "FIT_PARAMETERS",
    "tap_spectrum",
    "half_power_loss_factor",
    "spectral_peaks",
    "refine_modal_fit",
    "measure_peaks",
    "hum_lines",
    "match_peaks",
    "calibrate_panel",
    "calibrate_schedule",
    "calibration_to_dict",
    "format_uncertainty",
    "apply_calibration",
]

FitParameter = Literal["tension", "tension_ratio", "areal_density"]
#: What a calibration can fit, and how many parameters each has.
FIT_PARAMETERS: dict[str, int] = {"tension": 1, "tension_ratio": 2, "areal_density": 1}

_HALF_POWER_DB = 10.0 * math.log10(2.0)  # 3.0103 dB
_CENTS_PER_LOG = 1200.0 / math.log(2.0)

ModesOf = Callable[[Panel], Sequence[Mode]]


class CalibrationError(ValueError):
    """A recording could be read but could not calibrate the panel; the message says why."""


# --------------------------------------------------------------------------------------------
# Records
# --------------------------------------------------------------------------------------------

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


@dataclass(frozen=True)
class MatchedPeak:
    """A measured peak paired with a predicted mode at the fitted parameter.

    ``residual_percent`` is 100·(peak − predicted)/predicted; ``loss_factor`` the measured
    one, ``predicted_loss_factor`` the model's (None when the model gives none).
    """

    peak_hz: float
    mode: str
    predicted_hz: float
    residual_percent: float
    loss_factor: float | None
    predicted_loss_factor: float | None = None

    def as_dict(self) -> dict[str, Any]:
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class Calibration:
    """A panel's parameters fitted to a tap test.

    Parameters
    ----------
    panel : str
        Panel id.
    fitted : {"tension", "tension_ratio", "areal_density"}
        What was fitted: both tensions by one factor, each tension separately, or the areal
        density.
    tension, tension_y : float  [N/m]
        Fitted ``tension_x`` and ``tension_y`` (the scheduled ones when ``fitted`` is
        "areal_density").
    scheduled_tension, scheduled_tension_y : float  [N/m]
    areal_density, scheduled_areal_density : float  [kg/m²]
    uncertainty : float or None  [-]
        Standard error of the fitted parameter (of ``tension`` for "tension_ratio") as a
        fraction of its value, from the Jacobian and the residual variance. **None** when it
        cannot be estimated: with no more matched peaks than fitted parameters (one peak,
        or two peaks for "tension_ratio"; a note says so) or a singular Jacobian. Format it
        with ``format_uncertainty``; JSON gives null.
    uncertainty_y : float or None  [-]
        The same for ``tension_y`` when "tension_ratio" was fitted, else None.
    peaks_hz : tuple of float  [Hz]
        Every peak found in the model's frequency range.
    matched : tuple of MatchedPeak
    unmatched_hz : tuple of float  [Hz]
        Peaks no mode accounts for (room modes, other sources).
    hum_hz : tuple of float  [Hz]
        Peaks set aside as mains hum.
    residual : float  [%]
        Root-mean-square of the matched residuals, in percent of frequency.
    residual_cents : float  [cent]
        The same in cents (1200 per octave).
    loss_factors : tuple of (mode label, loss factor or None)
        Measured loss factor of each matched mode.
    recording : str
        The recording as the schedule names it (its path relative to the schedule's
        folder), or its file name alone; never an absolute path.
    notes : tuple of str
    """

    panel: str
    fitted: str
    tension: float
    tension_y: float
    scheduled_tension: float
    scheduled_tension_y: float
    areal_density: float
    scheduled_areal_density: float
    uncertainty: float | None
    uncertainty_y: float | None
    peaks_hz: tuple[float, ...]
    matched: tuple[MatchedPeak, ...]
    unmatched_hz: tuple[float, ...]
    hum_hz: tuple[float, ...]
    residual: float
    residual_cents: float
    loss_factors: tuple[tuple[str, float | None], ...]
    recording: str = ""
    notes: tuple[str, ...] = ()

    @property
    def tension_change(self) -> float:
        """Fitted over scheduled ``tension_x``, less one  [-]."""
        return self.tension / self.scheduled_tension - 1.0


# --------------------------------------------------------------------------------------------
# Spectrum and peaks
# --------------------------------------------------------------------------------------------

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


def _linear_least_squares(matrix: np.ndarray, rhs: np.ndarray) -> np.ndarray:
    """Least-squares coefficients by normal equations on unit-norm columns.

    Small, well-scaled problems; far quicker than an SVD when BLAS threads are contended.
    """
    norms = np.linalg.norm(matrix, axis=0)
    norms[norms == 0] = 1.0
    scaled = matrix / norms
    gram = scaled.T @ scaled
    gram[np.diag_indices_from(gram)] += 1e-12
    try:
        return np.linalg.solve(gram, scaled.T @ rhs) / norms
    except np.linalg.LinAlgError:
        return np.linalg.lstsq(matrix, rhs, rcond=None)[0]


def refine_modal_fit(spectrum: TapSpectrum, peaks: Sequence[Peak],
                     *, span: float = 2.0, neighbours: int = 2) -> tuple[Peak, ...]:
    """Refine peak frequencies and loss factors by fitting modal terms to the complex spectrum.

    Half-power bandwidths read off a power spectrum are biased where modes overlap: the
    neighbour's tail adds to the peak with its own phase. Here the windowed ring-down's
    transform is fitted, near each peak, by single-degree-of-freedom terms for the peak and
    its neighbours on either side, each the exact transform of a sampled decaying sinusoid,
    ``R/(1 − exp((−s + i(ω_k − ω))/f_s)) + R̄/(1 − exp((−s − i(ω_k + ω))/f_s))``, with the
    residues ``R`` solved linearly for each trial of frequencies and decay rates (variable
    projection). The window's decay rate is then removed from ``s`` as in
    ``half_power_loss_factor``. A peak whose fit is not credible (frequency moved by more
    than its bandwidth, or no decay left after the window) keeps its half-power values.

    Parameters
    ----------
    spectrum : TapSpectrum
        With its complex ``spectrum``.
    peaks : sequence of Peak
        Half-power estimates (from ``spectral_peaks`` on the same spectrum).
    span : float  [-]
        Bins within ``span`` windowed half-power bandwidths of each peak are fitted.

    Returns
    -------
    tuple of Peak

    References
    ----------
    Single-degree-of-freedom modal terms fitted to a measured frequency response (curve
    fitting of rational fractions): common practice in modal testing, e.g. D. J. Ewins,
    *Modal Testing: Theory, Practice and Application*, 2nd ed., 2000. Variable projection:
    G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10 (1973) 413–432.
    """
    from scipy.optimize import least_squares

    if spectrum.spectrum is None or not peaks:
        return tuple(peaks)
    rate = spectrum.sample_rate
    window_rate = math.pi * spectrum.window_bandwidth_hz  # decay rate the window adds [1/s]
    f = spectrum.frequencies_hz
    x = spectrum.spectrum
    step = float(f[1] - f[0])
    centres = np.array([p.frequency_hz for p in peaks])
    # windowed half-power bandwidth of each peak [Hz]
    width = np.array([(p.bandwidth_hz or 0.0) + spectrum.window_bandwidth_hz for p in peaks])
    width = np.maximum(width, 4.0 * step)
    # about six bins per bandwidth are plenty; the zero-padded spectrum has many more
    stride = max(1, int(np.min(width) / step / 6.0))

    refined: list[Peak] = []
    for k, peak in enumerate(peaks):
        group = [j for j in range(k - neighbours, k + neighbours + 1) if 0 <= j < len(peaks)]
        select = np.zeros(f.size, dtype=bool)
        for j in group:
            select |= np.abs(f - centres[j]) <= span * width[j]
        index = np.flatnonzero(select)[::stride]
        if index.size < 4 * len(group) + 4:
            refined.append(peak)
            continue
        # one weight for the whole group, set by this peak: only its own result is kept
        own_bins = np.abs(f - centres[k]) <= span * width[k]
        weight = 1.0 / max(float(np.abs(x[own_bins]).max()) if own_bins.any() else 0.0,
                           1e-300)
        omega = 2.0 * np.pi * f[index]
        target = x[index] * weight
        rhs = np.concatenate([target.real, target.imag])
        w = np.full((index.size, 1), weight)
        offset = (f[index] - centres[k]) / width[k]
        background = np.column_stack([np.ones_like(offset), 1j * np.ones_like(offset),
                                      offset, 1j * offset])

        def residuals(params: np.ndarray, omega=omega, rhs=rhs, w=w,
                      background=background) -> np.ndarray:
            wk = 2.0 * np.pi * params[0::2]
            sk = np.exp(params[1::2])
            positive = 1.0 / (1.0 - np.exp((-sk + 1j * (wk - omega[:, None])) / rate))
            negative = 1.0 / (1.0 - np.exp((-sk - 1j * (wk + omega[:, None])) / rate))
            # residue R = a + i b contributes a (P + N) + i b (P − N); the other modes'
            # tails are a smooth background: a complex constant and slope (residual terms)
            basis = np.hstack([positive + negative, 1j * (positive - negative),
                               background]) * w
            stacked = np.vstack([basis.real, basis.imag])
            return stacked @ _linear_least_squares(stacked, rhs) - rhs

        start = np.empty(2 * len(group))
        start[0::2] = centres[group]
        start[1::2] = np.log(np.pi * width[group])
        scale = np.empty_like(start)
        scale[0::2] = width[group]
        scale[1::2] = 0.1
        try:
            fitted = least_squares(residuals, start, x_scale=scale, method="trf",
                                   max_nfev=40 * start.size)
        except (ValueError, np.linalg.LinAlgError):
            refined.append(peak)
            continue
        own = group.index(k)
        frequency = float(fitted.x[2 * own])
        decay_rate = float(np.exp(fitted.x[2 * own + 1])) - window_rate
        credible = (fitted.status > 0 and abs(frequency - peak.frequency_hz) <= width[k]
                    and decay_rate > 0)
        if not credible:
            refined.append(peak)
            continue
        bandwidth = decay_rate / math.pi
        refined.append(dataclasses.replace(peak, frequency_hz=frequency, bandwidth_hz=bandwidth,
                                           loss_factor=bandwidth / frequency))
    return tuple(refined)


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
    spectrum_options = {k: options.pop(k) for k in ("window_end",) if k in options}
    if recording.samples is not None:
        spectrum = tap_spectrum(recording.samples, float(recording.sample_rate),
                                **spectrum_options)
        peaks = spectral_peaks(spectrum.frequencies_hz, spectrum.levels_db,
                               window_bandwidth_hz=spectrum.window_bandwidth_hz,
                               fmin=fmin, fmax=fmax, **options)
        return refine_modal_fit(spectrum, peaks) if refine else peaks
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


def match_peaks(peak_hz: Sequence[float], predicted_hz: Sequence[float],
                tolerance: float = 0.05,
                missing_weight: Sequence[float] | None = None,
                ) -> tuple[list[tuple[int, int]], float]:
    """Pair peaks one-to-one with predicted modes, robust to missing and spurious peaks.

    Minimises ``Σ r² + P·(unpaired peaks) + P·Σ w_j (unpaired modes)`` where
    ``r = ln(peak/predicted)`` for each pair, ``P = ln(1 + tolerance)²`` and ``w_j`` is
    ``missing_weight`` (0 for every mode when None); a pair is allowed only when
    ``|r| < ln(1 + tolerance)``.

    Parameters
    ----------
    peak_hz : sequence of float  [Hz]
    predicted_hz : sequence of float  [Hz]
    tolerance : float  [-]
        Largest relative frequency difference of a pair.
    missing_weight : sequence of float or None  [-]
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


# --------------------------------------------------------------------------------------------
# Fitting
# --------------------------------------------------------------------------------------------

def _panel_at(panel: Panel, fit: str, params: np.ndarray) -> Panel:
    scale = np.exp(params)
    if fit == "tension":
        return dataclasses.replace(panel, tension_x=panel.tension_x * float(scale[0]),
                                   tension_y=panel.tension_y * float(scale[0]))
    if fit == "tension_ratio":
        return dataclasses.replace(panel, tension_x=panel.tension_x * float(scale[0]),
                                   tension_y=panel.tension_y * float(scale[1]))
    return dataclasses.replace(panel, areal_density=panel.areal_density * float(scale[0]))


class _Model:
    """``modes_of`` at trial parameters (log scale factors), remembered per trial."""

    def __init__(self, panel: Panel, fit: str, modes_of: ModesOf) -> None:
        self.panel, self.fit, self.modes_of = panel, fit, modes_of
        self.cache: dict[tuple[float, ...], tuple[Mode, ...]] = {}
        self.calls = 0

    def modes(self, params: np.ndarray) -> tuple[Mode, ...]:
        key = tuple(np.round(np.asarray(params, dtype=float), 12))
        if key not in self.cache:
            trial = _panel_at(self.panel, self.fit, np.asarray(params, dtype=float))
            self.calls += 1
            try:
                result = tuple(self.modes_of(trial))
            except (ValueError, ArithmeticError) as error:
                raise CalibrationError(
                    f"the panel model failed at tension {trial.tension_x:.4g} N/m, areal "
                    f"density {trial.areal_density:.4g} kg/m²: {error}") from None
            self.cache[key] = tuple(m for m in result
                                    if math.isfinite(m.frequency_hz) and m.frequency_hz > 0)
        return self.cache[key]

    def frequencies(self, params: np.ndarray) -> np.ndarray:
        return np.array([m.frequency_hz for m in self.modes(params)])

    def missing_weights(self, params: np.ndarray, band: tuple[float, float],
                        scale: float) -> np.ndarray:
        """How much each mode's absence costs: its participation over the largest one.

        A microphone hears a mode by the sound it radiates, and below coincidence that is
        what its uniform-pressure participation measures (an odd-odd mode radiates as a
        monopole, the others far less), so a missing fundamental is strong evidence against a
        trial value while a missing even mode is none. Modes outside ``band`` [Hz] cost
        nothing. With no participation known, every mode in the band costs ``scale``/4.
        """
        modes = self.modes(params)
        f = np.array([m.frequency_hz for m in modes])
        share = np.array([max(m.participation, 0.0) for m in modes])
        largest = float(share.max()) if share.size else 0.0
        weights = share / largest if largest > 0 else np.full(f.size, 0.25)
        inside = (f >= band[0]) & (f <= band[1])
        return scale * weights * inside


def _grid(fit: str, search_range: tuple[float, float], points: int) -> np.ndarray:
    low, high = math.log(search_range[0]), math.log(search_range[1])
    line = np.linspace(low, high, points)
    if FIT_PARAMETERS[fit] == 1:
        return line[:, None]
    return np.column_stack([line, line])


def _best(model: _Model, peaks: np.ndarray, trials: np.ndarray, tolerance: float,
          band: tuple[float, float], missing_weight: float,
          prior_spread: float) -> np.ndarray:
    """The trial of least matching cost plus a weak log-normal prior on the schedule.

    The prior adds ``P·Σ (ln s / ln prior_spread)²`` (``P`` the unpaired-peak cost, ``s``
    each factor on the scheduled value): it only decides between trials the peaks cannot
    tell apart, such as a dense band of high-order modes lining up with a few peaks at an
    implausible tension. The refinement that follows does not use it.
    """
    penalty = math.log1p(tolerance) ** 2
    prior = penalty * np.sum((trials / math.log(prior_spread)) ** 2, axis=1)
    costs = np.array([
        match_peaks(peaks, model.frequencies(p), tolerance,
                    model.missing_weights(p, band, missing_weight))[1]
        for p in trials]) + prior
    distance = np.abs(trials).sum(axis=1)  # ties go to the trial nearest the schedule
    order = np.lexsort((distance, np.round(costs, 12)))
    return trials[order[0]]


def _fit(model: _Model, peaks: np.ndarray, start: np.ndarray, tolerance: float,
         band: tuple[float, float], missing_weight: float,
         outlier_sigmas: float = 4.0, outlier_floor: float = 0.01):
    """Least squares in log frequency on the pairs, re-pairing until they settle.

    After each solve, a pair whose residual exceeds ``outlier_sigmas`` robust standard
    deviations (1.4826 × median absolute deviation) and ``outlier_floor`` (in natural-log
    frequency) is taken for a spurious peak near a mode: the peak is excluded and the fit
    repeated.
    """
    from scipy.optimize import least_squares

    params = np.asarray(start, dtype=float)
    limit = math.log1p(tolerance)
    result = None
    labels: tuple[str, ...] = ()
    chosen: list[int] = []
    excluded: set[int] = set()
    for _ in range(12):
        modes = model.modes(params)
        candidates = [i for i in range(len(peaks)) if i not in excluded]
        pairs, _cost = match_peaks(peaks[candidates], [m.frequency_hz for m in modes], tolerance,
                                   model.missing_weights(params, band, missing_weight))
        pairs = [(candidates[i], j) for i, j in pairs]
        new_labels = tuple(modes[j].label for _, j in sorted(pairs))
        new_chosen = [i for i, _ in sorted(pairs)]
        if result is not None and new_labels == labels and new_chosen == chosen:
            break
        labels, chosen = new_labels, new_chosen
        if len(chosen) < len(params):
            raise CalibrationError(
                f"only {len(chosen)} peak(s) match a predicted mode within "
                f"{100 * tolerance:g} %, too few to fit {len(params)} parameter(s)")
        measured = np.log(peaks[chosen])

        def residuals(p: np.ndarray, labels=labels, measured=measured) -> np.ndarray:
            by_label = {m.label: m.frequency_hz for m in model.modes(p)}
            out = np.empty(len(labels))
            for k, label in enumerate(labels):
                f = by_label.get(label)
                out[k] = measured[k] - math.log(f) if f else 4 * limit
            return out

        result = least_squares(residuals, params, diff_step=1e-4, method="trf")
        params = result.x
        # pairs far outside the consensus are spurious peaks that happen to lie near a mode
        spread = 1.4826 * float(np.median(np.abs(result.fun - np.median(result.fun))))
        outliers = np.abs(result.fun) > max(outlier_sigmas * spread, outlier_floor)
        if outliers.any() and len(chosen) - int(outliers.sum()) >= len(params):
            excluded |= {chosen[k] for k in np.flatnonzero(outliers)}
            result = None
    if result is None:
        raise CalibrationError("the peak-to-mode pairing did not settle")
    return params, result, labels, chosen


def _standard_errors(result, count: int) -> np.ndarray | None:
    jac = np.atleast_2d(result.jac)
    dof = count - jac.shape[1]
    if dof < 1:
        return None
    variance = float(np.sum(result.fun**2)) / dof
    try:
        cov = np.linalg.inv(jac.T @ jac) * variance
    except np.linalg.LinAlgError:
        return None
    diag = np.diag(cov)
    if np.any(~np.isfinite(diag)) or np.any(diag < 0):
        return None
    return np.sqrt(diag)


def calibrate_panel(
    panel: Panel,
    recording: Recording | str | os.PathLike,
    modes_of: ModesOf,
    *,
    line_frequency: float | None = None,
    fit: FitParameter = "tension",
    tolerance: float = 0.05,
    search_range: tuple[float, float] = (0.3, 3.0),
    grid_points: int = 61,
    hum_tolerance: float = 0.01,
    missing_weight: float = 1.0,
    prior_spread: float = 2.0,
    min_prominence_db: float = 6.0,
    floor_margin_db: float = 20.0,
    dynamic_range_db: float = 50.0,
    window_end: float = 0.01,
) -> Calibration:
    """Fit a panel's tension (or both tensions, or its areal density) to a tap test.

    Parameters
    ----------
    panel : Panel
        As scheduled; the scheduled values are the start and the reference of the fit.
    recording : Recording or path
        A time series (its ring-down is analysed) or a spectrum. A path is read as given,
        and named by its file name alone; ``calibrate_schedule`` is what confines a
        schedule's paths to its folder.
    modes_of : callable (Panel) -> sequence of Mode
        The full model (air loading included in production). It should return every mode
        below a fixed frequency that lies above the highest peak of interest; only peaks
        within the range the model covers at every trial value are fitted.
    line_frequency : float or None  [Hz]
        Mains frequency; peaks within ``hum_tolerance`` of 2·f_line·k are set aside as hum.
    fit : {"tension", "tension_ratio", "areal_density"}
        "tension" scales both tensions by one factor; "tension_ratio" fits ``tension_x``
        and ``tension_y`` separately (orthotropic fabric, warp and weft; on a rectangle the
        frequencies alone cannot tell (Tx, Ty) from the pair that swaps the roles of m and
        n, and the weak prior on the schedule picks the one nearer it); "areal_density"
        scales the areal density and keeps the tensions.
    tolerance : float  [-]
        Largest relative difference of a peak–mode pair.
    search_range : (float, float)  [-]
        Factors on the scheduled value searched by the grid.
    grid_points : int
        Points of the log grid for a one-parameter fit ("tension_ratio" uses a 25 × 25 grid
        of both tensions, then a 9 × 9 grid around the best: about 700 model evaluations).
    hum_tolerance : float  [-]
        Relative distance from a hum line within which a peak is hum.
    missing_weight : float  [-]
        Cost of a predicted mode with no peak (below the highest peak), for the mode of
        largest participation, relative to a peak with no mode; other modes in proportion
        to their participation (see ``match_peaks``).
    prior_spread : float  [-]
        Factor on the scheduled value that a weak log-normal prior treats as one standard
        deviation; it only breaks ties in the grid search (see ``_best``), never moves the
        refined value.
    min_prominence_db, floor_margin_db, dynamic_range_db : float  [dB]
        Peak acceptance, see ``spectral_peaks``.
    window_end : float  [-]
        Exponential window value at the end of the record, see ``tap_spectrum``.

    Returns
    -------
    Calibration

    Raises
    ------
    RecordingError
        When ``recording`` is a path that cannot be used.
    CalibrationError
        No peaks, too few matches, or a panel with nothing to scale.

    References
    ----------
    Half-power bandwidth η = Δf/f: Beranek and Vér, *Noise and Vibration Control
    Engineering*, 2nd ed., Wiley, 2006. Exponential-window correction: Ewins, *Modal
    Testing*, 2nd ed., 2000. Standard errors from the Jacobian, ``cov = s² (JᵀJ)⁻¹``:
    e.g. W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge, 2007, ch. 15.
    """
    if fit not in FIT_PARAMETERS:
        raise CalibrationError(
            f"unknown fit '{fit}'; choose one of {', '.join(sorted(FIT_PARAMETERS))}")
    if fit in ("tension", "tension_ratio") and not (panel.tension_x > 0 and panel.tension_y > 0):
        raise CalibrationError(f"panel {panel.panel} has no scheduled tension to calibrate")
    if not panel.areal_density > 0:
        raise CalibrationError(f"panel {panel.panel} has no areal density")
    if not prior_spread > 1:
        raise CalibrationError("prior_spread must exceed 1, e.g. 2.0")
    if not 0 < search_range[0] < 1 < search_range[1]:
        raise CalibrationError("search_range must bracket 1, e.g. (0.3, 3.0)")
    if not isinstance(recording, Recording):
        recording = read_recording(recording)

    model = _Model(panel, fit, modes_of)
    grid = _grid(fit, search_range, grid_points)
    highest = [model.frequencies(p) for p in grid]
    if any(h.size == 0 for h in highest):
        raise CalibrationError(f"the panel model gives no modes for panel {panel.panel}")
    f_low = 0.5 * min(float(h.min()) for h in highest)
    f_high = min(float(h.max()) for h in highest) / (1.0 + tolerance)
    if recording.sample_rate is not None:
        f_high = min(f_high, 0.45 * float(recording.sample_rate))

    peaks = measure_peaks(recording, fmin=f_low, fmax=f_high, window_end=window_end,
                          min_prominence_db=min_prominence_db, floor_margin_db=floor_margin_db,
                          dynamic_range_db=dynamic_range_db)
    if not peaks:
        raise CalibrationError(
            f"no clear peaks between {f_low:.3g} and {f_high:.3g} Hz in {recording.name}; "
            "tap harder or nearer the panel's centre, or record closer")
    notes: list[str] = list(recording.notes)

    hum: list[Peak] = []
    usable: list[Peak] = []
    lines = hum_lines(line_frequency, f_high * 1.1) if line_frequency else np.zeros(0)
    for peak in peaks:
        near = lines.size and np.min(np.abs(peak.frequency_hz / lines - 1.0)) <= hum_tolerance
        (hum if near else usable).append(peak)
    if not usable:
        raise CalibrationError(f"every peak in {recording.name} lies on a mains hum line")
    peak_hz = np.array([p.frequency_hz for p in usable])

    spectrum_low = (f_low if recording.frequencies_hz is None
                    else max(f_low, float(recording.frequencies_hz[0])))
    band = (spectrum_low, float(peak_hz.max()) * (1.0 + tolerance))
    if fit == "tension_ratio":
        # both tensions on a coarse log grid with a widened tolerance (so the basin of the
        # answer is never stepped over), then a fine grid around the best with the real one
        axis = np.linspace(math.log(search_range[0]), math.log(search_range[1]), 25)
        coarse = np.array([[a, b] for a in axis for b in axis])
        start = _best(model, peak_hz, coarse, 1.5 * tolerance, band, missing_weight,
                      prior_spread)
        step = float(axis[1] - axis[0])
        local = np.linspace(-step, step, 9)
        fine = np.array([[start[0] + a, start[1] + b] for a in local for b in local])
        start = _best(model, peak_hz, fine, tolerance, band, missing_weight,
                      prior_spread)
    else:
        start = _best(model, peak_hz, grid, tolerance, band, missing_weight,
                      prior_spread)
    params, result, labels, chosen = _fit(model, peak_hz, start, tolerance, band,
                                          missing_weight)

    errors = _standard_errors(result, len(chosen))
    if errors is None:
        notes.append(f"{len(chosen)} matched peak(s) for {len(params)} parameter(s): "
                     "no uncertainty can be estimated")
    elif len(chosen) < 3:
        notes.append(f"only {len(chosen)} matched peaks: treat the fit with caution")

    fitted_panel = _panel_at(panel, fit, params)
    modes_now = {m.label: m for m in model.modes(params)}
    matched: list[MatchedPeak] = []
    residual_logs = []
    for index, label in zip(chosen, labels):
        peak = usable[index]
        mode = modes_now[label]
        r = math.log(peak.frequency_hz / mode.frequency_hz)
        residual_logs.append(r)
        matched.append(MatchedPeak(peak_hz=peak.frequency_hz, mode=label,
                                   predicted_hz=mode.frequency_hz,
                                   residual_percent=100.0 * math.expm1(r),
                                   loss_factor=peak.loss_factor,
                                   predicted_loss_factor=mode.loss_factor))
    residual_logs_arr = np.array(residual_logs)
    unmatched = tuple(p.frequency_hz for k, p in enumerate(usable) if k not in set(chosen))
    if unmatched:
        notes.append(f"{len(unmatched)} peak(s) match no mode (room modes or other sources)")
    if hum:
        notes.append(f"{len(hum)} peak(s) set aside as mains hum")

    uncertainty = float(errors[0]) if errors is not None else None
    uncertainty_y = float(errors[1]) if errors is not None and len(errors) > 1 else None
    return Calibration(
        panel=panel.panel,
        fitted=fit,
        tension=fitted_panel.tension_x,
        tension_y=fitted_panel.tension_y,
        scheduled_tension=panel.tension_x,
        scheduled_tension_y=panel.tension_y,
        areal_density=fitted_panel.areal_density,
        scheduled_areal_density=panel.areal_density,
        uncertainty=uncertainty,
        uncertainty_y=uncertainty_y,
        peaks_hz=tuple(p.frequency_hz for p in peaks),
        matched=tuple(matched),
        unmatched_hz=unmatched,
        hum_hz=tuple(p.frequency_hz for p in hum),
        residual=float(100.0 * np.sqrt(np.mean(np.expm1(residual_logs_arr) ** 2))),
        residual_cents=float(_CENTS_PER_LOG * np.sqrt(np.mean(residual_logs_arr**2))),
        loss_factors=tuple((m.mode, m.loss_factor) for m in matched),
        recording=_shown_name(recording.source),
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# Schedules, export, use
# --------------------------------------------------------------------------------------------

def _tap_test_column(panel: Panel) -> str:
    """The tap-test header as the user typed it (the one holding the cell, if several)."""
    headers = [column for column, _text in panel.entered if "tap" in column.casefold()]
    for column, text in panel.entered:
        if column in headers and text.strip() == (panel.tap_test or "").strip():
            return column
    return headers[0] if headers else "tap test"


def _shown_name(source: str) -> str:
    """A recording's name for outputs: as given when relative, the file name when absolute."""
    if os.path.isabs(source) or posixpath.isabs(source):
        return Path(source).name
    return source


#: Why a recording outside the schedule's folder is not opened (no path is echoed).
_OUTSIDE_FOLDER = (
    "the recording must be inside the schedule's folder (or a folder below it); an absolute "
    "path, a path that climbs out with '..', or a link that leads out is not opened")


def _locate(cell: str, folder: Path, allow_outside: bool) -> tuple[Path, str] | None:
    """Where a tap-test cell points, and how to name it; None when it leads out of ``folder``.

    The cell is a path relative to the schedule's folder (``\\`` is taken for ``/``, as a
    schedule typed on Windows writes it). Unless ``allow_outside``, the path is resolved,
    links followed, and must lie inside the resolved folder; the resolved path, with no
    link left in it, is what is then opened.
    """
    typed = cell.strip().replace("\\", "/")
    if allow_outside:
        absolute = Path(typed).is_absolute()
        return folder / typed, Path(typed).name if absolute else posixpath.normpath(typed)
    try:
        root = folder.resolve()
        target = (root / typed).resolve()
    except (OSError, RuntimeError, ValueError):  # a link loop, a NUL byte, a name too long
        return None
    if Path(typed).is_absolute() or not target.is_relative_to(root):
        return None
    return target, posixpath.normpath(typed)


def _schedule_folder(schedule: Schedule, panel: Panel,
                     folders: Mapping[str, str | os.PathLike] | None,
                     base_dir: str | os.PathLike | None) -> Path | None:
    """The folder a panel's tap-test path is relative to, or None when it is not known."""
    if base_dir is not None:
        return Path(base_dir)
    if folders is not None:
        folder = folders.get(panel.source.file)
        return Path(folder) if folder is not None else None
    location = input_location(schedule, panel.source.file)
    if location is not None:
        return location.parent
    if os.path.isabs(panel.source.file):  # a schedule made in memory, naming its file in full
        return Path(panel.source.file).parent
    return None


def calibrate_schedule(
    schedule: Schedule,
    modes_of: ModesOf,
    *,
    panel_id: str | None = None,
    folders: Mapping[str, str | os.PathLike] | None = None,
    base_dir: str | os.PathLike | None = None,
    allow_outside: bool = False,
    line_frequency: float | None = None,
    fit: FitParameter = "tension",
    **options: Any,
) -> tuple[tuple[Calibration, ...], tuple[RowProblem, ...]]:
    """Calibrate every panel of a schedule that names a tap-test recording.

    A schedule is an untrusted file, so its tap-test cells are confined: each is a path
    relative to the folder of the schedule file it came from, and must resolve (links
    followed) to a file inside that folder or a folder below it. Any other path (absolute,
    climbing out with ``..``, or through a link that leads out) is not opened: it is an
    error ``RowProblem`` whose message does not show where the path leads. Recordings are
    named in every message and in ``Calibration.recording`` by the path as typed, never by
    an absolute path, and their content is never quoted.

    Parameters
    ----------
    schedule : Schedule
    modes_of : callable (Panel) -> sequence of Mode
    panel_id : str or None
        Calibrate only this panel.
    folders : mapping of str to path, or None
        The folder of each schedule file, keyed by the file as the panels name it
        (``Panel.source.file``). Not needed for a schedule from ``read_schedule``: by
        default the folder is that of the file the schedule records it read
        (``auditor.schedule.inputs.input_location``), or, for a schedule made in memory,
        the folder of an absolute ``Panel.source.file``. A panel whose folder is not known
        gets a warning and keeps its scheduled values.
    base_dir : path or None
        One folder for every panel instead of ``folders``.
    allow_outside : bool
        Open recordings wherever their paths lead. For an explicit choice of the user (a
        command-line flag); never the default.
    line_frequency : float or None  [Hz]
        Defaults to the project's line frequency.
    fit : {"tension", "tension_ratio", "areal_density"}
    **options
        Passed to ``calibrate_panel``.

    Returns
    -------
    calibrations : tuple of Calibration
    problems : tuple of RowProblem
        One per recording that was not used, naming the file, sheet, row and the tap-test
        column as typed. Severity "error" for a path outside the schedule's folder;
        "warning" for a recording that could not be read or fitted. Either way the panel is
        still audited at its scheduled values.
    """
    if line_frequency is None:
        line_frequency = schedule.project.line_frequency
    calibrations: list[Calibration] = []
    problems: list[RowProblem] = []
    panels = [p for p in schedule.panels if panel_id is None or p.panel == panel_id]
    if panel_id is not None and not panels:
        problems.append(RowProblem(file="", sheet="", row=None, column="",
                                   message=f"no panel '{panel_id}' in the schedule",
                                   severity="warning", record=panel_id))
    for panel in panels:
        if not panel.tap_test or not panel.tap_test.strip():
            continue

        def problem(message: str, severity: str = "warning", panel: Panel = panel) -> None:
            problems.append(RowProblem(
                file=panel.source.file, sheet=panel.source.sheet, row=panel.source.row,
                column=_tap_test_column(panel),
                message=f"tap test not used (scheduled values kept): {message}",
                severity=severity, text=panel.tap_test or "", record=panel.panel))

        folder = _schedule_folder(schedule, panel, folders, base_dir)
        if folder is None:
            problem("the folder of this schedule file is not known, so the recording "
                    "cannot be found")
            continue
        located = _locate(panel.tap_test, folder, allow_outside)
        if located is None:
            problem(_OUTSIDE_FOLDER + " (pass --recordings-anywhere to allow it)")
            continue
        path, shown = located
        try:
            recording = read_recording(path, name=shown)
            calibrations.append(calibrate_panel(panel, recording, modes_of,
                                                line_frequency=line_frequency, fit=fit,
                                                **options))
        except (RecordingError, CalibrationError) as error:
            problem(str(error))
    return tuple(calibrations), tuple(problems)


def calibration_to_dict(calibration: Calibration) -> dict[str, Any]:
    """A calibration as plain JSON-ready values (SI units, residual in percent)."""
    c = calibration
    return {
        "panel": c.panel,
        "fitted": c.fitted,
        "tension": c.tension,
        "tension_y": c.tension_y,
        "scheduled_tension": c.scheduled_tension,
        "scheduled_tension_y": c.scheduled_tension_y,
        "areal_density": c.areal_density,
        "scheduled_areal_density": c.scheduled_areal_density,
        "uncertainty": c.uncertainty,
        "uncertainty_y": c.uncertainty_y,
        "peaks_hz": list(c.peaks_hz),
        "matched": [m.as_dict() for m in c.matched],
        "unmatched_hz": list(c.unmatched_hz),
        "hum_hz": list(c.hum_hz),
        "residual": c.residual,
        "residual_cents": c.residual_cents,
        "loss_factors": {label: value for label, value in c.loss_factors},
        "recording": c.recording,
        "notes": list(c.notes),
    }


def format_uncertainty(calibration: Calibration) -> str:
    """The fitted value's standard error as a table shows it.

    "±1.2 %"; "±1.2 % / ±3.4 %" (``tension`` / ``tension_y``) when both tensions were
    fitted; "n/a (1 matched peak)" when it cannot be estimated (``uncertainty`` is None:
    no more matched peaks than fitted parameters), or "n/a" (a singular fit).
    """
    c = calibration
    if c.uncertainty is None:
        count = len(c.matched)
        if count <= FIT_PARAMETERS.get(c.fitted, 1):
            return f"n/a ({count} matched peak{'' if count == 1 else 's'})"
        return "n/a"
    text = f"±{100.0 * c.uncertainty:.1f} %"
    if c.uncertainty_y is not None:
        text += f" / ±{100.0 * c.uncertainty_y:.1f} %"
    return text


def apply_calibration(panel: Panel, calibration: Calibration) -> Panel:
    """The panel with its fitted tensions and areal density in place of the scheduled ones.

    Raises
    ------
    ValueError
        When the calibration belongs to another panel.
    """
    if calibration.panel != panel.panel:
        raise ValueError(
            f"calibration of panel {calibration.panel} cannot be applied to panel {panel.panel}")
    return dataclasses.replace(panel, tension_x=calibration.tension,
                               tension_y=calibration.tension_y,
                               areal_density=calibration.areal_density)
