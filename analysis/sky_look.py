"""Where a sky map's decorations go and how a signed map is coloured.

* `data_bounds`: the pixel box holding a map's data (finite pixels), so that
  the beam is drawn on the data and not in a blanked border;
* `beam_anchor`: the centre of the beam, drawn wholly on the data as near the
  lower-left corner as it fits (common practice: the beam sits in a lower corner
  of a map); distances to the nearest blank come from scipy.ndimage's
  Euclidean distance transform;
* `centred_limits`: colour limits symmetric about zero, for maps of signed
  quantities such as a velocity field (moment 1) drawn in a diverging ramp
  whose middle colour is the velocity zero (common practice).

Examples
--------
>>> import numpy as np
>>> plane = np.full((10, 12), np.nan); plane[3:9, 2:7] = 1.0
>>> data_bounds(plane)
(2, 6, 3, 8)
>>> centred_limits(np.array([-30.0, 10.0, 250.0]), 0, 100)
(-250.0, 250.0)
"""

import numpy as np
from scipy import ndimage
from astropy.visualization import AsymmetricPercentileInterval

__all__ = ["data_bounds", "beam_anchor", "centred_limits"]


def data_bounds(plane):
    """The smallest pixel box holding every finite pixel of a 2-D map.

    Parameters
    ----------
    plane : array_like (ny, nx)

    Returns
    -------
    (x0, x1, y0, y1) : tuple of int or None
        Inclusive first and last column and row holding data; None when every pixel is blank.
    """
    finite = np.isfinite(np.asarray(plane, dtype=float))
    columns = np.flatnonzero(finite.any(axis=0))
    rows = np.flatnonzero(finite.any(axis=1))
    if not columns.size:
        return None
    return int(columns[0]), int(columns[-1]), int(rows[0]), int(rows[-1])


def beam_anchor(plane, beam_size, margin=1.0):
    """Pixel (x, y) at which to centre the beam: the lower-left-most place on the map's data.

    The beam (a disc of diameter ``beam_size``, plus ``margin``) must lie wholly on finite
    pixels, so it is never drawn on a blanked border, even a round one; among such places the
    one nearest the lower-left corner of the data's box is taken.

    Parameters
    ----------
    plane : array_like (ny, nx)
        The map shown; NaN pixels are blank.
    beam_size : float
        The beam's extent in pixels (e.g. its major axis).
    margin : float
        Gap in pixels between the beam and the nearest blank pixel or edge of the map.

    Returns
    -------
    (float, float)
        When the beam fits nowhere, the place deepest inside the data; the map's lower-left
        corner when the whole map is blank.

    Examples
    --------
    >>> plane = np.full((100, 100), np.nan); plane[20:90, 30:80] = 0.0
    >>> beam_anchor(plane, 10.0)
    (36.0, 26.0)
    """
    values = np.asarray(plane, dtype=float)
    ny, nx = values.shape
    half = float(beam_size) / 2
    bounds = data_bounds(values)
    if bounds is None:
        return min(half + margin, nx - 1.0), min(half + margin, ny - 1.0)
    # Distance of each data pixel to the nearest blank pixel or map edge (the edge counts as blank).
    finite = np.pad(np.isfinite(values), 1, constant_values=False)
    depth = ndimage.distance_transform_edt(finite)[1:-1, 1:-1]
    # A pixel centre at depth d has d - 0.5 pixels of data around it before the blank pixel's edge.
    fits = depth - 0.5 >= half + margin
    yy, xx = np.indices(values.shape)
    if fits.any():
        x0, _, y0, _ = bounds
        order = np.where(fits, (xx - x0) + (yy - y0), np.inf)
        j, i = np.unravel_index(np.argmin(order), order.shape)
    else:
        j, i = np.unravel_index(np.argmax(depth), depth.shape)
    return float(i), float(j)


def centred_limits(image, lower=0.5, upper=99.5, *, vmin=None, vmax=None):
    """Colour limits symmetric about zero: ``(-m, m)`` with m the larger of the two percentiles' sizes.

    Parameters
    ----------
    image : array_like
        Values; NaNs are ignored.
    lower, upper : float
        Percentiles (0-100) whose absolute values set ``m``.
    vmin, vmax : float, optional
        Explicit limits, used as given (a user's choice wins over the symmetric default).

    Returns
    -------
    vmin, vmax : float
        With ``vmin < vmax`` (a blank or all-zero image gets ``(-1, 1)``).

    Raises
    ------
    ValueError
        Percentiles out of 0..100 or ``lower >= upper``, or ``vmin >= vmax``.
    """
    if not (0 <= lower < upper <= 100):
        raise ValueError(f"percentiles must satisfy 0 <= lower < upper <= 100; got {lower}, {upper}")
    if vmin is not None and vmax is not None:
        if not vmin < vmax:
            raise ValueError(f"vmin ({vmin}) must be < vmax ({vmax})")
        return float(vmin), float(vmax)
    values = np.asarray(image, dtype=float)
    finite = values[np.isfinite(values)]
    size = 0.0
    if finite.size:
        low, high = AsymmetricPercentileInterval(lower, upper).get_limits(finite)
        size = max(abs(float(low)), abs(float(high)))
    if not size > 0:
        size = 1.0
    low = -size if vmin is None else float(vmin)
    high = size if vmax is None else float(vmax)
    if not low < high:
        low, high = (high - 2 * size, high) if vmax is not None else (low, low + 2 * size)
    return low, high
