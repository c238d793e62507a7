"""The records a schedule is read into: small frozen dataclasses, SI inside.

Data flows one way (DESIGN.md): the schedule reader makes ``Panel``, ``Equipment``,
``Project`` and ``RowProblem`` records, gathered in a ``Schedule``; what the audit works out
from them (modes, excitations, findings, remedies, each panel's result) is in
:mod:`auditor.results`.

Every quantity is in SI: metres, kilograms per square metre, newtons per metre, pascal-seconds
per metre, hertz. Units exist only at the edges (``auditor.units``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

Severity = Literal["error", "warning"]
ShapeKind = Literal["rectangle", "circle", "polygon"]
Material = Literal["film", "fabric", "mesh", "plate"]
RoomSide = Literal["air", "none"]
PlenumSide = Literal["air", "sealed", "none"]
EquipmentKind = Literal[
    "fan", "pump", "motor", "compressor", "transformer", "belt", "flow", "tone"
]

SHAPES: tuple[str, ...] = ("rectangle", "circle", "polygon")
MATERIALS: tuple[str, ...] = ("film", "fabric", "mesh", "plate")
ROOM_SIDES: tuple[str, ...] = ("air", "none")
PLENUM_SIDES: tuple[str, ...] = ("air", "sealed", "none")
EQUIPMENT_KINDS: tuple[str, ...] = (
    "fan", "pump", "motor", "compressor", "transformer", "belt", "flow", "tone",
)


@dataclass(frozen=True)
class SourceRef:
    """Where a record came from, as the spreadsheet numbers it.

    ``row`` is the 1-based row number a spreadsheet program shows (for a CSV file, the
    1-based line number of the record).
    """

    file: str
    sheet: str
    row: int


#: The source of a record that stands for others and was read from no row (a panel type's
#: representative: ``auditor.physics.modes.physics_key``).
NO_SOURCE = SourceRef("", "", 0)


@dataclass(frozen=True)
class RowProblem:
    """Something the reader (or a later stage) could not use, or doubts.

    ``severity`` "error" rejects the row; "warning" keeps it. ``column`` is the header as the
    user typed it (empty when the problem concerns a whole row or sheet); ``text`` is the
    cell's text as typed.
    """

    file: str
    sheet: str
    row: int | None
    column: str
    message: str
    severity: Severity = "error"
    text: str = ""
    record: str = ""  # panel id or equipment tag, when known

    def as_dict(self) -> dict[str, Any]:
        return {
            "file": self.file,
            "sheet": self.sheet,
            "row": self.row,
            "column": self.column,
            "message": self.message,
            "severity": self.severity,
            "text": self.text,
            "record": self.record,
        }


@dataclass(frozen=True)
class CircleCutout:
    """A circular cut-out (luminaire, sprinkler) with its edge fixed.  [m]"""

    x: float
    y: float
    diameter: float


@dataclass(frozen=True)
class PolygonCutout:
    """A polygonal cut-out (diffuser) with its edge fixed; vertices in metres."""

    vertices: tuple[tuple[float, float], ...]


Cutout = CircleCutout | PolygonCutout


@dataclass(frozen=True)
class Panel:
    """One tensioned panel, SI throughout.

    Parameters
    ----------
    panel : str
        Unique id from the schedule.
    shape : {"rectangle", "circle", "polygon"}
    width, length : float or None  [m]
        Rectangle sides, ``width`` along x, ``length`` along y.
    diameter : float or None  [m]
    outline : tuple of (x, y) or None  [m]
        Polygon vertices in order.
    cutouts : tuple of Cutout  [m]
    material : {"film", "fabric", "mesh", "plate"}
    areal_density : float  [kg/m²]
    tension_x, tension_y : float  [N/m]
        Membrane tension per unit edge length; ``tension_x`` acts along the width (x).
    bending_stiffness : float  [N·m]
        Flexural rigidity D; 0 for a pure membrane.
    loss_factor : float or None  [-]
        Structural loss factor; None means "use the material default".
    airflow_resistance : float or None  [Pa·s/m]
        Specific airflow resistance of a porous fabric or mesh; None means impervious for
        film and fabric, freely open for mesh.
    room_side : {"air", "none"}
    plenum_side : {"air", "sealed", "none"}
    cavity_depth : float or None  [m]
    max_tension : float or None  [N/m]
    tap_test : str or None
        Path of a tap-test recording, relative to the schedule file.
    entered : tuple of (column, text)
        The cells as the user typed them (for reports in the schedule's own units).
    """

    panel: str
    source: SourceRef
    shape: ShapeKind = "rectangle"
    zone: str = ""
    width: float | None = None
    length: float | None = None
    diameter: float | None = None
    outline: tuple[tuple[float, float], ...] | None = None
    cutouts: tuple[Cutout, ...] = ()
    material: Material = "film"
    areal_density: float = 0.0
    tension_x: float = 0.0
    tension_y: float = 0.0
    bending_stiffness: float = 0.0
    loss_factor: float | None = None
    airflow_resistance: float | None = None
    room_side: RoomSide = "air"
    plenum_side: PlenumSide = "air"
    cavity_depth: float | None = None
    max_tension: float | None = None
    tap_test: str | None = None
    entered: tuple[tuple[str, str], ...] = ()

    @property
    def isotropic(self) -> bool:
        return self.tension_x == self.tension_y


@dataclass(frozen=True)
class Equipment:
    """One item of building-services equipment, SI throughout.

    Speeds are in revolutions per minute as the trade states them (``rpm``), frequencies in
    hertz, lengths in metres, velocity in m/s. ``zones`` is None when the item reaches every
    zone. ``harmonics`` overrides the rule set's count for this item when given.
    ``isolator_deflection`` [m] is the static deflection of the item's vibration isolators
    (None: rigidly mounted, an assumption the report states); ``isolator_damping`` is their
    damping ratio ζ [-] (None: the default for the mount, common practice).
    """

    equipment: str
    source: SourceRef
    kind: EquipmentKind
    zones: tuple[str, ...] | None = None
    rpm: float | None = None
    rpm_min: float | None = None
    rpm_max: float | None = None
    blades: int | None = None
    vanes: int | None = None
    cylinders: int | None = None
    poles: int | None = None
    slip: float | None = None
    line_frequency: float | None = None
    frequency: float | None = None
    frequency_min: float | None = None
    frequency_max: float | None = None
    velocity: float | None = None
    wire_diameter: float | None = None
    pulley_diameter: float | None = None
    belt_length: float | None = None
    harmonics: int | None = None
    isolator_deflection: float | None = None
    isolator_damping: float | None = None
    entered: tuple[tuple[str, str], ...] = ()

    def reaches(self, zone: str) -> bool:
        """True when this item reaches a panel in ``zone`` (case-insensitive)."""
        if self.zones is None:
            return True
        return zone.strip().casefold() in {z.casefold() for z in self.zones}


@dataclass(frozen=True)
class Project:
    """Project sheet: key/value facts, SI.  ``air_density`` [kg/m³], ``speed_of_sound`` [m/s]."""

    name: str = ""
    reference: str = ""
    client: str = ""
    prepared_by: str = ""
    prepared_for: str = ""
    line_frequency: float | None = None
    air_density: float = 1.204
    speed_of_sound: float = 343.0
    extra: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class InputFile:
    """An input file as read: its path and SHA-256 (for the report's cover)."""

    path: str
    sha256: str


@dataclass(frozen=True)
class Schedule:
    """Everything read from one or more schedule files.

    Every data row of every recognised table ends up as exactly one of: a ``Panel``, an
    ``Equipment``, a project entry, or a ``RowProblem`` of severity "error".
    """

    panels: tuple[Panel, ...] = ()
    equipment: tuple[Equipment, ...] = ()
    project: Project = field(default_factory=Project)
    problems: tuple[RowProblem, ...] = ()
    files: tuple[InputFile, ...] = ()

    @property
    def rejected(self) -> tuple[RowProblem, ...]:
        return tuple(p for p in self.problems if p.severity == "error")
