"""The report writers: the PDF read back with pypdf, its charts and wording checked against
analytic facts, and every output (PDF, JSON, CSV, xlsx) checked for what a spreadsheet or a
reader may be handed: characters XML forbids, formulas, markup, local folders, permissions."""

from __future__ import annotations

import csv
import dataclasses
import hashlib
import io
import itertools
import json
import math
import os
import re
import stat
import zipfile
from xml.sax.saxutils import escape

import numpy as np
import openpyxl
import pytest
from pypdf import PdfReader
from report_factory import (
    LONG_ID,
    TRICKY_ID,
    harris_transmissibility,
    make_result,
    rectangle_modes,
    renamed,
    with_source_file,
)
from reportlab.graphics.shapes import Path
from scipy.special import jn_zeros

from auditor.atomic import write_atomic
from auditor.model import RowProblem
from auditor.report import branding, digest
from auditor.report.charts import (
    MIN_FONT_SIZE,
    TensionMark,
    interference_chart,
    linear_ticks,
    string_boxes,
    tuning_chart,
)
from auditor.report.exports import (
    findings_csv,
    findings_json,
    write_audited_workbooks,
    write_csv,
    write_json,
)
from auditor.report.figures import (
    frequency_axis_range,
    log_frequency_ticks,
    mode_shape_drawing,
    participation_marker_radius,
)
from auditor.report.pdf import (
    ReportError,
    bundled_template_dir,
    in_column_unit,
    load_report_template,
    write_pdf,
)
from auditor.report.text import (
    LocalPaths,
    clean_text,
    format_date,
    markup,
    parse_text_blocks,
    to_latin1,
)
from auditor.results import Excitation, Mode, Mount, TensionCurves


def _squash(text: str) -> str:
    """Text without any whitespace: table cells and headings wrap long ids across lines."""
    return re.sub(r"\s+", "", text)


@pytest.fixture(scope="module")
def result():
    return make_result(n_panels=8, n_flagged=5)


