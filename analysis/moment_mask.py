"""Moments 1 and 2 only where there is a line: masking by the significance of moment 0,
and by moment 1 lying within the window.

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

import astropy.units as u
import numpy as np

from .errors import CubeloupeError

__all__ = ["SignificantMoments", "significant_moments", "within_window", "DEFAULT_SIGNIFICANCE"]

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


def within_window(m1, m2, window):
    """Moments 1 and 2 blanked (NaN) where moment 1 lies outside the window's channel velocities.

    An intensity-weighted mean of the window's channel velocities with non-negative weights lies
    between the first and the last of them (a convex combination); a moment 1 outside that range
    comes from negative, i.e. noise, intensities, and so does the dispersion beside it. Kept, such
    pixels set the colour range and hide the velocity field (issue #17, on real interferometer cubes).

    Parameters
    ----------
    m1, m2 : Projection
        Moments 1 and 2 (velocities).
    window : Quantity [velocity], shape (2,)
        Velocities of the window's first and last channel (`MomentMaps.window`).

    Returns
    -------
    m1, m2 : Projection
        Copies, NaN where moment 1 is outside the window.

    Examples
    --------
    >>> import astropy.units as u
    >>> from cubeloupe.analysis import demo_path, moment_maps, open_cube
    >>> maps = moment_maps(open_cube(demo_path("disk")), window=(1250, 1680) * u.km / u.s,
    ...                    rest_frequency=230.538 * u.GHz)
    >>> m1, m2 = within_window(maps.m1, maps.m2, maps.window)
    >>> bool(abs(m1.to_value(u.km / u.s)[m1 == m1]).max() <= 1680)
    True
    """
    low, high = sorted(u.Quantity(window).to_value(m1.unit))
    # A few float32 roundings of slack at the ends: a single-channel pixel sits exactly on a channel velocity.
    slack = 1e-5 * max(abs(low), abs(high), high - low)
    with np.errstate(invalid="ignore"):
        outside = ~((m1.value >= low - slack) & (m1.value <= high + slack))
    m1, m2 = m1.copy(), m2.copy()
    m1[outside] = np.nan
    m2[outside] = np.nan
    return m1, m2
