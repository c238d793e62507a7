"""Rule sets: which modes count, which tones, the margins and the response thresholds.

A rule set (a TOML file in ``rules/``; schema in ``rules/README.md``) says which modes of a
panel are assessed (up to a frequency, or a multiple of the highest tone reaching the panel,
never a count of modes), which harmonics of each source, which sources reach a panel only as
sound in air, the separation margins that screen a (mode, excitation) pair into a *conflict*
or a *caution*, the response thresholds that grade it, and the range a remedy may propose.

This module only reads and checks rule sets; the judgement that applies them is
``auditor.judgement`` and the panel remedy ``auditor.remedy``.

References
----------
.. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control": keeping a
   natural frequency clear of a forcing frequency by a margin (common practice).
.. [2] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002, ch. 2: half-power bandwidth ``Δf = η·f`` of a lightly damped mode.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from auditor.resources import bundled_dir, rules_search_path

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

#: The sources of tone an excitation can have (``Excitation.source``), in the trade's words.
SOURCES: tuple[str, ...] = (
    "shaft", "blade-pass", "vane-pass", "electromagnetic", "hum", "cylinder", "belt-pass",
    "vortex shedding", "tone",
)

#: How a source reaches a panel: only as sound in air, or through the structure (or directly).
PATHS: tuple[str, ...] = ("airborne", "structure-borne")

#: Rounding tolerance on |separation| when comparing with a margin: a mode at exactly 10 %
#: from a line is inside a 10 % margin.
SEPARATION_TOLERANCE = 1e-9


def _toml_key(source: str) -> str:
    return source.replace("-", "_").replace(" ", "_")


_SOURCE_OF_KEY = {_toml_key(s): s for s in SOURCES}


class RuleSetError(ValueError):
    """A rule set that cannot be used; the message names the file and the key."""


#: Keys that older rule sets carried and that are no longer accepted, with why. A file still
#: holding one is refused with this message rather than silently judged differently.
REMOVED_KEYS: dict[tuple[str, str], str] = {
    ("modes", "max_modes"): (
        "was removed: a count of modes hid findings (a tone above a panel's Nth mode went "
        "unjudged). Every mode up to the assessment limit now counts (fmax_hz, or "
        "excitation_multiple × the highest tone reaching the panel, raised to cover the "
        "caution margin); delete this line."),
}


@dataclass(frozen=True)
class RuleSet:
    """A rule set: which modes count, which harmonics, margins, paths and zones.

    Parameters
    ----------
    name : str
    description : str
    origin : str
        Where it came from, without any folder: "standard (bundled), SHA-256 1a2b…" or
        "our-office.toml, SHA-256 3c4d…"; "" when built in code.
    fmax_hz : float or None  [Hz]
        Assess modes up to this frequency (None: no fixed limit).
    excitation_multiple : float or None  [-]
        Or up to this multiple of the highest excitation reaching the panel; when both limits
        are set the smaller applies. Either way the limit is raised, where needed, to cover
        the caution margin above every tone reaching the panel
        (``auditor.judgement.verdict.assessment_limit_hz``); there is no count of modes.
    harmonics : tuple of (source, count)
        How many harmonics of each source (1 = the fundamental only; 0 = ignore the source).
    conflict_margin, caution_margin : float  [-]
        Separation margins as fractions of the excitation frequency, 0 < conflict < caution < 1.
    participation_threshold : float  [-]
        Below this uniform-pressure participation a mode cannot make a conflict with an
        airborne excitation (at most a caution).
    support_participation_threshold : float  [-]
        The same for structure-borne excitation through the fixings. A frame that moves as
        one over a panel drives each mode through its inertial participation, the same
        (∫φ dA)²/(A ∫φ² dA) as a uniform pressure, so a mode with none is hardly driven; only
        a non-uniform support motion reaches it. 0 (the default) demotes no pair for its
        participation alone (the response thresholds still grade it).
    conflict_db : float  [dB]
        A pair inside the conflict margin whose response (``Finding.response_db``) is below
        this is a caution, not a conflict.
    report_db : float  [dB]
        A pair whose response is below this is not reported (≤ ``conflict_db``).
    bandwidth_widening : bool
        Widen both margins by η/2 when a mode's loss factor η is known.
    use_zones : bool
        Equipment reaches only the panels in its zones.
    strouhal : float  [-]
        Strouhal number for vortex shedding from wires and bars.
    default_slip : float  [-]
        Induction-motor slip used when the schedule gives none.
    paths : tuple of (source, "airborne" | "structure-borne")
    max_tension_factor : float  [-]
        Remedy ceiling as a multiple of the scheduled tension for a panel with no rated
        maximum tension.
    min_tension_factor : float  [-]
        Lowest tension a remedy may propose, as a multiple of the scheduled tension.
    max_bays : int
        Largest number of equal bays a remedy may propose.
    """

    name: str
    description: str = ""
    origin: str = ""
    fmax_hz: float | None = 1000.0
    excitation_multiple: float | None = 2.0
    harmonics: tuple[tuple[str, int], ...] = ()
    conflict_margin: float = 0.10
    caution_margin: float = 0.20
    participation_threshold: float = 0.01
    support_participation_threshold: float = 0.0
    conflict_db: float = 0.0
    report_db: float = -20.0
    bandwidth_widening: bool = True
    use_zones: bool = True
    strouhal: float = 0.2
    default_slip: float = 0.03
    paths: tuple[tuple[str, str], ...] = ()
    max_tension_factor: float = 1.5
    min_tension_factor: float = 0.5
    max_bays: int = 8

    @property
    def path(self) -> str:
        """Where the rule set came from, for writers that still ask for ``path``: the same as
        ``origin`` (no folder is ever given out)."""
        return self.origin

    def harmonics_for(self, source: str) -> int:
        """Number of harmonics of ``source`` (the standard count when the rule set is silent)."""
        return dict(self.harmonics).get(source, _DEFAULT_HARMONICS.get(source, 1))

    def is_airborne(self, source: str) -> bool:
        """True when ``source`` reaches panels only as sound in air."""
        return dict(self.paths).get(source, _DEFAULT_PATHS.get(source, "airborne")) == "airborne"

    def as_dict(self) -> dict[str, Any]:
        """Plain data for JSON."""
        return {
            "name": self.name,
            "description": self.description,
            "origin": self.origin,
            "fmax_hz": self.fmax_hz,
            "excitation_multiple": self.excitation_multiple,
            "harmonics": dict(self.harmonics),
            "conflict_margin": self.conflict_margin,
            "caution_margin": self.caution_margin,
            "participation_threshold": self.participation_threshold,
            "support_participation_threshold": self.support_participation_threshold,
            "conflict_db": self.conflict_db,
            "report_db": self.report_db,
            "bandwidth_widening": self.bandwidth_widening,
            "use_zones": self.use_zones,
            "strouhal": self.strouhal,
            "default_slip": self.default_slip,
            "paths": dict(self.paths),
            "max_tension_factor": self.max_tension_factor,
            "min_tension_factor": self.min_tension_factor,
            "max_bays": self.max_bays,
        }


# ---------------------------------------------------------------------------------------
# Loading and validating rule-set files
# ---------------------------------------------------------------------------------------

_DEFAULT_HARMONICS = {
    "shaft": 2, "blade-pass": 3, "vane-pass": 3, "electromagnetic": 2, "hum": 4,
    "cylinder": 3, "belt-pass": 2, "vortex shedding": 1, "tone": 1,
}
_DEFAULT_PATHS = {
    "shaft": "structure-borne", "blade-pass": "airborne", "vane-pass": "airborne",
    "electromagnetic": "structure-borne", "hum": "airborne", "cylinder": "airborne",
    "belt-pass": "structure-borne", "vortex shedding": "structure-borne", "tone": "airborne",
}

# section -> key -> (kind, default); kind: "number", "count", "bool", "text"
_SCHEMA: dict[str, dict[str, tuple[str, Any]]] = {
    "": {"name": ("text", None), "description": ("text", "")},
    "modes": {
        "fmax_hz": ("number", 1000.0),
        "excitation_multiple": ("number", 2.0),
    },
    "margins": {
        "conflict": ("number", 0.10),
        "caution": ("number", 0.20),
        "participation_threshold": ("number", 0.01),
        "support_participation_threshold": ("number", 0.0),
        "bandwidth_widening": ("bool", True),
    },
    "response": {"conflict_db": ("number", 0.0), "report_db": ("number", -20.0)},
    "harmonics": {_toml_key(s): ("count", n) for s, n in _DEFAULT_HARMONICS.items()},
    "paths": {_toml_key(s): ("path", p) for s, p in _DEFAULT_PATHS.items()},
    "equipment": {"strouhal": ("number", 0.2), "default_slip": ("number", 0.03)},
    "zones": {"use_zones": ("bool", True)},
    "remedy": {
        "max_tension_factor": ("number", 1.5),
        "min_tension_factor": ("number", 0.5),
        "max_bays": ("count", 8),
    },
}


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


def _nearest(word: str, choices: Iterable[str]) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.5)
    return f"; did you mean '{close[0]}'?" if close else ""


def _where(section: str, key: str) -> str:
    return f"[{section}] {key}" if section else key


def _check_value(source: str, section: str, key: str, kind: str, value: Any) -> Any:
    where = f"{source}: {_where(section, key)}"
    if kind == "number":
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise RuleSetError(f"{where} must be a number, not {value!r}")
        if not math.isfinite(value):
            raise RuleSetError(f"{where} must be a finite number, not {value!r}")
        return float(value)
    if kind == "count":
        if isinstance(value, bool) or not isinstance(value, int):
            raise RuleSetError(f"{where} must be a whole number, not {value!r}")
        if value < 0:
            raise RuleSetError(f"{where} must be 0 or more, not {value}")
        return int(value)
    if kind == "bool":
        if not isinstance(value, bool):
            raise RuleSetError(f"{where} must be true or false, not {value!r}")
        return value
    if kind == "text":
        if not isinstance(value, str):
            raise RuleSetError(f'{where} must be text in quotes, not {value!r}')
        return value
    if kind == "path":
        if value not in PATHS:
            raise RuleSetError(
                f'{where} must be "airborne" or "structure-borne", not {value!r}'
                + (_nearest(value, PATHS) if isinstance(value, str) else "")
            )
        return value
    raise AssertionError(kind)  # pragma: no cover


def parse_ruleset(data: Mapping[str, Any], *, source: str = "<rule set>",
                  default_name: str = "", origin: str = "") -> RuleSet:
    """Validate the contents of a rule-set file and build the ``RuleSet``.

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
        Unknown key (with the nearest known one), a removed key (with why), wrong type, or
        inconsistent values.
    """
    values: dict[tuple[str, str], Any] = {}
    sections = [s for s in _SCHEMA if s]
    all_keys = {k: s for s, keys in _SCHEMA.items() for k in keys}
    for top, item in data.items():
        if isinstance(item, Mapping):
            for key in item:
                if (top, key) in REMOVED_KEYS:
                    raise RuleSetError(f"{source}: [{top}] {key} {REMOVED_KEYS[(top, key)]}")
        if top in _SCHEMA[""]:
            values[("", top)] = _check_value(source, "", top, _SCHEMA[""][top][0], item)
            continue
        if top not in _SCHEMA:
            if top in all_keys:
                raise RuleSetError(f"{source}: key '{top}' belongs in section [{all_keys[top]}]")
            raise RuleSetError(
                f"{source}: unknown section or key '{top}'"
                + _nearest(top, sections + list(_SCHEMA[""]))
            )
        if not isinstance(item, Mapping):
            raise RuleSetError(f"{source}: '{top}' must be a section [{top}], not a value")
        for key, value in item.items():
            if key not in _SCHEMA[top]:
                hint = _nearest(key, _SCHEMA[top])
                if not hint and key in all_keys:
                    hint = f"; '{key}' belongs in section [{all_keys[key]}]"
                raise RuleSetError(f"{source}: unknown key '{key}' in [{top}]{hint}")
            values[(top, key)] = _check_value(source, top, key, _SCHEMA[top][key][0], value)

    def get(section: str, key: str) -> Any:
        return values.get((section, key), _SCHEMA[section][key][1])

    name = get("", "name") or default_name or "unnamed"
    fmax = get("modes", "fmax_hz")
    multiple = get("modes", "excitation_multiple")
    conflict = get("margins", "conflict")
    caution = get("margins", "caution")
    threshold = get("margins", "participation_threshold")
    support_threshold = get("margins", "support_participation_threshold")
    strouhal = get("equipment", "strouhal")
    slip = get("equipment", "default_slip")
    max_factor = get("remedy", "max_tension_factor")
    min_factor = get("remedy", "min_tension_factor")
    max_bays = get("remedy", "max_bays")
    conflict_db = get("response", "conflict_db")
    report_db = get("response", "report_db")

    def bad(message: str) -> RuleSetError:
        return RuleSetError(f"{source}: {message}")

    if not 0 < conflict < caution < 1:
        raise bad(
            f"margins must satisfy 0 < conflict < caution < 1 "
            f"(got conflict = {conflict:g}, caution = {caution:g}); they are fractions of the "
            f"excitation frequency, e.g. conflict = 0.10, caution = 0.20"
        )
    if fmax < 0 or multiple < 0:
        raise bad("[modes] fmax_hz and excitation_multiple must be 0 (off) or positive")
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
    if not 0 <= threshold < 1:
        raise bad(f"[margins] participation_threshold must be from 0 up to 1, not {threshold:g}")
    if not 0 <= support_threshold < 1:
        raise bad(f"[margins] support_participation_threshold must be from 0 up to 1, "
                  f"not {support_threshold:g}")
    if not 0 < strouhal < 1:
        raise bad(f"[equipment] strouhal must be between 0 and 1 (about 0.2 for a round "
                  f"wire), not {strouhal:g}")
    if not 0 <= slip < 1:
        raise bad(f"[equipment] default_slip is a fraction from 0 up to 1 (e.g. 0.03), "
                  f"not {slip:g}")
    if max_factor < 1:
        raise bad(f"[remedy] max_tension_factor must be 1 or more, not {max_factor:g}")
    if not 0 < min_factor <= 1:
        raise bad(f"[remedy] min_tension_factor must be above 0 and at most 1, "
                  f"not {min_factor:g}")
    if max_bays < 2:
        raise bad(f"[remedy] max_bays must be 2 or more, not {max_bays}")

    return RuleSet(
        name=name,
        description=get("", "description"),
        origin=origin,
        fmax_hz=fmax or None,
        excitation_multiple=multiple or None,
        harmonics=tuple((s, get("harmonics", _toml_key(s))) for s in SOURCES),
        conflict_margin=conflict,
        caution_margin=caution,
        participation_threshold=threshold,
        support_participation_threshold=support_threshold,
        conflict_db=conflict_db,
        report_db=report_db,
        bandwidth_widening=get("margins", "bandwidth_widening"),
        use_zones=get("zones", "use_zones"),
        strouhal=strouhal,
        default_slip=slip,
        paths=tuple((s, get("paths", _toml_key(s))) for s in SOURCES),
        max_tension_factor=max_factor,
        min_tension_factor=min_factor,
        max_bays=max_bays,
    )


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
                f"no rule set named '{text}'{_nearest(text, names)} "
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
