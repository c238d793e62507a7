"""Turning one row's values into a record, or saying what stops it.

The reader has already read each cell into SI (``auditor.schedule.cells``); here the row is
checked as a whole: required fields per shape and per kind, sizes inside the physical limits
of ``auditor.schedule.limits`` (rejections, the limit stated) and the usual ranges (warnings),
minimum not above maximum, a sealed plenum with its depth, and a shape the physics can mesh.

This is the one validation path of ``auditor check`` and ``auditor audit``: a row accepted
here is never rejected later. The geometry is checked with the physics' own test
(``auditor.schedule.shapes``: ``auditor.physics.geometry.outline_problems`` on the outline the
finite-element path would mesh), and each kind of equipment must give every field
``auditor.excitation`` needs for its tones (the line frequency, which may come from the
Project sheet, is checked once the whole schedule is read: :func:`line_frequency_note`).

Each check yields a :class:`Note` naming the field it concerns (``None`` for the whole row);
the reader turns notes into ``auditor.model.RowProblem`` with the file, sheet, row and the
header as typed. Nothing here knows about files.
"""

from __future__ import annotations

import math
from typing import Any, Iterable

from auditor.model import (
    Equipment,
    EquipmentKind,
    Material,
    Panel,
    PlenumSide,
    RowProblem,
    ShapeKind,
    SourceRef,
)
from auditor.schedule.checks import LIMIT_NOTE, RANGE_NOTE, Note, fmt, range_warning, within
from auditor.schedule.limits import (
    AIR_DENSITY_LIMITS,
    AREAL_DENSITY_LIMITS,
    DEEPEST_USUAL_CAVITY,
    EQUIPMENT_LENGTH_LIMITS,
    LARGEST_BENDING_STIFFNESS,
    LARGEST_COUNT,
    LARGEST_FREQUENCY,
    LARGEST_HARMONICS,
    LARGEST_ISOLATOR_DEFLECTION,
    LARGEST_LOSS_FACTOR,
    LARGEST_RPM,
    LARGEST_SPAN,
    LARGEST_TENSION,
    LARGEST_USUAL_SLIP,
    LARGEST_VELOCITY,
    LINE_FREQUENCY_LIMITS,
    SMALLEST_SPAN,
    SPEED_OF_SOUND_LIMITS,
    USUAL_AREAL_DENSITY,
    USUAL_LINE_FREQUENCIES,
    USUAL_LOSS_FACTOR_MAX,
    USUAL_TENSION,
)
from auditor.schedule.shapes import geometry_notes, infer_shape

__all__ = [
    "Note",
    "USUAL_AREAL_DENSITY",
    "USUAL_TENSION",
    "USUAL_LINE_FREQUENCIES",
    "panel_from_values",
    "equipment_from_values",
    "line_frequency_note",
    "project_value_note",
    "rejected_rows",
]


# --------------------------------------------------------------------------------------
# Panels
# --------------------------------------------------------------------------------------
def _tension_checks(values: dict[str, Any], notes: list[Note]):
    """Tension x and y [N/m] from the row, and the (field, value, label) triples to check."""
    both = values.get("tension")
    tension_x = values.get("tension_x", both)
    tension_y = values.get("tension_y", both)
    if tension_x is None and tension_y is None:
        notes.append(Note("error", "tension", "tension (or tension x and tension y) is required"))
        return tension_x, tension_y, []
    if "tension_x" not in values and "tension_y" not in values:
        return tension_x, tension_y, [("tension", both, "tension")]
    return tension_x, tension_y, [
        ("tension_x" if "tension_x" in values else "tension", tension_x, "tension x"),
        ("tension_y" if "tension_y" in values else "tension", tension_y, "tension y")]


