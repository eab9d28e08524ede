"""Smoothing and binning spectra, and the channel-to-channel noise correlation they create.

`smooth_spectrum` convolves a spectrum with a normalised kernel, keeping its
channel grid, or averages ``n`` neighbouring channels into one (rebinning):

* ``"hanning"`` ``n`` (odd, >= 3): the weights ``sin^2(pi k / (n + 1))``,
  ``k = 1..n``, normalised; for ``n = 3`` the classic ``[1/4, 1/2, 1/4]``
  (Blackman & Tukey 1958, *The Measurement of Power Spectra*; the smoothing
  correlators apply online, common practice);
* ``"boxcar"`` ``n``: equal weights over ``n`` channels (astropy's
  `~astropy.convolution.Box1DKernel`);
* ``"gaussian"`` ``fwhm``: a Gaussian of that full width at half maximum, in
  channels or as a spectral Quantity (astropy's
  `~astropy.convolution.Gaussian1DKernel`, ``stddev = fwhm / (2 sqrt(2 ln 2))``);
* ``"rebin"`` ``n``: the mean of each run of ``n`` channels, on a grid ``n``
  times coarser (trailing channels that do not fill a run are dropped).

Noise correlation. Smoothing white noise of rms ``sigma`` with a kernel ``h``
(``sum h = 1``) leaves channel noise ``sigma sqrt(sum h_k^2)`` (for Hanning-3,
``sqrt(3/8)`` = 0.61) and makes neighbouring channels correlated, with
autocorrelation ``rho(m) = sum_k h_k h_(k+m) / sum_k h_k^2`` (e.g. Press et
al., *Numerical Recipes*, 3rd ed., section 13.2; for ALMA's Hanning-smoothed
channels the ALMA Technical Handbook, section on spectral resolution, gives
the same). The smoothed spectrum carries ``rho`` in
``meta["channel_correlation"]`` (lags 0, 1, 2, ...; ``rho(0) = 1``) so that
errors can account for it:

* any linear measurement ``F = sum_i w_i y_i`` (an integrated flux, a
  baseline-corrected sum, see `measure_line`) has
  ``var(F) = sigma'^2 sum_ij w_i w_j rho(|i - j|)``, with ``sigma'`` the rms
  measured on the smoothed spectrum; `correlated_error` evaluates this
  exactly;
* for an unweighted sum over ``N`` channels this is the white-noise error
  times `noise_correlation_factor` ``sqrt(sum_m (1 - |m| / N) rho(m))``; so
  the ``flux_error`` that `measure_line` reports for a smoothed spectrum
  (computed as if channels were independent) is corrected by multiplying it
  with ``noise_correlation_factor(smoothed, n_channels=line.n_channels)``
  (exact without a baseline; the baseline's share of the error is small
  when the line-free ranges are wide);
* `fit_gaussians` uses the full correlation in its parameter covariance.

A delivered spectrum that is already Hanning-smoothed (as many correlators do
online) is declared with `with_channel_correlation`; further smoothing then
compounds the two.

Examples
--------
>>> import astropy.units as u
>>> import numpy as np
>>> spec = as_spectrum(np.r_[np.zeros(5), 4.0, np.zeros(5)] * u.K, spectral_axis=np.arange(11) * u.km / u.s)
>>> smooth_spectrum(spec, "hanning", 3).value[4:7].round(12).tolist()
[1.0, 2.0, 1.0]
"""

import numbers

import astropy.units as u
import numpy as np
from astropy.convolution import Box1DKernel, Gaussian1DKernel, convolve

from .baseline import as_spectrum
from .errors import FitError, SpectralAxisError, UnitMismatchError
from .spectral import axis_in

__all__ = [
    "SMOOTHING_KERNELS",
    "smooth_spectrum",
    "smoothing_kernel",
    "channel_correlation",
    "with_channel_correlation",
    "noise_correlation_factor",
    "correlated_error",
]

SMOOTHING_KERNELS = ("hanning", "boxcar", "gaussian", "rebin")

# FWHM of a Gaussian in units of its standard deviation, 2 sqrt(2 ln 2).
_FWHM_PER_SIGMA = 2.0 * np.sqrt(2.0 * np.log(2.0))


def _check_width(kind, width):
    if kind == "gaussian":
        return width
    if isinstance(width, u.Quantity) or not isinstance(width, numbers.Integral) or isinstance(width, bool):
        raise FitError(f"{kind!r} takes a whole number of channels; got {width!r}. Pass e.g. smooth_spectrum(spec, "
                       f"{kind!r}, 3)")
    width = int(width)
    if kind == "hanning" and (width < 3 or width % 2 == 0):
        raise FitError(f"a Hanning kernel needs an odd number of channels >= 3; got {width}")
    if width < 1 or (kind == "rebin" and width < 2):
        raise FitError(f"{kind!r} needs at least {2 if kind == 'rebin' else 1} channels; got {width}")
    return width


