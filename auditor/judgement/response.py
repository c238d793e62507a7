"""How strongly a panel answers a tone: amplification, mount isolation, modal overlap.

Pure functions of numbers and arrays (SI; frequencies in Hz), no I/O.

- A mode of natural frequency ``f_n`` and loss factor η driven at ``f`` answers with the
  hysteretic single-degree-of-freedom amplification ``|H| = 1/√((1 − ρ²)² + η²)``,
  ``ρ = f/f_n``: 1 when driven quasi-statically, ``1/η`` at resonance.
- How much of that a load reaches is the mode's participation ``(∫φ dA)²/(A ∫φ² dA)``: for a
  uniform pressure (sound) and equally for a frame moving as one (the inertial load
  ``−ρs·a`` is uniform too).
- Equipment on vibration isolators passes a fraction ``T`` of its force to the structure:
  ``T = √((1 + (2ζr)²)/((1 − r²)² + (2ζr)²))``, ``r = f/f_mount``, with the mount's natural
  frequency from its static deflection δ, ``f_mount = √(g/δ)/2π`` (15.76/√δ[mm] Hz).
- The response of a pair in decibels, ``20·log10(participation × |H| × T)``: 0 dB is a fully
  participating mode driven quasi-statically through a rigid path.
- Modal overlap ``M = η·f·n(f)``, ``n(f)`` the modal density: where ``M ≥ 1`` the half-power
  bands of neighbouring modes overlap, every tone lies near some mode, and nearness to one
  mode stops meaning much.

References
----------
.. [1] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002: ch. 2 (single-degree-of-freedom response, hysteretic damping,
   half-power bandwidth) and the chapter on vibration isolation (transmissibility,
   natural frequency from static deflection).
.. [2] L. Cremer, M. Heckl and B. A. T. Petersson, *Structure-Borne Sound*, 3rd ed.,
   Springer, 2005: modal density of plates and membranes, modal overlap.
.. [3] H. Weyl, "Über die asymptotische Verteilung der Eigenwerte", *Nachrichten der
   Königlichen Gesellschaft der Wissenschaften zu Göttingen*, 1911, pp. 110–117:
   ``N(k) ≈ A k²/4π`` eigenvalues below wavenumber k for a region of area A.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = [
    "STANDARD_GRAVITY",
    "SPRING_MIN_DEFLECTION",
    "SPRING_DAMPING",
    "ELASTOMER_DAMPING",
    "mount_natural_frequency_hz",
    "default_isolator_damping",
    "isolator_kind",
    "transmissibility",
    "modal_amplification",
    "response_db",
    "modal_density",
    "weyl_mode_count",
    "modal_overlap_factor",
    "modal_overlap_frequency_hz",
]

#: Standard acceleration of gravity [m/s²] (CGPM 1901, the conventional value).
STANDARD_GRAVITY = 9.80665

#: Static deflection from which an isolator is taken to be a steel spring [m]: elastomer
#: mounts and pads give up to about 10–12 mm, open steel springs 25 mm and more (common
#: practice of isolator selection tables).
SPRING_MIN_DEFLECTION = 0.012

#: Damping ratio ζ of steel spring isolators when the schedule gives none: springs have very
#: little damping, ζ ≈ 0.005–0.01 (common practice, from memory); the upper value is taken,
#: which errs toward more transmissibility above the mount's frequency.
SPRING_DAMPING = 0.01

#: Damping ratio ζ of elastomer mounts and pads when the schedule gives none, ζ ≈ 0.05
#: (common practice, from memory).
ELASTOMER_DAMPING = 0.05


def mount_natural_frequency_hz(static_deflection: float,
                               gravity: float = STANDARD_GRAVITY) -> float:
    """Natural frequency of equipment on isolators from their static deflection.

    Parameters
    ----------
    static_deflection : float  [m]
        Deflection of the isolators under the equipment's weight.
    gravity : float  [m/s²]

    Returns
    -------
    float  [Hz]
        ``√(g/δ) / 2π``; 15.76/√δ[mm] Hz, e.g. 3.15 Hz for 25 mm (common practice).

    References
    ----------
    .. [1] Harris' Shock and Vibration Handbook, 5th ed., vibration isolation chapter.
    """
    if not (static_deflection > 0 and math.isfinite(static_deflection)):
        raise ValueError(f"static deflection must be a positive length, not {static_deflection!r}")
    return math.sqrt(gravity / static_deflection) / (2.0 * math.pi)


def isolator_kind(static_deflection: float | None) -> str:
    """"rigid" (no deflection given), "elastomer" (below ``SPRING_MIN_DEFLECTION``) or
    "steel spring" (common practice)."""
    if static_deflection is None:
        return "rigid"
    return "steel spring" if static_deflection >= SPRING_MIN_DEFLECTION else "elastomer"


def default_isolator_damping(static_deflection: float) -> float:
    """Damping ratio ζ [-] for an isolator of this static deflection [m] when none is given:
    ``SPRING_DAMPING`` for a steel spring, ``ELASTOMER_DAMPING`` for elastomer."""
    return SPRING_DAMPING if isolator_kind(static_deflection) == "steel spring" \
        else ELASTOMER_DAMPING


def transmissibility(frequency_hz: Any, natural_frequency_hz: Any, damping_ratio: Any) -> Any:
    """Force (or motion) transmissibility of a viscously damped single-degree-of-freedom mount.

    Parameters
    ----------
    frequency_hz : float or ndarray  [Hz]
        Forcing frequency.
    natural_frequency_hz : float or ndarray  [Hz]
        The mount's natural frequency; NaN for a rigid path (then T = 1).
    damping_ratio : float or ndarray  [-]
        ζ, the fraction of critical damping.

    Returns
    -------
    float or ndarray  [-]
        ``T = √((1 + (2ζr)²) / ((1 − r²)² + (2ζr)²))``, ``r = f/f_n``: 1 at r = 0, ``≈ 1/(2ζ)``
        at r = 1, 1 at r = √2 (for any ζ), below 1 above it; 1/3 at r = 2 with ζ = 0.

    References
    ----------
    .. [1] Harris' Shock and Vibration Handbook, 5th ed., vibration isolation chapter.
    """
    f = np.asarray(frequency_hz, dtype=float)
    fn = np.asarray(natural_frequency_hz, dtype=float)
    zeta = np.asarray(damping_ratio, dtype=float)
    rigid = ~np.isfinite(fn)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(rigid, 0.0, f / np.where(rigid, 1.0, fn))
        two_zeta_r = 2.0 * np.where(np.isfinite(zeta), zeta, 0.0) * r
        t = np.sqrt((1.0 + two_zeta_r**2) / ((1.0 - r**2) ** 2 + two_zeta_r**2))
    out = np.where(rigid, 1.0, t)
    return float(out) if out.ndim == 0 else out


def modal_amplification(frequency_ratio: Any, loss_factor: Any) -> Any:
    """Dynamic amplification of a mode with hysteretic (structural) damping.

    Parameters
    ----------
    frequency_ratio : float or ndarray  [-]
        ρ = forcing frequency / natural frequency.
    loss_factor : float or ndarray  [-]
        η of the mode.

    Returns
    -------
    float or ndarray  [-]
        ``|H| = 1/√((1 − ρ²)² + η²)``: the mode's amplitude over its static amplitude under
        the same force; ``1/η`` at resonance.

    References
    ----------
    .. [1] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 (complex stiffness
       ``k(1 + iη)``).
    """
    rho2 = np.asarray(frequency_ratio, dtype=float) ** 2
    eta = np.asarray(loss_factor, dtype=float)
    out = 1.0 / np.sqrt((1.0 - rho2) ** 2 + eta**2)
    return float(out) if out.ndim == 0 else out


def response_db(participation: Any, amplification: Any, transmissibility: Any = 1.0) -> Any:
    """A pair's response, ``20·log10(participation × amplification × transmissibility)``.

    0 dB is a fully participating mode (participation 1) driven quasi-statically through a
    rigid path; −inf for a mode the load cannot reach (participation 0).
    """
    product = (np.asarray(participation, float) * np.asarray(amplification, float)
               * np.asarray(transmissibility, float))
    with np.errstate(divide="ignore"):
        out = 20.0 * np.log10(np.maximum(product, 0.0))
    return float(out) if out.ndim == 0 else out


def _wavenumber_squared(omega: Any, areal_density: float, tension: float,
                        bending_stiffness: float) -> Any:
    """k² solving ``T k² + D k⁴ = ρs ω²`` (the prestressed plate's dispersion)."""
    omega = np.asarray(omega, float)
    if bending_stiffness <= 0:
        return areal_density * omega**2 / tension
    d = bending_stiffness
    return (-tension + np.sqrt(tension**2 + 4.0 * d * areal_density * omega**2)) / (2.0 * d)


def weyl_mode_count(frequency_hz: Any, area: float, areal_density: float, tension: float,
                    bending_stiffness: float = 0.0) -> Any:
    """Number of modes below ``frequency_hz`` by Weyl's law, ``N ≈ A k²/4π``.

    Parameters
    ----------
    frequency_hz : float or ndarray  [Hz]
    area : float  [m²]
    areal_density : float  [kg/m²]
    tension : float  [N/m]
        √(Tx·Ty) for an orthotropic membrane (its wavenumber ellipse has the same area).
    bending_stiffness : float  [N·m]

    Returns
    -------
    float or ndarray  [-]
        ``π f² A ρs / T`` for a membrane.

    References
    ----------
    .. [1] H. Weyl, Nachr. Ges. Wiss. Göttingen, 1911 (leading term, any outline).
    """
    k2 = _wavenumber_squared(2.0 * np.pi * np.asarray(frequency_hz, float), areal_density,
                             tension, bending_stiffness)
    out = area * k2 / (4.0 * np.pi)
    return float(out) if np.ndim(out) == 0 else out


def modal_density(frequency_hz: Any, area: float, areal_density: float, tension: float,
                  bending_stiffness: float = 0.0) -> Any:
    """Modal density ``n(f) = dN/df`` [modes per Hz] from Weyl's law.

    ``n = A ρs ω / √(T² + 4 D ρs ω²)``: ``2π f A ρs / T`` for a membrane, ``(A/2)√(ρs/D)``
    for a plate without tension.

    References
    ----------
    .. [1] H. Weyl, 1911; L. Cremer, M. Heckl, B. A. T. Petersson, *Structure-Borne Sound*,
       3rd ed., 2005 (modal density of plates).
    """
    omega = 2.0 * np.pi * np.asarray(frequency_hz, float)
    out = area * areal_density * omega / np.sqrt(
        tension**2 + 4.0 * bending_stiffness * areal_density * omega**2)
    return float(out) if np.ndim(out) == 0 else out


def modal_overlap_factor(frequency_hz: Any, loss_factor: float, area: float,
                         areal_density: float, tension: float,
                         bending_stiffness: float = 0.0) -> Any:
    """Modal overlap ``M = η·f·n(f)``: half-power bandwidth over mean mode spacing.

    References
    ----------
    .. [1] L. Cremer, M. Heckl, B. A. T. Petersson, *Structure-Borne Sound*, 3rd ed., 2005.
    """
    return loss_factor * np.asarray(frequency_hz, float) * modal_density(
        frequency_hz, area, areal_density, tension, bending_stiffness)


def modal_overlap_frequency_hz(loss_factor: float, area: float, areal_density: float,
                               tension: float, bending_stiffness: float = 0.0) -> float:
    """The frequency above which modes overlap, ``M(f) = η·f·n(f) ≥ 1``.

    Returns
    -------
    float  [Hz]
        Solving ``(η A ρs ω²/2π)² = T² + 4 D ρs ω²`` for ω²; for a membrane
        ``f = √(T / (2π η A ρs))``. ``inf`` when the data cannot give one (no damping,
        no area).
    """
    if not (loss_factor > 0 and area > 0 and areal_density > 0):
        return math.inf
    if tension <= 0 and bending_stiffness <= 0:
        return math.inf
    a = (loss_factor * area * areal_density / (2.0 * math.pi)) ** 2
    b = 4.0 * bending_stiffness * areal_density
    omega2 = (b + math.sqrt(b * b + 4.0 * a * tension**2)) / (2.0 * a)
    return math.sqrt(omega2) / (2.0 * math.pi)
