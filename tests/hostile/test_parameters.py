"""Hostile corpus, parameters (#14): windows, line-free ranges, orders, redshifts, rest frequencies, clips,
regions and check options. Each case gives a CubeloupeError naming the value, or a documented warning and the
right answer; the input cube is never changed and nothing is written (the ``sandbox`` fixture checks both).
"""

import re
import warnings

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from numpy.testing import assert_allclose
from regions import (
    CircleSkyRegion, CirclePixelRegion, PixCoord, PointPixelRegion, PolygonPixelRegion, RectanglePixelRegion,
)

from cubefactory import gaussian_profile
from cubeloupe.analysis import (
    FitError,
    LineFreeOverlapWarning,
    ParameterError,
    PartialRegionWarning,
    RedshiftError,
    RegionError,
    SpectralAxisError,
    SpectralRangeError,
    UndefinedErrorWarning,
    UnitMismatchError,
    WindowClippedWarning,
    check_cube,
    measure_line,
    moment_maps,
    open_cube,
    region_spectrum,
)
from cubeloupe.analysis.baseline import as_spectrum

from conftest import CO21

KMS = u.km / u.s
REST = CO21 * u.Hz
# A noiseless Gaussian line of peak 1 Jy and sigma 50 km/s on -1000..1000 km/s in 5 km/s channels:
# its integral is A sigma sqrt(2 pi) (the Gaussian integral) = 125.33 Jy km/s.
VELOCITY = np.linspace(-1000, 1000, 401) * KMS
GAUSSIAN_FLUX = 1.0 * 50.0 * np.sqrt(2 * np.pi)


def gaussian_spectrum():
    return as_spectrum(gaussian_profile(VELOCITY.value, 1.0, 0.0, 50.0) * u.Jy, spectral_axis=VELOCITY)


@pytest.fixture
def cube(sandbox):
    return open_cube(sandbox.cube())


# --- the same input, the same treatment in measure_line and moment_maps --------------------------------------

def test_window_beyond_the_band_warns_in_measure_line_and_gives_the_clipped_answer(sandbox):
    spec = gaussian_spectrum()
    with pytest.warns(WindowClippedWarning, match=r"\(-2000, 300\) km / s.*-1000 to 300 km / s"):
        clipped = measure_line(spec, (-2000, 300) * KMS, line_free=[(500, 1000)] * KMS, order=0)
    inside = measure_line(spec, (-1000, 300) * KMS, line_free=[(500, 1000)] * KMS, order=0)
    assert clipped.flux == inside.flux and clipped.n_channels == inside.n_channels
    assert_allclose(clipped.flux.to_value(u.Jy * KMS), GAUSSIAN_FLUX, rtol=1e-6)  # the Gaussian integral


def test_window_beyond_the_band_warns_in_moment_maps_and_gives_the_clipped_answer(cube):
    with pytest.warns(WindowClippedWarning, match=r"\(-100, 10\) km / s.*only its part inside"):
        clipped = moment_maps(cube, (-100, 10) * KMS, rest_frequency=REST)
    band_low = cube.spectral_axis.to(KMS, equivalencies=u.doppler_radio(REST)).min()
    inside = moment_maps(cube, u.Quantity([band_low, 10 * KMS]), rest_frequency=REST)
    assert np.array_equal(clipped.m0.value, inside.m0.value, equal_nan=True)


def test_line_free_inside_the_window_warns_in_measure_line_and_is_left_out(sandbox):
    spec = gaussian_spectrum()
    with pytest.warns(LineFreeOverlapWarning, match=r"lie inside the window.*are left out"):
        overlapping = measure_line(spec, (-300, 300) * KMS, line_free=[(-1000, -200), (500, 1000)] * KMS, order=1)
    outside = measure_line(spec, (-300, 300) * KMS, line_free=[(-1000, -305), (500, 1000)] * KMS, order=1)
    assert overlapping.flux == outside.flux and overlapping.flux_error == outside.flux_error


def test_line_free_inside_the_window_warns_in_moment_maps_and_is_left_out(cube):
    with pytest.warns(LineFreeOverlapWarning, match=r"lie inside the window.*are left out"):
        overlapping = moment_maps(cube, (-10, 10) * KMS, line_free=[(-25, -5), (15, 25)] * KMS, order=0,
                                  rest_frequency=REST)
    outside = moment_maps(cube, (-10, 10) * KMS, line_free=[(-25, -10.7), (15, 25)] * KMS, order=0,
                          rest_frequency=REST)
    assert overlapping.n_line_free == outside.n_line_free
    assert np.array_equal(overlapping.m0_error.value, outside.m0_error.value, equal_nan=True)


