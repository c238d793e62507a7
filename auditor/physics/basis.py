"""The in-vacuo modal basis: the one interface between geometry and everything after it.

geometry → ``ModalBasis`` (membrane.py analytic, fem.py numerical) → a loading step
(fluid.py, the entry over quadrature, added_mass, radiation, cavity, coupled and porous)
→ reported modes (modes.py). The analytic bases say what their shapes are
(:data:`ShapeFamily`), and the loading step dispatches on that type.

Conventions (all bases keep them, so the loading step needs no special cases):

- Coordinates in metres. Rectangle: origin at a corner, x along the width in [0, width],
  y along the length in [0, length]. Circle: origin at the centre. Polygon: the schedule's own
  coordinates.
- Shapes are real and normalised to unit mean square: ∫ φ² dA = A (panel area). Then the
  modal mass is ρs·A and the modal stiffness ρs·A·ω² for every mode, and the uniform-pressure
  participation factor is simply ``mean**2`` where ``mean = ∫ φ dA / A``.
- A degenerate pair of a symmetric shape (the cos and sin modes of a circular membrane with
  nodal diameters) is stored once, with ``multiplicity`` 2. Symmetry guarantees that air and
  cavity loading never couple the two members or mix orders, so the loading step may work on
  representatives.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Callable

import numpy as np


@dataclass(frozen=True)
class RectangleRegion:
    """Rectangle ``width`` × ``length``  [m], origin at a corner."""

    width: float
    length: float

    @property
    def area(self) -> float:
        return self.width * self.length

    def contains(self, points: np.ndarray) -> np.ndarray:
        x, y = points[:, 0], points[:, 1]
        return (x >= 0) & (x <= self.width) & (y >= 0) & (y <= self.length)

    def bounds(self) -> tuple[float, float, float, float]:
        return (0.0, 0.0, self.width, self.length)


@dataclass(frozen=True)
class CircleRegion:
    """Disc of ``radius`` [m], centred on the origin."""

    radius: float

    @property
    def area(self) -> float:
        return float(np.pi * self.radius**2)

    def contains(self, points: np.ndarray) -> np.ndarray:
        return np.hypot(points[:, 0], points[:, 1]) <= self.radius

    def bounds(self) -> tuple[float, float, float, float]:
        r = self.radius
        return (-r, -r, r, r)


@dataclass(frozen=True, eq=False)
class PolygonRegion:
    """A polygon with holes, and the triangulation the finite elements used.

    ``outline`` is the outer boundary (counter-clockwise), ``holes`` the cut-out boundaries
    (each a closed polygon; circles arrive here already as polygons). ``nodes`` (N, 2) and
    ``triangles`` (M, 3) are the mesh (straight-sided, corner nodes only), usable as a
    quadrature by the loading step.
    """

    outline: np.ndarray
    holes: tuple[np.ndarray, ...] = ()
    nodes: np.ndarray | None = None
    triangles: np.ndarray | None = None
    area: float = 0.0

    def contains(self, points: np.ndarray) -> np.ndarray:
        from auditor.physics.geometry import points_in_polygon

        inside = points_in_polygon(points, np.asarray(self.outline, float))
        for hole in self.holes:
            inside &= ~points_in_polygon(points, np.asarray(hole, float))
        return inside

    def bounds(self) -> tuple[float, float, float, float]:
        o = np.asarray(self.outline)
        return (float(o[:, 0].min()), float(o[:, 1].min()),
                float(o[:, 0].max()), float(o[:, 1].max()))


Region = RectangleRegion | CircleRegion | PolygonRegion


# ---------------------------------------------------------------------------------------
# Shape families: what the shapes of a basis are, as a type
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class RectangleShapes:
    """The analytic shapes of a rectangle: ``φ_j = 2 sin(m_j πx/Lx) sin(n_j πy/Ly)``.

    ``width`` and ``length`` are Lx and Ly [m]; ``m`` and ``n`` (n_modes,) the half-waves
    along x and y. The loading step integrates such shapes in closed form.
    """

    width: float
    length: float
    m: np.ndarray
    n: np.ndarray

    @property
    def area(self) -> float:
        return self.width * self.length

    def blocks(self) -> list[np.ndarray]:
        """Indices of the modes of each parity class of (m, n): uniform pressure and the
        air's coupling never mix classes (the shapes' symmetry about the centre lines)."""
        parity = (self.m % 2) * 2 + (self.n % 2)
        return [np.flatnonzero(parity == p) for p in range(4) if np.any(parity == p)]

    def subset(self, keep: np.ndarray) -> RectangleShapes:
        """The shapes ``keep`` only, in that order."""
        return RectangleShapes(self.width, self.length, self.m[keep], self.n[keep])


@dataclass(frozen=True, eq=False)
class DiscShapes:
    """The analytic shapes of a disc: ``φ_j = scale_j J_m(j_j r/a) cos(m θ)``.

    ``radius`` is a [m]; ``order`` the m, ``zero`` the zeros j_mn of J_m, ``scale`` the
    unit-mean-square factors (signed) and ``radial`` n − 1 (the zero's 0-based index), each
    (n_modes,). One representative per cos/sin pair (see the module docstring).
    """

    radius: float
    order: np.ndarray
    zero: np.ndarray
    scale: np.ndarray
    radial: np.ndarray

    @property
    def area(self) -> float:
        return math.pi * self.radius**2

    def blocks(self) -> list[np.ndarray]:
        """Indices of the modes of each order m: axisymmetric loading never mixes orders."""
        return [np.flatnonzero(self.order == m) for m in np.unique(self.order)]

    def subset(self, keep: np.ndarray) -> DiscShapes:
        """The shapes ``keep`` only, in that order."""
        return DiscShapes(self.radius, self.order[keep], self.zero[keep], self.scale[keep],
                          self.radial[keep])


class IndexedNames(Sequence):
    """Names of analytic modes (labels, nodal lines) made from their two indices when read.

    A large panel has tens of thousands of modes, of which a few are ever reported; this
    sequence holds the index arrays ``first`` and ``second`` and makes ``name(first[k],
    second[k])`` for the entries read (a slice gives a tuple). ``name`` must be a function
    of module level (the names travel between processes with the basis).
    """

    __slots__ = ("first", "second", "name")

    def __init__(self, first: np.ndarray, second: np.ndarray, name: Callable[[int, int], object]):
        self.first, self.second, self.name = first, second, name

    def __len__(self) -> int:
        return len(self.first)

    def __getitem__(self, k):
        if isinstance(k, slice):
            return IndexedNames(self.first[k], self.second[k], self.name)
        return self.name(int(self.first[k]), int(self.second[k]))

    def __iter__(self):
        return map(self.name, self.first.tolist(), self.second.tolist())

    def __eq__(self, other) -> bool:
        return isinstance(other, Sequence) and tuple(self) == tuple(other)

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"IndexedNames({len(self)} modes, {self.name.__name__})"

    def __reduce__(self):
        return IndexedNames, (self.first, self.second, self.name)

    def subset(self, indices) -> IndexedNames:
        """The names of the modes ``indices`` only, in that order (still made when read)."""
        indices = np.asarray(indices, dtype=int)
        return IndexedNames(self.first[indices], self.second[indices], self.name)


def names_at(names: Sequence, indices) -> Sequence:
    """The entries ``indices`` of a basis's labels or nodal lines: an :class:`IndexedNames`
    stays one (made when read), any other sequence gives a tuple."""
    if isinstance(names, IndexedNames):
        return names.subset(indices)
    return tuple(names[i] for i in np.asarray(indices, dtype=int).tolist())


def mode_names(labels: Sequence[str], indices) -> Sequence[str]:
    """The names of a panel's modes, each named after its basis mode ``indices[k]`` (the
    modes in ascending frequency), no two alike.

    Two loaded modes can be named after one basis mode: a sealed cavity splits a panel mode
    in two, and the air mixes modes a fraction of a per cent apart. The first such mode keeps
    the basis mode's label; the second is marked ``b``, the third ``c``, and so on ("(0,5)",
    then "(0,5)b"), so that a mode keeps its name whether or not a later one shares it (the
    k-th mode of a label stays the k-th across tensions). Distinct indices give
    :func:`names_at` unchanged (made when read)."""
    indices = np.asarray(indices, dtype=int)
    named = names_at(labels, indices)
    if len(indices) == 0:
        return named
    seen = np.zeros(int(indices.max()) + 1, dtype=bool)
    seen[indices] = True
    if np.count_nonzero(seen) == len(indices):     # no index twice (the usual case)
        return named
    order = np.argsort(indices, kind="stable")
    ordered = indices[order]
    run_start = np.concatenate([[True], ordered[1:] != ordered[:-1]])
    first = np.maximum.accumulate(np.where(run_start, np.arange(len(ordered)), 0))
    occurrence = np.empty(len(indices), dtype=int)
    occurrence[order] = np.arange(len(ordered)) - first
    return tuple(name if k == 0 else name + _repeat_mark(k)
                 for name, k in zip(named, occurrence.tolist()))


def _repeat_mark(k: int) -> str:
    """The mark of the (k+1)-th mode of one name: b, c, …, z, then #27, #28, …"""
    return chr(ord("a") + k) if k < 26 else f"#{k + 1}"


