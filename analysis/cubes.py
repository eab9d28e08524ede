"""Opening delivered line cubes: read-only, memory-mapped, validated.

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import open_cube, demo_path
>>> cube = open_cube(demo_path("disk"))
>>> cube.unit
Unit("Jy / beam")
"""

import os
import warnings
from pathlib import Path

import numpy as np
from astropy.io import fits
from astropy.wcs import FITSFixedWarning

from .errors import CubeFileError, CubeShapeError, SpectralAxisError
from .units import brightness_unit

__all__ = ["open_cube", "cube_source", "source_name", "SPECTRAL_CTYPES"]

# Spectral axis types of FITS WCS Paper III (Greisen et al. 2006, A&A 446, 747)
# plus the legacy AIPS velocity types that wcslib translates (VELO-xxx, FELO-xxx).
SPECTRAL_CTYPES = ("FREQ", "VRAD", "VOPT", "VELO", "FELO", "WAVE", "AWAV", "ZOPT", "BETA", "ENER", "WAVN", "VELOCITY")
_CELESTIAL_PREFIXES = ("RA", "DEC", "GLON", "GLAT", "ELON", "ELAT", "SLON", "SLAT", "OFFRA", "OFFDEC")


def cube_source(cube):
    """Where ``cube`` was read from: ``{"path", "hdu", "shape"}`` as recorded by `open_cube`, or None.

    The one place that reads ``cube.meta["cubeloupe_source"]``; cubes made in
    memory (or by other readers) have no source.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path
    >>> cube_source(open_cube(demo_path("disk")))["hdu"]
    0
    """
    meta = getattr(cube, "meta", None) or {}
    source = meta.get("cubeloupe_source")
    return dict(source) if source else None


def source_name(cube, default="the cube"):
    """The path ``cube`` was read from, for messages; ``default`` for cubes made in memory.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path
    >>> source_name(open_cube(demo_path("disk"))).endswith("disk.fits")
    True
    """
    source = cube_source(cube)
    return str(source["path"]) if source else default


def _axis_types(header, naxis):
    return [str(header.get(f"CTYPE{i}", "")).strip().upper() for i in range(1, naxis + 1)]


def _find_data_hdu(hdul, path, hdu):
    if hdu is not None:
        try:
            return hdu, hdul[hdu]
        except (IndexError, KeyError):
            raise CubeFileError(f"{path} has no HDU {hdu!r}; it has {len(hdul)} HDU(s)") from None
    for index, candidate in enumerate(hdul):
        if getattr(candidate, "is_image", False) and candidate.header.get("NAXIS", 0) >= 2:
            return index, candidate
    raise CubeFileError(f"{path} holds no image data; a line cube is an image HDU with 3 or 4 axes")


def _validated_header(header, path):
    """Check axes and units; return a fixed copy of the header (the file is untouched)."""
    naxis = int(header.get("NAXIS", 0))
    shape = [int(header.get(f"NAXIS{i}", 0)) for i in range(1, naxis + 1)]
    types = _axis_types(header, naxis)
    if naxis < 3 or sum(n > 1 for n in shape) < 2:
        raise CubeShapeError(
            f"{path} is a {naxis}-D image (shape {tuple(reversed(shape))}); cubeloupe needs a "
            "line cube with two sky axes and one spectral axis"
        )
    spectral = [i for i, t in enumerate(types) if t.split("-")[0] in SPECTRAL_CTYPES]
    celestial = [i for i, t in enumerate(types) if t.split("-")[0] in _CELESTIAL_PREFIXES]
    other = [i for i in range(naxis) if i not in spectral and i not in celestial]
    if not spectral:
        listing = ", ".join(f"CTYPE{i + 1}={t!r}" for i, t in enumerate(types))
        unknown = [types[i] for i in other if types[i] and types[i] != "STOKES"]
        hint = (f"; {unknown[0]!r} is not a spectral axis type cubeloupe knows "
                f"(use one of {', '.join(SPECTRAL_CTYPES[:7])})") if unknown else ""
        raise SpectralAxisError(
            f"{path} has no spectral axis ({listing}){hint}; load a position-position-frequency "
            "or position-position-velocity cube"
        )
    if len(celestial) < 2:
        raise CubeShapeError(f"{path} has no pair of sky axes (CTYPE {types}); cubeloupe needs RA/Dec-like axes")
    for i in other:
        if shape[i] > 1 and types[i] != "STOKES":
            raise CubeShapeError(
                f"{path} has a non-degenerate extra axis CTYPE{i + 1}={types[i]!r} of length {shape[i]}; "
                "cut it down to one plane first"
            )
    fixed = header.copy()
    unit = brightness_unit(header.get("BUNIT"), source=str(path))
    if unit.physical_type == "dimensionless" and unit.scale == 1:
        fixed.pop("BUNIT", None)
    else:
        fixed["BUNIT"] = unit.to_string()
    # Some writers use RESTFREQ (AIPS) rather than RESTFRQ; wcslib reads both,
    # but spectral-cube's velocity conversions look at the WCS, so keep both.
    if "RESTFRQ" not in fixed and "RESTFREQ" in fixed:
        fixed["RESTFRQ"] = fixed["RESTFREQ"]
    return fixed


