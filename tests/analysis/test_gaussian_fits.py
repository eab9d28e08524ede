"""Tests for analysis/gaussian_fits.py: Gaussian components, their errors, and hyperfine fits."""

import astropy.units as u
import numpy as np
import pytest
from astropy import constants
from astropy.table import QTable, Table
from numpy.testing import assert_allclose
from scipy.optimize import curve_fit

from cubeloupe.analysis import CatalogError, FitError, load_catalog, measure_line
from cubeloupe.analysis.baseline import as_spectrum
from cubeloupe.analysis.gaussian_fits import fit_gaussians
from cubeloupe.analysis.hyperfine import hyperfine_lines
from cubeloupe.analysis.smoothing import smooth_spectrum

KMS = u.km / u.s
FOUR_LN2 = 4 * np.log(2)

# N2H+ J=1-0 hyperfine components (F1 F -> F1' F'): rest frequencies in GHz from the Lovas compilation of
# laboratory/astronomical frequencies (Caselli et al. 1995, ApJ 455, L77 measured the same set; the isolated
# component's frequency from memory) and the statistical relative intensities 1:5:3:5:7:3:3 / 27
# (Caselli et al. 1995, Table 1; from memory).
N2HP_10 = QTable({
    "rest_frequency": [93.171619, 93.171947, 93.172098, 93.173505, 93.173809, 93.174016, 93.176265] * u.GHz,
    "relative_intensity": np.array([1, 5, 3, 5, 7, 3, 3]) / 27,
})


def gaussian(x, amplitude, center, fwhm):
    return amplitude * np.exp(-FOUR_LN2 * (x - center) ** 2 / fwhm**2)


def two_gaussians(x, a1, c1, w1, a2, c2, w2):
    return gaussian(x, a1, c1, w1) + gaussian(x, a2, c2, w2)


def noisy_line(rng, *, rms=0.1, truth=(1.0, 10.0, 30.0), extra=None, n=301, step=2.0):
    v = (-300.0 + step * np.arange(n))
    y = gaussian(v, *truth) + (gaussian(v, *extra) if extra else 0.0) + rng.normal(0.0, rms, n)
    return as_spectrum(y * u.K, spectral_axis=v * KMS), v, y


LINE_FREE = [(-300, -101), (101, 300)] * KMS
WINDOW = (-100, 100) * KMS


def test_single_gaussian_agrees_with_curve_fit_parameters_and_errors():
    rng = np.random.default_rng(11)
    spec, v, y = noisy_line(rng)
    fit = fit_gaussians(spec, window=WINDOW, line_free=LINE_FREE, order=0)
    rms = fit.rms.to_value(u.K)
    inside = (v >= -100) & (v <= 100)
    y_sub = y - fit.baseline.model.value
    # Reference library: scipy.optimize.curve_fit with sigma = the line-free rms, absolute_sigma=True.
    params, cov = curve_fit(gaussian, v[inside], y_sub[inside], p0=[1, 0, 20], sigma=np.full(inside.sum(), rms),
                            absolute_sigma=True)
    comp = fit.components[0]
    assert_allclose([comp.amplitude.to_value(u.K), comp.center.to_value(KMS), comp.fwhm.to_value(KMS)], params,
                    rtol=1e-5)
    assert_allclose([comp.amplitude_error.to_value(u.K), comp.center_error.to_value(KMS),
                     comp.fwhm_error.to_value(KMS)], np.sqrt(np.diag(cov)), rtol=1e-4)
    # Integral of a Gaussian = A W sqrt(pi / (4 ln 2)) (common practice).
    assert comp.flux.to_value(u.K * KMS) == pytest.approx(params[0] * params[2] * np.sqrt(np.pi / FOUR_LN2),
                                                          rel=1e-5)
    assert fit.rms_from == "line-free"
    assert np.isnan(fit.residuals.value[~inside]).all()
    assert_allclose(fit.residuals.value[inside], y_sub[inside] - gaussian(v[inside], *params), atol=1e-5)


