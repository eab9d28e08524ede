"""LTE model spectra (analysis/lte_model.py): line areas and peaks against the formulas, computed here by hand."""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c, h, k_B
from astropy.cosmology import Planck18

from cubeloupe.analysis import (
    CatalogError, ParameterError, SpectralAxisError, UnitMismatchError, find_line, lte_lines, lte_spectrum,
    partition_function, partition_energy_zero,
)

KMS = u.km / u.s
C_KMS = c.to_value(KMS)


def hand_brightness(name, column, temperature):
    # LTE level population N_u = N g_u exp(-E_up/kT) / Q (Goldsmith & Langer 1999, ApJ 517, 209) and the
    # optically thin W = h c^3 A N_u / (8 pi k nu^2) (same paper), from astropy's constants.
    row = find_line(name)
    q = partition_function(str(row["species"]), temperature)
    n_u = column * row["g_up"] * np.exp(-float(row["E_up"] / temperature)) / q
    return (h * c**3 * row["einstein_A"] * n_u / (8 * np.pi * k_B * row["rest_frequency"] ** 2)).to(u.K * KMS)


def velocity_of(axis, centre):
    return C_KMS * (centre - axis) / centre  # radio convention about the line (Greisen et al. 2006, A&A 446, 747)


def test_integral_is_the_w_put_in_and_the_peak_w_over_1_0645_fwhm():
    temperature, column, fwhm, z = 30 * u.K, 1e15 / u.cm**2, 20 * KMS, 0.005
    centre = float(find_line("CO J=2-1")["rest_frequency"].to_value(u.GHz)) / (1 + z)
    axis = np.linspace(centre - 0.1, centre + 0.1, 4001) * u.GHz
    model = lte_spectrum(axis, ["CO"], temperature=temperature, column_density=column, fwhm=fwhm, z=z)
    w = hand_brightness("CO J=2-1", column, temperature)
    v = velocity_of(axis.value, centre)
    area = -np.trapezoid(model.value, v)  # v falls as the frequency rises
    assert area == pytest.approx(w.value, rel=1e-6)
    # Peak of a Gaussian of area W and full width at half maximum F: W / (sqrt(pi / (4 ln 2)) F) = W / (1.0645 F)
    # (common practice); the axis has a channel on the line centre.
    assert model.max().value == pytest.approx(w.value / (1.0645 * fwhm.value), rel=1e-4)
    assert model.unit == u.K


def test_two_species_add_and_every_line_in_the_band_is_there():
    axis = np.linspace(219.0, 231.0, 6000) * u.GHz
    kwargs = dict(temperature=25 * u.K, column_density=1e15 / u.cm**2, fwhm=10 * KMS)
    both = lte_spectrum(axis, ["CO", "13CO"], **kwargs)
    alone = lte_spectrum(axis, "CO", **kwargs) + lte_spectrum(axis, "13CO", **kwargs)
    np.testing.assert_allclose(both.value, alone.value, rtol=1e-12, atol=1e-15)
    names = lte_lines(axis.min(), axis.max(), ["CO", "13CO"], temperature=25 * u.K,
                      column_density=1e15 / u.cm**2)["name"].tolist()
    assert names == ["13CO J=2-1", "CO J=2-1"]  # 220.399 and 230.538 GHz (CDMS, from memory)


def test_descending_axis_gives_the_same_spectrum():
    axis = np.linspace(230.3, 230.7, 800) * u.GHz
    kwargs = dict(temperature=25 * u.K, column_density=1e15 / u.cm**2, fwhm=10 * KMS)
    np.testing.assert_allclose(lte_spectrum(axis[::-1], "CO", **kwargs).value,
                               lte_spectrum(axis, "CO", **kwargs).value[::-1])


def test_molecule_count_at_z_gives_jy_of_an_unresolved_source():
    z, mu, number, temperature, fwhm = 3.1, 12.0, 1e63, 40 * u.K, 300 * KMS
    row = find_line("CO J=8-7")
    centre = float(row["rest_frequency"].to_value(u.GHz)) / (1 + z)
    axis = np.linspace(centre - 2, centre + 2, 4001) * u.GHz
    flux = lte_spectrum(axis, "CO", temperature=temperature, total_number=number, fwhm=fwhm, z=z, magnification=mu)
    # S dv = (1 + z) c h A N_u mu / (4 pi D_L^2): L = N_u A h nu_rest = 4 pi D_L^2 S dv nu_obs / (c mu)
    # (Solomon & Vanden Bout 2005, ARA&A 43, 677, eq. 1), Planck18 distances (astropy).
    n_u = number * row["g_up"] * np.exp(-float(row["E_up"] / temperature)) / partition_function("CO", temperature)
    s_dv = ((1 + z) * c * h * row["einstein_A"] * n_u * mu / (4 * np.pi * Planck18.luminosity_distance(z) ** 2))
    area = -np.trapezoid(flux.to_value(u.Jy), velocity_of(axis.value, centre))
    assert area == pytest.approx(float(s_dv.to_value(u.Jy * KMS)), rel=1e-6)
    assert flux.unit == u.Jy


