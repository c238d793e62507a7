"""End to end: a schedule workbook → audit → findings, remedies and the written outputs.

The panels here have no air on either side (room side and plenum side "none"), so their modes
are the ideal membrane's, which the tests compute independently from Rayleigh's formula
f_mn = ½·√(T/ρs)·√((m/Lx)² + (n/Ly)²) (Rayleigh, The Theory of Sound, vol. I, §194).
Blade-pass frequency = blades × rpm / 60 (common practice of the trade).
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math

import numpy as np
import openpyxl
import pytest
from typer.testing import CliRunner

from auditor.audit import audit, audit_schedule
from auditor.cli import app
from auditor.report.exports import findings_csv, findings_document, write_audited_workbooks
from auditor.rules import load_ruleset
from auditor.schedule import read_schedule

WIDTH, LENGTH, TENSION, DENSITY = 1.2, 0.9, 800.0, 0.25


def rayleigh_f11(tension=TENSION, width=WIDTH, length=LENGTH, density=DENSITY):
    return 0.5 * math.sqrt(tension / density) * math.hypot(1 / width, 1 / length)


def _workbook(path, *, fan_zone="Office", panel_id="C-1", blades=6, line_frequency=50):
    """A small schedule: one fan whose blade-pass sits 3 % above the panel's fundamental."""
    f11 = rayleigh_f11()
    rpm = 1.03 * f11 * 60 / blades
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Ceiling schedule, level 2"])
    ws.append(["Panel", "Zone", "Width (mm)", "Length (mm)", "Tension (N/m)",
               "Areal density (g/m²)", "Room side", "Plenum side", "Max tension (N/m)"])
    ws.append([panel_id, "Office", 1200, 900, TENSION, 250, "none", "none", 1600])
    ws.append(["C-2", "Corridor", 1200, 900, TENSION, 250, "none", "none", 1600])
    ws.append(["C-3", "Office", -5, 900, TENSION, 250, "none", "none", None])
    eq = wb.create_sheet("Equipment")
    eq.append(["Equipment", "Kind", "Zone", "rpm", "Blades"])
    eq.append(["AHU-1", "fan", fan_zone, rpm, blades])
    eq.append(["TX-1", "transformer", "Plant", None, None])
    pr = wb.create_sheet("Project")
    pr.append(["Key", "Value"])
    pr.append(["Project name", "Test building"])
    if line_frequency:
        pr.append(["Line frequency", line_frequency])
    wb.save(path)
    return path, rpm


def test_blade_pass_conflict_found_with_its_frequencies(tmp_path):
    path, rpm = _workbook(tmp_path / "s.xlsx")
    result = audit([path])
    (panel,) = [p for p in result.panels if p.panel.panel == "C-1"]
    f11 = rayleigh_f11()
    assert panel.modes[0].frequency_hz == pytest.approx(f11, rel=1e-9)
    conflict = [f for f in panel.findings if f.severity == "conflict"
                and f.excitation.source == "blade-pass" and f.excitation.order == 1]
    assert conflict, panel.findings
    f = conflict[0]
    assert f.excitation.frequency_hz == pytest.approx(6 * rpm / 60)
    assert f.separation == pytest.approx((f11 - 6 * rpm / 60) / (6 * rpm / 60))
    # one remedy per panel; the findings refer to it and carry none of their own
    assert f.remedy is None and panel.remedy is not None and panel.remedy.tension is not None
    assert panel.verdict == "conflict" and panel.findings[0].severity == "conflict"