def test_flux_agrees_with_the_channel_sum_of_measure_line():
    rng = np.random.default_rng(12)
    spec, _, _ = noisy_line(rng, rms=0.02)
    fit = fit_gaussians(spec, window=WINDOW, line_free=LINE_FREE, order=0)
    line = measure_line(spec, WINDOW, line_free=LINE_FREE, order=0)
    comp = fit.components[0]
    assert comp.flux.to_value(u.K * KMS) == pytest.approx(line.flux.to_value(u.K * KMS), abs=3 * line.flux_error.value)
    # Knowing the profile's shape, the fit's flux is more precise than a channel sum over the window.
    assert comp.flux_error.value < line.flux_error.value


def test_two_components_agree_with_curve_fit():
    rng = np.random.default_rng(13)
    spec, v, y = noisy_line(rng, truth=(1.0, -30.0, 25.0), extra=(0.6, 40.0, 20.0))
    fit = fit_gaussians(spec, n_components=2, window=WINDOW, line_free=LINE_FREE, order=0)
    inside = (v >= -100) & (v <= 100)
    y_sub = y - fit.baseline.model.value
    rms = fit.rms.to_value(u.K)
    params, cov = curve_fit(two_gaussians, v[inside], y_sub[inside], p0=[1, -30, 20, 0.5, 40, 20],
                            sigma=np.full(inside.sum(), rms), absolute_sigma=True)
    got = np.concatenate([[c.amplitude.value, c.center.value, c.fwhm.value] for c in fit.components])
    errors = np.concatenate([[c.amplitude_error.value, c.center_error.value, c.fwhm_error.value]
                             for c in fit.components])
    assert_allclose(got, params, rtol=1e-4)
    assert_allclose(errors, np.sqrt(np.diag(cov)), rtol=1e-3)


@pytest.mark.parametrize("smoothing", [None, "hanning"])
def test_error_bars_cover_the_truth_at_the_one_sigma_rate(smoothing):
    # A 1-sigma interval of a Gaussian error holds the truth 68.3% of the time (common practice); with 400
    # draws the binomial spread is 2.3%, so 0.60-0.77 is a > 3-sigma band. With Hanning smoothing the errors
    # must include the channel correlation to keep this rate.
    rng = np.random.default_rng(14 if smoothing is None else 15)
    truth = (0.5, 10.0, 30.0)
    hits = np.zeros(4)
    n_draws = 400
    for _ in range(n_draws):
        spec, _, _ = noisy_line(rng, truth=truth, rms=0.1)
        if smoothing:
            spec = smooth_spectrum(spec, smoothing, 3)
        c = fit_gaussians(spec, window=WINDOW, line_free=LINE_FREE, order=0).components[0]
        true_flux = truth[0] * truth[2] * np.sqrt(np.pi / FOUR_LN2)
        hits += [abs(c.amplitude.value - truth[0]) < c.amplitude_error.value,
                 abs(c.center.value - truth[1]) < c.center_error.value,
                 abs(c.fwhm.value - truth[2]) < c.fwhm_error.value,
                 abs(c.flux.value - true_flux) < c.flux_error.value]
    rates = hits / n_draws
    assert np.all((rates > 0.60) & (rates < 0.77)), rates


def test_frequency_axis_without_rest_frequency_fits_in_ghz():
    rng = np.random.default_rng(16)
    f = 230.0 + 0.001 * np.arange(200)
    y = gaussian(f, 2.0, 230.1, 0.02) + rng.normal(0, 0.05, f.size)
    fit = fit_gaussians(y * u.Jy, spectral_axis=f * u.GHz)
    comp = fit.components[0]
    assert comp.center.unit == u.GHz and comp.flux.unit == u.Jy * u.GHz
    assert comp.center.value == pytest.approx(230.1, abs=4 * comp.center_error.value)
    assert fit.rms_from == "residuals"
    # With a rest frequency the same spectrum is fitted in km/s (radio convention, Greisen et al. 2006).
    in_kms = fit_gaussians(y * u.Jy, spectral_axis=f * u.GHz, rest_frequency=230.1 * u.GHz)
    assert in_kms.components[0].center.unit == KMS
    assert abs(in_kms.components[0].center.value) < 4 * in_kms.components[0].center_error.value


