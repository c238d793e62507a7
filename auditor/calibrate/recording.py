"""Tap-test recordings: the record every reader makes, and the checks that make one usable.

A tap test strikes the installed panel lightly (a soft mallet or a fingertip) and records the
sound or vibration of its ring-down. ``auditor.calibrate.reader.read_recording`` turns such a
file into a ``Recording`` (``wav`` and ``delimited`` read the two kinds of file); the rest of
``auditor.calibrate`` turns a ``Recording`` into measured natural frequencies and loss factors,
and fits the panel's tension to them.

The checks here are those every reader applies to the signal it found (the full list of what
makes a file refused is in ``auditor.calibrate.reader``):

- too short: fewer than ``MIN_SAMPLES`` samples or shorter than ``MIN_DURATION_S``; a
  spectrum with fewer than ``MIN_SPECTRUM_POINTS`` points;
- all silent: no sample departs from the mean by more than one quantisation step;
- clipped: a run of ``CLIP_RUN_SAMPLES`` or more consecutive samples at full scale is an
  error, because a flattened waveform puts false peaks (harmonics and intermodulation) in the
  spectrum. Isolated samples touching full scale (no such run) are accepted with a note in
  ``Recording.notes``. Full scale is ±1 for WAV; for a CSV time series, which has no full
  scale, a run of equal samples at the largest magnitude counts as clipping.

A multichannel recording is *not* mixed (two microphones out of phase would cancel): the
channel with the most energy is used, and ``Recording.notes`` says which.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

__all__ = [
    "Recording",
    "RecordingError",
    "MIN_DURATION_S",
    "MIN_SAMPLES",
    "MIN_SPECTRUM_POINTS",
    "CLIP_RUN_SAMPLES",
    "MAX_RECORDING_BYTES",
]

#: Shortest usable time series  [s]; a lightly damped low mode needs at least this long a
#: ring-down to show its half-power bandwidth.
MIN_DURATION_S = 0.25
#: Fewest usable samples in a time series.
MIN_SAMPLES = 1024
#: Fewest points in a spectrum.
MIN_SPECTRUM_POINTS = 32
#: Consecutive full-scale samples that make a recording clipped (an error).
CLIP_RUN_SAMPLES = 3
#: Largest recording file read  [byte]; larger ones are refused before reading.
MAX_RECORDING_BYTES = 200_000_000


class RecordingError(ValueError):
    """A tap-test recording cannot be used; the message names the file and says why."""

    @classmethod
    def unreadable(cls, label: str, error: OSError) -> RecordingError:
        """The file named by ``label`` could not be read: the system's reason, never a path."""
        return cls(f"{label} cannot be read: {error.strerror or 'input error'}")


@dataclass(frozen=True, eq=False)
class Recording:
    """A tap-test recording: either a time series or a spectrum.

    Parameters
    ----------
    source : str
        How the file it was read from is named in messages and outputs: the name given to
        ``read_recording`` (a path relative to the schedule's folder, say), by default the
        file name alone ("" when made in memory).
    samples : ndarray (n,) or None  [full scale = 1 for WAV; as written for CSV]
        One channel of samples.
    sample_rate : float or None  [Hz]
    frequencies_hz : ndarray (k,) or None  [Hz]
        Spectrum frequencies, ascending.
    levels_db : ndarray (k,) or None  [dB]
        Spectrum levels, power-like (a 3 dB fall is half power), any reference.
    channel : int or None
        0-based channel used from a multichannel file.
    channels : int
        Channels in the file.
    encoding : str
        What was read, in words ("24-bit PCM WAV", "CSV spectrum", ...).
    notes : tuple of str
        Things the user should know (channel chosen, a few samples at full scale).
    """

    source: str = ""
    samples: np.ndarray | None = None
    sample_rate: float | None = None
    frequencies_hz: np.ndarray | None = None
    levels_db: np.ndarray | None = None
    channel: int | None = None
    channels: int = 1
    encoding: str = ""
    notes: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        has_time = self.samples is not None
        has_spectrum = self.frequencies_hz is not None
        if has_time == has_spectrum:
            raise ValueError("a Recording holds either samples or a spectrum, not both or neither")
        if has_time:
            if self.sample_rate is None or not self.sample_rate > 0:
                raise ValueError("a time-series Recording needs a positive sample_rate")
            _freeze(self, "samples", np.asarray(self.samples, dtype=float).ravel())
        else:
            if self.levels_db is None:
                raise ValueError("a spectrum Recording needs levels_db")
            f = np.asarray(self.frequencies_hz, dtype=float).ravel()
            level = np.asarray(self.levels_db, dtype=float).ravel()
            if f.shape != level.shape:
                raise ValueError("frequencies_hz and levels_db differ in length")
            _freeze(self, "frequencies_hz", f)
            _freeze(self, "levels_db", level)

    @property
    def kind(self) -> str:
        """"time series" or "spectrum"."""
        return "time series" if self.samples is not None else "spectrum"

    @property
    def duration(self) -> float | None:
        """Length of a time series  [s]; None for a spectrum."""
        if self.samples is None or self.sample_rate is None:   # a rate comes with samples
            return None
        return len(self.samples) / float(self.sample_rate)

    @property
    def name(self) -> str:
        """The file name alone, for messages."""
        return os.path.basename(self.source) if self.source else "recording"


