"""Polynomial baselines of single spectra, fitted on line-free channels.

The fit is ordinary least squares of a polynomial of order 0 to 5 in the
spectrum's own spectral coordinate, on the channels inside the line-free
ranges (NaN channels left out); the linear algebra is `BaselineBasis`
(polybaseline.py), shared with the cube-wide baselines of the moment maps.

The rms of the residuals on the line-free channels uses ``n_free - (order + 1)``
degrees of freedom (the unbiased estimate of the noise variance of a linear
least-squares fit; e.g. Press et al., *Numerical Recipes*, 3rd ed., section
15.4). Coefficient covariance and the 1-sigma uncertainty of the model follow
by linear propagation, ``cov = rms**2 * P @ P.T`` with ``P`` the
pseudo-inverse of the design matrix.

Examples
--------
>>> import astropy.units as u
>>> import numpy as np
>>> axis = np.linspace(230.0, 231.0, 101) * u.GHz
>>> values = (0.2 + 0.1 * (axis.value - 230.5)) * u.Jy
>>> fit = fit_baseline(values, [(230.0, 230.3), (230.7, 231.0)] * u.GHz, order=1, spectral_axis=axis)
>>> float(np.abs(fit.subtracted.value).max()) < 1e-9
True
"""

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy.wcs import WCS
from numpy.polynomial import Legendre
from spectral_cube.lower_dimensional_structures import OneDSpectrum

from .errors import SpectralAxisError, SpectralRangeError, UnitMismatchError
from .polybaseline import BaselineBasis, check_order
from .spectral import channel_mask, check_convention, check_redshift, check_rest_frequency

__all__ = ["BaselineFit", "fit_baseline", "as_spectrum", "line_free_mask", "CachedAxis"]


def _linear_spectral_wcs(axis):
    """A 1-D FITS WCS for an evenly spaced spectral axis (frequency, wavelength or velocity)."""
    axis = u.Quantity(axis)
    if axis.ndim != 1 or axis.size < 2:
        raise SpectralAxisError(f"spectral_axis must be a 1-D Quantity of at least 2 channels; got shape {axis.shape}")
    if axis.unit.is_equivalent(u.m / u.s):
        ctype, values = "VRAD", axis.to_value(u.m / u.s)
    elif axis.unit.is_equivalent(u.m):
        ctype, values = "WAVE", axis.to_value(u.m)
    elif axis.unit.is_equivalent(u.Hz, equivalencies=u.spectral()):
        ctype, values = "FREQ", axis.to_value(u.Hz, equivalencies=u.spectral())
    else:
        raise UnitMismatchError(
            f"spectral_axis must be in a frequency, wavelength or velocity unit; got {axis.unit}"
        )
    step = values[1] - values[0]
    expected = values[0] + step * np.arange(values.size)
    if step == 0 or not np.allclose(values, expected, rtol=0, atol=1e-6 * abs(step)):
        raise SpectralAxisError(
            "spectral_axis must be evenly spaced to build a spectrum from a plain Quantity; "
            "pass a spectral_cube OneDSpectrum instead"
        )
    wcs = WCS(naxis=1)
    wcs.wcs.ctype = [ctype]
    wcs.wcs.cunit = [{"VRAD": "m/s", "WAVE": "m", "FREQ": "Hz"}[ctype]]
    wcs.wcs.crval = [values[0]]
    wcs.wcs.cdelt = [step]
    wcs.wcs.crpix = [1.0]
    return wcs


def as_spectrum(spectrum, spectral_axis=None):
    """Return ``spectrum`` as something with a ``spectral_axis`` (a OneDSpectrum for Quantities).

    Parameters
    ----------
    spectrum : OneDSpectrum, object with ``spectral_axis``, or Quantity
    spectral_axis : Quantity, optional
        Required for a plain Quantity: its evenly spaced spectral coordinates
        (a velocity axis is taken as radio velocities).

    Raises
    ------
    SpectralAxisError
        No spectral axis, a length mismatch, or an unevenly spaced axis.

    Examples
    --------
    >>> spec = as_spectrum([1, 2, 3] * u.K, spectral_axis=[1, 2, 3] * u.km / u.s)
    >>> spec.spectral_axis.unit
    Unit("m / s")
    """
    # Look the attribute up on the type: on a OneDSpectrum, reading spectral_axis recomputes it.
    if hasattr(type(spectrum), "spectral_axis") and spectral_axis is None:
        if len(np.shape(spectrum)) != 1:
            raise SpectralAxisError(f"expected a 1-D spectrum; got shape {np.shape(spectrum)}")
        return spectrum
    if spectral_axis is None:
        raise SpectralAxisError(
            "a plain array has no spectral axis; pass a OneDSpectrum (e.g. from region_spectrum) or "
            "give spectral_axis=, e.g. spectral_axis=np.linspace(230, 231, 100) * u.GHz"
        )
    values = u.Quantity(spectrum)
    axis = u.Quantity(spectral_axis)
    if values.ndim != 1 or values.shape != axis.shape:
        raise SpectralAxisError(
            f"spectrum of shape {values.shape} and spectral_axis of shape {axis.shape} do not match"
        )
    return OneDSpectrum(values.value, unit=values.unit, wcs=_linear_spectral_wcs(axis))