def _gaussian_fwhm_channels(spectrum, fwhm, rest_frequency, z, convention):
    """A Gaussian FWHM in channels: plain numbers are channels; Quantities use the mean channel width."""
    if not isinstance(fwhm, u.Quantity):
        value = float(fwhm)
    else:
        try:
            axis = axis_in(spectrum, fwhm.unit, rest_frequency=rest_frequency, z=z, convention=convention)
        except UnitMismatchError:
            raise UnitMismatchError(
                f"a Gaussian FWHM must be a number of channels or a spectral width (km/s, MHz); got {fwhm}"
            ) from None
        step = abs(float(np.mean(np.diff(axis.to_value(fwhm.unit)))))
        value = fwhm.value / step
    if not np.isfinite(value) or value <= 0:
        raise FitError(f"a Gaussian FWHM must be positive; got {fwhm!r}")
    return value


def smoothing_kernel(kind, width):
    """The normalised weights of a smoothing kernel of `SMOOTHING_KERNELS` (``width`` in channels).

    Examples
    --------
    >>> smoothing_kernel("hanning", 3).round(12).tolist()
    [0.25, 0.5, 0.25]
    >>> smoothing_kernel("boxcar", 4).round(3).tolist()
    [0.125, 0.25, 0.25, 0.25, 0.125]
    """
    if kind == "hanning":
        width = _check_width(kind, width)
        k = np.arange(1, width + 1)
        weights = np.sin(np.pi * k / (width + 1)) ** 2
    elif kind == "boxcar":
        weights = np.asarray(Box1DKernel(_check_width(kind, width)).array, dtype=float)
    elif kind == "gaussian":
        weights = np.asarray(Gaussian1DKernel(float(width) / _FWHM_PER_SIGMA).array, dtype=float)
    else:
        raise FitError(f"unknown smoothing kernel {kind!r}; choose from {list(SMOOTHING_KERNELS)}")
    return weights / weights.sum()


def _autocovariance_of_kernel(weights):
    """Autocovariance (lags 0..) of unit white noise smoothed by ``weights``."""
    full = np.correlate(weights, weights, mode="full")
    return full[weights.size - 1:]


def _symmetric(lags):
    """Lags 0..K as the symmetric sequence -K..K."""
    return np.concatenate([lags[:0:-1], lags])


def channel_correlation(spectrum):
    """The noise autocorrelation between channels of ``spectrum``, lags 0, 1, 2, ... (``[1.0]`` if none).

    Read from ``meta["channel_correlation"]`` (set by `smooth_spectrum` and
    `with_channel_correlation`).

    Examples
    --------
    >>> spec = as_spectrum(np.zeros(20) * u.K, spectral_axis=np.arange(20) * u.km / u.s)
    >>> channel_correlation(smooth_spectrum(spec, "hanning", 3)).round(4).tolist()
    [1.0, 0.6667, 0.1667]
    """
    meta = getattr(spectrum, "meta", None) or {}
    rho = meta.get("channel_correlation")
    return np.array([1.0]) if rho is None else np.asarray(rho, dtype=float)


def _with_meta(spectrum, values, unit, meta, wcs=None):
    """A OneDSpectrum like ``spectrum`` (beam, mask) with new values and meta, on ``wcs`` if given."""
    from spectral_cube.lower_dimensional_structures import OneDSpectrum

    if wcs is None:
        return spectrum._new_spectrum_with(data=np.asarray(values), unit=unit, meta=meta)
    return OneDSpectrum(np.asarray(values), unit=unit, wcs=wcs, meta=meta, beam=getattr(spectrum, "_beam", None))


