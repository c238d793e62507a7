"""Write templates/demo-project.xlsx: an invented project for trying the auditor.

The building, the consultancy and the client are made up. The schedule is written the way
real ones are: a title above the header, units in the headers and in some cells (mm, in, ft,
g/m², oz/yd², kg/m², N/m, kN/m, lbf/in), every panel shape, material and backing, the
equipment's vibration isolators (one small fan left rigid), and two deliberately bad rows (a
negative width, a misspelt material) so the audit shows rejected rows.

Run ``python templates/build_demo.py``; it rewrites the workbook with the same content every
time.
"""

from __future__ import annotations

import datetime as _dt
import sys
from pathlib import Path

from openpyxl import Workbook
from openpyxl.styles import Font

OUT = Path(__file__).resolve().with_name("demo-project.xlsx")
_FIXED_TIME = _dt.datetime(2024, 1, 1)

PANEL_HEADER = (
    "Panel", "Zone", "Shape", "Width (mm)", "Length (mm)", "Diameter (mm)", "Outline (mm)",
    "Cut-outs (mm)", "Material", "Areal density (g/m²)", "Tension (N/m)", "Tension x",
    "Tension y", "Bending stiffness (N·m)", "Loss factor", "Airflow resistance (Pa·s/m)",
    "Room side", "Plenum side", "Cavity depth (mm)", "Max tension (kN/m)", "Tap test", "Notes",
)

