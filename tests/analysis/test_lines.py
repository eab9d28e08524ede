"""Line measurements: analytic Gaussians, honest errors over noise realisations, conventions, refusals."""

import dataclasses
import warnings

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord

from cubefactory import C_KMS, gaussian_profile, velocity_axis_kms
from cubeloupe.analysis import (
    BlankedDataWarning,
    FitError,
    LineFreeOverlapWarning,
    LineMeasurement,
    PolarisationError,
    PolarisationWarning,
    RedshiftError,
    SpectralAxisError,
    SpectralRangeError,
    UndefinedErrorWarning,
    UnitMismatchError,
    WindowClippedWarning,
    measure_line,
    open_cube,
    region_spectrum,
)
from cubeloupe.analysis.baseline import as_spectrum

KMS = u.km / u.s
REST = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue)
FWHM_PER_SIGMA = 2 * np.sqrt(2 * np.log(2))  # Gaussian FWHM = 2 sqrt(2 ln 2) sigma (analytic)
LINE_FREE = [(-1000, -500), (500, 1000)] * KMS
WINDOW = (-300, 360) * KMS


def velocity_spectrum(values, unit=u.Jy, step=5.0):
    v = np.arange(-1000, 1000 + step / 2, step)
    return as_spectrum(np.asarray(values(v) if callable(values) else values) * unit, spectral_axis=v * KMS)


def test_noiseless_gaussian_against_analytic_values():
    amplitude, v0, sigma = 0.8, 35.0, 40.0
    spec = velocity_spectrum(lambda v: gaussian_profile(v, amplitude, v0, sigma))
    line = measure_line(spec, WINDOW)
    assert isinstance(line, LineMeasurement)
    # Integral of a Gaussian: A sigma sqrt(2 pi) (analytic).
    assert line.flux.unit == u.Jy * KMS
    assert_allclose(line.flux.to_value(u.Jy * KMS), amplitude * sigma * np.sqrt(2 * np.pi), rtol=1e-6)
    assert_allclose(line.centroid.to_value(KMS), v0, atol=1e-6)
    assert line.gaussian_ok
    assert_allclose(line.fwhm.to_value(KMS), FWHM_PER_SIGMA * sigma, rtol=1e-6)
    assert_allclose(line.gaussian_sigma.to_value(KMS), sigma, rtol=1e-6)
    assert_allclose(line.peak.to_value(u.Jy), amplitude)
    assert line.n_channels == 133
    assert_allclose(line.channel_width.to_value(KMS), 5.0)


def test_baseline_is_removed_before_measuring():
    amplitude, v0, sigma = 0.8, 35.0, 40.0
    spec = velocity_spectrum(lambda v: gaussian_profile(v, amplitude, v0, sigma) + 0.3 - 2e-4 * v)
    line = measure_line(spec, WINDOW, line_free=LINE_FREE, order=1)
    assert_allclose(line.flux.to_value(u.Jy * KMS), amplitude * sigma * np.sqrt(2 * np.pi), rtol=1e-6)
    assert_allclose(line.centroid.to_value(KMS), v0, atol=1e-5)
    assert_allclose(line.fwhm.to_value(KMS), FWHM_PER_SIGMA * sigma, rtol=1e-6)
    assert line.baseline is not None and line.baseline.order == 1


def test_flux_error_without_baseline_is_rms_dv_sqrt_n():
    # Alternating +/-0.1 outside the window: rms exactly 0.1; the error of a sum
    # of N channels of width dv is rms dv sqrt(N) (common practice).
    v = np.arange(-100, 100.5, 2.0)
    y = np.where(np.arange(v.size) % 2, 0.1, -0.1)
    window = (-20.5, 20.5) * KMS  # channels -20..20: N = 21
    y[np.abs(v) <= 20.5] = 1.0
    line = measure_line(y * u.K, window, spectral_axis=v * KMS)
    assert line.flux.unit == u.K * KMS
    assert_allclose(line.rms.to_value(u.K), 0.1)
    assert_allclose(line.flux_error.to_value(u.K * KMS), 0.1 * 2.0 * np.sqrt(21))
    assert_allclose(line.snr, line.flux.value / line.flux_error.value)


