"""Tap-test recordings: reading them, checking them, and making invented ones.

A tap test strikes the installed panel lightly (a soft mallet or a fingertip) and records the
sound or vibration of its ring-down. ``read_recording`` turns such a file into a
``Recording``; ``auditor.calibrate`` turns a ``Recording`` into measured natural frequencies
and loss factors, and fits the panel's tension to them.

Files read
----------
WAV
    Integer PCM of any depth scipy reads (8, 16, 24, 32 bit) and IEEE float (32, 64 bit),
    mono or multichannel. Integer samples are scaled so that full scale is ±1. A
    multichannel file is *not* mixed (two microphones out of phase would cancel): the channel
    with the most energy (largest mean square after removing its mean) is used, and
    ``Recording.notes`` says which.
CSV (also ``.txt``; comma, semicolon, tab or space separated; lines starting ``#`` are
comments)
    Spectrum
        Two columns, frequency [Hz] and level. Recognised by a header whose first column
        names a frequency ("Frequency (Hz)", "freq", "Hz"), or, with no header, by a first
        column that increases with a step of 0.005 or more. The level is in dB when its
        header says "dB" (and always when there is no header); "power"/"PSD" in the header
        means a power-like quantity (10·log10); anything else is a magnitude (20·log10).
    Time series, two or more columns
        Time [s] and one or more signals. Recognised by a header whose first column names
        time ("Time (s)", "t", "sec"), or, with no header, by a first column that increases
        with a step under 0.005 (a sample rate over 200 Hz). The time step must be even;
        the sample rate is its reciprocal. With several signal columns the one with most
        energy is used.
    Time series, one column
        The samples alone, with the sample rate in the header or a comment line:
        ``signal (fs=48000)``, ``# sample rate: 48 kHz`` or ``fs = 44100 Hz``.

Checks (each failure raises ``RecordingError`` naming the file and the problem)
-------------------------------------------------------------------------------
A message names the file (by the name the caller gives, by default its file name alone) and
says what is wrong and where (line and column of a CSV), but never quotes the file's text:
a recording path may point at a file that is not a recording at all.

- missing, unreadable or empty file; a file that is neither WAV nor numeric CSV;
- too large: over ``MAX_RECORDING_BYTES`` bytes (refused before any of it is read); a CSV
  of more than ``MAX_CSV_LINES`` lines, a line over ``MAX_CSV_LINE_BYTES`` bytes or more
  than ``MAX_CSV_COLUMNS`` columns (refused before it is parsed); a time series of more
  than ``MAX_SAMPLES`` samples (refused before it is converted or analysed). A tap's
  ring-down lasts seconds; these bound the memory and time a file can take;
- not a regular file (a device or a pipe, which could block or never end);
- too short: fewer than ``MIN_SAMPLES`` samples or shorter than ``MIN_DURATION_S``; a
  spectrum with fewer than ``MIN_SPECTRUM_POINTS`` points;
- all silent: no sample departs from the mean by more than one quantisation step;
- clipped: a run of ``CLIP_RUN_SAMPLES`` or more consecutive samples at full scale is an
  error, because a flattened waveform puts false peaks (harmonics and intermodulation) in the
  spectrum. Isolated samples touching full scale (no such run) are accepted with a note in
  ``Recording.notes``. Full scale is ±1 for WAV; for a CSV time series, which has no full
  scale, a run of equal samples at the largest magnitude counts as clipping.
"""

from __future__ import annotations

import csv
import os
import re
import stat
import struct
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Literal, Sequence

import numpy as np

from auditor.atomic import write_atomic

