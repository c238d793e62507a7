"""Reading, checking and synthesising tap-test recordings (auditor.calibrate: recording,
reader, wav, delimited, synthesis)."""

from __future__ import annotations

import os
import struct
import wave

import numpy as np
import pytest
from scipy.signal import hilbert

from auditor.calibrate import (
    CLIP_RUN_SAMPLES,
    MAX_RECORDING_BYTES,
    MIN_DURATION_S,
    MIN_SAMPLES,
    Recording,
    RecordingError,
    delimited,
    read_recording,
    synthesise_tap_test,
    wav,
    write_wav,
)

RATE = 8000


def _ring(duration=0.6, seed=0):
    return synthesise_tap_test([180.0, 430.0], [0.02, 0.03], sample_rate=RATE,
                               duration=duration, noise=0.001, seed=seed)


# ------------------------------------------------------------------ synthesiser

def test_synthesised_decay_rate_is_pi_f_eta():
    # A lightly damped mode decays as exp(-π f η t), so that its half-power bandwidth is η f
    # (common practice, e.g. Beranek & Vér, Noise and Vibration Control Engineering, 2006).
    # The envelope is measured independently with the analytic signal (scipy.signal.hilbert).
    f, eta = 250.0, 0.02
    x = synthesise_tap_test([f], [eta], sample_rate=RATE, duration=1.0, noise=0.0,
                            tap_time=0.05)
    envelope = np.abs(hilbert(x))
    t = np.arange(x.size) / RATE
    i1, i2 = np.searchsorted(t, [0.15, 0.35])
    measured = np.log(envelope[i1] / envelope[i2]) / (t[i2] - t[i1])
    assert measured == pytest.approx(np.pi * f * eta, rel=0.02)


def test_synthesised_is_below_full_scale_quiet_before_the_tap_and_reproducible():
    x = synthesise_tap_test([300.0], [0.03], sample_rate=RATE, duration=0.5, noise=0.0,
                            peak=0.5, tap_time=0.1)
    assert np.max(np.abs(x)) == pytest.approx(0.5)
    assert np.all(x[: int(0.1 * RATE)] == 0.0)
    a = synthesise_tap_test([300.0], [0.03], sample_rate=RATE, duration=0.5, seed=3)
    b = synthesise_tap_test([300.0], [0.03], sample_rate=RATE, duration=0.5, seed=3)
    assert np.array_equal(a, b)


def test_synthesised_hum_is_a_steady_line():
    # a steady tone at 100 Hz (twice a 50 Hz line frequency: common practice) dominates the
    # spectrum before the tap
    x = synthesise_tap_test([300.0], [0.03], sample_rate=RATE, duration=1.0, noise=0.0,
                            hum_hz=100.0, hum_level=0.1, tap_time=0.5)
    before = x[: int(0.5 * RATE)]
    spectrum = np.abs(np.fft.rfft(before))
    freqs = np.fft.rfftfreq(before.size, 1 / RATE)
    assert freqs[np.argmax(spectrum)] == pytest.approx(100.0, abs=2.0)


def test_synthesiser_rejects_nonsense():
    with pytest.raises(ValueError, match="half the sample rate"):
        synthesise_tap_test([5000.0], [0.02], sample_rate=RATE)
    with pytest.raises(ValueError, match="positive"):
        synthesise_tap_test([100.0], [0.0], sample_rate=RATE)


# ------------------------------------------------------------------ WAV round trips

@pytest.mark.parametrize("bits, step", [(16, 2.0**-15), (24, 2.0**-23), (32, 2.0**-31),
                                        ("float", 1e-7), ("float64", 1e-15)])
