"""Pass 1 of the delivery check: each pixel's continuum level and noise, each channel's extremes without it.

One read of the cube, block by block through `blocks.run_blocks`, in bounded
memory (`continuum_free_peaks`): per pixel, the continuum level (median over a
channel subsample), its noise and its channel-to-channel noise; per channel,
the highest and lowest values of the data less that level (peak and trough
spectra) and the valid fraction; per pixel, sums over all channels for the
line-free mean (`noise.PixelSums`); over the channel subsample, the
correlation of neighbouring pixels (`noise_fwhm_from_lags`); and, when asked
(``noise_grid``), the values of a regular grid of pixels in every channel, so
that the channel rms of pass 2 needs no read of its own (`NoiseGrid`).

Examples
--------
>>> lags = np.array([[100.0], [25.0], [25.0], [100.0], [100.0], [100.0]])
>>> [round(f, 3) for f in noise_fwhm_from_lags(lags)]
[1.0, 1.0]
"""

import warnings
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from ..blocks import DEFAULT_BLOCK_BYTES, run_blocks, spectra_blocks
from ..noise import MAD_TO_SIGMA, PixelSums, pixel_sums
from ..row_statistics import row_extremes, row_medians

__all__ = ["CONTINUUM_SAMPLE_CHANNELS", "ContinuumFreePeaks", "NoiseGrid", "continuum_free_peaks",
           "noise_fwhm_from_lags"]

# Channels used per pixel for the continuum estimate of `continuum_free_peaks`:
# the median of 64 channels has a noise of about 1.25 sigma / 8 (common
# practice for the median's efficiency), small next to the detection threshold,
# and costs a fraction of a full median over every channel.
CONTINUUM_SAMPLE_CHANNELS = 64
# The grid of pixels for the channel rms is kept from pass 1 only while it (and pass 1's blocks, which
# must then hold whole multiples of the grid's row spacing) stays this small; larger cubes read it in
# a pass of its own.
MAX_GRID_BYTES = 256 * 2**20
MAX_GRID_BLOCK_BYTES = 4 * DEFAULT_BLOCK_BYTES


@dataclass(frozen=True)
class NoiseGrid:
    """The values of every ``row_stride``-th image row, every ``column_step``-th pixel of it, in every channel.

    Attributes
    ----------
    row_stride, column_step : int
    values : ndarray, shape (n_channels, n_rows, n_columns), float32
        NaN where the cube is blank or masked.
    """

    row_stride: int
    column_step: int
    values: np.ndarray = field(repr=False)


