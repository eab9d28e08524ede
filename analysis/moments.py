"""Moment maps over a velocity window, after an optional per-pixel polynomial baseline.

For the intensity ``I_i`` (after the baseline) in window channels of width
``dv_i`` at velocity ``v_i`` (e.g. Sault, Teuben & Wright 1995, the
moment definitions common to radio-astronomy packages; spectral-cube's
``moment`` docstring gives the same formulas):

* moment 0, the integrated intensity: ``M0 = sum I_i dv_i``
* moment 1, the intensity-weighted velocity: ``M1 = sum I_i v_i dv_i / M0``
* moment 2, the velocity dispersion: ``M2 = sqrt(sum I_i (v_i - M1)^2 dv_i / M0)``

All three are linear in the data up to the final ratios, and so is the
least-squares baseline (see `polybaseline`): the baseline is folded into the
weights, and one matrix product per block of pixels gives every sum for every
pixel at once. The same product yields the residual rms on the line-free
channels (``|y|^2 - |Q^T y|^2`` with ``Q`` an orthonormal basis of the
polynomial on those channels) and, for white noise, the exact moment-0
uncertainty ``rms * sqrt(sum w_i^2)`` with ``w`` the folded moment-0 weights.

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import open_cube, demo_path, moment_maps
>>> cube = open_cube(demo_path("disk"))          # CO J=2-1 of a nearby disk galaxy
>>> maps = moment_maps(cube, window=(1250, 1680) * u.km / u.s,
...                    line_free=[(1165, 1230), (1700, 1785)] * u.km / u.s,
...                    rest_frequency=230.538 * u.GHz, order=1)
>>> maps.m0.unit
Unit("Jy km / (beam s)")
"""

import numbers
import weakref
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np

from .beams import map_beam
from .blocks import DEFAULT_BLOCK_BYTES, STREAM_PIXELS, run_blocks, spectra_blocks, streams
from .cubes import check_total_intensity
from .errors import SpectralRangeError
from .polybaseline import BaselineBasis, check_order
from .spectral import axis_in, channel_mask
from .weighted_sums import accumulate
from .windows import line_free_outside_window, window_channels

__all__ = ["MomentMaps", "moment_maps"]

_KMS = u.km / u.s
# Rows of the per-block output: one value per pixel each.
_M0, _M1, _M2, _M0_ERROR, _RMS = range(5)


@dataclass(frozen=True)
class MomentMaps:
    """Moment maps of one window, with their noise.

    Attributes
    ----------
    m0 : Projection
        Integrated intensity (cube unit x km/s, e.g. Jy/beam km/s or K km/s).
    m1 : Projection
        Intensity-weighted velocity (km/s), rest-frame for a line at ``z``.
    m2 : Projection
        Velocity dispersion, the square root of the intensity-weighted
        variance (km/s); NaN where that variance is negative (noise).
    m0_error : Projection or None
        1-sigma uncertainty of ``m0`` for white noise of the per-pixel rms,
        propagated exactly through the baseline; None without line-free channels.
    rms : Projection or None
        Per-pixel rms of the line-free channels after the baseline (cube
        unit); None without line-free channels.
    n_channels : int
        Channels in the window.
    window : Quantity [km/s], shape (2,)
        Velocities of the first and last window channel.
    n_line_free : int
        Line-free channels (0 without).
    order : int or None
        Baseline order, None when no baseline was subtracted.
    clip : float or None
        Moments 1 and 2 used only channels above ``clip`` x rms.
    """

    m0: object
    m1: object
    m2: object
    m0_error: object
    rms: object
    n_channels: int
    window: u.Quantity
    n_line_free: int = 0
    order: object = None
    clip: object = None


@dataclass(frozen=True)
class _Weights:
    """Every weight row needed for one pattern of valid channels."""

    matrix: np.ndarray          # (k, n_sel): m0, m1, m2 sums, then Q^T rows, then solver rows
    n_basis: int                # rows of Q^T (0 without a baseline)
    n_free: int                 # valid line-free channels (0 without)
    dof: int                    # degrees of freedom of the rms
    m0_norm: float              # sqrt(sum of squared folded moment-0 weights)
    design: object = None       # (n_sel, order + 1) baseline basis, kept when clipping


