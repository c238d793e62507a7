"""Hostile schedules: every bad input ends in a clear message, quickly and in bounded memory.

Each case is made here, in the test, into a folder of its own (no binary fixtures): zip bombs
posing as workbooks, XML entity expansion (also spelt in UTF-7 and UTF-16), a text file named
.xlsx, empty and header-only tables, a million empty CSV rows, legacy and UTF-16 encodings,
control characters, NaN, infinite, blank and formula cells, sizes no building has, shapes no
mesh takes, markup and formula-injection text in names, tap-test paths leading out of the
schedule's folder, and sheets whose XML is cut short, never closes its cells, nests a hundred
deep, puts a few cells far apart or beyond the last column, or merges ranges over each other.

Every case is driven through the command line (``check --json`` and ``audit --json``): it
must end with exit status 2 when nothing could be read, else 0 with the problem listed
(file, sheet, row and column), never a traceback, never an absolute path of this machine,
within bounded time and memory; and ``check`` and ``audit`` must reject the same rows.

The byte layouts come from the published formats: PKWARE APPNOTE.TXT 6.3.10 (zip local and
central headers, §4.3.7, §4.3.12, §4.3.16), RFC 1951 (deflate; a full flush makes the
compressed form of a repeated block repeat), ECMA-376 Part 1 §18.3 (worksheets, inline
strings, ``_xHHHH_`` escapes §22.9.2.19) and the Unicode byte-order marks.
"""

from __future__ import annotations

import csv
import io
import json
import re
import struct
import subprocess
import sys
import time
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Callable

import openpyxl
import pytest
from openpyxl.utils import get_column_letter
from typer.testing import CliRunner

from auditor.cli import app

#: Bounds every case must meet (the brief of the hostile-input issue).
MAX_SECONDS = 20.0
MAX_PEAK_MB = 500.0

HEADER = ["Panel", "Zone", "Width (m)", "Length (m)", "Areal density (kg/m²)",
          "Tension (N/m)"]
GOOD = ["G1", "North", 0.6, 0.6, 0.25, 1500]  # a film panel, fundamental about 90 Hz
SECRET = "TOP-SECRET-CONTENT-4711"  # in a file outside a schedule's folder

# ---------------------------------------------------------------------------------------
# Writing workbooks byte by byte
# ---------------------------------------------------------------------------------------
_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_PKG = "http://schemas.openxmlformats.org/package/2006/relationships"


def _column(index: int) -> str:
    return get_column_letter(index + 1)


def _escape(text: str) -> str:
    return text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


class Raw(str):
    """A cell given as its XML body (``<v>NaN</v>``, ``<f>1/0</f>``) and type attribute."""

    def __new__(cls, body: str, kind: str = ""):
        self = super().__new__(cls, body)
        self.kind = kind
        return self


def _sheet_xml(rows: list[list], tail: str = "") -> str:
    out = []
    for r, values in enumerate(rows, start=1):
        cells = []
        for c, value in enumerate(values):
            ref = f"{_column(c)}{r}"
            if value is None:
                continue
            if isinstance(value, Raw):
                kind = f' t="{value.kind}"' if value.kind else ""
                cells.append(f'<c r="{ref}"{kind}>{value}</c>')
            elif isinstance(value, str):
                cells.append(f'<c r="{ref}" t="inlineStr"><is><t>{_escape(value)}</t></is></c>')
            else:
                cells.append(f'<c r="{ref}"><v>{value!r}</v></c>')
        out.append(f'<row r="{r}">{"".join(cells)}</row>')
    return (f'<?xml version="1.0" encoding="UTF-8"?><worksheet xmlns="{_MAIN}"><sheetData>'
            + "".join(out) + "</sheetData>" + tail + "</worksheet>")


def _package(sheets: dict[str, str]) -> dict[str, bytes]:
    """The parts of a minimal workbook (ECMA-376 Part 1 §18.2, Part 2) with these sheets."""
    overrides = "".join(
        f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="application/'
        'vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
        for i in range(1, len(sheets) + 1))
    types = ('<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.'
             'openxmlformats.org/package/2006/content-types"><Default Extension="rels" '
             'ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
             '<Default Extension="xml" ContentType="application/xml"/><Override '
             'PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-'
             'officedocument.spreadsheetml.sheet.main+xml"/>' + overrides + "</Types>")
    rels = (f'<Relationships xmlns="{_PKG}"><Relationship Id="rId1" Type="{_REL}/'
            'officeDocument" Target="xl/workbook.xml"/></Relationships>')
    entries = "".join(f'<sheet name="{_escape(name)}" sheetId="{i}" r:id="rId{i}"/>'
                      for i, name in enumerate(sheets, start=1))
    workbook = (f'<workbook xmlns="{_MAIN}" xmlns:r="{_REL}"><sheets>{entries}</sheets>'
                "</workbook>")
    links = "".join(f'<Relationship Id="rId{i}" Type="{_REL}/worksheet" '
                    f'Target="worksheets/sheet{i}.xml"/>' for i in range(1, len(sheets) + 1))
    parts = {"[Content_Types].xml": types, "_rels/.rels": rels, "xl/workbook.xml": workbook,
             "xl/_rels/workbook.xml.rels": f'<Relationships xmlns="{_PKG}">{links}</Relationships>'}
    for i, xml in enumerate(sheets.values(), start=1):
        parts[f"xl/worksheets/sheet{i}.xml"] = xml
    return {name: text.encode("utf-8") for name, text in parts.items()}


