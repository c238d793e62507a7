"""Equipment → excitations: the tones of the trade, checked against their textbook formulas."""

from __future__ import annotations

import math

import pytest

from auditor.excitation import (
    ExcitationError,
    belt_pass_hz,
    blade_pass_hz,
    excitations_for,
    excitations_for_schedule,
    induction_motor_speed_rpm,
    synchronous_speed_rpm,
    transformer_hum_hz,
    vortex_shedding_hz,
)
from auditor.model import Equipment, SourceRef
from auditor.rules import load_ruleset

STANDARD = load_ruleset("standard")
SRC = SourceRef(file="project.xlsx", sheet="Equipment", row=7)


def item(kind, **kw) -> Equipment:
    return Equipment(equipment=kw.pop("tag", "X-1"), source=SRC, kind=kind, **kw)


def by_source(excs, source):
    return [e for e in excs if e.source == source]


def test_fan_blade_pass_and_shaft():
    # Blade-pass frequency = blades × rpm / 60; shaft rate = rpm / 60 (common practice).
    excs = excitations_for(item("fan", rpm=1200, blades=8, tag="AHU-2"), STANDARD)
    bpf = by_source(excs, "blade-pass")
    shaft = by_source(excs, "shaft")
    assert [e.frequency_hz for e in bpf] == pytest.approx([160.0, 320.0, 480.0])
    assert [e.order for e in bpf] == [1, 2, 3]
    assert [e.frequency_hz for e in shaft] == pytest.approx([20.0, 40.0])
    assert blade_pass_hz(8, 1200) == pytest.approx(160.0)
    assert bpf[1].description == "fan blade-pass ×2"
    assert all(e.band_hz is None and e.equipment == "AHU-2" and e.kind == "fan" for e in excs)
    # Paths from the rule set's documented defaults: blade-pass airborne, shaft structure-borne.
    assert all(e.airborne for e in bpf) and not any(e.airborne for e in shaft)


def test_pump_vane_pass():
    # Vane-pass frequency = impeller vanes × rpm / 60 (common practice): 6 × 1450 / 60 = 145 Hz.
    excs = excitations_for(item("pump", rpm=1450, vanes=6), STANDARD)
    assert by_source(excs, "vane-pass")[0].frequency_hz == pytest.approx(145.0)
    assert by_source(excs, "shaft")[0].frequency_hz == pytest.approx(1450 / 60)


def test_synchronous_speed():
    # Synchronous speed 120·f/poles (common practice): nameplate values 3000, 1500, 1000 rpm at
    # 50 Hz and 3600, 1800, 1200 rpm at 60 Hz for 2, 4, 6 poles.
    assert [synchronous_speed_rpm(50, p) for p in (2, 4, 6)] == pytest.approx([3000, 1500, 1000])
    assert [synchronous_speed_rpm(60, p) for p in (2, 4, 6)] == pytest.approx([3600, 1800, 1200])
    # Less slip: a 4-pole 50 Hz motor with 3 % slip runs at 1455 rpm.
    assert induction_motor_speed_rpm(50, 4, 0.03) == pytest.approx(1455.0)


def test_motor_shaft_from_poles_and_slip_and_twice_line_tone():
    # Shaft rate from synchronous speed less slip; electromagnetic tone at 2 × line frequency
    # with its harmonics (common practice): 100, 200 Hz on 50 Hz.
    excs = excitations_for(item("motor", poles=4, slip=0.02, line_frequency=50.0), STANDARD)
    shaft = by_source(excs, "shaft")
    assert shaft[0].frequency_hz == pytest.approx(1500 * 0.98 / 60)
    em = by_source(excs, "electromagnetic")
    assert [e.frequency_hz for e in em] == pytest.approx([100.0, 200.0])
    assert not any(e.airborne for e in em)
    # Default slip from the rule set (0.03) when the row gives none.
    excs = excitations_for(item("motor", poles=2, line_frequency=60.0), STANDARD)
    assert by_source(excs, "shaft")[0].frequency_hz == pytest.approx(3600 * 0.97 / 60)
    assert by_source(excs, "electromagnetic")[0].frequency_hz == pytest.approx(120.0)
    # A nameplate speed wins over poles and slip.
    excs = excitations_for(item("motor", rpm=1470, poles=4, line_frequency=50.0), STANDARD)
    assert by_source(excs, "shaft")[0].frequency_hz == pytest.approx(24.5)


