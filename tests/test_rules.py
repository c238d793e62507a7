"""Rule sets, and the judgement of modes against excitations (screen, response, overlap)."""

from __future__ import annotations

import dataclasses
import json
import math

import numpy as np
import pytest
from reference_models import ideal_membrane_modes as membrane_modes
from reference_models import ideal_membrane_modes_to
from scipy.optimize import brentq

from auditor.excitation import excitations_for
from auditor.judgement.response import (
    modal_amplification,
    modal_density,
    modal_overlap_factor,
    modal_overlap_frequency_hz,
    response_db,
    weyl_mode_count,
)
from auditor.judgement.screening import (
    assessment_limit_hz,
    evaluate_panel,
    reaching,
    separation,
)
from auditor.judgement.verdict import assess_panel, panel_area
from auditor.model import Equipment, Panel, SourceRef
from auditor.results import Excitation, Mode
from auditor.rules import RuleSetError, list_rulesets, load_ruleset, parse_ruleset, rules_dir

SRC = SourceRef(file="p.xlsx", sheet="Panels", row=3)
# The bundled standard set, with structure-borne pairs held to the full margins (its support
# participation threshold switched off) so these checks see the plain airborne/structure-borne
# distinction; the support threshold has its own test.
STANDARD = dataclasses.replace(load_ruleset("standard"), support_participation_threshold=0.0)
# The separation screen alone: response grading switched off.
SCREEN = dataclasses.replace(STANDARD, conflict_db=-math.inf, report_db=-math.inf)
PLAIN = dataclasses.replace(SCREEN, bandwidth_widening=False)


def panel(zone="", **kw):
    base = dict(panel="C-1", source=SRC, zone=zone, width=0.6, length=0.6, material="fabric",
                areal_density=0.3, tension_x=500.0, tension_y=500.0)
    base.update(kw)
    return Panel(**base)


def line(f, airborne=True, tag="F-1", source="blade-pass", kind="fan", order=1):
    return Excitation(equipment=tag, kind=kind, source=source, order=order,
                      description=f"{kind} {source} ×{order}", frequency_hz=f, airborne=airborne)


def band(lo, hi, airborne=True, tag="V-1"):
    return Excitation(equipment=tag, kind="fan", source="blade-pass", order=1,
                      description="fan blade-pass ×1", frequency_hz=math.sqrt(lo * hi),
                      band_hz=(lo, hi), airborne=airborne)


def mode(f, participation=0.657, eta=None, label="(1,1)"):
    return Mode(label=label, frequency_hz=f, participation=participation, loss_factor=eta)


# ----------------------------------------------------------------------------------------
# Rule-set files
# ----------------------------------------------------------------------------------------

def test_bundled_rule_sets():
    # ±10 % conflict and ±20 % caution: common practice for natural against forcing frequency.
    assert (STANDARD.conflict_margin, STANDARD.caution_margin) == (0.10, 0.20)
    assert STANDARD.harmonics_for("hum") == 4  # 100..400 Hz at 50 Hz
    assert STANDARD.harmonics_for("blade-pass") == 3 and STANDARD.harmonics_for("shaft") == 2
    assert (STANDARD.fmax_hz, STANDARD.excitation_multiple) == (500, 2)
    assert (STANDARD.conflict_db, STANDARD.report_db) == (0.0, -20.0)
    assert not hasattr(STANDARD, "max_modes")
    assert STANDARD.use_zones and STANDARD.bandwidth_widening and STANDARD.strouhal == 0.2
    strict = load_ruleset("strict")
    assert strict.conflict_margin > STANDARD.conflict_margin
    assert strict.caution_margin > STANDARD.caution_margin
    assert strict.participation_threshold < STANDARD.participation_threshold
    assert strict.conflict_db < STANDARD.conflict_db and strict.report_db < STANDARD.report_db
    assert all(strict.harmonics_for(s) >= STANDARD.harmonics_for(s) for s, _ in STANDARD.harmonics)
    names = [r.name for r in list_rulesets()]
    assert {"standard", "strict"} <= set(names)
    assert STANDARD.as_dict()["harmonics"]["blade-pass"] == 3


