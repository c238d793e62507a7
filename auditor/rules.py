"""Rule sets: which modes count, which tones, the margins and the response thresholds.

A rule set (a TOML file in ``rules/``; schema in ``rules/README.md``) says which modes of a
panel are assessed (up to a frequency, or a multiple of the highest tone reaching the panel,
never a count of modes), which harmonics of each source, which sources reach a panel only as
sound in air, the separation margins that screen a (mode, excitation) pair into a *conflict*
or a *caution*, the response thresholds that grade it, and the range a remedy may propose.

This module only reads and checks rule sets, against the schema declared once in
``auditor.rule_schema`` (every key with its kind, unit, default, bounds and meaning); the
judgement that applies them is ``auditor.judgement`` and the panel remedy ``auditor.remedy``.

References
----------
.. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control": keeping a
   natural frequency clear of a forcing frequency by a margin (common practice).
.. [2] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002, ch. 2: half-power bandwidth ``Δf = η·f`` of a lightly damped mode.
"""

from __future__ import annotations

import hashlib
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from auditor.resources import bundled_dir, rules_search_path
from auditor.rule_schema import (
    DEFAULT_HARMONICS,
    DEFAULT_PATHS,
    DEFAULTS,
    PATHS,
    REMOVED_KEYS,
    RULE_KEYS,
    SECTIONS,
    SOURCES,
    RuleKey,
    attribute_doc,
    did_you_mean,
    keys_of,
    rule_key,
    section_of,
)

__all__ = [
    "SOURCES",
    "PATHS",
    "SEPARATION_TOLERANCE",
    "REMOVED_KEYS",
    "RuleSet",
    "RuleSetError",
    "rules_dir",
    "load_ruleset",
    "list_rulesets",
    "parse_ruleset",
]

#: Rounding tolerance on |separation| when comparing with a margin: a mode at exactly 10 %
#: from a line is inside a 10 % margin.
SEPARATION_TOLERANCE = 1e-9


class RuleSetError(ValueError):
    """A rule set that cannot be used; the message names the file and the key."""


@dataclass(frozen=True)
class RuleSet:
    """A rule set: which modes count, which harmonics, margins, paths and zones.

    Each attribute but ``origin`` comes from a rule-set file (one key, or for ``harmonics`` and
    ``paths`` one table with a key per source), declared with its unit, default, bounds and
    meaning in ``auditor.rule_schema.RULE_KEYS``, from which the attributes below are
    listed. The modes assessed are those up to ``fmax_hz`` or ``excitation_multiple`` ×
    the highest tone reaching the panel, the smaller, raised where needed to cover the caution
    margin above every tone (``auditor.judgement.screening.assessment_limit_hz``); there is no
    count of modes. Built in code, ``harmonics`` and ``paths`` may be empty: a source not
    listed takes its default (``harmonics_for``, ``is_airborne``).
    """

    name: str
    description: str = DEFAULTS["description"]
    origin: str = ""
    fmax_hz: float | None = DEFAULTS["fmax_hz"]
    excitation_multiple: float | None = DEFAULTS["excitation_multiple"]
    harmonics: tuple[tuple[str, int], ...] = ()
    conflict_margin: float = DEFAULTS["conflict_margin"]
    caution_margin: float = DEFAULTS["caution_margin"]
    participation_threshold: float = DEFAULTS["participation_threshold"]
    support_participation_threshold: float = DEFAULTS["support_participation_threshold"]
    conflict_db: float = DEFAULTS["conflict_db"]
    report_db: float = DEFAULTS["report_db"]
    bandwidth_widening: bool = DEFAULTS["bandwidth_widening"]
    use_zones: bool = DEFAULTS["use_zones"]
    strouhal: float = DEFAULTS["strouhal"]
    default_slip: float = DEFAULTS["default_slip"]
    paths: tuple[tuple[str, str], ...] = ()
    max_tension_factor: float = DEFAULTS["max_tension_factor"]
    min_tension_factor: float = DEFAULTS["min_tension_factor"]
    max_bays: int = DEFAULTS["max_bays"]

    @property
    def path(self) -> str:
        """Where the rule set came from, for writers that still ask for ``path``: the same as
        ``origin`` (no folder is ever given out)."""
        return self.origin

    def harmonics_for(self, source: str) -> int:
        """Number of harmonics of ``source`` (the standard count when the rule set is silent)."""
        return dict(self.harmonics).get(source, DEFAULT_HARMONICS.get(source, 1))

    def is_airborne(self, source: str) -> bool:
        """True when ``source`` reaches panels only as sound in air."""
        return dict(self.paths).get(source, DEFAULT_PATHS.get(source, "airborne")) == "airborne"

    def as_dict(self) -> dict[str, Any]:
        """Plain data for JSON: every attribute, the per-source ones as mappings."""
        return {f.name: dict(getattr(self, f.name)) if f.name in _PER_SOURCE
                else getattr(self, f.name) for f in fields(self)}


