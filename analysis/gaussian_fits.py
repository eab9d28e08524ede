"""Gaussian fits of spectral lines: a few components, or a hyperfine group tied by its relative intensities.

After the optional polynomial baseline (`fit_baseline` on the line-free
channels), the channels in the window are fitted by least squares
(`scipy.optimize.least_squares`, trust-region reflective with bounds, the
solver `scipy.optimize.curve_fit` uses) with the sum of ``n`` Gaussians

    ``f(x) = sum_k A_k exp(-4 ln 2 (x - x_k)^2 / W_k^2)``

(``W`` the FWHM). First guesses come from the data: the strongest residual
peak, its half-power width, then the next peak of what is left. Bounds keep
each amplitude's sign, each centre inside the window and each width between
half a channel and twice the window.

Errors. The parameter covariance is ``rms^2 (J^T J)^-1`` with ``J`` the
Jacobian at the solution and ``rms`` the channel noise measured on the
line-free channels, not on the fit's residuals (Press et al., *Numerical
Recipes*, 3rd ed., section 15.5; what ``curve_fit(..., sigma=rms,
absolute_sigma=True)`` returns). When the spectrum carries a channel noise
correlation (smoothed spectra, see `smooth_spectrum`) the covariance is the
sandwich ``(J^T J)^-1 J^T C J (J^T J)^-1`` with ``C = rms^2 rho(|i - j|)``
(least squares with correlated errors; e.g. Bevington & Robinson, *Data
Reduction and Error Analysis*, 3rd ed., ch. 7). A component's integrated
flux is ``A W sqrt(pi / (4 ln 2))`` (the integral of the Gaussian), its error
propagated with the covariance of ``A`` and ``W``.

Hyperfine mode (``hyperfine=``). The components of a resolved hyperfine
group share one excitation temperature, velocity and width, and their optical
depths are fixed fractions of a fitted total optical depth (the model, its
sources and ``T_ex`` are in `cubeloupe.analysis.hyperfine`), fitted from a few
starting optical depths with the same solver and error propagation.

Results are quick-look numbers (see the README).

Examples
--------
>>> import astropy.units as u
>>> import numpy as np
>>> v = np.linspace(-50, 50, 101) * u.km / u.s
>>> y = 2.0 * np.exp(-4 * np.log(2) * (v.value - 5.0) ** 2 / 12.0**2) * u.K
>>> fit = fit_gaussians(y, spectral_axis=v)
>>> comp = fit.components[0]
>>> print(f"{comp.center:.2f} {comp.fwhm:.2f}")
5.00 km / s 12.00 km / s
"""

import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np
from threadpoolctl import threadpool_limits

from .baseline import BaselineFit, CachedAxis, as_spectrum, fit_baseline, line_free_mask
from .errors import FitError
from .hyperfine import (
    OPTICAL_DEPTH_LIMITS, HyperfineSolution, excitation_temperature, hyperfine_jacobian, hyperfine_lines,
    hyperfine_profile,
)
from .smoothing import channel_correlation
from .spectral import axis_in, check_convention, check_redshift, check_rest_frequency, velocity
from .windows import line_free_outside_window, window_channels

__all__ = ["GaussianComponent", "GaussianFit", "fit_gaussians"]

_KMS = u.km / u.s
_FOUR_LN2 = 4.0 * np.log(2.0)
# Integral of a unit-peak Gaussian of unit FWHM: sqrt(pi / (4 ln 2)) = 1.0645...
_AREA_PER_PEAK_WIDTH = np.sqrt(np.pi / _FOUR_LN2)



@dataclass(frozen=True)
class GaussianComponent:
    """One fitted component: peak, centre, FWHM and integrated flux, each with its 1-sigma error.

    ``center`` and ``fwhm`` are in km/s when the fit was made on velocities
    (a rest frequency given, or a velocity axis), else in GHz; ``flux`` is in
    the spectrum's unit times that unit.
    """

    amplitude: u.Quantity
    center: u.Quantity
    fwhm: u.Quantity
    flux: u.Quantity
    amplitude_error: u.Quantity
    center_error: u.Quantity
    fwhm_error: u.Quantity
    flux_error: u.Quantity