@pytest.mark.slow
@pytest.mark.parametrize("line_free, order", [(LINE_FREE, 1), (None, 0)])
def test_flux_error_matches_scatter_over_noise_realisations(line_free, order):
    rng = np.random.default_rng(2024)
    amplitude, v0, sigma, noise = 0.5, 20.0, 60.0, 0.05
    template = velocity_spectrum(lambda v: gaussian_profile(v, amplitude, v0, sigma) + (0.1 if line_free is not None else 0))
    truth = template.value.copy()
    fluxes, errors, centroids, centroid_errors = [], [], [], []
    for _ in range(2000):
        spec = template._new_spectrum_with(data=truth + rng.normal(0, noise, truth.size), unit=u.Jy)
        line = measure_line(spec, WINDOW, line_free=line_free, order=order)
        fluxes.append(line.flux.value)
        errors.append(line.flux_error.value)
        centroids.append(line.centroid.value)
        centroid_errors.append(line.centroid_error.value)
    # The reported 1-sigma flux error equals the scatter of the measured flux (within 10%).
    assert np.std(fluxes) == pytest.approx(np.mean(errors), rel=0.10)
    assert np.std(centroids) == pytest.approx(np.mean(centroid_errors), rel=0.10)
    # And the flux is unbiased: mean within 3 standard errors of A sigma sqrt(2 pi).
    expected = amplitude * sigma * np.sqrt(2 * np.pi)
    assert abs(np.mean(fluxes) - expected) < 3 * np.std(fluxes) / np.sqrt(len(fluxes))


@pytest.mark.slow
def test_fwhm_error_matches_scatter():
    rng = np.random.default_rng(99)
    template = velocity_spectrum(lambda v: gaussian_profile(v, 1.0, 0.0, 50.0))
    truth = template.value.copy()
    widths, width_errors = [], []
    for _ in range(600):
        spec = template._new_spectrum_with(data=truth + rng.normal(0, 0.05, truth.size), unit=u.Jy)
        line = measure_line(spec, WINDOW, line_free=LINE_FREE, order=1)
        widths.append(line.fwhm.value)
        width_errors.append(line.fwhm_error.value)
    assert np.mean(widths) == pytest.approx(FWHM_PER_SIGMA * 50.0, rel=0.01)
    assert np.std(widths) == pytest.approx(np.mean(width_errors), rel=0.15)


def test_redshifted_line_velocities_are_rest_frame_offsets():
    z, v0, sigma = 0.5, 50.0, 60.0
    f_ref = REST.to_value(u.GHz) / (1 + z)
    freq = f_ref + np.linspace(-0.5, 0.5, 801)  # GHz
    v_radio = C_KMS * (f_ref - freq) / f_ref  # radio convention (Greisen et al. 2006, A&A 446, 747)
    spec = as_spectrum(gaussian_profile(v_radio, 2.0, v0, sigma) * u.mJy, spectral_axis=freq * u.GHz)
    line = measure_line(spec, (-300, 400) * KMS, rest_frequency=REST, z=z)
    assert line.flux.unit == u.mJy * KMS
    assert_allclose(line.flux.value, 2.0 * sigma * np.sqrt(2 * np.pi), rtol=1e-5)
    assert_allclose(line.centroid.to_value(KMS), v0, atol=1e-3)
    assert_allclose(line.fwhm.to_value(KMS), FWHM_PER_SIGMA * sigma, rtol=1e-5)


