"""The grid statistics behind each channel's rms (analysis/check/grid_noise.py; issue 13, speed of the check)."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis.check.grid_noise import (
    channel_correlation,
    correlation_stride,
    grid_noise_statistics,
    row_mads,
)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_row_mads_equal_numpys_median_absolute_deviation(dtype):
    # MAD = median(|x - median(x)|) (common practice); numpy's float64 medians are the reference. Rows
    # with blanks leave them out (np.nanmedian).
    rng = np.random.default_rng(11)
    values = rng.normal(3.0, 2.0, (9, 4001)).astype(dtype)
    values[2, :10] = np.nan
    as64 = values.astype(np.float64)
    median = np.nanmedian(as64, axis=1)
    reference = np.nanmedian(np.abs(as64 - median[:, None]), axis=1)
    # float32 rows: the median and the deviations are rounded to float32, two roundings of numbers
    # near the median (3): within 2 x eps x 4 of numpy's float64 result
    assert_allclose(row_mads(values.copy()), reference, rtol=0, atol=2 * np.finfo(dtype).eps * 4.0)


def test_correlation_from_a_channel_subsample_is_that_of_every_channel():
    """Hanning smoothing [1/4, 1/2, 1/4] of white noise correlates neighbouring channels by 2/3 (common practice).

    The lag MADs feed only their medians over the band, so every 7th channel gives the same correlation.
    """
    rng = np.random.default_rng(5)
    white = rng.normal(0.0, 1.0, (1002, 3000))
    hanning = (white[:-2] + 2 * white[1:-1] + white[2:]) / 4
    every = grid_noise_statistics(hanning.copy())
    stride = correlation_stride(hanning.shape[0])
    assert stride == 7  # 1000 channels // 128
    sparse = grid_noise_statistics(hanning.copy(), stride=stride)
    measured = np.flatnonzero(np.isfinite(sparse["step_mad"]))
    assert measured.tolist() == list(range(0, 999, stride))
    assert_allclose(sparse["step_mad"][measured], every["step_mad"][measured])
    full_rho = channel_correlation(every["step_mad"], every["lag2_mad"])
    sparse_rho = channel_correlation(sparse["step_mad"], sparse["lag2_mad"])
    assert abs(sparse_rho - full_rho) < 0.01
    # the Gaussian-lag model reads Hanning's 2/3 as about 0.7 (module notes: within 0.03 of it)
    assert abs(sparse_rho - 2 / 3) < 0.05
    # the per-channel statistics are not subsampled
    for name in ("mad", "curvature_mad", "n_pixels", "total"):
        assert_allclose(sparse[name], every[name])
