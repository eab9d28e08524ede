"""Tests of the channel noise of the delivery check (analysis/check/channel_noise.py, grid_noise.py; issue 13)."""

import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose

from cubefactory import write_cube
from cubeloupe.analysis import open_cube
from cubeloupe.analysis.check import check_cube, continuum_free_peaks
from cubeloupe.analysis.check.channel_noise import grid_statistics, kept_grid_statistics, noise_grid
from cubeloupe.analysis.check.grid_noise import channel_rms_from_grid, grid_noise_statistics
from small_field import NOISE, PEAK, small_field_cube


def test_line_filling_a_small_field_is_detected_with_no_flagged_channel_inside_it(tmp_path):
    """Regression test for #13: the line lifted the per-channel rms tenfold, was flagged and not detected."""
    path, velocity = small_field_cube(tmp_path / "small.fits", np.random.default_rng(13))
    result = check_cube(open_cube(path))
    # the noise injected, not the spread of the emission (issue 13: 0.044 K true, 0.5 K reported)
    assert_quantity_allclose(result.noise.cube_rms, NOISE * u.K, rtol=0.1)
    line = np.abs(velocity) < 3.0  # the main line's channels, +-3 dispersions
    assert not np.isin(result.noise.flagged, np.flatnonzero(line)).any()
    main = result.lines.features[0]
    assert main.channels.first <= np.flatnonzero(line)[0] + 40 and main.channels.last >= np.flatnonzero(line)[-1] - 40
    # peak over noise at the brightest pixel (fill 1.0): 2.2 K / 0.044 K = 50, within 15 %
    assert 0.85 * PEAK / NOISE <= main.peak_snr <= 1.15 * PEAK / NOISE


def test_hanning_correlated_channels_give_the_noise_not_the_difference_noise():
    """Differences of Hanning-smoothed channels are smaller than the noise; the correlation is measured and undone.

    Hanning smoothing [1/4, 1/2, 1/4] of white noise of rms s gives rms s sqrt(3/8) (common practice).
    """
    rng = np.random.default_rng(5)
    white = rng.normal(0.0, 1.0, (1002, 3000))
    hanning = (white[:-2] + 2 * white[1:-1] + white[2:]) / 4
    hanning[400:600] += np.linspace(0, 3, 3000)  # emission over the field
    found = channel_rms_from_grid(**grid_noise_statistics(hanning.copy()))
    assert np.all(np.abs(found.rms[450:550] / np.sqrt(3 / 8) - 1) < 0.1)
    assert found.from_differences[450:550].all() and not found.from_differences[:300].any()


@pytest.mark.parametrize("shape, max_pixels, same_pixels", [((40, 64, 64), 256, True), ((33, 50, 45), 400, False)])
def test_statistics_from_the_kept_grid_equal_those_of_a_read_of_its_own(tmp_path, shape, max_pixels, same_pixels):
    """Pass 2 without a read (#13): the grid kept by pass 1 gives the statistics the separate pass reads."""
    rng = np.random.default_rng(8)
    data = rng.normal(0.0, 1.0, shape)
    data[:, :, :4] = np.nan  # a blanked border
    data[10:14] += 5.0 * rng.uniform(0, 1, shape[1:])  # emission over the field
    cube = open_cube(write_cube(tmp_path / "grid.fits", data))
    stride, max_pixels = noise_grid(shape, max_pixels=max_pixels)
    kept = continuum_free_peaks(cube, noise_grid=(stride, max_pixels)).noise_grid
    left_out = np.zeros(shape[1:], dtype=bool)
    left_out[20:30, 10:30] = True  # pixels with continuum, left out of the rms
    for mask in (None, left_out):
        reference = grid_statistics((cube if mask is None else cube.with_mask(~mask))[:, ::stride, :],
                                    max_pixels=max_pixels)
        ours = kept_grid_statistics(kept, mask, max_pixels=max_pixels)
        assert (shape[2] % kept.column_step == 0) == same_pixels
        if same_pixels:  # the same pixels: the same numbers
            for name, values in reference.items():
                np.testing.assert_array_equal(ours[name], values)
        else:  # every k-th pixel of each row instead of every k-th of the rows laid end to end
            np.testing.assert_allclose(ours["mad"], reference["mad"], rtol=0.15)
