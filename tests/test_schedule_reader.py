"""The schedule reader on a deliberately messy workbook, CSV files, the template and the demo."""

from __future__ import annotations

import hashlib
import json
import re
import zipfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from auditor.cli import app
from auditor.model import CircleCutout, PolygonCutout
from auditor.schedule import read_rows, read_schedule, schedule_to_dict, sources, write_template
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


def test_reader_agrees_with_openpyxls_public_reading(messy):
    """Every cell read is the value openpyxl's public read-only iteration gives (saved
    values, ``values_only``), but for the two details that iteration cannot tell: a formula
    with no saved value, and the rows below the top of a merged range."""
    from auditor.schedule.cells import UNCACHED_FORMULA

    sheets = sources._load_workbook(messy.read_bytes(), "messy")
    book = openpyxl.load_workbook(messy, read_only=True, data_only=True)
    try:
        for sheet in sheets:
            public = {r: [v for v in values] for r, values in
                      enumerate(book[sheet.name].iter_rows(values_only=True), start=1)}
            assert [r for r, _ in sheet.rows] == [r for r, v in public.items()
                                                 if any(x is not None for x in v)
                                                 or (sheet.name, r) == ("Ceilings", 6)]
            for row, values in sheet.rows:
                for column, value in enumerate(values):
                    expected = public[row][column]
                    if (sheet.name, row, column) == ("Ceilings", 12, 2):  # =A1*2, not saved
                        assert value is UNCACHED_FORMULA and expected is None
                    elif (sheet.name, row, column) == ("Ceilings", 6, 1):  # merged B5:B6
                        assert value == "North" and expected is None
                    else:
                        assert value == expected and type(value) is type(expected)
    finally:
        book.close()


def test_progress_reaches_total(messy):
    calls = []
    read_schedule([messy, messy], progress=lambda done, total: calls.append((done, total)))
    assert calls[-1][0] == calls[-1][1]
    assert all(a[0] <= b[0] for a, b in zip(calls, calls[1:]))


def test_two_files_share_ids(messy, tmp_path):
    # the same workbook in another folder: a different file of the same name
    other = tmp_path / "copy" / "messy.xlsx"
    other.parent.mkdir()
    other.write_bytes(messy.read_bytes())
    s = read_schedule([messy, other])
    names = [f.path for f in s.files]
    assert names == [f"{messy.parent.name}/messy.xlsx", "copy/messy.xlsx"]
    second = [p for p in s.problems if p.file == "copy/messy.xlsx" and "already used" in p.message]
    assert len(s.panels) == 4  # the second file's panels all repeat the first's ids
    assert len(second) >= 4
    assert f"in {names[0]}" in second[0].message


def test_same_file_twice_is_read_once(messy):
    s = read_schedule([messy, str(messy)])
    assert len(s.files) == 1 and len(s.panels) == 4
    assert [p.message for p in s.problems if p.row is None and p.sheet == ""] == [
        "messy.xlsx is given more than once; it is read once"]


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
    assert [(p.row, p.column) for p in s.rejected] == [(4, "rpm")]  # F2 starts on line 4
    (note,) = [p for p in s.problems if p.severity == "warning"]
    assert note.row is None and "no panel table was found in plant.csv" in note.message


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
        "Wire diameter (mm),Line frequency\n"
        "V1,fan,1400,600,,,,,,,\n"        # min above max (and no blades)
        "M1,motor,,,5,,,,,,50\n"          # odd poles
        "M2,motor,,,4,3 %,,,,,50\n"       # good
        "T1,tone,,,,,40,63,,,\n"          # good band
        "W1,flow,,,,,,,12,2,\n"           # good
        "X1,whistle,,,,,,,,,\n"           # unknown kind
        "M3,motor,,,4,,,,,,\n"            # no line frequency here or on a Project sheet
        "M4,motor,900,1800,,,,,,,50\n",   # variable speed: its poles place the 2 f tone
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
    assert (8, "line frequency") in errors and (9, "Poles") in errors
    # the same motor with the Project sheet's line frequency is read
    project = tmp_path / "project.csv"
    project.write_text("Key,Value\nLine frequency,60 Hz\n", encoding="utf-8")
    s = read_schedule([path, project])
    assert "M3" in [e.equipment for e in s.equipment]


