"""Noise statistics: robust rms per channel, cube rms, peak spectrum, leftover continuum."""

import threading
import warnings

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from scipy.stats import median_abs_deviation

from cubefactory import file_digest, velocity_axis_kms
from cubeloupe.analysis import (
    CancelledComputation,
    SpectralRangeError,
    channel_noise,
    channel_statistics,
    cube_noise,
    leftover_continuum,
    open_cube,
    peak_spectrum,
)

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory)


def test_robust_rms_of_gaussian_noise_matches_its_std(cube_path, rng):
    # 1.4826 x MAD of Gaussian noise is its standard deviation (common practice): within 5 %.
    sigma = 0.7
    data = rng.normal(0, sigma, (40, 64, 64))
    cube = open_cube(cube_path(data))
    rms = channel_noise(cube)
    assert rms.unit == u.Jy / u.beam and rms.shape == (40,)
    assert_allclose(rms.value, np.std(data, axis=(1, 2)), rtol=0.05)
    assert cube_noise(cube).value == pytest.approx(sigma, rel=0.05)


def test_robust_rms_equals_scipy_mad_with_nans(cube_path, rng):
    # Reference: scipy.stats.median_abs_deviation(scale="normal", nan_policy="omit") per channel.
    data = rng.normal(0, 1, (12, 30, 40)) + rng.uniform(-1, 1, (12, 1, 1))
    data[rng.random(data.shape) < 0.1] = np.nan
    data[5] = np.nan
    cube = open_cube(cube_path(data))
    stats = channel_statistics(cube)
    stored = data.astype(np.float32).reshape(12, -1)
    expected = median_abs_deviation(stored, axis=1, scale="normal", nan_policy="omit")
    assert_allclose(stats.rms.value, expected, rtol=1e-5, equal_nan=True)
    assert_allclose(stats.median.value, np.nanmedian(stored, axis=1), rtol=1e-6, equal_nan=True)
    assert np.isnan(stats.rms[5]) and stats.blanked_fraction[5] == 1.0
    assert_allclose(stats.blanked_fraction, np.isnan(stored).mean(axis=1))


def test_robust_rms_ignores_a_bright_source(cube_path, rng):
    # A source filling 1 % of the pixels barely moves the MAD, unlike the standard deviation.
    data = rng.normal(0, 1, (6, 50, 50))
    data[:, 20:25, 20:25] += 50
    cube = open_cube(cube_path(data))
    rms = channel_noise(cube).value
    assert np.all(np.abs(rms - 1) < 0.05)
    assert np.all(np.std(data, axis=(1, 2)) > 4)


def test_subsampled_mad_stays_within_its_stated_precision(cube_path, rng):
    # With max_pixels = n the relative error is about 1.17 / sqrt(n) (MAD efficiency 37 %; Rousseeuw &
    # Croux 1993): for n = 1000 that is 3.7 %; allow 4 standard errors.
    data = rng.normal(0, 2.0, (8, 100, 100))
    cube = open_cube(cube_path(data))
    stats = channel_statistics(cube, max_pixels=1000)
    assert np.all(stats.n_sampled <= 1000) and np.all(stats.n_sampled >= 900)
    assert_allclose(stats.rms.value, 2.0, rtol=4 * 1.17 / np.sqrt(1000))


def test_peak_spectrum_equals_spectral_cube_max(cube_path, rng):
    data = rng.normal(0, 1, (15, 20, 30))
    data[rng.random(data.shape) < 0.05] = np.nan
    data[7, 4, 9] = 40.0
    cube = open_cube(cube_path(data))
    peaks = peak_spectrum(cube)
    with pytest.warns(Warning):  # spectral-cube warns that max loads the whole cube
        reference = cube.max(axis=(1, 2))
    assert_allclose(peaks.values.value, reference.value)
    assert peaks.values.unit == cube.unit
    assert tuple(peaks.positions[7]) == (4, 9)
    stored = data.astype(np.float32)
    for channel in range(15):
        y, x = peaks.positions[channel]
        assert stored[channel, y, x] == np.nanmax(stored[channel])
    spectrum = peaks.to_spectrum()
    assert_allclose(spectrum.spectral_axis.value, cube.spectral_axis.value)


def test_statistics_are_read_once_per_cube(cube_path, rng):
    cube = open_cube(cube_path(rng.normal(0, 1, (5, 10, 10))))
    first = channel_statistics(cube)
    assert channel_statistics(cube) is first
    assert channel_statistics(cube.with_mask(np.ones(cube.shape, bool))) is not first


