"""Remedies found by root finding on the full model, checked by re-evaluating the model."""

from __future__ import annotations

import dataclasses
import math

import pytest
from scipy.special import jn_zeros

from auditor.model import Excitation, Mode, Panel, SourceRef
from auditor.remedy import bay_panel, excitation_excess, remedy_advice, remedy_for
from auditor.rules import evaluate_panel, findings_with_remedies, load_ruleset
from reference_models import ideal_membrane_modes as membrane_modes

# The bundled standard set, with structure-borne pairs held to the full margins (its support
# participation threshold switched off) so these checks see the plain airborne/structure-borne
# distinction; the support threshold has its own test.
STANDARD = dataclasses.replace(load_ruleset("standard"), support_participation_threshold=0.0)
SRC = SourceRef(file="p.xlsx", sheet="Panels", row=4)
AIR_DENSITY = 1.2  # [kg/m³], air at about 20 °C (common practice)




BENDING_STIFFNESS = 10.0  # [N·m]


def stiff_loaded_modes(panel: Panel, count: int = 6):
    """A model whose frequencies do not scale as √T: the simply supported prestressed plate,
    ω²(ρs + μ) = Tx(mπ/Lx)² + Ty(nπ/Ly)² + D k⁴ with k² = (mπ/Lx)² + (nπ/Ly)²
    (exact for a prestressed plate, e.g. Leissa, Vibration of Plates, NASA SP-160, 1969;
    from memory), loaded by an added air mass μ = 2ρ0/k (both faces, a light-fluid
    approximation used only as a test model)."""
    out = []
    for m in range(1, count + 1):
        for n in range(1, count + 1):
            kx, ky = m * math.pi / panel.width, n * math.pi / panel.length
            k2 = kx * kx + ky * ky
            stiffness = panel.tension_x * kx * kx + panel.tension_y * ky * ky \
                + BENDING_STIFFNESS * k2 * k2
            mass = panel.areal_density + 2 * AIR_DENSITY / math.sqrt(k2)
            p = 64 / (math.pi ** 4 * m * m * n * n) if m % 2 and n % 2 else 0.0
            out.append(Mode(label=f"({m},{n})", frequency_hz=math.sqrt(stiffness / mass)
                            / (2 * math.pi), participation=p))
    return sorted(out, key=lambda mode: mode.frequency_hz)


def circle_modes(panel: Panel):
    """Circular membrane: f_mn = j_mn √(T/ρs) / (2π a), j_mn from scipy.special.jn_zeros."""
    a = panel.diameter / 2
    out = []
    for m in range(0, 5):
        for n, j in enumerate(jn_zeros(m, 4), start=1):
            f = j * math.sqrt(panel.tension_x / panel.areal_density) / (2 * math.pi * a)
            out.append(Mode(label=f"({m},{n})", frequency_hz=f, multiplicity=2 if m else 1,
                            participation=0.69 if (m == 0 and n == 1) else 0.0))
    return sorted(out, key=lambda mode: mode.frequency_hz)


def panel(**kw) -> Panel:
    base = dict(panel="C-7", source=SRC, width=0.6, length=0.6, material="fabric",
                areal_density=0.3, tension_x=500.0, tension_y=500.0)
    base.update(kw)
    return Panel(**base)


def fan_line(f, tag="AHU-2", order=1):
    return Excitation(equipment=tag, kind="fan", source="blade-pass", order=order,
                      description=f"fan blade-pass ×{order}", frequency_hz=f)


def retensioned(p: Panel, remedy) -> Panel:
    return dataclasses.replace(p, tension_x=remedy.tension, tension_y=remedy.tension_y)


def clear_of(p, model, exc):
    return not [f for f in evaluate_panel(p, model(p), [exc], STANDARD) if f.excitation == exc]


def test_raise_tension_sqrt_model():
    p = panel(max_tension=800.0)
    exc = fan_line(membrane_modes(p)[0].frequency_hz)  # blade-pass right on the fundamental
    assert not clear_of(p, membrane_modes, exc)
    r = remedy_for(p, exc, membrane_modes, STANDARD)
    # Ideal membrane: f ∝ √T, so clearing the line by 20 % needs T = 500 × 1.2² = 720 N/m.
    assert 720.0 <= r.tension <= 720.0 * 1.01 and r.tension_y == r.tension and r.bays is None
    assert clear_of(retensioned(p, r), membrane_modes, exc)
    assert r.text.startswith("Raise tension from 500 to 721 N/m (max 800 N/m) to clear "
                             "fan AHU-2 blade-pass ×1 by ≥20 %.")
    # work on a stretched system carries the installers' caution (common practice)
    advice = remedy_advice(r)
    assert r.work and "trained installers" in advice and "local codes" in advice


