"""The delivery check of one cube: header, noise, leftover continuum and lines.

Right after a delivery, before anyone opens a notebook, `check_cube` answers
for one cube: is it sound, what is the noise, is continuum left in the data,
which lines are there. Every pass over the data runs block by block through
`blocks.run_blocks` (the robust channel rms of `noise`, the moment map of
`moments`, and one pass of this module's own), so a cube larger than memory
is checked in bounded memory; lines come from `catalog` and
`redshift_solver`. The command ``cubeloupe check`` (`cubeloupe.analysis.commands`) runs
it over many files and the ``report_*`` modules of this package write the report.

The check reads a cube with uniform noise once in full, plus the channels of its detections
(a cube whose noise varies across the field twice):

1. `continuum_free_peaks`: per pixel, the continuum level (median over a
   channel subsample), its noise and its channel-to-channel noise; per
   channel, the highest and lowest values of the data minus that level
   (peak and trough spectra), and the valid fraction; per pixel, sums over
   all channels for the line-free mean (`noise.PixelSums`); over the channel
   subsample, the correlation of neighbouring pixels (the noise FWHM,
   `noise_fwhm_from_lags`); and the values of every k-th pixel of every
   k-th image row in every channel (`noise_grid`, `first_pass.NoiseGrid`).
   From the channel-to-channel noise, `spatial_noise` makes a smooth map of
   the noise across the field.
2. When the noise is uniform: the robust rms per channel over that grid
   (without pixels with significant continuum when it is extended), from
   the values pass 1 kept (`channel_noise.kept_grid_statistics`; a cube
   whose grid is too large to keep reads its rows again). When it varies
   across the field (a primary-beam-corrected cube): `noise_scaled_extremes`
   over every channel image, each pixel's
   data less its level divided by its relative noise: the peak and trough
   spectra in those units and the rms of the quietest part of the field.
3. The channels excluded from the line-free set are read again to take them
   out of the sums of pass 1 (`noise.PixelSums.without_channels`); the
   spectrum at each absorption candidate is read to confirm it; then
   `moments.moment_maps` over the strongest detection.

The rules the check applies, stated once here and repeated in the report:

Flagged channels
    A channel is flagged when its robust rms differs from the median of all
    channel rms values by more than ``FLAG_SIGMAS`` (5) times the robust
    scatter of those values (1.4826 x their median absolute deviation), or
    when the channel is wholly blanked.
Detections
    The peak-intensity spectrum (the maximum over pixels of each channel,
    after removing each pixel's continuum level, see `continuum_free_peaks`)
    divided by the channel's robust rms gives a peak S/N per channel. A
    feature is a run of adjacent channels whose 3-channel smoothed peak S/N
    stays above the edge level (the noise floor's median plus 3 robust
    scatters, the floor being the channels below the threshold) or whose own
    S/N reaches the threshold; runs one channel apart are merged, and a run
    is a detection when its highest channel reaches the threshold. See
    `group_features`.
Noise across the field
    Each pixel's noise from the differences of neighbouring channels (at
    the channel subsample); the median of its log in boxes; a 2-D
    polynomial in log(noise) through the boxes (`spatial_noise`). When the
    variation is significant and at least ``NOISE_VARIATION`` (5 %),
    detections are judged against each pixel's own noise and the channel
    rms is that of the quietest part of the field (the centre of a
    primary-beam-corrected image); the edge-to-centre ratio is reported, and
    the cube is said to look primary-beam corrected when the noise rises
    towards every edge.
Absorption
    The same rules on the trough S/N spectrum (the minimum over pixels,
    negated): a dip is kept when, on the spectrum of its pixel, it lies by
    the threshold below the continuum given by the channels free of
    features on both sides of it (`absorption.confirmed_absorption`); its depth and
    S/N are measured there.
Detection threshold
    The larger of the threshold asked for (5 by default) and the level
    above which ``FALSE_ALARMS`` (0.05) pure-noise peaks or dips are
    expected over the whole cube, half of them on each side, as both signs
    are searched (`false_alarm_threshold` for ``FALSE_ALARMS / 2``). The
    maximum of N values of Gaussian noise grows like sqrt(2 ln N): a plain
    5 sigma gives a 1 GB cube (512 x 512 x 1000, 5-pixel beam) about 40
    noise detections, so the threshold there is about 6 sigma. The count is the expected Euler
    characteristic of a Gaussian random field (Worsley et al. 1996, Human
    Brain Mapping 4, 58), capped by the Bonferroni bound ``n_pixels Q(t)``,
    per channel image, channels independent; the noise correlation is the
    beam or the one measured on the data, whichever gives more independent
    beams. The threshold applied and the expected count are reported.
Line-free channels
    Every channel except those of a detection padded on each side by a
    quarter of the detection's number of channels (at least
    ``MIN_PAD_CHANNELS``), and except flagged channels.
Leftover continuum
    The mean over line-free channels in each pixel; its significance is that
    mean over its standard error, the pixel's standard deviation over those
    channels divided by ``sqrt(n_free)`` (independent channels; the
    statistics of `noise.leftover_continuum`, by its code, from the sums of
    pass 1).
Velocities
    Offsets of identifications are radio-convention velocities from the
    catalog line redshifted to the identification's z, in the frame of the
    cube's spectral axis (SPECSYS); see `LinesSummary.velocity_reference`.

Examples
--------
>>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
>>> result.noise.cube_rms  # doctest: +SKIP
<Quantity 0.0015... Jy / beam>
"""


