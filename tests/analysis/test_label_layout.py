"""label_rows: labels of crowded markers neither overlap nor cross the ends of the axis."""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import ParameterError, label_rows


def overlaps(x, widths, rows):
    """Pairs of drawn labels of one row whose intervals intersect (a naive O(n^2) reference)."""
    bad = []
    for i in range(len(x)):
        for j in range(i + 1, len(x)):
            if rows[i] >= 0 and rows[i] == rows[j] and abs(x[i] - x[j]) < (widths[i] + widths[j]) / 2 - 1e-12:
                bad.append((i, j))
    return bad


def test_labels_far_apart_stay_on_their_markers_in_the_first_row():
    placement = label_rows([1.0, 3.0, 5.0], widths=0.5, span=(0.0, 6.0))
    assert placement.row.tolist() == [0, 0, 0]
    assert_allclose(placement.x, [1.0, 3.0, 5.0])


def test_labels_closer_than_their_width_are_stacked_then_dropped_by_priority():
    # five markers 0.1 apart, labels 0.5 wide: at most one label per row fits over them
    positions = np.array([2.0, 2.1, 2.2, 2.3, 2.4])
    priority = np.array([1, 5, 3, 4, 2])
    placement = label_rows(positions, widths=0.5, span=(0.0, 5.0), priority=priority, max_rows=3)
    # the three highest priorities get the three rows, in that order; the two lowest are left out
    assert placement.row.tolist() == [-1, 0, 2, 1, -1]
    assert placement.shown.tolist() == [1, 2, 3]


def test_no_label_crosses_either_end_of_the_axis():
    span = (100.0, 101.0)
    positions = [100.01, 100.5, 100.995]
    widths = [0.2, 0.2, 0.3]
    placement = label_rows(positions, widths, span)
    x = np.asarray(placement.x)
    assert np.all(x - np.array(widths) / 2 >= span[0] - 1e-12)
    assert np.all(x + np.array(widths) / 2 <= span[1] + 1e-12)
    # moved inwards just enough: the edge labels touch the ends
    assert_allclose(x, [100.1, 100.5, 100.85])
    assert placement.row.tolist() == [0, 0, 0]


def test_a_random_crowd_never_overlaps_and_keeps_the_higher_priorities():
    rng = np.random.default_rng(3)
    positions = np.sort(rng.uniform(0, 10, 2000))
    widths = rng.uniform(0.05, 0.4, 2000)
    priority = rng.uniform(size=2000)
    placement = label_rows(positions, widths, (0.0, 10.0), priority=priority, max_rows=3, gap=0.01)
    x, rows = np.asarray(placement.x), placement.row
    assert overlaps(x, widths + 0.01, rows) == []
    assert np.all((x - widths / 2 >= -1e-12) & (x + widths / 2 <= 10 + 1e-12))
    shown = rows >= 0
    assert 0 < shown.sum() < 2000
    # a label left out lost to a higher-priority neighbour in every row (greedy by priority)
    assert priority[shown].mean() > priority[~shown].mean()


def test_quantities_keep_their_unit_and_markers_outside_the_span_get_no_label():
    placement = label_rows([-30, 0, 30, 400] * u.km / u.s, widths=50_000 * u.m / u.s, span=[-300, 300] * u.km / u.s)
    assert placement.x.unit == u.km / u.s
    assert placement.row.tolist() == [0, 1, 0, -1]


@pytest.mark.parametrize("kwargs, match", [
    ({"span": (1.0, 1.0)}, "span"),
    ({"widths": [-1.0, 1.0]}, "widths"),
    ({"max_rows": 0}, "max_rows"),
    ({"priority": [1.0]}, "priority"),
])
def test_bad_input_is_refused_with_the_value_named(kwargs, match):
    args = {"positions": [1.0, 2.0], "widths": [0.1, 0.1], "span": (0.0, 3.0)}
    args.update(kwargs)
    with pytest.raises(ParameterError, match=match):
        label_rows(**args)


def test_units_must_agree():
    with pytest.raises(ParameterError, match="cannot be converted"):
        label_rows([1.0] * u.GHz, widths=1 * u.km / u.s, span=[0, 2] * u.GHz)
    with pytest.raises(ParameterError, match="no unit"):
        label_rows([1.0] * u.GHz, widths=0.1, span=[0, 2] * u.GHz)


def test_priority_keeps_the_reference_then_bright_families_then_low_energies():
    from astropy.table import QTable

    from cubeloupe.analysis import label_priority

    lines = QTable({"name": ["H 40alpha", "CH3OH x", "CO J=7-6", "CO J=1-0", "HCN J=1-0"],
                    "family": ["recombination lines", "complex organics", "CO and isotopologues",
                               "CO and isotopologues", "dense gas"],
                    "E_up": [np.nan, 20.0, 154.9, 5.5, 4.3] * u.K})
    order = np.argsort(-label_priority(lines)).tolist()
    # CO (lowest E_up first), dense gas, organics, recombination lines last
    assert order == [3, 2, 4, 1, 0]
    assert np.argmax(label_priority(lines, reference="H 40alpha")) == 0


@pytest.mark.parametrize("species, rare", [("13CO", True), ("C18O", True), ("H13CN", True), ("C34S", True),
                                           ("DCO+", True), ("N2D+", True), ("CO", False), ("N2H+", False),
                                           ("HC3N", False), ("CH3OH", False), ("[CII]", False), ("SO2", False)])
def test_main_isotopologue_labels_win_over_rare_ones(species, rare):
    from astropy.table import QTable

    from cubeloupe.analysis import label_priority

    # within a family the main species is kept first whatever E_up (common practice: it is the brighter)
    lines = QTable({"name": ["main", "other"], "species": ["CO", species],
                    "family": ["CO and isotopologues"] * 2, "E_up": [500.0, 1.0] * u.K})
    first = int(np.argmax(label_priority(lines)))
    assert first == (0 if rare else 1)
