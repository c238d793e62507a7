"""Dispatch: a panel record → its modes, with the physics that applies to it.

geometry → in-vacuo ``ModalBasis`` (analytic for rectangles and circles, finite elements for
any other outline or any panel with cut-outs) → loading (air on either side, a sealed cavity,
porosity: ``auditor.physics.fluid``) → reported ``Mode`` records.

Results are cached by the panel's physical definition (its id, zone and the way it was typed do
not matter), so the many panels of one type in a schedule cost one solve.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

import numpy as np

from auditor.model import CircleCutout, Mode, Panel, ShapeGrid
from auditor.physics import fem, fluid, membrane
from auditor.physics.basis import ModalBasis
from auditor.physics.geometry import outline_problems, signed_area
from auditor.physics.materials import structural_loss_factor

#: Reported modes per panel when the caller sets no cap.
DEFAULT_MAX_MODES = 60

#: Largest analytic basis built for one panel: the loading step uses at most about 200 basis
#: modes, and building thousands of labelled modes only to drop them is the slow part.
ANALYTIC_MAX_BASIS = 240

#: Largest finite-element basis requested for one outline.
FEM_MAX_BASIS = 64


class GeometryError(ValueError):
    """The panel's geometry cannot be solved (the message says why, in the user's terms)."""


@dataclass(frozen=True, eq=False)
class PanelModes:
    """A panel's reported modes and what is needed to draw them.

    Parameters
    ----------
    modes : tuple of Mode
        Ascending in frequency, f ≤ fmax, at most ``max_modes``.
    basis : ModalBasis
        The in-vacuo basis the modes are expressed in.
    vectors : ndarray (n_basis, n_modes)
        Each reported mode's coordinates in the basis (a column of the identity in vacuo).
    loading : str
        The loading model that applied, in words, with its assumptions.
    notes : tuple of str
        Anything the user must know about how this panel was modelled.
    """

    modes: tuple[Mode, ...]
    basis: ModalBasis
    vectors: np.ndarray
    loading: str
    notes: tuple[str, ...] = ()

    def shape_grid(self, k: int, resolution: int = 48) -> ShapeGrid:
        """Sample reported mode ``k`` on a grid for drawing (NaN outside, max |φ| = 1)."""
        x0, y0, x1, y1 = self.basis.region.bounds()
        span = max(x1 - x0, y1 - y0)
        nx = max(8, int(round(resolution * (x1 - x0) / span)))
        ny = max(8, int(round(resolution * (y1 - y0) / span)))
        x = np.linspace(x0, x1, nx)
        y = np.linspace(y0, y1, ny)
        xx, yy = np.meshgrid(x, y)
        points = np.column_stack([xx.ravel(), yy.ravel()])
        inside = self.basis.region.contains(points)
        values = np.full(points.shape[0], np.nan)
        if inside.any():
            phi = self.basis.evaluate(points[inside]) @ self.vectors[:, k]
            peak = np.max(np.abs(phi))
            values[inside] = phi / peak if peak > 0 else phi
        return ShapeGrid(label=self.modes[k].label, x=x, y=y, values=values.reshape(ny, nx))


def _circle_as_polygon(x: float, y: float, diameter: float, sides: int = 48):
    t = np.linspace(0.0, 2 * np.pi, sides, endpoint=False)
    r = diameter / 2
    return tuple((float(x + r * np.cos(a)), float(y + r * np.sin(a))) for a in t)


def _cutout_vertices(cutout) -> tuple[tuple[float, float], ...]:
    if isinstance(cutout, CircleCutout):
        return _circle_as_polygon(cutout.x, cutout.y, cutout.diameter)
    return tuple(cutout.vertices)


def _outline_of(panel: Panel) -> tuple[tuple[float, float], ...]:
    """The outline a finite-element solve uses for any shape."""
    if panel.shape == "polygon":
        return tuple(panel.outline or ())
    if panel.shape == "circle":
        d = panel.diameter or 0.0
        return _circle_as_polygon(0.0, 0.0, d, sides=96)  # centred, as basis.CircleRegion
    w, l = panel.width or 0.0, panel.length or 0.0
    return ((0.0, 0.0), (w, 0.0), (w, l), (0.0, l))


def basis_factory(panel: Panel) -> tuple[Callable[[float], ModalBasis], tuple[str, ...]]:
    """The in-vacuo basis builder for a panel, and the modelling notes it implies.

    Rectangles and circles without cut-outs take the exact analytic path
    (``auditor.physics.membrane``); everything else (polygons, any cut-out, an orthotropic
    circle) the finite-element path (``auditor.physics.fem``), where bending stiffness is
    neglected (noted).
    """
    notes: list[str] = []
    tx, ty, rho = panel.tension_x, panel.tension_y, panel.areal_density
    if panel.shape == "rectangle" and not panel.cutouts:
        def build(f_limit: float) -> ModalBasis:
            return membrane.rectangular_membrane_basis(
                tx, ty, rho, panel.width, panel.length, f_limit,
                bending_stiffness=panel.bending_stiffness, max_modes=ANALYTIC_MAX_BASIS,
            )
        if panel.bending_stiffness:
            notes.append("Bending stiffness included with simply supported edges "
                         "(prestressed plate, exact).")
        return build, tuple(notes)
    if panel.shape == "circle" and not panel.cutouts and tx == ty:
        def build(f_limit: float) -> ModalBasis:
            return membrane.circular_membrane_basis(tx, rho, panel.diameter / 2, f_limit,
                                                    max_modes=ANALYTIC_MAX_BASIS)
        if panel.bending_stiffness:
            notes.append("Bending stiffness is not modelled for circular panels; "
                         "membrane tension only.")
        return build, tuple(notes)

    outline = _outline_of(panel)
    if panel.shape == "circle":
        notes.append("Circle solved by finite elements as a 96-sided polygon "
                     + ("(orthotropic tension)." if tx != ty else "(cut-outs)."))
    if panel.bending_stiffness:
        notes.append("Bending stiffness is not modelled on this outline "
                     "(finite elements, membrane tension only).")
    problems = outline_problems(outline, panel.cutouts)
    if problems:
        raise GeometryError("; ".join(problems))

    area = abs(signed_area(outline)) - sum(abs(signed_area(_cutout_vertices(c)))
                                           for c in panel.cutouts)

    def build(f_limit: float) -> ModalBasis:
        # Weyl's law, N(f) ≈ A·π·f²·ρs/√(Tx·Ty), sizes the request in modes (rounded up to a
        # power of two so that nearby requests share a solve). A large basis is cut at
        # FEM_MAX_BASIS modes on the coarse mesh: its fundamental agrees with the default mesh
        # to about 1e-5 and its 40th mode to about 0.1 % (L-shape, measured), while the cost
        # of resolving hundreds of modes grows steeply.
        expected = area * np.pi * f_limit**2 * rho / np.sqrt(tx * ty)
        wanted = int(np.ceil(1.2 * expected)) + 4
        count = min(FEM_MAX_BASIS, max(16, 1 << (wanted - 1).bit_length()))
        accuracy = "default" if count <= 16 else "coarse"
        return _scaled_polygon_basis(outline, panel.cutouts, tx, ty, rho, count, accuracy)

    return build, tuple(notes)


@lru_cache(maxsize=256)
def _unit_polygon_basis(outline, cutouts, tension_ratio: float, count: int,
                        accuracy: str) -> ModalBasis:
    """A polygon's basis at tension_x = 1 N/m, tension_y = ``tension_ratio``, ρs = 1 kg/m²."""
    return fem.polygon_membrane_basis(outline, cutouts, 1.0, tension_ratio, 1.0,
                                      n_modes=count, accuracy=accuracy)


