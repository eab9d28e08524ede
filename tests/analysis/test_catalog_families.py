"""The grown catalog (issue 15): breadth, families, hyperfine groups and degeneracies.

Published numbers are checked in test_catalog_reference.py; here the checks
are the physics and the facts of the trade the rows must obey: LTE
optically-thin hyperfine intensity ratios, degeneracies 2J+1 shared among
hyperfine components, symmetric-top K ladders, and that a detection of a
hyperfine group is identified as that group.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose

from cubeloupe.analysis import (
    LINE_FAMILIES,
    CatalogError,
    collapse_hyperfine,
    find_line,
    lines_in_band,
    load_catalog,
    select_lines,
    strongest_components,
)


@pytest.fixture(scope="module")
def catalog():
    return load_catalog()


def group_rows(catalog, group):
    return catalog[np.asarray(catalog["hyperfine_group"]) == group]


# ---------------------------------------------------------------------------
# Breadth and families
# ---------------------------------------------------------------------------

# The species the issue names (its list of what an observer meets daily).
ISSUE_SPECIES = ["CO", "13CO", "C18O", "C17O", "HCN", "H13CN", "HC15N", "DCN", "HNC", "HN13C", "HCO+",
                 "H13CO+", "DCO+", "N2H+", "N2D+", "CS", "C34S", "13CS", "SiO", "SO", "SO2", "H2S", "OCS",
                 "H2CO", "CH3OH", "CH3CN", "HC3N", "HNCO", "CH3CCH", "c-C3H2", "CN", "CCH", "NH3", "H2O",
                 "HDO", "H2O+", "OH+", "CH+", "HF", "[CI]", "[CII]", "[NII]", "[OI]", "[OIII]", "H", "He", "C"]


def test_every_species_of_the_issue_is_present(catalog):
    assert set(ISSUE_SPECIES) <= set(catalog["species"])


def test_thousands_of_rows_in_every_family(catalog):
    assert len(catalog) >= 2000
    families = np.asarray(catalog["family"])
    assert set(families) == set(LINE_FAMILIES)
    for family in LINE_FAMILIES:
        assert (families == family).sum() >= 8, family


@pytest.mark.parametrize("name, family", [
    ("CO J=2-1", "CO and isotopologues"), ("C17O J=2-1", "CO and isotopologues"),
    ("N2H+ J=3-2", "dense gas"), ("HCN J=1-0 F=2-1", "dense gas"), ("SiO v=1 J=2-1", "shock tracers"),
    ("SO N_J=3_2-2_1", "shock tracers"), ("CH3CN J=12-11 K=3", "complex organics"),
    ("H2O 3_13-2_20", "water and hydrides"), ("[CII] 2P3/2-2P1/2", "atoms and ions"),
    ("H 40alpha", "recombination lines"),
])
def test_families_of_known_lines(catalog, name, family):
    # Family assignments as the trade groups these tracers (common practice).
    assert find_line(name, catalog)["family"] == family


def test_bulk_rows_stay_below_the_energy_cut(catalog):
    # Bulk rows stop at E_up/k = 600 K (vibrationally excited SiO at 600 K above its
    # vibrational level); curated water masers lie higher on purpose.
    e_up = np.asarray(catalog["E_up"])
    high = catalog[np.isfinite(e_up) & (e_up > 600)]
    assert set(high["species"]) <= {"H2O", "SiO"}
    assert set(high["name"][high["species"] == "H2O"]) >= {"H2O 10_29-9_36", "H2O 6_16-5_23"}


def test_family_filter_and_error(catalog):
    organics = select_lines(family="complex organics", fmin=91.9 * u.GHz, fmax=92.0 * u.GHz)
    assert set(organics["species"]) == {"CH3CN"} and len(organics) >= 5
    band = lines_in_band(85 * u.GHz, 90 * u.GHz, 0.0, family=["dense gas", "shock tracers"])
    assert set(band["family"]) <= {"dense gas", "shock tracers"} and len(band) > 10
    with pytest.raises(CatalogError, match="unknown line family 'dense'.*dense gas"):
        select_lines(family="dense")


def test_energy_cut_keeps_recombination_lines():
    # Recombination lines have no E_up; an E_up cut must not hide them.
    band = lines_in_band(99.0 * u.GHz, 99.1 * u.GHz, 0.0, max_E_up=100 * u.K)
    assert {"H 40alpha", "He 40alpha", "C 40alpha"} <= set(band["name"])


def test_provenance_and_from_memory_marks(catalog):
    # Every row names its source; values recalled rather than copied say so.
    memory = np.array(["from memory" in p for p in catalog["provenance"]])
    assert memory.sum() < len(catalog) / 10
    # Species copied from the published catalogues (the vendored Splatalogue rows) name the copy.
    for species in ("CH3OH", "H2CO", "CH3CN", "CH3CCH", "HNCO", "HDO"):
        provenance = catalog["provenance"][catalog["species"] == species]
        assert len(provenance) and not any("from memory" in p for p in provenance), species
        assert all("casadata-2025.9.22" in p for p in provenance), species
    # Einstein A computed from a recalled dipole moment still says so.
    computed = [p for p in catalog["provenance"] if "A: rigid rotor" in p]
    assert computed and all("from memory" in p.split("A: rigid rotor")[1] for p in computed)


# ---------------------------------------------------------------------------
# Hyperfine groups
# ---------------------------------------------------------------------------

def test_relative_intensities_sum_to_one_per_group(catalog):
    groups = set(np.asarray(catalog["hyperfine_group"])) - {""}
    assert len(groups) >= 20
    for group in groups:
        rows = group_rows(catalog, group)
        assert len(rows) >= 2, group
        assert abs(np.sum(rows["relative_intensity"]) - 1) < 1e-4, group
        assert np.all(rows["relative_intensity"] > 0)
    outside = catalog[np.asarray(catalog["hyperfine_group"]) == ""]
    assert np.all(outside["relative_intensity"] == 1.0)


@pytest.mark.parametrize("group, count", [
    ("N2H+ J=1-0", 7), ("HCN J=1-0", 3), ("CCH N=1-0", 6), ("C17O J=1-0", 3),
    ("NH3 (J,K)=(1,1)", 5), ("NH3 (J,K)=(2,2)", 5),
    # CN N=1-0: nine components, four in J=1/2-1/2 and five in J=3/2-1/2 (Skatrud et al. 1983)
    ("CN N=1-0 J=1/2-1/2", 4), ("CN N=1-0 J=3/2-1/2", 5),
])
def test_hyperfine_groups_the_issue_names(catalog, group, count):
    assert len(group_rows(catalog, group)) == count


@pytest.mark.parametrize("group, expected", [
    # LTE optically-thin intensities: HCN J=1-0 F=1-1 : 2-1 : 0-1 = 3 : 5 : 1 (common practice).
    ("HCN J=1-0", [3 / 9, 5 / 9, 1 / 9]),
    # N2H+ J=1-0 in frequency order: 1/27, 5/27, 3/27, 5/27, 7/27, 3/27, 3/27
    # (Caselli, Myers & Thaddeus 1995, ApJ 455, L77; from memory).
    ("N2H+ J=1-0", [1 / 27, 5 / 27, 3 / 27, 5 / 27, 7 / 27, 3 / 27, 3 / 27]),
    # NH3 (1,1): outer, inner, main, inner, outer = 0.111, 0.139, 0.5, 0.139, 0.111 and
    # NH3 (2,2): 0.05, 0.052, 0.796, 0.052, 0.05 (Mangum & Shirley 2015, PASP 127, 266; from memory).
    ("NH3 (J,K)=(1,1)", [0.111, 0.139, 0.500, 0.139, 0.111]),
    ("NH3 (J,K)=(2,2)", [0.050, 0.052, 0.796, 0.052, 0.050]),
    # CCH N=1-0 in frequency order (Tucker, Kutner & Thaddeus 1974, ApJ 193, L115; from memory).
    ("CCH N=1-0", [0.043, 0.417, 0.208, 0.208, 0.083, 0.042]),
    # CN N=1-0 relative intensities of Skatrud, De Lucia, Blake & Sastry 1983 (J. Mol. Spectrosc. 99, 35),
    # 0.012, 0.099, 0.096, 0.125 (J=1/2-1/2) and 0.125, 0.333, 0.099, 0.096, 0.012 (J=3/2-1/2) of the nine
    # together, in frequency order (from memory), shared out within each J group.
    ("CN N=1-0 J=1/2-1/2", np.array([0.012, 0.099, 0.096, 0.125]) / 0.332),
    ("CN N=1-0 J=3/2-1/2", np.array([0.125, 0.333, 0.099, 0.096, 0.012]) / 0.665),
])
def test_hyperfine_intensity_ratios(catalog, group, expected):
    rows = group_rows(catalog, group)
    rows = rows[np.argsort(rows["rest_frequency"])]
    np.testing.assert_allclose(rows["relative_intensity"], expected, atol=0.004)


@pytest.mark.parametrize("group, two_j_plus_one", [("HCN J=1-0", 3), ("C17O J=1-0", 3), ("HCl J=1-0", 3)])
def test_component_degeneracies_share_the_rotational_level(catalog, group, two_j_plus_one):
    # Without nuclear-spin factors, the hyperfine levels F of a rotational level J
    # carry (2F+1)/prod(2I+1) each, which add up to 2J+1 (each upper level counted once).
    rows = group_rows(catalog, group)
    upper = {t.split("F=")[1].split("-")[0]: g for t, g in zip(rows["transition"], rows["g_up"])}
    assert sum(upper.values()) == pytest.approx(two_j_plus_one)


def test_collapsed_hcn_is_the_hyperfine_free_line(catalog):
    # HCN J=1-0 hyperfine-free frequency 88.6316023 GHz (LAMDA hcn.dat, copy in GitHub
    # fjdu/myRadex, see tests/data/catalog_reference.ecsv): the intensity-weighted mean
    # of the three components lands on it.
    row = collapse_hyperfine(group_rows(catalog, "HCN J=1-0"))[0]
    assert row["name"] == "HCN J=1-0" and row["relative_intensity"] == pytest.approx(1)
    assert_quantity_allclose(row["rest_frequency"], 88.6316023 * u.GHz, atol=1 * u.kHz)
    assert row["g_up"] == pytest.approx(3)


def test_a_detected_group_is_identified_as_that_group():
    # A line at the N2H+ J=1-0 frequency of a source at z = 0.01 matches the group's
    # components, each of which names the group; grouped, it is one row.
    z = 0.01
    nu = 93.1737637 * u.GHz / (1 + z)
    band = lines_in_band(nu - 5 * u.MHz, nu + 5 * u.MHz, z)
    assert set(band["hyperfine_group"]) == {"N2H+ J=1-0"}
    grouped = lines_in_band(nu - 5 * u.MHz, nu + 5 * u.MHz, z, group_hyperfine=True)
    assert grouped["name"].tolist() == ["N2H+ J=1-0"]
    assert_quantity_allclose(grouped["observed_frequency"], grouped["rest_frequency"] / (1 + z))


def test_group_name_as_reference_line():
    band = lines_in_band(88 * u.GHz, 89 * u.GHz, 0.0, reference="HCN J=1-0", species="HCN")
    # Components sit within a few km/s of the group's centre (velocity = c (1 - nu/nu0)).
    assert np.all(np.abs(band["velocity"]) < 8 * u.km / u.s)


def test_collapse_leaves_ungrouped_rows_alone(catalog):
    rows = select_lines(catalog, species="CO")
    assert collapse_hyperfine(rows) is rows


# ---------------------------------------------------------------------------
# Degeneracies and ladders
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("species", ["CO", "13CO", "CS", "SiO", "HC3N", "OCS", "N2H+", "H13CO+"])
def test_linear_rotor_degeneracy_is_2j_plus_1(catalog, species):
    rows = catalog[(catalog["species"] == species) & np.array([t.startswith("J=") and " " not in t
                                                               for t in catalog["transition"]])]
    j_up = np.array([int(t[2:].split("-")[0]) for t in rows["transition"]])
    np.testing.assert_array_equal(rows["g_up"], 2 * j_up + 1)


@pytest.mark.parametrize("name, g", [("[CI] 3P1-3P0", 3), ("[CII] 2P3/2-2P1/2", 4), ("[OI] 3P1-3P2", 3),
                                     ("H2O 1_10-1_01", 3), ("NH3 (J,K)=(3,3)", 7)])
def test_level_degeneracies(catalog, name, g):
    # 2J+1 of the upper level, spin weights left out (each spin species has its own Q).
    assert find_line(name, catalog)["g_up"] == g


def test_symmetric_top_ladder(catalog):
    # CH3CN J=12-11: K components at lower frequency as K grows, their spacing
    # 2 (J+1) D_JK K^2 (Gordy & Cook 1984), and K=3n lines with twice the spin weight.
    rows = catalog[np.char.startswith(np.asarray(catalog["name"], dtype=str), "CH3CN J=12-11 K=")]
    k = np.array([int(t.split("K=")[1]) for t in rows["transition"]])
    rows, k = rows[np.argsort(k)], np.sort(k)
    nu = rows["rest_frequency"].to_value(u.MHz)
    assert np.all(np.diff(nu) < 0)
    # The published lines (JPL components merged) against the first-order spacing with the CDMS
    # D_JK = 177.408 kHz (from memory); higher-order terms and the hyperfine centroids differ by < 0.5 %.
    d_jk = (nu[0] - nu[1:]) / (2 * 12 * k[1:] ** 2)
    np.testing.assert_allclose(d_jk, 0.177408, rtol=5e-3)
    ratio = rows["g_up"] / np.where(k == 0, 1, 2)
    np.testing.assert_array_equal(ratio, np.where(k % 3 == 0, 2, 1) * 25)


@pytest.mark.parametrize("name, mhz", [
    # JPL/CDMS catalogue frequencies as recalled (from memory); the catalog copies these lines from
    # the published entries (CH3CN: its hyperfine components merged), so agreement checks the copy.
    ("CH3CN J=5-4 K=0", 91987.0876), ("CH3CN J=5-4 K=2", 91979.9943), ("CH3CN J=12-11 K=3", 220709.0165),
    ("CH3CCH J=5-4 K=0", 85457.3003), ("CH3CCH J=5-4 K=3", 85442.6010), ("CH3CCH J=6-5 K=0", 102547.9842),
])
def test_symmetric_tops_against_recalled_lines(mhz, name):
    assert abs(find_line(name)["rest_frequency"].to_value(u.MHz) - mhz) < 0.1


def test_cn_groups_share_the_n_1_0_intensity_as_published(catalog):
    # Skatrud et al. 1983 (from memory): the J=3/2-1/2 group carries 0.665 of N=1-0's intensity, J=1/2-1/2 0.332
    weights = {}
    for group in ("CN N=1-0 J=1/2-1/2", "CN N=1-0 J=3/2-1/2"):
        rows = group_rows(catalog, group)
        # LTE optically thin, T >> h nu / k: a group's share is its sum of g_up A (common practice)
        weights[group] = float(np.sum(np.asarray(rows["g_up"]) * u.Quantity(rows["einstein_A"]).to_value(1 / u.s)))
    share = weights["CN N=1-0 J=3/2-1/2"] / sum(weights.values())
    assert share == pytest.approx(0.665 / 0.997, abs=0.004)
    # the strongest component, N=1-0 J=3/2-1/2 F=5/2-3/2 at 113.49097 GHz (CDMS via LAMDA, vendored copy)
    assert strongest_components(catalog)["CN N=1-0 J=3/2-1/2"] == "CN N=1-0 J=3/2-1/2 F=5/2-3/2"
