"""The ranges the schedule's values are checked against.

Two kinds of range, both common practice of the trade (values seen in manufacturers' data for
stretched PVC/polyester film ceilings, coated and uncoated fabrics, woven and welded
architectural wire mesh, thin metal sheet, and building-services plant), from memory rather
than from one published table:

* **physical limits** — no panel or item of plant in a building lies outside them, so a value
  beyond one is a typing or unit mistake and the row is rejected, the limit stated;
* **usual ranges** — most projects lie inside them; a value outside is kept with a warning
  asking for the unit to be checked.
"""

from __future__ import annotations

__all__ = [
    "LARGEST_SPAN", "SMALLEST_SPAN", "AREAL_DENSITY_LIMITS", "LARGEST_TENSION",
    "LARGEST_BENDING_STIFFNESS", "LARGEST_LOSS_FACTOR", "LARGEST_RPM", "LARGEST_COUNT",
    "LARGEST_HARMONICS", "LARGEST_FREQUENCY", "LINE_FREQUENCY_LIMITS", "LARGEST_VELOCITY",
    "EQUIPMENT_LENGTH_LIMITS", "LARGEST_ISOLATOR_DEFLECTION", "AIR_DENSITY_LIMITS",
    "SPEED_OF_SOUND_LIMITS", "USUAL_AREAL_DENSITY", "USUAL_TENSION", "USUAL_LOSS_FACTOR_MAX",
    "LARGEST_USUAL_SPAN", "SMALLEST_USUAL_SPAN", "DEEPEST_USUAL_CAVITY",
    "USUAL_LINE_FREQUENCIES", "LARGEST_USUAL_SLIP",
]

# --- physical limits: a value beyond one rejects the row --------------------------------
#: [m] No single tensioned panel spans more: the largest stretched ceilings and fabric
#: roofs are seamed or supported well within this. Also the deepest cavity accepted and
#: the farthest a vertex or cut-out may lie from the panel's origin.
LARGEST_SPAN = 100.0
#: [m] 1 mm: smaller than any panel, cut-out or cavity.
SMALLEST_SPAN = 0.001
#: [kg/m²] From 10 g/m² (lighter than the thinnest film) to 500 kg/m² (a steel plate
#: 64 mm thick).
AREAL_DENSITY_LIMITS = (0.01, 500.0)
#: [N/m] 1 MN/m: above the breaking strength of any film, fabric or mesh.
LARGEST_TENSION = 1.0e6
#: [N·m] Flexural rigidity of a steel plate about 80 mm thick.
LARGEST_BENDING_STIFFNESS = 1.0e7
#: [-] A structural loss factor of 1 already means heavy viscoelastic damping.
LARGEST_LOSS_FACTOR = 1.0
#: [rpm] Faster than any building-services machine (high-speed turbo blowers and
#: compressors run below this).
LARGEST_RPM = 100_000.0
#: More blades, vanes, cylinders or poles than any machine has.
LARGEST_COUNT = 200
#: Harmonics of one source: far beyond any rule set.
LARGEST_HARMONICS = 100
#: [Hz] The upper limit of human hearing; a tone above it concerns no panel audit.
LARGEST_FREQUENCY = 20_000.0
#: [Hz] Supply frequencies: public supplies are 50 or 60 Hz, aircraft and some marine
#: supplies 400 Hz.
LINE_FREQUENCY_LIMITS = (1.0, 1000.0)
#: [m/s] Faster than any wind or duct air velocity.
LARGEST_VELOCITY = 100.0
#: [m] Wire and bar diameters, pulley diameters and belt lengths: 0.01 mm to 20 m.
EQUIPMENT_LENGTH_LIMITS = (1.0e-5, 20.0)
#: [m] Static deflection of vibration isolators: the softest open springs deflect about
#: 100-150 mm; 200 mm is beyond any selection.
LARGEST_ISOLATOR_DEFLECTION = 0.2
#: [kg/m³] Air from high-altitude sites to −40 °C lies well inside.
AIR_DENSITY_LIMITS = (0.5, 2.0)
#: [m/s] Air from −100 °C to +120 °C lies inside.
SPEED_OF_SOUND_LIMITS = (250.0, 400.0)

# --- usual ranges: a value outside is kept with a warning ----------------------------------
#: [kg/m²] by material.
USUAL_AREAL_DENSITY: dict[str, tuple[float, float]] = {
    "film": (0.1, 0.6),
    "fabric": (0.1, 1.0),
    "mesh": (0.3, 30.0),
    "plate": (1.0, 100.0),
}
#: [N/m] by material.
USUAL_TENSION: dict[str, tuple[float, float]] = {
    "film": (100.0, 3000.0),
    "fabric": (50.0, 5000.0),
    "mesh": (200.0, 50000.0),
}
#: [-] Structural loss factors of these systems are well below this.
USUAL_LOSS_FACTOR_MAX = 0.5
#: [m] A larger panel dimension usually means mm typed in a column in m.
LARGEST_USUAL_SPAN = 30.0
#: [m] A smaller one usually means m typed in a column in mm.
SMALLEST_USUAL_SPAN = 0.02
#: [m]
DEEPEST_USUAL_CAVITY = 5.0
#: [Hz] Public supply frequencies.
USUAL_LINE_FREQUENCIES = (50.0, 60.0)
#: [-] Induction motors run at 1-8 % slip at load.
LARGEST_USUAL_SLIP = 0.1
