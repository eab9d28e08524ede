"""Detections in a S/N spectrum: channels that stand out, runs of channels that make a feature, line-free channels.

The rules applied to the spectra of the check (stated in the report, see
`rules`): `flag_channels` on the channel rms, `group_features` on the peak
(emission) and negated trough (absorption) S/N spectra, `line_free_channels`
around the features; `measure_feature` gives a feature's frequency and width.

Examples
--------
>>> snr = np.array([1., 1.2, 0.8, 1.1, 0.9, 6., 9., 5.5, 1., 1.1, 0.9, 1., 1.3, 4., 1., 0.9, 1.1])
>>> [(f.first, f.last, f.peak) for f in group_features(snr)]
[(4, 8, 6)]
"""

import astropy.units as u
import numpy as np

from ..noise import MAD_TO_SIGMA
from ..spectral import SPEED_OF_LIGHT
from .results import Feature, FeatureChannels

__all__ = [
    "FLAG_SIGMAS",
    "DETECTION_SNR",
    "MIN_PAD_CHANNELS",
    "WING_PAD_FRACTION",
    "robust_level",
    "flag_channels",
    "edge_level",
    "group_features",
    "line_free_channels",
    "field_emission",
    "measure_feature",
]

FLAG_SIGMAS = 5.0
DETECTION_SNR = 5.0
MIN_PAD_CHANNELS = 2
# The line-free channels of the leftover continuum leave out each feature padded by half its number of
# channels on each side: a Gaussian line whose run reaches down to 3 sigma of a 50-sigma peak spans
# +-2.4 of its dispersions; the padding reaches +-4.8, where its wings are 1e-5 of its peak (issue 13).
WING_PAD_FRACTION = 0.5

_KMS = u.km / u.s


def robust_level(values):
    """Median and Gaussian-equivalent scatter (1.4826 MAD) of the finite values."""
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return np.nan, np.nan
    median = np.median(finite)
    return median, MAD_TO_SIGMA * np.median(np.abs(finite - median))


def flag_channels(channel_rms, *, sigmas=FLAG_SIGMAS):
    """Indices of channels whose noise stands out from the rest of the band.

    Rule: a channel is flagged when its rms differs from the median channel
    rms by more than ``sigmas`` times the robust scatter of the channel rms
    values (1.4826 x median absolute deviation), or when its rms is not
    finite (a wholly blanked channel).

    Parameters
    ----------
    channel_rms : Quantity or ndarray, shape (n_channels,)
    sigmas : float

    Returns
    -------
    ndarray of int

    Examples
    --------
    >>> rms = np.array([1.0, 1.01, 0.99, 1.0, 3.0, 1.0, np.nan])
    >>> flag_channels(rms)
    array([4, 6])
    """
    values = np.asarray(u.Quantity(channel_rms).value, dtype=float)
    median, scatter = robust_level(values)
    bad = ~np.isfinite(values)
    if np.isfinite(median):
        # A band with identical rms everywhere has zero scatter: then only
        # departures larger than rounding (1e-6 relative) count.
        tolerance = max(sigmas * scatter, 1e-6 * abs(median))
        bad |= np.abs(values - median) > tolerance
    return np.flatnonzero(bad)




def _floor_edge(values, threshold):
    """Edge level of a S/N spectrum: the noise floor's median + 3 robust scatters, at most ``threshold``.

    The floor is measured on the channels below ``threshold`` only, so that
    lines filling much of the band do not lift it.
    """
    finite = values[np.isfinite(values)]
    below = finite[finite < threshold]
    median, scatter = robust_level(below if below.size >= 3 else finite)
    if not np.isfinite(median):
        return None
    return min(threshold, median + 3.0 * scatter)


def _boxcar3(values):
    """Mean of each channel and its two neighbours (blank neighbours left out; blank channels stay blank)."""
    finite = np.isfinite(values)
    padded = np.pad(np.where(finite, values, 0.0), 1)
    count = np.pad(finite.astype(float), 1)
    sums = padded[:-2] + padded[1:-1] + padded[2:]
    counts = count[:-2] + count[1:-1] + count[2:]
    with np.errstate(invalid="ignore", divide="ignore"):
        smooth = sums / counts
    smooth[~finite] = np.nan
    return smooth