def _write_parts(path: Path, parts: dict[str, bytes]) -> Path:
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as archive:
        for name, data in parts.items():
            archive.writestr(name, data)
    return path


def _zip_by_hand(path: Path, members: list[tuple[str, bytes, int, int]]) -> Path:
    """A zip of deflated members with the CRC and inflated size each *declares*
    (APPNOTE.TXT §4.3.7 local header, §4.3.12 central header, §4.3.16 end record)."""
    body, central = b"", b""
    for name, deflated, crc, declared in members:
        raw = name.encode()
        offset = len(body)
        body += struct.pack("<4s5H3L2H", b"PK\x03\x04", 20, 0, 8, 0, 33, crc, len(deflated),
                            declared, len(raw), 0) + raw + deflated
        central += struct.pack("<4s6H3L5H2L", b"PK\x01\x02", 20, 20, 0, 8, 0, 33, crc,
                               len(deflated), declared, len(raw), 0, 0, 0, 0, 0, offset) + raw
    end = struct.pack("<4s4H2LH", b"PK\x05\x06", 0, 0, len(members), len(members),
                      len(central), len(body), 0)
    path.write_bytes(body + central + end)
    return path


def _deflate(data: bytes) -> bytes:
    packer = zlib.compressobj(9, zlib.DEFLATED, -15)
    return packer.compress(data) + packer.flush()


def _zeros_stream(megabytes: int) -> tuple[bytes, int]:
    """A raw deflate stream of ``megabytes`` MiB of zeros, made in milliseconds: after a full
    flush the compressor starts afresh, so each MiB block compresses to the same bytes
    (RFC 1951); the block is repeated. Returns the stream and its CRC-32."""
    block = bytes(1 << 20)
    packer = zlib.compressobj(9, zlib.DEFLATED, -15)
    first = packer.compress(block) + packer.flush(zlib.Z_FULL_FLUSH)
    again = packer.compress(block) + packer.flush(zlib.Z_FULL_FLUSH)
    assert first == again
    stream = first * megabytes + packer.flush()
    crc = 0
    for _ in range(megabytes):
        crc = zlib.crc32(block, crc)
    return stream, crc


def _bomb(path: Path, megabytes: int, declared: int | None, crc_of_declared: bool) -> Path:
    """A workbook whose sheet inflates to ``megabytes`` MiB; ``declared`` is the size its
    headers claim (None: the true size)."""
    parts = _package({"Panels": _sheet_xml([HEADER, GOOD])})
    stream, crc = _zeros_stream(megabytes)
    true_size = megabytes << 20
    size = true_size if declared is None else declared
    if crc_of_declared:  # the CRC of what a reader stopping at the declared size would see
        crc = zlib.crc32(bytes(size))
    members = [(n, _deflate(d), zlib.crc32(d), len(d)) for n, d in parts.items()
               if n != "xl/worksheets/sheet1.xml"]
    members.append(("xl/worksheets/sheet1.xml", stream, crc, size))
    return _zip_by_hand(path, members)


# ---------------------------------------------------------------------------------------
# The corpus
# ---------------------------------------------------------------------------------------
def _csv(path: Path, rows: list[list], encoding: str = "utf-8", bom: bytes = b"") -> Path:
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\r\n").writerows(rows)
    path.write_bytes(bom + buffer.getvalue().encode(encoding))
    return path


def _openpyxl_workbook(path: Path, sheets: dict[str, list[list]]) -> Path:
    wb = openpyxl.Workbook()
    wb.remove(wb.active)
    for name, rows in sheets.items():
        ws = wb.create_sheet(name)
        for row in rows:
            ws.append(row)
    wb.save(path)
    return path


def _honest_bomb(folder: Path) -> list[Path]:
    return [_bomb(folder / "bomb.xlsx", 1500, None, False)]


def _forged_bomb(folder: Path) -> list[Path]:
    return [_bomb(folder / "forged.xlsx", 1500, 1000, True)]


def _plausible_bomb(folder: Path) -> list[Path]:
    # claims 40 MB (a ratio of 25 to its compressed size, as XML compresses) but holds 1.5 GB
    return [_bomb(folder / "plausible.xlsx", 1500, 40_000_000, False)]


def _entity_expansion(folder: Path) -> list[Path]:
    entities = '<!ENTITY lol "lol">' + "".join(
        f'<!ENTITY lol{k} "{("&lol" + (str(k - 1) if k > 1 else "") + ";") * 10}">'
        for k in range(1, 10))
    sheet = _sheet_xml([HEADER, ["&lol9;"]]).replace(
        "<worksheet", f"<!DOCTYPE worksheet [{entities}]><worksheet", 1).replace(
        "&amp;lol9;", "&lol9;")
    return [_write_parts(folder / "laughs.xlsx", _package({"Panels": sheet}))]


