"""Benchmark: rule evaluation of 20,000 panels × 200 equipment items, end to end.

Run with:  python -m pytest tests/bench/test_bench_rules.py -m bench -s
"""

from __future__ import annotations

import dataclasses
import math
import time

import numpy as np
import pytest

from auditor.excitation import excitations_for_schedule
from auditor.judgement.screening import (
    ExcitationArrays,
    ModeArrays,
    assessment_limit_hz,
    default_loss_factor,
    evaluate_panel,
    reaching,
)
from auditor.model import Equipment, Panel, SourceRef
from auditor.remedy import panel_remedy
from auditor.results import Mode
from auditor.rules import load_ruleset

PANELS = 20_000
EQUIPMENT = 200
ZONES = [f"L{k:02d}" for k in range(40)]   # floors and plant areas
BUILDING_WIDE = 2                           # transformers that reach every zone
#: A plant schedule's mix of kinds (mostly fans, pumps and their motors; few transformers).
KINDS = ("fan", "pump", "motor", "transformer", "compressor", "belt", "flow", "tone")
SHARES = (0.30, 0.15, 0.20, 0.03, 0.05, 0.10, 0.07, 0.10)
PANEL_TYPES = 2_000                         # distinct constructions; each used by 10 panels
#: Modes of the formula model: every mode up to this frequency [Hz] (no count of modes; the
#: densest panel types have some 6,000 modes below it).
MODEL_FMAX_HZ = 600.0


def _equipment(rng) -> list[Equipment]:
    items = []
    for k in range(EQUIPMENT):
        src = SourceRef("bench.xlsx", "Equipment", k + 2)
        kind = str(rng.choice(KINDS, p=SHARES))
        if kind == "transformer" and sum(e.zones is None for e in items) < BUILDING_WIDE:
            zones = None
        else:
            zones = (ZONES[int(rng.integers(len(ZONES)))],)
        kw: dict = {}
        if kind == "fan":
            kw = dict(blades=int(rng.integers(4, 13)), rpm=float(rng.uniform(500, 1800)))
            if k % 3 == 0:
                kw = dict(blades=kw["blades"], rpm_min=kw["rpm"] * 0.6, rpm_max=kw["rpm"])
        elif kind == "pump":
            kw = dict(vanes=int(rng.integers(5, 9)), rpm=float(rng.choice([1450, 2900])))
        elif kind == "motor":
            kw = dict(poles=int(rng.choice([2, 4, 6])), line_frequency=50.0)
        elif kind == "transformer":
            kw = dict(line_frequency=50.0)
        elif kind == "compressor":
            kw = dict(cylinders=int(rng.integers(2, 7)), rpm=float(rng.uniform(900, 1500)))
        elif kind == "belt":
            kw = dict(rpm=1450.0, pulley_diameter=float(rng.uniform(0.1, 0.3)),
                      belt_length=float(rng.uniform(1.0, 3.0)))
        elif kind == "flow":
            kw = dict(velocity=float(rng.uniform(2, 15)),
                      wire_diameter=float(rng.uniform(1e-3, 5e-3)))
        else:
            kw = dict(frequency=float(rng.uniform(30, 500)))
        items.append(Equipment(equipment=f"{kind.upper()}-{k}", source=src, kind=kind,
                               zones=zones, **kw))
    return items


def _membrane(panel: Panel) -> tuple[Mode, ...]:
    """Ideal rectangular membrane: f_mn = ½√((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²),
    participation 64/(π⁴m²n²) for odd m, n (else 0); every mode up to MODEL_FMAX_HZ."""
    top = int(2 * MODEL_FMAX_HZ * max(panel.width, panel.length)
              / math.sqrt(min(panel.tension_x, panel.tension_y) / panel.areal_density)) + 1
    m, n = np.meshgrid(np.arange(1, top + 1), np.arange(1, top + 1), indexing="ij")
    m, n = m.ravel(), n.ravel()
    f = 0.5 * np.sqrt(panel.tension_x / panel.areal_density * (m / panel.width) ** 2
                      + panel.tension_y / panel.areal_density * (n / panel.length) ** 2)
    order = np.argsort(f)
    order = order[f[order] <= MODEL_FMAX_HZ]
    part = np.where((m % 2 == 1) & (n % 2 == 1), 64 / (math.pi ** 4 * m**2 * n**2), 0.0)
    return tuple(Mode(label=f"({m[k]},{n[k]})", frequency_hz=float(f[k]),
                      participation=float(part[k]), loss_factor=0.05) for k in order)