def test_origin_names_the_file_and_its_digest_but_no_folder(tmp_path):
    import hashlib

    bundled = load_ruleset("standard")
    digest = hashlib.sha256((rules_dir() / "standard.toml").read_bytes()).hexdigest()
    assert bundled.origin == f"standard (bundled), SHA-256 {digest[:12]}…"
    copy = tmp_path / "our-office.toml"
    copy.write_text((rules_dir() / "standard.toml").read_text(encoding="utf-8"),
                    encoding="utf-8")
    mine = load_ruleset(copy)
    assert mine.origin.startswith("our-office.toml, SHA-256 ")
    # No absolute path goes to outputs (the design's rule for every output).
    for rules in (bundled, mine):
        text = json.dumps(rules.as_dict(), ensure_ascii=False)
        assert str(tmp_path) not in text and str(rules_dir()) not in text
        assert "path" not in rules.as_dict() and rules.path == rules.origin


def test_every_key_of_the_bundled_files_is_commented():
    # Users copy and edit these files: every key carries a comment on its line or just above.
    for path in rules_dir().glob("*.toml"):
        lines = path.read_text(encoding="utf-8").splitlines()
        keys = 0
        for k, text in enumerate(lines):
            stripped = text.strip()
            if "=" in stripped and not stripped.startswith(("#", "[")):
                keys += 1
                assert "#" in stripped or lines[k - 1].strip().startswith("#"), \
                    f"{path.name} line {k + 1}: {stripped}"
        assert keys >= 30


def test_load_by_path_and_errors(tmp_path):
    copy = tmp_path / "our-office.toml"
    text = (rules_dir() / "standard.toml").read_text(encoding="utf-8")
    copy.write_text(text.replace('name = "standard"', 'name = "our office"'), encoding="utf-8")
    got = load_ruleset(copy)
    assert got.name == "our office"
    assert load_ruleset(str(copy)).conflict_margin == 0.10
    with pytest.raises(RuleSetError, match="no rule set named 'standart'.*did you mean 'standard'"):
        load_ruleset("standart")
    with pytest.raises(RuleSetError, match="not found"):
        load_ruleset(tmp_path / "missing.toml")
    broken = tmp_path / "broken.toml"
    broken.write_text("[margins\nconflict = 0.1", encoding="utf-8")
    with pytest.raises(RuleSetError, match="not valid TOML"):
        load_ruleset(broken)


def test_an_old_file_with_a_mode_count_is_refused_with_the_reason(tmp_path):
    old = tmp_path / "old.toml"
    old.write_text("[modes]\nfmax_hz = 500.0\nmax_modes = 12\n", encoding="utf-8")
    with pytest.raises(RuleSetError) as info:
        load_ruleset(old)
    message = str(info.value)
    assert "[modes] max_modes was removed" in message and "delete this line" in message
    assert "hid findings" in message


