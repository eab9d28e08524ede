"""The detection threshold of the check: pure-noise peaks held to a set number over the whole cube.

The maximum of N values of Gaussian noise grows like sqrt(2 ln N): a plain
5 sigma gives a 1 GB cube (512 x 512 x 1000, 5-pixel beam) about 40 noise
detections. `false_alarm_threshold` raises the threshold until
``FALSE_ALARMS`` pure-noise peaks are expected over the whole cube, counted as
the expected Euler characteristic of a Gaussian random field (Worsley et al.
1996, Human Brain Mapping 4, 58) capped by the Bonferroni bound
(`expected_noise_peaks`); `detection_threshold` applies it to one cube.

Examples
--------
>>> bool(false_alarm_threshold(1000, 512 * 512, (5.0, 5.0)) > 6)  # a 1 GB cube, 5-pixel beam
True
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq
from scipy.stats import norm

__all__ = [
    "FALSE_ALARMS",
    "DetectionThreshold",
    "detection_threshold",
    "expected_noise_peaks",
    "false_alarm_threshold",
    "noise_fwhm",
]

# Pure-noise peaks the check allows over a whole cube: the detection threshold is
# raised until no more are expected, so that about 19 pure-noise cubes in 20 give
# no detection at all, whatever their size (see `false_alarm_threshold`).
FALSE_ALARMS = 0.05


def expected_noise_peaks(n_channels, n_pixels, fwhm_pixels, threshold):
    """Expected number of pure-noise peaks at or above ``threshold`` sigma over a whole cube.

    For noise correlated over a Gaussian of FWHM ``(a, b)`` pixels, the
    expected number of peaks above ``t`` in an image of ``n_pixels`` is its
    expected Euler characteristic, ``R (4 ln 2) (2 pi)^(-3/2) t exp(-t^2 / 2) +
    Q(t)`` with ``R = n_pixels / (a b)`` resolution elements and ``Q`` the
    Gaussian upper tail (Worsley et al. 1996, Human Brain Mapping 4, 58;
    Adler 1981, The Geometry of Random Fields); the edge terms are left out.
    It can never exceed the number of pixels above ``t``, ``n_pixels Q(t)``
    (the Bonferroni bound, exact for uncorrelated pixels): the smaller of
    the two is used, as is usual for random-field thresholds. Without an
    FWHM the pixels are taken as independent. Channels are independent.
    """
    tail = norm.sf(threshold)
    bonferroni = n_pixels * tail
    if fwhm_pixels is None or min(fwhm_pixels) <= 0:
        return float(n_channels * bonferroni)
    resels = n_pixels / (fwhm_pixels[0] * fwhm_pixels[1])
    density = 4 * np.log(2) * (2 * np.pi) ** -1.5 * threshold * np.exp(-0.5 * threshold**2)
    return float(n_channels * min(resels * density + tail, bonferroni))


def false_alarm_threshold(n_channels, n_pixels, fwhm_pixels=None, *, false_alarms=FALSE_ALARMS):
    """The peak S/N above which ``false_alarms`` pure-noise peaks are expected in the whole cube.

    The detection threshold that keeps the false-alarm rate of the whole
    cube, not of one pixel, at ``false_alarms``: the level ``t`` where the
    expected number of peaks of Gaussian noise above ``t`` over
    ``n_channels`` channel images of ``n_pixels`` pixels, correlated over a
    Gaussian of ``fwhm_pixels`` (x, y), equals ``false_alarms``
    (`expected_noise_peaks`: the expected Euler characteristic of a Gaussian
    random field, Worsley et al. 1996, capped by the Bonferroni bound).
    Because the maximum over many pixels of Gaussian noise grows like
    ``sqrt(2 ln N)``, a fixed 5 sigma lets big cubes report dozens of noise
    peaks.

    Parameters
    ----------
    n_channels : int
    n_pixels : float
        Pixels with data per channel image.
    fwhm_pixels : (float, float) or None
        FWHM of the noise correlation along x and y in pixels; None or 0 for
        uncorrelated pixels.
    false_alarms : float
        Expected number of pure-noise peaks allowed in the whole cube.

    Returns
    -------
    float

    Examples
    --------
    >>> from scipy.stats import norm
    >>> t = false_alarm_threshold(100, 10_000, None, false_alarms=0.05)
    >>> bool(np.isclose(t, norm.isf(0.05 / 1e6)))  # independent pixels: the Bonferroni level
    True
    """
    if not false_alarms > 0:
        raise ValueError(f"false_alarms must be a positive expected count; got {false_alarms!r}")
    if n_channels < 1 or n_pixels <= 0:
        return 0.0

    def excess(t):
        return np.log(expected_noise_peaks(n_channels, n_pixels, fwhm_pixels, t)) - np.log(false_alarms)

    low, high = 1.0, 30.0
    if excess(low) <= 0:
        return low
    return float(brentq(excess, low, high, xtol=1e-6))



def noise_fwhm(header, measured):
    """FWHM (x, y) of the noise correlation in pixels for the false-alarm count.

    The beam's (major and minor axes over the pixel size) or the one measured
    on the data (`noise_fwhm_from_lags`), whichever covers the smaller area:
    more independent beams, a higher threshold. This keeps the count honest
    for noise less correlated than the beam (gridded single-dish data,
    white-noise test cubes) and for a measurement lifted by sources.
    """
    beam = None
    if header.beam_major is not None:
        beam = tuple(float((axis / header.pixel_size.min()).decompose())
                     for axis in (header.beam_major, header.beam_minor))
    found = [f for f in (beam, measured) if f is not None]
    return min(found, key=lambda f: f[0] * f[1]) if found else None



@dataclass(frozen=True)
class DetectionThreshold:
    """The detection threshold applied to one cube and the pure-noise counts behind it.

    Attributes
    ----------
    asked : float
        The threshold asked for, in channel rms.
    applied : float
        The larger of ``asked`` and the false-alarm level (``asked`` when
        false alarms are not controlled).
    false_alarms : float or None
    noise_peaks : float
        Pure-noise peaks and dips expected beyond ``applied`` in the whole cube.
    noise_peaks_at_asked : float
        The same beyond ``asked``.
    fwhm_pixels : tuple of float (x, y) or None
        Noise correlation behind the counts (`noise_fwhm`).
    resolution_elements : float
        Independent noise beams per channel image.
    n_channels : int
        Channels with data.
    widening : float
        How much the S/N spectra's noise exceeds 1: they are of data less
        each pixel's level, the median of ``n_sample`` channels, whose own
        scatter (1.2533 sigma / sqrt(n), the median's efficiency, common
        practice) widens them by sqrt(1 + pi / (2 n)).
    """

    asked: float
    applied: float
    false_alarms: object
    noise_peaks: float
    noise_peaks_at_asked: float
    fwhm_pixels: object
    resolution_elements: float
    n_channels: int
    widening: float


def detection_threshold(header, spectra, *, threshold, false_alarms=FALSE_ALARMS):
    """The threshold that holds pure-noise peaks and dips over the whole cube at ``false_alarms``.

    Half of ``false_alarms`` goes to each sign, as searching peaks and dips
    doubles the trials.

    Parameters
    ----------
    header : HeaderSummary
    spectra : ContinuumFreePeaks
        Pass 1: the valid fraction of each channel, the measured noise
        correlation and the channel subsample behind each pixel's level.
    threshold : float
        The smallest threshold, in channel rms.
    false_alarms : float or None
        None applies ``threshold`` as it is.

    Returns
    -------
    DetectionThreshold
    """
    _, ny, nx = header.shape
    filled = spectra.valid_fraction[spectra.valid_fraction > 0]
    n_filled = int(filled.size)
    finite_pixels = ny * nx * float(filled.mean()) if n_filled else 0.0
    fwhm = noise_fwhm(header, spectra.noise_fwhm_pixels)
    widening = float(np.sqrt(1 + np.pi / (2 * max(1, spectra.n_sample))))
    applied = float(threshold)
    if false_alarms is not None:
        applied = max(applied, widening * false_alarm_threshold(n_filled, finite_pixels, fwhm,
                                                                false_alarms=false_alarms / 2))
    resels = finite_pixels / (fwhm[0] * fwhm[1]) if fwhm is not None and min(fwhm) > 0 else finite_pixels
    return DetectionThreshold(
        asked=float(threshold), applied=applied, false_alarms=false_alarms,
        noise_peaks=2 * expected_noise_peaks(n_filled, finite_pixels, fwhm, applied / widening),
        noise_peaks_at_asked=2 * expected_noise_peaks(n_filled, finite_pixels, fwhm, threshold / widening),
        fwhm_pixels=fwhm, resolution_elements=float(min(resels, finite_pixels)), n_channels=n_filled,
        widening=widening,
    )
