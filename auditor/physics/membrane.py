"""Exact in-vacuo modes of rectangular and circular membranes (the analytic path).

A membrane under uniform tension with fixed edges obeys ``-T ∇²w + ρs ∂²w/∂t² = p``. On a
rectangle and on a disc its modes are known in closed form, so these panels need no mesh:

- rectangle ``width`` × ``length`` (``Lx`` × ``Ly``), tensions ``Tx``, ``Ty`` along x and y::

      f_mn = ½ √( (Tx/ρs)(m/Lx)² + (Ty/ρs)(n/Ly)² ),   φ_mn = 2 sin(mπx/Lx) sin(nπy/Ly)

  and with a bending stiffness ``D`` and simply supported edges the same shapes are the exact
  modes of the prestressed plate, ``ω² ρs = Tx kx² + Ty ky² + D k⁴`` with ``kx = mπ/Lx``,
  ``ky = nπ/Ly``, ``k² = kx² + ky²``;
- disc of radius ``a``, tension ``T``::

      f_mn = j_mn √(T/ρs) / (2π a),   φ_mn ∝ J_m(j_mn r/a) cos(mθ)

  with ``j_mn`` the n-th positive zero of the Bessel function ``J_m``: m nodal diameters and
  n − 1 interior nodal circles; for m ≥ 1 the cos and sin shapes form a degenerate pair.

Everything is SI (m, kg/m², N/m, N·m, Hz), vectorised over modes, and free of I/O. The bases
follow the conventions of :mod:`auditor.physics.basis`: shapes of unit mean square
(∫φ² dA = A) and ``mean = ∫φ dA / A``, so the uniform-pressure participation factor is
``mean**2``.

References
----------
.. [1] J. W. S. Rayleigh, *The Theory of Sound*, vol. I, 2nd ed., Macmillan, 1894,
   §§194–199 (rectangular membrane) and §§200–206 (circular membrane).
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, §§4.4–4.5.
.. [3] A. W. Leissa, *Vibration of Plates*, NASA SP-160, 1969, ch. 4 (simply supported
   rectangular plates) and ch. 10 (plates with in-plane forces).
.. [4] M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*, NBS AMS 55,
   1964, §9.1 (Bessel function relations) and §9.5 (zeros).
.. [5] G. N. Watson, *A Treatise on the Theory of Bessel Functions*, 2nd ed., Cambridge,
   1944, §5.11 (Lommel's integrals) and ch. XV (zeros).
"""

from __future__ import annotations

import math
from functools import lru_cache
from dataclasses import dataclass
from functools import partial

import numpy as np
from scipy import special

from auditor.physics.arguments import non_negative as _non_negative
from auditor.physics.arguments import positive as _positive
from auditor.physics.basis import (
    CircleRegion,
    DiscShapes,
    IndexedNames,
    ModalBasis,
    RectangleRegion,
    RectangleShapes,
    complete_below,
)

__all__ = [
    "RectangularSpectra",
    "bessel_zeros_below",
    "circular_membrane_basis",
    "circular_membrane_frequencies",
    "circular_mode_frequency",
    "circular_participation",
    "rectangular_membrane_basis",
    "rectangular_membrane_frequencies",
    "rectangular_membrane_spectra",
    "rectangular_mode_frequency",
    "rectangular_mode_mean",
    "rectangular_participation",
]

#: Largest (m, n) grid one rectangular panel may build before asking for a cap (about 160 MB).
MAX_GRID_POINTS = 20_000_000

# Relative slack on the exact index bounds so that rounding never drops a mode at fmax; the
# mask on the computed frequency decides membership.
_BOUND_SLACK = 1e-9

# Squared frequencies closer than this (relative) are one degenerate frequency.
_TIE_TOLERANCE = 8 * np.finfo(float).eps


# --------------------------------------------------------------------------------------------
# Checks on user-supplied numbers (clear messages, never a traceback from deep inside numpy)
# --------------------------------------------------------------------------------------------


