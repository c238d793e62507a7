"""One remedy per panel: clear tension windows, the proposed tension verified, else bays."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from reference_models import ideal_membrane_modes_to
from scipy.special import jn_zeros

from auditor.judgement.screening import evaluate_panel
from auditor.model import Panel, SourceRef
from auditor.remedy import SAFETY_NOTE, bay_panel, panel_remedy, remedy_advice, scales_exactly
from auditor.results import Excitation, Mode
from auditor.rules import load_ruleset

STANDARD = dataclasses.replace(load_ruleset("standard"), support_participation_threshold=0.0)
# The separation screen alone (response grading off), for windows checked by hand.
SCREEN = dataclasses.replace(STANDARD, conflict_db=-math.inf, report_db=-math.inf)
SRC = SourceRef(file="p.xlsx", sheet="Panels", row=4)
AIR_DENSITY = 1.2  # [kg/m³], air at about 20 °C (common practice)
BENDING_STIFFNESS = 10.0  # [N·m]
LIMIT = 400.0  # [Hz] the assessment limit used throughout


def panel(**kw) -> Panel:
    base = dict(panel="C-7", source=SRC, width=0.6, length=0.6, material="fabric",
                areal_density=0.3, tension_x=500.0, tension_y=500.0, room_side="none",
                plenum_side="none")
    base.update(kw)
    return Panel(**base)


def membrane(p: Panel):
    """Ideal membrane, every mode to LIMIT: f_mn = ½√((Tx/ρs)(m/a)² + (Ty/ρs)(n/b)²)
    (Kinsler et al., Fundamentals of Acoustics, 4th ed., ch. 4; chapter from memory)."""
    return ideal_membrane_modes_to(p, LIMIT)


def stiff_loaded(p: Panel):
    """A model whose frequencies do not scale as √T: the simply supported prestressed plate,
    ω²(ρs + μ) = Tx(mπ/a)² + Ty(nπ/b)² + D k⁴ (exact for a prestressed plate, e.g. Leissa,
    Vibration of Plates, NASA SP-160, 1969; from memory), with an added air mass μ = 2ρ0/k
    (a light-fluid approximation used only as a test model)."""
    out = []
    for m in range(1, 30):
        for n in range(1, 30):
            kx, ky = m * math.pi / p.width, n * math.pi / p.length
            k2 = kx * kx + ky * ky
            stiffness = p.tension_x * kx * kx + p.tension_y * ky * ky \
                + BENDING_STIFFNESS * k2 * k2
            mass = p.areal_density + 2 * AIR_DENSITY / math.sqrt(k2)
            f = math.sqrt(stiffness / mass) / (2 * math.pi)
            if f <= LIMIT:
                part = 64 / (math.pi ** 4 * m * m * n * n) if m % 2 and n % 2 else 0.0
                out.append(Mode(label=f"({m},{n})", frequency_hz=f, participation=part))
    return sorted(out, key=lambda mode: mode.frequency_hz)


def circle_modes(p: Panel):
    """Circular membrane: f_mn = j_mn √(T/ρs) / (2π a), j_mn from scipy.special.jn_zeros."""
    a = p.diameter / 2
    out = []
    for m in range(0, 8):
        for n, j in enumerate(jn_zeros(m, 8), start=1):
            f = j * math.sqrt(p.tension_x / p.areal_density) / (2 * math.pi * a)
            if f <= LIMIT:
                out.append(Mode(label=f"({m},{n})", frequency_hz=f, multiplicity=2 if m else 1,
                                participation=0.69 if (m == 0 and n == 1) else 0.0))
    return sorted(out, key=lambda mode: mode.frequency_hz)


def fan_line(f, tag="AHU-2", order=1, airborne=True):
    source = "blade-pass" if airborne else "shaft"
    return Excitation(equipment=tag, kind="fan", source=source, order=order,
                      description=f"fan {source} ×{order}", frequency_hz=f, airborne=airborne)


def retensioned(p: Panel, remedy) -> Panel:
    return dataclasses.replace(p, tension_x=remedy.tension, tension_y=remedy.tension_y)


def conflicts(p, model, excitations, rules=STANDARD):
    return [f for f in evaluate_panel(p, model(p), excitations, rules, limit_hz=LIMIT)
            if f.severity == "conflict"]


def f11(p: Panel) -> float:
    return 0.5 * math.sqrt(p.tension_x / p.areal_density) * math.hypot(1 / p.width,
                                                                        1 / p.length)


def test_pure_membrane_windows_in_closed_form():
    # f ∝ √T exactly (Kinsler et al.), so a blade-pass line on the (1,1) mode blocks the
    # tensions T0·(0.9)² to T0·(1.1)² (the conflict margin, no loss factor known: no widening).
    # The (1,3) mode (√5 × higher, participation 64/9π⁴) would need T0·(0.9/√5)²..., far
    # below range; the modes with even indices are weak for sound (one grade down).
    p = panel(max_tension=800.0)
    assert scales_exactly(p)
    exc = fan_line(f11(p))
    r = panel_remedy(p, [exc], SCREEN, membrane, limit_hz=LIMIT)
    flat = [t for window in r.clear_windows for t in window]
    assert flat == pytest.approx([250.0, 500 * 0.81, 500 * 1.21, 800.0], rel=1e-6)
    # The tension proposed leaves no caution either: the (1,1) mode beyond ±20 % needs
    # T ≥ 500·1.2² = 720 N/m; placed 5 % inside the caution-free stretch 720–800 N/m.
    assert r.tension == pytest.approx(756.0) and r.tension_y == r.tension and r.bays is None
    assert r.verified and r.cautions == 0 and r.work
    assert not evaluate_panel(retensioned(p, r), membrane(retensioned(p, r)), [exc], SCREEN,
                              limit_hz=LIMIT)
    assert r.text.startswith("Raise the tension from 500 to 756 N/m (rated maximum 800 N/m): "
                             "no conflict, verified on the full model; no caution remains.")
    assert "Clear windows: 250–405, 605–800 N/m." in r.text
    # work on a stretched system carries the installers' caution (common practice)
    advice = remedy_advice(r)
    assert advice.endswith(SAFETY_NOTE) and "trained installers" in advice


@pytest.mark.parametrize("model, exact", [(membrane, True), (stiff_loaded, False)])
def test_windows_agree_with_judging_every_tension(model, exact):
    # Brute force: judge the model at 400 tensions across the range; every tension well inside
    # a reported window has no conflict, and every tension well outside all windows has one.
    p = panel(max_tension=1200.0, plenum_side="none" if exact else "air")
    assert scales_exactly(p) is exact
    tones = [fan_line(model(p)[0].frequency_hz * 1.02),
             fan_line(model(p)[0].frequency_hz * 1.9, tag="P-1", airborne=False),
             fan_line(model(p)[2].frequency_hz * 0.97, tag="EF-4")]
    r = panel_remedy(p, tones, STANDARD, model, limit_hz=LIMIT)
    assert r.verified and r.tension is not None
    assert not conflicts(retensioned(p, r), model, tones)
    slack = 1.001 if exact else 1.02     # interpolated windows may err narrow by a little
    for t in np.geomspace(250.0, 1200.0, 400):
        q = dataclasses.replace(p, tension_x=t, tension_y=t)
        inside = any(a * slack <= t <= b / slack for a, b in r.clear_windows)
        outside = all(t < a / slack or t > b * slack for a, b in r.clear_windows)
        if inside:
            assert not conflicts(q, model, tones), t
        elif outside:
            assert conflicts(q, model, tones), t


def test_non_sqrt_model_is_solved_not_scaled():
    p = panel(max_tension=1200.0, plenum_side="air")
    exc = fan_line(stiff_loaded(p)[0].frequency_hz)
    calls = []

    def counted(candidate):
        calls.append(candidate.tension_x)
        return stiff_loaded(candidate)

    r = panel_remedy(p, [exc], STANDARD, counted, limit_hz=LIMIT)
    assert not conflicts(retensioned(p, r), stiff_loaded, [exc])
    # The √T guess for clearing the (1,1) mode by 10 % (T × 1.1²) does not clear this model.
    assert conflicts(dataclasses.replace(p, tension_x=605.0, tension_y=605.0), stiff_loaded,
                     [exc])
    # a small grid, then the proposal solved again: a handful of solves, not a scan
    assert 4 <= len(calls) <= 10
    assert any(abs(t - r.tension) < 1e-6 for t in calls)


def test_orthotropic_keeps_ratio():
    p = panel(width=0.9, tension_x=600.0, tension_y=300.0, max_tension=1000.0)
    exc = fan_line(membrane(p)[0].frequency_hz)
    r = panel_remedy(p, [exc], STANDARD, membrane, limit_hz=LIMIT)
    assert r.tension_y / r.tension == pytest.approx(0.5, rel=1e-12)
    assert r.tension <= 1000.0
    assert not conflicts(retensioned(p, r), membrane, [exc])
    assert "tensions from 600 × 300 to" in r.text and "ratio kept" in r.text
    assert all(b <= 1000.0 * (1 + 1e-9) for _, b in r.clear_windows)


def test_decrease_when_no_increase_works():
    p = panel(max_tension=500.0)  # already at its rated maximum
    exc = fan_line(f11(p))
    r = panel_remedy(p, [exc], SCREEN, membrane, limit_hz=LIMIT)
    # f ∝ √T: the conflict margin needs T ≤ 500·0.9² = 405 N/m, the caution margin T ≤ 320.
    assert len(r.clear_windows) == 1
    assert r.clear_windows[0] == pytest.approx((250.0, 405.0), rel=1e-6)
    assert 250.0 <= r.tension <= 320.0 and r.cautions == 0
    assert r.text.startswith("Lower the tension from 500 to")
    assert "No higher tension in range clears it" in r.text
    assert not conflicts(retensioned(p, r), membrane, [exc], SCREEN)


def test_bays_when_no_tension_works():
    # 1.2 m × 0.6 m panel; a variable-speed band from its fundamental to that of a 0.6 m bay.
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    p = panel(width=1.2, max_tension=520.0)
    f_full = f11(p)
    f_half = f11(dataclasses.replace(p, width=0.6))
    exc = Excitation("AHU-4", "fan", "blade-pass", 1, "fan blade-pass ×1",
                     math.sqrt(f_full * f_half), (f_full, f_half))
    r = panel_remedy(p, [exc], rules, membrane, limit_hz=LIMIT)
    assert r.tension is None and r.bays == 3 and r.verified and r.clear_windows == ()
    bay = bay_panel(p, 3)
    assert bay.width == pytest.approx(0.4) and bay.length == 0.6
    assert not conflicts(bay, membrane, [exc], rules)
    assert conflicts(bay_panel(p, 2), membrane, [exc], rules)  # 3 is the fewest
    assert "No tension from 475 to 520 N/m clears its conflicts" in r.text
    assert "fan AHU-4 blade-pass ×1 conflicts at every tension in range" in r.text
    assert "into 3 equal bays (supports every 0.40 m)" in r.text


def test_statement_when_nothing_clears_a_circle():
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    p = panel(shape="circle", width=None, length=None, diameter=1.0, max_tension=500.0)
    exc = fan_line(circle_modes(p)[0].frequency_hz)
    r = panel_remedy(p, [exc], rules, circle_modes, limit_hz=LIMIT)
    assert r.tension is None and r.bays is None and not r.work
    assert "fan AHU-2 blade-pass ×1 conflicts at every tension in range" in r.text
    assert "panel designer" in r.text


def test_no_change_for_a_panel_with_cautions_only():
    p = panel()
    shaft = fan_line(f11(p) * 1.16, airborne=False)   # a caution only
    calls = []

    def counted(candidate):
        calls.append(candidate.tension_x)
        return membrane(candidate)

    r = panel_remedy(p, [shaft], STANDARD, counted, limit_hz=LIMIT)
    assert r.text.startswith("No change needed: no conflict at the scheduled tension; "
                             "1 caution remains (worst: fan AHU-2 shaft ×1")
    assert r.tension == 500.0 and not r.work and r.cautions == 1 and r.verified
    assert calls == [500.0]     # the scheduled tension only: no search


def test_not_assessed_tones_are_named_in_the_remedy():
    p = panel(max_tension=800.0)
    r = panel_remedy(p, [fan_line(f11(p))], STANDARD, membrane, limit_hz=LIMIT,
                     beyond_hz=150.0)
    assert "Tones above 150 Hz were not assessed; this remedy is judged up to 150 Hz." in r.text


def test_the_remedy_carries_the_fundamental_a_commissioning_tap_test_should_find():
    # At the proposed tension the lowest mode of an ideal membrane is f11 = ½√(T/ρs)·√(1/a² +
    # 1/b²) (Rayleigh, The Theory of Sound, vol. I, §194); of one bay, the same formula on
    # the bay; on a model that does not scale as √T, the model's own lowest mode there.
    p = panel(width=0.8, length=0.6, tension_x=500.0, tension_y=500.0, max_tension=1000.0)
    exc = fan_line(f11(p) * 1.03)
    r = panel_remedy(p, [exc], STANDARD, membrane, limit_hz=LIMIT)
    assert r.tension is not None and r.tension != p.tension_x
    assert r.fundamental_hz == pytest.approx(f11(retensioned(p, r)), rel=1e-12)

    stiff = panel(width=0.8, length=0.6, max_tension=1000.0)
    exc = fan_line(stiff_loaded(stiff)[0].frequency_hz * 1.03)
    r = panel_remedy(stiff, [exc], STANDARD, stiff_loaded, limit_hz=LIMIT)
    assert r.tension is not None
    assert r.fundamental_hz == pytest.approx(
        stiff_loaded(retensioned(stiff, r))[0].frequency_hz, rel=1e-12)
    assert r.fundamental_hz != pytest.approx(
        stiff_loaded(stiff)[0].frequency_hz * math.sqrt(r.tension / stiff.tension_x), rel=1e-4)

    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    long = panel(width=1.2, max_tension=520.0)
    f_full, f_half = f11(long), f11(dataclasses.replace(long, width=0.6))
    band = Excitation("AHU-4", "fan", "blade-pass", 1, "fan blade-pass ×1",
                      math.sqrt(f_full * f_half), (f_full, f_half))
    r = panel_remedy(long, [band], rules, membrane, limit_hz=LIMIT)
    assert r.bays == 3
    assert r.fundamental_hz == pytest.approx(f11(bay_panel(long, 3)), rel=1e-12)


def test_the_remedy_carries_its_modes_followed_over_tension_for_the_tuning_chart():
    # On a model whose f² is linear in tension, the prestressed plate with an added mass
    # (ω²(ρs + μ) = T k² + D k⁴: Leissa, Vibration of Plates, NASA SP-160, 1969; from
    # memory), the curves the remedy hands the tuning chart (solved at the ends of the range
    # and at each tension the search solved, f² linear in between) are the model itself at
    # every tension of the range, and flatter than √T (the bending part does not scale).
    p = panel(width=0.8, length=0.6, max_tension=1000.0, plenum_side="air")
    exc = fan_line(stiff_loaded(p)[0].frequency_hz * 1.03)
    r = panel_remedy(p, [exc], STANDARD, stiff_loaded, limit_hz=LIMIT)
    curves = r.curves
    assert curves is not None and not curves.exact
    assert curves.tension[0] == pytest.approx(250.0) and curves.tension[-1] == pytest.approx(
        1000.0)
    assert "(1,1)" in curves.labels
    for t in np.linspace(250.0, 1000.0, 13):
        at = {m.label: m.frequency_hz for m in stiff_loaded(
            dataclasses.replace(p, tension_x=t, tension_y=t))}
        for label in curves.labels:
            assert curves.frequency_at(label, t) == pytest.approx(at[label], rel=1e-9)
    f0 = stiff_loaded(p)[0].frequency_hz
    assert curves.frequency_at("(1,1)", 250.0) > f0 * math.sqrt(250.0 / p.tension_x) * 1.01
    # an ideal membrane: Rayleigh's f11 = ½√(T/ρs)·√(1/a² + 1/b²) at every tension
    # (Rayleigh, The Theory of Sound, vol. I, §194), and the curves say they scale exactly
    p = panel(width=0.8, length=0.6, max_tension=1000.0)
    exc = fan_line(f11(p) * 1.03)
    r = panel_remedy(p, [exc], STANDARD, membrane, limit_hz=LIMIT)
    assert r.curves is not None and r.curves.exact
    for t in (250.0, 430.0, 777.0, 1000.0):
        assert r.curves.frequency_at("(1,1)", t) == pytest.approx(
            f11(dataclasses.replace(p, tension_x=t, tension_y=t)), rel=1e-12)


def test_no_tension_statement_of_an_orthotropic_panel_names_both_tensions():
    # Both tensions are scaled together, so the range searched is stated for both.
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    p = panel(width=1.2, tension_x=500.0, tension_y=250.0, max_tension=520.0)
    f_full = membrane(p)[0].frequency_hz
    f_half = membrane(dataclasses.replace(p, width=0.6))[0].frequency_hz
    exc = Excitation("AHU-4", "fan", "blade-pass", 1, "fan blade-pass ×1",
                     math.sqrt(f_full * f_half), (f_full, f_half))
    r = panel_remedy(p, [exc], rules, membrane, limit_hz=LIMIT)
    assert r.tension is None
    assert ("No tension from 475 × 238 to 520 × 260 N/m (both tensions scaled together) "
            "clears its conflicts") in r.text
