"""Rule sets and the judgement of a panel's modes against the equipment's excitations.

A rule set (a TOML file in ``rules/``; schema in ``rules/README.md``) says which modes count,
which harmonics of each source, which sources reach a panel only as sound in air, and the
separation margins that make a (mode, excitation) pair a *conflict* or a *caution*.

The judgement, per pair (common practice of the trade for natural frequency against forcing
frequency):

- separation, signed: ``(f_mode − f_exc) / f_exc`` for a line; for a band, the distance from
  the mode to the band's nearest edge over that edge, 0 inside the band;
- conflict when ``|separation| ≤ conflict margin``, caution when ``|separation| ≤ caution
  margin`` (both inclusive, with a rounding tolerance of ``SEPARATION_TOLERANCE``);
- bandwidth widening: when the mode's loss factor η is known and the rule set asks for it, both
  margins grow by η/2, the half-width of the half-power band ``η·f`` as a fraction of the
  natural frequency (a lightly damped mode is sharp, a heavily damped one answers over a wider
  band);
- participation: a mode whose uniform-pressure participation factor is below the rule set's
  threshold is hardly driven by a sound field, so with an *airborne* excitation its pair is
  judged one grade down: a caution inside the conflict margin (never a conflict), nothing
  between the conflict and caution margins. Structure-borne and direct excitations (shaft,
  electromagnetic, vortex shedding on a wire) are judged in full whatever the participation;
- zones: with ``use_zones`` an item of equipment reaches a panel only when
  ``Equipment.reaches(panel.zone)``.

Evaluation is built for large schedules: the excitations reaching a zone are laid out once as
sorted arrays (``ExcitationTable``) and each panel's modes are matched against them with
``numpy.searchsorted``; ``Finding`` records are made only for the pairs that matter.

References
----------
.. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control": keeping a
   natural frequency clear of a forcing frequency by a margin (common practice).
.. [2] C. M. Harris and A. G. Piersol, *Harris' Shock and Vibration Handbook*, 5th ed.,
   McGraw-Hill, 2002, ch. 2: half-power bandwidth ``Δf = η·f`` of a lightly damped mode.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from collections import OrderedDict
from itertools import repeat
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from auditor.resources import bundled_dir, rules_search_path
from auditor.model import Equipment, Excitation, Finding, Mode, Panel

__all__ = [
    "SOURCES",
    "SEPARATION_TOLERANCE",
    "RuleSet",
    "RuleSetError",
    "ExcitationTable",
    "rules_dir",
    "load_ruleset",
    "list_rulesets",
    "parse_ruleset",
    "mode_frequency_limit",
    "separation",
    "evaluate_panel",
    "evaluate_panels",
    "findings_with_remedies",
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


@dataclass(frozen=True)
class RuleSet:
    """A rule set: which modes count, which harmonics, margins, paths and zones.

    Parameters
    ----------
    name : str
    description : str
    path : str
        The TOML file it came from ("" when built in code).
    fmax_hz : float or None  [Hz]
        Consider modes up to this frequency (None: no fixed limit).
    excitation_multiple : float or None  [-]
        Or up to this multiple of the highest excitation reaching the panel; when both limits
        are set the smaller applies.
    max_modes : int
        Cap on the modes considered per panel (the lowest ones).
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
        a non-uniform support motion reaches it. 0 (the default) holds every mode to the full
        margins, as for a point-driven or twisting support.
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
    path: str = ""
    fmax_hz: float | None = 1000.0
    excitation_multiple: float | None = 2.0
    max_modes: int = 40
    harmonics: tuple[tuple[str, int], ...] = ()
    conflict_margin: float = 0.10
    caution_margin: float = 0.20
    participation_threshold: float = 0.01
    support_participation_threshold: float = 0.0
    bandwidth_widening: bool = True
    use_zones: bool = True
    strouhal: float = 0.2
    default_slip: float = 0.03
    paths: tuple[tuple[str, str], ...] = ()
    max_tension_factor: float = 1.5
    min_tension_factor: float = 0.5
    max_bays: int = 8

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
            "path": self.path,
            "fmax_hz": self.fmax_hz,
            "excitation_multiple": self.excitation_multiple,
            "max_modes": self.max_modes,
            "harmonics": dict(self.harmonics),
            "conflict_margin": self.conflict_margin,
            "caution_margin": self.caution_margin,
            "participation_threshold": self.participation_threshold,
            "support_participation_threshold": self.support_participation_threshold,
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
        "max_modes": ("count", 40),
    },
    "margins": {
        "conflict": ("number", 0.10),
        "caution": ("number", 0.20),
        "participation_threshold": ("number", 0.01),
        "support_participation_threshold": ("number", 0.0),
        "bandwidth_widening": ("bool", True),
    },
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
                  default_name: str = "") -> RuleSet:
    """Validate the contents of a rule-set file and build the ``RuleSet``.

    Parameters
    ----------
    data : mapping
        The parsed TOML document.
    source : str
        File name used in messages (and kept as ``RuleSet.path``).
    default_name : str
        Name when the document has no ``name`` key (the file's stem).

    Raises
    ------
    RuleSetError
        Unknown key (with the nearest known one), wrong type, or inconsistent values.
    """
    values: dict[tuple[str, str], Any] = {}
    sections = [s for s in _SCHEMA if s]
    all_keys = {k: s for s, keys in _SCHEMA.items() for k in keys}
    for top, item in data.items():
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
    max_modes = get("modes", "max_modes")

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
    if max_modes < 1:
        raise bad("[modes] max_modes must be at least 1")
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
        path=source if source != "<rule set>" else "",
        fmax_hz=fmax or None,
        excitation_multiple=multiple or None,
        max_modes=max_modes,
        harmonics=tuple((s, get("harmonics", _toml_key(s))) for s in SOURCES),
        conflict_margin=conflict,
        caution_margin=caution,
        participation_threshold=threshold,
        support_participation_threshold=support_threshold,
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
        with open(path, "rb") as handle:
            data = tomllib.load(handle)
    except tomllib.TOMLDecodeError as exc:
        raise RuleSetError(f"{path}: not valid TOML ({exc})") from None
    except OSError as exc:
        raise RuleSetError(f"{path}: cannot be read ({exc.strerror})") from None
    return parse_ruleset(data, source=str(path), default_name=path.stem)


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


