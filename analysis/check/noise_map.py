"""How the noise varies across the field: a smooth noise map, and channel extremes in units of it.

Primary-beam-corrected images (the usual interferometer delivery) carry a
noise that rises from the pointing centre to the field's edge: the flat
image noise divided by the primary-beam response (common practice). A check
with one rms per channel then overstates the noise at the centre and takes
the noise peaks of the edge for lines. `spatial_noise` turns each pixel's
measured noise into a smooth, well-determined map (and says whether the
noise varies, and whether it looks primary-beam corrected);
`noise_scaled_extremes` then finds every channel's highest and lowest value
in units of each pixel's own noise, in one bounded-memory pass over the cube
(`blocks.run_blocks`). `check_cube` uses both.

Examples
--------
>>> import numpy as np
>>> flat = spatial_noise(np.random.default_rng(1).normal(1.0, 0.02, (64, 64)))
>>> bool(flat.varies)
False
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np
from numpy.polynomial import legendre
from scipy.ndimage import binary_erosion
from scipy.stats import f as f_distribution

from ..blocks import plane_blocks, run_blocks, spectra_blocks
from ..errors import CubeloupeError
from ..noise import MAD_TO_SIGMA
from ..row_statistics import row_extremes, row_medians
from .grid_noise import MAD_EFFICIENCY, channel_rms_from_grid, correlation_stride, grid_noise_statistics, row_mads

__all__ = ["SpatialNoise", "spatial_noise", "pixel_noise_map", "NoiseScaledExtremes", "noise_scaled_extremes"]

# The noise map follows the method of background and rms maps of survey images: a mesh of
# boxes, a robust value per box, a smooth surface through them (Bertin & Arnouts 1996, A&AS
# 117, 393). Here the value is the median of log(pixel noise) over the box's pixels, so that
# lines lifting less than half of a box do not move it (a lower quantile would resist more
# lines, but where the noise rises steeply it follows the quieter side of the box and
# flattens the map towards the field's edge: 3.6 % low at a 20 % primary-beam cut, measured),
# and the surface is a 2-D Legendre polynomial in log(noise) fitted by weighted least squares,
# which carries the rise of a primary-beam-corrected field on to its very edge (the log of a
# Gaussian primary beam is a quadratic; degree 4 also follows beams with broader wings).
# Boxes: about NOISE_BOXES along the longer image axis, at least MIN_BOX_PIXELS pixels and two
# beams across.
NOISE_BOXES = 24
MIN_BOX_PIXELS = 8
# Boxes with data in less than this fraction of their pixels are left out.
MIN_BOX_FILL = 0.25
NOISE_MAP_DEGREE = 4
# A polynomial degree is fitted only with at least this many boxes per coefficient.
BOXES_PER_TERM = 4
# The degree kept is the lowest that no higher degree beats at this false-alarm probability
# (nested-model F test, common practice).
DEGREE_P_VALUE = 0.01
# The noise counts as varying across the field, and detections are judged against each
# pixel's own noise, when a flat field is rejected at NOISE_VARIATION_P_VALUE (F test) and the
# noisiest pixel is at least NOISE_VARIATION above the quietest: left untreated, a 5 % excess
# at 6 sigma multiplies the noise peaks there by about exp(36 x 0.05) = 6.
NOISE_VARIATION_P_VALUE = 1e-3
NOISE_VARIATION = 0.05
# A varying noise looks primary-beam corrected when the median along the field's edge is at
# least PBCOR_EDGE_RISE times the quietest part and nearly all the edge (95 %) lies above
# 1 + (PBCOR_EDGE_RISE - 1) / 2: the noise rises towards every edge (common practice:
# pbcor noise is the flat noise over the primary-beam response, which falls from the pointing
# centre outwards).
PBCOR_EDGE_RISE = 1.2


@dataclass(frozen=True)
class SpatialNoise:
    """How the noise varies across the field: a smooth map relative to its quietest part.

    Attributes
    ----------
    relative : ndarray, shape (ny, nx)
        Each pixel's noise over the noise of the quietest part of the field
        (1 there); NaN where the cube has no data.
    relative_error : ndarray, shape (ny, nx)
        Standard error of ``log(relative)`` from the fit (a fraction); 0
        when the map is not measured.
    varies : bool
        The variation is significant (a flat field rejected at
        ``NOISE_VARIATION_P_VALUE``) and matters (the noisiest pixel at
        least ``NOISE_VARIATION`` above the quietest): `check_cube` then
        judges detections against each pixel's own noise.
    primary_beam_corrected : bool
        The noise rises towards every edge of the field (see
        ``PBCOR_EDGE_RISE``), as in a primary-beam-corrected image.
    edge_to_centre : float
        Median of ``relative`` along the edge of the field (the outermost
        pixels with data): the noise there over the quietest part's.
    highest : float
        Largest value of ``relative``.
    quietest : tuple of int
        ``(y, x)`` of the pixel of lowest noise (numpy order).
    p_value : float or None
        False-alarm probability of the variation for a flat field (F test
        of the fitted surface against a constant); None when the field has
        too few boxes to tell.
    degree : int
        Degree of the fitted polynomial (0: flat).
    box_pixels : int
        Side of the boxes, in pixels.
    n_boxes : int
        Boxes behind the fit (after outliers were left out).
    per_pixel : bool
        The map is each pixel's own noise (`pixel_noise_map`, for fields too
        small for a smooth map), relative to the median pixel's.
    """

    relative: np.ndarray
    relative_error: np.ndarray
    varies: bool
    primary_beam_corrected: bool
    edge_to_centre: float
    highest: float
    quietest: tuple
    p_value: object
    degree: int
    box_pixels: int
    n_boxes: int
    per_pixel: bool = False

    @property
    def measured(self):
        """Whether the field held enough boxes for a map (else ``relative`` is 1 wherever there are data)."""
        return self.p_value is not None


def _legendre_terms(degree):
    """Index pairs (i, j) of the products L_i(y) L_j(x) of total degree at most ``degree``."""
    return [(i, j) for i in range(degree + 1) for j in range(degree + 1 - i)]


def _fit(design, values, weights):
    """Weighted least squares: coefficients, residuals, weighted residual sum of squares, (A^T W A)^-1."""
    root = np.sqrt(weights)
    weighted = design * root[:, None]
    coefficients, *_ = np.linalg.lstsq(weighted, values * root, rcond=None)
    residual = values - design @ coefficients
    return coefficients, residual, float(np.sum(weights * residual**2)), np.linalg.pinv(weighted.T @ weighted)


def _f_test(rss_low, terms_low, rss_high, terms_high, n):
    """False-alarm probability that the higher model improves on the lower one by chance (nested F test)."""
    extra, remaining = terms_high - terms_low, n - terms_high
    if extra <= 0 or remaining <= 0:
        return 1.0
    if rss_high <= 0:
        return 0.0 if rss_low > 0 else 1.0
    statistic = max(rss_low - rss_high, 0.0) / extra / (rss_high / remaining)
    return float(f_distribution.sf(statistic, extra, remaining))


def _box_statistics(log_noise, side, thin):
    """Median, count and centroid (pixel coordinates) of the finite values of each box of a thinned map."""
    rows, columns = log_noise.shape
    n_y, n_x = -(-rows // side), -(-columns // side)
    padded = np.full((n_y * side, n_x * side), np.nan)
    padded[:rows, :columns] = log_noise

    def boxed(values):
        return values.reshape(n_y, side, n_x, side).transpose(0, 2, 1, 3).reshape(n_y * n_x, side * side)

    values = boxed(padded)
    finite = np.isfinite(values)
    count = finite.sum(axis=1)
    y, x = np.mgrid[0:n_y * side, 0:n_x * side]
    with np.errstate(invalid="ignore", divide="ignore"):
        centre_y = np.where(finite, boxed(y * thin), 0).sum(axis=1) / count
        centre_x = np.where(finite, boxed(x * thin), 0).sum(axis=1) / count
    median = row_medians(values) if values.size else np.zeros(0)
    return median, count, centre_y, centre_x


def _grid_quadratic_form(covariance, terms, basis_y, basis_x):
    """``a(p)^T C a(p)`` at every pixel p of the grid, with ``a`` the products of the two bases.

    Summed over pairs of row factors, one image at a time, so that memory
    stays at one image whatever the number of terms.
    """
    degree = basis_y.shape[0] - 1
    index = {term: k for k, term in enumerate(terms)}
    out = np.zeros((basis_y.shape[1], basis_x.shape[1]))
    for i in range(degree + 1):
        for k in range(degree + 1):
            along_x = np.zeros(basis_x.shape[1])
            for j in range(degree + 1 - i):
                for m in range(degree + 1 - k):
                    along_x += covariance[index[(i, j)], index[(k, m)]] * basis_x[j] * basis_x[m]
            if along_x.any():
                out += np.outer(basis_y[i] * basis_y[k], along_x)
    return out


def spatial_noise(pixel_noise, *, beam_pixels=None):
    """Smooth map of the noise across the field, relative to the field's quietest part.

    The field is cut into boxes; each box gets the median of
    ``log(pixel_noise)`` over its pixels with data, which a source filling
    less than half of the box does not move; a 2-D Legendre polynomial in
    ``log(noise)`` is fitted through the boxes by weighted least squares
    (weights: the pixels with data in each box), leaving out boxes more than
    4 robust scatters from it (repeated until none is). Its degree is the
    lowest (0, 1, 2, 3 or 4, as the number of boxes allows) that no higher
    degree beats (nested F test at ``DEGREE_P_VALUE``). The map is the
    exponential of the polynomial divided by its lowest value where there
    are data. See the constants of this section for the rules.

    Parameters
    ----------
    pixel_noise : Quantity or ndarray, shape (ny, nx)
        A noisy estimate of each pixel's noise (e.g. `ContinuumFreePeaks`
        ``step_noise``); NaN or 0 where there are no data.
    beam_pixels : float, optional
        Beam (or noise correlation) FWHM in pixels: boxes span at least two.

    Returns
    -------
    SpatialNoise

    Examples
    --------
    >>> y, x = np.mgrid[0:96, 0:96]
    >>> beam = np.exp(-4 * np.log(2) * ((x - 47.5) ** 2 + (y - 47.5) ** 2) / 80.0**2)  # FWHM 80 pixels
    >>> noise = np.random.default_rng(1).normal(1.0, 0.1, (96, 96)) / beam
    >>> found = spatial_noise(noise)
    >>> found.primary_beam_corrected, round(float(found.highest * beam.min()), 1)  # the injected rise
    (True, 1.0)
    """
    values = np.asarray(u.Quantity(pixel_noise).value, dtype=float)
    if values.ndim != 2:
        raise ValueError(f"pixel_noise must be an image (ny, nx); got shape {values.shape}")
    ny, nx = values.shape
    with np.errstate(invalid="ignore", divide="ignore"):
        has_data = np.isfinite(values) & (values > 0)
        log_noise = np.where(has_data, np.log(np.where(has_data, values, 1.0)), np.nan)
    side = max(MIN_BOX_PIXELS, -(-max(ny, nx) // NOISE_BOXES),
               int(np.ceil(2 * beam_pixels)) if beam_pixels else 0)
    # Big images are thinned to at most 16 x 16 values per box first: plenty for a median.
    thin = max(1, side // 16)
    box_side = max(1, side // thin)
    median, count, centre_y, centre_x = _box_statistics(log_noise[::thin, ::thin], box_side, thin)
    kept = np.isfinite(median) & (count >= max(4, MIN_BOX_FILL * box_side**2))

    def flat_result(n_boxes, p_value=None):
        relative = np.where(has_data, 1.0, np.nan)
        return SpatialNoise(relative=relative, relative_error=np.zeros((ny, nx)), varies=False,
                            primary_beam_corrected=False, edge_to_centre=1.0, highest=1.0,
                            quietest=(int(ny // 2), int(nx // 2)), p_value=p_value, degree=0, box_pixels=int(side),
                            n_boxes=int(n_boxes))

    def n_terms(degree):
        return (degree + 1) * (degree + 2) // 2

    degrees = [d for d in range(NOISE_MAP_DEGREE + 1) if kept.sum() >= BOXES_PER_TERM * n_terms(d)]
    if len(degrees) < 2:
        return flat_result(kept.sum())

    # pixel coordinates mapped onto [-1, 1], the Legendre polynomials' own interval
    def scaled(coordinate, length):
        half = max((length - 1) / 2, 0.5)
        return (coordinate - (length - 1) / 2) / half

    top = degrees[-1]
    terms = _legendre_terms(top)
    columns = [i * (top + 1) + j for i, j in terms]
    full = legendre.legvander2d(scaled(centre_y, ny), scaled(centre_x, nx), [top, top])
    design_all = np.nan_to_num(full)[:, columns]
    weights_all = count / max(float(np.mean(count[kept])), 1.0)
    for _ in range(10):
        _, residual, _, _ = _fit(design_all[kept], median[kept], weights_all[kept])
        spread = np.full(kept.shape, np.inf)
        normalised = np.abs(residual) * np.sqrt(weights_all[kept])
        scatter = MAD_TO_SIGMA * np.median(normalised)
        if not scatter > 0:
            break
        spread[kept] = normalised / scatter
        outliers = kept & (spread > 4.0)
        if not outliers.any() or kept.sum() - outliers.sum() < BOXES_PER_TERM * n_terms(top):
            break
        kept &= ~outliers
    n = int(kept.sum())
    design, target, weights = design_all[kept], median[kept], weights_all[kept]
    fits = {}
    for degree in degrees:
        use = [k for k, (i, j) in enumerate(terms) if i + j <= degree]
        fits[degree] = (use, *_fit(design[:, use], target, weights))
    chosen = degrees[-1]
    for degree in degrees:
        if all(_f_test(fits[degree][3], len(fits[degree][0]), fits[higher][3], len(fits[higher][0]), n)
               >= DEGREE_P_VALUE for higher in degrees if higher > degree):
            chosen = degree
            break
    # the false-alarm probability of the variation: of the degree kept, or of the highest when flat
    tested = chosen or degrees[-1]
    p_value = _f_test(fits[0][3], 1, fits[tested][3], len(fits[tested][0]), n)
    if chosen == 0:
        return flat_result(n, p_value)
    use, coefficients, _, rss, inverse = fits[chosen]
    matrix = np.zeros((top + 1, top + 1))
    for k, coefficient in zip(use, coefficients):
        matrix[terms[k]] = coefficient
    rows, cols = scaled(np.arange(ny), ny), scaled(np.arange(nx), nx)
    log_map = legendre.leggrid2d(rows, cols, matrix)
    lowest = float(np.min(log_map[has_data]))
    relative = np.where(has_data, np.exp(log_map - lowest), np.nan)
    covariance = np.zeros((len(terms), len(terms)))
    covariance[np.ix_(use, use)] = rss / max(n - len(use), 1) * inverse
    basis_y = legendre.legvander(rows, top).T
    basis_x = legendre.legvander(cols, top).T
    relative_error = np.sqrt(np.clip(_grid_quadratic_form(covariance, terms, basis_y, basis_x), 0, None))

    edge = has_data & ~binary_erosion(has_data, border_value=0)
    edge_values = relative[edge] if edge.any() else relative[has_data]
    edge_to_centre = float(np.median(edge_values))
    highest = float(np.nanmax(relative))
    quietest = np.unravel_index(np.nanargmin(relative), relative.shape)
    varies = bool(p_value < NOISE_VARIATION_P_VALUE and highest >= 1 + NOISE_VARIATION)
    rising = float(np.percentile(edge_values, 5)) >= 1 + (PBCOR_EDGE_RISE - 1) / 2
    return SpatialNoise(
        relative=relative, relative_error=relative_error, varies=varies,
        primary_beam_corrected=bool(varies and edge_to_centre >= PBCOR_EDGE_RISE and rising),
        edge_to_centre=edge_to_centre, highest=highest, quietest=tuple(int(i) for i in quietest),
        p_value=float(p_value), degree=int(chosen), box_pixels=int(side), n_boxes=n,
    )


# --------------------------------------------------------------------------- each pixel's own noise


def _pixel_step_mads(data):
    """Kernel over blocks of spectra: the MAD of each pixel's differences between neighbouring channels."""
    flat = data.reshape(data.shape[0], -1)
    steps = np.ascontiguousarray((flat[1:] - flat[:-1]).T)
    return {"mad": row_mads(steps), "n": np.isfinite(steps).sum(axis=1)}


