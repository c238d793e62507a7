"""The command line: options are checked before any work; resources come from the package.

Behavioural tests of the thin CLI (typer's test runner); the physics and judgement behind it
are tested against published values elsewhere.
"""

from __future__ import annotations

import fnmatch
import importlib
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest
from typer.testing import CliRunner

from auditor import __version__
from auditor.cli import app
from auditor.resources import bundled_dir, demo_workbook

ROOT = Path(__file__).resolve().parents[1]
runner = CliRunner()


def _plain(output: str) -> str:
    """The CLI's words without the error box's frame and line wrapping."""
    return " ".join(output.translate({ord(c): " " for c in "│╭╮╰╯─"}).split())


def test_help_lists_every_command_in_order():
    # The eight commands DEVELOPERS.md lists; help shows them in the order a user meets them
    # (read the schedule, modes, audit, the bundled files, tap-test calibration).
    result = runner.invoke(app, ["--help"], env={"COLUMNS": "120"})
    assert result.exit_code == 0
    listed = re.findall(r"^│ ([a-z][a-z-]*) {2,}\S", result.output, flags=re.MULTILINE)
    assert listed == ["check", "template", "modes", "audit", "demo", "rules",
                      "export-templates", "calibrate"]


def test_console_script_and_module_run_the_same_app():
    with open(ROOT / "pyproject.toml", "rb") as handle:
        target = tomllib.load(handle)["project"]["scripts"]["auditor"]
    module, _, name = target.partition(":")
    assert callable(getattr(importlib.import_module(module), name))  # the script's target
    completed = subprocess.run([sys.executable, "-m", "auditor", "--version"],
                               capture_output=True, text=True, timeout=60, check=False)
    assert completed.returncode == 0
    assert completed.stdout.strip() == f"auditor {__version__}"


@pytest.mark.parametrize("option, value, choices", [
    ("--format", "pdf,docx", ("pdf", "json", "csv", "xlsx")),
    ("--detail", "some", ("findings", "all")),
    ("--fail-on", "maybe", ("conflict", "caution")),
    ("--rules", "nosuch", ("standard", "strict")),
])
def test_bad_option_fails_at_once_with_the_choices(tmp_path, option, value, choices):
    out = tmp_path / "out"
    result = runner.invoke(app, ["audit", str(demo_workbook()), "--out", str(out),
                                 option, value])
    assert result.exit_code == 2
    text = _plain(result.output)
    for choice in choices:
        assert choice in text
    assert not out.exists(), "nothing may be written when an option is wrong"


def test_out_that_is_a_file_fails_at_once(tmp_path):
    target = tmp_path / "a-file"
    target.write_text("not a folder")
    result = runner.invoke(app, ["audit", str(demo_workbook()), "--out", str(target)])
    assert result.exit_code == 2
    assert "is a file" in _plain(result.output)
    assert target.read_text() == "not a folder"


def test_missing_templates_folder_fails_at_once(tmp_path):
    result = runner.invoke(app, ["audit", str(demo_workbook()), "--out", str(tmp_path / "o"),
                                 "--templates", str(tmp_path / "nowhere")])
    assert result.exit_code == 2
    assert not (tmp_path / "o").exists()


def test_rules_lists_the_bundled_sets_from_any_folder(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    result = runner.invoke(app, ["rules"])
    assert result.exit_code == 0
    assert "standard" in result.output and "strict" in result.output
    assert str(ROOT) not in result.output, "no absolute path of this machine is shown"


def test_rules_copy_and_use_a_copied_rule_set(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    copied = tmp_path / "ours.toml"
    assert runner.invoke(app, ["rules", "strict", "--copy", str(copied)]).exit_code == 0
    assert copied.read_bytes() == (bundled_dir("rules") / "strict.toml").read_bytes()
    # A second copy onto the same file is refused rather than overwriting edits.
    assert runner.invoke(app, ["rules", "strict", "--copy", str(copied)]).exit_code == 1
    assert runner.invoke(app, ["rules", str(copied)]).exit_code == 0


def test_own_rules_folder_is_searched_by_name(tmp_path, monkeypatch):
    text = (bundled_dir("rules") / "standard.toml").read_text(encoding="utf-8")
    (tmp_path / "house.toml").write_text(text.replace('name = "standard"', 'name = "house"'),
                                         encoding="utf-8")
    monkeypatch.setenv("AUDITOR_RULES", str(tmp_path))
    result = runner.invoke(app, ["rules"])
    assert result.exit_code == 0
    assert "house" in result.output and "standard" in result.output


def test_export_templates_writes_the_wording(tmp_path):
    folder = tmp_path / "wording"
    result = runner.invoke(app, ["export-templates", str(folder)])
    assert result.exit_code == 0
    for name in ("report.toml", "methods.md", "cautions.md"):
        assert (folder / name).read_bytes() == (bundled_dir("templates") / name).read_bytes()
    assert runner.invoke(app, ["export-templates", str(folder)]).exit_code == 1


def _package_data() -> dict[str, list[str]]:
    with open(ROOT / "pyproject.toml", "rb") as handle:
        setuptools = tomllib.load(handle)["tool"]["setuptools"]
    return setuptools["package-dir"], setuptools["package-data"]


@pytest.mark.parametrize("folder", ["rules", "templates"])
def test_every_resource_file_ships_in_the_wheel(folder):
    """Each data file under rules/ and templates/ matches the build's package-data patterns,
    so the wheel carries it (CI also installs the wheel and runs the demo)."""
    package_dir, package_data = _package_data()
    packages = {v: k for k, v in package_dir.items()}
    for path in sorted((ROOT / folder).rglob("*")):
        if path.is_dir() or path.suffix in (".py", ".pyc") or "__pycache__" in path.parts:
            continue
        relative = path.relative_to(ROOT)
        package = ".".join([packages[folder], *relative.parts[1:-1]])
        patterns = package_data.get(package, [])
        assert any(fnmatch.fnmatch(path.name, p) for p in patterns), (
            f"{relative} is not in the package data of {package}")


def test_every_code_package_ships_in_the_wheel():
    """Each folder of the package with an __init__.py is listed for the build (the list is
    explicit because rules/ and templates/ are mapped in beside the code)."""
    with open(ROOT / "pyproject.toml", "rb") as handle:
        listed = set(tomllib.load(handle)["tool"]["setuptools"]["packages"])
    found = {".".join(p.parent.relative_to(ROOT).parts)
             for p in (ROOT / "auditor").rglob("__init__.py")}
    assert found <= listed, f"not listed in pyproject.toml: {sorted(found - listed)}"
