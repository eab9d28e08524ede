"""Writing results to files: moment maps as FITS, spectra and tables as ECSV.

Every writer refuses to replace an existing file unless ``overwrite=True``
(raising `OutputExistsError`), and checks that the folder exists first, so a
failed export never leaves a half-written file behind.

* `write_map` writes a spectral-cube Projection as a FITS image with its
  celestial WCS, beam (BMAJ/BMIN/BPA) and BUNIT, through spectral-cube's own
  ``Projection.hdu``.
* `write_spectra` writes OneDSpectrum objects sharing nothing but a name as
  one ECSV table in long form (one row per channel per spectrum), because
  spectral windows have different channel grids.
* `write_table` writes an astropy Table as ECSV.

Examples
--------
>>> import astropy.units as u, numpy as np
>>> from astropy.table import Table
>>> import tempfile, pathlib
>>> path = pathlib.Path(tempfile.mkdtemp()) / "rows.ecsv"
>>> write_table(Table({"flux": [1.0] * u.Jy * u.km / u.s}), path)
PosixPath('...rows.ecsv')
"""

import os
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.io import fits
from astropy.table import Table, vstack

from .errors import CubeFileError, OutputExistsError
from .spectral import frequency_axis

__all__ = ["write_map", "write_maps", "write_spectra", "write_table", "check_output_path"]


def check_output_path(path, overwrite=False):
    """Return ``path`` as a Path if it may be written, else raise.

    Raises
    ------
    OutputExistsError
        The file exists and ``overwrite`` is False.
    CubeFileError
        The folder does not exist, or ``path`` is a folder.

    Examples
    --------
    >>> check_output_path("new-file-that-does-not-exist.fits")
    PosixPath('new-file-that-does-not-exist.fits')
    """
    path = Path(os.fspath(path)).expanduser()
    if path.is_dir():
        raise CubeFileError(f"{path} is a folder; give the name of a file to write")
    if path.exists() and not overwrite:
        raise OutputExistsError(f"{path} exists already; choose another name or pass overwrite=True to replace it")
    if not path.parent.exists():
        raise CubeFileError(f"the folder {path.parent} does not exist; create it first or choose another path")
    return path


def write_map(projection, path, *, overwrite=False, history=None):
    """Write a 2-D map (spectral-cube Projection) as a FITS image keeping WCS, beam and BUNIT.

    Parameters
    ----------
    projection : spectral_cube.Projection
        E.g. ``moment_maps(...).m0``.
    path : str or Path
    overwrite : bool
    history : str, optional
        Added as a HISTORY card (e.g. how the map was made).

    Returns
    -------
    Path
    """
    path = check_output_path(path, overwrite)
    hdu = projection.hdu  # spectral-cube puts WCS, BUNIT and the beam keywords in the header
    if history:
        hdu.header.add_history(str(history))
    hdu.writeto(path, overwrite=overwrite)
    return path


def write_maps(maps, path, *, overwrite=False, history=None):
    """Write several maps into one FITS file: the first as primary HDU, the rest as named image extensions.

    Parameters
    ----------
    maps : dict
        name -> Projection (None values are skipped).

    Returns
    -------
    Path
    """
    path = check_output_path(path, overwrite)
    hdus = []
    for name, projection in maps.items():
        if projection is None:
            continue
        hdu = projection.hdu
        if history:
            hdu.header.add_history(str(history))
        hdu.header["EXTNAME"] = str(name).upper().replace(" ", "_")[:68]
        cls = fits.PrimaryHDU if not hdus else fits.ImageHDU
        hdus.append(cls(data=hdu.data, header=hdu.header))
    if not hdus:
        raise CubeFileError("there are no maps to write; make the moment maps first")
    fits.HDUList(hdus).writeto(path, overwrite=overwrite)
    return path


def write_spectra(spectra, path, *, overwrite=False):
    """Write named spectra as one ECSV table (columns name, window, channel, frequency, value).

    Parameters
    ----------
    spectra : dict
        name -> OneDSpectrum, or name -> list of OneDSpectrum (one per spectral window; None skipped).

    Returns
    -------
    Path
    """
    path = check_output_path(path, overwrite)
    parts = []
    for name, items in spectra.items():
        items = items if isinstance(items, (list, tuple)) else [items]
        for window, spectrum in enumerate(items):
            if spectrum is None:
                continue
            n = spectrum.shape[0]
            parts.append(Table({
                "name": np.full(n, str(name)),
                "window": np.full(n, window),
                "channel": np.arange(n),
                "frequency": frequency_axis(spectrum).to(u.GHz),
                "value": u.Quantity(spectrum.value, spectrum.unit),
            }))
    if not parts:
        raise CubeFileError("there are no spectra to write; add a region first")
    table = vstack(parts)
    table.meta["description"] = "Region spectra written by cubeloupe; frequency is the observed frequency"
    table.write(path, format="ascii.ecsv", overwrite=overwrite)
    return path


def write_table(table, path, *, overwrite=False):
    """Write an astropy Table as ECSV."""
    path = check_output_path(path, overwrite)
    Table(table).write(path, format="ascii.ecsv", overwrite=overwrite)
    return path
