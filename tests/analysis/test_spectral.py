"""Velocity conventions, redshifted lines and channel selection, against astropy and the FITS standard."""

import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose
from numpy.testing import assert_allclose

from cubefactory import C_KMS
from cubeloupe.analysis import (
    RedshiftError,
    SpectralAxisError,
    SpectralRangeError,
    UnitMismatchError,
    axis_in,
    channel_mask,
    check_redshift,
    check_rest_frequency,
    frequency_axis,
    frequency_from_velocity,
    observed_frequency,
    open_cube,
    velocity,
)
from cubeloupe.analysis.spectral import check_convention

KMS = u.km / u.s
CO10 = 115.2712018 * u.GHz  # 12CO J=1-0 rest frequency (CDMS catalogue)
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue)

# Doppler conventions of FITS WCS Paper III (Greisen et al. 2006, A&A 446, 747, Table 1).
BY_HAND = {
    "radio": lambda f, f0: C_KMS * (f0 - f) / f0,
    "optical": lambda f, f0: C_KMS * (f0 - f) / f,
    "relativistic": lambda f, f0: C_KMS * (f0**2 - f**2) / (f0**2 + f**2),
}
ASTROPY = {"radio": u.doppler_radio, "optical": u.doppler_optical, "relativistic": u.doppler_relativistic}


def test_co_radio_velocity_example():
    # 10 km/s in the radio convention is f0 (1 - 10/c) (Greisen et al. 2006).
    assert_quantity_allclose(velocity(115.26735677 * u.GHz, CO10), 10 * KMS, atol=1 * u.m / u.s)


@pytest.mark.parametrize("convention", ["radio", "optical", "relativistic"])
def test_conventions_against_astropy_and_formulas(convention):
    freq = np.linspace(114.0, 116.5, 11) * u.GHz
    v = velocity(freq, CO10, convention=convention)
    assert_quantity_allclose(v, freq.to(KMS, equivalencies=ASTROPY[convention](CO10)), rtol=1e-12)
    assert_allclose(v.to_value(KMS), BY_HAND[convention](freq.value, CO10.value), rtol=1e-10, atol=1e-9)


@pytest.mark.parametrize("convention", ["radio", "optical", "relativistic"])
@pytest.mark.parametrize("z", [0.0, 0.0047, 1.0, 6.5])
def test_round_trips_and_identity(convention, z):
    f_ref = CO21 / (1 + z)
    assert_quantity_allclose(velocity(f_ref, CO21, z, convention), 0 * KMS, atol=1e-6 * KMS)
    freq = f_ref * np.linspace(0.99, 1.01, 7)
    back = frequency_from_velocity(velocity(freq, CO21, z, convention), CO21, z, convention)
    assert_quantity_allclose(back, freq, rtol=1e-12)
    offsets = [-800, -50, 0, 300, 2500] * KMS
    assert_quantity_allclose(velocity(frequency_from_velocity(offsets, CO21, z, convention), CO21, z, convention),
                             offsets, atol=1e-6 * KMS)


@pytest.mark.parametrize("z", [0.0047, 0.5, 3.0])
def test_velocity_at_redshift_is_the_rest_frame_velocity(z):
    # Redshifts compose as (1 + z_obs) = (1 + z)(1 + v_opt / c) (e.g. Davis &
    # Scrimgeour 2014, MNRAS 442, 1117), so a source moving at optical
    # velocity v in its rest frame is seen at f_rest / ((1 + z)(1 + v / c)).
    v_opt = 250.0
    observed = CO21 / ((1 + z) * (1 + v_opt / C_KMS))
    assert_quantity_allclose(velocity(observed, CO21, z, "optical"), v_opt * KMS, rtol=1e-10)


def test_observed_frequency():
    # f_obs = f_rest / (1 + z): CO(1-0) at z = 1 is seen at half its rest frequency.
    assert_quantity_allclose(observed_frequency(CO10, 1.0), 57.6356009 * u.GHz, rtol=1e-12)


def test_velocity_accepts_wavelengths():
    wavelength = (115.26735677 * u.GHz).to(u.mm, u.spectral())
    assert_quantity_allclose(velocity(wavelength, CO10), 10 * KMS, atol=1 * u.m / u.s)