@pytest.fixture(scope="module")
def written(result, tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    path = write_pdf(result, folder / "audit.pdf")
    reader = PdfReader(str(path))
    pages = [page.extract_text() or "" for page in reader.pages]
    return path, reader, pages


def _page_of(pages: list[str], heading: str) -> int:
    return next(k for k, page in enumerate(pages) if heading in page)


# --- the report read back --------------------------------------------------------------------

def test_cover_carries_document_control_inputs_and_no_folder(result, written):
    _, _, pages = written
    cover = pages[0]
    project = result.schedule.project
    for value in (project.name, project.reference, project.client, project.prepared_by,
                  project.prepared_for, result.ruleset.name, result.ruleset.origin,
                  result.version, "Revision", "Issue status", "Checked by", "C. Checker",
                  "Approved by", "Signature"):
        assert value in cover, value
    assert re.search(r"Revision\s+B", cover)  # from the Project sheet's "Revision" entry
    assert "14 May 2024" in cover  # result.created 2024-05-14T10:32:00
    assert result.schedule.files[0].sha256 in _squash(cover)
    assert "project.xlsx" in cover and "/projects/riverside" not in _squash(cover)


def test_document_control_reads_the_project_sheet_and_leaves_blanks_to_sign(result):
    from auditor.model import Project

    control = digest.document_control(Project(prepared_by="A. Engineer", extra=(
        ("Rev.", "C"), ("Purpose of issue", "For construction"), ("APPROVED BY", "D. Lead"),
        ("Site", "North wing"))))
    assert (control.revision, control.status, control.approved_by) == \
        ("C", "For construction", "D. Lead")
    assert control.checked_by == "" and control.other == (("Site", "North wing"),)
    assert digest.document_control(Project()).revision == ""


def test_summary_ranks_the_panels_needing_action_worst_first(result, written):
    _, _, pages = written
    summary = pages[1]
    action = digest.action_panels(result)
    assert action and all(p.verdict in ("conflict", "not assessed") for p in action)
    # worst first: every conflict before any panel not assessed, then by response
    verdicts = [p.verdict for p in action]
    assert verdicts == sorted(verdicts, key=("conflict", "not assessed").index)
    flat = _squash(summary)
    places = [flat.index(_squash(p.panel.panel)) for p in action]
    assert places == sorted(places)
    assert f"{len(action)} need action" in summary
    assert f"{len(result.panels)} panels audited" in summary
    for p in action:  # one line each: what to do
        assert _squash(digest.action_line(p))[:30] in flat
    for phrase in ("What was assumed", "assumed rigid", "BLT-1", "material default",
                   "Modes assessed"):
        assert phrase in summary, phrase


def test_every_equipment_item_is_in_the_first_three_pages(result, written):
    _, _, pages = written
    first = _squash("\n".join(pages[:3]))
    for item in result.schedule.equipment:
        assert _squash(item.equipment) in first
    table = pages[_page_of(pages, "Equipment and the tones it makes")]
    # fan on 25 mm springs: f0 = √(g/δ)/2π = 3.15 Hz (Harris, vibration isolation; 15.76/√25)
    assert "3.15 Hz" in table and "rigid (assumed)" in table
    shaft = next(e for e in result.excitations[0][1] if e.source == "shaft" and e.order == 1)
    # T at the fan's 24.2 Hz shaft rate from the Harris formula, as the table gives it
    assert f"{harris_transmissibility(24.1667, 3.1522, 0.01):.2g}" == \
        f"{shaft.transmissibility:.2g}"
    assert f"{shaft.transmissibility:.2g}" in table
    for words in ("blade-pass", "193, 387", "80.0", "structure-borne", "airborne"):
        assert words in table, words


def test_action_pages_only_for_panels_that_need_action(result, written, tmp_path):
    _, reader, pages = written
    action = digest.action_panels(result)
    others = digest.other_panels(result)
    text = _squash("\n".join(pages))
    for p in action:
        assert _squash(f"Panel {p.panel.panel}") + p.verdict.replace(" ", "") in text
    for p in others:
        assert _squash(f"Panel {p.panel.panel}") not in text
    status = pages[_page_of(pages, "Panels that need no action")]
    assert all(p.panel.panel in status for p in others)
    every = PdfReader(str(write_pdf(result, tmp_path / "all.pdf", detail="all")))
    assert len(every.pages) > len(reader.pages)
    all_text = _squash("\n".join(page.extract_text() for page in every.pages))
    assert all(_squash(f"Panel {p.panel.panel}") in all_text for p in others)


def test_action_page_has_findings_remedy_and_the_charts(result, written):
    _, _, pages = written
    pr = digest.action_panels(result)[0]
    start = _page_of(pages, f"Panel {pr.panel.panel}")
    page = "\n".join(pages[start:start + 2])
    for heading in ("Verdict", "Remedy", "Interference chart", "Mode shapes that matter",
                    "Tuning chart: modes against tension", "clear window (full model)",
                    "proposed tension", "Commissioning"):
        assert heading in page, heading
    assert f"proposed {pr.remedy.tension:.0f}" in page
    assert "Raise tension" in page or "Lower tension" in page


def test_fitted_tension_and_commissioning_targets(result, written):
    _, _, pages = written
    page = pages[_page_of(pages, "Site verification and commissioning")]
    tapped = next(p for p in result.panels if p.measured_peaks_hz)
    scheduled = next(p for p in result.schedule.panels if p.panel == tapped.panel.panel)
    fitted = tapped.panel.tension_x
    assert scheduled.tension_x > fitted
    change = f"{100 * (fitted / scheduled.tension_x - 1):+.1f}%"
    assert _squash(f"{tapped.panel.panel} - {scheduled.tension_x:.0f} {fitted:.0f} {change}") \
        in _squash(page)
    # the commissioning target: the fundamental at the target tension of a rectangular
    # membrane, f11 = ½√(T/ρs)·√(1/Lx² + 1/Ly²) (Rayleigh, The Theory of Sound, vol. 1 ch. IX)
    pr = next(p for p in digest.action_panels(result) if p.panel.shape == "rectangle"
              and p.remedy.tension)
    panel = pr.panel
    f11 = 0.5 * math.sqrt(pr.remedy.tension / panel.areal_density) * math.hypot(
        1 / panel.width, 1 / panel.length)
    c = digest.commissioning(pr)
    assert c.expected_hz == pytest.approx(f11, rel=1e-9) and c.exact
    tolerance = digest.COMMISSIONING_TOLERANCE
    assert tolerance == 0.05  # ±5 % in frequency: common practice
    assert c.expected_hz * (1 - tolerance) <= c.low_hz < c.high_hz \
        <= c.expected_hz * (1 + tolerance)
    assert "Commissioning: what a tap test should find" in page
    assert f"{c.expected_hz:.0f}" in page or f"{c.expected_hz:.1f}" in page


def test_commissioning_range_is_narrowed_to_the_clear_window(result):
    # f ∝ √T (Kinsler et al., Fundamentals of Acoustics, ch. 4): the window's edges in tension
    # map to frequencies by √(T/T0); the accepted range never leaves the clear window.
    pr = next(p for p in digest.action_panels(result) if p.remedy and p.remedy.tension)
    first = digest.fundamental(pr.modes)
    a, b = pr.remedy.clear_windows[0]
    narrow = dataclasses.replace(pr, remedy=dataclasses.replace(
        pr.remedy, tension=a * 1.01, clear_windows=((a, a * 1.03),)))
    c = digest.commissioning(narrow)
    t0 = pr.panel.tension_x
    assert c.low_hz == pytest.approx(first.frequency_hz * math.sqrt(a / t0))
    assert c.high_hz == pytest.approx(first.frequency_hz * math.sqrt(a * 1.03 / t0))
    assert "narrowed" in c.note


def test_commissioning_takes_the_fundamental_solved_at_the_proposed_tension(result):
    # Over a sealed cavity f² = a·T + b, not ∝ T (the cavity's stiffness does not scale with
    # tension: Fahy & Gardonio, Sound and Structural Vibration, 2nd ed., ch. 7, from memory):
    # the target is the full model's own fundamental at the proposed tension (or of one bay)
    # when the remedy carries it, never a √T scaling.
    pr = next(p for p in digest.action_panels(result) if p.remedy and p.remedy.tension)
    solved = dataclasses.replace(pr, remedy=dataclasses.replace(pr.remedy, fundamental_hz=7.25))
    c = digest.commissioning(solved)
    assert c.expected_hz == 7.25 and c.exact and "proposed tension" in c.note
    assert c.low_hz >= 7.25 * (1 - digest.COMMISSIONING_TOLERANCE) - 1e-12
    bays = dataclasses.replace(pr, remedy=dataclasses.replace(
        pr.remedy, tension=None, tension_y=None, bays=3, fundamental_hz=9.5))
    c = digest.commissioning(bays)
    assert c.expected_hz == 9.5 and "one bay" in c.note
    assert (c.low_hz, c.high_hz) == pytest.approx((9.5 * 0.95, 9.5 * 1.05))


def test_root_tension_scaling_is_exact_for_a_membrane_only():
    # Rayleigh's rectangle: doubling T multiplies every f_mn by √2 exactly.
    low = rectangle_modes(2.0, 1.2, 800.0, 0.25, 6)
    high = rectangle_modes(2.0, 1.2, 1600.0, 0.25, 6)
    for a, b in zip(low, high, strict=True):
        assert digest.frequency_at_tension(a.frequency_hz, 1600.0, 800.0) == \
            pytest.approx(b.frequency_hz, rel=1e-12)
    result = make_result(n_panels=5, n_flagged=5, tricky=False)
    membrane = next(p.panel for p in result.panels if p.panel.shape == "rectangle")
    assert digest.scales_as_root_tension(membrane) == (True, "")
    sealed = next(p.panel for p in result.panels if p.panel.plenum_side == "sealed")
    assert digest.scales_as_root_tension(sealed) == (False, "sealed cavity")
    plate = dataclasses.replace(membrane, bending_stiffness=15.0, room_side="air",
                                airflow_resistance=900.0)
    assert digest.scales_as_root_tension(plate) == (False, "bending stiffness, porous sheet")


def test_tension_range_follows_the_rating_or_the_rule_set(result):
    rules = result.ruleset
    panel = next(p.panel for p in result.panels if p.panel.max_tension)
    low, high, rated = digest.tension_range(panel, rules)
    assert rated and high == pytest.approx(panel.max_tension)
    assert low == pytest.approx(rules.min_tension_factor * panel.tension_x)
    unrated = dataclasses.replace(panel, max_tension=None)
    assert digest.tension_range(unrated, rules)[1] == pytest.approx(
        rules.max_tension_factor * panel.tension_x)
    assert digest.tension_range(dataclasses.replace(panel, tension_x=0.0), rules) is None


def test_cautions_and_methods_sources_appear(written):
    _, _, pages = written
    text = " ".join(" ".join(pages).split())
    # the safety wording the report must carry (common practice for tensioned systems)
    for phrase in ("Advisory only", "Verify on site before acting", "tap test",
                   "trained installers", "store energy", "fire-rated", "Local codes"):
        assert phrase in text, phrase
    # every formula with its published source
    for source in ("Harris' Shock and Vibration Handbook", "Structure-Borne Sound", "Weyl",
                   "Kinsler", "Rayleigh", "Dowell", "Blevins", "Leissa",
                   "Modal overlap", "Response ranking", "√(g/δ)"):
        assert source in text, source


def test_rejected_rows_and_warnings_appear(result, written):
    _, _, pages = written
    appendix = next(p for p in pages if "rejected rows and warnings" in p.lower() and "Sheet" in p)
    squashed = _squash(appendix)
    for problem in result.problems:
        assert _squash(problem.message) in squashed
        assert _squash(problem.column) in squashed
        assert _squash(problem.text) in squashed
        assert str(problem.row) in appendix


def test_every_page_has_page_n_of_m_and_the_reference(result, written):
    _, reader, pages = written
    total = len(reader.pages)
    for number, page in enumerate(pages, start=1):
        assert f"page {number} of {total}" in page
        assert result.schedule.project.reference in page


def test_markup_characters_in_an_id_print_literally(written):
    _, _, pages = written
    # the id <b>&"x" must be shown as typed, not read as bold markup or an entity
    assert any(TRICKY_ID in page for page in pages)
    assert "&lt;" not in "".join(pages) and "&amp;" not in "".join(pages)


def test_long_id_is_wrapped_not_lost(written):
    _, _, pages = written
    assert _squash(LONG_ID) in _squash("\n".join(pages))


def test_no_type_smaller_than_seven_points(written):
    # PDF 32000-1:2008, §9.3: "Tf" sets the font and its size in every content stream
    _, reader, _ = written
    sizes = set()
    for page in reader.pages:
        data = page.get_contents().get_data()
        sizes |= {float(m) for m in re.findall(rb"/[\w+-]+ ([\d.]+) Tf", data)}
    assert sizes and min(sizes) >= 7.0


def test_figures_are_vector(written):
    _, reader, pages = written
    for k, text in enumerate(pages):
        if "Interference chart" in text and "needing action" in text:  # an action page
            page = reader.pages[k]
            assert len(page.images) == 0  # no raster images: charts and shapes are paths
            content = page.get_contents().get_data()
            assert len(re.findall(rb" [ml]\b", content)) > 200  # moveto / lineto operators


def test_custom_template_folder_changes_firm_and_wording(result, tmp_path):
    folder = tmp_path / "brand"
    folder.mkdir()
    (folder / "report.toml").write_text('[firm]\nname = "Zephyr Acoustics Partnership"\n'
                                        '[colours]\naccent = "#004400"\n', encoding="utf-8")
    (folder / "cautions.md").write_text("# Cautions\n\n- Our own caution wording, test only.\n",
                                        encoding="utf-8")
    out = write_pdf(result, tmp_path / "brand.pdf", template_dir=folder)
    text = " ".join(" ".join(p.extract_text() for p in PdfReader(str(out)).pages).split())
    assert "Zephyr Acoustics Partnership" in text
    bundled = load_report_template().firm_name
    assert not bundled or bundled not in text
    assert "Our own caution wording, test only." in text
    # text files not in the custom folder fall back to the bundled ones
    assert "Methods and assumptions" in text


def test_bundled_templates_found_beside_the_package():
    folder = bundled_template_dir()
    assert (folder / "report.toml").is_file() and (folder / "cautions.md").is_file()
    template = load_report_template(None)
    assert template.title and template.cautions and template.methods


@pytest.mark.parametrize("toml, message", [
    ('[colours]\naccent = "green"\n', "colours.accent"),
    ('[colours]\nsparkle = "#123456"\n', "unknown colour"),
    ("[firm\nname = 1\n", "not valid TOML"),
    ('[firm]\nlogo = "missing.png"\n', "logo"),
])
def test_template_mistakes_are_clear_messages(tmp_path, toml, message):
    (tmp_path / "report.toml").write_text(toml, encoding="utf-8")
    with pytest.raises(ReportError, match=re.escape(message)):
        load_report_template(tmp_path)


def test_user_errors_are_clear_and_leave_no_files(result, tmp_path):
    with pytest.raises(ReportError, match="detail"):
        write_pdf(result, tmp_path / "x.pdf", detail="everything")
    with pytest.raises(ReportError, match="does not exist"):
        write_pdf(result, tmp_path / "no-such-folder" / "x.pdf")
    with pytest.raises(ReportError, match="template folder"):
        write_pdf(result, tmp_path / "x.pdf", template_dir=tmp_path / "nope")
    assert list(tmp_path.iterdir()) == []


def test_written_atomically_and_progress_reported(result, tmp_path):
    calls = []
    target = tmp_path / "audit.pdf"
    target.write_bytes(b"old report")
    out = write_pdf(result, target, progress=lambda done, total: calls.append((done, total)))
    assert out == target and target.read_bytes().startswith(b"%PDF")
    assert [p.name for p in tmp_path.iterdir()] == ["audit.pdf"]  # no temporary file left
    total = calls[-1][1]
    assert calls[-1] == (total, total) and calls[0] == (0, total)
    assert all(a[0] <= b[0] for a, b in zip(calls, calls[1:], strict=False))
    assert total == len(digest.action_panels(result)) + 1


def test_base_fonts_fallback_still_shows_ids(result, tmp_path, monkeypatch):
    monkeypatch.setattr(branding, "_SYSTEM_FONT_FOLDERS", ())
    branding.register_fonts.cache_clear()
    try:
        out = write_pdf(result, tmp_path / "base14.pdf")
    finally:
        branding.register_fonts.cache_clear()
    text = "\n".join(p.extract_text() for p in PdfReader(str(out)).pages)
    assert TRICKY_ID in text and "rho" in text  # ρ spelled out for the WinAnsi fonts


# --- charts: labels never overlap, every mark explained, type at least 7 pt ---------------------

def _overlaps(boxes) -> list:
    out = []
    for (ta, _, a), (tb, _, b) in itertools.combinations(boxes, 2):
        if a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]:
            out.append((ta, tb))
    return out


