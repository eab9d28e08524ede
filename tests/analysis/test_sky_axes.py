"""Sky offset axes checked against astropy's own WCS and coordinates, on hand-made and real grids.

Reference: astropy.wcs.WCS.pixel_to_world / world_to_pixel and
astropy.coordinates.SkyCoord.spherical_offsets_to / spherical_offsets_by / separation.
"""

from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose
from astropy.wcs import WCS
from matplotlib.ticker import MaxNLocator

from cubefactory import make_header
from cubeloupe.analysis import CubeShapeError, nice_ticks, sky_axes, tick_decimals

REAL_CUBES = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"


def celestial_wcs(ctype=("RA---SIN", "DEC--SIN"), crval=(150.0, 2.0), cdelt=(-0.25, 0.25), crpix=(20.5, 15.5),
                  pc=None):
    """A two-axis WCS with pixel sizes ``cdelt`` in arcsec."""
    w = WCS(naxis=2)
    w.wcs.ctype = list(ctype)
    w.wcs.crval = list(crval)
    w.wcs.cdelt = [c / 3600 for c in cdelt]
    w.wcs.crpix = list(crpix)
    if pc is not None:
        w.wcs.pc = pc
    return w


def astropy_offsets(wcs, centre, x, y):
    """(east-west, north-south) offsets of pixel (x, y) from ``centre`` by astropy alone."""
    return centre.spherical_offsets_to(wcs.pixel_to_world(x, y))


def test_offsets_of_a_sin_grid_follow_cdelt_and_astropy():
    header = make_header((3, 30, 40))  # cubefactory: RA---SIN/DEC--SIN, 0.25" pixels at RA 150, Dec 2
    wcs = WCS(header).celestial
    axes = sky_axes(wcs, (30, 40))
    assert axes.labels == ("ΔRA (″)", "ΔDec (″)")
    # FITS Paper II (Calabretta & Greisen 2002, A&A 395, 1077): CDELT is the pixel spacing at the
    # reference point; RA grows to the east, drawn to the left (common practice).
    assert_quantity_allclose(axes.scale, [-0.25, 0.25] * u.arcsec, rtol=1e-6)
    assert axes.centre_pixel == (19.5, 14.5)
    assert axes.centre.separation(wcs.pixel_to_world(19.5, 14.5)) < 1e-6 * u.arcsec
    # The axis ends: the map's edges are 5" east and 3.75" south of the centre.
    dx, dy = axes.offsets([-0.5, 39.5], [-0.5, 29.5])
    assert_quantity_allclose(dx, [5.0, -5.0] * u.arcsec, rtol=1e-6)
    assert_quantity_allclose(dy, [-3.75, 3.75] * u.arcsec, rtol=1e-6)
    # Against astropy along the central row and column, pixel by pixel.
    xs = np.arange(40.0)
    east, _ = astropy_offsets(wcs, axes.centre, xs, np.full_like(xs, 14.5))
    assert_quantity_allclose(axes.offsets(xs, 14.5)[0], east, atol=1e-4 * u.arcsec)
    ys = np.arange(30.0)
    _, north = astropy_offsets(wcs, axes.centre, np.full_like(ys, 19.5), ys)
    assert_quantity_allclose(axes.offsets(19.5, ys)[1], north, atol=1e-4 * u.arcsec)


def test_tick_offsets_land_where_astropy_puts_them():
    wcs = celestial_wcs()
    axes = sky_axes(wcs, (30, 40))
    ticks = nice_ticks(*axes.offsets([-0.5, 39.5], 0)[0].value, 5) * axes.unit
    # A point `tick` east of the centre, by astropy, lies at the pixel the axis labels `tick`.
    points = axes.centre.spherical_offsets_by(ticks, 0 * u.arcsec)
    x, y = wcs.world_to_pixel(points)
    assert_allclose_pixels(axes.pixels(ticks, 0 * u.arcsec)[0], x)
    assert_allclose_pixels(y, 14.5)


def assert_allclose_pixels(got, expected, atol=1e-3):
    np.testing.assert_allclose(got, expected, atol=atol)


def test_axis_span_equals_the_separation_of_the_edges():
    wcs = celestial_wcs(crval=(20.0, -61.0), cdelt=(-0.5, 0.5))
    axes = sky_axes(wcs, (30, 40))
    left, right = wcs.pixel_to_world([-0.5, 39.5], [14.5, 14.5])
    dx = axes.offsets([-0.5, 39.5], 14.5)[0]
    # Great-circle length of the central row (SkyCoord.separation, Vincenty formula).
    assert_quantity_allclose(abs(dx[1] - dx[0]), left.separation(right), rtol=1e-6)