def test_template_reads_back_clean(tmp_path):
    path = write_template(tmp_path / "blank.xlsx")
    s = read_schedule(path)
    assert s.panels == () and s.equipment == ()
    # read (it is in ``files``), with a warning for each empty table and nothing else
    assert [f.path for f in s.files] == ["blank.xlsx"]
    assert [(p.sheet, p.row, p.severity) for p in s.problems] == [
        ("Panels", 1, "warning"), ("Equipment", 1, "warning")]
    assert all("no data rows" in p.message for p in s.problems)
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
        z.writestr("xl/worksheets/sheet1.xml", b"\0" * (51 * 10**6))
    s = read_schedule([not_zip, plain_zip, bomb, tmp_path / "missing.xlsx"])
    assert s.files == () and s.panels == ()
    messages = [p.message for p in s.problems]
    assert "not a zip archive" in messages[0]
    assert "not an Excel workbook" in messages[1]
    assert re.search(r"archive expands to 51 MB; refusing \(the limit is 50 MB\)", messages[2])
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


# --- hardening: every bad input a clear message ----------------------------------------------

def _plain_workbook(path: Path, sheet_xml: str) -> dict[str, bytes]:
    """The parts of a one-sheet workbook written by openpyxl, with the sheet replaced."""
    wb = openpyxl.Workbook()
    wb.active.title = "Panels"
    wb.save(path)
    with zipfile.ZipFile(path) as z:
        parts = {n: z.read(n) for n in z.namelist()}
    parts["xl/worksheets/sheet1.xml"] = sheet_xml.encode("utf-8")
    return parts


_SHEET = ('<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main">'
          "<sheetData>{rows}</sheetData>{tail}</worksheet>")


def _row(r: int, *cells: str) -> str:
    body = "".join(f'<c r="{chr(65 + k)}{r}" t="inlineStr"><is><t>{v}</t></is></c>'
                   for k, v in enumerate(cells) if v)
    return f'<row r="{r}">{body}</row>'


def test_archive_refuses_what_a_spreadsheet_program_never_writes(tmp_path, monkeypatch):
    from auditor.schedule import archive

    parts = _plain_workbook(tmp_path / "base.xlsx", _SHEET.format(rows=_row(1, "Panel"), tail=""))

    def write(name: str, compression=zipfile.ZIP_DEFLATED, twice: str = "") -> Path:
        path = tmp_path / name
        with zipfile.ZipFile(path, "w", compression) as z:
            for part, data in parts.items():
                z.writestr(part, data)
            if twice:
                with pytest.warns(UserWarning, match="Duplicate name"):
                    z.writestr(twice, parts[twice])
        return path

    def refusal(path: Path) -> str:
        with pytest.raises(sources.ScheduleFileError) as caught:
            sources.load_file(path)
        return str(caught.value)

    # APPNOTE.TXT §4.4.5: Excel writes stored (0) or deflated (8) members only
    assert "compression method" in refusal(write("bz.xlsx", zipfile.ZIP_BZIP2))
    assert "names one part twice" in refusal(write("twice.xlsx", twice="xl/workbook.xml"))
    # APPNOTE.TXT §4.4.4: bit 0 of the general purpose flags marks an encrypted member
    data = bytearray(write("plain.xlsx").read_bytes())
    for signature, offset in ((b"PK\x03\x04", 6), (b"PK\x01\x02", 8)):
        for m in re.finditer(re.escape(signature), bytes(data)):
            data[m.start() + offset] |= 1
    locked = tmp_path / "locked.xlsx"
    locked.write_bytes(bytes(data))
    assert "encrypted" in refusal(locked)
    # a document type declaration split across two inflated chunks is still found
    monkeypatch.setattr(archive, "_CHUNK", 64)
    padded = " " * 60 + '<!DOCTYPE x [<!ENTITY a "b">]>' + _SHEET.format(rows="", tail="")
    parts["xl/worksheets/sheet1.xml"] = padded.encode()
    assert "declares an XML document type" in refusal(write("doctype.xlsx"))