def _freeze(obj: Recording, name: str, array: np.ndarray) -> None:
    array = np.array(array, dtype=float)
    array.setflags(write=False)
    object.__setattr__(obj, name, array)


# --------------------------------------------------------------------------------------------
# Checks shared by the readers
# --------------------------------------------------------------------------------------------

def pick_channel(samples: np.ndarray,
                 word: str) -> tuple[np.ndarray, int | None, int, tuple[str, ...]]:
    """The channel with the most energy (mean square about its mean), and a note saying so.

    The energy is computed one channel at a time, so no float copy of the whole file is made.
    """
    if samples.ndim == 1:
        return samples, None, 1, ()
    channels = samples.shape[1]
    if channels == 1:
        return samples[:, 0], None, 1, ()
    energy = np.array([np.var(samples[:, c], dtype=np.float64) for c in range(channels)])
    best = int(np.argmax(energy))
    note = (f"{channels} {word}s; {word} {best + 1} used (it has the most energy; "
            f"channels are not mixed, so out-of-phase channels cannot cancel)")
    return samples[:, best].copy(), best, channels, (note,)


def check_length(samples: np.ndarray, sample_rate: float, label: str) -> None:
    """Raise unless a time series has ``MIN_SAMPLES`` samples and lasts ``MIN_DURATION_S``."""
    n = len(samples)
    duration = n / sample_rate
    if n < MIN_SAMPLES or duration < MIN_DURATION_S:
        raise RecordingError(
            f"{label} is too short: {n} samples ({duration:.3g} s at {sample_rate:g} Hz); "
            f"a tap test needs at least {MIN_SAMPLES} samples and {MIN_DURATION_S:g} s "
            "of ring-down")


def check_silence(samples: np.ndarray, step: float, label: str) -> None:
    """Raise when no sample departs from the mean by more than ``step`` (one quantum)."""
    swing = float(np.max(np.abs(samples - np.mean(samples))))
    if swing <= step:
        raise RecordingError(
            f"{label} is silent: no sample departs from the mean by more than one "
            "quantisation step; check the microphone and the input gain")


def _runs(mask: np.ndarray) -> np.ndarray:
    """Lengths of the runs of True in a boolean array."""
    if not mask.any():
        return np.zeros(0, dtype=int)
    padded = np.concatenate([[0], mask.astype(np.int8), [0]])
    edges = np.flatnonzero(np.diff(padded))
    return edges[1::2] - edges[0::2]


def check_clipping(samples: np.ndarray, full_scale: float | None, label: str,
                   sample_rate: float) -> tuple[str, ...]:
    """Raise on a run of full-scale samples; return a note for isolated touches.

    ``full_scale`` None means unknown (CSV): the largest magnitude is taken as the rail and
    only runs of equal values there count.
    """
    magnitude = np.abs(samples)
    if full_scale is None:
        peak = float(magnitude.max())
        at_rail = magnitude >= peak * (1.0 - 1e-12)
    else:
        at_rail = magnitude >= full_scale
    runs = _runs(at_rail)
    if runs.size == 0:
        return ()
    longest = int(runs.max())
    if longest >= CLIP_RUN_SAMPLES:
        clipped = int(runs.sum())
        raise RecordingError(
            f"{label} is clipped: {clipped} samples ({1000 * clipped / sample_rate:.3g} ms in "
            f"total, longest run {longest} samples) sit at full scale; clipping puts false "
            "peaks in the spectrum; record again with less input gain or a softer tap")
    if full_scale is None:
        return ()  # isolated samples at the largest magnitude are just the peak
    return (f"{int(runs.sum())} isolated samples touch full scale (no run of "
            f"{CLIP_RUN_SAMPLES} or more); accepted, but lower the gain next time",)
