"""The delivery check: is a delivered cube sound, what is its noise, is continuum left, which lines are there.

`check_cube` runs the check on one cube (`cube_check` states every rule);
the report writers turn its results into ``summary.json`` (`report_json`),
``report.html`` (`report_html`, `report_figures`, written by `report_files`)
and the table the command prints (`report_terminal`). The check builds on the
core analysis modules (`cubeloupe.analysis`); the core never imports it.

Examples
--------
>>> from cubeloupe.analysis.check import check_cube, cube_entry
>>> entry = cube_entry(check_cube(demo_path("disk"), z=0.0049))  # doctest: +SKIP
"""

from .results import (
    AxisSummary,
    Candidate,
    ContinuumSummary,
    CubeCheck,
    ExpectedLine,
    Feature,
    FeatureChannels,
    HeaderSummary,
    LinesSummary,
    NoiseSummary,
    StrongestFeature,
)
from .header import MIN_PIXELS_PER_BEAM, header_summary
from .detections import (
    DETECTION_SNR, FLAG_SIGMAS, MIN_PAD_CHANNELS, flag_channels, group_features, line_free_channels,
)
from .false_alarms import FALSE_ALARMS, expected_noise_peaks, false_alarm_threshold
from .first_pass import ContinuumFreePeaks, continuum_free_peaks, noise_fwhm_from_lags
from .noise_map import NoiseScaledExtremes, SpatialNoise, noise_scaled_extremes, spatial_noise
from .channel_noise import noise_grid
from .identification import IDENTIFY_TOLERANCE
from .cube_check import MAX_THRESHOLD, check_cube, check_detection_options
from .report_json import SCHEMA, cube_entry, failure_entry, summary_dict
from .report_files import REPORT_NAME, SUMMARY_NAME, prepare_output, write_report
from .report_html import cube_section
from .report_terminal import terminal_safe, terminal_table

__all__ = [
    "FLAG_SIGMAS",
    "DETECTION_SNR",
    "FALSE_ALARMS",
    "MIN_PAD_CHANNELS",
    "MIN_PIXELS_PER_BEAM",
    "IDENTIFY_TOLERANCE",
    "AxisSummary",
    "HeaderSummary",
    "FeatureChannels",
    "NoiseSummary",
    "ContinuumSummary",
    "Candidate",
    "Feature",
    "ExpectedLine",
    "LinesSummary",
    "StrongestFeature",
    "CubeCheck",
    "check_cube",
    "check_detection_options",
    "MAX_THRESHOLD",
    "ContinuumFreePeaks",
    "continuum_free_peaks",
    "header_summary",
    "flag_channels",
    "group_features",
    "line_free_channels",
    "expected_noise_peaks",
    "false_alarm_threshold",
    "noise_fwhm_from_lags",
    "noise_grid",
    "SpatialNoise",
    "spatial_noise",
    "NoiseScaledExtremes",
    "noise_scaled_extremes",
    "SCHEMA",
    "SUMMARY_NAME",
    "REPORT_NAME",
    "prepare_output",
    "summary_dict",
    "cube_entry",
    "failure_entry",
    "cube_section",
    "write_report",
    "terminal_table",
    "terminal_safe",
]