def _frequency_limit(fmax, max_modes) -> tuple[float, int | None]:
    if max_modes is not None:
        try:
            whole = float(max_modes).is_integer() and not isinstance(max_modes, bool)
        except (TypeError, ValueError):
            whole = False
        if not whole or max_modes < 0:
            raise ValueError(f"max_modes must be a whole number ≥ 0, got {max_modes!r}")
        max_modes = int(max_modes)
    try:
        limit = float(fmax)
    except (TypeError, ValueError):
        raise ValueError(f"fmax must be a number in Hz, got {fmax!r}") from None
    if math.isnan(limit) or limit < 0.0:
        raise ValueError(f"fmax must be zero or more, got {limit!r} Hz")
    if math.isinf(limit) and max_modes is None:
        raise ValueError("fmax is infinite: give a finite fmax [Hz] or a max_modes cap")
    return limit, max_modes


# --------------------------------------------------------------------------------------------
# Rectangle
# --------------------------------------------------------------------------------------------

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


def _check_rectangle(tension_x, tension_y, areal_density, width, length, bending_stiffness):
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

    parts = [_rectangle_spectrum(*row, cap, index_dtype=np.int32) for row in zip(
        tx.tolist(), ty.tolist(), rho.tolist(), lx.tolist(), ly.tolist(), d.tolist(),
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


def _circle_label(m: int, n: int) -> str:
    """Label "(m,n)" of disc mode (m, n)."""
    return f"({m},{n})"


def _circle_nodal_lines(m: int, n: int) -> tuple[tuple[str, int], ...]:
    """Nodal lines of disc mode (m, n): m diameters and n − 1 circles."""
    return (("diameters", m), ("circles", n - 1))


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


# --------------------------------------------------------------------------------------------
# Circle
# --------------------------------------------------------------------------------------------

# Sampling step for bracketing Bessel zeros. Consecutive positive zeros of J_m are never closer
# than j_{0,2} − j_{0,1} ≈ 3.12 (the gaps exceed π for m ≥ 1 and rise towards π for m = 0;
# Watson, ch. XV), so a step of 1 puts at most one zero in each interval.
_ZERO_SEARCH_STEP = 2.0


def bessel_zeros_below(x_max):
    """Every positive zero ``j_{m,n} ≤ x_max`` of the Bessel functions J_m, m = 0, 1, 2, ...

    The zeros below the next power of two above ``x_max`` are computed once and kept (each is
    refined to machine precision on its own, so the bound does not change them); this
    returns those up to ``x_max``. See ``_bessel_zeros_below`` for the method.

    Parameters
    ----------
    x_max : float  [-]

    Returns
    -------
    order, rank : ndarray of int (k,)  [-]
        m and n of each zero, sorted by m, then n.
    zero : ndarray of float (k,)  [-]
        j_{m,n}.
    """
    x_max = float(x_max)
    if not x_max > 0.0:
        empty_int = np.empty(0, dtype=np.int64)
        return empty_int, empty_int, np.empty(0)
    order, rank, zero, _ = _zeros_and_slopes_below(x_max)
    return order, rank, zero


def _zeros_and_slopes_below(x_max: float):
    """As :func:`bessel_zeros_below` (``x_max`` > 0), with ``J_{m+1}(j_{m,n})`` of each zero
    (= −J_m'(j_{m,n}), the scale of its mode shape)."""
    bound = 2.0 ** math.ceil(math.log2(max(x_max, 1.0)))
    order, rank, zero, slope = _bessel_zeros_below_cached(bound)
    keep = zero <= x_max
    return order[keep], rank[keep], zero[keep], slope[keep]


@lru_cache(maxsize=32)
def _bessel_zeros_below_cached(bound: float):
    order, rank, zero = _bessel_zeros_below(bound)
    slope = special.jv(order + 1.0, zero)
    for array in (order, rank, zero, slope):
        array.setflags(write=False)   # memoised (a pure function of the bound)
    return order, rank, zero, slope


def _bessel_zeros_below(x_max):
    """Every positive zero ``j_{m,n} ≤ x_max`` of the Bessel functions J_m, m = 0, 1, 2, ...

    Vectorised over all orders and zeros at once: J_m is sampled on a grid starting at
    ``x = m`` (no zero lies in (0, m]: j_{m,1} > m), sign changes bracket each zero, and a
    safeguarded Newton iteration with ``J_m' = (J_{m−1} − J_{m+1})/2`` refines it to machine
    precision.

    Parameters
    ----------
    x_max : float  [-]

    Returns
    -------
    order, rank : ndarray of int (k,)  [-]
        m and n of each zero, sorted by m, then n.
    zero : ndarray of float (k,)  [-]
        j_{m,n}.

    References
    ----------
    Abramowitz & Stegun, §9.1.27 (derivative), §9.5 (zeros, j_{m,1} > m); Watson, *A Treatise
    on the Theory of Bessel Functions*, ch. XV (spacing of zeros).
    """
    x_max = float(x_max)
    empty_int = np.empty(0, dtype=np.int64)
    if not x_max > 0.0:
        return empty_int, empty_int, np.empty(0)
    orders = np.arange(int(math.floor(x_max)) + 1)
    steps = int(math.ceil(x_max / _ZERO_SEARCH_STEP)) + 2
    x = orders[:, None] + _ZERO_SEARCH_STEP * np.arange(steps)[None, :]
    needed = x <= x_max + _ZERO_SEARCH_STEP  # the samples that can bracket a zero ≤ x_max
    values = np.zeros(x.shape)
    values[needed] = special.jv(np.broadcast_to(orders[:, None], x.shape)[needed], x[needed])
    positive = values > 0.0
    change = (positive[:, :-1] != positive[:, 1:]) & needed[:, 1:]
    change &= x[:, :-1] <= x_max  # the zero may still exceed x_max; filtered below
    row, col = np.nonzero(change)
    if row.size == 0:
        return empty_int, empty_int, np.empty(0)
    order = orders[row].astype(float)
    low = x[row, col].astype(float)
    high = x[row, col + 1].astype(float)
    low_positive = positive[row, col]
    # start from the chord between the bracketing samples, then Newton (bisect if it leaves)
    value_low, value_high = values[row, col], values[row, col + 1]
    root = low + (high - low) * value_low / (value_low - value_high)
    root = np.where((root > low) & (root < high), root, 0.5 * (low + high))
    active = np.arange(root.size)
    tolerance = 4.0 * np.finfo(float).eps
    for _ in range(60):
        rt, lo, hi, nu = root[active], low[active], high[active], order[active]
        value = special.jv(nu, rt)
        slope = 0.5 * (special.jv(nu - 1.0, rt) - special.jv(nu + 1.0, rt))
        # keep the bracket: the end whose sign the value shares moves to the iterate
        same_as_low = (value > 0.0) == low_positive[active]
        lo = np.where(same_as_low, rt, lo)
        hi = np.where(same_as_low, hi, rt)
        with np.errstate(divide="ignore", invalid="ignore"):
            newton = rt - value / slope
        inside = (newton >= lo) & (newton <= hi) & np.isfinite(newton)
        updated = np.where(inside, newton, 0.5 * (lo + hi))
        updated = np.where(value == 0.0, rt, updated)
        root[active], low[active], high[active] = updated, lo, hi
        converged = np.abs(updated - rt) <= tolerance * rt
        active = active[~converged]
        if active.size == 0:
            break
    keep = root <= x_max
    order_int = orders[row][keep].astype(np.int64)
    # rank within each order: position of the sign change among that order's changes
    first_of_order = np.searchsorted(row, row, side="left")
    rank = (np.arange(row.size) - first_of_order + 1)[keep].astype(np.int64)
    return order_int, rank, root[keep]


def circular_mode_frequency(zero, tension, areal_density, radius):
    """Natural frequency of the circular-membrane mode whose Bessel zero is ``zero``.

    Parameters
    ----------
    zero : float or array_like  [-]
        j_{m,n}, the n-th positive zero of J_m.
    tension : float or array_like  [N/m]
    areal_density : float or array_like  [kg/m²]
    radius : float or array_like  [m]

    Returns
    -------
    frequency_hz : ndarray  [Hz]
        ``j_{m,n} √(T/ρs) / (2π a)``.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§200–206; Kinsler et al., *Fundamentals of
    Acoustics*, 4th ed., §4.5.
    """
    wave_speed = np.sqrt(np.asarray(tension, float) / np.asarray(areal_density, float))
    return np.asarray(zero, float) * wave_speed / (2.0 * np.pi * np.asarray(radius, float))


def circular_participation(m, zero):
    """Uniform-pressure participation factor of the circular-membrane mode (m, n).

    Parameters
    ----------
    m : int or array_like of int  [-]
        Nodal diameters.
    zero : float or array_like  [-]
        j_{m,n}.

    Returns
    -------
    participation : ndarray  [-]
        ``4 / j_{0,n}²`` for m = 0 (from ∫₀^a J₀(jr/a) r dr = a² J₁(j)/j and
        ∫₀^a J₀(jr/a)² r dr = a² J₁(j)²/2), 0 for m ≥ 1. Summed over n it is 1, because
        Σ j_{0,n}⁻² = 1/4.

    References
    ----------
    Abramowitz & Stegun, §9.1.30 (d/dx[x J₁(x)] = x J₀(x)); Watson, *A Treatise on the Theory
    of Bessel Functions*, §5.11 (Lommel's integral) and §15.51 (Rayleigh's sum Σ j⁻²).
    """
    m = np.asarray(m)
    zero = np.asarray(zero, float)
    with np.errstate(divide="ignore"):
        return np.where(m == 0, 4.0 / zero**2, 0.0)


def _check_circle(tension, areal_density, radius):
    return (_positive(tension, "tension", "N/m"),
            _positive(areal_density, "areal_density", "kg/m²"),
            _positive(radius, "radius", "m"))


def _circle_spectrum(tension, areal_density, radius, fmax, max_modes):
    """(frequency_hz, m, n, zero) of a checked circular membrane, ascending."""
    to_frequency = math.sqrt(tension / areal_density) / (2.0 * math.pi * radius)
    if max_modes == 0:
        return _empty_circle()
    if math.isinf(fmax):
        # Grow the search until it holds max_modes zeros.
        x_max = math.pi * (math.sqrt(max_modes) + 2.0)
        while True:
            order, rank, zero, slope = _zeros_and_slopes_below(x_max)
            if order.size >= max_modes:
                break
            x_max *= 1.5
    else:
        x_max = fmax / to_frequency
        order, rank, zero, slope = _zeros_and_slopes_below(x_max * (1.0 + _BOUND_SLACK))
    frequency = zero * to_frequency
    keep = frequency <= fmax
    order, rank, zero, frequency = order[keep], rank[keep], zero[keep], frequency[keep]
    slope = slope[keep]
    ascending = np.argsort(frequency, kind="stable")
    if max_modes is not None:
        ascending = ascending[:max_modes]
    return (frequency[ascending], order[ascending], rank[ascending], zero[ascending],
            slope[ascending])


def _empty_circle():
    none = np.empty(0, dtype=np.int64)
    return np.empty(0), none, none.copy(), np.empty(0), np.empty(0)


def circular_membrane_frequencies(tension, areal_density, radius, fmax, max_modes=None):
    """All natural frequencies of a circular membrane up to ``fmax``, ascending.

    Parameters
    ----------
    tension : float  [N/m]
        Uniform (isotropic) tension.
    areal_density : float  [kg/m²]
    radius : float  [m]
    fmax : float  [Hz]
        Inclusive; may be infinite when ``max_modes`` is given.
    max_modes : int, optional
        Keep at most this many of the lowest (m, n) entries (a cos/sin pair counts once).

    Returns
    -------
    frequency_hz : ndarray of float (k,)  [Hz]
        ``j_{m,n} √(T/ρs) / (2π a)``, ascending.
    m : ndarray of int (k,)
        Nodal diameters.
    n : ndarray of int (k,)
        Rank of the zero; n − 1 interior nodal circles.
    multiplicity : ndarray of int (k,)
        2 for m ≥ 1 (the cos and sin shapes), 1 for m = 0.

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§200–206; Kinsler et al., *Fundamentals of
    Acoustics*, 4th ed., §4.5; Abramowitz & Stegun, §9.5.
    """
    checked = _check_circle(tension, areal_density, radius)
    limit, cap = _frequency_limit(fmax, max_modes)
    frequency, m, n, _, _ = _circle_spectrum(*checked, limit, cap)
    return frequency, m, n, np.where(m >= 1, 2, 1)


def _circle_shapes(points, radius, m, zero, scale):
    """φ = c J_m(j r/a) cos(mθ) at ``points`` (N, 2), 0 outside; shape (N, modes)."""
    points = np.asarray(points, dtype=float).reshape(-1, 2)
    r = np.hypot(points[:, 0], points[:, 1])
    theta = np.arctan2(points[:, 1], points[:, 0])
    values = special.jv(m[None, :], np.multiply.outer(r / radius, zero))
    values *= np.cos(np.multiply.outer(theta, m))
    values *= scale[None, :]
    values[r > radius, :] = 0.0
    return values


def _circle_some_shapes(points, indices, radius, m, zero, scale):
    """Shapes ``indices`` of the basis only, at ``points`` (N, 2); shape (N, len(indices))."""
    indices = np.asarray(indices, dtype=int)
    return _circle_shapes(points, radius, m[indices], zero[indices], scale[indices])


def circular_membrane_basis(tension, areal_density, radius, fmax, max_modes=None) -> ModalBasis:
    """In-vacuo modal basis of a circular membrane with a fixed edge.

    Parameters
    ----------
    tension : float  [N/m]
    areal_density : float  [kg/m²]
    radius : float  [m]
        The origin is at the centre.
    fmax : float  [Hz]
    max_modes : int, optional

    Returns
    -------
    ModalBasis
        One representative per cos/sin pair, ``φ = c J_m(j r/a) cos(mθ)`` with
        ``c = 1/|J₁(j)|`` for m = 0 and ``c = √2/|J_{m+1}(j)|`` for m ≥ 1, so that ∫φ² dA = πa²
        (Lommel: ∫₀^a J_m(jr/a)² r dr = a² J_{m+1}(j)²/2 at a zero of J_m). Positive at the
        centre for m = 0 (so ``mean = 2 sgn(J₁(j))/j`` alternates in sign with n), 0 mean for
        m ≥ 1. Labels "(m,n)", multiplicity 2 for m ≥ 1, nodal lines
        (("diameters", m), ("circles", n − 1)).

    References
    ----------
    Rayleigh, *The Theory of Sound*, vol. I, §§200–206; Watson, *A Treatise on the Theory of
    Bessel Functions*, §5.11; Abramowitz & Stegun, §9.1.30.
    """
    checked = _check_circle(tension, areal_density, radius)
    limit, cap = _frequency_limit(fmax, max_modes)
    frequency, m, n, zero, next_order = _circle_spectrum(*checked, limit,
                                                         None if cap is None else cap + 1)
    complete = limit
    if cap is not None and len(frequency) > cap:
        complete = min(limit, complete_below(frequency, cap))
        frequency, m, n, zero = frequency[:cap], m[:cap], n[:cap], zero[:cap]
        next_order = next_order[:cap]
    a = checked[2]
    scale = np.where(m == 0, 1.0, math.sqrt(2.0)) / np.abs(next_order)
    mean = np.where(m == 0, 2.0 * np.sign(next_order) / zero, 0.0)
    evaluate = partial(_circle_shapes, radius=a, m=m.astype(float), zero=zero, scale=scale)
    return ModalBasis(
        region=CircleRegion(a),
        frequencies_hz=frequency,
        labels=IndexedNames(m, n, _circle_label),
        multiplicity=np.where(m >= 1, 2, 1),
        mean=mean,
        nodal_lines=IndexedNames(m, n, _circle_nodal_lines),
        evaluate=evaluate,
        complete_to_hz=complete,
        evaluate_some=partial(_circle_some_shapes, radius=a, m=m.astype(float), zero=zero,
                              scale=scale),
        family=DiscShapes(a, m, zero, scale, n - 1),
    )
