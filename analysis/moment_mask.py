"""Moments 1 and 2 only where there is a line: masking by the significance of moment 0.

The velocity and dispersion of a pixel mean something only where the pixel
holds a detected line; elsewhere they are ratios of noise and spread over the
whole window (thousands of km/s), hiding a rotating disk behind scattered
values. Showing moment 1 and 2 where moment 0 exceeds a few times its own
1-sigma error is the usual quick-look cut (common practice; a threshold of 3
is customary).

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import demo_path, moment_maps, open_cube
>>> maps = moment_maps(open_cube(demo_path("disk")), window=(1250, 1680) * u.km / u.s,
...                    line_free=[(1165, 1230), (1700, 1785)] * u.km / u.s, rest_frequency=230.538 * u.GHz)
>>> shown = significant_moments(maps, threshold=3)
>>> int(shown.significant.sum()) > 0
True
"""

from dataclasses import dataclass

import numpy as np

from .errors import CubeloupeError

__all__ = ["SignificantMoments", "significant_moments", "DEFAULT_SIGNIFICANCE"]

#: Moment 0 must exceed this many times its 1-sigma error for moments 1 and 2 to be shown.
DEFAULT_SIGNIFICANCE = 3.0


@dataclass(frozen=True)
class SignificantMoments:
    """Moment maps with moments 1 and 2 blanked where moment 0 is not significant.

    Attributes
    ----------
    m0 : Projection
        Unchanged.
    m1, m2 : Projection
        NaN where ``m0 < threshold * m0_error``.
    significant : ndarray of bool
        Where moment 0 passes the cut.
    threshold : float
    """

    m0: object
    m1: object
    m2: object
    significant: np.ndarray
    threshold: float


def significant_moments(maps, threshold=DEFAULT_SIGNIFICANCE):
    """Keep moments 1 and 2 where moment 0 exceeds ``threshold`` times its 1-sigma error.

    Parameters
    ----------
    maps : MomentMaps
        From `moment_maps`, made with line-free ranges (so that ``m0_error`` exists).
    threshold : float
        In units of the moment-0 error, > 0 (3 by default).

    Returns
    -------
    SignificantMoments

    Raises
    ------
    CubeloupeError
        A threshold that is not a positive number, or maps without a moment-0
        error (no line-free ranges were given).
    """
    try:
        threshold = float(threshold)
    except (TypeError, ValueError):
        raise CubeloupeError(f"threshold={threshold!r} must be a number of moment-0 errors, e.g. 3") from None
    if not (np.isfinite(threshold) and threshold > 0):
        raise CubeloupeError(f"threshold={threshold!r} must be a positive, finite number of moment-0 errors, e.g. 3")
    if maps.m0_error is None:
        raise CubeloupeError("the moment maps have no moment-0 error (no line-free ranges were given), so "
                             "significance cannot be judged; make them with line_free ranges")
    m0 = np.asarray(maps.m0.value, dtype=float)
    error = np.asarray(maps.m0_error.to_value(maps.m0.unit), dtype=float)
    with np.errstate(invalid="ignore"):
        significant = np.isfinite(m0) & np.isfinite(error) & (m0 > threshold * error)
    m1 = maps.m1.copy()
    m2 = maps.m2.copy()
    m1[~significant] = np.nan
    m2[~significant] = np.nan
    return SignificantMoments(m0=maps.m0, m1=m1, m2=m2, significant=significant, threshold=threshold)
