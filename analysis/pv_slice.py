"""Position-velocity slices: the cube sampled along a line or polyline on the sky, channel by channel.

The path is sampled at equal steps of one pixel (the smaller pixel side, for
non-square pixels) measured on the sky, from its first vertex to its last;
each sample is a bilinear interpolation of the four nearest pixels (the
first-order spline of `scipy.ndimage.map_coordinates`, which the tests
reproduce), and with ``width`` > 1 pixel the samples at one-pixel steps across
the path (perpendicular on the sky) are averaged. Offsets are the angular
distances along the path from its first vertex, in arcsec (the flat-sky
approximation of the projection plane, exact to far better than a pixel over
a line cube's field; Calabretta & Greisen 2002, A&A 395, 1077).

Only the pixels the interpolation needs are read from the memory-mapped cube,
for the chosen channels: a long path costs a few thousand spectra, not the
whole cube. (`map_coordinates` itself would need every channel image whole in
memory as float64, a full read of the cube; hence the interpolation weights
are applied here as a sparse matrix to the gathered pixels.)

`PVSlice.write` saves the slice as a FITS image with a linear WCS (offset in
arcsec along axis 1, the cube's spectral axis along axis 2), the beam and
the path in HISTORY, through the atomic writer of `export.write_map`.

Examples
--------
>>> from cubeloupe.analysis import demo_path, open_cube
>>> cube = open_cube(demo_path("disk"))
>>> pv = pv_slice(cube, [(10.0, 20.0), (60.0, 52.0)], width=3)
>>> pv.data.shape, pv.offset.unit, pv.data.unit
((100, 60), Unit("arcsec"), Unit("Jy / beam"))
"""

import warnings
from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy.io import fits
from astropy.wcs import WCS

from .beams import map_beam
from .cube_file import cube_array, custom_mask
from .cubes import source_name
from .errors import RegionError, UnitMismatchError
from .export import write_map
from .prefetch import prefetch_if_cold
from .spectral import channel_mask

__all__ = ["PVSlice", "path_band", "pv_slice"]


@dataclass(frozen=True, eq=False)
class PVSlice:
    """A position-velocity slice and how it was taken.

    Attributes
    ----------
    data : Quantity, shape (n_spectral, n_offset)
        In the cube's unit; NaN where the path leaves the image or the data are blanked.
    offset : Quantity [arcsec], shape (n_offset,)
        Angular distance along the path from its first vertex, evenly spaced.
    spectral_axis : Quantity, shape (n_spectral,)
        The cube's spectral axis over the channels used, in the cube's unit.
    channels : slice
        The cube channels of the slice.
    vertices : ndarray, shape (n_vertices, 2)
        The path's vertices as pixel (x, y), 0-based.
    x, y : ndarray, shape (n_offset,)
        Pixel positions of the samples on the path's centre line.
    width : float
        Width averaged across the path, in pixels (one-pixel steps).
    beam : radio_beam.Beam or None
    spectral_wcs : astropy.wcs.WCS
        1-D WCS of ``spectral_axis``.
    source : str
        The cube the slice was taken from.
    """

    data: u.Quantity
    offset: u.Quantity
    spectral_axis: u.Quantity
    channels: slice
    vertices: np.ndarray
    x: np.ndarray
    y: np.ndarray
    width: float
    beam: object
    spectral_wcs: WCS
    source: str

    ndim = 2  # a 2-D map, as the FITS writers expect

    @property
    def header(self):
        """FITS header: linear WCS (OFFSET in arcsec, then the spectral axis), BUNIT, beam, the path in HISTORY."""
        spectral = self.spectral_wcs.wcs
        wcs = WCS(naxis=2)
        step = float(np.diff(self.offset.to_value(u.arcsec))[0]) if self.offset.size > 1 else 1.0
        wcs.wcs.ctype = ["OFFSET", spectral.ctype[0]]
        wcs.wcs.cunit = ["arcsec", spectral.cunit[0]]
        wcs.wcs.crpix = [1.0, spectral.crpix[0]]
        wcs.wcs.crval = [0.0, spectral.crval[0]]
        wcs.wcs.cdelt = [step, float(self.spectral_wcs.pixel_scale_matrix[0, 0])]
        if spectral.restfrq:
            wcs.wcs.restfrq = spectral.restfrq
        if spectral.restwav:
            wcs.wcs.restwav = spectral.restwav
        if spectral.specsys:
            wcs.wcs.specsys = spectral.specsys
        header = wcs.to_header()
        header["BUNIT"] = self.data.unit.to_string("fits") if self.data.unit != u.one else ""
        if self.beam is not None:
            header.update(self.beam.to_header_keywords())
        header.add_history(f"cubeloupe pv_slice of {self.source}")
        vertices = "; ".join(f"({x:.3f}, {y:.3f})" for x, y in self.vertices)
        header.add_history(f"path vertices, pixel x, y (0-based): {vertices}")
        header.add_history(f"width {self.width:g} pixels; samples averaged across the path")
        return header

    @property
    def hdu(self):
        """The slice as a FITS PrimaryHDU (float32 data, `header`)."""
        return fits.PrimaryHDU(data=np.asarray(self.data.value, dtype=np.float32), header=self.header)

    def write(self, path, *, overwrite=False):
        """Write the slice as a FITS image (see `header`); atomic, refusing to overwrite unless asked.

        Returns
        -------
        Path

        Raises
        ------
        OutputExistsError, CubeFileError, ExportError
            As `write_map`.

        Examples
        --------
        >>> import pathlib, tempfile
        >>> from cubeloupe.analysis import demo_path, open_cube
        >>> pv = pv_slice(open_cube(demo_path("disk")), [(10.0, 20.0), (60.0, 52.0)])
        >>> pv.write(pathlib.Path(tempfile.mkdtemp()) / "pv.fits").name
        'pv.fits'
        """
        return write_map(self, path, overwrite=overwrite)