def edge_level(snr, threshold):
    """The level bounding the features of ``snr`` (see `group_features`); None for a blank spectrum."""
    snr = np.asarray(snr, dtype=float)
    return _floor_edge(_boxcar3(snr), threshold) if np.isfinite(snr).any() else None


def group_features(peak_snr, *, threshold=DETECTION_SNR, max_gap=1):
    """Group the channels of a peak S/N spectrum into features.

    Rule: a channel belongs to a run when the S/N smoothed over it and its
    two neighbours lies above the smoothed spectrum's edge level (the median
    of its noise floor plus 3 times the floor's robust scatter, the floor
    being the channels below ``threshold``), or when its own S/N reaches
    ``threshold``. Runs at most ``max_gap`` channels apart are merged;
    blank (non-finite) channels break runs. A run is a feature when its
    highest channel reaches ``threshold``. Smoothing lets a broad, faint line
    stay one feature where its noisy peak spectrum dips.

    Parameters
    ----------
    peak_snr : ndarray, shape (n_channels,)
        Peak intensity over channel rms, per channel.
    threshold : float
        Detection threshold in units of the channel rms.
    max_gap : int
        Largest gap (channels below the edge level) bridged inside a feature.

    Returns
    -------
    list of FeatureChannels
        Strongest first; ``edge_level`` is that of the smoothed spectrum.

    Examples
    --------
    >>> snr = np.array([1., 1.2, 0.8, 1.1, 0.9, 6., 9., 5.5, 1., 1.1, 0.9, 1., 1.3, 4., 1., 0.9, 1.1])
    >>> [(f.first, f.last, f.peak) for f in group_features(snr)]
    [(4, 8, 6)]
    """
    snr = np.asarray(peak_snr, dtype=float)
    if not threshold > 0:
        raise ValueError(f"threshold must be positive; got {threshold!r}")
    if not np.isfinite(snr).any():
        return []
    smooth = _boxcar3(snr)
    edge = _floor_edge(smooth, threshold)
    finite = np.isfinite(snr)
    above = finite & ((snr >= threshold) | (np.nan_to_num(smooth, nan=-np.inf) > edge))
    runs = []
    start = None
    for k, flag in enumerate(above):
        if flag and start is None:
            start = k
        elif not flag and start is not None:
            runs.append([start, k - 1])
            start = None
    if start is not None:
        runs.append([start, len(snr) - 1])
    merged = []
    for run in runs:
        gap = slice(merged[-1][1] + 1, run[0]) if merged else None
        if merged and run[0] - merged[-1][1] - 1 <= max_gap and np.all(finite[gap]):
            merged[-1][1] = run[1]
        else:
            merged.append(run)
    features = []
    for first, last in merged:
        segment = snr[first:last + 1]
        peak = first + int(np.nanargmax(segment))
        if snr[peak] >= threshold:
            features.append(FeatureChannels(first, last, peak, float(snr[peak]), float(edge)))
    features.sort(key=lambda f: -f.peak_snr)
    return features


def field_emission(mean, correlation=0.0, *, threshold=DETECTION_SNR):
    """Features of the field's mean spectrum: emission spread over the field, which the peak spectrum may miss.

    The mean spectrum less its median, over its own noise from the
    differences of neighbouring channels (1.4826 MAD / sqrt(2 (1 - rho_1)),
    which broad emission does not reach), grouped as `group_features` does.

    Parameters
    ----------
    mean : ndarray, shape (n_channels,)
    correlation : float
        Correlation of the noise of neighbouring channels.
    threshold : float

    Returns
    -------
    list of FeatureChannels

    Examples
    --------
    >>> v = np.arange(200.0)
    >>> mean = np.random.default_rng(0).normal(0, 0.01, 200) + 0.2 * np.exp(-0.5 * ((v - 100) / 15) ** 2)
    >>> [(f.first <= 80, f.last >= 120) for f in field_emission(mean)]
    [(True, True)]
    """
    mean = np.asarray(mean, dtype=float)
    if mean.size < 4 or not np.isfinite(mean).sum() >= 4:
        return []
    steps = np.diff(mean)
    steps = steps[np.isfinite(steps)]
    noise = MAD_TO_SIGMA * np.median(np.abs(steps - np.median(steps))) / np.sqrt(2.0 * (1.0 - correlation))
    if not noise > 0:
        return []
    return group_features((mean - np.nanmedian(mean)) / noise, threshold=threshold)