#: The attributes set by one key per source (``[harmonics]``, ``[paths]``).
_PER_SOURCE = frozenset(k.field for k in RULE_KEYS if k.source)
_ORIGIN_DOC = """    origin : str
        Where it came from, without any folder: "standard (bundled), SHA-256 1a2b…" or
        "our-office.toml, SHA-256 3c4d…"; "" when built in code.
"""
RuleSet.__doc__ = (RuleSet.__doc__ or "").rstrip() + "\n\n    Parameters\n    ----------\n" \
    + "".join(_ORIGIN_DOC if f.name == "origin" else attribute_doc(f.name)
              for f in fields(RuleSet))


# ---------------------------------------------------------------------------------------
# Loading and validating rule-set files
# ---------------------------------------------------------------------------------------

def rules_dir() -> Path:
    """The folder of bundled rule sets (``rules/``, shipped inside the package)."""
    return bundled_dir("rules")


def _named_rule_file(name: str) -> Path | None:
    """The file of a rule set given by name: ``AUDITOR_RULES`` first, then the bundled ones."""
    for folder in rules_search_path():
        path = folder / f"{name}.toml"
        if path.is_file():
            return path
    return None


def _read_keys(data: Mapping[str, Any], source: str) -> dict[RuleKey, Any]:
    """Every key the document sets, each checked against its entry in the schema."""
    given: dict[RuleKey, Any] = {}

    def checked(spec: RuleKey, value: Any) -> Any:
        try:
            return spec.check(value)
        except ValueError as exc:
            raise RuleSetError(f"{source}: {spec.where} {exc}") from None

    def belongs(key: str) -> str:
        owner = section_of(key)
        return "at the top level" if owner == "" else f"in section [{owner}]"

    sections = [s for s in SECTIONS if s]
    for top, item in data.items():
        if isinstance(item, Mapping):
            for key in item:
                if (top, key) in REMOVED_KEYS:
                    raise RuleSetError(f"{source}: [{top}] {key} {REMOVED_KEYS[(top, key)]}")
        spec = rule_key("", top)
        if spec is not None:
            given[spec] = checked(spec, item)
            continue
        if top not in sections:
            if section_of(top) is not None:
                raise RuleSetError(f"{source}: key '{top}' belongs {belongs(top)}")
            raise RuleSetError(f"{source}: unknown section or key '{top}'"
                               + did_you_mean(top, sections + list(keys_of(""))))
        if not isinstance(item, Mapping):
            raise RuleSetError(f"{source}: '{top}' must be a section [{top}], not a value")
        for key, value in item.items():
            spec = rule_key(top, key)
            if spec is None:
                # a key of another table, spelt right, is named there before any look-alike
                hint = (f"; '{key}' belongs {belongs(key)}" if section_of(key) is not None
                        else did_you_mean(key, keys_of(top)))
                raise RuleSetError(f"{source}: unknown key '{key}' in [{top}]{hint}")
            given[spec] = checked(spec, value)
    return given


def _check_together(values: Mapping[str, Any], source: str) -> None:
    """The checks that tie keys together, on the values as typed (0 = a limit switched off);
    each key alone was checked against its bounds as it was read."""
    conflict, caution = values["conflict_margin"], values["caution_margin"]
    fmax, multiple = values["fmax_hz"], values["excitation_multiple"]
    conflict_db, report_db = values["conflict_db"], values["report_db"]

    def bad(message: str) -> RuleSetError:
        return RuleSetError(f"{source}: {message}")

    if not 0 < conflict < caution < 1:
        raise bad(
            f"margins must satisfy 0 < conflict < caution < 1 "
            f"(got conflict = {conflict:g}, caution = {caution:g}); they are fractions of the "
            f"excitation frequency, e.g. conflict = 0.10, caution = 0.20"
        )
    if fmax == 0 and multiple == 0:
        raise bad("[modes] needs a limit: set fmax_hz or excitation_multiple (or both) above 0")
    if multiple and multiple < 1 + caution:
        raise bad(
            f"[modes] excitation_multiple = {multiple:g} would miss modes inside the caution "
            f"margin; use at least 1 + caution = {1 + caution:g}, or 0 to switch it off"
        )
    if report_db > conflict_db:
        raise bad(f"[response] report_db ({report_db:g} dB) must not be above conflict_db "
                  f"({conflict_db:g} dB): a pair strong enough to be a conflict is reported")


