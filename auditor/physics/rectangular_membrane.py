"""Exact in-vacuo modes of a rectangular membrane (or simply supported prestressed plate).

A rectangle ``width`` × ``length`` (``Lx`` × ``Ly``) under tensions ``Tx``, ``Ty`` along x and
y, with fixed edges, has the modes::

    f_mn = ½ √( (Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)² ),   φ_mn = 2 sin(mπx/Lx) sin(nπy/Ly)

and with a bending stiffness ``D`` and simply supported edges the same shapes are the exact
modes of the prestressed plate, ``ω² ρs = Tx kx² + Ty ky² + D k⁴`` with ``kx = mπ/Lx``,
``ky = nπ/Ly``, ``k² = kx² + ky²``. The spectrum up to ``fmax`` is built on the (m, n) grid
whose index ranges are bounded exactly, then sorted once; many panels at once through
:func:`rectangular_membrane_spectra`.

Everything is SI (m, kg/m², N/m, N·m, Hz), vectorised over modes, and free of I/O. The basis
follows the conventions of :mod:`auditor.physics.basis` (unit mean square shapes,
``mean = ∫φ dA / A``).

References
----------
.. [1] J. W. S. Rayleigh, *The Theory of Sound*, vol. I, 2nd ed., Macmillan, 1894,
   §§194–199.
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, §4.4.
.. [3] A. W. Leissa, *Vibration of Plates*, NASA SP-160, 1969, ch. 4 (simply supported
   rectangular plates) and ch. 10 (plates with in-plane forces).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial

import numpy as np

from auditor.physics.arguments import non_negative as _non_negative
from auditor.physics.arguments import positive as _positive
from auditor.physics.basis import (
    IndexedNames,
    ModalBasis,
    RectangleRegion,
    RectangleShapes,
    complete_below,
)
from auditor.physics.spectrum_limits import BOUND_SLACK as _BOUND_SLACK
from auditor.physics.spectrum_limits import frequency_limit as _frequency_limit

__all__ = [
    "MAX_GRID_POINTS",
    "RectangularSpectra",
    "rectangular_membrane_basis",
    "rectangular_membrane_frequencies",
    "rectangular_membrane_spectra",
    "rectangular_mode_frequency",
    "rectangular_mode_mean",
    "rectangular_participation",
]

#: Largest (m, n) grid one rectangular panel may build before asking for a cap (about 160 MB).
MAX_GRID_POINTS = 20_000_000

# Squared frequencies closer than this (relative) are one degenerate frequency.
_TIE_TOLERANCE = 8 * np.finfo(float).eps


def rectangular_mode_frequency(m, n, tension_x, tension_y, areal_density, width, length,
                               bending_stiffness=0.0):
    """Natural frequency of mode (m, n) of a rectangular membrane or prestressed plate.

    Vectorised: every argument broadcasts.

    Parameters
    ----------
    m, n : int or array_like of int  [-]
        Half-waves along the width (x) and along the length (y), each ≥ 1.
    tension_x, tension_y : float or array_like  [N/m]
        Membrane tension along x (across the width) and along y.
    areal_density : float or array_like  [kg/m²]
    width, length : float or array_like  [m]
        Sides along x and y.
    bending_stiffness : float or array_like, default 0  [N·m]
        Flexural rigidity D; with D > 0 the edges are taken as simply supported.

    Returns
    -------
    frequency_hz : ndarray  [Hz]
        ``f = √((Tx kx² + Ty ky² + D k⁴)/ρs) / 2π``, ``kx = mπ/Lx``, ``ky = nπ/Ly``; for D = 0
        this is ``½ √((Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)²)``.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§194–199 (membrane); Leissa, *Vibration of
    Plates*, NASA SP-160, ch. 4 and ch. 10 (simply supported plate with in-plane tension).
    """
    kx2 = (np.pi * np.asarray(m, float) / np.asarray(width, float)) ** 2
    ky2 = (np.pi * np.asarray(n, float) / np.asarray(length, float)) ** 2
    stiffness = (np.asarray(tension_x, float) * kx2 + np.asarray(tension_y, float) * ky2
                 + np.asarray(bending_stiffness, float) * (kx2 + ky2) ** 2)
    return np.sqrt(stiffness / np.asarray(areal_density, float)) / (2.0 * np.pi)


def _largest_wavenumber_squared(tension, bending_stiffness, areal_density, frequency):
    """Largest k² with ``T k² + D k⁴ ≤ ω² ρs`` (the positive root, in a cancellation-free form)."""
    inertia = (2.0 * math.pi * frequency) ** 2 * areal_density
    return 2.0 * inertia / (tension + math.sqrt(tension * tension
                                                + 4.0 * bending_stiffness * inertia))


def _rectangle_spectrum(tension_x, tension_y, areal_density, width, length, bending_stiffness,
                        fmax, max_modes, index_dtype=np.int64):
    """The core of the rectangular spectrum on checked scalars: (frequency_hz, m, n)."""
    if max_modes is not None:
        # The k×k block of lowest indices holds at least k² ≥ max_modes modes, all at or below
        # f(k, k) because f grows with m and with n: so the lowest max_modes lie below it.
        side = max(1, math.isqrt(max(max_modes - 1, 0)) + 1)
        corner = float(rectangular_mode_frequency(side, side, tension_x, tension_y,
                                                  areal_density, width, length,
                                                  bending_stiffness))
        fmax = min(fmax, corner * (1.0 + _BOUND_SLACK))
    if max_modes == 0 or fmax <= 0.0:
        return _empty_spectrum(index_dtype)
    kx2_max = _largest_wavenumber_squared(tension_x, bending_stiffness, areal_density, fmax)
    ky2_max = _largest_wavenumber_squared(tension_y, bending_stiffness, areal_density, fmax)
    m_max = int(width * math.sqrt(kx2_max) / math.pi * (1.0 + _BOUND_SLACK))
    n_max = int(length * math.sqrt(ky2_max) / math.pi * (1.0 + _BOUND_SLACK))
    if m_max == 0 or n_max == 0:
        return _empty_spectrum(index_dtype)
    if m_max * n_max > MAX_GRID_POINTS:
        raise ValueError(
            f"about {int(math.pi / 4 * m_max * n_max):,} modes lie below {fmax:g} Hz on this "
            f"{width:g} m × {length:g} m panel: lower fmax or set max_modes")

    # f² on the (m, n) grid, built by broadcasting in m-major order so that a stable sort
    # leaves equal frequencies ordered by m, then n.
    scale = 1.0 / (4.0 * math.pi * math.pi * areal_density)
    indices = np.arange(1, max(m_max, n_max) + 1, dtype=float)
    kx2 = (math.pi / width) ** 2 * (indices[:m_max] * indices[:m_max])
    ky2 = (math.pi / length) ** 2 * (indices[:n_max] * indices[:n_max])
    squared = np.add.outer((tension_x * scale) * kx2, (tension_y * scale) * ky2)
    if bending_stiffness > 0.0:
        k2 = np.add.outer(kx2, ky2)
        k2 *= k2
        k2 *= bending_stiffness * scale
        squared += k2
    squared = squared.ravel()
    below = squared <= fmax * fmax
    kept = squared[below]
    order = np.argsort(kept, kind="stable")
    flat = np.flatnonzero(below).astype(index_dtype, copy=False)[order]
    squared = kept[order]
    # Degenerate modes (f12 = f21 on a square, or m² + n² = 65 in two ways) can come out a
    # few units in the last place apart: treat those as equal, ordered by m then n (the grid's
    # flat index), with one frequency.
    tied = squared[1:] - squared[:-1] <= _TIE_TOLERANCE * squared[1:]
    if tied.any():
        group = np.concatenate(([0], np.cumsum(~tied)))
        regroup = np.lexsort((flat, group))
        flat = flat[regroup]
        starts = np.flatnonzero(np.concatenate(([True], ~tied)))
        squared = squared[starts][group]
    if max_modes is not None:
        flat, squared = flat[:max_modes], squared[:max_modes]
    frequency = np.sqrt(squared)
    m, n = np.divmod(flat, index_dtype(n_max))
    m += 1
    n += 1
    return frequency, m, n


def _empty_spectrum(index_dtype=np.int64):
    return np.empty(0), np.empty(0, dtype=index_dtype), np.empty(0, dtype=index_dtype)


def _check_rectangle(tension_x, tension_y, areal_density, width, length, bending_stiffness
                     ) -> tuple[float, float, float, float, float, float]:
    tx = _non_negative(tension_x, "tension_x", "N/m")
    ty = _non_negative(tension_y, "tension_y", "N/m")
    rho = _positive(areal_density, "areal_density", "kg/m²")
    lx = _positive(width, "width", "m")
    ly = _positive(length, "length", "m")
    d = _non_negative(bending_stiffness, "bending_stiffness", "N·m")
    if d == 0.0 and (tx == 0.0 or ty == 0.0):
        slack = "tension_x" if tx == 0.0 else "tension_y"
        raise ValueError(f"{slack} is zero and there is no bending stiffness: a slack "
                         "membrane has no natural frequencies")
    return tx, ty, rho, lx, ly, d


def rectangular_membrane_frequencies(tension_x, tension_y, areal_density, width, length, fmax,
                                     bending_stiffness=0.0, max_modes=None):
    """All natural frequencies of a rectangular membrane up to ``fmax``, ascending.

    The edges are fixed (membrane) or, with bending stiffness, simply supported (prestressed
    plate); either way the result is exact. The index ranges are bounded exactly (for a
    membrane ``m ≤ 2 fmax Lx √(ρs/Tx)``; with D the positive root of ``Tx k² + D k⁴ = ω²ρs``),
    the frequency grid is built by broadcasting and masked, then sorted once.

    Parameters
    ----------
    tension_x, tension_y : float  [N/m]
        Membrane tension along x (the width) and along y (the length), ≥ 0 (zero only with
        bending stiffness).
    areal_density : float  [kg/m²]
    width, length : float  [m]
        Sides along x and y.
    fmax : float  [Hz]
        Highest frequency kept (inclusive); may be infinite when ``max_modes`` is given.
    bending_stiffness : float, default 0  [N·m]
        Flexural rigidity D.
    max_modes : int, optional
        Keep at most this many of the lowest modes.

    Returns
    -------
    frequency_hz : ndarray of float (k,)  [Hz]
        Ascending; equal frequencies are ordered by m, then n. Empty when ``fmax`` lies below
        the fundamental.
    m, n : ndarray of int (k,)  [-]
        Half-waves along the width and along the length.

    Raises
    ------
    ValueError
        A non-positive size or areal density, a negative tension, a slack membrane, or a
        request for more than :data:`MAX_GRID_POINTS` candidate modes.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§194–199; Kinsler et al., *Fundamentals of
    Acoustics*, 4th ed., §4.4; Leissa, *Vibration of Plates*, NASA SP-160, ch. 4 and ch. 10.
    """
    checked = _check_rectangle(tension_x, tension_y, areal_density, width, length,
                               bending_stiffness)
    limit, cap = _frequency_limit(fmax, max_modes)
    return _rectangle_spectrum(*checked, limit, cap)


@dataclass(frozen=True, eq=False)
class RectangularSpectra:
    """The spectra of many rectangular panels, concatenated.

    Panel ``i``'s modes are the slice ``offsets[i]:offsets[i + 1]`` of each array.

    Parameters
    ----------
    frequency_hz : ndarray of float (k,)  [Hz]
    m, n : ndarray of int (k,)  [-]
    offsets : ndarray of int (panels + 1,)
    """

    frequency_hz: np.ndarray
    m: np.ndarray
    n: np.ndarray
    offsets: np.ndarray

    def __len__(self) -> int:
        return len(self.offsets) - 1

    def panel(self, index: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(frequency_hz, m, n) of panel ``index``."""
        start, stop = self.offsets[index], self.offsets[index + 1]
        return self.frequency_hz[start:stop], self.m[start:stop], self.n[start:stop]

    @property
    def mode_counts(self) -> np.ndarray:
        return np.diff(self.offsets)