def _primitives(node) -> list:
    """A drawing flattened to its shapes' classes and numeric coordinates, in drawing order."""
    out = []
    for item in getattr(node, "contents", ()):
        out.append((type(item).__name__, getattr(item, "points", None),
                    tuple(getattr(item, a, None) for a in ("cx", "cy", "r", "x", "y", "text"))))
        out.extend(_primitives(item))
    return out


def _dense_rectangle_modes(width: float, length: float, tension: float,
                           areal_density: float, orders: int) -> list[Mode]:
    """Every mode (m, n ≤ ``orders``) of a rectangular membrane, f_mn = ½ √(T/ρs)
    √((m/Lx)² + (n/Ly)²) and participation 64/(π⁴m²n²) for odd m and n, else 0 (Rayleigh,
    The Theory of Sound, vol. 1 ch. IX): hundreds of modes, most of them hardly driven."""
    c = math.sqrt(tension / areal_density)
    found = sorted((0.5 * c * math.hypot(m / width, n / length), m, n)
                   for m in range(1, orders + 1) for n in range(1, orders + 1))
    return [Mode(label=f"({m},{n})", frequency_hz=f, nodal_lines=(),
                 participation=64.0 / (math.pi**4 * m**2 * n**2) if m % 2 and n % 2 else 0.0,
                 loss_factor=0.05, in_vacuo_hz=f * 1.6, index=k)
            for k, (f, m, n) in enumerate(found)]