class CachedAxis:
    """A spectrum's spectral axis computed once.

    OneDSpectrum recomputes ``spectral_axis`` from its WCS (parsing the unit)
    on every access; the range and velocity helpers read it several times,
    in the same units and frame (`spectral.axis_in` converts it once each).
    """

    def __init__(self, spectrum):
        self.spectrum = spectrum  # whose axis this is (`spectral.frequency_axis` keys its conversions on it)
        self.spectral_axis = spectrum.spectral_axis
        self.wcs = getattr(spectrum, "wcs", None)
        self.conversions = {}  # `spectral.axis_in` keeps each unit and frame's axis here

    def with_spectral_unit(self, *args, **kwargs):
        return self.spectrum.with_spectral_unit(*args, **kwargs)


def _same_kind_spectrum(template, values, unit):
    """A OneDSpectrum with ``template``'s axis, WCS, beam and meta and new values."""
    if isinstance(template, OneDSpectrum):
        return template._new_spectrum_with(data=np.asarray(values), unit=unit)
    return OneDSpectrum(np.asarray(values), unit=unit, wcs=_linear_spectral_wcs(template.spectral_axis))


@dataclass(frozen=True, eq=False)
class BaselineFit:
    """A polynomial baseline fitted on the line-free channels of a spectrum.

    Attributes
    ----------
    model : OneDSpectrum
        The fitted baseline at every channel.
    subtracted : OneDSpectrum
        The spectrum minus the baseline (NaN channels stay NaN).
    rms : Quantity
        Rms of the residuals on the line-free channels, with
        ``n_free - (order + 1)`` degrees of freedom; NaN when there are none.
    coefficients : Quantity, shape (order + 1,)
        Legendre coefficients over ``domain`` (see `polynomial`).
    covariance : Quantity, shape (order + 1, order + 1)
        Covariance of ``coefficients`` from ``rms``.
    model_error : Quantity, shape (n_channels,)
        1-sigma uncertainty of ``model`` at each channel.
    order : int
    line_free : ndarray of bool
        The channels the fit used (inside the ranges and not NaN).
    n_free : int
    spectral_unit : Unit
        Unit of the coordinate the polynomial is written in (the spectrum's axis).
    domain : tuple of float
        Span of the line-free channels in ``spectral_unit``, mapped to [-1, 1].
    basis : BaselineBasis
        The linear algebra of the fit, for propagating it into other measurements.
    """

    model: object
    subtracted: object
    rms: u.Quantity
    coefficients: u.Quantity
    covariance: u.Quantity
    model_error: u.Quantity
    order: int
    line_free: np.ndarray
    n_free: int
    spectral_unit: u.UnitBase
    domain: tuple
    basis: BaselineBasis = field(repr=False)

    @property
    def polynomial(self):
        """The baseline as a `numpy.polynomial.Legendre` of the axis value in ``spectral_unit``.

        Examples
        --------
        >>> axis = np.linspace(230.0, 231.0, 101) * u.GHz
        >>> fit = fit_baseline((0.2 + 0.1 * (axis.value - 230.5)) * u.Jy, [(230.0, 230.3)] * u.GHz,
        ...                    order=1, spectral_axis=axis)
        >>> fit.spectral_unit
        Unit("Hz")
        >>> round(float(fit.polynomial(230.7e9)), 6)
        0.22
        """
        return Legendre(self.coefficients.value, domain=list(self.domain))

    def baseline_at(self, spectral_coordinates):
        """The fitted baseline at any spectral coordinates (a Quantity in a unit like the axis').

        Examples
        --------
        >>> axis = np.linspace(230.0, 231.0, 101) * u.GHz
        >>> fit = fit_baseline((0.2 + 0.1 * (axis.value - 230.5)) * u.Jy, [(230.0, 230.3)] * u.GHz,
        ...                    order=1, spectral_axis=axis)
        >>> print(f"{fit.baseline_at(230.7 * u.GHz):.4f}")
        0.2200 Jy
        """
        try:
            x = u.Quantity(spectral_coordinates).to_value(self.spectral_unit, equivalencies=u.spectral())
        except u.UnitsError:
            raise UnitMismatchError(
                f"spectral coordinates in {u.Quantity(spectral_coordinates).unit} cannot be compared with "
                f"the axis the baseline was fitted on ({self.spectral_unit})"
            ) from None
        return self.polynomial(x) * self.coefficients.unit


