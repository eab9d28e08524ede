"""The noise of each channel, measured so that sources do not lift it, and the channels that stand out.

Pass 2 of the check (`channel_noise`): with a noise uniform across the
field, the robust statistics of each channel over a regular grid of pixels
(every k-th image row, `noise_grid`), leaving out pixels with significant
continuum when they are more than a few; the grid's values are kept by pass 1
(`first_pass.NoiseGrid`), so this needs no read of the cube of its own except
for cubes too large for that (`grid_statistics`); with a noise varying across the field (a
primary-beam-corrected cube), `noise_scaled_extremes` over every channel
image, each pixel's values over its relative noise. `flag_channels` then
(`detections.flag_channels`) names the channels whose rms stands out.

Examples
--------
>>> noise_grid((1000, 512, 512))
(4, 16384)
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np

import concurrent.futures

from ..blocks import default_threads, plane_blocks, run_blocks
from ..errors import SpectralRangeError
from .detections import flag_channels
from .grid_noise import channel_rms_from_grid, correlation_stride, grid_noise_statistics, steady_rms
from .noise_map import noise_scaled_extremes
from .results import NoiseSummary
from .rules import FLAG_RULE, SPATIAL_RULE

__all__ = [
    "CONTINUUM_MASK_FRACTION",
    "NOISE_MAX_PIXELS",
    "ChannelNoise",
    "channel_noise",
    "grid_statistics",
    "kept_grid_statistics",
    "noise_grid",
]

# Pixels with significant continuum are left out of the channel rms when they
# cover more than this fraction of the image. A fraction f of pixels lifted
# far above the noise moves the median absolute deviation of a channel by
# about 1.2 f (of the order of f / (2 phi(0.674)) for a Gaussian, from the
# MAD's influence function; Hampel 1974, JASA 69, 383), so 2 % costs at most
# about 3 %.
CONTINUUM_MASK_FRACTION = 0.02
# Pixels per channel behind the robust rms: the MAD of n Gaussian values
# estimates sigma to about 1.17 / sqrt(n) (Rousseeuw & Croux 1993, JASA 88,
# 1273), 0.9 % here, far inside the 10 % a delivery check needs, at a quarter
# of the cost of noise.py's default. Large images are first thinned to a
# regular grid of about 4 times as many pixels (`noise_grid`).
NOISE_MAX_PIXELS = 2**14


def noise_grid(shape, max_pixels=None):
    """How the check samples pixels for the channel rms: every ``stride``-th image row, ``max_pixels`` of them.

    Reading whole rows is several times cheaper than a strided grid along
    both axes (the rows are contiguous in the file); `channel_statistics`
    then takes every ``stride``-th of the rows' pixels, so the pixels used
    lie on a regular grid of about ``stride`` pixels in both directions,
    about ``max_pixels`` of them (default ``NOISE_MAX_PIXELS``).

    Returns
    -------
    stride : int
    max_pixels : int
        The ``max_pixels`` to give `channel_statistics` on the rows read.

    Examples
    --------
    >>> noise_grid((1000, 512, 512))
    (4, 16384)
    """
    max_pixels = NOISE_MAX_PIXELS if max_pixels is None else int(max_pixels)
    _, ny, nx = (int(n) for n in shape)
    stride = max(1, round(np.sqrt(ny * nx / max_pixels)))
    if stride == 1:
        return 1, max_pixels
    read = -(-ny // stride) * nx
    return stride, max(1, -(-read // stride))



@dataclass(frozen=True)
class _GridChannelNoise:
    """Kernel over whole channel images: the MADs of `grid_noise_statistics` over every ``step``-th pixel."""

    max_pixels: int
    stride: int = 1  # of the lag MADs: see grid_noise.correlation_stride

    def __call__(self, data):
        flat = data.reshape(data.shape[0], -1)
        step = max(1, -(-flat.shape[1] // self.max_pixels))
        return grid_noise_statistics(np.ascontiguousarray(flat[:, ::step]), stride=self.stride)


def _empty_columns(n_chan):
    return {"mad": np.full(n_chan, np.nan), "step_mad": np.full(max(n_chan - 1, 0), np.nan),
            "lag2_mad": np.full(max(n_chan - 2, 0), np.nan),
            "curvature_mad": np.full(max(n_chan - 2, 0), np.nan), "n_pixels": np.zeros(n_chan),
            "total": np.zeros(n_chan)}


def grid_statistics(cube, *, max_pixels=NOISE_MAX_PIXELS, client=None, progress=None, cancel=None):
    """The MADs of `grid_noise_statistics` for every channel of ``cube``, over about ``max_pixels`` of its pixels.

    One pass in blocks of whole channel images (`blocks.plane_blocks`); the
    cube's mask is respected. Differences across the boundary of two blocks
    are not measured (NaN).

    Returns
    -------
    dict
        The keywords of `channel_rms_from_grid`.
    """
    n_chan = cube.shape[0]
    columns = _empty_columns(n_chan)

    def consume(block, result):
        (start, stop), = block.runs
        for name, values in result.items():
            columns[name][start:start + len(values)] = values

    kernel = _GridChannelNoise(int(max_pixels), correlation_stride(n_chan))
    run_blocks(cube, kernel, plane_blocks(cube.shape, itemsize=4), consume,
               dtype=np.float32, client=client, progress=progress, cancel=cancel)
    return columns


def kept_grid_statistics(noise_grid, left_out=None, *, max_pixels=NOISE_MAX_PIXELS):
    """What `grid_statistics` gives, from the grid pass 1 kept (`first_pass.NoiseGrid`) instead of a read.

    The channels are taken in the runs `grid_statistics` would read as
    blocks (differences across their boundaries are not measured, as
    there), on one thread per core.

    Parameters
    ----------
    noise_grid : first_pass.NoiseGrid
    left_out : ndarray of bool, shape (ny, nx), optional
        Pixels to leave out (NaN in every channel).
    max_pixels : int
        As for `grid_statistics`.

    Returns
    -------
    dict
        The keywords of `channel_rms_from_grid`.
    """
    values = noise_grid.values
    n_chan, n_rows, n_columns = values.shape
    if left_out is not None:
        kept = ~np.asarray(left_out, dtype=bool)[::noise_grid.row_stride, ::noise_grid.column_step]
        values = np.where(kept, values, np.float32(np.nan))
    values = values.reshape(n_chan, -1)
    # the grid is already thinned to about max_pixels: the kernel keeps every pixel of it
    kernel = _GridChannelNoise(max(int(max_pixels), values.shape[1]), correlation_stride(n_chan))
    # the channel runs grid_statistics reads: plane blocks of the rows it reads, whole rows wide
    runs = [block.runs[0] for block in plane_blocks((n_chan, n_rows, n_columns * noise_grid.column_step),
                                                    itemsize=4)]
    columns = _empty_columns(n_chan)
    with concurrent.futures.ThreadPoolExecutor(max_workers=default_threads()) as pool:
        results = pool.map(lambda run: (run, kernel(values[run[0]:run[1]].copy())), runs)
        for (start, _), result in results:
            for name, found in result.items():
                columns[name][start:start + len(found)] = found
    return columns


def _pixels_per_sample(fwhm_pixels, stride):
    """Grid pixels per independent noise sample: the correlation area (1.1331 FWHM_x FWHM_y, a Gaussian's) over stride^2."""
    if fwhm_pixels is None or min(fwhm_pixels) <= 0:
        return 1.0
    return max(1.0, 1.1331 * fwhm_pixels[0] * fwhm_pixels[1] / stride**2)


def _standing_out(grid):
    """Channels whose noise stands out: by their plain rms and by their difference-based rms alike.

    A channel of bad noise lifts both; emission over the field lifts only
    the plain rms, a bad neighbour only the difference-based one. Where the
    difference-based rms is not measured (the ends of the band), the plain
    rms decides alone.
    """
    plain = set(flag_channels(grid.plain_rms).tolist())
    difference = np.asarray(grid.difference_rms, dtype=float)
    measured = np.isfinite(difference)
    by_difference = set(np.flatnonzero(measured)[flag_channels(difference[measured])].tolist())
    unmeasured = set(np.flatnonzero(~measured).tolist())
    blank = set(np.flatnonzero(~np.isfinite(grid.plain_rms)).tolist())
    return np.array(sorted((plain & (by_difference | unmeasured)) | blank), dtype=int)


def _median_rms(channel_rms):
    finite = channel_rms[np.isfinite(channel_rms)]
    if finite.size == 0:
        raise SpectralRangeError("every channel of the cube is blank (NaN or masked); there is no noise to measure")
    return np.median(finite)


@dataclass(frozen=True)
class ChannelNoise:
    """Pass 2 of the check: the noise of each channel, and each channel's extremes in units of it.

    Attributes
    ----------
    summary : NoiseSummary
    peaks, troughs : Quantity, shape (n_channels,)
        Highest and lowest value of each channel less each pixel's continuum
        level; with a noise varying across the field, of each pixel's values
        divided by ``scale`` (intensities as at the quietest part).
    peak_positions, trough_positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each channel's extreme.
    scale : ndarray, shape (ny, nx), or None
        What each pixel was divided by: its relative noise, widened where the
        map is uncertain; None for a noise uniform across the field.
    notes : tuple of str
        Warnings for the report.
    field_mean : ndarray, shape (n_channels,) or None
        Mean of each channel over the pixels the rms was measured on (in the
        cube's unit, or in units of the quietest part's noise): the field's
        mean spectrum, where emission spread over the field shows.
    """

    summary: NoiseSummary
    peaks: u.Quantity
    peak_positions: np.ndarray
    troughs: u.Quantity
    trough_positions: np.ndarray
    scale: object = None
    notes: tuple = ()
    field_mean: object = None


def _continuum_pixels_left_out(spectra, notes, *, local):
    """Pixels to leave out of the channel rms: those with significant continuum, when they are more than a few."""
    continuum_pixels = spectra.continuum_pixels(local=local)
    covered = float(continuum_pixels.mean())
    if covered > 0.5:
        notes.append(f"continuum covers {covered:.0%} of the image: the channel rms is "
                     "measured over every pixel and may be overestimated")
    return continuum_pixels if CONTINUUM_MASK_FRACTION < covered <= 0.5 else None


def channel_noise(cube, header, spectra, spatial, *, threshold, fwhm_pixels=None, client=None, progress=None,
                  cancel=None):
    """Measure the noise of every channel (pass 2 of the check) and flag the channels that stand out.

    Parameters
    ----------
    cube : SpectralCube
    header : HeaderSummary
    spectra : ContinuumFreePeaks
        Pass 1.
    spatial : SpatialNoise
        The noise across the field (`spatial_noise`).
    threshold : float
        The detection threshold applied: the noise map is widened by its own
        error at that level.
    fwhm_pixels : (float, float) or None
        FWHM of the noise correlation in pixels (x, y), for the number of
        independent pixels behind each channel's rms.
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    ChannelNoise
    """
    notes = []
    scale = None
    if spatial.varies or spatial.per_pixel:
        # Every pixel's data over its own relative noise; the extremes per channel, and the
        # rms of the whole field in the units of its quietest part. The map's own error e (a
        # fraction) widens the S/N of a pixel by about sqrt(1 + (t e)^2) at a level t
        # (first-order error propagation, common practice), so the map is widened by that
        # much where it is uncertain, at the threshold applied.
        scale = spatial.relative * np.sqrt(1 + (threshold * spatial.relative_error) ** 2)
        stride, _ = noise_grid(header.shape)
        # each pixel's continuum level is judged against its own noise
        left_out = _continuum_pixels_left_out(spectra, notes, local=True)
        extremes = noise_scaled_extremes(cube, spectra.continuum_level, spatial.relative, scale=scale,
                                         rms_pixels=None if left_out is None else ~left_out, stride=stride,
                                         pixels_per_sample=_pixels_per_sample(fwhm_pixels, stride), client=client,
                                         progress=progress, cancel=cancel)
        grid = extremes.grid
        channel_rms = extremes.rms
        total_rms = _median_rms(channel_rms)
        extremes = (extremes.peaks, extremes.positions, extremes.troughs, extremes.trough_positions)
        if spatial.per_pixel:
            rms_region = ("a pixel of the median noise, measured over the whole field with each pixel's values "
                          "divided by its own noise relative to that median")
        else:
            where = ("the centre of the field" if spatial.primary_beam_corrected
                     else "the quietest part of the field")
            rms_region = (f"{where} (around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}), measured "
                          "over the whole field with each pixel's values divided by its relative noise")
        notes.append(_varying_noise_note(spatial))
    else:
        # noise.py's robust rms per channel. When continuum covers more than
        # CONTINUUM_MASK_FRACTION of the image it would inflate the MAD of every
        # channel, so those pixels are left out; below that the bias is at most a
        # few per cent and the faster unmasked pass is used.
        left_out = _continuum_pixels_left_out(spectra, notes, local=False)
        stride, max_pixels = noise_grid(header.shape)
        kept = getattr(spectra, "noise_grid", None)
        if kept is not None and kept.row_stride == stride:
            statistics = kept_grid_statistics(kept, left_out, max_pixels=max_pixels)
            if progress is not None:
                progress(1.0)
        else:
            noise_cube = cube if left_out is None else cube.with_mask(~left_out)
            if stride > 1:
                noise_cube = noise_cube[:, ::stride, :]
            statistics = grid_statistics(noise_cube, max_pixels=max_pixels, client=client, progress=progress,
                                         cancel=cancel)
        grid = channel_rms_from_grid(**statistics, pixels_per_sample=_pixels_per_sample(fwhm_pixels, stride))
        channel_rms = u.Quantity(grid.rms, cube.unit)
        total_rms = _median_rms(channel_rms)
        extremes = (spectra.peaks, spectra.positions, spectra.troughs, spectra.trough_positions)
        rms_region = "the whole field"
    flagged = _standing_out(grid)
    # a precise rms for the S/N of small images (flagged channels keep their own)
    channel_rms = u.Quantity(steady_rms(channel_rms.value, grid.n_independent, flagged), channel_rms.unit)
    if len(flagged):
        notes.append(f"{len(flagged)} channel(s) with noise that stands out (see the noise section)")
    summary = NoiseSummary(channel_rms=channel_rms, cube_rms=total_rms, flagged=flagged, rule=FLAG_RULE,
                           spatial=spatial, rms_region=rms_region, spatial_rule=SPATIAL_RULE,
                           plain_rms=u.Quantity(grid.plain_rms, cube.unit),
                           from_differences=grid.from_differences, channel_correlation=grid.correlation)
    return ChannelNoise(summary, *extremes, scale=scale, notes=tuple(notes), field_mean=grid.mean)


def _varying_noise_note(spatial):
    if spatial.per_pixel:
        return (f"the field is too small for a smooth noise map: each pixel is judged against its own noise "
                f"(from the differences of its neighbouring channels); the noisiest pixel has "
                f"{spatial.highest:.2g} times the median pixel's noise")
    if spatial.primary_beam_corrected:
        return (f"the noise rises towards the edge of the field to {spatial.edge_to_centre:.2g} times that of "
                f"the centre (median along the edge; up to {spatial.highest:.2g} times), as in a "
                "primary-beam-corrected image: detections are judged against each pixel's own noise, and the "
                "channel rms given is that of the centre")
    return (f"the noise varies across the field (up to {spatial.highest:.2g} times that of the quietest "
            f"part, around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}): detections are judged "
            "against each pixel's own noise, and the channel rms given is that of the quietest part")
