"""Sky axes in world coordinates: offsets from the map centre along the celestial axes.

Maps of line emission are drawn against offsets in arcseconds from a
reference position, east to the left (common practice in radio astronomy).
`sky_axes` measures those offsets from a cube's celestial WCS with astropy:
the map centre is ``wcs.pixel_to_world`` of the middle of the pixel grid, and
the offset of a point is `astropy.coordinates.SkyCoord.spherical_offsets_to`
from the centre, measured along the map's central row (east-west) and central
column (north-south). A view keeps its image in pixel coordinates and labels
its axes with the offsets, which are linear in pixels to well within a pixel
for the fields line cubes cover (tested on a SIN, a far-off-centre SFL and a
Galactic grid against astropy's own WCS).

`nice_ticks` places tick marks at 1, 2, 2.5 or 5 times a power of ten, never more
than a view has room for.

Examples
--------
>>> from cubeloupe.analysis import demo_path, open_cube
>>> cube = open_cube(demo_path("disk"))
>>> axes = sky_axes(cube.wcs, cube.shape[1:])
>>> axes.labels
('ΔRA (″)', 'ΔDec (″)')
>>> bool(axes.scale[0] < 0 < axes.scale[1])   # east (RA growing) to the left, north up
True
"""

import math
from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord

from .errors import CubeShapeError

__all__ = ["SkyAxes", "sky_axes", "nice_ticks", "tick_decimals"]

# Beyond this tilt between the pixel grid and the celestial axes at the map centre the offset
# axes are labelled as distances along the pixel axes instead of ΔRA/ΔDec.
ALIGNED_WITHIN = 10 * u.deg

_UNIT_MARKS = {u.arcsec: "″", u.arcmin: "′", u.deg: "°"}
_AXIS_NAMES = {"equatorial": ("ΔRA", "ΔDec"), "galactic": ("Δl", "Δb"), "other": ("Δlon", "Δlat")}
_EQUATORIAL = ("icrs", "fk5", "fk4", "fk4noeterms")


@dataclass(frozen=True)
class SkyAxes:
    """Offsets from a map's centre, linear in its pixel coordinates.

    Attributes
    ----------
    centre : SkyCoord
        Sky position of the middle of the pixel grid.
    centre_pixel : (float, float)
        Its pixel coordinates (x, y), 0-based.
    scale : Quantity (2,) [angle]
        Offset per pixel along x and along y, signed (negative along x when east is to the left),
        in `unit`.
    unit : Unit
        Unit of the offsets shown (arcsec, or arcmin for fields over a degree).
    labels : (str, str)
        Axis labels, e.g. ``('ΔRA (″)', 'ΔDec (″)')`` or ``('Δl (″)', 'Δb (″)')``.
    tilt : Quantity [angle]
        Angle between the pixel y axis and north (or the Galactic pole direction) at the centre.
    shape : (int, int)
        Shape (ny, nx) of the map.
    """

    centre: SkyCoord
    centre_pixel: tuple
    scale: u.Quantity
    unit: u.UnitBase
    labels: tuple
    tilt: u.Quantity
    shape: tuple

    def offsets(self, x, y):
        """Offsets (along x, along y) of pixel coordinates ``x``, ``y``, as Quantities in `unit`."""
        dx = (np.asarray(x, dtype=float) - self.centre_pixel[0]) * self.scale[0]
        dy = (np.asarray(y, dtype=float) - self.centre_pixel[1]) * self.scale[1]
        return dx, dy

    def pixels(self, dx, dy):
        """Pixel coordinates (x, y) of offsets ``dx``, ``dy`` (angles) from the centre."""
        x = self.centre_pixel[0] + (u.Quantity(dx, self.unit) / self.scale[0]).to_value(u.one)
        y = self.centre_pixel[1] + (u.Quantity(dy, self.unit) / self.scale[1]).to_value(u.one)
        return x, y

    @property
    def centre_text(self):
        """The centre's position as the trade writes it (sexagesimal RA/Dec, or l, b in degrees)."""
        frame = self.centre.frame.name
        if frame in _EQUATORIAL:
            ra = self.centre.ra.to_string(unit=u.hourangle, sep="hms", precision=2, pad=True)
            dec = self.centre.dec.to_string(unit=u.deg, sep="dms", precision=1, alwayssign=True, pad=True)
            return f"{ra} {dec} ({frame.upper()})"
        if frame == "galactic":
            return f"l = {self.centre.l.deg:.4f}°, b = {self.centre.b.deg:+.4f}°"
        lon, lat = self.centre.spherical.lon.deg, self.centre.spherical.lat.deg
        return f"{frame} lon = {lon:.4f}°, lat = {lat:+.4f}°"

    def plot_size(self, max_side):
        """Width and height (screen pixels) of a plot area showing the whole map with square sky pixels.

        The longer side gets ``max_side``; the other follows the map's extent on the sky, so one
        arcsecond is as long across as up.
        """
        ny, nx = self.shape
        width = nx * abs(self.scale[0].value)
        height = ny * abs(self.scale[1].value)
        factor = max_side / max(width, height)
        return max(int(round(width * factor)), 1), max(int(round(height * factor)), 1)


