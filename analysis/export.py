"""Writing results to files: moment maps as FITS, spectra and tables as ECSV.

Every writer is atomic and refuses to replace anything unless asked:

* the target is checked before anything is computed or written
  (`check_output_path`): the folder exists and is writable, the name is
  valid (no NUL character, not too long for the file system), and nothing
  (file, folder or symbolic link, even a dangling one) is at the target
  unless ``overwrite=True``;
* the file is written to a temporary file in the target folder, flushed to
  disk (fsync), and only then renamed into place, so a write that fails
  midway (disk full, permission, interrupted) leaves nothing behind and a
  retry is not refused as "exists";
* a symbolic link at the target is never followed: with ``overwrite=True``
  the link itself is replaced by the new file, the file it pointed to is
  left as it was;
* failures reach the caller as `ExportError` (an ``OSError``) naming the
  path and the cause; names that cannot be written as given (FITS extension
  names that collide once made valid, column names) raise
  `ExportContentError`.

What each writer holds:

* `write_map` writes a spectral-cube Projection as a FITS image with its
  celestial WCS, beam (BMAJ/BMIN/BPA) and BUNIT, through spectral-cube's own
  ``Projection.hdu``.
* `write_maps` writes several maps into one FITS file, one named extension
  each.
* `write_spectra` writes OneDSpectrum objects sharing nothing but a name as
  one ECSV table in long form (one row per channel per spectrum), because
  spectral windows have different channel grids.
* `write_table` writes an astropy Table as ECSV.
* `write_figure` writes a matplotlib Figure (PNG, PDF, SVG, by the name's
  extension) through ``Figure.savefig``.

Text columns in ECSV: a value that the plain ECSV text form would not give
back unchanged (leading or trailing spaces, an empty string, a carriage
return or another control character) makes its whole column a JSON-encoded
column (ECSV's ``subtype: json``, which astropy's reader decodes), so any
name a user can type reads back exactly.

Examples
--------
>>> import astropy.units as u, numpy as np
>>> from astropy.table import Table
>>> import tempfile, pathlib
>>> path = pathlib.Path(tempfile.mkdtemp()) / "rows.ecsv"
>>> write_table(Table({"flux": [1.0] * u.Jy * u.km / u.s}), path)
PosixPath('...rows.ecsv')
"""

import errno
import os
import re
import tempfile
from contextlib import contextmanager
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.io import fits
from astropy.table import Table, vstack

from .errors import CubeFileError, ExportContentError, ExportError, OutputExistsError, SpectralAxisError
from .spectral import frequency_axis

__all__ = ["write_map", "write_maps", "write_spectra", "write_table", "write_figure", "check_output_path"]

# What each operating-system error means for the person exporting, and what to do.
_CAUSES = {
    errno.ENOSPC: "the disk is full; free some space or write elsewhere",
    errno.EDQUOT: "the disk quota is used up; free some space or write elsewhere",
    errno.EFBIG: "the file is larger than this system allows (disk full or file size limit); write elsewhere",
    errno.EACCES: "permission denied; choose a folder you can write to",
    errno.EPERM: "the operation is not permitted; choose a folder you can write to",
    errno.EROFS: "the file system is read-only; choose another folder",
    errno.ENAMETOOLONG: "the name is too long for the file system; choose a shorter name",
    errno.EEXIST: "a file appeared at the target while writing; choose another name or pass overwrite=True",
}

_FITS_NAME = re.compile(r"[^A-Z0-9_-]")


def _shown(path):
    """``path`` as text safe for terminals and messages (control characters escaped, quoted)."""
    return repr(os.fsdecode(path)) if isinstance(path, (str, bytes, os.PathLike)) else repr(path)


