"""Rule sets and the judgement of modes against excitations."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from auditor.excitation import excitations_for
from auditor.model import Equipment, Excitation, Mode, Panel, SourceRef
from auditor.rules import (
    findings_for_panel,
    ExcitationTable, RuleSetError, evaluate_panel, list_rulesets, load_ruleset,
    mode_frequency_limit, parse_ruleset, rules_dir, separation,
)
from reference_models import ideal_membrane_modes as membrane_modes

SRC = SourceRef(file="p.xlsx", sheet="Panels", row=3)
# The bundled standard set, with structure-borne pairs held to the full margins (its support
# participation threshold switched off) so these checks see the plain airborne/structure-borne
# distinction; the support threshold has its own test.
STANDARD = dataclasses.replace(load_ruleset("standard"), support_participation_threshold=0.0)
PLAIN = dataclasses.replace(STANDARD, bandwidth_widening=False)




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
    assert (STANDARD.fmax_hz, STANDARD.excitation_multiple, STANDARD.max_modes) == (500, 2, 12)
    assert STANDARD.use_zones and STANDARD.bandwidth_widening and STANDARD.strouhal == 0.2
    strict = load_ruleset("strict")
    assert strict.conflict_margin > STANDARD.conflict_margin
    assert strict.caution_margin > STANDARD.caution_margin
    assert strict.participation_threshold < STANDARD.participation_threshold
    assert all(strict.harmonics_for(s) >= STANDARD.harmonics_for(s) for s, _ in STANDARD.harmonics)
    names = [r.name for r in list_rulesets()]
    assert {"standard", "strict"} <= set(names)
    assert Path(STANDARD.path) == rules_dir() / "standard.toml"
    assert STANDARD.as_dict()["harmonics"]["blade-pass"] == 3


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
    assert got.name == "our office" and got.path == str(copy)
    assert load_ruleset(str(copy)).conflict_margin == 0.10
    with pytest.raises(RuleSetError, match="no rule set named 'standart'.*did you mean 'standard'"):
        load_ruleset("standart")
    with pytest.raises(RuleSetError, match="not found"):
        load_ruleset(tmp_path / "missing.toml")
    broken = tmp_path / "broken.toml"
    broken.write_text("[margins\nconflict = 0.1", encoding="utf-8")
    with pytest.raises(RuleSetError, match="not valid TOML"):
        load_ruleset(broken)


@pytest.mark.parametrize("data, message", [
    ({"margins": {"conflcit": 0.1}},
     r"unknown key 'conflcit' in \[margins\]; did you mean 'conflict'"),
    ({"margin": {"conflict": 0.1}}, r"unknown section or key 'margin'; did you mean 'margins'"),
    ({"conflict": 0.1}, r"key 'conflict' belongs in section \[margins\]"),
    ({"margins": {"conflict": "ten"}}, r"\[margins\] conflict must be a number"),
    ({"margins": {"conflict": True}}, r"must be a number"),
    ({"modes": {"max_modes": 4.5}}, r"max_modes must be a whole number"),
    ({"margins": {"bandwidth_widening": 1}}, r"must be true or false"),
    ({"margins": {"conflict": 0.2, "caution": 0.1}}, r"0 < conflict < caution < 1"),
    ({"margins": {"conflict": 0.0}}, r"0 < conflict < caution < 1"),
    ({"margins": {"caution": 1.2}}, r"0 < conflict < caution < 1"),
    ({"paths": {"hum": "airbourne"}}, r'must be "airborne" or "structure-borne".*did you mean'),
    ({"modes": {"fmax_hz": 0, "excitation_multiple": 0}}, r"needs a limit"),
    ({"modes": {"excitation_multiple": 1.1}}, r"would miss modes inside the caution margin"),
    ({"equipment": {"strouhal": 2.0}}, r"strouhal must be between 0 and 1"),
    ({"harmonics": {"blade_pass": -1}}, r"must be 0 or more"),
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


# ----------------------------------------------------------------------------------------
# Which modes count; separation
# ----------------------------------------------------------------------------------------

def test_mode_frequency_limit():
    rules = dataclasses.replace(STANDARD, fmax_hz=1000.0, excitation_multiple=2.0)
    assert mode_frequency_limit(rules, [line(100.0), line(300.0)]) == pytest.approx(600.0)
    assert mode_frequency_limit(rules, [line(800.0)]) == pytest.approx(1000.0)
    assert mode_frequency_limit(rules, [band(100.0, 400.0)]) == pytest.approx(800.0)
    assert mode_frequency_limit(rules, []) == 0.0
    only_fmax = dataclasses.replace(rules, excitation_multiple=None)
    assert mode_frequency_limit(only_fmax, []) == 1000.0


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


# ----------------------------------------------------------------------------------------
# Severities
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
    # One grade down: 15 % from an airborne line (a caution for a drivable mode) is no
    # finding for the (2,1) mode; for a structure-borne line it stays a caution.
    off = m21.frequency_hz / 1.15
    got = [f for f in evaluate_panel(p, modes, [line(off)], PLAIN) if f.mode.label == "(2,1)"]
    assert got == []
    got = [f for f in evaluate_panel(p, modes, [line(off, airborne=False, source="shaft")], PLAIN)
           if f.mode.label == "(2,1)"]
    assert [f.severity for f in got] == ["caution"]
    # The fundamental (participation 64/π⁴ ≈ 0.657) stays a conflict for an airborne line.
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
    widened = evaluate_panel(p, [mode(114.0, eta=0.1)], exc, STANDARD)[0]
    assert widened.severity == "conflict" and widened.margin == pytest.approx(0.15)
    assert evaluate_panel(p, [mode(124.0, eta=0.1)], exc, PLAIN) == ()
    assert evaluate_panel(p, [mode(124.0, eta=0.1)], exc, STANDARD)[0].margin == pytest.approx(0.25)
    # No loss factor known: no widening.
    assert evaluate_panel(p, [mode(114.0)], exc, STANDARD)[0].severity == "caution"


def test_zones_respected():
    src = SourceRef("p.xlsx", "Equipment", 2)
    in_a = Equipment(equipment="AHU-A", source=src, kind="fan", rpm=600, blades=10, zones=("A",))
    everywhere = Equipment(equipment="TX-1", source=src, kind="transformer", line_frequency=50.0)
    pairs = [(e, excitations_for(e, STANDARD)) for e in (in_a, everywhere)]
    table = ExcitationTable.from_equipment(pairs)
    # A panel whose fundamental sits on the fan's 100 Hz blade-pass and the 100 Hz hum.
    modes = [mode(100.0)]
    tags = lambda got: {f.excitation.equipment for f in got}  # noqa: E731
    assert tags(evaluate_panel(panel(zone="a"), modes, table, PLAIN)) == {"AHU-A", "TX-1"}
    assert tags(evaluate_panel(panel(zone="B"), modes, table, PLAIN)) == {"TX-1"}
    assert tags(evaluate_panel(panel(zone="B"), modes, pairs, PLAIN)) == {"TX-1"}
    no_zones = dataclasses.replace(PLAIN, use_zones=False)
    assert tags(evaluate_panel(panel(zone="B"), modes, table, no_zones)) == {"AHU-A", "TX-1"}


def test_sorted_conflicts_first_then_by_separation():
    modes = [mode(100.0, label="a"), mode(118.0, label="b"), mode(105.0, label="c"),
             mode(101.0, participation=0.0, label="d")]
    got = evaluate_panel(panel(), modes, [line(100.0)], PLAIN)
    assert [(f.mode.label, f.severity) for f in got] == [
        ("a", "conflict"), ("c", "conflict"), ("d", "caution"), ("b", "caution")]


def test_modes_above_limit_or_cap_do_not_count():
    exc = [line(100.0)]  # limit = 2 × 100 = 200 Hz
    assert evaluate_panel(panel(), [mode(190.0), mode(210.0)], [line(100.0), line(200.0)], PLAIN)
    capped = dataclasses.replace(PLAIN, max_modes=1)
    assert evaluate_panel(panel(), [mode(50.0), mode(100.0)], exc, capped) == ()
    low = dataclasses.replace(PLAIN, fmax_hz=95.0)
    assert evaluate_panel(panel(), [mode(99.0)], exc, low) == ()


def _reference(modes, excitations, rules):
    """Literal double loop over every pair, straight from the rule set's definitions."""
    found = []
    for m in modes:
        for e in excitations:
            lo, hi = e.low_hz, e.high_hz
            f = m.frequency_hz
            s = (f - lo) / lo if f < lo else (f - hi) / hi if f > hi else 0.0
            w = m.loss_factor / 2 if rules.bandwidth_widening and m.loss_factor else 0.0
            weak = e.airborne and m.participation < rules.participation_threshold
            if abs(s) <= rules.conflict_margin + w + 1e-9:
                found.append((m.label, e.description, "caution" if weak else "conflict"))
            elif abs(s) <= rules.caution_margin + w + 1e-9 and not weak:
                found.append((m.label, e.description, "caution"))
    return sorted(found)


