"""Measuring one spectral line: integrated flux with its error, centroid, FWHM, peak, S/N.

Formulas (after the optional polynomial baseline is subtracted; ``y_i`` the
spectrum, ``v_i`` the channel velocities, ``dv_i`` the channel widths, the sums
running over the channels in the window):

* channel width ``dv_i = |v_(i+1) - v_(i-1)| / 2`` (one-sided at the band
  edges), from the actual velocity axis, so it is right for any convention and
  for axes that are not linear in velocity;
* integrated flux ``F = sum y_i dv_i`` (moment 0; e.g. Wilson, Rohlfs &
  Huettemeister, *Tools of Radio Astronomy*, 6th ed.);
* its 1-sigma error by linear propagation of white noise of rms ``sigma``
  through the whole measurement, baseline included: ``F = W @ y_raw`` for a
  weight vector ``W`` (`BaselineBasis.corrected_weights`), hence
  ``var(F) = sigma**2 * sum W_i**2`` (Bevington & Robinson, *Data Reduction
  and Error Analysis*, 3rd ed., eq. 3.13). Without a baseline this reduces to
  the familiar ``sigma * dv * sqrt(N)`` for equal channels;
* intensity-weighted centroid ``v_c = sum v_i y_i dv_i / F`` (moment 1), with
  its error from the same propagation of the linearised ratio;
* FWHM ``= 2 sqrt(2 ln 2) s`` of a Gaussian ``A exp(-(v - v0)^2 / (2 s^2))``
  fitted by least squares (`scipy.optimize.curve_fit`, channel errors
  ``sigma``); its error scales ``s``'s from the fit covariance;
* S/N ``= F / sigma_F``.

Examples
--------
>>> import astropy.units as u
>>> from regions import CirclePixelRegion, PixCoord
>>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
>>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
>>> line = measure_line(spec, window=(1220, 1710) * u.km / u.s,
...                     line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s, order=0,
...                     rest_frequency=230.538 * u.GHz)
>>> print(f"{line.flux:.1f} +/- {line.flux_error:.1f}")
62.4 Jy km / s +/- 3.9 Jy km / s
"""

import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .baseline import BaselineFit, CachedAxis, as_spectrum, fit_baseline, line_free_mask
from .cubes import check_total_intensity
from .errors import BlankedDataWarning, FitError, UndefinedErrorWarning
from .polybaseline import check_order
from .spectral import axis_in, check_convention, check_redshift, check_rest_frequency
from .windows import line_free_outside_window, window_channels

__all__ = ["LineMeasurement", "measure_line", "FWHM_PER_SIGMA"]

# FWHM of a Gaussian in units of its standard deviation, 2 sqrt(2 ln 2) = 2.3548...
FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))

_KMS = u.km / u.s


