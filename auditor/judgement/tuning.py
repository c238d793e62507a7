"""Modes followed over tension, and the tensions at which each (mode, tone) pair is a finding.

Each mode's frequency rises with the tension scale ``s`` (both tensions scaled together),
``f_k(s)``. The pair it makes with a tone is a conflict, a caution or nothing as ``f_k``
sweeps past the tone, and the set of frequencies where it is a conflict (or a finding at all)
is one interval: the margin window around the tone (``[f_low(1 − m), f_high(1 + m)]``, m the
margin widened by η/2) intersected with the range where its response reaches the rule set's
threshold. The response ``20·log10(p·|H|·T)`` falls monotonically on each side of resonance,
so solving ``(1 − ρ²)² + η² = (p·T / 10^(X/20))²`` for ρ² gives that range in closed form
(``T`` the mount's transmissibility at the band edge on that side, its largest over the band
inside it). The same grading as ``auditor.judgement.screening.judge_pairs``, turned round.

Mapping the intervals through ``f_k(s)`` gives the tensions each pair blocks; their union is
what no tension may touch, and the rest are the clear windows.

``f_k(s)`` is known exactly for a membrane that scales as √T (``f² ∝ s``, from one solve), and
otherwise interpolated: ``f²`` linear in ``s`` between solved scales (ω² is a Rayleigh quotient
linear in the tension stiffness, so this is second-order accurate in the change of shape, and
exact for a prestressed plate), ``∝ s`` beyond them. Participation and loss factor take their
least favourable values along each mode, so the windows err narrow; the remedy verifies the
tension it proposes on the full model.

References
----------
.. [1] Harris' Shock and Vibration Handbook, 5th ed., ch. 2 (hysteretic amplification).
.. [2] L. E. Kinsler, A. R. Frey, A. B. Coppens and J. V. Sanders, *Fundamentals of
   Acoustics*, 4th ed., Wiley, 2000, ch. 4 (membrane frequencies ∝ √T).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Protocol

import numpy as np

from auditor.judgement.response import transmissibility
from auditor.judgement.screening import ExcitationArrays, ModeArrays, margin_widening
from auditor.rules import SEPARATION_TOLERANCE, RuleSet

__all__ = ["SolvedScale", "ModeTracks", "mode_tracks", "modes_at", "blocked_intervals",
           "union", "complement", "caution_regions"]


class SolvedScale(Protocol):
    """The full model solved at one tension scale (read-only)."""

    @property
    def scale(self) -> float: ...
    @property
    def modes(self) -> ModeArrays: ...
    @property
    def labels(self) -> tuple[str, ...]: ...
    @property
    def overlap_from_hz(self) -> float: ...


@dataclass(frozen=True, eq=False)
class ModeTracks:
    """Each mode's f² at the common grid of scales (rows: modes), with the least favourable
    participation and loss factors along it, and whether it lies where modes overlap."""

    scales: np.ndarray          # (G,)
    f2: np.ndarray              # (K, G), non-decreasing along each row
    participation: np.ndarray   # (K,) the largest along the mode
    eta_response: np.ndarray    # (K,) the smallest (largest amplification)
    eta_margin: np.ndarray      # (K,) the largest (widest margins); NaN when unknown
    overlap: np.ndarray         # (K,) bool
    limit_hz: float
    overlap_hz: float           # where modes overlap at scale 1 (∝ √s, as the modes) [Hz]
    base_rows: np.ndarray = field(  # the row of each mode of the solve at scale 1
        default_factory=lambda: np.zeros(0, dtype=int))


def mode_tracks(states: Sequence[SolvedScale], low: float, high: float,
                limit_hz: float) -> ModeTracks:
    """Modes matched by label across the solved scales (the k-th mode of a label with the
    k-th); f² linear in s between solved scales, ∝ s beyond them."""
    grid = np.array(sorted({low, high, *(st.scale for st in states)}))
    column = {float(s): j for j, s in enumerate(grid)}
    rows_of, count = _track_rows([st.labels for st in states])
    placed = [(column[float(st.scale)], rows) for st, rows in zip(states, rows_of)]
    width = len(grid)
    f2 = np.full((count, width), np.nan)
    part = np.full((count, len(states)), np.nan)
    eta_r = np.full((count, len(states)), np.nan)
    eta_m = np.full((count, len(states)), np.nan)
    for j, (st, (c, rows)) in enumerate(zip(states, placed)):
        f2[rows, c] = st.modes.frequency ** 2
        part[rows, j] = st.modes.participation
        eta_r[rows, j] = st.modes.response_loss_factor
        eta_m[rows, j] = st.modes.loss_factor
    f2 = _filled(f2, grid)
    k_base = min(range(len(states)), key=lambda j: abs(math.log(states[j].scale)))
    base = states[k_base]
    at_base = np.sqrt(f2[:, column[float(base.scale)]])
    return ModeTracks(grid, f2, np.fmax.reduce(part, axis=1), np.fmin.reduce(eta_r, axis=1),
                      np.fmax.reduce(eta_m, axis=1), at_base >= base.overlap_from_hz,
                      limit_hz, base.overlap_from_hz / math.sqrt(base.scale),
                      rows_of[k_base])


def _track_rows(labelled: Sequence[Sequence[str]]) -> tuple[list[np.ndarray], int]:
    """The track (row) of each mode of each solve: the k-th mode of a label in one solve
    follows the k-th of that label in the others. Rows are numbered in order of first
    appearance (solves in turn, modes in order); returns the rows of each solve and the
    number of tracks."""
    sizes = [len(labels) for labels in labelled]
    total = sum(sizes)
    if total == 0:
        return [np.zeros(0, dtype=int) for _ in labelled], 0
    ids: dict[str, int] = {}
    label = np.fromiter((ids.setdefault(name, len(ids)) for labels in labelled
                         for name in labels), dtype=int, count=total)
    solve = np.repeat(np.arange(len(labelled)), sizes)
    position = np.arange(total)
    # the occurrence of each mode among the modes of its label in its solve
    order = np.lexsort((position, label, solve))
    group = solve[order] * (int(label.max()) + 1) + label[order]
    starts = np.concatenate([[True], group[1:] != group[:-1]])
    first = np.maximum.accumulate(np.where(starts, position, 0))
    occurrence = np.empty(total, dtype=int)
    occurrence[order] = position - first
    key = label * (int(occurrence.max()) + 1) + occurrence
    unique, first_seen, inverse = np.unique(key, return_index=True, return_inverse=True)
    rank = np.empty(len(unique), dtype=int)
    rank[np.argsort(first_seen, kind="stable")] = np.arange(len(unique))
    rows = rank[inverse.ravel()]
    return list(np.split(rows, np.cumsum(sizes)[:-1])), len(unique)


def _filled(f2: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """f² where a mode was not solved: linear between its solved scales, ∝ s beyond them;
    then made non-decreasing along each row."""
    count, width = f2.shape
    if count == 0:
        return f2
    known = np.isfinite(f2)
    index = np.arange(width)
    last = np.maximum.accumulate(np.where(known, index, -1), axis=1)
    upcoming = np.minimum.accumulate(np.where(known, index, width)[:, ::-1], axis=1)[:, ::-1]
    rows = np.arange(count)[:, None]
    left = np.clip(last, 0, width - 1)
    right = np.clip(upcoming, 0, width - 1)
    f_left, f_right = f2[rows, left], f2[rows, right]
    s, s_left, s_right = grid[None, :], grid[left], grid[right]
    with np.errstate(invalid="ignore", divide="ignore"):
        between = f_left + (f_right - f_left) * (s - s_left) / (s_right - s_left)
        out = np.where(known, f2,
                       np.where((last >= 0) & (upcoming < width), between,
                                np.where(last >= 0, f_left * s / s_left, f_right * s / s_right)))
    return np.maximum.accumulate(np.maximum(out, 0.0), axis=1)


def _response_edges(p: np.ndarray, eta: np.ndarray, path: np.ndarray,
                    threshold_db: float) -> np.ndarray:
    """Half-width d in ρ² = 1 ± d within which ``20·log10(p·|H|·T) ≥ threshold``, from
    ``|H| = 1/√((1 − ρ²)² + η²)`` (NaN where never reached)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        needed = 10.0 ** (threshold_db / 20.0) / (p * path)      # |H| needed
        return np.sqrt(1.0 / needed**2 - eta**2)                 # NaN when 1/needed < η


