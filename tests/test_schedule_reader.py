"""The schedule reader on a deliberately messy workbook, CSV files, the template and the demo."""

from __future__ import annotations

import hashlib
import json
import re
import zipfile
from pathlib import Path

import openpyxl
import pytest
from typer.testing import CliRunner

from auditor.cli import app
from auditor.model import CircleCutout, PolygonCutout
from auditor.schedule import read_schedule, schedule_to_dict, write_template
from auditor.schedule import sources
from auditor.schedule.serialise import typed_values

# NIST SP 811 (2008) Appendix B exact definitions
INCH = 0.0254
POUND_FORCE = 0.45359237 * 9.80665  # N

DEMO = Path(__file__).resolve().parents[1] / "templates" / "demo-project.xlsx"


def _add_cached_value(path: Path, cell: str, value: str) -> None:
    """Give one formula cell a saved value, as a spreadsheet program would on saving.

    openpyxl writes formulas with an empty ``<v />``; this rewrites the sheet part of the
    archive so that the cell carries ``<v>value</v>`` (ECMA-376 Part 1 §18.3.1.96).
    """
    with zipfile.ZipFile(path) as zin:
        parts = {info.filename: zin.read(info.filename) for info in zin.infolist()}
    name = "xl/worksheets/sheet1.xml"
    xml = parts[name].decode("utf-8")
    pattern = re.compile(rf'(<c r="{cell}"[^>]*>\s*<f>[^<]*</f>)\s*<v\s*/>')
    assert pattern.search(xml), "formula cell not found"
    parts[name] = pattern.sub(rf"\g<1><v>{value}</v>", xml).encode("utf-8")
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for filename, data in parts.items():
            zout.writestr(filename, data)


@pytest.fixture(scope="module")
def messy(tmp_path_factory) -> Path:
    path = tmp_path_factory.mktemp("messy") / "messy.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Ceilings"
    ws["A1"] = "Messy schedule, rev B"
    ws.merge_cells("A1:F1")  # merged title
    ws["A3"] = "issued for comment"
    header = ["Panel ID", "ZONE", "Width (mm)", "Length [in]", "areal-density (g/m²)",
              "Tension", "Material", "Plenum side", "Cavity depth (mm)", "Remarks"]
    for j, h in enumerate(header, start=1):
        ws.cell(row=4, column=j, value=h)
    rows = {
        5: ["P1", "North", 1200, 48, 250, "900 N/m", "film", "air"],
        6: ["P2", None, "1.5 m", 24, 200, "5 lbf/in", "Film", "sealed", 300],
        # row 7 blank
        8: ["P3", "South", -1200, 48, 250, 900, "film", "air"],
        9: ["P1", "South", 1000, 40, 250, 900, "film", "air"],
        10: ["P4", "South", "wide", 40, 250, 900, "film", "air"],
        11: ["P5", "South", "=1000+200", 40, 250, 900, "film", "air"],
        12: ["P6", "South", "=A1*2", 40, 250, 900, "film", "air"],
        13: ["P7", "South", 1000, 40, 250, 900, "flim", "air"],
        14: ["P8", "South", 1000, 40, 250, 900, "film", "sealed"],
        15: ["P9", "South", 1000, 40, 2000, 900, "film", "air", None, "heavy"],
    }
    for r, values in rows.items():
        for j, v in enumerate(values, start=1):
            if v is not None:
                ws.cell(row=r, column=j, value=v)
    ws.merge_cells("B5:B6")  # zone merged down two rows

    eq = wb.create_sheet("Plant")
    for j, h in enumerate(["Tag", "Type", "Speed (rpm)", "Blades", "Vanes", "Zone"], 1):
        eq.cell(row=1, column=j, value=h)
    eq.append(["AHU-1", "fan", 1450, 12, None, "North, South"])
    eq.append(["AHU-2", "fan", None, 12, None, "all"])
    eq.append(["CHW-1", "pump", "48.3 Hz", None, None, None])

    project = wb.create_sheet("Project")
    project.append(["Key", "Value"])
    project.append(["Project name", "Messy test"])
    project.append(["Line frequency", "60 Hz"])
    project.append(["Colour scheme", "blue"])

    wb.create_sheet("Scratch")["A1"] = "hello"
    wb.create_sheet("Read me")["A1"] = "Panel | Width — this sheet is for people"
    wb.save(path)
    _add_cached_value(path, "C11", "1200")
    return path


def _problems(schedule):
    return sorted((p.sheet, p.row, p.column, p.severity) for p in schedule.problems)


