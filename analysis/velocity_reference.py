"""Which line velocities refer to, when the user has not said.

Velocities of a line cube need a rest frequency. In order of precedence
(common practice): the one the user gives; the one the file carries
(RESTFRQ/RESTFREQ, the frequency the observatory tuned to); and for a distant
source with no rest frequency in the file, the catalog line of lowest upper
energy that falls in the band at the source's redshift (the line most likely
to be seen first).

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import demo_path, open_cube
>>> choice = choose_velocity_reference(open_cube(demo_path("disk")))
>>> choice.origin, round(float(choice.rest_frequency.to_value(u.GHz)), 3)
('file', 230.538)
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .catalog import lines_in_band, load_catalog
from .spectral import check_redshift, cube_rest_frequency

__all__ = ["VelocityReference", "choose_velocity_reference", "catalog_line_at"]

# Two catalog rows closer than this in rest frequency are taken to be the same line.
_SAME_LINE = 1 * u.kHz


@dataclass(frozen=True)
class VelocityReference:
    """The rest frequency velocities refer to, and where it came from.

    Attributes
    ----------
    rest_frequency : Quantity [GHz] or None
    line : str
        The catalog name of the line at that rest frequency, or ``""``.
    origin : {'given', 'file', 'catalog', 'none'}
        The user's value, the file's RESTFRQ, the catalog's first line in the
        band at z, or nothing found.
    """

    rest_frequency: u.Quantity = None
    line: str = ""
    origin: str = "none"


def catalog_line_at(rest_frequency, catalog=None):
    """The name of the one catalog line at ``rest_frequency`` (within 1 kHz), or ``""``.

    Parameters
    ----------
    rest_frequency : Quantity [frequency]
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.

    Examples
    --------
    >>> import astropy.units as u
    >>> catalog_line_at(230.538 * u.GHz)
    'CO J=2-1'
    """
    catalog = load_catalog() if catalog is None else catalog
    rest = u.Quantity(catalog["rest_frequency"], u.GHz)
    hits = np.flatnonzero(np.abs(rest - u.Quantity(rest_frequency, u.GHz)) < _SAME_LINE)
    return str(catalog["name"][hits[0]]) if len(hits) == 1 else ""


def choose_velocity_reference(cube, z=0.0, *, rest_frequency=None, catalog=None, band=None):
    """The rest frequency velocities of ``cube`` should refer to, by the rule of the module docstring.

    Parameters
    ----------
    cube : SpectralCube or OneDSpectrum
        Its header's rest frequency is the second choice.
    z : float
        Source redshift; the catalog is consulted only for z != 0.
    rest_frequency : Quantity [frequency or wavelength], optional
        The user's choice, which wins.
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.
    band : Quantity, shape (2,), optional
        The observed band to search the catalog in; the cube's band by default.

    Returns
    -------
    VelocityReference

    Examples
    --------
    >>> import astropy.units as u
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> cube = open_cube(demo_path("disk"))
    >>> choose_velocity_reference(cube, rest_frequency=345.7959899 * u.GHz).line
    'CO J=3-2'
    """
    z = check_redshift(z)
    catalog = load_catalog() if catalog is None else catalog
    if rest_frequency is not None:
        given = u.Quantity(rest_frequency).to(u.GHz, equivalencies=u.spectral())
        return VelocityReference(given, catalog_line_at(given, catalog), "given")
    in_file = cube_rest_frequency(cube)
    if in_file is not None:
        return VelocityReference(in_file.to(u.GHz), catalog_line_at(in_file, catalog), "file")
    if z == 0:
        return VelocityReference()
    if band is None:
        axis = cube.spectral_axis
        if not axis.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
            return VelocityReference()
        axis = axis.to(u.GHz, equivalencies=u.spectral())
        band = u.Quantity([axis.min(), axis.max()])
    lines = lines_in_band(band[0], band[1], z, catalog)
    if len(lines) == 0:
        return VelocityReference()
    first = int(np.argmin(np.nan_to_num(np.asarray(lines["E_up"], dtype=float), nan=np.inf)))
    return VelocityReference(u.Quantity(lines["rest_frequency"][first], u.GHz), str(lines["name"][first]), "catalog")