def _panel_types(rng) -> list[Panel]:
    src = SourceRef("bench.xlsx", "Panels", 2)
    out = []
    for k in range(PANEL_TYPES):
        t = float(rng.uniform(300, 1500))
        out.append(Panel(panel=f"T{k}", source=src,
                         width=float(rng.uniform(0.5, 3.0)), length=float(rng.uniform(0.5, 3.0)),
                         material="fabric", areal_density=float(rng.uniform(0.15, 0.5)),
                         tension_x=t, tension_y=t * float(rng.choice([1.0, 0.7])),
                         max_tension=t * 1.6, room_side="none", plenum_side="none"))
    return out


@pytest.mark.bench
def test_bench_rules():
    rng = np.random.default_rng(2024)
    rules = load_ruleset("standard")
    equipment = _equipment(rng)
    types = _panel_types(rng)
    t0 = time.perf_counter()
    type_modes = [_membrane(p) for p in types]
    t_modes = time.perf_counter() - t0
    # Every panel of the schedule: a type, in a zone (modes shared by panels of one type, as
    # the physics caches them by construction).
    panels, modes = [], []
    for k in range(PANELS):
        t = k % PANEL_TYPES
        panels.append(dataclasses.replace(types[t], panel=f"P{k}", zone=ZONES[k % len(ZONES)]))
        modes.append(type_modes[t])

    # As the audit does: each zone's excitations and assessment limit laid out once, each
    # type's modes as arrays once, each (type, zone) judged once and its findings named for
    # every panel of it.
    t0, c0 = time.perf_counter(), time.process_time()
    pairs, problems = excitations_for_schedule(equipment, rules, project_line_frequency=50.0)
    zones: dict[str, tuple[ExcitationArrays, float]] = {}
    arrays: dict[int, ModeArrays] = {}
    judged: dict[tuple[int, str], tuple] = {}
    findings = []
    for k, p in enumerate(panels):
        if p.zone not in zones:
            excs = ExcitationArrays.of(reaching(p, pairs, rules))
            zones[p.zone] = (excs, assessment_limit_hz(rules, excs.top_hz))
        excs, limit = zones[p.zone]
        t = k % PANEL_TYPES
        if t not in arrays:
            arrays[t] = ModeArrays.of(modes[k], default_loss_factor(p))
        if (t, p.zone) not in judged:
            judged[t, p.zone] = evaluate_panel(p, arrays[t], excs, rules, limit_hz=limit)
        shared = judged[t, p.zone]
        findings.append(shared)
    t_rules, c_rules = time.perf_counter() - t0, time.process_time() - c0
    n_exc = sum(len(e) for _, e in pairs)
    n_find = sum(len(f) for f in findings)
    n_conf = sum(1 for fs in findings for f in fs if f.severity == "conflict")
    conflicted = sum(1 for fs in findings if any(f.severity == "conflict" for f in fs))
    print(f"\n{PANELS} panels × {EQUIPMENT} items ({n_exc} excitation lines/bands, "
          f"{len(problems)} rejected): modes by formula {t_modes:.1f} s (not timed); "
          f"excitations + findings {t_rules:.2f} s wall, {c_rules:.2f} s CPU; "
          f"{n_find} findings, {n_conf} conflicts, {conflicted} panels with conflicts")
    assert not [q for q in problems if q.severity == "error"] and n_find > 0
    assert t_rules <= 10.0

    # The panel remedy (windows in closed form on the formula model, verified) on a sample.
    sample = [k for k, fs in enumerate(findings) if any(f.severity == "conflict" for f in fs)]
    sample = sample[:500]
    verified = 0
    t0, c0 = time.perf_counter(), time.process_time()
    for k in sample:
        excs, limit = zones[panels[k].zone]
        remedy = panel_remedy(panels[k], excs, rules, _membrane, limit_hz=limit, solved=modes[k])
        verified += remedy.verified
    t_rem, c_rem = time.perf_counter() - t0, time.process_time() - c0
    per_panel = c_rem / max(len(sample), 1)
    print(f"remedies: {len(sample)} conflicting panels, {verified} verified, in {t_rem:.2f} s "
          f"wall, {c_rem:.2f} s CPU ({per_panel * 1e3:.1f} ms CPU per panel; all {conflicted} "
          f"conflicting panels ≈ {per_panel * conflicted:.0f} s)")