def pixel_noise_map(cube, *, client=None, progress=None, cancel=None):
    """Each pixel's own noise, from the differences of all its neighbouring channels, relative to the median pixel's.

    For fields too small for the smooth map of `spatial_noise` (a few
    pixels by a few tens, as single-dish maps of one source often are), so
    that each pixel is still judged against its own noise: a noisier edge
    row then makes no detection. The differences between neighbouring
    channels cancel continuum and any line broader than a few channels, so
    the estimate is that of the pixel's line-free noise; 1.4826 x their MAD
    (robust against the few channels at a line's edges). The common factor
    of channel correlation cancels in the ratio to the median pixel. One pass
    over the cube in blocks of spectra (`blocks.spectra_blocks`).

    Parameters
    ----------
    cube : SpectralCube
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    SpatialNoise
        ``per_pixel`` True; ``relative`` is 1 at the median pixel and NaN
        where there are no data; ``relative_error`` is the standard error
        of each pixel's log noise (the MAD of n values scatters by 1.1664 /
        sqrt(n), Rousseeuw & Croux 1993, JASA 88, 1273, here with n halved
        because neighbouring differences share a channel); ``p_value`` is None.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> data = rng.normal(0.0, 1.0, (400, 6, 20))
    >>> data[:, 0] *= 3  # a noisier edge row
    >>> found = pixel_noise_map(SpectralCube(data * u.K, wcs=small_wcs))  # doctest: +SKIP
    """
    n_chan, ny, nx = cube.shape
    mad = np.full((ny, nx), np.nan)
    count = np.zeros((ny, nx))

    def consume(block, result):
        shape = (block.rows.stop - block.rows.start, block.columns.stop - block.columns.start)
        mad[block.rows, block.columns] = result["mad"].reshape(shape)
        count[block.rows, block.columns] = result["n"].reshape(shape)

    run_blocks(cube, _pixel_step_mads, spectra_blocks(cube.shape, itemsize=4), consume, dtype=np.float32,
               client=client, progress=progress, cancel=cancel)
    has_data = np.isfinite(mad) & (mad > 0)
    if not has_data.any():
        raise CubeloupeError(f"no pixel of the {cube.shape} cube has data in two neighbouring channels; "
                             "there is no noise to measure")
    relative = np.where(has_data, mad / np.median(mad[has_data]), np.nan)
    with np.errstate(divide="ignore"):
        error = np.where(has_data, MAD_EFFICIENCY * np.sqrt(2.0 / np.maximum(count, 1)), 0.0)
    edge = has_data & ~binary_erosion(has_data, border_value=0)
    quietest = np.unravel_index(np.nanargmin(relative), relative.shape)
    highest = float(np.nanmax(relative))
    return SpatialNoise(
        relative=relative, relative_error=error, varies=False, primary_beam_corrected=False,
        edge_to_centre=float(np.median(relative[edge])) if edge.any() else 1.0, highest=highest,
        quietest=tuple(int(i) for i in quietest), p_value=None, degree=0, box_pixels=1,
        n_boxes=int(has_data.sum()), per_pixel=True,
    )


