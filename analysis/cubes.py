"""Opening delivered line cubes: read-only, memory-mapped, validated.

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import open_cube, demo_path
>>> cube = open_cube(demo_path("disk"))
>>> cube.unit
Unit("Jy / beam")
"""

import errno
import gzip
import os
import warnings
import zlib
from pathlib import Path

import numpy as np
from astropy.io import fits
from astropy.wcs import FITSFixedWarning

from .errors import (
    BeamError,
    CubeFileError,
    CubeloupeError,
    CubeShapeError,
    InMemoryReadWarning,
    PolarisationError,
    PolarisationWarning,
    SpectralAxisError,
)
from .scaled_data import integer_scaling, scaled_cube
from .spectral_header import read_spectral_axis
from .units import brightness_unit

__all__ = ["open_cube", "cube_source", "source_name", "cube_stokes", "check_total_intensity", "SPECTRAL_CTYPES"]

# Spectral axis types of FITS WCS Paper III (Greisen et al. 2006, A&A 446, 747)
# plus the legacy AIPS velocity types that wcslib translates (VELO-xxx, FELO-xxx).
SPECTRAL_CTYPES = ("FREQ", "VRAD", "VOPT", "VELO", "FELO", "WAVE", "AWAV", "ZOPT", "BETA", "ENER", "WAVN", "VELOCITY")
_CELESTIAL_PREFIXES = ("RA", "DEC", "GLON", "GLAT", "ELON", "ELAT", "SLON", "SLAT", "OFFRA", "OFFDEC")


def cube_source(cube):
    """Where and how ``cube`` was read, as recorded by `open_cube`, or None.

    Keys: ``path`` (made absolute but not resolved, so a symlink keeps its
    own name), ``hdu``, ``shape`` (of the stored array), ``stokes``,
    ``spectral_axis`` (the header's own CTYPE and how it was read: see
    `SpectralReading.as_record`), ``scaling`` (BSCALE/BZERO/BLANK of integer
    data, or None), ``memory_mapped`` and ``notes`` (header quirks met).

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


def cube_stokes(cube):
    """The Stokes parameter a cube from `open_cube` holds: ``"I"`` (also for cubes with no Stokes axis), ``"Q"``, ...

    Cubes made in memory count as total intensity.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path
    >>> cube_stokes(open_cube(demo_path("disk")))
    'I'
    """
    source = cube_source(cube) or {}
    return source.get("stokes", "I")


def check_total_intensity(cube, *, allow_polarisation=False, what="a flux"):
    """Refuse to measure ``what`` on a cube that holds a polarisation plane, unless asked.

    A lone Stokes Q, U or V plane (or one correlation such as RR or XX) is
    not the total intensity I, so a flux, luminosity or line measurement on
    it does not mean what it does on I (Greisen & Calabretta 2002, A&A 395,
    1061, Table 7 defines the Stokes axis codes).

    Parameters
    ----------
    cube : SpectralCube
    allow_polarisation : bool
        Measure anyway.
    what : str
        Names the measurement in the message.

    Raises
    ------
    PolarisationError
        The cube is not Stokes I and ``allow_polarisation`` is False.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path
    >>> check_total_intensity(open_cube(demo_path("disk")))
    'I'
    """
    stokes = cube_stokes(cube)
    if stokes != "I" and not allow_polarisation:
        raise PolarisationError(
            f"{source_name(cube)} holds Stokes {stokes}, not total intensity (I); {what} measured on it "
            "is not a flux of the source. Open the Stokes I cube, or pass allow_polarisation=True "
            f"to measure the {stokes} plane anyway"
        )
    return stokes


# Stokes axis codes (Greisen & Calabretta 2002, A&A 395, 1061, Table 7).
_STOKES_CODES = {1: "I", 2: "Q", 3: "U", 4: "V", -1: "RR", -2: "LL", -3: "RL", -4: "LR",
                 -5: "XX", -6: "YY", -7: "XY", -8: "YX"}


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


def _number(header, key, default):
    value = header.get(key, default)
    try:
        return float(value)
    except (TypeError, ValueError):
        return default


def _stokes_plane(header, axis):
    """The Stokes name of a degenerate Stokes axis (1-based FITS number)."""
    value = _number(header, f"CRVAL{axis}", 1.0) + (1.0 - _number(header, f"CRPIX{axis}", 1.0)) \
        * _number(header, f"CDELT{axis}", 1.0)
    code = int(round(value))
    return _STOKES_CODES.get(code, f"code {code}")


def _validated_header(header, path, *, velocity_convention=None, rest_frequency=None):
    """Check axes and units; return a fixed copy of the header and what was read (the file is untouched)."""
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
    stokes = "I"
    for i in other:
        if shape[i] > 1 and types[i] != "STOKES":
            raise CubeShapeError(
                f"{path} has a non-degenerate extra axis CTYPE{i + 1}={types[i]!r} of length {shape[i]}; "
                "cut it down to one plane first"
            )
        if types[i] == "STOKES" and shape[i] == 1:
            stokes = _stokes_plane(header, i + 1)
    axis = spectral[0] + 1
    has_matrix = any(key.startswith(f"CD{axis}_") or key.startswith(f"PC{axis}_") for key in header.keys())
    if not has_matrix and _number(header, f"CDELT{axis}", 1.0) == 0:
        raise SpectralAxisError(
            f"{path} has CDELT{axis} = 0 on its spectral axis (CTYPE{axis}={types[axis - 1]!r}): the channels "
            f"have no width, so they have no spectral coordinates. Set CDELT{axis} to the channel width "
            "in a copy of the file"
        )
    fixed = header.copy()
    notes = []
    unit = brightness_unit(header.get("BUNIT"), source=str(path))
    if unit.physical_type == "dimensionless" and unit.scale == 1:
        fixed.pop("BUNIT", None)
    else:
        fixed["BUNIT"] = unit.to_string()
    reading = read_spectral_axis(header, axis, velocity_convention=velocity_convention,
                                 rest_frequency=rest_frequency, source=str(path))
    for key, value in reading.header_updates.items():
        if value is None:
            fixed.pop(key, None)
        else:
            fixed[key] = value
    if reading.rest_frequency_basis.startswith("RESTFREQ"):
        notes.append("rest frequency read from RESTFREQ (the AIPS spelling of RESTFRQ)")
    if int(header.get("BITPIX", -32)) < 0 and "BLANK" in header:
        # FITS standard 3.0 (Pence et al. 2010, A&A 524, A42), Sect. 5.3:
        # BLANK applies to integer data only; floating-point data mark blanks with NaN.
        notes.append(f"BLANK = {header['BLANK']} ignored: it applies only to integer data; "
                     "blanked pixels of floating-point data are NaN")
    # The data handed to spectral-cube are the stored values; their scaling
    # is applied lazily afterwards (see scaled_data), so the keywords go.
    for key in ("BSCALE", "BZERO", "BLANK"):
        fixed.pop(key, None)
    return fixed, {"spectral_axis": reading, "stokes": stokes, "notes": notes}


def _first_bytes(path, n=30):
    """The file's first bytes (decompressed for gzip) and whether it is gzip-compressed."""
    with open(path, "rb") as handle:
        head = handle.read(n)
    if head[:2] == b"\x1f\x8b":
        with gzip.open(path, "rb") as handle:
            return handle.read(n), True
    return head, False


