"""The one explicit cache of the physics solves, created and held by the caller.

Nothing in :mod:`auditor.physics` keeps results between calls on its own: a caller that wants
panels to share work (every panel of one type in a schedule, every tension of one panel in a
remedy scan) creates a :class:`SolveCache` and passes it as ``cache=`` to
:func:`auditor.physics.modes.modes_for` (and, below it, to
:func:`auditor.physics.fem.polygon_membrane_basis`, :func:`auditor.physics.fem.neumann_modes`
and :func:`auditor.physics.fluid.loaded_modes`). Without one, each call makes a private cache
that is dropped when it returns, so two audits in one process share nothing they did not ask
to share.

Every entry is keyed on every input its value depends on, exactly: a value is a pure function
of its key, so a hit returns what a fresh solve would return, bit for bit, whatever ran
before, and forgetting an entry (the stores are bounded) only costs a recomputation. Entries
keyed by an object (a basis, a shape) hold that object, so its identity cannot be reused while
the entry lives.

Memoised pure functions of a few hashable numbers (Gauss rules, Bessel zeros, the disc's
per-order added-mass integrals, the disc's self terms) stay as ``functools.lru_cache``
on the functions themselves: their values cannot depend on what ran before.
"""

from __future__ import annotations

from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any, Callable, Hashable, TypeVar

__all__ = ["SolveCache", "StoreInfo", "shared_size"]

T = TypeVar("T")


def shared_size(count: int) -> int:
    """The next of 16, 24, 32, 48, 64, 96, 128, 192, ... (steps of 1.5 and 4/3) at or above
    ``count``: how many entries a kept table or solve holds for a request of ``count``, so
    that nearby requests share one entry (a key that depends on the request only through this
    size), while a solve whose cost grows steeply with its size does little more than asked."""
    size = 16
    while size < count:
        size = size * 3 // 2 if size & (size - 1) == 0 else size * 4 // 3
    return size


@dataclass(frozen=True)
class StoreInfo:
    """Use of one store: ``hits``, ``misses`` (values computed) and ``entries`` kept now."""

    hits: int
    misses: int
    entries: int


class _Store:
    """A bounded least-recently-used mapping from exact keys to computed values.

    ``max_entries`` bounds the count; ``max_bytes`` (with ``size``, the bytes of a value)
    bounds the memory. The newest entry is always kept.
    """

    def __init__(self, max_entries: int, max_bytes: int | None = None,
                 size: Callable[[object], int] | None = None):
        # values of any type; an entry of get_for is the pair (owners, value)
        self._entries: OrderedDict[Hashable, Any] = OrderedDict()
        self._max_entries = max_entries
        self._max_bytes = max_bytes
        self._size = size
        self._bytes = 0
        self.hits = 0
        self.misses = 0

    def get(self, key: Hashable, make: Callable[[], T]) -> T:
        """The value stored under ``key``, or ``make()`` stored under it."""
        if key in self._entries:
            self._entries.move_to_end(key)
            self.hits += 1
            return self._entries[key]
        self.misses += 1
        value = make()
        self._put(key, value)
        return value

    def get_for(self, owners: tuple, key: Hashable, make: Callable[[], T]) -> T:
        """As :meth:`get`, for a value that depends on the objects ``owners`` themselves.

        The entry holds the owners and is found by their identity (``is``), never by
        equality, so two equal-looking shapes of different meshes are never confused.
        """
        full = (tuple(id(o) for o in owners), key)
        hit = self._entries.get(full)
        if hit is not None and all(a is b for a, b in zip(hit[0], owners)):
            self._entries.move_to_end(full)
            self.hits += 1
            return hit[1]
        self.misses += 1
        value = make()
        self._put(full, (owners, value))
        return value

    def _put(self, key: Hashable, value: object) -> None:
        if key in self._entries:
            self._forget(key)
        self._entries[key] = value
        if self._size is not None:
            self._bytes += self._size(value)
        while len(self._entries) > 1 and (
                len(self._entries) > self._max_entries
                or (self._max_bytes is not None and self._bytes > self._max_bytes)):
            self._forget(next(iter(self._entries)))

    def _forget(self, key: Hashable) -> None:
        value = self._entries.pop(key)
        if self._size is not None:
            self._bytes -= self._size(value)

    def info(self) -> StoreInfo:
        return StoreInfo(self.hits, self.misses, len(self._entries))

    def clear(self) -> None:
        self._entries.clear()
        self._bytes = 0


