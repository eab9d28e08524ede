"""Tests of the bundled transition catalog, user line lists and lines_in_band.

The catalog's numbers are checked against physics the trade relies on: the
water spin-isomer rule, the Ritz combination principle, upper-level energies
as sums of h nu / k, the rigid-rotor ladder of linear molecules with its
published rotational constants, and the fine-structure wavelengths quoted in
the literature.
"""

import collections
import re
from importlib import resources

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import c, h, k_B
from astropy.table import Table
from astropy.tests.helper import assert_quantity_allclose

from cubeloupe.analysis import (
    CatalogError,
    collapse_hyperfine,
    CubeloupeError,
    RedshiftError,
    SpectralRangeError,
    UnitMismatchError,
    find_line,
    lines_in_band,
    load_catalog,
    read_line_list,
    select_lines,
)

H_OVER_K = (h / k_B).to_value(u.K / u.GHz)  # CODATA via astropy
C_KMS = c.to_value(u.km / u.s)


@pytest.fixture(scope="module")
def catalog():
    return load_catalog()


def rows_of(catalog, species):
    return catalog[catalog["species"] == species]


def level_energies(rows, ground):
    """Energies of levels reached from ``ground`` along the lines (BFS over level graph).

    Returns (energy [GHz] per level, list of closure misfits [GHz] of every
    line that closes a loop).
    """
    edges = collections.defaultdict(list)
    for tr, nu in zip(rows["transition"], rows["rest_frequency"].to_value(u.GHz)):
        upper, lower = tr.split("-")
        edges[upper].append((lower, -nu))
        edges[lower].append((upper, nu))
    energy, queue, tree = {ground: 0.0}, [ground], set()
    while queue:
        level = queue.pop(0)
        for other, step in edges[level]:
            if other not in energy:
                energy[other] = energy[level] + step
                tree.add(frozenset((level, other)))
                queue.append(other)
    misfits = []
    for tr, nu in zip(rows["transition"], rows["rest_frequency"].to_value(u.GHz)):
        upper, lower = tr.split("-")
        if frozenset((upper, lower)) not in tree and upper in energy and lower in energy:
            misfits.append(energy[upper] - energy[lower] - nu)
    return energy, misfits


# ---------------------------------------------------------------------------
# Contents and format
# ---------------------------------------------------------------------------

def test_columns_units_and_provenance(catalog):
    assert catalog.colnames[:8] == ["name", "species", "transition", "rest_frequency", "E_up",
                                    "einstein_A", "spin_isomer", "provenance"]
    assert catalog["rest_frequency"].unit == u.GHz
    assert catalog["E_up"].unit == u.K
    assert catalog["einstein_A"].unit == 1 / u.s
    assert set(catalog["spin_isomer"]) <= {"ortho", "para", "none"}
    assert all(len(p) > 10 for p in catalog["provenance"])
    assert len(set(catalog["name"])) == len(catalog), "row names must be unique"
    known_a = catalog["einstein_A"][np.isfinite(catalog["einstein_A"])]
    assert np.all(known_a > 0)
    assert np.all(np.diff(catalog["rest_frequency"]) >= 0), "sorted by rest frequency"


def test_frequencies_have_seven_significant_digits():
    # The issue asks for >= 7 significant digits where known; read the file's text as written.
    text = resources.files("cubeloupe.analysis.data").joinpath("transitions.ecsv").read_text()
    rows = [line for line in text.splitlines() if line and not line.startswith("#")][1:]
    for line in rows:
        number = re.search(r'"\s+([0-9.]+)\s', line).group(1)
        assert len(number.replace(".", "").lstrip("0")) >= 7, line


@pytest.mark.parametrize("name", [
    *[f"CO J={j}-{j - 1}" for j in range(1, 14)],
    "13CO J=1-0", "13CO J=2-1", "13CO J=3-2", "C18O J=1-0", "C18O J=2-1", "C18O J=3-2",
    "[CI] 3P1-3P0", "[CI] 3P2-3P1", "[CII] 2P3/2-2P1/2", "[NII] 3P1-3P0", "[OI] 3P1-3P2",
    "[OI] 3P0-3P1", "[OIII] 3P1-3P0",
    "HCN J=1-0", "HCO+ J=1-0", "HNC J=1-0", "CS J=2-1",
    "SiO J=1-0", "SiO J=2-1", "NH3 (J,K)=(1,1)", "NH3 (J,K)=(2,2)", "CH+ J=1-0", "HF J=1-0",
    "H2O 6_16-5_23", "H2O 1_10-1_01", "H2O 1_11-0_00",
])
def test_coverage_named_in_issue(catalog, name):
    # A name stays valid as a row or, for lines now split into hyperfine
    # components (HCN J=1-0, NH3 (1,1), (2,2)), as the name of their group.
    assert name in set(catalog["name"]) or name in set(catalog["hyperfine_group"])
    assert find_line(name, catalog)["name"] == name