def test_raise_tension_non_sqrt_model():
    p = panel(max_tension=1200.0)
    exc = fan_line(stiff_loaded_modes(p)[0].frequency_hz)
    r = remedy_for(p, exc, stiff_loaded_modes, STANDARD)
    assert clear_of(retensioned(p, r), stiff_loaded_modes, exc)
    # The √T guess (T × 1.2²) does not clear this model: the root finding did not assume it.
    assert not clear_of(dataclasses.replace(p, tension_x=720.0, tension_y=720.0),
                        stiff_loaded_modes, exc)
    # Exact for this model: ω² must grow by 1.2² while D k⁴ and the mass stay, so
    # T = 1.44 T0 + 0.44 D k²  with k² = 2(π/0.6)².
    k2 = 2 * (math.pi / 0.6) ** 2
    expected = 1.44 * 500.0 + 0.44 * BENDING_STIFFNESS * k2
    assert expected <= r.tension <= expected * 1.01


def test_orthotropic_keeps_ratio():
    p = panel(width=0.9, tension_x=600.0, tension_y=300.0, max_tension=1000.0)
    exc = fan_line(membrane_modes(p)[0].frequency_hz)
    r = remedy_for(p, exc, membrane_modes, STANDARD)
    assert r.tension_y / r.tension == pytest.approx(0.5, rel=1e-12)
    assert r.tension <= 1000.0
    assert clear_of(retensioned(p, r), membrane_modes, exc)
    assert "Raise tensions from 600 × 300 to" in r.text and "ratio kept" in r.text


def test_decrease_when_no_increase_works():
    p = panel(max_tension=500.0)  # already at its rated maximum
    exc = fan_line(membrane_modes(p)[0].frequency_hz)
    r = remedy_for(p, exc, membrane_modes, STANDARD)
    # f ∝ √T: a mode 20 % below the line needs √(T/500) ≤ 0.8, T ≤ 320 N/m.
    assert 320.0 * 0.99 <= r.tension <= 320.0
    assert clear_of(retensioned(p, r), membrane_modes, exc)
    assert r.text.startswith("Lower tension from 500 to 319 N/m")
    assert "no tension up to 500 N/m clears it" in r.text


def test_bays_when_tension_cannot_work():
    # 1.2 m × 0.6 m panel; a variable-speed band from its fundamental to that of a 0.6 m bay.
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    p = panel(width=1.2, max_tension=520.0)
    f_full = membrane_modes(p)[0].frequency_hz
    f_half = membrane_modes(dataclasses.replace(p, width=0.6))[0].frequency_hz
    exc = Excitation("AHU-4", "fan", "blade-pass", 1, "fan blade-pass ×1",
                     math.sqrt(f_full * f_half), (f_full, f_half))
    r = remedy_for(p, exc, membrane_modes, rules)
    assert r.tension is None and r.bays == 3
    bay = bay_panel(p, 3)
    assert bay.width == pytest.approx(0.4) and bay.length == 0.6
    assert clear_of(bay, membrane_modes, exc)
    assert not clear_of(bay_panel(p, 2), membrane_modes, exc)  # 3 is the fewest
    assert "No tension from 475 to 520 N/m clears" in r.text
    assert "into 3 equal bays (supports every 0.40 m)" in r.text


def test_no_bays_for_a_circle():
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.95)
    p = panel(shape="circle", width=None, length=None, diameter=1.0, max_tension=500.0)
    exc = fan_line(circle_modes(p)[0].frequency_hz)
    r = remedy_for(p, exc, circle_modes, rules)
    assert r.tension is None and r.bays is None
    assert "panel designer" in r.text


def test_prefers_a_remedy_without_new_conflicts():
    p = panel(max_tension=1200.0)
    f11 = membrane_modes(p)[0].frequency_hz          # 48.1 Hz
    a = fan_line(f11, tag="AHU-2")
    b = Excitation("AHU-3", "fan", "shaft", 1, "fan shaft ×1", 62.0, airborne=False)
    plain = remedy_for(p, a, membrane_modes, STANDARD)
    assert plain.tension == pytest.approx(721.0)    # but 57.7 Hz is within 10 % of 62 Hz
    r = remedy_for(p, a, membrane_modes, STANDARD, other_excitations=[b])
    new = retensioned(p, r)
    assert clear_of(new, membrane_modes, a)
    assert not [f for f in evaluate_panel(new, membrane_modes(new), [b], STANDARD)
                if f.severity == "conflict"]
    # f ∝ √T: no conflict with 62 Hz needs f11 ≥ 62 × 1.1, i.e. T ≥ 500 (68.2/48.1)².
    assert r.tension >= 500 * (62 * 1.1 / f11) ** 2 and "new conflict" not in r.text
    # Without room to go that high (no rated maximum: ceiling 1.5 × 500 = 750 N/m), a decrease
    # that avoids it is preferred: the (1,2) mode, which sound cannot drive, need only clear the
    # airborne blade-pass by its conflict margin.
    p = panel()
    r = remedy_for(p, a, membrane_modes, STANDARD, other_excitations=[b])
    new = retensioned(p, r)
    assert r.tension < 500 and r.text.startswith("Lower tension") and "new conflict" not in r.text
    assert clear_of(new, membrane_modes, a)
    assert not [f for f in evaluate_panel(new, membrane_modes(new), [b], STANDARD)
                if f.severity == "conflict"]
    assert r.tension == round(r.tension)  # a tension an installer can set
    # With no decrease allowed either, the first clear tension is given and the text says why.
    rules = dataclasses.replace(STANDARD, min_tension_factor=0.9)
    r = remedy_for(p, a, membrane_modes, rules, other_excitations=[b])
    assert r.tension == pytest.approx(721.0)
    assert "new conflict with fan AHU-3 shaft ×1" in r.text
    assert "no rated maximum" in r.text and "1.5 × scheduled = 750 N/m" in r.text