def parse_ruleset(data: Mapping[str, Any], *, source: str = "<rule set>",
                  default_name: str = "", origin: str = "") -> RuleSet:
    """Validate the contents of a rule-set file and build the ``RuleSet``.

    Each key is checked against its entry in ``auditor.rule_schema.RULE_KEYS`` (kind and
    bounds), a key left out takes its default there, then the keys that depend on each other
    are checked together.

    Parameters
    ----------
    data : mapping
        The parsed TOML document.
    source : str
        File name used in messages.
    default_name : str
        Name when the document has no ``name`` key (the file's stem).
    origin : str
        Kept as ``RuleSet.origin`` (where it came from, with no folder).

    Raises
    ------
    RuleSetError
        Unknown key (with the nearest known one), a removed key (with why), wrong type, a
        value out of its range, or inconsistent values; the message names the file, the
        table and the key.
    """
    given = _read_keys(data, source)
    typed = {spec: given.get(spec, spec.default) for spec in RULE_KEYS}
    _check_together({spec.field: value for spec, value in typed.items() if not spec.source},
                    source)
    values = {spec.field: spec.value_of(value) for spec, value in typed.items()
              if not spec.source}
    for field in _PER_SOURCE:  # in the order of SOURCES
        values[field] = tuple((spec.source, value) for spec, value in typed.items()
                              if spec.field == field)
    values["name"] = values["name"] or default_name or "unnamed"
    return RuleSet(origin=origin, **values)


def load_ruleset(name_or_path: str | Path) -> RuleSet:
    """Load a rule set by bare name (from the ``rules/`` folder) or from a TOML file.

    Parameters
    ----------
    name_or_path : str or Path
        "standard", "strict", ... or a path such as "my-rules.toml".

    Raises
    ------
    RuleSetError
        The file is missing (with the names available), is not valid TOML, or fails
        validation (see ``parse_ruleset``).
    """
    text = str(name_or_path)
    candidate = Path(text).expanduser()
    looks_like_path = isinstance(name_or_path, Path) or any(c in text for c in "/\\") \
        or text.endswith(".toml")
    if candidate.is_file():
        path = candidate
    elif looks_like_path:
        bundled = rules_dir() / candidate.name
        if not any(c in text for c in "/\\") and bundled.is_file():
            path = bundled
        else:
            raise RuleSetError(f"rule-set file not found: {text}")
    else:
        found = _named_rule_file(text)
        if found is not None:
            path = found
        else:
            names = sorted({p.stem for folder in rules_search_path()
                            for p in folder.glob("*.toml")})
            raise RuleSetError(
                f"no rule set named '{text}'{did_you_mean(text, names)} "
                f"(available: {', '.join(names) or 'none'}; or give a path to a .toml file)"
            )
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RuleSetError(f"{path}: cannot be read ({exc.strerror})") from None
    try:
        data = tomllib.loads(raw.decode("utf-8"))
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise RuleSetError(f"{path}: not valid TOML ({exc})") from None
    return parse_ruleset(data, source=str(path), default_name=path.stem,
                         origin=ruleset_origin(path, raw))


def ruleset_origin(path: Path, content: bytes) -> str:
    """Where a rule set came from, with no folder: "standard (bundled), SHA-256 1a2b3c4d5e6f…"
    for a bundled file, "our-office.toml, SHA-256 …" for any other."""
    digest = hashlib.sha256(content).hexdigest()[:12]
    try:
        bundled = path.resolve().parent == rules_dir().resolve()
    except OSError:
        bundled = False
    where = f"{path.stem} (bundled)" if bundled else path.name
    return f"{where}, SHA-256 {digest}…"


def list_rulesets() -> list[RuleSet]:
    """Every rule set in the ``rules/`` folder, sorted by name.

    Raises
    ------
    RuleSetError
        When one of the files is invalid (the message names it).
    """
    files: dict[str, Path] = {}
    for folder in reversed(rules_search_path()):  # a consultancy's own file wins by name
        files.update({p.stem: p for p in folder.glob("*.toml")})
    return sorted((load_ruleset(p) for p in files.values()), key=lambda r: r.name)