def _text_named_xlsx(folder: Path) -> list[Path]:
    path = folder / "notes.xlsx"
    path.write_text("Panel,Width\nP1,1.2\n", encoding="utf-8")
    return [path]


def _legacy_xls(folder: Path) -> list[Path]:
    path = folder / "old.xls"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(504))  # OLE2 signature
    return [path]


def _empty_workbook(folder: Path) -> list[Path]:
    path = folder / "empty.xlsx"
    openpyxl.Workbook().save(path)
    return [path]


def _unknown_headers(folder: Path) -> list[Path]:
    return [_csv(folder / "unknown.csv", [["Colour", "Size"], ["red", "big"]])]


def _sniffer_backtracking(folder: Path) -> list[Path]:
    # quotes after every delimiter: the delimiter guess backtracks for seconds on a large
    # sample (measured: 8 s for 32 kB)
    path = folder / "quotes.csv"
    path.write_text((',"' * 4000 + "\n") * 100, encoding="utf-8")
    return [path]


def _headers_only(folder: Path) -> list[Path]:
    return [_openpyxl_workbook(folder / "headers.xlsx", {"Panels": [HEADER]})]


def _million_empty_rows(folder: Path) -> list[Path]:
    path = folder / "million.csv"
    path.write_text(",".join(HEADER) + "\n" + ",,,,,\n" * 1_000_000, encoding="utf-8")
    return [path]


def _windows_1252(folder: Path) -> list[Path]:
    return [_csv(folder / "legacy.csv", [HEADER, ["G1", "Café", 0.6, 0.6, 0.25, 1500],
                                         ["G2", "Café", 0.6, 0.6, 0.25, "abc"]], "cp1252")]


def _utf16(folder: Path) -> list[Path]:
    return [_csv(folder / "wide.csv", [HEADER, ["G1", "Zoné", 0.6, 0.6, 0.25, 1500],
                                       ["G2", "Zoné", 0.6, 0.6, 0.25, "abc"]],
                 "utf-16-le", b"\xff\xfe")]


def _control_csv(folder: Path) -> list[Path]:
    return [_csv(folder / "bell.csv", [HEADER, ["G1", "Nor\x07th\x1b", 0.6, 0.6, 0.25, 1500],
                                       ["G2\x00", "North", 0.6, 0.6, 0.25, -5]])]


def _control_xlsx(folder: Path) -> list[Path]:
    sheet = _sheet_xml([HEADER, ["G_x0007_1", "Zone_x001B_ A", 0.6, 0.6, 0.25, 1500],
                        ["G2", "Zone _xD800_B", 0.6, 0.6, 0.25, "-1"]])
    return [_write_parts(folder / "escapes.xlsx", _package({"Panels": sheet}))]


def _odd_cells(folder: Path) -> list[Path]:
    sheet = _sheet_xml([
        HEADER,
        GOOD,
        ["N1", "North", Raw("<v>NaN</v>"), 0.6, 0.25, 1500],          # NaN number
        ["N2", "North", 0.6, 0.6, 0.25, "inf"],                          # infinite text
        ["N3", "North", 0.6, 0.6, Raw("<f>A1*2</f>"), 1500],             # no saved value
        ["N4", "North", 0.6, 0.6, None, 1500],                           # blank, required
        ["N5", "North", Raw("<v>#DIV/0!</v>", "e"), 0.6, 0.25, 1500],   # error value
        ["N6", "North", 0.6, 0.6, 0.25, "1e999"],                        # overflows to inf
    ])
    return [_write_parts(folder / "cells.xlsx", _package({"Panels": sheet}))]


def _absurd_sizes(folder: Path) -> list[Path]:
    return [_csv(folder / "sizes.csv", [
        HEADER, GOOD,
        ["A1", "North", "1e6", 0.6, 0.25, 1500],        # a kilometre-scale panel
        ["A2", "North", -1.2, 0.6, 0.25, 1500],
        ["A3", "North", 0.6, "0.0001 mm", 0.25, 1500],
        ["A4", "North", 0.6, 0.6, "1e6", 1500],
        ["A5", "North", 0.6, 0.6, 0.25, "1e9"],
        ["A6", "North", 0, 0.6, 0.25, 1500],
    ])]


def _crossed_outline(folder: Path) -> list[Path]:
    return [_csv(folder / "crossed.csv", [
        ["Panel", "Shape", "Width (m)", "Length (m)", "Outline (m)", "Areal density (kg/m²)",
         "Tension (N/m)"],
        ["G1", "rectangle", 0.6, 0.6, "", 0.25, 1500],
        ["X1", "polygon", "", "", "0,0; 1,1; 1,0; 0,1", 0.25, 1500],
    ])]


def _cutout_outside(folder: Path) -> list[Path]:
    return [_csv(folder / "cutouts.csv", [
        ["Panel", "Width (m)", "Length (m)", "Cut-outs (m)", "Areal density (kg/m²)",
         "Tension (N/m)"],
        ["G1", 0.6, 0.6, "", 0.25, 1500],  # (a valid cut-out: see test_schedule_reader)
        ["C1", 0.6, 0.6, "circle 2,2,0.1", 0.25, 1500],
        ["C2", 0.6, 0.6, "1,1; 1.2,1; 1.2,1.2", 0.25, 1500],
    ])]


