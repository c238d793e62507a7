"""Timing of a tap-test calibration at a recorder's usual rate (48 kHz, 3 s)."""

from __future__ import annotations

import dataclasses
import time

import pytest

from auditor.calibrate import calibrate_panel
from auditor.recording import Recording, synthesise_tap_test

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