def panel_from_values(
    values: dict[str, Any], source: SourceRef, entered: tuple[tuple[str, str], ...] = ()
) -> tuple[Panel | None, list[Note]]:
    """Check one panel row and build its record.

    Parameters
    ----------
    values : dict
        Field name (``Panel`` attribute, or ``"tension"``) → value already in SI; only the
        cells that were filled and read.
    source : SourceRef
    entered : tuple of (header, text)

    Returns
    -------
    (Panel or None, list of Note)
        None when any note is an error.
    """
    notes: list[Note] = []
    panel_id = values.get("panel", "")
    if not panel_id:
        notes.append(Note("error", "panel", "the row has no panel id"))

    shape: ShapeKind = values.get("shape") or infer_shape(values)
    geometry_notes(shape, values, notes)

    material: Material = values.get("material") or "film"
    areal_density = values.get("areal_density")
    if areal_density is None:
        notes.append(Note("error", "areal_density", "areal density is required"))
    elif within(areal_density, "areal_density", "areal density", "kg/m²", notes,
                 low=AREAL_DENSITY_LIMITS[0], high=AREAL_DENSITY_LIMITS[1],
                 what="any panel's membrane"):
        range_warning(areal_density, USUAL_AREAL_DENSITY[material], "areal_density",
                       "areal density", "kg/m²", material, notes)

    bending = values.get("bending_stiffness")
    if bending is not None:
        within(bending, "bending_stiffness", "bending stiffness", "N·m", notes,
                high=LARGEST_BENDING_STIFFNESS, what="any panel's", positive=False)
        if bending < 0:
            notes.append(Note("error", "bending_stiffness",
                              f"bending stiffness must not be negative, not {fmt(bending)} N·m"))
    # Only the exact prestressed-plate solution (a rectangle without cut-outs) models bending,
    # so only there may a plate carry no tension.
    may_be_slack = (material == "plate" and bending is not None and bending > 0
                    and shape == "rectangle" and not values.get("cutouts"))

    tension_x, tension_y, checks = _tension_checks(values, notes)
    for field, value, label in checks:
        if value is None:
            notes.append(Note("error", "tension_y" if label == "tension y" else "tension_x",
                              f"{label} is required (or give tension for both directions)"))
        elif value == 0 and may_be_slack:
            continue
        elif within(value, field, label, "N/m", notes, high=LARGEST_TENSION,
                     what="any membrane, fabric or mesh can carry"):
            if material in USUAL_TENSION:
                range_warning(value, USUAL_TENSION[material], field, label, "N/m", material,
                               notes)
    if material == "plate" and not (bending and bending > 0):
        notes.append(Note("warning", "bending_stiffness",
                          "a plate with no bending stiffness is treated as a membrane; give "
                          "its bending stiffness"))

    loss_factor = values.get("loss_factor")
    if loss_factor is not None and within(
            loss_factor, "loss_factor", "loss factor", "", notes, high=LARGEST_LOSS_FACTOR,
            what="the damping of any panel", positive=False):
        if loss_factor < 0:
            notes.append(Note("error", "loss_factor",
                              f"loss factor must not be negative, not {fmt(loss_factor)}"))
        elif loss_factor > USUAL_LOSS_FACTOR_MAX:
            notes.append(Note("warning", "loss_factor",
                              f"loss factor {fmt(loss_factor)} is above "
                              f"{USUAL_LOSS_FACTOR_MAX:g} {RANGE_NOTE}; was a percentage "
                              "typed without %?"))
    airflow = values.get("airflow_resistance")
    if airflow is not None and within(airflow, "airflow_resistance", "airflow resistance",
                                       "Pa·s/m", notes, positive=False) and airflow < 0:
        notes.append(Note("error", "airflow_resistance",
                          f"airflow resistance must not be negative, not {fmt(airflow)} Pa·s/m"))

    plenum: PlenumSide = values.get("plenum_side") or "air"
    depth = values.get("cavity_depth")
    if depth is not None:
        if within(depth, "cavity_depth", "cavity depth", "m", notes, low=SMALLEST_SPAN,
                   high=LARGEST_SPAN, what="any cavity behind a panel"):
            if depth > DEEPEST_USUAL_CAVITY:
                notes.append(Note("warning", "cavity_depth",
                                  f"cavity depth {fmt(depth)} m is deeper than "
                                  f"{DEEPEST_USUAL_CAVITY:g} m (common practice); check the unit"))
            if plenum != "sealed":
                notes.append(Note("warning", "cavity_depth",
                                  f"cavity depth is used only with a sealed plenum (plenum side "
                                  f"is {plenum}); ignored"))
    elif plenum == "sealed":
        notes.append(Note("error", "cavity_depth", "a sealed plenum needs its cavity depth"))

    max_tension = values.get("max_tension")
    if max_tension is not None and within(max_tension, "max_tension", "max tension", "N/m",
                                           notes, high=LARGEST_TENSION,
                                           what="any membrane, fabric or mesh can carry"):
        for value, label in ((tension_x, "tension x"), (tension_y, "tension y")):
            if value is not None and value > max_tension:
                notes.append(Note("warning", "max_tension",
                                  f"{label} {fmt(value)} N/m is above the rated maximum "
                                  f"{fmt(max_tension)} N/m; confirm with the system's "
                                  "manufacturer and a competent installer"))

    # areal_density is None only when an error note says so
    if areal_density is None or any(n.severity == "error" for n in notes):
        return None, notes
    panel = Panel(
        panel=panel_id,
        source=source,
        shape=shape,
        zone=values.get("zone", ""),
        width=values.get("width") if shape == "rectangle" else None,
        length=values.get("length") if shape == "rectangle" else None,
        diameter=values.get("diameter") if shape == "circle" else None,
        outline=values.get("outline") if shape == "polygon" else None,
        cutouts=values.get("cutouts") or (),
        material=material,
        areal_density=areal_density,
        tension_x=tension_x,
        tension_y=tension_y,
        bending_stiffness=bending or 0.0,
        loss_factor=loss_factor,
        airflow_resistance=airflow,
        room_side=values.get("room_side") or "air",
        plenum_side=plenum,
        cavity_depth=depth if plenum == "sealed" else None,
        max_tension=max_tension,
        tap_test=values.get("tap_test") or None,
        entered=entered,
    )
    return panel, notes