def _vertices_in_pixels(cube, path):
    """The path's vertices as pixel (x, y), from pixel pairs or SkyCoords."""
    from astropy.coordinates import SkyCoord

    celestial = cube.wcs.celestial
    if isinstance(path, SkyCoord) or (len(path) and all(isinstance(p, SkyCoord) for p in path)):
        coords = path if isinstance(path, SkyCoord) else SkyCoord(list(path))
        try:
            x, y = celestial.world_to_pixel(coords)
        except Exception as exc:  # astropy raises several types for unreachable coordinates
            raise RegionError(f"cannot place the path's sky coordinates on {source_name(cube)} ({exc})") from None
        vertices = np.column_stack([np.atleast_1d(x), np.atleast_1d(y)]).astype(float)
    else:
        try:
            vertices = np.array(path, dtype=float)
        except (TypeError, ValueError):
            raise RegionError(f"a path is a list of pixel (x, y) pairs or of SkyCoords; got {path!r}") from None
    if vertices.ndim != 2 or vertices.shape[1] != 2 or len(vertices) < 2:
        raise RegionError(
            f"a path needs at least two vertices, each a pixel (x, y) pair or a SkyCoord; got shape {vertices.shape}"
        )
    if not np.all(np.isfinite(vertices)):
        raise RegionError(f"the path has non-finite vertices: {vertices.tolist()}")
    return vertices


def _sample_path(vertices, scale, step):
    """Sample positions every ``step`` arcsec along the path, the sky direction across it, and the offsets.

    ``scale`` is the celestial pixel-scale matrix in arcsec per pixel, taking
    pixel offsets (dx, dy) to offsets on the projection plane.
    """
    segments = np.diff(vertices, axis=0)
    sky_lengths = np.hypot(*(scale @ segments.T))
    keep = sky_lengths > 0
    if not keep.any():
        raise RegionError("the path has zero length; give two different vertices")
    starts, segments, sky_lengths = vertices[:-1][keep], segments[keep], sky_lengths[keep]
    cumulative = np.concatenate([[0.0], np.cumsum(sky_lengths)])
    offsets = np.arange(int(np.floor(cumulative[-1] / step + 1e-9)) + 1) * step
    index = np.clip(np.searchsorted(cumulative, offsets, side="right") - 1, 0, len(segments) - 1)
    fraction = (offsets - cumulative[index]) / sky_lengths[index]
    centre = starts[index] + fraction[:, None] * segments[index]
    # The unit sky direction along each segment, turned by 90 degrees, back in pixels: one arcsec across.
    along = (scale @ segments.T) / sky_lengths
    across_sky = np.vstack([-along[1], along[0]])
    across = np.linalg.solve(scale, across_sky).T[index]
    return centre, across, offsets