def test_optical_convention_uses_its_own_channel_widths():
    # A line that is Gaussian in optical velocity, far from the reference
    # frequency, on an axis linear in frequency: optical channels are not equal.
    v0, sigma = 3000.0, 300.0
    freq = np.linspace(225.0, 229.5, 1500) * u.GHz
    v_optical = freq.to_value(KMS, equivalencies=u.doppler_optical(REST))  # astropy's optical convention
    spec = as_spectrum(gaussian_profile(v_optical, 1.0, v0, sigma) * u.Jy, spectral_axis=freq)
    window = (v0 - 8 * sigma, v0 + 8 * sigma) * KMS
    with pytest.warns(WindowClippedWarning, match="only its part inside the band"):  # the window is wider than the band
        optical = measure_line(spec, window, rest_frequency=REST, convention="optical")
    assert_allclose(optical.flux.to_value(u.Jy * KMS), sigma * np.sqrt(2 * np.pi), rtol=1e-4)
    assert_allclose(optical.centroid.to_value(KMS), v0, atol=0.5)
    # In radio velocities the same channels are narrower by (f/f0)^2 ~ (1 + v/c)^-2.
    v_radio = freq.to_value(KMS, equivalencies=u.doppler_radio(REST))
    radio_window = (v_radio[np.argmin(np.abs(v_optical - window[1].value))],
                    v_radio[np.argmin(np.abs(v_optical - window[0].value))]) * KMS
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", WindowClippedWarning)
        radio = measure_line(spec, radio_window, rest_frequency=REST, convention="radio")
    assert radio.flux.value / optical.flux.value == pytest.approx((1 + v0 / C_KMS) ** -2, rel=2e-3)


def test_absorption_line_has_negative_flux_and_minimum_peak():
    spec = velocity_spectrum(lambda v: 1.0 - gaussian_profile(v, 0.6, -40.0, 30.0))
    line = measure_line(spec, (-200, 120) * KMS, line_free=LINE_FREE, order=0)
    assert_allclose(line.flux.value, -0.6 * 30.0 * np.sqrt(2 * np.pi), rtol=1e-6)
    assert_allclose(line.peak.value, -0.6, rtol=1e-9)
    assert_allclose(line.fwhm.value, FWHM_PER_SIGMA * 30.0, rtol=1e-6)


def test_window_channels_never_enter_the_baseline():
    spec = velocity_spectrum(lambda v: gaussian_profile(v, 1.0, 0.0, 50.0))
    with pytest.warns(LineFreeOverlapWarning, match="left out"):
        line = measure_line(spec, (-400, 400) * KMS, line_free=[(-1000, 1000)] * KMS, order=1)
    v = spec.spectral_axis.to_value(KMS)
    assert not line.baseline.line_free[np.abs(v) <= 400].any()
    assert_allclose(line.flux.value, 50.0 * np.sqrt(2 * np.pi), rtol=1e-5)


def test_failed_gaussian_fit_gives_nan_and_a_flag():
    spec = velocity_spectrum(np.zeros(401))
    with pytest.warns(UndefinedErrorWarning, match="exactly 0"):
        line = measure_line(spec, WINDOW, line_free=LINE_FREE)
    assert not line.gaussian_ok and line.gaussian_message
    assert np.isnan(line.fwhm.value) and np.isnan(line.fwhm_error.value)
    assert line.flux.value == 0
    narrow = measure_line(velocity_spectrum(lambda v: gaussian_profile(v, 1.0, 0.0, 50.0)), (-6, 6) * KMS)
    assert narrow.n_channels == 3 and not narrow.gaussian_ok and "at least 4" in narrow.gaussian_message
    assert np.isfinite(narrow.flux.value)


def test_region_spectrum_of_a_cube_to_line_flux(cube_path):
    # End to end: a point source whose spectrum is a Gaussian line of peak S
    # gives S sigma sqrt(2 pi) Jy km/s.
    n = 120
    v = velocity_axis_kms(n)  # radio velocities of the factory's 1 MHz channels at 230.538 GHz
    profile = gaussian_profile(v, 0.4, 75.0, 12.0)
    y, x = np.mgrid[0:32, 0:32]
    sigma_pix = 1.0 / 0.25 / np.sqrt(8 * np.log(2))  # 1" beam on 0.25" pixels
    image = np.exp(-0.5 * ((x - 16) ** 2 + (y - 15) ** 2) / sigma_pix**2)
    cube = open_cube(cube_path(profile[:, None, None] * image[None], beam=(1.0, 1.0, 0.0)))
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(16, 15), radius=12))
    line = measure_line(spec, (20, 130) * KMS, line_free=[(0, 15), (135, 155)] * KMS, rest_frequency=REST)
    assert line.flux.unit == u.Jy * KMS
    assert_allclose(line.flux.value, 0.4 * 12.0 * np.sqrt(2 * np.pi), rtol=1e-3)
    assert_allclose(line.centroid.value, 75.0, atol=0.01)