@pytest.mark.parametrize("data, message", [
    ({"margins": {"conflcit": 0.1}},
     r"unknown key 'conflcit' in \[margins\]; did you mean 'conflict'"),
    ({"margin": {"conflict": 0.1}}, r"unknown section or key 'margin'; did you mean 'margins'"),
    ({"conflict": 0.1}, r"key 'conflict' belongs in section \[margins\]"),
    # a key of another table, spelt right, is sent there (not to a look-alike in this one)
    ({"remedy": {"fmax_hz": 1.0}},
     r"unknown key 'fmax_hz' in \[remedy\]; 'fmax_hz' belongs in section \[modes\]$"),
    ({"margins": {"conflict": "ten"}}, r"\[margins\] conflict must be a number"),
    ({"margins": {"conflict": True}}, r"must be a number"),
    ({"modes": {"max_modes": 12}}, r"\[modes\] max_modes was removed"),
    ({"margins": {"bandwidth_widening": 1}}, r"must be true or false"),
    ({"margins": {"conflict": 0.2, "caution": 0.1}}, r"0 < conflict < caution < 1"),
    ({"margins": {"conflict": 0.0}}, r"0 < conflict < caution < 1"),
    ({"margins": {"caution": 1.2}}, r"0 < conflict < caution < 1"),
    ({"paths": {"hum": "airbourne"}}, r'must be "airborne" or "structure-borne".*did you mean'),
    ({"modes": {"fmax_hz": 0, "excitation_multiple": 0}}, r"needs a limit"),
    ({"modes": {"excitation_multiple": 1.1}}, r"would miss modes inside the caution margin"),
    ({"equipment": {"strouhal": 2.0}}, r"strouhal must be between 0 and 1"),
    ({"harmonics": {"blade_pass": -1}}, r"must be 0 or more"),
    ({"response": {"report_db": 5.0}}, r"report_db .* must not be above conflict_db"),
    ({"response": {"conflict_db": "loud"}}, r"\[response\] conflict_db must be a number"),
    ({"margins": "tight"}, r"must be a section"),
])
def test_validation_messages(data, message):
    with pytest.raises(RuleSetError, match=message) as info:
        parse_ruleset(data, source="mine.toml")
    assert str(info.value).startswith("mine.toml: ")


def test_missing_keys_take_standard_values_and_zero_switches_a_limit_off():
    got = parse_ruleset({"modes": {"fmax_hz": 0}}, source="x.toml", default_name="x")
    assert got.name == "x" and got.fmax_hz is None and got.excitation_multiple == 2.0
    assert got.conflict_margin == 0.10 and got.harmonics_for("hum") == 4
    assert (got.conflict_db, got.report_db) == (0.0, -20.0)


# ----------------------------------------------------------------------------------------
# Which modes count; separation
# ----------------------------------------------------------------------------------------

def test_assessment_limit_covers_every_tone_whatever_the_rule_set_says():
    rules = dataclasses.replace(STANDARD, fmax_hz=1000.0, excitation_multiple=2.0)
    assert assessment_limit_hz(rules, 300.0) == pytest.approx(600.0)
    assert assessment_limit_hz(rules, 400.0) == pytest.approx(800.0)
    # fmax_hz caps the multiple ...
    assert assessment_limit_hz(rules, 700.0) == pytest.approx(1000.0)
    # ... but never below the caution margin (and an allowance for widening) above the
    # highest tone: a tone reaching the panel is always judged against every mode near it.
    assert assessment_limit_hz(rules, 900.0) == pytest.approx(900.0 * 1.3)
    assert assessment_limit_hz(rules, None) == 1000.0
    only_multiple = dataclasses.replace(rules, fmax_hz=None)
    assert assessment_limit_hz(only_multiple, 900.0) == pytest.approx(1800.0)


def test_band_separation_at_and_inside_edges():
    # Definition: 0 inside the band (edges included), distance to the nearest edge over that
    # edge outside it, negative below and positive above.
    assert separation(150.0, 100.0, 200.0) == 0.0
    assert separation(100.0, 100.0, 200.0) == 0.0
    assert separation(200.0, 100.0, 200.0) == 0.0
    assert separation(90.0, 100.0, 200.0) == pytest.approx(-0.10)
    assert separation(220.0, 100.0, 200.0) == pytest.approx(+0.10)
    assert separation(110.0, 100.0, 100.0) == pytest.approx(0.10)
    f = np.array([50.0, 99.0, 150.0, 201.0])
    assert separation(f, 100.0, 200.0) == pytest.approx([-0.5, -0.01, 0.0, 0.005])