# ---------------------------------------------------------------------------------------
# Which modes count; separation
# ---------------------------------------------------------------------------------------

def _limit_for_top(ruleset: RuleSet, top_hz: float | None) -> float:
    limits: list[float] = []
    if ruleset.fmax_hz is not None:
        limits.append(ruleset.fmax_hz)
    if ruleset.excitation_multiple is not None:
        limits.append(ruleset.excitation_multiple * top_hz if top_hz else 0.0)
    return min(limits) if limits else math.inf


def mode_frequency_limit(ruleset: RuleSet, excitations: Iterable[Excitation]) -> float:
    """Highest natural frequency that counts for a panel reached by ``excitations``.

    Parameters
    ----------
    ruleset : RuleSet
    excitations : iterable of Excitation
        The excitations reaching the panel.

    Returns
    -------
    float  [Hz]
        ``fmax_hz``, or ``excitation_multiple`` × the highest excitation (upper band edge),
        the smaller when both are set; 0 when the limit is a multiple and nothing reaches the
        panel.
    """
    highs = [e.high_hz for e in excitations]
    return _limit_for_top(ruleset, max(highs) if highs else None)


def separation(mode_hz: Any, low_hz: Any, high_hz: Any) -> Any:
    """Signed separation of a natural frequency from a line or band.

    Parameters
    ----------
    mode_hz : float or ndarray  [Hz]
    low_hz, high_hz : float or ndarray  [Hz]
        Band edges; equal for a line.

    Returns
    -------
    float or ndarray  [-]
        ``(f − low)/low`` below the band, ``(f − high)/high`` above it, 0 inside; for a line
        ``(f − f_exc)/f_exc``.
    """
    f = np.asarray(mode_hz, dtype=float)
    lo = np.asarray(low_hz, dtype=float)
    hi = np.asarray(high_hz, dtype=float)
    out = np.where(f < lo, (f - lo) / lo, np.where(f > hi, (f - hi) / hi, 0.0))
    return float(out) if out.ndim == 0 else out