@pytest.mark.parametrize(("bom", "codec", "warned"), [
    # byte-order marks: The Unicode Standard 15.0, §23.8
    (b"\xef\xbb\xbf", "utf-8", False),
    (b"\xff\xfe", "utf-16-le", False),
    (b"\xfe\xff", "utf-16-be", False),
    (b"\xff\xfe\x00\x00", "utf-32-le", False),
    (b"\x00\x00\xfe\xff", "utf-32-be", False),
    (b"", "utf-8", False),
    (b"", "utf-16-le", True),   # no mark: found by its zero bytes, and said so
    (b"", "cp1252", True),      # not UTF-8: read as Windows-1252, and said so
])
def test_csv_encodings(tmp_path, bom, codec, warned):
    path = tmp_path / "enc.csv"
    text = ("Panel,Zone,Width (m),Length (m),Areal density,Tension\r\n"
            "P1,Café Süd,1.2,0.6,0.25,900\r\n")
    path.write_bytes(bom + text.encode(codec))
    s = read_schedule(path)
    assert [(p.panel, p.zone) for p in s.panels] == [("P1", "Café Süd")]
    assert bool(s.problems) == warned
    assert all(p.severity == "warning" and p.row is None for p in s.problems)


def test_which_files_count_as_read(tmp_path):
    panels = tmp_path / "panels.csv"
    panels.write_text("Panel,Width,Length,Areal density,Tension\nP1,1,1,0.25,900\n",
                      encoding="utf-8")
    project = tmp_path / "project.csv"
    project.write_text("Key,Value\nProject name,Test\n", encoding="utf-8")
    plant = tmp_path / "plant.csv"
    plant.write_text("Equipment,Kind,rpm,Blades\nF1,fan,1450,12\n", encoding="utf-8")
    nothing = tmp_path / "nothing.csv"
    nothing.write_text("Colour,Size\nred,big\n", encoding="utf-8")
    empty = tmp_path / "empty.xlsx"
    wb = openpyxl.Workbook()
    wb.create_sheet("Read me")["A1"] = "for people"
    wb.save(empty)

    def names(schedule):
        return [f.path for f in schedule.files]

    # project facts alone: nothing to audit, so nothing was read
    alone = read_schedule(project)
    assert names(alone) == [] and alone.project.name == "Test"
    assert "no panel table and no equipment table was found in project.csv (only project " \
           "facts)" in alone.problems[0].message
    # beside a panel table they count (their SHA-256 belongs on the cover)
    assert names(read_schedule([panels, project])) == ["panels.csv", "project.csv"]
    # a file with no table is not read, the others are; the sheets looked at are named
    s = read_schedule([panels, nothing, empty])
    assert names(s) == ["panels.csv"]
    errors = {p.file: p.message for p in s.problems if p.severity == "error"}
    assert "in nothing.csv (the file)" in errors["nothing.csv"]
    assert ("in empty.xlsx (sheets looked at: 'Sheet'; skipped as notes for people: "
            "'Read me')") in errors["empty.xlsx"]
    # equipment alone is read, with a warning that there is no panel to audit
    s = read_schedule(plant)
    assert names(s) == ["plant.csv"] and len(s.equipment) == 1
    assert [p.message for p in s.problems] == [
        "no panel table was found in plant.csv (sheets looked at: 'plant'); there is no "
        "panel to audit"]
    runner = CliRunner()
    assert runner.invoke(app, ["check", "--json", str(nothing)]).exit_code == 2
    assert runner.invoke(app, ["check", "--json", str(plant)]).exit_code == 0