INJECTION_IDS = ["<b>bold</b>", '<font color="red">F</font>', "A & B",
                 "=cmd|' /C calc'!A0", "+SUM(1)", "-2+3", "@SUM(A1)"]


def _injection(folder: Path) -> list[Path]:
    # inline strings: text a spreadsheet program would show as typed, "=" and all
    panels = [HEADER] + [[pid, *GOOD[1:]] for pid in INJECTION_IDS]  # one type: one solve
    panels.append(["=1+1", "North", 0.6, 0.6, 0.25, "lots"])  # a rejected row, hostile id
    equipment = [["Equipment", "Kind", "rpm", "Blades", "Zone"],
                 ["=HYPERLINK(\"x\")", "fan", 1450, 12, "North"],
                 ["<i>AHU</i> & co", "fan", 960, 9, "all"]]
    parts = _package({"Panels": _sheet_xml(panels), "Equipment": _sheet_xml(equipment)})
    return [_write_parts(folder / "inject.xlsx", parts)]


def _tap_escape(folder: Path) -> list[Path]:
    inner = folder / "job"
    inner.mkdir()
    (folder / "secret.wav").write_text(SECRET, encoding="utf-8")
    return [_csv(inner / "taps.csv", [
        HEADER + ["Tap test"],
        GOOD + ["../secret.wav"],
        ["G2", "North", 0.6, 0.6, 0.25, 1500, "../../etc/passwd"],
        ["G3", "North", 0.6, 0.6, 0.25, 1500, "/etc/passwd"],
        ["G4", "North", 0.6, 0.6, 0.25, 1500, "sub/../../secret.wav"],
    ])]


def _long_text(folder: Path) -> list[Path]:
    sheet = _sheet_xml([HEADER, GOOD, ["L" * 200_000, "North", 0.6, 0.6, 0.25, 1500],
                        ["L2", "Z" * 100_000, 0.6, 0.6, 0.25, 1500]])
    return [_write_parts(folder / "long.xlsx", _package({"Panels": sheet}))]


def _huge_merge(folder: Path) -> list[Path]:
    sheet = _sheet_xml([HEADER, GOOD], tail='<mergeCells count="1"><mergeCell '
                       'ref="B2:B1048576"/></mergeCells>')
    return [_write_parts(folder / "merged.xlsx", _package({"Panels": sheet}))]


def _with_rows(extra: str, tail: str = "") -> str:
    """The sheet of a header and one good panel, with ``extra`` XML after its rows."""
    return _sheet_xml([HEADER, GOOD], tail).replace("</sheetData>", extra + "</sheetData>")


def _unclosed_cells(folder: Path) -> list[Path]:
    # 20 000 cells never closed: not XML, and a pattern matcher looking for each cell's end
    # scans the rest of the sheet from every one of them (measured: 24 s for 10 000)
    sheet = _with_rows('<row r="3">' + '<c r="A3"><v>1</v>' * 20_000 + "</row>")
    return [_write_parts(folder / "unclosed.xlsx", _package({"Panels": sheet}))]


def _cut_short(folder: Path) -> list[Path]:
    sheet = _with_rows("")[:-40]  # the last closing tags missing
    return [_write_parts(folder / "short.xlsx", _package({"Panels": sheet}))]


def _far_apart_cells(folder: Path) -> list[Path]:
    # a few hundred cells in column XFD (ECMA-376 Part 1 §18.3.1.4: the last column) make a
    # sheet of millions of cells for a reader that holds every row from column A
    far = "".join(f'<row r="{r}"><c r="XFD{r}"><v>1</v></c></row>' for r in range(3, 403))
    return [_write_parts(folder / "far.xlsx", _package({"Panels": _with_rows(far)}))]


def _beyond_last_column(folder: Path) -> list[Path]:
    sheet = _with_rows('<row r="3"><c r="XFE3"><v>1</v></c></row>')
    return [_write_parts(folder / "beyond.xlsx", _package({"Panels": sheet}))]


def _overlapping_merges(folder: Path) -> list[Path]:
    rows = [HEADER, GOOD] + [[f"G{k}", None, 0.6, 0.6, 0.25, 1500] for k in range(2, 50)]
    merges = '<mergeCell ref="B2:B50"/>' * 45_000  # each fills 48 cells: 2.16 million
    sheet = _sheet_xml(rows, f'<mergeCells count="45000">{merges}</mergeCells>')
    return [_write_parts(folder / "merges.xlsx", _package({"Panels": sheet}))]


def _deep_nesting(folder: Path) -> list[Path]:
    sheet = _with_rows("<x>" * 100 + "</x>" * 100)
    return [_write_parts(folder / "deep.xlsx", _package({"Panels": sheet}))]


