"""The window and line-free channels measure_line and moment_maps share (#14)."""

import re

import astropy.units as u
import numpy as np
import pytest

from cubeloupe.analysis import LineFreeOverlapWarning, SpectralRangeError, WindowClippedWarning
from cubeloupe.analysis.windows import line_free_outside_window, window_channels

AXIS = np.arange(1.0, 11.0) * u.GHz  # channel centres 1..10 GHz; the band spans 0.5 to 10.5 GHz


def test_window_inside_the_band_is_silent():
    mask = window_channels(AXIS, (2.5, 5.5) * u.GHz)
    assert mask.tolist() == [False, False, True, True, True] + [False] * 5


def test_window_reaching_half_a_channel_past_the_centres_is_not_clipped():
    # A channel covers half a channel either side of its centre (common practice for FITS channel grids).
    assert window_channels(AXIS, (0.5, 10.5) * u.GHz).all()


@pytest.mark.parametrize("window, used", [((0, 3.2), "3 channel(s) from 1 to 3 GHz"),
                                          ((8.7, 40), "2 channel(s) from 9 to 10 GHz")])
def test_window_beyond_the_band_says_what_is_used(window, used):
    with pytest.warns(WindowClippedWarning, match=r"band, which spans 0.5 to 10.5 GHz.*" + re.escape(used)):
        mask = window_channels(AXIS, window * u.GHz)
    assert mask.sum() == int(used[0])


def test_window_in_another_unit_is_compared_in_that_unit():
    # 1 GHz = 299.792458 mm (c / f, astropy's spectral equivalency); the band edge 10.5 GHz is 28.55 mm.
    with pytest.warns(WindowClippedWarning, match="mm"):
        mask = window_channels(AXIS, (20, 400) * u.mm)
    assert AXIS[mask].min() == 1 * u.GHz and AXIS[mask].max() == 10 * u.GHz


def test_window_wholly_outside_is_refused():
    with pytest.raises(SpectralRangeError, match="selects no channel"):
        window_channels(AXIS, (20, 30) * u.GHz)


def test_overlapping_line_free_channels_are_dropped_with_a_count():
    free = np.array([True] * 4 + [False] * 6)
    window = np.array([False] * 3 + [True] * 3 + [False] * 4)
    with pytest.warns(LineFreeOverlapWarning, match="1 of the 4 line-free channels.*the other 3"):
        kept = line_free_outside_window(free, window, line_free="(1, 4) GHz", window="(4, 6) GHz")
    assert kept.tolist() == [True] * 3 + [False] * 7


def test_too_few_line_free_channels_left_is_refused():
    free = np.array([True] * 4 + [False] * 6)
    window = np.array([False] * 2 + [True] * 3 + [False] * 5)
    with pytest.raises(SpectralRangeError, match=r"leave 2 channel\(s\).*\(2 of theirs lie inside it\).*at least 3"):
        line_free_outside_window(free, window, line_free="(1, 4) GHz", window="(3, 5) GHz", min_channels=3)