@dataclass(frozen=True, eq=False)
class GaussianFit:
    """The result of `fit_gaussians`.

    Attributes
    ----------
    components : tuple of GaussianComponent
        Sorted by centre. In hyperfine mode one entry for the whole group:
        its profile's peak, the group velocity, the common FWHM and the
        profile's integral.
    model : Quantity, shape (n_channels,)
        The fitted profile at every channel of the spectrum (baseline not
        included); draw it against ``axis``.
    residuals : Quantity, shape (n_channels,)
        Baseline-subtracted data minus model on the fitted channels, NaN elsewhere.
    reduced_chi2 : float
        ``sum(residual^2) / rms^2 / (n - n_parameters)``; near 1 for a good
        fit of independent channels, below 1 on smoothed spectra.
    rms : Quantity
        Channel noise used for the errors (line-free rms; without line-free
        channels or a window, the rms of the residuals).
    rms_from : str
        Where ``rms`` came from: ``"line-free"``, ``"outside window"`` or ``"residuals"``.
    n_channels, dof : int
        Channels fitted and degrees of freedom.
    parameters, covariance : ndarray
        Raw parameter vector and its covariance, in the fit's units
        (``[A, x0, W] * n`` or ``[A, v0, W, tau]``).
    axis : Quantity
        The coordinate of every channel the fit used (km/s or GHz).
    fitted : ndarray of bool
        The channels that were fitted.
    baseline : BaselineFit or None
    hyperfine : HyperfineSolution or None
    channel_correlation : ndarray
        Noise autocorrelation used in the errors (``[1.0]`` for independent channels).
    rest_frequency, z, convention
        The velocity frame.
    """

    components: tuple
    model: object
    residuals: object
    reduced_chi2: float
    rms: u.Quantity
    rms_from: str
    n_channels: int
    dof: int
    parameters: np.ndarray
    covariance: np.ndarray
    axis: u.Quantity
    fitted: np.ndarray
    baseline: BaselineFit | None
    hyperfine: HyperfineSolution | None
    channel_correlation: np.ndarray
    rest_frequency: u.Quantity | None
    z: float
    convention: str

    @property
    def optical_depth(self):
        """Total optical depth of a hyperfine fit (NaN for plain Gaussian fits)."""
        return self.hyperfine.optical_depth if self.hyperfine is not None else np.nan

    def summary(self):
        """The fit as a few lines of text.

        Examples
        --------
        >>> v = np.linspace(-50, 50, 101) * u.km / u.s
        >>> y = 2.0 * np.exp(-4 * np.log(2) * (v.value - 5.0) ** 2 / 12.0**2) * u.K
        >>> print(fit_gaussians(y, spectral_axis=v).summary())  # doctest: +ELLIPSIS
        component 1: peak 2 +/- ... K, centre 5 +/- ... km / s, FWHM 12 +/- ... km / s, flux 25.55 +/- ... K km / s
        reduced chi2 ...
        """
        lines = []
        for i, c in enumerate(self.components, 1):
            lines.append(
                f"component {i}: peak {c.amplitude.value:.4g} +/- {c.amplitude_error.value:.2g} {c.amplitude.unit}, "
                f"centre {c.center.value:.6g} +/- {c.center_error.value:.2g} {c.center.unit}, "
                f"FWHM {c.fwhm.value:.4g} +/- {c.fwhm_error.value:.2g} {c.fwhm.unit}, "
                f"flux {c.flux.value:.4g} +/- {c.flux_error.value:.2g} {c.flux.unit}")
        if self.hyperfine is not None:
            h = self.hyperfine
            text = f"optical depth {h.optical_depth:.3g} +/- {h.optical_depth_error:.2g}"
            if h.excitation_temperature is not None:
                text += (f", T_ex {h.excitation_temperature.value:.3g} +/- "
                         f"{h.excitation_temperature_error.value:.2g} K")
            lines.append(text)
        lines.append(f"reduced chi2 {self.reduced_chi2:.3g} over {self.n_channels} channels (rms {self.rms:.3g}, "
                     f"{self.rms_from})")
        return "\n".join(lines)