# ---------------------------------------------------------------------------------------
# Excitation tables
# ---------------------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class _Reach:
    """The excitations reaching one zone, sorted by lower edge, as arrays."""

    excitations: tuple[Excitation, ...]
    low: np.ndarray
    high: np.ndarray
    airborne: np.ndarray
    top_hz: float | None

    @classmethod
    def of(cls, excitations: Sequence[Excitation]) -> _Reach:
        order = sorted(range(len(excitations)), key=lambda k: excitations[k].low_hz)
        ordered = tuple(excitations[k] for k in order)
        low = np.array([e.low_hz for e in ordered], dtype=float)
        high = np.array([e.high_hz for e in ordered], dtype=float)
        airborne = np.array([e.airborne for e in ordered], dtype=bool)
        return cls(ordered, low, high, airborne, float(high.max()) if len(high) else None)


@dataclass(frozen=True, eq=False)
class ExcitationTable:
    """Every excitation of a schedule with the zones its equipment reaches.

    Build it once (``ExcitationTable.from_equipment``) and pass it to ``evaluate_panel`` for
    every panel: the excitations reaching each zone are sorted into arrays on first use and
    kept.

    Parameters
    ----------
    excitations : tuple of Excitation
    zones : tuple of (tuple of str or None)
        Per excitation, the zones of its equipment (casefolded), None for every zone.
    """

    excitations: tuple[Excitation, ...]
    zones: tuple[frozenset[str] | None, ...]
    _cache: dict = field(default_factory=dict, repr=False)

    @classmethod
    def from_equipment(
        cls,
        items: Mapping[Equipment, Sequence[Excitation]]
        | Iterable[tuple[Equipment, Sequence[Excitation]]],
    ) -> ExcitationTable:
        """Table from (equipment, its excitations) pairs or a mapping of them."""
        pairs = items.items() if isinstance(items, Mapping) else items
        excitations: list[Excitation] = []
        zones: list[frozenset[str] | None] = []
        for equipment, excs in pairs:
            z = None if equipment.zones is None else frozenset(
                s.strip().casefold() for s in equipment.zones)
            for e in excs:
                excitations.append(e)
                zones.append(z)
        return cls(tuple(excitations), tuple(zones))

    @classmethod
    def everywhere(cls, excitations: Sequence[Excitation]) -> ExcitationTable:
        """Table whose excitations all reach every panel (already filtered by the caller)."""
        return cls(tuple(excitations), (None,) * len(excitations))

    def reaching(self, zone: str, use_zones: bool = True) -> _Reach:
        """The excitations reaching a panel in ``zone`` (all of them without zones)."""
        key = zone.strip().casefold() if use_zones else None
        got = self._cache.get(key)
        if got is None:
            chosen = [e for e, z in zip(self.excitations, self.zones)
                      if key is None or z is None or key in z]
            got = self._cache[key] = _Reach.of(chosen)
        return got


# Tables built on the fly from plain sequences, kept by identity so that a caller passing the
# same tuple for many panels pays for the sorting once.
_TABLES: OrderedDict[int, tuple[Any, ExcitationTable]] = OrderedDict()
_TABLES_KEPT = 32


def _as_table(excitations: Any) -> ExcitationTable:
    if isinstance(excitations, ExcitationTable):
        return excitations
    hit = _TABLES.get(id(excitations))
    if hit is not None and hit[0] is excitations:
        _TABLES.move_to_end(id(excitations))
        return hit[1]
    if isinstance(excitations, Mapping):
        table = ExcitationTable.from_equipment(excitations)
    else:
        seq = list(excitations)
        if seq and isinstance(seq[0], tuple):
            table = ExcitationTable.from_equipment(seq)
        else:
            table = ExcitationTable.everywhere(seq)
    if isinstance(excitations, tuple):
        _TABLES[id(excitations)] = (excitations, table)
        while len(_TABLES) > _TABLES_KEPT:
            _TABLES.popitem(last=False)
    return table


