"""Benchmark: 20,000 panels × 200 equipment items, schedule to findings JSON (no PDF).

A large project repeats a few dozen panel types across many rooms, so the panels here are
drawn from 40 types (film rectangles of several sizes and tensions, air on both sides) in 20
zones; the equipment (fans, pumps, motors, transformers) is spread over the zones. Run with
``python -m pytest tests/bench/test_bench_audit.py -m bench -s``.
"""

from __future__ import annotations

import json
import time

import numpy as np
import pytest

from auditor.audit import audit_schedule
from auditor.model import Equipment, Panel, Project, Schedule, SourceRef
from auditor.report.exports import findings_json
from auditor.rules import load_ruleset

pytestmark = pytest.mark.bench

PANELS = 20_000
EQUIPMENT = 200
TYPES = 40
ZONES = 20


def _schedule() -> Schedule:
    rng = np.random.default_rng(7)
    types = [(float(rng.uniform(0.8, 3.0)), float(rng.uniform(0.6, 2.0)),
              float(rng.choice([600.0, 900.0, 1200.0, 1500.0])),
              float(rng.choice([0.18, 0.25, 0.32]))) for _ in range(TYPES)]
    panels = []
    for i in range(PANELS):
        w, l, t, rho = types[i % TYPES]
        panels.append(Panel(panel=f"P-{i:05d}", source=SourceRef("bench.xlsx", "Panels", i + 2),
                            zone=f"Z{i % ZONES}", width=w, length=l, areal_density=rho,
                            tension_x=t, tension_y=t, max_tension=2 * t))
    kinds = ("fan", "pump", "motor", "transformer")
    equipment = []
    for j in range(EQUIPMENT):
        kind = kinds[j % 4]
        src = SourceRef("bench.xlsx", "Equipment", j + 2)
        zone = (f"Z{j % ZONES}",)
        rpm = float(rng.choice([960.0, 1450.0, 2900.0]))
        if kind == "fan":
            e = Equipment(f"F{j}", src, "fan", zones=zone, rpm=rpm, blades=int(rng.integers(5, 12)))
        elif kind == "pump":
            e = Equipment(f"P{j}", src, "pump", zones=zone, rpm=rpm, vanes=int(rng.integers(5, 8)))
        elif kind == "motor":
            e = Equipment(f"M{j}", src, "motor", zones=zone, poles=4, line_frequency=50.0)
        else:
            e = Equipment(f"T{j}", src, "transformer", zones=zone, line_frequency=50.0)
        equipment.append(e)
    return Schedule(panels=tuple(panels), equipment=tuple(equipment),
                    project=Project(line_frequency=50.0))


def test_audit_20000_panels_200_equipment_to_json():
    schedule = _schedule()
    ruleset = load_ruleset("standard")
    start, cpu = time.perf_counter(), time.process_time()
    result = audit_schedule(schedule, ruleset, with_shapes=False)
    audited = time.perf_counter()
    summary = result.summary()
    listed = sum(len(p.modes) for p in result.panels)
    print(f"\n{PANELS} panels ({TYPES} types) × {EQUIPMENT} equipment items: "
          f"audit {audited - start:.1f} s wall (modes with no count cap, findings, verdicts, "
          f"remedies per type), {time.process_time() - cpu:.1f} s CPU; "
          f"{summary['conflicts']} conflicts, {summary['cautions']} cautions, "
          f"{summary['panels_not_assessed']} panels not assessed; {listed} modes on the panels "
          f"(the panels of a type share one list)")
    assert len(result.panels) == PANELS and summary["panels_with_conflicts"] > 0
    assert audited - start <= 10.0
    text = findings_json(result)
    done = time.perf_counter()
    doc = json.loads(text)
    assert len(doc["panels"]) == PANELS
    print(f"JSON {done - audited:.1f} s ({len(text) / 1e6:.0f} MB), total {done - start:.1f} s")
    assert done - start <= 10.0
