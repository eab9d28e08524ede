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
    "CubeloupeWarning",
    "MissingUnitWarning",
    "PartialRegionWarning",
    "BlankedDataWarning",
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


class CubeloupeWarning(UserWarning):
    """Base class of cubeloupe's warnings; filter them with this class."""


class MissingUnitWarning(CubeloupeWarning):
    """The cube has no (or an unreadable) BUNIT; values are in arbitrary units."""


class PartialRegionWarning(CubeloupeWarning):
    """A region lies partly outside the cube; only the part inside is used."""


class BlankedDataWarning(CubeloupeWarning):
    """Some channels or pixels are blanked (NaN) and were left out."""
