"""brightness_unit and is_brightness: BUNIT strings as delivered files spell them."""

import astropy.units as u
import pytest

from cubeloupe.analysis import MissingUnitWarning, UnitMismatchError, brightness_unit, is_brightness


@pytest.mark.parametrize("bunit, unit", [
    # Spellings seen in delivered files (common practice); the FITS standard spelling is 'Jy/beam'
    # (FITS standard 3.0, Pence et al. 2010, A&A 524, A42, Sect. 4.3) and astropy parses it.
    ("JY/BEAM ", u.Jy / u.beam),  # upper case and padded, as written by older imaging packages
    ("Jy/Beam", u.Jy / u.beam),
    ("Jy beam-1", u.Jy / u.beam),
    ("K (Tmb)", u.K),
    ("Kelvin", u.K),
    ("mJy/beam", u.mJy / u.beam),
    ("Jy/pixel", u.Jy / u.pix),
    ("MJy/sr", u.MJy / u.sr),
])
def test_spellings(bunit, unit):
    assert brightness_unit(bunit) == unit


def test_missing_bunit_warns_and_gives_arbitrary_units():
    with pytest.warns(MissingUnitWarning, match="x.fits has no BUNIT"):
        assert brightness_unit(None, source="x.fits") == u.dimensionless_unscaled
    with pytest.warns(MissingUnitWarning):
        assert brightness_unit("   ", source="x.fits") == u.dimensionless_unscaled


@pytest.mark.parametrize("bunit", ["km/s", "m/s", "KM/S", "K km/s", "Jy/beam km/s", "deg", "Hz"])
def test_units_that_are_not_a_brightness_are_refused(bunit):
    # A cube in km/s is a velocity field, in K km/s or Jy/beam km/s a moment-0 map (common practice).
    with pytest.raises(UnitMismatchError, match="not a brightness") as info:
        brightness_unit(bunit, source="x.fits")
    assert "x.fits" in str(info.value) and repr(bunit) in str(info.value)


@pytest.mark.parametrize("unit, expected", [
    (u.K, True), (u.mK, True), (u.Jy / u.beam, True), (u.Jy / u.pix, True), (u.MJy / u.sr, True),
    (u.Jy, True), (u.dimensionless_unscaled, True),
    (u.km / u.s, False), (u.K * u.km / u.s, False), (u.Hz, False), (u.deg, False),
])
def test_is_brightness(unit, expected):
    assert is_brightness(unit) is expected