def line_free_mask(spectrum, line_free, rest_frequency=None, z=0.0, convention="radio"):
    """The channels of ``spectrum`` inside the ``line_free`` ranges (or the given channel mask), as bool.

    Parameters are those of `fit_baseline`; at least one channel must be selected.

    Examples
    --------
    >>> import astropy.units as u
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=6))
    >>> int(line_free_mask(spec, (1165, 1230) * u.km / u.s, rest_frequency=230.538 * u.GHz).sum()) > 0
    True
    """
    n_channels = len(spectrum.spectral_axis)
    if isinstance(line_free, np.ndarray) and line_free.dtype == bool:
        if line_free.shape != (n_channels,):
            raise SpectralRangeError(
                f"a line-free channel mask must have one entry per channel ({n_channels}); got shape {line_free.shape}"
            )
        mask = line_free.copy()
    else:
        mask = channel_mask(spectrum, line_free, rest_frequency=rest_frequency, z=z, convention=convention,
                            min_channels=1, what="line-free ranges")
    return mask


def fit_baseline(spectrum, line_free, order=1, *, rest_frequency=None, z=0.0, convention="radio",
                 spectral_axis=None):
    """Fit a polynomial baseline on the line-free channels of a spectrum.

    Parameters
    ----------
    spectrum : OneDSpectrum or Quantity
        Anything with a ``spectral_axis`` (e.g. from `region_spectrum`), or a
        plain Quantity together with ``spectral_axis=``.
    line_free : Quantity, shape (2,) or (n, 2), or ndarray of bool
        Line-free ranges in any spectral unit, or a channel mask.
    order : int
        Polynomial order, 0 to 5.
    rest_frequency : Quantity [frequency], optional
        Line rest frequency, for ranges given as velocities.
    z : float
        Source redshift; velocities are offsets from ``rest_frequency / (1 + z)``.
    convention : {'radio', 'optical', 'relativistic'}
    spectral_axis : Quantity, optional
        The axis of a plain-Quantity ``spectrum`` (evenly spaced).

    Returns
    -------
    BaselineFit

    Raises
    ------
    FitError
        ``order`` outside 0-5.
    SpectralRangeError
        A range outside the band, or fewer usable line-free channels than ``order + 1``.
    UnitMismatchError
        ``rest_frequency`` is not a frequency, or ranges not spectral.
    SpectralAxisError
        Velocity ranges without a rest frequency for a frequency axis.

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
    >>> fit = fit_baseline(spec, [(1160, 1215), (1715, 1800)] * u.km / u.s, order=1,
    ...                    rest_frequency=230.538 * u.GHz)
    >>> fit.n_free, f"{fit.rms:.3f}"
    (21, '0.033 Jy')
    """
    order = check_order(order)
    check_convention(convention)
    z = check_redshift(z)
    if rest_frequency is not None:
        check_rest_frequency(rest_frequency, func="fit_baseline")
    spectrum = as_spectrum(spectrum, spectral_axis)
    values = u.Quantity(spectrum)
    unit = values.unit
    y = np.asarray(values.value, dtype=float)
    axis_source = CachedAxis(spectrum)
    in_ranges = line_free_mask(axis_source, line_free, rest_frequency, z, convention)
    finite = np.isfinite(y)
    free = in_ranges & finite
    if free.sum() < order + 1:
        blanked = int((in_ranges & ~finite).sum())
        raise SpectralRangeError(
            f"an order-{order} baseline needs at least {order + 1} line-free channels; the line-free "
            f"ranges hold {int(free.sum())} usable channel(s)"
            + (f" ({blanked} more are blanked/NaN)" if blanked else "")
            + ". Widen the line-free ranges or lower the order"
        )
    axis = axis_source.spectral_axis
    x = np.asarray(axis.value, dtype=float)
    basis = BaselineBasis(x, free, order)
    filled = np.where(finite, y, 0.0)
    coefficients = basis.coefficients(filled)
    model = basis.model(filled)
    rms = float(basis.residual_rms(filled)) if basis.dof > 0 else np.nan
    projector = basis.design @ basis.solver  # model = projector @ y[free]
    model_error = rms * np.sqrt(np.sum(projector**2, axis=1))
    covariance = rms**2 * (basis.solver @ basis.solver.T)
    return BaselineFit(
        model=_same_kind_spectrum(spectrum, model, unit),
        subtracted=_same_kind_spectrum(spectrum, y - model, unit),
        rms=rms * unit,
        coefficients=coefficients * unit,
        covariance=covariance * unit**2,
        model_error=model_error * unit,
        order=order,
        line_free=free,
        n_free=int(free.sum()),
        spectral_unit=axis.unit,
        domain=basis.domain,
        basis=basis,
    )