def test_no_count_of_modes_hides_a_high_mode():
    # The 150th mode of an ideal membrane sits on a structure-borne tone: it is judged
    # (a rule set used to stop at the 12 lowest modes).
    p = panel(width=2.0, length=1.5)
    modes = membrane_modes(p, 20)
    target = modes[149]
    got = evaluate_panel(p, modes, [line(target.frequency_hz, airborne=False, source="shaft")],
                         SCREEN)
    assert any(f.mode is target and f.severity == "conflict" for f in got)


# ----------------------------------------------------------------------------------------
# The separation screen
# ----------------------------------------------------------------------------------------

def test_margins_at_exactly_ten_and_twenty_percent():
    # ±10 % conflict, ±20 % caution (common practice); a separation exactly at a margin is
    # inside it.
    p = panel()
    for f, expected in ((110.0, "conflict"), (90.0, "conflict"), (120.0, "caution"),
                        (80.0, "caution"), (120.01, None), (79.99, None)):
        got = evaluate_panel(p, [mode(f)], [line(100.0)], PLAIN)
        assert [x.severity for x in got] == ([expected] if expected else []), f
    got = evaluate_panel(p, [mode(110.0)], [line(100.0)], PLAIN)[0]
    assert got.separation == pytest.approx(0.10) and got.margin == pytest.approx(0.10)
    # A band: a mode 10 % above its upper edge is a conflict, 15 % above a caution.
    assert evaluate_panel(p, [mode(220.0)], [band(100, 200)], PLAIN)[0].severity == "conflict"
    assert evaluate_panel(p, [mode(230.0)], [band(100, 200)], PLAIN)[0].severity == "caution"
    inside = evaluate_panel(p, [mode(150.0)], [band(100, 200)], PLAIN)[0]
    assert (inside.severity, inside.separation) == ("conflict", 0.0)


def test_participation_threshold_demotes_airborne_only():
    # Ideal square membrane: the (2,1) mode has zero uniform-pressure participation
    # (64/(π⁴m²n²) for odd m, n, else 0), so a sound field cannot drive it.
    p = panel()
    modes = membrane_modes(p)
    m21 = next(m for m in modes if m.label == "(2,1)")
    assert m21.participation == 0.0
    airborne = line(m21.frequency_hz, airborne=True)
    structure = line(m21.frequency_hz, airborne=False, source="shaft")
    got = [f for f in evaluate_panel(p, modes, [airborne], PLAIN) if f.mode.label == "(2,1)"]
    assert [f.severity for f in got] == ["caution"]
    got = [f for f in evaluate_panel(p, modes, [structure], PLAIN) if f.mode.label == "(2,1)"]
    assert [f.severity for f in got] == ["conflict"]
    off = m21.frequency_hz / 1.15
    got = [f for f in evaluate_panel(p, modes, [line(off)], PLAIN) if f.mode.label == "(2,1)"]
    assert got == []
    m11 = modes[0]
    assert m11.label == "(1,1)" and m11.participation == pytest.approx(0.6570, abs=1e-4)
    got = evaluate_panel(p, modes, [line(m11.frequency_hz)], PLAIN)
    assert got[0].severity == "conflict" and got[0].mode.label == "(1,1)"


def test_bandwidth_widening_by_half_the_loss_factor():
    # Half-power bandwidth Δf = η·f (Harris' Shock and Vibration Handbook, ch. 2): η = 0.1
    # widens each margin by η/2 = 5 %, so 10 % → 15 % and 20 % → 25 %.
    p = panel()
    exc = [line(100.0)]
    assert evaluate_panel(p, [mode(114.0, eta=0.1)], exc, PLAIN)[0].severity == "caution"
    widened = evaluate_panel(p, [mode(114.0, eta=0.1)], exc, SCREEN)[0]
    assert widened.severity == "conflict" and widened.margin == pytest.approx(0.15)
    assert evaluate_panel(p, [mode(124.0, eta=0.1)], exc, PLAIN) == ()
    assert evaluate_panel(p, [mode(124.0, eta=0.1)], exc, SCREEN)[0].margin == pytest.approx(0.25)
    assert evaluate_panel(p, [mode(114.0)], exc, SCREEN)[0].severity == "caution"


