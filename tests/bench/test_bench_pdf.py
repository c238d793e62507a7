"""Benchmarks of the PDF audit: 1,000 panels with 150 flagged, and the demo project as issued.

Run with ``python -m pytest tests/bench/test_bench_pdf.py -m bench -s``. The report is written in
a fresh Python subprocess so that its peak resident memory (``VmHWM`` of
/proc/self/status, which includes the interpreter, numpy, reportlab and the fixture) belongs to
this job alone.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

TESTS = Path(__file__).resolve().parents[1]

SCRIPT = textwrap.dedent("""
    import json, sys, time
    sys.path.insert(0, sys.argv[1])
    from report_factory import make_result
    from auditor.report.pdf import write_pdf
    from pypdf import PdfReader

    start = time.perf_counter()
    result = make_result(n_panels=1000, n_flagged=150)
    built = time.perf_counter() - start
    start = time.perf_counter()
    path = write_pdf(result, sys.argv[2])
    seconds = time.perf_counter() - start
    # VmHWM is the peak of this process's own address space; ru_maxrss would also carry the
    # peak of the parent it was forked from (Linux keeps it across exec).
    with open("/proc/self/status") as fh:
        peak_mb = next(int(l.split()[1]) for l in fh if l.startswith("VmHWM")) / 1024.0
    print(json.dumps({"fixture_s": built, "pdf_s": seconds, "peak_rss_mb": peak_mb,
                      "pages": len(PdfReader(str(path)).pages),
                      "flagged": sum(p.verdict in ("conflict", "not assessed")
                                     for p in result.panels),
                      "findings": len(result.findings), "size_mb": path.stat().st_size / 1e6}))
""")


@pytest.mark.bench
def test_thousand_panels_150_flagged_under_15_s_and_500_mb(tmp_path):
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(TESTS), str(tmp_path / "big.pdf")],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    figures = json.loads(out.stdout.strip().splitlines()[-1])
    print(f"\n1,000 panels, {figures['flagged']} flagged, {figures['findings']} findings: "
          f"PDF in {figures['pdf_s']:.2f} s, {figures['pages']} pages, "
          f"{figures['size_mb']:.1f} MB; "
          f"peak RSS {figures['peak_rss_mb']:.0f} MB (whole subprocess, VmHWM); "
          f"fixture built in {figures['fixture_s']:.2f} s")
    assert figures["flagged"] == 150
    assert figures["pdf_s"] < 15.0
    assert figures["peak_rss_mb"] < 500.0


DEMO_SCRIPT = textwrap.dedent("""
    import json, os, sys, time
    from typer.testing import CliRunner
    from auditor.cli import app

    start = time.perf_counter()
    got = CliRunner().invoke(app, ["demo", "--out", sys.argv[1]])
    print(json.dumps({"exit": got.exit_code, "seconds": time.perf_counter() - start,
                      "output": got.output[-2000:]}))
""")


@pytest.mark.bench
def test_demo_pdf_is_short_ordered_and_names_no_folder(tmp_path):
    """The demo's audit.pdf as a consultant receives it (``auditor demo``, tap test included):
    at most 40 pages, every equipment item within the first three, F-13's tension fitted to
    its tap-test recording shown against the scheduled one, and no folder of this machine
    anywhere in the file."""
    import re

    from pypdf import PdfReader

    from auditor.resources import demo_workbook
    from auditor.schedule import read_schedule

    folder = tmp_path / "demo-output-folder-3b9c"
    out = subprocess.run([sys.executable, "-c", DEMO_SCRIPT, str(folder)], capture_output=True,
                         text=True, timeout=900, cwd=tmp_path)
    assert out.returncode == 0, out.stderr
    run = json.loads(out.stdout.strip().splitlines()[-1])
    assert run["exit"] == 0, run["output"]
    pdf = folder / "audit.pdf"
    reader = PdfReader(str(pdf))
    pages = [page.extract_text() or "" for page in reader.pages]
    print(f"\ndemo: {len(pages)} pages, audit and all outputs in {run['seconds']:.0f} s")
    assert len(pages) <= 40

    def squash(text: str) -> str:
        return re.sub(r"\s+", "", text)

    schedule = read_schedule([str(demo_workbook())])
    first = squash("\n".join(pages[:3]))
    for item in schedule.equipment:
        assert squash(item.equipment) in first, item.equipment
    scheduled = next(p for p in schedule.panels if p.panel == "F-13")
    verification = next(p for p in pages if "Site verification and commissioning" in p)
    row = re.search(r"F-13\s+\S+\s+(\d+)\s+(\d+)\s+([+-][\d.]+) %", verification)
    assert row is not None, verification[:800]
    assert float(row.group(1)) == round(scheduled.tension_x)
    assert float(row.group(2)) != float(row.group(1))  # the fitted tension differs
    text = "\n".join(pages)
    data = pdf.read_bytes()
    for place in {str(tmp_path), str(folder), os.getcwd(), str(Path.home()),
                  str(demo_workbook().parent), str(TESTS.parent)}:
        assert place not in text and place.encode() not in data, place
    assert not re.search(r"(?<![\w.])/(?:home|tmp|root|usr|work|Users)/", text)