def test_blanked_channels_in_window_are_reported():
    values = gaussian_profile(np.arange(-1000, 1001, 5.0), 1.0, 0.0, 50.0)
    values[200] = np.nan
    with pytest.warns(BlankedDataWarning, match="1 of the"):
        line = measure_line(velocity_spectrum(values), WINDOW)
    assert line.n_channels == 132


def test_all_blanked_window_is_an_error():
    values = np.ones(401)
    values[150:250] = np.nan
    with pytest.raises(FitError, match="only blanked"):
        measure_line(velocity_spectrum(values), (-200, 200) * KMS)


@pytest.mark.parametrize("kwargs, error, match", [
    (dict(window=(2000, 3000) * KMS), SpectralRangeError, "band spans"),
    (dict(window=WINDOW, line_free=[(990, 1000)] * KMS, order=3), SpectralRangeError, "at least 5"),
    (dict(window=WINDOW, order=9), FitError, "order"),
    (dict(window=WINDOW, rest_frequency=230 * KMS), UnitMismatchError, "rest_frequency"),
    (dict(window=WINDOW, rest_frequency=230.0), UnitMismatchError, "rest_frequency"),
    (dict(window=WINDOW, convention="doppler"), SpectralAxisError, "unknown velocity convention"),
    (dict(window=WINDOW, z=30), RedshiftError, "z=30"),
    (dict(window=(-300, 300)), UnitMismatchError, "Quantity"),
])
def test_bad_input(kwargs, error, match):
    spec = velocity_spectrum(lambda v: gaussian_profile(v, 1.0, 0.0, 50.0))
    with pytest.raises(error, match=match):
        measure_line(spec, **kwargs)


def test_frequency_spectrum_without_any_rest_frequency():
    spec = as_spectrum(np.ones(50) * u.Jy, spectral_axis=np.linspace(230, 231, 50) * u.GHz)
    with pytest.raises(SpectralAxisError, match="rest_frequency"):
        measure_line(spec, (230.2, 230.4) * u.GHz)


def test_result_is_frozen_and_summarised():
    line = measure_line(velocity_spectrum(lambda v: gaussian_profile(v, 1.0, 0.0, 50.0)), WINDOW)
    with pytest.raises(dataclasses.FrozenInstanceError):
        line.flux = 0
    assert "flux" in line.summary() and "FWHM" in line.summary()


def test_line_on_a_lone_stokes_v_plane_is_refused_unless_asked(cube_path):
    # CRVAL4 = 4 on a STOKES axis is V (Greisen & Calabretta 2002, A&A 395, 1061, Table 7). The
    # spectrum keeps the cube's source, so measuring a line on it is refused unless asked for (#13).
    v = velocity_axis_kms(60, crpix3=30.5)
    line = gaussian_profile(v, 0.8, 0.0, 8.0)
    data = np.broadcast_to(line[:, None, None], (60, 6, 6)).astype(float)
    with pytest.warns(PolarisationWarning):
        cube = open_cube(cube_path(data, name="plane_v.fits", crpix3=30.5, stokes=True, extra={"CRVAL4": 4.0}))
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(2.5, 2.5), radius=2), statistic="mean")
    with pytest.raises(PolarisationError, match=r"plane_v\.fits.*Stokes V.*allow_polarisation=True"):
        measure_line(spec, (-30, 30) * KMS, rest_frequency=REST)
    asked = measure_line(spec, (-30, 30) * KMS, rest_frequency=REST, allow_polarisation=True)
    # Integral of a Gaussian: A sigma sqrt(2 pi) (analytic), summed over 1.3 km/s channels.
    assert_allclose(asked.flux.to_value(u.Jy / u.beam * KMS), 0.8 * 8.0 * np.sqrt(2 * np.pi), rtol=1e-3)