@dataclass(frozen=True, eq=False)
class LineMeasurement:
    """The measured properties of one spectral line.

    Attributes
    ----------
    flux, flux_error : Quantity [spectrum unit * km/s]
        Integrated flux and its 1-sigma uncertainty (Jy km/s or K km/s).
    centroid, centroid_error : Quantity [km/s]
        Intensity-weighted mean velocity and its 1-sigma uncertainty.
    fwhm, fwhm_error : Quantity [km/s]
        From the Gaussian fit; NaN when the fit failed (see ``gaussian_ok``).
    peak : Quantity [spectrum unit]
        The extreme channel value in the window with the sign of the flux
        (the maximum for emission, the minimum for absorption).
    snr : float
        ``flux / flux_error``.
    rms : Quantity [spectrum unit]
        Channel noise: the baseline residual rms, or without ``line_free`` the
        rms of the channels outside the window.
    n_channels : int
        Valid channels in the window.
    channel_width : Quantity [km/s]
        Median channel width in the window.
    window : Quantity
        The window as given.
    baseline : BaselineFit or None
    gaussian_amplitude, gaussian_center, gaussian_sigma : Quantity
        The Gaussian fit parameters (NaN when the fit failed), with
        ``gaussian_amplitude_error``, ``gaussian_center_error``, ``gaussian_sigma_error``.
    gaussian_ok : bool
        Whether the Gaussian fit converged with a finite covariance.
    gaussian_message : str
        Why the fit failed, or ``""``.
    rest_frequency, z, convention
        The velocity frame the numbers refer to.
    """

    flux: u.Quantity
    flux_error: u.Quantity
    centroid: u.Quantity
    centroid_error: u.Quantity
    fwhm: u.Quantity
    fwhm_error: u.Quantity
    peak: u.Quantity
    snr: float
    rms: u.Quantity
    n_channels: int
    channel_width: u.Quantity
    window: u.Quantity
    baseline: BaselineFit | None
    gaussian_amplitude: u.Quantity
    gaussian_amplitude_error: u.Quantity
    gaussian_center: u.Quantity
    gaussian_center_error: u.Quantity
    gaussian_sigma: u.Quantity
    gaussian_sigma_error: u.Quantity
    gaussian_ok: bool
    gaussian_message: str
    rest_frequency: u.Quantity | None
    z: float
    convention: str

    def summary(self):
        """The measurement as a few lines of text.

        Examples
        --------
        >>> from regions import CirclePixelRegion, PixCoord
        >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
        >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
        >>> line = measure_line(spec, (1220, 1710) * u.km / u.s, line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s,
        ...                     order=0, rest_frequency=230.538 * u.GHz)
        >>> print(line.summary())  # doctest: +ELLIPSIS
        flux      62.41 +/- 3.9 Jy km / s  (S/N 16.1)
        ...
        """
        fwhm = ("not measured: " + self.gaussian_message) if not self.gaussian_ok else \
            f"{self.fwhm.value:.4g} +/- {self.fwhm_error.value:.2g} {self.fwhm.unit}"
        return "\n".join([
            f"flux      {self.flux.value:.4g} +/- {self.flux_error.value:.2g} {self.flux.unit}  (S/N {self.snr:.3g})",
            f"centroid  {self.centroid.value:.4g} +/- {self.centroid_error.value:.2g} {self.centroid.unit}",
            f"FWHM      {fwhm}",
            f"peak      {self.peak.value:.4g} {self.peak.unit}   rms {self.rms.value:.3g} {self.rms.unit}",
            f"channels  {self.n_channels} of {self.channel_width.value:.3g} {self.channel_width.unit}",
        ])


def _gaussian(v, amplitude, center, sigma):
    return amplitude * np.exp(-0.5 * ((v - center) / sigma) ** 2)


def _gaussian_jacobian(v, amplitude, center, sigma):
    shape = np.exp(-0.5 * ((v - center) / sigma) ** 2)
    return np.column_stack([
        shape,
        amplitude * shape * (v - center) / sigma**2,
        amplitude * shape * (v - center) ** 2 / sigma**3,
    ])


# From the moment-based guess, a Gaussian on a line converges in 6-12 evaluations of the model and
# its Jacobian (demo disk; the CARMA CO cube of ../shared/real-cubes); on noise alone, or on a profile no single
# Gaussian fits, it wanders (its centre leaves the window) and used up 5 000 evaluations, 140 ms, each
# time the line window moved in the suite, to be rejected in the end all the same (issue #20).
_MAX_EVALUATIONS = 200


def _fit_gaussian(v, y, rms, guess):
    """Least-squares Gaussian; returns (params, errors, ok, message) in plain floats.

    The parameter covariance is ``rms**2 (J^T J)^-1`` with the analytic
    Jacobian ``J`` at the solution (Press et al., *Numerical Recipes*, 3rd ed.,
    section 15.5), computed here rather than taken from curve_fit, which
    reports an infinite covariance for near-perfect fits. Without a finite
    ``rms`` the residual variance with ``n - 3`` degrees of freedom is used.
    """
    from scipy.optimize import OptimizeWarning, curve_fit

    nan3 = np.full(3, np.nan)
    if v.size < 4:
        return nan3, nan3, False, f"{v.size} channels in the window; a Gaussian fit needs at least 4"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", OptimizeWarning)  # covariance is computed below
            warnings.simplefilter("ignore", RuntimeWarning)
            params, _ = curve_fit(_gaussian, v, y, p0=guess, jac=_gaussian_jacobian, maxfev=_MAX_EVALUATIONS)
    except RuntimeError:
        return nan3, nan3, False, (f"the Gaussian fit did not settle within {_MAX_EVALUATIONS} evaluations "
                                   "(no clear single line in the window?)")
    except ValueError as exc:
        return nan3, nan3, False, f"the Gaussian fit did not converge ({exc})"
    params = np.array(params, dtype=float)
    params[2] = abs(params[2])
    if not np.all(np.isfinite(params)) or params[2] == 0:
        return nan3, nan3, False, "the Gaussian fit gave no finite parameters (no line in the window?)"
    if not v.min() <= params[1] <= v.max():
        return nan3, nan3, False, f"the fitted centre {params[1]:.4g} km/s lies outside the window"
    noise_variance = rms**2 if np.isfinite(rms) and rms > 0 else \
        np.sum((y - _gaussian(v, *params)) ** 2) / (v.size - 3)
    jacobian = _gaussian_jacobian(v, *params)
    normal = jacobian.T @ jacobian
    if not np.all(np.isfinite(normal)) or np.linalg.cond(normal) > 1e14:
        return nan3, nan3, False, "the Gaussian fit is degenerate (no line in the window, or too few channels)"
    errors = np.sqrt(np.diag(np.linalg.inv(normal)) * noise_variance)
    return params, errors, True, ""


