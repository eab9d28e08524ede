"""Noise, peak and leftover-continuum statistics of a cube, in bounded memory.

The robust rms of a channel is the median absolute deviation from the
channel's median, scaled to a Gaussian sigma: ``rms = 1.4826 * MAD``
(1.4826 = 1 / Phi^-1(3/4), common practice; the same factor as
``scipy.stats.median_abs_deviation(scale="normal")``). Sources and the odd
bright pixel barely move it, unlike the standard deviation.

How the per-channel median is made in bounded memory: the cube is read in
blocks of whole channel images (`blocks.plane_blocks`), so every channel's
median is taken over its own image at once. When a channel has more than
``max_pixels`` valid pixels, the median and MAD use an evenly spaced subset of
``max_pixels`` of them; for Gaussian noise the MAD estimate of sigma has a
relative standard error of about ``1.17 / sqrt(n)`` (asymptotic efficiency of
the MAD, 37 % of the standard deviation's; Rousseeuw & Croux 1993, JASA 88,
1273), i.e. 0.5 % for the default 65536 pixels, well under the spread that
correlated interferometric noise already has. The peak and the count of valid
pixels always use every pixel. Memory is bounded by the larger of one block
(a few MB) and one channel image.

Examples
--------
>>> from cubeloupe.analysis import open_cube, channel_noise, cube_noise
>>> cube = open_cube(demo_path("disk"))
>>> channel_noise(cube).unit
Unit("Jy / beam")
"""

import weakref
from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .blocks import DEFAULT_BLOCK_BYTES, plane_blocks, run_blocks, spectra_blocks
from .errors import SpectralRangeError
from .moments import _beam as _map_beam
from .spectral import channel_mask

__all__ = [
    "MAD_TO_SIGMA",
    "DEFAULT_MAX_PIXELS",
    "ChannelStatistics",
    "PeakSpectrum",
    "ContinuumMap",
    "channel_statistics",
    "channel_noise",
    "cube_noise",
    "peak_spectrum",
    "leftover_continuum",
]

# 1 / Phi^-1(3/4): MAD of a Gaussian times this is its sigma (common practice).
MAD_TO_SIGMA = 1.482602218505602
DEFAULT_MAX_PIXELS = 2**16


@dataclass(frozen=True)
class ChannelStatistics:
    """Per-channel statistics of a cube, from one pass over its channel images.

    Attributes
    ----------
    spectral_axis : Quantity, shape (n_channels,)
    rms : Quantity, shape (n_channels,)
        Robust rms, 1.4826 x MAD over the channel's pixels (cube unit); NaN
        for a channel without valid pixels.
    median : Quantity, shape (n_channels,)
    peak : Quantity, shape (n_channels,)
        Maximum over the channel's pixels (the peak-intensity spectrum).
    peak_pixel : ndarray of int, shape (n_channels, 2)
        (y, x) of that maximum in numpy order; -1 for blank channels.
    blanked_fraction : ndarray, shape (n_channels,)
        Fraction of the channel's pixels without data (NaN or masked).
    n_sampled : ndarray of int, shape (n_channels,)
        Pixels the median and MAD were taken over (at most ``max_pixels``).
    """

    spectral_axis: u.Quantity
    rms: u.Quantity
    median: u.Quantity
    peak: u.Quantity
    peak_pixel: np.ndarray
    blanked_fraction: np.ndarray
    n_sampled: np.ndarray


@dataclass(frozen=True)
class PeakSpectrum:
    """The maximum over pixels in every channel, and where it is.

    Attributes
    ----------
    spectral_axis : Quantity, shape (n_channels,)
    values : Quantity, shape (n_channels,)
        Peak intensity per channel (cube unit); NaN for blank channels.
    positions : ndarray of int, shape (n_channels, 2)
        (y, x) of each channel's peak in numpy order; -1 for blank channels.
    """

    spectral_axis: u.Quantity
    values: u.Quantity
    positions: np.ndarray
    wcs: object = None

    def to_spectrum(self):
        """The peaks as a spectral_cube `OneDSpectrum` on the cube's spectral WCS."""
        from spectral_cube import OneDSpectrum

        return OneDSpectrum(self.values.value, unit=self.values.unit, wcs=self.wcs,
                            meta={"peak_positions": self.positions})


@dataclass(frozen=True)
class ContinuumMap:
    """Per-pixel mean over line-free channels: leftover continuum and how significant it is.

    Attributes
    ----------
    mean : Projection
        Mean over the pixel's valid line-free channels (cube unit).
    error : Projection
        Standard error of that mean, ``std / sqrt(n)`` with the pixel's own
        standard deviation over the same channels (ddof=1). Channels are taken
        as independent; for Hanning-smoothed data the true error is larger.
    significance : Projection
        ``mean / error`` (dimensionless); about N(0, 1) where there is no continuum.
    n_channels : int
        Line-free channels used.
    """

    mean: object
    error: object
    significance: object
    n_channels: int