def test_transformer_hum_even_harmonics_of_line():
    # Transformer hum at 2 × line frequency and its harmonics, all even multiples of the line
    # frequency (common practice): 100, 200, 300, 400 Hz at 50 Hz; 120 ... 480 Hz at 60 Hz.
    for line, expected in ((50.0, [100, 200, 300, 400]), (60.0, [120, 240, 360, 480])):
        excs = excitations_for(item("transformer", tag="TX-1", line_frequency=line), STANDARD)
        assert [e.frequency_hz for e in excs] == pytest.approx(expected)
        assert all(round(e.frequency_hz / line) % 2 == 0 for e in excs)
    assert transformer_hum_hz(50.0, 3) == pytest.approx(300.0)
    excs = excitations_for(item("transformer", tag="TX-1"), STANDARD, project_line_frequency=50.0)
    assert excs[1].description == "transformer hum 100 Hz ×2"
    assert excs[1].frequency_hz == pytest.approx(200.0)


def test_reciprocating_compressor():
    # Cylinder pulses = cylinders × rpm / 60, plus the shaft rate (common practice).
    excs = excitations_for(item("compressor", rpm=1450, cylinders=4), STANDARD)
    assert by_source(excs, "cylinder")[0].frequency_hz == pytest.approx(4 * 1450 / 60)
    assert len(by_source(excs, "cylinder")) == 3
    assert by_source(excs, "shaft")[0].frequency_hz == pytest.approx(1450 / 60)


def test_belt_pass():
    # Belt-pass frequency = belt speed / belt length = π·D·(rpm/60) / L (common practice):
    # 200 mm pulley at 1450 rpm, 2.0 m belt → π·0.2·24.17/2.0 = 7.59 Hz.
    excs = excitations_for(item("belt", rpm=1450, pulley_diameter=0.2, belt_length=2.0),
                           STANDARD)
    assert excs[0].frequency_hz == pytest.approx(7.592, abs=5e-4)
    assert excs[1].frequency_hz == pytest.approx(2 * 7.592, abs=1e-3)
    assert belt_pass_hz(0.2, 1450, 2.0) == pytest.approx(math.pi * 0.2 * 1450 / 60 / 2.0)


def test_vortex_shedding_strouhal():
    # Strouhal number ≈ 0.2 for a circular cylinder in the subcritical range (Blevins,
    # Flow-Induced Vibration, 2nd ed., ch. 3): the standard rule set uses it, and
    # f = St·U/d: 10 m/s across a 2 mm wire sheds at 0.2 × 10 / 0.002 = 1000 Hz.
    assert STANDARD.strouhal == pytest.approx(0.2, abs=0.01)
    excs = excitations_for(item("flow", velocity=10.0, wire_diameter=0.002), STANDARD)
    assert len(excs) == 1 and excs[0].source == "vortex shedding"
    assert excs[0].frequency_hz == pytest.approx(1000.0)
    assert not excs[0].airborne  # acts directly on the wire
    assert vortex_shedding_hz(0.21, 5.0, 0.003) == pytest.approx(350.0)


def test_typed_tone_and_band():
    excs = excitations_for(item("tone", frequency=63.0), STANDARD)
    assert [(e.frequency_hz, e.band_hz) for e in excs] == [(63.0, None)]
    band = excitations_for(item("tone", frequency_min=40.0, frequency_max=80.0), STANDARD)[0]
    assert band.band_hz == (40.0, 80.0)
    assert band.frequency_hz == pytest.approx(math.sqrt(40.0 * 80.0))  # geometric centre


def test_variable_speed_band_edges():
    # A variable-speed drive turns each line into a band: edges = the line at minimum and at
    # maximum speed (common practice). 10 blades, 600–1200 rpm → blade-pass 100–200 Hz.
    excs = excitations_for(item("fan", rpm_min=600, rpm_max=1200, blades=10), STANDARD)
    bpf = by_source(excs, "blade-pass")
    assert bpf[0].band_hz == pytest.approx((100.0, 200.0))
    assert bpf[0].frequency_hz == pytest.approx(math.sqrt(100.0 * 200.0))
    assert bpf[1].band_hz == pytest.approx((200.0, 400.0))
    assert by_source(excs, "shaft")[0].band_hz == pytest.approx((10.0, 20.0))
    # A variable-speed motor's electromagnetic tone follows the drive frequency: 2·f_line at
    # the speed it runs at on the line (4 poles, 3 % slip: 1455 rpm), pro rata below it.
    excs = excitations_for(item("motor", poles=4, rpm_min=727.5, rpm_max=1455,
                                line_frequency=50.0), STANDARD)
    em = by_source(excs, "electromagnetic")[0]
    assert em.band_hz == pytest.approx((50.0, 100.0))


