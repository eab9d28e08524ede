"""Region spectra: fluxes of known sources, agreement with spectral-cube, and refusals of bad regions."""

import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from numpy.testing import assert_allclose
from radio_beam import Beam
from regions import (
    CirclePixelRegion,
    CircleSkyRegion,
    EllipsePixelRegion,
    EllipseSkyRegion,
    PixCoord,
    PointPixelRegion,
    PolygonPixelRegion,
    PolygonSkyRegion,
    RectanglePixelRegion,
    RectangleSkyRegion,
)
from spectral_cube.lower_dimensional_structures import OneDSpectrum

from cubefactory import file_digest
from cubeloupe.analysis import (
    BeamError,
    BlankedDataWarning,
    PartialRegionWarning,
    PolarisationError,
    PolarisationWarning,
    RegionError,
    UnitMismatchError,
    open_cube,
    region_spectrum,
)
from cubeloupe.analysis.errors import MissingUnitWarning

PIXEL = 0.25  # arcsec


def beam_image(shape, x0, y0, bmaj, bmin, bpa_deg, pixel=PIXEL):
    """Unit-peak elliptical Gaussian (FWHMs in arcsec) at pixel (x0, y0).

    PA runs from north through east; with RA increasing to -x (CDELT1 < 0)
    east is -x (FITS/AIPS convention, Greisen & Calabretta 2002).
    """
    ny, nx = shape
    y, x = np.mgrid[0:ny, 0:nx].astype(float)
    east, north = -(x - x0) * pixel, (y - y0) * pixel
    pa = np.deg2rad(bpa_deg)
    along = east * np.sin(pa) + north * np.cos(pa)
    across = east * np.cos(pa) - north * np.sin(pa)
    fwhm_to_sigma = 1 / np.sqrt(8 * np.log(2))  # Gaussian FWHM = sqrt(8 ln 2) sigma
    return np.exp(-0.5 * ((along / (bmaj * fwhm_to_sigma)) ** 2 + (across / (bmin * fwhm_to_sigma)) ** 2))


def test_point_source_flux_recovered(cube_path):
    # A point source of flux S appears in a Jy/beam map as the beam with peak
    # S Jy/beam (common practice), so the region flux must give back S.
    fluxes = np.array([0.5, 2.0, 7.5])
    beam = (1.2, 0.8, 30.0)
    image = beam_image((48, 48), 23.0, 25.0, *beam)
    cube = open_cube(cube_path(fluxes[:, None, None] * image, beam=beam))
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(23, 25), radius=15))
    assert isinstance(spec, OneDSpectrum)
    assert spec.unit == u.Jy
    assert spec.meta["statistic"] == "flux"
    assert_allclose(spec.value, fluxes, rtol=1e-4)
    assert_allclose(spec.spectral_axis.to_value(u.Hz), cube.spectral_axis.to_value(u.Hz))


def test_point_source_flux_with_per_channel_beams(cube_path):
    fluxes = np.array([1.0, 1.0, 3.0, 3.0])
    rows = [(0.8, 0.6, 0.0), (1.4, 1.0, 45.0), (1.0, 1.0, 0.0), (2.0, 1.1, 80.0)]
    data = np.array([s * beam_image((64, 64), 32, 31, *row) for s, row in zip(fluxes, rows)])
    cube = open_cube(cube_path(data, beams=rows))
    spec = region_spectrum(cube, RectanglePixelRegion(PixCoord(32, 31), width=50, height=50))
    # Dividing by each channel's own beam area recovers the flux in every channel.
    assert_allclose(spec.value, fluxes, rtol=1e-4)
    assert spec.meta["beam_area_pixels"].shape == (4,)


def test_jy_per_pixel_flux_is_the_sum(cube_path, rng):
    data = rng.uniform(0, 1, (3, 10, 12))
    cube = open_cube(cube_path(data, bunit="Jy/pixel"))
    mask = np.zeros((10, 12), bool)
    mask[2:5, 3:9] = True
    spec = region_spectrum(cube, mask)
    assert spec.unit == u.Jy
    assert_allclose(spec.value, data[:, mask].sum(axis=1), rtol=1e-6)
    assert spec.meta["n_pixels"] == 18


