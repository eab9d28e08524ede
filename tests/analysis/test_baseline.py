"""Polynomial baselines: known polynomials recovered within their errors, numpy agreement, refusals."""

import dataclasses

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose
from spectral_cube.lower_dimensional_structures import OneDSpectrum

from cubefactory import C_KMS
from cubeloupe.analysis import (
    BaselineFit,
    FitError,
    SpectralAxisError,
    SpectralRangeError,
    UnitMismatchError,
    fit_baseline,
)

REST = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue)


def frequency_spectrum(values, unit=u.Jy, n=None, f0=230.0, df=0.005):
    """A OneDSpectrum on an evenly spaced frequency axis (GHz)."""
    from cubeloupe.analysis.baseline import as_spectrum

    values = np.asarray(values, dtype=float)
    axis = (f0 + df * np.arange(values.size)) * u.GHz
    return as_spectrum(values * unit, spectral_axis=axis)


def free_channels(n):
    mask = np.ones(n, bool)
    mask[n // 3: 2 * n // 3] = False
    return mask


@pytest.mark.parametrize("order", [0, 1, 2, 3, 5])
def test_noiseless_polynomial_matches_numpy_polyfit(order):
    n = 120
    x = np.linspace(-1.0, 1.0, n)
    truth = np.polynomial.Polynomial([0.3, -0.2, 0.5, 0.1, -0.4, 0.2][: order + 1])(x)
    line = 2.0 * np.exp(-0.5 * (x / 0.05) ** 2)
    spec = frequency_spectrum(truth + line)
    free = free_channels(n)
    fit = fit_baseline(spec, free, order=order)
    # numpy's own least-squares polynomial on the same channels (reference library).
    axis = spec.spectral_axis.value
    reference = np.polynomial.Polynomial.fit(axis[free], (truth + line)[free], order)(axis)
    assert_allclose(fit.model.value, reference, atol=1e-9)
    assert_allclose(fit.model.value, truth, atol=1e-9)
    assert_allclose(fit.subtracted.value, line, atol=1e-9)
    assert fit.polynomial(axis[5]) == pytest.approx(truth[5], abs=1e-9)


@pytest.mark.slow
def test_known_baseline_under_noise_recovered_within_its_errors():
    rng = np.random.default_rng(7)
    n, sigma, trials = 200, 0.05, 600
    x = np.linspace(-1, 1, n)
    truth = 0.4 + 0.3 * x - 0.25 * x**2  # a known order-2 baseline
    free = free_channels(n)
    deviations, errors, variances = [], [], []
    for _ in range(trials):
        spec = frequency_spectrum(truth + rng.normal(0, sigma, n))
        fit = fit_baseline(spec, free, order=2)
        deviations.append(fit.model.value - truth)
        errors.append(fit.model_error.value)
        variances.append(fit.rms.value**2)
    deviations, errors = np.array(deviations), np.array(errors)
    # One realisation: within 5 sigma everywhere.
    assert np.all(np.abs(deviations[0]) < 5 * errors[0])
    # The reported model error is the scatter of the model over realisations (10%).
    assert_allclose(deviations.std(axis=0), errors.mean(axis=0), rtol=0.10)
    # About 68.3% of model values fall within 1 sigma (Gaussian errors).
    assert np.mean(np.abs(deviations) < errors) == pytest.approx(0.683, abs=0.04)
    # The rms with n_free - (order + 1) degrees of freedom estimates the variance without bias.
    assert np.mean(variances) == pytest.approx(sigma**2, rel=0.02)


@pytest.mark.slow
def test_coefficient_covariance_matches_scatter():
    rng = np.random.default_rng(11)
    n, sigma = 80, 0.2
    free = free_channels(n)
    x = np.arange(n)
    coefficients, covariances = [], []
    for _ in range(800):
        fit = fit_baseline(frequency_spectrum(1.0 + 0.01 * x + rng.normal(0, sigma, n)), free, order=1)
        coefficients.append(fit.coefficients.value)
        covariances.append(fit.covariance.value)
    assert_allclose(np.cov(np.array(coefficients).T), np.mean(covariances, axis=0), rtol=0.15, atol=1e-6)


def test_ranges_in_frequency_wavelength_and_velocity_select_the_same_channels():
    n = 100
    spec = frequency_spectrum(np.ones(n), f0=230.3, df=0.005)  # 230.3 to 230.795 GHz
    # Range edges fall between channels, so rounding in the conversions cannot move them.
    edges_ghz = np.array([[230.2975, 230.4025], [230.6975, 230.8025]])
    by_frequency = fit_baseline(spec, edges_ghz * u.GHz, order=1).line_free
    wavelengths = (edges_ghz * u.GHz).to(u.mm, u.spectral())
    by_wavelength = fit_baseline(spec, wavelengths, order=1).line_free
    # Radio velocities relative to REST / (1 + z) (Greisen et al. 2006, A&A 446, 747).
    z = 0.001
    f_ref = REST.to_value(u.GHz) / (1 + z)
    edges = C_KMS * (f_ref - edges_ghz) / f_ref
    by_velocity = fit_baseline(spec, edges * u.km / u.s, order=1, rest_frequency=REST, z=z).line_free
    assert by_frequency.sum() == 41
    assert np.array_equal(by_frequency, by_wavelength)
    assert np.array_equal(by_frequency, by_velocity)


def test_nan_channels_are_dropped_from_the_fit():
    n = 90
    x = np.linspace(0, 1, n)
    rng = np.random.default_rng(3)
    y = 1 + 2 * x + rng.normal(0, 0.1, n)
    y[[2, 3, 80]] = np.nan
    spec = frequency_spectrum(y)
    free = free_channels(n)
    fit = fit_baseline(spec, free, order=1)
    use = free & np.isfinite(y)
    axis = spec.spectral_axis.value
    reference = np.polynomial.Polynomial.fit(axis[use], y[use], 1)(axis)
    assert_allclose(fit.model.value, reference, atol=1e-9)
    assert fit.n_free == use.sum() and not fit.line_free[[2, 3, 80]].any()
    assert np.isnan(fit.subtracted.value[[2, 3, 80]]).all()


def test_plain_quantity_with_spectral_axis():
    v = np.linspace(-500, 500, 101) * u.km / u.s
    y = (0.1 + 1e-4 * v.value) * u.K
    fit = fit_baseline(y, [(-500, -200), (200, 500)] * u.km / u.s, order=1, spectral_axis=v)
    assert isinstance(fit.model, OneDSpectrum)
    assert fit.model.unit == u.K and fit.rms.unit == u.K
    assert_allclose(fit.subtracted.value, 0, atol=1e-12)
    assert_allclose(fit.model.spectral_axis.to_value(u.km / u.s), v.value)


def test_result_is_frozen_and_keeps_the_spectrum_axis():
    spec = frequency_spectrum(np.ones(30))
    fit = fit_baseline(spec, free_channels(30), order=0)
    assert isinstance(fit, BaselineFit)
    with pytest.raises(dataclasses.FrozenInstanceError):
        fit.order = 2
    assert_allclose(fit.subtracted.spectral_axis.value, spec.spectral_axis.value)


def test_no_spare_degrees_of_freedom_gives_nan_rms():
    mask = np.zeros(20, bool)
    mask[[0, 19]] = True
    fit = fit_baseline(frequency_spectrum(np.arange(20.0)), mask, order=1)
    assert np.isnan(fit.rms.value)


@pytest.mark.parametrize("order", [-1, 6, 1.5, True, "2"])
def test_order_out_of_range(order):
    with pytest.raises(FitError, match="order"):
        fit_baseline(frequency_spectrum(np.ones(30)), free_channels(30), order=order)


def test_too_few_line_free_channels():
    spec = frequency_spectrum(np.ones(100))  # 230.000 to 230.495 GHz in 5 MHz steps
    with pytest.raises(SpectralRangeError, match="at least 4 line-free channels"):
        fit_baseline(spec, [(230.0, 230.004), (230.493, 230.5)] * u.GHz, order=3)


def test_blanked_line_free_channels_count_against_order():
    y = np.ones(50)
    y[:8] = np.nan
    mask = np.zeros(50, bool)
    mask[:10] = True
    with pytest.raises(SpectralRangeError, match="blanked"):
        fit_baseline(frequency_spectrum(y), mask, order=2)


def test_range_outside_band():
    spec = frequency_spectrum(np.ones(100))
    with pytest.raises(SpectralRangeError, match="band spans"):
        fit_baseline(spec, [(231.0, 231.5)] * u.GHz, order=1)


def test_rest_frequency_with_wrong_unit():
    spec = frequency_spectrum(np.ones(100))
    with pytest.raises(UnitMismatchError, match="rest_frequency.*frequency"):
        fit_baseline(spec, [(-300, -100)] * u.km / u.s, rest_frequency=230.5 * u.km / u.s)
    with pytest.raises(UnitMismatchError, match="rest_frequency"):
        fit_baseline(spec, [(230.0, 230.1)] * u.GHz, rest_frequency=230.5)


def test_velocity_ranges_need_a_line():
    from cubeloupe.analysis.baseline import as_spectrum

    values = np.ones(40) * u.Jy
    spec = as_spectrum(values, spectral_axis=np.linspace(230, 231, 40) * u.GHz)  # no RESTFRQ
    with pytest.raises(SpectralAxisError, match="rest_frequency"):
        fit_baseline(spec, [(-300, -100)] * u.km / u.s)


def test_line_free_must_be_a_quantity_or_mask():
    spec = frequency_spectrum(np.ones(30))
    with pytest.raises(UnitMismatchError, match="Quantity"):
        fit_baseline(spec, [(230.0, 230.05)], order=0)
    with pytest.raises(SpectralRangeError, match="one entry per channel"):
        fit_baseline(spec, np.ones(29, bool), order=0)


def test_plain_quantity_needs_an_axis():
    with pytest.raises(SpectralAxisError, match="spectral_axis="):
        fit_baseline(np.ones(30) * u.Jy, [(230.0, 230.05)] * u.GHz)
    with pytest.raises(SpectralAxisError, match="evenly spaced"):
        fit_baseline(np.ones(3) * u.Jy, [(1, 2)] * u.GHz, spectral_axis=[1, 2, 4] * u.GHz)


def test_baseline_at_any_spectral_unit():
    axis = np.linspace(230.0, 231.0, 101) * u.GHz
    values = (0.2 + 0.1 * (axis.value - 230.5)) * u.Jy
    fit = fit_baseline(values, [(230.0, 230.3)] * u.GHz, order=1, spectral_axis=axis)
    # The straight line extrapolates exactly; wavelengths are converted with c / f.
    assert fit.baseline_at(230.7 * u.GHz).to_value(u.Jy) == pytest.approx(0.22)
    assert fit.baseline_at((230.7 * u.GHz).to(u.mm, u.spectral())).to_value(u.Jy) == pytest.approx(0.22)
    with pytest.raises(UnitMismatchError, match="cannot be compared"):
        fit.baseline_at(3 * u.km / u.s)
