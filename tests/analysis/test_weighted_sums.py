"""weighted_sums.accumulate: the compiled sums equal numpy's float64 products."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis.weighted_sums import accumulate

pytestmark = pytest.mark.skipif(accumulate is None, reason="numba is not installed: the numpy path is used")


@pytest.mark.parametrize("n_basis", [0, 1, 2, 4])
@pytest.mark.parametrize("first, n", [(0, 13), (5, 11), (9, 7), (14, 6)])
def test_sums_equal_numpy_float64_products(n_basis, first, n):
    # Reference: numpy matrix products and sum of squares in float64 (numpy, reference library).
    rng = np.random.default_rng(n_basis * 100 + first)
    n_free, n_window, pixels = 12, 8, 37
    slab = rng.normal(3.0, 1.0, (n, pixels)).astype(np.float32)
    basis = rng.normal(size=(n_basis, n_free))
    window_rows = rng.normal(size=(3, n_window))
    totals = rng.normal(size=(3 + n_basis + 1, pixels))  # added to, not overwritten
    expected = totals.copy()
    y = slab.astype(np.float64)
    channels = np.arange(first, first + n)
    free = channels < n_free
    if n_basis:
        expected[3:3 + n_basis] += basis[:, channels[free]] @ y[free]
    expected[-1] += np.sum(y[free] ** 2, axis=0)
    expected[:3] += window_rows[:, channels[~free] - n_free] @ y[~free]
    accumulate(slab, first, n_free, basis, window_rows, totals)
    assert_allclose(totals, expected, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("byte_order", [">", "<"])
@pytest.mark.parametrize("n_basis", [0, 2, 3])
def test_a_view_of_the_file_gives_the_same_sums_as_a_native_copy(byte_order, n_basis):
    # A FITS file holds big-endian values (FITS Standard 4.0, section 5; section from memory): a slab read straight
    # from the memory map, channels a whole plane apart, must give bit for bit the sums of its
    # native-order copy, blanks (NaN, inf) included.
    rng = np.random.default_rng(n_basis)
    n_free, n_window, rows, columns = 9, 6, 5, 7
    cube = rng.normal(2.0, 1.0, (n_free + n_window + 4, rows, columns)).astype(byte_order + "f4")
    cube[3, 1, 2] = np.nan
    cube[11, 4, 6] = np.inf
    basis = rng.normal(size=(n_basis, n_free))
    window_rows = rng.normal(size=(3, n_window))
    for first, start, stop in [(0, 2, 13), (5, 4, 14), (11, 1, 5)]:   # slabs across both parts
        view = cube[start:stop, 1:4].reshape(stop - start, -1)          # rows 1-3 of each channel
        assert np.shares_memory(view, cube) and not view.flags.c_contiguous
        native = np.ascontiguousarray(view, dtype=np.float32)
        from_file, from_copy = np.zeros((2, 3 + n_basis + 1, view.shape[1]))
        accumulate(view, first, n_free, basis, window_rows, from_file)
        accumulate(native, first, n_free, basis, window_rows, from_copy)
        np.testing.assert_array_equal(from_file, from_copy)


def test_a_slab_that_is_not_float32_channels_is_refused():
    totals = np.zeros((4, 6))
    with pytest.raises(ValueError, match="float32"):
        accumulate(np.ones((2, 6)), 0, 2, np.ones((0, 2)), np.ones((3, 0)), totals)
    with pytest.raises(ValueError, match="contiguous"):
        accumulate(np.ones((2, 12), np.float32)[:, ::2], 0, 2, np.ones((0, 2)), np.ones((3, 0)), totals)