def test_kelvin_cube_default_is_mean_and_flux_uses_rayleigh_jeans(cube_path):
    beam = (1.0, 1.0, 0.0)
    s_jy = 2.0
    image = s_jy * beam_image((40, 40), 20, 20, *beam)
    nu = 230.538 * u.GHz  # channel 0 of the factory's FREQ axis
    # Convert the Jy/beam map to K with astropy's Rayleigh-Jeans equivalency.
    kelvin = (image * u.Jy / u.beam).to(u.K, u.brightness_temperature(nu, beam_area=Beam(1 * u.arcsec).sr)).value
    cube = open_cube(cube_path(kelvin[None], bunit="K", beam=beam))
    region = CirclePixelRegion(PixCoord(20, 20), radius=12)
    mean = region_spectrum(cube, region)
    assert mean.meta["statistic"] == "mean" and mean.unit == u.K
    inside = region.to_mask().to_image((40, 40)).astype(bool)
    assert_allclose(mean.value, kelvin[inside].mean(), rtol=1e-6)
    flux = region_spectrum(cube, region, statistic="flux")
    assert flux.unit == u.Jy
    assert_allclose(flux.value, s_jy, rtol=1e-4)


@pytest.mark.parametrize("region", [
    CirclePixelRegion(PixCoord(9.3, 11.6), radius=4.2),
    EllipsePixelRegion(PixCoord(12, 10), width=9, height=5, angle=30 * u.deg),
    RectanglePixelRegion(PixCoord(10.5, 10.5), width=6, height=4, angle=15 * u.deg),
    PolygonPixelRegion(PixCoord([3, 15, 12, 4], [2, 4, 16, 13])),
])
@pytest.mark.parametrize("statistic", ["mean", "sum", "median", "max"])
def test_pixel_shapes_agree_with_spectral_cube(cube_path, rng, region, statistic):
    data = rng.normal(0, 1, (5, 20, 24))
    cube = open_cube(cube_path(data))
    spec = region_spectrum(cube, region, statistic=statistic)
    sub = cube.subcube_from_regions([region])  # spectral-cube's own region extraction
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference = getattr(sub, statistic)(axis=(1, 2))
    # spectral-cube accumulates in float32; cubeloupe in float64.
    assert_allclose(spec.value, reference.value, rtol=1e-5, atol=1e-5)
    assert spec.unit == cube.unit
    assert spec.meta["n_pixels"] == int(np.isfinite(sub.filled_data[0].value).sum())


def _sky(cube, x, y):
    return SkyCoord.from_pixel(x, y, cube.wcs.celestial)


@pytest.mark.parametrize("make_sky_region", [
    lambda c: CircleSkyRegion(_sky(c, 10, 9), radius=1.1 * u.arcsec),
    lambda c: EllipseSkyRegion(_sky(c, 11, 10), width=2 * u.arcsec, height=1 * u.arcsec, angle=20 * u.deg),
    lambda c: RectangleSkyRegion(_sky(c, 12, 8), width=1.5 * u.arcsec, height=2.5 * u.arcsec),
    lambda c: PolygonSkyRegion(_sky(c, [3, 15, 12, 4], [2, 4, 16, 13])),
])
def test_sky_shapes_agree_with_spectral_cube(cube_path, rng, make_sky_region):
    cube = open_cube(cube_path(rng.normal(0, 1, (4, 20, 24))))
    region = make_sky_region(cube)
    spec = region_spectrum(cube, region, statistic="mean")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference = cube.subcube_from_regions([region]).mean(axis=(1, 2))
    assert_allclose(spec.value, reference.value, rtol=1e-6)
    # The same pixels as the region placed with the cube's celestial WCS.
    pixel_spec = region_spectrum(cube, region.to_pixel(cube.wcs.celestial), statistic="mean")
    assert_allclose(spec.value, pixel_spec.value)


