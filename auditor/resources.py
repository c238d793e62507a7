"""The files the product ships: rule sets, report wording, the demo project.

``rules/`` and ``templates/`` sit at the top of the repository and the build maps them into
the package as ``auditor.rule_sets`` and ``auditor.templates`` (``pyproject.toml``), so a wheel
carries them and they are read here through :mod:`importlib.resources`, whatever the install.

A consultancy keeps its own copies outside the package:

- rule sets: ``--rules PATH`` names a TOML file; a folder named by ``AUDITOR_RULES`` is
  searched for named rule sets before the bundled ones;
- report wording and branding: ``--templates DIR`` or ``AUDITOR_TEMPLATES`` names a folder
  holding any of ``report.toml``, ``methods.md`` and ``cautions.md``; a file it lacks is taken
  from the bundled templates;
- ``auditor export-templates DIR`` and ``auditor rules NAME --copy PATH`` copy the bundled
  files out for editing.
"""

from __future__ import annotations

import os
from importlib import resources
from pathlib import Path

#: Environment variables naming a consultancy's own folders.
RULES_ENV = "AUDITOR_RULES"
TEMPLATES_ENV = "AUDITOR_TEMPLATES"

#: The report wording files a templates folder may hold.
REPORT_WORDING_FILES = ("report.toml", "methods.md", "cautions.md")


#: Where the build puts each top-level folder inside the package.
_PACKAGES = {"rules": "auditor.rule_sets", "templates": "auditor.templates"}


class ResourceError(FileNotFoundError):
    """A bundled resource or a user's resource folder is missing."""


def bundled_dir(name: str) -> Path:
    """The bundled ``rules`` or ``templates`` folder, as a file-system path.

    Parameters
    ----------
    name : {"rules", "templates"}

    Raises
    ------
    ResourceError
        When the installed package lacks the folder (a broken install).
    """
    if name not in _PACKAGES:
        raise ValueError(f"no bundled resource folder {name!r}")
    try:
        # pip installs packages unzipped, so the traversable is a real folder.
        path = Path(str(resources.files(_PACKAGES[name])))
    except ModuleNotFoundError:
        # A source checkout on sys.path without an install: the folder beside the package.
        path = Path(__file__).resolve().parent.parent / name
    if not path.is_dir():
        raise ResourceError(
            f"the bundled {name} are missing from this installation of the auditor; "
            f"reinstall the package (python -m pip install --force-reinstall ...)")
    return path


def user_dir(env: str, given: str | os.PathLike[str] | None = None) -> Path | None:
    """A consultancy's own folder: ``given`` if set, else the environment variable ``env``.

    Raises
    ------
    ResourceError
        When the folder is named but does not exist.
    """
    value = given if given is not None else os.environ.get(env) or None
    if value is None:
        return None
    path = Path(value)
    if not path.is_dir():
        source = "given" if given is not None else f"named by {env}"
        raise ResourceError(f"the folder {path.name or str(path)!r} {source} does not exist")
    return path


def rules_search_path() -> tuple[Path, ...]:
    """Folders searched for a rule set given by name: ``AUDITOR_RULES`` first, then bundled."""
    own = user_dir(RULES_ENV)
    return ((own,) if own is not None else ()) + (bundled_dir("rules"),)


def template_file(name: str, folder: str | os.PathLike[str] | None = None) -> Path:
    """A report wording file from the user's templates folder if it has one, else bundled.

    Parameters
    ----------
    name : str
        One of ``REPORT_WORDING_FILES`` (or a file those name, such as a logo).
    folder : path, optional
        The user's templates folder (``--templates``); default ``AUDITOR_TEMPLATES``.
    """
    own = user_dir(TEMPLATES_ENV, folder)
    if own is not None and (own / name).is_file():
        return own / name
    return bundled_dir("templates") / name


def demo_workbook() -> Path:
    """The invented demo project's workbook (its tap-test recordings sit beside it)."""
    path = bundled_dir("templates") / "demo-project.xlsx"
    if not path.is_file():
        raise ResourceError("the demo workbook is missing from this installation")
    return path