def test_support_participation_threshold_demotes_structure_borne_pairs():
    # A rigid support motion a(t) loads a clamped membrane with −ρs·a·∫φ dA per mode: the
    # modal force is proportional to ∫φ dA, the same as for a uniform pressure (base
    # excitation of a continuous system; e.g. Clough & Penzien, Dynamics of Structures, ch. 26).
    m = Mode(label="(2,1)", frequency_hz=100.0, participation=0.0)
    shaft = Excitation("F-1", "fan", "shaft", 1, "fan shaft ×1", 102.0, airborne=False)
    held = dataclasses.replace(SCREEN, support_participation_threshold=0.0)
    demoting = dataclasses.replace(SCREEN, support_participation_threshold=0.005)
    assert [f.severity for f in evaluate_panel(panel(), [m], (shaft,), held)] == ["conflict"]
    assert [f.severity for f in evaluate_panel(panel(), [m], (shaft,), demoting)] == ["caution"]
    lit = dataclasses.replace(m, participation=64 / math.pi**4)  # (1,1): not demoted
    assert [f.severity for f in evaluate_panel(panel(), [lit], (shaft,), demoting)] == ["conflict"]


def test_zones_respected():
    src = SourceRef("p.xlsx", "Equipment", 2)
    in_a = Equipment(equipment="AHU-A", source=src, kind="fan", rpm=600, blades=10, zones=("A",))
    everywhere = Equipment(equipment="TX-1", source=src, kind="transformer", line_frequency=50.0)
    pairs = [(e, excitations_for(e, STANDARD)) for e in (in_a, everywhere)]
    modes = [mode(100.0)]
    tags = lambda got: {f.excitation.equipment for f in got}  # noqa: E731
    for zone, expected in (("a", {"AHU-A", "TX-1"}), ("B", {"TX-1"})):
        where = panel(zone=zone)
        assert tags(evaluate_panel(where, modes, reaching(where, pairs, PLAIN), PLAIN)) == expected
    no_zones = dataclasses.replace(PLAIN, use_zones=False)
    where = panel(zone="B")
    assert tags(evaluate_panel(where, modes, reaching(where, pairs, no_zones), no_zones)) \
        == {"AHU-A", "TX-1"}


# ----------------------------------------------------------------------------------------
# Response: amplification, participation, transmissibility, in dB
# ----------------------------------------------------------------------------------------

def test_hysteretic_amplification():
    # |H| = 1/√((1 − ρ²)² + η²) for complex stiffness k(1 + iη) (Harris' Shock and Vibration
    # Handbook, ch. 2): 1/η at resonance (Q = 1/η), → 1 quasi-statically, 1/(ρ² − 1) far above.
    assert modal_amplification(1.0, 0.05) == pytest.approx(20.0)
    assert modal_amplification(0.0, 0.05) == pytest.approx(1 / math.sqrt(1 + 0.05**2))
    assert modal_amplification(10.0, 0.0) == pytest.approx(1 / 99)
    # It is the modulus of the complex receptance, computed independently:
    rho, eta = 0.93, 0.07
    assert modal_amplification(rho, eta) == pytest.approx(abs(1 / complex(1 - rho**2, eta)))
    # 0 dB reference: a fully participating mode driven quasi-statically through a rigid path
    assert response_db(1.0, 1.0, 1.0) == 0.0
    assert response_db(0.0, 20.0, 1.0) == -math.inf
    assert response_db(0.5, 20.0, 0.1) == pytest.approx(0.0)