def test_check_rest_frequency():
    assert_quantity_allclose(check_rest_frequency(1.3004 * u.mm), (1.3004 * u.mm).to(u.GHz, u.spectral()))
    with pytest.raises(UnitMismatchError, match="must be a frequency; got km / s"):
        check_rest_frequency(230 * KMS)
    with pytest.raises(UnitMismatchError, match="Quantity with a frequency unit"):
        check_rest_frequency(230.538)
    with pytest.raises(UnitMismatchError, match="positive"):
        check_rest_frequency(-1 * u.GHz)


def test_check_redshift():
    assert check_redshift(3) == 3.0
    assert check_redshift(0.5 * u.dimensionless_unscaled) == 0.5
    for bad in (-1.0, 25.0, np.nan):
        with pytest.raises(RedshiftError, match="outside the accepted range"):
            check_redshift(bad)
    with pytest.raises(RedshiftError, match="plain number"):
        check_redshift(300 * KMS)
    with pytest.raises(RedshiftError, match="must be a number"):
        check_redshift("0.1")


def test_check_convention_lists_choices():
    with pytest.raises(SpectralAxisError, match=r"'doppler'.*\['optical', 'radio', 'relativistic'\]"):
        check_convention("doppler")


def test_frequency_axis_of_velocity_and_wavelength_cubes(cube_path):
    data = np.zeros((5, 4, 4))
    vrad = open_cube(cube_path(data, spectral="VRAD"))  # 0, 1.3, ... km/s, RESTFRQ 230.538 GHz
    expected = CO21.value * (1 - np.arange(5) * 1.3 / C_KMS)  # radio: f = f0 (1 - v/c)
    assert_allclose(frequency_axis(vrad).to_value(u.GHz), expected, rtol=1e-12)
    wave = open_cube(cube_path(data, spectral="WAVE"))
    wavelengths = wave.spectral_axis.to_value(u.m)
    assert_allclose(frequency_axis(wave).to_value(u.Hz), C_KMS * 1e3 / wavelengths, rtol=1e-12)


def test_velocity_axis_without_rest_frequency_is_refused(cube_path):
    cube = open_cube(cube_path(np.zeros((5, 4, 4)), spectral="VRAD", restfrq=None))
    with pytest.raises(SpectralAxisError, match="RESTFRQ"):
        frequency_axis(cube)
    # Its own velocities are still usable.
    assert_allclose(axis_in(cube, KMS).value, np.arange(5) * 1.3)


def test_axis_in(cube_path):
    cube = open_cube(cube_path(np.zeros((5, 4, 4))))  # FREQ, 1 MHz channels from 230.538 GHz
    # With RESTFRQ in the header and no rest_frequency given: radio velocities from it.
    assert_allclose(axis_in(cube, KMS).value, C_KMS * np.arange(5) * 1e6 / 230.538e9, rtol=1e-9)
    assert_allclose(axis_in(cube, u.mm).value, (C_KMS * 1e6 / (230.538e9 - np.arange(5) * 1e6)), rtol=1e-12)
    shifted = axis_in(cube, KMS, rest_frequency=CO21, z=0.001)
    f = 230.538 - np.arange(5) * 1e-3
    assert_allclose(shifted.value, BY_HAND["radio"](f, 230.538 / 1.001), rtol=1e-9)
    with pytest.raises(UnitMismatchError, match="not a spectral unit"):
        axis_in(cube, u.Jy)


def test_axis_in_without_any_rest_frequency(cube_path):
    cube = open_cube(cube_path(np.zeros((5, 4, 4)), restfrq=None))
    with pytest.raises(SpectralAxisError, match="pass rest_frequency"):
        axis_in(cube, KMS)


def test_channel_mask_examples():
    axis = [1, 2, 3, 4, 5] * u.GHz
    assert channel_mask(axis, [(1.5, 2.5), (4.5, 6)] * u.GHz).tolist() == [False, True, False, False, True]
    # The order of each pair does not matter.
    assert channel_mask(axis, (3.5, 1.5) * u.GHz).tolist() == [False, True, True, False, False]
    # Ranges in wavelength select the same channels (c / f).
    assert channel_mask(axis, (3.5, 1.5) * u.GHz).tolist() == \
        channel_mask(axis, ((3.5, 1.5) * u.GHz).to(u.cm, u.spectral())).tolist()