@pytest.mark.parametrize("species, n_min", [("CN", 2), ("OH+", 1), ("H2O+", 1)])
def test_coverage_of_hyperfine_species(catalog, species, n_min):
    assert len(rows_of(catalog, species)) >= n_min
    if species == "CN":
        assert {t.split(" ")[0] for t in rows_of(catalog, "CN")["transition"]} == {"N=1-0", "N=2-1"}


def test_water_coverage(catalog):
    water = rows_of(catalog, "H2O")
    assert len(water) >= 25
    assert {"ortho", "para"} == set(water["spin_isomer"])
    # Ground-state and maser lines at their catalogue frequencies (JPL; Pickett et al. 1998).
    for name, ghz in [("H2O 6_16-5_23", 22.23508), ("H2O 1_10-1_01", 556.93599),
                      ("H2O 1_11-0_00", 1113.34301)]:
        assert_quantity_allclose(find_line(name)["rest_frequency"], ghz * u.GHz, atol=0.05 * u.MHz)
    inside = (catalog["rest_frequency"] >= 20 * u.GHz) & (catalog["rest_frequency"] <= 2.5 * u.THz)
    # Only the far-IR [OI] 63 um and [OIII] 88 um lines, which the issue asks for, lie above 2.5 THz.
    assert set(catalog["name"][~inside]) == {"[OI] 3P1-3P2", "[OIII] 3P1-3P0"}


# ---------------------------------------------------------------------------
# Water: spin isomers, Ritz principle, energies
# ---------------------------------------------------------------------------

def _parity(level):
    ka, kc = (int(q) for q in level.split("_")[1])
    return (ka + kc) % 2


def test_water_spin_isomer_rule(catalog):
    # Ortho levels of H2O have Ka+Kc odd, para levels even, and radiative lines
    # never join ortho and para (common practice).
    for tr, spin in zip(rows_of(catalog, "H2O")["transition"], rows_of(catalog, "H2O")["spin_isomer"]):
        upper, lower = tr.split("-")
        assert _parity(upper) == _parity(lower), tr
        assert spin == ("ortho" if _parity(upper) else "para"), tr


@pytest.mark.parametrize("spin, ground, min_loops", [("para", "0_00", 4), ("ortho", "1_01", 2)])
def test_water_ritz_combination_principle(catalog, spin, ground, min_loops):
    # Ritz combination principle: around any closed chain of levels the line
    # frequencies add to zero; catalogue frequencies close to < 1 MHz (the issue's bound).
    water = rows_of(catalog, "H2O")
    water = water[water["spin_isomer"] == spin]
    _, misfits = level_energies(water, ground)
    assert len(misfits) >= min_loops, "the test needs closed chains to check"
    assert np.max(np.abs(misfits)) * 1e3 < 1.0, misfits


def test_water_upper_energies_are_sums_along_chains(catalog):
    # E_up/k of each line = E_low/k + h nu / k, with the lower level's energy
    # taken from the para ground level 0_00 (para) or from 1_01 at 23.794 cm^-1
    # = 34.23 K above 0_00 (ortho; JPL level energy, from memory), or from the
    # E_up the catalog gives for that level as the upper level of another line.
    water = rows_of(catalog, "H2O")
    known = {"0_00": 0.0, "1_01": 23.7944 * (h * c / k_B).to_value(u.K * u.cm)}
    for tr, e_up in zip(water["transition"], water["E_up"].to_value(u.K)):
        known.setdefault(tr.split("-")[0], e_up)
    checked = 0
    for tr, nu, e_up in zip(water["transition"], water["rest_frequency"].to_value(u.GHz),
                            water["E_up"].to_value(u.K)):
        lower = tr.split("-")[1]
        if lower in known:
            assert abs(known[lower] + H_OVER_K * nu - e_up) < 0.5, tr
            checked += 1
    assert checked >= 25