def with_channel_correlation(spectrum, kind, width, *, spectral_axis=None):
    """Declare that ``spectrum`` was already smoothed with a kernel (e.g. online Hanning), without smoothing it.

    Parameters
    ----------
    spectrum : OneDSpectrum or Quantity
    kind : {'hanning', 'boxcar', 'gaussian'}
    width : int or float
        In channels.
    spectral_axis : Quantity, optional
        For a plain Quantity.

    Returns
    -------
    OneDSpectrum
        The same values, with ``meta["channel_correlation"]``.

    Examples
    --------
    >>> spec = as_spectrum(np.zeros(8) * u.Jy, spectral_axis=np.arange(8) * u.GHz)
    >>> round(noise_correlation_factor(with_channel_correlation(spec, "hanning", 3)), 4)
    1.633
    """
    spectrum = as_spectrum(spectrum, spectral_axis)
    cov = _autocovariance_of_kernel(smoothing_kernel(kind, width))
    meta = dict(getattr(spectrum, "meta", {}) or {})
    meta["channel_correlation"] = cov / cov[0]
    meta["smoothing"] = list(meta.get("smoothing", [])) + [f"declared {kind} {width} (not applied)"]
    values = u.Quantity(spectrum)
    return _with_meta(spectrum, values.value, values.unit, meta)


def _rebinned_wcs(wcs, n):
    """The 1-D spectral WCS of channels averaged ``n`` at a time.

    astropy's WCS slicing with a step treats pixels as bins, so new channel j
    sits at the centre of old channels j*n .. j*n+n-1 (checked in the tests).
    """
    return wcs.slice((slice(None, None, n),))


