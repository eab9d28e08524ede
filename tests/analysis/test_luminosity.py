"""Tests of line_luminosity and redshift_summary."""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c, k_B
from astropy.cosmology import FlatLambdaCDM, Planck18, WMAP9
from astropy.tests.helper import assert_quantity_allclose

from cubeloupe.analysis import (
    CubeloupeError,
    RedshiftError,
    UnitMismatchError,
    line_luminosity,
    redshift_summary,
)

JY_KMS = u.Jy * u.km / u.s
CO43 = 461.0407682 * u.GHz  # CDMS catalogue (Mueller et al. 2005)


def test_l_prime_constant_rederived():
    # Solomon & Vanden Bout 2005, ARA&A 43, 677, eq. (3): L' = 3.25e7 S dV nu_obs^-2 D_L^2 (1+z)^-3
    # with S dV in Jy km/s, nu_obs in GHz, D_L in Mpc; the constant is c^2 / (2 k).
    constant = (c**2 / (2 * k_B) * JY_KMS * u.Mpc**2 / u.GHz**2).to_value(u.K * u.km / u.s * u.pc**2)
    assert constant == pytest.approx(3.25e7, rel=2e-3)


def test_l_constant_rederived():
    # Solomon & Vanden Bout 2005, eq. (1): L = 1.04e-3 S dV nu_rest (1+z)^-1 D_L^2 L_sun;
    # the constant is 4 pi / c (L = 4 pi D_L^2 S dV nu_obs / c).
    constant = (4 * np.pi * u.Mpc**2 * JY_KMS * u.GHz / c).to_value(u.L_sun)
    assert constant == pytest.approx(1.04e-3, rel=3e-3)


@pytest.mark.parametrize("z", [0.05, 1.0, 2.5, 6.3])
def test_line_luminosity_matches_published_formulas(z):
    flux = 3.2 * JY_KMS
    lum = line_luminosity(flux, z, CO43)
    d_l = Planck18.luminosity_distance(z).to_value(u.Mpc)
    nu_obs = CO43.to_value(u.GHz) / (1 + z)
    # Solomon & Vanden Bout 2005, eqs. (3) and (1), with their rounded constants.
    assert lum.l_prime.to_value(u.K * u.km / u.s * u.pc**2) == pytest.approx(
        3.25e7 * 3.2 * nu_obs**-2 * d_l**2 * (1 + z) ** -3, rel=3e-3)
    assert lum.luminosity.to_value(u.L_sun) == pytest.approx(
        1.04e-3 * 3.2 * CO43.to_value(u.GHz) / (1 + z) * d_l**2, rel=3e-3)
    # Luminosity distance from astropy.cosmology (Planck18 is the default).
    assert_quantity_allclose(lum.luminosity_distance, Planck18.luminosity_distance(z))
    assert lum.cosmology == "Planck18" and lum.magnification == 1
    assert_quantity_allclose(lum.observed_frequency, CO43 / (1 + z))


def test_l_over_l_prime_ratio():
    # L / L' = 8 pi k nu_rest^3 / c^3, quoted as L = 3e-11 nu_rest[GHz]^3 L' with L' in
    # K km/s pc^2 and L in L_sun (Solomon & Vanden Bout 2005, after eq. 3; one significant digit).
    nu = 115.2712018 * u.GHz
    lum = line_luminosity(1 * JY_KMS, 2.0, nu)
    ratio = (lum.luminosity / lum.l_prime).to(u.L_sun / (u.K * u.km / u.s * u.pc**2))
    assert_quantity_allclose(ratio, (8 * np.pi * k_B * nu**3 / c**3).to(ratio.unit), rtol=1e-10)
    assert ratio.value / nu.to_value(u.GHz) ** 3 == pytest.approx(3e-11, rel=0.1)


def test_flux_in_watts_per_square_metre():
    # S dnu = S dV nu_obs / c (Doppler relation dnu / nu_obs = dV / c).
    z = 3.0
    s_dv = 1.5 * JY_KMS
    s_dnu = (s_dv * (CO43 / (1 + z)) / c).to(u.W / u.m**2)
    a, b = line_luminosity(s_dv, z, CO43), line_luminosity(s_dnu, z, CO43)
    assert_quantity_allclose(a.l_prime, b.l_prime, rtol=1e-12)
    assert_quantity_allclose(b.flux, s_dv)
    # mJy km/s works as well.
    assert_quantity_allclose(line_luminosity(1500 * u.mJy * u.km / u.s, z, CO43).luminosity, a.luminosity)


def test_magnification_divides_out():
    plain = line_luminosity(1 * JY_KMS, 2.5, CO43)
    lensed = line_luminosity(1 * JY_KMS, 2.5, CO43, magnification=12.5)
    assert_quantity_allclose(plain.l_prime / lensed.l_prime, 12.5)
    assert_quantity_allclose(plain.luminosity / lensed.luminosity, 12.5)