def test_wav_round_trip_within_quantisation(tmp_path, bits, step):
    # quantisation of n-bit PCM: within one step of 2^-(n-1) of full scale (common practice);
    # float32 keeps ~7 significant digits (IEEE 754 single precision)
    x = _ring()
    path = write_wav(tmp_path / f"tap_{bits}.wav", x, RATE, bits=bits)
    rec = read_recording(path)
    assert rec.kind == "time series"
    assert rec.sample_rate == RATE
    assert rec.samples.shape == x.shape
    assert np.max(np.abs(rec.samples - x)) <= step
    expected = {16: "16-bit PCM", 24: "24-bit PCM", 32: "32-bit PCM", "float": "32-bit float",
                "float64": "64-bit float"}[bits]
    assert rec.encoding.startswith(expected)


def test_24_bit_header_read_by_the_standard_library(tmp_path):
    # Python's own wave module (an independent reader) sees 3-byte samples at our rate
    x = np.column_stack([_ring(), 0.5 * _ring(seed=1)])
    path = write_wav(tmp_path / "stereo24.wav", x, RATE, bits=24)
    with wave.open(str(path)) as handle:
        assert handle.getsampwidth() == 3
        assert handle.getnchannels() == 2
        assert handle.getframerate() == RATE
        assert handle.getnframes() == x.shape[0]
        raw = np.frombuffer(handle.readframes(4), dtype=np.uint8).reshape(-1, 3)
    first = int.from_bytes(bytes(raw[0]), "little", signed=True)
    assert first == int(np.clip(np.round(x[0, 0] * 2**23), -(2**23), 2**23 - 1))


def test_multichannel_uses_the_channel_with_most_energy(tmp_path):
    quiet, loud = 0.1 * _ring(seed=2), _ring(seed=3)
    path = write_wav(tmp_path / "two.wav", np.column_stack([quiet, loud]), RATE, bits=16)
    rec = read_recording(path)
    assert rec.channels == 2 and rec.channel == 1
    assert np.max(np.abs(rec.samples - loud)) <= 2.0**-15
    assert any("channel 2 used" in note for note in rec.notes)


def test_write_wav_refuses_samples_beyond_full_scale(tmp_path):
    with pytest.raises(ValueError, match="full scale"):
        write_wav(tmp_path / "over.wav", 3.0 * _ring(), RATE, bits=16)


# ------------------------------------------------------------------ errors

def test_missing_file(tmp_path):
    with pytest.raises(RecordingError, match="not found") as info:
        read_recording(tmp_path / "absent.wav")
    assert "absent.wav" in str(info.value)


def test_empty_file(tmp_path):
    path = tmp_path / "empty.wav"
    path.write_bytes(b"")
    with pytest.raises(RecordingError, match="empty") as info:
        read_recording(path)
    assert "empty.wav" in str(info.value)


def test_wav_with_no_samples_is_empty(tmp_path):
    path = write_wav(tmp_path / "nothing.wav", np.zeros(0), RATE, bits=16)
    with pytest.raises(RecordingError, match="empty"):
        read_recording(path)


def test_non_audio_files(tmp_path):
    wav = tmp_path / "photo.wav"
    wav.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)) * 8)
    with pytest.raises(RecordingError, match="not a WAV file") as info:
        read_recording(wav)
    assert "photo.wav" in str(info.value)
    other = tmp_path / "archive.dat"
    other.write_bytes(b"PK\x03\x04" + bytes(range(256)) * 8)
    with pytest.raises(RecordingError, match="not an audio recording"):
        read_recording(other)
    broken = tmp_path / "broken.wav"
    broken.write_bytes(b"RIFF\x10\x00\x00\x00WAVEjunk")
    with pytest.raises(RecordingError, match="WAV"):
        read_recording(broken)


def test_too_short_names_the_minimum(tmp_path):
    path = write_wav(tmp_path / "short.wav", _ring()[:800], RATE, bits=16)
    with pytest.raises(RecordingError, match="too short") as info:
        read_recording(path)
    message = str(info.value)
    assert str(MIN_SAMPLES) in message and f"{MIN_DURATION_S:g} s" in message
    # long enough in samples but shorter than 0.25 s at a high rate
    fast = write_wav(tmp_path / "fast.wav", synthesise_tap_test(
        [1000.0], [0.02], sample_rate=48000, duration=0.1), 48000, bits=16)
    with pytest.raises(RecordingError, match="too short"):
        read_recording(fast)