def _as_path(path):
    try:
        text = os.fspath(path)
    except TypeError:
        raise ExportError(f"the output path must be a str or pathlib.Path; got {_shown(path)} "
                          f"({type(path).__name__})") from None
    text = os.fsdecode(text)
    if "\x00" in text:
        raise ExportError(f"the output path {_shown(text)} contains a NUL character, which no file name may "
                          "hold; remove it")
    if not text.strip():
        raise ExportError(f"the output path {_shown(text)} is empty; give the name of a file to write")
    return Path(text).expanduser()


def _export_error(path, exc):
    """An `ExportError` naming ``path`` and the cause of the OSError ``exc``."""
    cause = _CAUSES.get(exc.errno, f"{exc.strerror or exc}")
    error = ExportError(f"could not write {_shown(path)}: {cause} ({os.strerror(exc.errno) if exc.errno else exc})")
    error.errno = exc.errno
    return error


def check_output_path(path, overwrite=False):
    """Return ``path`` as a Path if a file may be written there, else raise.

    Call it before computing what is to be written, so that a refusal costs
    nothing. The writers call it again just before writing.

    Parameters
    ----------
    path : str or Path
    overwrite : bool
        Allow replacing an existing file or symbolic link (a link is
        replaced, never followed).

    Returns
    -------
    Path

    Raises
    ------
    OutputExistsError
        Something is at ``path`` (a file, or a symbolic link, even one
        pointing nowhere) and ``overwrite`` is False.
    CubeFileError
        The folder does not exist, or ``path`` is a folder.
    ExportError
        The folder is not writable, the name is too long for the file
        system, or the path holds a NUL character or is empty.

    Examples
    --------
    >>> check_output_path("new-file-that-does-not-exist.fits")
    PosixPath('new-file-that-does-not-exist.fits')
    """
    path = _as_path(path)
    try:
        return _checked_output_path(path, overwrite)
    except OSError as exc:
        if isinstance(exc, (ExportError, CubeFileError, OutputExistsError)):
            raise
        raise _export_error(path, exc) from None  # e.g. a folder name too long, a loop of symbolic links


def _checked_output_path(path, overwrite):
    if path.is_dir():
        raise CubeFileError(f"{_shown(path)} is a folder; give the name of a file to write")
    if os.path.lexists(path) and not overwrite:
        what = (f"is a symbolic link (to {_shown(os.readlink(path))}), which is not followed"
                if path.is_symlink() else "exists already")
        raise OutputExistsError(f"{_shown(path)} {what}; choose another name or pass overwrite=True to replace it")
    folder = path.parent
    if not folder.exists():
        raise CubeFileError(f"the folder {_shown(folder)} does not exist; create it first or choose another path")
    if not folder.is_dir():
        raise CubeFileError(f"{_shown(folder)} is not a folder; choose a path inside a folder")
    try:
        name_max = os.pathconf(folder, "PC_NAME_MAX")
    except (OSError, ValueError):
        name_max = 255
    if len(os.fsencode(path.name)) > name_max:
        raise ExportError(f"cannot write {_shown(path)}: its name has {len(os.fsencode(path.name))} bytes and "
                          f"this file system allows {name_max}; choose a shorter name")
    # os.access misses read-only mounts, ACLs and root without its capabilities: creating a file is the test.
    try:
        handle, probe = tempfile.mkstemp(dir=folder, prefix=".cubeloupe-", suffix=".probe")
    except OSError as exc:
        if exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
            raise ExportError(f"cannot write {_shown(path)}: the folder {_shown(folder)} is not writable "
                              f"({os.strerror(exc.errno)}); choose a folder you can write to") from None
        raise
    os.close(handle)
    os.unlink(probe)
    return path


def _file_mode():
    """The mode a plain ``open(path, "w")`` would give (0666 less the umask): temporary files start at 0600."""
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