def test_already_clear():
    p = panel()
    r = remedy_for(p, fan_line(30.0), membrane_modes, STANDARD)  # fundamental 48 Hz
    assert r.tension == 500.0 and r.text.startswith("No change needed")


def test_findings_with_remedies_one_per_pair_and_shared_solves():
    p = panel(max_tension=1200.0)
    calls = []

    def counted(candidate):
        calls.append(candidate.tension_x)
        return membrane_modes(candidate)

    modes = membrane_modes(p)
    f11, f12 = modes[0].frequency_hz, modes[1].frequency_hz
    a = fan_line(f11, tag="AHU-2", order=1)
    b = Excitation("P-1", "pump", "shaft", 1, "pump shaft ×1", f12 * 1.02, airborne=False)
    c = fan_line(f11 * 1.16, tag="AHU-9")          # a caution only
    got = findings_with_remedies(p, modes, (a, b, c), STANDARD, counted)
    by_exc = {}
    for f in got:
        by_exc.setdefault(f.excitation.equipment, []).append(f)
    assert by_exc["AHU-9"][0].severity == "caution" and by_exc["AHU-9"][0].remedy is None
    for tag in ("AHU-2", "P-1"):
        remedies = {id(f.remedy) for f in by_exc[tag]}
        assert len(remedies) == 1 and by_exc[tag][0].remedy is not None
    shared = len(calls)
    calls.clear()
    for exc in (a, b):
        remedy_for(p, exc, counted, STANDARD, other_excitations=[e for e in (a, b, c) if e != exc])
    assert shared < len(calls)
    # Each remedy, applied, clears its own pair on the same model.
    for tag, exc in (("AHU-2", a), ("P-1", b)):
        r = by_exc[tag][0].remedy
        if r.tension is not None:
            assert clear_of(retensioned(p, r), membrane_modes, exc)


def test_excess_sign():
    import numpy as np
    f = np.array([100.0, 160.0])
    eta = np.array([np.nan, np.nan])
    assert excitation_excess(f, eta, fan_line(126.0), STANDARD) < 0      # both > 20 % away
    assert excitation_excess(f, eta, fan_line(125.0), STANDARD) >= 0     # exactly 20 % counts


def test_screen_estimate_is_exact_when_omega_squared_is_linear_in_tension():
    # For the prestressed plate ω² = (T k² + D k⁴)/(ρs + μ) is linear in T (Leissa, NASA
    # SP-160, from memory), and so is the square of every mode's frequency in the tension
    # scale: the screen's interpolation of f² between the two ends of the range is then exact,
    # and its estimate of the excess equals the model's at every grid tension, both ways.
    import numpy as np
    from auditor.remedy import TensionScan

    p = panel(max_tension=1000.0)
    exc = fan_line(stiff_loaded_modes(p)[2].frequency_hz)
    scan = TensionScan(p, stiff_loaded_modes, STANDARD)
    for grid in (scan.up[1:], scan.down[1:]):
        estimate = scan.predicted_excess(grid, exc)
        model = np.array([scan.excess(float(s), exc) for s in grid])
        assert np.max(np.abs(estimate - model)) < 1e-12
    # an open-sided membrane (f ∝ √T but for compressibility) is screened more tightly
    sealed = TensionScan(panel(plenum_side="sealed", cavity_depth=0.1), membrane_modes, STANDARD)
    assert scan.screen_band < 0.04 and sealed.screen_band == 0.04


def test_grid_tensions_are_ones_an_installer_can_set():
    # Every tension the scan solves between the ends of the range has three significant
    # figures (common practice: tensions are set to a few newtons per metre), and the grid
    # steps stay near 3 %.
    from auditor.remedy import TensionScan

    scan = TensionScan(panel(tension_x=537.0, tension_y=537.0, max_tension=1000.0),
                       membrane_modes, STANDARD)
    interior = [s * 537.0 for s in list(scan.up[1:-1]) + list(scan.down[1:-1])]
    assert interior and all(float(f"{t:.3g}") == pytest.approx(t, rel=1e-12) for t in interior)
    steps = [b / a for a, b in zip(scan.up[:-1], scan.up[1:])]
    assert max(steps) < 1.04 and min(steps) > 1.02


def test_a_long_list_of_new_conflicts_is_cut_short():
    from auditor.remedy import NAMED_CONFLICTS, _listing

    tones = [fan_line(100.0 + k, tag=f"F{k}") for k in range(NAMED_CONFLICTS + 4)]
    text = _listing(tones)
    assert text.startswith("fan F0 blade-pass ×1, fan F1 blade-pass ×1") and text.endswith(
        "and 4 more")
    assert _listing(tones[:2]) == "fan F0 blade-pass ×1, fan F1 blade-pass ×1"