def test_clipped_recording_is_an_error_saying_how_much(tmp_path):
    clipped = np.clip(4.0 * _ring(), -1.0, 1.0)
    path = write_wav(tmp_path / "clipped.wav", clipped, RATE, bits=16)
    with pytest.raises(RecordingError, match="clipped") as info:
        read_recording(path)
    expected = int(np.sum(np.abs(clipped) >= 1.0))
    assert f"{expected} samples" in str(info.value)


def test_a_few_isolated_full_scale_samples_are_only_a_note(tmp_path):
    x = _ring()
    x[[1000, 2000]] = [1.0, -1.0]  # two isolated touches, no run of CLIP_RUN_SAMPLES
    path = write_wav(tmp_path / "touch.wav", x, RATE, bits=16)
    rec = read_recording(path)
    assert any("2 isolated samples" in note for note in rec.notes)
    x[3000:3000 + CLIP_RUN_SAMPLES] = 1.0
    path = write_wav(tmp_path / "run.wav", x, RATE, bits=16)
    with pytest.raises(RecordingError, match="clipped"):
        read_recording(path)


def test_silent_recording(tmp_path):
    path = write_wav(tmp_path / "silent.wav", np.zeros(RATE), RATE, bits=24)
    with pytest.raises(RecordingError, match="silent") as info:
        read_recording(path)
    assert "silent.wav" in str(info.value)


# ------------------------------------------------------------------ CSV

def _write(path, text):
    path.write_text(text, encoding="utf-8")
    return path


def test_csv_spectrum_in_db_with_header(tmp_path):
    f = np.linspace(10, 500, 200)
    level = -20 + 10 * np.exp(-((f - 120) / 5) ** 2)
    body = "\n".join(f"{a:.4f},{b:.4f}" for a, b in zip(f, level))
    rec = read_recording(_write(tmp_path / "spec.csv", "Frequency (Hz),Level (dB)\n" + body))
    assert rec.kind == "spectrum"
    assert np.allclose(rec.frequencies_hz, f, atol=1e-4)
    assert np.allclose(rec.levels_db, level, atol=1e-4)


def test_csv_spectrum_magnitude_becomes_20_log10(tmp_path):
    # level of a magnitude (amplitude) quantity: 20·log10 (ISO 80000-3 / common practice)
    f = np.linspace(10, 500, 64)
    magnitude = 1.0 + f / 100.0
    body = "\n".join(f"{a};{b}".replace(".", ",") for a, b in zip(f, magnitude))
    rec = read_recording(_write(tmp_path / "mag.csv", "freq;magnitude\n" + body))
    assert np.allclose(rec.levels_db, 20 * np.log10(magnitude), atol=1e-6)
    assert rec.encoding == "CSV spectrum (magnitude)"


def test_csv_spectrum_without_header_is_recognised_by_its_step(tmp_path):
    f = np.arange(0.0, 400.0, 0.5)
    body = "\n".join(f"{a}\t{-30 + np.sin(a / 7):.5f}" for a in f)
    rec = read_recording(_write(tmp_path / "plain.txt", body))
    assert rec.kind == "spectrum" and rec.frequencies_hz.size == f.size


def test_csv_time_series_two_columns(tmp_path):
    x = _ring(0.4)
    t = np.arange(x.size) / RATE
    body = "\n".join(f"{a:.8f},{b:.9f}" for a, b in zip(t, x))
    rec = read_recording(_write(tmp_path / "ts.csv", "# exported\nTime (s),Signal (Pa)\n" + body))
    assert rec.kind == "time series"
    assert rec.sample_rate == pytest.approx(RATE, rel=1e-6)
    assert np.max(np.abs(rec.samples - x)) < 1e-8