@contextmanager
def _replacing(path, overwrite):
    """Yield a temporary path in ``path``'s folder; on success move it to ``path`` atomically.

    The temporary file is fsynced before the rename. Without ``overwrite``
    the move is a hard link, which fails if anything appeared at ``path`` in
    the meantime, so nothing is ever replaced by accident. On any failure the
    temporary file is removed and OSErrors become `ExportError`.
    """
    path = check_output_path(path, overwrite)
    try:
        handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=".cubeloupe-", suffix=".part")
    except OSError as exc:
        raise _export_error(path, exc) from None
    os.close(handle)
    try:
        yield temporary
        descriptor = os.open(temporary, os.O_RDONLY)
        try:
            os.fsync(descriptor)
        finally:
            os.close(descriptor)
        os.chmod(temporary, _file_mode())
        if overwrite:
            os.replace(temporary, path)
        else:
            try:
                os.link(temporary, path)
            except OSError as exc:
                if exc.errno not in (errno.EPERM, errno.ENOTSUP, errno.EOPNOTSUPP, errno.EXDEV, errno.EMLINK):
                    raise
                if os.path.lexists(path):  # no hard links on this file system: check, then rename
                    raise OutputExistsError(f"{_shown(path)} appeared while writing; choose another name "
                                            "or pass overwrite=True") from None
                os.replace(temporary, path)
        _sync_folder(path.parent)
    except OSError as exc:
        if isinstance(exc, (ExportError, OutputExistsError)):
            raise
        if exc.errno == errno.EEXIST and not overwrite:
            raise OutputExistsError(f"{_shown(path)} appeared while writing; choose another name "
                                    "or pass overwrite=True to replace it") from None
        raise _export_error(path, exc) from None
    finally:
        if os.path.lexists(temporary):
            os.unlink(temporary)
    return path


def _sync_folder(folder):
    """Make the rename itself durable; not every file system lets a folder be opened for it."""
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


def _history_text(history):
    """``history`` as printable ASCII for a FITS HISTORY card (FITS headers hold nothing else)."""
    text = str(history).encode("ascii", "backslashreplace").decode("ascii")
    return "".join(ch if " " <= ch <= "~" else " " for ch in text)


def _map_hdu(name, projection, history):
    hdu = getattr(projection, "hdu", None)
    if hdu is None or getattr(projection, "ndim", 0) != 2:
        raise ExportContentError(
            f"the map {_shown(str(name))} is a {type(projection).__name__}, not a 2-D spectral-cube Projection; "
            "pass maps such as moment_maps(...).m0"
        )
    if history:
        hdu.header.add_history(_history_text(history))
    return hdu


def write_map(projection, path, *, overwrite=False, history=None):
    """Write a 2-D map (spectral-cube Projection) as a FITS image keeping WCS, beam and BUNIT.

    Parameters
    ----------
    projection : spectral_cube.Projection
        E.g. ``moment_maps(...).m0``.
    path : str or Path
    overwrite : bool
        Replace an existing file (or symbolic link; see the module docstring).
    history : str, optional
        Added as a HISTORY card (e.g. how the map was made); characters FITS
        cannot hold are escaped.

    Returns
    -------
    Path

    Raises
    ------
    OutputExistsError, CubeFileError, ExportError
        See `check_output_path`; `ExportError` also when the write fails
        (nothing is left at ``path`` then).
    ExportContentError
        ``projection`` is not a 2-D Projection.
    """
    path = check_output_path(path, overwrite)
    hdu = _map_hdu("map", projection, history)  # spectral-cube puts WCS, BUNIT and the beam keywords in the header
    with _replacing(path, overwrite) as temporary:
        hdu.writeto(temporary, overwrite=True)
    return path


def _extension_name(name):
    """The FITS EXTNAME for a map called ``name``: upper case, characters outside A-Z 0-9 _ - made ``_``."""
    return _FITS_NAME.sub("_", str(name).strip().upper())[:68]