@pytest.mark.parametrize("function", ["measure_line", "moment_maps"])
def test_line_free_wholly_inside_the_window_is_refused_alike(cube, function):
    window, line_free = (-10, 10) * KMS, (-5, 5) * KMS
    with pytest.raises(SpectralRangeError, match=r"leave 0 channel\(s\) outside the window"):
        if function == "moment_maps":
            moment_maps(cube, window, line_free=line_free, rest_frequency=REST)
        else:
            spectrum = region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 4))
            measure_line(spectrum, window, line_free=line_free, rest_frequency=REST)


def test_no_channel_outside_the_window_warns_that_the_error_is_undefined():
    with pytest.warns(UndefinedErrorWarning, match="no valid channel lies outside the window.*flux_error"):
        line = measure_line(gaussian_spectrum(), (-1000, 1000) * KMS)
    assert np.isnan(line.flux_error) and np.isnan(line.snr)
    assert_allclose(line.flux.to_value(u.Jy * KMS), GAUSSIAN_FLUX, rtol=1e-6)  # the flux itself is defined


def test_all_zero_spectrum_warns_that_the_noise_is_zero():
    # The rule for all-zero data (docs: "All-zero and constant data"): measured, never called significant.
    zero = as_spectrum(np.zeros(401) * u.Jy, spectral_axis=VELOCITY)
    with pytest.warns(UndefinedErrorWarning, match="exactly 0"):
        line = measure_line(zero, (-300, 300) * KMS)
    assert line.flux.value == 0 and np.isnan(line.snr)


def test_infinite_window_is_the_whole_band():
    with pytest.warns(WindowClippedWarning), pytest.warns(UndefinedErrorWarning):
        line = measure_line(gaussian_spectrum(), (-np.inf, np.inf) * KMS)
    assert line.n_channels == VELOCITY.size


# --- refusals that name the value ------------------------------------------------------------------------------

@pytest.mark.parametrize("kwargs, error, match", [
    (dict(window=(2000, 3000) * KMS), SpectralRangeError, r"\(2000, 3000\) km / s selects no channel"),
    (dict(window=(np.nan, 300) * KMS), SpectralRangeError, r"nan.*selects no channel"),
    (dict(window=(-300, 300)), UnitMismatchError, "must be a Quantity"),
    (dict(window=(-300, 300) * u.Jy), UnitMismatchError, "Jy"),
    (dict(window=[1, 2, 3] * KMS), SpectralRangeError, r"got shape \(3,\)"),
    (dict(window=(-300, 300) * KMS, line_free=[(990, 1000)] * KMS, order=3), SpectralRangeError, "at least 5"),
    (dict(window=(-300, 300) * KMS, line_free=[(500, 900)] * KMS, order=-1), FitError, "order -1"),
    (dict(window=(-300, 300) * KMS, line_free=[(500, 900)] * KMS, order=2.5), FitError, "order 2.5"),
    (dict(window=(-300, 300) * KMS, line_free=[(500, 900)] * KMS, order=6), FitError, "order 6"),
    (dict(window=(-300, 300) * KMS, line_free=[(500, 900)] * KMS, order=True), FitError, "order True"),
    (dict(window=(-300, 300) * KMS, line_free=[(500, 900)] * KMS, order="1"), FitError, "order '1'"),
    (dict(window=(-300, 300) * KMS, z=-1), RedshiftError, "z=-1"),
    (dict(window=(-300, 300) * KMS, z=np.nan), RedshiftError, "z=nan"),
    (dict(window=(-300, 300) * KMS, z=np.inf), RedshiftError, "z=inf"),
    (dict(window=(-300, 300) * KMS, z=1e300), RedshiftError, "z=1e"),
    (dict(window=(-300, 300) * KMS, z="0.1"), RedshiftError, "'0.1'"),
    (dict(window=(-300, 300) * KMS, z=None), RedshiftError, "None"),
    (dict(window=(-300, 300) * KMS, rest_frequency=230 * KMS), UnitMismatchError, "rest_frequency"),
    (dict(window=(-300, 300) * KMS, rest_frequency=230.5), UnitMismatchError, "rest_frequency"),
    (dict(window=(-300, 300) * KMS, rest_frequency=-1 * u.GHz), UnitMismatchError, "-1.0 GHz"),
    (dict(window=(-300, 300) * KMS, rest_frequency=0 * u.GHz), UnitMismatchError, "0.0 GHz"),
    (dict(window=(-300, 300) * KMS, rest_frequency=np.nan * u.GHz), UnitMismatchError, "nan GHz"),
    (dict(window=(-300, 300) * KMS, rest_frequency=np.inf * u.GHz), UnitMismatchError, "inf GHz"),
    (dict(window=(-300, 300) * KMS, convention="doppler"), SpectralAxisError, "'doppler'"),
    (dict(window=(-300, 300) * KMS, convention=None), SpectralAxisError, "None"),
])
def test_measure_line_refuses_bad_parameters_by_name(sandbox, kwargs, error, match):
    with pytest.raises(error, match=match):
        measure_line(gaussian_spectrum(), **kwargs)