def test_mask_region_equals_shape_region(cube_path, rng):
    cube = open_cube(cube_path(rng.normal(0, 1, (3, 16, 16))))
    region = CirclePixelRegion(PixCoord(7, 8), radius=3.5)
    mask = region.to_mask().to_image((16, 16)).astype(bool)
    assert_allclose(region_spectrum(cube, mask).value, region_spectrum(cube, region).value)


def test_rectangle_pixel_count_by_hand(cube_path):
    cube = open_cube(cube_path(np.ones((2, 20, 20))))
    # Edges at 8.5 and 12.5: pixel centres 9..12 in x and y are inside, 4 x 4 = 16.
    spec = region_spectrum(cube, RectanglePixelRegion(PixCoord(10.5, 10.5), width=4, height=4), statistic="sum")
    assert spec.meta["n_pixels"] == 16
    assert_allclose(spec.value, 16.0)


def test_nan_pixels_are_left_out_and_reported(cube_path, rng):
    data = rng.normal(5, 1, (4, 12, 12))
    data[:, :, :3] = np.nan  # a NaN-blanked edge
    data[2, 5, 5] = np.nan
    cube = open_cube(cube_path(data))
    region = RectanglePixelRegion(PixCoord(4.5, 5.5), width=6, height=6)
    inside = region.to_mask().to_image((12, 12)).astype(bool)
    mean = region_spectrum(cube, region, statistic="mean")
    assert_allclose(mean.value, np.nanmean(data[:, inside], axis=1), rtol=1e-6)
    with pytest.warns(BlankedDataWarning, match="blanked"):
        total = region_spectrum(cube, region, statistic="sum")
    assert_allclose(total.value, np.nansum(data[:, inside], axis=1), rtol=1e-6)
    # Pixel centres x = 2..7, y = 3..8 (36); column x = 2 is blanked; one more NaN in channel 2.
    assert list(total.meta["n_valid"]) == [30, 30, 29, 30]


def test_all_nan_channel_is_nan_in_spectrum(cube_path, rng):
    data = rng.normal(0, 1, (4, 10, 10))
    data[1] = np.nan
    cube = open_cube(cube_path(data))
    with pytest.warns(BlankedDataWarning, match="1 channel"):
        spec = region_spectrum(cube, CirclePixelRegion(PixCoord(5, 5), radius=3))
    assert np.isnan(spec.value[1]) and np.isfinite(spec.value[[0, 2, 3]]).all()


def test_all_nan_region_is_an_error(cube_path, rng):
    data = rng.normal(0, 1, (4, 10, 10))
    data[:, :4, :4] = np.nan
    cube = open_cube(cube_path(data))
    with pytest.raises(RegionError, match="only blanked"):
        region_spectrum(cube, RectanglePixelRegion(PixCoord(1.5, 1.5), width=3, height=3))


def test_cube_mask_is_applied(cube_path, rng):
    data = rng.normal(0, 1, (5, 14, 14))
    cube = open_cube(cube_path(data))
    cube = cube.with_mask(cube > 0 * cube.unit)  # keep positive voxels only
    region = CirclePixelRegion(PixCoord(7, 7), radius=5)
    spec = region_spectrum(cube, region, statistic="mean")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        reference = cube.subcube_from_regions([region]).mean(axis=(1, 2))
    assert_allclose(spec.value, reference.value, rtol=1e-6)
    assert (spec.value > 0).all()


def test_partly_outside_region_uses_the_inside_part(cube_path, rng):
    data = rng.normal(0, 1, (3, 10, 10))
    cube = open_cube(cube_path(data))
    with pytest.warns(PartialRegionWarning, match="partly outside"):
        spec = region_spectrum(cube, RectanglePixelRegion(PixCoord(0, 0), width=4.9, height=4.9), statistic="mean")
    # Inside: pixel centres 0..2 in x and y (-2 and -1 are off the image).
    assert spec.meta["n_pixels"] == 9
    assert_allclose(spec.value, data[:, :3, :3].mean(axis=(1, 2)), rtol=1e-6)



