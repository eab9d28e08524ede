"""Absorption: the dips of the trough S/N spectrum that stand below the continuum on both sides at their pixel.

Examples
--------
>>> MIN_SIDE_CHANNELS
5
"""

from dataclasses import replace

import astropy.units as u
import numpy as np

from .detections import line_free_channels

__all__ = ["MIN_SIDE_CHANNELS", "MIN_LEVEL_CHANNELS", "SIDE_WIDTHS", "confirmed_absorption"]

# An absorption is measured against the channels free of features on both sides of it at its
# pixel: at least MIN_SIDE_CHANNELS on each side, the nearest SIDE_WIDTHS dip widths (and at
# least MIN_LEVEL_CHANNELS) of them on each side; the median of 5 values scatters by 0.56
# sigma (1.2533 sigma / sqrt(n), common practice), which the S/N takes into account.
MIN_SIDE_CHANNELS = 5
MIN_LEVEL_CHANNELS = 10
SIDE_WIDTHS = 2


def confirmed_absorption(cube, dips, emission, positions, channel_rms, flagged, *, threshold, scale=None,
                          relative=None):
    """The dips of the trough S/N spectrum that stand below the continuum on both sides of them at their pixel.

    A dip of the trough spectrum is measured against each pixel's median
    over a channel subsample. Where emission fills half the band or more at
    a pixel, that median sits in the emission and the line-free channels
    there show as broad "dips", often at the ends of the band. So each dip
    is measured again on the spectrum of its pixel, against a straight line
    through the medians of the nearest channels free of every feature
    (emission and dips alike, padded as for the line-free channels, not
    flagged) on each side of it (see ``MIN_SIDE_CHANNELS``): a local
    continuum, which follows its slope. It is kept when it has such channels
    on both sides and its depth there reaches ``threshold`` times the
    pixel's noise, widened by the scatter of that continuum. This only
    removes dips, so the false-alarm control of the search holds.

    Returns
    -------
    kept : list of FeatureChannels
        ``peak_snr`` is the S/N measured on the pixel's spectrum.
    measured : dict
        ``(first, last) -> (depth, error, level)`` Quantities for each kept dip.
    """
    n_chan = cube.shape[0]
    free = line_free_channels(n_chan, [*emission, *dips], flagged)
    kept, measured = [], {}
    for dip in dips:
        y, x = (int(i) for i in positions[dip.peak])
        spectrum = cube.filled_data[:, y, x]
        around = np.flatnonzero(free & np.isfinite(spectrum.value))
        width = max(MIN_LEVEL_CHANNELS, SIDE_WIDTHS * dip.n_channels)
        sides = [around[around < dip.first][-width:], around[around > dip.last][:width]]
        if min(len(side) for side in sides) < MIN_SIDE_CHANNELS:
            continue
        levels = u.Quantity([np.median(spectrum[side]) for side in sides])
        centres = [float(np.mean(side)) for side in sides]
        # the continuum at the dip's peak channel, interpolated between the two sides
        weight = (dip.peak - centres[0]) / (centres[1] - centres[0])
        level = (1 - weight) * levels[0] + weight * levels[1]
        # the median of n values scatters by 1.2533 sigma / sqrt(n) (common practice)
        spread = np.hypot((1 - weight) * 1.2533 / np.sqrt(len(sides[0])), weight * 1.2533 / np.sqrt(len(sides[1])))
        depth = level - spectrum[dip.peak]
        noise = channel_rms[dip.peak] * np.sqrt(1 + spread**2)
        snr = float((depth / (noise * (1.0 if scale is None else scale[y, x]))).decompose())
        if not snr >= threshold:
            continue
        kept.append(replace(dip, peak_snr=snr))
        measured[(dip.first, dip.last)] = (depth, noise * (1.0 if relative is None else relative[y, x]), level)
    return kept, measured