@dataclass(frozen=True)
class NoiseScaledExtremes:
    """Result of `noise_scaled_extremes`: per channel, the extremes of the data in units of each pixel's noise.

    Attributes
    ----------
    peaks, troughs : Quantity, shape (n_channels,)
        Highest and lowest value over pixels of ``(data - level) / scale``:
        intensities as they would be at the quietest part of the field;
        NaN for wholly blank channels.
    positions, trough_positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each; -1 for blank channels.
    rms : Quantity, shape (n_channels,)
        Robust rms of ``data / relative`` over a regular grid of pixels
        (`grid_noise.channel_rms_from_grid`: 1.4826 x MAD about the
        channel's median, or from the differences with the neighbouring
        channels where emission lifts that): the rms of the quietest part of
        the field, measured over the whole field.
    grid : GridNoise or None
        How ``rms`` was measured.
    """

    peaks: u.Quantity
    positions: np.ndarray
    troughs: u.Quantity
    trough_positions: np.ndarray
    rms: u.Quantity
    grid: object = None


@dataclass(frozen=True, eq=False)
class _NoiseScaledExtremes:
    """Kernel over whole channel images: extremes and robust rms of (data - level) / scale."""

    level: np.ndarray      # (n_pixels,) float32: each pixel's level (0 where blank)
    inverse: np.ndarray    # (n_pixels,) float32: 1 / scale (1 where blank)
    sample: np.ndarray     # pixels of the grid for the rms
    grid_inverse: np.ndarray  # (len(sample),) float32: 1 / relative at the grid pixels
    stride: int = 1  # of the lag MADs: see grid_noise.correlation_stride

    def __call__(self, data):
        n_chan = data.shape[0]
        # The block is this kernel's own copy (see blocks.run_blocks): work in place.
        values = data.reshape(n_chan, -1)
        # The rms from the data themselves, as noise.py measures it: data less a level
        # of a few channels would carry that level's scatter.
        grid = np.take(values, self.sample, axis=1)  # C order, as the row medians want
        grid *= self.grid_inverse
        np.subtract(values, self.level, out=values)
        np.multiply(values, self.inverse, out=values)
        peak, where, trough, where_low, _ = row_extremes(values, count=False)
        return {"peak": peak, "where": where, "trough": trough, "where_low": where_low,
                **grid_noise_statistics(grid, stride=self.stride)}