# fmt: off
# Panel, Zone, Shape, Width, Length, Diameter, Outline, Cut-outs, Material, Areal density,
# Tension, Tension x, Tension y, Bending stiffness, Loss factor, Airflow resistance,
# Room side, Plenum side, Cavity depth, Max tension, Tap test, Notes
PANELS = (
    ("F-01", "Foyer", "rectangle", 4800, 3200, None, None, None, "film", 250, 1200, None, None, None, None, None, "air", "air", None, 3, None, "Stretch film, open plenum"),
    ("F-02", "Foyer", "rectangle", 4800, 3200, None, None, None, "film", 250, 1200, None, None, None, None, None, "air", "sealed", 400, 3, None, "Over the sealed entrance canopy"),
    ("F-03", "Foyer", "rectangle", "16 ft", "10 ft", None, None, None, "film", "0.22 kg/m²", "6 lbf/in", None, None, None, 0.04, None, "air", "air", None, None, None, "Imported system, imperial data sheet"),
    ("F-04", "Foyer", "circle", None, None, 2400, None, None, "film", 230, 900, None, None, None, None, None, "air", "sealed", 300, None, None, "Circular raft"),
    ("F-05", "Foyer", "circle", None, None, "96 in", None, None, "film", 250, 1500, None, None, None, None, None, "air", "air", None, 2.5, None, None),
    ("F-06", "Atrium", "polygon", None, None, None, "0,0; 6000,0; 5000,3000; 1000,3000", None, "film", 280, 1800, None, None, None, None, None, "air", "air", None, 3, None, "Trapezoid over the stair"),
    ("F-07", "Atrium", "polygon", None, None, None, "0,0; 4000,0; 4000,1500; 1500,1500; 1500,3500; 0,3500", None, "film", 250, 1400, None, None, None, None, None, "air", "air", None, None, None, "L-shaped bay"),
    ("F-08", "Atrium", "rectangle", 5000, 3000, None, None, "circle 2500,1500,600", "film", 250, 1200, None, None, None, None, None, "air", "air", None, None, None, "Pendant luminaire through the film"),
    ("F-09", "Atrium", "polygon", None, None, None, "0,0; 4500,0; 4500,3000; 0,3000", "1800,1200; 2700,1200; 2700,1800; 1800,1800", "film", 260, 1300, None, None, None, None, None, "air", "air", None, None, None, "Square diffuser"),
    ("F-10", "Café", "rectangle", 3000, 3000, None, None, None, "film", "180 gsm", 600, None, None, None, None, None, "air", "none", None, None, None, "Film fixed to a solid soffit"),
    ("F-11", "Café", "rectangle", 2400, 1200, None, None, None, "film", "0.3 kg/m2", "2 kN/m", None, None, None, None, None, "air", "air", None, None, None, "Lightbox face"),
    ("F-12", "Café", "rectangle", 2400, 1200, None, None, None, "film", 200, 800, None, None, None, None, None, "none", "air", None, None, None, "Inner skin of the double-skin lightbox"),
    ("F-13", "Foyer", "rectangle", 3600, 2400, None, None, None, "film", "0.26 kg/m²", 1000, None, None, None, 0.05, None, "air", "air", None, 3, "taps/F-13.wav", "Tap-tested on the mock-up"),
    ("F-14", "Reading Room", "circle", None, None, 1800, None, "circle 0,0,200", "film", 220, 700, None, None, None, None, None, "air", "air", None, None, None, "Rooflight surround with sprinkler"),
    ("F-15", "Reading Room", "rectangle", 6000, 2000, None, None, None, "film", 240, 1600, None, None, None, None, None, "air", "sealed", 250, 3, None, None),
    ("A-01", "Reading Room", "rectangle", 1200, 2400, None, None, None, "fabric", 320, None, 800, 500, None, 0.06, 900, "air", "sealed", 50, None, None, "Wrapped absorber panel"),
    ("A-02", "Reading Room", "rectangle", "48 in", "96 in", None, None, None, "fabric", "10 oz/yd²", None, "4 lbf/in", "3 lbf/in", None, None, "1200 rayl", "air", "sealed", "2 in", None, None, "Imperial supplier data"),
    ("A-03", "Reading Room", "rectangle", 1200, 1200, None, None, None, "fabric", 280, 600, None, None, None, None, 700, "air", "sealed", 40, None, None, None),
    ("A-04", "Reading Room", "rectangle", 3000, 1500, None, None, None, "fabric", 350, None, "1.2 kN/m", "0.9 kN/m", None, 0.08, 1500, "air", "air", None, 2, None, "Stretched fabric wall"),
    ("A-05", "Foyer", "rectangle", 2400, 1200, None, None, None, "fabric", "0.45 kg/m²", 750, None, None, None, None, 2000, "air", "sealed", 75, None, None, None),
    ("A-06", "Café", "rectangle", 1800, 900, None, None, None, "fabric", 240, None, 650, 420, None, None, 500, "air", "air", None, None, None, "Knitted polyester"),
    ("A-07", "Atrium", "circle", None, None, 1500, None, None, "fabric", 280, 600, None, None, None, None, 800, "air", "air", None, None, None, "Hanging baffle cloud"),
    ("A-08", "Reading Room", "polygon", None, None, None, "0,0; 2400,0; 2400,1200; 1200,1800; 0,1200", None, "fabric", 300, None, 900, 600, None, None, 1000, "air", "sealed", 60, 1.5, None, "Gable-end panel"),
    ("M-01", "Plant Screen", "rectangle", 3000, 2000, None, None, None, "mesh", "2.4 kg/m²", "8 kN/m", None, None, None, 0.01, 20, "air", "air", None, 15, None, "Woven stainless mesh"),
    ("M-02", "Plant Screen", "rectangle", 6000, 2500, None, None, None, "mesh", "3.6 kg/m²", "12 kN/m", None, None, None, None, None, "air", "air", None, 20, None, None),
    ("M-03", "Plant Screen", "rectangle", "10 ft", "8 ft", None, None, None, "mesh", "1.5 kg/m²", "40 lbf/in", None, None, None, None, None, "air", "air", None, None, None, None),
    ("M-04", "Atrium", "rectangle", 1500, 1100, None, None, None, "mesh", "4.8 kg/m²", "15 kN/m", None, None, None, None, 35, "air", "air", None, 20, None, "Balustrade infill"),
    ("P-01", "Café", "rectangle", 1200, 600, None, None, None, "plate", "4.1 kg/m²", 0, None, None, 15, 0.01, None, "air", "air", None, None, None, "Perforated aluminium tile, 1.5 mm"),
    ("P-02", "Plant Screen", "rectangle", 1000, 1000, None, None, None, "plate", "7.85 kg/m²", 0, None, None, 18, None, None, "air", "sealed", 200, None, None, "Steel access panel, 1 mm"),
    ("F-16", "Atrium", "rectangle", 2400, 2400, None, None, None, "film", 250, 1100, None, None, None, None, None, "air", "air", None, None, None, None),
    # two deliberately bad rows: the audit lists them as rejected
    ("X-01", "Foyer", "rectangle", -1200, 2400, None, None, None, "film", 250, 1200, None, None, None, None, None, "air", "air", None, None, None, "Negative width (typing slip)"),
    ("X-02", "Café", "rectangle", 1200, 1200, None, None, None, "fabirc", 300, 700, None, None, None, None, None, "air", "air", None, None, None, "Misspelt material"),
)