def test_csv_time_series_one_column_with_sample_rate_in_header(tmp_path):
    x = _ring(0.4)
    body = "\n".join(f"{b:.9f}" for b in x)
    rec = read_recording(_write(tmp_path / "one.csv", "signal (fs=8 kHz)\n" + body))
    assert rec.sample_rate == RATE and rec.samples.size == x.size
    with pytest.raises(RecordingError, match="sample rate"):
        read_recording(_write(tmp_path / "no_fs.csv", "signal\n" + body))


def test_csv_problems_are_named(tmp_path):
    x = _ring(0.4)
    t = np.arange(x.size) / RATE
    t[100:] += 0.5 / RATE  # a jump in the time step
    body = "\n".join(f"{a:.8f},{b:.9f}" for a, b in zip(t, x))
    with pytest.raises(RecordingError, match="not evenly spaced"):
        read_recording(_write(tmp_path / "uneven.csv", "time,signal\n" + body))
    with pytest.raises(RecordingError, match=r"line 3, column 1: not a number") as info:
        read_recording(_write(tmp_path / "bad.csv", "time,signal\n0,1\nabc,2\n"))
    assert "abc" not in str(info.value)  # where, never what: the cell is not quoted
    with pytest.raises(RecordingError, match="empty"):
        read_recording(_write(tmp_path / "comments.csv", "# nothing here\n\n"))
    flat = "\n".join("0.25" for _ in range(4000))
    with pytest.raises(RecordingError, match="silent"):
        read_recording(_write(tmp_path / "flat.csv", "signal (fs=8000)\n" + flat))
    square = np.where(np.sin(np.arange(4000) / 10.0) > 0, 1.0, -1.0)
    with pytest.raises(RecordingError, match="clipped"):
        read_recording(_write(tmp_path / "square.csv",
                              "signal (fs=8000)\n" + "\n".join(map(str, square))))
    with pytest.raises(RecordingError, match="too short"):
        read_recording(_write(tmp_path / "tiny.csv", "Frequency (Hz),dB\n1,2\n2,3\n"))


def test_recording_holds_one_form_only():
    with pytest.raises(ValueError):
        Recording(samples=np.zeros(10), sample_rate=8000.0,
                  frequencies_hz=np.zeros(10), levels_db=np.zeros(10))
    rec = Recording(samples=np.ones(2048), sample_rate=8000.0)
    assert rec.duration == pytest.approx(0.256)
    with pytest.raises(ValueError):
        rec.samples[0] = 2.0  # read-only


# ------------------------------------------------------------------ never quote, always bound

PASSWD_LIKE = ("root:x:0:0:root:/root:/bin/bash\n"
               "daemon:x:1:1:daemon:/usr/sbin:/usr/sbin/nologin\n"
               "secret-token-7f3a9c\n")


def _assert_quotes_nothing(message: str, text: str) -> None:
    for line in text.splitlines():
        for word in line.replace(":", " ").replace("/", " ").split():
            if len(word) >= 4:
                assert word not in message, (word, message)


def test_messages_say_where_not_what(tmp_path):
    # a text file that is no recording: the message names line and column, quotes nothing
    path = _write(tmp_path / "accounts.csv", PASSWD_LIKE)
    with pytest.raises(RecordingError, match=r"line \d+(, column \d+)?: ") as info:
        read_recording(path)
    _assert_quotes_nothing(str(info.value), PASSWD_LIKE)
    headerless = _write(tmp_path / "numbers.csv", "1,2\n3,secret-token-7f3a9c\n")
    with pytest.raises(RecordingError, match="line 2, column 2: not a number") as info:
        read_recording(headerless)
    assert "secret" not in str(info.value)
    # a level column whose header does not say dB: named by its position, not its text
    f = np.linspace(10, 500, 64)
    body = "\n".join(f"{a},{-1.0 - a / 100}" for a in f)
    with pytest.raises(RecordingError, match="column 2") as info:
        read_recording(_write(tmp_path / "neg.csv", "Frequency (Hz),Zanzibar level\n" + body))
    assert "zanzibar" not in str(info.value).lower()


