"""Reading a tap-test recording: the one way in, bounded in memory and time.

``read_recording`` turns a file into a ``Recording`` (``auditor.calibrate.recording``). It
refuses what it can from the file's type and size before reading any of it, tells the kind of
file from its first bytes, and hands it to the reader of that kind: ``auditor.calibrate.wav``
(WAV, integer PCM or float) or ``auditor.calibrate.delimited`` (CSV or text: a spectrum or a
time series); those modules give the conventions.

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
- too short, all silent or clipped (``auditor.calibrate.recording`` says how each is judged).
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from auditor.calibrate.delimited import read_csv
from auditor.calibrate.recording import MAX_RECORDING_BYTES, Recording, RecordingError
from auditor.calibrate.wav import read_wav

__all__ = ["read_recording"]


def read_recording(path: str | os.PathLike, *, name: str | None = None) -> Recording:
    """Read a tap-test recording (WAV or CSV) and check that it is usable.

    Parameters
    ----------
    path : str or path-like
        A ``.wav`` file, or a ``.csv``/``.txt`` file holding a spectrum or a time series
        (``auditor.calibrate.wav`` and ``auditor.calibrate.delimited`` give the conventions).
        Other names are recognised by content. The path is read as given: confining it to a
        folder is the caller's job (see ``auditor.calibrate.calibrate_schedule``).
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
        raise RecordingError.unreadable(label, error) from None
    if not head:
        raise RecordingError(f"{label} is empty (0 bytes)")

    suffix = path.suffix.lower()
    if head[:4] in (b"RIFF", b"RIFX", b"RF64"):
        return read_wav(path, label, shown)
    if suffix in (".wav", ".wave"):
        raise RecordingError(
            f"{label} is not a WAV file (it does not start with a RIFF header); "
            "export the recording as PCM or float WAV, or as CSV")
    if b"\x00" in head or not _looks_like_text(head):
        raise RecordingError(
            f"{label} is not an audio recording this reader understands "
            "(expected a WAV file or a CSV spectrum or time series)")
    return read_csv(path, label, shown)


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
