"""CSV and text recordings: a spectrum or a time series in columns of numbers.

Comma, semicolon, tab or space separated (``.csv``, also ``.txt``); lines starting ``#`` are
comments.

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

A file of more than ``MAX_CSV_LINES`` lines, a line over ``MAX_CSV_LINE_BYTES`` bytes or more
than ``MAX_CSV_COLUMNS`` columns is refused before it is parsed. A message says where the
problem is (line and column) but never quotes the file's text.
"""

from __future__ import annotations

import csv
import os
import re
import warnings
from pathlib import Path

import numpy as np

from auditor.calibrate.recording import (
    MAX_RECORDING_BYTES,
    MIN_SPECTRUM_POINTS,
    Recording,
    RecordingError,
    check_clipping,
    check_length,
    pick_channel,
)

__all__ = ["MAX_CSV_LINES", "MAX_CSV_LINE_BYTES", "MAX_CSV_COLUMNS", "read_csv"]

#: Most lines of a CSV recording (about 21 s of one column at 48 kHz).
MAX_CSV_LINES = 1_000_000
#: Longest line of a CSV recording  [byte].
MAX_CSV_LINE_BYTES = 4096
#: Most columns of a CSV recording (time or frequency, and the signals or levels).
MAX_CSV_COLUMNS = 16
#: A headerless first column stepping by less than this is time [s], else frequency [Hz].
_TIME_STEP_LIMIT = 0.005


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


def read_csv(path: Path, label: str, shown: str) -> Recording:
    """A CSV or text file as a checked ``Recording`` (a spectrum or a time series).

    ``label`` names the file in messages, ``shown`` is kept as ``Recording.source``. The
    file is read against ``MAX_RECORDING_BYTES`` and its lines counted and measured before
    any is parsed. Called by ``read_recording`` once the file's size, type and first bytes
    have been checked.
    """
    try:
        with path.open("rb") as handle:  # a read of n bytes reserves n: ask for the size
            size = os.fstat(handle.fileno()).st_size
            raw = handle.read(min(size, MAX_RECORDING_BYTES) + 1)
    except OSError as error:
        raise RecordingError.unreadable(label, error) from None
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
    samples, channel, channels, notes = pick_channel(columns, "signal column")
    check_length(samples, rate, label)
    if float(np.ptp(samples)) == 0.0:
        raise RecordingError(f"{label} is silent: every sample has the same value")
    check_clipping(samples, full_scale=None, label=label, sample_rate=rate)
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
