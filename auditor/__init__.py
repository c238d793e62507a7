"""Resonance auditor for tensioned panels and mesh screens in buildings.

The library is the product; the ``auditor`` command is a thin layer over it::

    from auditor import read_schedule, audit
    schedule = read_schedule(["project.xlsx"])
"""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