def test_opacity_saturates_at_the_planck_brightness():
    temperature, fwhm = 20 * u.K, 5 * KMS
    centre = float(find_line("CO J=1-0")["rest_frequency"].to_value(u.GHz))
    axis = np.linspace(centre - 0.01, centre + 0.01, 2001) * u.GHz
    kwargs = dict(temperature=temperature, fwhm=fwhm, opacity=True)
    thin = lte_spectrum(axis, "CO", temperature=temperature, fwhm=fwhm, column_density=1e12 / u.cm**2)
    faint = lte_spectrum(axis, "CO", column_density=1e12 / u.cm**2, **kwargs)
    # tau << 1: J(T)(1 - exp(-tau)) -> the optically thin line (Mangum & Shirley 2015, PASP 127, 266).
    np.testing.assert_allclose(faint.value, thin.value, rtol=1e-3, atol=1e-12)
    thick = lte_spectrum(axis, "CO", column_density=1e20 / u.cm**2, **kwargs)
    t0 = (h * find_line("CO J=1-0")["rest_frequency"] / k_B).to_value(u.K)
    assert thick.max().value == pytest.approx(t0 / np.expm1(t0 / 20.0), rel=1e-6)  # J(T), Planck


def test_ortho_and_para_share_the_molecules():
    # NH3 (3,3) ortho and (1,1)/(2,2) para near 23.7 GHz; each spin species with its own Q and energy zero.
    table = lte_lines(23.69 * u.GHz, 23.88 * u.GHz, "NH3", temperature=30 * u.K, column_density=2e14 / u.cm**2,
                      ortho_para_ratio=1.5)
    row = table[table["name"] == "NH3 (J,K)=(3,3)"][0]
    q = partition_function("NH3", 30 * u.K, spin_isomer="ortho")
    expected = 2e14 * 1.5 / 2.5 * 7 * np.exp(-(123.54 - partition_energy_zero("NH3", "ortho").value) / 30) / q
    assert row["N_u"].to_value(u.cm**-2) == pytest.approx(float(expected), rel=1e-9)
    para = table[table["spin_isomer"] == "para"]
    assert len(para) == 10  # the (1,1) and (2,2) hyperfine components, one row each


@pytest.mark.parametrize("kwargs, error, match", [
    (dict(column_density=1e15 / u.cm**2, total_number=1e60), ParameterError, "exactly one"),
    (dict(), ParameterError, "exactly one"),
    (dict(column_density=1e15 * u.cm**-3), UnitMismatchError, "cm\\^-2"),
    (dict(total_number=1e60, opacity=True, z=2.0), ParameterError, "opacity=True needs column_density"),
    (dict(column_density=1e15 / u.cm**2, fwhm=-5 * KMS), ParameterError, "fwhm must be finite and > 0"),
    (dict(column_density=1e15 / u.cm**2, temperature=30), UnitMismatchError, "temperature must be a Quantity"),
])
def test_bad_input(kwargs, error, match):
    axis = np.linspace(230.3, 230.7, 100) * u.GHz
    arguments = dict(temperature=30 * u.K, fwhm=10 * KMS)
    arguments.update(kwargs)
    with pytest.raises(error, match=match):
        lte_spectrum(axis, "CO", **arguments)


def test_velocity_axis_and_unknown_species_are_refused():
    with pytest.raises(SpectralAxisError, match="give observed frequencies"):
        lte_spectrum(np.linspace(-100, 100, 50) * KMS, "CO", temperature=30 * u.K,
                     column_density=1e15 / u.cm**2, fwhm=10 * KMS)
    with pytest.raises(CatalogError, match="unknown species"):
        lte_spectrum(np.linspace(230.3, 230.7, 50) * u.GHz, "COO", temperature=30 * u.K,
                     column_density=1e15 / u.cm**2, fwhm=10 * KMS)
