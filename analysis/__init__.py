"""cubeloupe's analysis layer: every number the widgets show comes from here.

Pure functions over astropy Quantities and spectral-cube objects; nothing in
this package imports ipywidgets, bqplot or traitlets.
"""

from .errors import *  # noqa: F401,F403
from .errors import __all__ as _errors_all
from .units import brightness_unit, is_per_beam, is_temperature
from .spectral import (
    CONVENTIONS,
    axis_in,
    channel_mask,
    check_redshift,
    check_rest_frequency,
    frequency_axis,
    frequency_from_velocity,
    observed_frequency,
    velocity,
)
from .cubes import cube_source, open_cube, source_name
from .demo import DEMO_CUBES, demo_names, demo_path, demo_truth
from .catalog import find_line, lines_in_band, load_catalog, read_line_list, select_lines
from .redshift_solver import RedshiftCandidate, redshift_candidates
from .luminosity import (
    CosmologySummary, LineLuminosity, get_cosmology, line_luminosity, redshift_summary,
)
from .beams import (
    beam_area_pixels,
    map_beam,
    convert_brightness,
    cube_beam,
    jy_per_beam_to_kelvin,
    kelvin_to_jy_per_beam,
    pixel_solid_angle,
)
from .spectra import region_spectrum
from .baseline import BaselineFit, fit_baseline
from .lines import LineMeasurement, measure_line
from .moments import MomentMaps, moment_maps
from .noise import (
    ChannelStatistics, ContinuumMap, PeakSpectrum, channel_noise, channel_statistics, cube_noise,
    leftover_continuum, peak_spectrum,
)
from .delivery_check import CubeCheck, check_cube

from .display import display_image, display_limits, display_axis, marker_positions
from .export import write_map, write_maps, write_spectra, write_table

__all__ = [
    *_errors_all,
    "brightness_unit", "is_per_beam", "is_temperature",
    "CONVENTIONS", "axis_in", "channel_mask", "check_redshift", "check_rest_frequency",
    "frequency_axis", "frequency_from_velocity", "observed_frequency", "velocity",
    "open_cube", "cube_source", "source_name",
    "DEMO_CUBES", "demo_names", "demo_path", "demo_truth",
    "find_line", "lines_in_band", "load_catalog", "read_line_list", "select_lines",
    "RedshiftCandidate", "redshift_candidates",
    "CosmologySummary", "LineLuminosity", "get_cosmology", "line_luminosity", "redshift_summary",
    "beam_area_pixels", "map_beam", "convert_brightness", "cube_beam", "jy_per_beam_to_kelvin",
    "kelvin_to_jy_per_beam", "pixel_solid_angle",
    "region_spectrum", "BaselineFit", "fit_baseline", "LineMeasurement", "measure_line",
    "MomentMaps", "moment_maps",
    "ChannelStatistics", "ContinuumMap", "PeakSpectrum", "channel_noise", "channel_statistics", "cube_noise",
    "leftover_continuum", "peak_spectrum",
    "CubeCheck", "check_cube",
    "display_image", "display_limits", "display_axis", "marker_positions",
    "write_map", "write_maps", "write_spectra", "write_table",
]