def test_charts_read_mode_arrays_as_they_read_mode_records(result):
    # The charts read a panel's modes as arrays when the physics holds them so
    # (``ModeList``); any sequence of Mode records must give the same choice of modes and
    # the same drawing. A panel of 900 modes, most of them ticks that share a quarter point.
    from auditor.physics.modes import ModeList

    pr = next(p for p in result.panels if p.panel.shape == "rectangle" and p.findings)
    # a sixteenth of the tension: the fundamental near 25 Hz, hundreds of modes among the tones
    modes = tuple(_dense_rectangle_modes(pr.panel.width, pr.panel.length,
                                         pr.panel.tension_x / 16, pr.panel.areal_density, 30))
    arrays = ModeList([m.label for m in modes], [m.nodal_lines for m in modes],
                      *(np.array([getattr(m, name) for m in modes])
                        for name in ("frequency_hz", "multiplicity", "participation",
                                     "loss_factor", "in_vacuo_hz", "index")))
    held = dataclasses.replace(pr, modes=arrays)
    records = dataclasses.replace(pr, modes=modes)
    tones = digest.excitations_reaching(result, pr.panel) + tuple(_crowded_tones())
    rules = result.ruleset
    low, high, _ = digest.tension_range(pr.panel, rules)
    scale_low = math.sqrt(low / pr.panel.tension_x)
    scale_high = math.sqrt(high / pr.panel.tension_x)
    margin = rules.conflict_margin
    for limit in (3, 7):
        # Without findings: the fundamental, then the modes driven at the rule set's
        # threshold or more whose f·√(T/T₀) passes through a tone's conflict window somewhere
        # in the tension range, most participating first; listed by frequency.
        crossing = [m for m in modes[1:] if m.participation >= rules.participation_threshold
                    and any(m.frequency_hz * scale_high >= e.low_hz * (1 - margin)
                            and m.frequency_hz * scale_low <= e.high_hz * (1 + margin)
                            for e in tones)]
        expected = [modes[0]] + sorted(crossing, key=lambda m: -m.participation)[:limit - 1]
        expected = [(m.label, m.frequency_hz) for m in sorted(expected,
                                                              key=lambda m: m.frequency_hz)]
        for r in (held, records):
            chosen = digest.tuning_modes(dataclasses.replace(r, findings=()), tones, rules,
                                         limit=limit)
            assert [(m.label, m.frequency_hz) for m in chosen] == expected
    charts = [interference_chart(r, tones, conflict_margin=0.1, caution_margin=0.2)
              for r in (held, records)]
    assert _primitives(charts[0]) == _primitives(charts[1])
    # the hardly driven modes: a 7 pt tick each, ascending, one per quarter point (what a
    # printed page can show)
    ticks = [item for item in charts[0].contents if isinstance(item, Path)
             and item.points and item.points[3] - item.points[1] == 7.0]
    assert len(ticks) == 1
    xs = ticks[0].points[0::4]
    cells = [round(4 * x) for x in xs]
    assert len(xs) > 20 and all(a < b for a, b in zip(cells, cells[1:]))


def _crowded_tones() -> list[Excitation]:
    """Thirty tones a few per cent apart, with long tags: far more labels than room."""
    return [Excitation(f"AHU-{k:02d}-SUPPLY-FAN", "fan", "blade-pass", 1 + k % 3,
                       "fan blade-pass", 40.0 * 1.04 ** k) for k in range(30)]


def _charts(result):
    for pr in result.panels:
        tones = digest.excitations_reaching(result, pr.panel)
        yield interference_chart(pr, tones, conflict_margin=0.1, caution_margin=0.2)
        yield interference_chart(pr, _crowded_tones(), conflict_margin=0.1, caution_margin=0.2)
        span = digest.tension_range(pr.panel, result.ruleset)
        modes = digest.tuning_modes(pr, tones, result.ruleset)
        if span and modes:
            yield tuning_chart(modes, tones + tuple(_crowded_tones()[:8]),
                               scheduled=pr.panel.tension_x, low=span[0], high=span[1],
                               marks=[TensionMark(pr.panel.tension_x, "scheduled")],
                               proposed=pr.remedy.tension if pr.remedy else None,
                               clear_windows=pr.remedy.clear_windows if pr.remedy else ())


def test_chart_labels_never_overlap_and_stay_inside(result):
    # Measured with the font's own metrics (reportlab.pdfbase.pdfmetrics: stringWidth, ascent,
    # descent): no two strings of a chart share any area, none is under 7 pt or outside.
    count = 0
    for chart in _charts(result):
        boxes = string_boxes(chart)
        assert boxes
        assert not _overlaps(boxes)
        assert min(size for _, size, _ in boxes) >= MIN_FONT_SIZE == 7.0
        for _, _, (x0, y0, x1, y1) in boxes:
            assert 0 <= x0 and x1 <= chart.width and 0 <= y0 and y1 <= chart.height
        count += 1
    assert count >= 2 * len(result.panels)


def test_chart_legend_explains_every_mark(result):
    pr = next(p for p in result.panels if p.measured_peaks_hz)
    unassessed = next(p for p in result.panels if p.verdict == "not assessed")
    tones = [e for _, group in result.excitations for e in group]
    texts = {t for t, _, _ in string_boxes(interference_chart(
        dataclasses.replace(pr, overlap_from_hz=150.0, assessed_to_hz=400.0), tones,
        conflict_margin=0.1, caution_margin=0.2))}
    for words in ("tap-test peak", "conflict window ±10 %", "caution window ±20 %",
                  "speed or frequency band", "tone", "mode, sized by participation",
                  "conflict (mode, tone)", "modes overlap (η·f·n(f) ≥ 1)",
                  "not assessed (above 400 Hz)", "tap test", "frequency [Hz]"):
        assert words in texts, words
    texts = {t for t, _, _ in string_boxes(interference_chart(
        unassessed, tones, conflict_margin=0.1, caution_margin=0.2))}
    assert "not assessed (above 90.0 Hz)" in texts
    span = digest.tension_range(pr.panel, result.ruleset)
    chart = tuning_chart(pr.modes[:3], tones, scheduled=pr.panel.tension_x, low=span[0],
                         high=span[1], proposed=pr.remedy.tension,
                         marks=[TensionMark(pr.panel.tension_x, "fitted"),
                                TensionMark(1000.0, "scheduled", "dotted")],
                         clear_windows=pr.remedy.clear_windows, conflict_margin=0.1)
    texts = {t for t, _, _ in string_boxes(chart)}
    for words in ("mode frequency, f ∝ √T", "tone", "conflict window ±10 %",
                  "clear window (full model)", "fitted tension", "scheduled tension",
                  "proposed tension", "mode frequency at the proposed tension",
                  "tension [N/m]", f"proposed {pr.remedy.tension:.0f}"):
        assert words in texts, words


def test_tuning_curves_follow_root_tension():
    # Kinsler et al., Fundamentals of Acoustics, ch. 4: f = f0·√(T/T0). On a log-frequency
    # axis the curve's height at T is proportional to log10 f0 + ½ log10(T/T0).
    mode = Mode("(1,1)", 50.0, participation=0.66)
    chart = tuning_chart([mode], [], scheduled=1000.0, low=500.0, high=2000.0,
                         conflict_margin=None)
    paths = [n for n in chart.contents if getattr(n, "points", None) and len(n.points) > 40]
    (curve,) = [p for p in paths if len(p.points) == 2 * 48]
    xs, ys = np.array(curve.points[0::2]), np.array(curve.points[1::2])
    tension = 500.0 + (xs - xs[0]) / (xs[-1] - xs[0]) * 1500.0
    log_f = np.log10(50.0 * np.sqrt(tension / 1000.0))
    slope, intercept = np.polyfit(log_f, ys, 1)
    assert np.allclose(ys, slope * log_f + intercept, atol=1e-6)


