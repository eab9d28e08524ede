"""Partition functions against the rotor formulas, published tables and level physics."""

import astropy.units as u
import numpy as np
import pytest
from astropy.constants import h, k_B

from cubeloupe.analysis import (
    CatalogError,
    UnitMismatchError,
    collapse_hyperfine,
    find_line,
    load_catalog,
    partition_energy_zero,
    partition_function,
    partition_function_source,
    partition_function_species,
    select_lines,
)

H_OVER_K = (h / k_B).to_value(u.K / u.GHz)  # CODATA via astropy
TEMPERATURES = [9.375, 18.75, 37.5, 75, 150, 300] * u.K


def linear_rotor_q(b_ghz, t):
    """Q ~ kT/hB + 1/3 + hB/(15 kT) (e.g. Mangum & Shirley 2015, PASP 127, 266, eq. 52 and its series)."""
    x = H_OVER_K * b_ghz / np.asarray(t)
    return 1 / x + 1 / 3 + x / 15


def test_co_against_linear_rotor_formula():
    # CO B0 = 57.635968 GHz (Winnewisser et al. 1997; from memory). The CDMS table
    # values (Mueller et al. 2005) follow kT/hB + 1/3 to < 0.5 % over 9-300 K.
    q = partition_function("CO", TEMPERATURES)
    np.testing.assert_allclose(q.value, linear_rotor_q(57.635968, TEMPERATURES.value), rtol=0.005)
    assert "CDMS" in partition_function_source("CO")


@pytest.mark.parametrize("species, b_ghz, multiplicity", [
    # Rotational constants B0 [GHz] of the CDMS entries (from memory); multiplicity: electron-spin
    # doublets of CCH and CN count twice in Q, as their levels are N, J.
    ("13CO", 55.101012, 1), ("C18O", 54.891420, 1), ("C17O", 56.179990, 1), ("HCN", 44.315976, 1),
    ("H13CN", 43.170127, 1), ("DCN", 36.207463, 1), ("HNC", 45.331980, 1), ("HCO+", 44.594423, 1),
    ("H13CO+", 43.377302, 1), ("N2H+", 46.586867, 1), ("CS", 24.495560, 1), ("C34S", 24.103548, 1),
    ("SiO", 21.711980, 1), ("13CS", 23.123830, 1), ("HN13C", 43.545610, 1), ("HC3N", 4.549059, 1), ("OCS", 6.081492, 1), ("CCH", 43.674, 2),
    ("CN", 56.693, 2), ("HC15N", 43.027640, 1), ("DCO+", 36.019770, 1), ("N2D+", 38.554720, 1),
])
def test_linear_species_follow_kt_over_hb(species, b_ghz, multiplicity):
    # Below 75 K (no vibrational levels yet), Q / multiplicity follows the rotor formula to 2 %.
    # This also checks that hyperfine nuclear-spin multiplicities were divided out of the CDMS
    # tables, as the catalog's g_up convention requires (HCN 3, N2H+ 9, C17O 6, 13CO and 13CS 2, CN 3, CCH 2).
    t = [18.75, 37.5, 75] * u.K
    q = partition_function(species, t).value / multiplicity
    np.testing.assert_allclose(q, linear_rotor_q(b_ghz, t.value), rtol=0.02)


def test_water_against_the_asymmetric_rotor_formula():
    # JPL's H2O table (Pickett et al. 1998) sums both spin species with weights 3 and 1:
    # Q ~ (4/sigma) sqrt(pi (kT/h)^3 / (A B C)) with sigma = 2 (Gordy & Cook 1984, ch. 3),
    # A, B, C = 835.840, 435.352, 278.139 GHz (De Lucia et al. 1974; from memory).
    # The classical limit holds to a few per cent from 150 K up.
    t = np.array([150.0, 225.0, 300.0])
    kt_h = t / H_OVER_K
    classical = 2 * np.sqrt(np.pi * kt_h**3 / (835.840 * 435.352 * 278.139))
    np.testing.assert_allclose(partition_function("H2O", t * u.K).value, classical, rtol=0.04)
    # The published value at 300 K: lg Q = 2.2507 (JPL catalogue directory).
    assert partition_function("H2O", 300 * u.K).value == pytest.approx(10**2.2507, rel=1e-4)


