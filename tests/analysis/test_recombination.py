"""Radio recombination lines against published frequencies and the Rydberg formula's physics."""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c
from astropy.tests.helper import assert_quantity_allclose

from cubeloupe.analysis import (
    CatalogError,
    UnitMismatchError,
    find_line,
    load_catalog,
    recombination_frequency,
    recombination_lines,
)

C_KMS = c.to_value(u.km / u.s)


@pytest.mark.parametrize("n, delta_n, ghz", [
    # Hydrogen line rest frequencies as tabulated by Lilley & Palmer (1968, ApJS 16, 143)
    # and Towle, Feldman & Watson (1996, ApJS 107, 747); values from memory, to 10 kHz.
    (66, 1, 22.36417), (42, 1, 85.68839), (41, 1, 92.03443), (40, 1, 99.02295),
    (30, 1, 231.90093), (26, 1, 353.62275), (21, 1, 662.40416),
])
def test_hydrogen_lines_against_published_values(n, delta_n, ghz):
    assert_quantity_allclose(recombination_frequency("H", n, delta_n), ghz * u.GHz, atol=15 * u.kHz)


@pytest.mark.parametrize("element, km_s", [("He", -122.17), ("C", -149.56)])
def test_isotope_shift_velocities(element, km_s):
    # He and C lines lie at -122.2 and -149.6 km/s relative to the H line of the same n
    # in the radio convention, independent of n (common practice; e.g. Gordon &
    # Sorochenko 2002). The shift comes only from the reduced mass.
    n = np.array([20, 40, 60, 80])
    for dn in (1, 2, 3):
        nu_h = recombination_frequency("H", n, dn)
        nu_x = recombination_frequency(element, n, dn)
        velocity = C_KMS * (1 - nu_x / nu_h)
        np.testing.assert_allclose(velocity, km_s, atol=0.05)


def test_ritz_sum_of_alpha_lines_gives_beta_and_gamma():
    # n+2 -> n is the sum of n+2 -> n+1 and n+1 -> n (levels of one atom; Ritz principle).
    n = np.arange(10, 90)
    alpha = recombination_frequency("H", n, 1)
    assert_quantity_allclose(recombination_frequency("H", n, 2), alpha + recombination_frequency("H", n + 1, 1))
    assert_quantity_allclose(recombination_frequency("H", n, 3),
                             recombination_frequency("H", n, 2) + recombination_frequency("H", n + 2, 1))


def test_high_n_limit():
    # For n >> 1, nu ~ 2 R c dn / n^3 (e.g. Gordon & Sorochenko 2002), to ~ 3 dn / (2n).
    n = 200
    approx = 2 * 3.28805e15 * 2 / n**3 * u.Hz
    assert_quantity_allclose(recombination_frequency("H", n, 2), approx, rtol=3 * 2 / (2 * n))


def test_lines_in_a_band_and_in_the_catalog():
    lines = recombination_lines(20 * u.GHz, 1910 * u.GHz)
    assert set(lines["species"]) == {"H", "He", "C"}
    assert set(lines["delta_n"]) == {1, 2, 3}
    nu = lines["rest_frequency"].to_value(u.GHz)
    assert nu.min() >= 20 and nu.max() <= 1910 and np.all(np.diff(nu) >= 0)
    # Complete within the band: the next alpha line beyond each end lies outside it.
    for element in ("H", "He", "C"):
        for dn in (1, 2, 3):
            rows = lines[(lines["species"] == element) & (lines["delta_n"] == dn)]
            assert np.all(np.diff(np.sort(rows["n"])) == 1)
            assert recombination_frequency(element, int(rows["n"].max()) + 1, dn) < 20 * u.GHz
            assert recombination_frequency(element, int(rows["n"].min()) - 1, dn) > 1910 * u.GHz
    catalog = load_catalog()
    rrl = catalog[catalog["family"] == "recombination lines"]
    assert len(rrl) == len(lines)
    assert_quantity_allclose(find_line("H 40alpha")["rest_frequency"], 99.02295 * u.GHz, atol=15 * u.kHz)


@pytest.mark.parametrize("call, error", [
    (lambda: recombination_frequency("Fe", 40), CatalogError),
    (lambda: recombination_frequency("H", 0), CatalogError),
    (lambda: recombination_frequency("H", 40, 4), CatalogError),
    (lambda: recombination_lines(20, 30 * u.GHz), UnitMismatchError),
    (lambda: recombination_lines(30 * u.GHz, 20 * u.GHz), CatalogError),
])
def test_bad_input(call, error):
    with pytest.raises(error):
        call()
