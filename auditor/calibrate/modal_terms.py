"""Peak refinement: modal terms fitted to the complex spectrum of a ring-down.

Where modes overlap, half-power bandwidths read off the power spectrum are biased by the
neighbours' tails, so for a time series each peak is refined by fitting modal terms (the peak,
two neighbours each side, a smooth background) to the complex spectrum, the residues solved
linearly for each trial of frequencies and decay rates.

References
----------
Single-degree-of-freedom modal terms fitted to a measured frequency response (curve fitting
of rational fractions): common practice in modal testing, e.g. D. J. Ewins, *Modal Testing:
Theory, Practice and Application*, 2nd ed., 2000. Variable projection: G. H. Golub and
V. Pereyra, SIAM J. Numer. Anal. 10 (1973) 413–432.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Sequence

import numpy as np

from auditor.calibrate.peaks import Peak
from auditor.calibrate.spectrum import TapSpectrum

__all__ = ["refine_modal_fit"]


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
