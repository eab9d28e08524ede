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
from .cubes import open_cube

__all__ = [
    *_errors_all,
    "brightness_unit", "is_per_beam", "is_temperature",
    "CONVENTIONS", "axis_in", "channel_mask", "check_redshift", "check_rest_frequency",
    "frequency_axis", "frequency_from_velocity", "observed_frequency", "velocity",
    "open_cube",
]
