"""Tap-test calibration of tension and measured loss factors (auditor.calibrate).

Every recording here is synthesised from known modes of a rectangular membrane at a "true"
tension 15 % below the scheduled one, with known loss factors, white noise, one predicted
mode left out, a room mode the model does not know, and mains hum at 100 and 200 Hz.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os

import numpy as np
import pytest

from auditor.calibrate import (
    Calibration,
    CalibrationError,
    Recording,
    apply_calibration,
    calibrate_panel,
    calibrate_schedule,
    calibration_to_dict,
    format_uncertainty,
    half_power_loss_factor,
    hum_lines,
    match_peaks,
    measure_peaks,
    synthesise_tap_test,
    tap_spectrum,
    write_wav,
)
from auditor.model import Panel, Project, Schedule, SourceRef
from auditor.results import Mode

RATE = 4000
TRUE_SCALE = 0.85
ROOM_MODE_HZ = 57.0

PANEL = Panel(panel="C-01", source=SourceRef("schedule.xlsx", "Panels", 7), width=0.7,
              length=0.5, material="film", areal_density=0.25, tension_x=400.0,
              tension_y=400.0, entered=(("Tap test", "taps/c01.wav"),))


def _participation(m: int, n: int) -> float:
    # uniform-pressure participation of mode (m, n) of a rectangle: 64/(π⁴ m² n²) for odd m
    # and n, else 0 (the modal integral of sin·sin; common practice)
    return 64.0 / (math.pi**4 * m * m * n * n) if m % 2 and n % 2 else 0.0


def ideal_membrane(fmax: float = 400.0, orders: int = 14):
    """f_mn = ½ √((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²): rectangular membrane with fixed edges
    (Rayleigh, The Theory of Sound, vol. 1, §194; any acoustics text, e.g. Kinsler et al.,
    Fundamentals of Acoustics, 4th ed., 2000, §4.4)."""

    def modes_of(panel: Panel) -> list[Mode]:
        out = []
        for m in range(1, orders + 1):
            for n in range(1, orders + 1):
                f = 0.5 * math.sqrt(panel.tension_x / panel.areal_density * (m / panel.width) ** 2
                                    + panel.tension_y / panel.areal_density
                                    * (n / panel.length) ** 2)
                if f <= fmax:
                    out.append(Mode(label=f"({m},{n})", frequency_hz=f,
                                    participation=_participation(m, n)))
        return sorted(out, key=lambda mode: mode.frequency_hz)

    return modes_of


def loaded_plate(fmax: float = 400.0, orders: int = 14, bending_stiffness: float = 2.0,
                 air_density: float = 1.2):
    """A model whose frequencies do not scale as √T: a prestressed plate with simply
    supported edges, ω²(ρs + μ) = Tx kx² + Ty ky² + D k⁴ (exact for that case: e.g. Leissa,
    Vibration of Plates, NASA SP-160, 1969), plus a tension-independent added mass
    μ = 2ρ0/k (air on both sides, the wide-panel limit of the radiation mass of a baffled
    mode: from memory, used here only as a test model)."""

    def modes_of(panel: Panel) -> list[Mode]:
        out = []
        for m in range(1, orders + 1):
            for n in range(1, orders + 1):
                kx, ky = m * math.pi / panel.width, n * math.pi / panel.length
                k2 = kx * kx + ky * ky
                mass = panel.areal_density + 2.0 * air_density / math.sqrt(k2)
                omega2 = (panel.tension_x * kx * kx + panel.tension_y * ky * ky
                          + bending_stiffness * k2 * k2) / mass
                f = math.sqrt(omega2) / (2 * math.pi)
                if f <= fmax:
                    out.append(Mode(label=f"({m},{n})", frequency_hz=f,
                                    participation=_participation(m, n)))
        return sorted(out, key=lambda mode: mode.frequency_hz)

    return modes_of


def synthesise(modes_of, true_panel: Panel, *, count: int = 9, drop: int = 3, seed: int = 0,
               hum_level: float = 0.05, duration: float = 1.5):
    """A tap test of ``true_panel``: its lowest resolvable modes, one dropped, a room mode."""
    modes = modes_of(true_panel)
    chosen: list[Mode] = []
    for mode in modes:
        if all(abs(mode.frequency_hz / c.frequency_hz - 1) > 0.07 for c in chosen):
            chosen.append(mode)
        if len(chosen) == count:
            break
    missing = chosen.pop(drop)  # one predicted mode the tap did not excite
    rng = np.random.default_rng(seed)
    eta = rng.uniform(0.015, 0.035, len(chosen))  # film panels: η ~ 0.01–0.05, common practice
    amplitudes = rng.uniform(0.4, 1.0, len(chosen))
    x = synthesise_tap_test([m.frequency_hz for m in chosen] + [ROOM_MODE_HZ],
                            list(eta) + [0.015], list(amplitudes) + [0.5], sample_rate=RATE,
                            duration=duration, noise=0.001, hum_hz=[100.0, 200.0],
                            hum_level=hum_level, seed=seed)
    truth = {m.frequency_hz: float(e) for m, e in zip(chosen, eta)}
    return Recording(source="synthetic.wav", samples=x, sample_rate=RATE), truth, missing


def _true_loss_factor(truth: dict[float, float], peak_hz: float) -> float:
    nearest = min(truth, key=lambda f: abs(f - peak_hz))
    assert abs(nearest / peak_hz - 1) < 0.01, peak_hz
    return truth[nearest]


def _true(scale: float = TRUE_SCALE, panel: Panel = PANEL) -> Panel:
    return dataclasses.replace(panel, tension_x=panel.tension_x * scale,
                               tension_y=panel.tension_y * scale)


# ------------------------------------------------------------------ building blocks

def test_half_power_bandwidth_of_one_decaying_mode():
    # η = Δf/f from the −3 dB bandwidth (common practice, e.g. Beranek & Vér, Noise and
    # Vibration Control Engineering, 2nd ed., 2006); the exponential window's share
    # 1/(π τ) is removed (exponential-window correction: common practice in modal testing,
    # e.g. Ewins, Modal Testing, 2000)
    f, eta = 150.0, 0.02
    x = synthesise_tap_test([f], [eta], sample_rate=RATE, duration=1.5, noise=1e-4)
    rec = Recording(samples=x, sample_rate=RATE)
    for refine in (False, True):
        (peak,) = measure_peaks(rec, fmin=50, fmax=400, refine=refine)
        assert peak.frequency_hz == pytest.approx(f, rel=2e-3)
        assert peak.loss_factor == pytest.approx(eta, rel=0.05)
        assert peak.bandwidth_hz == pytest.approx(eta * f, rel=0.05)
    spectrum = tap_spectrum(x, RATE, window_end=0.01)
    assert spectrum.window_bandwidth_hz == pytest.approx(math.log(100) / (math.pi * 1.45),
                                                         rel=0.01)
    assert half_power_loss_factor(3.0, 100.0, 1.0) == pytest.approx(0.02)
    assert half_power_loss_factor(1.0, 100.0, 1.0) is None


def test_hum_lines_are_twice_line_frequency_and_harmonics():
    # transformer and motor hum at 2 × line frequency and its harmonics (common practice)
    assert list(hum_lines(50.0, 450.0)) == [100.0, 200.0, 300.0, 400.0]
    assert list(hum_lines(60.0, 250.0)) == [120.0, 240.0]


def test_matching_skips_spurious_peaks_and_missing_modes():
    predicted = [50.0, 80.0, 110.0, 140.0]
    peaks = [50.5, 66.0, 139.0]  # 66 Hz matches nothing; 80 and 110 Hz are missing
    pairs, cost = match_peaks(peaks, predicted, tolerance=0.05)
    assert sorted(pairs) == [(0, 0), (2, 3)]
    expected = (math.log(50.5 / 50) ** 2 + math.log(139 / 140) ** 2 + math.log(1.05) ** 2)
    assert cost == pytest.approx(expected)
    # one peak cannot serve two modes
    pairs, _ = match_peaks([100.0], [99.0, 101.0])
    assert len(pairs) == 1


# ------------------------------------------------------------------ tension fits

@pytest.mark.parametrize("seed", [0, 1])
def test_tension_within_two_percent_and_loss_factors_within_twenty(seed):
    modes_of = ideal_membrane()
    rec, truth, missing = synthesise(modes_of, _true(), seed=seed)
    cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)
    assert cal.tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    assert cal.tension_y == pytest.approx(PANEL.tension_y * TRUE_SCALE, rel=0.02)
    assert cal.scheduled_tension == PANEL.tension_x
    assert cal.uncertainty is not None and cal.uncertainty < 0.02
    assert cal.residual < 1.0  # percent
    assert all(abs(m.peak_hz / missing.frequency_hz - 1) > 0.01 for m in cal.matched)
    # every synthesised mode is found and matched (to itself, or to a mode within 1 %: two
    # modes that close make one peak)
    assert len(cal.matched) == len(truth)
    for m in cal.matched:
        assert m.loss_factor == pytest.approx(_true_loss_factor(truth, m.peak_hz), rel=0.20)
        assert abs(m.peak_hz / m.predicted_hz - 1) < 0.01
    assert any(abs(f - ROOM_MODE_HZ) < 0.5 for f in cal.unmatched_hz)
    for f in cal.hum_hz:
        assert min(abs(f - 100.0), abs(f - 200.0)) < 1.0
    assert all(min(abs(m.peak_hz - 100.0), abs(m.peak_hz - 200.0)) > 1.0 for m in cal.matched)


def test_loud_hum_is_set_aside_and_also_survived_without_a_line_frequency():
    modes_of = ideal_membrane()
    rec, truth, _ = synthesise(modes_of, _true(), seed=2, hum_level=0.2)
    cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)
    assert any(abs(f - 200.0) < 1.0 for f in cal.hum_hz)
    assert cal.tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    blind = calibrate_panel(PANEL, rec, modes_of)  # hum is then just a spurious peak
    assert blind.hum_hz == ()
    assert blind.tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)


def test_a_model_that_does_not_scale_as_root_tension_is_fitted_correctly():
    modes_of = loaded_plate()
    rec, truth, _ = synthesise(modes_of, _true(), seed=3)
    cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)
    assert cal.tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    # the naive f ∝ √T estimate from the fundamental would be wrong here by more than 3 %
    fundamental = next(m for m in cal.matched if m.mode == "(1,1)")
    scheduled_f = next(m.frequency_hz for m in modes_of(PANEL) if m.label == "(1,1)")
    naive = PANEL.tension_x * (fundamental.peak_hz / scheduled_f) ** 2
    assert abs(naive / (PANEL.tension_x * TRUE_SCALE) - 1) > 0.03


def test_warp_and_weft_tensions_fitted_separately():
    # On a rectangular membrane, (Tx, Ty) and the pair that swaps the roles of m and n give
    # the same frequencies (f_mn formula above), so only the schedule can tell them apart;
    # the schedule here is far from that swapped pair, as a real one would be.
    fabric = dataclasses.replace(PANEL, material="fabric", tension_x=600.0, tension_y=150.0)
    true = dataclasses.replace(fabric, tension_x=520.0, tension_y=170.0)
    modes_of = ideal_membrane()
    rec, _, _ = synthesise(modes_of, true, seed=4, count=10)
    cal = calibrate_panel(fabric, rec, modes_of, line_frequency=50.0, fit="tension_ratio")
    assert cal.fitted == "tension_ratio"
    assert cal.tension == pytest.approx(520.0, rel=0.02)
    assert cal.tension_y == pytest.approx(170.0, rel=0.02)
    assert cal.uncertainty is not None and cal.uncertainty_y is not None
    assert format_uncertainty(cal) == (f"±{100 * cal.uncertainty:.1f} % / "
                                       f"±{100 * cal.uncertainty_y:.1f} %")


def test_areal_density_fit():
    modes_of = ideal_membrane()
    heavier = dataclasses.replace(PANEL, areal_density=0.3)
    rec, _, _ = synthesise(modes_of, heavier, seed=5)
    cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0, fit="areal_density")
    assert cal.areal_density == pytest.approx(0.3, rel=0.02)
    assert cal.tension == PANEL.tension_x


def test_calibration_from_a_csv_spectrum(tmp_path):
    modes_of = ideal_membrane()
    rec, truth, _ = synthesise(modes_of, _true(), seed=6)
    spectrum = tap_spectrum(rec.samples, RATE, window_end=1.0)  # no window: plain ring-down
    keep = spectrum.frequencies_hz <= 400
    path = tmp_path / "c01_spectrum.csv"
    path.write_text("Frequency (Hz),Level (dB)\n" + "\n".join(
        f"{f:.5f},{v:.4f}" for f, v in zip(spectrum.frequencies_hz[keep],
                                             spectrum.levels_db[keep])))
    cal = calibrate_panel(PANEL, path, modes_of, line_frequency=50.0)
    assert cal.tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    fundamental = next(m for m in cal.matched if m.mode == "(1,1)")
    assert fundamental.loss_factor == pytest.approx(_true_loss_factor(truth, fundamental.peak_hz),
                                                    rel=0.20)


# ------------------------------------------------------------------ schedules and records

def test_schedule_calibration_turns_problems_into_row_problems(tmp_path):
    modes_of = ideal_membrane()
    rec, _, _ = synthesise(modes_of, _true(), seed=7)
    (tmp_path / "taps").mkdir()
    write_wav(tmp_path / "taps" / "c01.wav", rec.samples, RATE, bits=24)
    (tmp_path / "taps" / "c02.wav").write_bytes(b"")
    schedule_file = str(tmp_path / "schedule.xlsx")
    good = dataclasses.replace(PANEL, source=SourceRef(schedule_file, "Panels", 7),
                               tap_test="taps/c01.wav")
    empty = dataclasses.replace(PANEL, panel="C-02", tap_test="taps/c02.wav",
                                source=SourceRef(schedule_file, "Panels", 8))
    none = dataclasses.replace(PANEL, panel="C-03", tap_test=None,
                               source=SourceRef(schedule_file, "Panels", 9))
    schedule = Schedule(panels=(good, empty, none), project=Project(line_frequency=50.0))
    calibrations, problems = calibrate_schedule(schedule, modes_of)
    assert [c.panel for c in calibrations] == ["C-01"]
    assert calibrations[0].tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    (problem,) = problems
    assert (problem.file, problem.sheet, problem.row) == (schedule_file, "Panels", 8)
    assert problem.column == "Tap test" and problem.record == "C-02"
    assert "empty" in problem.message and "c02.wav" in problem.message
    assert problem.severity == "warning"
    only, _ = calibrate_schedule(schedule, modes_of, panel_id="C-02")
    assert only == ()


def test_dict_and_apply(tmp_path):
    modes_of = ideal_membrane()
    rec, _, _ = synthesise(modes_of, _true(), seed=0)
    cal = calibrate_panel(PANEL, rec, modes_of, line_frequency=50.0)
    as_dict = calibration_to_dict(cal)
    for key in ("panel", "tension", "scheduled_tension", "uncertainty", "peaks_hz", "matched",
                "unmatched_hz", "residual", "loss_factors"):
        assert key in as_dict
    assert as_dict["matched"][0].keys() >= {"peak_hz", "mode", "predicted_hz",
                                            "residual_percent"}
    assert format_uncertainty(cal) == f"±{100 * cal.uncertainty:.1f} %"
    assert cal.recording == "synthetic.wav"
    calibrated = apply_calibration(PANEL, cal)
    assert calibrated.tension_x == cal.tension and calibrated.tension_y == cal.tension_y
    assert calibrated.width == PANEL.width
    with pytest.raises(ValueError, match="cannot be applied"):
        apply_calibration(dataclasses.replace(PANEL, panel="X"), cal)
    assert isinstance(cal, Calibration)


def test_clear_errors():
    modes_of = ideal_membrane()
    noise = Recording(samples=np.random.default_rng(0).standard_normal(RATE) * 1e-3,
                      sample_rate=RATE)
    with pytest.raises(CalibrationError, match="no clear peaks"):
        calibrate_panel(PANEL, noise, modes_of)
    with pytest.raises(CalibrationError, match="no scheduled tension"):
        calibrate_panel(dataclasses.replace(PANEL, tension_x=0.0), noise, modes_of)
    with pytest.raises(CalibrationError, match="unknown fit"):
        calibrate_panel(PANEL, noise, modes_of, fit="stiffness")


# ------------------------------------------------------ recordings stay in the schedule's folder

SECRET = "root:x:0:0:secret-token-7f3a9c:/root:/bin/bash\n"


def _project(tmp_path):
    """A schedule folder with a recording inside; a recording and a secret file outside."""
    modes_of = ideal_membrane()
    rec, _, _ = synthesise(modes_of, _true(), seed=7)
    folder = tmp_path / "project"
    (folder / "taps").mkdir(parents=True)
    write_wav(folder / "taps" / "c01.wav", rec.samples, RATE, bits=24)
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    write_wav(outside / "c01.wav", rec.samples, RATE, bits=24)
    (outside / "accounts.csv").write_text(SECRET * 40)
    return modes_of, folder, outside


def _schedule(file: str, cells) -> Schedule:
    panels = tuple(dataclasses.replace(PANEL, panel=f"C-{k:02d}", tap_test=cell,
                                       source=SourceRef(file, "Panels", 7 + k))
                   for k, cell in enumerate(cells))
    return Schedule(panels=panels, project=Project(line_frequency=50.0))


def _no_leak(text: str, tmp_path) -> None:
    assert str(tmp_path) not in text and os.path.realpath(tmp_path) not in text
    assert "secret-token" not in text and "root:x" not in text and "/bin/bash" not in text


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
def test_a_recording_outside_the_schedule_folder_is_not_opened(tmp_path):
    modes_of, folder, outside = _project(tmp_path)
    os.symlink(outside / "c01.wav", folder / "taps" / "link.wav")  # a link leading out
    os.symlink(folder / "taps" / "c01.wav", folder / "taps" / "inner.wav")  # one that stays
    outside_cells = [str(outside / "c01.wav"), "../elsewhere/c01.wav",
                     "taps/../../elsewhere/accounts.csv", str(outside / "accounts.csv"),
                     "taps/link.wav", "..\\elsewhere\\c01.wav"]
    schedule = _schedule(str(folder / "schedule.xlsx"),
                         outside_cells + ["taps/c01.wav", "taps/inner.wav"])
    calibrations, problems = calibrate_schedule(schedule, modes_of)
    # the two inside it are used; the six others (valid recordings among them) are not
    assert [c.panel for c in calibrations] == ["C-06", "C-07"]
    assert [c.recording for c in calibrations] == ["taps/c01.wav", "taps/inner.wav"]
    assert [p.record for p in problems] == [f"C-{k:02d}" for k in range(6)]
    for problem, cell in zip(problems, outside_cells):
        assert problem.severity == "warning" and problem.column == "Tap test"
        assert problem.row is not None and problem.text == cell
        assert "must be inside the schedule's folder" in problem.message
        _no_leak(problem.message, tmp_path)

    # the user's explicit choice opens them; the secret file is still never quoted, and no
    # output names a recording by an absolute path
    calibrations, problems = calibrate_schedule(schedule, modes_of, allow_outside=True)
    assert [c.panel for c in calibrations] == ["C-00", "C-01", "C-04", "C-05", "C-06", "C-07"]
    assert calibrations[0].recording == "c01.wav"
    assert calibrations[1].recording == "../elsewhere/c01.wav"
    assert calibrations[0].tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    assert [p.severity for p in problems] == ["warning", "warning"]
    for problem in problems:
        assert "line" in problem.message and "accounts.csv" in problem.message
        _no_leak(problem.message, tmp_path)
    _no_leak(json.dumps([calibration_to_dict(c) for c in calibrations]), tmp_path)


def test_the_schedule_folder_comes_from_the_caller(tmp_path, monkeypatch):
    # the panels name their file alone (as the outputs show it); the caller says where it is
    modes_of, folder, _ = _project(tmp_path)
    monkeypatch.chdir(tmp_path)  # the working folder is not the schedule's
    schedule = _schedule("schedule.xlsx", ["taps/c01.wav", "../elsewhere/c01.wav"])
    calibrations, problems = calibrate_schedule(
        schedule, modes_of, folders={"schedule.xlsx": folder})
    assert [c.panel for c in calibrations] == ["C-00"]
    assert [(p.record, p.severity, p.file) for p in problems] == [
        ("C-01", "warning", "schedule.xlsx")]
    same, _ = calibrate_schedule(schedule, modes_of, base_dir=folder)
    assert [c.panel for c in same] == ["C-00"]
    unknown, problems = calibrate_schedule(schedule, modes_of, folders={})
    assert unknown == () and all("not known" in p.message for p in problems)


@pytest.mark.skipif(not hasattr(os, "symlink"), reason="needs symbolic links")
def test_a_schedule_read_from_its_file_finds_its_recordings_beside_it(tmp_path, monkeypatch):
    # read_schedule names the file alone in its records and keeps where it read it in
    # memory; the recordings are found (and confined) there, whatever the working folder
    from auditor.schedule import read_schedule

    modes_of, folder, outside = _project(tmp_path)
    os.symlink(outside / "accounts.csv", folder / "taps" / "notes.csv")
    (folder / "schedule.csv").write_text(
        "Panel,Shape,Width (mm),Length (mm),Material,Areal density (kg/m2),Tension (N/m),"
        "Tap test\n"
        "C-01,rectangle,700,500,film,0.25,400,taps/c01.wav\n"
        "C-02,rectangle,700,500,film,0.25,400,taps/notes.csv\n")
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    schedule = read_schedule([os.path.join("..", "project", "schedule.csv")])
    assert [p.panel for p in schedule.panels] == ["C-01", "C-02"]
    calibrations, problems = calibrate_schedule(schedule, modes_of)
    assert [(c.panel, c.recording) for c in calibrations] == [("C-01", "taps/c01.wav")]
    assert calibrations[0].tension == pytest.approx(PANEL.tension_x * TRUE_SCALE, rel=0.02)
    (problem,) = problems
    assert (problem.record, problem.severity, problem.row) == ("C-02", "warning", 3)
    _no_leak(problem.message, tmp_path)


# ---------------------------------------------------------- too few peaks for an uncertainty

def test_one_peak_calibrates_end_to_end_and_every_field_formats(tmp_path):
    # One peak, the fundamental (1,1): with f11 = ½ √(T/ρs) √(1/Lx² + 1/Ly²) (rectangular
    # membrane with fixed edges: Rayleigh, The Theory of Sound, vol. 1, §194), the fitted
    # tension is T_sched·(f_measured/f_scheduled)²; its loss factor is η = Δf/f (half-power
    # bandwidth: Beranek & Vér, Noise and Vibration Control Engineering, 2nd ed., 2006).
    modes_of = ideal_membrane()
    true = _true()
    f11 = 0.5 * math.sqrt(true.tension_x / true.areal_density) * math.sqrt(
        1 / true.width**2 + 1 / true.length**2)
    x = synthesise_tap_test([f11], [0.02], sample_rate=RATE, duration=1.5, noise=0.001)
    (tmp_path / "taps").mkdir()
    write_wav(tmp_path / "taps" / "one.wav", x, RATE, bits=16)
    schedule = _schedule(str(tmp_path / "schedule.xlsx"), ["taps/one.wav"])
    (cal,), problems = calibrate_schedule(schedule, modes_of)
    assert problems == ()
    assert [m.mode for m in cal.matched] == ["(1,1)"]
    assert cal.tension == pytest.approx(true.tension_x, rel=0.01)
    assert cal.loss_factors[0][1] == pytest.approx(0.02, rel=0.2)
    assert cal.uncertainty is None and cal.uncertainty_y is None
    assert format_uncertainty(cal) == "n/a (1 matched peak)"
    assert any("no uncertainty" in note for note in cal.notes)
    # a terminal table row of the calibration, every column formatted
    row = [cal.panel, f"{cal.scheduled_tension:.0f}", f"{cal.tension:.0f}",
           f"{100 * cal.tension_change:+.1f} %", format_uncertainty(cal),
           str(len(cal.peaks_hz)), str(len(cal.matched)), f"{cal.residual:.2f} %",
           f"{cal.residual_cents:.1f}", cal.recording]
    assert row[3] == f"{100 * (TRUE_SCALE - 1):+.1f} %" and row[-1] == "taps/one.wav"
    # only the documented fields may be None; every number is finite; JSON has null
    nullable = {"uncertainty", "uncertainty_y"}
    for field in dataclasses.fields(cal):
        value = getattr(cal, field.name)
        if isinstance(value, float):
            assert math.isfinite(value), field.name
        else:
            assert value is not None or field.name in nullable, field.name
    document = json.loads(json.dumps(calibration_to_dict(cal), allow_nan=False))
    assert document["uncertainty"] is None and document["uncertainty_y"] is None
    assert document["recording"] == "taps/one.wav"


def test_two_peaks_for_both_tensions_leave_no_uncertainty():
    # (1,1) and (2,1) of the rectangle formula above fix Tx and Ty exactly: no residual
    # degree of freedom, so no standard error (Numerical Recipes, 3rd ed., §15.4: the
    # variance estimate needs N − M ≥ 1)
    fabric = dataclasses.replace(PANEL, material="fabric", tension_x=600.0, tension_y=150.0)
    true = dataclasses.replace(fabric, tension_x=520.0, tension_y=170.0)
    modes_of = ideal_membrane()
    wanted = {m.label: m.frequency_hz for m in modes_of(true)}
    x = synthesise_tap_test([wanted["(1,1)"], wanted["(2,1)"]], [0.02, 0.02],
                            sample_rate=RATE, duration=1.5, noise=0.001)
    cal = calibrate_panel(fabric, Recording(source="/site/taps/two.wav", samples=x,
                                            sample_rate=RATE),
                          modes_of, fit="tension_ratio")
    assert sorted(m.mode for m in cal.matched) == ["(1,1)", "(2,1)"]
    assert cal.tension == pytest.approx(520.0, rel=0.02)
    assert cal.tension_y == pytest.approx(170.0, rel=0.02)
    assert cal.uncertainty is None and cal.uncertainty_y is None
    assert format_uncertainty(cal) == "n/a (2 matched peaks)"
    assert cal.recording == "two.wav"  # an absolute source is named by its file alone