def test_water_ground_line_energies(catalog):
    # p-H2O 1_11-0_00 has E_up/k close to 53 K; o-H2O 1_10-1_01 61.0 K (common practice).
    assert abs(find_line("H2O 1_11-0_00")["E_up"].to_value(u.K) - 53.4) < 0.5
    assert abs(find_line("H2O 1_10-1_01")["E_up"].to_value(u.K) - 61.0) < 0.5


# ---------------------------------------------------------------------------
# Linear rotors
# ---------------------------------------------------------------------------

def _ladder(catalog, species):
    rows = collapse_hyperfine(rows_of(catalog, species))
    rows = rows[[t.startswith("J=") for t in rows["transition"]]]  # v=0 only
    j_up = np.array([int(t.split("=")[1].split("-")[0]) for t in rows["transition"]])
    order = np.argsort(j_up)
    return j_up[order], rows["rest_frequency"].to_value(u.MHz)[order], rows["E_up"].to_value(u.K)[order]


# Published ground-state rotational constants B0 [MHz] (CDMS catalogue entries,
# Mueller et al. 2005; from memory): CO from Winnewisser et al. 1997.
PUBLISHED_B = {"CO": 57635.968, "13CO": 55101.012, "C18O": 54891.420, "HCN": 44315.976,
               "HCO+": 44594.423, "HNC": 45331.98, "CS": 24495.56, "SiO": 21711.98}


@pytest.mark.parametrize("species", list(PUBLISHED_B))
def test_linear_rotor_ladders(catalog, species):
    # nu = 2B(J+1) - 4D(J+1)^3 for J -> J+1 (rigid rotor with centrifugal
    # distortion; e.g. Townes & Schawlow 1955), fits to < 1 MHz.
    j_up, nu, e_up = _ladder(catalog, species)
    design = np.c_[2 * j_up, -4.0 * j_up**3]
    (b, d), *_ = np.linalg.lstsq(design, nu, rcond=None)
    assert np.max(np.abs(nu - design @ (b, d))) < 1.0
    tolerance = 0.01 if species == "CO" else 0.5  # CO's constant is recalled to 1 kHz
    assert abs(b - PUBLISHED_B[species]) < tolerance
    assert d > 0
    # E_up/k of level J follows from the same constants: h (B J(J+1) - D J^2 (J+1)^2) / k;
    # LAMDA files print E_up to 0.1 K (CS, SiO beyond the curated rows), hence 0.1 K.
    expected = H_OVER_K * 1e-3 * (b * j_up * (j_up + 1) - d * j_up**2 * (j_up + 1) ** 2)
    assert np.max(np.abs(e_up - expected)) < 0.1


def test_co_centrifugal_constant(catalog):
    # CO D0 = 0.1835 MHz (Winnewisser et al. 1997; from memory).
    j_up, nu, _ = _ladder(catalog, "CO")
    (b, d), *_ = np.linalg.lstsq(np.c_[2 * j_up, -4.0 * j_up**3], nu, rcond=None)
    assert abs(d - 0.1835) < 0.003


def _dipole_from_a(a, nu_mhz, j_up):
    # A = 1.16395e-20 nu[MHz]^3 mu[D]^2 J/(2J+1) for a linear rotor's J -> J-1 line
    # (e.g. the CDMS/JPL documentation, Pickett et al. 1998).
    return np.sqrt(a / (1.16395e-20 * nu_mhz**3 * j_up / (2 * j_up + 1)))


def test_co_einstein_a_matches_dipole_moment(catalog):
    # CO dipole moment 0.1098 D (Muenter 1975, J. Mol. Spectrosc. 55, 490; from memory);
    # vibrational corrections change A by a few per cent at high J, hence 2.5 %.
    j_up, nu, _ = _ladder(catalog, "CO")
    a = rows_of(catalog, "CO")["einstein_A"].to_value(1 / u.s)[np.argsort(
        [int(t.split("=")[1].split("-")[0]) for t in rows_of(catalog, "CO")["transition"]])]
    np.testing.assert_allclose(_dipole_from_a(a, nu, j_up), 0.1098, rtol=0.025)


