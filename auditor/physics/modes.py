"""Dispatch: a panel record → its modes, with the physics that applies to it.

geometry → in-vacuo ``ModalBasis`` (analytic for rectangles and circles, finite elements for
any other outline or any panel with cut-outs) → loading (air on either side, a sealed cavity,
porosity: ``auditor.physics.fluid``) → reported ``Mode`` records.

A caller that passes one :class:`auditor.physics.cache.SolveCache` to many calls shares solves
between them, keyed by the panel's physical definition (its id, zone and the way it was typed
do not matter), so the many panels of one type in a schedule cost one solve; without one, each
call solves afresh and keeps nothing.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable, TypedDict

import numpy as np

from auditor.model import NO_SOURCE, CircleCutout, Panel, SourceRef
from auditor.physics import fem, fluid, membrane, uncoupled
from auditor.physics.basis import ModalBasis, complete_below, mode_names, names_at
from auditor.physics.basis_reach import REACH_MASS_MARGIN
from auditor.physics.cache import SolveCache
from auditor.physics.geometry import outline_problems, signed_area
from auditor.physics.materials import structural_loss_factor
from auditor.results import Mode, ShapeGrid

#: Largest analytic basis built for the coupled air-loading step: it uses at most about 200
#: basis modes, and building thousands of labelled modes only to drop them is the slow part.
#: (In vacuo, and above the coupled basis, the analytic spectra are built without a cap.)
ANALYTIC_MAX_BASIS = 240

#: Largest finite-element basis coupled through the air (the point quadrature of the Rayleigh
#: integral grows as the square of the mesh it needs).
FEM_MAX_BASIS = 64

#: Largest finite-element basis solved for one outline, in vacuo or above the coupled basis:
#: on the coarse mesh of an L-shape, 64 modes take about 0.3 s, 128 about 0.8 s and 256 about
#: 4.5 s (one core, measured), the Lanczos iteration growing faster than the count. Above it a
#: polygon is not assessed (``PanelModes.complete_to_hz`` says where it stops).
FEM_MAX_MODES = 128


#: Farthest an in-vacuo basis is extended, as a multiple of fmax, for the modes above the
#: coupled basis (an air mass ratio of 63 at the basis's top: far beyond any panel in air).
MAX_REACH_FACTOR = 8.0


class ModeList(Sequence):
    """A panel's modes held as arrays, each :class:`~auditor.results.Mode` record made when
    read: a large panel has tens of thousands of modes, of which a report reads a few.

    Behaves as a sequence of ``Mode`` (ascending in frequency, as its arrays); a slice is
    another ``ModeList``. Two lists are equal when they hold equal modes.
    """

    __slots__ = ("labels", "nodal_lines", "frequency_hz", "multiplicity", "participation",
                 "loss_factor", "in_vacuo_hz", "index")

    def __init__(self, labels, nodal_lines, frequency_hz, multiplicity, participation,
                 loss_factor, in_vacuo_hz, index):
        self.labels, self.nodal_lines = labels, nodal_lines
        self.frequency_hz, self.multiplicity = frequency_hz, multiplicity
        self.participation, self.loss_factor = participation, loss_factor
        self.in_vacuo_hz, self.index = in_vacuo_hz, index

    def _fields(self) -> tuple:
        return (self.labels, self.nodal_lines, self.frequency_hz, self.multiplicity,
                self.participation, self.loss_factor, self.in_vacuo_hz, self.index)

    def __len__(self) -> int:
        return len(self.frequency_hz)

    def __getitem__(self, k):
        if isinstance(k, slice):
            return ModeList(*(field[k] for field in self._fields()))
        if k < 0:
            k += len(self)
        if not 0 <= k < len(self):
            raise IndexError("mode index out of range")
        return Mode(label=self.labels[k], frequency_hz=float(self.frequency_hz[k]),
                    multiplicity=int(self.multiplicity[k]),
                    participation=float(self.participation[k]),
                    nodal_lines=self.nodal_lines[k], loss_factor=float(self.loss_factor[k]),
                    in_vacuo_hz=float(self.in_vacuo_hz[k]), index=int(self.index[k]))

    def __iter__(self):
        for i, label, lines, count, f, p, eta, f0 in zip(
                self.index.tolist(), self.labels, self.nodal_lines,
                self.multiplicity.tolist(), self.frequency_hz.tolist(),
                self.participation.tolist(), self.loss_factor.tolist(),
                self.in_vacuo_hz.tolist()):
            yield Mode(label=label, frequency_hz=f, multiplicity=count, participation=p,
                       nodal_lines=lines, loss_factor=eta, in_vacuo_hz=f0, index=i)

    def __eq__(self, other) -> bool:
        if isinstance(other, ModeList):
            return len(self) == len(other) and all(
                np.array_equal(a, b) if isinstance(a, np.ndarray) else tuple(a) == tuple(b)
                for a, b in zip(self._fields(), other._fields()))
        return isinstance(other, Sequence) and tuple(self) == tuple(other)

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"ModeList({len(self)} modes)"

    def __reduce__(self):
        return ModeList, self._fields()


class GeometryError(ValueError):
    """The panel's geometry cannot be solved (the message says why, in the user's terms)."""


@dataclass(frozen=True, eq=False)
class PanelModes:
    """A panel's reported modes, as arrays, and what is needed to draw them.

    The modes are held as arrays (a large film has tens of thousands); their ``Mode`` records
    are made on first use of :attr:`modes` (a scan over tension never needs them).

    Parameters
    ----------
    frequency_hz : ndarray (n,)  [Hz]
        Ascending, f ≤ fmax, at most ``max_modes`` when a cap was asked for.
    loss_factor : ndarray (n,)  [-]
    participation : ndarray (n,)  [-]
    in_vacuo_hz : ndarray (n,)  [Hz]
    index : ndarray of int (n,)
        The basis mode each is (in vacuo, and above the coupled basis) or is dominated by.
    basis : ModalBasis
        The in-vacuo basis the modes are expressed in (labels, multiplicity and nodal lines
        of mode k are those of basis mode ``index[k]``).
    coordinates : ndarray (n_coupled_basis, n_coupled_modes)
        Coordinates of the modes solved with the full coupling through the air, in the first
        ``n_coupled_basis`` modes of ``basis`` (empty in vacuo).
    loading : str
        The loading model that applied, in words, with its assumptions.
    notes : tuple of str
        Anything the user must know about how this panel was modelled.
    complete_to_hz : float  [Hz]
        No natural mode of the panel at or below this frequency is missing from ``modes``:
        ``fmax`` when everything up to it was computed; lower when a limit stopped the solve
        (the finite-element basis size ``FEM_MAX_MODES``, the reach of an air-loaded basis,
        or the ``max_modes`` cap, which stops it at the last mode listed). Modes above it may
        be listed, but the list is not complete there: above it the panel is not assessed.
    columns : ndarray of int (n,)
        For mode k, the column of ``coordinates`` holding it, or −1 when it is the single
        basis mode ``index[k]`` (in vacuo, and air-loaded modes above the coupled basis).
    """

    frequency_hz: np.ndarray
    loss_factor: np.ndarray
    participation: np.ndarray
    in_vacuo_hz: np.ndarray
    index: np.ndarray
    basis: ModalBasis
    coordinates: np.ndarray
    loading: str
    notes: tuple[str, ...] = ()
    complete_to_hz: float = 0.0
    columns: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int), repr=False)

    def __len__(self) -> int:
        return len(self.frequency_hz)

    @cached_property
    def labels(self) -> tuple[str, ...]:
        """Each mode's label: its basis mode's, marked when an earlier mode has it too
        (:func:`auditor.physics.basis.mode_names`)."""
        return tuple(mode_names(self.basis.labels, self.index))

    @cached_property
    def modes(self) -> ModeList:
        """The modes as a sequence of ``Mode`` records, ascending in frequency (each record
        made when read)."""
        basis = self.basis
        return ModeList(mode_names(basis.labels, self.index),
                        names_at(basis.nodal_lines, self.index),
                        self.frequency_hz, np.asarray(basis.multiplicity)[self.index],
                        self.participation, self.loss_factor, self.in_vacuo_hz, self.index)

    def vector(self, k: int) -> np.ndarray:
        """Coordinates of reported mode ``k`` in ``basis`` (n_basis,)."""
        out = np.zeros(len(self.basis))
        column = int(self.columns[k]) if k < len(self.columns) else -1
        if column >= 0:
            out[:self.coordinates.shape[0]] = self.coordinates[:, column]
        else:
            out[int(self.index[k])] = 1.0
        return out

    @property
    def vectors(self) -> np.ndarray:
        """Every reported mode's coordinates in ``basis`` (n_basis, n_modes), built on each
        call: n_basis × n_modes numbers, large for a large panel (prefer :meth:`vector`)."""
        if not len(self):
            return np.zeros((len(self.basis), 0))
        return np.column_stack([self.vector(k) for k in range(len(self))])

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
            vector = self.vector(k)
            used = np.flatnonzero(vector)
            phi = self.basis.shapes(points[inside], used) @ vector[used]
            peak = np.max(np.abs(phi)) if len(phi) else 0.0
            values[inside] = phi / peak if peak > 0 else phi
        return ShapeGrid(label=self.labels[k], x=x, y=y, values=values.reshape(ny, nx))


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


def basis_factory(panel: Panel, cache: SolveCache | None = None
                  ) -> tuple[Callable[..., ModalBasis], tuple[str, ...]]:
    """The in-vacuo basis builder for a panel, and the modelling notes it implies.

    Rectangles and circles without cut-outs take the exact analytic path
    (``auditor.physics.membrane``); everything else (polygons, any cut-out, an orthotropic
    circle) the finite-element path (``auditor.physics.fem``), where bending stiffness is
    neglected (noted). ``cache`` keeps the finite-element solves (a fresh one when omitted).

    The builder is ``build(f_limit, max_modes=...)``: the basis with every mode up to
    ``f_limit`` [Hz], or the lowest ``max_modes`` when that is fewer (analytic: default
    ``ANALYTIC_MAX_BASIS``, None for no cap; finite elements: default ``FEM_MAX_BASIS``, at
    most ``FEM_MAX_MODES``); its ``complete_to_hz`` says how far it holds every mode.
    """
    cache = SolveCache() if cache is None else cache
    notes: list[str] = []
    tx, ty, rho = panel.tension_x, panel.tension_y, panel.areal_density
    if panel.shape == "rectangle" and not panel.cutouts:
        def build(f_limit: float, max_modes: int | None = ANALYTIC_MAX_BASIS) -> ModalBasis:
            return membrane.rectangular_membrane_basis(
                tx, ty, rho, panel.width, panel.length, f_limit,
                bending_stiffness=panel.bending_stiffness, max_modes=max_modes,
            )
        if panel.bending_stiffness:
            notes.append("Bending stiffness included with simply supported edges "
                         "(prestressed plate, exact).")
        return build, tuple(notes)
    if panel.shape == "circle" and not panel.cutouts and tx == ty:
        def build(f_limit: float, max_modes: int | None = ANALYTIC_MAX_BASIS) -> ModalBasis:
            if panel.diameter is None:   # the schedule requires it of a circle
                raise ValueError("a circular panel needs its diameter")
            return membrane.circular_membrane_basis(tx, rho, panel.diameter / 2, f_limit,
                                                    max_modes=max_modes)
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

    def build_polygon(f_limit: float, max_modes: int | None = FEM_MAX_BASIS) -> ModalBasis:
        # Weyl's law, N(f) ≈ A·π·f²·ρs/√(Tx·Ty), sizes the request in modes (rounded up to a
        # power of two so that nearby requests share a solve). A basis for the air's coupling
        # is cut at FEM_MAX_BASIS modes on the coarse mesh: its fundamental agrees with the
        # default mesh to about 1e-5, its 40th mode to about 0.13 % and every mode to 0.3 %
        # in frequency (L-shape, measured),
        # while the cost of resolving hundreds of modes grows steeply; any basis at
        # FEM_MAX_MODES.
        cap = FEM_MAX_MODES if max_modes is None else min(int(max_modes), FEM_MAX_MODES)
        expected = area * np.pi * f_limit**2 * rho / np.sqrt(tx * ty)
        wanted = int(np.ceil(1.2 * expected)) + 4
        count = min(cap, max(16, 1 << (wanted - 1).bit_length()))
        accuracy = "default" if count <= 16 else "coarse"
        return _scaled_polygon_basis(outline, panel.cutouts, tx, ty, rho, count, accuracy, cache)

    return build_polygon, tuple(notes)


def _unit_polygon_basis(outline, cutouts, tension_ratio: float, count: int, accuracy: str,
                        cache: SolveCache) -> ModalBasis:
    """A polygon's basis at tension_x = 1 N/m, tension_y = ``tension_ratio``, ρs = 1 kg/m²."""
    return cache.polygon_bases.get(
        (outline, cutouts, tension_ratio, count, accuracy),
        lambda: fem.polygon_membrane_basis(outline, cutouts, 1.0, tension_ratio, 1.0,
                                           n_modes=count, accuracy=accuracy, cache=cache))