def rectangular_membrane_spectra(tension_x, tension_y, areal_density, width, length, fmax,
                                 bending_stiffness=0.0, max_modes=None) -> RectangularSpectra:
    """Spectra of many rectangular panels at once (the batched form of the hot path).

    Each argument is a scalar or an array broadcasting to the number of panels; the inputs are
    checked once, as arrays, and each panel's spectrum is then built exactly as
    :func:`rectangular_membrane_frequencies` builds it (the per-panel cost is a few
    microseconds; the work is the modes themselves).

    Parameters
    ----------
    tension_x, tension_y : array_like  [N/m]
    areal_density : array_like  [kg/m²]
    width, length : array_like  [m]
    fmax : array_like  [Hz]
    bending_stiffness : array_like, default 0  [N·m]
    max_modes : int, optional
        Cap per panel.

    Returns
    -------
    RectangularSpectra
        ``m`` and ``n`` as int32 to halve the memory of very large batches.

    References
    ----------
    As :func:`rectangular_membrane_frequencies`.
    """
    arrays = np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (
        tension_x, tension_y, areal_density, width, length, bending_stiffness, fmax)))
    tx, ty, rho, lx, ly, d, limit = (np.atleast_1d(a).ravel() for a in arrays)
    for values, name, unit, strict in ((tx, "tension_x", "N/m", False),
                                       (ty, "tension_y", "N/m", False),
                                       (rho, "areal_density", "kg/m²", True),
                                       (lx, "width", "m", True), (ly, "length", "m", True),
                                       (d, "bending_stiffness", "N·m", False)):
        bad = ~np.isfinite(values) | ((values <= 0.0) if strict else (values < 0.0))
        if bad.any():
            first = int(np.flatnonzero(bad)[0])
            need = "greater than zero" if strict else "zero or more"
            raise ValueError(f"panel {first}: {name} must be finite and {need}, "
                             f"got {values[first]:g} {unit}")
    slack = (d == 0.0) & ((tx == 0.0) | (ty == 0.0))
    if slack.any():
        first = int(np.flatnonzero(slack)[0])
        raise ValueError(f"panel {first}: a tension is zero and there is no bending "
                         "stiffness: a slack membrane has no natural frequencies")
    for value in np.unique(limit):
        _frequency_limit(value, max_modes)
    cap = None if max_modes is None else int(max_modes)

    parts = [_rectangle_spectrum(x, y, r, w, h, b, f, cap, index_dtype=np.int32)
             for x, y, r, w, h, b, f in zip(tx.tolist(), ty.tolist(), rho.tolist(),
                                             lx.tolist(), ly.tolist(), d.tolist(),
                                             limit.tolist())]
    offsets = np.zeros(len(parts) + 1, dtype=np.int64)
    np.cumsum([len(p[0]) for p in parts], out=offsets[1:])
    frequency = np.concatenate([p[0] for p in parts]) if parts else np.empty(0)
    m = np.concatenate([p[1] for p in parts]) if parts else np.empty(0, np.int32)
    n = np.concatenate([p[2] for p in parts]) if parts else np.empty(0, np.int32)
    return RectangularSpectra(frequency, m, n, offsets)


