"""Exact in-vacuo modes of a circular membrane with a fixed edge.

A disc of radius ``a`` under uniform tension ``T`` has the modes::

    f_mn = j_mn √(T/ρs) / (2π a),   φ_mn ∝ J_m(j_mn r/a) cos(mθ)

with ``j_mn`` the n-th positive zero of the Bessel function ``J_m``: m nodal diameters and
n − 1 interior nodal circles; for m ≥ 1 the cos and sin shapes form a degenerate pair. The
zeros are found here for all orders at once (:func:`bessel_zeros_below`).

Everything is SI (m, kg/m², N/m, Hz), vectorised over modes, and free of I/O. The basis
follows the conventions of :mod:`auditor.physics.basis` (unit mean square shapes,
``mean = ∫φ dA / A``).

References
----------
.. [1] J. W. S. Rayleigh, *The Theory of Sound*, vol. I, 2nd ed., Macmillan, 1894,
   §§200–206.
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, §4.5.
.. [3] M. Abramowitz and I. A. Stegun, *Handbook of Mathematical Functions*, NBS AMS 55,
   1964, §9.1 (Bessel function relations) and §9.5 (zeros).
.. [4] G. N. Watson, *A Treatise on the Theory of Bessel Functions*, 2nd ed., Cambridge,
   1944, §5.11 (Lommel's integrals) and ch. XV (zeros).
"""

from __future__ import annotations

import math
from functools import partial

import numpy as np
from scipy import special

from auditor.physics.arguments import positive as _positive
from auditor.physics.basis import CircleRegion, DiscShapes, IndexedNames, ModalBasis, complete_below
from auditor.physics.bessel import bessel_zeros_below, zeros_and_slopes_below
from auditor.physics.spectrum_limits import BOUND_SLACK as _BOUND_SLACK
from auditor.physics.spectrum_limits import frequency_limit as _frequency_limit

__all__ = [
    "bessel_zeros_below",
    "circular_membrane_basis",
    "circular_membrane_frequencies",
    "circular_mode_frequency",
    "circular_participation",
]


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


def _check_circle(tension, areal_density, radius) -> tuple[float, float, float]:
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
            order, rank, zero, slope = zeros_and_slopes_below(x_max)
            if order.size >= max_modes:
                break
            x_max *= 1.5
    else:
        x_max = fmax / to_frequency
        order, rank, zero, slope = zeros_and_slopes_below(x_max * (1.0 + _BOUND_SLACK))
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



def _circle_label(m: int, n: int) -> str:
    """Label "(m,n)" of disc mode (m, n)."""
    return f"({m},{n})"


def _circle_nodal_lines(m: int, n: int) -> tuple[tuple[str, int], ...]:
    """Nodal lines of disc mode (m, n): m diameters and n − 1 circles."""
    return (("diameters", m), ("circles", n - 1))



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