def _table_bytes(value) -> int:
    return int(value.nbytes)


@dataclass(eq=False)
class SolveCache:
    """Solves that panels may share, each keyed on everything its value depends on.

    Create one per audit (or per any group of solves that should share work), pass it down as
    ``cache=``, and drop it with the audit. The stores:

    ``panel_modes``
        :class:`auditor.physics.modes.PanelModes` by the panel's physical definition
        (:func:`auditor.physics.modes.physics_signature`), ``fmax``, ``max_modes``, air density
        and speed of sound.
    ``polygon_bases``
        In-vacuo finite-element bases of one outline at unit tension and density, by outline,
        cut-outs, tension ratio, number of modes and mesh accuracy; every panel of that outline
        at that tension ratio is an exact rescaling of it and shares its shape object.
    ``dirichlet``, ``neumann``
        Finite-element eigen-solutions of a normalised shape, by the shape key
        (:func:`auditor.physics.geometry.normalised_shape_key`), accuracy and number of modes.
    ``families``
        The point-quadrature family of a basis with numerical shapes, by its shapes and
        region (analytic bases carry their own family, ``ModalBasis.family``); and the shapes
        of a basis cut to its lowest modes, by the shapes cut (so that one outline at several
        tensions keeps one shape object, and its air matrices).
    ``added_mass``
        Incompressible added-mass matrices (per unit air density) of polygonal bases, by the
        shape object.
    ``rectangle_tables``
        Normalised added-mass tables of the rectangle and their diagonals (the self terms of
        :mod:`auditor.physics.uncoupled`), by aspect ratio and table size (64 MB at most in
        all).
    ``eigenpairs``
        Open-sided incompressible eigen-solutions, by the mass matrix, the stiffness divided by
        its first entry and the symmetry blocks: the same panel at another tension (stiffness
        scaled) reuses them exactly.
    ``spectra``
        Wavenumber-domain transforms of the shapes of a point-quadrature family on a polar
        grid, by the family object and the grid (tens of megabytes each: a few are kept).

    Parameters
    ----------
    max_panel_modes : int
        Most panel solutions kept (the least recently used are forgotten first): a panel
        type is judged in all its tone groups, and its remedy scanned, before the next.
    """

    max_panel_modes: int = 32
    panel_modes: _Store = field(init=False, repr=False)
    polygon_bases: _Store = field(init=False, repr=False)
    dirichlet: _Store = field(init=False, repr=False)
    neumann: _Store = field(init=False, repr=False)
    families: _Store = field(init=False, repr=False)
    added_mass: _Store = field(init=False, repr=False)
    rectangle_tables: _Store = field(init=False, repr=False)
    eigenpairs: _Store = field(init=False, repr=False)
    spectra: _Store = field(init=False, repr=False)

    def __post_init__(self) -> None:
        # Bounds by entry count, sized for the work that shares them (one panel type and its
        # remedy scan at a time; one outline at several tensions) and for memory: a
        # finite-element solve of 128 modes holds some 10 MB, a point-quadrature family or
        # spectrum a few to tens of MB, a coupled rectangle table up to about 20 MB.
        self.panel_modes = _Store(self.max_panel_modes)
        self.polygon_bases = _Store(16)
        self.dirichlet = _Store(8)
        self.neumann = _Store(4)
        self.families = _Store(32)
        self.added_mass = _Store(16)
        self.rectangle_tables = _Store(64, max_bytes=64 * 2**20, size=_table_bytes)
        self.eigenpairs = _Store(8)
        self.spectra = _Store(4)

    def _stores(self) -> dict[str, _Store]:
        return {name: getattr(self, name) for name in (
            "panel_modes", "polygon_bases", "dirichlet", "neumann", "families", "added_mass",
            "rectangle_tables", "eigenpairs", "spectra")}

    def info(self) -> dict[str, StoreInfo]:
        """Hits, misses and entries of each store, by name."""
        return {name: store.info() for name, store in self._stores().items()}

    def clear(self) -> None:
        """Forget every entry (the counts of hits and misses are kept)."""
        for store in self._stores().values():
            store.clear()
