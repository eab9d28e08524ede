"""Errors of line measurements on smoothed spectra (analysis/correlated_lines.py).

The reference is the scatter of the measured numbers over many noise draws: an
error bar is right when it equals that scatter (the definition of a 1-sigma
error; linear propagation with covariance terms, Bevington & Robinson, *Data
Reduction and Error Analysis*, 3rd ed., eq. 3.13).
"""

import astropy.units as u
import numpy as np
import pytest

from cubeloupe.analysis import (
    correlated_line_errors, correlated_measurement_table, measure_line, measurement_table, noise_correlation_factor,
    smooth_spectrum, with_channel_correlation,
)

KMS = u.km / u.s
V = np.arange(-150.0, 150.0, 2.0)  # km/s, 150 channels
LINE = 0.5 * np.exp(-0.5 * (V / 12.0) ** 2)
WINDOW = (-40, 40) * KMS
FREE = [(-150, -60), (60, 150)] * KMS
SIGMA = 0.1


def _smoothed(rng):
    raw = (LINE + 0.01 + rng.normal(0, SIGMA, V.size)) * u.K
    return smooth_spectrum(raw, "hanning", 3, spectral_axis=V * KMS)


def test_flux_centroid_and_width_errors_match_the_scatter_over_noise_draws():
    # A 1-sigma error is the standard deviation of the measurement over noise draws (definition);
    # white noise Hanning-smoothed, then measured with a first-order baseline.
    rng = np.random.default_rng(7)
    fluxes, centroids, widths, honest, naive = [], [], [], [], []
    for _ in range(600):
        spec = _smoothed(rng)
        m = measure_line(spec, WINDOW, line_free=FREE, order=1)
        c = correlated_line_errors(m, spec)
        fluxes.append(m.flux.value)
        centroids.append(m.centroid.value)
        widths.append(m.fwhm.value)
        honest.append((c.flux_error.value, c.centroid_error.value, c.fwhm_error.value))
        naive.append(m.flux_error.value)
    predicted = np.median(honest, axis=0)
    scatter = np.std(fluxes), np.std(centroids), np.std(widths)
    # 600 draws: the scatter itself is known to 1/sqrt(2 * 600) = 3 %; allow 10 %.
    np.testing.assert_allclose(predicted, scatter, rtol=0.10)
    # The independent-channel error is clearly too small on a smoothed spectrum.
    assert np.median(naive) < 0.8 * scatter[0]


def test_wide_window_without_baseline_gives_the_hanning_factor():
    # Hanning [1/4, 1/2, 1/4]: a sum over N channels has its independent-channel error times
    # sqrt(sum_m (1 - |m|/N) rho(m)), -> sqrt(8/3) for wide sums (Blackman & Tukey 1958; ALMA Technical
    # Handbook, spectral resolution section).
    rng = np.random.default_rng(3)
    raw = rng.normal(0, SIGMA, V.size) * u.K
    spec = with_channel_correlation(raw, "hanning", 3, spectral_axis=V * KMS)
    m = measure_line(spec, WINDOW)
    c = correlated_line_errors(m, spec)
    expected = noise_correlation_factor([1.0, 2 / 3, 1 / 6], n_channels=m.n_channels)
    assert float(c.flux_error / m.flux_error) == pytest.approx(expected, rel=1e-9)
    assert expected == pytest.approx(np.sqrt(8 / 3), rel=0.02)
    assert c.flux == m.flux and c.snr == pytest.approx(float(m.flux / c.flux_error))


def test_spectrum_without_correlation_is_left_alone():
    raw = (LINE + np.random.default_rng(2).normal(0, SIGMA, V.size)) * u.K
    m = measure_line(raw, WINDOW, line_free=FREE, spectral_axis=V * KMS)
    assert correlated_line_errors(m, raw) is m


def test_table_rows_equal_the_single_measurement():
    rng = np.random.default_rng(5)
    smooth = _smoothed(rng)
    table = correlated_measurement_table({"a": [smooth]}, WINDOW, line_free=FREE, order=1)
    c = correlated_line_errors(measure_line(smooth, WINDOW, line_free=FREE, order=1), smooth)
    assert table["flux_error"][0] == c.flux_error
    assert table["centroid_error"][0] == c.centroid_error.to(table["centroid_error"].unit)
    assert table["fwhm_error"][0] == c.fwhm_error.to(table["fwhm_error"].unit)
    assert table["snr"][0] == pytest.approx(c.snr)
    assert table.meta["smoothing"] == {"a": ["hanning 3"]}


def test_table_of_unsmoothed_spectra_is_measurement_table():
    raw = smooth_spectrum((LINE + np.random.default_rng(4).normal(0, SIGMA, V.size)) * u.K, "boxcar", 1,
                          spectral_axis=V * KMS)  # a one-channel boxcar: identity, no correlation
    plain = {"a": [raw]}
    ours = correlated_measurement_table(plain, WINDOW, line_free=FREE)
    theirs = measurement_table(plain, WINDOW, line_free=FREE)
    for name in ("flux", "flux_error", "centroid_error", "fwhm_error", "snr"):
        assert np.array_equal(u.Quantity(ours[name]).value, u.Quantity(theirs[name]).value)
