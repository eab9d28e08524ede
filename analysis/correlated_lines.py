"""Line measurements of smoothed spectra: errors that count the noise correlation between channels.

`measure_line` propagates the channel noise as if channels were independent.
On a smoothed spectrum (`smooth_spectrum`), or one delivered already
Hanning-smoothed (`with_channel_correlation`), neighbouring channels share
noise, and errors computed that way are too small (by up to
``sqrt(8/3)`` = 1.63 for Hanning-3 over a wide window). Here every error is
propagated again with the noise covariance ``C_ij = rms^2 rho(|i - j|)``,
``rho`` the spectrum's `channel_correlation`:

* the integrated flux and the intensity-weighted centroid are linear (or
  linearised) in the data, ``F = W @ y`` with ``W`` the baseline-corrected
  weights (`BaselineBasis.corrected_weights`), so
  ``var(F) = W^T C W`` (`correlated_error`; linear propagation with the
  covariance terms, Bevington & Robinson, *Data Reduction and Error
  Analysis*, 3rd ed., eq. 3.13);
* the Gaussian width's error is the least-squares sandwich
  ``(J^T J)^-1 J^T C J (J^T J)^-1`` (least squares with correlated errors;
  Bevington & Robinson, ch. 7), as `fit_gaussians` does;
* the S/N and L'_line error follow from the flux error (L'_line is linear
  in the flux).

`correlated_measurement_table` is `measurement_table` with these errors.

Examples
--------
>>> import astropy.units as u
>>> from regions import CirclePixelRegion, PixCoord
>>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum, smooth_spectrum, measure_line
>>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
>>> smooth = smooth_spectrum(spec, "hanning", 3)
>>> frame = dict(line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s, order=0, rest_frequency=230.538 * u.GHz)
>>> naive = measure_line(smooth, (1220, 1710) * u.km / u.s, **frame)
>>> honest = correlated_line_errors(naive, smooth)
>>> bool(honest.flux_error > naive.flux_error), bool(honest.flux == naive.flux)
(True, True)
"""

import dataclasses

import astropy.units as u
import numpy as np

from .baseline import CachedAxis
from .line_table import measurement_table
from .lines import FWHM_PER_SIGMA, measure_line
from .smoothing import channel_correlation, correlated_error
from .spectral import axis_in
from .windows import window_channels

__all__ = ["correlated_line_errors", "correlated_measurement_table"]

_KMS = u.km / u.s


def _noise_correlation_matrix(channels, rho):
    """``rho(|k_i - k_j|)`` for the channel indices ``channels`` (gaps from blanked channels kept)."""
    lag = np.abs(channels[:, None] - channels[None, :])
    out = np.zeros(lag.shape)
    near = lag < rho.size
    out[near] = rho[lag[near]]
    return out


def _width_error_ratio(v, params, correlation):
    """sigma(s) with correlated noise over sigma(s) with independent noise, for measure_line's Gaussian."""
    amplitude, center, sigma = params
    offset = v - center
    shape = np.exp(-0.5 * offset**2 / sigma**2)
    jac = np.column_stack([shape, amplitude * shape * offset / sigma**2, amplitude * shape * offset**2 / sigma**3])
    inverse_normal = np.linalg.inv(jac.T @ jac)
    sandwich = inverse_normal @ (jac.T @ correlation @ jac) @ inverse_normal
    return float(np.sqrt(sandwich[2, 2] / inverse_normal[2, 2]))


