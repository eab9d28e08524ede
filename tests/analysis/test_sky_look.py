"""Beam placement on the data and colour limits centred on zero."""

from pathlib import Path

import numpy as np
import pytest

from cubeloupe.analysis import beam_anchor, centred_limits, data_bounds

REAL_CUBES = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"


def test_data_bounds_match_the_finite_pixels(rng):
    plane = np.full((40, 50), np.nan)
    plane[7:31, 12:45] = rng.normal(size=(24, 33))
    plane[10, 12] = np.nan  # a hole inside does not shrink the box
    # Reference: the extreme indices of the finite pixels (numpy.argwhere).
    rows, columns = np.argwhere(np.isfinite(plane)).T
    assert data_bounds(plane) == (columns.min(), columns.max(), rows.min(), rows.max()) == (12, 44, 7, 30)
    assert data_bounds(np.full((3, 3), np.nan)) is None


def beam_pixels(x, y, radius, shape):
    """Pixels whose centres lie within ``radius`` of (x, y)."""
    yy, xx = np.indices(shape)
    return np.hypot(xx - x, yy - y) <= radius


def test_beam_sits_on_the_data_not_in_a_blanked_corner():
    plane = np.full((128, 128), np.nan)
    yy, xx = np.mgrid[:128, :128]
    plane[np.hypot(xx - 63.5, yy - 63.5) < 50] = 1.0  # a round field blanked outside, as interferometer maps
    x, y = beam_anchor(plane, 7.0)
    assert np.isfinite(plane[beam_pixels(x, y, 3.5 + 1.0, plane.shape)]).all()
    # As near the lower-left as it fits: where the field's edge, 50 px from its centre, leaves room
    # for the beam (3.5 px) and the margin (1 px) on the diagonal, x + y = 2 (63.5 - 44.5 / sqrt 2).
    assert x + y == pytest.approx(2 * (63.5 - 44.5 / np.sqrt(2)), abs=2.5)
    assert x < 40 and y < 40
    # A map with no blanks: the beam sits one margin from the lower-left corner.
    x, y = beam_anchor(np.zeros((100, 100)), 10.0)
    assert (x, y) == (6.0, 6.0)  # centre 5 px (half the beam) + 1 px margin from the edge at -0.5
    assert np.isfinite(beam_anchor(np.full((5, 5), np.nan), 3.0)).all()


def test_beam_on_the_real_cube_with_a_blanked_border():
    """co10_ngc4047_carma.fits: about 37 % of the pixels are NaN in a border (SOURCES.md)."""
    path = REAL_CUBES / "co10_ngc4047_carma.fits"
    if not path.exists():
        pytest.skip(f"real cube not found at {path} (../shared/real-cubes/ beside the repository)")
    from astropy.io import fits

    plane = fits.getdata(path)[0, 20]
    assert np.isnan(plane[0, 0])  # the lower-left corner of the map is blank
    x, y = beam_anchor(plane, 7.0)  # 7" beam, 1" pixels (the header's BMAJ)
    # Every pixel under the beam holds data: it is not drawn on the blanked border.
    assert np.isfinite(plane[beam_pixels(x, y, 3.5, plane.shape)]).all()


def test_centred_limits_are_symmetric_about_zero(rng):
    velocities = np.concatenate([rng.uniform(-120, 180, 5000), [np.nan] * 10])
    lo, hi = centred_limits(velocities, 1, 99)
    # The larger of the two percentiles (numpy.nanpercentile as reference) sets both ends.
    p1, p99 = np.nanpercentile(velocities, [1, 99])
    assert hi == pytest.approx(max(abs(p1), abs(p99)), rel=1e-6)
    assert lo == -hi
    assert centred_limits(velocities, vmin=-10, vmax=30) == (-10.0, 30.0)  # the user's choice wins
    assert centred_limits(np.full(4, np.nan)) == (-1.0, 1.0)
    with pytest.raises(ValueError, match="vmin"):
        centred_limits(velocities, vmin=3, vmax=3)
