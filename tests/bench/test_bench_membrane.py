"""Throughput of the analytic rectangular-membrane spectrum (the resonance engine's hot path).

Rates are per core: CPU time of this process (numpy's sort and arithmetic here are
single-threaded), so other work on a shared machine does not distort them.

Run with ``python -m pytest tests/bench/test_bench_membrane.py -m bench -s``.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from auditor.physics.membrane import (
    rectangular_membrane_frequencies,
    rectangular_membrane_spectra,
)

PANELS = 20_000
FMAX_HZ = 500.0
TARGET_MODES_PER_SECOND = 5e6


def _random_panels(seed: int = 20240601):
    # Ranges typical of stretched-film and fabric ceilings (common practice): sides
    # 0.6–3 m, tensions 300–2000 N/m, areal density 0.15–0.5 kg/m².
    rng = np.random.default_rng(seed)
    return dict(
        tension_x=rng.uniform(300.0, 2000.0, PANELS),
        tension_y=rng.uniform(300.0, 2000.0, PANELS),
        areal_density=rng.uniform(0.15, 0.5, PANELS),
        width=rng.uniform(0.6, 3.0, PANELS),
        length=rng.uniform(0.6, 3.0, PANELS),
    )


@pytest.mark.bench
def test_rectangular_spectrum_throughput_per_panel():
    panels = _random_panels()
    rows = list(zip(*(panels[k].tolist() for k in
                      ("tension_x", "tension_y", "areal_density", "width", "length"))))
    rectangular_membrane_frequencies(*rows[0], FMAX_HZ)  # warm up
    total = 0
    start, start_cpu = time.perf_counter(), time.process_time()
    for tx, ty, rho, lx, ly in rows:
        frequency, _, _ = rectangular_membrane_frequencies(tx, ty, rho, lx, ly, FMAX_HZ)
        total += frequency.size
    elapsed, cpu = time.perf_counter() - start, time.process_time() - start_cpu
    rate = total / cpu
    print(f"\nper-panel calls: {PANELS} panels, {total:,} modes below {FMAX_HZ:g} Hz "
          f"in {cpu:.2f} s of CPU ({elapsed:.2f} s wall): {rate / 1e6:.1f} million modes/s "
          f"per core, {cpu / PANELS * 1e6:.0f} µs per panel")
    assert total > 1_000_000  # the set is large enough to measure throughput
    assert rate >= TARGET_MODES_PER_SECOND


@pytest.mark.bench
def test_rectangular_spectrum_throughput_batched():
    panels = _random_panels(seed=7)
    start, start_cpu = time.perf_counter(), time.process_time()
    spectra = rectangular_membrane_spectra(fmax=FMAX_HZ, **panels)
    elapsed, cpu = time.perf_counter() - start, time.process_time() - start_cpu
    total = int(spectra.offsets[-1])
    rate = total / cpu
    print(f"\nbatched: {len(spectra)} panels, {total:,} modes in {cpu:.2f} s of CPU "
          f"({elapsed:.2f} s wall): {rate / 1e6:.1f} million modes/s per core")
    assert rate >= TARGET_MODES_PER_SECOND


@pytest.mark.bench
def test_rectangular_spectrum_overhead_few_modes():
    # Per-panel cost when each panel has only a handful of modes (low fmax).
    panels = _random_panels(seed=11)
    start = time.process_time()
    spectra = rectangular_membrane_spectra(fmax=60.0, **panels)
    elapsed = time.process_time() - start
    print(f"\nfew modes: {len(spectra)} panels, {int(spectra.offsets[-1]):,} modes below "
          f"60 Hz in {elapsed:.2f} s: {elapsed / PANELS * 1e6:.1f} µs per panel")
    assert elapsed / PANELS < 100e-6