def test_file_names_hold_no_folders(tmp_path, messy):
    from auditor.schedule.inputs import display_names, input_location

    s = read_schedule(messy)
    assert [f.path for f in s.files] == ["messy.xlsx"]
    assert {p.source.file for p in s.panels} == {"messy.xlsx"}
    assert {p.file for p in s.problems} == {"messy.xlsx"}
    assert input_location(s, "messy.xlsx") == messy.resolve()
    assert input_location(s, "other.xlsx") is None
    data = CliRunner().invoke(app, ["check", "--json", str(messy)]).stdout
    assert str(messy.parent) not in data and json.loads(data)["files"][0] == {
        "name": "messy.xlsx", "sha256": hashlib.sha256(messy.read_bytes()).hexdigest()}
    assert display_names(["/a/x/s.xlsx", "/b/x/s.xlsx", "/c/t.csv", "/a/x/s.xlsx"]) == [
        "a/x/s.xlsx", "b/x/s.xlsx", "t.csv", "a/x/s.xlsx"]
    assert display_names(["/b/s.xlsx", "/a/b/s.xlsx"]) == ["b/s.xlsx", "a/b/s.xlsx"]


def test_control_characters_are_removed_and_named(tmp_path):
    from auditor.schedule.cells import clean_text

    # W3C XML 1.0 §2.2: tab, line feed and carriage return are the only C0 characters allowed
    assert clean_text("A\tB\nC") == ("A\tB\nC", False)
    assert clean_text("A\r\nB\rC") == ("A\nB\nC", False)
    assert clean_text("P\x07-1\x1b\x7f\x85\ud800") == ("P-1", True)
    path = tmp_path / "ctl.xlsx"
    sheet = _SHEET.format(rows=_row(1, "Panel", "Zone", "Width", "Length", "Areal density",
                                    "Tension", "Remark")
                          + _row(2, "P_x0007_1", "N_x001B_orth", "1", "1", "0.25", "900",
                                 "ok_x0008_"),
                          tail="")
    parts = _plain_workbook(path, sheet)
    with zipfile.ZipFile(path, "w") as z:
        for name, data in parts.items():
            z.writestr(name, data)
    s = read_schedule(path)
    assert [(p.panel, p.zone) for p in s.panels] == [("P1", "North")]
    warned = {(p.row, p.column, p.text) for p in s.problems if "control characters" in p.message}
    assert warned == {(2, "Panel", "P1"), (2, "Zone", "North"), (2, "Remark", "ok")}
    # outside any table a cell is named by its column letter
    sheet = _SHEET.format(rows=_row(1, "Title_x0007_") + _row(2, "Panel", "Width", "Length",
                                                            "Areal density", "Tension")
                          + _row(3, "P1", "1", "1", "0.25", "900"), tail="")
    parts = _plain_workbook(path, sheet)
    with zipfile.ZipFile(path, "w") as z:
        for name, data in parts.items():
            z.writestr(name, data)
    s = read_schedule(path)
    assert [(p.row, p.column) for p in s.problems] == [(1, "column A")]


def test_rejected_rows_count_each_row_once():
    from auditor.model import RowProblem
    from auditor.schedule.validate import rejected_rows

    problems = [RowProblem("a.xlsx", "Panels", 5, "Width", "bad"),
                RowProblem("a.xlsx", "Panels", 5, "Tension", "bad too"),
                RowProblem("a.xlsx", "Panels", 6, "Zone", "odd", "warning"),
                RowProblem("b.csv", "b", 5, "Width", "bad"),
                RowProblem("c.xlsx", "", None, "", "not a workbook")]
    assert rejected_rows(problems) == (("a.xlsx", "Panels", 5), ("b.csv", "b", 5))


def test_isolator_columns(tmp_path):
    path = tmp_path / "mounts.csv"
    path.write_text(
        "Equipment,Kind,rpm,Blades,Static deflection,Damping ratio\n"
        "F1,fan,1450,12,25 mm,\n"      # a blank damping ratio takes the mount's usual value
        "F2,fan,1450,12,1 in,5 %\n"    # NIST SP 811: 1 in = 0.0254 m exactly
        "F3,fan,1450,12,,\n"           # blank: rigidly mounted
        "F4,fan,1450,12,300,\n"        # 300 mm: softer than any isolator
        "F5,fan,1450,12,25,1.5\n"      # a damping ratio is below 1
        "F6,fan,1450,12,0,\n"          # zero deflection
        "F7,fan,1450,12,,0.05\n",      # damping with no deflection: warned, rigid
        encoding="utf-8")
    s = read_schedule(path)
    got = {e.equipment: (e.isolator_deflection, e.isolator_damping) for e in s.equipment}
    assert got["F1"] == (pytest.approx(0.025), None)
    assert got["F2"] == (pytest.approx(INCH), pytest.approx(0.05))
    assert got["F3"] == (None, None) and set(got) == {"F1", "F2", "F3", "F7"}
    errors = {(p.row, p.column): p.message for p in s.rejected}
    assert "the limit is 0.2 m" in errors[(5, "Static deflection")]
    assert "from above 0 to below 1" in errors[(6, "Damping ratio")]
    assert "must be positive" in errors[(7, "Static deflection")]
    assert any(p.row == 8 and p.severity == "warning" and "rigidly mounted" in p.message
               for p in s.problems)


