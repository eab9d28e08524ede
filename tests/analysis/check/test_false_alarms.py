"""Tests of the false-alarm-controlled detection threshold (analysis/check/false_alarms.py; issue 8)."""


import numpy as np
import pytest

from cubeloupe.analysis.check import FALSE_ALARMS, false_alarm_threshold





def testexpected_noise_peaks_follows_gaussian_random_fields(rng):
    """The warning's count of pure-noise peaks against a simulation of beam-smoothed noise."""
    from scipy.ndimage import gaussian_filter

    from cubeloupe.analysis.check import expected_noise_peaks

    fwhm, n_planes, u_level = 4.0, 1500, 4.0
    sigma = fwhm / np.sqrt(8 * np.log(2))
    # white noise through a unit-sum Gaussian has variance 1 / (4 pi sigma^2) (common practice)
    planes = (gaussian_filter(rng.standard_normal((64, 64)), sigma, mode="wrap") * np.sqrt(4 * np.pi) * sigma
              for _ in range(n_planes))
    observed = sum(plane.max() >= u_level for plane in planes)
    expected = expected_noise_peaks(n_planes, 64 * 64, (fwhm, fwhm), u_level)
    # The Euler characteristic (Worsley et al. 1996) overestimates a little on a pixel grid
    # of 4 pixels per FWHM (peaks fall between pixels); one value per beam area would
    # underestimate about 6-fold.
    assert 0.55 * expected < observed < 1.1 * expected
    naive = n_planes * 64 * 64 / (np.pi / (4 * np.log(2)) * fwhm**2) * 3.167e-5  # P(X > 4) = 3.167e-5
    assert observed > 3 * naive


def test_false_alarm_threshold_of_independent_pixels_is_the_bonferroni_level():
    from scipy.stats import norm

    # n independent Gaussian values exceed t about n Q(t) times: Q(t) = alpha / n (Bonferroni, common practice)
    for n_channels, n_pixels in ((250, 32 * 32), (1000, 512 * 512)):
        expected = norm.isf(FALSE_ALARMS / (n_channels * n_pixels))
        assert false_alarm_threshold(n_channels, n_pixels) == pytest.approx(expected, abs=1e-5)
        # noise correlated over less than a pixel cannot have more peaks than pixels: the same level
        assert false_alarm_threshold(n_channels, n_pixels, (0.5, 0.5)) == pytest.approx(expected, abs=1e-5)


def test_false_alarm_threshold_rises_with_cube_size_and_falls_with_beam_size():
    from cubeloupe.analysis.check import expected_noise_peaks

    small = false_alarm_threshold(100, 64 * 64, (4.0, 4.0))
    big = false_alarm_threshold(1000, 512 * 512, (5.0, 4.0))
    assert 4.0 < small < big
    assert false_alarm_threshold(1000, 512 * 512, (10.0, 10.0)) < big < false_alarm_threshold(1000, 512 * 512)
    # the problem being solved: a plain 5 sigma on a 1 GB cube with a 5 x 4 pixel beam expects
    # dozens of noise detections; at the raised threshold the expected count is the one asked for
    assert expected_noise_peaks(1000, 512 * 512, (5.0, 4.0), 5.0) > 10
    assert expected_noise_peaks(1000, 512 * 512, (5.0, 4.0), big) == pytest.approx(FALSE_ALARMS, rel=1e-4)
    assert 5.5 < big < 6.5