# --------------------------------------------------------------------------------------
# Equipment
# --------------------------------------------------------------------------------------
# What each kind needs for its tones (auditor.excitation); "speed" means rpm, or both rpm
# min and rpm max. The line frequency of a motor or transformer may come from the Project
# sheet: see line_frequency_note.
_KIND_NEEDS: dict[str, tuple[str, ...]] = {
    "fan": ("speed", "blades"),
    "pump": ("speed", "vanes"),
    "motor": ("speed|poles",),
    "compressor": ("speed", "cylinders"),
    "transformer": (),
    "belt": ("speed", "pulley_diameter", "belt_length"),
    "flow": ("velocity", "wire_diameter"),
    "tone": ("frequency",),
}
_NEEDS_LINE_FREQUENCY = frozenset(("motor", "transformer"))
_SPEED = ("rpm", "rpm_min", "rpm_max")
_FREQUENCY = ("frequency", "frequency_min", "frequency_max")
_MOUNT = ("isolator_deflection", "isolator_damping")
_KIND_USES: dict[str, frozenset[str]] = {
    "fan": frozenset(_SPEED + ("blades",) + _MOUNT),
    "pump": frozenset(_SPEED + ("vanes",) + _MOUNT),
    "motor": frozenset(_SPEED + ("poles", "slip", "line_frequency") + _MOUNT),
    "compressor": frozenset(_SPEED + ("cylinders",) + _MOUNT),
    "transformer": frozenset(("line_frequency",) + _MOUNT),
    "belt": frozenset(_SPEED + ("pulley_diameter", "belt_length") + _MOUNT),
    "flow": frozenset(("velocity", "wire_diameter")),
    "tone": frozenset(_FREQUENCY + _MOUNT),  # a typed tone may reach the structure
}
_ALWAYS = frozenset(("equipment", "kind", "zones", "harmonics"))
_LABEL = {
    "rpm": "rpm", "rpm_min": "rpm min", "rpm_max": "rpm max", "blades": "blades",
    "vanes": "vanes", "cylinders": "cylinders", "poles": "poles", "slip": "slip",
    "line_frequency": "line frequency", "frequency": "frequency",
    "frequency_min": "frequency min", "frequency_max": "frequency max",
    "velocity": "velocity", "wire_diameter": "wire diameter",
    "pulley_diameter": "pulley diameter", "belt_length": "belt length",
    "harmonics": "harmonics", "isolator_deflection": "isolator deflection",
    "isolator_damping": "isolator damping",
}
# field: (unit, low, high, what lies inside), for the positive quantities
_QUANTITY_LIMITS = {
    "rpm": ("rpm", None, LARGEST_RPM, "the speed of any building-services machine"),
    "rpm_min": ("rpm", None, LARGEST_RPM, "the speed of any building-services machine"),
    "rpm_max": ("rpm", None, LARGEST_RPM, "the speed of any building-services machine"),
    "frequency": ("Hz", None, LARGEST_FREQUENCY, "any audible tone"),
    "frequency_min": ("Hz", None, LARGEST_FREQUENCY, "any audible tone"),
    "frequency_max": ("Hz", None, LARGEST_FREQUENCY, "any audible tone"),
    "line_frequency": ("Hz", *LINE_FREQUENCY_LIMITS, "any electrical supply"),
    "velocity": ("m/s", None, LARGEST_VELOCITY, "any wind or duct velocity"),
    "wire_diameter": ("m", *EQUIPMENT_LENGTH_LIMITS, "any wire or bar"),
    "pulley_diameter": ("m", *EQUIPMENT_LENGTH_LIMITS, "any pulley"),
    "belt_length": ("m", *EQUIPMENT_LENGTH_LIMITS, "any belt"),
    "isolator_deflection": ("m", None, LARGEST_ISOLATOR_DEFLECTION,
                            "the static deflection of any isolator"),
}


