"""Tests for analysis/smoothing.py: kernels, rebinning, and the noise correlation they create."""

import astropy.units as u
import numpy as np
import pytest
from astropy.convolution import Box1DKernel, Gaussian1DKernel
from numpy.testing import assert_allclose
from scipy.ndimage import gaussian_filter1d

from cubeloupe.analysis import FitError, SpectralAxisError, measure_line
from cubeloupe.analysis.baseline import as_spectrum
from cubeloupe.analysis.smoothing import (
    channel_correlation,
    correlated_error,
    noise_correlation_factor,
    smooth_spectrum,
    smoothing_kernel,
    with_channel_correlation,
)

KMS = u.km / u.s


def white_spectrum(n, seed=0, rms=1.0):
    rng = np.random.default_rng(seed)
    return as_spectrum(rng.normal(0.0, rms, n) * u.Jy, spectral_axis=(230.0 + 1e-3 * np.arange(n)) * u.GHz)


def test_hanning_is_the_quarter_half_quarter_convolution():
    # Hanning smoothing = convolution with [1/4, 1/2, 1/4] (Blackman & Tukey 1958; common practice).
    spec = white_spectrum(200, seed=1)
    smoothed = smooth_spectrum(spec, "hanning", 3)
    expected = np.convolve(spec.value, [0.25, 0.5, 0.25], mode="valid")
    assert_allclose(smoothed.value[1:-1], expected, rtol=1e-12, atol=1e-12)
    assert smoothed.unit == u.Jy
    assert_allclose(smoothed.spectral_axis.to_value(u.GHz), spec.spectral_axis.to_value(u.GHz))


def test_hanning_rms_of_white_noise_falls_by_sqrt_three_eighths():
    # rms of Hanning-smoothed white noise = sqrt(3/8) of the input (sum of squared weights; common practice,
    # e.g. the ALMA Technical Handbook's spectral-resolution section).
    spec = white_spectrum(400_000, seed=2)
    smoothed = smooth_spectrum(spec, "hanning", 3)
    ratio = np.std(smoothed.value[1:-1]) / np.std(spec.value)
    assert ratio == pytest.approx(np.sqrt(3 / 8), rel=5e-3)
    assert smoothed.meta["noise_scale"] == pytest.approx(np.sqrt(3 / 8), rel=1e-12)


def test_hanning_lag_correlations_match_the_data():
    # Autocorrelation of the [1/4, 1/2, 1/4] kernel: 2/3 at lag 1, 1/6 at lag 2 (worked by hand from the weights).
    spec = white_spectrum(400_000, seed=3)
    smoothed = smooth_spectrum(spec, "hanning", 3).value[1:-1]
    rho = channel_correlation(smooth_spectrum(spec, "hanning", 3))
    assert_allclose(rho, [1.0, 2 / 3, 1 / 6], rtol=1e-12)
    measured = [np.corrcoef(smoothed[:-m], smoothed[m:])[0, 1] for m in (1, 2, 3)]
    assert_allclose(measured, [2 / 3, 1 / 6, 0.0], atol=6e-3)


def test_boxcar_and_gaussian_follow_astropy_and_scipy():
    spec = white_spectrum(300, seed=4)
    box = smooth_spectrum(spec, "boxcar", 5)
    # Reference library: astropy's Box1DKernel weights (5 equal weights of 1/5).
    assert_allclose(box.value[2:-2], np.convolve(spec.value, Box1DKernel(5).array, mode="valid"), atol=1e-12)
    gauss = smooth_spectrum(spec, "gaussian", 4.0)
    sigma = 4.0 / (2 * np.sqrt(2 * np.log(2)))  # FWHM = 2 sqrt(2 ln 2) sigma (common practice)
    # Reference library: scipy's sampled Gaussian filter (astropy integrates over each channel; agree to 1e-2 rms).
    reference = gaussian_filter1d(spec.value, sigma, truncate=8.0)
    half = Gaussian1DKernel(sigma).array.size // 2
    assert np.std(gauss.value[half:-half] - reference[half:-half]) < 1e-2 * np.std(reference)


def test_gaussian_fwhm_as_a_velocity_equals_the_same_width_in_channels():
    axis = (0.0 + 2.0 * np.arange(120)) * KMS
    values = np.random.default_rng(5).normal(size=120) * u.K
    spec = as_spectrum(values, spectral_axis=axis)
    assert_allclose(smooth_spectrum(spec, "gaussian", 10 * KMS).value, smooth_spectrum(spec, "gaussian", 5.0).value)


def test_rebin_averages_runs_and_centres_the_new_channels():
    spec = white_spectrum(103, seed=6)
    rebinned = smooth_spectrum(spec, "rebin", 4)
    assert rebinned.shape == (25,)
    assert_allclose(rebinned.value, spec.value[:100].reshape(25, 4).mean(axis=1), rtol=1e-12)
    # A linear axis: each new channel sits at the mean frequency of its run (definition of the bin centre).
    assert_allclose(rebinned.spectral_axis.to_value(u.GHz),
                    spec.spectral_axis.to_value(u.GHz)[:100].reshape(25, 4).mean(axis=1), rtol=0, atol=1e-9)
    assert rebinned.meta["noise_scale"] == pytest.approx(0.5)
    assert_allclose(channel_correlation(rebinned), [1.0])


