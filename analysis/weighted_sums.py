"""Weighted channel sums of every pixel in one pass over a slab of channels (compiled with numba).

A moment map with a baseline needs, per pixel, a few weighted sums over the
channels read (see `moments`): three over the window, ``order + 1`` over the
line-free channels and their sum of squares. `blocks.run_blocks` hands the
moment kernel each block as slabs of 16 channels x 16384 pixels. numpy forms
the sums with one call per row on a native-order copy of the slab (a
matrix-vector product, 0.15x one ``np.sum`` pass over the same data per row,
and ``einsum`` for the squares, 0.42x), which with the byte-swapping copy
(0.66-0.74x) is at least 1.46x that pass before any Python overhead; 1.97x end
to end (one core, 1 GB benchmark cube, issue #20). No library fuses these sums
with the byte swap, so this kernel does: it reads each channel of the slab
straight from the memory-mapped file (FITS data are big-endian: the bytes of
each value are swapped in a register), four channels at a time, every sum
updated once per four channels, in float64. A 300-channel read then costs
0.9x the ``np.sum`` pass (which swaps too) instead of 2.1x for copy + sums.

`numba` is optional at run time: without it, `accumulate` is None and the
moment kernel uses its numpy path, which gives the same sums.

Examples
--------
>>> import numpy as np
>>> slab = np.ones((4, 3), dtype=np.float32)     # 4 line-free channels of 3 pixels
>>> totals = np.zeros((5, 3))                     # 3 window sums, 1 basis sum, the sum of squares
>>> weights = np.full((1, 4), 0.5)
>>> accumulate is None or accumulate(slab, 0, 4, weights, np.zeros((3, 0)), totals) is None
True
>>> accumulate is None or totals[3:].tolist() == [[2.0, 2.0, 2.0], [4.0, 4.0, 4.0]]
True
>>> stored = np.ones((4, 3), dtype=">f4")         # as a FITS file holds them: the same sums
>>> again = np.zeros((5, 3))
>>> accumulate is None or accumulate(stored, 0, 4, weights, np.zeros((3, 0)), again) is None
True
>>> accumulate is None or again.tolist() == totals.tolist()
True
"""

import numpy as np

try:  # pragma: no branch
    import llvmlite.ir
    from numba import njit, types
    from numba.extending import intrinsic
except ImportError:  # pragma: no cover - numba is a dependency, but keep the numpy path working
    njit = None

__all__ = ["accumulate"]


def _accumulate(values, swap, stride, n, first, n_free, basis, window_rows, totals):
    """Add a slab of channels to the weighted sums of its pixels.

    Parameters
    ----------
    values : 1-D ndarray of uint32
        The bit patterns of float32 numbers; channel ``k`` of the slab is
        ``values[k * stride:k * stride + pixels]``.
    swap : bool
        The patterns are in the other byte order (big-endian on this machine).
    stride : int
        Elements from one channel of the slab to the next.
    n : int
        Channels in the slab: ``first:first + n`` of the kernel's channel order, in
        which the ``n_free`` line-free channels come first, then the window.
    basis : ndarray of float64, shape (n_basis, n_free)
        Rows whose sums over the line-free channels are wanted (``Q^T``).
    window_rows : ndarray of float64, shape (3, n_window)
        Rows whose sums over the window channels are wanted.
    totals : ndarray of float64, shape (3 + n_basis + 1, pixels)
        Window sums, then basis sums, then the sum of squares over the
        line-free channels; added to in place.

    Channels are taken four at a time and every sum gets one update per
    four channels, in one pass over the slab.
    """
    pixels = totals.shape[1]
    n_basis = basis.shape[0]
    zeros = np.zeros(pixels, dtype=values.dtype)  # zero bits are 0.0 in either byte order
    last = totals.shape[0] - 1
    c0 = 0
    while c0 < n:
        j0 = first + c0
        free = j0 < n_free
        m = min(4, n - c0, n_free - j0) if free else min(4, n - c0)
        v0 = values[c0 * stride:c0 * stride + pixels]
        v1 = values[(c0 + 1) * stride:(c0 + 1) * stride + pixels] if m > 1 else zeros
        v2 = values[(c0 + 2) * stride:(c0 + 2) * stride + pixels] if m > 2 else zeros
        v3 = values[(c0 + 3) * stride:(c0 + 3) * stride + pixels] if m > 3 else zeros
        rows = n_basis if free else 3
        w = np.zeros((max(rows, 3), 4))
        for k in range(rows):
            for g in range(m):
                w[k, g] = basis[k, j0 + g] if free else window_rows[k, j0 + g - n_free]
        if free and n_basis == 2:
            # the usual case (an order-1 baseline): both sums and the squares in one sweep
            _free_two(v0, v1, v2, v3, swap, w, totals[3], totals[4], totals[last])
        elif free:
            for k in range(n_basis):
                _one_row(v0, v1, v2, v3, swap, w[k], totals[3 + k])
            _squares(v0, v1, v2, v3, swap, totals[last])
        else:
            _window_three(v0, v1, v2, v3, swap, w, totals[0], totals[1], totals[2])
        c0 += m