def _range_pair(values, low: str, high: str, notes: list[Note]) -> bool:
    """Check a min/max pair; True when both are present and in order."""
    a, b = values.get(low), values.get(high)
    if a is None and b is None:
        return False
    if a is None or b is None:
        given, missing = (low, high) if b is None else (high, low)
        notes.append(Note("error", missing,
                          f"{_LABEL[given]} is given without {_LABEL[missing]}"))
        return False
    if a > b:
        notes.append(Note("error", low,
                          f"{_LABEL[low]} {fmt(a)} is above {_LABEL[high]} {fmt(b)}"))
        return False
    return True


def _equipment_values_within(values: dict[str, Any], notes: list[Note]) -> None:
    for field, (unit, low, high, what) in _QUANTITY_LIMITS.items():
        if values.get(field) is not None:
            within(values[field], field, _LABEL[field], unit, notes, low=low, high=high,
                    what=what)
    for field in ("blades", "vanes", "cylinders", "poles", "harmonics"):
        value = values.get(field)
        largest = LARGEST_HARMONICS if field == "harmonics" else LARGEST_COUNT
        if value is not None and value < 1:
            notes.append(Note("error", field, f"{_LABEL[field]} must be at least 1, not {value}"))
        elif value is not None and value > largest:
            notes.append(Note("error", field,
                              f"{_LABEL[field]} {value} is more than any machine has (the "
                              f"limit is {largest}, {LIMIT_NOTE})"))
    poles = values.get("poles")
    if poles is not None and 1 <= poles <= LARGEST_COUNT and poles % 2:
        notes.append(Note("error", "poles",
                          f"poles must be an even number (2, 4, 6 ...), not {poles}"))
    slip = values.get("slip")
    if slip is not None:
        if not 0 <= slip < 1:
            notes.append(Note("error", "slip",
                              f"slip must be a fraction from 0 to below 1 (or a percentage "
                              f"with %), not {fmt(slip)}"))
        elif slip > LARGEST_USUAL_SLIP:
            notes.append(Note("warning", "slip",
                              f"slip {fmt(slip)} is above {LARGEST_USUAL_SLIP:g} "
                              f"{RANGE_NOTE}"))
    line = values.get("line_frequency")
    if line is not None and LINE_FREQUENCY_LIMITS[0] <= line <= LINE_FREQUENCY_LIMITS[1] \
            and line not in USUAL_LINE_FREQUENCIES:
        notes.append(Note("warning", "line_frequency",
                          f"line frequency {fmt(line)} Hz is neither 50 nor 60 Hz "
                          "(common practice)"))
    damping = values.get("isolator_damping")
    if damping is not None and not (math.isfinite(damping) and 0 < damping < 1):
        notes.append(Note("error", "isolator_damping",
                          f"isolator damping is a damping ratio from above 0 to below 1 (or a "
                          f"percentage with %), not {fmt(damping)}"))
    elif damping is not None and values.get("isolator_deflection") is None:
        notes.append(Note("warning", "isolator_damping",
                          "isolator damping is given without isolator deflection: the item is "
                          "taken as rigidly mounted and the damping is not used"))


