"""Tests for analysis/hyperfine.py: hyperfine groups, the optically thick profile, excitation temperatures."""

import astropy.units as u
import numpy as np
import pytest
from astropy import constants
from astropy.table import Table
from numpy.testing import assert_allclose
from scipy.optimize import approx_fprime

from cubeloupe.analysis import CatalogError, load_catalog
from cubeloupe.analysis.hyperfine import (
    excitation_temperature,
    hyperfine_jacobian,
    hyperfine_lines,
    hyperfine_profile,
    planck_temperature,
)


def test_hyperfine_lines_normalise_and_look_up_groups():
    lines = hyperfine_lines(Table({"rest_frequency": [93.1737, 93.1717] * u.GHz, "relative_intensity": [3, 1]}))
    assert lines["relative_intensity"].tolist() == [0.25, 0.75]   # sorted by frequency
    catalog = Table({"name": ["a", "b", "c"], "rest_frequency": [1.0, 1.1, 2.0] * u.GHz,
                     "hyperfine_group": ["X 1-0", "X 1-0", ""], "relative_intensity": [0.4, 0.6, 1.0]})
    assert len(hyperfine_lines("X 1-0", catalog=catalog)) == 2
    with pytest.raises(CatalogError, match=r"no hyperfine group 'Y 1-0'.*'X 1-0'"):
        hyperfine_lines("Y 1-0", catalog=catalog)


def test_catalog_group_by_name():
    if "hyperfine_group" not in load_catalog().colnames:
        with pytest.raises(CatalogError, match="no hyperfine groups"):
            hyperfine_lines("N2H+ J=1-0")
        return
    lines = hyperfine_lines("N2H+ J=1-0")
    # N2H+ 1-0 has seven hyperfine components (Caselli et al. 1995, Table 1).
    assert len(lines) == 7
    assert lines["relative_intensity"].sum() == pytest.approx(1.0)



def test_profile_is_the_optically_thin_sum_at_small_tau():
    # 1 - exp(-x) ~ x for small x (common practice): T ~ A tau sum_i r_i g_i(v).
    v = np.linspace(-5, 5, 201)
    offsets, weights = np.array([-1.0, 0.5]), np.array([0.3, 0.7])
    params = np.array([4.0, 0.2, 0.8, 1e-4])
    thin = 4.0 * 1e-4 * np.sum(weights * np.exp(-4 * np.log(2) * (v[:, None] - 0.2 - offsets) ** 2 / 0.8**2), axis=1)
    assert_allclose(hyperfine_profile(v, params, offsets, weights), thin, rtol=1e-4)
    # Saturation: at large tau the profile flattens at A (common practice).
    assert hyperfine_profile(np.array([0.2 + 0.5]), np.array([4.0, 0.2, 0.8, 30.0]), offsets, weights)[0] == \
        pytest.approx(4.0, rel=1e-6)


def test_jacobian_matches_finite_differences():
    # Reference: scipy's forward-difference gradient.
    v = np.linspace(-4, 4, 41)
    offsets, weights = np.array([-1.0, 0.0, 2.0]), np.array([0.2, 0.5, 0.3])
    params = np.array([3.0, 0.3, 0.7, 2.0])
    numeric = np.array([approx_fprime(params, lambda p, i=i: hyperfine_profile(v, p, offsets, weights)[i], 1e-7)
                        for i in range(v.size)])
    assert_allclose(hyperfine_jacobian(v, params, offsets, weights), numeric, atol=1e-5)


def test_planck_temperature_and_its_inverse():
    nu = 93.17 * u.GHz
    t0 = (constants.h * nu / constants.k_B).to_value(u.K)
    # Rayleigh-Jeans limit J(T) -> T - h nu / 2k for T >> h nu / k (common practice).
    assert planck_temperature(1000.0, nu) == pytest.approx(1000.0 - t0 / 2, rel=1e-5)
    # Round trip through the amplitude, at z = 0 and z = 1 (CMB at (1 + z) 2.72548 K; Fixsen 2009).
    for z in (0.0, 1.0):
        amplitude = (planck_temperature(12.0, nu) - planck_temperature(2.72548 * (1 + z), nu)) / (1 + z)
        tex, derivative = excitation_temperature(amplitude, nu, z)
        assert tex == pytest.approx(12.0, rel=1e-9)
        step = 1e-6
        assert derivative == pytest.approx(
            (excitation_temperature(amplitude + step, nu, z)[0] - tex) / step, rel=1e-4)
    assert np.isnan(excitation_temperature(-10.0, nu)[0])


def test_strongest_component_of_each_group():
    from cubeloupe.analysis import load_catalog, strongest_components

    strongest = strongest_components()
    catalog = load_catalog()
    # HCN J=1-0: F=2-1 carries 5/9 of the intensity (LTE, 2F+1 weights; common practice)
    assert strongest["HCN J=1-0"] == "HCN J=1-0 F=2-1"
    # N2H+ J=1-0: F1,F = 2,3-1,2 (7/27 of the intensity, Pagani et al. 2009 via pyspeckit)
    assert strongest["N2H+ J=1-0"] == "N2H+ J=1-0 F1,F=2,3-1,2"
    groups = set(np.asarray(catalog["hyperfine_group"], dtype=str)) - {""}
    assert set(strongest) == groups
