"""Beam areas and Jy/beam <-> K conversions, checked against radio-beam, astropy and handbook formulas."""

import astropy.units as u
import numpy as np
import pytest
from astropy import constants
from astropy.tests.helper import assert_quantity_allclose
from numpy.testing import assert_allclose
from radio_beam import Beam, Beams

from cubeloupe.analysis import (
    BeamError,
    UnitMismatchError,
    beam_area_pixels,
    convert_brightness,
    cube_beam,
    jy_per_beam_to_kelvin,
    kelvin_to_jy_per_beam,
    open_cube,
    pixel_solid_angle,
)

ARCSEC_SR = (np.pi / 180 / 3600) ** 2  # one square arcsecond in steradian (definition)


def gaussian_beam_sr(bmaj_arcsec, bmin_arcsec):
    # Solid angle of an elliptical Gaussian beam, pi * bmaj * bmin / (4 ln 2)
    # (Wilson, Rohlfs & Huettemeister, Tools of Radio Astronomy, sec. 8.2).
    return np.pi * bmaj_arcsec * bmin_arcsec / (4 * np.log(2)) * ARCSEC_SR


@pytest.mark.parametrize("bmaj, bmin", [(1.0, 1.0), (2.5, 0.7), (0.05, 0.03), (30.0, 12.0)])
def test_gaussian_solid_angle_matches_radio_beam(bmaj, bmin):
    beam = Beam(major=bmaj * u.arcsec, minor=bmin * u.arcsec, pa=20 * u.deg)
    assert_allclose(beam.sr.to_value(u.sr), gaussian_beam_sr(bmaj, bmin), rtol=1e-10)


def test_pixel_solid_angle_is_pixel_size_squared(cube_path):
    cube = open_cube(cube_path(np.zeros((3, 8, 8)), pixel=0.25))
    # At the reference point of a SIN projection the pixel is CDELT1 x CDELT2
    # (Calabretta & Greisen 2002, A&A 395, 1077).
    assert_quantity_allclose(pixel_solid_angle(cube), 0.25**2 * ARCSEC_SR * u.sr, rtol=1e-6)


def test_beam_area_pixels_single_beam(cube_path):
    cube = open_cube(cube_path(np.zeros((3, 8, 8)), pixel=0.2, beam=(1.2, 0.8, 40.0)))
    area = beam_area_pixels(cube)
    assert area.shape == ()
    assert_allclose(area, gaussian_beam_sr(1.2, 0.8) / (0.2**2 * ARCSEC_SR), rtol=1e-6)


def test_beam_area_pixels_per_channel_beams(cube_path):
    rows = [(1.0 + 0.1 * k, 0.8, 10.0 * k) for k in range(4)]
    cube = open_cube(cube_path(np.zeros((4, 8, 8)), pixel=0.25, beams=rows))
    area = beam_area_pixels(cube)
    expected = [gaussian_beam_sr(a, b) / (0.25**2 * ARCSEC_SR) for a, b, _ in rows]
    assert area.shape == (4,)
    assert_allclose(area, expected, rtol=1e-6)


def test_beam_area_pixels_with_explicit_beam_overrides_cube(cube_path):
    cube = open_cube(cube_path(np.zeros((3, 8, 8)), pixel=0.5, beam=None))
    area = beam_area_pixels(cube, Beam(2 * u.arcsec))
    assert_allclose(area, gaussian_beam_sr(2, 2) / (0.5**2 * ARCSEC_SR), rtol=1e-6)


def test_cube_without_beam_raises_with_instructions(cube_path):
    cube = open_cube(cube_path(np.zeros((3, 8, 8)), beam=None))
    with pytest.raises(BeamError, match=r"with_beam\(Beam\("):
        cube_beam(cube)
    with pytest.raises(BeamError, match="no beam"):
        beam_area_pixels(cube)
    # The advice works: attaching a beam as the message says gives an area.
    fixed = cube.with_beam(Beam(major=1.2 * u.arcsec, minor=0.9 * u.arcsec, pa=30 * u.deg), raise_error_jybm=False)
    assert beam_area_pixels(fixed) > 0


