"""Tests for analysis/pv_slice.py: sampling along a path, offsets, width, FITS export."""

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.io import fits
from astropy.wcs import WCS
from numpy.testing import assert_allclose
from scipy.ndimage import map_coordinates

from cubefactory import file_digest, write_cube
from cubeloupe.analysis import OutputExistsError, RegionError, open_cube
from cubeloupe.analysis.pv_slice import pv_slice

KMS = u.km / u.s
PIXEL = 0.25  # arcsec, cubefactory's default pixel


@pytest.fixture(scope="module")
def random_cube(tmp_path_factory):
    rng = np.random.default_rng(31)
    data = rng.normal(size=(12, 30, 40))
    path = write_cube(tmp_path_factory.mktemp("pv") / "random.fits", data)
    return open_cube(path), data.astype(np.float32), path


def by_hand(data, xs, ys):
    """scipy's first-order spline (bilinear) at pixel positions, channel by channel (the reference)."""
    return np.array([map_coordinates(plane.astype(float), [ys, xs], order=1) for plane in data])


def test_straight_path_equals_map_coordinates(random_cube):
    cube, data, _ = random_cube
    start, end = np.array([3.2, 4.7]), np.array([35.1, 22.3])
    pv = pv_slice(cube, [tuple(start), tuple(end)])
    length = np.hypot(*(end - start))
    s = np.arange(int(np.floor(length)) + 1)  # every pixel along the path (the definition in the issue)
    direction = (end - start) / length
    xs, ys = start[0] + s * direction[0], start[1] + s * direction[1]
    assert_allclose(pv.data.value, by_hand(data, xs, ys), rtol=1e-5, atol=1e-5)
    # Offsets: pixel steps times the 0.25" pixel, in arcsec.
    assert_allclose(pv.offset.to_value(u.arcsec), s * PIXEL, rtol=1e-9)
    assert pv.data.unit == u.Jy / u.beam
    assert_allclose(pv.spectral_axis.to_value(u.Hz), cube.spectral_axis.to_value(u.Hz))


def test_width_averages_samples_one_pixel_apart_across_the_path(random_cube):
    cube, data, _ = random_cube
    start, end = np.array([5.0, 6.0]), np.array([30.0, 20.0])
    pv = pv_slice(cube, [tuple(start), tuple(end)], width=3)
    length = np.hypot(*(end - start))
    direction = (end - start) / length
    # Across the path on the sky: RA grows to the left (CDELT1 < 0), so turning the sky direction by +90 degrees
    # is a turn by -90 degrees in pixels; the average of the three lines does not depend on which side is first.
    normal = np.array([-direction[1], direction[0]])
    s = np.arange(int(np.floor(length)) + 1)
    lines = [by_hand(data, start[0] + s * direction[0] + k * normal[0], start[1] + s * direction[1] + k * normal[1])
             for k in (-1, 0, 1)]
    assert_allclose(pv.data.value, np.mean(lines, axis=0), rtol=1e-5, atol=1e-5)
    # A width given as an angle: 0.75" = 3 pixels of 0.25".
    assert_allclose(pv_slice(cube, [tuple(start), tuple(end)], width=0.75 * u.arcsec).data.value, pv.data.value)


def test_polyline_samples_continue_across_vertices(random_cube):
    cube, data, _ = random_cube
    vertices = np.array([[2.0, 2.0], [12.5, 2.0], [12.5, 20.0]])
    pv = pv_slice(cube, vertices)
    # 10.5 pixels along x then 18 along y: samples at s = 0, 1, ..., 28.
    s = np.arange(29.0)
    xs = np.where(s <= 10.5, 2.0 + s, 12.5)
    ys = np.where(s <= 10.5, 2.0, 2.0 + (s - 10.5))
    assert_allclose(pv.data.value, by_hand(data, xs, ys), rtol=1e-5, atol=1e-5)
    assert_allclose(pv.x, xs) and assert_allclose(pv.y, ys)


def test_sky_vertices_give_the_same_slice(random_cube):
    cube, _, _ = random_cube
    pixels = [(4.0, 5.0), (33.0, 25.0)]
    sky = cube.wcs.celestial.pixel_to_world([4.0, 33.0], [5.0, 25.0])
    assert_allclose(pv_slice(cube, sky).data.value, pv_slice(cube, pixels).data.value, rtol=1e-6, atol=1e-6)
    assert_allclose(pv_slice(cube, [sky[0], sky[1]]).data.value, pv_slice(cube, pixels).data.value, atol=1e-6)


def test_window_reads_only_its_channels(random_cube):
    cube, _, _ = random_cube
    axis = cube.spectral_axis.to(u.GHz)
    window = u.Quantity([axis[3], axis[7]])
    part = pv_slice(cube, [(4.0, 5.0), (33.0, 25.0)], window=window)
    whole = pv_slice(cube, [(4.0, 5.0), (33.0, 25.0)])
    assert part.channels == slice(3, 8)
    assert_allclose(part.data.value, whole.data.value[3:8])


