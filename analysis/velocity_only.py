"""Cubes whose spectral axis is a velocity with no rest frequency: working in velocity only.

Single-dish maps are often delivered on a velocity axis (VRAD, VOPT, legacy
VELO-LSR) without the rest frequency that was observed. Their velocities are
all the science needs, but code written for frequency axes cannot place them.
`on_nominal_frequencies` gives such a cube a frequency axis through a stated
nominal rest frequency and the cube's own velocity convention; every velocity
computed back with the same rest frequency and convention is the file's
velocity again, exactly (the Doppler conventions are one-to-one; Greisen et
al. 2006, A&A 446, 747, table 1). Frequencies on that axis mean nothing and
must not be shown; catalog lines cannot be placed on it.

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import demo_path, open_cube
>>> velocity_only(open_cube(demo_path("disk")))       # a frequency axis
False
"""

import astropy.units as u

from .cubes import cube_source
from .errors import SpectralAxisError
from .spectral import cube_rest_frequency

__all__ = ["NOMINAL_REST_FREQUENCY", "velocity_only", "velocity_convention_of", "on_nominal_frequencies"]

#: The stand-in rest frequency of a velocity-only cube's frequency axis (any value gives the same velocities).
NOMINAL_REST_FREQUENCY = 100 * u.GHz

_KMS = u.km / u.s
# CTYPE3 of a velocity axis -> its Doppler convention (FITS WCS Paper III, Greisen et al. 2006, table 1;
# the legacy VELO axis is relativistic in the standard's sense, FELO optical).
_CONVENTION_OF_TYPE = {"VRAD": "radio", "VOPT": "optical", "FELO": "optical", "VELO": "relativistic"}


def velocity_only(cube):
    """True when ``cube``'s spectral axis is a velocity and no rest frequency is known for it."""
    axis_unit = cube.spectral_axis.unit
    return axis_unit.is_equivalent(_KMS) and cube_rest_frequency(cube) is None


def velocity_convention_of(cube):
    """The Doppler convention of a velocity axis: as `open_cube` read it, else from CTYPE3.

    Examples
    --------
    >>> from astropy.wcs import WCS
    >>> class Holder:
    ...     wcs = WCS(naxis=3); wcs.wcs.ctype = ["RA---SIN", "DEC--SIN", "VOPT"]; meta = {}
    >>> velocity_convention_of(Holder())
    'optical'
    """
    source = cube_source(cube) or {}
    recorded = (source.get("spectral_axis") or {}).get("convention")
    if recorded:
        return recorded
    ctype = str(cube.wcs.wcs.ctype[cube.wcs.wcs.spec]).upper()
    for prefix, convention in _CONVENTION_OF_TYPE.items():
        if ctype.startswith(prefix):
            return convention
    raise SpectralAxisError(f"the spectral axis ({ctype!r}) is not a velocity axis of a known convention")


def on_nominal_frequencies(cube, rest_frequency=NOMINAL_REST_FREQUENCY):
    """The cube on a frequency axis made from its velocities with ``rest_frequency`` and its own convention.

    Parameters
    ----------
    cube : SpectralCube
        A velocity-axis cube (see `velocity_only`).
    rest_frequency : Quantity [frequency]
        The real rest frequency when the user knows it; otherwise the
        nominal one, in which case only velocities measured from it (in the
        cube's convention) are meaningful.

    Returns
    -------
    SpectralCube
        The same data (still the file's memory map), a frequency WCS.
    """
    convention = velocity_convention_of(cube)
    return cube.with_spectral_unit(u.GHz, velocity_convention=convention, rest_value=u.Quantity(rest_frequency, u.GHz))