def test_zones_are_respected(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    result = audit([path])
    corridor = [p for p in result.panels if p.panel.panel == "C-2"][0]
    assert all(f.excitation.equipment != "AHU-1" for f in corridor.findings)
    office = [p for p in result.panels if p.panel.panel == "C-1"][0]
    assert any(f.excitation.equipment == "AHU-1" for f in office.findings)


def test_the_panel_remedy_re_audits_clean(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    schedule = read_schedule([path])
    ruleset = load_ruleset("standard")
    result = audit_schedule(schedule, ruleset, with_shapes=False)
    (panel,) = [p for p in result.panels if p.panel.panel == "C-1"]
    assert panel.verdict == "conflict"
    remedy = panel.remedy
    assert remedy.verified and remedy.work and remedy.tension <= 1600.0  # within the rating
    assert any(a <= remedy.tension <= b for a, b in remedy.clear_windows)
    fixed = dataclasses.replace(panel.panel, tension_x=remedy.tension,
                                tension_y=remedy.tension_y)
    retuned = dataclasses.replace(schedule, panels=tuple(
        fixed if p.panel == "C-1" else p for p in schedule.panels))
    again = audit_schedule(retuned, ruleset, with_shapes=False)
    (panel,) = [p for p in again.panels if p.panel.panel == "C-1"]
    # re-auditing the schedule at the proposed tension: no conflict left on that panel
    assert not [f for f in panel.findings if f.severity == "conflict"]
    assert panel.verdict in ("clear", "caution")
    # f ∝ √T (Rayleigh): the (1,1) mode, 3 % above the blade-pass at 800 N/m, clears the 10 %
    # conflict margin once T ≥ 800·(1.1/1.03)² = 912 N/m, or T ≤ 800·(0.9/1.03)² = 611 N/m.
    assert remedy.tension >= 912.0 or remedy.tension <= 611.0


def test_nothing_is_lost_rejected_rows_in_every_output(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx", line_frequency=None)
    result = audit([path])
    doc = findings_document(result)
    # the negative width and the transformer without a line frequency are both listed
    messages = [(p["sheet"], p["row"], p["severity"]) for p in doc["problems"]]
    assert ("Panels", 5, "error") in messages
    assert any(p["sheet"] == "Equipment" and p["row"] == 3 for p in doc["problems"])
    assert {p["panel"] for p in doc["panels"]} == {"C-1", "C-2"}
    rows = list(csv.DictReader(io.StringIO(findings_csv(result))))
    assert any(r["severity"] == "rejected row" and r["row"] == "5" for r in rows)
    assert set(doc) >= {"panels", "problems", "summary", "rules"}
    finding = doc["panels"][0]["findings"][0]
    assert set(finding) >= {"mode", "mode_hz", "equipment", "excitation", "excitation_hz",
                            "band_hz", "separation", "severity"}


def test_audited_workbook_keeps_every_original_cell(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    before = openpyxl.load_workbook(path)
    original = {ws.title: [[c.value for c in row] for row in ws.iter_rows()]
                for ws in before.worksheets}
    result = audit([path])
    (written,) = write_audited_workbooks(result, tmp_path / "out")
    after = openpyxl.load_workbook(written)
    for title, rows in original.items():
        ws = after[title]
        for r, row in enumerate(rows, start=1):
            for c, value in enumerate(row, start=1):
                assert ws.cell(row=r, column=c).value == value, (title, r, c)
    status_col = len(original["Panels"][1]) + 1
    assert after["Panels"].cell(row=2, column=status_col).value == "Audit status"
    assert after["Panels"].cell(row=3, column=status_col).value == "conflict"
    assert str(after["Panels"].cell(row=5, column=status_col).value).startswith("rejected")
    assert "Findings" in after.sheetnames and "Rejected rows" in after.sheetnames
    # the input file itself is untouched
    assert openpyxl.load_workbook(path).sheetnames == list(original)


def test_formula_like_text_is_neutralised_in_csv_and_xlsx(tmp_path):
    # OWASP's guidance on CSV injection: cells starting with = + - @ are prefixed.
    path, _ = _workbook(tmp_path / "s.xlsx", panel_id="+SUM(A1)")
    result = audit([path])
    rows = list(csv.reader(io.StringIO(findings_csv(result))))
    assert any(row[1] == "'+SUM(A1)" for row in rows[1:])
    (written,) = write_audited_workbooks(result, tmp_path / "out")
    findings = openpyxl.load_workbook(written)["Findings"]
    ids = {findings.cell(row=r, column=2).value for r in range(2, findings.max_row + 1)}
    assert "'+SUM(A1)" in ids


def test_cli_audit_json_and_fail_on(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    runner = CliRunner()
    got = runner.invoke(app, ["audit", str(path), "--json"])
    assert got.exit_code == 0, got.output
    doc = json.loads(got.stdout)
    assert doc["summary"]["conflicts"] >= 1
    got = runner.invoke(app, ["audit", str(path), "--fail-on", "conflict", "--format", "json",
                              "--out", str(tmp_path / "o")])
    assert got.exit_code == 1
    assert (tmp_path / "o" / "findings.json").is_file()
    got = runner.invoke(app, ["audit", str(tmp_path / "missing.xlsx")])
    assert got.exit_code == 2


def test_cli_modes_one_off_matches_rayleigh():
    runner = CliRunner()
    got = runner.invoke(app, ["modes", "--width", "1200 mm", "--length", "0.9",
                              "--tension", "800 N/m", "--areal-density", "250 g/m^2",
                              "--room-side", "none", "--plenum-side", "none", "--json"])
    assert got.exit_code == 0, got.output
    modes = json.loads(got.stdout)["panels"][0]["modes"]
    assert modes[0]["label"] == "(1,1)"
    assert modes[0]["frequency_hz"] == pytest.approx(rayleigh_f11(), rel=1e-9)
    assert modes[0]["participation"] == pytest.approx(64 / math.pi**4)


def test_pdf_of_a_real_audit_names_conflicts_rejections_and_cautions(tmp_path):
    from pypdf import PdfReader

    from auditor.report.pdf import write_pdf

    path, _ = _workbook(tmp_path / "s.xlsx")
    result = audit([path])
    pdf = write_pdf(result, tmp_path / "audit.pdf")
    text = " ".join(page.extract_text() for page in PdfReader(pdf).pages)
    flat = " ".join(text.split())
    assert "C-1" in flat and "AHU-1" in flat
    assert "C-3" in flat  # the rejected row (negative width) is listed
    for phrase in ("advisory", "trained installers", "fire", "local codes"):
        assert phrase in flat.lower() or phrase in flat


def test_a_panel_the_physics_cannot_mesh_is_listed_and_the_rest_audited(tmp_path):
    # Two cut-outs that overlap: the reader passes them, the finite-element geometry check
    # (auditor.physics.geometry) rejects the panel; it must be listed, not crash the audit.
    path, _ = _workbook(tmp_path / "s.xlsx")
    wb = openpyxl.load_workbook(path)
    ws = wb["Panels"]
    ws.cell(row=2, column=10, value="Cut-outs (mm)")
    ws.cell(row=4, column=10, value="circle 600,450,300 | circle 700,450,300")
    wb.save(path)
    result = audit([path])
    assert {p.panel.panel for p in result.panels} == {"C-1"}
    (problem,) = [q for q in result.problems if q.record == "C-2"]
    # (named by the reader's own check or by the physics: the cut-outs column either way)
    assert problem.severity == "error" and problem.row == 4
    assert problem.column.casefold().startswith("cut-outs")
    assert "overlap" in problem.message and problem.text.startswith("circle 600")


def test_panels_of_one_type_share_its_judgement_under_their_own_ids():
    """Panels of one type are solved and judged once per zone; each panel's result holds the
    type's findings under its own id, and the findings document (Python ``json``) carries
    them all, each under its panel."""
    from auditor.model import Equipment, Panel, Project, Schedule, SourceRef
    from auditor.report.exports import findings_json

    panels = tuple(
        Panel(panel=f"C-{i}°", source=SourceRef("s.xlsx", "Panels", i + 2),
              zone=("Office", "Plant")[i % 2], width=(1.2, 0.9, 1.5)[i % 3],
              length=0.9, areal_density=0.25, tension_x=800.0, tension_y=800.0,
              max_tension=1600.0, room_side="none", plenum_side="none")
        for i in range(12))
    equipment = (
        Equipment("AHU-1", SourceRef("s.xlsx", "Equipment", 2), "fan", zones=("Office",),
                  rpm=1450.0, blades=7),
        Equipment("TX-1", SourceRef("s.xlsx", "Equipment", 3), "transformer",
                  zones=("Plant",), line_frequency=50.0),
    )
    schedule = Schedule(panels=panels, equipment=equipment, project=Project(line_frequency=50))
    result = audit_schedule(schedule, load_ruleset("strict"), with_shapes=False)
    assert sum(len(p.findings) for p in result.panels) > 12   # types really are shared
    # panels 0 and 6 are one type in one zone: one judgement, held by each with its own id
    first, seventh = result.panels[0], result.panels[6]
    assert (first.panel.panel, seventh.panel.panel) == (panels[0].panel, panels[6].panel)
    assert first.findings is seventh.findings
    assert first.modes is seventh.modes
    expected = json.loads(json.dumps(findings_document(result)))
    assert json.loads(findings_json(result)) == expected
    by_id = {entry["panel"]: entry for entry in expected["panels"]}
    assert sorted(by_id) == sorted(p.panel for p in panels)
    assert all(len(by_id[p.panel.panel]["findings"]) == len(p.findings) for p in result.panels)
    # Remedies that are work on a stretched panel are flagged, and the document carries the
    # installers' caution once (common practice for tensioned systems).
    assert any(p.remedy is not None and p.remedy.work for p in result.panels)
    assert "trained installers" in expected["safety_note"]


# ----------------------------------------------------------------------------------------
# The verdict a consultant can sign: every mode assessed, isolation weighed, ranked
# ----------------------------------------------------------------------------------------

def _film(**kw):
    from auditor.model import Panel, SourceRef
    base = dict(panel="F-1", source=SourceRef("s.xlsx", "Panels", 2), zone="Foyer",
                width=4.8, length=3.2, material="film", areal_density=0.25, tension_x=1200.0,
                tension_y=1200.0, max_tension=3000.0, room_side="none", plenum_side="none")
    base.update(kw)
    return Panel(**base)


def _membrane_frequencies(width, length, tension, density, top=40):
    """f_mn = (c/2)√((m/a)² + (n/b)²), c = √(T/ρs): the rectangular membrane (Kinsler et al.,
    Fundamentals of Acoustics, 4th ed., ch. 4; chapter from memory), sorted."""
    c = math.sqrt(tension / density)
    return sorted((0.5 * c * math.hypot(m / width, n / length), m, n)
                  for m in range(1, top) for n in range(1, top))


def test_a_large_film_is_judged_above_its_twelfth_mode():
    from auditor.model import Equipment, Project, Schedule, SourceRef

    modes = _membrane_frequencies(4.8, 3.2, 1200.0, 0.25)
    f12 = modes[11][0]                       # the 12th mode, (3,3) at 39.0 Hz
    tone_hz = 1.35 * f12                     # 52.7 Hz, between (7,1) 51.7 and (1,5) 54.6 Hz
    tone = Equipment("T-1", SourceRef("s.xlsx", "Equipment", 2), "tone", frequency=tone_hz)
    schedule = Schedule(panels=(_film(),), equipment=(tone,), project=Project())
    result = audit_schedule(schedule, load_ruleset("standard"), with_shapes=False)
    (panel,) = result.panels
    assert panel.assessed_to_hz >= tone_hz * 1.2
    assert len(panel.modes) > 12
    high = [f for f in panel.findings if f.mode.frequency_hz > f12 * 1.01]
    assert high, panel.findings                 # the mode near the tone is reported
    assert {f.mode.label for f in high} <= {"(7,1)", "(1,5)", "(5,3)", "(3,5)"}
    assert panel.verdict in ("caution", "conflict")
    # Weyl: the modal overlap η·f·n(f) = 1 at √(T/(2π η A ρs)) = 40.7 Hz for η = 0.03
    assert panel.overlap_from_hz == pytest.approx(40.7, abs=0.1)


def test_an_isolated_fan_makes_no_conflict_on_its_shaft_rate_a_rigid_one_does():
    from auditor.model import Equipment, Project, Schedule, SourceRef

    f11 = _membrane_frequencies(1.2, 0.9, 800.0, 0.25)[0][0]
    rpm = 60 * f11 / 1.03                    # shaft rate 3 % below the fundamental
    src = SourceRef("s.xlsx", "Equipment", 2)
    rigid = Equipment("AHU-1", src, "fan", rpm=rpm, blades=40)
    sprung = dataclasses.replace(rigid, isolator_deflection=0.025)
    panel = _film(width=1.2, length=0.9, tension_x=800.0, tension_y=800.0, max_tension=1600.0)
    rules = load_ruleset("standard")

    def shaft_findings(item):
        schedule = Schedule(panels=(panel,), equipment=(item,), project=Project())
        result = audit_schedule(schedule, rules, with_shapes=False)
        return result, [f for f in result.panels[0].findings if f.excitation.source == "shaft"]

    rigid_result, rigid_findings = shaft_findings(rigid)
    sprung_result, sprung_findings = shaft_findings(sprung)
    assert rigid_findings[0].severity == "conflict" and rigid_findings[0].transmissibility == 1.0
    assert rigid_result.panels[0].verdict == "conflict"
    # the rigid mount is an assumption the result records
    assert dict(rigid_result.mounts)["AHU-1"].rigid_assumed
    # on 25 mm springs (3.15 Hz; T ≈ 1/(r² − 1), Harris) no shaft pair is a conflict
    assert not [f for f in sprung_findings if f.severity == "conflict"]
    assert dict(sprung_result.mounts)["AHU-1"].natural_frequency_hz == pytest.approx(3.15,
                                                                                       abs=0.01)


def test_findings_and_panels_are_ranked_worst_first(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    result = audit([path], with_shapes=False)
    for p in result.panels:
        keys = [(f.severity != "conflict", -f.response_db) for f in p.findings]
        assert keys == sorted(keys)
    ranked = result.ranked_panels()
    order = ["conflict", "not assessed", "caution", "clear"]
    assert [order.index(p.verdict) for p in ranked] == sorted(order.index(p.verdict)
                                                              for p in ranked)
    everything = result.findings
    assert [(f.severity != "conflict", -f.response_db) for f in everything] == sorted(
        (f.severity != "conflict", -f.response_db) for f in everything)


def test_a_row_with_two_errors_is_one_rejected_row():
    from auditor.model import RowProblem, Schedule
    from auditor.results import AuditResult

    problems = (RowProblem("s.xlsx", "Panels", 5, "Width", "width must be positive"),
                RowProblem("s.xlsx", "Panels", 5, "Material", "material not known"),
                RowProblem("s.xlsx", "Panels", 6, "Width", "width must be positive"),
                RowProblem("s.xlsx", "Panels", 7, "Zone", "zone unusual", severity="warning"))
    result = AuditResult(schedule=Schedule(problems=problems), panels=(), excitations=(),
                         ruleset=load_ruleset("standard"), problems=problems, version="x",
                         created="2024-01-01T00:00:00")
    summary = result.summary()
    assert summary["rejected_rows"] == 2 and summary["warnings"] == 1


def test_no_absolute_path_of_the_rule_set_in_the_findings_document(tmp_path):
    path, _ = _workbook(tmp_path / "s.xlsx")
    result = audit([path], with_shapes=False)
    rules = findings_document(result)["rules"]
    from auditor.rules import rules_dir
    assert str(rules_dir()) not in json.dumps(rules, ensure_ascii=False)
    assert rules["origin"].startswith("standard (bundled), SHA-256 ")


# ----------------------------------------------------------------------------------------
# The same result whatever ran before, in whatever order, on any number of processes
# ----------------------------------------------------------------------------------------

def _mixed_schedule():
    """Panel types of every kind of solve (in vacuo, film in air, disc in air, a sealed
    cavity, a porous sheet), several panels per type, in two zones, against tones that make
    findings and remedies."""
    from auditor.model import Equipment, Panel, Project, Schedule, SourceRef

    kinds = [
        dict(width=1.2, length=0.9, tension_x=800.0, tension_y=800.0, room_side="none",
             plenum_side="none"),
        dict(width=1.2, length=0.6, tension_x=900.0, tension_y=900.0),
        dict(shape="circle", width=None, length=None, diameter=0.9, tension_x=700.0,
             tension_y=700.0),
        dict(width=0.9, length=0.6, tension_x=700.0, tension_y=500.0, plenum_side="sealed",
             cavity_depth=0.05, material="fabric", areal_density=0.3),
        dict(width=0.8, length=0.8, tension_x=600.0, tension_y=600.0, material="fabric",
             areal_density=0.28, airflow_resistance=800.0),
    ]
    panels = []
    for i in range(15):
        base = dict(panel=f"P-{i:02d}", source=SourceRef("s.xlsx", "Panels", i + 2),
                    zone=("Office", "Plant")[i % 2], material="film", areal_density=0.25,
                    max_tension=2000.0)
        base.update(kinds[i % len(kinds)])
        panels.append(Panel(**base))
    equipment = (
        Equipment("AHU-1", SourceRef("s.xlsx", "Equipment", 2), "fan", zones=("Office",),
                  rpm=600.0, blades=5),
        Equipment("T-1", SourceRef("s.xlsx", "Equipment", 3), "tone", zones=None,
                  frequency=43.0),
        Equipment("T-2", SourceRef("s.xlsx", "Equipment", 4), "tone", zones=("Plant",),
                  frequency=61.0),
    )
    return Schedule(panels=tuple(panels), equipment=equipment,
                    project=Project(line_frequency=50.0))


def _same_results(a, b):
    """Field by field: every panel's record, modes, findings, verdict and remedy (mode-shape
    grids by their numbers), and the rejected rows."""
    assert [p.panel.panel for p in a.panels] == [p.panel.panel for p in b.panels]
    for x, y in zip(a.panels, b.panels):
        assert dataclasses.replace(x, shapes=()) == dataclasses.replace(y, shapes=())
        assert len(x.shapes) == len(y.shapes)
        for s, t in zip(x.shapes, y.shapes):
            assert s.label == t.label
            for name in ("x", "y", "values"):
                assert np.array_equal(getattr(s, name), getattr(t, name), equal_nan=True)
    assert a.problems == b.problems


def test_the_result_is_the_same_on_any_number_of_processes(monkeypatch):
    import auditor.judging as judging

    schedule = _mixed_schedule()
    rules = load_ruleset("standard")
    one = audit_schedule(schedule, rules, jobs=1, created="2024-01-01T00:00:00")
    # (this small schedule would be judged in-process: make the pool start all the same)
    monkeypatch.setattr(judging, "POOL_WORTH", 0.0)
    two = audit_schedule(schedule, rules, jobs=2, created="2024-01-01T00:00:00")
    assert sum(len(p.findings) for p in one.panels) > 0
    assert any(p.remedy is not None for p in one.panels)
    _same_results(one, two)


def _tapped_workbook(folder):
    """Rectangles in vacuo (Office and Corridor zones), two naming tap tests: C-1 a good
    recording of itself at 0.85 × its scheduled tension (its type changes when fitted), C-3 an
    empty file (it keeps its scheduled values, so its type, C-2's, gains the Corridor)."""
    from openpyxl import Workbook
    from test_calibrate import PANEL, _true, ideal_membrane, synthesise

    from auditor.calibrate import write_wav

    recording, _, _ = synthesise(ideal_membrane(), _true(), seed=7)
    (folder / "taps").mkdir()
    write_wav(folder / "taps" / "c01.wav", recording.samples, recording.sample_rate, bits=24)
    (folder / "taps" / "c03.wav").write_bytes(b"")
    wb = Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Panel", "Zone", "Width (mm)", "Length (mm)", "Tension (N/m)",
               "Areal density (g/m²)", "Room side", "Plenum side", "Max tension (N/m)",
               "Tap test"])
    size = (1000 * PANEL.width, 1000 * PANEL.length, PANEL.tension_x,
            1000 * PANEL.areal_density, "none", "none", 1600)
    ws.append(["C-1", "Office", *size, "taps/c01.wav"])
    ws.append(["C-2", "Office", *size, None])
    ws.append(["C-3", "Corridor", *size, "taps/c03.wav"])
    ws.append(["C-4", "Office", 1200, 900, 500, 250, "none", "none", 1600, None])
    eq = wb.create_sheet("Equipment")
    eq.append(["Equipment", "Kind", "Zone", "rpm", "Blades"])
    eq.append(["AHU-1", "fan", "Office", 1450, 6])
    eq.append(["TX-1", "transformer", "Corridor", None, None])
    path = folder / "schedule.xlsx"
    wb.save(path)
    return path


def test_tap_tests_fitted_while_the_other_types_are_judged_change_nothing(tmp_path,
                                                                          monkeypatch):
    # audit() hands the types no tap test can change to the pool before fitting the tap
    # tests; a type whose tone groups change once the fits are known (C-2's, joined by C-3)
    # is judged again, and the result is that of judging everything in one process.
    import auditor.judging as judging

    path = _tapped_workbook(tmp_path)
    one = audit([path], calibrated=True, jobs=1)
    monkeypatch.setattr(judging, "POOL_WORTH", 0.0)
    two = audit([path], calibrated=True, jobs=2)
    _same_results(one, two)
    by_id = {p.panel.panel: p for p in two.panels}
    assert set(by_id) == {"C-1", "C-2", "C-3", "C-4"}
    assert by_id["C-1"].panel.tension_x == pytest.approx(0.85 * 400.0, rel=0.02)
    assert by_id["C-3"].panel.tension_x == by_id["C-2"].panel.tension_x == 400.0
    assert [p.record for p in two.problems if "tap test" in p.message] == ["C-3"]
    # C-2 and C-3 share a type in different tone groups: the fan reaches the Office only
    assert any(f.excitation.equipment == "AHU-1" for f in by_id["C-2"].findings)
    assert all(f.excitation.equipment != "AHU-1" for f in by_id["C-3"].findings)


def test_the_result_is_the_same_whatever_ran_before_and_in_any_row_order():
    schedule = _mixed_schedule()
    rules = load_ruleset("standard")
    first = audit_schedule(schedule, rules, jobs=1, with_shapes=False)
    again = audit_schedule(schedule, rules, jobs=1, with_shapes=False)
    _same_results(first, again)
    reordered = dataclasses.replace(schedule, panels=tuple(reversed(schedule.panels)))
    backwards = audit_schedule(reordered, rules, jobs=1, with_shapes=False)
    by_id = {p.panel.panel: p for p in backwards.panels}
    for p in first.panels:
        assert by_id[p.panel.panel] == p


def test_jobs_must_be_a_whole_number_of_processes():
    schedule = _mixed_schedule()
    for bad in (0, -1, 1.5, True):
        with pytest.raises(ValueError, match="jobs"):
            audit_schedule(schedule, load_ruleset("standard"), jobs=bad)
        # audit() says so before it reads anything (the schedule named here does not exist)
        with pytest.raises(ValueError, match="jobs"):
            audit(["no-such-schedule.xlsx"], jobs=bad)


def test_a_panels_modes_read_as_records_and_travel_as_arrays():
    # The mode list makes each record when read: it must read exactly as the records made one
    # by one from the same arrays (index, slice, iteration, equality), and survive a round
    # trip through pickle (how worker processes send it back).
    import pickle

    from auditor.model import Panel, SourceRef
    from auditor.physics.modes import ModeList, modes_for

    panel = Panel(panel="L-1", source=SourceRef("p.xlsx", "Panels", 3), width=1.8, length=1.2,
                  material="film", areal_density=0.25, tension_x=900.0, tension_y=700.0,
                  room_side="air", plenum_side="air")
    solved = modes_for(panel, 300.0)
    listed = solved.modes
    assert isinstance(listed, ModeList) and len(listed) == len(solved.frequency_hz) > 50
    records = [listed[k] for k in range(len(listed))]
    assert list(listed) == records
    assert listed[-1] == records[-1] and listed[5:9] == records[5:9]
    assert [m.frequency_hz for m in records] == sorted(m.frequency_hz for m in records)
    assert records[0].label == solved.labels[0]
    again = pickle.loads(pickle.dumps(listed, protocol=pickle.HIGHEST_PROTOCOL))
    assert isinstance(again, ModeList) and again == listed and list(again) == records
    with pytest.raises(IndexError):
        listed[len(listed)]


def test_two_modes_named_after_one_panel_mode_are_told_apart_in_findings_and_shapes(tmp_path):
    # A 2.4 m film disc over a 300 mm sealed plenum (the demo's F-04): the cavity splits its
    # (0,5) mode in two loaded modes, near 91.6 and 106.0 Hz (Dowell, Gorman & Smith, J. Sound
    # Vib. 52, 1977, for the coupling), named "(0,5)" and "(0,5)b". A tone on each gives a
    # finding on each, and the shape drawn for each finding is that of its own mode.
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Panel", "Zone", "Shape", "Diameter (mm)", "Material", "Areal density (g/m²)",
               "Tension (N/m)", "Room side", "Plenum side", "Cavity depth (mm)"])
    ws.append(["D-1", "Foyer", "circle", 2400, "film", 230, 900, "air", "sealed", 300])
    eq = wb.create_sheet("Equipment")
    eq.append(["Tag", "Kind", "Zone", "Frequency (Hz)"])
    eq.append(["T-LOW", "tone", "Foyer", 92.0])
    eq.append(["T-HIGH", "tone", "Foyer", 106.0])
    path = tmp_path / "disc.xlsx"
    wb.save(path)
    (panel,) = audit([path], jobs=1).panels
    named = {f.mode.label: f.mode.frequency_hz for f in panel.findings}
    assert named["(0,5)"] == pytest.approx(91.6, abs=0.5)
    assert named["(0,5)b"] == pytest.approx(106.0, abs=0.5)
    labels = [m.label for m in panel.modes]
    assert len(set(labels)) == len(labels)
    shapes = {s.label: np.asarray(s.values) for s in panel.shapes}
    low, high = shapes["(0,5)"], shapes["(0,5)b"]
    inside = np.isfinite(low)
    assert not np.allclose(low[inside], high[inside], atol=0.05)