def test_galactic_grid_reads_l_and_b():
    wcs = celestial_wcs(ctype=("GLON-CAR", "GLAT-CAR"), crval=(30.0, 0.0), cdelt=(-2.0, 2.0), crpix=(11, 11))
    axes = sky_axes(wcs, (21, 21))
    assert axes.labels == ("Δl (″)", "Δb (″)")
    assert axes.centre.frame.name == "galactic"
    assert axes.centre_text == "l = 30.0000°, b = +0.0000°"
    assert_quantity_allclose(axes.offsets(0, 0)[0], 20 * u.arcsec, rtol=1e-6)
    b_offset = astropy_offsets(wcs, axes.centre, 10, 0)[1]
    assert_quantity_allclose(axes.offsets(10, 0)[1], b_offset, atol=1e-4 * u.arcsec)


def test_rotated_grid_is_labelled_along_the_pixel_axes():
    angle = np.deg2rad(30)
    wcs = celestial_wcs(pc=[[np.cos(angle), -np.sin(angle)], [np.sin(angle), np.cos(angle)]])
    axes = sky_axes(wcs, (30, 40))
    assert abs(axes.tilt.to_value(u.deg)) == pytest.approx(30, abs=0.1)
    assert axes.labels == ("offset along x (″)", "offset along y (″)")


def test_wide_field_in_arcminutes():
    wcs = celestial_wcs(cdelt=(-60.0, 60.0), crpix=(50, 50))  # 1' pixels, 100' field
    axes = sky_axes(wcs, (100, 100))
    assert axes.unit == u.arcmin
    assert axes.labels == ("ΔRA (′)", "ΔDec (′)")
    assert_quantity_allclose(axes.scale, [-1, 1] * u.arcmin, rtol=1e-3)


def test_plot_size_gives_square_sky_pixels():
    axes = sky_axes(celestial_wcs(cdelt=(-1.0, 1.0)), (21, 6))
    width, height = axes.plot_size(300)
    assert height == 300
    assert width / height == pytest.approx(6 / 21, rel=0.01)
    # Pixels 2" across and 1" up must be drawn twice as wide as high.
    axes = sky_axes(celestial_wcs(cdelt=(-2.0, 1.0)), (10, 10))
    width, height = axes.plot_size(300)
    assert (width, height) == (300, 150)


def test_map_without_sky_axes_is_refused():
    w = WCS(naxis=2)
    w.wcs.ctype = ["FREQ", "STOKES"]
    with pytest.raises(CubeShapeError, match="no celestial axes"):
        sky_axes(w, (3, 3))
    with pytest.raises(CubeShapeError, match="positive"):
        sky_axes(celestial_wcs(), (0, 4))


@pytest.mark.parametrize("low, high, most", [(-12.3, 14.1, 5), (-1207.5, 1207.5, 6), (-3.1, 2.9, 3),
                                              (0.013, 0.087, 4), (-40, 40, 3), (-40, 40, 4), (5, 95, 10)])
def test_ticks_agree_with_matplotlib(low, high, most):
    ticks = nice_ticks(low, high, most)
    assert 1 <= len(ticks) <= most
    # matplotlib's MaxNLocator with its default steps is the reference tick placer (matplotlib.ticker).
    reference = MaxNLocator(nbins=most - 1, steps=[1, 2, 2.5, 5, 10]).tick_values(low, high)
    reference = reference[(reference >= low - 1e-9) & (reference <= high + 1e-9)]
    step = np.diff(ticks)
    assert np.allclose(step, step[0])
    # A step of 1, 2, 2.5 or 5 times a power of ten, and every tick a multiple of it (common practice).
    mantissa = step[0] / 10 ** np.floor(np.log10(step[0]))
    assert any(np.isclose(mantissa, m) for m in (1, 2, 2.5, 5))
    assert np.allclose(ticks / step[0], np.round(ticks / step[0]))
    # Never coarser than matplotlib's choice for as many ticks.
    assert step[0] <= np.diff(reference)[0] * (1 + 1e-9)