def test_template_explains_the_isolator_columns(tmp_path):
    wb = openpyxl.load_workbook(write_template(tmp_path / "t.xlsx"))
    headers = [c.value for c in wb["Equipment"][1]]
    assert "Isolator deflection (mm)" in headers and "Isolator damping" in headers
    rows = {r[1]: r for r in wb["Read me"].iter_rows(values_only=True) if r and len(r) > 5}
    assert "rigidly mounted" in rows["Isolator deflection"][5]
    assert "report states" in rows["Isolator deflection"][5]
    assert "static deflection" in rows["Isolator deflection"][4]
    assert "damping ratio" in rows["Isolator damping"][4]


def test_equipment_beyond_any_machine_is_rejected(tmp_path):
    path = tmp_path / "odd.csv"
    path.write_text("Equipment,Kind,rpm,Blades,Harmonics,Frequency\n"
                    "F1,fan,1e6,12,,\n"       # a million rpm
                    "F2,fan,1450,1000,,\n"    # a thousand blades
                    "F3,fan,1450,12,1000,\n"  # a thousand harmonics
                    "T1,tone,,,,50 kHz\n",    # ultrasound
                    encoding="utf-8")
    s = read_schedule(path)
    assert s.equipment == ()
    messages = {p.row: p.message for p in s.rejected}
    assert "the limit is 1e+05 rpm" in messages[2]
    assert "the limit is 200" in messages[3] and "the limit is 100" in messages[4]
    assert "the limit is 2e+04 Hz" in messages[5]


def test_merged_range_stops_at_the_last_row_with_data(tmp_path):
    path = tmp_path / "merge.xlsx"
    sheet = _SHEET.format(rows=_row(1, "Panel", "Zone", "Width", "Length", "Areal density",
                                    "Tension") + _row(2, "P1", "North", "1", "1", "0.25", "900")
                          + _row(3, "P2", "", "1", "1", "0.25", "900"),
                          tail='<mergeCells count="1"><mergeCell ref="B2:B1048576"/></mergeCells>')
    data_parts = _plain_workbook(path, sheet)
    with zipfile.ZipFile(path, "w") as z:
        for name, data in data_parts.items():
            z.writestr(name, data)
    rows = sources._load_workbook(path.read_bytes(), "merge.xlsx")[0].rows
    assert [r for r, _ in rows] == [1, 2, 3] and rows[2][1][1] == "North"


_MAIN_NS = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL_NS = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"


