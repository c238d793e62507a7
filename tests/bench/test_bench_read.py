"""Reading speed: a 20 000-panel workbook, read three ways (target: under 3 s of CPU).

Prints, for the same schedule saved two ways (as openpyxl's write-only mode saves it: inline
strings and no dimension; and as a spreadsheet program saves it: shared strings and a
dimension), the wall time, CPU time and peak resident memory of

* the schedule's reader: its workbook stage (``sources._load_workbook``: openpyxl's cell
  conversion, the bounded walk over the sheet) and the whole ``read_schedule``;
* openpyxl's public read-only iteration (``iter_rows(values_only=True)``), which cannot tell a
  formula with no saved value from an empty cell nor report merged ranges;
* python-calamine, when installed: the fastest, but it gives spreadsheet errors as empty
  text, fails a whole sheet on newer error values (``#SPILL!``), has no formulas, and holds a
  sheet as one grid from its first to its last cell, so two cells far apart abort the process.

Each is run in a fresh process (peak memory is the process's high-water mark, imports
included), three times; the best of three is printed. Run with
``python -m pytest tests/bench/test_bench_read.py -m bench -s``.
"""

from __future__ import annotations

import json
import random
import re
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import pytest
from openpyxl import Workbook

from auditor.schedule import read_schedule
from auditor.units import registry

PANELS = 20_000
REPEATS = 3


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


_INLINE = re.compile(r'<c r="([A-Z]+)(\d+)" t="inlineStr"><is><t>([^<]*)</t></is></c>')


def _as_a_spreadsheet_program_saves(source: Path, target: Path) -> None:
    """The same workbook with its text in shared strings (ECMA-376 Part 1 §18.4) and the
    sheet's dimension (§18.3.1.35), as spreadsheet programs write them."""
    with zipfile.ZipFile(source) as archive:
        parts = {name: archive.read(name) for name in archive.namelist()}
    sheet = parts["xl/worksheets/sheet1.xml"].decode("utf-8")
    strings: dict[str, int] = {}
    last = [0, 0]

    def shared(match: re.Match) -> str:
        column, row, text = match.groups()
        last[0] = max(last[0], int(row))
        return f'<c r="{column}{row}" t="s"><v>{strings.setdefault(text, len(strings))}</v></c>'

    sheet = _INLINE.sub(shared, sheet).replace(
        "<sheetData>", f'<dimension ref="A1:M{last[0]}"/><sheetData>', 1)
    parts["xl/worksheets/sheet1.xml"] = sheet.encode("utf-8")
    main = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    parts["xl/sharedStrings.xml"] = (
        f'<sst xmlns="{main}" count="{len(strings)}" uniqueCount="{len(strings)}">'
        + "".join(f"<si><t>{text}</t></si>" for text in strings) + "</sst>").encode("utf-8")
    rels = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/sharedStrings"
    parts["xl/_rels/workbook.xml.rels"] = parts["xl/_rels/workbook.xml.rels"].replace(
        b"</Relationships>",
        f'<Relationship Id="rIdStrings" Type="{rels}" Target="sharedStrings.xml"/>'
        "</Relationships>".encode())
    parts["[Content_Types].xml"] = parts["[Content_Types].xml"].replace(
        b"</Types>", b'<Override PartName="/xl/sharedStrings.xml" ContentType="application/'
        b'vnd.openxmlformats-officedocument.spreadsheetml.sharedStrings+xml"/></Types>')
    with zipfile.ZipFile(target, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in parts.items():
            archive.writestr(name, data)


_MEASURE = r"""
import json, sys, time
import openpyxl
from auditor.schedule import archive, read_schedule, sources
from auditor.units import registry


def peak_mb():
    with open("/proc/self/status") as status:  # VmHWM: the peak resident set (proc(5))
        for line in status:
            if line.startswith("VmHWM:"):
                return int(line.split()[1]) / 1024
    return float("nan")


way, path = sys.argv[1], sys.argv[2]
data = open(path, "rb").read()
registry()
if way == "calamine":
    import python_calamine
wall, cpu = time.perf_counter(), time.process_time()
if way == "schedule reader, workbook stage":
    rows = sum(len(sheet.rows) for sheet in sources._load_workbook(data, "bench.xlsx"))
elif way == "schedule reader, read_schedule":
    rows = len(read_schedule(path).panels)
elif way == "openpyxl values_only":
    book = openpyxl.load_workbook(archive.verified_workbook_archive(data, "bench.xlsx"),
                                  read_only=True, data_only=True, keep_links=False)
    rows = sum(1 for sheet in book.worksheets for _ in sheet.iter_rows(values_only=True))
    book.close()
else:
    book = python_calamine.CalamineWorkbook.from_filelike(
        archive.verified_workbook_archive(data, "bench.xlsx"))
    rows = 0
    for name in book.sheet_names:
        sheet = book.get_sheet_by_name(name)
        rows += sum(1 for _ in sheet.iter_rows())
        sheet.merged_cell_ranges
    book.close()
print(json.dumps({"wall": time.perf_counter() - wall, "cpu": time.process_time() - cpu,
                  "peak_mb": peak_mb(), "rows": rows}))
"""

WAYS = ("schedule reader, workbook stage", "schedule reader, read_schedule",
        "openpyxl values_only", "calamine")


def _measure(way: str, path: Path) -> dict:
    runs = []
    for _ in range(REPEATS):
        done = subprocess.run([sys.executable, "-c", _MEASURE, way, str(path)],
                              capture_output=True, text=True, timeout=300)
        assert done.returncode == 0, done.stderr[-2000:]
        runs.append(json.loads(done.stdout))
    return {key: min(run[key] for run in runs) for key in ("wall", "cpu", "peak_mb")} | {
        "rows": runs[0]["rows"]}


@pytest.mark.bench
def test_bench_read_20000_panels(tmp_path):
    path = tmp_path / "big.xlsx"
    _write(path)
    saved = tmp_path / "big-shared-strings.xlsx"
    _as_a_spreadsheet_program_saves(path, saved)
    try:
        import python_calamine  # noqa: F401

        ways = WAYS
    except ImportError:
        ways = WAYS[:-1]
        print("\npython-calamine is not installed: `pip install python-calamine` to compare")
    print(f"\nbest of {REPEATS}, each in a fresh process (peak: the whole process)")
    cpu = {}
    for workbook in (path, saved):
        print(f"{workbook.name}:")
        for way in ways:
            m = _measure(way, workbook)
            cpu[workbook.name, way] = m["cpu"]
            print(f"  {way:34s} {m['wall']:6.2f} s wall {m['cpu']:6.2f} s CPU "
                  f"{m['peak_mb']:6.0f} MB peak  ({m['rows']} rows or panels)")
    registry()  # made once per process; not part of reading
    wall, used = time.perf_counter(), time.process_time()
    schedule = read_schedule(path)
    wall, used = time.perf_counter() - wall, time.process_time() - used
    print(f"read {len(schedule.panels)} panels in {wall:.2f} s wall, {used:.2f} s CPU")
    assert len(schedule.panels) == PANELS and schedule.problems == ()
    def fields(panels):
        return [(p.panel, p.zone, p.width, p.length, p.areal_density, p.tension_x,
                 p.cavity_depth, p.max_tension) for p in panels]

    assert fields(read_schedule(saved).panels) == fields(schedule.panels)
    assert used < 3.0
