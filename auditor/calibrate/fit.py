"""The tension fit: a panel parameter fitted so the model's frequencies meet the measured ones.

recording → peaks (``measurement``) → hum set aside → peaks matched to the full model's modes
(``matching``) → the panel parameter (tension, both tensions, or areal density) fitted so the
model's frequencies meet the measured ones.

The fit never assumes a scaling law such as f ∝ √T: every trial value goes through the model
(``modes_of``), air loading, bending stiffness and all, so whatever the model knows about how
frequencies depend on tension the fit respects.

A predicted mode with no peak costs in proportion to its uniform-pressure participation (a
microphone hears odd-odd modes best; a missing fundamental is strong evidence, a missing
even mode none), and a weak log-normal prior on the scheduled value breaks ties. A log grid
over the search range finds the basin; least squares in log frequency on the matched pairs
(no prior) refines it, re-pairing, and dropping pairs far outside the consensus, until the
pairs settle.

References
----------
Half-power bandwidth η = Δf/f: L. L. Beranek and I. L. Vér (eds.), *Noise and Vibration
Control Engineering*, 2nd ed., Wiley, 2006. Exponential-window correction: D. J. Ewins,
*Modal Testing*, 2nd ed., 2000. Standard errors from the Jacobian, ``cov = s² (JᵀJ)⁻¹``:
e.g. W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge, 2007, ch. 15.
"""

from __future__ import annotations

import dataclasses
import math
import os
import posixpath
from pathlib import Path
from typing import Callable, Sequence

import numpy as np

from auditor.calibrate.calibration import (
    FIT_PARAMETERS,
    Calibration,
    CalibrationError,
    FitParameter,
    MatchedPeak,
)
from auditor.calibrate.matching import match_peaks
from auditor.calibrate.measurement import hum_lines, measure_peaks
from auditor.calibrate.peaks import Peak
from auditor.calibrate.reader import read_recording
from auditor.calibrate.recording import Recording
from auditor.model import Panel
from auditor.results import Mode

__all__ = ["ModesOf", "calibrate_panel"]

_CENTS_PER_LOG = 1200.0 / math.log(2.0)

ModesOf = Callable[[Panel], Sequence[Mode]]


def _panel_at(panel: Panel, fit: str, params: np.ndarray) -> Panel:
    scale = np.exp(params)
    if fit == "tension":
        return dataclasses.replace(panel, tension_x=panel.tension_x * float(scale[0]),
                                   tension_y=panel.tension_y * float(scale[0]))
    if fit == "tension_ratio":
        return dataclasses.replace(panel, tension_x=panel.tension_x * float(scale[0]),
                                   tension_y=panel.tension_y * float(scale[1]))
    return dataclasses.replace(panel, areal_density=panel.areal_density * float(scale[0]))


class _Model:
    """``modes_of`` at trial parameters (log scale factors), remembered per trial."""

    def __init__(self, panel: Panel, fit: str, modes_of: ModesOf) -> None:
        self.panel, self.fit, self.modes_of = panel, fit, modes_of
        self.cache: dict[tuple[float, ...], tuple[Mode, ...]] = {}
        self.calls = 0

    def modes(self, params: np.ndarray) -> tuple[Mode, ...]:
        key = tuple(np.round(np.asarray(params, dtype=float), 12))
        if key not in self.cache:
            trial = _panel_at(self.panel, self.fit, np.asarray(params, dtype=float))
            self.calls += 1
            try:
                result = tuple(self.modes_of(trial))
            except (ValueError, ArithmeticError) as error:
                raise CalibrationError(
                    f"the panel model failed at tension {trial.tension_x:.4g} N/m, areal "
                    f"density {trial.areal_density:.4g} kg/m²: {error}") from None
            self.cache[key] = tuple(m for m in result
                                    if math.isfinite(m.frequency_hz) and m.frequency_hz > 0)
        return self.cache[key]

    def frequencies(self, params: np.ndarray) -> np.ndarray:
        return np.array([m.frequency_hz for m in self.modes(params)])

    def missing_weights(self, params: np.ndarray, band: tuple[float, float],
                        scale: float) -> np.ndarray:
        """How much each mode's absence costs: its participation over the largest one.

        A microphone hears a mode by the sound it radiates, and below coincidence that is
        what its uniform-pressure participation measures (an odd-odd mode radiates as a
        monopole, the others far less), so a missing fundamental is strong evidence against a
        trial value while a missing even mode is none. Modes outside ``band`` [Hz] cost
        nothing. With no participation known, every mode in the band costs ``scale``/4.
        """
        modes = self.modes(params)
        f = np.array([m.frequency_hz for m in modes])
        share = np.array([max(m.participation, 0.0) for m in modes])
        largest = float(share.max()) if share.size else 0.0
        weights = share / largest if largest > 0 else np.full(f.size, 0.25)
        inside = (f >= band[0]) & (f <= band[1])
        return scale * weights * inside