def rectangular_mode_mean(m, n):
    """Mean of the unit-mean-square shape ``2 sin(mπx/Lx) sin(nπy/Ly)`` over the rectangle.

    Parameters
    ----------
    m, n : int or array_like of int  [-]

    Returns
    -------
    mean : ndarray  [-]
        ``8 / (π² m n)`` when m and n are both odd, else 0 (∫₀^L sin(mπx/L) dx = (1 − cos mπ)
        L/(mπ)).

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§194–199 (the shapes); elementary integration.
    """
    m = np.asarray(m)
    n = np.asarray(n)
    odd = (m % 2 == 1) & (n % 2 == 1)
    return np.where(odd, 8.0 / (np.pi**2 * np.maximum(m, 1) * np.maximum(n, 1)), 0.0)


def rectangular_participation(m, n):
    """Uniform-pressure participation factor ``(∫φ dA)² / (A ∫φ² dA)`` of mode (m, n).

    Parameters
    ----------
    m, n : int or array_like of int  [-]

    Returns
    -------
    participation : ndarray  [-]
        ``64 / (π⁴ m² n²)`` for odd m and n, else 0. Summed over all modes it is 1.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§194–199; the sum follows from
    Σ_odd 1/m² = π²/8 (Abramowitz & Stegun 23.2.20).
    """
    return rectangular_mode_mean(m, n) ** 2


