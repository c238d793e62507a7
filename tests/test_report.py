"""The PDF audit: read back with pypdf, and its figure pieces checked against analytic facts."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from pypdf import PdfReader
from scipy.special import jn_zeros
from xml.sax.saxutils import escape

from auditor.report import pdf as pdf_module
from auditor.report.figures import (
    frequency_axis_range,
    interference_chart,
    log_frequency_ticks,
    marching_squares,
    merged_cell_runs,
    mode_shape_drawing,
    participation_marker_radius,
)
from auditor.report.pdf import ReportError, bundled_template_dir, load_report_template, write_pdf
from auditor.report.text import format_date, markup, parse_text_blocks, to_latin1
from report_factory import LONG_ID, TRICKY_ID, circle_shape, make_result, rectangle_shape


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


# --- the report read back --------------------------------------------------------------------

def test_every_conflict_names_its_panel_and_equipment(result, written):
    _, _, pages = written
    text = _squash("\n".join(pages))
    conflicts = [f for f in result.findings if f.severity == "conflict"]
    assert conflicts, "the fixture must hold conflicts"
    for finding in conflicts:
        assert _squash(finding.panel) in text
        assert _squash(finding.excitation.equipment) in text


def test_markup_characters_in_an_id_print_literally(written):
    _, _, pages = written
    # the id <b>&"x" must be shown as typed, not read as bold markup or an entity
    assert any(TRICKY_ID in page for page in pages)
    assert "&lt;" not in "".join(pages) and "&amp;" not in "".join(pages)


def test_long_id_is_wrapped_not_lost(written):
    _, _, pages = written
    assert _squash(LONG_ID) in _squash("\n".join(pages))


def test_cautions_appear(written):
    _, _, pages = written
    text = " ".join(" ".join(pages).split())
    # the safety wording the report must carry (common practice for tensioned systems)
    for phrase in ("Advisory only", "Verify on site before acting", "tap test",
                   "trained installers", "store energy", "fire-rated", "Local codes"):
        assert phrase in text, phrase


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


def test_page_count_follows_the_detail_option(result, written, tmp_path):
    _, reader, _ = written
    flagged = sum(1 for p in result.panels if p.findings)
    # cover, summary, one or more pages per flagged panel, appendix/methods/cautions
    assert flagged + 3 <= len(reader.pages) <= 3 * flagged + 8
    every = PdfReader(str(write_pdf(result, tmp_path / "all.pdf", detail="all")))
    clear = len(result.panels) - flagged
    assert len(every.pages) >= len(reader.pages) + clear
    text = "\n".join(page.extract_text() for page in every.pages)
    assert all(f"Panel {p.panel.panel}" in text for p in result.panels if not p.findings)


def test_cover_carries_project_ruleset_version_and_file_hash(result, written):
    _, _, pages = written
    cover = pages[0]
    project = result.schedule.project
    for value in (project.name, project.reference, project.client, project.prepared_by,
                  project.prepared_for, result.ruleset.name, result.version):
        assert value in cover
    assert "14 May 2024" in cover  # result.created 2024-05-14T10:32:00
    assert result.schedule.files[0].sha256 in _squash(cover)


def test_summary_counts_match_the_result(result, written):
    _, _, pages = written
    summary = pages[1]
    counts = result.summary()
    for label, key in (("Conflicts (mode and excitation pairs)", "conflicts"),
                       ("Rejected schedule rows", "rejected_rows")):
        lines = [line.strip() for line in summary.splitlines()]
        assert lines[lines.index(label) + 1] == str(counts[key])


def test_figures_are_vector(written):
    _, reader, pages = written
    panel_page = next(i for i, p in enumerate(pages) if "Interference chart" in p)
    page = reader.pages[panel_page]
    assert len(page.images) == 0  # no raster images: charts and shapes are vector paths
    content = page.get_contents().get_data()
    assert len(re.findall(rb" [ml]\b", content)) > 200  # moveto / lineto path operators


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
    assert all(a[0] <= b[0] for a, b in zip(calls, calls[1:]))
    assert total == sum(1 for p in result.panels if p.findings) + 1


def test_base_fonts_fallback_still_shows_ids(result, tmp_path, monkeypatch):
    monkeypatch.setattr(pdf_module, "_SYSTEM_FONT_FOLDERS", ())
    pdf_module._register_fonts.cache_clear()
    try:
        out = write_pdf(result, tmp_path / "base14.pdf")
    finally:
        pdf_module._register_fonts.cache_clear()
    text = "\n".join(p.extract_text() for p in PdfReader(str(out)).pages)
    assert TRICKY_ID in text and "rho" in text  # ρ spelled out for the WinAnsi fonts


# --- figure pieces against analytic facts ----------------------------------------------------

def test_rectangle_nodal_lines_where_rayleigh_puts_them():
    # Rayleigh, The Theory of Sound, vol. 1 ch. IX: mode (m, n) of a fixed rectangle,
    # sin(mπx/Lx) sin(nπy/Ly), has m-1 nodal lines x = k Lx/m and n-1 lines y = k Ly/n.
    width, length = 1.8, 1.2
    shape = rectangle_shape("(3,2)", width, length, nx=73, ny=49)
    lines = marching_squares(shape.x, shape.y, shape.values)
    points = np.vstack(lines)
    cell = width / 72
    expected_x, expected_y = [width / 3, 2 * width / 3], [length / 2]
    distance = np.minimum(
        np.min(np.abs(points[:, :1] - np.array(expected_x)[None, :]), axis=1),
        np.abs(points[:, 1] - expected_y[0]))
    # interior points only: the fixed edge itself is not a nodal line to draw
    inner = ((points[:, 0] > cell) & (points[:, 0] < width - cell)
             & (points[:, 1] > cell) & (points[:, 1] < length - cell))
    assert inner.sum() > 100
    assert np.max(distance[inner]) < 0.5 * cell
    for xk in expected_x:  # each nodal line is drawn along its whole length
        on = points[np.abs(points[:, 0] - xk) < 0.5 * cell]
        assert on[:, 1].max() - on[:, 1].min() > 0.95 * length
    on = points[np.abs(points[:, 1] - length / 2) < 0.5 * cell]
    assert on[:, 0].max() - on[:, 0].min() > 0.95 * width


def test_circle_nodal_circle_and_diameters_from_bessel_zeros():
    # Kinsler et al., Fundamentals of Acoustics, ch. 4: mode (m, n) = J_m(j_mn r/a) cos(mθ) has m
    # nodal diameters and n-1 nodal circles at r = a j_mk / j_mn; zeros from scipy.special.
    diameter = 1.2
    a = diameter / 2
    shape = circle_shape("(2,2)", diameter, nx=121)
    points = np.vstack(marching_squares(shape.x, shape.y, shape.values))
    r, theta = np.hypot(points[:, 0], points[:, 1]), np.arctan2(points[:, 1], points[:, 0])
    circle_radius = a * jn_zeros(2, 2)[0] / jn_zeros(2, 2)[1]
    cell = diameter / 120
    to_circle = np.abs(r - circle_radius)
    # cos 2θ = 0 on the diameters θ = π/4 + kπ/2: distance of a point from the nearest one
    nearest = np.pi / 4 + np.round((theta - np.pi / 4) / (np.pi / 2)) * np.pi / 2
    to_diameter = r * np.abs(np.sin(theta - nearest))
    inner = r < a - 2 * cell
    assert np.max(np.minimum(to_circle, to_diameter)[inner]) < cell
    assert np.sum(to_circle[inner] < cell) > 50           # the nodal circle is traced
    quadrants = {int(np.round((t - np.pi / 4) / (np.pi / 2))) % 4
                 for t in theta[inner & (to_diameter < cell) & (r > 0.5 * a)]}
    assert quadrants == {0, 1, 2, 3}                       # both diameters, all four arms


def test_marching_squares_traces_a_circle_as_one_closed_loop():
    # Level set of x² + y² (plain geometry): one closed curve of radius 0.7.
    x = y = np.linspace(-1, 1, 81)
    xx, yy = np.meshgrid(x, y)
    lines = marching_squares(x, y, xx**2 + yy**2, level=0.49)
    assert len(lines) == 1
    loop = lines[0]
    assert np.allclose(loop[0], loop[-1])
    assert np.max(np.abs(np.hypot(loop[:, 0], loop[:, 1]) - 0.7)) < 2e-3


def test_positive_and_negative_regions_split_evenly_for_an_antisymmetric_mode():
    # Mode (2,1) of a rectangle is odd about x = Lx/2 (Rayleigh): + and - areas are equal,
    # and the merged rectangles cover every cell exactly once.
    shape = rectangle_shape("(2,1)", 2.0, 1.0, nx=61, ny=31)  # 60 × 30 cells
    runs = merged_cell_runs(shape.values)
    area = {k: sum((i1 - i0) * (j1 - j0) for i0, j0, i1, j1 in rects) for k, rects in runs.items()}
    positive = area.get(1, 0) + area.get(2, 0)
    negative = area.get(-1, 0) + area.get(-2, 0)
    assert positive == negative and positive + negative == 60 * 30
    n_rects = sum(len(r) for r in runs.values())
    assert n_rects < 60 * 30 / 8  # merged, not one rectangle per cell


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
    assert participation_marker_radius(64 / math.pi**4) < participation_marker_radius(4 / jn_zeros(0, 1)[0] ** 2)


def test_chart_and_shape_drawings_build(result):
    panel = next(p for p in result.panels if p.measured_peaks_hz)
    lines = [e for _, group in result.excitations for e in group]
    chart = interference_chart(panel, lines, conflict_margin=0.1, caution_margin=0.2)
    texts = [getattr(s, "text", "") for s in chart.getContents()]
    assert "tap-test peak" in texts and "frequency [Hz]" in texts
    assert any(t.startswith("TX-1 hum") for t in texts)
    drawing = mode_shape_drawing(panel.shapes[0], panel.panel, panel.modes[0])
    assert any("Hz" in getattr(s, "text", "") for s in drawing.getContents())


# --- wording helpers ---------------------------------------------------------------------------

def test_markup_escapes_like_the_xml_library():
    assert markup(TRICKY_ID) == escape(TRICKY_ID) == '&lt;b&gt;&amp;"x"'
    assert format_date("2024-05-14T10:32:00") == "14 May 2024"
    assert format_date("not a date") == "not a date"
    assert to_latin1("ρs ≈ 0.2 kg/m²") == "rhos ~ 0.2 kg/m²"


def test_text_blocks_parser():
    blocks = parse_text_blocks("<!-- note -->\n# Title\n\nOne\nparagraph.\n\n- a bullet\n  continued\n- second\n## Sub\n")
    assert [(b.kind, b.text, b.level) for b in blocks] == [
        ("heading", "Title", 1), ("paragraph", "One paragraph.", 0),
        ("bullet", "a bullet continued", 0), ("bullet", "second", 0), ("heading", "Sub", 2)]