def _reach(panel: Panel, excitations: Any, ruleset: RuleSet) -> _Reach:
    return _as_table(excitations).reaching(panel.zone, ruleset.use_zones)


# ---------------------------------------------------------------------------------------
# The judgement
# ---------------------------------------------------------------------------------------

_MODE_ARRAYS: OrderedDict[int, tuple[Any, tuple]] = OrderedDict()
_MODE_ARRAYS_KEPT = 4096


def _mode_arrays(modes: Sequence[Mode]) -> tuple[list[Mode], np.ndarray, np.ndarray, np.ndarray]:
    """Modes sorted by frequency, with their frequency, participation and loss-factor arrays.

    Kept by identity for tuples (immutable; the physics hands the same tuple to every panel of
    one construction), so the arrays are built once per construction.
    """
    modes = getattr(modes, "modes", modes)
    if isinstance(modes, tuple):
        hit = _MODE_ARRAYS.get(id(modes))
        if hit is not None and hit[0] is modes:
            return hit[1]
        got = _build_mode_arrays(modes)
        _MODE_ARRAYS[id(modes)] = (modes, got)
        while len(_MODE_ARRAYS) > _MODE_ARRAYS_KEPT:
            _MODE_ARRAYS.popitem(last=False)
        return got
    return _build_mode_arrays(modes)


def _build_mode_arrays(modes: Sequence[Mode]):
    modes = list(modes)
    f = np.array([m.frequency_hz for m in modes], dtype=float)
    if len(f) > 1 and np.any(f[1:] < f[:-1]):
        order = np.argsort(f, kind="stable")
        modes = [modes[k] for k in order]
        f = f[order]
    participation = np.array([m.participation for m in modes], dtype=float)
    eta = np.array([np.nan if m.loss_factor is None else m.loss_factor for m in modes],
                   dtype=float)
    return modes, f, participation, eta


def _widening(eta: np.ndarray, ruleset: RuleSet) -> np.ndarray:
    """Half-power half-width η/2 per mode (0 when unknown or not asked for)."""
    if not ruleset.bandwidth_widening:
        return np.zeros_like(eta)
    return np.where(np.isfinite(eta), 0.5 * np.abs(eta), 0.0)


def _pairs(f: np.ndarray, participation: np.ndarray, eta: np.ndarray,
           low: np.ndarray, high: np.ndarray, airborne: np.ndarray, ruleset: RuleSet):
    """Every (mode, excitation) pair within the caution margin.

    ``f`` must be ascending. Returns mode indices, excitation indices, separations,
    conflict flags and the margin that applies, ordered conflicts first then by |separation|.
    """
    widen = _widening(eta, ruleset)
    reach = ruleset.caution_margin + (float(widen.max()) if len(widen) else 0.0) \
        + SEPARATION_TOLERANCE
    start = low * max(1.0 - reach, 0.0)
    end = high * (1.0 + reach)
    first = np.searchsorted(f, start, side="left")
    stop = np.searchsorted(f, end, side="right")
    counts = stop - first
    total = int(counts.sum())
    if total == 0:
        empty = np.zeros(0, dtype=int)
        return empty, empty, np.zeros(0), np.zeros(0, dtype=bool), np.zeros(0)
    exc = np.repeat(np.arange(len(low)), counts)
    offsets = np.cumsum(counts) - counts
    mode = np.arange(total) - np.repeat(offsets - first, counts)
    fm, lo, hi = f[mode], low[exc], high[exc]
    sep = np.where(fm < lo, (fm - lo) / lo, np.where(fm > hi, (fm - hi) / hi, 0.0))
    size = np.abs(sep)
    w = widen[mode]
    conflict_margin = ruleset.conflict_margin + w
    caution_margin = ruleset.caution_margin + w
    within_caution = size <= caution_margin + SEPARATION_TOLERANCE
    within_conflict = size <= conflict_margin + SEPARATION_TOLERANCE
    threshold = np.where(airborne[exc], ruleset.participation_threshold,
                         ruleset.support_participation_threshold)
    demoted = participation[mode] < threshold
    conflict = within_conflict & ~demoted
    # A demoted pair is one grade down: a caution inside the conflict margin, nothing beyond.
    keep = np.where(demoted, within_conflict, within_caution)
    margin = np.where(conflict | demoted, conflict_margin, caution_margin)
    idx = np.flatnonzero(keep)
    idx = idx[np.lexsort((size[idx], ~conflict[idx]))]
    return mode[idx], exc[idx], sep[idx], conflict[idx], margin[idx]


