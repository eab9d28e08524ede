"""Tests of analysis/display.py: what the views draw, checked against independent references."""

import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose
from astropy.wcs import WCS
from numpy.testing import assert_allclose
from radio_beam import Beam

from cubeloupe.analysis import SpectralAxisError
from cubeloupe.analysis.display import (
    beam_outline,
    contour_paths,
    display_axis,
    display_image,
    display_limits,
    marker_positions,
    sky_position,
    stretched,
    to_observed_frequency,
    channel_at,
)

C_KMS = 299792.458  # km/s, exact (SI definition)


def _naive_block_mean(plane, f):
    """Reference: a plain loop over blocks with np.nanmean."""
    ny, nx = plane.shape
    out = np.full((-(-ny // f), -(-nx // f)), np.nan)
    for j in range(out.shape[0]):
        for i in range(out.shape[1]):
            block = plane[j * f:(j + 1) * f, i * f:(i + 1) * f]
            if np.isfinite(block).any():
                out[j, i] = np.nanmean(block)
    return out


@pytest.mark.parametrize("shape, max_size", [((40, 40), 10), ((37, 53), 10), ((7, 5), 100), ((1024, 1024), 512)])
def test_display_image_equals_a_naive_block_mean(rng, shape, max_size):
    plane = rng.normal(size=shape)
    plane[rng.random(shape) < 0.1] = np.nan
    plane[:5, :5] = np.nan  # an all-NaN block must stay NaN
    image, factor = display_image(plane.astype(">f4"), max_size=max_size)
    assert max(image.shape) <= max_size
    assert_allclose(image, _naive_block_mean(plane.astype(np.float32), factor), rtol=1e-5, atol=1e-6)
    assert image.dtype == np.float32 and image.dtype.isnative


def test_display_image_does_not_modify_the_plane(rng):
    plane = rng.normal(size=(20, 20))
    plane[3, 3] = np.nan
    copy = plane.copy()
    display_image(plane, max_size=5)
    assert_allclose(plane, copy, equal_nan=True)


def test_display_limits_are_percentiles_of_finite_pixels(rng):
    values = rng.normal(size=10_000)
    values[:100] = np.nan
    lo, hi = display_limits(values, 1, 99)
    finite = values[np.isfinite(values)]
    # numpy's percentile is the independent reference
    assert_allclose([lo, hi], np.percentile(finite, [1, 99]), rtol=1e-12)


def test_display_limits_explicit_and_degenerate():
    assert display_limits(np.zeros(10), vmin=-1.0) == (-1.0, 0.0)
    lo, hi = display_limits(np.full(10, 3.0))
    assert lo < hi
    assert display_limits(np.full(10, np.nan)) == (0.0, 1.0)
    with pytest.raises(ValueError, match="vmin"):
        display_limits(np.zeros(3), vmin=2, vmax=1)
    with pytest.raises(ValueError, match="percentiles"):
        display_limits(np.zeros(3), 90, 10)


def test_stretches_follow_their_formulas():
    x = np.array([0.0, 0.25, 0.5, 1.0, 2.0, np.nan])
    # sqrt stretch: y = sqrt(x) (astropy.visualization SqrtStretch docs)
    assert_allclose(stretched(x, 0, 1, "sqrt")[:5], np.sqrt([0, 0.25, 0.5, 1, 1]), rtol=1e-6)
    # log stretch: y = log(a x + 1) / log(a + 1), a = 1000 (astropy LogStretch docs)
    assert_allclose(stretched(x, 0, 1, "log")[:4], np.log(1000 * x[:4] + 1) / np.log(1001), rtol=1e-6)
    assert np.isnan(stretched(x, 0, 1, "linear")[-1])
    with pytest.raises(ValueError, match="unknown stretch"):
        stretched(x, 0, 1, "cubic")


def test_display_axis_kinds():
    axis = [230.538, 230.0] * u.GHz
    assert_quantity_allclose(display_axis(axis, "observed frequency"), axis)
    assert_quantity_allclose(display_axis(axis, "rest frequency", z=0.5), axis * 1.5)
    # radio velocity v = c (f0 - f)/f0 (Greisen et al. 2006, A&A 446, 747)
    v = display_axis(axis, "velocity", rest_frequency=230.538 * u.GHz)
    assert_quantity_allclose(v, C_KMS * (230.538 - axis.value) / 230.538 * u.km / u.s)
    with pytest.raises(SpectralAxisError, match="unknown axis"):
        display_axis(axis, "channel")


def test_marker_positions_at_redshift_and_with_offset():
    rest = [230.538, 345.796] * u.GHz  # CO 2-1 and 3-2 (CDMS catalogue, from memory)
    z = 2.0
    assert_quantity_allclose(marker_positions(rest, "observed frequency", z=z), rest / 3)
    assert_quantity_allclose(marker_positions(rest, "rest frequency", z=z), rest)
    # a +100 km/s radio offset: f = f_ref (1 - v/c) (Greisen et al. 2006)
    moved = marker_positions(rest, "observed frequency", z=z, velocity_offset=100 * u.km / u.s)
    assert_quantity_allclose(moved, rest / 3 * (1 - 100 / C_KMS))
    v = marker_positions(rest, "velocity", z=z, velocity_offset=100 * u.km / u.s,
                         reference_rest_frequency=rest[0])
    assert_quantity_allclose(v[0], 100 * u.km / u.s, rtol=1e-9)


def _wcs(cdelt1=-1 / 3600 / 4, cdelt2=1 / 3600 / 4):
    w = WCS(naxis=2)
    w.wcs.ctype = ["RA---SIN", "DEC--SIN"]
    w.wcs.crval = [150.0, 2.0]
    w.wcs.cdelt = [cdelt1, cdelt2]
    w.wcs.crpix = [11, 11]
    return w


def test_beam_outline_size_and_orientation():
    # 2" x 1" beam at PA 0 (major axis north-south), 0.25" pixels: 8 x 4 pixels across.
    x, y = beam_outline(Beam(2 * u.arcsec, 1 * u.arcsec, 0 * u.deg), _wcs(), (5.0, 5.0))
    assert_allclose(np.ptp(y), 8.0, rtol=1e-3)
    assert_allclose(np.ptp(x), 4.0, rtol=1e-3)
    # PA 90 deg: major axis east-west (BPA from north through east, common practice)
    x, y = beam_outline(Beam(2 * u.arcsec, 1 * u.arcsec, 90 * u.deg), _wcs(), (5.0, 5.0))
    assert_allclose(np.ptp(x), 8.0, rtol=1e-3)
    # PA 45 deg: the major axis points north-east, i.e. up and to the LEFT with east on the left.
    x, y = beam_outline(Beam(2 * u.arcsec, 0.2 * u.arcsec, 45 * u.deg), _wcs(), (0.0, 0.0))
    far = np.argmax(np.hypot(x, y))
    assert np.sign(x[far]) == -np.sign(y[far])


def test_contour_paths_trace_a_circle():
    yy, xx = np.mgrid[:41, :41]
    radius = np.hypot(xx - 20, yy - 20)
    (x, y), = contour_paths(radius, [10.0])
    r = np.hypot(x - 20, y - 20)
    assert_allclose(r[np.isfinite(r)], 10.0, atol=0.1)


def test_sky_position_matches_astropy_at_reference_pixel():
    coord, text = sky_position(_wcs(), 10, 10)  # crpix 11 (1-based) is pixel 10 (0-based)
    assert_allclose([coord.ra.deg, coord.dec.deg], [150.0, 2.0])
    assert text.startswith("10h00m00") and "+02d00m00" in text


def test_to_observed_frequency_inverts_display_axis():
    axis = np.linspace(230.0, 231.0, 11) * u.GHz
    for kind in ("observed frequency", "rest frequency", "velocity"):
        shown = display_axis(axis, kind, rest_frequency=230.538 * u.GHz, z=0.3, convention="optical")
        back = to_observed_frequency(shown.value, kind, rest_frequency=230.538 * u.GHz, z=0.3,
                                     convention="optical")
        assert_quantity_allclose(back, axis, rtol=1e-12)


def test_channel_at_nearest_and_outside():
    axis = [231.0, 230.0, 229.0] * u.GHz  # descending, as in many deliveries
    assert channel_at(axis, 229.4 * u.GHz) == 2
    assert channel_at(axis, 231.4 * u.GHz) == 0
    assert channel_at(axis, 231.6 * u.GHz) is None