def test_a_narrow_map_gets_at_least_two_ticks():
    """Issue #17: a 6 x 21-pixel map (1" pixels) was drawn with a single x tick.

    Its plot area is ~130 px wide beside a 460 px side, room for two 48 px labels; the offsets run
    -3" to +3". matplotlib's MaxNLocator relaxes its bin count to keep ``min_n_ticks`` = 2 ticks
    (matplotlib.ticker): one tick gives no scale to read.
    """
    axes = sky_axes(celestial_wcs(cdelt=(-1.0, 1.0), crpix=(3.5, 11.0)), (21, 6))
    width, _ = axes.plot_size(460)
    low, high = (v.value for v in axes.offsets([-0.5, 5.5], 0)[0])
    ticks = nice_ticks(low, high, width // 48)
    reference = MaxNLocator(nbins=max(width // 48 - 1, 1), steps=[1, 2, 2.5, 5, 10],
                            min_n_ticks=2).tick_values(low, high)
    reference = reference[(reference >= min(low, high) - 1e-9) & (reference <= max(low, high) + 1e-9)]
    assert len(ticks) >= 2
    assert ticks.tolist() == pytest.approx(reference.tolist())
    assert all(min(low, high) <= t <= max(low, high) for t in ticks)
    # Readable labels: no more decimals than the step needs (one for 2.5" steps).
    assert tick_decimals(ticks) <= 1


@pytest.mark.parametrize("low, high, most", [(-3.0, 3.0, 2), (-3.0, 3.0, 1), (-0.3, 0.3, 2), (10.2, 10.9, 1),
                                              (-7.4, 7.9, 2)])
def test_too_few_ticks_are_relaxed_as_matplotlib_does(low, high, most):
    ticks = nice_ticks(low, high, most)
    # MaxNLocator(min_n_ticks=2) is the reference (matplotlib.ticker).
    reference = MaxNLocator(nbins=max(most - 1, 1), steps=[1, 2, 2.5, 5, 10], min_n_ticks=2).tick_values(low, high)
    reference = reference[(reference >= low - 1e-9) & (reference <= high + 1e-9)]
    assert len(ticks) >= 2
    assert ticks.tolist() == pytest.approx(reference.tolist())


@pytest.fixture
def real_cube_header():
    def read(name):
        path = REAL_CUBES / name
        if not path.exists():
            pytest.skip(f"real cube {name} not found at {path} (../shared/real-cubes/ beside the repository)")
        return fits.getheader(path)
    return read


def test_sfl_cube_with_reference_pixel_far_outside(real_cube_header):
    """l1448_13co.fits: RA---SFL/DEC--SFL, CRPIX1 = -799, CRPIX2 = -4741.9, 23" pixels (SOURCES.md)."""
    header = real_cube_header("l1448_13co.fits")
    wcs = WCS(header).celestial
    axes = sky_axes(wcs, (header["NAXIS2"], header["NAXIS1"]))
    assert axes.labels == ("ΔRA (″)", "ΔDec (″)")
    # CDELT = 0.006388889 deg = 23.0" (the header); SFL keeps parallels straight and evenly spaced.
    assert_quantity_allclose(abs(axes.scale), [23.0, 23.0] * u.arcsec, rtol=1e-3)
    # The grid is tilted by a few degrees against north this far from the reference point
    # (SFL meridians converge away from the central meridian; Calabretta & Greisen 2002, sect. 5.3.1).
    assert 1 * u.deg < abs(axes.tilt) < 10 * u.deg
    # Offsets along the central row and column agree with astropy to a small fraction of a pixel.
    xs = np.arange(0.0, 105.0, 13.0)
    east, _ = astropy_offsets(wcs, axes.centre, xs, np.full_like(xs, 52.0))
    assert_quantity_allclose(axes.offsets(xs, 52.0)[0], east, atol=0.1 * 23 * u.arcsec)
    _, north = astropy_offsets(wcs, axes.centre, np.full_like(xs, 52.0), xs)
    assert_quantity_allclose(axes.offsets(52.0, xs)[1], north, atol=0.1 * 23 * u.arcsec)


def test_sin_cube_with_blanked_border(real_cube_header):
    """co10_ngc4047_carma.fits: RA---SIN/DEC--SIN, 1" pixels, CRPIX 65 on a 128 x 128 map (SOURCES.md)."""
    header = real_cube_header("co10_ngc4047_carma.fits")
    wcs = WCS(header).celestial
    axes = sky_axes(wcs, (header["NAXIS2"], header["NAXIS1"]))
    assert_quantity_allclose(axes.scale, [-1.0, 1.0] * u.arcsec, rtol=1e-6)
    # The reference pixel (CRPIX 65, 1-based) lies half a pixel up and right of the map's middle
    # (63.5, 0-based), so the reference position reads +-0.5" on the axes; astropy agrees.
    reference = SkyCoord(header["CRVAL1"], header["CRVAL2"], unit="deg", frame=axes.centre.frame)
    east, north = axes.centre.spherical_offsets_to(reference)
    assert_quantity_allclose(u.Quantity(axes.offsets(64, 64)), u.Quantity([east, north]), atol=1e-3 * u.arcsec)
    assert_quantity_allclose(u.Quantity(axes.offsets(64, 64)), [-1.0, 1.0] * u.arcsec * 0.5, atol=1e-3 * u.arcsec)


@pytest.mark.parametrize("ticks, decimals", [([-10.0, 0.0, 10.0], 0), ([-25.0, 0.0, 25.0], 0), ([-2.5, 0.0, 2.5], 1),
                                             ([0.02, 0.04, 0.06], 2), ([-0.25, 0.0, 0.25], 2), ([3.0], 0)])
def test_tick_labels_carry_just_enough_decimals(ticks, decimals):
    assert tick_decimals(ticks) == decimals
    # Written with that many decimals every tick reads back exactly (hand-checkable values).
    assert [float(f"{t:.{decimals}f}") for t in ticks] == ticks