def _os_error(path, exc):
    """A CubeFileError naming what the operating system said about ``path``."""
    if exc.errno in (errno.EMFILE, errno.ENFILE):
        return CubeFileError(
            f"{path} cannot be opened: this process has run out of file handles ({exc.strerror}). "
            "Drop cubes you no longer use (each open cube keeps one handle until it is deleted) "
            "or raise the limit (ulimit -n)"
        )
    if exc.errno in (errno.EACCES, errno.EPERM):
        return CubeFileError(f"{path} cannot be read: permission denied. Check the file's permissions "
                             "(it must be readable by you)")
    if exc.errno == errno.ENOMEM:
        return CubeFileError(f"{path} cannot be mapped into memory ({exc.strerror}); free memory or "
                             "address space and try again")
    reason = exc.strerror or str(exc)
    return CubeFileError(f"{path} cannot be read ({reason}); check that the file is complete and readable")


def _in_memory_limit():
    """Bytes a compressed cube may take once decompressed into memory: half the memory available now."""
    try:
        return os.sysconf("SC_AVPHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") // 2
    except (ValueError, OSError, AttributeError):  # not every system reports it
        return 2**31


def _beams_table(hdul, path, n_channels):
    """A copy of the BEAMS table (one row per channel), or None; refuses a table of the wrong length."""
    for extra in hdul:
        if extra.name == "BEAMS" and isinstance(extra, fits.BinTableHDU):
            rows = 0 if extra.data is None else len(extra.data)
            if rows != n_channels:
                raise BeamError(
                    f"{path} has a BEAMS table with {rows} rows but {n_channels} channels; it needs one "
                    "beam per channel. Fix or remove the BEAMS table in a copy of the file (without it, "
                    "BMAJ/BMIN/BPA of the header are used)"
                )
            return fits.BinTableHDU(data=np.array(extra.data), header=extra.header.copy(), name="BEAMS")
    return None


def _one_line(exc):
    return " ".join(str(exc).split())


