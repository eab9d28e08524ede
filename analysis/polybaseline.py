"""Linear algebra shared by every baseline fit: spectra one at a time or whole cubes.

A polynomial baseline of order ``n`` fitted by least squares on line-free
channels is a linear map of the data: its coefficients are ``c = P @ y_free``
with ``P`` the pseudo-inverse of the design matrix on those channels. Any
linear measurement made after subtracting the baseline (a sum over a window,
a weighted sum for a moment) is therefore itself one weight vector applied to
the data. Folding the baseline into the weights lets a whole cube be reduced
with one matrix product per block of pixels, and gives the exact noise
propagation for white noise, ``var = rms**2 * sum(weights**2)``.

The polynomial is written in Legendre form on the channel coordinate mapped to
[-1, 1] over the fitted span, which keeps the normal equations well
conditioned up to order 5 (numpy.polynomial; any polynomial basis spans the
same space, so the fitted model is the same).

Examples
--------
>>> import numpy as np
>>> x = np.linspace(-1, 1, 50)
>>> free = np.abs(x) > 0.4
>>> basis = BaselineBasis(x, free, order=1)
>>> y = 2.0 + 3.0 * x
>>> np.allclose(basis.model(y), y)
True
"""

from dataclasses import dataclass, field

import numpy as np
from numpy.polynomial import legendre

from .errors import FitError

__all__ = ["MAX_ORDER", "BaselineBasis", "check_order"]

MAX_ORDER = 5


def check_order(order):
    """Return ``order`` if it is an integer from 0 to MAX_ORDER, else raise `FitError`.

    Examples
    --------
    >>> check_order(2)
    2
    """
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 0 <= order <= MAX_ORDER:
        raise FitError(f"baseline order {order!r} is out of range; use an integer from 0 to {MAX_ORDER}")
    return int(order)


@dataclass(frozen=True, eq=False)
class BaselineBasis:
    """Least-squares polynomial baseline on a fixed set of line-free channels.

    Parameters
    ----------
    x : ndarray, shape (n_channels,)
        Channel coordinates (any monotonic spectral coordinate).
    line_free : ndarray of bool, shape (n_channels,)
        Channels the baseline is fitted on.
    order : int
        Polynomial order, 0 to 5.

    Attributes
    ----------
    design : ndarray, shape (n_channels, order + 1)
        Legendre basis evaluated at every channel.
    solver : ndarray, shape (order + 1, n_free)
        Pseudo-inverse of ``design[line_free]``; coefficients are ``solver @ y[line_free]``.
    domain : tuple of float
        The span of ``x`` mapped onto [-1, 1].
    """

    x: np.ndarray
    line_free: np.ndarray
    order: int
    design: np.ndarray = field(init=False, repr=False)
    solver: np.ndarray = field(init=False, repr=False)
    domain: tuple = field(init=False)

    def __post_init__(self):
        x = np.asarray(self.x, dtype=float)
        free = np.asarray(self.line_free, dtype=bool)
        order = check_order(self.order)
        if free.shape != x.shape:
            raise FitError(f"line_free mask has shape {free.shape} but the axis has {x.shape}")
        n_free = int(free.sum())
        if n_free < order + 1:
            raise FitError(
                f"an order-{order} baseline needs at least {order + 1} line-free channels; "
                f"{n_free} were given. Widen the line-free ranges or lower the order"
            )
        lo, hi = float(np.min(x[free])), float(np.max(x[free]))
        if hi == lo:
            hi = lo + 1.0
        t = (2.0 * x - (lo + hi)) / (hi - lo)
        design = legendre.legvander(t, order)
        solver = np.linalg.pinv(design[free])
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "line_free", free)
        object.__setattr__(self, "order", order)
        object.__setattr__(self, "design", design)
        object.__setattr__(self, "solver", solver)
        object.__setattr__(self, "domain", (lo, hi))

    @property
    def n_free(self):
        """Number of line-free channels."""
        return int(self.line_free.sum())

    @property
    def dof(self):
        """Degrees of freedom of the residuals on the line-free channels."""
        return self.n_free - (self.order + 1)

    def coefficients(self, y):
        """Legendre coefficients for data ``y`` of shape (n_channels, ...)."""
        y = np.asarray(y)
        return np.tensordot(self.solver, y[self.line_free], axes=(1, 0))

    def model(self, y):
        """The fitted baseline at every channel, same shape as ``y``."""
        return np.tensordot(self.design, self.coefficients(y), axes=(1, 0))

    def residual_rms(self, y):
        """Rms of the residuals on line-free channels, with ``dof`` in the denominator.

        Falls back to ``n_free`` when there are no spare degrees of freedom.
        """
        y = np.asarray(y)
        resid = y[self.line_free] - np.tensordot(self.design[self.line_free], self.coefficients(y), axes=(1, 0))
        return np.sqrt(np.sum(resid**2, axis=0) / max(self.dof, 1))

    def corrected_weights(self, weights):
        """Weights that apply ``weights`` to the baseline-subtracted data.

        ``weights`` has shape (k, n_channels); the result ``W`` (same shape)
        satisfies ``W @ y == weights @ (y - model(y))`` for every ``y``.
        """
        weights = np.atleast_2d(np.asarray(weights, dtype=float))
        correction = (weights @ self.design) @ self.solver  # (k, n_free)
        out = weights.copy()
        out[:, self.line_free] -= correction
        return out

    def polynomial(self):
        """Callable `numpy.polynomial.Legendre` with this basis' domain, for given coefficients."""
        return lambda coefficients: legendre.Legendre(coefficients, domain=list(self.domain))