def _entities_in_utf7(folder: Path) -> list[Path]:
    # the markup of the entity-expansion case, in an encoding whose bytes do not show it
    (laughs,) = _entity_expansion(folder)
    with zipfile.ZipFile(laughs) as archive:
        parts = {n: archive.read(n) for n in archive.namelist()}
    laughs.unlink()
    text = parts["xl/worksheets/sheet1.xml"].decode("utf-8")
    text = text.replace('encoding="UTF-8"', 'encoding="UTF-7"', 1)
    head, body = text.split("?>", 1)
    parts["xl/worksheets/sheet1.xml"] = (head + "?>").encode("ascii") + body.encode("utf-7")
    return [_write_parts(folder / "seven.xlsx", parts)]


def _entities_in_utf16(folder: Path) -> list[Path]:
    (laughs,) = _entity_expansion(folder)
    with zipfile.ZipFile(laughs) as archive:
        parts = {n: archive.read(n) for n in archive.namelist()}
    laughs.unlink()
    text = parts["xl/worksheets/sheet1.xml"].decode("utf-8")
    parts["xl/worksheets/sheet1.xml"] = text.replace(
        'encoding="UTF-8"', 'encoding="UTF-16"', 1).encode("utf-16")  # with its mark
    return [_write_parts(folder / "sixteen.xlsx", parts)]


@dataclass(frozen=True)
class Case:
    """One hostile input: how to make it, the exit status both commands must give, and the
    problem that must be listed (a regular expression of its message, and the sheet, row and
    column it names; sheet "" and row None for a whole file)."""

    name: str
    build: Callable[[Path], list[Path]]
    exit_code: int
    message: str
    sheet: str = ""
    row: int | None = None
    column: str = ""


CASES = (
    Case("zip bomb, honest sizes", _honest_bomb, 2, r"archive expands to 1573 MB; refusing"),
    Case("zip bomb, forged sizes", _forged_bomb, 2,
         r"part xl/worksheets/sheet1\.xml declares 1 kB but holds 2 MB of compressed data"),
    Case("zip bomb, plausible forged size", _plausible_bomb, 2,
         r"the zip archive is damaged \(Bad CRC-32"),
    Case("XML entity expansion", _entity_expansion, 2, r"declares an XML document type"),
    Case("text file named .xlsx", _text_named_xlsx, 2, r"not a zip archive"),
    Case("legacy .xls", _legacy_xls, 2, r"Excel 97-2003 workbook \(\.xls\); save it as \.xlsx"),
    Case("empty workbook", _empty_workbook, 2,
         r"no panel table and no equipment table was found in empty\.xlsx \(sheets looked "
         r"at: 'Sheet'\)"),
    Case("no known headers", _unknown_headers, 2,
         r"no panel table and no equipment table was found in unknown\.csv"),
    Case("a CSV that makes the delimiter guess backtrack", _sniffer_backtracking, 2,
         r"no panel table and no equipment table was found in quotes\.csv"),
    Case("headers only", _headers_only, 0, r"the panel table under this header has no data rows",
         "Panels", 1),
    Case("a million empty CSV rows", _million_empty_rows, 0,
         r"the panel table under this header has no data rows", "million", 1),
    Case("Windows-1252 CSV", _windows_1252, 0, r"'abc' is not", "legacy", 3, "Tension (N/m)"),
    Case("UTF-16 CSV", _utf16, 0, r"'abc' is not", "wide", 3, "Tension (N/m)"),
    Case("control characters, CSV", _control_csv, 0, r"control characters .* were removed",
         "bell", 2, "Zone"),
    Case("control characters, workbook", _control_xlsx, 0, r"control characters .* were removed",
         "Panels", 2, "Panel"),
    Case("NaN, infinite, blank and formula cells", _odd_cells, 0, r"'nan' is not a finite number",
         "Panels", 3, "Width (m)"),
    Case("negative and absurd sizes", _absurd_sizes, 0,
         r"width 1e\+06 m is larger than any panel \(the limit is 100 m", "sizes", 3,
         "Width (m)"),
    Case("self-intersecting outline", _crossed_outline, 0,
         r"outline edges 1 and 3 cross \(self-intersection\)", "crossed", 3, "Outline (m)"),
    Case("cut-out outside the outline", _cutout_outside, 0,
         r"cut-out 1 \(circle at 2\.00, 2\.00, Ø 0\.10 m\) lies outside the outline", "cutouts",
         3, "Cut-outs (m)"),
    Case("markup and formula injection in names", _injection, 0, r"'lots' is not", "Panels",
         9, "Tension (N/m)"),
    # the recording is never opened unless calibrating: see test_tap_test_outside_the_folder
    Case("tap test outside the schedule's folder", _tap_escape, 0, r""),
    Case("text longer than a spreadsheet cell holds", _long_text, 0,
         r"the cell holds 200,000 characters, more than a spreadsheet cell can \(32,767\)",
         "Panels", 3, "Panel"),
    Case("a merge down a million rows", _huge_merge, 0, r"", "", None),
    Case("cells never closed", _unclosed_cells, 2,
         r"sheet 'Panels' nests XML elements more than 64 deep"),
    Case("a sheet cut short", _cut_short, 2,
         r"sheet 'Panels' is damaged: its XML is not well-formed \(no element found"),
    Case("a few cells far apart", _far_apart_cells, 2,
         r"sheet 'Panels', row \d+ \(reaching column XFD\): the sheet holds more than "
         r"5,000,000 cells"),
    Case("a cell beyond the last column", _beyond_last_column, 2,
         r"sheet 'Panels', row 3: a cell lies beyond column XFD"),
    Case("overlapping merged ranges", _overlapping_merges, 2,
         r"sheet 'Panels': merged ranges fill more than 2,000,000 cells"),
    Case("elements nested a hundred deep", _deep_nesting, 2,
         r"sheet 'Panels' nests XML elements more than 64 deep"),
    Case("XML entity expansion in UTF-7", _entities_in_utf7, 2,
         r"declares the encoding 'UTF-7'; a workbook's XML is UTF-8 or UTF-16"),
    Case("XML entity expansion in UTF-16", _entities_in_utf16, 2,
         r"declares an XML document type"),
)


