"""Tests of the first pass of the delivery check (analysis/check/first_pass.py; issue 8)."""


import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose

from cubefactory import correlated_noise, line_cube_data, write_cube
from cubeloupe.analysis import open_cube
from cubeloupe.analysis.check import continuum_free_peaks





def test_line_free_mean_from_sums_agrees_with_noise_leftover_continuum(tmp_path, rng):
    """Two strategies, one answer: the check's one-pass sums against noise.leftover_continuum."""
    from cubeloupe.analysis.check import continuum_free_peaks
    from cubeloupe.analysis.noise import leftover_continuum

    data = line_cube_data((80, 20, 24), rng=rng, noise_rms=1e-3, lines=[(230.498e9, 20e-3, 3e6)],
                          continuum=2e-3)
    data[5, 3:6, :] = np.nan
    data[:, 0, 0] = np.nan
    cube = open_cube(write_cube(tmp_path / "sums.fits", data))
    free = np.ones(80, dtype=bool)
    free[30:50] = False
    mean, error, significance = continuum_free_peaks(cube).line_free_mean(cube, free)
    reference = leftover_continuum(cube, free)
    # float32 sums about each pixel's level: agreement to 1e-5 of the noise (1 mJy/beam)
    tiny = 1e-8 * u.Jy / u.beam
    assert_quantity_allclose(mean, u.Quantity(reference.mean), rtol=1e-5, atol=tiny)
    assert_quantity_allclose(error, u.Quantity(reference.error), rtol=1e-4, atol=tiny)
    np.testing.assert_allclose(significance, reference.significance.value, rtol=1e-4, atol=1e-4)
    assert np.isnan(mean[0, 0])


@pytest.mark.parametrize("fwhm", [0.0, 3.0, 5.0])
def test_noise_correlation_is_measured_from_the_data(tmp_path, fwhm):
    """The lag-one smoothness estimate recovers the FWHM the noise was smoothed with."""
    rng = np.random.default_rng(11)
    shape = (64, 96, 96)
    data = correlated_noise(shape, rng=rng, fwhm_pixels=fwhm) if fwhm else rng.standard_normal(shape)
    measured = continuum_free_peaks(open_cube(write_cube(tmp_path / "n.fits", data))).noise_fwhm_pixels
    if fwhm:
        # the noise was made by scipy.ndimage.gaussian_filter of FWHM = 2.3548 sigma
        np.testing.assert_allclose(measured, fwhm, rtol=0.1)
    else:
        assert max(measured) < 0.7  # white noise: neighbours uncorrelated
