"""Reading a table of line intensities (analysis/line_intensities.py)."""

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from cubeloupe.analysis import CatalogError, FitError, ParameterError, find_line
from cubeloupe.analysis.line_intensities import LINE_INTENSITY_COLUMNS, read_line_intensities

K_KMS = u.K * u.km / u.s


def test_catalog_constants_are_joined_per_line():
    lines = QTable({"line": ["co j=2-1", "13CO J=2-1"], "flux": [3.9, 0.8] * K_KMS, "flux_error": [0.2, 0.1] * K_KMS})
    table = read_line_intensities(lines, species="CO")
    assert table.colnames == list(LINE_INTENSITY_COLUMNS)
    row = find_line("CO J=2-1")
    assert table["E_up"][0] == row["E_up"] and table["einstein_A"][0] == row["einstein_A"]
    assert table.meta == {"species": "CO", "kind": "brightness"}
    assert not table["upper_limit"].any()


def test_hyperfine_group_name_reads_the_whole_group():
    # N2H+ J=1-0: the group's g_up is the rotational level's 2J+1 = 3 (catalog convention, no nuclear-spin factor).
    lines = QTable({"line": ["N2H+ J=1-0"], "flux": [2.0] * K_KMS, "flux_error": [0.1] * K_KMS})
    assert read_line_intensities(lines)["g_up"][0] == pytest.approx(3.0, rel=1e-3)


def test_upper_limit_may_have_zero_error_but_not_a_negative_one():
    lines = QTable({"line": ["CO J=2-1", "CO J=3-2"], "flux": [3.9, 0.6] * K_KMS, "flux_error": [0.2, 0.0] * K_KMS,
                    "upper_limit": [False, True]})
    assert read_line_intensities(lines)["upper_limit"].tolist() == [False, True]
    lines["flux_error"][1] = -0.1 * K_KMS
    with pytest.raises(ParameterError, match="negative flux_error"):
        read_line_intensities(lines)


def test_empty_and_unknown():
    with pytest.raises(FitError, match="empty"):
        read_line_intensities(QTable({"line": np.array([], dtype=str), "flux": [] * K_KMS,
                                      "flux_error": [] * K_KMS}))
    with pytest.raises(CatalogError, match="no line called 'CO J=9-9'"):
        read_line_intensities(QTable({"line": ["CO J=9-9"], "flux": [1.0] * K_KMS, "flux_error": [0.1] * K_KMS}))
    with pytest.raises(ParameterError, match="no line of species 'HCN'"):
        read_line_intensities(QTable({"line": ["CO J=2-1"], "flux": [1.0] * K_KMS, "flux_error": [0.1] * K_KMS}),
                              species="HCN")