def noise_scaled_extremes(cube, level, relative, *, scale=None, rms_pixels=None, stride=1, pixels_per_sample=1.0,
                          client=None, progress=None, cancel=None):
    """Per channel: highest and lowest ``(data - level) / scale`` over the field, and the robust rms of the field.

    One read of the cube in blocks of whole channel images (`blocks.plane_blocks`,
    bounded memory: the maps and one block). With ``scale`` the relative
    noise of each pixel (a `SpatialNoise` map), a peak at the noisy edge of a
    primary-beam-corrected field counts for what it is against its own
    noise, and the rms over the whole field is that of its quietest part.

    Parameters
    ----------
    cube : SpectralCube
    level : Quantity or ndarray, shape (ny, nx)
        Each pixel's continuum level (`ContinuumFreePeaks` ``continuum_level``).
    relative : ndarray, shape (ny, nx)
        Each pixel's noise relative to the quietest part (`SpatialNoise`
        ``relative``; NaN where there are no data).
    scale : ndarray, shape (ny, nx), optional
        What the extremes are divided by; default ``relative``. `check_cube`
        widens ``relative`` where it is uncertain.
    rms_pixels : ndarray of bool, shape (ny, nx), optional
        Pixels the rms may use (default all; `check_cube` leaves out
        pixels with significant continuum, as for the uniform-noise rms).
    stride : int
        The rms uses every ``stride``-th pixel of every ``stride``-th row.
    pixels_per_sample : float
        Grid pixels per independent noise sample (see
        `grid_noise.channel_rms_from_grid`).
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    NoiseScaledExtremes

    Examples
    --------
    >>> spectra = continuum_free_peaks(cube)  # doctest: +SKIP
    >>> field = spatial_noise(spectra.step_noise)  # doctest: +SKIP
    >>> extremes = noise_scaled_extremes(cube, spectra.continuum_level, field.relative)  # doctest: +SKIP
    """
    n_chan, ny, nx = cube.shape
    relative = np.asarray(relative, dtype=float)
    scale = relative if scale is None else np.asarray(scale, dtype=float)
    level = np.nan_to_num(np.asarray(u.Quantity(level).value, dtype=float)).ravel()
    usable = (np.isfinite(relative) & (relative > 0) & np.isfinite(scale) & (scale > 0)).ravel()
    if not usable.any():
        raise CubeloupeError(f"the noise map of the {cube.shape} cube has no pixel with data; nothing to scale by")
    grid = np.zeros((ny, nx), dtype=bool)
    grid[::max(1, int(stride)), ::max(1, int(stride))] = True
    if rms_pixels is not None:
        grid &= np.asarray(rms_pixels, dtype=bool)
    sample = np.flatnonzero(grid.ravel() & usable)
    if sample.size == 0:
        sample = np.flatnonzero(usable)
    with np.errstate(divide="ignore", invalid="ignore"):
        inverse = np.where(usable, 1.0 / scale.ravel(), 1.0)
    kernel = _NoiseScaledExtremes(
        level=np.where(usable, level, 0.0).astype(np.float32), inverse=inverse.astype(np.float32),
        sample=sample,
        grid_inverse=(1.0 / relative.ravel()[sample]).astype(np.float32), stride=correlation_stride(n_chan))
    columns = {name: np.full(n_chan, np.nan) for name in ("peak", "trough")}
    where = {name: np.full(n_chan, -1, dtype=int) for name in ("where", "where_low")}
    noise = {"mad": np.full(n_chan, np.nan), "step_mad": np.full(max(n_chan - 1, 0), np.nan),
             "lag2_mad": np.full(max(n_chan - 2, 0), np.nan),
               "curvature_mad": np.full(max(n_chan - 2, 0), np.nan), "n_pixels": np.zeros(n_chan),
             "total": np.zeros(n_chan)}

    def consume(block, result):
        (start, stop), = block.runs
        for name, values in (*columns.items(), *where.items()):
            values[start:stop] = result[name]
        for name, values in noise.items():
            values[start:start + len(result[name])] = result[name]

    blocks = plane_blocks(cube.shape, itemsize=4)
    run_blocks(cube, kernel, blocks, consume, dtype=np.float32, client=client, progress=progress, cancel=cancel)
    unit = u.Unit(cube.unit)
    out = []
    for values, name in ((columns["peak"], "where"), (columns["trough"], "where_low")):
        blank = ~np.isfinite(values)
        values[blank] = np.nan
        position = np.column_stack([where[name] // nx, where[name] % nx])
        position[blank] = -1
        out.extend([u.Quantity(values, unit), position])
    grid_noise = channel_rms_from_grid(**noise, pixels_per_sample=pixels_per_sample)
    return NoiseScaledExtremes(peaks=out[0], positions=out[1], troughs=out[2], trough_positions=out[3],
                               rms=u.Quantity(grid_noise.rms, unit), grid=grid_noise)


# --------------------------------------------------------------------------- the check