def _grid(fit: str, search_range: tuple[float, float], points: int) -> np.ndarray:
    low, high = math.log(search_range[0]), math.log(search_range[1])
    line = np.linspace(low, high, points)
    if FIT_PARAMETERS[fit] == 1:
        return line[:, None]
    return np.column_stack([line, line])


def _best(model: _Model, peaks: np.ndarray, trials: np.ndarray, tolerance: float,
          band: tuple[float, float], missing_weight: float,
          prior_spread: float) -> np.ndarray:
    """The trial of least matching cost plus a weak log-normal prior on the schedule.

    The prior adds ``P·Σ (ln s / ln prior_spread)²`` (``P`` the unpaired-peak cost, ``s``
    each factor on the scheduled value): it only decides between trials the peaks cannot
    tell apart, such as a dense band of high-order modes lining up with a few peaks at an
    implausible tension. The refinement that follows does not use it.
    """
    penalty = math.log1p(tolerance) ** 2
    prior = penalty * np.sum((trials / math.log(prior_spread)) ** 2, axis=1)
    costs = np.array([
        match_peaks(peaks, model.frequencies(p), tolerance,
                    model.missing_weights(p, band, missing_weight))[1]
        for p in trials]) + prior
    distance = np.abs(trials).sum(axis=1)  # ties go to the trial nearest the schedule
    order = np.lexsort((distance, np.round(costs, 12)))
    return trials[order[0]]


def _fit(model: _Model, peaks: np.ndarray, start: np.ndarray, tolerance: float,
         band: tuple[float, float], missing_weight: float,
         outlier_sigmas: float = 4.0, outlier_floor: float = 0.01):
    """Least squares in log frequency on the pairs, re-pairing until they settle.

    After each solve, a pair whose residual exceeds ``outlier_sigmas`` robust standard
    deviations (1.4826 × median absolute deviation) and ``outlier_floor`` (in natural-log
    frequency) is taken for a spurious peak near a mode: the peak is excluded and the fit
    repeated.
    """
    from scipy.optimize import least_squares

    params = np.asarray(start, dtype=float)
    limit = math.log1p(tolerance)
    result = None
    labels: tuple[str, ...] = ()
    chosen: list[int] = []
    excluded: set[int] = set()
    for _ in range(12):
        modes = model.modes(params)
        candidates = [i for i in range(len(peaks)) if i not in excluded]
        pairs, _cost = match_peaks(peaks[candidates], [m.frequency_hz for m in modes], tolerance,
                                   model.missing_weights(params, band, missing_weight))
        pairs = [(candidates[i], j) for i, j in pairs]
        new_labels = tuple(modes[j].label for _, j in sorted(pairs))
        new_chosen = [i for i, _ in sorted(pairs)]
        if result is not None and new_labels == labels and new_chosen == chosen:
            break
        labels, chosen = new_labels, new_chosen
        if len(chosen) < len(params):
            raise CalibrationError(
                f"only {len(chosen)} peak(s) match a predicted mode within "
                f"{100 * tolerance:g} %, too few to fit {len(params)} parameter(s)")
        measured = np.log(peaks[chosen])

        def residuals(p: np.ndarray, labels=labels, measured=measured) -> np.ndarray:
            by_label = {m.label: m.frequency_hz for m in model.modes(p)}
            out = np.empty(len(labels))
            for k, label in enumerate(labels):
                f = by_label.get(label)
                out[k] = measured[k] - math.log(f) if f else 4 * limit
            return out

        result = least_squares(residuals, params, diff_step=1e-4, method="trf")
        params = result.x
        # pairs far outside the consensus are spurious peaks that happen to lie near a mode
        spread = 1.4826 * float(np.median(np.abs(result.fun - np.median(result.fun))))
        outliers = np.abs(result.fun) > max(outlier_sigmas * spread, outlier_floor)
        if outliers.any() and len(chosen) - int(outliers.sum()) >= len(params):
            excluded |= {chosen[k] for k in np.flatnonzero(outliers)}
            result = None
    if result is None:
        raise CalibrationError("the peak-to-mode pairing did not settle")
    return params, result, labels, chosen