def smooth_spectrum(spectrum, kernel, width, *, rest_frequency=None, z=0.0, convention="radio",
                    spectral_axis=None):
    """Smooth a spectrum on its own channel grid (Hanning, boxcar, Gaussian) or rebin it by ``n`` channels.

    Parameters
    ----------
    spectrum : OneDSpectrum or Quantity
        E.g. from `region_spectrum`; a plain Quantity needs ``spectral_axis=``.
    kernel : {'hanning', 'boxcar', 'gaussian', 'rebin'}
        See the module docstring for each kernel's weights and source.
    width : int, float or Quantity
        Channels for 'hanning' (odd), 'boxcar' and 'rebin'; the FWHM for
        'gaussian', in channels or as a spectral width (e.g. ``20 * u.km / u.s``).
    rest_frequency, z, convention
        Only to turn a Gaussian FWHM in km/s into channels of a frequency axis.
    spectral_axis : Quantity, optional

    Returns
    -------
    OneDSpectrum
        With the same unit. ``meta["channel_correlation"]`` is the noise
        autocorrelation between output channels (lags 0, 1, ...), compounded
        with any the input carried, ``meta["noise_scale"]`` the factor by
        which the rms of white input noise changes (``sqrt(3/8)`` for
        Hanning-3, ``1/sqrt(n)`` for rebinning), and ``meta["smoothing"]`` a
        description list. Convolution keeps the channel grid; NaN channels are
        filled from their neighbours' weights and stay NaN, and edge channels
        use the weights inside the band (astropy's ``convolve`` with
        ``nan_treatment='interpolate'``). Rebinning gives the mean of each run
        of channels (NaN left out) on a coarser grid.

    Raises
    ------
    FitError
        Unknown kernel or a width that is not allowed for it (the message says which).
    SpectralAxisError
        A rebinning factor larger than the spectrum.

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
    >>> smooth = smooth_spectrum(spec, "hanning", 3)
    >>> smooth.shape == spec.shape, round(smooth.meta["noise_scale"] ** 2, 4)
    (True, 0.375)
    >>> smooth_spectrum(spec, "rebin", 4).shape
    (25,)
    """
    if kernel not in SMOOTHING_KERNELS:
        raise FitError(f"unknown smoothing kernel {kernel!r}; choose from {list(SMOOTHING_KERNELS)}")
    spectrum = as_spectrum(spectrum, spectral_axis)
    values = u.Quantity(spectrum)
    y = np.asarray(values.value, dtype=float)
    rho_in = channel_correlation(spectrum)
    meta = dict(getattr(spectrum, "meta", {}) or {})
    history = list(meta.get("smoothing", []))

    if kernel == "rebin":
        n = _check_width(kernel, width)
        n_out = y.size // n
        if n_out < 1:
            raise SpectralAxisError(f"cannot rebin {y.size} channels by {n}; choose a factor <= {y.size}")
        runs = y[:n_out * n].reshape(n_out, n)
        counts = np.isfinite(runs).sum(axis=1)
        with np.errstate(invalid="ignore", divide="ignore"):
            smoothed = np.where(counts > 0, np.nansum(runs, axis=1) / counts, np.nan)
        # Autocovariance of run means: c'(m) = n^-2 sum_d (n - |d|) c(m n + d).
        c_in = _symmetric(rho_in)
        k_max = rho_in.size - 1
        n_lags = k_max // n + 2
        lags = np.zeros(n_lags)
        for m in range(n_lags):
            for d in range(-(n - 1), n):
                lag = m * n + d
                if abs(lag) <= k_max:
                    lags[m] += (n - abs(d)) * c_in[lag + k_max]
        lags /= n**2
        lags = np.trim_zeros(lags, "b")
        noise_scale = np.sqrt(lags[0])
        meta["channel_correlation"] = lags / lags[0]
        meta["noise_scale"] = float(noise_scale * meta.get("noise_scale", 1.0))
        meta["smoothing"] = history + [f"rebin {n}"]
        return _with_meta(spectrum, smoothed, values.unit, meta, wcs=_rebinned_wcs(spectrum.wcs, n))

    if kernel == "gaussian":
        width = _gaussian_fwhm_channels(spectrum, width, rest_frequency, z, convention)
    weights = smoothing_kernel(kernel, width)
    smoothed = convolve(y, weights, boundary="fill", fill_value=np.nan, nan_treatment="interpolate",
                        preserve_nan=True, normalize_kernel=False)
    # Autocovariance after smoothing: the input's convolved with the kernel's autocorrelation.
    c_out = np.convolve(_symmetric(rho_in), _symmetric(_autocovariance_of_kernel(weights)))
    lags = c_out[c_out.size // 2:]
    lags = lags[: np.flatnonzero(lags > 1e-12 * lags[0]).max() + 1]
    meta["channel_correlation"] = lags / lags[0]
    meta["noise_scale"] = float(np.sqrt(lags[0]) * meta.get("noise_scale", 1.0))
    label = f"{width:.4g} channels FWHM" if kernel == "gaussian" else f"{width}"
    meta["smoothing"] = history + [f"{kernel} {label}"]
    return _with_meta(spectrum, smoothed, values.unit, meta)


def noise_correlation_factor(correlation, n_channels=None):
    """How much channel correlation inflates the error of an unweighted sum over channels.

    ``sqrt(sum_m (1 - |m| / N) rho(m))`` over lags ``-N < m < N``; for ``N``
    much larger than the kernel (the default, ``n_channels=None``)
    ``sqrt(sum_m rho(m))``, which for a kernel ``h`` is ``1 / sqrt(sum h^2)``
    (``sqrt(8/3)`` for Hanning-3). Multiply an error computed as if the
    channels were independent (with the rms measured on the smoothed
    spectrum) by this factor.

    Parameters
    ----------
    correlation : OneDSpectrum or array_like
        A spectrum (its `channel_correlation`) or the autocorrelation itself.
    n_channels : int, optional
        Channels in the sum.

    Returns
    -------
    float

    Examples
    --------
    >>> round(noise_correlation_factor([1.0, 2 / 3, 1 / 6]), 4)
    1.633
    >>> noise_correlation_factor([1.0, 0.5], n_channels=1)
    1.0
    """
    rho = channel_correlation(correlation) if hasattr(correlation, "spectral_axis") else \
        np.atleast_1d(np.asarray(correlation, dtype=float))
    lags = np.arange(rho.size)
    if n_channels is None:
        return float(np.sqrt(rho[0] + 2 * rho[1:].sum()))
    n = int(n_channels)
    if n < 1:
        raise FitError(f"n_channels must be at least 1; got {n_channels}")
    taper = np.clip(1.0 - lags / n, 0.0, None)
    return float(np.sqrt(rho[0] + 2 * (taper[1:] * rho[1:]).sum()))


def correlated_error(weights, rms, correlation):
    """The 1-sigma error of ``sum_i w_i y_i`` for channel noise ``rms`` with autocorrelation ``correlation``.

    ``sqrt(rms^2 sum_ij w_i w_j rho(|i - j|))`` (linear propagation with the
    noise covariance; Bevington & Robinson, *Data Reduction and Error
    Analysis*, 3rd ed., eq. 3.13 with covariance terms).

    Parameters
    ----------
    weights : array_like, shape (n_channels,)
    rms : float or Quantity
        Channel noise of the spectrum the weights apply to.
    correlation : OneDSpectrum or array_like
        Autocorrelation (lags 0, 1, ...), or a spectrum carrying one.

    Examples
    --------
    >>> print(round(correlated_error(np.ones(100), 1.0, [1.0, 2 / 3, 1 / 6]), 3))
    16.269
    """
    rho = channel_correlation(correlation) if hasattr(correlation, "spectral_axis") else \
        np.atleast_1d(np.asarray(correlation, dtype=float))
    w = np.asarray(weights, dtype=float)
    variance = rho[0] * np.dot(w, w)
    for m in range(1, min(rho.size, w.size)):
        variance += 2 * rho[m] * np.dot(w[:-m], w[m:])
    return np.sqrt(variance) * rms