@dataclass(frozen=True)
class ContinuumFreePeaks:
    """Result of `continuum_free_peaks`: one pass over the spectra of a cube.

    Attributes
    ----------
    peaks : Quantity, shape (n_channels,)
        Maximum over pixels of the data minus each pixel's continuum level;
        NaN for wholly blank channels.
    positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each channel's peak (numpy order); -1 for blank channels.
    continuum_level : Quantity, shape (ny, nx)
        Median of each pixel's spectrum over the channel subsample.
    pixel_noise : Quantity, shape (ny, nx)
        Robust rms (1.4826 x MAD) of each pixel's spectrum over the same
        channels; continuum does not change it.
    valid_fraction : ndarray, shape (n_channels,)
        Fraction of pixels with data (finite and unmasked) in each channel.
    n_sample : int
        Channels per pixel behind ``continuum_level`` and ``pixel_noise``.
    noise_fwhm_pixels : tuple of float (x, y) or None
        FWHM of the noise correlation in pixels, measured on the same channels
        (`noise_fwhm_from_lags`); 0 for uncorrelated noise.
    pixel_sums : noise.PixelSums
        Per-pixel sums over every channel about ``continuum_level``.
    troughs : Quantity, shape (n_channels,)
        Minimum over pixels of the data minus each pixel's continuum level
        (absorption shows here); NaN for wholly blank channels.
    trough_positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each channel's minimum; -1 for blank channels.
    step_noise : Quantity, shape (ny, nx)
        Each pixel's noise from the differences between each channel of the
        subsample and the next channel (1.4826 x the median absolute
        difference / sqrt(2)): continuum, its slope and lines broader than a
        few channels hardly change it. For noise correlated between
        neighbouring channels it is lower than the noise itself by the same
        factor at every pixel, so its variation across the field is that of
        the noise (see `spatial_noise`).
    """

    peaks: u.Quantity
    positions: np.ndarray
    continuum_level: u.Quantity
    pixel_noise: u.Quantity
    valid_fraction: np.ndarray
    n_sample: int
    noise_fwhm_pixels: object = None
    pixel_sums: object = field(default=None, repr=False)  # noise.PixelSums about continuum_level
    troughs: object = None
    trough_positions: object = None
    step_noise: object = None
    noise_grid: object = field(default=None, repr=False)  # NoiseGrid or None

    def line_free_mean(self, cube, line_free, *, client=None, progress=None, cancel=None):
        """Mean over line-free channels per pixel, its standard error and significance.

        The statistics of `noise.leftover_continuum`, by its own code
        (`noise.PixelSums`): the per-pixel sums over every channel made by
        this pass, less the sums over the excluded channels, which are read
        again (usually a small part of the cube). This saves a whole pass.

        Returns
        -------
        mean, error : Quantity, shape (ny, nx)
        significance : ndarray, shape (ny, nx)
        """
        sums = self.pixel_sums.without_channels(cube, ~np.asarray(line_free, dtype=bool), client=client,
                                                progress=progress, cancel=cancel)
        mean, error, significance = sums.statistics()
        unit = self.peaks.unit
        return u.Quantity(mean, unit), u.Quantity(error, unit), significance

    def continuum_pixels(self, sigmas=3.0, *, local=False):
        """Pixels whose continuum level exceeds ``sigmas`` times its own noise.

        The median of ``n`` Gaussian values scatters by ``1.2533 sigma /
        sqrt(n)`` (the median's asymptotic efficiency, common practice); the
        noise is the median over pixels of ``pixel_noise``, or with
        ``local=True`` (a noise varying across the field) each pixel's own.
        """
        spread = self.pixel_noise.value if local else np.nanmedian(self.pixel_noise.value)
        noise = spread * 1.2533 / np.sqrt(max(1, self.n_sample))
        with np.errstate(invalid="ignore"):
            return np.abs(np.nan_to_num(self.continuum_level.value)) > sigmas * noise


def _lag_sums(residual):
    """Per channel of ``residual`` (channels, rows, columns): sums of squares and of neighbour products.

    Returns an array of shape (6, n_channels): the sum of squares, of the
    products of horizontal neighbours, of vertical neighbours, and the
    number of terms in each (blank pixels left out).
    """
    n, rows, columns = residual.shape
    finite = np.isfinite(residual)
    if finite.all():
        values = residual
        counts = [np.full(n, rows * columns), np.full(n, rows * (columns - 1)), np.full(n, (rows - 1) * columns)]
    else:
        values = np.where(finite, residual, residual.dtype.type(0))
        counts = [finite.sum(axis=(1, 2)), (finite[:, :, 1:] & finite[:, :, :-1]).sum(axis=(1, 2)),
                  (finite[:, 1:, :] & finite[:, :-1, :]).sum(axis=(1, 2))]
    squares = np.einsum("cij,cij->c", values, values, dtype=np.float64)
    across = np.einsum("cij,cij->c", values[:, :, 1:], values[:, :, :-1], dtype=np.float64)
    down = np.einsum("cij,cij->c", values[:, 1:, :], values[:, :-1, :], dtype=np.float64)
    return np.stack([squares, across, down, *(np.asarray(c, dtype=np.float64) for c in counts)])