import numbers
import os
from dataclasses import replace

import numpy as np

from ..cubes import open_cube, source_name
from ..errors import ParameterError
from ..spectral import check_redshift
from .channel_noise import channel_noise, noise_grid
from .continuum import leftover_continuum_summary
from .detections import DETECTION_SNR, WING_PAD_FRACTION, line_free_channels
from .false_alarms import FALSE_ALARMS, detection_threshold
from .first_pass import continuum_free_peaks
from .header import beam_fwhm_pixels, blanked_notes, header_summary
from .line_search import find_lines
from .noise_map import pixel_noise_map, spatial_noise
from .results import CubeCheck
from .strongest import strongest_feature

__all__ = ["check_cube", "check_detection_options", "MAX_THRESHOLD"]

# The largest detection threshold accepted, in sigma (see `check_detection_options`).
MAX_THRESHOLD = 1000.0


def check_cube(cube, *, z=None, threshold=DETECTION_SNR, false_alarms=FALSE_ALARMS, client=None, progress=None,
               cancel=None):
    """Run the delivery check on one cube.

    Parameters
    ----------
    cube : SpectralCube, VaryingResolutionSpectralCube, str or os.PathLike
        An opened cube (see `open_cube`) or the path of a FITS cube.
    z : float, optional
        Source redshift: lists the catalog lines expected in the band and
        identifies detections at that z. Without it, two or more detections
        are used to solve for z.
    threshold : float
        Smallest detection threshold for the peak and trough S/N spectra
        (default 5).
    false_alarms : float or None
        Expected number of pure-noise detections, emission and absorption
        together, allowed over the whole cube (default 0.05): the threshold
        applied is the larger of ``threshold`` and `false_alarm_threshold`
        for half of it (each sign gets half) at the cube's size and noise
        correlation (``lines.effective_threshold``). None applies
        ``threshold`` as it is.
    client : None, "default" or distributed.Client
        Where the block-wise passes run (see `cubeloupe.analysis.blocks`).
    progress : callable, optional
        ``progress(fraction)`` with a fraction from 0 to 1.
    cancel : threading.Event-like, optional
        Set to stop; `CancelledComputation` is raised.

    Returns
    -------
    CubeCheck

    Raises
    ------
    CubeFileError, CubeShapeError, SpectralAxisError
        The file cannot be read as a line cube.
    RedshiftError
        ``z`` out of range.

    Examples
    --------
    >>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
    >>> [(round(f.frequency.to_value(u.GHz), 3), f.candidates[0].name) for f in result.lines.features]  # doctest: +SKIP
    [(229.414, 'CO J=2-1')]
    """
    cube = open_cube(cube) if isinstance(cube, (str, os.PathLike)) else cube
    z = None if z is None else check_redshift(z)
    _check_options(threshold, false_alarms)
    report, run = progress or (lambda fraction: None), {"client": client, "cancel": cancel}
    header = header_summary(cube)
    # Pass 1: each pixel's continuum level and noise; the peak and trough spectra without it.
    spectra = continuum_free_peaks(cube, progress=_stage(report, 0.0, 0.3), noise_grid=noise_grid(cube.shape), **run)
    header = replace(header, blanked_fraction=1.0 - spectra.valid_fraction)
    limit = detection_threshold(header, spectra, threshold=threshold, false_alarms=false_alarms)
    # Pass 2: the noise across the field, then of each channel (in units of the noise map).
    spatial = spatial_noise(spectra.step_noise, beam_pixels=beam_fwhm_pixels(header))
    if not spatial.measured:  # a field too small for a smooth map: each pixel's own noise
        spatial = pixel_noise_map(cube, progress=_stage(report, 0.3, 0.35), **run)
    noise = channel_noise(cube, header, spectra, spatial, threshold=limit.applied, fwhm_pixels=limit.fwhm_pixels,
                          progress=_stage(report, 0.35, 0.55), **run)
    lines = find_lines(cube, header, spectra, noise, limit, z)
    report(0.62)
    free = _line_free(header.shape[0], lines.channels, noise.summary.flagged)
    continuum = leftover_continuum_summary(cube, spectra, free, spatial, beam_pixels=beam_fwhm_pixels(header),
                                           correlation=noise.summary.channel_correlation,
                                           progress=_stage(report, 0.62, 0.8), **run)
    report(0.8)
    strongest, strongest_notes = None, []
    if lines.summary.features and header.frequency is not None:
        strongest = strongest_feature(cube, lines.summary.features[0], header.frequency, free,
                                      progress=_stage(report, 0.8, 0.98), notes=strongest_notes, **run)
    report(1.0)
    noise_summary = noise.summary
    if continuum.line_free_noise_varies is not None:
        noise_summary = replace(noise_summary, varies_in_line_free_channels=continuum.line_free_noise_varies)
    notes = [*header.warnings, *noise.notes, *blanked_notes(header.blanked_fraction), *lines.notes,
             *continuum.notes, *strongest_notes]
    return CubeCheck(path=source_name(cube, "<in memory>"), header=header, noise=noise_summary,
                     continuum=continuum.summary, lines=lines.summary, strongest=strongest,
                     warnings=tuple(dict.fromkeys(notes)))