def _frame_kind(coord):
    name = coord.frame.name
    if name in _EQUATORIAL:
        return "equatorial"
    return "galactic" if name == "galactic" else "other"


def sky_axes(wcs, shape):
    """Offset axes of a map: arcseconds from its centre along the celestial axes.

    Parameters
    ----------
    wcs : astropy.wcs.WCS
        The cube's or map's WCS; its celestial part is used.
    shape : (int, int)
        The map's shape (ny, nx).

    Returns
    -------
    SkyAxes

    Raises
    ------
    CubeShapeError
        The WCS has no celestial axes, or the shape is not two positive sizes.

    Notes
    -----
    The offset of pixel x along the central row is the longitude offset of
    ``wcs.pixel_to_world(x, y_centre)`` from the centre in the centre's own
    offset frame (`SkyCoord.spherical_offsets_to`, i.e. ΔRA cos(Dec) near the
    centre); likewise along the central column for y. The scale per pixel is
    the mean over the whole row or column, so the axis ends read the true
    offsets of the map's edges.

    Examples
    --------
    >>> from astropy.wcs import WCS
    >>> w = WCS(naxis=2); w.wcs.ctype = ["GLON-CAR", "GLAT-CAR"]; w.wcs.crval = [30, 0]
    >>> w.wcs.cdelt = [-1 / 3600, 1 / 3600]; w.wcs.crpix = [11, 11]
    >>> axes = sky_axes(w, (21, 21))
    >>> axes.labels, axes.centre_text
    (('Δl (″)', 'Δb (″)'), 'l = 30.0000°, b = +0.0000°')
    >>> [round(float(v.to_value(u.arcsec)), 6) for v in axes.offsets(0, 20)]
    [10.0, 10.0]
    """
    celestial = getattr(wcs, "celestial", None)
    if celestial is None or not celestial.has_celestial or celestial.naxis != 2:
        raise CubeShapeError("the map has no celestial axes in its WCS (e.g. RA---SIN/DEC--SIN); "
                             "sky offsets need a sky projection")
    try:
        ny, nx = (int(n) for n in shape)
    except (TypeError, ValueError):
        raise CubeShapeError(f"shape must be (ny, nx); got {shape!r}") from None
    if nx < 1 or ny < 1:
        raise CubeShapeError(f"shape must be two positive sizes (ny, nx); got {shape!r}")
    xc, yc = (nx - 1) / 2, (ny - 1) / 2
    centre = celestial.pixel_to_world(xc, yc)
    # The pixel edges of the central row and column: the ends of the axes a view draws.
    row = celestial.pixel_to_world([-0.5, nx - 0.5], [yc, yc])
    column = celestial.pixel_to_world([xc, xc], [-0.5, ny - 0.5])
    row_lon, row_lat = centre.spherical_offsets_to(row)
    col_lon, col_lat = centre.spherical_offsets_to(column)
    span = max(abs(row_lon[1] - row_lon[0]), abs(col_lat[1] - col_lat[0]))
    unit = u.arcsec if span <= 1 * u.deg else u.arcmin
    scale = u.Quantity([(row_lon[1] - row_lon[0]).to(unit) / nx, (col_lat[1] - col_lat[0]).to(unit) / ny])
    tilt = np.arctan2((col_lon[1] - col_lon[0]).to_value(u.rad), (col_lat[1] - col_lat[0]).to_value(u.rad)) * u.rad
    tilt = tilt.to(u.deg)
    mark = _UNIT_MARKS[unit]
    if abs(tilt) <= ALIGNED_WITHIN:
        names = _AXIS_NAMES[_frame_kind(centre)]
    else:
        names = ("offset along x", "offset along y")
    labels = (f"{names[0]} ({mark})", f"{names[1]} ({mark})")
    return SkyAxes(centre=centre, centre_pixel=(xc, yc), scale=scale, unit=unit, labels=labels,
                   tilt=tilt, shape=(ny, nx))


