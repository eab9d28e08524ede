"""The shared least-squares baseline algebra against numpy's own polynomial fits."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import FitError
from cubeloupe.analysis.polybaseline import MAX_ORDER, BaselineBasis, check_order


@pytest.mark.parametrize("order", range(MAX_ORDER + 1))
def test_model_matches_numpy_polyfit(order, rng):
    # Reference: numpy.polynomial.Polynomial.fit, an ordinary least-squares fit
    # (any polynomial basis spans the same space, so the fitted model is the same).
    x = np.linspace(-300.0, 500.0, 181)
    free = (x < -100) | (x > 250)
    y = rng.normal(size=x.size) + 0.002 * x
    reference = np.polynomial.Polynomial.fit(x[free], y[free], order)(x)
    assert_allclose(BaselineBasis(x, free, order).model(y), reference, atol=1e-9)


def test_exact_polynomial_is_reproduced_everywhere():
    # A noiseless cubic is its own best cubic fit, inside and outside the fitted span.
    x = np.linspace(0.0, 10.0, 101)
    free = (x < 3) | (x > 7)
    y = 1.0 - 0.5 * x + 0.2 * x**2 - 0.01 * x**3
    assert_allclose(BaselineBasis(x, free, 3).model(y), y, atol=1e-10)


def test_corrected_weights_equal_measuring_the_subtracted_data(rng):
    x = np.arange(200.0)
    free = (x < 60) | (x > 140)
    basis = BaselineBasis(x, free, 2)
    y = rng.normal(size=(200, 7)) + 3.0 + 0.01 * x[:, None]
    window = np.zeros((2, 200))
    window[0, 80:120] = 1.0
    window[1, 80:120] = x[80:120]
    assert_allclose(basis.corrected_weights(window) @ y, window @ (y - basis.model(y)), rtol=1e-10, atol=1e-9)


def test_residual_rms_of_pure_noise_is_unbiased(rng):
    # With dof = n_free - (order + 1) in the denominator the variance estimate
    # is unbiased for white noise (ordinary least squares; common practice).
    x = np.arange(40.0)
    free = np.ones(40, bool)
    basis = BaselineBasis(x, free, 3)
    sigma = 0.7
    y = rng.normal(scale=sigma, size=(40, 20000))
    assert np.mean(basis.residual_rms(y) ** 2) == pytest.approx(sigma**2, rel=0.02)


@pytest.mark.parametrize("order", [-1, 6, 1.5, True, "1"])
def test_order_out_of_range_is_refused(order):
    with pytest.raises(FitError, match="order"):
        check_order(order)


def test_too_few_line_free_channels_is_refused():
    x = np.arange(10.0)
    free = np.zeros(10, bool)
    free[[2, 7]] = True
    with pytest.raises(FitError, match="at least 3 line-free channels; 2 were given"):
        BaselineBasis(x, free, 2)