EQUIPMENT_HEADER = (
    "Tag", "Kind", "Zone", "Speed (rpm)", "rpm min", "rpm max", "Blades", "Vanes", "Cylinders",
    "Poles", "Slip", "Line frequency (Hz)", "Frequency (Hz)", "Frequency min (Hz)",
    "Frequency max (Hz)", "Velocity (m/s)", "Wire diameter (mm)", "Pulley diameter (mm)",
    "Belt length (mm)", "Isolator deflection (mm)", "Isolator damping", "Notes",
)
# The mounts a designer would specify (common practice of isolator selection): air-handling
# fans and the condensing unit on 25 mm open springs, pumps on inertia bases on 25-50 mm
# springs, the cooling-tower motor with the tower on 50 mm damped springs, the transformer on
# elastomer pads; the small belt-driven smoke-extract fan is rigidly fixed (blank deflection).
EQUIPMENT = (
    ("AHU-1-SF", "fan", "Foyer, Atrium", 1450, None, None, 12, None, None, None, None, None, None, None, None, None, None, None, None, 25, None, "Supply fan on 25 mm springs"),
    ("AHU-1-EF", "fan", "Reading Room", None, 900, 1400, 10, None, None, None, None, None, None, None, None, None, None, None, None, 25, None, "Extract fan on a variable-speed drive, 25 mm springs"),
    ("AHU-2-SF", "fan", "Reading Room", "1740 rpm", None, None, 7, None, None, None, None, None, None, None, None, None, None, None, None, "1 in", None, "Plug fan on 25 mm springs"),
    ("CHW-P1", "pump", "Plant Screen", 2900, None, None, None, 6, None, None, None, None, None, None, None, None, None, None, None, 25, None, "Chilled-water pump on an inertia base, 25 mm springs"),
    ("LTHW-P1", "pump", "Café", 1450, None, None, None, 7, None, None, None, None, None, None, None, None, None, None, None, 40, None, "Heating pump below the café on an inertia base, 40 mm springs"),
    ("M-CT1", "motor", "Plant Screen", None, None, None, None, None, None, 4, "3 %", None, None, None, None, None, None, None, None, 50, "5 %", "Cooling-tower fan motor; the tower on 50 mm damped springs"),
    ("CMP-1", "compressor", "Plant Screen", 1480, None, None, None, None, 4, None, None, None, None, None, None, None, None, None, None, 25, None, "Reciprocating condensing unit on 25 mm springs"),
    ("TX-1", "transformer", "Café, Foyer", None, None, None, None, None, None, None, None, None, None, None, None, None, None, None, None, 6, None, "Substation behind the café, on elastomer pads"),
    ("BLT-1", "belt", "Atrium", 960, None, None, None, None, None, None, None, None, None, None, None, None, None, 200, 1800, None, None, "Small belt-driven smoke-extract fan, rigidly fixed"),
    ("WIND-1", "flow", "Plant Screen", None, None, None, None, None, None, None, None, None, None, None, None, 15, 2, None, None, None, None, "Design wind over the mesh screen"),
    ("LVR-1", "flow", "Plant Screen", None, None, None, None, None, None, None, None, None, None, None, None, "1200 ft/min", "0.08 in", None, None, None, None, "Air through the louvre mesh"),
    ("ESC-1", "tone", "all", None, None, None, None, None, None, None, None, None, 120, None, None, None, None, None, None, None, None, "Escalator drive tone"),
    ("LIFT-1", "tone", "Atrium", None, None, None, None, None, None, None, None, None, None, 40, 63, None, None, None, None, None, None, "Lift drive band"),
)
# fmt: on