def test_leftover_continuum_and_its_significance(cube_path, rng):
    nchan, ny, nx, noise = 200, 40, 40, 0.5
    velocity = velocity_axis_kms(nchan, crpix3=100.5)
    data = rng.normal(0, noise, (nchan, ny, nx))
    data[:, 10:15, 10:15] += 0.4  # leftover continuum: 0.4 / (0.5 / sqrt(n_free)) >> 5 sigma
    data[(velocity > -30) & (velocity < 30)] += 5.0  # a line, excluded from the line-free ranges
    cube = open_cube(cube_path(data, crpix3=100.5))
    leftover = leftover_continuum(cube, [(-130, -40), (40, 130)] * KMS, rest_frequency=CO21)
    free = ((velocity >= -130) & (velocity <= -40)) | ((velocity >= 40) & (velocity <= 130))
    assert leftover.n_channels == free.sum()
    stored = data.astype(np.float32)
    assert_allclose(leftover.mean.value, stored[free].mean(axis=0), rtol=1e-5, atol=1e-7)
    expected_error = stored[free].std(axis=0, ddof=1) / np.sqrt(free.sum())  # standard error of a mean
    assert_allclose(leftover.error.value, expected_error, rtol=1e-5)
    assert leftover.mean.unit == cube.unit and leftover.significance.unit == u.dimensionless_unscaled
    assert np.all(leftover.significance.value[10:15, 10:15] > 5)
    empty = np.ones((ny, nx), bool)
    empty[10:15, 10:15] = False
    # where nothing is left, the significance is standard normal: unit scatter within 10 %
    assert np.std(leftover.significance.value[empty]) == pytest.approx(1.0, rel=0.10)
    by_mask = leftover_continuum(cube, free)
    assert_array_equal(by_mask.mean.value, leftover.mean.value)


def test_leftover_continuum_bad_ranges(cube_path, rng):
    cube = open_cube(cube_path(rng.normal(0, 1, (20, 4, 4))))
    with pytest.raises(SpectralRangeError):
        leftover_continuum(cube, np.zeros(20, bool))
    with pytest.raises(SpectralRangeError, match="selects no channel"):
        leftover_continuum(cube, [(1, 2)] * u.GHz)


def test_all_blank_cube_has_no_noise(cube_path):
    cube = open_cube(cube_path(np.full((4, 5, 5), np.nan)))
    with pytest.raises(SpectralRangeError, match="blank"):
        cube_noise(cube)


def test_cancel_and_input_unchanged(cube_path, rng):
    path = cube_path(rng.normal(0, 1, (30, 20, 20)))
    before = file_digest(path)
    stop = threading.Event()
    stop.set()
    with pytest.raises(CancelledComputation):
        channel_statistics(open_cube(path), cancel=stop)
    channel_statistics(open_cube(path))
    leftover_continuum(open_cube(path))
    assert file_digest(path) == before


@pytest.mark.parametrize("max_pixels", [1000, 1001, 5000])
def test_subsampled_median_and_mad_are_those_of_the_evenly_spaced_subset(cube_path, rng, max_pixels):
    # Reference: numpy's median and scipy's MAD over every step-th valid pixel (the documented
    # subset), for channels without blanks (odd and even subset sizes) and with blanks.
    data = rng.normal(0, 1.5, (6, 70, 90)) + rng.uniform(-2, 2, (6, 1, 1))
    data[2][rng.random((70, 90)) < 0.3] = np.nan
    data[4, :10] = np.nan
    stats = channel_statistics(open_cube(cube_path(data)), max_pixels=max_pixels)
    stored = data.astype(np.float32).reshape(6, -1)
    for channel, row in enumerate(stored):
        valid = row[np.isfinite(row)]
        subset = valid[::-(-valid.size // max_pixels)]
        assert stats.n_sampled[channel] == subset.size
        assert stats.median.value[channel] == pytest.approx(np.median(subset), rel=1e-6)
        assert stats.rms.value[channel] == pytest.approx(median_abs_deviation(subset, scale="normal"), rel=1e-6)
        assert stats.peak.value[channel] == np.max(valid)


def test_leftover_continuum_keeps_its_precision_under_bright_continuum(cube_path, rng):
    # Continuum 1000 times the noise: float32 sums about each pixel's own level keep the standard
    # error to 1e-5 of a float64 two-pass reference (numpy mean and std with ddof=1).
    data = rng.normal(0, 1e-3, (300, 12, 14)) + 1.0
    data[:, 3, 4] = np.nan
    data[7:20, 5, 6] = np.nan
    leftover = leftover_continuum(open_cube(cube_path(data)))
    stored = data.astype(np.float32).astype(np.float64)
    mean = np.nanmean(stored, axis=0)
    count = np.isfinite(stored).sum(axis=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # the all-blank pixel
        error = np.nanstd(stored, axis=0, ddof=1) / np.sqrt(count)
    assert_allclose(leftover.mean.value, mean, rtol=1e-7, equal_nan=True)
    assert_allclose(leftover.error.value, error, rtol=1e-5, equal_nan=True)
    assert np.isnan(leftover.mean.value[3, 4])
