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

The leftover continuum (mean over line-free channels per pixel, its standard
error and significance) comes from per-pixel sums (`PixelSums`): count, sum
and sum of squares about a per-pixel level near the mean, made in one pass
over float32 blocks of whole spectra. Sums about a level lose no precision in
float32 and need no second pass; the delivery check builds the same sums
during its own pass and takes channels out with `PixelSums.without_channels`.

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
from astropy.wcs import WCSSUB_SPECTRAL
from spectral_cube import OneDSpectrum, Projection

from .beams import map_beam
from .blocks import DEFAULT_BLOCK_BYTES, plane_blocks, run_blocks, spectra_blocks
from .errors import SpectralRangeError
from .spectral import channel_mask
from .row_statistics import median_rows

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
    "PixelSums",
    "pixel_sums",
    "line_free_sums",
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

    def _median_and_mad(self, values):
        """Median and MAD of each row of ``values`` (a copy this kernel owns), over every ``step``-th value."""
        median = median_rows(values)
        deviation = np.abs(values - median[:, None])
        return median, median_rows(deviation)

    def __call__(self, data):
        n_chan = data.shape[0]
        flat = data.reshape(n_chan, -1)
        n_pix = flat.shape[1]
        # Fast path for channels without blanks: a row sum is finite exactly when every value is
        # (barring overflow near 1e38, which only sends a channel down the slow path below).
        complete = np.isfinite(flat.sum(axis=1))
        where = flat.argmax(axis=1)
        peak = flat[np.arange(n_chan), where].astype(np.float64)
        count = np.full(n_chan, n_pix)
        median = np.full(n_chan, np.nan)
        mad = np.full(n_chan, np.nan)
        sampled = np.zeros(n_chan, dtype=int)
        # the evenly spaced subset of the module notes: every step-th valid pixel
        step = max(1, -(-n_pix // self.max_pixels))
        rows = np.flatnonzero(complete)
        if rows.size:
            values = flat[:, ::step].copy() if rows.size == n_chan else flat[rows, ::step]
            median[rows], mad[rows] = self._median_and_mad(values)
            sampled[rows] = values.shape[1]
        for c in np.flatnonzero(~complete):
            finite = np.isfinite(flat[c])
            count[c] = int(finite.sum())
            if count[c] == 0:
                peak[c] = np.nan
                continue
            valid = np.flatnonzero(finite)
            where[c] = valid[np.argmax(flat[c, valid])]
            peak[c] = flat[c, where[c]]
            values = flat[c, valid]
            step_c = max(1, -(-values.size // self.max_pixels))
            values = values[::step_c][None].copy()
            (median[c],), (mad[c],) = self._median_and_mad(values)
            sampled[c] = values.shape[1]
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
    stats = statistics if statistics is not None else channel_statistics(cube, **kwargs)
    return PeakSpectrum(spectral_axis=stats.spectral_axis, values=stats.peak, positions=stats.peak_pixel,
                        wcs=cube.wcs.sub([WCSSUB_SPECTRAL]))


def pixel_sums(residual):
    """Per-pixel count, sum and sum of squares over the channels of a block, blanks left out.

    Parameters
    ----------
    residual : ndarray, shape (n_channels, n_pixels)
        Values less a per-pixel reference level near their mean (so that the
        float32 sums of small numbers lose nothing that matters and the
        variance needs no difference of large sums: the shifted-data
        algorithm, Chan, Golub & LeVeque 1983, Am. Stat. 37, 242).

    Returns
    -------
    count, sum1, sum2 : ndarray of float64, shape (n_pixels,)
    """
    sum1 = residual.sum(axis=0)
    if np.isfinite(sum1).all():
        count = np.full(residual.shape[1], residual.shape[0], dtype=np.float64)
        sum2 = np.einsum("ij,ij->j", residual, residual)
    else:
        finite = np.isfinite(residual)
        clean = np.where(finite, residual, residual.dtype.type(0))
        count = finite.sum(axis=0, dtype=np.float64)
        sum1 = clean.sum(axis=0)
        sum2 = np.einsum("ij,ij->j", clean, clean)
    return count, sum1.astype(np.float64), sum2.astype(np.float64)


@dataclass(frozen=True)
class PixelSums:
    """Per-pixel count, sum and sum of squares of a cube's values about a reference level, over some channels.

    What the leftover continuum is made of (see `leftover_continuum`): one
    pass over the cube gives them, and `without_channels` takes channels out
    again by reading only those, so a caller that already has the sums over
    every channel needs no second full pass.

    Attributes
    ----------
    level : ndarray, shape (ny, nx)
        The per-pixel reference level (cube unit, no NaN) the sums are about.
    count, sum1, sum2 : ndarray, shape (ny, nx)
        Valid channels, sum and sum of squares of ``value - level``.
    channels : ndarray of bool, shape (n_channels,)
        The channels the sums run over.
    """

    level: np.ndarray
    count: np.ndarray
    sum1: np.ndarray
    sum2: np.ndarray
    channels: np.ndarray

    def without_channels(self, cube, channels, *, client=None, progress=None, cancel=None):
        """The sums with ``channels`` (bool mask) taken out, reading only those channels of ``cube``.

        The excluded channels are read in blocks of whole spectra; each block's sums come about
        each pixel's own mean over them (`_SpectraSums`) and are moved to ``level`` exactly, in
        float64: with ``d = mean - level``, ``sum1 + n d`` and ``sum2 + 2 d sum1 + n d^2``. Blocks
        of whole channel images would return three float64 images per few planes read, as much
        memory traffic as the reading itself (0.26x one nansum pass for 13 % of the channels of
        the check's benchmark cube; issue #13).
        """
        excluded = np.asarray(channels, dtype=bool) & self.channels
        count, sum1, sum2 = (np.array(a, dtype=np.float64) for a in (self.count, self.sum1, self.sum2))
        if excluded.any():
            def consume(block, result):
                where = (block.rows, block.columns)
                shape = (block.rows.stop - block.rows.start, block.columns.stop - block.columns.start)
                mean, n, part1, part2 = (row.reshape(shape) for row in result)
                shift = mean - self.level[where]
                count[where] -= n
                sum1[where] -= part1 + n * shift
                sum2[where] -= part2 + 2.0 * shift * part1 + n * shift**2

            blocks = spectra_blocks(cube.shape, channels=excluded, itemsize=4)
            run_blocks(cube, _SpectraSums(), blocks, consume, dtype=np.float32, client=client,
                       progress=progress, cancel=cancel)
        elif progress is not None:
            progress(1.0)
        return PixelSums(self.level, count, sum1, sum2, self.channels & ~excluded)

    def statistics(self):
        """Mean, its standard error (``std / sqrt(n)``, ddof=1) and their ratio per pixel, as plain arrays."""
        count = self.count
        with np.errstate(invalid="ignore", divide="ignore"):
            offset = self.sum1 / count
            variance = np.clip(self.sum2 - self.sum1 * offset, 0, None) / (count - 1)
            mean = self.level + offset
            error = np.sqrt(variance / count)
            significance = mean / error
        mean[count < 1] = np.nan
        error[count < 2] = np.nan
        significance[count < 2] = np.nan
        return mean, error, significance

    def continuum_map(self, cube):
        """The `ContinuumMap` of these sums, with the WCS, beam and unit of ``cube``."""
        mean, error, significance = self.statistics()
        unit = u.Unit(cube.unit)
        celestial = cube.wcs.celestial
        beam = map_beam(cube, self.channels)
        make = lambda values, unit_, what: Projection(values, unit=unit_, wcs=celestial, beam=beam,  # noqa: E731
                                                      meta={"cubeloupe_map": what}, copy=False)
        return ContinuumMap(
            mean=make(mean, unit, "line-free mean"),
            error=make(error, unit, "line-free mean error"),
            significance=make(significance, u.dimensionless_unscaled, "line-free mean significance"),
            n_channels=int(self.channels.sum()),
        )


@dataclass(frozen=True)
class _SpectraSums:
    """Kernel over blocks of whole spectra: per-pixel level (the mean), then the sums about it."""

    def __call__(self, data):
        flat = data.reshape(data.shape[0], -1)
        total = flat.sum(axis=0)
        if np.isfinite(total).all():
            level = total / np.float32(flat.shape[0])
        else:
            finite = np.isfinite(flat)
            with np.errstate(invalid="ignore", divide="ignore"):
                level = np.where(finite, flat, 0).sum(axis=0) / finite.sum(axis=0)
            level = np.nan_to_num(level).astype(flat.dtype)
        # the block is this kernel's own copy (blocks.run_blocks): subtract in place
        residual = np.subtract(flat, level, out=flat)
        return np.stack([level.astype(np.float64), *pixel_sums(residual)])


def line_free_sums(cube, channels, *, client=None, progress=None, cancel=None):
    """`PixelSums` over ``channels`` (bool mask), in one pass over blocks of whole spectra.

    Each pixel's sums are about its own mean over those channels, formed
    within the block, so float32 blocks keep the precision of a float64
    two-pass computation (the standard error agrees to about 1e-6).
    """
    _, ny, nx = cube.shape
    level, count, sum1, sum2 = (np.full((ny, nx), np.nan) for _ in range(4))

    def consume(block, values):
        shape = (block.rows.stop - block.rows.start, block.columns.stop - block.columns.start)
        for target, row in zip((level, count, sum1, sum2), values):
            target[block.rows, block.columns] = row.reshape(shape)

    blocks = spectra_blocks(cube.shape, channels=channels, itemsize=4)
    run_blocks(cube, _SpectraSums(), blocks, consume, dtype=np.float32, client=client, progress=progress,
               cancel=cancel)
    return PixelSums(level, count, sum1, sum2, np.asarray(channels, dtype=bool).copy())


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
    sums = line_free_sums(cube, free, client=client, progress=progress, cancel=cancel)
    return sums.continuum_map(cube)