def _rectangle_shapes(points, width, length, m, n, distinct_m, m_slot, distinct_n, n_slot):
    """φ = 2 sin(mπx/Lx) sin(nπy/Ly) at ``points`` (N, 2), 0 outside; shape (N, modes)."""
    points = np.asarray(points, dtype=float).reshape(-1, 2)
    x, y = points[:, 0], points[:, 1]
    inside = (x >= 0.0) & (x <= width) & (y >= 0.0) & (y <= length)
    # Sine tables per distinct index, then one gather per mode.
    along_x = np.sin(np.multiply.outer(x, distinct_m * (np.pi / width)))
    along_y = np.sin(np.multiply.outer(y, distinct_n * (np.pi / length)))
    values = along_x[:, m_slot]
    values *= along_y[:, n_slot]
    values *= 2.0 * inside[:, None]
    return values


def _rectangle_some_shapes(points, indices, width, length, m, n):
    """Shapes ``indices`` of the basis only, at ``points`` (N, 2); shape (N, len(indices))."""
    indices = np.asarray(indices, dtype=int)
    return _rectangle_shapes(points, width, length, m[indices], n[indices],
                             m[indices].astype(float), np.arange(len(indices)),
                             n[indices].astype(float), np.arange(len(indices)))


def _rectangle_label(m: int, n: int) -> str:
    """Label "(m,n)" of rectangle mode (m, n)."""
    return f"({m},{n})"