def _standard_errors(result, count: int) -> np.ndarray | None:
    jac = np.atleast_2d(result.jac)
    dof = count - jac.shape[1]
    if dof < 1:
        return None
    variance = float(np.sum(result.fun**2)) / dof
    try:
        cov = np.linalg.inv(jac.T @ jac) * variance
    except np.linalg.LinAlgError:
        return None
    diag = np.diag(cov)
    if np.any(~np.isfinite(diag)) or np.any(diag < 0):
        return None
    return np.sqrt(diag)


def _shown_name(source: str) -> str:
    """A recording's name for outputs: as given when relative, the file name when absolute."""
    if os.path.isabs(source) or posixpath.isabs(source):
        return Path(source).name
    return source


def calibrate_panel(
    panel: Panel,
    recording: Recording | str | os.PathLike,
    modes_of: ModesOf,
    *,
    line_frequency: float | None = None,
    fit: FitParameter = "tension",
    tolerance: float = 0.05,
    search_range: tuple[float, float] = (0.3, 3.0),
    grid_points: int = 61,
    hum_tolerance: float = 0.01,
    missing_weight: float = 1.0,
    prior_spread: float = 2.0,
    min_prominence_db: float = 6.0,
    floor_margin_db: float = 20.0,
    dynamic_range_db: float = 50.0,
    window_end: float = 0.01,
) -> Calibration:
    """Fit a panel's tension (or both tensions, or its areal density) to a tap test.

    Parameters
    ----------
    panel : Panel
        As scheduled; the scheduled values are the start and the reference of the fit.
    recording : Recording or path
        A time series (its ring-down is analysed) or a spectrum. A path is read as given,
        and named by its file name alone; ``calibrate_schedule`` is what confines a
        schedule's paths to its folder.
    modes_of : callable (Panel) -> sequence of Mode
        The full model (air loading included in production). It should return every mode
        below a fixed frequency that lies above the highest peak of interest; only peaks
        within the range the model covers at every trial value are fitted.
    line_frequency : float or None  [Hz]
        Mains frequency; peaks within ``hum_tolerance`` of 2·f_line·k are set aside as hum.
    fit : {"tension", "tension_ratio", "areal_density"}
        "tension" scales both tensions by one factor; "tension_ratio" fits ``tension_x``
        and ``tension_y`` separately (orthotropic fabric, warp and weft; on a rectangle the
        frequencies alone cannot tell (Tx, Ty) from the pair that swaps the roles of m and
        n, and the weak prior on the schedule picks the one nearer it); "areal_density"
        scales the areal density and keeps the tensions.
    tolerance : float  [-]
        Largest relative difference of a peak–mode pair.
    search_range : (float, float)  [-]
        Factors on the scheduled value searched by the grid.
    grid_points : int
        Points of the log grid for a one-parameter fit ("tension_ratio" uses a 25 × 25 grid
        of both tensions, then a 9 × 9 grid around the best: about 700 model evaluations).
    hum_tolerance : float  [-]
        Relative distance from a hum line within which a peak is hum.
    missing_weight : float  [-]
        Cost of a predicted mode with no peak (below the highest peak), for the mode of
        largest participation, relative to a peak with no mode; other modes in proportion
        to their participation (see ``match_peaks``).
    prior_spread : float  [-]
        Factor on the scheduled value that a weak log-normal prior treats as one standard
        deviation; it only breaks ties in the grid search (see ``_best``), never moves the
        refined value.
    min_prominence_db, floor_margin_db, dynamic_range_db : float  [dB]
        Peak acceptance, see ``spectral_peaks``.
    window_end : float  [-]
        Exponential window value at the end of the record, see ``tap_spectrum``.

    Returns
    -------
    Calibration

    Raises
    ------
    RecordingError
        When ``recording`` is a path that cannot be used.
    CalibrationError
        No peaks, too few matches, or a panel with nothing to scale.

    References
    ----------
    Half-power bandwidth η = Δf/f: Beranek and Vér, *Noise and Vibration Control
    Engineering*, 2nd ed., Wiley, 2006. Exponential-window correction: Ewins, *Modal
    Testing*, 2nd ed., 2000. Standard errors from the Jacobian, ``cov = s² (JᵀJ)⁻¹``:
    e.g. W. H. Press et al., *Numerical Recipes*, 3rd ed., Cambridge, 2007, ch. 15.
    """
    if fit not in FIT_PARAMETERS:
        raise CalibrationError(
            f"unknown fit '{fit}'; choose one of {', '.join(sorted(FIT_PARAMETERS))}")
    if fit in ("tension", "tension_ratio") and not (panel.tension_x > 0 and panel.tension_y > 0):
        raise CalibrationError(f"panel {panel.panel} has no scheduled tension to calibrate")
    if not panel.areal_density > 0:
        raise CalibrationError(f"panel {panel.panel} has no areal density")
    if not prior_spread > 1:
        raise CalibrationError("prior_spread must exceed 1, e.g. 2.0")
    if not 0 < search_range[0] < 1 < search_range[1]:
        raise CalibrationError("search_range must bracket 1, e.g. (0.3, 3.0)")
    if not isinstance(recording, Recording):
        recording = read_recording(recording)

    model = _Model(panel, fit, modes_of)
    grid = _grid(fit, search_range, grid_points)
    highest = [model.frequencies(p) for p in grid]
    if any(h.size == 0 for h in highest):
        raise CalibrationError(f"the panel model gives no modes for panel {panel.panel}")
    f_low = 0.5 * min(float(h.min()) for h in highest)
    f_high = min(float(h.max()) for h in highest) / (1.0 + tolerance)
    if recording.sample_rate is not None:
        f_high = min(f_high, 0.45 * float(recording.sample_rate))

    peaks = measure_peaks(recording, fmin=f_low, fmax=f_high, window_end=window_end,
                          min_prominence_db=min_prominence_db, floor_margin_db=floor_margin_db,
                          dynamic_range_db=dynamic_range_db)
    if not peaks:
        raise CalibrationError(
            f"no clear peaks between {f_low:.3g} and {f_high:.3g} Hz in {recording.name}; "
            "tap harder or nearer the panel's centre, or record closer")
    notes: list[str] = list(recording.notes)

    hum: list[Peak] = []
    usable: list[Peak] = []
    lines = hum_lines(line_frequency, f_high * 1.1) if line_frequency else np.zeros(0)
    for peak in peaks:
        near = lines.size and np.min(np.abs(peak.frequency_hz / lines - 1.0)) <= hum_tolerance
        (hum if near else usable).append(peak)
    if not usable:
        raise CalibrationError(f"every peak in {recording.name} lies on a mains hum line")
    peak_hz = np.array([p.frequency_hz for p in usable])

    spectrum_low = (f_low if recording.frequencies_hz is None
                    else max(f_low, float(recording.frequencies_hz[0])))
    band = (spectrum_low, float(peak_hz.max()) * (1.0 + tolerance))
    if fit == "tension_ratio":
        # both tensions on a coarse log grid with a widened tolerance (so the basin of the
        # answer is never stepped over), then a fine grid around the best with the real one
        axis = np.linspace(math.log(search_range[0]), math.log(search_range[1]), 25)
        coarse = np.array([[a, b] for a in axis for b in axis])
        start = _best(model, peak_hz, coarse, 1.5 * tolerance, band, missing_weight,
                      prior_spread)
        step = float(axis[1] - axis[0])
        local = np.linspace(-step, step, 9)
        fine = np.array([[start[0] + a, start[1] + b] for a in local for b in local])
        start = _best(model, peak_hz, fine, tolerance, band, missing_weight,
                      prior_spread)
    else:
        start = _best(model, peak_hz, grid, tolerance, band, missing_weight,
                      prior_spread)
    params, result, labels, chosen = _fit(model, peak_hz, start, tolerance, band,
                                          missing_weight)

    errors = _standard_errors(result, len(chosen))
    if errors is None:
        notes.append(f"{len(chosen)} matched peak(s) for {len(params)} parameter(s): "
                     "no uncertainty can be estimated")
    elif len(chosen) < 3:
        notes.append(f"only {len(chosen)} matched peaks: treat the fit with caution")

    fitted_panel = _panel_at(panel, fit, params)
    modes_now = {m.label: m for m in model.modes(params)}
    matched: list[MatchedPeak] = []
    residual_logs = []
    for index, label in zip(chosen, labels):
        peak = usable[index]
        mode = modes_now[label]
        r = math.log(peak.frequency_hz / mode.frequency_hz)
        residual_logs.append(r)
        matched.append(MatchedPeak(peak_hz=peak.frequency_hz, mode=label,
                                   predicted_hz=mode.frequency_hz,
                                   residual_percent=100.0 * math.expm1(r),
                                   loss_factor=peak.loss_factor,
                                   predicted_loss_factor=mode.loss_factor))
    residual_logs_arr = np.array(residual_logs)
    unmatched = tuple(p.frequency_hz for k, p in enumerate(usable) if k not in set(chosen))
    if unmatched:
        notes.append(f"{len(unmatched)} peak(s) match no mode (room modes or other sources)")
    if hum:
        notes.append(f"{len(hum)} peak(s) set aside as mains hum")

    uncertainty = float(errors[0]) if errors is not None else None
    uncertainty_y = float(errors[1]) if errors is not None and len(errors) > 1 else None
    return Calibration(
        panel=panel.panel,
        fitted=fit,
        tension=fitted_panel.tension_x,
        tension_y=fitted_panel.tension_y,
        scheduled_tension=panel.tension_x,
        scheduled_tension_y=panel.tension_y,
        areal_density=fitted_panel.areal_density,
        scheduled_areal_density=panel.areal_density,
        uncertainty=uncertainty,
        uncertainty_y=uncertainty_y,
        peaks_hz=tuple(p.frequency_hz for p in peaks),
        matched=tuple(matched),
        unmatched_hz=unmatched,
        hum_hz=tuple(p.frequency_hz for p in hum),
        residual=float(100.0 * np.sqrt(np.mean(np.expm1(residual_logs_arr) ** 2))),
        residual_cents=float(_CENTS_PER_LOG * np.sqrt(np.mean(residual_logs_arr**2))),
        loss_factors=tuple((m.mode, m.loss_factor) for m in matched),
        recording=_shown_name(recording.source),
        notes=tuple(notes),
    )