def blocked_intervals(tracks: ModeTracks, excitations: ExcitationArrays, ruleset: RuleSet):
    """For every (mode, tone) pair that can make a finding somewhere in the range: the scales
    at which it is a conflict, and those at which it is any finding, as closed intervals
    (NaN when empty), with the tone's index."""
    fmin, fmax = np.sqrt(tracks.f2[:, 0]), np.sqrt(tracks.f2[:, -1])
    widen = margin_widening(tracks.eta_margin, ruleset)
    reach = ruleset.caution_margin + (float(widen.max()) if len(widen) else 0.0) \
        + SEPARATION_TOLERANCE
    k_idx, e_idx = [], []
    for tone, (lo, hi) in enumerate(zip(excitations.low, excitations.high)):
        hit = np.flatnonzero((fmax >= lo * (1 - reach)) & (fmin <= hi * (1 + reach)))
        k_idx.append(hit)
        e_idx.append(np.full(len(hit), tone))
    k = np.concatenate(k_idx) if k_idx else np.zeros(0, int)
    e = np.concatenate(e_idx) if e_idx else np.zeros(0, int)
    lo, hi = excitations.low[e], excitations.high[e]
    p, eta, w = tracks.participation[k], tracks.eta_response[k], widen[k]
    airborne = excitations.airborne[e]
    fn, zeta = excitations.mount_hz[e], excitations.mount_damping[e]
    t_lo, t_hi = transmissibility(lo, fn, zeta), transmissibility(hi, fn, zeta)
    t_in = np.maximum(np.maximum(t_lo, t_hi),
                      transmissibility(np.clip(fn, lo, hi), fn, zeta))
    threshold = np.where(airborne, ruleset.participation_threshold,
                         ruleset.support_participation_threshold)
    weak = p < threshold
    tol = SEPARATION_TOLERANCE

    def response_window(db: float) -> tuple[np.ndarray, np.ndarray]:
        inside = (p * t_in / eta) >= 10.0 ** (db / 20.0)
        d_lo = _response_edges(p, eta, t_lo, db)
        d_hi = _response_edges(p, eta, t_hi, db)
        with np.errstate(divide="ignore", invalid="ignore"):
            below = np.where(np.isnan(d_lo), lo, lo / np.sqrt(1.0 + d_lo))
            above = np.where(np.isnan(d_hi), hi,
                             np.where(d_hi < 1, hi / np.sqrt(1.0 - np.where(d_hi < 1, d_hi, 0.0)),
                                      np.inf))
        return np.where(inside, below, np.nan), np.where(inside, above, np.nan)

    def margin_window(margin: float) -> tuple[np.ndarray, np.ndarray]:
        return lo * (1.0 - (margin + w + tol)), hi * (1.0 + (margin + w + tol))

    rc = response_window(ruleset.conflict_db)
    rr = response_window(ruleset.report_db)
    wc, wk = margin_window(ruleset.conflict_margin), margin_window(ruleset.caution_margin)
    top = tracks.limit_hz * (1 + 1e-12)
    conflict = (np.where(weak, np.nan, np.maximum(wc[0], rc[0])),
                np.where(weak, np.nan, np.minimum(np.minimum(wc[1], rc[1]), top)))
    outer_win = (np.where(weak, wc[0], wk[0]), np.where(weak, wc[1], wk[1]))
    dropped = weak & tracks.overlap[k]
    finding = (np.where(dropped, np.nan, np.maximum(outer_win[0], rr[0])),
               np.where(dropped, np.nan, np.minimum(np.minimum(outer_win[1], rr[1]), top)))
    return (_to_scales(tracks, k, *conflict), _to_scales(tracks, k, *finding), e)