def test_rebinning_a_hanning_spectrum_compounds_the_correlation():
    spec = white_spectrum(600_000, seed=7)
    result = smooth_spectrum(smooth_spectrum(spec, "hanning", 3), "rebin", 2)
    data = result.value[1:-1]
    rho = channel_correlation(result)
    # Worked by hand: Hanning autocovariance (3/8, 1/4, 1/16); means of pairs have variance
    # (2 * 3/8 + 2 * 1/4) / 4 = 5/16 and lag-1 covariance (1/4 + 2/16) / 4 = 3/32, so rho(1) = 3/10.
    assert rho[1] == pytest.approx(0.3, rel=1e-12)
    assert np.corrcoef(data[:-1], data[1:])[0, 1] == pytest.approx(0.3, abs=6e-3)
    assert np.std(data) / np.std(spec.value) == pytest.approx(result.meta["noise_scale"], rel=5e-3)


def test_noise_correlation_factor_matches_monte_carlo_sums():
    # var(sum of N correlated channels) = sigma^2 sum_m (N - |m|) rho(m) (Bevington & Robinson eq. 3.13).
    rng = np.random.default_rng(8)
    draws = rng.normal(size=(4000, 64))
    smoothed = np.apply_along_axis(lambda row: np.convolve(row, [0.25, 0.5, 0.25], mode="valid"), 1, draws)
    n = 20
    sums = smoothed[:, 10:10 + n].sum(axis=1)
    naive = np.std(smoothed[:, 10]) * np.sqrt(n)
    rho = [1.0, 2 / 3, 1 / 6]
    assert np.std(sums) / naive == pytest.approx(noise_correlation_factor(rho, n_channels=n), rel=0.04)
    weights = np.linspace(0.5, 1.5, n)
    assert np.std(smoothed[:, 10:10 + n] @ weights) == pytest.approx(
        correlated_error(weights, np.std(smoothed[:, 10]), rho), rel=0.04)
    assert noise_correlation_factor(rho) == pytest.approx(np.sqrt(8 / 3))


def test_measure_line_error_times_the_factor_covers_the_scatter():
    # The documented use: measure_line's flux_error on a smoothed spectrum times noise_correlation_factor.
    rng = np.random.default_rng(9)
    axis = np.arange(200) * 2.0 * KMS
    line = 1.0 * np.exp(-0.5 * ((axis.value - 200.0) / 12.0) ** 2)
    fluxes, corrected = [], []
    for _ in range(300):
        spec = as_spectrum((line + rng.normal(0, 0.3, 200)) * u.K, spectral_axis=axis)
        smooth = smooth_spectrum(spec, "hanning", 3)
        m = measure_line(smooth, (150, 250) * KMS)
        fluxes.append(m.flux.value)
        corrected.append(m.flux_error.value * noise_correlation_factor(smooth, n_channels=m.n_channels))
    assert np.std(fluxes) == pytest.approx(np.median(corrected), rel=0.12)


def test_declared_correlation_keeps_values():
    spec = white_spectrum(50, seed=10)
    declared = with_channel_correlation(spec, "hanning", 3)
    assert_allclose(declared.value, spec.value)
    assert_allclose(channel_correlation(declared), [1.0, 2 / 3, 1 / 6])
    twice = smooth_spectrum(declared, "hanning", 3)
    # Hanning applied twice = the 5-point kernel [1, 4, 6, 4, 1] / 16 (binomial; worked by hand).
    cov = np.correlate([1, 4, 6, 4, 1], [1, 4, 6, 4, 1], "full")[4:] / 256
    assert_allclose(channel_correlation(twice), cov / cov[0], rtol=1e-12)


@pytest.mark.parametrize("kernel, width, match", [
    ("triangle", 3, "unknown smoothing kernel 'triangle'"),
    ("hanning", 4, "odd number"),
    ("rebin", 1, "at least 2"),
    ("boxcar", 2.5, "whole number"),
    ("gaussian", -1.0, "positive"),
])
def test_bad_kernels_are_refused(kernel, width, match):
    with pytest.raises(FitError, match=match):
        smooth_spectrum(white_spectrum(20), kernel, width)


def test_rebin_larger_than_the_spectrum_is_refused():
    with pytest.raises(SpectralAxisError, match="cannot rebin 20 channels by 40"):
        smooth_spectrum(white_spectrum(20), "rebin", 40)


def test_kernel_weights_sum_to_one():
    for kind, width in (("hanning", 5), ("boxcar", 4), ("gaussian", 3.3)):
        assert smoothing_kernel(kind, width).sum() == pytest.approx(1.0)