def test_channel_mask_refusals():
    axis = [1, 2, 3, 4, 5] * u.GHz
    with pytest.raises(SpectralRangeError, match="band spans 1 to 5 GHz"):
        channel_mask(axis, (7, 8) * u.GHz)
    with pytest.raises(SpectralRangeError, match="at least 3"):
        channel_mask(axis, (1.5, 2.5) * u.GHz, min_channels=3)
    with pytest.raises(UnitMismatchError, match="must be a Quantity"):
        channel_mask(axis, (1, 2))
    with pytest.raises(SpectralRangeError, match="pair"):
        channel_mask(axis, [1, 2, 3] * u.GHz)


def test_an_axis_that_keeps_its_conversions_gives_the_same_axis_every_time():
    # A measured spectrum's axis is converted once per unit and frame (#20); what a caller does to the
    # array it got does not reach the next caller, and each frame gets its own velocities.
    from cubeloupe.analysis.baseline import CachedAxis, as_spectrum

    freq = np.linspace(230.0, 230.2, 50) * u.GHz
    spectrum = as_spectrum(np.zeros(50) * u.Jy, spectral_axis=freq)
    kept = CachedAxis(spectrum)
    rest = 230.538 * u.GHz
    first = axis_in(kept, u.km / u.s, rest_frequency=rest, z=0.001)
    first[:] = 0 * u.km / u.s
    again = axis_in(kept, u.km / u.s, rest_frequency=rest, z=0.001)
    assert_quantity_allclose(again, axis_in(spectrum, u.km / u.s, rest_frequency=rest, z=0.001), rtol=0)
    # Radio convention: v = c (1 - f / f0) (Greisen et al. 2006), with f0 = rest / (1 + z) for a line at z
    # (rest-frame offsets, common practice)
    assert_allclose(again.to_value(u.km / u.s), C_KMS * (1 - freq.to_value(u.GHz) * 1.001 / 230.538), rtol=1e-10)
    other = axis_in(kept, u.km / u.s, rest_frequency=rest, z=0.002, convention="optical")
    assert not np.allclose(other.value, again.value)
    assert_quantity_allclose(axis_in(kept, u.mm), freq.to(u.mm, equivalencies=u.spectral()))
    assert len(kept.conversions) == 3


def test_a_velocity_spectrum_is_converted_to_frequency_once(cube_path):
    # spectral-cube rebuilds a spectrum to change its axis unit (~20 ms); the suite asks for the same
    # spectrum's frequencies many times per gesture (#20). Converted once, the same values come back,
    # for the spectrum and for a CachedAxis of it; what a caller does to its copy stays with it.
    from unittest import mock

    from cubeloupe.analysis.baseline import CachedAxis
    from spectral_cube import OneDSpectrum

    data = np.random.default_rng(3).normal(size=(5, 4, 4))
    spectrum = open_cube(cube_path(data, spectral="VRAD"))[:, 1, 1]   # 0, 1.3, ... km/s, RESTFRQ 230.538 GHz
    expected = spectrum.with_spectral_unit(u.GHz).spectral_axis
    with mock.patch.object(OneDSpectrum, "with_spectral_unit", autospec=True,
                           side_effect=OneDSpectrum.with_spectral_unit) as converted:
        first = frequency_axis(spectrum)
        first[:] = 0 * u.GHz
        assert_quantity_allclose(frequency_axis(spectrum), expected, rtol=0)
        assert_quantity_allclose(frequency_axis(CachedAxis(spectrum)), expected, rtol=0)
        assert converted.call_count == 1
        other = spectrum[:4]                                             # another spectrum: its own
        assert_quantity_allclose(frequency_axis(other), expected[:4], rtol=0)
        assert converted.call_count == 2
    # Radio convention, RESTFRQ 230.538 GHz: f = f0 (1 - v / c) (Greisen et al. 2006)
    v = spectrum.spectral_axis.to_value(u.km / u.s)
    assert_allclose(expected.to_value(u.GHz), 230.538 * (1 - v / C_KMS), rtol=1e-12)