_FINDING_FIELDS = ("panel", "mode", "excitation", "separation", "severity", "margin", "remedy")


def _finding_by_constructor(panel: str, mode: Mode, excitation: Excitation, separation: float,
                            severity: str, margin: float) -> Finding:
    return Finding(panel=panel, mode=mode, excitation=excitation, separation=separation,
                   severity=severity, margin=margin)  # type: ignore[arg-type]


def _finding_by_dict(panel: str, mode: Mode, excitation: Excitation, separation: float,
                     severity: str, margin: float) -> Finding:
    # Same record as the constructor makes (a frozen dataclass's __init__ only assigns its
    # fields), at a third of the cost: large schedules make millions of findings.
    f = object.__new__(Finding)
    object.__setattr__(f, "__dict__", {
        "panel": panel, "mode": mode, "excitation": excitation, "separation": separation,
        "severity": severity, "margin": margin, "remedy": None})
    return f


def _fast_finding_is_safe() -> bool:
    import dataclasses
    names = tuple(f.name for f in dataclasses.fields(Finding))
    return (names == _FINDING_FIELDS and not hasattr(Finding, "__slots__")
            and "__post_init__" not in vars(Finding)
            and dataclasses.fields(Finding)[-1].default is None)


_finding = _finding_by_dict if _fast_finding_is_safe() else _finding_by_constructor


def findings_for_panel(findings: Sequence[Finding], panel_id: str) -> tuple[Finding, ...]:
    """The same findings named for another panel of the same type (shared solves)."""
    if not findings or findings[0].panel == panel_id:
        return tuple(findings)
    if _finding is _finding_by_constructor:
        import dataclasses
        return tuple(dataclasses.replace(f, panel=panel_id) for f in findings)
    out = []
    new = object.__new__
    for f in findings:
        g = new(Finding)
        fields = g.__dict__   # filled in place: the same record dataclasses.replace makes
        fields.update(f.__dict__)
        fields["panel"] = panel_id
        out.append(g)
    return tuple(out)


def evaluate_panel(panel: Panel, modes: Sequence[Mode], excitations: Any,
                   ruleset: RuleSet) -> tuple[Finding, ...]:
    """Findings for one panel: every (mode, excitation) pair within the caution margin.

    Parameters
    ----------
    panel : Panel
    modes : sequence of Mode (or an object with a ``.modes`` attribute)
        The panel's natural modes; only those up to ``mode_frequency_limit`` and at most
        ``ruleset.max_modes`` of them (the lowest) count.
    excitations : ExcitationTable, or (Equipment, excitations) pairs, or Excitation sequence
        With a table or pairs, zones are applied here (when ``ruleset.use_zones``); a plain
        sequence of ``Excitation`` is taken as already filtered for this panel.
    ruleset : RuleSet

    Returns
    -------
    tuple of Finding
        Conflicts first, then cautions; within each, by increasing |separation|.

    Notes
    -----
    Separation and severities as described in the module docstring: a pair is a conflict when
    ``|s| ≤ conflict_margin (+ η/2)`` and a caution when ``|s| ≤ caution_margin (+ η/2)``,
    except that an airborne excitation against a mode whose participation is below
    ``participation_threshold`` is one grade down (a caution within the conflict margin, no
    finding beyond it). ``Finding.margin`` is the (widened) margin the pair was judged by.

    References
    ----------
    .. [1] ASHRAE Handbook — HVAC Applications, ch. "Noise and Vibration Control" (separation
       margins, common practice).
    .. [2] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 (half-power bandwidth η·f).
    """
    reach = _reach(panel, excitations, ruleset)
    if not reach.excitations:
        return ()
    ordered, f, participation, eta = _mode_arrays(modes)
    limit = _limit_for_top(ruleset, reach.top_hz)
    count = min(int(np.searchsorted(f, limit * (1 + 1e-12), side="right")), ruleset.max_modes)
    if count == 0:
        return ()
    mode_idx, exc_idx, sep, conflict, margin = _pairs(
        f[:count], participation[:count], eta[:count], reach.low, reach.high, reach.airborne,
        ruleset)
    excs = reach.excitations
    severity = ["conflict" if c else "caution" for c in conflict.tolist()]
    name = panel.panel
    if _finding is _finding_by_constructor:
        return tuple(map(
            _finding, repeat(name, len(sep)), [ordered[m] for m in mode_idx.tolist()],
            [excs[e] for e in exc_idx.tolist()], sep.tolist(), severity, margin.tolist()))
    # The same records as the constructor makes (see _finding_by_dict), built inline: large
    # schedules make millions of findings and this loop is the audit's hot spot.
    new, assign, cls = object.__new__, object.__setattr__, Finding
    out = []
    append = out.append
    for m, e, s, sv, g in zip(mode_idx.tolist(), exc_idx.tolist(), sep.tolist(), severity,
                              margin.tolist()):
        f = new(cls)
        assign(f, "__dict__", {"panel": name, "mode": ordered[m], "excitation": excs[e],
                               "separation": s, "severity": sv, "margin": g, "remedy": None})
        append(f)
    return tuple(out)