# ---------------------------------------------------------------------------
# Models and their Jacobians
# ---------------------------------------------------------------------------

def _gaussians(x, params):
    p = params.reshape(-1, 3)
    shape = np.exp(-_FOUR_LN2 * (x[:, None] - p[:, 1]) ** 2 / p[:, 2] ** 2)
    return shape @ p[:, 0]


def _gaussians_jacobian(x, params):
    p = params.reshape(-1, 3)
    offset = x[:, None] - p[:, 1]
    shape = np.exp(-_FOUR_LN2 * offset**2 / p[:, 2] ** 2)
    jac = np.empty((x.size, p.shape[0], 3))
    jac[:, :, 0] = shape
    jac[:, :, 1] = p[:, 0] * shape * 2 * _FOUR_LN2 * offset / p[:, 2] ** 2
    jac[:, :, 2] = p[:, 0] * shape * 2 * _FOUR_LN2 * offset**2 / p[:, 2] ** 3
    return jac.reshape(x.size, -1)


# ---------------------------------------------------------------------------
# Guesses, solving, covariance
# ---------------------------------------------------------------------------

def _half_width(x, y, peak_index):
    """Distance between the half-power points around ``peak_index`` (at least one channel)."""
    half = y[peak_index] / 2
    lo = peak_index
    while lo > 0 and y[lo] > half:
        lo -= 1
    hi = peak_index
    while hi < y.size - 1 and y[hi] > half:
        hi += 1
    return abs(x[hi] - x[lo])


def _gaussian_guesses(x, y, n_components, step):
    """First guesses [A, x0, W] * n: the strongest residual peak, its width, repeated on what is left."""
    sign = 1.0 if np.sum(y) >= 0 else -1.0
    residual = sign * y.copy()
    guesses = []
    for _ in range(n_components):
        k = int(np.argmax(residual))
        amplitude = residual[k]
        if amplitude <= 0:
            amplitude = np.max(np.abs(y)) / n_components or 1.0
        width = float(np.clip(_half_width(x, residual, k), 2 * step, np.ptp(x)))
        guesses.append([sign * amplitude, x[k], width])
        residual -= _gaussians(x, np.array([amplitude, x[k], width]))
    return np.array(guesses, dtype=float).ravel()


def _gaussian_bounds(guesses, x, step):
    p = guesses.reshape(-1, 3)
    lower = np.column_stack([np.where(p[:, 0] >= 0, 0.0, -np.inf), np.full(len(p), x.min()),
                             np.full(len(p), step / 2)])
    upper = np.column_stack([np.where(p[:, 0] >= 0, np.inf, 0.0), np.full(len(p), x.max()),
                             np.full(len(p), 2 * np.ptp(x))])
    return lower.ravel(), upper.ravel()


def _solve(model, jacobian, x, y, p0, bounds):
    from scipy.optimize import least_squares

    lower, upper = bounds
    span = np.where(np.isfinite(upper - lower), upper - lower, np.abs(p0) + 1.0)
    p0 = np.clip(p0, lower + 1e-9 * span, upper - 1e-9 * span)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        result = least_squares(lambda p: model(x, p) - y, p0, jac=lambda p: jacobian(x, p), bounds=bounds,
                               method="trf", x_scale="jac", max_nfev=2000)
    return result


