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

The rectangle lives in :mod:`auditor.physics.rectangular_membrane`, the disc in
:mod:`auditor.physics.circular_membrane`; this module gathers their public names, so
``from auditor.physics.membrane import ...`` serves every caller.

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

from auditor.physics.circular_membrane import (
    bessel_zeros_below,
    circular_membrane_basis,
    circular_membrane_frequencies,
    circular_mode_frequency,
    circular_participation,
)
from auditor.physics.rectangular_membrane import (
    MAX_GRID_POINTS,
    RectangularSpectra,
    rectangular_membrane_basis,
    rectangular_membrane_frequencies,
    rectangular_membrane_spectra,
    rectangular_mode_frequency,
    rectangular_mode_mean,
    rectangular_participation,
)

__all__ = [
    "MAX_GRID_POINTS",
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
