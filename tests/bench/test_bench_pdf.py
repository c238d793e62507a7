"""Benchmark: the PDF audit of 1,000 panels, 150 of them flagged.

Run with ``python -m pytest tests/bench/test_bench_pdf.py -m bench -s``. The report is written in
a fresh Python subprocess so that its peak resident memory (``VmHWM`` of
/proc/self/status, which includes the interpreter, numpy, reportlab and the fixture) belongs to
this job alone.
"""

from __future__ import annotations

import json
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
                      "flagged": sum(1 for p in result.panels if p.findings),
                      "findings": len(result.findings), "size_mb": path.stat().st_size / 1e6}))
""")


@pytest.mark.bench
def test_thousand_panels_150_flagged_under_15_s_and_500_mb(tmp_path):
    out = subprocess.run([sys.executable, "-c", SCRIPT, str(TESTS), str(tmp_path / "big.pdf")],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    figures = json.loads(out.stdout.strip().splitlines()[-1])
    print(f"\n1,000 panels, {figures['flagged']} flagged, {figures['findings']} findings: "
          f"PDF in {figures['pdf_s']:.2f} s, {figures['pages']} pages, {figures['size_mb']:.1f} MB; "
          f"peak RSS {figures['peak_rss_mb']:.0f} MB (whole subprocess, VmHWM); "
          f"fixture built in {figures['fixture_s']:.2f} s")
    assert figures["flagged"] == 150
    assert figures["pdf_s"] < 15.0
    assert figures["peak_rss_mb"] < 500.0