def _scaled_polygon_basis(outline, cutouts, tx: float, ty: float, rho: float, count: int,
                          accuracy: str) -> ModalBasis:
    """The polygon's basis for the panel's tension and density, by exact rescaling.

    At a fixed tension ratio the shapes do not change and every frequency scales as
    √(Tx/ρs) (the operator is −Tx(∂²/∂x² + (Ty/Tx)∂²/∂y²)), so all panels of one outline
    share one solve *and one shape object*: the loading step caches its air matrices by it.
    """
    unit = _unit_polygon_basis(tuple(outline), tuple(cutouts), round(ty / tx, 9), count,
                               accuracy)
    return dataclasses.replace(unit, frequencies_hz=unit.frequencies_hz * np.sqrt(tx / rho))


#: The panel fields that do not change its modes, and their blank values.
_BLANK = {"panel": "", "zone": "", "source": None, "entered": (), "tap_test": None,
          "max_tension": None}


def physics_key(panel: Panel) -> Panel:
    """The panel with everything that does not change its modes blanked out."""
    return dataclasses.replace(panel, **_BLANK)


def physics_signature(panel: Panel) -> tuple:
    """The values of the fields that change a panel's modes, as a tuple: a dictionary key
    equivalent to :func:`physics_key` and a tenth of its cost (one per scheduled panel)."""
    return tuple(value for name, value in panel.__dict__.items() if name not in _BLANK)