def test_other_cosmologies():
    toy = FlatLambdaCDM(H0=70, Om0=0.3, Tcmb0=0, name="toy")
    a = line_luminosity(1 * JY_KMS, 2.0, CO43, cosmology=toy)
    assert a.cosmology == "toy"
    assert_quantity_allclose(a.luminosity_distance, toy.luminosity_distance(2.0))
    b = line_luminosity(1 * JY_KMS, 2.0, CO43, cosmology="WMAP9")
    assert_quantity_allclose(b.luminosity_distance, WMAP9.luminosity_distance(2.0))
    # L' scales as D_L^2 at fixed z.
    assert_quantity_allclose(a.l_prime / b.l_prime, (a.luminosity_distance / b.luminosity_distance) ** 2)


@pytest.mark.parametrize("z", [0.5, 2.0, 7.0])
def test_summary_against_einstein_de_sitter(z):
    # Flat matter-only universe (Hogg 1999, astro-ph/9905116, eqs. 15-16, 21 and
    # textbook age): D_C = 2 c/H0 (1 - 1/sqrt(1+z)), D_L = (1+z) D_C, D_A = D_C/(1+z),
    # age t(z) = 2 / (3 H0) (1+z)^-3/2.
    eds = FlatLambdaCDM(H0=70, Om0=1.0, Tcmb0=0, name="EdS")
    hubble = c / (70 * u.km / u.s / u.Mpc)
    d_c = 2 * hubble * (1 - 1 / np.sqrt(1 + z))
    summary = redshift_summary(z, cosmology=eds)
    assert_quantity_allclose(summary.luminosity_distance, (1 + z) * d_c, rtol=1e-6)
    assert_quantity_allclose(summary.angular_diameter_distance, d_c / (1 + z), rtol=1e-6)
    # Small-angle scale: 1 arcsec subtends D_A * (1 arcsec in radians).
    assert_quantity_allclose(summary.angular_scale, (d_c / (1 + z) * np.pi / 648000).to(u.kpc) / u.arcsec,
                             rtol=1e-6)
    age = (2 / (3 * 70 * u.km / u.s / u.Mpc) * (1 + z) ** -1.5).to(u.Gyr)
    assert_quantity_allclose(summary.age, age, rtol=1e-6)
    assert summary.cosmology == "EdS"


def test_summary_planck18_default():
    summary = redshift_summary(1.0)
    assert summary.cosmology == "Planck18"
    assert_quantity_allclose(summary.luminosity_distance, Planck18.luminosity_distance(1.0))
    # The age of the universe today under Planck18 is 13.79 Gyr (Planck 2018 VI); at z=1, 5.9 Gyr
    # (astropy documentation figures, from memory): check the decline.
    assert 5.5 * u.Gyr < summary.age < 6.2 * u.Gyr
    assert_quantity_allclose(summary.age + summary.lookback_time, Planck18.age(0), rtol=1e-6)
    # At z ~ 1-3, 1 arcsec spans about 8 kpc (common practice).
    assert 7.5 * u.kpc / u.arcsec < summary.angular_scale < 8.7 * u.kpc / u.arcsec


@pytest.mark.parametrize("args, kwargs, error, match", [
    ((1.0, 2.0, CO43), {}, UnitMismatchError, "integrated line flux with units"),
    ((1.0 * u.Jy, 2.0, CO43), {}, UnitMismatchError, "flux density"),
    ((1.0 * JY_KMS, 2.0, 461.04), {}, UnitMismatchError, "rest_frequency"),
    ((1.0 * JY_KMS, 0.0, CO43), {}, RedshiftError, "z > 0"),
    ((1.0 * JY_KMS, -1.5, CO43), {}, RedshiftError, "outside the accepted range"),
    ((1.0 * JY_KMS, 25.0, CO43), {}, RedshiftError, "outside the accepted range"),
    ((1.0 * JY_KMS, 2.0, CO43), {"magnification": 0}, RedshiftError, "magnification"),
    ((1.0 * JY_KMS, 2.0, CO43), {"magnification": -3}, RedshiftError, "magnification"),
    ((1.0 * JY_KMS, 2.0, CO43), {"cosmology": "Planck99"}, RedshiftError, "unknown cosmology"),
    ((1.0 * JY_KMS, 2.0, CO43), {"cosmology": 42}, RedshiftError, "astropy.cosmology"),
])
def test_bad_input(args, kwargs, error, match):
    with pytest.raises(error, match=match) as info:
        line_luminosity(*args, **kwargs)
    assert isinstance(info.value, CubeloupeError)


def test_summary_bad_redshift():
    with pytest.raises(RedshiftError):
        redshift_summary(21)
