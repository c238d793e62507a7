"""Textbook mode models the tests judge the product against (not the product's physics)."""

from __future__ import annotations

import math

import numpy as np

from auditor.model import Panel
from auditor.results import Mode


def ideal_membrane_modes(panel: Panel, count: int = 8, loss_factor: float | None = None):
    """Ideal rectangular membrane, fixed edges (f ∝ √T exactly):
    f_mn = ½ √((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²) (P. M. Morse, Vibration and Sound, 2nd ed.,
    ch. V, rectangular membrane; chapter from memory); participation 64/(π⁴m²n²) for odd m, n,
    else 0 (from ∫₀ᴸ sin(mπx/L) dx = 2L/(mπ) for odd m, 0 for even m)."""
    out = []
    for m in range(1, count + 1):
        for n in range(1, count + 1):
            f = 0.5 * math.sqrt(panel.tension_x / panel.areal_density * (m / panel.width) ** 2
                                + panel.tension_y / panel.areal_density * (n / panel.length) ** 2)
            p = 64 / (math.pi ** 4 * m * m * n * n) if m % 2 and n % 2 else 0.0
            out.append(Mode(label=f"({m},{n})", frequency_hz=f, participation=p,
                            loss_factor=loss_factor))
    return sorted(out, key=lambda mode: mode.frequency_hz)


def ideal_membrane_modes_to(panel: Panel, fmax: float, loss_factor: float | None = None):
    """Every mode of the ideal rectangular membrane up to ``fmax`` [Hz] (same formula and
    participation as ``ideal_membrane_modes``, no count of modes)."""
    out = []
    cx = math.sqrt(panel.tension_x / panel.areal_density) / panel.width
    cy = math.sqrt(panel.tension_y / panel.areal_density) / panel.length
    m = 1
    while 0.5 * cx * m <= fmax:
        n = 1
        while True:
            f = 0.5 * math.hypot(cx * m, cy * n)
            if f > fmax:
                break
            p = 64 / (math.pi ** 4 * m * m * n * n) if m % 2 and n % 2 else 0.0
            out.append(Mode(label=f"({m},{n})", frequency_hz=f, participation=p,
                            loss_factor=loss_factor))
            n += 1
        m += 1
    return sorted(out, key=lambda mode: mode.frequency_hz)


def triangle_angles_deg(nodes: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """The three interior angles of each triangle (M, 3)  [degrees], from the law of cosines
    on the edge vectors (elementary geometry)."""
    corners = np.asarray(nodes, float)[np.asarray(triangles, int)]
    angles = []
    for i in range(3):
        u = corners[:, (i + 1) % 3] - corners[:, i]
        v = corners[:, (i + 2) % 3] - corners[:, i]
        cosine = np.sum(u * v, axis=1) / (np.hypot(*u.T) * np.hypot(*v.T))
        angles.append(np.degrees(np.arccos(np.clip(cosine, -1.0, 1.0))))
    return np.column_stack(angles)