def test_solid_body_disk_gives_a_straight_ridge_with_the_input_slope(tmp_path):
    # Solid-body rotation: the line-of-sight velocity grows linearly with the distance along the major axis,
    # v = v_sys + k * r (common practice; e.g. Binney & Merrifield 1998, Galactic Astronomy, section 8.3).
    n_chan, ny, nx = 120, 64, 64
    v_axis = -300.0 + 5.0 * np.arange(n_chan)                    # km/s, radio velocities
    k = 40.0                                                      # km/s per arcsec along the major axis
    pa = np.deg2rad(30.0)                                         # major axis direction in the pixel grid
    yy, xx = np.mgrid[:ny, :nx]
    cx, cy = 31.5, 32.0
    along = ((xx - cx) * np.cos(pa) + (yy - cy) * np.sin(pa)) * PIXEL  # arcsec, +x-ish side receding
    disk = np.hypot(xx - cx, yy - cy) * PIXEL < 6.0
    v_los = k * along
    data = np.exp(-0.5 * ((v_axis[:, None, None] - v_los[None]) / 8.0) ** 2) * disk[None]
    path = write_cube(tmp_path / "disk.fits", data, spectral="VRAD", crval3=-300e3, cdelt3=5e3)
    cube = open_cube(path)
    half = 5.0 / PIXEL
    ends = [(cx - half * np.cos(pa), cy - half * np.sin(pa)), (cx + half * np.cos(pa), cy + half * np.sin(pa))]
    pv = pv_slice(cube, ends, width=3)
    velocity = pv.spectral_axis.to_value(KMS)
    weights = np.clip(pv.data.value, 0, None)
    ridge = (velocity @ weights) / weights.sum(axis=0)            # intensity-weighted velocity per offset
    slope, intercept = np.polyfit(pv.offset.to_value(u.arcsec) - 5.0, ridge, 1)
    assert slope == pytest.approx(k, rel=0.01)
    assert intercept == pytest.approx(0.0, abs=2.0)
    residual = ridge - (slope * (pv.offset.to_value(u.arcsec) - 5.0) + intercept)
    assert np.max(np.abs(residual)) < 2.0                         # a straight line, within a fraction of a channel


def test_write_gives_a_linear_wcs_and_the_beam(random_cube, tmp_path):
    cube, _, source = random_cube
    before = file_digest(source)
    pv = pv_slice(cube, [(3.0, 3.0), (30.0, 25.0)], width=3)
    target = pv.write(tmp_path / "pv.fits")
    with fits.open(target) as hdus:
        header, data = hdus[0].header, hdus[0].data
    assert data.shape == pv.data.shape
    assert_allclose(data, pv.data.value, rtol=1e-6)
    wcs = WCS(header)
    offsets, spectral = wcs.pixel_to_world_values(np.arange(data.shape[1]), np.zeros(data.shape[1]))
    assert_allclose(offsets, pv.offset.to_value(u.arcsec), atol=1e-9)
    _, spectral = wcs.pixel_to_world_values(np.zeros(data.shape[0]), np.arange(data.shape[0]))
    assert_allclose(spectral, pv.spectral_axis.to_value(u.Hz))
    assert header["CTYPE1"] == "OFFSET" and header["CTYPE2"] == "FREQ" and header["CUNIT1"] == "arcsec"
    assert header["BMAJ"] == pytest.approx(1.0 / 3600) and header["BUNIT"] == "Jy beam-1"
    with pytest.raises(OutputExistsError, match="overwrite=True"):
        pv.write(target)
    pv.write(target, overwrite=True)
    assert file_digest(source) == before   # the input cube is never changed


def test_paths_off_the_image(random_cube):
    cube, _, _ = random_cube
    partly = pv_slice(cube, [(30.0, 10.0), (50.0, 10.0)])   # x beyond 39 is off the image
    assert np.isnan(partly.data.value[:, partly.x > 39]).all()
    assert np.isfinite(partly.data.value[:, partly.x <= 39]).all()
    with pytest.raises(RegionError, match="wholly outside"):
        pv_slice(cube, [(100.0, 100.0), (120.0, 110.0)])


@pytest.mark.parametrize("path, match", [
    ([(1.0, 2.0)], "at least two vertices"),
    ([(1.0, 2.0), (1.0, 2.0)], "zero length"),
    ([(1.0, np.nan), (3.0, 2.0)], "non-finite"),
])
def test_bad_paths_are_refused(random_cube, path, match):
    with pytest.raises(RegionError, match=match):
        pv_slice(random_cube[0], path)


def test_masked_cube_takes_the_spectral_cube_path(random_cube):
    cube, data, _ = random_cube
    masked = cube.with_mask(cube > 0 * cube.unit)
    pv = pv_slice(masked, [(4.0, 4.0), (20.0, 4.0)])
    # Samples on pixel centres are the pixels themselves; masked pixels are blank.
    expected = np.where(data > 0, data, np.nan)[:, 4, 4:21]
    assert_allclose(pv.data.value, expected, rtol=1e-6)


def test_band_edges_lie_half_the_averaged_width_either_side_of_the_path(random_cube):
    """The strip drawn on the sky holds the averaged samples: n samples one pixel apart, each one pixel wide,
    reach n/2 pixels either side of the centre line, perpendicular to it (plane geometry; square pixels)."""
    from cubeloupe.analysis import path_band

    cube, _, _ = random_cube
    start, end, corner = np.array([5.0, 6.0]), np.array([30.0, 20.0]), np.array([30.0, 28.0])
    one, other = path_band(cube, [tuple(start), tuple(end), tuple(corner)], width=0.75 * u.arcsec)  # 3 pixels
    assert one.shape == other.shape == (4, 2)
    for (a, b), (p, q) in (((start, end), (0, 1)), ((end, corner), (2, 3))):
        direction = (b - a) / np.hypot(*(b - a))
        normal = np.array([-direction[1], direction[0]])
        for edge in (one, other):
            assert_allclose(edge[[p, q]] - [a, b], np.outer([1, 1], normal) * np.sign(
                np.dot(edge[p] - a, normal)) * 1.5, atol=1e-9)
        assert np.dot(one[p] - a, normal) == pytest.approx(-np.dot(other[p] - a, normal))
    assert all(e.shape == (0, 2) for e in path_band(cube, [tuple(start), tuple(end)], width=1))