def _one_row(v0, v1, v2, v3, swap, w, out):
    w0, w1, w2, w3 = w[0], w[1], w[2], w[3]
    for x in range(out.size):
        out[x] += (w0 * _number(v0[x], swap) + w1 * _number(v1[x], swap) + w2 * _number(v2[x], swap)
                   + w3 * _number(v3[x], swap))


def _squares(v0, v1, v2, v3, swap, out):
    for x in range(out.size):
        a0, a1, a2, a3 = _number(v0[x], swap), _number(v1[x], swap), _number(v2[x], swap), _number(v3[x], swap)
        out[x] += a0 * a0 + a1 * a1 + a2 * a2 + a3 * a3


def _free_two(v0, v1, v2, v3, swap, w, out0, out1, squares):
    p0, p1, p2, p3 = w[0, 0], w[0, 1], w[0, 2], w[0, 3]
    q0, q1, q2, q3 = w[1, 0], w[1, 1], w[1, 2], w[1, 3]
    for x in range(out0.size):
        a0, a1, a2, a3 = _number(v0[x], swap), _number(v1[x], swap), _number(v2[x], swap), _number(v3[x], swap)
        out0[x] += p0 * a0 + p1 * a1 + p2 * a2 + p3 * a3
        out1[x] += q0 * a0 + q1 * a1 + q2 * a2 + q3 * a3
        squares[x] += a0 * a0 + a1 * a1 + a2 * a2 + a3 * a3


def _window_three(v0, v1, v2, v3, swap, w, out0, out1, out2):
    p0, p1, p2, p3 = w[0, 0], w[0, 1], w[0, 2], w[0, 3]
    q0, q1, q2, q3 = w[1, 0], w[1, 1], w[1, 2], w[1, 3]
    r0, r1, r2, r3 = w[2, 0], w[2, 1], w[2, 2], w[2, 3]
    for x in range(out0.size):
        a0, a1, a2, a3 = _number(v0[x], swap), _number(v1[x], swap), _number(v2[x], swap), _number(v3[x], swap)
        out0[x] += p0 * a0 + p1 * a1 + p2 * a2 + p3 * a3
        out1[x] += q0 * a0 + q1 * a1 + q2 * a2 + q3 * a3
        out2[x] += r0 * a0 + r1 * a1 + r2 * a2 + r3 * a3


def _channel_values(slab):
    """``(values, swap, stride)`` for the compiled kernel: one flat array through every channel of ``slab``.

    ``slab`` is (n, pixels) float32, each channel contiguous: a native-order buffer, or a view of a
    memory-mapped file (channels a plane apart, maybe big-endian). The kernel reads the raw 32-bit
    patterns and swaps the bytes of a big-endian slab itself; the flat array spans the slab's first
    to last value, which all lie in the one buffer ``slab`` views.
    """
    n, pixels = slab.shape
    if slab.dtype.itemsize != 4 or slab.dtype.kind != "f" or (pixels > 1 and slab.strides[1] != 4):
        raise ValueError(f"a slab of float32 channels, each contiguous, is needed, not {slab.dtype} "
                         f"with strides {slab.strides}")
    stride = pixels if n == 1 else slab.strides[0] // 4
    if n > 1 and slab.strides[0] != 4 * stride:
        raise ValueError(f"channel stride {slab.strides[0]} bytes is not a whole number of values")
    span = (n - 1) * stride + pixels
    values = np.lib.stride_tricks.as_strided(slab.view(np.uint32), shape=(span,), strides=(4,), writeable=False)
    return values, not slab.dtype.isnative, stride


def _accumulate_slab(slab, first, n_free, basis, window_rows, totals):
    """Add ``slab`` (n, pixels), channels ``first:first + n`` of the kernel's order, to ``totals``.

    See `_accumulate`; ``slab`` may be a native float32 buffer or a view of the file.
    """
    values, swap, stride = _channel_values(slab)
    _compiled_accumulate(values, swap, stride, slab.shape[0], first, n_free, basis, window_rows, totals)


if njit is None:  # pragma: no cover
    accumulate = None
else:
    # numba has no scalar bit cast: this intrinsic is the float64 value of a float32 bit pattern,
    # its bytes swapped first when ``swap`` is true (LLVM's bswap, bitcast and fpext; with ``swap``
    # the same for every value, the loops stay vectorised).
    @intrinsic
    def _number(typingctx, bits, swap):
        def codegen(context, builder, signature, args):
            pattern, swapped = args
            pattern = builder.select(swapped, builder.bswap(pattern), pattern)
            return builder.fpext(builder.bitcast(pattern, llvmlite.ir.FloatType()), llvmlite.ir.DoubleType())
        return types.float64(types.uint32, types.boolean), codegen

    _compile = njit(cache=True, nogil=True, error_model="numpy")
    _one_row, _squares, _free_two, _window_three = (_compile(f) for f in (_one_row, _squares, _free_two,
                                                                           _window_three))
    _compiled_accumulate = _compile(_accumulate)
    accumulate = _accumulate_slab