def line_free_channels(n_channels, features, flagged=(), *, min_pad=MIN_PAD_CHANNELS, pad_fraction=0.25):
    """Mask of the channels used as line-free: away from every feature, not flagged.

    Rule: each feature's channels are excluded together with
    ``pad_fraction`` (a quarter) as many channels again on each side (rounded
    up, at least ``min_pad``): the feature's run already reaches down to the
    noise floor of the peak spectrum, the padding covers the faint wings.
    Flagged channels are excluded too.

    Parameters
    ----------
    n_channels : int
    features : sequence of FeatureChannels
    flagged : sequence of int
    min_pad : int
    pad_fraction : float

    Returns
    -------
    ndarray of bool, shape (n_channels,)

    Examples
    --------
    >>> mask = line_free_channels(12, [FeatureChannels(5, 5, 5, 8.0, 3.0)])
    >>> np.flatnonzero(~mask)
    array([3, 4, 5, 6, 7])
    """
    free = np.ones(n_channels, dtype=bool)
    for feature in features:
        pad = max(min_pad, int(np.ceil(pad_fraction * feature.n_channels)))
        free[max(0, feature.first - pad):feature.last + pad + 1] = False
    free[np.asarray(flagged, dtype=int)] = False
    return free


def measure_feature(channels, frequency, spectrum, *, kind, peak, peak_error, position, continuum, velocity=None,
                    likely_cause=None):
    """Measure one feature's frequency, velocity and width from its (peak or negated trough) spectrum.

    The centre is the centroid of the spectrum above its median over the
    feature's channels; the width is the feature's number of channels times
    the channel spacing (in velocity ``c dnu / nu`` at the centre, or the
    velocity axis's own spacing).

    Parameters
    ----------
    channels : FeatureChannels
    frequency : Quantity [frequency], shape (n_channels,), or None
        None for a velocity axis without a rest frequency.
    spectrum : ndarray, shape (n_channels,)
    velocity : Quantity [velocity], shape (n_channels,), optional
        The channels' velocities (`HeaderSummary` ``velocity``).
    kind, peak, peak_error, position, continuum, likely_cause
        As the `Feature` attributes.

    Returns
    -------
    Feature
    """
    run = slice(channels.first, channels.last + 1)
    values = np.asarray(spectrum, dtype=float)
    floor = np.nanmedian(values)
    weights = np.clip(np.nan_to_num(values[run] - floor), 0, None)

    def centroid(axis):
        return (np.sum(weights * axis[run]) / weights.sum()) if weights.sum() > 0 else axis[channels.peak]

    def spacing(axis):
        return np.median(np.abs(np.diff(axis))) if len(axis) > 1 else 0 * axis.unit

    centre = peak_frequency = width = width_velocity = None
    if frequency is not None:
        f = frequency.to(u.GHz)
        centre, peak_frequency = centroid(f).to(u.GHz), f[channels.peak]
        width = (channels.n_channels * spacing(f)).to(u.MHz)
        width_velocity = (SPEED_OF_LIGHT * width / centre).to(_KMS)
    at_velocity = peak_velocity = None
    if velocity is not None:
        v = velocity.to(_KMS)
        at_velocity, peak_velocity = centroid(v), v[channels.peak]
        if width_velocity is None:
            width_velocity = (channels.n_channels * spacing(v)).to(_KMS)
    return Feature(
        channels=channels, frequency=centre, peak_frequency=peak_frequency, width_frequency=width,
        width_velocity=width_velocity, peak=peak, peak_snr=channels.peak_snr,
        position=tuple(int(p) for p in position), kind=kind, peak_error=peak_error, continuum=continuum,
        velocity=at_velocity, peak_velocity=peak_velocity, likely_cause=likely_cause,
    )