def _to_scales(tracks: ModeTracks, rows: np.ndarray, f_low: np.ndarray,
               f_high: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The scales at which mode ``rows`` lies in [f_low, f_high] (NaN where never)."""
    g = tracks.scales
    f2 = tracks.f2[rows]
    empty = ~(f_low <= f_high)
    a = _inverse(g, f2, np.where(empty, 0.0, f_low) ** 2, -np.inf)
    b = _inverse(g, f2, np.where(empty, 0.0, np.minimum(f_high, 1e300)) ** 2, np.inf)
    outside = empty | (a > g[-1]) | (b < g[0])
    return np.where(outside, np.nan, np.maximum(a, g[0])), np.where(outside, np.nan,
                                                                    np.minimum(b, g[-1]))


def _inverse(grid: np.ndarray, f2: np.ndarray, value: np.ndarray, beyond: float) -> np.ndarray:
    """The scale at which each row of ``f2`` (piecewise linear on ``grid``, non-decreasing)
    reaches ``value``; −inf below the first point, +inf above the last (``beyond`` sets which
    way a flat stretch at ``value`` is read)."""
    if len(value) == 0:
        return np.zeros(0)
    n = len(grid)
    below = (f2 < value[:, None]) if beyond < 0 else (f2 <= value[:, None])
    j = np.clip(below.sum(axis=1), 1, n - 1)
    rows = np.arange(len(value))
    y0, y1 = f2[rows, j - 1], f2[rows, j]
    x0, x1 = grid[j - 1], grid[j]
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.where(y1 > y0, x0 + (value - y0) * (x1 - x0) / (y1 - y0), x0)
    return np.where(value < f2[:, 0], -np.inf, np.where(value > f2[:, -1], np.inf, x))


def union(starts: np.ndarray, ends: np.ndarray) -> list[tuple[float, float]]:
    keep = np.isfinite(starts) & np.isfinite(ends)
    pairs = sorted(zip(starts[keep].tolist(), ends[keep].tolist()))
    out: list[list[float]] = []
    for a, b in pairs:
        if out and a <= out[-1][1]:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [(a, b) for a, b in out]


def complement(blocked: list[tuple[float, float]], low: float,
                high: float) -> list[tuple[float, float]]:
    out, start = [], low
    for a, b in blocked:
        if a > start:
            out.append((start, min(a, high)))
        start = max(start, b)
    if start < high:
        out.append((start, high))
    return [(a, b) for a, b in out if b > a * (1 + 1e-9)]


def caution_regions(windows, finding_starts, finding_ends) -> list[tuple[float, float, int]]:
    """The windows cut where the number of cautions changes: (low, high, cautions)."""
    keep = np.isfinite(finding_starts) & np.isfinite(finding_ends)
    starts, ends = np.sort(finding_starts[keep]), np.sort(finding_ends[keep])
    out: list[tuple[float, float, int]] = []
    for a, b in windows:
        cuts = sorted({a, b, *(x for x in np.concatenate([starts, ends]).tolist() if a < x < b)})
        for x, y in zip(cuts[:-1], cuts[1:]):
            mid = math.sqrt(x * y)
            count = int(np.searchsorted(starts, mid, "right") - np.searchsorted(ends, mid, "left"))
            if out and out[-1][1] == x and out[-1][2] == count:
                out[-1] = (out[-1][0], y, count)
            else:
                out.append((x, y, count))
    return out


def modes_at(tracks: ModeTracks, scale: float, default_eta: float) -> ModeArrays:
    """The followed modes at ``scale`` (interpolated), as arrays for the screen."""
    g = tracks.scales
    j = int(np.clip(np.searchsorted(g, scale), 1, len(g) - 1))
    t = (scale - g[j - 1]) / (g[j] - g[j - 1])
    f2 = tracks.f2[:, j - 1] + t * (tracks.f2[:, j] - tracks.f2[:, j - 1])
    return ModeArrays.from_arrays(np.sqrt(np.maximum(f2, 0.0)), tracks.participation,
                                  tracks.eta_margin, default_eta)