def test_findings_carry_their_response_and_are_graded_by_it():
    p = panel(material="film")  # η = 0.03 by default for film (common practice, from memory)
    m = mode(100.0, participation=64 / (9 * math.pi**4))  # a (3,1)-like mode, p = 0.073
    # at 5 % separation: ρ = 100/105, |H| = 1/√((1 − ρ²)² + 0.03²)
    rho = 100 / 105
    h = 1 / math.sqrt((1 - rho**2) ** 2 + 0.03**2)
    expected = 20 * math.log10(m.participation * h)
    (f,) = evaluate_panel(p, [dataclasses.replace(m, frequency_hz=105.0)], [line(100.0)],
                          STANDARD)
    assert f.response_db == pytest.approx(expected)
    assert f.amplification == pytest.approx(h) and f.transmissibility == 1.0
    # inside the conflict margin but below conflict_db (0 dB): a caution
    assert expected < 0 and f.severity == "caution"
    # at resonance the same mode answers 20·log10(0.073/0.03) = +7.7 dB: a conflict
    (g,) = evaluate_panel(p, [dataclasses.replace(m, frequency_hz=100.0)], [line(100.0)],
                          STANDARD)
    assert g.severity == "conflict" and g.response_db == pytest.approx(
        20 * math.log10(m.participation / 0.03))
    # a weakly participating mode 15 % off answers below report_db: not reported at all
    weak = mode(115.0, participation=0.01)
    assert evaluate_panel(p, [weak], [line(100.0)], STANDARD) == ()


def test_isolation_turns_a_shaft_conflict_into_a_caution_at_most():
    # A fan's shaft rate 3 % below a panel's fundamental: through a rigid mount it is a
    # conflict; on 25 mm springs (T ≈ 0.018, Harris) it answers 20·log10(T) ≈ −35 dB less,
    # below the conflict threshold: a caution at most.
    src = SourceRef("p.xlsx", "Equipment", 2)
    rigid = Equipment("AHU-1", src, "fan", rpm=1450, blades=12)
    sprung = dataclasses.replace(rigid, isolator_deflection=0.025)
    shaft = 1450 / 60
    modes = [mode(shaft * 1.03, participation=64 / math.pi**4)]
    p = panel(material="film")
    got_rigid = [f for f in evaluate_panel(p, modes, excitations_for(rigid, STANDARD), STANDARD)
                 if f.excitation.source == "shaft"]
    got_sprung = [f for f in evaluate_panel(p, modes, excitations_for(sprung, STANDARD), STANDARD)
                  if f.excitation.source == "shaft"]
    assert [f.severity for f in got_rigid] == ["conflict"]
    assert [f.severity for f in got_sprung] == ["caution"]
    drop = got_rigid[0].response_db - got_sprung[0].response_db
    assert drop == pytest.approx(-20 * math.log10(got_sprung[0].transmissibility))
    assert 32 < drop < 37
    # two more harmonics' worth of detuning (the shaft rate 15 % off) and it is not reported
    far = [mode(shaft * 1.15, participation=64 / math.pi**4)]
    assert not [f for f in evaluate_panel(p, far, excitations_for(sprung, STANDARD), STANDARD)
                if f.excitation.source == "shaft"]


def test_worst_first_conflicts_then_response():
    modes = [mode(100.0, label="a"), mode(118.0, label="b"), mode(105.0, label="c"),
             mode(101.0, participation=0.0, label="d")]
    got = evaluate_panel(panel(), modes, [line(100.0)], PLAIN)
    # a mode with no participation answers nothing (−inf dB): last among the cautions
    assert [(f.mode.label, f.severity) for f in got] == [
        ("a", "conflict"), ("c", "conflict"), ("b", "caution"), ("d", "caution")]
    graded = evaluate_panel(panel(), [mode(100.0, participation=0.05, label="weak"),
                                      mode(108.0, label="strong")], [line(100.0)], SCREEN)
    # both conflicts (screen only); the stronger response first although it is farther off
    assert [f.mode.label for f in graded] == ["strong", "weak"]
    assert graded[0].response_db > graded[1].response_db