def noise_fwhm_from_lags(lags):
    """FWHM of the noise correlation, in pixels along x and y, from neighbour products per channel.

    For noise that is white noise smoothed with a Gaussian of FWHM ``f``
    pixels, the correlation of neighbouring pixels is ``rho = exp(-2 ln 2 /
    f^2)``, so ``f = sqrt(-2 ln 2 / ln rho)`` (the lag-one smoothness
    estimate of Forman et al. 1995, Magn. Reson. Med. 33, 636, from memory).
    ``rho`` is taken per channel and the median over channels kept, so that
    the few channels holding a bright line do not count. Uncorrelated noise
    (``rho <= 0``) gives 0.

    Parameters
    ----------
    lags : ndarray, shape (6, n_channels)
        As made by `continuum_free_peaks`: sums of squares, of x-neighbour
        and of y-neighbour products, and their numbers of terms.

    Returns
    -------
    tuple of float (x, y), or None when there are too few pixels

    Examples
    --------
    >>> lags = np.array([[100.0], [25.0], [25.0], [100.0], [100.0], [100.0]])
    >>> [round(f, 3) for f in noise_fwhm_from_lags(lags)]  # rho = 1/4 = exp(-2 ln 2): f = 1 pixel
    [1.0, 1.0]
    """
    squares, across, down, n0, n_across, n_down = np.asarray(lags, dtype=float)
    fwhm = []
    for products, n_pairs in ((across, n_across), (down, n_down)):
        usable = (n0 > 1) & (n_pairs > 0) & (squares > 0)
        if not usable.any():
            fwhm.append(None)
            continue
        rho = float(np.median((products[usable] / n_pairs[usable]) / (squares[usable] / n0[usable])))
        fwhm.append(0.0 if rho <= 0 else float(np.sqrt(-2 * np.log(2) / np.log(min(rho, 1 - 1e-12)))))
    if fwhm[0] is None and fwhm[1] is None:
        return None
    # an image one pixel high (or wide) has neighbours along one axis only: take it for both
    return tuple(f if f is not None else next(g for g in fwhm if g is not None) for f in fwhm)


@dataclass(frozen=True)
class _ContinuumFreePeaks:
    """Block kernel: per-pixel median, MAD and channel-step noise over a channel subsample; per-channel extremes."""

    step: int
    grid_rows: int = 0  # keep every grid_rows-th row (blocks start on such rows) ...
    grid_columns: int = 1  # ... every grid_columns-th pixel of it, for the channel rms; 0: none

    def __call__(self, data):
        n_chan = data.shape[0]
        # before the block is changed in place below: the raw values of the noise grid
        grid = data[:, ::self.grid_rows, ::self.grid_columns].copy(order="C") if self.grid_rows else None
        flat = data.reshape(n_chan, -1)
        # pixels along the rows so that each pixel's channels are contiguous for the partition
        sample = np.ascontiguousarray(flat[::self.step].T)
        # differences of each sampled channel and the next one: continuum, its slope and lines
        # broader than a few channels cancel (across the subsample's wider steps, broad
        # emission would lift the noise where it lies, as measured on the demo disk galaxy)
        following = flat[1::self.step]
        steps = np.subtract(following, flat[::self.step][:following.shape[0]])
        steps = np.ascontiguousarray(np.abs(steps, out=steps).T)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels: no estimate
            level = row_medians(sample)
            spread = row_medians(np.abs(sample - level[:, None]), upper=True)
            step_spread = row_medians(steps, upper=True)
        filled_level = np.nan_to_num(level)
        # the subsampled channels as rows (not the transposed sample): the same numbers, read in order
        lags = _lag_sums((flat[::self.step] - filled_level).reshape((sample.shape[1], *data.shape[1:])))
        # Spectra blank in every channel (outside a primary-beam cutoff, say) are set aside, so
        # that the sums and extremes below run on data without NaN, on their fast paths.
        kept = _pixels_with_data(flat, level)
        if kept is None:
            # The block is this kernel's own copy (see blocks.run_blocks): subtract in place.
            residual = np.subtract(flat, filled_level, out=flat)
        else:
            residual = _take_columns(flat, kept)
            np.subtract(residual, filled_level[kept], out=residual)
        # the sums of noise.leftover_continuum, about the pixel's own level
        sums = pixel_sums(residual)
        peak, where, trough, where_low, valid = row_extremes(residual)
        if kept is not None:
            sums = [_scatter(values, kept, flat.shape[1]) for values in sums]
            where, where_low = kept[where], kept[where_low]
        count, sum1, sum2 = sums
        return {"peak": peak, "where": where, "trough": trough, "where_low": where_low, "level": level,
                "noise": MAD_TO_SIGMA * spread, "step_noise": MAD_TO_SIGMA / np.sqrt(2) * step_spread,
                "valid": valid, "count": count, "sum1": sum1, "sum2": sum2, "lags": lags, "grid": grid}