def test_hcn_einstein_a(catalog):
    # HCN J=1-0: A = 2.4075e-5 s^-1 (LAMDA hcn.dat, Schoier et al. 2005; copy vendored in tests/data/catalog_reference.ecsv).
    assert_quantity_allclose(find_line("HCN J=1-0")["einstein_A"], 2.407e-5 / u.s, rtol=0.01)


# ---------------------------------------------------------------------------
# Fine-structure lines
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("name, microns", [
    # Wavelengths as the trade quotes them (e.g. Carilli & Walter 2013, ARA&A 51, 105; from memory).
    ("[CII] 2P3/2-2P1/2", 157.74), ("[CI] 3P1-3P0", 609.14), ("[CI] 3P2-3P1", 370.42),
    ("[NII] 3P1-3P0", 205.18), ("[NII] 3P2-3P1", 121.90), ("[OI] 3P1-3P2", 63.18),
    ("[OI] 3P0-3P1", 145.53), ("[OIII] 3P1-3P0", 88.36),
])
def test_fine_structure_wavelengths(catalog, name, microns):
    wavelength = find_line(name)["rest_frequency"].to(u.um, equivalencies=u.spectral())
    assert_quantity_allclose(wavelength, microns * u.um, atol=0.01 * u.um)


@pytest.mark.parametrize("upper, lower", [("[CI] 3P2-3P1", "[CI] 3P1-3P0"),
                                          ("[NII] 3P2-3P1", "[NII] 3P1-3P0"),
                                          ("[OI] 3P0-3P1", "[OI] 3P1-3P2")])
def test_fine_structure_level_energies(catalog, upper, lower):
    # E_up of the upper line = E_up of the lower line + h nu / k (levels of one term).
    first, second = find_line(lower), find_line(upper)
    assert abs(first["E_up"].value - H_OVER_K * first["rest_frequency"].value) < 0.05
    expected = first["E_up"].value + H_OVER_K * second["rest_frequency"].value
    assert abs(second["E_up"].value - expected) < 0.05


# ---------------------------------------------------------------------------
# Filters
# ---------------------------------------------------------------------------

def test_select_by_species_spin_energy_and_frequency(catalog):
    ortho = select_lines(species="h2o", spin_isomer="ortho", max_E_up=200 * u.K)
    assert set(ortho["spin_isomer"]) == {"ortho"} and np.all(ortho["E_up"] <= 200 * u.K)
    assert "H2O 1_10-1_01" in set(ortho["name"])
    assert select_lines(species="cii")["name"].tolist() == ["[CII] 2P3/2-2P1/2"]
    # Wavelength limits are accepted: 1.5 mm = 199.86 GHz.
    co = select_lines(species=["CO", "13CO"], fmin=1.5 * u.mm, fmax=500 * u.GHz)
    assert co["name"].tolist() == ["13CO J=2-1", "CO J=2-1", "13CO J=3-2", "CO J=3-2",
                                   "13CO J=4-3", "CO J=4-3"]
    # E_up can also be given as an energy.
    by_energy = select_lines(species="CO", max_E_up=(55.5 * u.K).to(u.eV, u.temperature_energy()))
    assert by_energy["name"].tolist() == ["CO J=1-0", "CO J=2-1", "CO J=3-2", "CO J=4-3"]


def test_unknown_species_suggests_close_matches():
    with pytest.raises(CatalogError, match=r"unknown species 'HCO\+\+'.*HCO\+"):
        select_lines(species="HCO++")
    with pytest.raises(CatalogError, match="did you mean.*'CO'"):
        lines_in_band(100 * u.GHz, 120 * u.GHz, 0, species="C0")


@pytest.mark.parametrize("kwargs, error", [
    ({"spin_isomer": "orto"}, CatalogError),
    ({"max_E_up": 100}, UnitMismatchError),
    ({"max_E_up": 100 * u.km}, UnitMismatchError),
    ({"fmin": 300 * u.GHz, "fmax": 200 * u.GHz}, SpectralRangeError),
])
def test_bad_filters(kwargs, error):
    with pytest.raises(error):
        select_lines(**kwargs)


def test_catalog_copy_is_independent():
    first = load_catalog()
    first["rest_frequency"][0] = 1 * u.GHz
    assert load_catalog()["rest_frequency"][0] > 20 * u.GHz


# ---------------------------------------------------------------------------
# User line lists
# ---------------------------------------------------------------------------