__all__ = [
    "Recording",
    "RecordingError",
    "read_recording",
    "synthesise_tap_test",
    "write_wav",
    "MIN_DURATION_S",
    "MIN_SAMPLES",
    "MIN_SPECTRUM_POINTS",
    "CLIP_RUN_SAMPLES",
    "MAX_RECORDING_BYTES",
    "MAX_SAMPLES",
    "MAX_CSV_LINES",
    "MAX_CSV_LINE_BYTES",
    "MAX_CSV_COLUMNS",
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
#: Most samples (per channel) of a time series: 2**22, about 87 s at 48 kHz.
MAX_SAMPLES = 2**22
#: Most lines of a CSV recording (about 21 s of one column at 48 kHz).
MAX_CSV_LINES = 1_000_000
#: Longest line of a CSV recording  [byte].
MAX_CSV_LINE_BYTES = 4096
#: Most columns of a CSV recording (time or frequency, and the signals or levels).
MAX_CSV_COLUMNS = 16
#: A headerless first column stepping by less than this is time [s], else frequency [Hz].
_TIME_STEP_LIMIT = 0.005

WavBits = Literal[16, 24, 32, "float", "float64"]


class RecordingError(ValueError):
    """A tap-test recording cannot be used; the message names the file and says why."""


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
        if self.samples is None:
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
# Reading
# --------------------------------------------------------------------------------------------

def read_recording(path: str | os.PathLike, *, name: str | None = None) -> Recording:
    """Read a tap-test recording (WAV or CSV) and check that it is usable.

    Parameters
    ----------
    path : str or path-like
        A ``.wav`` file, or a ``.csv``/``.txt`` file holding a spectrum or a time series (the
        module docstring gives the conventions). Other names are recognised by content. The
        path is read as given: confining it to a folder is the caller's job (see
        ``auditor.calibrate.calibrate_schedule``).
    name : str or None
        How to name the file in messages and in ``Recording.source``; by default its file
        name alone, so that no folder of the machine shows in any output.

    Returns
    -------
    Recording

    Raises
    ------
    RecordingError
        With a message naming the file: missing, not a regular file, too large, empty, not
        audio, too short, silent or clipped. The message never quotes the file's content.
    """
    path = Path(path)
    shown = name if name is not None else path.name
    label = f"tap-test recording '{shown}'"
    try:
        info = path.stat()
    except FileNotFoundError:
        raise RecordingError(f"{label} not found") from None
    except (OSError, ValueError) as error:
        reason = error.strerror if isinstance(error, OSError) and error.strerror else "bad path"
        raise RecordingError(f"{label} cannot be read: {reason}") from None
    if stat.S_ISDIR(info.st_mode):
        raise RecordingError(f"{label} is a folder, not a recording file")
    if not stat.S_ISREG(info.st_mode):
        raise RecordingError(f"{label} is not a regular file (a device, pipe or socket)")
    if info.st_size > MAX_RECORDING_BYTES:
        raise RecordingError(
            f"{label} is {info.st_size / 1e6:.0f} MB; refused (the limit is "
            f"{MAX_RECORDING_BYTES / 1e6:.0f} MB): trim it to the tap and its ring-down")
    try:
        with path.open("rb") as handle:
            head = handle.read(4096)
    except OSError as error:
        raise RecordingError(f"{label} cannot be read: {error.strerror or 'input error'}") \
            from None
    if not head:
        raise RecordingError(f"{label} is empty (0 bytes)")

    suffix = path.suffix.lower()
    if head[:4] in (b"RIFF", b"RIFX", b"RF64"):
        return _read_wav(path, label, shown)
    if suffix in (".wav", ".wave"):
        raise RecordingError(
            f"{label} is not a WAV file (it does not start with a RIFF header); "
            "export the recording as PCM or float WAV, or as CSV")
    if b"\x00" in head or not _looks_like_text(head):
        raise RecordingError(
            f"{label} is not an audio recording this reader understands "
            "(expected a WAV file or a CSV spectrum or time series)")
    return _read_csv(path, label, shown)


def _looks_like_text(head: bytes) -> bool:
    try:
        head.decode("utf-8")
        return True
    except UnicodeDecodeError as error:
        # a multi-byte character cut at the end of the 4096-byte sample is still text
        if error.start >= len(head) - 3:
            return True
    try:
        text = head.decode("latin-1")
    except UnicodeDecodeError:  # pragma: no cover - latin-1 decodes everything
        return False
    printable = sum(ch.isprintable() or ch in "\r\n\t" for ch in text)
    return printable >= 0.95 * len(text)


def _wav_format(path: Path) -> tuple[int | None, int | None]:
    """(format tag, bits per sample) from the 'fmt ' chunk, or (None, None)."""
    try:
        with path.open("rb") as handle:
            riff = handle.read(12)
            endian = ">" if riff[:4] == b"RIFX" else "<"
            for _ in range(64):
                chunk = handle.read(8)
                if len(chunk) < 8:
                    break
                name, size = chunk[:4], struct.unpack(endian + "I", chunk[4:])[0]
                if name == b"fmt ":
                    body = handle.read(min(size, 40))
                    tag = struct.unpack(endian + "H", body[0:2])[0]
                    bits = struct.unpack(endian + "H", body[14:16])[0]
                    if tag == 0xFFFE and len(body) >= 26:  # WAVE_FORMAT_EXTENSIBLE
                        tag = struct.unpack(endian + "H", body[24:26])[0]
                    return tag, bits
                handle.seek(size + (size & 1), 1)
    except (OSError, struct.error):
        pass
    return None, None


def _read_wav(path: Path, label: str, shown: str) -> Recording:
    from scipy.io import wavfile

    tag, bits = _wav_format(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", wavfile.WavFileWarning)
        try:
            rate, data = wavfile.read(path)
        except OSError as error:
            raise RecordingError(
                f"{label} cannot be read: {error.strerror or 'input error'}") from None
        except Exception:  # noqa: BLE001 - any failure of the parser on an untrusted file
            # scipy's own message can quote bytes of the file (its form type): described here
            layout = (f" (format code {tag}, {bits} bits per sample)"
                      if tag is not None else "")
            if tag is not None and tag not in (1, 3):
                raise RecordingError(
                    f"{label} uses a WAV encoding this reader does not support{layout}; "
                    "save it as PCM (16, 24 or 32 bit) or float WAV") from None
            raise RecordingError(
                f"{label} is not a readable WAV file{layout}: its header or data is damaged, "
                "cut short or of a layout this reader does not support; save it again as "
                "PCM (16, 24 or 32 bit) or float WAV") from None

    data = np.asarray(data)
    if data.size == 0:
        raise RecordingError(f"{label} is empty (the WAV file holds no samples)")
    if not rate > 0:
        raise RecordingError(f"{label} gives a sample rate of {rate} Hz in its header")
    if data.shape[0] > MAX_SAMPLES:
        raise RecordingError(
            f"{label} is too long: {data.shape[0]} samples ({data.shape[0] / rate:.0f} s); "
            f"the limit is {MAX_SAMPLES} samples: trim it to the tap and its ring-down")

    # one channel is chosen before any conversion, so memory stays that of the file
    raw, channel, channels, notes = _pick_channel(data, "channel")
    if raw.dtype.kind == "f":
        samples = raw.astype(float)
        step = np.finfo(raw.dtype).eps
        encoding = f"{raw.dtype.itemsize * 8}-bit float WAV"
    elif raw.dtype.kind == "u":  # 8-bit and lower are unsigned, offset by half range
        half = 2.0 ** (raw.dtype.itemsize * 8 - 1)
        samples = (raw.astype(float) - half) / half
        bits = bits or raw.dtype.itemsize * 8
        step = 2.0 ** (1 - bits)
        encoding = f"{bits}-bit PCM WAV"
    else:  # left-justified signed integers: divide by the container's half range
        half = 2.0 ** (raw.dtype.itemsize * 8 - 1)
        samples = raw.astype(float) / half
        bits = bits or raw.dtype.itemsize * 8
        step = 2.0 ** (1 - bits)
        encoding = f"{bits}-bit PCM WAV"
    if not np.all(np.isfinite(samples)):
        raise RecordingError(f"{label} contains samples that are not numbers (NaN or infinity)")

    _check_length(samples, float(rate), label)
    _check_silence(samples, step, label)
    notes += _check_clipping(samples, full_scale=1.0 - 2.0 * step, label=label,
                             sample_rate=float(rate))
    return Recording(source=shown, samples=samples, sample_rate=float(rate),
                     channel=channel, channels=channels, encoding=encoding, notes=notes)


def _pick_channel(samples: np.ndarray,
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


def _check_length(samples: np.ndarray, sample_rate: float, label: str) -> None:
    n = len(samples)
    duration = n / sample_rate
    if n < MIN_SAMPLES or duration < MIN_DURATION_S:
        raise RecordingError(
            f"{label} is too short: {n} samples ({duration:.3g} s at {sample_rate:g} Hz); "
            f"a tap test needs at least {MIN_SAMPLES} samples and {MIN_DURATION_S:g} s "
            "of ring-down")


def _check_silence(samples: np.ndarray, step: float, label: str) -> None:
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


def _check_clipping(samples: np.ndarray, full_scale: float | None, label: str,
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


# --------------------------------------------------------------------------------------------
# CSV
# --------------------------------------------------------------------------------------------

_FS_PATTERN = re.compile(
    r"(?:\bfs|sample[\s_-]*rate|sampling[\s_-]*(?:rate|frequency)|\brate)\s*[=:]?\s*"
    r"([0-9]+(?:[.,][0-9]+)?)\s*(k?hz)?", re.IGNORECASE)


def _sample_rate_in(text: str) -> float | None:
    match = _FS_PATTERN.search(text)
    if not match:
        return None
    value = float(match.group(1).replace(",", "."))
    if match.group(2) and match.group(2).lower() == "khz":
        value *= 1000.0
    return value if value > 0 else None


def _split(line: str, delimiter: str | None) -> list[str]:
    if delimiter is None:
        return line.split()
    return [cell.strip() for cell in next(csv.reader([line], delimiter=delimiter))]


def _to_number(cell: str, decimal_comma: bool) -> float:
    text = cell.strip().strip('"')
    if decimal_comma:
        text = text.replace(",", ".")
    return float(text)


def _check_csv_size(raw: bytes, label: str) -> None:
    """Refuse a CSV of too many lines, or with a line too long, before any of it is parsed."""
    lines = raw.count(b"\n") + (0 if raw.endswith(b"\n") else 1)
    if lines > MAX_CSV_LINES:
        raise RecordingError(
            f"{label} has {lines} lines; refused (the limit is {MAX_CSV_LINES}): trim it to "
            "the tap and its ring-down, or export it as WAV")
    if len(raw) <= MAX_CSV_LINE_BYTES:
        return
    ends = np.flatnonzero(np.frombuffer(raw, dtype=np.uint8) == ord("\n"))
    lengths = np.diff(np.concatenate([[-1], ends, [len(raw)]])) - 1
    too_long = np.flatnonzero(lengths > MAX_CSV_LINE_BYTES)
    if too_long.size:
        raise RecordingError(
            f"{label}, line {int(too_long[0]) + 1}: longer than {MAX_CSV_LINE_BYTES} bytes; "
            "a recording CSV has a few numbers a line")


def _lines(text: str):
    """The lines of a text without their line ends, one at a time (no copy of the whole)."""
    start, size = 0, len(text)
    while start < size:
        end = text.find("\n", start)
        if end < 0:
            end = size
        yield text[start:end]
        start = end + 1


def _csv_rows(text: str, skip: int, delimiter: str | None, decimal_comma: bool, width: int,
              label: str) -> np.ndarray:
    """The numbers below the header: ``numpy.loadtxt``, or line by line to say where it fails.

    A failure is reported by line and column only; the cell's text is not quoted.
    """
    body = text.replace(",", ".") if decimal_comma else text
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return np.loadtxt(_lines(body), dtype=float, delimiter=delimiter,
                              comments="#", skiprows=skip, usecols=range(width), ndmin=2,
                              quotechar='"')
    except (ValueError, IndexError):
        pass  # found again below, with its line and column
    rows: list[list[float]] = []
    for number, line in enumerate(_lines(text), start=1):
        line = line.strip()
        if number <= skip or not line or line.startswith("#"):
            continue
        cells = _split(line, delimiter)
        while cells and cells[-1] == "":
            cells.pop()
        if len(cells) < width:
            raise RecordingError(
                f"{label}, line {number}: expected {width} columns, found {len(cells)}")
        row: list[float] = []
        for column, cell in enumerate(cells[:width], start=1):
            try:
                row.append(_to_number(cell, decimal_comma))
            except ValueError:
                raise RecordingError(
                    f"{label}, line {number}, column {column}: not a number; a recording CSV "
                    "holds numbers only, below an optional header line") from None
        rows.append(row)
    return np.asarray(rows, dtype=float).reshape(-1, width)


def _read_csv(path: Path, label: str, shown: str) -> Recording:
    try:
        with path.open("rb") as handle:  # a read of n bytes reserves n: ask for the size
            size = os.fstat(handle.fileno()).st_size
            raw = handle.read(min(size, MAX_RECORDING_BYTES) + 1)
    except OSError as error:
        raise RecordingError(
            f"{label} cannot be read: {error.strerror or 'input error'}") from None
    if len(raw) > MAX_RECORDING_BYTES:
        raise RecordingError(f"{label} is over {MAX_RECORDING_BYTES / 1e6:.0f} MB; refused")
    _check_csv_size(raw, label)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        text = raw.decode("latin-1")
    del raw
    comments: list[str] = []
    content: list[tuple[int, str]] = []  # the first two lines that are not comments
    for number, line in enumerate(_lines(text), start=1):
        line = line.strip()
        if line.startswith("#"):
            comments.append(line.lstrip("#").strip())
        elif line and len(content) < 2:
            content.append((number, line))
    if not content:
        raise RecordingError(f"{label} is empty (no data rows)")

    first = content[0][1]
    # a header line has letters that cannot be part of a number
    has_header = re.search(r"[A-DF-Za-df-z_(\[]", first) is not None
    if has_header and len(content) < 2:
        raise RecordingError(f"{label} has a header but no data rows")
    sample = content[1][1] if has_header else first
    delimiter: str | None
    if ";" in sample:
        delimiter = ";"
    elif "," in sample:
        delimiter = ","
    elif "\t" in sample:
        delimiter = "\t"
    else:
        delimiter = None
    decimal_comma = delimiter in (";", "\t", None)

    header: list[str] | None = None
    cells = _split(sample, delimiter)
    while cells and cells[-1] == "":
        cells.pop()
    width = len(cells)
    if has_header:
        header = _split(first, delimiter) if delimiter is None or delimiter in first else [first]
        if len(header) != width:  # e.g. "Time (s) Signal" split at its spaces
            header = [first] + [""] * (width - 1)
    if width == 0:
        raise RecordingError(f"{label}, line {content[1 if has_header else 0][0]}: no numbers")
    if width > MAX_CSV_COLUMNS:
        raise RecordingError(
            f"{label}, line {content[1 if has_header else 0][0]}: {width} columns; a recording "
            f"CSV has at most {MAX_CSV_COLUMNS} (time or frequency, then the signals or levels)")
    data = _csv_rows(text, content[0][0] if has_header else 0, delimiter, decimal_comma,
                     width, label)
    if not np.all(np.isfinite(data)):
        raise RecordingError(f"{label} contains values that are not numbers (NaN or infinity)")

    names = [h.strip().strip('"').lower() for h in header] if header else []
    if data.shape[1] == 1:
        rate = _sample_rate_in(" ".join(names + comments))
        if rate is None:
            raise RecordingError(
                f"{label} has a single column but no sample rate: give it in the header, "
                "e.g. 'signal (fs=48000)', or add a time column in seconds")
        return _csv_time_series(shown, label, data[:, 0:1], rate, "CSV time series (one column)")

    kind = _csv_kind(names, data[:, 0])
    if kind is None:
        raise RecordingError(
            f"{label}: cannot tell a spectrum from a time series; give a header such as "
            "'Frequency (Hz), Level (dB)' or 'Time (s), Signal'")
    if kind == "time":
        t = data[:, 0]
        steps = np.diff(t)
        if steps.size == 0 or not np.all(steps > 0):
            raise RecordingError(f"{label}: the time column must increase from row to row")
        step = float(np.median(steps))
        if np.max(np.abs(steps - step)) > 0.01 * step:
            raise RecordingError(
                f"{label}: the time column is not evenly spaced (steps from "
                f"{steps.min():.6g} to {steps.max():.6g} s); resample it evenly")
        return _csv_time_series(shown, label, data[:, 1:], 1.0 / step, "CSV time series")
    return _csv_spectrum(shown, label, data, names)


def _csv_kind(names: list[str], first: np.ndarray) -> str | None:
    if names:
        head = names[0]
        if re.search(r"freq|hz\b|\(hz\)|\[hz\]", head):
            return "spectrum"
        if re.search(r"time|\bsec|\(s\)|\[s\]|^t$", head):
            return "time"
    steps = np.diff(first)
    if steps.size and np.all(steps > 0):
        return "time" if float(np.median(steps)) < _TIME_STEP_LIMIT else "spectrum"
    return None


def _csv_time_series(shown: str, label: str, columns: np.ndarray, rate: float,
                     encoding: str) -> Recording:
    samples, channel, channels, notes = _pick_channel(columns, "signal column")
    _check_length(samples, rate, label)
    if float(np.ptp(samples)) == 0.0:
        raise RecordingError(f"{label} is silent: every sample has the same value")
    _check_clipping(samples, full_scale=None, label=label, sample_rate=rate)
    return Recording(source=shown, samples=samples, sample_rate=rate, channel=channel,
                     channels=channels, encoding=encoding, notes=notes)


def _csv_spectrum(shown: str, label: str, data: np.ndarray, names: list[str]) -> Recording:
    frequencies, values = data[:, 0], data[:, 1]
    notes: tuple[str, ...] = ()
    if data.shape[1] > 2:
        notes = (f"{data.shape[1] - 1} level columns; the first is used",)
    order = np.argsort(frequencies)
    frequencies, values = frequencies[order], values[order]
    if np.any(np.diff(frequencies) <= 0):
        raise RecordingError(f"{label}: the frequency column repeats a value")
    if len(frequencies) < MIN_SPECTRUM_POINTS:
        raise RecordingError(
            f"{label} is too short: a spectrum of {len(frequencies)} points; at least "
            f"{MIN_SPECTRUM_POINTS} are needed to find peaks and their bandwidths")
    level_name = names[1] if len(names) > 1 else ""
    if not names or "db" in level_name:
        levels = values
        encoding = "CSV spectrum (dB)"
    else:
        if np.any(values < 0):
            raise RecordingError(
                f"{label}: the level column (column 2) has negative values but its header "
                "does not say dB; name it e.g. 'Level (dB)'")
        floor = max(float(values.max()) * 1e-12, np.finfo(float).tiny)
        power_like = re.search(r"power|psd|\^2|²", level_name) is not None
        levels = (10.0 if power_like else 20.0) * np.log10(np.maximum(values, floor))
        encoding = "CSV spectrum (power)" if power_like else "CSV spectrum (magnitude)"
    if float(np.ptp(levels)) == 0.0:
        raise RecordingError(f"{label} is silent: the spectrum is flat")
    return Recording(source=shown, frequencies_hz=frequencies, levels_db=levels,
                     encoding=encoding, notes=notes)


# --------------------------------------------------------------------------------------------
# Making recordings (tests and demo data)
# --------------------------------------------------------------------------------------------

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


def write_wav(path: str | os.PathLike, samples: np.ndarray, sample_rate: int,
              bits: WavBits = 16) -> Path:
    """Write samples (full scale ±1) as a WAV file, atomically (temporary file, then rename).

    Parameters
    ----------
    path : str or path-like
    samples : ndarray (n,) or (n, channels)  [full scale = 1]
        Integer formats need every sample within [−1, 1]; clip beforehand to make a clipped
        file on purpose.
    sample_rate : int  [Hz]
    bits : {16, 24, 32, "float", "float64"}
        Integer PCM depth, or IEEE float of 32 ("float") or 64 bits.

    Returns
    -------
    Path
    """
    from scipy.io import wavfile

    path = Path(path)
    data = np.asarray(samples, dtype=float)
    if data.ndim not in (1, 2):
        raise ValueError("samples must be (n,) or (n, channels)")
    rate = int(round(sample_rate))
    if bits in ("float", "float64"):
        payload: np.ndarray | bytes = data.astype(np.float32 if bits == "float" else np.float64)
    elif bits in (16, 24, 32):
        if np.any(np.abs(data) > 1.0):
            raise ValueError("integer WAV samples must lie within full scale [-1, 1]")
        half = 2 ** (int(bits) - 1)
        ints = np.clip(np.round(data * half), -half, half - 1).astype(np.int64)
        payload = ints.astype(np.int16 if bits == 16 else np.int32) if bits != 24 else ints
    else:
        raise ValueError("bits must be 16, 24, 32, 'float' or 'float64'")

    def write(handle) -> None:
        if bits == 24:
            handle.write(_pcm24_bytes(np.asarray(payload), rate))
        else:
            wavfile.write(handle, rate, payload)

    return write_atomic(path, write)


def _pcm24_bytes(ints: np.ndarray, rate: int) -> bytes:
    """A whole 24-bit PCM WAV file: header, then each sample's three low bytes, little-endian."""
    channels = 1 if ints.ndim == 1 else ints.shape[1]
    frames = ints.reshape(-1).astype("<i4").view(np.uint8).reshape(-1, 4)[:, :3].tobytes()
    block = 3 * channels
    fmt = struct.pack("<HHIIHH", 1, channels, rate, rate * block, block, 24)
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
    body += b"data" + struct.pack("<I", len(frames)) + frames
    if len(frames) & 1:
        body += b"\x00"
    return b"RIFF" + struct.pack("<I", len(body)) + body
