"""Resonance auditor for tensioned panels and mesh screens in buildings.

The library is the product; the ``auditor`` command is a thin layer over it::

    from auditor import read_schedule, audit
    schedule = read_schedule(["project.xlsx"])
"""

from __future__ import annotations

import os as _os

# The modal eigenproblems are small dense matrices, for which threaded BLAS is slower than one
# thread (measured: 94 s against 19 s for the air-loading benchmark on two cores). Set before
# numpy loads; a user's own setting wins.
_os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
_os.environ.setdefault("OMP_NUM_THREADS", "1")

__version__ = "0.1.0"

__all__ = ["__version__"]