def _pixels_with_data(flat, level):
    """Indices of the pixels of ``flat`` (channels, pixels) with data, when the others are blank throughout.

    None when every pixel has data, or when no pixel does, or when a pixel
    without data in the channel subsample (NaN ``level``) holds data in
    some other channel (then every pixel is kept, on the slower NaN-aware paths).
    """
    blank = np.isnan(level)
    if not blank.any() or blank.all() or not np.isnan(flat[:, blank]).all():
        return None
    return np.flatnonzero(~blank)


def _take_columns(values, columns):
    """A C-ordered copy of ``values[:, columns]`` (``columns`` increasing).

    Plain fancy indexing along the second axis returns a Fortran-ordered
    array here, on which the per-channel reductions run many times slower.
    The pixels with data usually form a few runs (one per image row), which
    are copied as slices.
    """
    breaks = np.flatnonzero(np.diff(columns) != 1)
    if breaks.size >= 16:
        return np.take(values, columns, axis=1)
    starts = np.r_[columns[0], columns[breaks + 1]]
    stops = np.r_[columns[breaks], columns[-1]] + 1
    return np.concatenate([values[:, a:b] for a, b in zip(starts, stops)], axis=1)


def _scatter(values, kept, size):
    """``values`` of the pixels ``kept`` placed in a zero array of ``size`` pixels."""
    out = np.zeros(size, dtype=values.dtype)
    out[kept] = values
    return out