@dataclass(frozen=True, eq=False)
class _MomentKernel:
    """Per-block moment kernel; channels come free-first, then window (see `moment_maps`).

    A pure function of a block of shape (n_sel, ny, nx), returning an array
    (5, ny, nx): m0, m1, m2, m0_error, rms (NaN where undefined).
    """

    velocity: np.ndarray        # (n_sel,) km/s, relative to ``reference``
    width: np.ndarray           # (n_sel,) km/s, positive
    window: np.ndarray          # (n_sel,) bool
    line_free: object           # (n_sel,) bool or None
    order: object               # int or None
    clip: object                # float or None
    reference: float            # km/s, added back to moment 1
    main: object = field(default=None, init=False, repr=False)

    def __post_init__(self):
        object.__setattr__(self, "main", self.weights(np.ones(self.velocity.shape, dtype=bool)))

    @property
    def takes_file_views(self):
        """The compiled sums read slabs straight from the memory map, swapping bytes as they go
        (`weighted_sums`); the numpy path wants native copies."""
        return accumulate is not None

    @property
    def n_free_selected(self):
        return 0 if self.line_free is None else int(self.line_free.sum())

    def weights(self, valid):
        """Weight rows for the channels marked ``valid``; None if nothing can be measured."""
        window = self.window & valid
        if not window.any():
            return None
        rows = np.zeros((3, valid.size))
        rows[0, window] = self.width[window]
        rows[1] = rows[0] * self.velocity
        rows[2] = rows[1] * self.velocity
        if self.line_free is None:
            return _Weights(rows, 0, 0, 0, float(np.sqrt(np.sum(rows[0] ** 2))))
        free = self.line_free & valid
        n_free = int(free.sum())
        if self.order is None:
            if n_free < 1:
                return None
            return _Weights(rows, 0, n_free, n_free, float(np.sqrt(np.sum(rows[0] ** 2))))
        n_basis = self.order + 1
        if n_free < n_basis + 1:
            return None
        basis = BaselineBasis(self.velocity, free, self.order)
        rows = basis.corrected_weights(rows)
        orthonormal, _ = np.linalg.qr(basis.design[free])
        extra = [np.zeros((n_basis, valid.size))]
        extra[0][:, free] = orthonormal.T
        if self.clip is not None:
            solver = np.zeros((n_basis, valid.size))
            solver[:, free] = basis.solver
            extra.append(solver)
        return _Weights(np.vstack([rows, *extra]), n_basis, n_free, n_free - n_basis,
                        float(np.sqrt(np.sum(rows[0] ** 2))), basis.design if self.clip is not None else None)

    def __call__(self, data):
        n_sel, ny, nx = data.shape
        y = data.reshape(n_sel, ny * nx)
        out = np.full((5, ny * nx), np.nan)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            sums, squares = self._sums(self.main, y)
            good = np.isfinite(sums).all(axis=0) & np.isfinite(squares)
            if good.all():
                self._finish(self.main, sums, squares, y, out)
            else:
                where = np.flatnonzero(good)
                part = np.empty((5, where.size))
                self._finish(self.main, sums[:, where], squares[where], y[:, where], part)
                out[:, where] = part
                self._irregular(y[:, ~good], out, np.flatnonzero(~good))
        return out.reshape(5, ny, nx)

    def stream(self, slabs, shape, reread):
        """The same five maps as calling the kernel, from the block's channels a slab at a time.

        Every slab adds its weighted sums to float64 accumulators (compiled: read from the file's
        own bytes; numpy: row-by-row products on a native copy that sits in the L2 cache), so one
        read of the file gives every sum. Pixels whose sums are not finite (blank channels), or whose residual is
        too small a part of ``|y|^2`` to trust, are redone row by row through ``__call__``
        (the block's ``reread``), so results equal the whole-block kernel's.
        """
        n_sel, ny, nx = shape
        if self.clip is not None:  # clipping needs each window channel of each pixel at once
            return self(reread(slice(0, ny)))
        pixels = ny * nx
        main = self.main
        n_free, n_basis = self.n_free_selected, main.n_basis
        window_rows = main.matrix[:3, n_free:].astype(np.float32)
        basis = main.matrix[3:3 + n_basis, :n_free]
        basis32 = basis.astype(np.float32)
        basis64, window64 = np.ascontiguousarray(basis), np.ascontiguousarray(main.matrix[:3, n_free:])
        squares_wanted = main.n_free > 0
        # rows 0-2: window sums; then Q^T y (n_basis rows); then |y|^2 over the line-free channels
        totals = np.zeros((3 + n_basis + 1, pixels))
        part = np.empty(pixels, dtype=np.float32)
        for first, slab in slabs:
            stop = first + slab.shape[0]
            if accumulate is not None:  # one compiled pass over the slab for every sum
                accumulate(slab, first, n_free, basis64, window64, totals)
                continue
            if first < n_free:
                free = slab[:min(stop, n_free) - first]
                columns = slice(first, first + free.shape[0])
                for row in range(n_basis):
                    np.matmul(basis32[row, columns], free, out=part)
                    totals[3 + row] += part
                if squares_wanted:
                    np.einsum("ij,ij->j", free, free, out=part)
                    totals[-1] += part
            if stop > n_free:
                start = max(first, n_free)
                in_window = slab[start - first:]
                columns = slice(start - n_free, stop - n_free)
                for row in range(3):
                    np.matmul(window_rows[row, columns], in_window, out=part)
                    totals[row] += part
        # Only the three moment rows are needed (no clipping here); they reach the line-free
        # channels through the baseline only (see `_products`).
        sums = totals[:3]
        squares = totals[-1] if squares_wanted else np.zeros(pixels)
        if n_basis:
            projected = totals[3:3 + n_basis]
            sums += (main.matrix[:3, :n_free] @ basis.T) @ projected
        out = np.full((5, pixels), np.nan)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            redo = ~(np.isfinite(sums).all(axis=0) & np.isfinite(squares))
            if n_basis and squares_wanted:
                residual = squares - np.einsum("ij,ij->j", projected, projected)
                # Slab sums are float32 over a few channels, added in float64: the residual is good to
                # ~1e-6 of |y|^2, so only pixels where it is under 1e-3 of |y|^2 are redone (rms to 0.05 %).
                redo |= residual < squares * 1e-3
                squares = np.maximum(residual, 0.0)
            good = np.flatnonzero(~redo)
            if good.size == pixels:
                self._finish(main, sums, squares, None, out)
            elif good.size:
                part_out = np.empty((5, good.size))
                self._finish(main, sums[:, good], squares[good], None, part_out)
                out[:, good] = part_out
        out = out.reshape(5, ny, nx)
        # Rows to redo, read a few MB at a time (as whole-block kernels get them).
        step = max(1, DEFAULT_BLOCK_BYTES // max(1, n_sel * nx * 4))
        first_row = None
        for row in [*np.flatnonzero(redo.reshape(ny, nx).any(axis=1)), None]:
            if first_row is not None and (row is None or row >= first_row + step):
                span = slice(first_row, last_row + 1)
                out[:, span] = self(reread(span))
                first_row = None
            if row is not None:
                first_row = int(row) if first_row is None else first_row
                last_row = int(row)
        return out

    def _sums(self, weights, y):
        """Weighted sums (one matrix product) and the line-free residual sum of squares, in float64.

        The product runs in the block's dtype: float32 halves the memory
        traffic, and its rounding (about 1e-7 of the summed magnitudes) stays
        far below the noise of float32 data. The residual sum of squares is
        ``|y|^2 - |Q^T y|^2``; where that difference is small against ``|y|^2``
        (a continuum much brighter than the noise) it would lose digits, so
        those pixels are redone in float64 with the residual formed explicitly.
        """
        n_free, n_basis = self.n_free_selected, weights.n_basis
        sums = self._products(weights, y, n_free, n_basis)
        if not weights.n_free:
            return sums, np.zeros(y.shape[1])
        free = y[:n_free]
        squares = np.einsum("ij,ij->j", free, free).astype(np.float64)
        if not n_basis:
            return sums, squares
        residual = squares - np.sum(sums[3:3 + n_basis] ** 2, axis=0)
        # float32 sums over ~1e3 channels carry a relative error up to ~1e-4 of |y|^2;
        # keep the rms to 0.1 % by redoing pixels where the residual is under 1/20 of it.
        risky = np.flatnonzero(residual < squares / 20.0)
        if risky.size:
            exact = free[:, risky].astype(np.float64)
            basis = weights.matrix[3:3 + n_basis, :n_free]
            exact -= basis.T @ (basis @ exact)
            residual[risky] = np.einsum("ij,ij->j", exact, exact)
        return sums, np.maximum(residual, 0.0)

    @staticmethod
    def _products(weights, y, n_free, n_basis):
        """Every weighted sum of each pixel (``weights.matrix @ y``) in float64, as few short products.

        The moment rows reach the line-free channels only through the baseline, so there they lie
        in the span of the orthonormal basis rows ``Q^T``: ``M[:, free] = (M[:, free] Q) Q^T``.
        Forming ``Q^T y`` once costs ``order + 1`` rows over the line-free channels instead of every
        row over every channel; and one row times a block (a matrix-vector product) runs at memory
        speed where a product with a 5-row matrix does not (2.4x faster on a 1000 x 1024 float32
        block with one BLAS thread, measured for issue #20).
        """
        matrix = weights.matrix
        sums = np.zeros((matrix.shape[0], y.shape[1]))
        window_rows = matrix[:3, n_free:].astype(y.dtype)
        for row in range(3):
            sums[row] = window_rows[row] @ y[n_free:]
        if n_basis:
            basis = matrix[3:3 + n_basis, :n_free]
            projected = np.stack([row.astype(y.dtype) @ y[:n_free] for row in basis]).astype(np.float64)
            sums += (matrix[:, :n_free] @ basis.T) @ projected
        return sums

    def _irregular(self, y, out, columns):
        """Pixels with blank channels: group them by their pattern of valid channels."""
        finite = np.isfinite(y)
        y = np.where(finite, y, 0.0).astype(np.float64)
        keys = np.packbits(finite, axis=0).T
        patterns, inverse = np.unique(keys, axis=0, return_inverse=True)
        for g in range(len(patterns)):
            members = np.flatnonzero(inverse.ravel() == g)
            weights = self.weights(finite[:, members[0]])
            if weights is None:
                continue
            part_y = y[:, members]
            sums, squares = self._sums(weights, part_y)
            part = np.empty((5, members.size))
            self._finish(weights, sums, squares, part_y, part, valid=finite[:, members[0]])
            out[:, columns[members]] = part

    def _finish(self, weights, sums, squares, y, out, valid=None):
        """Turn the weighted sums of some pixels into the five output rows."""
        # In place, into ``out``'s rows: a moment map's fixed cost is these few passes (issue #20).
        m0 = sums[0]
        out[_M0] = m0
        if weights.n_free:
            rms = np.divide(squares, weights.dof, out=out[_RMS])
            np.sqrt(rms, out=rms)
            np.multiply(rms, weights.m0_norm, out=out[_M0_ERROR])
        if self.clip is None:
            s0, s1, s2 = m0, sums[1], sums[2]
        else:
            s0, s1, s2 = self._clipped_sums(weights, sums, y, out[_RMS], valid)
        mean = np.divide(s1, s0, out=out[_M1])
        variance = np.divide(s2, s0, out=out[_M2])
        variance -= mean * mean
        variance[variance < 0] = np.nan
        np.sqrt(variance, out=variance)
        mean += self.reference

    def _clipped_sums(self, weights, sums, y, rms, valid):
        """Moment sums over window channels above clip x rms (after the baseline)."""
        window = np.flatnonzero(self.window)
        intensity = y[window]
        if weights.n_basis:
            start = 3 + weights.n_basis
            coefficients = sums[start:start + weights.n_basis]
            intensity = intensity - weights.design[window] @ coefficients
        keep = intensity > self.clip * rms
        if valid is not None:
            keep &= valid[window][:, None]
        kept = np.where(keep, intensity, 0.0) * self.width[window][:, None]
        velocity = self.velocity[window]
        return kept.sum(axis=0), velocity @ kept, (velocity**2) @ kept


def _check_clip(clip, line_free):
    if clip is None:
        return None
    if isinstance(clip, bool) or not isinstance(clip, numbers.Real) or not np.isfinite(clip) or clip < 0:
        raise SpectralRangeError(f"clip={clip!r} must be a non-negative number of rms (e.g. clip=3) or None")
    if line_free is None:
        raise SpectralRangeError("clip needs line_free ranges: the per-pixel rms comes from the line-free "
                                 "channels; pass e.g. line_free=[(-900, -400), (400, 900)] * u.km / u.s")
    return float(clip)


def _projection(values, unit, sky, beam, what):
    from spectral_cube import Projection

    wcs, mask = sky
    meta = {"cubeloupe_map": what}
    return Projection(values, unit=unit, wcs=wcs, beam=beam, meta=meta, copy=False, mask=mask)


_skies = weakref.WeakKeyDictionary()


def _sky(cube):
    """The celestial WCS and an all-true mask, shared by the maps of every call on ``cube``.

    spectral-cube checks a map's WCS against its mask's by comparing FITS headers (about 3 ms a
    map); a mask remembers a WCS it has accepted, so maps sharing both pay that once (issue #20).
    Kept per cube (cubes are immutable): a moment map of a 300-channel window takes about 30 ms.
    """
    from spectral_cube.masks import BooleanArrayMask

    sky = _skies.get(cube)
    if sky is None:
        wcs = cube.wcs.celestial
        sky = _skies[cube] = wcs, BooleanArrayMask(np.ones(cube.shape[1:], dtype=bool), wcs, shape=cube.shape[1:])
    return sky


def moment_maps(cube, window, *, line_free=None, order=1, rest_frequency=None, z=0.0, convention="radio",
                clip=None, client=None, progress=None, cancel=None, block_shape=None,
                allow_polarisation=False):
    """Moment 0, 1 and 2 maps over a window, after an optional per-pixel baseline.

    Parameters
    ----------
    cube : SpectralCube
        From `open_cube` (memory-mapped or dask-backed); any cube mask set
        with ``cube.with_mask`` is respected.
    window : Quantity, shape (2,) or (n, 2)
        The line's range(s) in any spectral unit.
    line_free : Quantity, shape (2,) or (n, 2), optional
        Line-free ranges, outside the window. They give the per-pixel
        baseline, the rms and ``m0_error``. Without them, no baseline is
        subtracted and ``rms``/``m0_error`` are None.
    order : int or None
        Order (0-5) of the polynomial baseline fitted per pixel on the
        line-free channels (in velocity); None keeps the line-free channels
        for the rms only (for cubes that are already continuum-subtracted).
    rest_frequency : Quantity [frequency], optional
    z : float
    convention : {'radio', 'optical', 'relativistic'}
        How velocities are defined; velocities for a line at ``z`` are
        rest-frame offsets from ``rest_frequency / (1 + z)`` (see `axis_in`).
    clip : float, optional
        For moments 1 and 2 only, use window channels brighter than
        ``clip`` x the pixel's rms (after the baseline). Needs ``line_free``.
        Moment 0 is never clipped, so that its error stays exact.
    client : None, "default" or distributed.Client
        Where to compute: this process (default), the default dask.distributed
        client, or the given one. See `cubeloupe.analysis.blocks`.
    progress : callable, optional
        ``progress(fraction)``, fraction from 0 to 1.
    cancel : threading.Event-like, optional
        Set it to stop; `CancelledComputation` is then raised.
    block_shape : (int, int), optional
        Pixels (rows, columns) per block; default a few MB per block.
    allow_polarisation : bool
        Make maps of a lone polarisation plane (Stokes Q, U, V, ...) anyway;
        by default they are refused (see `check_total_intensity`).

    Returns
    -------
    MomentMaps

    Raises
    ------
    SpectralRangeError
        Window or line-free ranges wholly outside the band, too few
        line-free channels outside the window, a bad ``clip``, or a window
        with no valid data.
    FitError
        ``order`` out of range.
    SpectralAxisError
        Velocities asked for without a rest frequency.
    CancelledComputation
        ``cancel`` was set.
    PolarisationError
        The cube holds one Stokes plane other than I, unless
        ``allow_polarisation`` is True.

    Warns
    -----
    WindowClippedWarning
        The window reaches beyond the band; only its part inside is used.
    LineFreeOverlapWarning
        Line-free channels inside the window are left out of the line-free
        set (`measure_line` does the same; see `cubeloupe.analysis.windows`).

    Notes
    -----
    Blank (NaN or masked) voxels are left out: a channel blank in a pixel is
    dropped from that pixel's weights (so moment 0 sums only the valid
    channels, as ``nansum`` does), the baseline is fitted on the valid
    line-free channels, and a pixel without valid window channels (or with
    fewer valid line-free channels than order + 2) is NaN.

    Examples
    --------
    >>> cube = open_cube(demo_path("disk"))
    >>> maps = moment_maps(cube, window=(1250, 1680) * u.km / u.s,
    ...                    line_free=[(1165, 1230), (1700, 1785)] * u.km / u.s,
    ...                    rest_frequency=230.538 * u.GHz, clip=3)
    >>> maps.m1.unit
    Unit("km / s")
    >>> bool(1300 < np.nanmedian(maps.m1.value) < 1620)    # the disk's systemic velocity is 1462 km/s
    True
    """
    check_total_intensity(cube, allow_polarisation=allow_polarisation, what="a moment map")
    if line_free is not None and order is not None:
        order = check_order(order)
    clip = _check_clip(clip, line_free)
    frame = dict(rest_frequency=rest_frequency, z=z, convention=convention)
    # A frequency axis with a rest frequency given: the ranges need only the axis itself, read once
    # (each look-up through the cube's WCS costs about 1 ms, a few % of a map; issue #20).
    native = cube.spectral_axis
    axis = native if rest_frequency is not None and native.unit.is_equivalent(u.Hz, u.spectral()) else cube
    velocity = axis_in(axis, _KMS, **frame).to_value(_KMS)
    in_window = window_channels(axis, window, **frame)
    if line_free is not None:
        needed = 1 if order is None else order + 2
        free = channel_mask(axis, line_free, min_channels=1, what="line-free ranges", **frame)
        free = line_free_outside_window(free, in_window, line_free=line_free, window=window, min_channels=needed)
    else:
        free = np.zeros_like(in_window)
        order = None
    width = np.abs(np.gradient(velocity)) if velocity.size > 1 else np.ones(1)
    selected = np.concatenate([np.flatnonzero(free), np.flatnonzero(in_window)])
    window_velocity = velocity[in_window]
    reference = 0.5 * (window_velocity.min() + window_velocity.max())
    n_free = int(free.sum())
    kernel = _MomentKernel(
        velocity=velocity[selected] - reference,
        width=width[selected],
        window=np.concatenate([np.zeros(n_free, bool), np.ones(int(in_window.sum()), bool)]),
        line_free=np.concatenate([np.ones(n_free, bool), np.zeros(int(in_window.sum()), bool)]) if n_free else None,
        order=order if n_free else None,
        clip=clip,
        reference=float(reference),
    )
    maps = np.full((5,) + tuple(cube.shape[1:]), np.nan)

    def consume(block, result):
        maps[:, block.rows, block.columns] = result

    # Streamed blocks are read a slab of channels at a time, so they can span many image rows.
    streamed = clip is None and block_shape is None and streams(cube, client)
    block_bytes = selected.size * 4 * STREAM_PIXELS if streamed else None
    blocks = spectra_blocks(cube.shape, channels=selected, itemsize=4, block_shape=block_shape,
                            **({} if block_bytes is None else {"block_bytes": block_bytes}))
    run_blocks(cube, kernel, blocks, consume, dtype=np.float32, client=client, progress=progress, cancel=cancel)
    if not np.isfinite(maps[_M0]).any():
        raise SpectralRangeError(
            f"the window {window} holds no valid data in any pixel (all blank or masked); "
            "choose a window over channels with data"
        )
    beam = map_beam(cube, in_window)
    unit = u.Unit(cube.unit)
    noise = n_free > 0
    sky = _sky(cube)
    return MomentMaps(
        m0=_projection(maps[_M0], unit * _KMS, sky, beam, "moment 0"),
        m1=_projection(maps[_M1], _KMS, sky, beam, "moment 1"),
        m2=_projection(maps[_M2], _KMS, sky, beam, "moment 2 (velocity dispersion)"),
        m0_error=_projection(maps[_M0_ERROR], unit * _KMS, sky, beam, "moment 0 uncertainty") if noise else None,
        rms=_projection(maps[_RMS], unit, sky, beam, "line-free rms") if noise else None,
        n_channels=int(in_window.sum()),
        window=u.Quantity([window_velocity.min(), window_velocity.max()], _KMS),
        n_line_free=n_free,
        order=order,
        clip=clip,
    )
