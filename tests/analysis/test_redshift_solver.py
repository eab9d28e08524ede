"""Tests of redshift_candidates: solving z and identifying lines from observed peaks."""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c

from cubeloupe.analysis import (
    CatalogError,
    CubeloupeError,
    RedshiftError,
    UnitMismatchError,
    find_line,
    load_catalog,
    redshift_candidates,
)

C_KMS = c.to_value(u.km / u.s)


def observed(names, z):
    # Definition of redshift: nu_obs = nu_rest / (1 + z).
    return u.Quantity([find_line(n)["rest_frequency"] for n in names]) / (1 + z)


def draw_peak_set(rng, catalog, n_lines, band=(84.0, 950.0)):
    """Random z and ``n_lines`` catalog lines of distinct species observable in ``band`` [GHz]."""
    nu = catalog["rest_frequency"].to_value(u.GHz)
    while True:
        z = rng.uniform(0.05, 7.0)
        visible = np.flatnonzero((nu / (1 + z) >= band[0]) & (nu / (1 + z) <= band[1]))
        rng.shuffle(visible)
        picked, species = [], set()
        for i in visible:
            if catalog["species"][i] not in species:
                picked.append(i)
                species.add(catalog["species"][i])
            if len(picked) == n_lines:
                return z, [str(catalog["name"][i]) for i in sorted(picked)]


def test_solves_a_known_set_exactly():
    # CO J=4-3, J=5-4, [CI] 3P1-3P0 and [CII] at z = 4.3.
    names = ["CO J=4-3", "[CI] 3P1-3P0", "CO J=5-4", "[CII] 2P3/2-2P1/2"]
    best = redshift_candidates(observed(names, 4.3))[0]
    assert best.lines == tuple(names)
    assert best.z == pytest.approx(4.3, abs=1e-9)
    assert best.n_identified == 4 and best.unique
    np.testing.assert_allclose(best.residuals.to_value(u.km / u.s), 0, atol=1e-6)


@pytest.mark.parametrize("n_lines", [2, 3, 4])
def test_random_synthetic_peak_sets(rng, n_lines):
    # Peaks drawn from the catalog at random z, shifted by Gaussian noise of
    # 20 km/s (a typical line-centre error), are identified and z is recovered
    # within its quoted uncertainty.
    # drawn from the lines the solver searches by default (REDSHIFT_FAMILIES, hyperfine groups as one line)
    from cubeloupe.analysis import collapse_hyperfine, select_lines
    from cubeloupe.analysis.redshift_solver import REDSHIFT_FAMILIES, REDSHIFT_MAX_E_UP, REDSHIFT_SPECIES
    catalog = collapse_hyperfine(select_lines(load_catalog(), family=REDSHIFT_FAMILIES,
                                              species=list(REDSHIFT_SPECIES), max_E_up=REDSHIFT_MAX_E_UP))
    sigma = 20.0
    n_trials, n_top = 40, 0
    for _ in range(n_trials):
        z_true, names = draw_peak_set(rng, catalog, n_lines)
        shift = 1 - rng.normal(0, sigma, n_lines) / C_KMS
        peaks = observed(names, z_true) * shift
        found = redshift_candidates(peaks, peak_uncertainty=sigma * u.km / u.s,
                                    tolerance=150 * u.km / u.s, max_candidates=50)
        truth = [cand for cand in found if cand.lines == tuple(names)]
        assert truth, f"true identification {names} at z={z_true:.4f} not among the candidates"
        cand = truth[0]
        assert abs(cand.z - z_true) < 5 * cand.z_uncertainty
        # A formal error of (1 + z) sigma / c / sqrt(n), give or take the scatter.
        formal = (1 + z_true) * sigma / C_KMS / np.sqrt(n_lines)
        assert formal * 0.99 < cand.z_uncertainty < formal * 5
        n_top += found[0].lines == tuple(names)
    # With two peaks, about a quarter of line ratios are matched as well by
    # another pair of lines within the noise; with three or more peaks the
    # right answer is nearly always first (measured rates 0.74, 0.97, 0.98).
    assert n_top >= {2: 0.55, 3: 0.85, 4: 0.9}[n_lines] * n_trials