def test_tuning_curves_follow_the_full_model_where_the_remedy_followed_it():
    # A piston on an air spring (a panel over a shallow sealed cavity): f² = a·T + b, the
    # cavity's b independent of tension (Dowell, Gorman & Smith, J. Sound Vib. 52, 1977).
    # Given the remedy's curves solved at 500, 1000 and 2000 N/m, the chart draws f² linear in
    # tension through them, which is this law itself; a mode without a curve is drawn by √T,
    # dashed, and the legend says which is which.
    a, b = 1.0, 3.0e4                                   # [Hz²·m/N], [Hz²]
    law = lambda t: math.sqrt(a * t + b)                # noqa: E731
    followed = Mode("(1,1)", law(1000.0), participation=0.66)
    other = Mode("(1,3)", 120.0, participation=0.07)
    curves = TensionCurves((500.0, 1000.0, 2000.0), ("(1,1)",),
                           (tuple(law(t) for t in (500.0, 1000.0, 2000.0)),))
    chart = tuning_chart([followed, other], [], scheduled=1000.0, low=500.0, high=2000.0,
                         conflict_margin=None, curves=curves)
    paths = [n for n in chart.contents if getattr(n, "points", None) and len(n.points) == 96]
    (full,) = [p for p in paths if not p.strokeDashArray]
    (dashed,) = [p for p in paths if p.strokeDashArray]
    tension = np.linspace(500.0, 2000.0, 48)
    for path, f in ((full, np.sqrt(a * tension + b)), (dashed, 120.0 * np.sqrt(tension / 1e3))):
        ys = np.array(path.points[1::2])
        slope, intercept = np.polyfit(np.log10(f), ys, 1)
        assert np.allclose(ys, slope * np.log10(f) + intercept, atol=1e-6)
    texts = {t for t, _, _ in string_boxes(chart)}
    assert "mode frequency (full model)" in texts
    assert "mode frequency, f ∝ √T (not followed)" in texts


def test_linear_ticks_are_round_numbers():
    # Common practice of axis labelling: steps of 1, 2, 2.5 or 5 × 10^k, three to seven ticks.
    for low, high in ((650, 1950), (7500, 20000), (300, 900), (3503, 10508), (0.5, 0.9)):
        ticks = linear_ticks(low, high)
        step = np.diff(ticks)
        assert 3 <= len(ticks) <= 8 and np.allclose(step, step[0])
        mantissa = step[0] / 10 ** math.floor(math.log10(step[0]))
        assert any(abs(mantissa - m) < 1e-9 for m in (1, 2, 2.5, 5))
        assert low <= ticks[0] and ticks[-1] <= high


def test_mount_words_from_static_deflection():
    # Harris, vibration isolation: f0 = √(g/δ)/2π, 3.15 Hz for 25 mm (15.76/√δ[mm], common
    # practice); a blank deflection is a rigid mount, said to be assumed.
    fn = math.sqrt(9.80665 / 0.025) / (2 * math.pi)
    mount = Mount("steel spring", 0.025, 0.01, fn, rigid_assumed=False, damping_assumed=True)
    assert digest.mount_text(mount, True) == "steel spring, 25 mm (f₀ 3.15 Hz), ζ 0.01 (assumed)"
    assert digest.mount_text(Mount(), True) == "rigid (assumed)"
    assert digest.mount_text(Mount(), False) == "-"


# --- figure pieces shared with the charts (the mode-shape pieces: tests/test_figures.py) ----

def test_log_axis_ticks_decades_and_one_two_five():
    # Common practice for log-frequency axes: decades labelled, 2 and 5 between on short spans.
    major, minor, labelled = log_frequency_ticks(20.0, 500.0)
    assert major == [100.0]
    assert [20.0, 50.0, 100.0, 200.0, 500.0] == labelled
    assert minor == [20.0, 30.0, 40.0, 50.0, 60.0, 70.0, 80.0, 90.0, 200.0, 300.0, 400.0, 500.0]
    _, _, wide = log_frequency_ticks(1.0, 10000.0)
    assert wide == [1.0, 10.0, 100.0, 1000.0, 10000.0]
    assert frequency_axis_range([24.2, 387.0]) == (10.0, 500.0)


def test_marker_area_grows_in_proportion_to_participation():
    r0 = participation_marker_radius(0.0)
    areas = [participation_marker_radius(p) ** 2 - r0**2 for p in (0.1, 0.2, 0.4)]
    assert areas[1] == pytest.approx(2 * areas[0]) and areas[2] == pytest.approx(4 * areas[0])
    # 64/π⁴ (rectangle (1,1)) and 4/j01² (circle (0,1)) are near the top of the scale
    assert participation_marker_radius(64 / math.pi**4) < \
        participation_marker_radius(4 / jn_zeros(0, 1)[0] ** 2)


def test_shape_drawing_builds(result):
    panel = next(p for p in result.panels if p.shapes)
    drawing = mode_shape_drawing(panel.shapes[0], panel.panel, panel.modes[0])
    assert any("Hz" in t for t, _, _ in string_boxes(drawing))
    assert min(size for _, size, _ in string_boxes(drawing)) >= 7.0


# --- wording helpers ---------------------------------------------------------------------------

def test_markup_escapes_like_the_xml_library():
    assert markup(TRICKY_ID) == escape(TRICKY_ID) == '&lt;b&gt;&amp;"x"'
    assert format_date("2024-05-14T10:32:00") == "14 May 2024"
    assert format_date("not a date") == "not a date"
    assert to_latin1("ρs ≈ 0.2 kg/m²") == "rhos ~ 0.2 kg/m²"


def test_text_blocks_parser():
    blocks = parse_text_blocks("<!-- note -->\n# Title\n\nOne\nparagraph.\n\n- a bullet\n"
                               "  continued\n- second\n## Sub\n")
    assert [(b.kind, b.text, b.level) for b in blocks] == [
        ("heading", "Title", 1), ("paragraph", "One paragraph.", 0),
        ("bullet", "a bullet continued", 0), ("bullet", "second", 0), ("heading", "Sub", 2)]


# --- every output opens, whatever text the schedule held ---------------------------------------

# W3C XML 1.0 (fifth edition), §2.2: Char ::= #x9 | #xA | #xD | [#x20-#xD7FF] | [#xE000-#xFFFD]
# | [#x10000-#x10FFFF]. An xlsx part is XML, so no other character may reach one.
XML_TEXT = re.compile("[\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]*")


