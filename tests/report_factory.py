"""A plausible AuditResult built directly from the records, for the report writers' tests.

Modes come from the textbook formulas (rectangle: Rayleigh, The Theory of Sound, vol. 1 ch. IX;
circle: Kinsler et al., Fundamentals of Acoustics, ch. 4, with scipy.special.jn_zeros); the
findings from a plain ±margin comparison; shapes are the analytic mode shapes sampled on a grid.
Nothing here is the product's physics: it only feeds the writers something realistic.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from scipy.special import jn, jn_zeros

from auditor.model import (
    CircleCutout,
    Equipment,
    InputFile,
    Panel,
    Project,
    RowProblem,
    Schedule,
    SourceRef,
)
from auditor.results import (
    AuditResult,
    Excitation,
    Finding,
    Mode,
    Mount,
    PanelResult,
    Remedy,
    ShapeGrid,
    finding_rank,
)
from auditor.rules import RuleSet

TRICKY_ID = '<b>&"x"'
LONG_ID = "CEILING-LEVEL-03-OPEN-PLAN-OFFICE-NORTH-WING-BAY-17-PANEL-A-WITH-A-VERY-LONG-NAME"


def report_ruleset() -> RuleSet:
    """A rule set of the schema's defaults under another name, with a fixed 500 Hz
    assessment limit (the factory's modes stop below it)."""
    return RuleSet(
        name="standard-hvac",
        description="Common-practice margins: conflict within ±10 %, caution within ±20 %.",
        origin="standard-hvac.toml, SHA-256 5d41402abc4b\u2026", fmax_hz=500.0,
        excitation_multiple=2.0)


def rectangle_modes(width: float, length: float, tension: float, areal_density: float,
                    count: int) -> list[Mode]:
    """f_mn = ½ √(T/ρs) √((m/Lx)² + (n/Ly)²)  (Rayleigh, The Theory of Sound, vol. 1 ch. IX)."""
    c = math.sqrt(tension / areal_density)
    cands = []
    for m in range(1, 8):
        for n in range(1, 8):
            f = 0.5 * c * math.hypot(m / width, n / length)
            p = 64.0 / (math.pi**4 * m**2 * n**2) if (m % 2 and n % 2) else 0.0
            cands.append((f, m, n, p))
    cands.sort()
    return [Mode(label=f"({m},{n})", frequency_hz=f, participation=p,
                 nodal_lines=(("along y", m - 1), ("along x", n - 1)), loss_factor=0.05,
                 in_vacuo_hz=f * 1.6, index=k)
            for k, (f, m, n, p) in enumerate(cands[:count])]


def circle_modes(diameter: float, tension: float, areal_density: float, count: int) -> list[Mode]:
    """f_mn = j_mn √(T/ρs) / (2πa)  (Kinsler et al., Fundamentals of Acoustics, ch. 4)."""
    a = diameter / 2
    c = math.sqrt(tension / areal_density)
    cands = []
    for m in range(0, 5):
        for n, j in enumerate(jn_zeros(m, 4), start=1):
            p = 4.0 / j**2 if m == 0 else 0.0  # (∫J0)²/(A∫J0²) = 4/j0n²
            cands.append((j * c / (2 * math.pi * a), m, n, p))
    cands.sort()
    return [Mode(label=f"({m},{n})", frequency_hz=f, participation=p,
                 multiplicity=1 if m == 0 else 2,
                 nodal_lines=(("diameters", m), ("circles", n - 1)), index=k)
            for k, (f, m, n, p) in enumerate(cands[:count])]


def rectangle_shape(label: str, width: float, length: float, nx: int = 61,
                    ny: int = 41) -> ShapeGrid:
    m, n = (int(v) for v in label.strip("()").split(","))
    x, y = np.linspace(0, width, nx), np.linspace(0, length, ny)
    values = np.sin(m * np.pi * x / width)[None, :] * np.sin(n * np.pi * y / length)[:, None]
    return ShapeGrid(label, x, y, values / np.abs(values).max())


def circle_shape(label: str, diameter: float, nx: int = 61) -> ShapeGrid:
    m, n = (int(v) for v in label.strip("()").split(","))
    a = diameter / 2
    x = y = np.linspace(-a, a, nx)
    xx, yy = np.meshgrid(x, y)
    r, theta = np.hypot(xx, yy), np.arctan2(yy, xx)
    j = jn_zeros(m, n)[-1]
    values = jn(m, j * r / a) * np.cos(m * theta)
    values[r > a] = np.nan
    return ShapeGrid(label, x, y, values / np.nanmax(np.abs(values)))


L_OUTLINE = ((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (1.0, 1.0), (1.0, 2.0), (0.0, 2.0))
L_HOLE = CircleCutout(0.5, 0.5, 0.3)


def polygon_shape(label: str, m: int, n: int, nx: int = 61) -> ShapeGrid:
    """A smooth shape vanishing on the L-shaped outline and the round cut-out (drawing only)."""
    x = y = np.linspace(0.0, 2.0, nx)
    xx, yy = np.meshgrid(x, y)
    values = (np.sin(m * np.pi * xx / 2) * np.sin(n * np.pi * yy / 2)
              * np.maximum(1 - xx, 1 - yy)
              * np.clip(np.hypot(xx - L_HOLE.x, yy - L_HOLE.y) - L_HOLE.diameter / 2, 0, None))
    outside = (np.minimum(1 - xx, 1 - yy) < -1e-12) & (np.maximum(1 - xx, 1 - yy) < 0)
    outside |= np.hypot(xx - L_HOLE.x, yy - L_HOLE.y) < L_HOLE.diameter / 2
    values[outside] = np.nan
    return ShapeGrid(label, x, y, values / np.nanmax(np.abs(values)))


def harris_transmissibility(f: float, fn: float, zeta: float) -> float:
    """T = √((1 + (2ζr)²)/((1 − r²)² + (2ζr)²)), r = f/fn (Harris' Shock and Vibration
    Handbook, 5th ed., vibration isolation chapter)."""
    r = f / fn
    return math.sqrt((1 + (2 * zeta * r) ** 2) / ((1 - r * r) ** 2 + (2 * zeta * r) ** 2))


def spring_mount(deflection: float, zeta: float = 0.01) -> Mount:
    """A mount of static deflection δ [m]: f₀ = √(g/δ)/2π (Harris, vibration isolation)."""
    fn = math.sqrt(9.80665 / deflection) / (2 * math.pi)
    kind = "steel spring" if deflection >= 0.012 else "elastomer"
    return Mount(kind, deflection, zeta, fn, rigid_assumed=False, damping_assumed=True)


def excitations() -> tuple[tuple[str, tuple[Excitation, ...]], ...]:
    """Fan on springs, pump on a variable-speed drive, transformer, belt drive on a rigid base:
    trade formulas (common practice)."""
    rpm, blades = 1450.0, 8
    fan_mount = spring_mount(0.025)
    shaft = [Excitation("AHU-1", "fan", "shaft", h, f"fan shaft \u00d7{h}", h * rpm / 60,
                        airborne=False, mount=fan_mount,
                        transmissibility=harris_transmissibility(
                            h * rpm / 60, fan_mount.natural_frequency_hz, 0.01))
             for h in (1, 2)]
    fan = tuple(shaft + [Excitation("AHU-1", "fan", "blade-pass", h, f"fan blade-pass \u00d7{h}",
                                    h * blades * rpm / 60) for h in (1, 2)])
    pump = (Excitation("P-1", "pump", "vane-pass", 1, "pump vane-pass \u00d71 (variable speed)",
                       math.sqrt(80.0 * 120.0), band_hz=(80.0, 120.0)),)
    transformer = tuple(Excitation("TX-1", "transformer", "hum", h, f"transformer hum \u00d7{h}",
                                   100.0 * h) for h in (1, 2, 3))
    belt = (Excitation("BLT-1", "belt", "belt-pass", 1, "belt belt-pass \u00d71", 8.4,
                       airborne=False, mount=Mount()),)
    return (("AHU-1", fan), ("P-1", pump), ("TX-1", transformer), ("BLT-1", belt))


def _separation(f: float, e: Excitation) -> float:
    lo, hi = e.low_hz, e.high_hz
    if lo <= f <= hi:
        return 0.0
    return (f - hi) / hi if f > hi else (f - lo) / lo


def _findings(panel: str, modes: list[Mode], lines: list[Excitation], rules: RuleSet,
              limit_hz: float = math.inf) -> list[Finding]:
    """A plain ±margin screen graded by the SDOF response 20·log10(p·|H|·T), |H| =
    1/√((1 − ρ²)² + η²) (Harris' Shock and Vibration Handbook, ch. 2)."""
    out = []
    for mode in modes:
        if mode.frequency_hz > limit_hz:
            continue
        for e in lines:
            if e.airborne and mode.participation < rules.participation_threshold:
                continue  # a uniform sound pressure cannot drive this mode
            sep = _separation(mode.frequency_hz, e)
            if abs(sep) > rules.caution_margin:
                continue
            near = min(max(mode.frequency_hz, e.low_hz), e.high_hz)
            rho = near / mode.frequency_hz
            eta = mode.loss_factor or 0.05
            amplification = 1 / math.sqrt((1 - rho**2) ** 2 + eta**2)
            response = 20 * math.log10(max(mode.participation, 1e-9) * amplification
                                       * e.transmissibility)
            if response < rules.report_db:
                continue
            severity = "conflict" if abs(sep) <= rules.conflict_margin and \
                response >= rules.conflict_db else "caution"
            out.append(Finding(mode, e, sep, severity, rules.conflict_margin
                               if severity == "conflict" else rules.caution_margin,
                               response_db=response, amplification=amplification,
                               transmissibility=e.transmissibility))
    return sorted(out, key=finding_rank)


def _windows(modes: list[Mode], lines: list[Excitation], rules: RuleSet, tension: float,
             low: float, high: float) -> list[tuple[float, float]]:
    """Tensions with no conflict, modes scaled as √T (Kinsler et al., ch. 4), on a fine grid."""
    grid = np.linspace(low, high, 801)
    clear = []
    for t in grid:
        scale = math.sqrt(t / tension)
        moved = [dataclasses.replace(m, frequency_hz=m.frequency_hz * scale) for m in modes]
        clear.append(not any(f.severity == "conflict"
                             for f in _findings("", moved, lines, rules)))
    out, start, previous = [], None, grid[0]
    for t, ok in zip(grid, clear, strict=True):
        if ok and start is None:
            start = t
        if not ok and start is not None:
            out.append((float(start), float(previous)))
            start = None
        previous = t
    if start is not None:
        out.append((float(start), float(grid[-1])))
    return out


def _remedy(panel: Panel, modes: list[Mode], lines: list[Excitation], rules: RuleSet,
            findings: list[Finding]) -> Remedy | None:
    if not findings:
        return None
    if not any(f.severity == "conflict" for f in findings):
        return Remedy(panel.tension_x, None, "No change needed: no conflict at the scheduled "
                      "tension.", tension_y=panel.tension_y, verified=True)
    top = panel.max_tension or 1.5 * panel.tension_x
    low = 0.5 * panel.tension_x
    windows = _windows(modes, lines, rules, panel.tension_x, low, top)
    if windows:
        a, b = min(windows, key=lambda w: min(abs(w[0] - panel.tension_x),
                                              abs(w[1] - panel.tension_x)))
        target = float(f"{(a * b) ** 0.5:.3g}")
        return Remedy(target, None, f"Retension to {target:.0f} N/m (both directions): no "
                      f"conflict.", tension_y=target, work=True, clear_windows=tuple(windows),
                      verified=True)
    return Remedy(None, 2, "Add one intermediate support across the long side (2 bays).",
                  work=True, verified=True)


def make_result(n_panels: int = 6, n_flagged: int | None = None, *, tricky: bool = True,
                n_problems: int = 3) -> AuditResult:
    """A plausible result: ``n_flagged`` panels in the plant zone (reached by the equipment).

    With ``tricky`` the first flagged panel has the id ``<b>&"x"`` and the second a very long
    id; one panel is circular, one L-shaped with a cut-out, and the third panel's tension was
    fitted to a tap test (scheduled about 12 % higher). The last flagged panel is "not
    assessed": its modes stop short of the pump's band. Every flagged panel has findings and a
    remedy.
    """
    rules = report_ruleset()
    n_flagged = min(n_panels, 4 if n_flagged is None else n_flagged)
    ex = excitations()
    all_lines = [e for _, group in ex for e in group]
    isolators = {"AHU-1": 0.025, "TX-1": 0.006}
    plant_equipment = tuple(
        Equipment(tag, SourceRef("project.xlsx", "Equipment", 2 + k), group[0].kind,
                  zones=("plant",), rpm=1450.0 if tag == "AHU-1" else None,
                  rpm_min=900.0 if tag == "P-1" else None,
                  rpm_max=1350.0 if tag == "P-1" else None,
                  isolator_deflection=isolators.get(tag))
        for k, (tag, group) in enumerate(ex))
    panels, scheduled_panels, results = [], [], []
    for k in range(n_panels):
        flagged = k < n_flagged
        unassessed = flagged and n_flagged >= 3 and k == n_flagged - 1
        pid = (TRICKY_ID if (tricky and k == 0) else LONG_ID if (tricky and k == 1)
               else f"CL-{k + 1:04d}")
        zone = "plant" if flagged else "office"
        src = SourceRef("project.xlsx", "Panels", 3 + k)
        if k % 5 == 3:  # circular film
            diameter, rho = 1.2, 0.25
            # put the (0,1) mode 4 % above the 100 Hz hum when flagged: f = j01 c / (2π a)
            target = 104.0 if flagged else 61.0
            c = target * 2 * math.pi * (diameter / 2) / jn_zeros(0, 1)[0]
            tension = rho * c**2
            panel = Panel(pid, src, shape="circle", zone=zone, diameter=diameter, material="film",
                          areal_density=rho, tension_x=tension, tension_y=tension,
                          max_tension=tension * 2.5, room_side="none", plenum_side="none",
                          entered=(("Panel", pid), ("Shape", "circle"),
                                   ("Diameter (mm)", "1200"), ("Areal density (g/m²)", "250"),
                                   ("Tension (N/m)", f"{tension:.0f}")))
            modes = circle_modes(diameter, tension, rho, 7)
            loading = ("Circular membrane in vacuo from Bessel zeros, with air on both faces "
                       "(Rayleigh integral, open plenum).")
        elif k % 5 == 4:  # L-shaped fabric panel with a round cut-out (finite elements)
            rho = 0.3
            target = 101.0 if flagged else 55.0
            tension = rho * (2 * target / math.hypot(1 / 2.0, 1 / 2.0)) ** 2 / 4.0
            panel = Panel(pid, src, shape="polygon", zone=zone, outline=L_OUTLINE,
                          cutouts=(L_HOLE,), material="fabric", areal_density=rho,
                          tension_x=tension, tension_y=tension,
                          plenum_side="sealed", cavity_depth=0.3,
                          entered=(("Panel", pid), ("Shape", "polygon"),
                                   ("Outline (m)", "0,0; 2,0; 2,1; 1,1; 1,2; 0,2"),
                                   ("Cut-outs", "circle at 0.5,0.5 dia 300 mm"),
                                   ("Tension (N/m)", f"{tension:.0f}")))
            pairs = [(1, 1), (2, 1), (1, 2), (2, 2), (3, 1), (1, 3)]
            modes = [Mode(label=f"#{i + 1}", frequency_hz=target * (1 + 0.55 * i),
                          participation=0.5 / (1 + i) ** 2, loss_factor=0.07, index=i)
                     for i in range(len(pairs))]
            loading = ("Finite-element membrane (quadratic triangles) with air on the room "
                       "side; sealed cavity 300 mm deep behind.")
        else:
            width, length, rho = 1.8 + 0.1 * (k % 7), 1.2, 0.18 + 0.01 * (k % 4)
            target = 96.5 if flagged else 37.0 + (k % 11)
            # (1,1) at target: T = ρs (2 f / √(1/Lx² + 1/Ly²))²
            tension = rho * (2 * target / math.hypot(1 / width, 1 / length)) ** 2
            panel = Panel(pid, src, shape="rectangle", zone=zone, width=width, length=length,
                          material="film", areal_density=rho, tension_x=tension, tension_y=tension,
                          max_tension=tension * 1.5, room_side="none", plenum_side="none",
                          cutouts=(CircleCutout(0.45, 0.6, 0.2),) if k == 2 else (),
                          entered=(("Panel", pid), ("Shape", "rectangle"),
                                   ("Width (mm)", f"{width * 1000:.0f}"),
                                   ("Length (mm)", f"{length * 1000:.0f}"),
                                   ("Material", "stretched PVC film"),
                                   ("Areal density (g/m²)", f"{rho * 1000:.0f}"),
                                   ("Tension (N/m)", f"{tension:.0f}"), ("Zone", zone)))
            modes = rectangle_modes(width, length, tension, rho, 7)
            loading = ("Rectangular membrane in vacuo (closed form), with no air on either "
                       "face.")
        scheduled = panel
        notes: tuple[str, ...] = ()
        measured: tuple[float, ...] = ()
        if k == 2 and panel.shape == "rectangle":
            # a tap test found the tension lower than scheduled: the audit used the fitted one
            typed = round(panel.tension_x * 1.12, -1)  # the film went in 11 % slack
            scheduled = dataclasses.replace(panel, tension_x=typed, tension_y=typed,
                                            entered=tuple((h, f"{typed:.0f}"
                                                           if h.startswith("Tension") else t)
                                                          for h, t in panel.entered))
            notes = ("Tension fitted to the site tap test.",)
            measured = (modes[0].frequency_hz * 1.003, modes[1].frequency_hz * 0.996)
        panels.append(panel)
        scheduled_panels.append(scheduled)
        limit = 90.0 if unassessed else 1000.0
        findings = _findings(pid, modes, all_lines, rules, limit) if flagged else []
        beyond = tuple(e for e in all_lines if e.high_hz * 1.2 > limit) if unassessed else ()
        if any(f.severity == "conflict" for f in findings):
            verdict = "conflict"
        elif beyond:
            verdict = "not assessed"
        elif findings:
            verdict = "caution"
        else:
            verdict = "clear"
        if flagged and not findings and not beyond:
            verdict = "clear"
        remedy = _remedy(panel, modes, all_lines, rules, findings)
        if unassessed and remedy is None:
            remedy = Remedy(panel.tension_x, None, "No change needed below 90 Hz.",
                            tension_y=panel.tension_y, verified=True)
        reason = {"conflict": "1 or more conflicts.", "caution": "cautions only.",
                  "not assessed": "tones above the assessed range (modes complete to 90 Hz).",
                  "clear": "No tone reaching the panel makes a finding with its modes."}[verdict]
        wanted = {f.mode.label for f in findings} | {modes[0].label}
        shapes = []
        for mode in modes:
            if mode.label not in wanted:
                continue
            if panel.shape == "circle":
                shapes.append(circle_shape(mode.label, panel.diameter))
            elif panel.shape == "polygon":
                m, n = pairs[mode.index]
                shapes.append(polygon_shape(mode.label, m, n))
            else:
                shapes.append(rectangle_shape(mode.label, panel.width, panel.length))
        if tricky and k == 1:
            notes += ("Installer reports tension set by hand at the corners; the long edge was "
                      "re-clipped after the sprinkler works, so the tension along it may be "
                      "lower than scheduled. " * 2,)
        results.append(PanelResult(panel, tuple(modes), tuple(findings), loading, notes,
                                   tuple(shapes), measured, assessed_to_hz=limit,
                                   verdict=verdict, verdict_reason=reason,
                                   overlap_from_hz=None, beyond=beyond, remedy=remedy))
    problems = [
        RowProblem("project.xlsx", "Panels", 40, "Tension (N/m)", "not a number: 'tight'",
                   text="tight", record="CL-BAD-1"),
        RowProblem("project.xlsx", "Equipment", 9, "Speed (rpm)", "unknown unit 'rpn'",
                   text="1450 rpn", record="AHU-9"),
        RowProblem("project.xlsx", "Panels", 41, "Areal density (g/m²)",
                   "areal density 25 kg/m² is unusually high for a film; kept as entered",
                   severity="warning", text="25 kg/m2", record="CL-0041"),
    ][:n_problems]
    schedule = Schedule(
        panels=tuple(scheduled_panels), equipment=plant_equipment,
        project=Project(name="Riverside Library refurbishment", reference="RL-2024-017",
                        client="Riverside Borough Council", prepared_by="A. Engineer",
                        prepared_for="Main contractor", line_frequency=50.0,
                        extra=(("Revision", "B"), ("Checked by", "C. Checker"))),
        problems=tuple(problems),
        files=(InputFile("/projects/riverside/project.xlsx",
                         "3a7bd3e2360a3d29eea436fcfb7e44c735d117c42d1c1835420b6b9942dd4f1b"),),
    )
    mounts = tuple((tag, next((e.mount for e in group if e.mount is not None), Mount()))
                   for tag, group in ex)
    return AuditResult(schedule=schedule, panels=tuple(results), excitations=ex, ruleset=rules,
                       problems=tuple(problems), version="0.1.0", created="2024-05-14T10:32:00",
                       calibrated=True, mounts=mounts)


def with_source_file(result: AuditResult, path: str) -> AuditResult:
    """The same result as if every record had been read from ``path`` (for the writers that
    open the schedule again: the audited workbook)."""
    def moved(record):
        return dataclasses.replace(record, source=dataclasses.replace(record.source, file=path))

    panels = tuple(dataclasses.replace(p, panel=moved(p.panel)) for p in result.panels)
    problems = tuple(dataclasses.replace(q, file=path) for q in result.problems)
    schedule = dataclasses.replace(
        result.schedule, panels=tuple(p.panel for p in panels),
        equipment=tuple(moved(e) for e in result.schedule.equipment), problems=problems,
        files=tuple(dataclasses.replace(f, path=path) for f in result.schedule.files))
    return dataclasses.replace(result, schedule=schedule, panels=panels, problems=problems)


def renamed(result: AuditResult, panel_id: str, *, zone: str | None = None,
            equipment: str | None = None) -> AuditResult:
    """The result with its first flagged panel called ``panel_id`` (and, when given, in zone
    ``zone`` and with the first item of equipment tagged ``equipment``): user text that
    reaches every writer."""
    first = next(k for k, p in enumerate(result.panels) if p.findings)
    old = result.panels[first]
    tag = old.findings[0].excitation.equipment
    new_tag = tag if equipment is None else equipment

    def excitation(e: Excitation) -> Excitation:
        return dataclasses.replace(e, equipment=new_tag) if e.equipment == tag else e

    panel = dataclasses.replace(old.panel, panel=panel_id,
                                zone=old.panel.zone if zone is None else zone)
    findings = tuple(dataclasses.replace(f, excitation=excitation(f.excitation))
                     for f in old.findings)
    panels = list(result.panels)
    panels[first] = dataclasses.replace(old, panel=panel, findings=findings)
    excitations = tuple((new_tag if t == tag else t, tuple(excitation(e) for e in group))
                        for t, group in result.excitations)
    equipment_records = tuple(dataclasses.replace(e, equipment=new_tag) if e.equipment == tag
                              else e for e in result.schedule.equipment)
    if zone is not None:  # the equipment still reaches the panel
        equipment_records = tuple(dataclasses.replace(e, zones=tuple(e.zones or ()) + (zone,))
                                  for e in equipment_records)
    schedule = dataclasses.replace(
        result.schedule, equipment=equipment_records,
        panels=tuple(panel if p is old.panel else p for p in result.schedule.panels))
    return dataclasses.replace(result, schedule=schedule, panels=tuple(panels),
                               excitations=excitations)