@pytest.fixture(scope="module")
def corpus(tmp_path_factory) -> dict[str, list[Path]]:
    root = tmp_path_factory.mktemp("hostile")
    out = {}
    for k, case in enumerate(CASES):
        folder = root / f"case{k:02d}"
        folder.mkdir()
        out[case.name] = case.build(folder)
    return out


def _folder_of(files: list[Path]) -> str:
    """The case's own folder (the tap-test case keeps its schedule one folder down)."""
    return str(next(p for p in files[0].parents if p.name.startswith("case")))


@dataclass
class Run:
    exit_code: int
    stdout: str
    stderr: str
    exception: BaseException | None
    seconds: float

    @property
    def text(self) -> str:
        return self.stdout + self.stderr

    def problems(self) -> list[dict]:
        return json.loads(self.stdout)["problems"]


def _invoke(args: list[str]) -> Run:
    start = time.perf_counter()
    # wide enough that no message printed in a table is wrapped
    result = CliRunner().invoke(app, args, env={"COLUMNS": "2000"})
    exception = result.exception if not isinstance(result.exception, SystemExit) else None
    return Run(result.exit_code, result.stdout, result.stderr, exception,
               time.perf_counter() - start)


@pytest.fixture(scope="module")
def runs(corpus) -> dict[tuple[str, str], Run]:
    """``check --json`` and ``audit --json`` of every case, run once."""
    out = {}
    for case in CASES:
        files = [str(p) for p in corpus[case.name]]
        out[case.name, "check"] = _invoke(["check", "--json", *files])
        out[case.name, "audit"] = _invoke(["audit", "--json", *files])
    return out


def _names(case_files: list[Path]) -> list[str]:
    return [p.name for p in case_files]


@pytest.mark.parametrize("command", ["check", "audit"])
@pytest.mark.parametrize("case", CASES, ids=[c.name for c in CASES])
def test_case_ends_in_a_clear_message(case, command, corpus, runs):
    run = runs[case.name, command]
    assert run.exception is None, f"{case.name}: {run.exception!r}"
    assert "Traceback" not in run.text
    assert run.exit_code == case.exit_code, run.text[-2000:]
    assert run.seconds < MAX_SECONDS
    assert _folder_of(corpus[case.name]) not in run.text  # no path of this machine
    if case.exit_code == 2 and command == "audit":
        # nothing could be read: the problems are printed, not a findings document
        assert re.search(case.message, " ".join(run.stderr.split())), run.stderr
        assert _names(corpus[case.name])[0] in run.stderr
        return
    problems = run.problems()
    if not case.message:
        assert not [p for p in problems if p["severity"] == "error"]
        return
    hits = [p for p in problems if re.search(case.message, p["message"])]
    assert hits, problems
    hit = hits[0]
    assert hit["file"] == _names(corpus[case.name])[0]
    assert (hit["sheet"], hit["row"], hit["column"]) == (case.sheet, case.row, case.column)


def _rejected(problems: list[dict]) -> set[tuple]:
    return {(p["file"], p["sheet"], p["row"]) for p in problems
            if p["severity"] == "error" and p["row"] is not None}


def test_check_and_audit_reject_the_same_rows(runs):
    for case in CASES:
        if case.exit_code:
            continue
        check, audit = runs[case.name, "check"], runs[case.name, "audit"]
        assert _rejected(check.problems()) == _rejected(audit.problems()), case.name