def nice_ticks(low, high, max_ticks, min_ticks=2):
    """Tick positions between ``low`` and ``high`` at multiples of 1, 2, 2.5 or 5 times a power of ten.

    The step is the smallest such that at most ``max_ticks`` ticks fall in the range (the steps
    matplotlib's ``MaxNLocator`` uses by default; common practice). When that step leaves fewer
    than ``min_ticks`` ticks in the range (a narrow map with room for one or two labels), the
    largest step that gives ``min_ticks`` is taken instead, as ``MaxNLocator``'s ``min_n_ticks``
    does: an axis with a single tick cannot be read.

    Parameters
    ----------
    low, high : float
        The axis range (either order).
    max_ticks : int
        Most ticks wanted (at least 1).
    min_ticks : int
        Fewest ticks wanted (default 2); wins over ``max_ticks`` when both cannot hold.

    Returns
    -------
    ndarray
        Increasing tick values inside the range.

    Examples
    --------
    >>> nice_ticks(-12.3, 14.1, 5).tolist()
    [-10.0, -5.0, 0.0, 5.0, 10.0]
    >>> nice_ticks(14.1, -12.3, 3).tolist()
    [-10.0, 0.0, 10.0]
    >>> nice_ticks(-3.0, 3.0, 2).tolist()   # a 6"-wide map: 0 alone would not say the scale
    [-2.5, 0.0, 2.5]
    """
    low, high = sorted((float(low), float(high)))
    max_ticks = max(int(max_ticks), 1)
    if not (math.isfinite(low) and math.isfinite(high)) or high == low:
        return np.array([low]) if math.isfinite(low) else np.array([])
    min_ticks = max(int(min_ticks), 1)

    def placed(step):
        first, last = math.ceil(low / step - 1e-9), math.floor(high / step + 1e-9)
        return first, last, last - first + 1

    exponent = math.floor(math.log10((high - low) / max_ticks))
    steps = [factor * 10.0 ** e for e in range(exponent, exponent + 3) for factor in (1, 2, 2.5, 5)]
    chosen = next(step for step in steps + [10.0 ** (exponent + 3)] if placed(step)[2] <= max_ticks)
    if placed(chosen)[2] < min_ticks:
        # Finer steps, coarsest first, until enough ticks fall in the range.
        finer = [factor * 10.0 ** e for e in range(exponent + 2, exponent - 3, -1) for factor in (5, 2.5, 2, 1)]
        chosen = next((step for step in finer if step < chosen and placed(step)[2] >= min_ticks), chosen)
    first, last, _ = placed(chosen)
    ticks = np.arange(first, last + 1) * chosen
    # Round away representation noise such as 0.30000000000000004.
    digits = max(0, -math.floor(math.log10(chosen)) + 1)
    return np.round(ticks, digits) + 0.0


def tick_decimals(ticks):
    """Decimal places that write evenly spaced ``ticks`` exactly and no more (0.25 steps: 2; 25: 0).

    Examples
    --------
    >>> tick_decimals([-0.5, 0.0, 0.5]), tick_decimals([-25.0, 0.0, 25.0]), tick_decimals([0.25, 0.5])
    (1, 0, 2)
    """
    ticks = np.asarray(ticks, dtype=float)
    if ticks.size < 2:
        return 0
    step = abs(float(ticks[1] - ticks[0]))
    for decimals in range(0, 12):
        if np.allclose(np.round(ticks, decimals), ticks, rtol=0, atol=step * 1e-6):
            return decimals
    return 12