ECSV_MHZ = """\
# %ECSV 1.0
# ---
# datatype:
# - {name: species, datatype: string}
# - {name: transition, datatype: string}
# - {name: rest_frequency, unit: MHz, datatype: float64}
# - {name: E_up, unit: K, datatype: float64}
# schema: astropy-2.0
species transition rest_frequency E_up
CH3OH "6(-2)-7(-1) E, own measurement" 85568.131 74.7
"""


def test_user_ecsv_merges_with_units(tmp_path):
    path = tmp_path / "mine.ecsv"
    path.write_text(ECSV_MHZ)
    merged = load_catalog(extra=path)
    assert len(merged) == len(load_catalog()) + 1
    row = find_line("CH3OH 6(-2)-7(-1) E, own measurement", merged)
    assert_quantity_allclose(row["rest_frequency"], 85.568131 * u.GHz)
    assert row["spin_isomer"] == "none" and "mine.ecsv" in row["provenance"]
    assert np.isnan(row["einstein_A"])
    band = lines_in_band(40 * u.GHz, 45 * u.GHz, z=1.0, catalog=merged, species="CH3OH")
    names = band["name"].tolist()
    assert {"CH3OH 5(-1)-4(0) E", "CH3OH 6(-2)-7(-1) E, own measurement"} <= set(names)
    assert np.all(np.diff(band["rest_frequency"].to_value(u.GHz)) >= 0)
    assert row["family"] == "complex organics"  # a bundled species lends its family


def test_user_csv_replaces_bundled_row(tmp_path):
    path = tmp_path / "mine.csv"
    path.write_text("species,transition,rest_frequency,E_up,einstein_A,spin_isomer,provenance\n"
                    "CO,J=1-0,115.2712,5.5,,none,my lab\n"
                    "NH3,\"(J,K)=(9,9)\",27.477943,852.8,,ortho,my lab\n")
    merged = load_catalog(extra=[path])
    assert len(merged) == len(load_catalog()) + 1
    assert find_line("CO J=1-0", merged)["provenance"] == "my lab"
    assert find_line("NH3 (J,K)=(9,9)", merged)["spin_isomer"] == "ortho"


@pytest.mark.parametrize("body, match", [
    ("species,transition,rest_frequency\nCO,J=1-0,115.27\nCO,J=2-1,abc\n",
     r"data row 2.*'rest_frequency'.*'abc'"),
    ("species,transition,rest_frequency\nCO,J=1-0,-115.27\n", r"data row 1.*'rest_frequency'"),
    ("species,transition,rest_frequency\n,J=1-0,115.27\n", r"data row 1.*'species'.*empty"),
    ("species,transition,rest_frequency,spin_isomer\nH2O,1_10-1_01,556.9,orto\n",
     r"data row 1.*'spin_isomer'"),
    ("species,transition,rest_frequency,E_up\nCO,J=1-0,115.27,-3\n", r"data row 1.*'E_up'"),
    ("species,frequency\nCO,115.27\n", r"lacks the column\(s\) \['transition', 'rest_frequency'\]"),
])
def test_malformed_user_list_names_row_and_column(tmp_path, body, match):
    path = tmp_path / "bad.csv"
    path.write_text(body)
    with pytest.raises(CatalogError, match=match):
        load_catalog(extra=path)


def test_missing_user_file(tmp_path):
    with pytest.raises(CatalogError, match="does not exist"):
        read_line_list(tmp_path / "nope.ecsv")


def test_user_table_input():
    mine = read_line_list(Table({"species": ["X"], "transition": ["a-b"], "rest_frequency": [100.0]}))
    assert mine["rest_frequency"].unit == u.GHz and mine["name"][0] == "X a-b"


# ---------------------------------------------------------------------------
# lines_in_band
# ---------------------------------------------------------------------------

def naive_lines_in_band(catalog, fmin_ghz, fmax_ghz, z):
    return {str(row["name"]) for row in catalog
            if fmin_ghz <= row["rest_frequency"].to_value(u.GHz) / (1 + z) <= fmax_ghz}


@pytest.mark.parametrize("fmin, fmax, z", [(84, 116, 0.0), (211, 275, 2.7), (84, 950, 4.5),
                                           (20, 30, 0.001), (125, 163, 6.3)])
