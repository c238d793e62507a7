"""The machine-readable outputs: findings.json, findings.csv and the audited workbook.

A small real audit: a film panel (no air on either side, so its modes are the ideal
membrane's, Rayleigh's f_mn = ½·√(T/ρs)·√((m/Lx)² + (n/Ly)²); The Theory of Sound, vol. I,
§194) with a fan whose blade-pass (blades × rpm / 60, common practice) sits 3 % above its
fundamental: a conflict with a remedy. A second panel no equipment reaches (clear), a
rejected row. The outputs are checked against the formats' own standards (RFC 8259 for JSON,
RFC 4180 for CSV, ECMA-376 for the workbook) and against each other: the verdict and remedy of
the panel in conflict in all three, nothing lost, the mode count against Rayleigh's.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math
import re
import zipfile
from xml.etree import ElementTree

import openpyxl
import pytest

from auditor.audit import audit
from auditor.remedy import SAFETY_NOTE, remedy_advice
from auditor.report.exports import (
    CSV_COLUMNS,
    LOWEST_MODES_LISTED,
    findings_csv,
    findings_document,
    findings_json,
    write_audited_workbooks,
    write_csv,
    write_json,
)
from auditor.report.workbook import (
    REJECTED_COLOUR,
    STATUS_HEADERS,
    VERDICT_COLOURS,
    VERDICT_SHEET_COLUMNS,
)
from auditor.results import VERDICTS, Mode

WIDTH, LENGTH, TENSION, DENSITY, BLADES = 1.2, 0.9, 800.0, 0.25, 6
MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"


def rayleigh(m: int, n: int, tension=TENSION, width=WIDTH, length=LENGTH, density=DENSITY):
    """Rayleigh, The Theory of Sound, vol. I, §194: the rectangular membrane."""
    return 0.5 * math.sqrt(tension / density) * math.hypot(m / width, n / length)


def rayleigh_count(top_hz: float) -> int:
    """How many membrane modes (m, n) lie at or below ``top_hz``."""
    return sum(1 for m in range(1, 200) for n in range(1, 200) if rayleigh(m, n) <= top_hz)


def _schedule(path, *, fan="AHU-1", panel_id="C-1"):
    """Panels C-1 (Office, in conflict), C-2 (Corridor, nothing reaches it), C-3 (rejected:
    negative width); the fan AHU-1 in the Office, no isolator given (a rigid mount, assumed)."""
    rpm = 1.03 * rayleigh(1, 1) * 60 / BLADES
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
    eq.append([fan, "fan", "Office", rpm, BLADES])
    eq["A2"].data_type = "s"   # typed text, not a formula (ECMA-376 Part 1, §18.18.11)
    pr = wb.create_sheet("Project")
    pr.append(["Key", "Value"])
    pr.append(["Project name", "Test building"])
    pr.append(["Line frequency", 50])
    wb.save(path)
    return path, rpm


@pytest.fixture(scope="module")
def audited(tmp_path_factory):
    folder = tmp_path_factory.mktemp("exports")
    path, rpm = _schedule(folder / "s.xlsx")
    result = audit([path], with_shapes=False)
    out = folder / "out"
    written = {"json": write_json(result, out / "findings.json"),
               "csv": write_csv(result, out / "findings.csv")}
    (written["xlsx"],) = write_audited_workbooks(result, out)
    return result, rpm, written


def _panel(result, panel_id):
    (p,) = [p for p in result.panels if p.panel.panel == panel_id]
    return p


def _with_panels(result, panels):
    return dataclasses.replace(result, panels=tuple(panels))


def _csv_rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


# --- JSON: RFC 8259 ------------------------------------------------------------------------


def _strict_json(data: bytes):
    """Parse as RFC 8259 JSON: UTF-8 without a byte-order mark (§8.1), no NaN or Infinity
    (§6: "Numeric values that cannot be represented ... (such as Infinity and NaN) are not
    permitted")."""
    assert not data.startswith(b"\xef\xbb\xbf")

    def refuse(name):
        raise ValueError(f"{name} is not JSON")

    return json.loads(data.decode("utf-8"), parse_constant=refuse)


def test_findings_json_is_rfc8259_with_no_infinity(audited, tmp_path):
    result, _, written = audited
    doc = _strict_json(written["json"].read_bytes())
    assert isinstance(doc, dict)                  # an object at the top (RFC 8259, §2)
    # a panel assessed to no limit (inf) and with no finding (worst response −inf): null
    clear = dataclasses.replace(_panel(result, "C-2"), assessed_to_hz=math.inf,
                                verdict="not assessed", verdict_reason="tones above")
    path = write_json(_with_panels(result, [clear]), tmp_path / "f.json")
    (panel,) = _strict_json(path.read_bytes())["panels"]
    assert panel["assessed_to_hz"] is None and panel["worst_response_db"] is None
    assert panel["verdict"] == "not assessed"


def test_conflict_panel_verdict_remedy_and_response_in_json(audited):
    result, rpm, written = audited
    doc = json.loads(written["json"].read_text(encoding="utf-8"))
    c1 = next(p for p in doc["panels"] if p["panel"] == "C-1")
    panel = _panel(result, "C-1")
    assert c1["verdict"] == "conflict" and c1["verdict_reason"] == panel.verdict_reason
    assert c1["assessed_to_hz"] == pytest.approx(panel.assessed_to_hz)
    remedy = c1["remedy"]
    assert remedy == {
        "tension": panel.remedy.tension, "tension_y": panel.remedy.tension_y,
        "bays": panel.remedy.bays, "clear_windows": [list(w) for w in panel.remedy.clear_windows],
        "text": panel.remedy.text, "work": True, "verified": panel.remedy.verified,
        "cautions": panel.remedy.cautions, "fundamental_hz": panel.remedy.fundamental_hz}
    assert remedy["fundamental_hz"] > 0
    assert remedy["tension"] <= 1600.0                      # within the rating
    assert any(low <= remedy["tension"] <= high for low, high in remedy["clear_windows"])
    assert all(low < high for low, high in remedy["clear_windows"])
    # the installers' caution once in the document (common practice for tensioned systems)
    assert doc["safety_note"] == SAFETY_NOTE and "trained installers" in SAFETY_NOTE
    findings = c1["findings"]
    assert findings and all("remedy" not in f for f in findings)   # the panel's, not theirs
    # worst first: conflicts, then by response (largest first)
    keys = [(f["severity"] != "conflict", -f["response_db"]) for f in findings]
    assert keys == sorted(keys) and findings[0]["severity"] == "conflict"
    worst = findings[0]
    bpf = BLADES * rpm / 60                                  # common practice
    assert worst["mode"] == "(1,1)" and worst["mode_hz"] == pytest.approx(rayleigh(1, 1))
    assert worst["excitation_hz"] == pytest.approx(bpf)
    assert worst["separation"] == pytest.approx((rayleigh(1, 1) - bpf) / bpf)
    # response = 20·log10(p·|H|·T): (1,1) participation 64/π⁴ (uniform pressure on a
    # rectangle), |H| = 1/√((1 − ρ²)² + η²) (Harris' Shock and Vibration Handbook, ch. 2),
    # T = 1 for an airborne tone
    rho, eta = bpf / rayleigh(1, 1), worst["loss_factor"]
    expected = 20 * math.log10(64 / math.pi**4 / math.sqrt((1 - rho**2) ** 2 + eta**2))
    assert worst["participation"] == pytest.approx(64 / math.pi**4, rel=1e-6)
    assert worst["response_db"] == pytest.approx(expected, abs=0.01)
    assert worst["path"] == "airborne" and worst["transmissibility"] == 1.0
    assert c1["worst_response_db"] == pytest.approx(worst["response_db"])
    # the fan's mount was taken as rigid: an assumption the panel states
    assert any("AHU-1" in a and "rigid" in a for a in c1["assumptions"])
    c2 = next(p for p in doc["panels"] if p["panel"] == "C-2")
    assert c2["remedy"] is None and c2["findings"] == [] and c2["verdict"] == "clear"
    assert not any("AHU-1" in a for a in c2["assumptions"])  # the fan does not reach it


def test_json_lists_the_lowest_modes_and_those_in_findings_with_the_full_count(audited):
    result, _, written = audited
    doc = json.loads(written["json"].read_text(encoding="utf-8"))
    assert doc["modes_listed"] == f"lowest {LOWEST_MODES_LISTED} and those named in findings"
    for p in doc["panels"]:
        panel = _panel(result, p["panel"])
        # the count is every mode assessed: Rayleigh's modes up to the assessed frequency
        assert p["mode_count"] == len(panel.modes) == rayleigh_count(p["assessed_to_hz"])
        listed = [m["frequency_hz"] for m in p["modes"]]
        assert listed == sorted(listed)
        exact = sorted(rayleigh(m, n) for m in range(1, 40) for n in range(1, 40))
        assert listed[:LOWEST_MODES_LISTED] == pytest.approx(exact[:LOWEST_MODES_LISTED])
        named = {(f["mode"], f["mode_hz"]) for f in p["findings"]}
        assert named <= {(m["label"], m["frequency_hz"]) for m in p["modes"]}
        assert len(p["modes"]) <= LOWEST_MODES_LISTED + len(named)
        assert set(p["modes"][0]) >= {"label", "frequency_hz", "multiplicity",
                                      "participation", "nodal_lines", "loss_factor"}


def test_a_panel_with_fifty_thousand_modes_stays_a_small_document(audited):
    # the largest demo panel has ~50,000 modes up to its limit; the document lists a few
    result, _, _ = audited
    panel = _panel(result, "C-1")
    pairs = sorted((rayleigh(m, n), m, n) for m in range(1, 251) for n in range(1, 201))
    many = tuple(Mode(f"({m},{n})", f, participation=0.0) for f, m, n in pairs[:50_000])
    big = dataclasses.replace(panel, modes=many + tuple(f.mode for f in panel.findings))
    text = findings_json(_with_panels(result, [big]))
    (p,) = json.loads(text)["panels"]
    assert p["mode_count"] == 50_000 + len(panel.findings)
    assert len(p["modes"]) <= LOWEST_MODES_LISTED + len(panel.findings)
    assert len(text.encode()) < 60_000


def test_panels_are_ranked_worst_first_in_json(audited):
    result, _, _ = audited
    c1, c2 = _panel(result, "C-1"), _panel(result, "C-2")
    cautions = tuple(f for f in c1.findings if f.severity == "caution")
    panels = [
        dataclasses.replace(c2, panel=dataclasses.replace(c2.panel, panel="K-clear")),
        dataclasses.replace(c1, panel=dataclasses.replace(c1.panel, panel="K-caution"),
                            findings=cautions, verdict="caution"),
        dataclasses.replace(c2, panel=dataclasses.replace(c2.panel, panel="K-open"),
                            verdict="not assessed"),
        c1,
    ]
    doc = findings_document(_with_panels(result, panels))
    assert [p["verdict"] for p in doc["panels"]] == list(VERDICTS)   # conflict … clear
    assert [p["panel"] for p in doc["panels"]] == ["C-1", "K-open", "K-caution", "K-clear"]


# --- CSV: RFC 4180 -------------------------------------------------------------------------

# RFC 4180, §2 (ABNF): file = [header CRLF] record *(CRLF record) [CRLF];
# field = escaped / non-escaped; escaped = DQUOTE *(TEXTDATA / COMMA / CR / LF / 2DQUOTE) DQUOTE
_FIELD = r'(?:"(?:[^"]|"")*"|[^",\r\n]*)'
_RECORD = rf"{_FIELD}(?:,{_FIELD})*"
_FILE = re.compile(rf"{_RECORD}(?:\r\n{_RECORD})*(?:\r\n)?")


def test_findings_csv_follows_rfc4180(audited):
    result, _, written = audited
    c1 = _panel(result, "C-1")
    odd = 'C-1, "north"\r\nbay'          # a comma, quotes and a line break in one field
    renamed = dataclasses.replace(c1, panel=dataclasses.replace(c1.panel, panel=odd))
    text = findings_csv(_with_panels(result, [renamed, _panel(result, "C-2")]))
    assert _FILE.fullmatch(text)
    assert text.endswith("\r\n") and "\n" not in text.replace("\r\n", "")
    assert '"C-1, ""north""\r\nbay"' in text          # §2.6, §2.7: quoted, quotes doubled
    rows = list(csv.reader(io.StringIO(text, newline=""), strict=True))
    assert rows[0] == list(CSV_COLUMNS) and len(set(rows[0])) == len(rows[0])   # §2.3
    assert all(len(r) == len(CSV_COLUMNS) for r in rows)                        # §2.4
    assert odd in {r[1] for r in rows}
    # the file on disk: the same text, UTF-8 with a byte-order mark for spreadsheets
    raw = written["csv"].read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf") and _FILE.fullmatch(raw[3:].decode("utf-8"))


def test_csv_rows_carry_the_panel_verdict_and_remedy_and_lose_nothing(audited):
    result, _, written = audited
    rows = _csv_rows(written["csv"].read_text(encoding="utf-8-sig"))
    c1 = _panel(result, "C-1")
    mine = [r for r in rows if r["panel"] == "C-1"]
    assert len(mine) == len(c1.findings)
    for r in mine:
        assert r["verdict"] == "conflict"
        assert r["remedy"] == remedy_advice(c1.remedy) and SAFETY_NOTE in r["remedy"]
        assert float(r["remedy_tension_n_per_m"]) == pytest.approx(c1.remedy.tension, abs=0.05)
        assert float(r["assessed_to_hz"]) == pytest.approx(c1.assessed_to_hz, abs=0.05)
        assert "rigid" in r["assumptions"]
    # one row per finding, worst first across the project
    found = [r for r in rows if r["severity"] in ("conflict", "caution")]
    keys = [(r["severity"] != "conflict", -float(r["response_db"])) for r in found]
    assert keys == sorted(keys)
    # every audited panel is in the table: a panel with no finding has a row with its verdict
    (c2,) = [r for r in rows if r["panel"] == "C-2"]
    assert c2["severity"] == "no finding" and c2["verdict"] == "clear" and c2["verdict_reason"]
    assert {r["panel"] for r in rows if r["verdict"]} == {p.panel.panel for p in result.panels}
    # the rejected row is listed with its file, sheet and row
    assert [(r["file"], r["sheet"], r["row"]) for r in rows if r["severity"] == "rejected row"
            ] == [("s.xlsx", "Panels", "5")]


def test_a_no_change_remedy_proposes_no_tension_in_the_tables(audited):
    # a panel with cautions only is left as scheduled: its remedy carries the scheduled
    # tension, which the tables must not show as a proposal (the JSON keeps the record)
    result, _, _ = audited
    c1 = _panel(result, "C-1")
    kept = dataclasses.replace(c1.remedy, tension=TENSION, tension_y=TENSION, work=False,
                               text="No change needed: no conflict at the scheduled tension.")
    caution = dataclasses.replace(
        c1, verdict="caution", remedy=kept,
        findings=tuple(f for f in c1.findings if f.severity == "caution"))
    changed = _with_panels(result, [caution])
    rows = _csv_rows(findings_csv(changed))
    assert rows and all(r["remedy_tension_n_per_m"] == "" and r["remedy_bays"] == ""
                        for r in rows if r["panel"] == "C-1")
    assert all(r["remedy"] == kept.text and SAFETY_NOTE not in r["remedy"] for r in rows
               if r["panel"] == "C-1")
    (panel,) = findings_document(changed)["panels"]
    assert panel["remedy"]["tension"] == TENSION and panel["remedy"]["work"] is False


def test_new_columns_are_neutralised_too(tmp_path):
    # OWASP, "CSV Injection": text starting with = + - @ gets a leading apostrophe; the
    # equipment tag reaches the assumptions column ("=AHU mount: …") and the remedy text
    path, _ = _schedule(tmp_path / "s.xlsx", fan="=AHU", panel_id="@C1")
    result = audit([path], with_shapes=False)
    rows = _csv_rows(findings_csv(result))
    cells = [v for r in rows for v in r.values() if v]
    assert "'@C1" in cells and "@C1" not in cells
    assert any(v.startswith("'=AHU mount") for v in cells)
    assert not [v for v in cells if v[0] in "=+@\t\r"]
    (written,) = write_audited_workbooks(result, tmp_path / "out")
    wb = openpyxl.load_workbook(written)
    for name in ("Panel verdicts", "Findings", "Panels"):
        for row in wb[name].iter_rows():
            for cell in row:
                if isinstance(cell.value, str) and cell.value.lstrip("'").startswith("=AHU"):
                    assert cell.value.startswith("'") and cell.data_type == "s", cell.coordinate


# --- the audited workbook: ECMA-376 ----------------------------------------------------------


def _rgb(cell) -> str:
    return (cell.fill.fgColor.rgb or "")[-6:].upper() if cell.fill.fill_type == "solid" else ""


def test_status_column_is_coloured_by_verdict_beside_assessed_range_and_remedy(audited):
    result, _, written = audited
    wb = openpyxl.load_workbook(written["xlsx"])
    ws = wb["Panels"]
    head = [c.value for c in ws[2]]
    first = head.index("Audit status") + 1
    assert first == 10 and head[first - 1:] == list(STATUS_HEADERS)   # after the last column
    column = {title: first + k for k, title in enumerate(STATUS_HEADERS)}
    c1 = _panel(result, "C-1")
    status = ws.cell(row=3, column=first)
    assert status.value == "conflict" and _rgb(status) == VERDICT_COLOURS["conflict"]
    assessed = ws.cell(row=3, column=column["Assessed to (Hz)"])
    assert assessed.data_type == "n" and assessed.value == pytest.approx(c1.assessed_to_hz,
                                                                         abs=0.05)
    tension = ws.cell(row=3, column=column["Remedy tension (N/m)"])
    assert tension.data_type == "n" and tension.value == pytest.approx(c1.remedy.tension)
    assert ws.cell(row=3, column=column["Remedy"]).value == remedy_advice(c1.remedy)
    assert ws.cell(row=3, column=column["Verdict reason"]).value == c1.verdict_reason
    clear = ws.cell(row=4, column=first)
    assert clear.value == "clear" and _rgb(clear) == VERDICT_COLOURS["clear"]
    rejected = ws.cell(row=5, column=first)
    assert rejected.value.startswith("rejected") and _rgb(rejected) == REJECTED_COLOUR
    # the colours are told apart, and the header's note names them
    assert len({*VERDICT_COLOURS.values(), REJECTED_COLOUR}) == 5
    note = ws.cell(row=2, column=first).comment.text
    assert all(word in note for word in ("red conflict", "amber caution", "green clear",
                                         "grey not assessed"))
    assert ws.freeze_panes == "A3"                                     # the header row frozen


def test_added_sheets_freeze_headers_filter_and_lose_no_panel(audited):
    result, _, written = audited
    wb = openpyxl.load_workbook(written["xlsx"])
    verdicts = wb["Panel verdicts"]
    legend = {c.value: _rgb(c) for c in verdicts[1][1:] if c.value}
    assert legend == {**VERDICT_COLOURS, "rejected row": REJECTED_COLOUR}
    assert [c.value for c in verdicts[2]] == list(VERDICT_SHEET_COLUMNS)
    listed = [verdicts.cell(row=r, column=1).value for r in range(3, verdicts.max_row + 1)]
    assert sorted(listed) == sorted(p.panel.panel for p in result.panels)   # nothing lost
    assert listed == [p.panel.panel for p in result.ranked_panels()]        # worst first
    verdict_cells = [verdicts.cell(row=r, column=2) for r in range(3, verdicts.max_row + 1)]
    assert all(_rgb(c) == VERDICT_COLOURS[c.value] for c in verdict_cells)
    assert verdicts.freeze_panes == "C3"
    assert verdicts.auto_filter.ref == f"A2:R{verdicts.max_row}"
    findings = wb["Findings"]
    assert [c.value for c in findings[1]] == list(CSV_COLUMNS)
    assert findings.max_row - 1 == sum(len(p.findings) for p in result.panels)
    assert findings.freeze_panes == "C2"
    assert findings.auto_filter.ref == f"A1:AJ{findings.max_row}"
    severities = [findings.cell(row=r, column=1) for r in range(2, findings.max_row + 1)]
    assert severities[0].value == "conflict"
    assert all(_rgb(c) == VERDICT_COLOURS[c.value] for c in severities)
    rejected = wb["Rejected rows"]
    assert [rejected.cell(row=r, column=2).value for r in range(2, rejected.max_row + 1)
            ] == ["C-3"]
    # ECMA-376 Part 1, §18.18.11 ST_CellType: text is "s", numbers "n" (section from memory)
    for ws in (verdicts, findings, rejected):
        assert {c.data_type for row in ws.iter_rows() for c in row
                if c.value is not None} <= {"s", "n"}


def _sheet_xml(path, title):
    """The worksheet part of ``title`` (workbook.xml names it, its relationships point to it)."""
    with zipfile.ZipFile(path) as archive:
        book = ElementTree.fromstring(archive.read("xl/workbook.xml"))
        rels = ElementTree.fromstring(archive.read("xl/_rels/workbook.xml.rels"))
        rel = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"
        rid = next(s.get(rel) for s in book.iter(f"{MAIN}sheet") if s.get("name") == title)
        target = next(r.get("Target") for r in rels if r.get("Id") == rid)
        name = target.lstrip("/") if target.startswith("/") else "xl/" + target
        return ElementTree.fromstring(archive.read(name)), ElementTree.fromstring(
            archive.read("xl/styles.xml"))


def test_workbook_parts_say_frozen_filtered_and_filled(audited):
    _, _, written = audited
    sheet, styles = _sheet_xml(written["xlsx"], "Findings")
    # ECMA-376 Part 1, §18.3.1.66 pane: a frozen pane (state "frozen", §18.18.53
    # ST_PaneState) with xSplit columns and ySplit rows before topLeftCell
    (pane,) = sheet.iter(f"{MAIN}pane")
    assert pane.get("state") == "frozen" and pane.get("topLeftCell") == "C2"
    assert float(pane.get("xSplit")) == 2 and float(pane.get("ySplit")) == 1
    # §18.3.1.2 autoFilter (section from memory): the range its ref attribute names
    (auto,) = sheet.iter(f"{MAIN}autoFilter")
    assert re.fullmatch(r"A1:AJ\d+", auto.get("ref"))
    # §18.8.32 patternFill (section from memory): a solid fill with its foreground colour
    solid = {(f.find(f"{MAIN}fgColor").get("rgb") or "")[-6:].upper()
             for f in styles.iter(f"{MAIN}patternFill") if f.get("patternType") == "solid"}
    assert {VERDICT_COLOURS["conflict"], VERDICT_COLOURS["caution"]} <= solid
