"""Tests of the first pass of the delivery check (analysis/check/first_pass.py; issue 8)."""


import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
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


@pytest.mark.parametrize("shape, stride, max_pixels", [((30, 41, 37), 3, 200), ((12, 20, 24), 1, 10_000)])
def test_noise_grid_kept_by_the_first_pass_is_the_data_on_that_grid(tmp_path, rng, shape, stride, max_pixels):
    # The grid pass 2 measures the channel rms on: every stride-th row and every k-th pixel of it, in every
    # channel, as the file holds them (astropy.io.fits reads the reference), NaN where blank.
    data = rng.normal(0.0, 1.0, shape)
    data[:, 5, :] = np.nan
    data[4, 9, 3] = np.nan
    path = write_cube(tmp_path / "g.fits", data)
    spectra = continuum_free_peaks(open_cube(path), noise_grid=(stride, max_pixels))
    grid = spectra.noise_grid
    assert grid.row_stride == stride
    n_rows = -(-shape[1] // stride)
    assert grid.column_step == max(1, -(-(n_rows * shape[2]) // max_pixels))
    expected = fits.getdata(path).astype(np.float32)[:, ::stride, ::grid.column_step]
    np.testing.assert_array_equal(grid.values, expected)
    # without the option (or for a grid too large to keep) there is none
    assert continuum_free_peaks(open_cube(path)).noise_grid is None