def test_lines_in_band_matches_naive_reference(catalog, fmin, fmax, z):
    band = lines_in_band(fmin * u.GHz, fmax * u.GHz, z)
    assert set(band["name"]) == naive_lines_in_band(catalog, fmin, fmax, z)
    # Observed frequency of a line at redshift z is nu_rest / (1 + z) (definition of z).
    assert_quantity_allclose(band["observed_frequency"], band["rest_frequency"] / (1 + z))
    assert np.all(np.diff(band["observed_frequency"]) >= 0)
    assert np.all(np.isnan(band["velocity"]))


@pytest.mark.parametrize("convention, doppler", [("radio", u.doppler_radio),
                                                  ("optical", u.doppler_optical),
                                                  ("relativistic", u.doppler_relativistic)])
def test_velocity_offsets_from_reference(convention, doppler):
    z = 2.5
    band = lines_in_band(120 * u.GHz, 170 * u.GHz, z, reference="CO J=5-4", convention=convention)
    ref_obs = find_line("CO J=5-4")["rest_frequency"] / (1 + z)
    # Velocities as astropy's Doppler equivalencies give them (Greisen et al. 2006, Table 1).
    expected = band["observed_frequency"].to(u.km / u.s, equivalencies=doppler(ref_obs))
    assert_quantity_allclose(band["velocity"], expected, atol=1 * u.m / u.s)
    assert band["velocity"][band["name"] == "CO J=5-4"][0] == 0 * u.km / u.s
    if convention == "radio":
        # Radio convention: v = c (1 - nu / nu_ref), independent of z.
        nu = band["rest_frequency"].to_value(u.GHz)
        nu_ref = find_line("CO J=5-4")["rest_frequency"].to_value(u.GHz)
        np.testing.assert_allclose(band["velocity"].to_value(u.km / u.s), C_KMS * (1 - nu / nu_ref),
                                   atol=1e-6)


def test_reference_by_frequency_and_filters():
    z = 1.2
    by_name = lines_in_band(200 * u.GHz, 215 * u.GHz, z, reference="CO J=4-3", species="CO")
    by_freq = lines_in_band(200 * u.GHz, 215 * u.GHz, z, reference=461.0407682 * u.GHz, species="CO")
    assert_quantity_allclose(by_name["velocity"], by_freq["velocity"])
    assert by_name.meta["z"] == z and by_name.meta["convention"] == "radio"
    water = lines_in_band(200 * u.GHz, 900 * u.GHz, 1.0, species="H2O", spin_isomer="para",
                          max_E_up=300 * u.K)
    assert set(water["spin_isomer"]) == {"para"} and np.all(water["E_up"] <= 300 * u.K)


def test_empty_band_keeps_columns():
    band = lines_in_band(2.0 * u.GHz, 2.1 * u.GHz, 0.0, reference="CO J=1-0")
    assert len(band) == 0 and {"observed_frequency", "velocity"} <= set(band.colnames)


@pytest.mark.parametrize("args, kwargs, error, match", [
    ((84 * u.GHz, 116 * u.GHz, -1.0), {}, RedshiftError, "outside the accepted range"),
    ((84 * u.GHz, 116 * u.GHz, 25), {}, RedshiftError, "outside the accepted range"),
    ((116 * u.GHz, 84 * u.GHz, 1), {}, SpectralRangeError, "must be < fmax"),
    ((100 * u.GHz, 100 * u.GHz, 1), {}, SpectralRangeError, "must be < fmax"),
    ((84, 116, 1), {}, UnitMismatchError, "fmin must be a Quantity"),
    ((84 * u.km / u.s, 116 * u.GHz, 1), {}, UnitMismatchError, "fmin must be a frequency"),
    ((84 * u.GHz, 116 * u.GHz, 1), {"reference": "CO 4-3"}, CatalogError, "did you mean.*CO J=4-3"),
    ((84 * u.GHz, 116 * u.GHz, 1), {"reference": 230.5}, UnitMismatchError, "reference"),
    ((84 * u.GHz, 116 * u.GHz, 1), {"convention": "radar"}, CubeloupeError, "convention"),
])
def test_lines_in_band_bad_input(args, kwargs, error, match):
    with pytest.raises(error, match=match) as info:
        lines_in_band(*args, **kwargs)
    assert isinstance(info.value, CubeloupeError)