def evaluate_panels(panels_and_modes: Iterable[tuple[Panel, Sequence[Mode]]], excitations: Any,
                    ruleset: RuleSet) -> list[tuple[Finding, ...]]:
    """``evaluate_panel`` for many panels, in order.

    Parameters
    ----------
    panels_and_modes : iterable of (Panel, modes)
    excitations : ExcitationTable or (Equipment, excitations) pairs
        Built into a table once for the whole batch.
    ruleset : RuleSet

    Returns
    -------
    list of tuple of Finding
        One tuple per panel.

    Notes
    -----
    A large schedule makes millions of ``Finding`` records, and the interpreter's cyclic
    garbage collector, which re-examines every live record as their number grows, then costs
    as much as the evaluation itself. The records hold no reference cycles, so the collector is
    paused for the batch and restored to its previous state afterwards.
    """
    import gc

    table = _as_table(excitations)
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        return [evaluate_panel(panel, modes, table, ruleset) for panel, modes in panels_and_modes]
    finally:
        if was_enabled:
            gc.enable()


def findings_with_remedies(panel: Panel, modes: Sequence[Mode], excitations: Any,
                           ruleset: RuleSet, modes_of) -> tuple[Finding, ...]:
    """``evaluate_panel`` with one remedy per excitation in conflict, on all its findings.

    Parameters
    ----------
    panel, modes, excitations, ruleset
        As for ``evaluate_panel``.
    modes_of : callable (Panel) -> sequence of Mode
        The full model, used by the remedy's root finding (``auditor.remedy.remedy_for``).

    Returns
    -------
    tuple of Finding
        As ``evaluate_panel``; every finding whose excitation has a conflict with this panel
        carries that pair's remedy (computed once per pair; the tension scan is shared by
        all excitations of the panel). Cautions of an excitation with no conflict carry none.
    """
    from auditor.remedy import TensionScan, remedy_for

    findings = evaluate_panel(panel, modes, excitations, ruleset)
    conflicted: list[Excitation] = []
    for f in findings:
        if f.severity == "conflict" and f.excitation not in conflicted:
            conflicted.append(f.excitation)
    if not conflicted:
        return findings
    reach = _reach(panel, excitations, ruleset)
    scan = TensionScan(panel, modes_of, ruleset)
    remedies = {}
    for exc in conflicted:
        others = tuple(e for e in reach.excitations if e != exc)
        remedies[exc] = remedy_for(panel, exc, modes_of, ruleset, other_excitations=others,
                                   scan=scan)
    return tuple(replace(f, remedy=remedies[f.excitation]) if f.excitation in remedies else f
                 for f in findings)
