"""The noise of each channel, measured so that sources do not lift it, and the channels that stand out.

Pass 2 of the check (`channel_noise`): with a noise uniform across the
field, `noise.channel_statistics` over a regular grid of pixels (every k-th
image row, `noise_grid`), leaving out pixels with significant continuum when
they are more than a few; with a noise varying across the field (a
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

from ..errors import SpectralRangeError
from ..noise import channel_statistics, cube_noise
from .detections import flag_channels
from .noise_map import noise_scaled_extremes
from .results import NoiseSummary
from .rules import FLAG_RULE, SPATIAL_RULE

__all__ = [
    "CONTINUUM_MASK_FRACTION",
    "NOISE_MAX_PIXELS",
    "ChannelNoise",
    "channel_noise",
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
    """

    summary: NoiseSummary
    peaks: u.Quantity
    peak_positions: np.ndarray
    troughs: u.Quantity
    trough_positions: np.ndarray
    scale: object = None
    notes: tuple = ()


def _continuum_pixels_left_out(spectra, notes, *, local):
    """Pixels to leave out of the channel rms: those with significant continuum, when they are more than a few."""
    continuum_pixels = spectra.continuum_pixels(local=local)
    covered = float(continuum_pixels.mean())
    if covered > 0.5:
        notes.append(f"continuum covers {covered:.0%} of the image: the channel rms is "
                     "measured over every pixel and may be overestimated")
    return continuum_pixels if CONTINUUM_MASK_FRACTION < covered <= 0.5 else None


def channel_noise(cube, header, spectra, spatial, *, threshold, client=None, progress=None, cancel=None):
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
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    ChannelNoise
    """
    notes = []
    scale = None
    if spatial.varies:
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
                                         client=client, progress=progress, cancel=cancel)
        channel_rms = extremes.rms
        finite_rms = channel_rms[np.isfinite(channel_rms)]
        if finite_rms.size == 0:
            raise SpectralRangeError("every channel of the cube is blank (NaN or masked); there is no noise "
                                     "to measure")
        total_rms = np.median(finite_rms)
        extremes = (extremes.peaks, extremes.positions, extremes.troughs, extremes.trough_positions)
        where = "the centre of the field" if spatial.primary_beam_corrected else "the quietest part of the field"
        rms_region = (f"{where} (around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}), measured over "
                      "the whole field with each pixel's values divided by its relative noise")
        notes.append(_varying_noise_note(spatial))
    else:
        # noise.py's robust rms per channel. When continuum covers more than
        # CONTINUUM_MASK_FRACTION of the image it would inflate the MAD of every
        # channel, so those pixels are left out; below that the bias is at most a
        # few per cent and the faster unmasked pass is used.
        left_out = _continuum_pixels_left_out(spectra, notes, local=False)
        noise_cube = cube if left_out is None else cube.with_mask(~left_out)
        stride, max_pixels = noise_grid(header.shape)
        if stride > 1:
            noise_cube = noise_cube[:, ::stride, :]
        stats = channel_statistics(noise_cube, max_pixels=max_pixels, client=client, progress=progress,
                                   cancel=cancel)
        channel_rms = stats.rms
        total_rms = cube_noise(noise_cube, statistics=stats)
        extremes = (spectra.peaks, spectra.positions, spectra.troughs, spectra.trough_positions)
        rms_region = "the whole field"
    flagged = flag_channels(channel_rms)
    if len(flagged):
        notes.append(f"{len(flagged)} channel(s) with noise that stands out (see the noise section)")
    summary = NoiseSummary(channel_rms=channel_rms, cube_rms=total_rms, flagged=flagged, rule=FLAG_RULE,
                           spatial=spatial, rms_region=rms_region, spatial_rule=SPATIAL_RULE)
    return ChannelNoise(summary, *extremes, scale=scale, notes=tuple(notes))


def _varying_noise_note(spatial):
    if spatial.primary_beam_corrected:
        return (f"the noise rises towards the edge of the field to {spatial.edge_to_centre:.2g} times that of "
                f"the centre (median along the edge; up to {spatial.highest:.2g} times), as in a "
                "primary-beam-corrected image: detections are judged against each pixel's own noise, and the "
                "channel rms given is that of the centre")
    return (f"the noise varies across the field (up to {spatial.highest:.2g} times that of the quietest "
            f"part, around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}): detections are judged "
            "against each pixel's own noise, and the channel rms given is that of the quietest part")
