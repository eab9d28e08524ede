"""Leftover continuum: the mean over the line-free channels in each pixel, and its significance.

The statistics of `noise.leftover_continuum`, from the per-pixel sums of
pass 1 (`ContinuumFreePeaks.line_free_mean`): the channels excluded are read
again and taken out of the sums, which saves a whole pass.

Examples
--------
>>> from cubeloupe.analysis import check_cube, demo_path
>>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
>>> result.continuum.n_free > 0  # doctest: +SKIP
True
"""

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm
from scipy.stats import t as student_t

from .noise_map import spatial_noise
from .results import ContinuumSummary
from .rules import CONTINUUM_RULE

__all__ = ["SIGNIFICANT", "LeftoverContinuum", "correlated_mean_factor", "gaussian_equivalent",
           "leftover_continuum_summary"]

# Pixels whose line-free mean lies this many standard errors from zero count as holding continuum.
SIGNIFICANT = 5


@dataclass(frozen=True)
class LeftoverContinuum:
    """What `leftover_continuum_summary` found.

    Attributes
    ----------
    summary : ContinuumSummary or None
        None when too few channels are line-free.
    line_free_noise_varies : bool or None
        With a noise varying across the field: whether the noise map made
        from each pixel's standard deviation over the line-free channels
        varies too; None otherwise.
    notes : list of str
    """

    summary: object
    line_free_noise_varies: object
    notes: list


def correlated_mean_factor(correlation, n_terms=50):
    """How much channel correlation widens the standard error of a mean over many channels.

    The variance of the mean of n values of a stationary series is
    ``sigma^2 / n (1 + 2 sum_L rho_L)`` for n much longer than the
    correlation (the effective number of independent values, common
    practice); with ``rho_L = rho_1^(L^2)`` as in `grid_noise`, the factor
    is ``sqrt(1 + 2 sum_L rho_1^(L^2))``.

    Examples
    --------
    >>> correlated_mean_factor(0.0)
    1.0
    >>> round(correlated_mean_factor(2 / 3), 2)  # Hanning smoothing: sqrt(1 + 2 (2/3 + 1/6)) = 1.63 exactly
    1.67
    """
    rho = float(correlation or 0.0)
    if rho <= 0:
        return 1.0
    lags = np.arange(1, n_terms + 1, dtype=float)
    return float(np.sqrt(1.0 + 2.0 * np.sum(rho ** (lags**2))))


def gaussian_equivalent(t_values, n):
    """Student's t of a mean over ``n`` values (its error from their own scatter) as the Gaussian sigma of equal tail.

    With few line-free channels the error of the mean is itself uncertain:
    the ratio follows Student's t with ``n - 1`` degrees of freedom (Student
    1908, Biometrika 6, 1), whose tails are far heavier than the Gaussian's
    (5 "sigma" from 9 channels happens once in a thousand pixels).

    Examples
    --------
    >>> round(float(gaussian_equivalent(5.0, 9)), 1)
    3.3
    """
    t_values = np.asarray(t_values, dtype=float)
    if n < 2:
        return np.full_like(t_values, np.nan)
    # the conversion is monotonic: tabulated once and interpolated (a map of 10^5 pixels in a millisecond)
    grid = np.linspace(0.0, 40.0, 4001)
    tail = student_t.sf(grid, n - 1)
    grid = grid[tail > 1e-290]  # where the tail is still a number
    table = norm.isf(np.clip(tail[:grid.size], 1e-300, 0.5))
    with np.errstate(invalid="ignore"):
        size = np.abs(t_values)
        # beyond the table, in proportion (continuous and monotonic)
        return np.sign(t_values) * np.where(size > grid[-1], size * table[-1] / grid[-1], np.interp(size, grid, table))


def leftover_continuum_summary(cube, spectra, free, spatial, *, beam_pixels=None, correlation=None, client=None,
                               progress=None, cancel=None):
    """The continuum left in the line-free channels ``free`` of each pixel.

    Parameters
    ----------
    cube : SpectralCube
    spectra : ContinuumFreePeaks
        Pass 1, whose sums are reused.
    free : ndarray of bool, shape (n_channels,)
        The line-free channels (`detections.line_free_channels`).
    spatial : SpatialNoise
        The noise across the field; when it varies, the same map is made
        again from the line-free channels alone, as a check.
    beam_pixels : float or None
        Beam FWHM in pixels, for that map.
    correlation : float or None
        Correlation of the noise of neighbouring channels: the standard
        error of each pixel's mean is widened by `correlated_mean_factor`.
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    LeftoverContinuum
    """
    n_channels, n_free = cube.shape[0], int(free.sum())
    if n_free < max(3, n_channels // 10):
        return LeftoverContinuum(None, None, [f"only {n_free} line-free channel(s): leftover continuum not measured"])
    notes = []
    mean, error, significance = spectra.line_free_mean(cube, free, client=client, progress=progress, cancel=cancel)
    widening = correlated_mean_factor(correlation)
    error, significance = error * widening, gaussian_equivalent(significance / widening, n_free)
    if np.isfinite(significance).any():
        where = np.unravel_index(np.nanargmax(np.abs(significance)), significance.shape)
        peak_sig = float(significance[where])
    else:
        where, peak_sig = (0, 0), float("nan")
    n_sig = int(np.sum(np.abs(np.nan_to_num(significance)) >= SIGNIFICANT))
    summary = ContinuumSummary(
        mean=mean, significance=significance, noise=error[where], line_free=free, n_free=n_free, peak=mean[where],
        peak_significance=peak_sig, peak_position=tuple(int(i) for i in where), n_significant=n_sig,
        rule=CONTINUUM_RULE,
    )
    if abs(peak_sig) >= SIGNIFICANT:
        notes.append(
            f"leftover continuum: {abs(peak_sig):.1f} sigma at pixel x={where[1]}, y={where[0]} "
            f"({n_sig} pixel(s) at 5 sigma or more); subtract it before measuring lines"
        )
    varies = None
    if spatial.varies:
        # A check on the noise map, now that the line channels are known: the same map from
        # each pixel's standard deviation over the line-free channels (from the same sums).
        varies = spatial_noise(error / widening * np.sqrt(n_free), beam_pixels=beam_pixels).varies
        if not varies:
            notes.append(
                "the noise map from the line-free channels alone is flat: the variation found at first "
                "may come from line emission spread over the field, where detections are then judged "
                "against too high a noise; check the noise map")
    return LeftoverContinuum(summary, varies, notes)