def _workbook_by_hand(path: Path, rows: str, shared: list[str], date1904: bool = False) -> Path:
    """A one-sheet workbook as a spreadsheet program saves one: shared strings (ECMA-376 Part 1
    §18.4), a stylesheet whose cell format 1 shows dates (built-in number format 14,
    §18.8.30) and the 1900 or 1904 date system (§18.2.28)."""
    package = "http://schemas.openxmlformats.org/package/2006/relationships"
    kind = "application/vnd.openxmlformats-officedocument.spreadsheetml."
    parts = {
        "[Content_Types].xml": (
            '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.'
            'relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
            f'<Override PartName="/xl/workbook.xml" ContentType="{kind}sheet.main+xml"/>'
            f'<Override PartName="/xl/worksheets/sheet1.xml" ContentType="{kind}worksheet+xml"/>'
            f'<Override PartName="/xl/styles.xml" ContentType="{kind}styles+xml"/>'
            f'<Override PartName="/xl/sharedStrings.xml" ContentType="{kind}sharedStrings+xml"/>'
            "</Types>"),
        "_rels/.rels": (f'<Relationships xmlns="{package}"><Relationship Id="rId1" '
                        f'Type="{_REL_NS}/officeDocument" Target="xl/workbook.xml"/>'
                        "</Relationships>"),
        "xl/workbook.xml": (f'<workbook xmlns="{_MAIN_NS}" xmlns:r="{_REL_NS}">'
                            f'<workbookPr date1904="{int(date1904)}"/><sheets><sheet '
                            'name="Panels" sheetId="1" r:id="rId1"/></sheets></workbook>'),
        "xl/_rels/workbook.xml.rels": (
            f'<Relationships xmlns="{package}">'
            f'<Relationship Id="rId1" Type="{_REL_NS}/worksheet" Target="worksheets/sheet1.xml"/>'
            f'<Relationship Id="rId2" Type="{_REL_NS}/styles" Target="styles.xml"/>'
            f'<Relationship Id="rId3" Type="{_REL_NS}/sharedStrings" Target="sharedStrings.xml"/>'
            "</Relationships>"),
        "xl/styles.xml": (f'<styleSheet xmlns="{_MAIN_NS}"><fonts count="1"><font/></fonts>'
                          '<fills count="1"><fill><patternFill patternType="none"/></fill></fills>'
                          '<borders count="1"><border/>'
                          '</borders><cellStyleXfs count="1"><xf/></cellStyleXfs>'
                          '<cellXfs count="2"><xf numFmtId="0"/><xf numFmtId="14" '
                          'applyNumberFormat="1"/></cellXfs></styleSheet>'),
        "xl/sharedStrings.xml": (f'<sst xmlns="{_MAIN_NS}" count="{len(shared)}" '
                                 f'uniqueCount="{len(shared)}">' + "".join(shared) + "</sst>"),
        "xl/worksheets/sheet1.xml": (f'<worksheet xmlns="{_MAIN_NS}"><sheetData>{rows}'
                                     "</sheetData></worksheet>"),
    }
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text.encode("utf-8"))
    return path


def test_saved_values_as_a_spreadsheet_program_writes_them(tmp_path):
    from auditor.schedule.cells import UNCACHED_FORMULA

    shared = [
        "<si><t>Panel</t></si>",
        # rich text runs are read, phonetic runs are not (ECMA-376 Part 1 §18.4.8)
        '<si><r><t>P</t></r><r><rPr><b/></rPr><t>1</t></r><rPh sb="0" eb="1"><t>ピ</t></rPh>'
        "</si>",
        # _xHHHH_ is a character; _x005F_ escapes the underscore of a literal "_x0041_"
        # (ECMA-376 Part 1 §22.9.2.19)
        "<si><t>Zone_x0020_A</t></si>",
        "<si><t>A_x005F_x0041_B</t></si>",
    ]
    cells = ('<c r="A1" t="s"><v>0</v></c>'
             '<c r="A2" t="s"><v>1</v></c><c r="B2" t="s"><v>2</v></c>'
             '<c r="C2" t="s"><v>3</v></c>'
             '<c r="D2" t="e"><v>#N/A</v></c>'                         # an error value
             '<c r="E2"><f>0.3*2</f><v>0.6</v></c>'                    # saved result
             '<c r="F2" t="str"><f>IF(1,"","")</f><v></v></c>'         # saved empty text
             '<c r="G2"><f>A1*2</f></c>'                               # nothing saved
             '<c r="H2" s="1"><v>45292</v></c>'                        # a date-formatted serial
             '<c r="I2" t="b"><v>1</v></c>')
    rows = '<row r="1">' + cells[:cells.index('<c r="A2"')] + "</row>" + (
        '<row r="2">' + cells[cells.index('<c r="A2"'):] + "</row>")
    path = _workbook_by_hand(tmp_path / "saved.xlsx", rows, shared)
    (sheet,) = sources._load_workbook(path.read_bytes(), "saved.xlsx")
    assert sheet.name == "Panels" and sheet.rows[0] == (1, ["Panel"])
    row, values = sheet.rows[1]
    assert row == 2
    assert values[:5] == ["P1", "Zone A", "A_x0041_B", "#N/A", 0.6]
    assert values[5] is None                   # blank, not a formula without a value
    assert values[6] is UNCACHED_FORMULA
    # Serial 45292 in the 1900 date system is 2024-01-01: days after 1899-12-30 for any
    # serial above 60 (common practice, the 1900 leap-year convention of ECMA-376 §18.17.4.1)
    import datetime as dt

    assert values[7] == dt.datetime(1899, 12, 30) + dt.timedelta(days=45292)
    assert values[8] is True