def test_absorption_line_keeps_its_sign():
    rng = np.random.default_rng(17)
    spec, _, _ = noisy_line(rng, truth=(-0.8, -5.0, 20.0))
    comp = fit_gaussians(spec, window=WINDOW, line_free=LINE_FREE, order=1).components[0]
    assert comp.amplitude.value == pytest.approx(-0.8, abs=4 * comp.amplitude_error.value)
    assert comp.flux.value < 0


def planck_temperature(t, nu):
    # J(T) = (h nu / k) / (exp(h nu / k T) - 1) (Mangum & Shirley 2015, PASP 127, 266, eq. 27).
    t0 = (constants.h * nu / constants.k_B).to_value(u.K)
    return t0 / np.expm1(t0 / t)


def test_hyperfine_fit_recovers_optical_depth_velocity_and_excitation_temperature():
    # Synthetic N2H+ 1-0 group: T = (J(Tex) - J(Tbg)) (1 - exp(-tau(v))), tau(v) = tau sum r_i g_i(v)
    # (Caselli et al. 1995; Mangum & Shirley 2015, eqs. 27-31), Tbg = 2.725 K (Fixsen 2009).
    rng = np.random.default_rng(18)
    tau, v0, fwhm, tex = 3.0, 5.3, 0.6, 8.0
    reference = 93.173809 * u.GHz  # the strongest component, F1 F = 2 3 -> 1 2
    v = np.arange(-15.0, 25.0, 0.05)
    offsets = (constants.c * (1 - N2HP_10["rest_frequency"].to_value(u.GHz) / reference.value)).to_value(KMS)
    tau_v = tau * np.sum(N2HP_10["relative_intensity"][None, :]
                         * np.exp(-FOUR_LN2 * (v[:, None] - v0 - offsets[None, :]) ** 2 / fwhm**2), axis=1)
    scale = planck_temperature(tex, reference) - planck_temperature(2.72548, reference)
    noise = 0.05
    # A frequency axis, radio convention (Greisen et al. 2006): f = f0 (1 - v / c); falling with velocity.
    frequency = reference.to_value(u.Hz) * (1 - v / constants.c.to_value(KMS))
    spec = as_spectrum((scale * -np.expm1(-tau_v) + rng.normal(0, noise, v.size))[::-1] * u.K,
                       spectral_axis=frequency[::-1] * u.Hz)
    fit = fit_gaussians(spec, hyperfine=N2HP_10, rest_frequency=reference, line_free=[(-15, -10), (20, 25)] * KMS,
                        window=(-10, 20) * KMS, order=0)
    h = fit.hyperfine
    assert h.optical_depth == pytest.approx(tau, abs=max(3 * h.optical_depth_error, 0.05 * tau))
    assert h.optical_depth_error < 0.3 * tau
    assert h.center.to_value(KMS) == pytest.approx(v0, abs=3 * h.center_error.to_value(KMS))
    assert h.fwhm.to_value(KMS) == pytest.approx(fwhm, abs=3 * h.fwhm_error.to_value(KMS))
    assert h.excitation_temperature.to_value(u.K) == pytest.approx(
        tex, abs=3 * h.excitation_temperature_error.to_value(u.K))
    assert fit.optical_depth == h.optical_depth
    assert 0.7 < fit.reduced_chi2 < 1.3