def write_maps(maps, path, *, overwrite=False, history=None):
    """Write several maps into one FITS file: the first as primary HDU, the rest as named image extensions.

    Each map's EXTNAME is its name in upper case, with every character other
    than A-Z, 0-9, ``_`` and ``-`` made ``_`` (FITS keeps names in ASCII).
    Names that would become the same EXTNAME (``"m 0"`` and ``"M_0"``) are
    refused, naming both, rather than written as two extensions that cannot
    be told apart.

    Parameters
    ----------
    maps : dict
        name -> Projection (None values are skipped).
    path, overwrite, history
        As for `write_map`.

    Returns
    -------
    Path

    Raises
    ------
    ExportContentError
        Names that collide or are empty once made valid, or a value that is not a 2-D Projection.
    OutputExistsError, CubeFileError, ExportError
        See `write_map`.
    """
    path = check_output_path(path, overwrite)
    items = [(name, projection) for name, projection in dict(maps).items() if projection is not None]
    if not items:
        raise CubeFileError("there are no maps to write; make the moment maps first")
    seen = {}
    for name, _ in items:
        extname = _extension_name(name)
        if not extname.strip("_"):
            raise ExportContentError(f"the map name {_shown(str(name))} gives no usable FITS extension name; "
                                     "use letters or digits")
        if extname in seen:
            raise ExportContentError(
                f"the map names {_shown(str(seen[extname]))} and {_shown(str(name))} both become the FITS "
                f"extension name {extname!r}; rename one of them"
            )
        seen[extname] = name
    hdus = []
    for name, projection in items:
        hdu = _map_hdu(name, projection, history)
        hdu.header["EXTNAME"] = _extension_name(name)
        cls = fits.PrimaryHDU if not hdus else fits.ImageHDU
        hdus.append(cls(data=hdu.data, header=hdu.header))
    with _replacing(path, overwrite) as temporary:
        fits.HDUList(hdus).writeto(temporary, overwrite=True)
    return path


def _reads_back_as_text(value):
    """True if ``value`` survives ECSV's plain text form unchanged (astropy strips, drops and folds the rest)."""
    return bool(value) and value == value.strip() and value.isprintable()


def _ecsv_ready(table):
    """A copy of ``table`` whose column names and text values read back exactly from ECSV."""
    for name in table.colnames:
        if name.splitlines() != [name]:
            raise ExportContentError(
                f"the column name {_shown(name)} cannot be written to ECSV: it holds a line break, which "
                "ECSV's header line cannot carry; rename the column"
            )
    table = Table(table, copy=True)
    for name in table.colnames:
        column = table[name]
        if column.dtype.kind != "U" or getattr(column, "mask", None) is not None and np.any(column.mask):
            continue
        if not all(_reads_back_as_text(str(value)) for value in column):
            encoded = np.empty(len(column), dtype=object)
            encoded[:] = [str(value) for value in column]
            table.replace_column(name, encoded)
    return table


def _write_ecsv(table, path, overwrite):
    table = _ecsv_ready(table)
    with _replacing(path, overwrite) as temporary:
        try:
            table.write(temporary, format="ascii.ecsv", overwrite=True)
        except (TypeError, ValueError) as exc:  # astropy's refusals of what a column holds
            raise ExportContentError(f"cannot write the table to {_shown(path)}: {exc}; "
                                     "convert that column to numbers or text first") from None
    return path


