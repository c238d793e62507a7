"""Where the project's editable resources live: rule sets (rules/) and templates (templates/).

They sit beside the package in the source tree (the product is installed editable, so a
consultancy edits the files in place). ``AUDITOR_HOME`` may point elsewhere: a folder holding
its own ``rules/`` and ``templates/``.
"""

from __future__ import annotations

import os
from pathlib import Path


class ResourceError(FileNotFoundError):
    """A bundled resource folder or file is missing."""


def project_home() -> Path:
    """The folder that holds ``rules/`` and ``templates/``."""
    env = os.environ.get("AUDITOR_HOME")
    if env:
        return Path(env)
    return Path(__file__).resolve().parent.parent


def resource_dir(name: str) -> Path:
    """``rules`` or ``templates`` as a path; a clear error when it is missing."""
    path = project_home() / name
    if not path.is_dir():
        raise ResourceError(
            f"the {name}/ folder was not found at {path}; install the project editable "
            f"(python -m pip install -e .) or set AUDITOR_HOME to a folder holding {name}/"
        )
    return path


def demo_workbook() -> Path:
    """The invented demo project's workbook."""
    return resource_dir("templates") / "demo-project.xlsx"
