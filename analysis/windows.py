"""The channels a line measurement uses: the window and the line-free set, with a warning for every change.

`measure_line` (one spectrum) and `moment_maps` (every pixel) take the same
``window`` and ``line_free`` arguments and must read them the same way. Both
go through these two functions, so the same input gives the same channels and
the same warnings:

* a window reaching beyond the band is used over its part inside the band,
  with a `WindowClippedWarning` that gives the part used (a window wholly
  outside the band is refused by `channel_mask`);
* line-free channels inside the window are left out of the line-free set,
  with a `LineFreeOverlapWarning` that gives how many are left; too few left
  for the baseline raises `SpectralRangeError`.

Examples
--------
>>> import astropy.units as u
>>> axis = [1, 2, 3, 4, 5] * u.GHz
>>> window_channels(axis, (2.5, 4.5) * u.GHz)
array([False, False,  True,  True, False])
"""

import warnings

import astropy.units as u
import numpy as np

from .errors import LineFreeOverlapWarning, SpectralRangeError, WindowClippedWarning
from .spectral import axis_in, channel_mask

__all__ = ["window_channels", "line_free_outside_window"]


def window_channels(obj, window, *, rest_frequency=None, z=0.0, convention="radio", stacklevel=3):
    """The channels inside ``window``; warns when part of the window lies beyond the band.

    The band reaches half a channel beyond the first and last channel centres;
    a window that extends past that is clipped to the band.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or Quantity
        Supplies the spectral axis.
    window : Quantity, shape (2,) or (n, 2)
    rest_frequency, z, convention
        See `axis_in`.
    stacklevel : int
        Passed to `warnings.warn`, so the warning points at the user's call.

    Returns
    -------
    ndarray of bool, shape (n_channels,)

    Raises
    ------
    SpectralRangeError
        A range selects no channel.

    Warns
    -----
    WindowClippedWarning
        A range reaches beyond the band; the message gives the part used.
    """
    frame = dict(rest_frequency=rest_frequency, z=z, convention=convention)
    mask = channel_mask(obj, window, min_channels=1, what="window", **frame)
    pairs = np.atleast_2d(window)
    values = axis_in(obj, pairs.unit, **frame).to_value(pairs.unit)
    half = 0.5 * np.abs(np.gradient(values)) if values.size > 1 else np.zeros(1)
    low_edge, high_edge = np.nanmin(values - half), np.nanmax(values + half)
    tolerance = 1e-6 * float(np.nanmax(half))  # rounding in unit conversions is not a clipped window
    for lo, hi in pairs.value:
        lo, hi = min(lo, hi), max(lo, hi)
        if lo >= low_edge - tolerance and hi <= high_edge + tolerance:
            continue
        inside = (values >= lo) & (values <= hi)
        used = values[inside]
        warnings.warn(
            f"the window ({lo:g}, {hi:g}) {pairs.unit} reaches beyond the band, which spans {low_edge:g} to "
            f"{high_edge:g} {pairs.unit}"
            + (f" for a line at {u.Quantity(rest_frequency):g} and z={z:g}" if rest_frequency is not None else "")
            + f"; only its part inside the band is used: {int(inside.sum())} channel(s) from {used.min():g} to "
            f"{used.max():g} {pairs.unit}. Give a window inside the band to silence this",
            WindowClippedWarning,
            stacklevel=stacklevel,
        )
    return mask


def line_free_outside_window(free, in_window, *, line_free, window, min_channels=1, stacklevel=3):
    """The line-free channels that are not in the window; warns when some were dropped.

    Parameters
    ----------
    free, in_window : ndarray of bool, shape (n_channels,)
        The channels of the line-free ranges and of the window.
    line_free, window
        As the user gave them, for the messages.
    min_channels : int
        Fewer line-free channels left than this raises `SpectralRangeError`
        (a polynomial of order ``n`` needs ``n + 2``, one more than its
        coefficients, to leave a residual rms).

    Returns
    -------
    ndarray of bool

    Warns
    -----
    LineFreeOverlapWarning
        Some line-free channels are in the window; they are left out.

    Examples
    --------
    >>> free = np.array([True, True, True, False])
    >>> window = np.array([False, False, True, True])
    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     line_free_outside_window(free, window, line_free="channels 0-2", window="channels 2-3")
    array([ True,  True, False, False])
    """
    if isinstance(line_free, np.ndarray) and line_free.dtype == bool:
        line_free = f"(a mask of {int(line_free.sum())} channels)"
    overlap = int((free & in_window).sum())
    kept = free & ~in_window
    n_kept = int(kept.sum())
    if n_kept < min_channels:
        raise SpectralRangeError(
            f"the line-free ranges {line_free} leave {n_kept} channel(s) outside the window {window}"
            + (f" ({overlap} of theirs lie inside it)" if overlap else "")
            + f"; at least {min_channels} are needed. Move the line-free ranges off the line or lower the "
            "polynomial order"
        )
    if overlap:
        warnings.warn(
            f"{overlap} of the {int(free.sum())} line-free channels ({line_free}) lie inside the window "
            f"{window} and are left out: the baseline and rms use the other {n_kept}. Give line-free ranges "
            "outside the window to silence this",
            LineFreeOverlapWarning,
            stacklevel=stacklevel,
        )
    return kept