def write_spectra(spectra, path, *, overwrite=False, meta=None):
    """Write named spectra as one ECSV table (columns name, window, channel, frequency, value).

    Spectra on a velocity axis with no rest frequency (see `velocity_only`)
    get a ``velocity`` column instead of ``frequency``.

    Parameters
    ----------
    spectra : dict
        name -> OneDSpectrum, or name -> list of OneDSpectrum (one per spectral window; None skipped).
        Any name reads back exactly (see the module docstring); two keys
        with the same text (``1`` and ``"1"``) are refused.
    path, overwrite
        As for `write_map`.
    meta : dict, optional
        Added to the table's metadata (e.g. how the spectra were made).

    Returns
    -------
    Path

    Raises
    ------
    ExportContentError
        Two names with the same text, or a value that is not a spectrum.
    OutputExistsError, CubeFileError, ExportError
        See `write_map`.
    """
    path = check_output_path(path, overwrite)
    parts = []
    seen = {}
    for name, items in dict(spectra).items():
        text = str(name)
        if text in seen:
            raise ExportContentError(f"the spectra {seen[text]!r} and {name!r} have the same name {_shown(text)}; "
                                     "rename one of them")
        seen[text] = name
        items = items if isinstance(items, (list, tuple)) else [items]
        for window, spectrum in enumerate(items):
            if spectrum is None:
                continue
            if not hasattr(spectrum, "spectral_axis") or np.ndim(spectrum) != 1:
                raise ExportContentError(
                    f"the spectrum {_shown(text)} is a {type(spectrum).__name__}, not a OneDSpectrum; "
                    "pass spectra such as region_spectrum(...)"
                )
            n = spectrum.shape[0]
            try:
                axis_name, axis = "frequency", frequency_axis(spectrum).to(u.GHz)
            except SpectralAxisError:  # a velocity axis without a rest frequency: its velocities are what it has
                axis_name, axis = "velocity", spectrum.spectral_axis.to(u.km / u.s)
            parts.append(Table({
                "name": np.full(n, text, dtype=f"U{max(len(text), 1)}"),
                "window": np.full(n, window),
                "channel": np.arange(n),
                axis_name: axis,
                "value": u.Quantity(spectrum.value, spectrum.unit),
            }))
    if not parts:
        raise CubeFileError("there are no spectra to write; add a region first")
    table = vstack(parts)
    table.meta["description"] = "Region spectra written by cubeloupe; frequency is the observed frequency"
    if meta:
        table.meta.update(meta)
    return _write_ecsv(table, path, overwrite)


def write_table(table, path, *, overwrite=False):
    """Write an astropy Table as ECSV.

    Parameters
    ----------
    table : astropy.table.Table
    path, overwrite
        As for `write_map`.

    Returns
    -------
    Path

    Raises
    ------
    ExportContentError
        A column name that ECSV cannot hold (one with a line break), or a
        column astropy cannot write (e.g. Python sets).
    OutputExistsError, CubeFileError, ExportError
        See `write_map`.
    """
    path = check_output_path(path, overwrite)
    return _write_ecsv(Table(table), path, overwrite)


def write_figure(figure, path, *, overwrite=False, **savefig):
    """Write a matplotlib Figure to PNG, PDF or SVG (by the extension of ``path``), atomically.

    Parameters
    ----------
    figure : matplotlib.figure.Figure
        E.g. from `channel_maps`.
    path, overwrite
        As for `write_map`.
    **savefig
        Passed to ``Figure.savefig`` (e.g. ``dpi=150``).

    Returns
    -------
    Path

    Raises
    ------
    ExportContentError
        ``path`` has no extension matplotlib can write, or ``figure`` is no Figure.
    OutputExistsError, CubeFileError, ExportError
        See `write_map`.
    """
    path = check_output_path(path, overwrite)
    if not hasattr(figure, "savefig") or not hasattr(figure, "canvas"):
        raise ExportContentError(f"{type(figure).__name__} is not a matplotlib Figure; pass e.g. channel_maps(...)")
    kind = path.suffix.lower().lstrip(".")
    formats = figure.canvas.get_supported_filetypes()
    if kind not in formats:
        raise ExportContentError(f"cannot write a figure as {_shown(path)}: end the name with one of "
                                 f"{', '.join('.' + k for k in sorted(formats))} (e.g. .png or .pdf)")
    with _replacing(path, overwrite) as temporary:
        # The temporary name ends in .part: the format is given, not guessed from it.
        figure.savefig(temporary, format=kind, **savefig)
    return path
