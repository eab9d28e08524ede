"""Reading real observed cubes: header conventions, axes, units, beams, blanking and where the line is.

The cubes and their provenance are in ``../shared/real-cubes/SOURCES.md`` (from
the repository root); these tests skip, saying so, where that folder is absent
(a fresh clone). Every expected value is worked out from the header by hand in
the comment beside it, or computed from the data with astropy and numpy
directly, never taken from cubeloupe's own output.

What an observer sees in them (read off channel sums made with numpy):

* ``co10_ngc4047_carma.fits`` (CARMA, CO J=1-0, a nearby spiral galaxy):
  the galaxy's CO emission from 3260 to 3540 km/s in channels of 20 km/s
  (0.3-0.7 Jy in a 40 arcsec box on the galaxy), the broad flat-topped
  profile of a rotating disk; line-free channels at
  both ends have an rms near 0.02 Jy/beam; a blanked border covers 37 % of
  every channel.
* ``l1448_13co.fits`` (single dish, 13CO, a nearby molecular cloud): extended
  emission over most of the field in every channel of its narrow 2.5-6.0 km/s
  band, brightest near 4.3 km/s; no blanks.
"""

import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose
from numpy.testing import assert_allclose
from regions import PixCoord, RectanglePixelRegion

from cubeloupe.analysis import (
    MissingUnitWarning,
    SpectralAxisError,
    cube_rest_frequency,
    cube_source,
    fit_baseline,
    frequency_axis,
    measure_line,
    moment_maps,
    open_cube,
    region_spectrum,
)

REAL = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"
CARMA = REAL / "co10_ngc4047_carma.fits"
L1448 = REAL / "l1448_13co.fits"
C_KMS = 299792.458  # speed of light, km/s (exact, SI definition)
KMS = u.km / u.s

needs_real = pytest.mark.skipif(not REAL.is_dir(), reason=f"real cubes not found at {REAL} "
                                "(../shared/real-cubes from the repository root); see SOURCES.md there")


def stored(path):
    """The file's data as astropy reads them (float64, Stokes axis dropped): the independent reference."""
    with fits.open(path) as hdul, warnings.catch_warnings():
        warnings.simplefilter("ignore")  # astropy's note about BLANK on float data
        data = np.asarray(hdul[0].data, dtype=float)
    return data[0] if data.ndim == 4 else data


def whole_field(shape):
    ny, nx = shape[-2:]
    return RectanglePixelRegion(PixCoord((nx - 1) / 2, (ny - 1) / 2), nx, ny)


# --- CARMA CO(1-0): VRAD with VELREF = 257, RESTFREQ, 'JY/BEAM ', BLANK on float data ------------

@needs_real
def test_carma_axis_is_radio_lsrk_from_its_own_keywords():
    cube = open_cube(CARMA)
    # CTYPE3 = 'VRAD' with no CUNIT3: m/s by the FITS default (Greisen et al. 2006, A&A 446, 747);
    # CRVAL3 = 2.98e6, CDELT3 = 2e4, CRPIX3 = 1, so channel k (0-based) is at 2980 + 20 k km/s,
    # 2980 to 3840 km/s over the 44 channels.
    assert cube.shape == (44, 128, 128)
    assert_allclose(cube.spectral_axis.to_value(KMS), 2980 + 20 * np.arange(44), rtol=1e-12)
    read = cube_source(cube)["spectral_axis"]
    # VELREF = 257 = 1 (LSR) + 256 (radio) (AIPS Memo 27), consistent with VRAD; SPECSYS = 'LSRK'.
    assert (read["header_ctype"], read["read_as"], read["convention"], read["frame"], read["assumed"]) == \
        ("VRAD", "VRAD", "radio", "LSRK", False)
    assert "VELREF = 257" in read["basis"]
    # RESTFREQ = 1.15271204E+11 Hz, the AIPS spelling of RESTFRQ.
    assert_quantity_allclose(cube_rest_frequency(cube), 115.271204 * u.GHz)
    assert read["rest_frequency_basis"].startswith("RESTFREQ")
    # Radio convention: f = f0 (1 - v / c) (Greisen et al. 2006, Table 1):
    # channel 0 at 115.271204 (1 - 2980 / 299792.458) = 114.125405... GHz.
    freq = cube.with_spectral_unit(u.GHz).spectral_axis.to_value(u.GHz)
    assert_allclose(freq, 115.271204 * (1 - (2980 + 20 * np.arange(44)) / C_KMS), rtol=1e-12)