PROJECT = (
    ("Project name", "Linden Vale Civic Library: foyer, atrium and reading-room ceilings"),
    ("Reference", "NAP-2041-AC-07"),
    ("Client", "Linden Vale Borough Council"),
    ("Prepared by", "Northmarsh Acoustic Partners"),
    ("Prepared for", "Linden Vale Borough Council, capital projects team"),
    ("Line frequency (Hz)", 50),
    ("Air density (kg/m³)", 1.204),
    ("Speed of sound (m/s)", 343),
    ("Revision", "C"),
)

NOTES = (
    "Demonstration schedule for an invented building: Linden Vale Civic Library.",
    "The library, the consultancy and the client are made up; the values are plausible but "
    "belong to no real project.",
    "Rows X-01 and X-02 are wrong on purpose, to show how rejected rows are reported.",
)


def build(path: Path = OUT) -> Path:
    """Write the demo workbook to ``path`` and return it."""
    wb = Workbook()
    wb.properties.creator = "auditor demo"
    wb.properties.created = _FIXED_TIME
    wb.properties.modified = _FIXED_TIME
    bold = Font(bold=True)

    ws = wb.active
    ws.title = "Panels"
    ws.append(["Linden Vale Civic Library: tensioned panel schedule"])
    ws.merge_cells(start_row=1, start_column=1, end_row=1, end_column=8)
    ws["A1"].font = Font(bold=True, size=14)
    ws.append(["Issue C, for audit"])
    ws.append([])
    ws.append(list(PANEL_HEADER))
    for cell in ws[4]:
        cell.font = bold
    for row in PANELS:
        ws.append(list(row))
    ws.freeze_panes = "B5"

    eq = wb.create_sheet("Equipment")
    eq.append(["Building-services equipment"])
    eq["A1"].font = Font(bold=True, size=14)
    eq.append([])
    eq.append(list(EQUIPMENT_HEADER))
    for cell in eq[3]:
        cell.font = bold
    for row in EQUIPMENT:
        eq.append(list(row))

    project = wb.create_sheet("Project")
    project.append(["Key", "Value"])
    for cell in project[1]:
        cell.font = bold
    for row in PROJECT:
        project.append(list(row))

    notes = wb.create_sheet("Notes")
    for line in NOTES:
        notes.append([line])

    temporary = path.with_name(f".{path.name}.partial")
    wb.save(temporary)
    temporary.replace(path)
    return path


#: Invented site measurements: the tension each tap-tested panel was "found" at, as a fraction
#: of its scheduled tension, and the loss factor of the ring-down. Demo data only.
TAP_TESTS = {"F-13": (0.86, 0.035)}


def build_tap_tests(workbook: Path = OUT) -> list[Path]:
    """Synthesise the demo's tap-test recordings (``taps/<panel>.wav`` beside the workbook).

    Each recording is the full model's modes (air loading included) of the panel at an
    invented installed tension, as decaying tones with noise and 100 Hz mains hum.
    """
    import dataclasses

    from auditor.calibrate import synthesise_tap_test, write_wav
    from auditor.physics.modes import modes_for
    from auditor.schedule import read_schedule

    schedule = read_schedule([workbook])
    written = []
    for panel in schedule.panels:
        if panel.panel not in TAP_TESTS or not panel.tap_test:
            continue
        fraction, eta = TAP_TESTS[panel.panel]
        installed = dataclasses.replace(panel, tension_x=panel.tension_x * fraction,
                                        tension_y=panel.tension_y * fraction)
        modes = modes_for(installed, 400.0, max_modes=12).modes
        frequencies = [m.frequency_hz for m in modes if m.participation > 1e-3]
        amplitudes = [m.participation ** 0.5 for m in modes if m.participation > 1e-3]
        samples = synthesise_tap_test(frequencies, [eta] * len(frequencies), amplitudes,
                                      sample_rate=8000, duration=3.0, noise=0.002,
                                      hum_hz=100.0, seed=13)
        target = workbook.parent / panel.tap_test
        target.parent.mkdir(parents=True, exist_ok=True)
        written.append(write_wav(target, samples, 8000, bits=16))
    return written


if __name__ == "__main__":
    written = build(Path(sys.argv[1]) if len(sys.argv) > 1 else OUT)
    print(f"wrote {written}")
    for recording in build_tap_tests(written):
        print(f"wrote {recording}")
