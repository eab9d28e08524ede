"""The strongest detection of the check: its moment-0 map and the spectrum at its peak.

Examples
--------
>>> BASELINE_SPAN, MIN_BASELINE_CHANNELS
(3, 20)
"""

import astropy.units as u
import numpy as np

from ..errors import CubeloupeError
from ..moments import moment_maps
from .results import StrongestFeature

__all__ = ["BASELINE_SPAN", "MIN_BASELINE_CHANNELS", "strongest_feature"]

# The moment map of the strongest feature fits each pixel's baseline on the line-free
# channels within this many feature widths, and at least this many channels, on each side.
BASELINE_SPAN = 3
MIN_BASELINE_CHANNELS = 20


def _channel_ranges(mask, frequency):
    """Contiguous runs of ``mask`` as (low, high) frequency pairs of channel centres."""
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return None
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.r_[idx[0], idx[breaks + 1]]
    ends = np.r_[idx[breaks], idx[-1]]
    f = frequency.to_value(u.GHz)
    pairs = [(min(f[a], f[b]), max(f[a], f[b])) for a, b in zip(starts, ends)]
    return u.Quantity(pairs, u.GHz)





def strongest_feature(cube, feature, frequency, free, *, client=None, progress=None, cancel=None, notes=None):
    """Moment-0 map over the feature and the spectrum at its peak.

    Each pixel's linear baseline is fitted on the line-free channels near the
    feature (``BASELINE_SPAN`` feature widths, at least
    ``MIN_BASELINE_CHANNELS`` channels, on each side).
    """
    notes = [] if notes is None else notes
    ch = feature.channels
    n = len(frequency)
    first, last = max(0, ch.first - 1), min(n - 1, ch.last + 1)
    f = frequency.to(u.GHz)
    # A quarter channel of margin so that the inclusive range test of
    # channel_mask picks exactly these channel centres.
    half = np.abs(f[min(first + 1, n - 1)] - f[first]) / 2 if n > 1 else 0 * u.GHz
    lo, hi = sorted([f[first].value, f[last].value])
    window = u.Quantity([lo - 0.5 * half.value, hi + 0.5 * half.value], u.GHz)
    usable = free.copy()
    usable[first:last + 1] = False
    # A local baseline: the line-free channels within BASELINE_SPAN feature widths (at least
    # MIN_BASELINE_CHANNELS channels) on each side, as a baseline around a line is usually fitted
    # (common practice); it also spares reading the whole band again.
    span = max(MIN_BASELINE_CHANNELS, BASELINE_SPAN * ch.n_channels)
    local = np.zeros(n, dtype=bool)
    local[max(0, first - span):last + span + 1] = True
    if (usable & local).sum() >= 3:
        usable &= local
    line_free = _channel_ranges(usable, f)
    order = 1 if usable.sum() >= 3 else None
    if line_free is not None:
        line_free = u.Quantity([(a - 0.5 * half.value, b + 0.5 * half.value) for a, b in line_free.value], u.GHz)
    try:
        maps = moment_maps(cube, window, line_free=line_free if order is not None else None, order=order or 1,
                           rest_frequency=feature.frequency, z=0.0, client=client, progress=progress,
                           cancel=cancel, allow_polarisation=True)  # a lone Stokes plane is named in the header notes
    except CubeloupeError as exc:
        notes.append(f"moment-0 map of the strongest feature not made: {exc}")
        return None
    m0 = maps.m0
    values = np.asarray(m0.value, dtype=float)
    if not np.isfinite(values).any():
        notes.append("the moment-0 map of the strongest feature is blank")
        return None
    pick = np.nanargmin if feature.kind == "absorption" else np.nanargmax
    position = np.unravel_index(pick(values), values.shape)
    spectrum = cube[:, int(position[0]), int(position[1])]
    return StrongestFeature(window=window, moment0=m0, position=tuple(int(p) for p in position), spectrum=spectrum)
