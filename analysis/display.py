"""Numbers behind what the views draw: display images, limits, stretches, axes, beam outlines.

The widgets only show what these functions return. Everything here is pure
numpy/astropy so it can be tested without a browser:

* `display_image` block-averages a channel or map down to the size of the view,
  reading nothing but the plane it is given;
* `display_limits` and `stretched` turn data values into 0..1 colour positions
  with astropy.visualization's intervals and stretches;
* `display_axis` and `marker_positions` give spectral coordinates in the three
  axes a spectrum can be drawn against (observed frequency, rest frequency,
  velocity);
* `beam_outline` draws the beam ellipse in pixel coordinates through the WCS;
* `contour_paths` traces contour levels with contourpy (matplotlib's tracer).

Examples
--------
>>> import numpy as np
>>> image, factor = display_image(np.ones((1000, 600)), max_size=500)
>>> image.shape, factor
((500, 300), 2)
"""

import math

import astropy.units as u
import contourpy
import numpy as np
from astropy.visualization import (
    AsymmetricPercentileInterval,
    AsinhStretch,
    LinearStretch,
    LogStretch,
    SqrtStretch,
    SquaredStretch,
)

from .errors import SpectralAxisError, UnitMismatchError
from .spectral import (
    frequency_from_velocity,
    axis_in,
    check_convention,
    check_redshift,
    check_rest_frequency,
    frequency_axis,
    frequency_from_velocity,
    velocity,
)

__all__ = [
    "AXIS_KINDS",
    "STRETCHES",
    "display_image",
    "display_limits",
    "stretched",
    "display_axis",
    "marker_positions",
    "beam_outline",
    "contour_paths",
    "sky_position",
    "to_observed_frequency",
    "channel_at",
    "channel_for",
]

# The three x axes a spectrum can be drawn against, with their display unit.
AXIS_KINDS = {
    "observed frequency": u.GHz,
    "rest frequency": u.GHz,
    "velocity": u.km / u.s,
}

STRETCHES = ("linear", "sqrt", "log", "asinh", "square")