def _geometry(cube, width):
    """The pixel-scale matrix (arcsec per pixel), the one-pixel step (arcsec) and the samples across ``width``."""
    celestial = cube.wcs.celestial
    scale = celestial.pixel_scale_matrix * 3600.0 * np.array(
        [[u.Unit(unit or "deg").to(u.deg) for unit in celestial.wcs.cunit]]).T  # arcsec per pixel
    step = float(np.min(np.hypot(*scale)))  # one pixel along its smaller side
    if isinstance(width, u.Quantity):
        try:
            width_pixels = width.to_value(u.arcsec) / step
        except u.UnitConversionError:
            raise UnitMismatchError(f"width must be a number of pixels or an angle; got {width}") from None
    else:
        try:
            width_pixels = float(width)
        except (TypeError, ValueError):
            raise UnitMismatchError(f"width must be a number of pixels or an angle; got {width!r}") from None
    if not np.isfinite(width_pixels) or width_pixels <= 0:
        raise RegionError(f"width must be positive; got {width}")
    return scale, step, max(1, int(round(width_pixels)))


def path_band(cube, path, width=1):
    """The two edges of the strip a `pv_slice` of ``width`` averages, as pixel polylines (for drawing).

    The slice averages ``n`` samples one pixel apart across the path (``n``:
    ``width`` rounded to whole pixel steps), each standing for one pixel, so
    the strip reaches ``n / 2`` pixel steps either side of the centre line,
    perpendicular on the sky. Each segment's edges are offset on their own
    (corners are not joined).

    Parameters
    ----------
    cube, path, width
        As for `pv_slice`.

    Returns
    -------
    one_side, other_side : ndarray, shape (2 * n_segments, 2)
        Pixel (x, y) of each segment's two ends, shifted to one side of the path
        and to the other; empty (shape (0, 2)) when the strip is one pixel wide.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> one_side, other_side = path_band(open_cube(demo_path("disk")), [(10.0, 20.0), (60.0, 20.0)], width=5)
    >>> one_side.round(6).tolist(), other_side.round(6).tolist()
    ([[10.0, 17.5], [60.0, 17.5]], [[10.0, 22.5], [60.0, 22.5]])
    """
    vertices = _vertices_in_pixels(cube, path)
    scale, step, n_across = _geometry(cube, width)
    if n_across == 1:
        return np.empty((0, 2)), np.empty((0, 2))
    segments = np.diff(vertices, axis=0)
    sky = scale @ segments.T
    lengths = np.hypot(*sky)
    keep = lengths > 0
    if not keep.any():
        raise RegionError("the path has zero length; give two different vertices")
    along = sky[:, keep] / lengths[keep]
    # The sky direction across the path (as in `_sample_path`), back in pixels, n / 2 steps long.
    across = np.linalg.solve(scale, np.vstack([-along[1], along[0]])).T * (n_across * step / 2)
    ends = np.stack([vertices[:-1][keep], vertices[1:][keep]], axis=1)  # (segments, 2 ends, xy)
    return (ends + across[:, None, :]).reshape(-1, 2), (ends - across[:, None, :]).reshape(-1, 2)


def _bilinear_weights(x, y, shape):
    """Sparse (n_samples, n_pixels) bilinear weights and the pixel indices they refer to.

    Same values as ``map_coordinates(order=1)`` inside the image; a sample
    outside ``[0, n - 1]`` on either axis gets no weights (NaN later).
    """
    from scipy.sparse import csr_matrix

    ny, nx = shape
    inside = (x >= 0) & (x <= nx - 1) & (y >= 0) & (y <= ny - 1)
    x0 = np.clip(np.floor(x), 0, max(nx - 2, 0)).astype(int)
    y0 = np.clip(np.floor(y), 0, max(ny - 2, 0)).astype(int)
    fx, fy = x - x0, y - y0
    rows, columns, weights = [], [], []
    for dy, dx, w in ((0, 0, (1 - fy) * (1 - fx)), (0, 1, (1 - fy) * fx), (1, 0, fy * (1 - fx)), (1, 1, fy * fx)):
        # Zero weights are not stored, so that a blank pixel beside the sample does not blank it.
        use = inside & (w > 0)
        rows.append(np.flatnonzero(use))
        columns.append(np.minimum(y0[use] + dy, ny - 1) * nx + np.minimum(x0[use] + dx, nx - 1))
        weights.append(w[use])
    rows, columns, weights = np.concatenate(rows), np.concatenate(columns), np.concatenate(weights)
    pixels, compact = np.unique(columns, return_inverse=True)
    matrix = csr_matrix((weights, (rows, compact)), shape=(x.size, pixels.size))
    return matrix, pixels, inside


