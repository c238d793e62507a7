"""A plausible AuditResult built directly from the records, for the report writers' tests.

Modes come from the textbook formulas (rectangle: Rayleigh, The Theory of Sound, vol. 1 ch. IX;
circle: Kinsler et al., Fundamentals of Acoustics, ch. 4, with scipy.special.jn_zeros); the
findings from a plain ±margin comparison; shapes are the analytic mode shapes sampled on a grid.
Nothing here is the product's physics: it only feeds the writers something realistic.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.special import jn, jn_zeros

from auditor.model import (
    AuditResult,
    CircleCutout,
    Equipment,
    Excitation,
    Finding,
    InputFile,
    Mode,
    Panel,
    PanelResult,
    Project,
    Remedy,
    RowProblem,
    Schedule,
    ShapeGrid,
    SourceRef,
)

TRICKY_ID = '<b>&"x"'
LONG_ID = "CEILING-LEVEL-03-OPEN-PLAN-OFFICE-NORTH-WING-BAY-17-PANEL-A-WITH-A-VERY-LONG-NAME"


@dataclass(frozen=True)
class StandInRuleSet:
    """The fields of auditor.rules.RuleSet the writers read."""

    name: str = "standard-hvac"
    description: str = "Common-practice margins: conflict within ±10 %, caution within ±20 %."
    path: str = "/work/main/rules/standard-hvac.toml"
    fmax_hz: float | None = 500.0
    excitation_multiple: float | None = 2.0
    max_modes: int = 12
    harmonics: tuple[tuple[str, int], ...] = (("fan", 2), ("pump", 2), ("transformer", 3))
    conflict_margin: float = 0.10
    caution_margin: float = 0.20
    participation_threshold: float = 0.01
    bandwidth_widening: bool = True
    use_zones: bool = True
    strouhal: float = 0.2
    default_slip: float = 0.03
    extra: dict[str, Any] = field(default_factory=dict)

    def as_dict(self) -> dict[str, Any]:
        return {k: getattr(self, k) for k in self.__dataclass_fields__ if k != "extra"}


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
    return [Mode(label=f"({m},{n})", frequency_hz=f, participation=p, multiplicity=1 if m == 0 else 2,
                 nodal_lines=(("diameters", m), ("circles", n - 1)), index=k)
            for k, (f, m, n, p) in enumerate(cands[:count])]


def rectangle_shape(label: str, width: float, length: float, nx: int = 61, ny: int = 41) -> ShapeGrid:
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


def excitations() -> tuple[tuple[str, tuple[Excitation, ...]], ...]:
    """Fan, pump on a variable-speed drive, transformer: trade formulas (common practice)."""
    rpm, blades = 1450.0, 8
    fan = tuple(
        [Excitation("AHU-1", "fan", "shaft", 1, "fan shaft ×1", rpm / 60, airborne=False)]
        + [Excitation("AHU-1", "fan", "blade-pass", h, f"fan blade-pass ×{h}", h * blades * rpm / 60)
           for h in (1, 2)])
    pump = (Excitation("P-1", "pump", "vane-pass", 1, "pump vane-pass ×1 (variable speed)",
                       math.sqrt(80.0 * 120.0), band_hz=(80.0, 120.0)),)
    transformer = tuple(Excitation("TX-1", "transformer", "hum", h, f"transformer hum ×{h}", 100.0 * h)
                        for h in (1, 2, 3))
    return (("AHU-1", fan), ("P-1", pump), ("TX-1", transformer))


def _findings(panel: str, modes: list[Mode], lines: list[Excitation], rules: StandInRuleSet,
              max_tension: float | None, tension: float) -> list[Finding]:
    out = []
    for mode in modes:
        for e in lines:
            if e.airborne and mode.participation < rules.participation_threshold:
                continue  # a uniform sound pressure cannot drive this mode
            if e.band_hz:
                lo, hi = e.band_hz
                f = mode.frequency_hz
                sep = 0.0 if lo <= f <= hi else ((f - hi) / hi if f > hi else (f - lo) / lo)
            else:
                sep = (mode.frequency_hz - e.frequency_hz) / e.frequency_hz
            if abs(sep) <= rules.caution_margin:
                severity = "conflict" if abs(sep) <= rules.conflict_margin else "caution"
                remedy = None
                if severity == "conflict":
                    new = tension * 1.35**2
                    if max_tension is None or new <= max_tension:
                        remedy = Remedy(new, None, f"retension to {new:.0f} N/m (both directions)")
                    else:
                        remedy = Remedy(None, 2, "add one intermediate support across the long side (2 bays)")
                out.append(Finding(panel, mode, e, sep, severity, rules.conflict_margin
                                   if severity == "conflict" else rules.caution_margin, remedy))
    return out


def make_result(n_panels: int = 6, n_flagged: int | None = None, *, tricky: bool = True,
                n_problems: int = 3) -> AuditResult:
    """A plausible result: ``n_flagged`` panels in the plant zone (reached by the equipment).

    With ``tricky`` the first flagged panel has the id ``<b>&"x"`` and the second a very long
    id; one panel is circular, one carries tap-test peaks.
    """
    rules = StandInRuleSet()
    n_flagged = min(n_panels, 4 if n_flagged is None else n_flagged)
    ex = excitations()
    all_lines = [e for _, group in ex for e in group]
    plant_equipment = tuple(
        Equipment(tag, SourceRef("project.xlsx", "Equipment", 2 + k), group[0].kind, zones=("plant",))
        for k, (tag, group) in enumerate(ex))
    panels, results = [], []
    for k in range(n_panels):
        flagged = k < n_flagged
        pid = (TRICKY_ID if (tricky and k == 0) else LONG_ID if (tricky and k == 1) else f"CL-{k + 1:04d}")
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
                          max_tension=tension * 2.5,
                          entered=(("Panel", pid), ("Shape", "circle"), ("Diameter (mm)", "1200"),
                                   ("Areal density (g/m²)", "250"), ("Tension (N/m)", f"{tension:.0f}")))
            modes = circle_modes(diameter, tension, rho, 7)
            loading = ("Circular membrane in vacuo from Bessel zeros, with air on both faces "
                       "(Rayleigh integral, open plenum).")
        elif k % 5 == 4:  # L-shaped fabric panel with a round cut-out (finite elements)
            rho = 0.3
            target = 101.0 if flagged else 55.0
            tension = rho * (2 * target / math.hypot(1 / 2.0, 1 / 2.0)) ** 2 / 4.0
            panel = Panel(pid, src, shape="polygon", zone=zone, outline=L_OUTLINE, cutouts=(L_HOLE,),
                          material="fabric", areal_density=rho, tension_x=tension, tension_y=tension,
                          entered=(("Panel", pid), ("Shape", "polygon"),
                                   ("Outline (m)", "0,0; 2,0; 2,1; 1,1; 1,2; 0,2"),
                                   ("Cut-outs", "circle at 0.5,0.5 dia 300 mm"),
                                   ("Tension (N/m)", f"{tension:.0f}")))
            pairs = [(1, 1), (2, 1), (1, 2), (2, 2), (3, 1), (1, 3)]
            modes = [Mode(label=f"#{i + 1}", frequency_hz=target * (1 + 0.55 * i),
                          participation=0.5 / (1 + i) ** 2, index=i) for i in range(len(pairs))]
            loading = "Finite-element membrane (quadratic triangles) with air on the room side; sealed cavity 300 mm deep behind."
        else:
            width, length, rho = 1.8 + 0.1 * (k % 7), 1.2, 0.18 + 0.01 * (k % 4)
            target = 96.5 if flagged else 37.0 + (k % 11)
            # (1,1) at target: T = ρs (2 f / √(1/Lx² + 1/Ly²))²
            tension = rho * (2 * target / math.hypot(1 / width, 1 / length)) ** 2
            panel = Panel(pid, src, shape="rectangle", zone=zone, width=width, length=length,
                          material="film", areal_density=rho, tension_x=tension, tension_y=tension,
                          max_tension=tension * 1.5, cutouts=(CircleCutout(0.45, 0.6, 0.2),) if k == 2 else (),
                          entered=(("Panel", pid), ("Shape", "rectangle"),
                                   ("Width (mm)", f"{width * 1000:.0f}"), ("Length (mm)", f"{length * 1000:.0f}"),
                                   ("Material", "stretched PVC film"),
                                   ("Areal density (g/m²)", f"{rho * 1000:.0f}"),
                                   ("Tension (N/m)", f"{tension:.0f}"), ("Zone", zone)))
            modes = rectangle_modes(width, length, tension, rho, 7)
            loading = ("Rectangular membrane in vacuo (closed form), with air on both faces "
                       "(Rayleigh integral, open plenum).")
        panels.append(panel)
        findings = _findings(pid, modes, all_lines, rules, panel.max_tension, tension) if flagged else []
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
        notes = ()
        if tricky and k == 1:
            notes = ("Installer reports tension set by hand at the corners; the long edge was "
                     "re-clipped after the sprinkler works, so the tension along it may be lower "
                     "than scheduled. " * 2,)
        measured = (modes[0].frequency_hz * 0.97, modes[1].frequency_hz * 1.02) if k == 2 else ()
        results.append(PanelResult(panel, tuple(modes), tuple(findings), loading, notes,
                                   tuple(shapes), measured))
    problems = [
        RowProblem("project.xlsx", "Panels", 40, "Tension (N/m)", "not a number: 'tight'",
                   text="tight", record="CL-BAD-1"),
        RowProblem("project.xlsx", "Equipment", 9, "Speed (rpm)", "unknown unit 'rpn'", text="1450 rpn",
                   record="AHU-9"),
        RowProblem("project.xlsx", "Panels", 41, "Areal density (g/m²)",
                   "areal density 25 kg/m² is unusually high for a film; kept as entered",
                   severity="warning", text="25 kg/m2", record="CL-0041"),
    ][:n_problems]
    schedule = Schedule(
        panels=tuple(panels), equipment=plant_equipment,
        project=Project(name="Riverside Library refurbishment", reference="RL-2024-017",
                        client="Riverside Borough Council", prepared_by="A. Engineer",
                        prepared_for="Main contractor", line_frequency=50.0),
        problems=tuple(problems),
        files=(InputFile("/projects/riverside/project.xlsx",
                         "3a7bd3e2360a3d29eea436fcfb7e44c735d117c42d1c1835420b6b9942dd4f1b"),),
    )
    return AuditResult(schedule=schedule, panels=tuple(results), excitations=ex, ruleset=rules,
                       problems=tuple(problems), version="0.1.0", created="2024-05-14T10:32:00")


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
    findings = tuple(dataclasses.replace(f, panel=panel_id, excitation=excitation(f.excitation))
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
