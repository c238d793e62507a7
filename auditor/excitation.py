"""Equipment → the tones it makes: forcing lines and bands, with harmonics.

Every formula here is common practice of the building-services trade (speeds in rev/min as
the trade states them, frequencies in Hz):

======================  =============================================================
kind                    sources and fundamentals
======================  =============================================================
fan                     shaft ``rpm/60``; blade-pass ``blades·rpm/60``
pump                    shaft ``rpm/60``; vane-pass ``vanes·rpm/60``
motor (induction)       shaft ``rpm/60``, or from the synchronous speed
                        ``120·f_line/poles`` less slip: ``(120·f_line/poles)(1 − s)/60``;
                        electromagnetic ``2·f_line``
compressor              cylinder pulses ``cylinders·rpm/60``; shaft ``rpm/60``
(reciprocating)
transformer             hum ``2·f_line`` (its harmonics ``2k·f_line``: 100, 200, 300,
                        400 Hz on a 50 Hz supply)
belt                    belt-pass ``π·D·(rpm/60)/L`` (D the pulley's diameter at ``rpm``,
                        L the belt length)
flow                    vortex shedding ``St·U/d`` (Blevins)
tone                    a frequency, or a band from ``frequency_min`` to ``frequency_max``
======================  =============================================================

Harmonic k of a source is k times its fundamental, k = 1..N, N from the rule set's
``[harmonics]`` (the item's own ``harmonics`` overrides it for all of its sources).

A variable-speed item (``rpm_min``, ``rpm_max``) turns every speed-dependent line into a band
whose edges are the line at the minimum and maximum speed; ``frequency_hz`` of a band is its
geometric centre ``√(low·high)``. A variable-speed motor's electromagnetic tone follows the
drive's output frequency, ``2·f_line·n/n_line`` with ``n_line`` the motor's speed on the line
frequency (its ``rpm``, or synchronous speed less slip).

Whether a source reaches a panel only as sound in air (``airborne``) or through the structure
is the rule set's ``[paths]``. A structure-borne tone of an item of equipment (shaft rate,
electromagnetic, belt-pass, and any source the rule set routes through the structure) passes
through the item's mount: ``Excitation.mount`` and ``Excitation.transmissibility`` (the largest
over the line or band) come from the isolators' static deflection and damping
(``auditor.judgement.response``); a blank deflection is a rigid mount, assumed and recorded
(``Mount.rigid_assumed``). Vortex shedding acts on the wire itself and has no mount. A tone
within √2 of the mount's own natural frequency is amplified by it (T > 1): that is a warning
on the equipment's row (``mount_warnings``), and the amplified tone is judged as such.

References
----------
.. [1] R. D. Blevins, *Flow-Induced Vibration*, 2nd ed., Van Nostrand Reinhold, 1990, ch. 3:
   vortex shedding ``f = St·U/D``, St ≈ 0.2 for a circular cylinder in the subcritical range.
.. [2] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control": blade-pass,
   shaft, electromagnetic (twice line frequency) and belt frequencies (common practice).
.. [3] Harris' Shock and Vibration Handbook, 5th ed., vibration isolation chapter
   (transmissibility, natural frequency from static deflection).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from auditor.judgement.response import (
    STANDARD_GRAVITY,
    default_isolator_damping,
    isolator_kind,
    mount_natural_frequency_hz,
    transmissibility,
)
from auditor.model import Equipment, RowProblem
from auditor.results import Excitation, Mount
from auditor.rules import RuleSet

__all__ = [
    "ExcitationError",
    "excitations_for",
    "excitations_for_schedule",
    "blade_pass_hz",
    "shaft_rate_hz",
    "synchronous_speed_rpm",
    "induction_motor_speed_rpm",
    "electromagnetic_hz",
    "transformer_hum_hz",
    "belt_pass_hz",
    "vortex_shedding_hz",
    "mount_of",
    "mount_warnings",
    "DIRECT_SOURCES",
]

#: Sources that act on the panel itself, not through an item's mount.
DIRECT_SOURCES: tuple[str, ...] = ("vortex shedding",)

#: The ratio of forcing to mount frequency a remedy for an amplifying mount aims at: r = 3
#: passes T ≈ 1/8 of the force (common practice of isolator selection).
ISOLATION_RATIO = 3.0


class ExcitationError(ValueError):
    """An item of equipment whose tones cannot be worked out; ``problem`` names its row."""

    def __init__(self, problem: RowProblem):
        super().__init__(problem.message)
        self.problem = problem


# ---------------------------------------------------------------------------------------
# Formulas (common practice of the trade)
# ---------------------------------------------------------------------------------------

def shaft_rate_hz(rpm: float) -> float:
    """Shaft rotation rate.

    Parameters
    ----------
    rpm : float  [rev/min]

    Returns
    -------
    float  [Hz]
        ``rpm / 60`` (common practice).
    """
    return rpm / 60.0


def blade_pass_hz(blades: int, rpm: float) -> float:
    """Blade-pass frequency of a fan (vane-pass of a pump impeller: the same formula).

    Parameters
    ----------
    blades : int
        Blades (or impeller vanes).
    rpm : float  [rev/min]

    Returns
    -------
    float  [Hz]
        ``blades · rpm / 60`` (common practice).

    References
    ----------
    .. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control".
    """
    return blades * rpm / 60.0


def synchronous_speed_rpm(line_frequency: float, poles: int) -> float:
    """Synchronous speed of an AC machine.

    Parameters
    ----------
    line_frequency : float  [Hz]
    poles : int
        Number of poles (2, 4, 6, ...).

    Returns
    -------
    float  [rev/min]
        ``120 · f_line / poles`` (common practice).
    """
    return 120.0 * line_frequency / poles


def induction_motor_speed_rpm(line_frequency: float, poles: int, slip: float) -> float:
    """Running speed of an induction motor: synchronous speed less slip.

    Parameters
    ----------
    line_frequency : float  [Hz]
    poles : int
    slip : float  [-]
        Fraction of synchronous speed lost, typically 0.01–0.05.

    Returns
    -------
    float  [rev/min]
        ``(120 · f_line / poles)(1 − slip)`` (common practice).
    """
    return synchronous_speed_rpm(line_frequency, poles) * (1.0 - slip)


def electromagnetic_hz(line_frequency: float) -> float:
    """Electromagnetic (magnetostriction / pole-passing) tone of motors and transformers.

    Parameters
    ----------
    line_frequency : float  [Hz]

    Returns
    -------
    float  [Hz]
        ``2 · f_line``: 100 Hz on a 50 Hz supply, 120 Hz on 60 Hz (common practice).
    """
    return 2.0 * line_frequency


def transformer_hum_hz(line_frequency: float, order: int = 1) -> float:
    """Transformer hum and its harmonics.

    Parameters
    ----------
    line_frequency : float  [Hz]
    order : int
        k = 1, 2, 3, ...

    Returns
    -------
    float  [Hz]
        ``2 k · f_line`` (even harmonics of the line frequency; common practice).
    """
    return 2.0 * order * line_frequency


def belt_pass_hz(pulley_diameter: float, rpm: float, belt_length: float) -> float:
    """Belt-pass frequency: how often one point of the belt comes round.

    Parameters
    ----------
    pulley_diameter : float  [m]
        Diameter of the pulley turning at ``rpm``.
    rpm : float  [rev/min]
    belt_length : float  [m]

    Returns
    -------
    float  [Hz]
        ``π · D · (rpm/60) / L`` (belt speed over belt length; common practice).
    """
    return math.pi * pulley_diameter * (rpm / 60.0) / belt_length


def vortex_shedding_hz(strouhal: float, velocity: float, diameter: float) -> float:
    """Vortex-shedding frequency from a wire or bar in cross-flow.

    Parameters
    ----------
    strouhal : float  [-]
        About 0.2 for a circular cylinder in the subcritical range.
    velocity : float  [m/s]
        Flow speed across the wire.
    diameter : float  [m]

    Returns
    -------
    float  [Hz]
        ``St · U / d``.

    References
    ----------
    .. [1] R. D. Blevins, *Flow-Induced Vibration*, 2nd ed., 1990, ch. 3.
    """
    return strouhal * velocity / diameter


# ---------------------------------------------------------------------------------------
# Equipment → excitations
# ---------------------------------------------------------------------------------------

_COLUMNS = {
    # field: (name used in messages, words to find the header as the user typed it)
    "rpm": ("speed", ("speed", "rpm")),
    "rpm_range": ("speed range", ("min speed", "max speed", "speed min", "speed max",
                                  "rpm min", "rpm max", "minimum speed", "maximum speed")),
    "blades": ("blades", ("blade",)),
    "vanes": ("vanes", ("vane",)),
    "cylinders": ("cylinders", ("cylinder",)),
    "poles": ("poles", ("pole",)),
    "slip": ("slip", ("slip",)),
    "line_frequency": ("line frequency", ("line", "supply", "mains")),
    "frequency": ("frequency", ("freq",)),
    "velocity": ("velocity", ("velocity", "air speed")),
    "wire_diameter": ("wire diameter", ("wire", "bar")),
    "pulley_diameter": ("pulley diameter", ("pulley",)),
    "belt_length": ("belt length", ("belt",)),
    "kind": ("kind", ("kind", "type")),
    "isolator_deflection": ("isolator deflection", ("deflection",)),
    "isolator_damping": ("isolator damping", ("damping",)),
}


def _column(equipment: Equipment, field_name: str) -> tuple[str, str]:
    """The header (as the user typed it, when known) and cell text for ``field_name``."""
    name, words = _COLUMNS[field_name]
    for column, text in equipment.entered:
        folded = column.casefold()
        if any(w in folded for w in words):
            return column, text
    return name, ""


def _problem(equipment: Equipment, field_name: str, message: str) -> ExcitationError:
    column, text = _column(equipment, field_name)
    src = equipment.source
    return ExcitationError(RowProblem(
        file=src.file, sheet=src.sheet, row=src.row, column=column,
        message=f"{equipment.kind} {equipment.equipment}: {message}",
        severity="error", text=text, record=equipment.equipment,
    ))


@dataclass(frozen=True)
class _Source:
    """One source of an item: ``per_rpm`` [Hz per rev/min] for speed-dependent lines, or a
    fixed ``band`` [Hz] (low, high; equal for a line)."""

    source: str
    per_rpm: float | None = None
    band: tuple[float, float] | None = None
    label: str = ""


def _positive(equipment: Equipment, field_name: str, what: str) -> float:
    value = getattr(equipment, field_name)
    if value is None:
        raise _problem(equipment, field_name, f"no {what} given; it is needed for its tones")
    if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
        raise _problem(equipment, field_name, f"{what} must be a positive number, not {value!r}")
    return float(value)


def _count(equipment: Equipment, field_name: str, what: str) -> int:
    value = _positive(equipment, field_name, what)
    if value != int(value):
        raise _problem(equipment, field_name, f"{what} must be a whole number, not {value:g}")
    return int(value)


def _speeds(equipment: Equipment, fallback_rpm: float | None = None) -> tuple[float, float]:
    """(lowest, highest) running speed [rev/min]; equal for a fixed-speed item."""
    rpm, lo, hi = equipment.rpm, equipment.rpm_min, equipment.rpm_max
    for name, value in (("rpm", rpm), ("rpm_range", lo), ("rpm_range", hi)):
        if value is not None and not (math.isfinite(value) and value > 0):
            raise _problem(equipment, name, f"speeds must be positive, not {value!r}")
    if lo is not None or hi is not None:
        lo = lo if lo is not None else rpm
        hi = hi if hi is not None else rpm
        if lo is None or hi is None:
            raise _problem(equipment, "rpm_range",
                           "a variable-speed item needs both its minimum and maximum speed")
        if lo > hi:
            raise _problem(equipment, "rpm_range",
                           f"minimum speed {lo:g} rpm is above maximum speed {hi:g} rpm")
        return float(lo), float(hi)
    if rpm is None:
        rpm = fallback_rpm
    if rpm is None:
        raise _problem(equipment, "rpm", "no running speed given; it is needed for its tones")
    return float(rpm), float(rpm)


def _line_frequency(equipment: Equipment, project_line_frequency: float | None) -> float:
    value = equipment.line_frequency if equipment.line_frequency is not None \
        else project_line_frequency
    if value is None:
        raise _problem(
            equipment, "line_frequency",
            "no line frequency: give it in the row or on the Project sheet (50 or 60 Hz); "
            "its electromagnetic tones cannot be placed without it",
        )
    if not (math.isfinite(value) and value > 0):
        raise _problem(equipment, "line_frequency",
                       f"line frequency must be a positive number of hertz, not {value!r}")
    return float(value)


def _sources(equipment: Equipment, ruleset: RuleSet,
             project_line_frequency: float | None) -> tuple[list[_Source], tuple[float, float]]:
    kind = equipment.kind
    speeds = (0.0, 0.0)
    if kind == "fan":
        blades = _count(equipment, "blades", "number of blades")
        speeds = _speeds(equipment)
        return [_Source("shaft", per_rpm=1 / 60), _Source("blade-pass", per_rpm=blades / 60)], \
            speeds
    if kind == "pump":
        vanes = _count(equipment, "vanes", "number of impeller vanes")
        speeds = _speeds(equipment)
        return [_Source("shaft", per_rpm=1 / 60), _Source("vane-pass", per_rpm=vanes / 60)], \
            speeds
    if kind == "compressor":
        cylinders = _count(equipment, "cylinders", "number of cylinders")
        speeds = _speeds(equipment)
        return [_Source("cylinder", per_rpm=cylinders / 60), _Source("shaft", per_rpm=1 / 60)], \
            speeds
    if kind == "belt":
        diameter = _positive(equipment, "pulley_diameter", "pulley diameter")
        length = _positive(equipment, "belt_length", "belt length")
        speeds = _speeds(equipment)
        return [_Source("belt-pass", per_rpm=math.pi * diameter / (60 * length))], speeds
    if kind == "motor":
        f_line = _line_frequency(equipment, project_line_frequency)
        slip = equipment.slip if equipment.slip is not None else ruleset.default_slip
        if not (math.isfinite(slip) and 0 <= slip < 1):
            raise _problem(equipment, "slip", f"slip is a fraction from 0 up to 1, not {slip!r}")
        line_speed = equipment.rpm
        if line_speed is None and equipment.poles is not None:
            poles = _count(equipment, "poles", "number of poles")
            if poles % 2:
                raise _problem(equipment, "poles",
                               f"an induction motor has an even number of poles, not {poles}")
            line_speed = induction_motor_speed_rpm(f_line, poles, slip)
        if line_speed is None and equipment.rpm_min is None and equipment.rpm_max is None:
            raise _problem(equipment, "rpm",
                           "no running speed and no number of poles; give either")
        speeds = _speeds(equipment, fallback_rpm=line_speed)
        if speeds[0] == speeds[1]:
            magnetic = _Source("electromagnetic", band=(electromagnetic_hz(f_line),) * 2)
        elif line_speed is None:
            raise _problem(equipment, "poles",
                           "a variable-speed motor needs its poles (or its speed on the line "
                           "frequency) to place its electromagnetic tone")
        else:
            magnetic = _Source("electromagnetic", per_rpm=electromagnetic_hz(f_line) / line_speed)
        return [_Source("shaft", per_rpm=1 / 60), magnetic], speeds
    if kind == "transformer":
        f_line = _line_frequency(equipment, project_line_frequency)
        hum = transformer_hum_hz(f_line)
        return [_Source("hum", band=(hum, hum), label=f"transformer hum {hum:g} Hz")], speeds
    if kind == "flow":
        velocity = _positive(equipment, "velocity", "flow velocity")
        diameter = _positive(equipment, "wire_diameter", "wire diameter")
        f = vortex_shedding_hz(ruleset.strouhal, velocity, diameter)
        return [_Source("vortex shedding", band=(f, f))], speeds
    if kind == "tone":
        lo, hi = equipment.frequency_min, equipment.frequency_max
        if lo is not None or hi is not None:
            if lo is None or hi is None:
                raise _problem(equipment, "frequency",
                               "a band needs both its lowest and highest frequency")
            for value in (lo, hi):
                if not (math.isfinite(value) and value > 0):
                    raise _problem(equipment, "frequency",
                                   f"frequencies must be positive, not {value!r}")
            if lo > hi:
                raise _problem(equipment, "frequency",
                               f"lowest frequency {lo:g} Hz is above highest {hi:g} Hz")
            return [_Source("tone", band=(float(lo), float(hi)))], speeds
        f = _positive(equipment, "frequency", "frequency")
        return [_Source("tone", band=(f, f))], speeds
    raise _problem(equipment, "kind", f"unknown kind of equipment '{kind}'")


def _describe(equipment: Equipment, source: _Source, order: int) -> str:
    head = source.label or (source.source if source.source == equipment.kind
                            else f"{equipment.kind} {source.source}")
    return f"{head} ×{order}"


def excitations_for(
    equipment: Equipment, ruleset: RuleSet, *, project_line_frequency: float | None = None
) -> tuple[Excitation, ...]:
    """The forcing lines and bands of one item of equipment.

    Parameters
    ----------
    equipment : Equipment
    ruleset : RuleSet
        Harmonic counts, paths (airborne or structure-borne), Strouhal number, default slip.
    project_line_frequency : float, optional  [Hz]
        The Project sheet's line frequency, used when the row gives none.

    Returns
    -------
    tuple of Excitation
        By source, then harmonic order. ``band_hz`` is set for a variable-speed item or a
        typed band (``frequency_hz`` is then the band's geometric centre).

    Raises
    ------
    ExcitationError
        When the row lacks what its tones need (a motor or transformer with no line frequency
        in its row or on the Project sheet, a fan with no blade count, ...); its ``problem``
        is a ``RowProblem`` naming the file, sheet, row and column.

    References
    ----------
    .. [1] R. D. Blevins, *Flow-Induced Vibration*, 2nd ed., 1990, ch. 3 (vortex shedding).
    .. [2] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control" (common
       practice for the other tones).
    """
    sources, (n_lo, n_hi) = _sources(equipment, ruleset, project_line_frequency)
    if equipment.harmonics is not None and not (
            isinstance(equipment.harmonics, int) and equipment.harmonics >= 0):
        raise ExcitationError(RowProblem(
            file=equipment.source.file, sheet=equipment.source.sheet, row=equipment.source.row,
            column="harmonics", record=equipment.equipment,
            message=f"{equipment.kind} {equipment.equipment}: harmonics must be a whole "
                    f"number of 0 or more, not {equipment.harmonics!r}"))
    mount = mount_of(equipment)
    out: list[Excitation] = []
    for source in sources:
        count = equipment.harmonics if equipment.harmonics is not None \
            else ruleset.harmonics_for(source.source)
        airborne = ruleset.is_airborne(source.source)
        through_mount = not airborne and source.source not in DIRECT_SOURCES
        for k in range(1, count + 1):
            if source.per_rpm is not None:
                lo, hi = k * source.per_rpm * n_lo, k * source.per_rpm * n_hi
            else:
                assert source.band is not None
                lo, hi = k * source.band[0], k * source.band[1]
            band = (lo, hi) if hi > lo else None
            out.append(Excitation(
                equipment=equipment.equipment,
                kind=equipment.kind,
                source=source.source,
                order=k,
                description=_describe(equipment, source, k),
                frequency_hz=math.sqrt(lo * hi) if band else lo,
                band_hz=band,
                airborne=airborne,
                mount=mount if through_mount else None,
                transmissibility=worst_transmissibility(mount, lo, hi) if through_mount
                else 1.0,
            ))
    return tuple(out)


def mount_of(equipment: Equipment) -> Mount:
    """The item's mount from its isolator deflection and damping.

    A blank deflection is a rigid mount, assumed (``rigid_assumed``); a blank damping ratio
    takes the default for the isolator's kind (``auditor.judgement.response``: steel spring
    from 12 mm static deflection, elastomer below; common practice).

    Raises
    ------
    ExcitationError
        A deflection that is not a positive length, or a damping ratio outside 0 to 1.
    """
    deflection, damping = equipment.isolator_deflection, equipment.isolator_damping
    if deflection is None:
        return Mount()
    if not (isinstance(deflection, (int, float)) and math.isfinite(deflection)
            and deflection > 0):
        raise _problem(equipment, "isolator_deflection",
                       f"isolator deflection must be a positive length, not {deflection!r}")
    if damping is not None and not (isinstance(damping, (int, float))
                                    and math.isfinite(damping) and 0 <= damping < 1):
        raise _problem(equipment, "isolator_damping",
                       f"isolator damping is a damping ratio ζ from 0 up to 1 (e.g. 0.01 for "
                       f"steel springs), not {damping!r}")
    return Mount(
        kind=isolator_kind(deflection),
        static_deflection=float(deflection),
        damping_ratio=float(damping) if damping is not None
        else default_isolator_damping(deflection),
        natural_frequency_hz=mount_natural_frequency_hz(deflection),
        rigid_assumed=False,
        damping_assumed=damping is None,
    )


def worst_transmissibility(mount: Mount, low_hz: float, high_hz: float) -> float:
    """The largest transmissibility of ``mount`` over a line or band [-] (1 when rigid)."""
    fn = mount.natural_frequency_hz
    if fn is None:
        return 1.0
    points = [low_hz, high_hz, min(max(fn, low_hz), high_hz)]
    return float(max(transmissibility(f, fn, mount.damping_ratio) for f in points))


def mount_warnings(equipment: Equipment,
                   excitations: Iterable[Excitation]) -> tuple[RowProblem, ...]:
    """A warning for each source of an isolated item whose tone its mount amplifies.

    A tone below √2 times the mount's natural frequency is passed with T > 1 (Harris): the
    isolators make it worse, not better. The warning names the tone, T and the static
    deflection that would put it ``ISOLATION_RATIO`` × above the mount's frequency.
    """
    out: list[RowProblem] = []
    seen: set[str] = set()
    for e in excitations:
        mount = e.mount
        if mount is None or mount.natural_frequency_hz is None or e.source in seen:
            continue
        fn = mount.natural_frequency_hz
        if e.low_hz >= math.sqrt(2.0) * fn:
            continue
        seen.add(e.source)
        needed = STANDARD_GRAVITY * (ISOLATION_RATIO / (2 * math.pi * e.low_hz)) ** 2
        column, text = _column(equipment, "isolator_deflection")
        tone = (f"{e.band_hz[0]:.3g}–{e.band_hz[1]:.3g} Hz" if e.band_hz
                else f"{e.frequency_hz:.3g} Hz")
        out.append(RowProblem(
            file=equipment.source.file, sheet=equipment.source.sheet,
            row=equipment.source.row, column=column, text=text, severity="warning",
            record=equipment.equipment,
            message=(f"{equipment.kind} {equipment.equipment}: its {e.description} ({tone}) "
                     f"is within √2 of the natural frequency of its mounts ({mount.description}),"
                     f" which amplify it (transmissibility up to {e.transmissibility:.2g}) "
                     f"instead of isolating it; a static deflection of at least "
                     f"{needed * 1e3:.0f} mm would put it {ISOLATION_RATIO:g}× above the "
                     f"mounts' frequency (common practice)."),
        ))
    return tuple(out)


def excitations_for_schedule(
    equipment: Iterable[Equipment], ruleset: RuleSet, *,
    project_line_frequency: float | None = None,
) -> tuple[tuple[tuple[Equipment, tuple[Excitation, ...]], ...], tuple[RowProblem, ...]]:
    """Excitations of every item, and a problem for every item whose tones cannot be placed.

    Returns
    -------
    pairs : tuple of (Equipment, tuple of Excitation)
        Zones are applied per panel (``auditor.judgement.screening.reaching``).
    problems : tuple of RowProblem
        One error per rejected item, naming its row and column, and a warning for each tone
        an item's mounts amplify (``mount_warnings``).
    """
    pairs: list[tuple[Equipment, tuple[Excitation, ...]]] = []
    problems: list[RowProblem] = []
    for item in equipment:
        try:
            excitations = excitations_for(item, ruleset,
                                          project_line_frequency=project_line_frequency)
        except ExcitationError as exc:
            problems.append(exc.problem)
            continue
        pairs.append((item, excitations))
        problems.extend(mount_warnings(item, excitations))
    return tuple(pairs), tuple(problems)
