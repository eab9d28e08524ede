"""BandLines gives the tables lines_in_band gives, as the redshift moves."""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import BandLines, lines_in_band

GHZ = u.GHz


@pytest.mark.parametrize("species", [None, "CO", ["H2O"]])
def test_tables_equal_lines_in_band_over_a_sweep_of_redshifts(species):
    band_lines = BandLines(species=species)
    for z in np.linspace(0.0, 4.0, 41):
        got = band_lines.in_band(200 * GHZ, 260 * GHZ, z, reference="CO J=2-1")
        want = lines_in_band(200 * GHZ, 260 * GHZ, z, species=species, reference="CO J=2-1")
        assert got["name"].tolist() == want["name"].tolist()
        assert_allclose(u.Quantity(got["observed_frequency"], GHZ).value,
                        u.Quantity(want["observed_frequency"], GHZ).value, rtol=1e-12)
        assert_allclose(got["velocity"].to_value(u.km / u.s), want["velocity"].to_value(u.km / u.s),
                        rtol=1e-9, atol=1e-6)
        assert got.meta["z"] == want.meta["z"]


def test_same_lines_reuse_the_table_new_lines_give_a_new_one():
    band_lines = BandLines(species="CO")
    first = band_lines.in_band(225 * GHZ, 232 * GHZ, 0.0)
    assert first["name"].tolist() == ["CO J=2-1"]
    # 230.538 GHz / 1.001 = 230.308 GHz: still in the band, same table object updated
    again = band_lines.in_band(225 * GHZ, 232 * GHZ, 0.001)
    assert again is first
    assert_allclose(u.Quantity(again["observed_frequency"], GHZ).value, 230.538 / 1.001, rtol=1e-6)
    # at z = 0.5 CO J=3-2 (345.796 GHz) lands at 230.53 GHz instead
    other = band_lines.in_band(225 * GHZ, 232 * GHZ, 0.5)
    assert other["name"].tolist() == ["CO J=3-2"]


def test_indices_in_band_match_the_rest_frame_test():
    band_lines = BandLines()
    rest = u.Quantity(band_lines.selected["rest_frequency"], GHZ).value
    z = 1.7
    picked = band_lines.indices_in_band(100 * GHZ, 110 * GHZ, z)
    # observed = rest / (1 + z) (common practice)
    inside = np.flatnonzero((rest / (1 + z) >= 100 - 1e-9) & (rest / (1 + z) <= 110 + 1e-9))
    assert list(picked) == list(inside)


@pytest.mark.parametrize("family", [None, ["dense gas"], "CO and isotopologues"])
def test_grouped_and_family_filtered_tables_equal_lines_in_band(family):
    band_lines = BandLines(family=family, group_hyperfine=True)
    for z in np.linspace(0.0, 0.02, 21):
        got = band_lines.in_band(85 * GHZ, 116 * GHZ, z, reference="CO J=1-0")
        want = lines_in_band(85 * GHZ, 116 * GHZ, z, family=family, reference="CO J=1-0", group_hyperfine=True)
        assert got["name"].tolist() == want["name"].tolist()
        assert_allclose(u.Quantity(got["observed_frequency"], GHZ).value,
                        u.Quantity(want["observed_frequency"], GHZ).value, rtol=1e-12)
        # radio velocities are linear in frequency, so the group's mean velocity is the velocity of its mean
        assert_allclose(got["velocity"].to_value(u.km / u.s), want["velocity"].to_value(u.km / u.s),
                        rtol=1e-9, atol=1e-6)
    if family is None or "dense gas" in family:
        # N2H+ J=1-0's seven components (Pagani et al. 2009 via pyspeckit) come as one row
        assert "N2H+ J=1-0" in got["name"].tolist()
        assert not any(name.startswith("N2H+ J=1-0 F1") for name in got["name"])
    assert set(got["family"]) <= set([family] if isinstance(family, str) else family or got["family"])


def test_family_filter_keeps_a_users_lines_of_unknown_family_and_refuses_unknown_families():
    from astropy.table import Table

    from cubeloupe.analysis import CatalogError, load_catalog

    mine = Table({"species": ["XYZ"], "transition": ["1-0"], "rest_frequency": [100.5]})
    catalog = load_catalog(extra=mine)
    table = BandLines(catalog, family="CO and isotopologues").in_band(99 * GHZ, 116 * GHZ, 0.0)
    # the J=1-0 lines of CO and its isotopologues (109.8-115.3 GHz, CDMS) and the user's own line
    assert set(table["species"]) == {"XYZ", "CO", "13CO", "C18O", "C17O"}
    assert table["name"][0] == "XYZ 1-0" and "CO J=1-0" in table["name"]
    with pytest.raises(CatalogError, match="unknown line family 'bright'"):
        BandLines(family=["bright"])