def _covariance(jac, rms, correlation):
    """``rms^2 (J^T J)^-1``, or the sandwich with the correlated-noise covariance (see the module docstring)."""
    _, s, vt = np.linalg.svd(jac, full_matrices=False)
    keep = s > np.finfo(float).eps * max(jac.shape) * s[0]  # as scipy's curve_fit does
    s, vt = s[keep], vt[keep]
    inverse_normal = (vt.T / s**2) @ vt
    if correlation.size == 1:
        return rms**2 * inverse_normal
    n = jac.shape[0]
    lags = np.zeros(n)
    lags[: min(n, correlation.size)] = correlation[:n]
    from scipy.linalg import toeplitz

    noise = rms**2 * toeplitz(lags)
    return inverse_normal @ (jac.T @ noise @ jac) @ inverse_normal


# ---------------------------------------------------------------------------
# The fit
# ---------------------------------------------------------------------------

def _velocities_as_given(spectrum):
    """True for a velocity axis without a rest frequency of its own: its velocities are used as they are."""
    header = getattr(getattr(spectrum, "wcs", None), "wcs", None)
    own_rest = getattr(header, "restfrq", 0) or getattr(header, "restwav", 0)
    return spectrum.spectral_axis.unit.is_equivalent(_KMS) and not own_rest


def _fit_axis(spectrum, rest_frequency, z, convention, hyperfine):
    """The channel coordinates to fit on: velocities (km/s) with a rest frequency or a velocity axis, else GHz."""
    native = spectrum.spectral_axis
    if _velocities_as_given(spectrum):
        return native.to(_KMS)
    if rest_frequency is not None or native.unit.is_equivalent(_KMS) or hyperfine:
        return axis_in(spectrum, _KMS, rest_frequency=rest_frequency, z=z, convention=convention)
    return axis_in(spectrum, u.GHz, rest_frequency=rest_frequency, z=z, convention=convention)


def fit_gaussians(spectrum, n_components=1, *, window=None, line_free=None, order=1, rest_frequency=None, z=0.0,
                  convention="radio", hyperfine=None, guesses=None, spectral_axis=None):
    """Fit one to a few Gaussian components, or a hyperfine group, to a spectral line.

    See the module docstring for the models, bounds, error formulas and sources.

    Parameters
    ----------
    spectrum : OneDSpectrum or Quantity
        E.g. from `region_spectrum` or `smooth_spectrum` (whose channel
        correlation is used in the errors); a plain Quantity needs ``spectral_axis=``.
    n_components : int
        Gaussians to fit (1 to 6); 1 in hyperfine mode.
    window : Quantity, shape (2,) or (n, 2), optional
        Channels to fit, in any spectral unit; all valid channels by default.
    line_free : Quantity or ndarray of bool, optional
        Line-free ranges for a baseline of ``order`` (channels in the window
        are left out of it), and the channels the noise is measured on.
    order : int
        Baseline order, 0 to 5.
    rest_frequency : Quantity [frequency], optional
        Fit on velocities from ``rest_frequency / (1 + z)``; centres and
        widths are then in km/s. In hyperfine mode the default reference is
        the group's strongest component.
    z : float
    convention : {'radio', 'optical', 'relativistic'}
    hyperfine : str or Table, optional
        A hyperfine group name of the catalog (e.g. ``"N2H+ J=1-0"``) or a
        table of ``rest_frequency`` and ``relative_intensity`` (see `hyperfine_lines`).
    guesses : sequence of (amplitude, center, fwhm) Quantities, optional
        First guesses instead of the data-driven ones (``n_components`` of them).
    spectral_axis : Quantity, optional
        Axis of a plain-Quantity ``spectrum``.

    Returns
    -------
    GaussianFit

    Raises
    ------
    FitError
        Bad ``n_components``, too few channels, no finite data, or a fit that does not converge.
    SpectralRangeError
        A window or line-free range outside the band.
    CatalogError
        An unknown hyperfine group, or a malformed hyperfine table.
    UnitMismatchError, SpectralAxisError
        As for `measure_line`.

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
    >>> fit = fit_gaussians(spec, n_components=2, window=(1220, 1710) * u.km / u.s,
    ...                     line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s, order=0,
    ...                     rest_frequency=230.538 * u.GHz)
    >>> [round(c.center.to_value(u.km / u.s)) for c in fit.components]  # the two horns of the disk
    [1403, 1552]
    """
    # One BLAS thread: every product here is small, and on busy cores BLAS threads only add latency
    # (measured: a 1000 x 2 by 2 x 400 product in the baseline took 15-40 ms with two threads, 0.1 ms with one).
    with threadpool_limits(limits=1, user_api="blas"):
        return _fit_gaussians(spectrum, n_components, window, line_free, order, rest_frequency, z, convention,
                              hyperfine, guesses, spectral_axis)


