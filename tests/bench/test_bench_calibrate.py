"""Timing of a tap-test calibration at a recorder's usual rate (48 kHz, 3 s), and of the
largest recordings the reader accepts (the bounds on time and memory a schedule can ask for)."""

from __future__ import annotations

import dataclasses
import time
import tracemalloc

import pytest

from auditor.calibrate import (
    MAX_CSV_LINES,
    MAX_SAMPLES,
    Recording,
    calibrate_panel,
    read_recording,
    synthesise_tap_test,
    write_wav,
)
from tests.test_calibrate import PANEL, ROOM_MODE_HZ, ideal_membrane


@pytest.mark.bench
def test_bench_calibrate_48k():
    modes_of = ideal_membrane()
    true = dataclasses.replace(PANEL, tension_x=340.0, tension_y=340.0)
    freqs = [m.frequency_hz for m in modes_of(true)[:8]]
    x = synthesise_tap_test(freqs + [ROOM_MODE_HZ], 0.02, sample_rate=48000, duration=3.0,
                            hum_hz=[100.0, 200.0])
    rec = Recording(samples=x, sample_rate=48000)
    calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)  # warm imports
    for fit, panel in (("tension", PANEL),
                       ("tension_ratio", PANEL)):
        start = time.perf_counter()
        cal = calibrate_panel(panel, rec, modes_of, line_frequency=50.0, fit=fit)
        elapsed = time.perf_counter() - start
        print(f"\n{fit}: {elapsed:.2f} s, tension {cal.tension:.1f} N/m "
              f"(true 340), residual {cal.residual:.3f} %")
        assert cal.tension == pytest.approx(340.0, rel=0.02)
        assert elapsed < 30.0


@pytest.mark.bench
def test_bench_largest_accepted_recordings(tmp_path):
    modes_of = ideal_membrane()
    true = dataclasses.replace(PANEL, tension_x=340.0, tension_y=340.0)
    freqs = [m.frequency_hz for m in modes_of(true)[:8]]
    rate = 48000
    # a one-column CSV of the most lines accepted (the header is one of them)
    x = synthesise_tap_test(freqs, 0.02, sample_rate=rate, duration=(MAX_CSV_LINES - 1) / rate)
    csv_path = tmp_path / "longest.csv"
    csv_path.write_text(f"signal (fs={rate})\n" + "\n".join(f"{v:.7f}" for v in x))
    # a 16-bit WAV of the most samples accepted
    wav_path = write_wav(tmp_path / "longest.wav", synthesise_tap_test(
        freqs, 0.02, sample_rate=rate, duration=MAX_SAMPLES / rate), rate, bits=16)
    for path in (csv_path, wav_path):
        start = time.perf_counter()
        rec = read_recording(path)
        read_s = time.perf_counter() - start
        cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)
        total_s = time.perf_counter() - start
        del rec
        tracemalloc.start()  # a second run for memory: tracing slows Python code down
        calibrate_panel(PANEL, read_recording(path), modes_of, line_frequency=50.0)
        peak_mb = tracemalloc.get_traced_memory()[1] / 1e6
        tracemalloc.stop()
        print(f"\n{path.name}: {path.stat().st_size / 1e6:.0f} MB, {len(cal.peaks_hz)} peaks; "
              f"read {read_s:.2f} s, read and calibrate {total_s:.2f} s, "
              f"peak Python memory {peak_mb:.0f} MB")
        assert cal.tension == pytest.approx(340.0, rel=0.02)
        assert total_s < 60.0 and peak_mb < 1000.0