def open_cube(path, *, hdu=None, use_dask=False, velocity_convention=None, rest_frequency=None):
    """Open a FITS line cube read-only, memory-mapped and checked.

    Parameters
    ----------
    path : str or os.PathLike
        A FITS file with two sky axes and a spectral axis (FREQ, VRAD, VOPT,
        VELO-xxx, FELO-xxx, WAVE, ...), in any axis order spectral-cube
        accepts, optionally with a degenerate Stokes axis. A missing CUNIT
        means the FITS default (Hz, m/s, m). Beams come from BMAJ/BMIN/BPA or
        a BEAMS table (one beam per channel). Integer data (BITPIX 8 to 64,
        with BSCALE/BZERO/BLANK) stay memory-mapped and are scaled block by
        block (the cube is then dask-backed); a gzip-compressed file is read
        into memory, with an `InMemoryReadWarning`, when it fits.
    hdu : int or str, optional
        The HDU holding the cube; default the first image HDU with data.
    use_dask : bool
        Return a dask-backed cube (`spectral_cube.DaskSpectralCube`).
    velocity_convention : {'radio', 'optical', 'relativistic'}, optional
        The convention of a velocity axis whose header does not state it
        (legacy ``VELO-xxx`` or ``'VELOCITY'`` without VELREF), or overriding
        the header's. See `read_spectral_axis`.
    rest_frequency : Quantity [frequency], optional
        Supplies a rest frequency the header lacks (or replaces its
        RESTFRQ/RESTFREQ), so that velocity and frequency axes convert.

    Returns
    -------
    cube : `spectral_cube.SpectralCube` or `spectral_cube.VaryingResolutionSpectralCube`
        Backed by the memory-mapped file, which is opened read-only and never
        written; the file itself is closed before returning and the mapping
        is released when the cube (and every view of its data) is dropped.
        ``cube_source(cube)`` records the path, HDU, the Stokes plane, notes
        on the header, and under ``"spectral_axis"`` both the header's own
        spectral CTYPE and how it was read (convention, frame, basis, rest
        frequency and its origin).

    Raises
    ------
    CubeFileError
        Missing, unreadable, not FITS, truncated, no image data, out of file
        handles, or compressed and too large to read into memory.
    CubeShapeError
        Fewer than three axes, or an extra non-degenerate axis.
    SpectralAxisError
        No spectral axis, one of a type cubeloupe does not know, CDELT = 0,
        or an unknown ``velocity_convention``.
    UnitMismatchError
        BUNIT is not a brightness (e.g. km/s), or ``rest_frequency`` is not a frequency.
    BeamError
        A BEAMS table whose number of rows is not the number of channels.

    Warns
    -----
    MissingUnitWarning
        No BUNIT, or one that cannot be read; values are then dimensionless.
    VelocityConventionWarning
        A legacy velocity axis without VELREF (read as optical), or a
        ``velocity_convention`` against the header.
    PolarisationWarning
        The cube is a single polarisation plane (e.g. Stokes Q), not I.
    InMemoryReadWarning
        The file is compressed and was read into memory.

    Examples
    --------
    >>> cube = open_cube(demo_path("disk"))
    >>> cube.ndim
    3
    >>> cube_source(cube)["spectral_axis"]["read_as"]
    'FREQ'
    """
    from spectral_cube import SpectralCube, StokesSpectralCube

    path = Path(os.fspath(path)).expanduser()
    try:
        if not path.exists():
            raise CubeFileError(f"{path} does not exist; check the path")
        if path.is_dir():
            raise CubeFileError(f"{path} is a folder; pass the path of one FITS file")
        head, compressed = _first_bytes(path)
    except CubeloupeError:
        raise
    except OSError as exc:
        raise _os_error(path, exc) from None
    except (EOFError, zlib.error) as exc:
        raise CubeFileError(f"{path} is a damaged gzip file ({_one_line(exc)}); "
                            "download or decompress it again") from None
    if not head.startswith(b"SIMPLE  =") and not head.startswith(b"XTENSION="):
        raise CubeFileError(f"{path} is not a FITS file (it does not start with a FITS header)")
    try:
        with warnings.catch_warnings():
            # A short file is reported below as a CubeFileError naming the file;
            # astropy's own warning about it would only repeat that.
            warnings.filterwarnings("ignore", message="File may have been truncated")
            # BLANK on float data is recorded as a note of our own (see _validated_header).
            warnings.filterwarnings("ignore", message="Invalid 'BLANK' keyword")
            # "denywrite" maps the file read-only (no copy-on-write), so the
            # array cannot be written and a cube larger than memory maps
            # without tripping the kernel's overcommit check. Scaling is left
            # to us (scaled_data) so that integer data stay mapped too.
            # The file object is closed on leaving the block; the mapping
            # under the data stays valid and is released with the cube.
            open_kw = dict(mode="readonly", memmap=False) if compressed else dict(mode="denywrite", memmap=True)
            with fits.open(path, do_not_scale_image_data=True, **open_kw) as hdul:
                index, data_hdu = _find_data_hdu(hdul, path, hdu)
                fixed, info = _validated_header(data_hdu.header, path, velocity_convention=velocity_convention,
                                                rest_frequency=rest_frequency)
                expected = tuple(int(fixed[f"NAXIS{i}"]) for i in range(fixed["NAXIS"], 0, -1))
                if compressed:
                    nbytes = int(np.prod(expected)) * abs(int(fixed.get("BITPIX", -32))) // 8
                    if nbytes > _in_memory_limit():
                        raise CubeFileError(
                            f"{path} is gzip-compressed and {nbytes / 2**30:.1f} GB once decompressed, more "
                            "than fits in the memory available; decompress it first (gunzip -k "
                            f"{path.name}) and open the .fits file, which is read through a memory map"
                        )
                data = data_hdu.data
                scaling = None if data is None else integer_scaling(data_hdu.header, data.dtype)
                n_channels = int(fixed[f"NAXIS{_spectral_fits_axis(fixed)}"])
                beams = _beams_table(hdul, path, n_channels)
    except CubeloupeError:
        raise
    except OSError as exc:
        if exc.errno is not None:
            raise _os_error(path, exc) from None
        raise CubeFileError(f"{path} cannot be read as FITS ({_one_line(exc)}); the file may be truncated "
                            "or corrupt") from None
    except (ValueError, TypeError, IndexError, KeyError, EOFError, zlib.error) as exc:
        raise CubeFileError(f"{path} cannot be read as FITS ({_one_line(exc)}); the file may be truncated "
                            "or corrupt") from None
    if data is None or data.shape != expected:
        raise CubeFileError(f"{path} has a header for shape {expected} but data of shape "
                            f"{None if data is None else data.shape}; the file may be truncated")
    if compressed:
        warnings.warn(f"{path} is gzip-compressed, so it was read into memory ({data.nbytes / 2**20:.0f} MB) "
                      f"instead of being memory-mapped; decompress it (gunzip -k {path.name}) to open it "
                      "through a memory map", InMemoryReadWarning, stacklevel=2)
        info["notes"].append("gzip-compressed: read into memory, not memory-mapped")
    parts = [fits.PrimaryHDU(data=data, header=fixed)]
    if beams is not None:
        parts.append(beams)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FITSFixedWarning)
        warnings.filterwarnings("ignore", message=".*[Ss]tokes.*")
        warnings.filterwarnings("ignore", message=".*(BMAJ|beam).*")
        try:
            cube = SpectralCube.read(fits.HDUList(parts), use_dask=use_dask or scaling is not None)
        except Exception as exc:  # spectral-cube and wcslib raise many types for bad headers
            raise CubeFileError(f"{path} could not be opened as a spectral cube: {_one_line(exc)}; "
                                "check its WCS keywords (CTYPE, CRVAL, CDELT, CRPIX, CUNIT)") from None
    stokes = info["stokes"]
    if isinstance(cube, StokesSpectralCube):
        if "I" in cube.components:
            cube = cube["I"]
            stokes = "I"
        elif len(cube.components) == 1:
            cube = cube[cube.components[0]]
        else:
            raise CubeShapeError(f"{path} has Stokes {cube.components} but no I; cubeloupe reads total intensity")
    if stokes != "I":
        warnings.warn(f"{path} holds Stokes {stokes}, not total intensity (I); fluxes and line measurements "
                      "on it are refused unless asked for with allow_polarisation=True",
                      PolarisationWarning, stacklevel=2)
    if scaling is not None:
        cube = scaled_cube(cube, scaling)
    reading = info["spectral_axis"]
    cube.meta["cubeloupe_source"] = {
        "path": _given_path(path),
        "hdu": index,
        "shape": tuple(np.shape(data)),
        "stokes": stokes,
        "spectral_axis": reading.as_record(),
        "scaling": None if scaling is None else scaling.as_record(),
        "memory_mapped": not compressed,
        "notes": tuple(info["notes"]),
    }
    return cube


def _given_path(path):
    """The path as the user gave it, made absolute but not resolved: a symlink keeps its own name.

    ``os.path.abspath`` also folds ``..``, which through a symlinked folder can
    name another file; the unfolded absolute path is kept then.
    """
    folded = os.path.abspath(path)
    try:
        if os.path.samefile(folded, path):
            return folded
    except OSError:
        pass
    return str(Path(path).absolute())


def _spectral_fits_axis(header):
    """The 1-based FITS number of the spectral axis of a validated header."""
    for i in range(1, int(header["NAXIS"]) + 1):
        if str(header.get(f"CTYPE{i}", "")).strip().upper().split("-")[0] in SPECTRAL_CTYPES:
            return i
    return 0