def test_what_was_read_from_the_odd_cases(runs):
    def panels(name: str) -> dict:
        return {p["panel"]: p for p in json.loads(runs[name, "check"].stdout)["panels"]}

    assert panels("Windows-1252 CSV")["G1"]["zone"] == "Café"
    assert panels("UTF-16 CSV")["G1"]["zone"] == "Zoné"
    assert panels("control characters, CSV")["G1"]["zone"] == "North"
    assert set(panels("control characters, workbook")) == {"G1"}
    assert set(panels("NaN, infinite, blank and formula cells")) == {"G1"}
    assert set(panels("negative and absurd sizes")) == {"G1"}
    assert set(panels("markup and formula injection in names")) == set(INJECTION_IDS)
    assert panels("a merge down a million rows")["G1"]["zone"] == "North"
    taps = panels("tap test outside the schedule's folder")
    assert taps["G3"]["tap_test"] == "/etc/passwd"  # kept as typed; calibrating refuses it
    # every odd cell's row is rejected, naming its column (ECMA-376 cells, read as typed)
    odd = {(p["row"], p["column"]) for p in runs["NaN, infinite, blank and formula cells",
                                                  "check"].problems()
           if p["severity"] == "error"}
    assert odd == {(3, "Width (m)"), (4, "Tension (N/m)"), (5, "Areal density (kg/m²)"),
                   (6, "Areal density (kg/m²)"), (7, "Width (m)"), (8, "Tension (N/m)")}
    sizes = {p["row"]: p["message"] for p in runs["negative and absurd sizes", "check"]
             .problems() if p["severity"] == "error"}
    assert set(sizes) == {3, 4, 5, 6, 7, 8}
    assert "must be positive" in sizes[4] and "smaller than any panel" in sizes[5]
    assert "the limit is 500 kg/m²" in sizes[6] and "the limit is 1e+06 N/m" in sizes[7]


_READ_SCRIPT = """
import json, resource, sys, time
from auditor.schedule import read_schedule
from auditor.units import registry


def peak_mb():
    # the peak resident set size (VmHWM, proc(5)); getrusage where /proc is missing
    try:
        with open("/proc/self/status") as status:
            for line in status:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


try:  # a forked child starts with its parent's peak: reset it (proc(5), clear_refs "5")
    with open("/proc/self/clear_refs", "w") as refs:
        refs.write("5")
except OSError:
    pass
registry()
for name, files in json.loads(sys.stdin.read()):
    start = time.perf_counter()
    schedule = read_schedule(files)
    seconds = time.perf_counter() - start
    print(json.dumps([name, seconds, peak_mb(), len(schedule.files)]), flush=True)
"""


def test_reading_is_bounded_in_time_and_memory(corpus):
    """Every case read in one fresh process: the peak resident memory after each case
    (a high-water mark, so it bounds every case read so far, imports included) and its
    time."""
    order = [(case.name, [str(p) for p in corpus[case.name]]) for case in CASES]
    done = subprocess.run([sys.executable, "-c", _READ_SCRIPT], input=json.dumps(order),
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-3000:]
    measured = [json.loads(line) for line in done.stdout.splitlines()]
    assert [m[0] for m in measured] == [c.name for c in CASES]
    for name, seconds, peak_mb, _ in measured:
        assert seconds < MAX_SECONDS, (name, seconds)
        assert peak_mb < MAX_PEAK_MB, (name, peak_mb)
    print("\n" + "\n".join(f"{n:45s} {s:6.2f} s {p:6.0f} MB" for n, s, p, _ in measured))