def _grid_layout(shape, noise_grid):
    """(row_stride, column_step, rows per block) for keeping the noise grid in pass 1, or None when too large."""
    if noise_grid is None:
        return None
    n_chan, ny, nx = (int(n) for n in shape)
    stride, max_pixels = (max(1, int(n)) for n in noise_grid)
    n_rows = -(-ny // stride)
    # every column_step-th pixel of the grid rows: the pixels channel_noise.grid_statistics takes
    # from the same rows (exactly those when nx is a multiple of the step)
    column_step = max(1, -(-(n_rows * nx) // max_pixels))
    row_bytes = nx * n_chan * 4
    if n_chan * n_rows * (-(-nx // column_step)) * 4 > MAX_GRID_BYTES or stride * row_bytes > MAX_GRID_BLOCK_BYTES:
        return None
    rows = max(1, DEFAULT_BLOCK_BYTES // row_bytes)
    return stride, column_step, max(stride, rows // stride * stride)


def continuum_free_peaks(cube, *, client=None, progress=None, cancel=None, noise_grid=None):
    """Peak-intensity spectrum after removing each pixel's continuum level; per-pixel level and noise.

    The continuum level of a pixel is the median of its spectrum over an
    evenly spaced subsample of at most ``CONTINUUM_SAMPLE_CHANNELS``
    channels: lines that fill less than half of the band at a pixel do not
    move it. Without continuum the peak spectrum is the plain one (less a
    level of about 0.2 sigma); with continuum, the continuum no longer lifts
    it, so it cannot pass for a line. The same pass gives each pixel's noise
    along its spectrum (1.4826 x MAD), which continuum does not change, and
    the valid fraction of every channel. One read of the cube, block by block
    through `blocks.run_blocks`, in bounded memory.

    Parameters
    ----------
    cube : SpectralCube
    client, progress, cancel
        As for `blocks.run_blocks`.
    noise_grid : (int, int), optional
        ``(stride, max_pixels)`` of `channel_noise.noise_grid`: keep the
        values of every ``stride``-th row, about ``max_pixels`` of their
        pixels, in every channel (``ContinuumFreePeaks.noise_grid``), unless
        that grid would be larger than ``MAX_GRID_BYTES``.

    Returns
    -------
    ContinuumFreePeaks

    Examples
    --------
    >>> result = continuum_free_peaks(open_cube(demo_path("disk")))
    >>> result.peaks.unit
    Unit("Jy / beam")
    """
    n_chan, ny, nx = cube.shape
    step = max(1, -(-n_chan // CONTINUUM_SAMPLE_CHANNELS))
    best = np.full(n_chan, -np.inf)
    positions = np.full((n_chan, 2), -1, dtype=int)
    lowest = np.full(n_chan, np.inf)
    low_positions = np.full((n_chan, 2), -1, dtype=int)
    level = np.full((ny, nx), np.nan)
    noise = np.full((ny, nx), np.nan)
    step_noise = np.full((ny, nx), np.nan)
    valid = np.zeros(n_chan)
    sums = np.zeros((3, ny, nx))
    lags = np.zeros((6, len(range(0, n_chan, step))))
    layout = _grid_layout(cube.shape, noise_grid)
    grid = None
    if layout is not None:
        row_stride, column_step, block_rows = layout
        grid = np.full((n_chan, -(-ny // row_stride), -(-nx // column_step)), np.nan, dtype=np.float32)

    def consume(block, result):
        rows, columns = block.rows, block.columns
        width = columns.stop - columns.start
        shape = (rows.stop - rows.start, width)
        for i, name in enumerate(("count", "sum1", "sum2")):
            sums[i, rows, columns] = result[name].reshape(shape)
        level[rows, columns] = result["level"].reshape(shape)
        noise[rows, columns] = result["noise"].reshape(shape)
        step_noise[rows, columns] = result["step_noise"].reshape(shape)
        valid[:] += result["valid"]
        lags[:] += result["lags"]
        if grid is not None:
            first = rows.start // row_stride
            grid[:, first:first + result["grid"].shape[1]] = result["grid"]
        for extreme, place, value, where, better in (
                (best, positions, result["peak"], result["where"], result["peak"] > best),
                (lowest, low_positions, result["trough"], result["where_low"], result["trough"] < lowest)):
            if better.any():
                extreme[better] = value[better]
                place[better, 0] = rows.start + where[better] // width
                place[better, 1] = columns.start + where[better] % width

    if layout is None:
        blocks, kernel = spectra_blocks(cube.shape, itemsize=4), _ContinuumFreePeaks(step)
    else:
        # blocks of whole rows starting on grid rows, so that each block keeps its own grid rows
        blocks = spectra_blocks(cube.shape, itemsize=4, block_shape=(block_rows, nx))
        kernel = _ContinuumFreePeaks(step, grid_rows=row_stride, grid_columns=column_step)
    run_blocks(cube, kernel, blocks, consume, dtype=np.float32, client=client, progress=progress, cancel=cancel)
    best[~np.isfinite(best)] = np.nan
    lowest[~np.isfinite(lowest)] = np.nan
    unit = u.Unit(cube.unit)
    sums = PixelSums(level=np.nan_to_num(level), count=sums[0], sum1=sums[1], sum2=sums[2],
                     channels=np.ones(n_chan, dtype=bool))
    return ContinuumFreePeaks(
        peaks=u.Quantity(best, unit), positions=positions, continuum_level=u.Quantity(level, unit),
        pixel_noise=u.Quantity(noise, unit), valid_fraction=valid / float(ny * nx),
        n_sample=len(range(0, n_chan, step)), noise_fwhm_pixels=noise_fwhm_from_lags(lags), pixel_sums=sums,
        troughs=u.Quantity(lowest, unit), trough_positions=low_positions, step_noise=u.Quantity(step_noise, unit),
        noise_grid=None if grid is None else NoiseGrid(row_stride=row_stride, column_step=column_step, values=grid),
    )