def display_image(plane, max_size=512):
    """Block-average a 2-D plane so that neither side exceeds ``max_size``.

    Blocks are ``factor x factor`` pixels with one integer ``factor`` for both
    axes (so pixels stay square); NaN pixels are left out of each block's mean
    and an all-NaN block stays NaN. Edges that do not fill a block are averaged
    over the pixels they have.

    Parameters
    ----------
    plane : array_like, shape (ny, nx)
        Data values (a Quantity's value, a memory-mapped slice...).
    max_size : int
        Largest side of the result, in display pixels.

    Returns
    -------
    image : ndarray of float32, shape (ceil(ny/factor), ceil(nx/factor))
    factor : int
        Block size; 1 means the plane was only converted to float32.

    Examples
    --------
    >>> img, f = display_image(np.arange(16.0).reshape(4, 4), max_size=2)
    >>> img.tolist(), f
    ([[2.5, 4.5], [10.5, 12.5]], 2)
    """
    plane = np.asarray(plane)
    if plane.ndim != 2:
        raise ValueError(f"display_image needs a 2-D plane; got shape {plane.shape}")
    if int(max_size) < 1:
        raise ValueError(f"max_size must be a positive number of pixels; got {max_size}")
    ny, nx = plane.shape
    factor = max(1, math.ceil(max(ny, nx) / int(max_size)))
    # Native float32 once: FITS planes are big-endian and reduce slower.
    data = plane.astype(np.float32, copy=factor == 1)
    if factor == 1:
        return data, 1
    py, px = (-ny) % factor, (-nx) % factor
    if py or px:
        data = np.pad(data, ((0, py), (0, px)), constant_values=np.nan)
    # Sum the factor x factor strided sub-images: a few passes over contiguous memory are much
    # faster than reducing a 4-D reshaped view over two non-adjacent axes.
    sums = np.zeros((data.shape[0] // factor, data.shape[1] // factor), np.float32)
    counts = np.zeros(sums.shape, np.float32)
    for i in range(factor):
        for j in range(factor):
            part = data[i::factor, j::factor]
            finite = np.isfinite(part)
            np.add(sums, part, out=sums, where=finite)
            counts += finite
    with np.errstate(invalid="ignore", divide="ignore"):
        image = sums / counts
    return image.astype(np.float32, copy=False), factor


def display_limits(image, lower=0.5, upper=99.5, *, vmin=None, vmax=None, max_samples=65536):
    """Colour limits of an image: percentiles of its finite pixels unless given.

    Parameters
    ----------
    image : array_like
    lower, upper : float
        Percentiles (0-100) used for the limits not given explicitly.
    vmin, vmax : float, optional
        Explicit limits; each overrides its percentile.
    max_samples : int
        Larger images are sampled on a regular grid of about this many pixels
        before the percentiles are taken (display limits need not be exact, and
        sampling keeps a channel change fast; common practice in image viewers).

    Returns
    -------
    vmin, vmax : float
        With ``vmin < vmax`` always (a flat or blank image gets a unit span).

    Raises
    ------
    ValueError
        Percentiles out of 0..100 or ``lower >= upper``, or ``vmin >= vmax``.

    Examples
    --------
    >>> display_limits(np.arange(101.0), 5, 95)
    (5.0, 95.0)
    """
    if not (0 <= lower < upper <= 100):
        raise ValueError(f"percentiles must satisfy 0 <= lower < upper <= 100; got {lower}, {upper}")
    if vmin is not None and vmax is not None and not vmin < vmax:
        raise ValueError(f"vmin ({vmin}) must be < vmax ({vmax})")
    values = np.asarray(image)
    if values.size > max_samples:
        values = values.ravel()[:: int(np.ceil(values.size / max_samples))]
    values = values.astype(float)
    finite = values[np.isfinite(values)]
    if finite.size:
        low, high = AsymmetricPercentileInterval(lower, upper).get_limits(finite)
    else:
        low, high = 0.0, 1.0
    low = float(low) if vmin is None else float(vmin)
    high = float(high) if vmax is None else float(vmax)
    if not high > low:
        span = abs(low) if low else 1.0
        if vmax is None:
            high = low + span
        else:
            low = high - span
    return low, high


def _stretch(name):
    table = {
        "linear": LinearStretch,
        "sqrt": SqrtStretch,
        "log": LogStretch,
        "asinh": AsinhStretch,
        "square": SquaredStretch,
    }
    if name not in table:
        raise ValueError(f"unknown stretch {name!r}; choose from {list(STRETCHES)}")
    return table[name]()


def stretched(image, vmin, vmax, stretch="linear"):
    """Map data values to colour positions 0..1: clip to the limits, then stretch.

    The stretches are astropy.visualization's (log uses its default a=1000,
    asinh a=0.1). NaN stays NaN.

    Examples
    --------
    >>> stretched(np.array([0.0, 0.25, 1.0, 2.0]), 0, 1, "sqrt").tolist()
    [0.0, 0.5, 1.0, 1.0]
    """
    if not vmin < vmax:
        raise ValueError(f"vmin ({vmin}) must be < vmax ({vmax})")
    values = np.asarray(image, dtype=np.float32)
    scaled = (values - np.float32(vmin)) / np.float32(vmax - vmin)
    np.clip(scaled, 0.0, 1.0, out=scaled)
    return _stretch(stretch)(scaled, clip=False).astype(np.float32, copy=False)


def display_axis(obj, kind, *, rest_frequency=None, z=0.0, convention="radio"):
    """Spectral coordinates of ``obj`` in one of the `AXIS_KINDS`.

    * ``"observed frequency"``: the sky frequencies of the channels (GHz);
    * ``"rest frequency"``: the same channels in the source's rest frame,
      ``f (1 + z)`` (GHz);
    * ``"velocity"``: offsets from ``rest_frequency / (1 + z)`` in
      ``convention`` (km/s), as `spectral.axis_in` defines them.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or Quantity
    kind : str
        A key of `AXIS_KINDS`.
    rest_frequency : Quantity [frequency], optional
    z : float
    convention : {'radio', 'optical', 'relativistic'}

    Returns
    -------
    Quantity

    Examples
    --------
    >>> display_axis([100, 200] * u.GHz, "rest frequency", z=1.0)
    <Quantity [200., 400.] GHz>
    """
    if kind not in AXIS_KINDS:
        raise SpectralAxisError(f"unknown axis {kind!r}; choose from {list(AXIS_KINDS)}")
    z = check_redshift(z)
    if kind == "observed frequency":
        return frequency_axis(obj)
    if kind == "rest frequency":
        return frequency_axis(obj) * (1.0 + z)
    return axis_in(obj, AXIS_KINDS[kind], rest_frequency=rest_frequency, z=z, convention=convention)


def marker_positions(rest_frequencies, kind, *, z=0.0, velocity_offset=0 * u.km / u.s,
                     convention="radio", reference_rest_frequency=None):
    """Where lines of the given rest frequencies sit on a spectrum axis.

    A line of rest frequency ``f0`` from a source at redshift ``z`` moving by
    ``velocity_offset`` (rest-frame, in ``convention``) is observed at
    ``spectral.frequency_from_velocity(velocity_offset, f0, z, convention)``;
    with no offset that is ``f0 / (1 + z)``. The result is expressed in
    ``kind`` as `display_axis` defines it; velocities are measured from
    ``reference_rest_frequency / (1 + z)``.

    Returns
    -------
    Quantity, shape like ``rest_frequencies``

    Examples
    --------
    >>> marker_positions([230.538] * u.GHz, "observed frequency", z=1.0)
    <Quantity [115.269] GHz>
    """
    z = check_redshift(z)
    check_convention(convention)
    rest = check_rest_frequency(u.Quantity(rest_frequencies), argname="rest_frequencies")
    try:
        offset = u.Quantity(velocity_offset).to(u.km / u.s)
    except (u.UnitConversionError, TypeError):
        raise UnitMismatchError(f"velocity_offset must be a velocity; got {velocity_offset!r}") from None
    observed = rest / (1.0 + z)
    if offset.value != 0:
        # Each convention depends on frequency only through f / f_ref (see spectral.py), so one
        # factor, worked out for a unit line, shifts every line alike.
        observed = observed * frequency_from_velocity(offset, 1 * u.GHz, 0.0, convention).to_value(u.GHz)
    if kind not in AXIS_KINDS:
        raise SpectralAxisError(f"unknown axis {kind!r}; choose from {list(AXIS_KINDS)}")
    if kind == "observed frequency":
        return observed.to(u.GHz)
    if kind == "rest frequency":
        return (observed * (1.0 + z)).to(u.GHz)
    if reference_rest_frequency is None:
        raise SpectralAxisError(
            "a velocity axis needs a reference line: pass reference_rest_frequency (e.g. 230.538*u.GHz)"
        )
    return velocity(observed, reference_rest_frequency, z, convention)


def beam_outline(beam, wcs, center, n_points=73):
    """The beam ellipse (FWHM) in pixel coordinates of a celestial WCS.

    The position angle is measured from north through east (the FITS BPA
    convention, common practice); the celestial pixel-scale matrix carries the
    ellipse from sky offsets to pixel offsets, so flipped or rotated grids are
    drawn correctly.

    Parameters
    ----------
    beam : radio_beam.Beam
    wcs : astropy.wcs.WCS
        Its celestial part is used.
    center : (float, float)
        Pixel (x, y) of the ellipse centre.
    n_points : int
        Points on the closed outline (first equals last).

    Returns
    -------
    x, y : ndarray
    """
    celestial = wcs.celestial
    matrix = celestial.pixel_scale_matrix  # deg per pixel, (world x, world y) from (pixel x, pixel y)
    major = beam.major.to_value(u.deg) / 2
    minor = beam.minor.to_value(u.deg) / 2
    pa = beam.pa.to_value(u.rad)
    t = np.linspace(0.0, 2.0 * np.pi, int(n_points))
    # Offsets east and north of a point on the ellipse whose major axis lies at pa.
    east = major * np.cos(t) * np.sin(pa) + minor * np.sin(t) * np.cos(pa)
    north = major * np.cos(t) * np.cos(pa) - minor * np.sin(t) * np.sin(pa)
    # Intermediate world x grows with longitude, i.e. to the east (FITS Paper II).
    pixel = np.linalg.solve(matrix, np.vstack([east, north]))
    return center[0] + pixel[0], center[1] + pixel[1]


def contour_paths(image, levels, x_scale=1.0, y_scale=1.0):
    """Contour lines of an image at the given levels, as NaN-separated x, y arrays.

    Coordinates are pixel indices (x = column, y = row) multiplied by
    ``x_scale``/``y_scale``. Traced with contourpy, the tracer matplotlib uses.

    Returns
    -------
    list of (x, y)
        One pair of 1-D arrays per level; separate pieces are split by NaN.

    Examples
    --------
    >>> yy, xx = np.mgrid[:20, :20]
    >>> (x, y), = contour_paths(np.hypot(xx - 10, yy - 10), [5])
    >>> bool(np.nanmax(x) <= 15.01 and np.nanmin(x) >= 4.99)
    True
    """
    data = np.asarray(image, dtype=float)
    mask = ~np.isfinite(data)
    generator = contourpy.contour_generator(z=np.ma.masked_array(np.where(mask, 0, data), mask),
                                            line_type=contourpy.LineType.Separate)
    paths = []
    for level in np.atleast_1d(levels):
        pieces = generator.lines(float(level))
        xs, ys = [], []
        for piece in pieces:
            xs.extend([piece[:, 0] * x_scale, [np.nan]])
            ys.extend([piece[:, 1] * y_scale, [np.nan]])
        paths.append((np.concatenate(xs) if xs else np.array([]), np.concatenate(ys) if ys else np.array([])))
    return paths


def sky_position(wcs, x, y):
    """Sky coordinates of pixel (x, y) as (SkyCoord, text in sexagesimal).

    Examples
    --------
    >>> from astropy.wcs import WCS
    >>> w = WCS(naxis=2); w.wcs.ctype = ["RA---SIN", "DEC--SIN"]; w.wcs.crval = [150, 2]
    >>> w.wcs.cdelt = [-1e-4, 1e-4]; w.wcs.crpix = [1, 1]
    >>> sky_position(w, 0, 0)[1]
    '10h00m00.000s +02d00m00.00s'
    """
    coord = wcs.celestial.pixel_to_world(x, y)
    text = coord.to_string("hmsdms", precision=2) if coord.frame.name in ("icrs", "fk5", "fk4") else \
        coord.to_string("decimal", precision=6)
    if coord.frame.name in ("icrs", "fk5", "fk4"):
        ra = coord.ra.to_string(unit=u.hourangle, sep="hms", precision=3, pad=True)
        dec = coord.dec.to_string(unit=u.deg, sep="dms", precision=2, alwayssign=True, pad=True)
        text = f"{ra} {dec}"
    return coord, text


def to_observed_frequency(values, kind, *, rest_frequency=None, z=0.0, convention="radio"):
    """Observed frequencies of coordinates read off an axis of `display_axis` ``kind``.

    The inverse of `display_axis`: turns a range dragged on a spectrum (in its
    current x unit) into observed frequencies, which stay fixed to channels
    when z or the axis changes.

    Parameters
    ----------
    values : array_like or Quantity
        Plain numbers are taken in the unit of ``kind`` (`AXIS_KINDS`).

    Returns
    -------
    Quantity [GHz]

    Examples
    --------
    >>> to_observed_frequency([200.0, 400.0], "rest frequency", z=1.0)
    <Quantity [100., 200.] GHz>
    """
    if kind not in AXIS_KINDS:
        raise SpectralAxisError(f"unknown axis {kind!r}; choose from {list(AXIS_KINDS)}")
    z = check_redshift(z)
    values = u.Quantity(values, AXIS_KINDS[kind])
    if kind == "observed frequency":
        return values.to(u.GHz, equivalencies=u.spectral())
    if kind == "rest frequency":
        return values.to(u.GHz, equivalencies=u.spectral()) / (1.0 + z)
    if rest_frequency is None:
        raise SpectralAxisError(
            "a velocity axis needs a reference line: pass rest_frequency (e.g. 230.538*u.GHz)"
        )
    return frequency_from_velocity(values, rest_frequency, z, convention).to(u.GHz)


def channel_at(frequencies, frequency):
    """Index of the channel nearest to ``frequency``, or None outside the band.

    A frequency counts as inside when it lies within half a channel of the
    first or last channel centre.

    Examples
    --------
    >>> channel_at([100.0, 100.5, 101.0] * u.GHz, 100.6 * u.GHz)
    1
    >>> channel_at([100.0, 100.5, 101.0] * u.GHz, 99.0 * u.GHz) is None
    True
    """
    axis = u.Quantity(frequencies).to_value(u.GHz, equivalencies=u.spectral())
    value = u.Quantity(frequency).to_value(u.GHz, equivalencies=u.spectral())
    if axis.size == 0 or not np.isfinite(value):
        return None
    half = abs(axis[-1] - axis[0]) / max(axis.size - 1, 1) / 2
    if value < axis.min() - half or value > axis.max() + half:
        return None
    return int(np.argmin(np.abs(axis - value)))


def channel_for(position, frequencies, *, rest_frequency=None, z=0.0, convention="radio"):
    """The channel nearest to ``position``: a channel number, a frequency or wavelength, or a velocity.

    Parameters
    ----------
    position : int or Quantity [frequency, wavelength or velocity]
        A velocity is the rest-frame offset from ``rest_frequency`` at ``z``
        (see `velocity`).
    frequencies : Quantity [frequency]
        The channels' observed frequencies.
    rest_frequency, z, convention
        The velocity frame, needed for a velocity only.

    Returns
    -------
    int or None
        None when the position lies outside the band.

    Raises
    ------
    SpectralAxisError
        A velocity without a rest frequency to measure it from.
    UnitMismatchError
        A Quantity of another kind.

    Examples
    --------
    >>> axis = [230.0, 230.5, 231.0] * u.GHz
    >>> channel_for(2, axis), channel_for(230.4 * u.GHz, axis)
    (2, 1)
    >>> channel_for(0 * u.km / u.s, axis, rest_frequency=231.0 * u.GHz)
    2
    """
    n = len(frequencies)
    if not isinstance(position, u.Quantity):
        channel = int(position)
        return channel if 0 <= channel < n else None
    if position.unit.is_equivalent(u.km / u.s):
        if rest_frequency is None:
            raise SpectralAxisError(f"{position} is a velocity, but no rest frequency is known to measure it from; "
                                    "choose a line (or give the position as a frequency or a channel number)")
        position = frequency_from_velocity(position, rest_frequency, z=z, convention=convention)
    elif not position.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
        raise UnitMismatchError(f"{position} is neither a frequency, a wavelength nor a velocity; give e.g. "
                                "'115.27 GHz', '1460 km/s' or a channel number")
    return channel_at(frequencies, position)