def _rectangle_nodal_lines(m: int, n: int) -> tuple[tuple[str, int], ...]:
    """Nodal lines of rectangle mode (m, n): m − 1 along the length, n − 1 along the width."""
    return (("parallel to length", m - 1), ("parallel to width", n - 1))



def rectangular_membrane_basis(tension_x, tension_y, areal_density, width, length, fmax,
                               bending_stiffness=0.0, max_modes=None) -> ModalBasis:
    """In-vacuo modal basis of a rectangular membrane (or simply supported prestressed plate).

    Parameters
    ----------
    tension_x, tension_y : float  [N/m]
    areal_density : float  [kg/m²]
    width, length : float  [m]
        Sides along x and y; the origin is at a corner.
    fmax : float  [Hz]
    bending_stiffness : float, default 0  [N·m]
    max_modes : int, optional

    Returns
    -------
    ModalBasis
        Shapes ``φ = 2 sin(mπx/Lx) sin(nπy/Ly)`` (unit mean square), labels "(m,n)",
        multiplicity 1, ``mean`` from :func:`rectangular_mode_mean`, nodal lines
        (("parallel to length", m − 1), ("parallel to width", n − 1)): the m − 1 lines
        x = const run along the length, the n − 1 lines y = const along the width.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§194–199; Leissa, *Vibration of Plates*, NASA
    SP-160, ch. 4 and ch. 10.
    """
    checked = _check_rectangle(tension_x, tension_y, areal_density, width, length,
                               bending_stiffness)
    limit, cap = _frequency_limit(fmax, max_modes)
    # one mode beyond a cap tells whether the cap cut the spectrum short of fmax
    frequency, m, n = _rectangle_spectrum(*checked, limit, None if cap is None else cap + 1)
    complete = limit
    if cap is not None and len(frequency) > cap:
        complete = min(limit, complete_below(frequency, cap))
        frequency, m, n = frequency[:cap], m[:cap], n[:cap]
    lx, ly = checked[3], checked[4]
    distinct_m, m_slot = np.unique(m, return_inverse=True)
    distinct_n, n_slot = np.unique(n, return_inverse=True)
    evaluate = partial(_rectangle_shapes, width=lx, length=ly, m=m, n=n,
                       distinct_m=distinct_m.astype(float), m_slot=m_slot,
                       distinct_n=distinct_n.astype(float), n_slot=n_slot)
    return ModalBasis(
        region=RectangleRegion(lx, ly),
        frequencies_hz=frequency,
        labels=IndexedNames(m, n, _rectangle_label),
        multiplicity=np.ones(len(frequency), dtype=int),
        mean=rectangular_mode_mean(m, n),
        nodal_lines=IndexedNames(m, n, _rectangle_nodal_lines),
        evaluate=evaluate,
        complete_to_hz=complete,
        evaluate_some=partial(_rectangle_some_shapes, width=lx, length=ly, m=m, n=n),
        family=RectangleShapes(lx, ly, m, n),
    )