def test_item_harmonics_override():
    excs = excitations_for(item("fan", rpm=900, blades=6, harmonics=5), STANDARD)
    assert len(by_source(excs, "blade-pass")) == 5
    assert len(by_source(excs, "shaft")) == 5
    assert by_source(excs, "blade-pass")[-1].frequency_hz == pytest.approx(5 * 6 * 900 / 60)


def test_missing_line_frequency_is_a_problem_naming_the_row():
    motor = Equipment(equipment="M-3", source=SRC, kind="motor", poles=4,
                      entered=(("Tag", "M-3"), ("Line freq (Hz)", "")))
    with pytest.raises(ExcitationError) as info:
        excitations_for(motor, STANDARD)
    problem = info.value.problem
    assert (problem.file, problem.sheet, problem.row) == ("project.xlsx", "Equipment", 7)
    assert problem.column == "Line freq (Hz)"
    assert problem.record == "M-3" and problem.severity == "error"
    assert "line frequency" in problem.message and "Project sheet" in problem.message
    # Without a typed header the column is named in words.
    with pytest.raises(ExcitationError) as info:
        excitations_for(item("transformer", tag="TX-9"), STANDARD)
    assert info.value.problem.column == "line frequency"
    # The Project sheet's value is used when the row has none.
    assert excitations_for(motor, STANDARD, project_line_frequency=50.0)


def test_other_missing_data_and_schedule_collection():
    with pytest.raises(ExcitationError, match="blades"):
        excitations_for(item("fan", rpm=900), STANDARD)
    with pytest.raises(ExcitationError, match="minimum speed .* above maximum"):
        excitations_for(item("fan", blades=6, rpm_min=900, rpm_max=600), STANDARD)
    with pytest.raises(ExcitationError, match="even number of poles"):
        excitations_for(item("motor", poles=3, line_frequency=50.0), STANDARD)
    good = item("fan", tag="F-1", rpm=900, blades=6)
    bad = item("transformer", tag="TX-2")
    pairs, problems = excitations_for_schedule([good, bad], STANDARD)
    assert [p[0].equipment for p in pairs] == ["F-1"]
    assert [p.record for p in problems] == ["TX-2"]


# ----------------------------------------------------------------------------------------
# Mounts: natural frequency from static deflection, transmissibility, amplifying mounts
# ----------------------------------------------------------------------------------------

from auditor.excitation import mount_of, mount_warnings  # noqa: E402
from auditor.judgement.response import (  # noqa: E402
    ELASTOMER_DAMPING,
    SPRING_DAMPING,
    mount_natural_frequency_hz,
    transmissibility,
)


def test_mount_frequency_from_static_deflection():
    # f_n = √(g/δ)/2π = 15.76/√δ[mm] Hz (common practice): 25 mm → 3.15 Hz, 6 mm → 6.4 Hz.
    assert mount_natural_frequency_hz(0.025) == pytest.approx(15.76 / math.sqrt(25), rel=1e-3)
    assert mount_natural_frequency_hz(0.025) == pytest.approx(3.15, abs=0.01)
    assert mount_natural_frequency_hz(0.006) == pytest.approx(15.76 / math.sqrt(6), rel=1e-3)
    with pytest.raises(ValueError):
        mount_natural_frequency_hz(0.0)


def test_transmissibility_of_a_single_degree_of_freedom_mount():
    # Harris' Shock and Vibration Handbook, vibration isolation chapter: undamped
    # T = 1/|1 − r²|, so r = 2 → 1/3 and r = 3 → 1/8; every curve crosses T = 1 at r = √2;
    # at resonance T = √(1 + 4ζ²)/(2ζ) (≈ 1/(2ζ) for light damping).
    assert transmissibility(2.0, 1.0, 0.0) == pytest.approx(1 / 3)
    assert transmissibility(3.0, 1.0, 0.0) == pytest.approx(1 / 8)
    for zeta in (0.0, 0.01, 0.05, 0.3):
        assert transmissibility(math.sqrt(2), 1.0, zeta) == pytest.approx(1.0)
    assert transmissibility(1.0, 1.0, 0.05) == pytest.approx(math.sqrt(1 + 0.01) / 0.1)
    # a rigid path (no mount frequency) passes everything
    assert transmissibility(24.0, float("nan"), 0.01) == 1.0
    # The same curve as the base-excitation transfer function (2ζω_n s + ω_n²)/(s² + 2ζω_n s
    # + ω_n²), evaluated by scipy.signal.freqs (a general reference library).
    from scipy.signal import freqs
    fn, zeta = 3.15, 0.05
    wn = 2 * math.pi * fn
    f = [1.0, 3.0, 4.4, 10.0, 24.2]
    _, h = freqs([2 * zeta * wn, wn * wn], [1.0, 2 * zeta * wn, wn * wn],
                 worN=[2 * math.pi * x for x in f])
    assert transmissibility(f, fn, zeta) == pytest.approx(abs(h), rel=1e-9)


