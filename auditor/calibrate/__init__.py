"""Site verification: a tap-test recording calibrates a panel's tension and measures damping.

recording → spectrum of the ring-down → peaks (frequency, half-power bandwidth, loss factor)
→ hum set aside → peaks matched to the full model's modes → the panel parameter (tension,
both tensions, or areal density) fitted so the model's frequencies meet the measured ones.

::

    from auditor.calibrate import calibrate_schedule, read_recording
    calibrations, problems = calibrate_schedule(schedule, modes_of)

Modules, one concern each:

``recording``     the ``Recording`` record and the checks every reader applies (short, silent,
                  clipped, the channel used)
``wav``           WAV files, read and written
``delimited``     CSV and text recordings: a spectrum or a time series
``reader``        ``read_recording``: the one way in, bounded in memory and time
``synthesis``     an invented ring-down (tests and the demo project)
``spectrum``      the exponentially windowed spectrum of a ring-down; η from a bandwidth
``peaks``         peak picking: frequency, half-power bandwidth, loss factor
``modal_terms``   peaks refined by modal terms fitted to the complex spectrum
``measurement``   a recording's peaks; the mains hum lines among them
``matching``      peaks paired one-to-one with predicted modes
``calibration``   the ``Calibration`` record, its JSON values, its uncertainty as text, and
                  the panel with its fitted values
``fit``           ``calibrate_panel``: the tension (or areal density) fitted through the model
``confinement``   where a schedule's recordings may be read from
``schedule``      ``calibrate_schedule``: every panel of a schedule with a tap test

Imports run one way: ``recording`` → ``wav``, ``delimited`` → ``reader``; ``spectrum`` →
``peaks`` → ``modal_terms`` → ``measurement``; those, ``matching`` and ``calibration`` →
``fit``; ``fit`` and ``confinement`` → ``schedule``. Nothing here imports the audit, the CLI
or the report.
"""

from __future__ import annotations

from auditor.calibrate.calibration import (
    FIT_PARAMETERS,
    Calibration,
    CalibrationError,
    MatchedPeak,
    apply_calibration,
    calibration_to_dict,
    format_uncertainty,
)
from auditor.calibrate.delimited import MAX_CSV_COLUMNS, MAX_CSV_LINE_BYTES, MAX_CSV_LINES
from auditor.calibrate.fit import calibrate_panel
from auditor.calibrate.matching import match_peaks
from auditor.calibrate.measurement import hum_lines, measure_peaks
from auditor.calibrate.modal_terms import refine_modal_fit
from auditor.calibrate.peaks import Peak, spectral_peaks
from auditor.calibrate.reader import read_recording
from auditor.calibrate.recording import (
    CLIP_RUN_SAMPLES,
    MAX_RECORDING_BYTES,
    MIN_DURATION_S,
    MIN_SAMPLES,
    MIN_SPECTRUM_POINTS,
    Recording,
    RecordingError,
)
from auditor.calibrate.schedule import calibrate_schedule
from auditor.calibrate.spectrum import TapSpectrum, half_power_loss_factor, tap_spectrum
from auditor.calibrate.synthesis import synthesise_tap_test
from auditor.calibrate.wav import MAX_SAMPLES, write_wav

__all__ = [
    # recordings
    "Recording",
    "RecordingError",
    "read_recording",
    "synthesise_tap_test",
    "write_wav",
    "MIN_DURATION_S",
    "MIN_SAMPLES",
    "MIN_SPECTRUM_POINTS",
    "CLIP_RUN_SAMPLES",
    "MAX_RECORDING_BYTES",
    "MAX_SAMPLES",
    "MAX_CSV_LINES",
    "MAX_CSV_LINE_BYTES",
    "MAX_CSV_COLUMNS",
    # calibration
    "Peak",
    "TapSpectrum",
    "MatchedPeak",
    "Calibration",
    "CalibrationError",
    "FIT_PARAMETERS",
    "tap_spectrum",
    "half_power_loss_factor",
    "spectral_peaks",
    "refine_modal_fit",
    "measure_peaks",
    "hum_lines",
    "match_peaks",
    "calibrate_panel",
    "calibrate_schedule",
    "calibration_to_dict",
    "format_uncertainty",
    "apply_calibration",
]