def _scaled_polygon_basis(outline, cutouts, tx: float, ty: float, rho: float, count: int,
                          accuracy: str, cache: SolveCache) -> ModalBasis:
    """The polygon's basis for the panel's tension and density, by exact rescaling.

    At a fixed tension ratio the shapes do not change and every frequency scales as
    √(Tx/ρs) (the operator is −Tx(∂²/∂x² + (Ty/Tx)∂²/∂y²)), so all panels of one outline
    share one solve *and one shape object*: the loading step keeps its air matrices by it.
    """
    unit = _unit_polygon_basis(tuple(outline), tuple(cutouts), round(ty / tx, 9), count,
                               accuracy, cache)
    factor = np.sqrt(tx / rho)
    return dataclasses.replace(unit, frequencies_hz=unit.frequencies_hz * factor,
                               complete_to_hz=unit.complete_to * factor)


class _Blank(TypedDict):
    """The panel fields that do not change its modes."""

    panel: str
    zone: str
    source: SourceRef
    entered: tuple[tuple[str, str], ...]
    tap_test: str | None
    max_tension: float | None


#: The panel fields that do not change its modes, and their blank values.
_BLANK: _Blank = {"panel": "", "zone": "", "source": NO_SOURCE, "entered": (), "tap_test": None,
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
    max_modes: int | None = None,
    air_density: float = 1.204,
    speed_of_sound: float = 343.0,
    cache: SolveCache | None = None,
) -> PanelModes:
    """Natural modes of one panel up to ``fmax``.

    Parameters
    ----------
    panel : Panel
        SI record from the schedule.
    fmax : float  [Hz]
        Highest frequency of interest.
    max_modes : int or None
        Cap on the number of reported modes (the lowest); None (the default): every mode up
        to ``fmax`` that can be computed (see ``PanelModes.complete_to_hz``).
    air_density : float  [kg/m³]
    speed_of_sound : float  [m/s]
    cache : SolveCache, optional
        Solves to share with other calls (every panel of one type in a schedule, every
        tension of one panel in a remedy scan); the result is the same, bit for bit, whatever
        the cache holds. Without one, nothing is kept after the call.

    Returns
    -------
    PanelModes
        ``complete_to_hz`` says up to which frequency no mode is missing.

    Raises
    ------
    GeometryError
        When the outline or cut-outs cannot be meshed (self-intersection, a cut-out outside
        the panel, ...).

    Notes
    -----
    In vacuo, rectangles and circles are exact and uncapped (every mode up to ``fmax``);
    polygons reach ``fmax`` or ``FEM_MAX_MODES`` modes, whichever comes first. In air, the
    lowest modes (about 200 on rectangles and circles, ``FEM_MAX_BASIS`` on polygons) are
    coupled through the air in full; every mode above them is loaded by its own air mass
    (:mod:`auditor.physics.uncoupled`, which states its accuracy), so the list reaches
    ``fmax`` wherever the in-vacuo basis does.

    References
    ----------
    See ``auditor.physics.membrane``, ``auditor.physics.fem``, ``auditor.physics.fluid`` and
    ``auditor.physics.uncoupled``.
    """
    cap = _checked_cap(max_modes)
    cache = SolveCache() if cache is None else cache
    key = (physics_signature(panel), float(fmax), cap, float(air_density),
           float(speed_of_sound))
    return cache.panel_modes.get(
        key, lambda: _solve(physics_key(panel), float(fmax), cap, float(air_density),
                            float(speed_of_sound), cache))


