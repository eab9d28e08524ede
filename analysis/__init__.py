"""cubeloupe's analysis layer: every number the widgets show comes from here.

Pure functions over astropy Quantities and spectral-cube objects; nothing in
this package imports ipywidgets, bqplot or traitlets.
"""

from .errors import *  # noqa: F401,F403
from .errors import __all__ as _errors_all
from .unit_text import unit_text
from .units import brightness_unit, is_brightness, is_per_beam, is_temperature
from .spectral import (
    CONVENTIONS,
    SPEED_OF_LIGHT,
    cube_rest_frequency,
    Z_MAX,
    axis_in,
    channel_mask,
    check_redshift,
    check_rest_frequency,
    frequency_axis,
    frequency_from_velocity,
    observed_frequency,
    velocity,
)
from .cubes import check_total_intensity, cube_source, cube_stokes, open_cube, source_name
from .spectral_header import SpectralReading, read_spectral_axis
from .demo import DEMO_CUBES, demo_names, demo_path, demo_truth
from .catalog import (LINE_FAMILIES, collapse_hyperfine, find_line, lines_in_band, load_catalog, read_line_list,
                      select_lines)
from .partition import (partition_energy_zero, partition_function, partition_function_source,
                        partition_function_species)
from .recombination import recombination_frequency, recombination_lines
from .band_lines import BandLines
from .label_layout import LabelPlacement, label_priority, label_rows
from .redshift_solver import RedshiftCandidate, redshift_candidates
from .luminosity import (
    DEFAULT_COSMOLOGY, HUBBLE_FLOW_MIN_VELOCITY, CosmologySummary, LineLuminosity, get_cosmology,
    in_hubble_flow, line_luminosity, redshift_summary,
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
from .polybaseline import MAX_ORDER, check_order
from .baseline import BaselineFit, fit_baseline, line_free_mask
from .lines import LineMeasurement, measure_line
from .line_table import MEASUREMENT_COLUMNS, measurement_table
from .first_view import FirstView, first_view
from .velocity_only import NOMINAL_REST_FREQUENCY, on_nominal_frequencies, velocity_convention_of, velocity_only
from .velocity_reference import VelocityReference, catalog_line_at, choose_velocity_reference
from .moments import MomentMaps, moment_maps
from .moment_mask import DEFAULT_SIGNIFICANCE, SignificantMoments, significant_moments, within_window
from .noise import (
    ChannelStatistics, ContinuumMap, PeakSpectrum, channel_noise, channel_statistics, cube_noise,
    leftover_continuum, peak_spectrum,
)
from .check import CubeCheck, check_cube

from .display import (
    AXIS_KINDS, STRETCHES, beam_outline, channel_at, channel_for, contour_paths, display_axis,
    display_image, display_limits, marker_positions, sky_position, stretched, to_observed_frequency,
)
from .prefetch import prefetch_channels
from .sky_axes import SkyAxes, nice_ticks, sky_axes, tick_decimals
from .sky_look import beam_anchor, centred_limits, data_bounds
from .export import check_output_path, write_figure, write_map, write_maps, write_spectra, write_table
from .smoothing import (
    SMOOTHING_KERNELS, channel_correlation, correlated_error, noise_correlation_factor, smooth_spectrum,
    smoothing_kernel, with_channel_correlation,
)
from .gaussian_fits import GaussianComponent, GaussianFit, fit_gaussians
from .correlated_lines import correlated_line_errors, correlated_measurement_table
from .hyperfine import HyperfineSolution, hyperfine_lines, strongest_components
from .level_populations import STATISTICAL_ORTHO_PARA, line_intensity, molecular_mass, spin_partition_function, \
    upper_level_population
from .line_intensities import LINE_INTENSITY_COLUMNS, read_line_intensities
from .population import PopulationComponent, PopulationDiagram, population_diagram
from .lte_model import lte_lines, lte_spectrum
from .population_figure import SPIN_STYLES, population_figure, spin_group, write_population_figure
from .pv_slice import PVSlice, path_band, pv_slice
from .channel_maps import DEFAULT_CONTOURS, ChannelPanels, channel_maps, channel_panels

__all__ = [
    *_errors_all,
    "unit_text", "brightness_unit", "is_brightness", "is_per_beam", "is_temperature",
    "CONVENTIONS", "SPEED_OF_LIGHT", "Z_MAX", "axis_in", "channel_mask", "check_redshift", "check_rest_frequency",
    "frequency_axis", "frequency_from_velocity", "observed_frequency", "velocity",
    "open_cube", "cube_source", "source_name", "cube_stokes", "check_total_intensity",
    "SpectralReading", "read_spectral_axis",
    "DEMO_CUBES", "demo_names", "demo_path", "demo_truth",
    "find_line", "lines_in_band", "load_catalog", "read_line_list", "select_lines",
    "LINE_FAMILIES", "collapse_hyperfine", "partition_energy_zero", "partition_function",
    "partition_function_source", "partition_function_species", "recombination_frequency", "recombination_lines",
    "LabelPlacement", "label_priority", "label_rows", "strongest_components",
    "BandLines", "RedshiftCandidate", "redshift_candidates",
    "DEFAULT_COSMOLOGY", "HUBBLE_FLOW_MIN_VELOCITY", "in_hubble_flow", "CosmologySummary", "LineLuminosity", "get_cosmology", "line_luminosity", "redshift_summary",
    "beam_area_pixels", "map_beam", "convert_brightness", "cube_beam", "jy_per_beam_to_kelvin",
    "kelvin_to_jy_per_beam", "pixel_solid_angle",
    "region_spectrum", "MAX_ORDER", "check_order", "BaselineFit", "fit_baseline", "line_free_mask",
    "LineMeasurement", "measure_line", "MEASUREMENT_COLUMNS", "measurement_table",
    "VelocityReference", "catalog_line_at", "choose_velocity_reference", "FirstView", "first_view",
    "NOMINAL_REST_FREQUENCY", "on_nominal_frequencies", "velocity_convention_of", "velocity_only",
    "MomentMaps", "moment_maps", "DEFAULT_SIGNIFICANCE", "SignificantMoments", "significant_moments", "within_window",
    "ChannelStatistics", "ContinuumMap", "PeakSpectrum", "channel_noise", "channel_statistics", "cube_noise",
    "leftover_continuum", "peak_spectrum",
    "CubeCheck", "check_cube",
    "AXIS_KINDS", "STRETCHES", "beam_outline", "channel_at", "channel_for", "contour_paths", "cube_rest_frequency",
    "display_axis", "display_image", "display_limits", "marker_positions", "sky_position", "stretched",
    "to_observed_frequency",
    "prefetch_channels",
    "SkyAxes", "nice_ticks", "sky_axes", "tick_decimals", "beam_anchor", "centred_limits", "data_bounds",
    "check_output_path", "write_figure", "write_map", "write_maps", "write_spectra", "write_table",
    "SMOOTHING_KERNELS", "channel_correlation", "correlated_error", "noise_correlation_factor", "smooth_spectrum",
    "smoothing_kernel", "with_channel_correlation",
    "GaussianComponent", "GaussianFit", "HyperfineSolution", "fit_gaussians", "hyperfine_lines",
    "correlated_line_errors", "correlated_measurement_table",
    "PVSlice", "path_band", "pv_slice", "DEFAULT_CONTOURS", "ChannelPanels", "channel_maps", "channel_panels",
    "STATISTICAL_ORTHO_PARA", "line_intensity", "molecular_mass", "spin_partition_function",
    "upper_level_population", "PopulationComponent", "PopulationDiagram", "population_diagram",
    "lte_lines", "lte_spectrum", "LINE_INTENSITY_COLUMNS", "read_line_intensities",
    "SPIN_STYLES", "population_figure", "spin_group", "write_population_figure",
]