def _reference(panel_, modes, excitations, rules, overlap_from=math.inf):
    """Literal double loop over every pair, straight from the rule set's definitions."""
    found = []
    eta0 = {"fabric": 0.07, "film": 0.03}[panel_.material]
    for m in modes:
        for e in excitations:
            lo, hi = e.low_hz, e.high_hz
            f = m.frequency_hz
            s = (f - lo) / lo if f < lo else (f - hi) / hi if f > hi else 0.0
            w = m.loss_factor / 2 if rules.bandwidth_widening and m.loss_factor else 0.0
            weak = m.participation < (rules.participation_threshold if e.airborne
                                      else rules.support_participation_threshold)
            near = min(max(f, lo), hi)
            eta = m.loss_factor if m.loss_factor is not None else eta0
            h = 1 / math.sqrt((1 - (near / f) ** 2) ** 2 + eta**2)
            r = 20 * math.log10(m.participation * h) if m.participation > 0 else -math.inf
            if abs(s) <= rules.conflict_margin + w + 1e-9:
                grade = "caution" if weak else "conflict"
                if weak and f >= overlap_from:
                    grade = None
            elif abs(s) <= rules.caution_margin + w + 1e-9 and not weak:
                grade = "caution"
            else:
                grade = None
            if grade == "conflict" and r < rules.conflict_db:
                grade = "caution"
            if grade and r >= rules.report_db:
                found.append((m.label, e.description, grade))
    return sorted(found)


@pytest.mark.parametrize("rules", [SCREEN, STANDARD])
def test_vectorised_matches_literal_definition(rules):
    rng = np.random.default_rng(7)
    p = panel(tension_x=520.0, tension_y=380.0, width=0.9, length=0.6)
    modes = [dataclasses.replace(m, label=f"{m.label}#{k}", loss_factor=float(rng.uniform(0, 0.2)))
             for k, m in enumerate(membrane_modes(p, 6))]
    excs = []
    for k in range(300):
        f = float(10 ** rng.uniform(1.3, 2.6))
        if k % 3 == 0:
            excs.append(Excitation("E", "fan", "blade-pass", k, f"b{k}", f * 1.2,
                                   (f, f * float(rng.uniform(1.0, 2.0))), bool(k % 2)))
        else:
            excs.append(Excitation("E", "fan", "shaft", k, f"l{k}", f, None, bool(k % 2)))
    rules = dataclasses.replace(rules, fmax_hz=None, excitation_multiple=100.0)
    overlap = 150.0
    got = evaluate_panel(p, modes, excs, rules, overlap_from_hz=overlap)
    assert sorted((f.mode.label, f.excitation.description, f.severity) for f in got) \
        == _reference(p, modes, excs, rules, overlap)
    assert len(got) > 50
    order = [(f.severity != "conflict", -f.response_db) for f in got]
    assert order == sorted(order)


# ----------------------------------------------------------------------------------------
# Modal density and overlap; the verdict
# ----------------------------------------------------------------------------------------

def test_weyl_mode_count_against_the_exact_membrane_count():
    # Weyl's law with its boundary term for fixed edges, N(k) ≈ A k²/4π − P k/4π
    # (H. Weyl, 1911; the second term from memory), against the exact count of the ideal
    # membrane's modes f_mn = ½c√((m/a)² + (n/b)²) (Kinsler et al., Fundamentals of Acoustics,
    # ch. 4, from memory).
    a, b, rho, t = 4.8, 3.2, 0.25, 1200.0
    c = math.sqrt(t / rho)
    for f in (80.0, 160.0, 320.0):
        exact = sum(1 for m in range(1, 800) for n in range(1, 800)
                    if 0.5 * c * math.hypot(m / a, n / b) <= f)
        k = 2 * math.pi * f / c
        weyl = weyl_mode_count(f, a * b, rho, t)
        assert weyl == pytest.approx(a * b * k * k / (4 * math.pi))
        assert exact == pytest.approx(weyl - 2 * (a + b) * k / (4 * math.pi), rel=0.02)
    # n(f) = dN/df = 2π f A ρs / T for a membrane; (A/2)√(ρs/D) for a plate (Cremer & Heckl)
    assert modal_density(100.0, 2.0, 0.3, 600.0) == pytest.approx(2 * math.pi * 100 * 2 * 0.3 / 600)
    assert modal_density(100.0, 2.0, 7.8, 0.0, 18.0) == pytest.approx(1.0 * math.sqrt(7.8 / 18.0))