def test_single_peak_gives_candidates_not_certainty():
    peak = [345.7959899 / 3.0] * u.GHz
    found = redshift_candidates(peak, max_candidates=200)
    assert len(found) > 10
    assert not any(cand.unique for cand in found)
    assert all(cand.n_identified == 1 for cand in found)
    # Each candidate's z is that line's nu_rest / nu_obs - 1.
    for cand in found:
        nu = find_line(cand.lines[0])["rest_frequency"].to_value(u.GHz)
        assert cand.z == pytest.approx(nu / peak[0].to_value(u.GHz) - 1, rel=1e-12)
    assert "CO J=3-2" in {cand.lines[0] for cand in found}


def test_unidentified_interloper_is_left_out():
    peaks = observed(["CO J=3-2", "HCN J=4-3", "CO J=4-3"], 1.7)
    peaks = np.append(peaks, 131.111 * u.GHz)  # not a catalog line at this z
    best = redshift_candidates(peaks)[0]
    assert best.lines[:3] == ("CO J=3-2", "HCN J=4-3", "CO J=4-3") and best.lines[3] is None
    assert best.n_identified == 3 and best.z == pytest.approx(1.7, abs=1e-6)
    assert np.isnan(best.residuals[3]) and set(best.identifications.values()) == set(best.lines[:3])


def test_uncertainty_scales_with_peak_uncertainty():
    peaks = observed(["CO J=2-1", "CO J=3-2"], 2.0)
    one = redshift_candidates(peaks, peak_uncertainty=10 * u.km / u.s)[0]
    two = redshift_candidates(peaks, peak_uncertainty=20 * u.km / u.s)[0]
    assert two.z_uncertainty == pytest.approx(2 * one.z_uncertainty, rel=1e-9)
    # Weighted mean of two equal-weight estimates: sigma_z = (1 + z) sigma_v / c / sqrt(2).
    assert one.z_uncertainty == pytest.approx(3.0 * 10 / C_KMS / np.sqrt(2), rel=1e-6)


def test_filters_and_z_range_restrict_candidates():
    peaks = observed(["H2O 2_11-2_02", "H2O 2_02-1_11"], 3.0)
    best = redshift_candidates(peaks, species="H2O", spin_isomer="para")[0]
    assert best.lines == ("H2O 2_11-2_02", "H2O 2_02-1_11")
    assert best.z == pytest.approx(3.0, abs=1e-9)
    assert all(set(cand.lines) <= {n for n in load_catalog()["name"] if n.startswith("H2O")}
               for cand in redshift_candidates(peaks, species="H2O"))
    low = redshift_candidates(peaks, z_range=(0, 1))
    assert all(0 <= cand.z <= 1 for cand in low)
    assert all(abs(cand.z - 3.0) > 0.01 for cand in low)
    with pytest.raises(CatalogError, match="did you mean"):
        redshift_candidates(peaks, species="H20")


@pytest.mark.parametrize("peaks, kwargs, error", [
    ([100.0, 200.0], {}, UnitMismatchError),
    ([100.0, 200.0] * u.km / u.s, {}, UnitMismatchError),
    ([] * u.GHz, {}, RedshiftError),
    ([100.0, 100.0] * u.GHz, {}, RedshiftError),
    ([100.0, -5.0] * u.GHz, {}, RedshiftError),
    ([100.0, 200.0] * u.GHz, {"tolerance": 100}, UnitMismatchError),
    ([100.0, 200.0] * u.GHz, {"z_range": (2, 1)}, RedshiftError),
    ([100.0, 200.0] * u.GHz, {"z_range": (0, 30)}, RedshiftError),
    ([100.0, 200.0] * u.GHz, {"peak_uncertainty": [1, 2, 3] * u.km / u.s}, RedshiftError),
])
def test_bad_input(peaks, kwargs, error):
    with pytest.raises(error) as info:
        redshift_candidates(u.Quantity(peaks) if isinstance(peaks, u.Quantity) else peaks, **kwargs)
    assert isinstance(info.value, CubeloupeError)
