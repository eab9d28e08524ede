"""The rms of each channel from a grid of pixels, such that line emission filling the field cannot inflate it.

The robust rms of a channel over its pixels (1.4826 x MAD, as `noise.py`
measures it) is the noise only where most pixels hold no emission: a line
filling a small field lifts it to the spread of the emission itself. The
differences between neighbouring channels cancel any emission broader than a
few channels, so each channel also gets an rms from the differences with its
neighbours; where the plain rms stands significantly above it, the channel
holds emission and the difference-based rms is kept (`channel_rms_from_grid`).

Differences of noise correlated between neighbouring channels (Hanning
smoothing, online channel averaging) are smaller than the noise: for a
stationary series ``Var(x_k - x_{k+L}) = 2 sigma^2 (1 - rho_L)`` (the
variogram of a stationary process, common practice). The correlation is
measured from the ratio of the lag-2 to the lag-1 difference variances, for
a correlation that falls like a Gaussian with lag (``rho_L = rho_1^(L^2)``:
exact for a Gaussian spectral response, and within 0.03 of Hanning smoothing's
``rho_1 = 2/3, rho_2 = 1/6``), so ``(1 - rho_2) / (1 - rho_1) = 1 + rho_1 +
rho_1^2 + rho_1^3`` (`channel_correlation`).

Examples
--------
>>> rng = np.random.default_rng(3)
>>> white = rng.normal(0.0, 1.0, (2001, 400))
>>> hanning = (white[:-2] + 2 * white[1:-1] + white[2:]) / 4  # rho_1 = 2/3 (common practice)
>>> stats = grid_noise_statistics(hanning)
>>> round(channel_correlation(stats["step_mad"], stats["lag2_mad"]), 1)
0.7
"""

import warnings
from dataclasses import dataclass

import numpy as np

from ..noise import MAD_TO_SIGMA
from ..row_statistics import median_rows

__all__ = [
    "SWITCH_SIGMAS",
    "GridNoise",
    "grid_noise_statistics",
    "correlation_stride",
    "CORRELATION_CHANNELS",
    "channel_correlation",
    "channel_rms_from_grid",
    "row_mads",
    "steady_rms",
    "STEADY_PIXELS",
    "MAX_STEADY_CHANNELS",
]

# The difference-based rms replaces the plain one where the plain one stands this many
# standard errors of their ratio above it (the MAD of n Gaussian values scatters by 1.1664 sigma /
# sqrt(n); Rousseeuw & Croux 1993, JASA 88, 1273): a channel of pure noise keeps its
# plain rms, a channel lifted by emission gets the rms its emission cannot reach.
SWITCH_SIGMAS = 3.0
MAD_EFFICIENCY = 1.1664
# The rms of a channel measured over fewer pixels than this is the running median over enough
# neighbouring channels (at most MAX_STEADY_CHANNELS) to reach it: 1.1664 / sqrt(4096) = 1.8 %.
STEADY_PIXELS = 4096
MAX_STEADY_CHANNELS = 101
# Channels behind the medians of the lag-1 and lag-2 MADs that give the channel correlation
# (see `correlation_stride`).
CORRELATION_CHANNELS = 128


def row_mads(values):
    """Median absolute deviation from the median of each row (the statistics of noise.py), blanks left out.

    Rows without blanks use the fast median (`row_statistics.median_rows`,
    which reorders each row in place: ``values`` must be the caller's copy).

    Examples
    --------
    >>> row_mads(np.array([[1.0, 2.0, 3.0, 4.0, 100.0]]))
    array([1.])
    """
    values = np.asarray(values)
    mad = np.full(values.shape[0], np.nan)
    if values.shape[1] == 0:
        return mad
    finite = np.isfinite(values)
    full = finite.all(axis=1)
    if full.any():
        rows = values if full.all() else values[full]
        # The deviations in the rows' own dtype: float32 rows less a float64 column go through numpy's
        # casting loop, which took three quarters of the whole MAD (bench_check.py, #13); the median
        # rounded to float32 moves the MAD by a float32 rounding at most.
        median = median_rows(rows).astype(rows.dtype, copy=False)
        mad[full] = median_rows(np.abs(rows - median[:, None]))
    mixed = ~full & finite.any(axis=1)
    if mixed.any():
        rows = values[mixed]
        median = np.nanmedian(rows, axis=1)
        mad[mixed] = np.nanmedian(np.abs(rows - median[:, None]), axis=1)
    return mad