def test_modal_overlap_frequency_solves_m_equals_one():
    # M = η·f·n(f) (Cremer & Heckl, Structure-Borne Sound): the closed form against a root
    # found numerically (scipy.optimize.brentq), membrane and prestressed plate.
    for args in ((0.03, 15.36, 0.25, 1200.0, 0.0), (0.02, 1.0, 4.0, 300.0, 12.0)):
        f = modal_overlap_frequency_hz(*args)
        root = brentq(lambda x, a=args: modal_overlap_factor(x, *a) - 1.0, 1e-3, 1e6)
        assert f == pytest.approx(root, rel=1e-9)
    # the 4.8 × 3.2 m film of 0.25 kg/m² at 1200 N/m with η = 0.03: f = √(T/(2π η A ρs))
    assert modal_overlap_frequency_hz(0.03, 15.36, 0.25, 1200.0) == pytest.approx(
        math.sqrt(1200 / (2 * math.pi * 0.03 * 15.36 * 0.25)))


def test_verdict_is_never_clear_above_what_was_computed():
    p = panel(width=2.0, length=1.5, material="fabric", room_side="none", plenum_side="none")
    modes = ideal_membrane_modes_to(p, 120.0)
    tone = line(300.0, airborne=False, source="shaft")   # far above every mode computed
    got = assess_panel(p, modes, [tone], STANDARD, limit_hz=400.0, complete_to_hz=120.0)
    assert got.verdict == "not assessed" and got.assessed_to_hz == 120.0
    assert got.beyond == (tone,) and "above the assessed range" in got.reason
    assert "120 Hz" in got.reason and got.beyond_bound_db is not None
    complete = ideal_membrane_modes_to(p, 400.0)
    done = assess_panel(p, complete, [tone], STANDARD, limit_hz=400.0, complete_to_hz=400.0)
    assert done.verdict in ("clear", "caution", "conflict") and not done.beyond
    assert done.assessed_to_hz == 400.0
    nothing = assess_panel(p, complete, [], STANDARD, limit_hz=400.0)
    assert (nothing.verdict, nothing.reason) == ("clear", "No equipment reaches this panel.")


def test_overlap_is_stated_and_weak_modes_there_make_no_finding():
    # Large film: modes overlap from √(T/(2π η A ρs)) = 40.7 Hz (η = 0.03, in vacuo).
    p = panel(width=4.8, length=3.2, material="film", areal_density=0.25, tension_x=1200.0,
              tension_y=1200.0, room_side="none", plenum_side="none")
    assert panel_area(p) == pytest.approx(15.36)
    modes = ideal_membrane_modes_to(p, 120.0, loss_factor=0.03)
    m22 = next(m for m in modes if m.label == "(2,2)")       # 26 Hz, below the overlap
    m44 = next(m for m in modes if m.label == "(4,4)")       # 52 Hz, above it
    shaft = lambda f: line(f, airborne=False, source="shaft")  # noqa: E731
    rules = dataclasses.replace(STANDARD, support_participation_threshold=0.005,
                                conflict_db=-math.inf, report_db=-math.inf)
    got = assess_panel(p, modes, [shaft(m22.frequency_hz), shaft(m44.frequency_hz)], rules,
                       limit_hz=120.0)
    assert got.overlap_from_hz == pytest.approx(40.7, abs=0.1)
    assert any("Modes overlap from 40.7 Hz" in n for n in got.notes)
    labels = {(f.mode.label, f.severity) for f in got.findings}
    assert ("(2,2)", "caution") in labels          # one grade down below the overlap
    assert not any(lab == "(4,4)" for lab, _ in labels)   # no finding where modes overlap