def check_detection_options(threshold, false_alarms=FALSE_ALARMS, *, argname="threshold"):
    """Refuse a detection threshold or false-alarm count that is not a finite number in range (#14).

    ``threshold`` must lie in (0, `MAX_THRESHOLD`] sigma: beyond that no
    noise or line statistic means anything and the tail probabilities
    underflow. ``argname`` names the option in the message (``"--threshold"``
    for the command).

    Examples
    --------
    >>> check_detection_options(5.0)
    >>> check_detection_options(float("inf"), argname="--threshold")
    Traceback (most recent call last):
    ...
    cubeloupe.analysis.errors.ParameterError: --threshold must be a finite number of sigma in (0, 1000]; got inf
    """
    if isinstance(threshold, bool) or not isinstance(threshold, numbers.Real) or not np.isfinite(threshold) \
            or not 0 < threshold <= MAX_THRESHOLD:
        raise ParameterError(f"{argname} must be a finite number of sigma in (0, {MAX_THRESHOLD:g}]; got {threshold!r}")
    if false_alarms is not None and (isinstance(false_alarms, bool) or not isinstance(false_alarms, numbers.Real)
                                     or not np.isfinite(false_alarms) or not false_alarms > 0):
        raise ParameterError(f"false_alarms must be a finite positive expected count of noise peaks, or None; "
                             f"got {false_alarms!r}")


def _line_free(n_channels, channels, flagged):
    """Line-free channels without the features' wings; the narrower padding where the wide one leaves too few."""
    free = line_free_channels(n_channels, channels, flagged, pad_fraction=WING_PAD_FRACTION)
    if free.sum() < max(3, n_channels // 10):
        free = line_free_channels(n_channels, channels, flagged)
    return free


def _check_options(threshold, false_alarms):
    check_detection_options(threshold, false_alarms)


def _stage(progress, start, stop):
    """A progress callback for one stage mapping 0..1 onto start..stop overall."""
    return lambda fraction: progress(start + (stop - start) * min(max(float(fraction), 0.0), 1.0))