def test_messy_workbook_records(messy):
    s = read_schedule([messy])
    assert [p.panel for p in s.panels] == ["P1", "P2", "P5", "P9"]
    p1, p2, p5, p9 = s.panels
    assert p1.width == pytest.approx(1.2) and p1.length == pytest.approx(48 * INCH)
    assert p1.areal_density == pytest.approx(0.25)
    assert p1.tension_x == p1.tension_y == pytest.approx(900.0)
    assert p1.source.row == 5 and p1.source.sheet == "Ceilings"
    # merged zone cell fills the row below; cell units override the header's
    assert p2.zone == "North"
    assert p2.width == pytest.approx(1.5) and p2.length == pytest.approx(24 * INCH)
    assert p2.tension_x == pytest.approx(5 * POUND_FORCE / INCH, rel=1e-12)
    assert p2.plenum_side == "sealed" and p2.cavity_depth == pytest.approx(0.3)
    # a formula with a saved value is read as that value
    assert p5.width == pytest.approx(1.2)
    assert p9.areal_density == pytest.approx(2.0)
    assert ("Width (mm)", "1200") in p1.entered and ("Tension", "900 N/m") in p1.entered
    assert typed_values(p1)["width"] == "1200 mm"


def test_messy_workbook_problems(messy):
    s = read_schedule([messy])
    expected = [
        ("Ceilings", 8, "Width (mm)", "error"),         # negative width
        ("Ceilings", 9, "Panel ID", "error"),           # duplicate of row 5
        ("Ceilings", 10, "Width (mm)", "error"),        # text in a number cell
        ("Ceilings", 12, "Width (mm)", "error"),        # formula with no saved value
        ("Ceilings", 13, "Material", "error"),          # unknown word
        ("Ceilings", 14, "Cavity depth (mm)", "error"),  # sealed without depth
        ("Ceilings", 15, "areal-density (g/m²)", "warning"),  # outside the usual range
        ("Plant", 3, "Speed (rpm)", "error"),           # fan without speed
        ("Plant", 4, "Vanes", "error"),                 # pump without vanes
        ("Scratch", None, "", "warning"),               # no header on the sheet
    ]
    assert _problems(s) == sorted(expected, key=lambda t: (t[0], t[1] or 0, t[2], t[3]))
    by_row = {(p.sheet, p.row): p for p in s.problems}
    assert "row 5" in by_row[("Ceilings", 9)].message
    assert by_row[("Ceilings", 10)].text == "wide"
    assert "no saved value" in by_row[("Ceilings", 12)].message
    assert "did you mean 'film'" in by_row[("Ceilings", 13)].message
    assert "0.1-0.6" in by_row[("Ceilings", 15)].message
    assert "common practice" in by_row[("Ceilings", 15)].message
    assert by_row[("Ceilings", 15)].record == "P9"


def test_messy_workbook_equipment_and_project(messy):
    s = read_schedule(messy)
    assert [e.equipment for e in s.equipment] == ["AHU-1"]
    assert s.equipment[0].zones == ("North", "South")
    assert s.equipment[0].rpm == 1450 and s.equipment[0].blades == 12
    assert s.project.name == "Messy test"
    assert s.project.line_frequency == 60.0
    assert s.project.extra == (("Colour scheme", "blue"),)
    assert s.project.air_density == 1.204  # default: dry air at 20 °C (common practice)


def test_every_data_row_is_a_record_or_an_error(messy):
    s = read_schedule(messy)
    data_rows = {("Ceilings", r) for r in (5, 6, 8, 9, 10, 11, 12, 13, 14, 15)}
    data_rows |= {("Plant", r) for r in (2, 3, 4)}
    records = {(p.source.sheet, p.source.row) for p in s.panels}
    records |= {(e.source.sheet, e.source.row) for e in s.equipment}
    errors = {(p.sheet, p.row) for p in s.rejected}
    assert records | errors == data_rows
    assert not records & errors


def test_file_hash_is_recorded(messy):
    s = read_schedule(messy)
    assert s.files[0].sha256 == hashlib.sha256(messy.read_bytes()).hexdigest()


def test_fast_reader_agrees_with_openpyxl(messy):
    data = messy.read_bytes()
    fast = sources._load_workbook(data, "messy")
    slow = sources._load_workbook_with_openpyxl(data, "messy")
    assert [(s.name, s.rows) for s in fast] == [(s.name, s.rows) for s in slow]


def test_progress_reaches_total(messy):
    calls = []
    read_schedule([messy, messy], progress=lambda done, total: calls.append((done, total)))
    assert calls[-1][0] == calls[-1][1]
    assert all(a[0] <= b[0] for a, b in zip(calls, calls[1:]))


def test_two_files_share_ids(messy):
    s = read_schedule([messy, messy])
    second = [p for p in s.problems if p.file == str(messy) and "already used" in p.message]
    assert len(s.panels) == 4  # the second file's panels all repeat the first's ids
    assert len(second) >= 4