@pytest.mark.parametrize("clip, match", [(np.nan, "nan"), (np.inf, "inf"), (-1, "-1"), (True, "True"),
                                         ("3", "'3'")])
def test_moment_clip_must_be_a_finite_non_negative_number(cube, clip, match):
    with pytest.raises(SpectralRangeError, match=f"clip={match}"):
        moment_maps(cube, (-10, 10) * KMS, line_free=[(-25, -15), (15, 25)] * KMS, rest_frequency=REST, clip=clip)


@pytest.mark.parametrize("threshold", [np.inf, 1e300, np.nan, -1.0, 0.0, True, "5"])
def test_check_threshold_must_be_finite_and_in_range(cube, threshold):
    with pytest.raises(ParameterError, match=r"threshold must be a finite number.*got " + re.escape(repr(threshold))):
        check_cube(cube, threshold=threshold)


@pytest.mark.parametrize("false_alarms", [np.inf, np.nan, -0.1, 0.0])
def test_check_false_alarms_must_be_finite_and_positive(cube, false_alarms):
    with pytest.raises(ParameterError, match=r"false_alarms.*got " + re.escape(repr(false_alarms))):
        check_cube(cube, false_alarms=false_alarms)


@pytest.mark.parametrize("z", [1e300, np.inf, -1.0])
def test_check_redshift_in_range(cube, z):
    with pytest.raises(RedshiftError, match="z="):
        check_cube(cube, z=z)


# --- regions -----------------------------------------------------------------------------------------------------

def test_huge_region_is_the_whole_image_with_a_warning(cube):
    everything = np.ones(cube.shape[1:], dtype=bool)
    with pytest.warns(PartialRegionWarning, match="partly outside"):
        huge = region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 5000))
    whole = region_spectrum(cube, everything)
    assert huge.meta["n_pixels"] == everything.size
    assert_allclose(huge.value, whole.value, rtol=1e-12)


def test_degree_wide_sky_region_on_fine_pixels_is_the_whole_image(cube):
    # 0.25-arcsec pixels (test factory): a 1-degree circle is 14 400 pixels in radius.
    centre = SkyCoord(150.0, 2.0, unit="deg")
    with pytest.warns(PartialRegionWarning):
        sky = region_spectrum(cube, CircleSkyRegion(centre, 1 * u.deg))
    assert sky.meta["n_pixels"] == cube.shape[1] * cube.shape[2]


def test_huge_region_agrees_with_regions_own_mask(cube):
    """Only the overlap is rasterised; the pixels are those regions' to_mask(mode="center") selects."""
    region = CirclePixelRegion(PixCoord(-1500.3, 7.2), 1510.0)  # bounding box > 4 million pixels
    with pytest.warns(PartialRegionWarning):
        spectrum = region_spectrum(cube, region)
    full = region.to_mask(mode="center").to_image(cube.shape[1:]).astype(bool)  # the regions package
    assert spectrum.meta["n_pixels"] == int(full.sum())
    assert_allclose(spectrum.value, region_spectrum(cube, full).value, rtol=1e-12)


@pytest.mark.parametrize("region, match", [
    (CirclePixelRegion(PixCoord(500, 500), 3), "wholly outside.*16 x 16"),
    (PointPixelRegion(PixCoord(5, 5)), "has no area"),
    (np.ones((3, 3), dtype=bool), r"\(16, 16\).*got \(3, 3\)"),
    (np.ones((16, 16)), "boolean array.*float64"),
    (np.zeros((16, 16), dtype=bool), "selects no pixel"),
    (CirclePixelRegion(PixCoord(np.nan, 5), 3), "nan"),
    (RectanglePixelRegion(PixCoord(5.3, 5.3), 0.1, 0.1), "no pixel centre"),
    (PolygonPixelRegion(PixCoord([1, 2, 3], [1, 2, 3])), "no pixel centre"),
    ("circle(5, 5, 3)", "unsupported region 'circle"),
])
def test_bad_regions_are_named(cube, region, match):
    with pytest.raises(RegionError, match=match):
        region_spectrum(cube, region)


@pytest.mark.parametrize("statistic", ["mode", "", "Flux"])
def test_unknown_statistic(cube, statistic):
    with pytest.raises(RegionError, match=f"unknown statistic {statistic!r}"):
        region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3), statistic=statistic)


def test_warnings_are_classes_users_can_filter():
    # A caller who accepts clipping silences exactly that warning (spectral-cube's habit, STYLE.md).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", WindowClippedWarning)
        warnings.simplefilter("ignore", UndefinedErrorWarning)
        line = measure_line(gaussian_spectrum(), (-5000, 5000) * KMS)
    assert line.n_channels == VELOCITY.size