def correlated_line_errors(measurement, spectrum):
    """The errors of a `measure_line` result recomputed for the channel noise correlation of ``spectrum``.

    Parameters
    ----------
    measurement : LineMeasurement
        From ``measure_line(spectrum, ...)``, on this very spectrum.
    spectrum : OneDSpectrum
        Carrying ``meta["channel_correlation"]`` (set by `smooth_spectrum` or
        `with_channel_correlation`); without one the measurement is returned as is.

    Returns
    -------
    LineMeasurement
        The same values with ``flux_error``, ``centroid_error``, ``fwhm_error``
        and ``snr`` for correlated noise (see the module docstring).

    Examples
    --------
    >>> import numpy as np
    >>> from cubeloupe.analysis import with_channel_correlation
    >>> v = np.arange(200.0) * u.km / u.s
    >>> y = np.random.default_rng(1).normal(0, 0.1, 200) * u.K
    >>> spec = with_channel_correlation(y, "hanning", 3, spectral_axis=v)
    >>> m = measure_line(spec, (50, 150) * u.km / u.s)
    >>> round(float(correlated_line_errors(m, spec).flux_error / m.flux_error), 2)  # sqrt(8/3) for a wide sum
    1.63
    """
    rho = channel_correlation(spectrum)
    if rho.size == 1:
        return measurement
    frame = dict(rest_frequency=measurement.rest_frequency, z=measurement.z, convention=measurement.convention)
    axis_source = CachedAxis(spectrum)
    in_window = window_channels(axis_source, measurement.window, **frame)
    v = axis_in(axis_source, _KMS, **frame).to_value(_KMS)
    y = np.asarray(u.Quantity(spectrum).value, dtype=float)
    used = in_window & np.isfinite(y)
    # The weights measure_line applies (see its module docstring): channel widths over the window.
    flux_weights = np.where(used, np.abs(np.gradient(v)), 0.0)
    flux = measurement.flux.value
    centroid_weights = flux_weights * (v - measurement.centroid.to_value(_KMS)) / flux if flux else None
    baseline = measurement.baseline
    stacked = np.vstack([flux_weights, flux_weights if centroid_weights is None else centroid_weights])
    if baseline is not None:
        stacked = baseline.basis.corrected_weights(stacked)
    rms = measurement.rms.value
    flux_error = float(correlated_error(stacked[0], rms, rho))
    centroid_error = float(correlated_error(stacked[1], rms, rho)) if centroid_weights is not None else np.nan
    fwhm_error = measurement.fwhm_error
    if measurement.gaussian_ok:
        params = (measurement.gaussian_amplitude.value, measurement.gaussian_center.to_value(_KMS),
                  measurement.gaussian_sigma.to_value(_KMS))
        channels = np.flatnonzero(used)
        ratio = _width_error_ratio(v[used], params, _noise_correlation_matrix(channels, rho))
        fwhm_error = measurement.fwhm_error * ratio
    snr = flux / flux_error if flux_error > 0 else np.nan
    return dataclasses.replace(
        measurement, flux_error=flux_error * measurement.flux_error.unit, centroid_error=centroid_error * _KMS,
        fwhm_error=fwhm_error, snr=float(snr))


def _spectrum_band(spectrum):
    f = spectrum.spectral_axis
    if not f.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
        return None
    f = f.to_value(u.GHz, equivalencies=u.spectral())
    return float(np.min(f)), float(np.max(f))


def _ranges_in_band(ranges, band):
    """The line-free ranges that overlap ``band`` (as `measurement_table` chooses them); all when unknown."""
    q = u.Quantity(ranges)
    if band is None or not q.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
        return q
    ghz = np.atleast_2d(q.to_value(u.GHz, equivalencies=u.spectral()))
    kept = [r for r in ghz if max(r) >= band[0] and min(r) <= band[1]]
    return u.Quantity(kept, u.GHz) if kept else None


def correlated_measurement_table(spectra, window, *, line_free=None, order=1, rest_frequency=None, z=0.0,
                                 convention="radio", line=None, cosmology=None, magnification=1.0):
    """`measurement_table` with errors that count each spectrum's channel noise correlation.

    Parameters and Returns are those of `measurement_table`. Rows of spectra
    that carry a `channel_correlation` get ``flux_error``, ``centroid_error``,
    ``fwhm_error``, ``snr`` and ``l_prime_error`` from
    `correlated_line_errors`; the others are unchanged. ``meta["smoothing"]``
    lists how each region's spectra were smoothed.

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
    >>> spec = region_spectrum(open_cube(demo_path("disk")), CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
    >>> table = correlated_measurement_table({"disk": [smooth_spectrum(spec, "hanning", 3)]},
    ...                                      (1220, 1710) * u.km / u.s, rest_frequency=230.538 * u.GHz,
    ...                                      line_free=[(1160, 1215), (1715, 1800)] * u.km / u.s, order=0)
    >>> table.meta["smoothing"]
    {'disk': ['hanning 3']}
    """
    kwargs = dict(line_free=line_free, order=order, rest_frequency=rest_frequency, z=z, convention=convention)
    table = measurement_table(spectra, window, line=line, cosmology=cosmology, magnification=magnification,
                              **kwargs)
    smoothing = {}
    for row in table:
        spectrum = spectra[str(row["region"])][int(row["window"])]
        history = (getattr(spectrum, "meta", None) or {}).get("smoothing")
        if history:
            smoothing[str(row["region"])] = list(history)
    if not smoothing:
        return table
    for index, row in enumerate(table):
        spectrum = spectra[str(row["region"])][int(row["window"])]
        if channel_correlation(spectrum).size == 1:
            continue
        free = None if line_free is None else _ranges_in_band(line_free, _spectrum_band(spectrum))
        naive = measure_line(spectrum, window, **dict(kwargs, line_free=free))
        honest = correlated_line_errors(naive, spectrum)
        scale = float(honest.flux_error / naive.flux_error) if naive.flux_error.value > 0 else np.nan
        table["flux_error"][index] = honest.flux_error.to(table["flux_error"].unit)
        table["centroid_error"][index] = honest.centroid_error.to(table["centroid_error"].unit)
        table["fwhm_error"][index] = honest.fwhm_error.to(table["fwhm_error"].unit)
        table["snr"][index] = honest.snr
        table["l_prime_error"][index] = row["l_prime_error"] * scale
    table.meta["smoothing"] = smoothing
    table.meta["errors"] = "propagated with the channel noise correlation of the smoothed spectra"
    return table
