"""Reading speed: a 20 000-panel workbook (target: under 3 s on one core)."""

from __future__ import annotations

import random
import time

import pytest
from openpyxl import Workbook

from auditor.schedule import read_schedule
from auditor.units import registry

PANELS = 20_000


def _write(path) -> None:
    wb = Workbook(write_only=True)
    ws = wb.create_sheet("Panels")
    ws.append(["Generated schedule"])
    ws.append([])
    ws.append(["Panel", "Zone", "Shape", "Width (mm)", "Length (mm)", "Material",
               "Areal density (g/m²)", "Tension (N/m)", "Loss factor", "Room side",
               "Plenum side", "Cavity depth (mm)", "Max tension (kN/m)"])
    rnd = random.Random(7)
    for i in range(PANELS):
        tension = 500 + rnd.randint(0, 1000) if i % 3 else f"{rnd.randint(1, 8)} lbf/in"
        sealed = i % 2 == 1
        ws.append([f"P{i:05d}", f"Z{i % 20}", "rectangle", 1000 + rnd.randint(0, 3000),
                   800 + rnd.randint(0, 2000), "film", 180 + rnd.randint(0, 100), tension, 0.03,
                   "air", "sealed" if sealed else "air", 300 if sealed else None, 3])
    wb.save(path)


@pytest.mark.bench
def test_bench_read_20000_panels(tmp_path):
    path = tmp_path / "big.xlsx"
    _write(path)
    registry()  # made once per process; not part of reading
    wall, cpu = time.perf_counter(), time.process_time()
    schedule = read_schedule(path)
    wall, cpu = time.perf_counter() - wall, time.process_time() - cpu
    print(f"\nread {len(schedule.panels)} panels in {wall:.2f} s wall, {cpu:.2f} s CPU")
    assert len(schedule.panels) == PANELS and schedule.problems == ()
    assert cpu < 3.0
