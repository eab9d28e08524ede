"""significant_moments: moments 1 and 2 only where moment 0 exceeds a few times its error (common practice)."""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from cubefactory import frequency_axis_hz, line_cube_data
from cubeloupe.analysis import CubeloupeError, moment_maps, open_cube, significant_moments, within_window

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # CO J=2-1 (CDMS, Mueller et al. 2005)


@pytest.fixture
def maps(cube_path, rng):
    shape = (80, 30, 30)
    freq = frequency_axis_hz(shape[0])
    data = line_cube_data(shape, rng=rng, noise_rms=0.05, lines=[(freq[40], 1.0, 3.0e6)], source_sigma_pixels=3.0)
    cube = open_cube(cube_path(data.astype(np.float32)))
    # 1 MHz channels at 230.5 GHz are 1.3 km/s: channel 40 is at +52 km/s (radio, Greisen et al. 2006)
    return moment_maps(cube, window=(30, 75) * KMS, line_free=[(0, 20), (85, 100)] * KMS, rest_frequency=CO21)


def test_mask_is_moment0_above_threshold_times_its_error(maps):
    kept = significant_moments(maps, threshold=3)
    expected = maps.m0.value > 3 * maps.m0_error.value
    assert_array_equal(kept.significant, expected)
    assert_array_equal(np.isnan(kept.m1.value) | ~expected, ~expected | np.isnan(maps.m1.value))
    # the source's pixels pass, the far corners (noise) mostly do not
    assert kept.significant[15, 15] and kept.significant[:4, :4].mean() < 0.2
    # inside the mask moment 1 stays near the line's velocity, not spread over the window
    inside = kept.m1.value[kept.significant]
    assert np.nanmax(np.abs(inside - 52.0)) < 10


def test_a_stricter_cut_keeps_fewer_pixels_and_bad_thresholds_are_refused(maps):
    assert significant_moments(maps, 10).significant.sum() < significant_moments(maps, 3).significant.sum()
    for bad in (0, -1, float("nan"), "three"):
        with pytest.raises(CubeloupeError, match="threshold"):
            significant_moments(maps, bad)


def test_moment_1_outside_the_window_is_not_shown():
    """Issue #17: on real interferometer cubes noise pixels gave moment 1 far outside the window's velocities.

    A weighted mean of the window's channel velocities with non-negative weights lies between the first and
    last of them (a convex combination); a value outside needs negative, i.e. noise, intensities.
    """
    from astropy.wcs import WCS
    from spectral_cube import Projection

    wcs = WCS(naxis=2)
    wcs.wcs.ctype = ["RA---SIN", "DEC--SIN"]
    m1 = Projection(np.array([[-300.0, -250.0, 0.0], [120.0, 250.0, np.nan]]) * u.km / u.s, wcs=wcs)
    m2 = Projection(np.full((2, 3), 30.0) * u.km / u.s, wcs=wcs)
    # The window's first and last channel velocities, here in m/s: units are converted.
    shown_m1, shown_m2 = within_window(m1, m2, [250e3, -250e3] * u.m / u.s)
    assert_allclose(shown_m1.value, [[np.nan, -250.0, 0.0], [120.0, 250.0, np.nan]], equal_nan=True)
    assert_allclose(shown_m2.value, [[np.nan, 30.0, 30.0], [30.0, 30.0, np.nan]], equal_nan=True)
    assert np.isnan(m1.value).sum() == 1  # the inputs are left as they were