@pytest.mark.parametrize("bad", [3.0, 2 * u.arcsec, "1 arcsec", 0 * u.sr, -1e-11 * u.sr])
def test_bad_beam_argument(bad):
    with pytest.raises(BeamError):
        jy_per_beam_to_kelvin(230 * u.GHz, bad)


@pytest.mark.parametrize("nu_ghz, bmaj, bmin", [(230.538, 1.0, 1.0), (115.2712018, 2.3, 1.7), (1.420405752, 15.0, 12.0)])
def test_jy_per_beam_to_kelvin_against_astropy_and_rayleigh_jeans(nu_ghz, bmaj, bmin):
    beam = Beam(major=bmaj * u.arcsec, minor=bmin * u.arcsec)
    factor = jy_per_beam_to_kelvin(nu_ghz * u.GHz, beam)
    # astropy's brightness_temperature equivalency with an explicit beam area.
    reference = (1 * u.Jy / u.beam).to(
        u.K, equivalencies=u.brightness_temperature(nu_ghz * u.GHz, beam_area=gaussian_beam_sr(bmaj, bmin) * u.sr))
    assert_allclose(factor.to_value(u.K / (u.Jy / u.beam)), reference.to_value(u.K), rtol=1e-9)
    # Rayleigh-Jeans rule of thumb T = 1.222e6 S / (nu_GHz^2 bmaj" bmin") (common practice).
    assert_allclose(factor.to_value(u.K / (u.Jy / u.beam)), 1.222e6 / (nu_ghz**2 * bmaj * bmin), rtol=2e-4)
    # From the constants: T = S c^2 / (2 k nu^2 Omega) (Rayleigh-Jeans law).
    by_hand = (1 * u.Jy * constants.c**2 / (2 * constants.k_B * (nu_ghz * u.GHz) ** 2
                                            * gaussian_beam_sr(bmaj, bmin))).to(u.K)  # Omega in sr as a number
    assert_allclose(factor.to_value(u.K / (u.Jy / u.beam)), by_hand.value, rtol=1e-9)


def test_kelvin_to_jy_per_beam_is_the_inverse():
    beam = Beam(major=0.9 * u.arcsec, minor=0.6 * u.arcsec)
    product = jy_per_beam_to_kelvin(345.796 * u.GHz, beam) * kelvin_to_jy_per_beam(345.796 * u.GHz, beam)
    assert_allclose(product.decompose().value, 1.0, rtol=1e-12)


def test_per_channel_conversion_with_beams():
    beams = Beams(major=[1.0, 1.5, 2.0] * u.arcsec, minor=[1.0, 1.0, 1.5] * u.arcsec)
    nu = [230.0, 230.5, 231.0] * u.GHz
    factors = jy_per_beam_to_kelvin(nu, beams)
    expected = [1.222e6 / (f**2 * a * b) for f, a, b in zip(nu.value, [1.0, 1.5, 2.0], [1.0, 1.0, 1.5])]
    assert factors.shape == (3,)
    assert_allclose(factors.value, expected, rtol=2e-4)  # common-practice Rayleigh-Jeans form


def test_convert_brightness_round_trip_and_prefixes():
    beam = Beam(1.0 * u.arcsec)
    values = [0.5, 3.0, -1.0] * u.mJy / u.beam
    kelvin = convert_brightness(values, u.mK, 230.538 * u.GHz, beam)
    back = convert_brightness(kelvin, u.mJy / u.beam, 230.538 * u.GHz, beam)
    assert_quantity_allclose(back, values, rtol=1e-12)
    # 1 mJy/beam at 230.538 GHz in a 1" beam is 1.222e6 * 1e-3 / 230.538^2 K (common practice).
    assert_allclose(kelvin[0].to_value(u.K), 0.5e-3 * 1.222e6 / 230.538**2, rtol=2e-4)


def test_convert_brightness_wrong_units():
    with pytest.raises(UnitMismatchError, match="surface brightness"):
        convert_brightness(1 * u.km / u.s, u.K, 230 * u.GHz, Beam(1 * u.arcsec))
    with pytest.raises(UnitMismatchError, match="spectral unit"):
        jy_per_beam_to_kelvin(3 * u.kg, Beam(1 * u.arcsec))
