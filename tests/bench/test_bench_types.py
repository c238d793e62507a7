"""Benchmarks: whole schedules by panel type, against the cost of reading the workbook.

Each case writes a schedule workbook, times a bare read of it with openpyxl (read-only mode,
every cell of every sheet: the least any tool reading the file must do) and then the audit
from the file (``auditor.audit.audit``: reading, every panel type solved and judged, remedies)
with the findings JSON (``auditor.report.exports.findings_json``), in the same run, and prints
the ratio. The demo case runs ``auditor demo --out`` as a user would and watches the memory of
every process it starts. Run with ``python -m pytest tests/bench/test_bench_types.py -m bench
-s``; the figures depend on the machine (the targets were set for two cores).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import openpyxl
import pytest

from auditor.audit import audit, audit_schedule
from auditor.report.exports import findings_json
from auditor.rules import load_ruleset
from auditor.schedule import read_schedule

pytestmark = pytest.mark.bench

PANEL_HEADER = ("Panel", "Zone", "Shape", "Width (mm)", "Length (mm)", "Diameter (mm)",
                "Material", "Areal density (g/m²)", "Tension (N/m)", "Airflow resistance (Pa·s/m)",
                "Room side", "Plenum side", "Cavity depth (mm)", "Max tension (N/m)")
EQUIPMENT_HEADER = ("Tag", "Kind", "Zone", "Speed (rpm)", "Blades", "Vanes", "Poles",
                    "Line frequency (Hz)", "Frequency (Hz)", "Isolator deflection (mm)")
ZONES = [f"L{k:02d}" for k in range(20)]


def _equipment_rows(count: int, rng) -> list[tuple]:
    """Fans, pumps, motors, transformers and typed tones spread over the zones (a plant
    schedule's mix), a third of them on 25 mm springs."""
    rows = []
    for k in range(count):
        kind = ("fan", "pump", "motor", "transformer", "tone")[k % 5]
        zone = ZONES[k % len(ZONES)]
        deflection = 25 if k % 3 == 0 else None
        if kind == "fan":
            rows.append((f"F-{k}", kind, zone, float(rng.choice([720, 960, 1450])),
                         int(rng.integers(5, 10)), None, None, None, None, deflection))
        elif kind == "pump":
            rows.append((f"P-{k}", kind, zone, float(rng.choice([1450, 2900])), None,
                         int(rng.integers(5, 8)), None, None, None, deflection))
        elif kind == "motor":
            rows.append((f"M-{k}", kind, zone, None, None, None, 4, 50, None, deflection))
        elif kind == "transformer":
            rows.append((f"T-{k}", kind, zone, None, None, None, None, 50, None, 6))
        else:
            rows.append((f"X-{k}", kind, zone, None, None, None, None, None,
                         float(rng.uniform(30, 300)), None))
    return rows


def _write_workbook(path: Path, types: list[dict], panels: int, equipment: int,
                    seed: int = 11) -> Path:
    """A schedule of ``panels`` rows drawn in turn from ``types``; each type is used in two
    zones (as a building repeats one floor's ceilings on another), each zone holds several
    types."""
    rng = np.random.default_rng(seed)
    wb = openpyxl.Workbook(write_only=True)
    ws = wb.create_sheet("Panels")
    ws.append(["Benchmark building: panel schedule"])
    ws.append(list(PANEL_HEADER))
    for i in range(panels):
        t = types[i % len(types)]
        zone = ZONES[(2 * (i % len(types)) + (i // len(types)) % 2) % len(ZONES)]
        ws.append([f"P-{i:05d}", zone, t["shape"],
                   t.get("width"), t.get("length"), t.get("diameter"), t["material"],
                   t["density"], t["tension"], t.get("resistance"), t.get("room", "air"),
                   t.get("plenum", "air"), t.get("depth"), 2 * t["tension"]])
    eq = wb.create_sheet("Equipment")
    eq.append(list(EQUIPMENT_HEADER))
    for row in _equipment_rows(equipment, rng):
        eq.append(list(row))
    pr = wb.create_sheet("Project")
    pr.append(["Key", "Value"])
    pr.append(["Project name", "Benchmark building"])
    pr.append(["Line frequency (Hz)", 50])
    wb.save(path)
    return path


def _bare_read_seconds(path: Path) -> float:
    start = time.perf_counter()
    wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    cells = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows(values_only=True):
            cells += len(row)
    wb.close()
    assert cells > 0
    return time.perf_counter() - start


def _audit_and_json_seconds(path: Path, jobs: int | None = None):
    start = time.perf_counter()
    result = audit([path], with_shapes=False, jobs=jobs)
    audited = time.perf_counter()
    text = findings_json(result)
    done = time.perf_counter()
    return result, audited - start, done - audited, len(text)


def _report(title: str, path: Path, result, audit_s: float, json_s: float, size: int,
            read_s: float) -> float:
    ratio = (audit_s + json_s) / read_s
    summary = result.summary()
    print(f"\n{title}: {len(result.panels)} panels audited on {os.cpu_count()} cores; "
          f"openpyxl bare read {read_s:.2f} s; audit {audit_s:.2f} s + JSON {json_s:.2f} s "
          f"({size / 1e6:.1f} MB) = {ratio:.1f} × the read; {summary['conflicts']} conflicts, "
          f"{summary['cautions']} cautions, {summary['panels_not_assessed']} not assessed")
    return ratio


def _analytic_types() -> list[dict]:
    """50 rectangles and 50 circles solved exactly (no air load: fabric on a solid backing
    with no air on either side, and open mesh screens)."""
    rng = np.random.default_rng(3)
    types = []
    for k in range(100):
        mesh = k % 4 == 0
        kind = dict(material="mesh", density=float(rng.uniform(1500, 3000)),
                    tension=float(rng.uniform(6000, 12000))) if mesh else dict(
            material="fabric", density=float(rng.uniform(200, 400)),
            tension=float(rng.uniform(500, 1500)), room="none", plenum="none")
        if k % 2 == 0:
            kind.update(shape="rectangle", width=float(rng.uniform(600, 1800)),
                        length=float(rng.uniform(600, 1200)))
        else:
            kind.update(shape="circle", diameter=float(rng.uniform(600, 1500)))
        types.append(kind)
    return types


def _film_types(count: int = 30, sealed: bool = False) -> list[dict]:
    """Stretched film ceilings of several sizes and tensions, air on both sides, or over a
    sealed plenum 50–400 mm deep (a third of those porous fabric)."""
    rng = np.random.default_rng(5 if sealed else 4)
    types = []
    for k in range(count):
        kind = dict(shape="rectangle", width=float(rng.uniform(600, 2400)),
                    length=float(rng.uniform(600, 1800)), material="film",
                    density=float(rng.choice([180, 220, 250, 300])),
                    tension=float(rng.choice([600, 900, 1200, 1500])))
        if sealed:
            kind.update(plenum="sealed", depth=float(rng.uniform(50, 400)))
            if k % 3 == 0:
                kind.update(material="fabric", resistance=float(rng.uniform(500, 2000)))
        types.append(kind)
    return types


def test_5000_analytic_rectangles_and_circles_with_100_equipment_to_json(tmp_path):
    path = _write_workbook(tmp_path / "analytic.xlsx", _analytic_types(), 5000, 100)
    read_s = _bare_read_seconds(path)
    result, audit_s, json_s, size = _audit_and_json_seconds(path)
    ratio = _report("5,000 analytic panels (100 types) × 100 equipment", path, result,
                    audit_s, json_s, size, read_s)
    assert len(result.panels) == 5000
    assert ratio <= 5.0


def test_1000_air_loaded_film_panels_of_30_types(tmp_path):
    path = _write_workbook(tmp_path / "films.xlsx", _film_types(), 1000, 100)
    read_s = _bare_read_seconds(path)
    result, audit_s, json_s, size = _audit_and_json_seconds(path)
    ratio = _report("1,000 air-loaded film panels (30 types) × 100 equipment", path, result,
                    audit_s, json_s, size, read_s)
    assert len(result.panels) == 1000
    assert ratio <= 25.0


def test_1000_panels_over_sealed_cavities_of_30_types(tmp_path):
    path = _write_workbook(tmp_path / "sealed.xlsx", _film_types(sealed=True), 1000, 100)
    read_s = _bare_read_seconds(path)
    result, audit_s, json_s, size = _audit_and_json_seconds(path)
    ratio = _report("1,000 panels over sealed cavities (30 types) × 100 equipment", path,
                    result, audit_s, json_s, size, read_s)
    assert len(result.panels) == 1000
    assert ratio <= 50.0


def _two_against_one(path: Path, title: str) -> float:
    """``audit_schedule`` of the workbook at ``path`` with one and two processes: the
    speed-up, printed (the results must be equal)."""
    schedule = read_schedule([path])
    rules = load_ruleset("standard")
    times = {}
    results = {}
    for jobs in (1, 2):
        start = time.perf_counter()
        results[jobs] = audit_schedule(schedule, rules, with_shapes=False, jobs=jobs,
                                       created="2024-01-01T00:00:00")
        times[jobs] = time.perf_counter() - start
    speedup = times[1] / times[2]
    print(f"\n{title}: audit_schedule jobs=1 {times[1]:.2f} s, jobs=2 {times[2]:.2f} s: "
          f"{speedup:.2f} × on {os.cpu_count()} cores")
    assert results[1].panels == results[2].panels
    return speedup


def test_two_processes_against_one_on_the_5000_panel_schedule(tmp_path, monkeypatch):
    path = _write_workbook(tmp_path / "analytic.xlsx", _analytic_types(), 5000, 100)
    speedup = _two_against_one(path, "5,000 analytic panels")
    # for the record: the same with the pool made to start (``auditor.judging.POOL_WORTH``)
    import auditor.judging as judging

    monkeypatch.setattr(judging, "POOL_WORTH", 0.0)
    _two_against_one(path, "5,000 analytic panels, the pool made to start")
    assert speedup >= 1.6


def test_two_processes_against_one_on_the_sealed_cavity_schedule(tmp_path):
    # The 5,000 analytic panels are judged in under a second, less than starting worker
    # processes costs (``auditor.judging.POOL_WORTH``): there the pool is not used. Panels over
    # sealed cavities are where the work is, and where a second process must pay.
    path = _write_workbook(tmp_path / "sealed.xlsx", _film_types(sealed=True), 1000, 100)
    assert _two_against_one(path, "1,000 panels over sealed cavities") >= 1.6


def _descendants(pid: int) -> list[int]:
    found, queue = [], [pid]
    while queue:
        current = queue.pop()
        found.append(current)
        try:
            tasks = os.listdir(f"/proc/{current}/task")
        except OSError:
            continue
        for task in tasks:
            try:
                with open(f"/proc/{current}/task/{task}/children") as handle:
                    queue.extend(int(c) for c in handle.read().split())
            except OSError:
                pass
    return found


def _peak_kib(pid: int) -> int:
    """The process's own peak resident set (VmHWM) [KiB], 0 once it is gone."""
    try:
        with open(f"/proc/{pid}/status") as handle:
            for line in handle:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1])
    except OSError:
        pass
    return 0


def _demo_run(folder: Path) -> tuple[float, int, dict[int, int]]:
    """One ``auditor demo --out`` in a fresh interpreter: its wall time [s], the command's
    peak resident set (VmHWM) [KiB] and that of every process of it, read every 50 ms."""
    command = [sys.executable, "-m", "auditor", "demo", "--out", str(folder / "demo")]
    start = time.perf_counter()
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                               cwd=folder)
    peaks: dict[int, int] = {}
    while process.poll() is None:
        for pid in _descendants(process.pid):
            peaks[pid] = max(peaks.get(pid, 0), _peak_kib(pid))
        time.sleep(0.05)
    wall = time.perf_counter() - start
    assert process.returncode == 0, process.stderr.read().decode()[-2000:]
    return wall, peaks.get(process.pid, 0), peaks


@pytest.mark.skipif(not Path("/proc/self/task").exists(), reason="needs Linux /proc")
def test_the_demo_in_seconds_within_its_memory(tmp_path):
    # Three runs, the median judged: a shared two-core machine's speed drifts by a fifth
    # from minute to minute (the same code measured 8.0 s to 10.9 s within an hour).
    runs = []
    for k in range(3):
        folder = tmp_path / f"run{k}"
        folder.mkdir()
        runs.append(_demo_run(folder))
    walls = sorted(wall for wall, _, _ in runs)
    median = walls[1]
    command_peak = max(command for _, command, _ in runs) / 1024
    largest = max(max(peaks.values()) for _, _, peaks in runs) / 1024
    together = max(sum(peaks.values()) for _, _, peaks in runs) / 1024
    print(f"\nauditor demo --out: {median:.1f} s wall, the median of "
          f"{', '.join(f'{w:.1f}' for w in walls)} s, on {os.cpu_count()} cores; peak resident "
          f"memory {command_peak:.0f} MB (the command), largest process {largest:.0f} MB, "
          f"{together:.0f} MB together")
    assert median <= 10.0
    assert largest <= 350.0