def measure_line(spectrum, window, *, line_free=None, order=1, rest_frequency=None, z=0.0,
                 convention="radio", spectral_axis=None, allow_polarisation=False):
    """Measure the integrated flux, centroid, FWHM, peak and S/N of a line.

    See the module docstring for the formulas and their sources.

    Parameters
    ----------
    spectrum : OneDSpectrum or Quantity
        E.g. from `region_spectrum`; a plain Quantity needs ``spectral_axis=``.
    window : Quantity, shape (2,) or (n, 2)
        The channels of the line, in any spectral unit.
    line_free : Quantity or ndarray of bool, optional
        Line-free ranges for a polynomial baseline of ``order`` (channels in
        the window are never used for it). Without them no baseline is
        subtracted and the noise is the rms of the channels outside the window.
    order : int
        Baseline order, 0 to 5.
    rest_frequency : Quantity [frequency], optional
        The line's rest frequency; velocities are offsets from
        ``rest_frequency / (1 + z)``. Without it the spectrum's own velocity
        axis (or its header RESTFRQ) is used.
    z : float
    convention : {'radio', 'optical', 'relativistic'}
    spectral_axis : Quantity, optional
        Axis of a plain-Quantity ``spectrum``.
    allow_polarisation : bool
        Measure a spectrum of a lone polarisation plane (Stokes Q, U, V, ...)
        anyway; by default it is refused (see `check_total_intensity`).

    Returns
    -------
    LineMeasurement

    Raises
    ------
    SpectralRangeError
        Window or line-free range wholly outside the band, or too few
        line-free channels outside the window.
    FitError
        Bad order, or a window holding only blanked channels.
    UnitMismatchError
        ``rest_frequency`` not a frequency, or ranges not spectral.
    SpectralAxisError
        No way to express the axis as velocity (no rest frequency anywhere).
    PolarisationError
        ``spectrum`` comes from a cube holding one Stokes plane other than I
        (its ``meta`` says so), unless ``allow_polarisation`` is True.

    Warns
    -----
    BlankedDataWarning
        Some channels in the window are NaN and were left out.
    WindowClippedWarning
        The window reaches beyond the band; only its part inside is used.
    LineFreeOverlapWarning
        Line-free channels inside the window are left out of the baseline
        fit (`moment_maps` does the same; see `cubeloupe.analysis.windows`).
    UndefinedErrorWarning
        The noise cannot be measured (no valid channel outside the window and
        no ``line_free``) or is exactly 0: the errors and S/N are NaN or 0.

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
    >>> line = measure_line(spec, (1220, 1710) * u.km / u.s, line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s,
    ...                     order=0, rest_frequency=230.538 * u.GHz)
    >>> round(line.centroid.to_value(u.km / u.s)), round(line.snr)
    (1464, 16)
    """
    check_total_intensity(spectrum, allow_polarisation=allow_polarisation, what="a line flux")
    order = check_order(order)
    check_convention(convention)
    z = check_redshift(z)
    if rest_frequency is not None:
        rest_frequency = check_rest_frequency(rest_frequency, func="measure_line")
    spectrum = as_spectrum(spectrum, spectral_axis)
    frame = dict(rest_frequency=rest_frequency, z=z, convention=convention)
    axis_source = CachedAxis(spectrum)
    in_window = window_channels(axis_source, window, **frame)
    v = axis_in(axis_source, _KMS, **frame).to_value(_KMS)
    values = u.Quantity(spectrum)
    unit = values.unit
    y = np.asarray(values.value, dtype=float)
    finite = np.isfinite(y)
    used = in_window & finite
    if not used.any():
        raise FitError(
            f"the window {window} holds only blanked (NaN) channels; choose a window on valid data"
        )
    if (in_window & ~finite).any():
        warnings.warn(
            f"{int((in_window & ~finite).sum())} of the {int(in_window.sum())} channels in the window "
            f"{window} are blanked (NaN) and were left out of the flux",
            BlankedDataWarning,
            stacklevel=2,
        )
    widths = np.abs(np.gradient(v))
    filled = np.where(finite, y, 0.0)

    baseline = None
    if line_free is not None:
        free_mask = line_free_mask(axis_source, line_free, rest_frequency, z, convention)
        free_mask = line_free_outside_window(free_mask, in_window, line_free=line_free, window=window,
                                             min_channels=order + 2)
        baseline = fit_baseline(spectrum, free_mask, order, **frame)
        signal = np.where(finite, baseline.subtracted.value, 0.0)
        rms = baseline.rms.to_value(unit)

        def propagate(weights):
            return baseline.basis.corrected_weights(weights)[0]
    else:
        signal = filled
        outside = finite & ~in_window
        rms = float(np.sqrt(np.mean(filled[outside] ** 2))) if outside.any() else np.nan
        if not outside.any():
            warnings.warn(
                f"no valid channel lies outside the window {window}, so the noise cannot be measured: "
                "rms, flux_error, centroid_error and snr are NaN (the flux, centroid and peak are measured; "
                "the FWHM error comes from the fit's residuals). Pass line_free ranges, or a window that "
                "leaves channels outside it",
                UndefinedErrorWarning,
                stacklevel=2,
            )

        def propagate(weights):
            return weights

    flux_weights = np.where(used, widths, 0.0)
    flux = float(flux_weights @ signal)
    flux_error = rms * float(np.sqrt(np.sum(propagate(flux_weights) ** 2)))

    with np.errstate(invalid="ignore", divide="ignore"):
        centroid = float((flux_weights * v) @ signal / flux)
        centroid_weights = flux_weights * (v - centroid) / flux
    centroid_error = rms * float(np.sqrt(np.sum(propagate(centroid_weights) ** 2))) if flux else np.nan

    window_signal = signal[used]
    peak = float(window_signal.max() if flux >= 0 else window_signal.min())
    v_window = v[used]
    center_guess = centroid if np.isfinite(centroid) and v_window.min() <= centroid <= v_window.max() \
        else float(v_window[np.argmax(np.abs(window_signal))])
    width_guess = abs(flux) / (abs(peak) * np.sqrt(2 * np.pi)) if peak else np.median(widths[used])
    width_guess = float(np.clip(width_guess, np.median(widths[used]), np.ptp(v_window) or 1.0))
    params, errors, ok, message = _fit_gaussian(v_window, window_signal, rms, [peak, center_guess, width_guess])

    if rms == 0:
        warnings.warn(
            f"the noise outside the window {window} is exactly 0 (constant or all-zero data), so the "
            "uncertainties are 0 and snr is NaN; check that the spectrum holds measured data",
            UndefinedErrorWarning,
            stacklevel=2,
        )
    snr = flux / flux_error if flux_error > 0 else np.nan
    return LineMeasurement(
        flux=flux * unit * _KMS,
        flux_error=flux_error * unit * _KMS,
        centroid=centroid * _KMS,
        centroid_error=centroid_error * _KMS,
        fwhm=FWHM_PER_SIGMA * params[2] * _KMS,
        fwhm_error=FWHM_PER_SIGMA * errors[2] * _KMS,
        peak=peak * unit,
        snr=float(snr),
        rms=rms * unit,
        n_channels=int(used.sum()),
        channel_width=float(np.median(widths[used])) * _KMS,
        window=window,
        baseline=baseline,
        gaussian_amplitude=params[0] * unit,
        gaussian_amplitude_error=errors[0] * unit,
        gaussian_center=params[1] * _KMS,
        gaussian_center_error=errors[1] * _KMS,
        gaussian_sigma=params[2] * _KMS,
        gaussian_sigma_error=errors[2] * _KMS,
        gaussian_ok=ok,
        gaussian_message=message,
        rest_frequency=rest_frequency,
        z=z,
        convention=convention,
    )
