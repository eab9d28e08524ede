"""The exceptions and warnings cubeloupe raises.

Every error a user can provoke with bad input is a :class:`CubeloupeError`.
Each subclass also derives from the matching builtin (``ValueError``,
``OSError``, ...) so that generic ``except ValueError`` code keeps working.
Messages say what was wrong, quote the offending file or value, and say what
to do about it.

Examples
--------
>>> from cubeloupe.analysis import CubeloupeError, SpectralAxisError
>>> issubclass(SpectralAxisError, ValueError) and issubclass(SpectralAxisError, CubeloupeError)
True
"""

import astropy.units as u

__all__ = [
    "CubeloupeError",
    "CubeFileError",
    "CubeShapeError",
    "SpectralAxisError",
    "SpectralRangeError",
    "UnitMismatchError",
    "BeamError",
    "RegionError",
    "FitError",
    "CatalogError",
    "RedshiftError",
    "OutputExistsError",
    "ReportFolderError",
    "ClusterError",
    "CancelledComputation",
    "ExportError",
    "ExportContentError",
    "ParameterError",
    "CubeloupeWarning",
    "MissingUnitWarning",
    "PartialRegionWarning",
    "BlankedDataWarning",
    "WindowClippedWarning",
    "LineFreeOverlapWarning",
    "UndefinedErrorWarning",
    "PolarisationError",
    "VelocityConventionWarning",
    "PolarisationWarning",
    "InMemoryReadWarning",
]


class CubeloupeError(Exception):
    """Base class of every error cubeloupe raises on bad input."""


class CubeFileError(CubeloupeError, OSError):
    """A file cannot be read as a cube: missing, not FITS, truncated, no data."""


class CubeShapeError(CubeloupeError, ValueError):
    """The data do not have the shape of a spectral cube (e.g. a 2-D image)."""


class SpectralAxisError(CubeloupeError, ValueError):
    """The spectral axis is missing, unknown, or cannot be converted as asked."""


class SpectralRangeError(CubeloupeError, ValueError):
    """A window or line-free range falls outside the band or holds too few channels."""


class UnitMismatchError(CubeloupeError, u.UnitsError):
    """A quantity has the wrong physical type (e.g. a rest frequency in km/s)."""


class BeamError(CubeloupeError, ValueError):
    """A beam is missing where one is needed, or is not a valid beam."""


class RegionError(CubeloupeError, ValueError):
    """A region is empty, wholly outside the cube, or of an unsupported kind."""


class FitError(CubeloupeError, ValueError):
    """A fit cannot be made: bad order, too few points, no finite data."""


class CatalogError(CubeloupeError, ValueError):
    """A line catalog or user line list is malformed, or a name is unknown."""


class RedshiftError(CubeloupeError, ValueError):
    """A redshift is out of range or cannot be solved from the input."""


class OutputExistsError(CubeloupeError, FileExistsError):
    """An export would overwrite an existing file and ``overwrite`` was not set."""


class ReportFolderError(CubeloupeError, PermissionError):
    """An output folder cannot be created or written to."""


class ClusterError(CubeloupeError, RuntimeError):
    """Work cannot be sent to a dask.distributed cluster (no client, wrong object, lost workers)."""


class CancelledComputation(CubeloupeError, RuntimeError):
    """A long computation was stopped by its ``cancel`` event before it finished."""


class ExportError(CubeloupeError, OSError):
    """A result cannot be written: folder not writable, disk full, name too long or invalid.

    ``errno`` is the operating system's error number when there is one.
    Nothing is left behind at the target when this is raised.
    """


class ExportContentError(CubeloupeError, ValueError):
    """What was asked to be written cannot be written as given: colliding or unwritable names, wrong objects."""


class PolarisationError(CubeloupeError, ValueError):
    """A flux is asked of a cube that holds a polarisation plane (Stokes Q, U, V), not total intensity."""


class ParameterError(CubeloupeError, ValueError):
    """An option or parameter is not a finite number in its allowed range (e.g. a detection threshold of inf)."""


class CubeloupeWarning(UserWarning):
    """Base class of cubeloupe's warnings; filter them with this class."""


class MissingUnitWarning(CubeloupeWarning):
    """The cube has no (or an unreadable) BUNIT; values are in arbitrary units."""


class PartialRegionWarning(CubeloupeWarning):
    """A region lies partly outside the cube; only the part inside is used."""


class BlankedDataWarning(CubeloupeWarning):
    """Some channels or pixels are blanked (NaN) and were left out."""


class WindowClippedWarning(CubeloupeWarning):
    """A window reaches beyond the band; only its part inside the band is used."""


class LineFreeOverlapWarning(CubeloupeWarning):
    """Line-free ranges share channels with the window; those channels are left out of the line-free set."""


class UndefinedErrorWarning(CubeloupeWarning):
    """An uncertainty cannot be estimated from the input (e.g. no channel to measure the noise on); it is NaN."""


class VelocityConventionWarning(CubeloupeWarning):
    """A velocity axis was read in an assumed convention (legacy type without VELREF) or against the header."""


class PolarisationWarning(CubeloupeWarning):
    """The cube holds a polarisation plane (e.g. Stokes Q), not total intensity."""


class InMemoryReadWarning(CubeloupeWarning):
    """The file cannot be memory-mapped (e.g. gzip-compressed); it was read into memory."""