def test_1904_date_system(tmp_path):
    import datetime as dt

    # In the 1904 date system serial 0 is 1904-01-01 (ECMA-376 Part 1 §18.17.4.1; from memory)
    path = _workbook_by_hand(tmp_path / "mac.xlsx",
                             '<row r="1"><c r="A1" s="1"><v>1</v></c></row>', [], date1904=True)
    (sheet,) = sources._load_workbook(path.read_bytes(), "mac.xlsx")
    assert sheet.rows == [(1, [dt.datetime(1904, 1, 2)])]


def test_cells_a_spreadsheet_shows_as_errors_are_named(tmp_path):
    shared = [f"<si><t>{h}</t></si>" for h in ("Panel", "Width (m)", "Length (m)",
                                               "Areal density (kg/m²)", "Tension (N/m)")]
    head = "".join(f'<c r="{c}1" t="s"><v>{k}</v></c>' for k, c in enumerate("ABCDE"))
    good = '<c r="B{r}"><v>0.6</v></c><c r="C{r}"><v>0.6</v></c><c r="D{r}"><v>0.25</v></c>'
    rows = (f'<row r="1">{head}</row>'
            '<row r="2"><c r="A2" t="inlineStr"><is><t>E1</t></is></c>'
            + good.format(r=2) + '<c r="E2" t="e"><v>#DIV/0!</v></c></row>'
            '<row r="3"><c r="A3" t="inlineStr"><is><t>E2</t></is></c>'
            + good.format(r=3) + '<c r="E3" s="1"><v>45292</v></c></row>'
            '<row r="4"><c r="A4" t="inlineStr"><is><t>E3</t></is></c>'
            + good.format(r=4) + '<c r="E4"><f>B4*1000</f></c></row>')
    s = read_schedule(_workbook_by_hand(tmp_path / "shown.xlsx", rows, shared))
    messages = {(p.row, p.column): p.message for p in s.rejected}
    assert messages[(2, "Tension (N/m)")] == "the cell shows the spreadsheet error #DIV/0!"
    assert "holds a date or time (2024-01-01)" in messages[(3, "Tension (N/m)")]
    assert "no saved value" in messages[(4, "Tension (N/m)")]
    assert s.panels == ()


def test_too_many_rows_is_one_clear_refusal(tmp_path, monkeypatch):
    monkeypatch.setattr(sources, "MAX_ROWS", 5)
    path = tmp_path / "long.csv"
    path.write_text("Panel,Width\n" + "P,1\n" * 10, encoding="utf-8")
    s = read_schedule(path)
    assert s.files == ()
    assert s.problems[0].message == ("long.csv: the file has more than 5 rows; refusing (split "
                                     "the schedule into several files)")
    book = tmp_path / "long.xlsx"
    wb = openpyxl.Workbook()
    wb.active.title = "Panels"
    for k in range(10):
        wb.active.append(["P", k])
    wb.save(book)
    with pytest.raises(sources.ScheduleFileError,
                       match="long.xlsx: sheet 'Panels' has more than 5 rows; refusing"):
        sources._load_workbook(book.read_bytes(), "long.xlsx")


# --- one validation path: what the reader accepts, the physics and excitations take ----------