def test_vectorised_matches_literal_definition():
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
    rules = dataclasses.replace(STANDARD, fmax_hz=None, excitation_multiple=100.0, max_modes=999)
    got = evaluate_panel(p, modes, excs, rules)
    assert sorted((f.mode.label, f.excitation.description, f.severity) for f in got) \
        == _reference(modes, excs, rules)
    assert len(got) > 50
    order = [(f.severity != "conflict", abs(f.separation)) for f in got]
    assert order == sorted(order)


def test_findings_are_ordinary_records():
    # The fast record construction must give exactly what the constructor gives.
    from auditor.model import Finding
    from auditor.rules import _finding, _finding_by_constructor
    args = ("C-1", mode(100.0), line(100.0), 0.0, "conflict", 0.1)
    fast, slow = _finding(*args), _finding_by_constructor(*args)
    assert fast == slow and hash(fast) == hash(slow) and repr(fast) == repr(slow)
    assert isinstance(fast, Finding) and fast.remedy is None
    with pytest.raises(dataclasses.FrozenInstanceError):
        fast.severity = "caution"
    assert dataclasses.replace(fast, remedy=None) == slow


def test_batch_evaluation_matches_and_restores_the_collector():
    import gc
    from auditor.rules import evaluate_panels
    p = panel()
    modes = tuple(membrane_modes(p))
    excs = (line(modes[0].frequency_hz), line(modes[3].frequency_hz * 1.15, airborne=False))
    one = [evaluate_panel(p, modes, excs, STANDARD), evaluate_panel(p, modes, excs[:1], STANDARD)]
    assert gc.isenabled()
    batch = evaluate_panels([(p, modes)], excs, STANDARD) \
        + evaluate_panels([(p, modes)], excs[:1], STANDARD)
    assert batch == one and one[0] != one[1] and gc.isenabled()


