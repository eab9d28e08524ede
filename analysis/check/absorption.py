"""Absorption: the dips of the trough S/N spectrum that stand below the continuum on both sides at their pixel.

A dip is absorption only against continuum; in continuum-free data it is a
negative feature with a likely cause (`negative_feature_cause`).

Examples
--------
>>> negative_feature_cause(u.Jy / u.beam).startswith("a baseline")
True
"""

from dataclasses import dataclass, replace

import astropy.units as u
import numpy as np

from .detections import line_free_channels

__all__ = ["MIN_SIDE_CHANNELS", "MIN_LEVEL_CHANNELS", "SIDE_WIDTHS", "CONTINUUM_SIGMAS", "Dips", "confirmed_absorption",
           "negative_feature_cause"]

# An absorption is measured against the channels free of features on both sides of it at its
# pixel: at least MIN_SIDE_CHANNELS on each side, the nearest SIDE_WIDTHS dip widths (and at
# least MIN_LEVEL_CHANNELS) of them on each side; the median of 5 values scatters by 0.56
# sigma (1.2533 sigma / sqrt(n), common practice), which the S/N takes into account.
MIN_SIDE_CHANNELS = 5
MIN_LEVEL_CHANNELS = 10
SIDE_WIDTHS = 2
# A dip is absorption only where the continuum beside it stands this many of its own errors above zero.
CONTINUUM_SIGMAS = 3.0


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

    A kept dip is absorption only where there is continuum to absorb: the
    local continuum stands ``CONTINUUM_SIGMAS`` times its own error above
    zero, and the dip is no deeper than that continuum (by more than
    ``threshold`` times the noise: absorption cannot take away more than
    the continuum gives; common practice). Otherwise it is a negative
    feature, whose likely cause the report gives (`negative_feature_cause`).

    Returns
    -------
    Dips
    """
    n_chan = cube.shape[0]
    free = line_free_channels(n_chan, [*emission, *dips], flagged)
    kept, negative, measured = [], [], {}
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
        at_scale = 1.0 if scale is None else scale[y, x]
        level_error = channel_rms[dip.peak] * spread * at_scale
        against_continuum = bool(level >= CONTINUUM_SIGMAS * level_error
                                 and depth <= level + threshold * noise * at_scale)
        (kept if against_continuum else negative).append(replace(dip, peak_snr=snr))
        measured[(dip.first, dip.last)] = (depth, noise * (1.0 if relative is None else relative[y, x]), level)
    return Dips(kept, negative, measured)


@dataclass(frozen=True)
class Dips:
    """The dips of the trough spectrum confirmed on the spectrum of their pixel.

    Attributes
    ----------
    absorption : list of FeatureChannels
        Dips against continuum; ``peak_snr`` is the S/N measured on the
        pixel's spectrum.
    negative : list of FeatureChannels
        Dips where there is no continuum to absorb.
    measured : dict
        ``(first, last) -> (depth, error, level)`` Quantities for each.
    """

    absorption: list
    negative: list
    measured: dict


def negative_feature_cause(unit):
    """The likely cause of a dip below zero in continuum-free data, in words, given the cube's brightness unit.

    Examples
    --------
    >>> negative_feature_cause(u.K).startswith("emission at the reference")
    True
    """
    reference = ("emission at the reference (off) position of position- or frequency-switched single-dish "
                 "data, subtracted from the source's spectrum")
    baseline = "a baseline (or continuum subtraction) problem"
    if u.Unit(unit).is_equivalent(u.K):
        return f"{reference}, or {baseline} (common practice)"
    return f"{baseline}, or {reference} (common practice)"