#: The family of a basis's shapes: analytic (integrated in closed form), or None for shapes
#: known only numerically (finite elements), which the loading step integrates by points.
ShapeFamily = RectangleShapes | DiscShapes | None


def complete_below(frequencies: np.ndarray, count: int) -> float:
    """How far the lowest ``count`` of ascending ``frequencies`` hold every mode  [Hz].

    The highest of the first ``count`` frequencies that lies strictly below the first one left
    out (a degenerate group cut in two is not complete at its frequency); ``inf`` when none is
    left out, 0 when nothing listed lies below the first left out.
    """
    frequencies = np.asarray(frequencies, float)
    if count >= len(frequencies):
        return math.inf
    kept = frequencies[:count]
    below = kept[kept < frequencies[count]]
    return float(below.max()) if len(below) else 0.0


@dataclass(frozen=True, eq=False)
class ModalBasis:
    """In-vacuo modes of one panel, ascending in frequency.

    Parameters
    ----------
    region : Region
    frequencies_hz : ndarray (n,)  [Hz]
    labels : sequence of str (n,)
        "(m,n)" for rectangle and circle (see ``auditor.results.Mode``; an
        :class:`IndexedNames`, made when read), "#k" otherwise.
    multiplicity : ndarray of int (n,)
    mean : ndarray (n,)  [-]
        ∫ φ dA / A with the unit-mean-square normalisation; participation = mean².
    nodal_lines : tuple of tuple of (family, count) (n,)
    evaluate : callable (points (N, 2) [m]) -> ndarray (N, n)
        Shape values at points, unit mean square; 0 outside the panel.
    complete_to_hz : float or None  [Hz]
        Every in-vacuo mode of the panel at or below this frequency is in the basis (none is
        missing below it); None means up to the highest frequency held.
    evaluate_some : callable (points (N, 2) [m], indices (k,)) -> ndarray (N, k), optional
        The shapes ``indices`` only (cheaper than ``evaluate`` on a large basis); None: taken
        from ``evaluate``.
    family : RectangleShapes, DiscShapes or None
        What the shapes are (:data:`ShapeFamily`): the analytic bases say so, and the loading
        step dispatches on it; None for numerical shapes.
    """

    region: Region
    frequencies_hz: np.ndarray
    labels: Sequence[str]
    multiplicity: np.ndarray
    mean: np.ndarray
    nodal_lines: Sequence[tuple[tuple[str, int], ...]]
    evaluate: Callable[[np.ndarray], np.ndarray] = field(repr=False)
    complete_to_hz: float | None = None
    evaluate_some: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = field(
        default=None, repr=False)
    family: ShapeFamily = field(default=None, repr=False)

    @property
    def participation(self) -> np.ndarray:
        return self.mean**2

    @property
    def complete_to(self) -> float:
        """Frequency up to which no in-vacuo mode is missing  [Hz] (0 for an empty basis)."""
        if self.complete_to_hz is not None:
            return float(self.complete_to_hz)
        return float(self.frequencies_hz[-1]) if len(self) else 0.0

    def __len__(self) -> int:
        return len(self.frequencies_hz)

    def shapes(self, points: np.ndarray, indices) -> np.ndarray:
        """Shapes ``indices`` at ``points`` (N, 2) [m] → (N, len(indices)), unit mean square."""
        indices = np.asarray(indices, dtype=int)
        if self.evaluate_some is not None:
            return np.asarray(self.evaluate_some(points, indices), float)
        return np.asarray(self.evaluate(points), float)[:, indices]