def _fit_gaussians(spectrum, n_components, window, line_free, order, rest_frequency, z, convention, hyperfine,
                   guesses, spectral_axis):
    check_convention(convention)
    z = check_redshift(z)
    if rest_frequency is not None:
        rest_frequency = check_rest_frequency(rest_frequency, func="fit_gaussians")
    if isinstance(n_components, bool) or not isinstance(n_components, (int, np.integer)) or not 1 <= n_components <= 6:
        raise FitError(f"n_components must be a whole number from 1 to 6; got {n_components!r}")
    lines = None
    if hyperfine is not None:
        if n_components != 1:
            raise FitError(f"a hyperfine fit has one velocity component; got n_components={n_components}")
        lines = hyperfine_lines(hyperfine)
        if rest_frequency is None:
            rest_frequency = lines["rest_frequency"][int(np.argmax(lines["relative_intensity"]))]
    spectrum = as_spectrum(spectrum, spectral_axis)
    axis_source = CachedAxis(spectrum)
    frame = dict(rest_frequency=rest_frequency, z=z, convention=convention)
    if lines is not None and _velocities_as_given(axis_source):
        frame = dict(rest_frequency=None, z=0.0, convention=convention)  # ranges in the axis' own velocities
    x_axis = _fit_axis(axis_source, rest_frequency, z, convention, lines is not None)
    x_all = np.asarray(x_axis.value, dtype=float)
    values = u.Quantity(spectrum)
    unit = values.unit
    y_all = np.asarray(values.value, dtype=float)
    finite = np.isfinite(y_all)
    # The same channel selection, and warnings, as measure_line and moment_maps.
    in_window = window_channels(axis_source, window, **frame) if window is not None \
        else np.ones(y_all.size, bool)

    baseline = None
    if line_free is not None:
        free = line_free_mask(axis_source, line_free, **frame)
        if window is not None:
            free = line_free_outside_window(free, in_window, line_free=line_free, window=window,
                                            min_channels=order + 2)
        baseline = fit_baseline(spectrum, free, order, **frame)
        signal = np.asarray(baseline.subtracted.value, dtype=float)
        rms, rms_from = baseline.rms.to_value(unit), "line-free"
    else:
        signal = y_all
        outside = finite & ~in_window
        rms, rms_from = (float(np.sqrt(np.mean(y_all[outside] ** 2))), "outside window") \
            if outside.sum() >= 5 else (np.nan, "residuals")
    fitted = in_window & finite
    x, y = x_all[fitted], signal[fitted]
    n_params = 4 if lines is not None else 3 * n_components
    if x.size <= n_params:
        raise FitError(f"{x.size} valid channels in the window; fitting {n_params} parameters needs more. "
                       "Widen the window or fit fewer components")
    step = float(np.median(np.abs(np.diff(x)))) if x.size > 1 else 1.0

    if lines is not None:
        reference = u.Quantity(rest_frequency, u.GHz)
        offsets = velocity(lines["rest_frequency"], reference, 0.0, convention).to_value(_KMS)
        weights = np.asarray(lines["relative_intensity"], dtype=float)
        lines["velocity_offset"] = offsets * _KMS

        def model(xx, p):
            return hyperfine_profile(xx, p, offsets, weights)

        def jacobian(xx, p):
            return hyperfine_jacobian(xx, p, offsets, weights)

        result = _solve_hyperfine(model, jacobian, x, y, offsets, weights, step, guesses, unit)
    else:
        def model(xx, p):
            return _gaussians(xx, p)

        jacobian = _gaussians_jacobian
        p0 = _gaussian_guesses(x, y, n_components, step) if guesses is None else \
            _given_guesses(guesses, n_components, unit, x_axis.unit)
        result = _solve(model, jacobian, x, y, p0, _gaussian_bounds(p0, x, step))
    if result.status <= 0 or not np.all(np.isfinite(result.x)):
        raise FitError(f"the fit did not converge ({result.message}); give guesses= or change the window")
    params = result.x
    residual = y - model(x, params)
    dof = x.size - n_params
    if not np.isfinite(rms) or rms <= 0:
        rms, rms_from = float(np.sqrt(np.sum(residual**2) / dof)), "residuals"
    correlation = channel_correlation(spectrum)
    jac = jacobian(x, params)
    covariance = _covariance(jac, rms, correlation)
    errors = np.sqrt(np.clip(np.diag(covariance), 0, None))
    with np.errstate(invalid="ignore", divide="ignore"):  # noise-free data: rms 0
        reduced_chi2 = float(np.sum(residual**2) / rms**2 / dof)

    x_unit = x_axis.unit
    if lines is not None:
        components, solution = _hyperfine_results(params, covariance, errors, model, x_all, unit, lines,
                                                  rest_frequency, z, step)
    else:
        components, solution = _gaussian_results(params, covariance, errors, unit, x_unit), None

    model_all = model(x_all, params)
    residual_all = np.full(y_all.size, np.nan)
    residual_all[fitted] = residual
    return GaussianFit(
        components=components, model=model_all * unit, residuals=residual_all * unit,
        reduced_chi2=reduced_chi2, rms=rms * unit, rms_from=rms_from, n_channels=int(x.size), dof=int(dof),
        parameters=params, covariance=covariance, axis=x_axis, fitted=fitted, baseline=baseline,
        hyperfine=solution, channel_correlation=correlation, rest_frequency=rest_frequency, z=z,
        convention=convention,
    )