@pytest.mark.parametrize("species, a_ghz, b_ghz", [("CH3CN", 158.099, 9.198899), ("CH3CCH", 158.590, 8.545877)])
def test_symmetric_tops_against_the_classical_formula(species, a_ghz, b_ghz):
    # Q ~ <g_I> sqrt(pi (kT/h)^3 / (A B^2)) (Gordy & Cook 1984, ch. 3), where <g_I> = 4/3 is
    # the mean of the K ladders' weights 2 (K = 3n) and 1 used by the catalog. The bundled CDMS
    # tables (tags 41505, 40502) also count vibrationally excited states, which fill above ~100 K
    # (CH3CN v8=1 lies ~525 K up; from memory): the ground-state formula is compared up to 75 K.
    t = np.array([37.5, 75.0])
    kt_h = t / H_OVER_K
    classical = 4 / 3 * np.sqrt(np.pi * kt_h**3 / (a_ghz * b_ghz**2))
    np.testing.assert_allclose(partition_function(species, t * u.K).value, classical, rtol=0.03)


def test_para_ammonia_counts_from_its_own_ground_level():
    # p-NH3's lowest rotational level (1,1) is an inversion doublet (2J+1 = 3 each) split by
    # h * 23.6945 GHz / k = 1.137 K; at 2.725 K the rest of the ladder (>= 40 K above) is empty.
    split = H_OVER_K * 23.6944955
    expected = 3 * (1 + np.exp(-split / 2.725))
    assert partition_function("NH3", 2.725 * u.K, spin_isomer="para").value == pytest.approx(expected, rel=1e-3)
    # Its energy zero is the lower (1,1) level: the (1,1) line's E_up less h nu / k.
    line = find_line("NH3 (J,K)=(1,1)")
    zero = partition_energy_zero("NH3", "para")
    assert zero.to_value(u.K) == pytest.approx(line["E_up"].to_value(u.K) - split, abs=0.05)
    # ortho-NH3 counts from (0,0), the molecule's ground level.
    assert partition_energy_zero("NH3", "ortho") == 0 * u.K


def test_ortho_para_low_temperature_limits():
    # At T -> 0 only the lowest levels of each spin species count: o-H2S 1_01 (2J+1 = 3) and
    # 1_10 (3), h nu/k above it with nu the 1_10-1_01 line; p-H2S 0_00 alone (1_11 lies 21.7 K up).
    split = find_line("H2S 1_10-1_01")["rest_frequency"].to_value(u.GHz) * H_OVER_K
    expected = 3 * (1 + np.exp(-split / 2.725))
    assert partition_function("H2S", 2.725 * u.K, "ortho").value == pytest.approx(expected, rel=2e-3)
    assert partition_function("H2S", 2.725 * u.K, "para").value == pytest.approx(1, rel=2e-3)


def test_level_populations_from_q_and_g_up_add_up():
    # N_J/N = g_J exp(-E_J/kT) / Q summed over CO's catalogued levels J >= 1 plus the
    # ground level (g=1, E=0) is 1 at temperatures the catalog's ladder covers.
    co = select_lines(species="CO")
    for t in (20.0, 50.0, 100.0):
        q = partition_function("CO", t * u.K).value
        total = (1 + np.sum(co["g_up"] * np.exp(-co["E_up"].to_value(u.K) / t))) / q
        assert total == pytest.approx(1, abs=0.01)


def test_hyperfine_components_and_q_share_a_convention():
    # The HCN J=1-0 components' g_up add up to 2J+1 = 3, the g of J=1 in the Q that counts
    # no nuclear spin: the collapsed group's population at 10 K equals the rotor's.
    group = collapse_hyperfine(select_lines(species="HCN", fmin=88.6 * u.GHz, fmax=88.7 * u.GHz))[0]
    t = 10.0
    q = partition_function("HCN", t * u.K).value
    x = H_OVER_K * 44.315976 / t
    rotor = 3 * np.exp(-2 * x) / np.sum((2 * np.arange(40) + 1) * np.exp(-x * np.arange(40) * np.arange(1, 41)))
    assert group["g_up"] * np.exp(-group["E_up"].to_value(u.K) / t) / q == pytest.approx(rotor, rel=0.02)


def test_interpolation_is_log_log_and_monotonic():
    # Between the CDMS temperatures 37.5 and 75 K, lg Q is linear in lg T.
    q1, q2 = partition_function("SO2", [37.5, 75] * u.K).value
    mid = np.sqrt(37.5 * 75)
    assert partition_function("SO2", mid * u.K).value == pytest.approx(np.sqrt(q1 * q2), rel=1e-9)
    q = partition_function("CH3OH", np.geomspace(9.375, 300, 30) * u.K).value
    assert np.all(np.diff(q) > 0)


def test_every_catalog_species_has_a_partition_function():
    have = {s for s, _ in partition_function_species()}
    missing = set(load_catalog()["species"]) - have
    # Recombination-line atoms need none.
    assert missing == {"H", "He", "C"}
    for species in ("NH3", "H2S", "c-C3H2", "H3O+"):
        assert {(species, "ortho"), (species, "para")} <= set(partition_function_species())