def _kind_notes(kind: str, values: dict[str, Any], notes: list[Note]) -> None:
    """Every field ``auditor.excitation`` needs for this kind's tones."""
    has_range = _range_pair(values, "rpm_min", "rpm_max", notes)
    has_speed = values.get("rpm") is not None or has_range
    has_band = _range_pair(values, "frequency_min", "frequency_max", notes)
    has_frequency = values.get("frequency") is not None or has_band
    range_errors = any(n.field in _SPEED + _FREQUENCY and n.severity == "error" for n in notes)
    for need in _KIND_NEEDS[kind]:
        if need == "speed":
            if not has_speed and not range_errors:
                notes.append(Note("error", "rpm",
                                  f"a {kind} needs its rpm (or rpm min and rpm max)"))
        elif need == "speed|poles":
            if not has_speed and values.get("poles") is None and not range_errors:
                notes.append(Note("error", "rpm",
                                  f"a {kind} needs its rpm (or rpm min and rpm max) or its poles"))
        elif need == "frequency":
            if not has_frequency and not range_errors:
                notes.append(Note("error", "frequency",
                                  f"a {kind} needs its frequency (or frequency min and "
                                  "frequency max)"))
        elif values.get(need) is None:
            notes.append(Note("error", need, f"a {kind} needs its {_LABEL[need]}"))
    if (kind == "motor" and has_range and values["rpm_min"] != values["rpm_max"]
            and values.get("rpm") is None and values.get("poles") is None):
        notes.append(Note("error", "poles",
                          "a variable-speed motor needs its poles (or its rpm on the line "
                          "frequency) to place its electromagnetic tone"))
    uses = _KIND_USES[kind] | _ALWAYS
    for field in values:
        if field not in uses and field in _LABEL:
            notes.append(Note("warning", field,
                              f"{_LABEL[field]} is not used for a {kind}; ignored"))


def equipment_from_values(
    values: dict[str, Any], source: SourceRef, entered: tuple[tuple[str, str], ...] = ()
) -> tuple[Equipment | None, list[Note]]:
    """Check one equipment row and build its record.

    Parameters
    ----------
    values : dict
        Field name (``Equipment`` attribute) → value in SI (speeds in rpm).
    source : SourceRef
    entered : tuple of (header, text)

    Returns
    -------
    (Equipment or None, list of Note)
    """
    notes: list[Note] = []
    tag = values.get("equipment", "")
    if not tag:
        notes.append(Note("error", "equipment", "the row has no equipment tag"))
    kind: EquipmentKind | None = values.get("kind")
    if kind is None:
        notes.append(Note("error", "kind",
                          "kind is required (fan, pump, motor, compressor, transformer, belt, "
                          "flow or tone)"))
    _equipment_values_within(values, notes)
    if kind is not None:
        _kind_notes(kind, values, notes)

    # kind is None only when an error note says so
    if kind is None or any(n.severity == "error" for n in notes):
        return None, notes
    uses = _KIND_USES[kind] | _ALWAYS
    item = Equipment(
        equipment=tag,
        source=source,
        kind=kind,
        zones=values.get("zones"),
        entered=entered,
        **{f: values.get(f) if f in uses else None for f in _LABEL},
    )
    return item, notes


def line_frequency_note(item: Equipment, project_line_frequency: float | None) -> Note | None:
    """An error when a motor or transformer has no line frequency, in its row or the project's.

    Checked once the whole schedule is read, since the Project sheet may come after the
    equipment, or from another file.
    """
    if (item.kind in _NEEDS_LINE_FREQUENCY and item.line_frequency is None
            and project_line_frequency is None):
        return Note("error", "line_frequency",
                    f"a {item.kind} needs its line frequency, in its row or on the Project "
                    "sheet (50 or 60 Hz): its electromagnetic tones cannot be placed without it")
    return None


# Project facts that are quantities: (label, unit, low, high, what lies inside).
_PROJECT_LIMITS = {
    "line_frequency": ("line frequency", "Hz", *LINE_FREQUENCY_LIMITS, "any electrical supply"),
    "air_density": ("air density", "kg/m³", *AIR_DENSITY_LIMITS, "the air of any building"),
    "speed_of_sound": ("speed of sound", "m/s", *SPEED_OF_SOUND_LIMITS,
                       "in the air of any building"),
}


def project_value_note(field: str, value: float) -> Note | None:
    """An error when a Project-sheet quantity lies outside its physical range, else None."""
    label, unit, low, high, what = _PROJECT_LIMITS[field]
    notes: list[Note] = []
    within(value, field, label, unit, notes, low=low, high=high, what=what)
    return notes[0] if notes else None


def rejected_rows(problems: Iterable[RowProblem]) -> tuple[tuple[str, str, int], ...]:
    """The distinct rows rejected by at least one error, as (file, sheet, row).

    A row with two errors is one rejected row; a problem with no row (a whole file or sheet
    that could not be read) is not a row and is not counted. In the order first met.
    """
    seen = dict.fromkeys((p.file, p.sheet, p.row) for p in problems
                         if p.severity == "error" and p.row is not None)
    return tuple(seen)