def correlation_stride(n_channels):
    """Every how many channels `grid_noise_statistics` measures the lag-1 and lag-2 MADs for the correlation.

    `channel_correlation` keeps only their medians over the band, so about
    ``CORRELATION_CHANNELS`` channels of them do (the MAD of each over the
    grid's thousands of pixels is already within a few per cent); measuring
    them at every channel of a large cube cost a third of the check's noise
    pass (bench_check.py, #13).

    Examples
    --------
    >>> correlation_stride(1000), correlation_stride(60)
    (7, 1)
    """
    return max(1, int(n_channels) // CORRELATION_CHANNELS)


def grid_noise_statistics(grid, *, stride=1):
    """Per channel of ``grid`` (channels, pixels), a copy the caller owns: MADs of the values and of their differences.

    Parameters
    ----------
    grid : ndarray, shape (n, n_pixels)
        Reordered in place.
    stride : int
        ``step_mad`` and ``lag2_mad`` are measured from every ``stride``-th
        channel of the grid only (NaN for the others); see `correlation_stride`.

    Returns
    -------
    dict
        ``mad`` (n), ``step_mad`` (n - 1: channel k and k + 1),
        ``lag2_mad`` (n - 2: channel k and k + 2), ``curvature_mad`` (n - 2:
        channel k + 1 less the mean of its neighbours), ``n_pixels`` (n:
        pixels with data) and ``total`` (n: their sum).
    """
    n = grid.shape[0]
    stride = max(1, int(stride))
    n_pixels = np.isfinite(grid).sum(axis=1)
    step_mad = np.full(max(n - 1, 0), np.nan)
    lag2_mad = np.full(max(n - 2, 0), np.nan)
    for lag, mads in ((1, step_mad), (2, lag2_mad)):
        if n > lag:
            first = np.arange(0, n - lag, stride)
            mads[first] = row_mads(grid[first + lag] - grid[first])
    curvature = grid[1:-1] - 0.5 * (grid[:-2] + grid[2:])
    total = np.nansum(grid, axis=1, dtype=np.float64)
    return {"mad": row_mads(grid), "step_mad": step_mad, "lag2_mad": lag2_mad,
            "curvature_mad": row_mads(curvature), "n_pixels": n_pixels, "total": total}


def channel_correlation(step_mad, lag2_mad):
    """Correlation of the noise of neighbouring channels, from the MADs of lag-1 and lag-2 differences.

    Solves ``1 + r + r^2 + r^3 = median(lag2_mad^2) / median(step_mad^2)``
    for ``r`` in [0, 1) (see the module notes); medians over channels, so
    that the few channels at the edges of a line do not count. Returns 0
    for uncorrelated (or anticorrelated) noise.
    """
    step = np.asarray(step_mad, dtype=float)
    lag2 = np.asarray(lag2_mad, dtype=float)
    step, lag2 = step[np.isfinite(step) & (step > 0)], lag2[np.isfinite(lag2)]
    if step.size == 0 or lag2.size == 0:
        return 0.0
    ratio = float(np.median(lag2) ** 2 / np.median(step) ** 2)
    if not ratio > 1.0:
        return 0.0
    ratio = min(ratio, 3.999)
    roots = np.roots([1.0, 1.0, 1.0, 1.0 - ratio])
    real = [float(r.real) for r in roots if abs(r.imag) < 1e-9 and 0.0 <= r.real < 1.0]
    return real[0] if real else 0.0


@dataclass(frozen=True)
class GridNoise:
    """The rms of each channel, and how it was measured.

    Attributes
    ----------
    rms : ndarray, shape (n_channels,)
        The rms kept: the plain robust rms, or the difference-based one
        where the plain one stands significantly above it.
    plain_rms : ndarray
        1.4826 x MAD over the grid's pixels.
    difference_rms : ndarray
        From the differences with the neighbouring channels, corrected for
        the channel correlation.
    from_differences : ndarray of bool
        Channels whose ``rms`` is the difference-based one (emission lifts
        their plain rms).
    correlation : float
        Correlation of the noise of neighbouring channels (`channel_correlation`).
    n_independent : ndarray, shape (n_channels,)
        Independent noise samples behind each channel's rms.
    mean : ndarray, shape (n_channels,) or None
        Mean of each channel over the grid: the field's mean spectrum,
        where emission spread over the field shows.
    """

    rms: np.ndarray
    plain_rms: np.ndarray
    difference_rms: np.ndarray
    from_differences: np.ndarray
    correlation: float
    n_independent: object = None
    mean: object = None


def channel_rms_from_grid(mad, step_mad, lag2_mad, curvature_mad, n_pixels, total=None, *, pixels_per_sample=1.0):
    """Combine the MADs of `grid_noise_statistics` over the whole band into each channel's rms.

    Channel k's difference-based rms is that of its curvature, ``x_k -
    (x_{k-1} + x_{k+1}) / 2``, which cancels emission that varies linearly
    over three channels (the flanks of a line as well as a broad plateau):
    ``1.4826 MAD / sqrt(1.5 - 2 rho_1 + rho_2 / 2)``, the variance of that
    combination for channels of equal noise (not measured at the ends of
    the band or of a block).

    Parameters
    ----------
    mad, n_pixels : ndarray, shape (n_channels,)
    total : ndarray, shape (n_channels,), optional
        Sum of each channel over the grid, for ``mean``.
    step_mad : ndarray, shape (n_channels - 1,)
        NaN for pairs not measured.
    lag2_mad, curvature_mad : ndarray, shape (n_channels - 2,)
    pixels_per_sample : float
        Grid pixels per independent noise sample (the noise correlation area
        over the grid spacing squared, at least 1): the standard errors count
        independent samples.

    Returns
    -------
    GridNoise

    Examples
    --------
    >>> rng = np.random.default_rng(2)
    >>> values = rng.normal(0.0, 1.0, (50, 4000))
    >>> values[20:30] += np.linspace(0, 5, 4000)  # emission over the field, varying from pixel to pixel
    >>> found = channel_rms_from_grid(**grid_noise_statistics(values.copy()))
    >>> bool(found.from_differences[25]), bool(abs(found.rms[25] - 1) < 0.1)
    (True, True)
    """
    mad = np.asarray(mad, dtype=float)
    plain = MAD_TO_SIGMA * mad
    rho = channel_correlation(step_mad, lag2_mad)
    variance = 1.5 - 2.0 * rho + 0.5 * rho**4
    difference = np.r_[np.nan, MAD_TO_SIGMA * np.asarray(curvature_mad, dtype=float) / np.sqrt(variance), np.nan] \
        if plain.size >= 3 else np.full_like(plain, np.nan)
    with np.errstate(invalid="ignore"):
        independent = np.maximum(np.asarray(n_pixels, dtype=float) / max(float(pixels_per_sample), 1.0), 1.0)
        # the standard error of the ratio of two such estimates, each 1.1664 / sqrt(n)
        error = np.sqrt(2.0) * MAD_EFFICIENCY / np.sqrt(independent)
        switch = np.isfinite(difference) & (plain > difference * (1.0 + SWITCH_SIGMAS * error))
    rms = np.where(switch, difference, plain)
    mean = None
    if total is not None:
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = np.where(np.asarray(n_pixels) > 0, np.asarray(total, dtype=float) / np.asarray(n_pixels), np.nan)
    return GridNoise(rms=rms, plain_rms=plain, difference_rms=difference, from_differences=switch, correlation=rho,
                     n_independent=independent, mean=mean)


def steady_rms(rms, n_independent, keep=()):
    """Each channel's rms as the running median over enough neighbouring channels for a precise value.

    The robust rms of a channel over n independent pixels scatters by
    1.1664 / sqrt(n) (Rousseeuw & Croux 1993): 12 % for the hundred pixels
    of a small map,
    so that the lowest of a thousand channels would sit 35 % low and make a
    noise dip there look like a line. The running median over ``w`` channels
    with ``w n >= STEADY_PIXELS`` (odd ``w``; 1 for 4096 independent pixels
    or more) brings that to about 2 %; channels in ``keep`` (flagged ones, whose
    noise stands out) keep their own value.

    Examples
    --------
    >>> steady_rms(np.array([1.0, 0.7, 1.0, 1.1, 1.0, 3.0, 1.0]), np.full(7, 1000), keep=[5])
    array([1., 1., 1., 1., 1., 3., 1.])
    """
    rms = np.asarray(rms, dtype=float)
    counts = np.asarray(n_independent, dtype=float)
    typical = float(np.median(counts[counts > 0])) if (counts > 0).any() else 0.0
    width = int(min(MAX_STEADY_CHANNELS, np.ceil(STEADY_PIXELS / max(typical, 1.0)))) | 1
    if width <= 1 or rms.size < 3:
        return rms
    width = min(width, rms.size - 1 + rms.size % 2)
    half = width // 2
    padded = np.pad(rms, half, mode="reflect")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # an all-blank window
        steady = np.nanmedian(np.lib.stride_tricks.sliding_window_view(padded, width), axis=1)
    kept = np.zeros(rms.size, dtype=bool)
    kept[np.asarray(keep, dtype=int)] = True
    return np.where(kept | ~np.isfinite(rms), rms, steady)