def test_a_damaged_wav_is_described_not_quoted(tmp_path):
    # scipy's reader names a RIFF file's form type in its message ("RIFF form type is
    # b'QZXV'"); ours says what is wrong without any bytes of the file
    odd_form = tmp_path / "odd.wav"
    odd_form.write_bytes(b"RIFF" + struct.pack("<I", 12) + b"QZXV" + b"QZXV" * 3)
    # a data chunk with no fmt chunk before it, which scipy's parser does not expect
    no_format = tmp_path / "no_format.wav"
    no_format.write_bytes(b"RIFF" + struct.pack("<I", 20) + b"WAVE" + b"data"
                          + struct.pack("<I", 8) + b"QZXVQZXV")
    for path in (odd_form, no_format):
        with pytest.raises(RecordingError, match="not a readable WAV file") as info:
            read_recording(path)
        assert "QZXV" not in str(info.value) and "b'" not in str(info.value)


def test_messages_name_the_file_as_given_never_its_folder(tmp_path):
    path = write_wav(tmp_path / "silent.wav", np.zeros(RATE), RATE, bits=16)
    with pytest.raises(RecordingError) as info:
        read_recording(path)
    assert "'silent.wav'" in str(info.value) and str(tmp_path) not in str(info.value)
    with pytest.raises(RecordingError, match="'taps/silent.wav'"):
        read_recording(path, name="taps/silent.wav")
    rec = read_recording(write_wav(tmp_path / "ok.wav", _ring(), RATE), name="taps/ok.wav")
    assert rec.source == "taps/ok.wav"
    assert read_recording(tmp_path / "ok.wav").source == "ok.wav"


def test_a_file_over_the_size_limit_is_refused_before_reading(tmp_path):
    # a sparse file one byte over the limit: refused from its size alone, at once
    path = tmp_path / "huge.wav"
    with path.open("wb") as handle:
        handle.write(b"RIFF")
        handle.truncate(MAX_RECORDING_BYTES + 1)
    with pytest.raises(RecordingError, match="refused"):
        read_recording(path)


def test_csv_line_count_line_length_and_columns_are_bounded(tmp_path, monkeypatch):
    x = _ring(0.4)
    body = "\n".join(f"{b:.9f}" for b in x)
    path = _write(tmp_path / "long.csv", "signal (fs=8000)\n" + body)
    monkeypatch.setattr(delimited, "MAX_CSV_LINES", x.size)  # one line short of the file
    with pytest.raises(RecordingError, match=f"{x.size + 1} lines; refused"):
        read_recording(path)
    monkeypatch.setattr(delimited, "MAX_CSV_LINES", x.size + 1)
    assert read_recording(path).samples.size == x.size
    wide = _write(tmp_path / "wide.csv", "0," * 3000 + "1\n" + "1,2\n" * 10)
    with pytest.raises(RecordingError, match="line 1: longer than 4096 bytes"):
        read_recording(wide)
    many = _write(tmp_path / "many.csv", "\n".join(",".join(["1"] * 20) for _ in range(50)))
    with pytest.raises(RecordingError, match="20 columns"):
        read_recording(many)


def test_a_time_series_over_the_sample_limit_is_refused(tmp_path, monkeypatch):
    path = write_wav(tmp_path / "long.wav", _ring(0.6), RATE, bits=16)
    monkeypatch.setattr(wav, "MAX_SAMPLES", 4000)
    with pytest.raises(RecordingError, match="too long: 4800 samples"):
        read_recording(path)


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="named pipes are POSIX")
def test_a_pipe_is_not_opened(tmp_path):
    # opening a pipe with no writer would block forever; it is refused from its type
    pipe = tmp_path / "tap.wav"
    os.mkfifo(pipe)
    with pytest.raises(RecordingError, match="not a regular file"):
        read_recording(pipe)
    with pytest.raises(RecordingError, match="is a folder"):
        read_recording(tmp_path)