def test_elements_no_reader_knows_are_not_kept(tmp_path):
    """A sheet and its shared strings padded with elements no reader knows, and with empty
    rows of a set height: the memory reading takes does not grow with how many there are
    (openpyxl's own loop keeps each, about 100 bytes apiece: 1 GB for a 44 kB workbook of
    11 million, measured)."""
    import tracemalloc

    from auditor.schedule import sources

    def peak_bytes(count: int) -> int:
        rows = "".join(f'<row r="{r}" ht="9" customHeight="1"/>' for r in range(9, 9 + count // 4))
        parts = _package({"Panels": _with_rows("<x/>" * count + rows)})
        parts["xl/sharedStrings.xml"] = (f'<sst xmlns="{_MAIN}"><si><t>North</t></si>'
                                         + "<x/>" * count + "</sst>").encode()
        parts["[Content_Types].xml"] = parts["[Content_Types].xml"].replace(
            b"</Types>", b'<Override PartName="/xl/sharedStrings.xml" ContentType="application/'
            b'vnd.openxmlformats-officedocument.spreadsheetml.sharedStrings+xml"/></Types>')
        data = _write_parts(tmp_path / f"padded{count}.xlsx", parts).read_bytes()
        tracemalloc.start()
        try:
            (sheet,) = sources._load_workbook(data, "padded.xlsx")
            peak = tracemalloc.get_traced_memory()[1]
        finally:
            tracemalloc.stop()
        assert [r for r, _ in sheet.rows] == [1, 2]
        return peak

    small, large = peak_bytes(10_000), peak_bytes(100_000)
    # 90 000 more elements (and 22 500 more rows) kept would take some 10 MB more; the
    # larger file's own stored copy takes under 1 MB more
    assert large - small < 3_000_000, (small, large)


# ---------------------------------------------------------------------------------------
# What the written outputs show
# ---------------------------------------------------------------------------------------
_HOSTILE_STARTS = ("=cmd", "+SUM", "-2+3", "@SUM", "=HYPERLINK", "=1+1")
# C0 controls but tab, line feed and carriage return (pypdf reads a bullet glyph as DEL, so
# DEL is checked in the text outputs only)
_CONTROL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f]")


class Written:
    """``audit --out`` of a case, run once for the tests that read its outputs."""

    def __init__(self, corpus: dict[str, list[Path]], factory) -> None:
        self.corpus, self.factory, self.folders = corpus, factory, {}

    def __getitem__(self, name: str) -> Path:
        if name not in self.folders:
            folder = self.factory.mktemp("out")
            run = _invoke(["audit", *map(str, self.corpus[name]), "--out", str(folder)])
            assert run.exception is None and run.exit_code == 0, (
                f"{run.exception!r} {run.text[-3000:]}")
            self.folders[name] = folder
        return self.folders[name]


@pytest.fixture(scope="module")
def written(corpus, tmp_path_factory) -> Written:
    return Written(corpus, tmp_path_factory)


def _csv_cells(path: Path) -> list[list[str]]:
    return list(csv.reader(io.StringIO(path.read_text(encoding="utf-8-sig"))))


def _xlsx_cells(path: Path) -> list:
    wb = openpyxl.load_workbook(path, read_only=True)
    try:
        return [v for ws in wb.worksheets for row in ws.iter_rows(values_only=True)
                for v in row if isinstance(v, str)]
    finally:
        wb.close()


def _pdf_text(path: Path) -> str:
    from pypdf import PdfReader

    return "\n".join(page.extract_text() or "" for page in PdfReader(str(path)).pages)


def test_outputs_neutralise_formula_injection(written):
    # OWASP "CSV Injection": a CSV cell starting with = + - @ is made inert by a leading
    # apostrophe; in a workbook a text cell (type "s", ECMA-376 §18.18.11) is never evaluated
    folder = written["markup and formula injection in names"]
    cells = [c for row in _csv_cells(folder / "findings.csv") for c in row]
    hostile = [c for c in cells if c.lstrip("'").startswith(_HOSTILE_STARTS)]
    assert hostile, "the hostile ids must appear in findings.csv"
    assert all(c.startswith("'") for c in hostile), hostile
    audited = folder / "inject-audited.xlsx"
    with zipfile.ZipFile(audited) as archive:
        sheets = [n for n in archive.namelist() if n.startswith("xl/worksheets/")]
        assert not any(b"<f>" in archive.read(n) or b"<f " in archive.read(n) for n in sheets)
    wb = openpyxl.load_workbook(audited)
    typed = [(c.value, c.data_type) for ws in wb.worksheets for row in ws.iter_rows()
             for c in row if isinstance(c.value, str)
             and c.value.lstrip("'").startswith(_HOSTILE_STARTS)]
    assert len(typed) >= len(INJECTION_IDS)
    assert all(kind == "s" for _, kind in typed), typed
    added = [v for v, _ in typed if v.startswith("'")]
    assert added, "the auditor's own sheets quote the ids with an apostrophe"


def test_pdf_shows_markup_literally(written):
    text = _pdf_text(written["markup and formula injection in names"] / "audit.pdf")
    squashed = re.sub(r"\s+", "", text)
    for shown in ("<b>bold</b>", '<fontcolor="red">F</font>', "A&B", "<i>AHU</i>&co"):
        assert shown in squashed, shown
    assert "&amp;" not in text and "&lt;" not in text


def test_rejected_rows_are_listed_in_every_output(written):
    folder = written["markup and formula injection in names"]
    document = json.loads((folder / "findings.json").read_text(encoding="utf-8"))
    rejected = _rejected(document["problems"])
    assert rejected == {("inject.xlsx", "Panels", 9)}
    rows = _csv_cells(folder / "findings.csv")
    head = rows[0]
    listed = {(r[head.index("file")], r[head.index("sheet")], r[head.index("row")])
              for r in rows[1:] if r[0] == "rejected row"}
    assert listed == {("inject.xlsx", "Panels", "9")}
    assert any("lots" in c for c in _xlsx_cells(folder / "inject-audited.xlsx"))
    assert "'lots'isnot" in re.sub(r"\s+", "", _pdf_text(folder / "audit.pdf"))


def test_control_characters_reach_no_output(written):
    for name in ("control characters, workbook", "control characters, CSV"):
        folder = written[name]
        for path in folder.iterdir():
            if path.suffix in (".json", ".csv"):
                text = path.read_text(encoding="utf-8-sig")
                assert not _CONTROL.search(text) and "\x7f" not in text, path.name
                assert not re.search(r"\\u00(0[0-8bcef]|1[0-9a-f])", text), path.name
            elif path.suffix == ".xlsx":
                assert not any(_CONTROL.search(c) for c in _xlsx_cells(path)), path.name
            elif path.suffix == ".pdf":
                assert not _CONTROL.search(_pdf_text(path)), path.name


def test_tap_test_outside_the_folder_is_never_read(corpus):
    # calibrating opens recordings only inside the schedule's folder, names the row and
    # column of each refused one, and never quotes another file's content
    files = [str(p) for p in corpus["tap test outside the schedule's folder"]]
    run = _invoke(["audit", "--json", "--calibrated", *files])
    assert run.exception is None and run.exit_code == 0, run.text[-2000:]
    assert SECRET not in run.text and "root:" not in run.text
    refused = {(p["sheet"], p["row"], p["column"]) for p in run.problems()
               if p["severity"] == "warning" and "folder" in p["message"]}
    assert refused == {("taps", row, "Tap test") for row in (2, 3, 4, 5)}
    assert _folder_of(corpus["tap test outside the schedule's folder"]) not in run.text