def modes_for(
    panel: Panel,
    fmax: float,
    *,
    max_modes: int = DEFAULT_MAX_MODES,
    air_density: float = 1.204,
    speed_of_sound: float = 343.0,
) -> PanelModes:
    """Natural modes of one panel up to ``fmax``.

    Parameters
    ----------
    panel : Panel
        SI record from the schedule.
    fmax : float  [Hz]
        Highest frequency of interest.
    max_modes : int
        Cap on the number of reported modes.
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]

    Returns
    -------
    PanelModes

    Raises
    ------
    GeometryError
        When the outline or cut-outs cannot be meshed (self-intersection, a cut-out outside
        the panel, ...).

    References
    ----------
    See ``auditor.physics.membrane``, ``auditor.physics.fem`` and ``auditor.physics.fluid``.
    """
    return _modes_cached(physics_key(panel), float(fmax), int(max_modes),
                         float(air_density), float(speed_of_sound))


@lru_cache(maxsize=4096)
def _modes_cached(panel: Panel, fmax: float, max_modes: int, air_density: float,
                  speed_of_sound: float) -> PanelModes:
    build, notes = basis_factory(panel)
    air = panel.room_side == "air" or panel.plenum_side in ("air", "sealed")
    if not air:
        basis = build(fmax)
        keep = np.flatnonzero(basis.frequencies_hz <= fmax)[:max_modes]
        eta = structural_loss_factor(panel.material, panel.loss_factor)
        modes = tuple(
            Mode(
                label=basis.labels[i],
                frequency_hz=float(basis.frequencies_hz[i]),
                multiplicity=int(basis.multiplicity[i]),
                participation=float(basis.mean[i] ** 2),
                nodal_lines=basis.nodal_lines[i],
                loss_factor=eta,
                in_vacuo_hz=float(basis.frequencies_hz[i]),
                index=int(i),
            )
            for i in keep
        )
        vectors = np.eye(len(basis))[:, keep]
        loading = ("In vacuo: no air on either side (room side and plenum side 'none'); "
                   "structural loss factor only.")
        return PanelModes(modes, basis, vectors, loading, notes)

    loaded = fluid.loaded_modes(
        build, panel.areal_density, fmax=fmax, max_modes=max_modes,
        room_side=panel.room_side, plenum_side=panel.plenum_side,
        cavity_depth=panel.cavity_depth, airflow_resistance=panel.airflow_resistance,
        material=panel.material, loss_factor=panel.loss_factor,
        air_density=air_density, speed_of_sound=speed_of_sound,
    )
    basis = loaded.basis
    modes = tuple(
        Mode(
            label=loaded.labels[k],
            frequency_hz=float(loaded.frequencies_hz[k]),
            multiplicity=int(loaded.multiplicity[k]),
            participation=float(loaded.participation[k]),
            nodal_lines=basis.nodal_lines[int(loaded.dominant[k])],
            loss_factor=float(loaded.loss_factor[k]),
            in_vacuo_hz=float(loaded.in_vacuo_hz[k]),
            index=int(loaded.dominant[k]),
        )
        for k in range(len(loaded.frequencies_hz))
    )
    return PanelModes(modes, basis, np.asarray(loaded.vectors), loaded.model, notes)


def clear_cache() -> None:
    """Forget cached solutions (for benchmarks and tests)."""
    _modes_cached.cache_clear()