def open_cube(path, *, hdu=None, use_dask=False):
    """Open a FITS line cube read-only, memory-mapped and checked.

    Parameters
    ----------
    path : str or os.PathLike
        A FITS file with two sky axes and a spectral axis (FREQ, VRAD, VOPT,
        VELO-xxx, FELO-xxx, WAVE, ...), in any axis order spectral-cube
        accepts, optionally with a degenerate Stokes axis. A missing CUNIT
        means the FITS default (Hz, m/s, m). Beams come from BMAJ/BMIN/BPA or
        a BEAMS table (one beam per channel).
    hdu : int or str, optional
        The HDU holding the cube; default the first image HDU with data.
    use_dask : bool
        Return a dask-backed cube (`spectral_cube.DaskSpectralCube`).

    Returns
    -------
    cube : `spectral_cube.SpectralCube` or `spectral_cube.VaryingResolutionSpectralCube`
        Backed by the memory-mapped file, which is opened read-only and never
        written. ``cube.meta["cubeloupe_source"]`` records the path and HDU.

    Raises
    ------
    CubeFileError
        Missing, unreadable, not FITS, truncated, or no image data.
    CubeShapeError
        Fewer than three axes, or an extra non-degenerate axis.
    SpectralAxisError
        No spectral axis, or one of a type cubeloupe does not know.

    Warns
    -----
    MissingUnitWarning
        No BUNIT, or one that cannot be read; values are then dimensionless.

    Examples
    --------
    >>> cube = open_cube(demo_path("disk"))
    >>> cube.ndim
    3
    """
    from spectral_cube import SpectralCube, StokesSpectralCube

    path = Path(os.fspath(path)).expanduser()
    if not path.exists():
        raise CubeFileError(f"{path} does not exist; check the path")
    if path.is_dir():
        raise CubeFileError(f"{path} is a folder; pass the path of one FITS file")
    with open(path, "rb") as handle:
        head = handle.read(30)
    if not head.startswith(b"SIMPLE  =") and not head.startswith(b"XTENSION="):
        raise CubeFileError(f"{path} is not a FITS file (it does not start with a FITS header)")
    try:
        with warnings.catch_warnings():
            # A short file is reported below as a CubeFileError naming the file;
            # astropy's own warning about it would only repeat that.
            warnings.filterwarnings("ignore", message="File may have been truncated")
            # "denywrite" maps the file read-only (no copy-on-write), so the
            # array cannot be written and a cube larger than memory maps
            # without tripping the kernel's overcommit check.
            hdul = fits.open(path, mode="denywrite", memmap=True)
            index, data_hdu = _find_data_hdu(hdul, path, hdu)
            fixed = _validated_header(data_hdu.header, path)
            data = data_hdu.data
    except (OSError, ValueError, TypeError, IndexError) as exc:
        if isinstance(exc, (CubeFileError, CubeShapeError, SpectralAxisError)):
            raise
        raise CubeFileError(f"{path} cannot be read as FITS ({exc}); the file may be truncated or corrupt") from None
    expected = tuple(int(fixed[f"NAXIS{i}"]) for i in range(fixed["NAXIS"], 0, -1))
    if data is None or data.shape != expected:
        raise CubeFileError(f"{path} has a header for shape {expected} but data of shape "
                            f"{None if data is None else data.shape}; the file may be truncated")
    parts = [fits.PrimaryHDU(data=data, header=fixed)]
    for extra in hdul:
        if extra.name == "BEAMS" and isinstance(extra, fits.BinTableHDU):
            parts.append(extra)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FITSFixedWarning)
        warnings.filterwarnings("ignore", message=".*[Ss]tokes.*")
        warnings.filterwarnings("ignore", message=".*(BMAJ|beam).*")
        try:
            cube = SpectralCube.read(fits.HDUList(parts), use_dask=use_dask)
        except Exception as exc:  # spectral-cube raises many types for bad headers
            raise CubeFileError(f"{path} could not be opened as a spectral cube: {exc}") from None
    if isinstance(cube, StokesSpectralCube):
        if "I" not in cube.components:
            raise CubeShapeError(f"{path} has Stokes {cube.components} but no I; cubeloupe reads total intensity")
        cube = cube["I"]
    cube.meta["cubeloupe_source"] = {"path": str(path.resolve()), "hdu": index, "shape": tuple(np.shape(data))}
    return cube