def test_csv_with_bom_and_semicolons(tmp_path):
    path = tmp_path / "panels.csv"
    text = ("Panel;Width (mm);Length (mm);Weight (g/m²);Tension x (N/m);Tension y (N/m);"
            "Material;Outline (mm);Cut-outs (mm)\r\n"
            "A1;1200;600;0,25 kg/m²;800;600;fabric;;\r\n"
            "\r\n"
            'A2;;;300;900;900;film;"0,0; 2000,0; 2000,1000; 0,1000";"circle 1000,500,300 | '
            '200,200; 400,200; 400,400"\r\n'
            "A3;1200;600;abc;800;600;fabric;;\r\n")
    path.write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    s = read_schedule(path)
    assert [p.panel for p in s.panels] == ["A1", "A2"]
    a1, a2 = s.panels
    assert a1.areal_density == pytest.approx(0.25)  # decimal comma in a semicolon file
    assert (a1.tension_x, a1.tension_y) == (800.0, 600.0) and not a1.isotropic
    assert a2.shape == "polygon"  # inferred from the outline
    assert a2.outline == ((0.0, 0.0), (2.0, 0.0), (2.0, 1.0), (0.0, 1.0))
    assert a2.cutouts[0] == CircleCutout(1.0, 0.5, 0.3)
    assert isinstance(a2.cutouts[1], PolygonCutout) and len(a2.cutouts[1].vertices) == 3
    (problem,) = s.problems
    assert (problem.row, problem.column, problem.text) == (5, "Weight (g/m²)", "abc")
    assert s.files[0].sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


def test_csv_comma_and_multiline_cell_line_numbers(tmp_path):
    path = tmp_path / "plant.csv"
    path.write_text('Tag,Kind,rpm,Blades,Notes\nF1,fan,1450,12,"two\nlines"\nF2,fan,,12,x\n',
                    encoding="utf-8")
    s = read_schedule(path)
    assert [e.equipment for e in s.equipment] == ["F1"]
    assert [(p.row, p.column) for p in s.problems] == [(4, "rpm")]  # F2 starts on line 4


def test_polygon_geometry_checks(tmp_path):
    path = tmp_path / "poly.csv"
    path.write_text(
        "Panel,Shape,Outline (m),Cut-outs (m),Areal density,Tension\n"
        'B1,polygon,"0,0; 1,1; 1,0; 0,1",,0.25,900\n'          # edges cross
        'B2,polygon,"0,0; 1,0",,0.25,900\n'                     # two vertices
        'B3,polygon,"0,0; 2,0; 2,1; 0,1","circle 1.9,0.5,0.4",0.25,900\n'  # reaches the edge
        'B4,rectangle,,"circle 1,0.5,0.2",0.25,900\n',          # rectangle without sizes
        encoding="utf-8")
    s = read_schedule(path)
    assert s.panels == ()
    got = sorted((p.row, p.column) for p in s.problems)
    assert got == [(2, "Outline (m)"), (3, "Outline (m)"), (4, "Cut-outs (m)"),
                   (5, "length"), (5, "width")]


def test_equipment_validation(tmp_path):
    path = tmp_path / "eq.csv"
    path.write_text(
        "Equipment,Kind,rpm min,rpm max,Poles,Slip,Frequency min,Frequency max,Velocity,"
        "Wire diameter (mm)\n"
        "V1,fan,1400,600,,,,,,\n"        # min above max (and no blades)
        "M1,motor,,,5,,,,,\n"            # odd poles
        "M2,motor,,,4,3 %,,,,\n"         # good
        "T1,tone,,,,,40,63,,\n"          # good band
        "W1,flow,,,,,,,12,2\n"           # good
        "X1,whistle,,,,,,,,\n",          # unknown kind
        encoding="utf-8")
    s = read_schedule(path)
    assert [e.equipment for e in s.equipment] == ["M2", "T1", "W1"]
    m2, t1, w1 = s.equipment
    assert m2.slip == pytest.approx(0.03) and m2.zones is None
    assert (t1.frequency_min, t1.frequency_max) == (40.0, 63.0)
    assert w1.wire_diameter == pytest.approx(0.002)
    errors = sorted((p.row, p.column) for p in s.rejected)
    assert (2, "rpm min") in errors and (2, "Blades") not in errors
    assert (3, "Poles") in errors and (7, "Kind") in errors


def test_template_reads_back_clean(tmp_path):
    path = write_template(tmp_path / "blank.xlsx")
    s = read_schedule(path)
    assert s.panels == () and s.equipment == ()
    assert s.problems == ()
    assert s.project.air_density == pytest.approx(1.204)
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["Panels", "Equipment", "Project", "Read me"]
    headers = [c.value for c in wb["Panels"][1]]
    assert "Width (m)" in headers and "Areal density (kg/m²)" in headers
    lists = [dv.formula1 for dv in wb["Panels"].data_validations.dataValidation]
    assert '"rectangle,circle,polygon"' in lists and '"film,fabric,mesh,plate"' in lists
    assert any("fan,pump" in dv.formula1 for dv in wb["Equipment"].data_validations.dataValidation)
    with pytest.raises(FileExistsError):
        write_template(path)