def _checked_cap(max_modes) -> int | None:
    if max_modes is None:
        return None
    if isinstance(max_modes, bool) or int(max_modes) != max_modes or max_modes < 0:
        raise ValueError(f"max_modes must be a whole number ≥ 0 or None, got {max_modes!r}")
    return int(max_modes)


def _solve(panel: Panel, fmax: float, cap: int | None, air_density: float,
           speed_of_sound: float, cache: SolveCache) -> PanelModes:
    build, notes = basis_factory(panel, cache)
    open_mesh = panel.material == "mesh" and panel.airflow_resistance is None
    air = panel.room_side == "air" or panel.plenum_side in ("air", "sealed")
    if not air or open_mesh:
        return _in_vacuo(panel, build, notes, fmax, cap, open_mesh)
    return _in_air(panel, build, notes, fmax, cap, air_density, speed_of_sound, cache)


def _in_vacuo(panel: Panel, build, notes, fmax: float, cap: int | None,
              open_mesh: bool) -> PanelModes:
    basis = build(fmax, max_modes=None if cap is None else cap + 1)
    vacuum = np.asarray(basis.frequencies_hz)
    below = np.flatnonzero(vacuum <= fmax)
    keep = below[:cap]
    complete = min(fmax, basis.complete_to, complete_below(vacuum[below], len(keep)))
    eta = structural_loss_factor(panel.material, panel.loss_factor)
    frequency = vacuum[keep].astype(float)
    participation = np.asarray(basis.mean, float)[keep] ** 2
    if open_mesh:
        loading = fluid.describe_loading(panel.room_side, panel.plenum_side, panel.cavity_depth,
                                         panel.airflow_resistance, panel.material)
    else:
        loading = ("In vacuo: no air on either side (room side and plenum side 'none'); "
                   "structural loss factor only.")
    return PanelModes(frequency, np.full(len(keep), float(eta)), participation, frequency.copy(),
                      keep.astype(int), basis, np.zeros((0, 0)), loading, notes,
                      float(complete), np.full(len(keep), -1, dtype=int))