@pytest.mark.parametrize("call, error, match", [
    (lambda: partition_function("XYZ", 10 * u.K), CatalogError, "no partition function for species 'XYZ'"),
    (lambda: partition_function("NH3", 10 * u.K), CatalogError, "spin_isomer=None.*ortho"),
    (lambda: partition_function("CO", 0.5 * u.K), CatalogError, "outside the 2.725-1000 K"),
    (lambda: partition_function("NH3", 900 * u.K, "para"), CatalogError, "outside"),
    (lambda: partition_function("CO", 10), UnitMismatchError, "temperature must be a Quantity"),
    (lambda: partition_function("CO", 10 * u.km), UnitMismatchError, "must be a temperature"),
])
def test_bad_input(call, error, match):
    with pytest.raises(error, match=match):
        call()


# JPL partition function table of H2O (tag 18003; Pickett et al. 1998, JQSRT 60, 883; the copy in the PyPI
# wheel astroquery-0.4.11, jplspec/data/catdir.cat): lg Q at 300, 225, 150, 75, 37.5, 18.75, 9.375 K,
# summed over ortho (spin weight 3) and para (1) levels from 0_00.
JPL_H2O_T = [300, 225, 150, 75, 37.5, 18.75, 9.375] * u.K
JPL_H2O_LG_Q = [2.2507, 2.0645, 1.8040, 1.3649, 0.9335, 0.4819, 0.0994]


def test_water_ortho_and_para_add_up_to_the_published_total():
    zero = partition_energy_zero("H2O", "ortho")
    # 1_01 lies 23.794 cm^-1 = 34.23 K above 0_00 (LAMDA o-H2O file; JPL)
    assert zero.to_value(u.K) == pytest.approx(23.794356 * 1.4387769, rel=1e-6)
    assert partition_energy_zero("H2O", "para").to_value(u.K) == 0
    total = (partition_function("H2O", JPL_H2O_T, "para")
             + 3 * np.exp(-zero / JPL_H2O_T) * partition_function("H2O", JPL_H2O_T, "ortho"))
    np.testing.assert_allclose(total.value, 10 ** np.array(JPL_H2O_LG_Q), rtol=1e-5)  # 6 digits bundled


def test_water_spin_species_at_low_and_high_temperature():
    t = 9.375 * u.K
    # the lowest levels alone (2J+1 each): para 0_00, 1_11 (53.4 K), 2_02 (100.8 K); ortho 1_01, 1_10 (61.0 K),
    # 2_12 (114.4 K); energies of JPL (para, from memory) and of the LAMDA o-H2O file (ortho)
    para = 1 + 3 * np.exp(-53.4 / 9.375) + 5 * np.exp(-100.8 / 9.375)
    ortho = 3 + 3 * np.exp(-(61.0 - 34.23) / 9.375) + 5 * np.exp(-(114.4 - 34.23) / 9.375)
    assert partition_function("H2O", t, "para").value == pytest.approx(para, rel=2e-3)
    assert partition_function("H2O", t, "ortho").value == pytest.approx(ortho, rel=1e-3)
    # at high temperature ortho and para levels fill alike, so their sums from a common zero agree
    # (the thermal ortho/para ratio tends to the spin-weight ratio 3; common practice)
    hot = 300 * u.K
    ratio = (partition_function("H2O", hot, "ortho") * np.exp(-partition_energy_zero("H2O", "ortho") / hot)
             / partition_function("H2O", hot, "para"))
    assert ratio.value == pytest.approx(1.0, abs=0.03)
    with pytest.raises(CatalogError, match="outside"):
        partition_function("H2O", 500 * u.K, "ortho")


def test_h2o_plus_against_the_cdms_table():
    # CDMS partition function table, tag 18505 (Mueller et al. 2005; copy in the PyPI wheel
    # astroquery-0.4.11, linelists/cdms/data/partfunc.cat): lg Q(300 K) = 2.5968, lg Q(2.725 K) = 0.7779
    assert partition_function("H2O+", 300 * u.K).value == pytest.approx(10 ** 2.5968, rel=1e-5)
    # at 2.725 K only the ground level 0_00 J=1/2 of ortho-H2O+ counts: (2J+1)(2I+1) = 2 x 3 = 6
    # (the CDMS table counts the spin weight; H2O+'s ortho levels have Ka + Kc even; common practice)
    assert partition_function("H2O+", 2.725 * u.K).value == pytest.approx(6.0, rel=1e-3)


# JPL partition function tables (Pickett et al. 1998, JQSRT 60, 883; copy in the PyPI wheel
# astroquery-0.4.11, jplspec/data/catdir.cat), lg Q at JPL_H2O_T: H2CO (tag 30004) counts ortho levels
# with spin weight 3 and para with 1; CH3OH (tag 32003) counts A and E levels with 2J+1 each.
JPL_H2CO_LG_Q = [3.4598, 3.2724, 3.0086, 2.5584, 2.1094, 1.6501, 1.1399]
JPL_CH3OH_LG_Q = [3.9765, 3.7216, 3.3870, 2.8640, 2.3622, 1.8372, 1.2910]