def _channel_range(cube, window, rest_frequency, z, convention):
    n = cube.shape[0]
    if window is None:
        return slice(0, n)
    chosen = np.flatnonzero(channel_mask(cube, window, rest_frequency=rest_frequency, z=z, convention=convention,
                                         what="window"))
    return slice(int(chosen.min()), int(chosen.max()) + 1)


def _gather(cube, channels, pixels, nx):
    """The cube's values at flat pixel indices ``pixels`` for ``channels``: (n_channels, n_pixels) float32."""
    ys, xs = np.divmod(pixels, nx)
    data = cube_array(cube)
    if data is not None and custom_mask(cube, data) is None:
        view = data[channels]
        box = view[:, ys.min():ys.max() + 1, xs.min():xs.max() + 1]
        prefetch_if_cold(box)  # a cold cube: announce the rows the path crosses before reading them
        return np.asarray(view[:, ys, xs], dtype=np.float32)
    # Cubes computed lazily or with their own mask: read the bounding box through spectral-cube.
    box = (channels, slice(ys.min(), ys.max() + 1), slice(xs.min(), xs.max() + 1))
    values = cube[box].filled_data[:].value
    return np.asarray(values[:, ys - ys.min(), xs - xs.min()], dtype=np.float32)


def pv_slice(cube, path, width=1, *, window=None, rest_frequency=None, z=0.0, convention="radio"):
    """A position-velocity slice of ``cube`` along a line or polyline.

    See the module docstring for the sampling and its sources.

    Parameters
    ----------
    cube : SpectralCube
        As returned by `open_cube`.
    path : sequence of (x, y) pixel pairs, or of SkyCoord, or a SkyCoord array
        At least two vertices; pixel coordinates are 0-based (numpy) positions.
    width : float or Quantity [angle]
        Width averaged across the path: pixels (1 = the centre line only), or
        an angle (e.g. ``1.5 * u.arcsec``), rounded to whole pixel steps.
    window : Quantity, shape (2,), optional
        Spectral range to read (any spectral unit); the whole band by default.
    rest_frequency, z, convention
        For a ``window`` in velocities (see `axis_in`).

    Returns
    -------
    PVSlice

    Raises
    ------
    RegionError
        Fewer than two vertices, a zero-length path, or a path wholly off the image.
    UnitMismatchError
        ``width`` not a number or an angle.
    SpectralRangeError
        ``window`` outside the band.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> pv = pv_slice(open_cube(demo_path("disk")), [(10.0, 20.0), (60.0, 52.0)],
    ...               window=(1250, 1680) * u.km / u.s, rest_frequency=230.538 * u.GHz)
    >>> pv.data.shape
    (68, 60)
    """
    vertices = _vertices_in_pixels(cube, path)
    scale, step, n_across = _geometry(cube, width)
    across_offsets = (np.arange(n_across) - (n_across - 1) / 2) * step  # arcsec, one pixel apart

    centre, across, offsets = _sample_path(vertices, scale, step)
    points = centre[:, None, :] + across_offsets[None, :, None] * across[:, None, :]
    # Rounding in the degree-arcsec-pixel conversions leaves samples 1e-12 off a pixel centre; snap them, so
    # that a blank neighbour with a vanishing weight does not blank a sample that sits on a pixel.
    points = np.round(points, 9)
    x, y = points[..., 0].ravel(), points[..., 1].ravel()
    ny, nx = cube.shape[1:]
    matrix, pixels, inside = _bilinear_weights(x, y, (ny, nx))
    if not inside.any():
        raise RegionError(
            f"the path {vertices.tolist()} lies wholly outside {source_name(cube)} (image of {nx} x {ny} pixels); "
            "move it onto the image"
        )
    channels = _channel_range(cube, window, rest_frequency, z, convention)
    values = _gather(cube, channels, pixels, nx)
    samples = np.asarray(matrix @ values.T)            # (n_points, n_channels)
    samples[~inside] = np.nan
    samples = samples.reshape(len(offsets), n_across, -1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # columns wholly off the image stay NaN
        averaged = np.nanmean(samples, axis=1) if n_across > 1 else samples[:, 0]
    spectral_wcs = cube.wcs.sub(["spectral"]).slice((channels,))
    return PVSlice(
        data=u.Quantity(averaged.T, cube.unit, copy=False),
        offset=offsets * u.arcsec,
        spectral_axis=cube.spectral_axis[channels],
        channels=channels,
        vertices=vertices,
        x=centre[:, 0],
        y=centre[:, 1],
        width=float(n_across),
        beam=map_beam(cube, channels),
        spectral_wcs=spectral_wcs,
        source=source_name(cube),
    )