def test_support_participation_threshold_demotes_structure_borne_pairs():
    # A rigid support motion a(t) loads a clamped membrane with −ρs·a·∫φ dA per mode: the
    # modal force is proportional to ∫φ dA, the same as for a uniform pressure (base
    # excitation of a continuous system; e.g. Clough & Penzien, Dynamics of Structures, ch. 26).
    # The ideal membrane's (2,1) mode has ∫φ dA = 0 (Rayleigh's sine modes).
    mode = Mode(label="(2,1)", frequency_hz=100.0, participation=0.0)
    shaft = Excitation("F-1", "fan", "shaft", 1, "fan shaft ×1", 102.0, airborne=False)
    where = panel()
    held = dataclasses.replace(STANDARD, support_participation_threshold=0.0)
    demoting = dataclasses.replace(STANDARD, support_participation_threshold=0.005)
    assert [f.severity for f in evaluate_panel(where, [mode], (shaft,), held)] == ["conflict"]
    assert [f.severity for f in evaluate_panel(where, [mode], (shaft,), demoting)] == ["caution"]
    lit = dataclasses.replace(mode, participation=64 / math.pi**4)  # (1,1): not demoted
    assert [f.severity for f in evaluate_panel(where, [lit], (shaft,), demoting)] == ["conflict"]


def test_findings_for_panel_renames_without_changing_anything_else():
    mode = Mode(label="(1,1)", frequency_hz=100.0, participation=0.6)
    got = evaluate_panel(panel(), [mode], (line(101.0),), STANDARD)
    renamed = findings_for_panel(got, "P-2")
    assert [f.panel for f in renamed] == ["P-2"] * len(got)
    assert [dataclasses.replace(f, panel=got[0].panel) for f in renamed] == list(got)