def test_region_far_larger_than_the_image_is_rasterised_over_the_overlap(cube_path, rng):
    """Regression test for #14: a 3000-pixel circle on a 10 x 10 image is read over the image only."""
    from cubeloupe.analysis.spectra import region_pixels

    data = rng.normal(0, 1, (3, 10, 10))
    cube = open_cube(cube_path(data))
    region = CirclePixelRegion(PixCoord(4.5, 4.5), radius=3000)
    box, inside, n_outside = region_pixels(cube, region)
    assert box == (slice(0, 10), slice(0, 10)) and inside.all()
    # Off the image: the circle's area pi r^2 (in pixels) less the 100 inside, the documented estimate.
    assert n_outside == round(np.pi * 3000**2) - 100
    with pytest.warns(PartialRegionWarning, match=f"{n_outside} of {n_outside + 100} pixels"):
        spec = region_spectrum(cube, region, statistic="mean")
    assert_allclose(spec.value, data.mean(axis=(1, 2)), rtol=1e-6)

@pytest.mark.parametrize("region, match", [
    (CirclePixelRegion(PixCoord(-20, 5), radius=3), "wholly outside"),
    (CirclePixelRegion(PixCoord(5, 60), radius=3), "wholly outside"),
    (CirclePixelRegion(PixCoord(4.5, 4.5), radius=0.2), "no pixel centre"),
    (PointPixelRegion(PixCoord(4, 4)), "no area"),
    (np.zeros((10, 10), bool), "selects no pixel"),
    (np.ones((9, 10), bool), "image shape"),
    (np.ones((10, 10), int), "boolean"),
    ("a circle", "unsupported region"),
])
def test_bad_regions(cube_path, region, match):
    cube = open_cube(cube_path(np.ones((3, 10, 10))))
    with pytest.raises(RegionError, match=match):
        region_spectrum(cube, region)


def test_sky_region_far_away_is_wholly_outside(cube_path):
    cube = open_cube(cube_path(np.ones((3, 10, 10))))
    far = CircleSkyRegion(SkyCoord(150.1 * u.deg, 2.0 * u.deg), radius=1 * u.arcsec)
    with pytest.raises(RegionError, match="outside"):
        region_spectrum(cube, far)


def test_unknown_statistic(cube_path):
    cube = open_cube(cube_path(np.ones((3, 10, 10))))
    with pytest.raises(RegionError, match="unknown statistic 'average'"):
        region_spectrum(cube, CirclePixelRegion(PixCoord(5, 5), radius=2), statistic="average")


def test_jy_per_beam_without_beam_says_how_to_pass_one(cube_path):
    cube = open_cube(cube_path(np.ones((3, 10, 10)), beam=None))
    region = CirclePixelRegion(PixCoord(5, 5), radius=2)
    with pytest.raises(BeamError, match=r"with_beam\(Beam\(.*raise_error_jybm=False"):
        region_spectrum(cube, region)
    # The mean needs no beam, and following the advice makes the flux work.
    assert region_spectrum(cube, region, statistic="mean").unit == u.Jy / u.beam
    fixed = cube.with_beam(Beam(1 * u.arcsec), raise_error_jybm=False)
    assert region_spectrum(fixed, region).unit == u.Jy


def test_flux_of_unitless_cube_is_refused(cube_path):
    with pytest.warns(MissingUnitWarning):
        cube = open_cube(cube_path(np.ones((3, 10, 10)), bunit=None))
    with pytest.raises(UnitMismatchError, match="Jy/beam, Jy/pixel or K"):
        region_spectrum(cube, CirclePixelRegion(PixCoord(5, 5), radius=2), statistic="flux")
    assert region_spectrum(cube, CirclePixelRegion(PixCoord(5, 5), radius=2)).meta["statistic"] == "mean"


class RecordingArray:
    """Stands in for the memory-mapped data and records every slice read."""

    def __init__(self, array):
        self.array, self.keys = array, []
        self.shape, self.dtype, self.ndim = array.shape, array.dtype, array.ndim

    def __getitem__(self, key):
        self.keys.append(key)
        return self.array[key]