@dataclass(frozen=True)
class _PlaneStatistics:
    """Kernel over whole channel images: count, peak and where, median and MAD."""

    max_pixels: int

    def __call__(self, data):
        n_chan = data.shape[0]
        flat = data.reshape(n_chan, -1)
        finite = np.isfinite(flat)
        count = finite.sum(axis=1)
        filled = np.where(finite, flat, -np.inf)
        where = np.argmax(filled, axis=1)
        peak = np.where(count > 0, filled[np.arange(n_chan), where], np.nan)
        median = np.full(n_chan, np.nan)
        mad = np.full(n_chan, np.nan)
        sampled = np.zeros(n_chan, dtype=int)
        if count.min(initial=0) == flat.shape[1] and flat.shape[1] <= self.max_pixels:
            # every pixel valid and few enough: one vectorised median for all channels
            median = np.median(flat, axis=1)
            mad = np.median(np.abs(flat - median[:, None]), axis=1)
            sampled[:] = flat.shape[1]
        else:
            for c in range(n_chan):
                values = flat[c][finite[c]]
                if values.size == 0:
                    continue
                if values.size > self.max_pixels:
                    step = -(-values.size // self.max_pixels)
                    values = values[::step]
                median[c] = np.median(values)
                mad[c] = np.median(np.abs(values - median[c]))
                sampled[c] = values.size
        return {"count": count, "peak": peak, "where": where, "median": median, "mad": mad, "sampled": sampled}


def channel_statistics(cube, *, max_pixels=DEFAULT_MAX_PIXELS, client=None, progress=None, cancel=None):
    """Robust rms, median, peak and blanked fraction of every channel, in one pass.

    Parameters
    ----------
    cube : SpectralCube
        Any cube mask (``cube.with_mask``) is respected.
    max_pixels : int
        Largest number of pixels per channel the median and MAD are taken
        over; larger channels use an evenly spaced subset (see the module notes
        for the resulting precision).
    client, progress, cancel
        As for `run_blocks` (where to run, ``progress(fraction)``, a
        ``threading.Event`` to stop).

    Returns
    -------
    ChannelStatistics

    Examples
    --------
    >>> cube = open_cube(demo_path("disk"))
    >>> stats = channel_statistics(cube)
    >>> stats.rms.shape == cube.spectral_axis.shape
    True
    """
    max_pixels = int(max_pixels)
    if max_pixels < 1:
        raise ValueError(f"max_pixels={max_pixels} must be at least 1")
    cached = _cached(cube, max_pixels)
    if cached is not None:
        if progress is not None:
            progress(1.0)
        return cached
    n_chan, ny, nx = cube.shape
    columns = {name: np.full(n_chan, np.nan) for name in ("count", "peak", "where", "median", "mad", "sampled")}

    def consume(block, result):
        (start, stop), = block.runs
        for name, values in result.items():
            columns[name][start:stop] = values

    blocks = plane_blocks(cube.shape, itemsize=4, block_bytes=DEFAULT_BLOCK_BYTES)
    run_blocks(cube, _PlaneStatistics(max_pixels), blocks, consume, dtype=np.float32, client=client,
               progress=progress, cancel=cancel)
    unit = u.Unit(cube.unit)
    where = columns["where"].astype(int)
    blank = columns["count"] == 0
    peak_pixel = np.column_stack([where // nx, where % nx])
    peak_pixel[blank] = -1
    stats = ChannelStatistics(
        spectral_axis=cube.spectral_axis,
        rms=u.Quantity(MAD_TO_SIGMA * columns["mad"], unit),
        median=u.Quantity(columns["median"], unit),
        peak=u.Quantity(columns["peak"], unit),
        peak_pixel=peak_pixel,
        blanked_fraction=1.0 - columns["count"] / float(ny * nx),
        n_sampled=columns["sampled"].astype(int),
    )
    _remember(cube, max_pixels, stats)
    return stats


# The statistics of the last cube measured: channel_noise, cube_noise and
# peak_spectrum on the same cube object then read the data once, not three
# times. Keyed by object identity (cubes are immutable; with_mask and friends
# return new objects), checked through a weak reference.
_LAST = {}


def _cached(cube, max_pixels):
    entry = _LAST.get("entry")
    if entry is None:
        return None
    ref, pixels, stats = entry
    return stats if ref() is cube and pixels == max_pixels else None


def _remember(cube, max_pixels, stats):
    try:
        _LAST["entry"] = (weakref.ref(cube), max_pixels, stats)
    except TypeError:  # objects without weak references are simply not cached
        _LAST.pop("entry", None)


def channel_noise(cube, **kwargs):
    """Robust rms (1.4826 x MAD over pixels) of every channel.

    Keyword arguments go to `channel_statistics`.

    Returns
    -------
    Quantity, shape (n_channels,), in the cube's unit

    Examples
    --------
    >>> rms = channel_noise(open_cube(demo_path("disk")))
    >>> stated = 1.5 * u.mJy / u.beam                 # the rms the demo generator injected
    >>> bool(abs(np.median(rms) / stated - 1) < 0.1)
    True
    """
    return channel_statistics(cube, **kwargs).rms


def cube_noise(cube, *, statistics=None, **kwargs):
    """Typical noise of the cube: the median over channels of the per-channel robust rms.

    The median over channels keeps a few bad or line-filled channels from
    moving the figure, as the MAD does within a channel.

    Parameters
    ----------
    cube : SpectralCube
    statistics : ChannelStatistics, optional
        Reuse a result of `channel_statistics` instead of reading the cube again.
    **kwargs
        Passed to `channel_statistics`.

    Returns
    -------
    Quantity (scalar, cube unit)

    Raises
    ------
    SpectralRangeError
        No channel holds data.
    """
    stats = statistics if statistics is not None else channel_statistics(cube, **kwargs)
    rms = stats.rms[np.isfinite(stats.rms)]
    if rms.size == 0:
        raise SpectralRangeError("every channel of the cube is blank (NaN or masked); there is no noise to measure")
    return np.median(rms)


def peak_spectrum(cube, *, statistics=None, **kwargs):
    """Maximum over pixels in every channel (the peak-intensity spectrum) and where it lies.

    Parameters
    ----------
    cube : SpectralCube
    statistics : ChannelStatistics, optional
        Reuse a result of `channel_statistics`.
    **kwargs
        Passed to `channel_statistics`.

    Returns
    -------
    PeakSpectrum

    Examples
    --------
    >>> peaks = peak_spectrum(open_cube(demo_path("disk")))
    >>> y, x = peaks.positions[np.nanargmax(peaks.values)]
    """
    from astropy.wcs import WCSSUB_SPECTRAL

    stats = statistics if statistics is not None else channel_statistics(cube, **kwargs)
    return PeakSpectrum(spectral_axis=stats.spectral_axis, values=stats.peak, positions=stats.peak_pixel,
                        wcs=cube.wcs.sub([WCSSUB_SPECTRAL]))


@dataclass(frozen=True)
class _ContinuumKernel:
    """Per-pixel mean, standard error and count over the block's channels."""

    def __call__(self, data):
        finite = np.isfinite(data)
        count = finite.sum(axis=0)
        values = np.where(finite, data, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            mean = values.sum(axis=0) / count
            deviation = np.where(finite, data - mean, 0.0)
            variance = (deviation**2).sum(axis=0) / (count - 1)
            error = np.sqrt(variance / count)
        mean[count < 1] = np.nan
        error[count < 2] = np.nan
        return np.stack([mean, error])


def leftover_continuum(cube, line_free=None, *, rest_frequency=None, z=0.0, convention="radio", client=None,
                       progress=None, cancel=None):
    """Mean over line-free channels per pixel, with its standard error and significance.

    In a continuum-subtracted cube the mean is zero within its error; a
    significant mean is continuum left over (or a line in the "line-free"
    channels).

    Parameters
    ----------
    cube : SpectralCube
    line_free : Quantity, shape (2,) or (n, 2), or bool array, optional
        Line-free ranges in any spectral unit, or a boolean mask over the
        channels; default every channel.
    rest_frequency, z, convention
        How velocity ranges are read (see `spectral.axis_in`).
    client, progress, cancel
        As for `run_blocks`.

    Returns
    -------
    ContinuumMap

    Examples
    --------
    >>> cube = open_cube(demo_path("disk"))
    >>> leftover = leftover_continuum(cube, [(1165, 1230), (1700, 1785)] * u.km / u.s)
    >>> bool((leftover.significance > 5).any())    # the demo has a 3.2 mJy continuum source
    True
    """
    from spectral_cube import Projection

    if line_free is None:
        free = np.ones(cube.shape[0], dtype=bool)
    elif not isinstance(line_free, u.Quantity) and np.asarray(line_free).dtype == bool:
        free = np.asarray(line_free, dtype=bool)
        if free.shape != (cube.shape[0],) or free.sum() < 2:
            raise SpectralRangeError(
                f"a line-free channel mask must be a bool array of length {cube.shape[0]} with at least "
                f"2 channels set; got shape {free.shape} with {int(free.sum())} set"
            )
    else:
        free = channel_mask(cube, line_free, rest_frequency=rest_frequency, z=z, convention=convention,
                            min_channels=2, what="line-free ranges")
    n_chan, ny, nx = cube.shape
    result = np.full((2, ny, nx), np.nan)

    def consume(block, values):
        result[:, block.rows, block.columns] = values

    blocks = spectra_blocks(cube.shape, channels=free, itemsize=8)
    run_blocks(cube, _ContinuumKernel(), blocks, consume, client=client, progress=progress, cancel=cancel)
    unit = u.Unit(cube.unit)
    celestial = cube.wcs.celestial
    beam = _map_beam(cube, free)
    with np.errstate(invalid="ignore", divide="ignore"):
        significance = result[0] / result[1]
    make = lambda values, unit_, what: Projection(values, unit=unit_, wcs=celestial, beam=beam,  # noqa: E731
                                                  meta={"cubeloupe_map": what}, copy=False)
    return ContinuumMap(
        mean=make(result[0], unit, "line-free mean"),
        error=make(result[1], unit, "line-free mean error"),
        significance=make(significance, u.dimensionless_unscaled, "line-free mean significance"),
        n_channels=int(free.sum()),
    )
