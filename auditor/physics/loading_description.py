"""The loading model applied to a panel, in words (for the report's methods and each panel)."""

from __future__ import annotations

__all__ = ["describe_loading", "describe_model"]


def describe_loading(room_side: str, plenum_side: str, cavity_depth: float | None,
                     airflow_resistance: float | None, material: str) -> str:
    """The loading model :func:`auditor.physics.fluid.loaded_modes` applies to a panel, in words."""
    open_mesh = material == "mesh" and airflow_resistance is None
    depth = cavity_depth if plenum_side == "sealed" else None
    return describe_model(room_side, plenum_side, depth, airflow_resistance, material, open_mesh)


def describe_model(room_side: str, plenum_side: str, depth: float | None,
                   resistance: float | None, material: str, open_mesh: bool) -> str:
    """The loading model in words, from the inputs as :func:`loaded_modes` resolved them:
    ``depth`` [m] of a sealed plenum (else None), ``resistance`` [Pa·s/m] the airflow
    resistance of a porous sheet (else None), ``open_mesh`` a mesh that passes air freely."""
    if open_mesh:
        return ("Open mesh with no airflow resistance given: air passes freely, so no air mass "
                "loading; structural loss factor only (in-vacuo frequencies).")
    parts = []
    sides = []
    if room_side == "air":
        sides.append("room side")
    if plenum_side == "air":
        sides.append("open plenum side")
    if sides:
        parts.append(
            "Air on the " + " and ".join(sides) + " as a baffled half-space (Rayleigh integral, "
            "full added-mass matrix in the in-vacuo modal basis, modes coupled through the air; "
            "compressible kernel: frequency correction and radiation resistance, per-mode "
            "fixed-point iteration on frequency; infinite rigid baffle assumed)")
    if plenum_side == "sealed":
        parts.append(
            f"sealed plenum {depth:g} m deep with rigid walls and the panel's outline as "
            "cross-section (Dowell's acoustoelastic modal coupling: cavity stiffness "
            "ρ0c²(∫φ)²/V at low frequency, cross modes mass-like; no absorption in the cavity)")
    if not parts:
        return "In vacuo: no air on either side; structural loss factor only."
    text = "; ".join(parts)
    if resistance is not None:
        text += (f"; porous sheet with airflow resistance {resistance:g} Pa·s/m in series with "
                 "the air's impedance (both sides together), complex modes")
    text += f". Loss factor = structural ({material} default unless given) + radiation"
    text += " + porous flow." if resistance is not None else "."
    return text