def test_only_the_bounding_box_is_read(cube_path, rng):
    cube = open_cube(cube_path(rng.normal(0, 1, (6, 40, 50))))
    expected = region_spectrum(cube, CirclePixelRegion(PixCoord(20, 30), radius=3)).value
    recorder = RecordingArray(cube._data)
    cube._data = recorder
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(20, 30), radius=3))
    assert_allclose(spec.value, expected)
    assert len(recorder.keys) == 1
    _, ys, xs = recorder.keys[0]
    assert (ys.start, ys.stop, xs.start, xs.stop) == (27, 34, 17, 24)


def test_dask_backed_cube_gives_the_same_spectrum(cube_path, rng):
    path = cube_path(rng.normal(0, 1, (5, 20, 20)))
    region = EllipsePixelRegion(PixCoord(9, 11), width=8, height=5, angle=40 * u.deg)
    plain = region_spectrum(open_cube(path), region)
    lazy = region_spectrum(open_cube(path, use_dask=True), region)
    assert_allclose(lazy.value, plain.value, rtol=1e-12)


def test_mean_spectrum_keeps_the_beam(cube_path, rng):
    cube = open_cube(cube_path(rng.normal(0, 1, (3, 10, 10)), beam=(1.5, 1.0, 10.0)))
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(5, 5), radius=2), statistic="mean")
    assert spec.beam == cube.beam


def test_input_file_unchanged_by_every_operation(cube_path, rng):
    from cubeloupe.analysis import beam_area_pixels, fit_baseline, measure_line

    v = np.arange(40)
    line = np.exp(-0.5 * ((v - 20) / 3.0) ** 2)
    data = line[:, None, None] * beam_image((16, 16), 8, 8, 1.0, 1.0, 0.0) + rng.normal(0, 0.01, (40, 16, 16))
    path = cube_path(data)
    before = file_digest(path)
    cube = open_cube(path)
    beam_area_pixels(cube)
    spec = region_spectrum(cube, CirclePixelRegion(PixCoord(8, 8), radius=5))
    region_spectrum(cube, CirclePixelRegion(PixCoord(8, 8), radius=5), statistic="median")
    rest = 230.538 * u.GHz
    # Channel k is at 1.3 k km/s (1 MHz channels at 230.538 GHz); the line sits at channel 20.
    fit_baseline(spec, [(0, 12), (40, 52)] * u.km / u.s, order=1, rest_frequency=rest)
    measure_line(spec, (16, 36) * u.km / u.s, line_free=[(0, 12), (40, 52)] * u.km / u.s, rest_frequency=rest)
    del cube, spec
    assert file_digest(path) == before


def test_flux_of_a_lone_stokes_q_plane_is_refused_unless_asked(cube_path):
    # CRVAL4 = 2 on a STOKES axis is Q (Greisen & Calabretta 2002, A&A 395, 1061, Table 7): a flux
    # density of Q is not the source's flux, so it is refused unless asked for (#13).
    beam = (1.2, 0.8, 30.0)
    data = np.array([0.5, 2.0])[:, None, None] * beam_image((32, 32), 15.0, 16.0, *beam)
    with pytest.warns(PolarisationWarning):
        q_cube = open_cube(cube_path(data, name="plane_q.fits", beam=beam, stokes=True, extra={"CRVAL4": 2.0}))
    region = CirclePixelRegion(PixCoord(15, 16), radius=10)
    with pytest.raises(PolarisationError, match=r"plane_q\.fits.*Stokes Q.*allow_polarisation=True"):
        region_spectrum(q_cube, region)
    # Asked for, it is the same sum over the beam as for a total-intensity plane of the same values.
    i_cube = open_cube(cube_path(data, name="plane_i.fits", beam=beam, stokes=True))
    asked = region_spectrum(q_cube, region, allow_polarisation=True)
    assert_allclose(asked.value, region_spectrum(i_cube, region).value, rtol=1e-12)
    assert_allclose(asked.value, [0.5, 2.0], rtol=1e-3)  # point-source fluxes (common practice)
    # Brightness statistics in the cube's own unit are not fluxes: they stay allowed.
    assert region_spectrum(q_cube, region, statistic="mean").unit == u.Jy / u.beam
