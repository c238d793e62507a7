"""WAV files: reading a tap-test recording from one, and writing one (tests and demo data).

Integer PCM of any depth scipy reads (8, 16, 24, 32 bit) and IEEE float (32, 64 bit), mono or
multichannel. Integer samples are scaled so that full scale is ±1. A multichannel file is *not*
mixed: the channel with the most energy (largest mean square after removing its mean) is used,
and ``Recording.notes`` says which. A file of more than ``MAX_SAMPLES`` samples per channel is
refused before any sample is converted; the signal is then checked as every reader checks it
(``auditor.calibrate.recording``: too short, silent, clipped).
"""

from __future__ import annotations

import os
import struct
import warnings
from pathlib import Path
from typing import Literal

import numpy as np

from auditor.atomic import write_atomic
from auditor.calibrate.recording import (
    Recording,
    RecordingError,
    check_clipping,
    check_length,
    check_silence,
    pick_channel,
)

__all__ = ["MAX_SAMPLES", "read_wav", "write_wav"]

#: Most samples (per channel) of a time series: 2**22, about 87 s at 48 kHz.
MAX_SAMPLES = 2**22

WavBits = Literal[16, 24, 32, "float", "float64"]


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


def read_wav(path: Path, label: str, shown: str) -> Recording:
    """A WAV file as a checked ``Recording``.

    ``label`` names the file in messages ("tap-test recording 'taps/c01.wav'"), ``shown`` is
    kept as ``Recording.source``. Called by ``read_recording`` once the file's size, type and
    first bytes have been checked.
    """
    from scipy.io import wavfile

    tag, bits = _wav_format(path)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", wavfile.WavFileWarning)
        try:
            rate, data = wavfile.read(path)
        except OSError as error:
            raise RecordingError.unreadable(label, error) from None
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
    raw, channel, channels, notes = pick_channel(data, "channel")
    if raw.dtype.kind == "f":
        samples = raw.astype(float)
        step = np.finfo(raw.dtype).eps
        encoding = f"{raw.dtype.itemsize * 8}-bit float WAV"
    else:  # left-justified integers: divide by the container's half range
        half = 2.0 ** (raw.dtype.itemsize * 8 - 1)
        samples = raw.astype(float)  # a copy, so the arithmetic below may be in place
        if raw.dtype.kind == "u":  # 8-bit and lower are unsigned, offset by half range
            samples -= half
        samples /= half
        bits = bits or raw.dtype.itemsize * 8
        step = 2.0 ** (1 - bits)
        encoding = f"{bits}-bit PCM WAV"
    if not np.all(np.isfinite(samples)):
        raise RecordingError(f"{label} contains samples that are not numbers (NaN or infinity)")

    check_length(samples, float(rate), label)
    check_silence(samples, step, label)
    notes += check_clipping(samples, full_scale=1.0 - 2.0 * step, label=label,
                            sample_rate=float(rate))
    return Recording(source=shown, samples=samples, sample_rate=float(rate),
                     channel=channel, channels=channels, encoding=encoding, notes=notes)


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