def test_fan_on_springs_passes_a_fiftieth_of_its_shaft_force():
    # A fan at 1450 rpm (24.2 Hz shaft rate) on 25 mm steel springs: r = 24.2/3.15 = 7.7 and
    # T ≈ 1/(r² − 1) ≈ 0.018 (Harris; common practice: "about 98 % isolation").
    fan = item("fan", rpm=1450, blades=12, tag="AHU-1", isolator_deflection=0.025)
    shaft = by_source(excitations_for(fan, STANDARD), "shaft")
    r = (1450 / 60) / mount_natural_frequency_hz(0.025)
    expected = math.sqrt(1 + (2 * SPRING_DAMPING * r) ** 2) / math.sqrt(
        (1 - r * r) ** 2 + (2 * SPRING_DAMPING * r) ** 2)
    assert shaft[0].transmissibility == pytest.approx(expected, rel=1e-9)
    assert 0.015 < shaft[0].transmissibility < 0.025
    assert shaft[0].mount.kind == "steel spring" and shaft[0].mount.damping_assumed
    assert shaft[0].path == "structure-borne"
    # the airborne blade-pass does not go through the mount
    bpf = by_source(excitations_for(fan, STANDARD), "blade-pass")
    assert bpf[0].mount is None and bpf[0].transmissibility == 1.0 and bpf[0].path == "airborne"


def test_blank_deflection_is_rigid_and_the_assumption_is_recorded():
    fan = item("fan", rpm=1450, blades=12)
    shaft = by_source(excitations_for(fan, STANDARD), "shaft")[0]
    assert shaft.transmissibility == 1.0
    assert shaft.mount.rigid_assumed and shaft.mount.kind == "rigid"
    assert "assumed" in shaft.mount.description
    # vortex shedding acts on the wire itself: no mount at all
    wind = excitations_for(item("flow", velocity=10.0, wire_diameter=0.002), STANDARD)
    assert wind[0].mount is None and wind[0].path == "direct"


def test_default_damping_by_kind_of_isolator():
    # Steel springs from about 12 mm static deflection, elastomer below (common practice).
    assert mount_of(item("pump", rpm=1450, vanes=6, isolator_deflection=0.05)).damping_ratio \
        == SPRING_DAMPING
    pad = mount_of(item("pump", rpm=1450, vanes=6, isolator_deflection=0.004))
    assert pad.kind == "elastomer" and pad.damping_ratio == ELASTOMER_DAMPING
    given = mount_of(item("pump", rpm=1450, vanes=6, isolator_deflection=0.004,
                          isolator_damping=0.08))
    assert given.damping_ratio == 0.08 and not given.damping_assumed


def test_a_mount_that_amplifies_a_tone_is_a_warning_on_its_row():
    # A 900 rpm fan (15 Hz) on 2 mm pads: f_n = 15.76/√2 = 11.1 Hz, r = 1.35 < √2, so the
    # mounts pass more force than a rigid fixing would (T > 1; Harris).
    fan = item("fan", rpm=900, blades=6, tag="EF-3", isolator_deflection=0.002)
    excs = excitations_for(fan, STANDARD)
    shaft = by_source(excs, "shaft")[0]
    assert shaft.transmissibility > 1
    (warning,) = mount_warnings(fan, excs)
    assert warning.severity == "warning" and warning.row == 7 and warning.record == "EF-3"
    assert "amplify" in warning.message and "shaft ×1" in warning.message
    # the deflection that puts 15 Hz three times above the mount: g·(3/2πf)² = 9.9 mm
    assert "10 mm" in warning.message
    _, problems = excitations_for_schedule([fan], STANDARD)
    assert [p.severity for p in problems] == ["warning"]
    # the same fan on 25 mm springs: no warning
    assert mount_warnings(fan, excitations_for(
        item("fan", rpm=900, blades=6, isolator_deflection=0.025), STANDARD)) == ()


def test_an_impossible_isolator_is_a_problem_naming_its_column():
    bad = item("fan", rpm=900, blades=6, isolator_deflection=-0.01,
               entered=(("Isolator deflection (mm)", "-10"),))
    with pytest.raises(ExcitationError) as info:
        excitations_for(bad, STANDARD)
    assert info.value.problem.column == "Isolator deflection (mm)"
    assert "positive" in info.value.problem.message