def test_h2co_ortho_and_para_add_up_to_the_published_total():
    zero = partition_energy_zero("H2CO", "ortho")
    # ortho-H2CO counts from 1_11, 10.54 cm^-1 = 15.16 K above para 0_00 (CDMS/JPL level energy, from memory)
    assert zero.to_value(u.K) == pytest.approx(15.16, abs=0.01)
    assert partition_energy_zero("H2CO", "para").to_value(u.K) == 0
    total = (partition_function("H2CO", JPL_H2O_T, "para")
             + 3 * np.exp(-zero / JPL_H2O_T) * partition_function("H2CO", JPL_H2O_T, "ortho"))
    np.testing.assert_allclose(total.value, 10 ** np.array(JPL_H2CO_LG_Q), rtol=1e-3)
    # the lowest levels alone at 2.725 K (2J+1 each): para 0_00, 1_01 (3.50 K), 2_02 (10.48 K), 3_03 (20.96 K);
    # ortho 1_11, 1_10 (15.16, 15.40 K), 2_12 (21.92 K), 2_11 (22.62 K) (CDMS level energies, from memory)
    t = 2.725
    assert partition_function("H2CO", t * u.K, "para").value == pytest.approx(
        1 + 3 * np.exp(-3.50 / t) + 5 * np.exp(-10.48 / t) + 7 * np.exp(-20.96 / t), rel=2e-3)
    assert partition_function("H2CO", t * u.K, "ortho").value == pytest.approx(
        3 + 3 * np.exp(-0.24 / t) + 5 * np.exp(-6.76 / t) + 5 * np.exp(-7.46 / t), rel=5e-3)
    with pytest.raises(CatalogError, match="outside"):
        partition_function("H2CO", 500 * u.K, "ortho")


def test_methanol_a_and_e_add_up_to_the_published_total_where_the_level_list_is_complete():
    zero = partition_energy_zero("CH3OH", "E")
    # E-CH3OH counts from 1_-1 E, 5.49 cm^-1 = 7.90 K above 0_0 A+ (JPL level energy, from memory)
    assert zero.to_value(u.K) == pytest.approx(7.90, abs=0.01)
    t = [37.5, 18.75, 9.375] * u.K
    total = partition_function("CH3OH", t, "A") + np.exp(-zero / t) * partition_function("CH3OH", t, "E")
    np.testing.assert_allclose(total.value, 10 ** np.array(JPL_CH3OH_LG_Q[-3:]), rtol=1e-3)
    # above 37.5 K the vt=0 level list misses torsionally excited levels the JPL total counts: refused
    with pytest.raises(CatalogError, match="outside"):
        partition_function("CH3OH", 75 * u.K, "A")


def test_catalog_g_up_of_spin_species_leaves_the_spin_weight_out():
    catalog = load_catalog()
    # 2J+1 of the upper level (make_transitions.DEGENERACY; CDMS prints 3(2J+1) for ortho-H2CO)
    for name, g in (("H2CO 2_11-1_10", 5), ("H2CO 3_03-2_02", 7), ("CH3OH 5(0)-4(0) A+", 11),
                    ("CH3OH 5(-1)-4(-1) E", 11)):
        assert find_line(name, catalog)["g_up"] == g
    assert find_line("H2CO 2_11-1_10", catalog)["spin_isomer"] == "ortho"


# JPL partition function table of c-C3H2 (tag 38002; same copy as above), lg Q at JPL_H2O_T,
# counting ortho levels (Ka + Kc odd) with spin weight 3 and para with 1.
JPL_C3H2_LG_Q = [4.1215, 3.9226, 3.6548, 3.2035, 2.7535, 2.3050, 1.8598]


def test_c3h2_ortho_and_para_add_up_to_the_published_total():
    zero = partition_energy_zero("c-C3H2", "ortho")
    # ortho counts from 1_01, 1.6332 cm^-1 = 2.35 K above para 0_00 (LAMDA o-c3h2.dat level list)
    assert zero.to_value(u.K) == pytest.approx(1.6332 * 1.4387769, abs=0.005)
    t = JPL_H2O_T[2:]  # 150 K and below: the level list is complete enough there
    total = (partition_function("c-C3H2", t, "para")
             + 3 * np.exp(-zero / t) * partition_function("c-C3H2", t, "ortho"))
    np.testing.assert_allclose(total.value, 10 ** np.array(JPL_C3H2_LG_Q[2:]), rtol=3e-3)
    with pytest.raises(CatalogError, match="outside"):
        partition_function("c-C3H2", 300 * u.K, "ortho")