def _loaded(build, panel: Panel, fmax: float, cap: int | None, air_density: float,
            speed_of_sound: float, cache: SolveCache, max_basis: int) -> fluid.LoadedModes:
    return fluid.loaded_modes(
        build, panel.areal_density, fmax=fmax, max_modes=cap,
        room_side=panel.room_side, plenum_side=panel.plenum_side,
        cavity_depth=panel.cavity_depth, airflow_resistance=panel.airflow_resistance,
        material=panel.material, loss_factor=panel.loss_factor,
        air_density=air_density, speed_of_sound=speed_of_sound, max_basis=max_basis,
        cache=cache,
    )


def _is_prefix(small: ModalBasis, large: ModalBasis) -> bool:
    """Whether ``small`` is the first modes of ``large`` (same shapes, same order)."""
    n = len(small)
    return (n <= len(large) and tuple(small.labels) == tuple(large.labels[:n])
            and np.array_equal(small.frequencies_hz, np.asarray(large.frequencies_hz)[:n])
            and small.region == large.region)


def _reach_in_air(panel: Panel, fmax: float, air_density: float) -> float:
    """In-vacuo frequency [Hz] of a mode loaded down to about fmax: ``fmax √(1 + 1.25 μ)``
    with μ the infinite-panel air mass ratio ``sides ρ0 /(k ρs)`` at k = 2π fmax √(ρs/T)."""
    sides = (panel.room_side == "air") + (panel.plenum_side in ("air", "sealed"))
    tension = math.sqrt(panel.tension_x * panel.tension_y)
    wavenumber = 2 * math.pi * fmax * math.sqrt(panel.areal_density / tension)
    ratio = sides * air_density / (max(wavenumber, 1e-12) * panel.areal_density)
    return fmax * min(math.sqrt(1.0 + REACH_MASS_MARGIN * ratio), MAX_REACH_FACTOR)