@needs_real
def test_carma_units_beam_and_notes():
    cube = open_cube(CARMA)
    assert cube.unit == u.Jy / u.beam  # BUNIT = 'JY/BEAM ' (upper case, padded)
    # BMAJ = BMIN = 1.94444449153E-03 deg = 7.0000002 arcsec, BPA = 45 deg.
    assert cube.beam.major.to_value(u.arcsec) == pytest.approx(7.0000002, rel=1e-7)
    assert cube.beam.minor.to_value(u.arcsec) == pytest.approx(7.0000002, rel=1e-7)
    assert cube.beam.pa.to_value(u.deg) == pytest.approx(45.0)
    notes = cube_source(cube)["notes"]
    assert any("BLANK = -1 ignored" in note for note in notes)  # BLANK on BITPIX = -32 data
    assert cube_source(cube)["memory_mapped"]


@needs_real
def test_carma_blanked_border():
    cube = open_cube(CARMA)
    blank = np.isnan(stored(CARMA))
    # 37 % of the pixels of every channel are NaN (SOURCES.md; counted here with numpy).
    assert_allclose(blank.mean(axis=(1, 2)), 0.371, atol=0.002)
    assert np.array_equal(~cube.mask.include(), blank)


@needs_real
def test_carma_region_spectrum_shows_the_galaxy_line():
    cube = open_cube(CARMA)
    data = stored(CARMA)
    # A 40 x 40 pixel box on the galaxy (pixels 44 to 83 in x and y, inside the unblanked field).
    spectrum = region_spectrum(cube, RectanglePixelRegion(PixCoord(63.5, 63.5), 40, 40))
    # Flux density of a Jy/beam map: the pixel sum over the beam area in pixels,
    # pi / (4 ln 2) FWHM^2 / pixel^2 (common practice) = 1.1331 x 7.0000002^2 / 1.0000000381^2.
    beam_pixels = np.pi / (4 * np.log(2)) * 7.0000002**2 / (2.77777788364e-4 * 3600) ** 2
    assert spectrum.unit == u.Jy
    reference = data[:, 44:84, 44:84].sum(axis=(1, 2)) / beam_pixels
    assert_allclose(spectrum.value, reference, rtol=1e-5, atol=1e-6)
    velocity = 2980 + 20 * np.arange(44)
    # What the observer sees in numpy's box spectrum: 0.3-0.7 Jy in every channel from 3260 to
    # 3540 km/s, noise of a few 0.01 Jy elsewhere.
    line = (velocity >= 3260) & (velocity <= 3540)
    free = (velocity <= 3220) | (velocity >= 3580)
    assert reference[line].min() > 5 * reference[free].std()
    assert spectrum.value[line].min() > 5 * spectrum.value[free].std()
    result = measure_line(spectrum, [3250, 3550] * KMS, line_free=[(2980, 3220), (3580, 3840)] * KMS)
    # Centroid of the baseline-free window, from numpy: sum(v S) / sum(S) over the window channels.
    window = (velocity >= 3250) & (velocity <= 3550)
    flux = reference - np.polyval(np.polyfit(velocity[free], reference[free], 1), velocity)
    centroid = np.sum(velocity[window] * flux[window]) / np.sum(flux[window])
    assert 3380 < centroid < 3420
    assert result.centroid.to_value(KMS) == pytest.approx(centroid, abs=1.0)


# --- L1448 13CO: VOPT without rest frequency, no BUNIT, SFL far from the image, no beam ---------------

@needs_real
def test_l1448_axis_is_optical_velocity_without_rest_frequency():
    with pytest.warns(MissingUnitWarning, match="no BUNIT"):
        cube = open_cube(L1448)
    # CTYPE3 = 'VOPT', CUNIT3 = 'm s-1', CRVAL3 = -9959.44378305, CDELT3 = 66.42361, CRPIX3 = -187:
    # channel k (0-based, pixel k + 1) at -9959.44378305 + (k + 188) 66.42361 m/s = 2528.195 m/s + 66.42361 k.
    assert cube.shape == (53, 105, 105)
    assert_allclose(cube.spectral_axis.to_value(u.m / u.s), 2528.19489695 + 66.42361 * np.arange(53), rtol=1e-9)
    read = cube_source(cube)["spectral_axis"]
    assert (read["header_ctype"], read["read_as"], read["convention"], read["frame"]) == \
        ("VOPT", "VOPT", "optical", "LSRK")
    assert cube_rest_frequency(cube) is None and read["rest_frequency_basis"] == "none"
    assert cube.unit == u.dimensionless_unscaled  # no BUNIT: arbitrary units, with the warning above
    with pytest.raises(SpectralAxisError, match="rest frequency"):
        frequency_axis(cube)