_EQUIPMENT_VALUES = {
    "rpm": ["1450", "0"], "rpm min": ["600"], "rpm max": ["1450", "600"], "blades": ["12"],
    "vanes": ["7"], "cylinders": ["4"], "poles": ["4", "3"], "slip": ["3 %"],
    "line frequency": ["50", "60"], "frequency": ["100"], "frequency min": ["40"],
    "frequency max": ["63"], "velocity": ["12"], "wire diameter (mm)": ["2"],
    "pulley diameter (mm)": ["200"], "belt length (mm)": ["1500"], "harmonics": ["3", "0"],
    "isolator deflection (mm)": ["25", "250"], "isolator damping": ["0.05", "0"],
}


@pytest.fixture(scope="module")
def standard_rules():
    from auditor.rules import load_ruleset

    return load_ruleset("standard")


@settings(max_examples=400, deadline=None)
@given(data=st.data())
def test_every_equipment_row_accepted_has_its_tones(data, standard_rules):
    """A row the reader accepts never makes ``auditor.excitation`` reject it (check and audit
    agree): every kind with any subset of its fields, valid or not."""
    from auditor.excitation import ExcitationError, excitations_for
    from auditor.model import EQUIPMENT_KINDS

    kind = data.draw(st.sampled_from(EQUIPMENT_KINDS))
    chosen = {h: data.draw(st.sampled_from(v)) for h, v in _EQUIPMENT_VALUES.items()
              if data.draw(st.booleans())}
    schedule = read_rows(["Equipment", "Kind", *chosen], [["E1", kind, *chosen.values()]])
    ruleset = standard_rules
    for item in schedule.equipment:
        try:
            excitations_for(item, ruleset, project_line_frequency=None)
        except ExcitationError as exc:  # pragma: no cover - the failure being tested for
            pytest.fail(f"{kind} {chosen}: accepted by the reader, rejected by excitations: "
                        f"{exc}")
    assert schedule.equipment or schedule.rejected


_COORDINATE = st.integers(0, 8).map(lambda k: k / 4)  # coarse: collinear and repeated points


@settings(max_examples=300, deadline=None)
@given(data=st.data())
def test_every_shape_accepted_can_be_meshed(data):
    """A panel the reader accepts never fails the physics' geometry test, and a panel it
    rejects for its outline or cut-outs fails it (the same test, on the same outline)."""
    from auditor.model import Panel, SourceRef
    from auditor.physics.modes import GeometryError, basis_factory

    shape = data.draw(st.sampled_from(["polygon", "rectangle", "circle"]))
    points = data.draw(st.lists(st.tuples(_COORDINATE, _COORDINATE), min_size=3, max_size=6))
    outline = "; ".join(f"{x:g},{y:g}" for x, y in points)
    cuts = data.draw(st.lists(st.tuples(_COORDINATE, _COORDINATE,
                                        st.sampled_from([0.1, 0.5, 1.0])), max_size=2))
    cutouts = " | ".join(f"circle {x:g},{y:g},{d:g}" for x, y, d in cuts)
    row = ["P1", shape, outline if shape == "polygon" else "", "1.5", "1", "1.2", cutouts,
           "0.25", "900"]
    schedule = read_rows(["Panel", "Shape", "Outline (m)", "Width", "Length", "Diameter",
                          "Cut-outs (m)", "Areal density", "Tension"], [row])
    geometry_rejected = any(p.column in ("Outline (m)", "Cut-outs (m)", "Width", "Diameter")
                            for p in schedule.rejected)
    if schedule.panels:
        basis_factory(schedule.panels[0])  # raises GeometryError when it cannot be meshed
        return
    assert geometry_rejected, schedule.rejected
    vertices = tuple(points)
    if len(vertices) > 1 and vertices[0] == vertices[-1]:
        vertices = vertices[:-1]  # as the reader takes a closed ring
    from auditor.model import CircleCutout

    panel = Panel(panel="P1", source=SourceRef("x", "x", 2), shape=shape,
                  outline=vertices if shape == "polygon" else None,
                  width=1.5 if shape == "rectangle" else None,
                  length=1.0 if shape == "rectangle" else None,
                  diameter=1.2 if shape == "circle" else None,
                  cutouts=tuple(CircleCutout(x, y, d) for x, y, d in cuts),
                  areal_density=0.25, tension_x=900.0, tension_y=900.0)
    with pytest.raises(GeometryError):
        basis_factory(panel)