def _in_air(panel: Panel, build, notes, fmax: float, cap: int | None, air_density: float,
            speed_of_sound: float, cache: SolveCache) -> PanelModes:
    polygon = panel.shape == "polygon" or bool(panel.cutouts) or (
        panel.shape == "circle" and panel.tension_x != panel.tension_y)
    max_basis = FEM_MAX_BASIS if polygon else 200
    basis_for = build
    extended = None
    if polygon and (cap is None or cap > FEM_MAX_BASIS):
        # A finite-element mesh depends on the number of modes asked for, so the modes above
        # the coupled basis must come from the same solve as those coupled: solve once, far
        # enough for fmax in air (or FEM_MAX_MODES), and couple its first FEM_MAX_BASIS.
        extended = build(_reach_in_air(panel, fmax, air_density), max_modes=None)
        basis_for = lambda f_limit, max_modes=None: extended  # noqa: E731
    loaded = _loaded(basis_for, panel, fmax, cap, air_density, speed_of_sound, cache, max_basis)
    basis = loaded.basis
    complete = loaded.complete_to_hz
    estimated = None
    wanted = cap is None or len(loaded) < cap
    if complete < fmax and wanted and len(basis):
        if extended is None:
            # Every mode above the coupled basis, each with its own air load: the basis must
            # reach the in-vacuo frequency of any mode that could be loaded down to fmax, at
            # most f_b √(1 + 1.25 μ) above it (μ the top modes' air mass ratio; see
            # basis_reach.coupled_reach).
            reach = fmax * min(basis.complete_to / max(complete, 1e-300), MAX_REACH_FACTOR)
            extended = build(reach, max_modes=None)
        if _is_prefix(loaded.basis, extended):
            eta = structural_loss_factor(panel.material, panel.loss_factor)
            estimated = uncoupled.uncoupled_loaded_modes(
                extended, len(loaded.basis), panel.areal_density, fmax=fmax,
                room_side=panel.room_side, plenum_side=panel.plenum_side,
                cavity_depth=panel.cavity_depth, airflow_resistance=panel.airflow_resistance,
                structural_loss_factor=eta, air_density=air_density,
                speed_of_sound=speed_of_sound, cache=cache)
            basis = extended
    # Every mode as arrays: those coupled through the air (column k of the loaded vectors),
    # then those above the coupled basis (column −1), ascending in frequency.
    frequency = [np.asarray(loaded.frequencies_hz, float)]
    loss = [np.asarray(loaded.loss_factor, float)]
    participation = [np.asarray(loaded.participation, float)]
    in_vacuo = [np.asarray(loaded.in_vacuo_hz, float)]
    index = [np.asarray(loaded.dominant, dtype=int)]
    columns = [np.arange(len(loaded), dtype=int)]
    loading = loaded.model
    if estimated is not None:
        complete = estimated.complete_to_hz
        above = np.asarray(estimated.indices, dtype=int)
        frequency.append(np.asarray(estimated.frequencies_hz, float))
        loss.append(np.asarray(estimated.loss_factor, float))
        participation.append(np.asarray(basis.mean, float)[above] ** 2)
        in_vacuo.append(np.asarray(basis.frequencies_hz, float)[above])
        index.append(above)
        columns.append(np.full(len(above), -1, dtype=int))
        if len(above):
            loading += (f" Modes above the {len(loaded.basis)} coupled through the air: each "
                        "loaded by its own air mass (Rayleigh self term, or ρ0/k on a "
                        "polygon), within about 1 % (2 % on a polygon); structural and porous "
                        "losses only.")
    frequencies = np.concatenate(frequency)
    ascending = np.argsort(frequencies, kind="stable")
    order = ascending[:cap]
    complete = min(fmax, complete, complete_below(frequencies[ascending], len(order)))
    return PanelModes(frequencies[order], np.concatenate(loss)[order],
                      np.concatenate(participation)[order], np.concatenate(in_vacuo)[order],
                      np.concatenate(index)[order], basis, np.asarray(loaded.vectors), loading,
                      notes, float(complete), np.concatenate(columns)[order])
