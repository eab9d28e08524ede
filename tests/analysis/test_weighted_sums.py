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