@needs_real
def test_l1448_sfl_sky_coordinates_far_from_the_reference_pixel():
    with pytest.warns(MissingUnitWarning):
        cube = open_cube(L1448)
    # SFL: x = phi cos(theta), y = theta (Calabretta & Greisen 2002, A&A 395, 1077, eq. 92); CRVAL2 = 0
    # and LONPOLE = 0, so dec = CDELT2 (j - CRPIX2), ra = CRVAL1 + CDELT1 (i - CRPIX1) / cos(dec)
    # for 1-based pixel (i, j): pixel (1, 1) is at dec = 0.006388889 x 4742.913 = 30.30195 deg,
    # ra = 57.66 - 0.006388889 x 800 / cos(30.30195 deg) = 51.74010 deg.
    dec = 0.006388889 * (1 + 4741.913)
    ra = 57.6599999999 - 0.006388889 * (1 + 799.0) / np.cos(np.radians(dec))
    _, lat, lon = cube.world[0, 0, 0]
    assert lat.to_value(u.deg) == pytest.approx(dec, abs=1e-7)
    assert lon.to_value(u.deg) == pytest.approx(ra, abs=1e-7)
    assert not np.isnan(stored(L1448)).any()  # no blanks in this file


@needs_real
def test_l1448_works_in_velocity_without_rest_frequency():
    with pytest.warns(MissingUnitWarning):
        cube = open_cube(L1448)
    data = stored(L1448)
    spectrum = region_spectrum(cube, whole_field(cube.shape))
    # Arbitrary units give the mean over the region; numpy's mean over the field is the reference.
    assert_allclose(spectrum.value, data.mean(axis=(1, 2)), rtol=1e-6)
    velocity = cube.spectral_axis.to_value(KMS)
    # The observer's line: brightest near 4.3 km/s (channel 27), read off numpy's mean spectrum.
    assert velocity[np.argmax(data.mean(axis=(1, 2)))] == pytest.approx(4.32, abs=0.04)
    assert velocity[np.argmax(spectrum.value)] == pytest.approx(4.32, abs=0.04)
    # Velocity ranges work everywhere without a rest frequency.
    line_free = [(2.5, 2.9), (5.7, 6.0)] * KMS
    fit = fit_baseline(spectrum, line_free)
    assert fit.n_free > 5
    measured = measure_line(spectrum, [3.0, 5.6] * KMS, line_free=line_free)
    assert 4.0 < measured.centroid.to_value(KMS) < 4.6
    maps = moment_maps(cube, [3.0, 5.6] * KMS)
    # Moment 0 of the brightest pixel, checked against a numpy sum over the same channels times 66.42361 m/s.
    inside = (velocity >= 3.0) & (velocity <= 5.6)
    y, x = np.unravel_index(np.argmax(data[inside].sum(axis=0)), data.shape[1:])
    assert maps.m0[y, x].to_value(KMS) == pytest.approx(data[inside, y, x].sum() * 0.06642361, rel=1e-5)


@needs_real
def test_l1448_rest_frequency_supplied_at_open():
    with pytest.warns(MissingUnitWarning):
        cube = open_cube(L1448, rest_frequency=110.2013541 * u.GHz)  # 13CO J=1-0 (CDMS catalogue, from memory)
    # Optical convention: f = f0 / (1 + v / c) (Greisen et al. 2006, Table 1).
    v = (2528.19489695 + 66.42361 * np.arange(53)) / 1e3
    assert_allclose(cube.with_spectral_unit(u.GHz).spectral_axis.to_value(u.GHz),
                    110.2013541 / (1 + v / C_KMS), rtol=1e-12)
    assert cube_source(cube)["spectral_axis"]["rest_frequency_basis"] == "rest_frequency argument"