def test_demo_workbook_counts():
    s = read_schedule(DEMO)
    assert len(s.panels) == 30 and len(s.equipment) == 13
    assert {p.shape for p in s.panels} == {"rectangle", "circle", "polygon"}
    assert {p.material for p in s.panels} == {"film", "fabric", "mesh", "plate"}
    assert {p.plenum_side for p in s.panels} == {"air", "sealed", "none"}
    assert {p.room_side for p in s.panels} == {"air", "none"}
    assert {e.kind for e in s.equipment} == {"fan", "pump", "motor", "compressor",
                                             "transformer", "belt", "flow", "tone"}
    assert any(not p.isotropic for p in s.panels)
    assert any(isinstance(c, CircleCutout) for p in s.panels for c in p.cutouts)
    assert any(isinstance(c, PolygonCutout) for p in s.panels for c in p.cutouts)
    assert sorted(p.record for p in s.rejected) == ["X-01", "X-02"]
    assert [p for p in s.problems if p.severity == "warning"] == []
    assert s.project.line_frequency == 50.0
    panel_zones = {p.zone for p in s.panels}
    for e in s.equipment:
        assert e.zones is None or set(e.zones) <= panel_zones


def test_demo_is_regenerable(tmp_path):
    import importlib.util

    spec = importlib.util.spec_from_file_location("build_demo", DEMO.with_name("build_demo.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    again = module.build(tmp_path / "demo.xlsx")
    a, b = schedule_to_dict(read_schedule(DEMO)), schedule_to_dict(read_schedule(again))
    for d in (a, b):
        d.pop("files")
        for record in d["panels"] + d["equipment"]:
            record["source"].pop("file")
        for problem in d["problems"]:
            problem.pop("file")
    assert a == b


def test_schedule_to_dict_is_json(messy):
    d = schedule_to_dict(read_schedule(messy))
    text = json.dumps(d)
    back = json.loads(text)
    assert set(back) == {"panels", "equipment", "project", "problems", "files"}
    first = back["panels"][0]
    assert first["panel"] == "P1" and first["areal_density"] == pytest.approx(0.25)
    assert first["tension_x"] == pytest.approx(900.0)
    assert {"file", "sheet", "row", "column", "message", "severity"} <= set(back["problems"][0])
    assert back["project"]["extra"] == {"Colour scheme": "blue"}


def test_bad_files_are_problems_not_crashes(tmp_path):
    not_zip = tmp_path / "fake.xlsx"
    not_zip.write_text("hello", encoding="utf-8")
    plain_zip = tmp_path / "plain.xlsx"
    with zipfile.ZipFile(plain_zip, "w") as z:
        z.writestr("a.txt", "x")
    bomb = tmp_path / "bomb.xlsx"
    with zipfile.ZipFile(bomb, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", "<Types/>")
        z.writestr("xl/workbook.xml", "<workbook/>")
        z.writestr("xl/worksheets/sheet1.xml", b"\0" * (201 * 10**6))
    s = read_schedule([not_zip, plain_zip, bomb, tmp_path / "missing.xlsx"])
    assert s.files == () and s.panels == ()
    messages = [p.message for p in s.problems]
    assert "not a zip archive" in messages[0]
    assert "not an Excel workbook" in messages[1]
    assert re.search(r"archive expands to 20\d MB; refusing", messages[2])
    assert "does not exist" in messages[3]
    assert all(p.severity == "error" and p.row is None for p in s.problems)


def test_openpyxl_uses_defusedxml():
    # openpyxl parses XML through defusedxml when it is installed (openpyxl.xml docs)
    import openpyxl.xml

    assert openpyxl.xml.DEFUSEDXML is True


def test_cli_check_and_template(tmp_path, messy):
    runner = CliRunner()
    out = tmp_path / "t.xlsx"
    assert runner.invoke(app, ["template", str(out)]).exit_code == 0
    assert runner.invoke(app, ["template", str(out)]).exit_code == 1
    assert runner.invoke(app, ["template", str(out), "--force"]).exit_code == 0
    result = runner.invoke(app, ["check", str(out)])
    assert result.exit_code == 0 and "0 errors" in result.output
    result = runner.invoke(app, ["check", str(messy), "--json"])
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert [p["panel"] for p in data["panels"]] == ["P1", "P2", "P5", "P9"]
    missing = runner.invoke(app, ["check", str(tmp_path / "nope.xlsx")])
    assert missing.exit_code == 2