def test_hyperfine_fit_on_an_optically_thin_group_has_a_large_relative_tau_error():
    # At small tau only A * tau is constrained (1 - exp(-x) ~ x; common practice).
    rng = np.random.default_rng(19)
    reference = 93.173809 * u.GHz
    v = np.arange(-15.0, 25.0, 0.05)
    offsets = (constants.c * (1 - N2HP_10["rest_frequency"].to_value(u.GHz) / reference.value)).to_value(KMS)
    profile = np.sum(N2HP_10["relative_intensity"][None, :]
                     * np.exp(-FOUR_LN2 * (v[:, None] - 2.0 - offsets[None, :]) ** 2 / 0.8**2), axis=1)
    y = 5.0 * -np.expm1(-0.05 * profile) + rng.normal(0, 0.01, v.size)
    # A velocity axis without a rest frequency of its own: window and line-free ranges in its own velocities.
    fit = fit_gaussians(y * u.K, spectral_axis=v * KMS, hyperfine=N2HP_10, rest_frequency=reference,
                        window=(-10, 15) * KMS, line_free=[(-15, -10.5), (15.5, 25)] * KMS, order=0)
    assert fit.hyperfine.optical_depth_error > 0.3 * fit.hyperfine.optical_depth
    assert fit.hyperfine.center.to_value(KMS) == pytest.approx(2.0, abs=0.05)


@pytest.mark.parametrize("kwargs, match", [
    (dict(n_components=0), "from 1 to 6"),
    (dict(n_components=7), "from 1 to 6"),
    (dict(n_components=2, hyperfine=N2HP_10), "one velocity component"),
    (dict(window=(-3, 3) * KMS, n_components=2), "valid channels in the window"),
    (dict(guesses=[(1 * u.K, 0 * KMS, 10 * KMS)], n_components=2), "guesses has 1 entries"),
])
def test_bad_requests_are_refused(kwargs, match):
    spec, _, _ = noisy_line(np.random.default_rng(20))
    with pytest.raises(FitError, match=match):
        fit_gaussians(spec, **kwargs)


def test_given_guesses_are_used():
    rng = np.random.default_rng(21)
    spec, _, _ = noisy_line(rng, truth=(1.0, -30.0, 25.0), extra=(0.6, 40.0, 20.0))
    fit = fit_gaussians(spec, n_components=2, window=WINDOW, line_free=LINE_FREE, order=0,
                        guesses=[(1 * u.K, -20 * KMS, 20 * KMS), (0.5 * u.K, 30 * KMS, 20 * KMS)])
    assert [round(c.center.value / 10) for c in fit.components] == [-3, 4]


def test_hyperfine_fit_by_catalog_group_name():
    if "hyperfine_group" not in load_catalog().colnames:
        pytest.skip("the bundled catalog has no hyperfine groups yet")
    lines = hyperfine_lines("N2H+ J=1-0")
    reference = lines["rest_frequency"][int(np.argmax(lines["relative_intensity"]))]
    rng = np.random.default_rng(22)
    v = np.arange(-15.0, 25.0, 0.05)
    offsets = (constants.c * (1 - (lines["rest_frequency"] / reference).to_value(u.one))).to_value(KMS)
    # Same radiative transfer as above (Mangum & Shirley 2015, eqs. 27-31), with the catalog's own components.
    tau_v = 2.0 * np.sum(lines["relative_intensity"][None, :]
                         * np.exp(-FOUR_LN2 * (v[:, None] - 1.5 - offsets[None, :]) ** 2 / 0.5**2), axis=1)
    y = 4.0 * -np.expm1(-tau_v) + rng.normal(0, 0.05, v.size)
    fit = fit_gaussians(y * u.K, spectral_axis=v * KMS, hyperfine="N2H+ J=1-0")
    h = fit.hyperfine
    assert h.group == "N2H+ J=1-0"
    assert h.optical_depth == pytest.approx(2.0, abs=3 * h.optical_depth_error)
    assert h.center.to_value(KMS) == pytest.approx(1.5, abs=3 * h.center_error.to_value(KMS))
    assert_allclose(h.reference_frequency.to_value(u.GHz), reference.to_value(u.GHz))