def _pdf_text(path) -> str:
    reader = PdfReader(str(path))
    return "\n".join(page.extract_text() or "" for page in reader.pages)


def _xlsx_text(path) -> str:
    with zipfile.ZipFile(path) as archive:
        return "\n".join(archive.read(name).decode("utf-8") for name in archive.namelist())


def _schedule_workbook(path, result) -> None:
    """A workbook with the rows the result's records point at (sheet "Panels", rows 3...)."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Ceiling schedule"])
    ws.append(["Panel", "Zone", "Width (mm)"])
    for k in range(len(result.panels) + 40):
        ws.append([f"row {k + 3}", "office", 1200])
    wb.create_sheet("Equipment").append(["Equipment", "Kind"])
    wb.save(path)


def test_clean_text_leaves_only_characters_xml_and_openpyxl_accept():
    from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

    every = "".join(chr(c) for c in range(0x110000))  # every code point, surrogates included
    cleaned = clean_text(every)
    assert len(cleaned) == len(every)  # one for one: nothing runs together
    assert XML_TEXT.fullmatch(cleaned)
    assert not ILLEGAL_CHARACTERS_RE.search(cleaned)  # openpyxl's own test of a cell's text
    cleaned.encode("utf-8")  # no lone surrogate is left (UTF-8 cannot carry one)
    sample = 'Panel <b>&"x"</b> ρs 0.25 kg/m² ±10 %\tA\r\nB'
    assert clean_text(sample) == sample  # printable text, tabs and line breaks untouched
    assert clean_text("F-0\x076") == "F-0\ufffd6"


def test_control_characters_in_the_schedule_stop_no_writer(tmp_path):
    source = tmp_path / "project.xlsx"
    base = make_result(n_panels=6, n_flagged=3, n_problems=2)
    _schedule_workbook(source, base)
    result = renamed(with_source_file(base, str(source)), "F-0\x076", zone="Foyer\x1b",
                     equipment="AHU\x00-1")
    bad = RowProblem(str(source), "Panels", 30, "Tension (N/m)", "not a number: '\x07'",
                     text="\x07\ud800", record="X-\x0b1")
    result = dataclasses.replace(result, problems=result.problems + (bad,))
    out = tmp_path / "out"
    paths = [write_json(result, out / "findings.json"), write_csv(result, out / "findings.csv"),
             *write_audited_workbooks(result, out), write_pdf(result, out / "audit.pdf")]
    assert [p.name for p in paths] == ["findings.json", "findings.csv", "project-audited.xlsx",
                                       "audit.pdf"]
    for path in paths[:3]:  # valid UTF-8 with only characters XML allows
        text = (_xlsx_text(path) if path.suffix == ".xlsx"
                else path.read_bytes().decode("utf-8-sig"))
        assert XML_TEXT.fullmatch(text), path
    # JSON keeps the exact text, escaped (RFC 8259, §7: control characters are escaped)
    doc = json.loads(paths[0].read_text(encoding="utf-8"))
    assert "F-0\x076" in {p["panel"] for p in doc["panels"]}
    assert doc["problems"][-1]["text"] == "\x07\ud800"
    # CSV, xlsx and PDF show U+FFFD where the unprintable character was
    with open(paths[1], newline="", encoding="utf-8-sig") as handle:
        rows = list(csv.DictReader(handle))
    assert {"F-0\ufffd6", "X-\ufffd1"} <= {r["panel"] for r in rows}
    assert "AHU\ufffd-1" in {r["equipment"] for r in rows}
    findings = openpyxl.load_workbook(paths[2])["Findings"]
    assert "F-0\ufffd6" in {findings.cell(row=r, column=2).value
                            for r in range(2, findings.max_row + 1)}
    text = _pdf_text(paths[3])
    assert "F-0\ufffd6" in text and "\x07" not in text


def test_cli_audit_of_a_workbook_with_a_control_character_writes_everything(tmp_path):
    # Excel stores a control character in a cell as the escape _x0007_ (ECMA-376 Part 1,
    # §22.9.2.19 ST_Xstring); the reader decodes it, and every writer must still cope.
    from typer.testing import CliRunner

    from auditor.cli import app

    plain = tmp_path / "plain.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Panel", "Zone", "Width (mm)", "Length (mm)", "Tension (N/m)",
               "Areal density (g/m²)", "Room side", "Plenum side", "Notes"])
    ws.append(["PANELBELL", "Office", 1200, 900, 800, 250, "none", "none", "NOTEBELL"])
    eq = wb.create_sheet("Equipment")
    eq.append(["Equipment", "Kind", "Zone", "rpm", "Blades"])
    # blade-pass 6 x 1090/60 = 109 Hz, 3 % above the panel's f11 = ½√(T/ρs)√(1/Lx² + 1/Ly²)
    eq.append(["FANBELL", "fan", "Office", 1090, 6])
    wb.save(plain)
    schedule = tmp_path / "bell.xlsx"
    with zipfile.ZipFile(plain) as zin, zipfile.ZipFile(schedule, "w") as zout:
        for item in zin.infolist():
            data = zin.read(item.filename)
            for word, escaped in ((b"PANELBELL", b"C_x0007_1"), (b"NOTEBELL", b"=1+2_x001b_"),
                                  (b"FANBELL", b"AHU_x0007_1")):
                data = data.replace(word, escaped)
            zout.writestr(item, data)
    out = tmp_path / "out"
    got = CliRunner().invoke(app, ["audit", str(schedule), "--out", str(out)])
    assert got.exit_code == 0, got.output
    assert sorted(p.name for p in out.iterdir()) == [
        "audit.pdf", "bell-audited.xlsx", "findings.csv", "findings.json"]
    workbook = openpyxl.load_workbook(out / "bell-audited.xlsx")
    assert "Audit status" in [c.value for c in workbook["Panels"][1]]
    assert len(PdfReader(str(out / "audit.pdf")).pages) >= 3


# --- formulas: OWASP, "CSV Injection" ---------------------------------------------------------

FORMULAS = ("=1+2", "+SUM(A1:A9)", "-2+3", "@SUM(A1)", "\t=1+2", "\r=1+2")


def _formula_result(tmp_path):
    source = tmp_path / "project.xlsx"
    base = make_result(n_panels=5, n_flagged=3, n_problems=0)
    _schedule_workbook(source, base)
    result = renamed(with_source_file(base, str(source)), FORMULAS[0], zone=FORMULAS[1],
                     equipment=FORMULAS[2])
    problems = tuple(RowProblem(str(source), "Panels", 30 + k, "Zone", text, text=text,
                                record=text) for k, text in enumerate(FORMULAS[3:]))
    problems += (RowProblem(str(source), "Panels", 40, "Panel", "#N/A", record="#N/A"),)
    return dataclasses.replace(result, problems=problems)


def test_formula_text_is_inert_in_csv_and_numbers_stay_numbers(tmp_path):
    # OWASP, "CSV Injection": a cell starting with = + - @ tab or carriage return is prefixed
    # with a single quote so that a spreadsheet shows it as text.
    result = _formula_result(tmp_path)
    rows = list(csv.DictReader(io.StringIO(findings_csv(result))))
    cells = {v for r in rows for v in r.values()}
    for text in FORMULAS:
        assert "'" + text in cells, text
        assert text not in cells
    assert not [v for v in cells if v and v[0] in "=+@\t\r"]
    separations = [r["separation_percent"] for r in rows
                   if r["severity"] in ("conflict", "caution")]
    negative = [v for v in separations if v.startswith("-")]
    assert negative and all(float(v) < 0 for v in negative)  # a negative number is not text
    assert all(not v.startswith("'") for v in separations)


def test_formula_text_is_a_string_cell_in_xlsx_and_numbers_stay_numbers(tmp_path):
    # ECMA-376 Part 1, §18.18.11 ST_CellType: "s" is a (shared) string, "n" a number, "e" an
    # error, and a cell with an <f> element is a formula. openpyxl makes any text starting
    # with "=" a formula and "#N/A" an error unless told it is a string.
    result = _formula_result(tmp_path)
    (path,) = write_audited_workbooks(result, tmp_path / "out")
    wb = openpyxl.load_workbook(path)
    for name in ("Findings", "Rejected rows"):
        for row in wb[name].iter_rows(min_row=2):
            for cell in row:
                if cell.value is None:
                    continue
                assert cell.data_type in ("s", "n"), (name, cell.coordinate, cell.value)
                if cell.data_type == "s":
                    assert cell.value[0] not in "=+-@\t\r", (cell.coordinate, cell.value)
    findings = wb["Findings"]
    head = [c.value for c in findings[1]]
    ids = [findings.cell(row=r, column=2).value for r in range(2, findings.max_row + 1)]
    assert "'=1+2" in ids
    separation = head.index("separation_percent") + 1
    values = [findings.cell(row=r, column=separation) for r in range(2, findings.max_row + 1)]
    assert any(c.data_type == "n" and c.value < 0 for c in values)
    rejected = wb["Rejected rows"]
    records = {rejected.cell(row=r, column=2).value for r in range(2, rejected.max_row + 1)}
    # W3C XML 1.0, §2.11: a parser reads a lone carriage return as a line feed
    assert {"'@SUM(A1)", "'\t=1+2", "'\n=1+2", "#N/A"} <= records
    with zipfile.ZipFile(path) as archive:
        sheets = [n for n in archive.namelist() if n.startswith("xl/worksheets/")]
        assert not any(b"<f>" in archive.read(n) for n in sheets)  # no formula anywhere


def test_csv_schedule_copy_keeps_numbers_and_neutralises_formulas(tmp_path):
    source = tmp_path / "project.csv"
    base = make_result(n_panels=3, n_flagged=2, n_problems=0)
    lines = ["Ceiling schedule,,,", "Panel,Zone,Width (mm),Notes"]
    lines += [f"{p.panel.panel if k else 'CL-1'},office,-5,=1+2" for k, p in enumerate(base.panels)]
    lines += ["007,office,1200.5,@SUM(A1)"] * 40
    source.write_text("\n".join(lines) + "\n", encoding="utf-8")
    result = with_source_file(base, str(source))
    (path,) = write_audited_workbooks(result, tmp_path / "out")
    ws = openpyxl.load_workbook(path).worksheets[0]
    assert ws.title == "project"
    # common practice: a number stays a number, a negative one too
    assert ws["C3"].value == -5 and ws["C3"].data_type == "n"
    assert ws["D3"].value == "'=1+2" and ws["D3"].data_type == "s"
    assert ws["A6"].value == "007" and ws["C6"].value == 1200.5  # an id keeps its zeros


# --- files follow the umask; atomic ------------------------------------------------------------

@pytest.mark.skipif(os.name != "posix", reason="POSIX permission bits")
@pytest.mark.parametrize("mask", [0o022, 0o077, 0o002])
def test_outputs_follow_the_umask(tmp_path, mask):
    # POSIX open(): a new file's permission bits are the mode asked for less the umask, and
    # tools ask for 0o666 (common practice), so an output is 0o644 under umask 022.
    source = tmp_path / "project.xlsx"
    result = with_source_file(make_result(n_panels=2, n_flagged=1, n_problems=1), str(source))
    _schedule_workbook(source, result)
    out = tmp_path / "out"
    out.mkdir()
    old = os.umask(mask)
    try:
        written = [write_json(result, out / "findings.json"), write_csv(result, out / "f.csv"),
                   *write_audited_workbooks(result, out), write_pdf(result, out / "audit.pdf")]
    finally:
        os.umask(old)
    for path in written:
        assert stat.S_IMODE(path.stat().st_mode) == 0o666 & ~mask, path.name
    assert sorted(p.name for p in out.iterdir()) == sorted(p.name for p in written)


def test_write_atomic_keeps_the_old_file_when_writing_fails(tmp_path):
    target = tmp_path / "findings.json"
    target.write_bytes(b"old")

    def half_then_fail(handle):
        handle.write(b"half")
        raise RuntimeError("stopped")

    with pytest.raises(RuntimeError):
        write_atomic(target, half_then_fail)
    assert target.read_bytes() == b"old"
    assert list(tmp_path.iterdir()) == [target]  # the temporary file is gone
    write_atomic(target, "ρs", encoding="utf-8-sig")
    assert target.read_bytes() == b"\xef\xbb\xbf" + "ρs".encode()  # UTF-8 byte-order mark
    with pytest.raises(FileNotFoundError) as error:
        write_atomic(tmp_path / "missing" / "x.json", b"{}")
    assert error.value.filename == str(tmp_path / "missing" / "x.json")


# --- no local folder in any output -------------------------------------------------------------

def test_no_output_names_a_local_folder(tmp_path):
    from typer.testing import CliRunner

    from auditor.cli import app

    folder = tmp_path / "site-survey-input-folder-5f1d29c7e0a84b36-never-printed"
    folder.mkdir()
    schedule = folder / "s.xlsx"
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Panels"
    ws.append(["Panel", "Zone", "Width (mm)", "Length (mm)", "Tension (N/m)",
               "Areal density (g/m²)", "Room side", "Plenum side", "Tap test"])
    ws.append(["C-1", "Office", 1200, 900, 800, 250, "none", "none", "taps/C-1.wav"])
    ws.append(["C-2", "Office", -5, 900, 800, 250, "none", "none", None])
    eq = wb.create_sheet("Equipment")
    eq.append(["Equipment", "Kind", "Zone", "rpm", "Blades"])
    eq.append(["AHU-1", "fan", "Office", 1090, 6])
    wb.save(schedule)
    rules = folder / "our-office.toml"
    rules.write_text('name = "our-office"\ndescription = "Our own margins."\n', encoding="utf-8")
    out = tmp_path / "out"
    got = CliRunner().invoke(app, ["audit", str(schedule), str(folder / "missing.xlsx"),
                                   "--rules", str(rules), "--out", str(out), "--calibrated"])
    assert got.exit_code == 0, got.output
    texts = {
        "findings.json": (out / "findings.json").read_text(encoding="utf-8"),
        "findings.csv": (out / "findings.csv").read_text(encoding="utf-8-sig"),
        "s-audited.xlsx": _xlsx_text(out / "s-audited.xlsx"),
        "audit.pdf": _pdf_text(out / "audit.pdf"),
    }
    reader = PdfReader(str(out / "audit.pdf"))
    texts["pdf metadata"] = " ".join(str(v) for v in (reader.metadata or {}).values())
    texts["pdf outline"] = " ".join(str(item.title) for item in reader.outline
                                    if not isinstance(item, list))
    for name, text in texts.items():
        flat = re.sub(r"\s+", "", text)
        assert folder.name not in flat and str(tmp_path) not in text, name
    assert folder.name.encode() not in (out / "audit.pdf").read_bytes()
    # inputs by file name and SHA-256; the user's rule set by file name and SHA-256
    schedule_sha = hashlib.sha256(schedule.read_bytes()).hexdigest()
    rules_sha = hashlib.sha256(rules.read_bytes()).hexdigest()
    doc = json.loads(texts["findings.json"])
    assert {"name": "s.xlsx", "sha256": schedule_sha} in [
        {k: f.get(k) for k in ("name", "sha256")} for f in doc["files"]]
    assert "missing.xlsx" in {q["file"] for q in doc["problems"]}
    rules_text = json.dumps(doc["rules"])
    assert "our-office.toml" in rules_text and rules_sha[:12] in rules_text
    pdf = _squash(texts["audit.pdf"])
    assert schedule_sha in pdf and "s.xlsx" in pdf
    assert "our-office.toml" in pdf and rules_sha[:12] in pdf


def test_factory_paths_stay_out_of_the_pdf(written):
    _, reader, pages = written
    text = _squash("\n".join(pages))
    assert "/projects/riverside" not in text and "/work/main" not in text
    assert "project.xlsx" in _squash(pages[0])


def test_local_paths_become_file_names():
    named = LocalPaths({"/srv/job-1/s.xlsx": "s.xlsx", "s.xlsx": "s.xlsx"})
    assert named.name("/srv/job-1/s.xlsx") == "s.xlsx"
    assert named.name("site-a/s.xlsx") == "site-a/s.xlsx"  # a name as the reader shows it
    assert named.name("/elsewhere/t.csv") == "t.csv" and named.name("C:\\x\\q.xlsx") == "q.xlsx"
    paths = LocalPaths({"/srv/job-1/s.xlsx": "s.xlsx"}, ["/srv/job-1"])
    assert paths.scrub("/srv/job-1/s.xlsx could not be read") == "s.xlsx could not be read"
    assert paths.scrub("tap-test recording '/srv/job-1/taps/a.wav' not found") == \
        "tap-test recording 'taps/a.wav' not found"
    assert paths.scrub("see C:\\Users\\someone\\rules.toml") == "see rules.toml"
    units = "900 N/m, 0.25 kg/m², 1/3 octave, Pa·s/m, ±10 %/±20 %"
    assert paths.scrub(units) == units  # units are not paths


# --- markup prints literally -------------------------------------------------------------------

def test_markup_in_any_user_text_prints_literally(tmp_path):
    # reportlab's Paragraph reads an XML-like markup (ReportLab User Guide, ch. 6: <b>, <font>,
    # <para>, <br/>, entities); text from a schedule must come out exactly as typed.
    result = renamed(make_result(n_panels=3, n_flagged=2, tricky=False, n_problems=1),
                     "<b>X</b>", zone="<font color='red'>Z</font>", equipment="A&amp;B")
    project = dataclasses.replace(result.schedule.project, name="<para>P</para> & Co",
                                  client="Q<br/>R")
    problem = dataclasses.replace(result.problems[0], message="<i>not</i> a number",
                                  text="<u>tight</u>")
    result = dataclasses.replace(result, problems=(problem,), schedule=dataclasses.replace(
        result.schedule, project=project, problems=(problem,)))
    text = _squash(_pdf_text(write_pdf(result, tmp_path / "markup.pdf")))
    for typed in ("<b>X</b>", "<font color='red'>Z</font>", "A&amp;B", "<para>P</para>&Co",
                  "Q<br/>R", "<i>not</i>anumber", "<u>tight</u>", "Panel<b>X</b>"):
        assert _squash(typed) in text, typed


# --- panel data in the units of their columns --------------------------------------------------

def test_panel_data_in_the_unit_of_its_column(tmp_path):
    # NIST SP 811 (2008), Appendix B: 1 in = 0.0254 m and 1 ft = 0.3048 m exactly,
    # 1 oz = 28.349 523 125 g, 1 yd² = 0.836 127 36 m², 1 lbf = 4.448 221 615 260 5 N.
    assert in_column_unit("Diameter (mm)", "96 in") == "2438 (typed 96 in)"      # 2438.4 mm
    assert in_column_unit("Width (mm)", "16 ft") == "4877 (typed 16 ft)"         # 4876.8 mm
    assert in_column_unit("Areal density (g/m²)", "10 oz/yd²") == "339.1 (typed 10 oz/yd²)"
    assert in_column_unit("Tension (N/m)", "40 lbf/in") == "7005 (typed 40 lbf/in)"  # 7005.07
    assert in_column_unit("Max tension (kN/m)", "1500 N/m") == "1.5 (typed 1500 N/m)"
    for header, typed in (("Width (mm)", "1200"), ("Width (mm)", "1200 mm"),
                          ("Zone", "Foyer"), ("Width (mm)", "about 2 m"),
                          ("Outline (mm)", "0,0; 10 in,0; 10 in,10 in")):
        assert in_column_unit(header, typed) == typed
    assert in_column_unit("Tension x", "800") == "800 N/m"  # the column's default unit
    base = make_result(n_panels=4, n_flagged=4, tricky=False, n_problems=0)
    circle = next(k for k, p in enumerate(base.panels) if p.panel.shape == "circle")
    panel = base.panels[circle].panel
    entered = tuple((h, "96 in" if h == "Diameter (mm)" else t) for h, t in panel.entered)
    panels = list(base.panels)
    panels[circle] = dataclasses.replace(panels[circle],
                                         panel=dataclasses.replace(panel, entered=entered))
    text = _squash(_pdf_text(write_pdf(dataclasses.replace(base, panels=tuple(panels)),
                                       tmp_path / "units.pdf")))
    assert "Diameter(mm)2438(typed96in)" in text


# --- same result, same file --------------------------------------------------------------------

def test_same_result_gives_the_same_pdf_dated_by_the_audit(result, written, tmp_path):
    again = write_pdf(result, tmp_path / "again.pdf")
    assert again.read_bytes() == written[0].read_bytes()
    # PDF 32000-1:2008, §7.9.4: a date is "D:YYYYMMDDHHmmSS"; the report is dated by the audit
    assert PdfReader(str(again)).metadata["/CreationDate"].startswith("D:20240514103200")
    assert findings_json(result) == findings_json(result)