def _given_guesses(guesses, n_components, unit, x_unit):
    rows = list(guesses)
    if len(rows) != n_components:
        raise FitError(f"guesses has {len(rows)} entries for n_components={n_components}; give one "
                       "(amplitude, center, fwhm) per component")
    out = []
    for amplitude, center, fwhm in rows:
        try:
            out.append([u.Quantity(amplitude).to_value(unit), u.Quantity(center).to_value(x_unit, u.spectral()),
                        u.Quantity(fwhm).to_value(x_unit)])
        except u.UnitsError:
            raise FitError(f"guesses must be (amplitude [{unit}], center [{x_unit}], fwhm [{x_unit}]); got "
                           f"{(amplitude, center, fwhm)}") from None
    return np.array(out, dtype=float).ravel()


def _gaussian_results(params, covariance, errors, unit, x_unit):
    components = []
    for k in range(params.size // 3):
        amplitude, center, width = params[3 * k: 3 * k + 3]
        flux = amplitude * width * _AREA_PER_PEAK_WIDTH
        block = covariance[3 * k: 3 * k + 3, 3 * k: 3 * k + 3]
        gradient = np.array([width, 0.0, amplitude]) * _AREA_PER_PEAK_WIDTH
        flux_error = float(np.sqrt(max(gradient @ block @ gradient, 0.0)))
        components.append(GaussianComponent(
            amplitude=amplitude * unit, center=center * x_unit, fwhm=width * x_unit, flux=flux * unit * x_unit,
            amplitude_error=errors[3 * k] * unit, center_error=errors[3 * k + 1] * x_unit,
            fwhm_error=errors[3 * k + 2] * x_unit, flux_error=flux_error * unit * x_unit))
    return tuple(sorted(components, key=lambda c: c.center.value))


def _solve_hyperfine(model, jacobian, x, y, offsets, weights, step, guesses, unit):
    """Fit [A, v0, W, tau] from a few starting optical depths; keep the best (the problem has local minima)."""
    sign = 1.0 if np.sum(y) >= 0 else -1.0
    if guesses is not None:
        rows = list(guesses)
        amplitude, center, width = rows[0][:3]
        tau_starts = [float(rows[0][3])] if len(rows[0]) > 3 else [0.1, 1.0, 5.0]
        v0 = u.Quantity(center).to_value(_KMS)
        width = u.Quantity(width).to_value(_KMS)
        peak = u.Quantity(amplitude).to_value(unit)
    else:
        # Systemic velocity: the shift that best matches the optically thin template (a cross-correlation).
        candidates = x
        width = max(3 * step, 1e-3)
        scores = [np.dot(y * sign, np.exp(-_FOUR_LN2 * (x[:, None] - c - offsets) ** 2 / width**2) @ weights)
                  for c in candidates]
        v0 = float(candidates[int(np.argmax(scores))])
        peak = sign * np.max(sign * y)
        tau_starts = [0.1, 1.0, 5.0]
    lower = np.array([0.0 if sign > 0 else -np.inf, x.min() - np.ptp(offsets), step / 2, OPTICAL_DEPTH_LIMITS[0]])
    upper = np.array([np.inf if sign > 0 else 0.0, x.max() + np.ptp(offsets), 2 * np.ptp(x), OPTICAL_DEPTH_LIMITS[1]])
    best = None
    for tau in tau_starts:
        thin_peak = -np.expm1(-tau * np.max(weights))
        p0 = np.array([peak / max(thin_peak, 1e-6), v0, width, tau])
        result = _solve(model, jacobian, x, y, p0, (lower, upper))
        if best is None or (result.status > 0 and result.cost < best.cost):
            best = result
    return best


def _hyperfine_results(params, covariance, errors, model, x_all, unit, lines, reference, z, step):
    amplitude, v0, width, tau = params
    # The group's profile on a fine grid: its peak and its integral (the integrated intensity).
    offsets = lines["velocity_offset"].to_value(_KMS)
    grid = np.arange(offsets.min() + v0 - 3 * width, offsets.max() + v0 + 3 * width, min(width, step) / 20)

    def peak_and_flux(p):
        profile = model(grid, p)
        k = int(np.argmax(np.abs(profile)))
        return profile[k], np.trapezoid(profile, grid)

    peak, flux = peak_and_flux(params)
    gradients = np.zeros((2, 4))
    for i in range(4):
        h = 1e-6 * max(abs(params[i]), 1e-3)
        shifted = params.copy()
        shifted[i] += h
        gradients[:, i] = (np.array(peak_and_flux(shifted)) - np.array([peak, flux])) / h
    peak_error, flux_error = np.sqrt(np.clip(np.diag(gradients @ covariance @ gradients.T), 0, None))
    component = GaussianComponent(
        amplitude=peak * unit, center=v0 * _KMS, fwhm=width * _KMS, flux=flux * unit * _KMS,
        amplitude_error=peak_error * unit, center_error=errors[1] * _KMS, fwhm_error=errors[2] * _KMS,
        flux_error=flux_error * unit * _KMS)
    tex = tex_error = None
    if unit.is_equivalent(u.K):
        tex_value, derivative = excitation_temperature(u.Quantity(amplitude, unit).to_value(u.K),
                                                        u.Quantity(reference, u.GHz), z)
        tex = tex_value * u.K
        tex_error = abs(derivative) * u.Quantity(errors[0], unit).to_value(u.K) * u.K
    solution = HyperfineSolution(
        group=lines.meta.get("group", ""), optical_depth=float(tau), optical_depth_error=float(errors[3]),
        amplitude=amplitude * unit, amplitude_error=errors[0] * unit, excitation_temperature=tex,
        excitation_temperature_error=tex_error, center=v0 * _KMS, center_error=errors[1] * _KMS,
        fwhm=width * _KMS, fwhm_error=errors[2] * _KMS, lines=lines, reference_frequency=u.Quantity(reference, u.GHz))
    return (component,), solution
