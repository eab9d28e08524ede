"""Weighted channel sums of every pixel in one pass over a slab of channels (compiled with numba).

A moment map with a baseline needs, per pixel, a few weighted sums over the
channels read (see `moments`): three over the window, ``order + 1`` over the
line-free channels and their sum of squares. `blocks.run_blocks` hands the
moment kernel each block as slabs of about 16 channels x 16384 pixels, copied
to native byte order into a buffer that stays in the L2 cache. numpy forms the
sums with one call per row (a matrix-vector product, 0.15x one ``np.sum`` pass
over the same data per row, and ``einsum`` for the squares, 0.42x), which with
the copy (0.66-0.74x) is at least 1.46x that pass on the line-free channels
before any Python overhead; 1.97x end to end (one core, 1 GB benchmark cube,
issue #20). No library fuses these sums, so this kernel does: one read of the
slab, four channels at a time, every sum updated once per four channels, in
float64 (0.45x; the whole moment map then 1.45x on one core).

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
"""

import numpy as np

try:  # pragma: no branch
    from numba import njit
except ImportError:  # pragma: no cover - numba is a dependency, but keep the numpy path working
    njit = None

__all__ = ["accumulate"]


def _accumulate(slab, first, n_free, basis, window_rows, totals):
    """Add a slab of channels to the weighted sums of its pixels.

    Parameters
    ----------
    slab : ndarray of float32, shape (n, pixels), C-contiguous
        Channels ``first:first + n`` of the kernel's channel order, in which
        the ``n_free`` line-free channels come first, then the window.
    basis : ndarray of float64, shape (n_basis, n_free)
        Rows whose sums over the line-free channels are wanted (``Q^T``).
    window_rows : ndarray of float64, shape (3, n_window)
        Rows whose sums over the window channels are wanted.
    totals : ndarray of float64, shape (3 + n_basis + 1, pixels)
        Window sums, then basis sums, then the sum of squares over the
        line-free channels; added to in place.

    Channels are taken four at a time and every sum gets one update per
    four channels, in one pass over the slab (which sits in the L2 cache).
    """
    n, pixels = slab.shape
    n_basis = basis.shape[0]
    zeros = np.zeros(pixels, dtype=np.float32)
    last = totals.shape[0] - 1
    c0 = 0
    while c0 < n:
        j0 = first + c0
        free = j0 < n_free
        m = min(4, n - c0, n_free - j0) if free else min(4, n - c0)
        v0 = slab[c0]
        v1 = slab[c0 + 1] if m > 1 else zeros
        v2 = slab[c0 + 2] if m > 2 else zeros
        v3 = slab[c0 + 3] if m > 3 else zeros
        rows = n_basis if free else 3
        w = np.zeros((max(rows, 3), 4))
        for k in range(rows):
            for g in range(m):
                w[k, g] = basis[k, j0 + g] if free else window_rows[k, j0 + g - n_free]
        if free and n_basis == 2:
            # the usual case (an order-1 baseline): both sums and the squares in one sweep
            _free_two(v0, v1, v2, v3, w, totals[3], totals[4], totals[last])
        elif free:
            for k in range(n_basis):
                _one_row(v0, v1, v2, v3, w[k], totals[3 + k])
            _squares(v0, v1, v2, v3, totals[last])
        else:
            _window_three(v0, v1, v2, v3, w, totals[0], totals[1], totals[2])
        c0 += m


def _one_row(v0, v1, v2, v3, w, out):
    w0, w1, w2, w3 = w[0], w[1], w[2], w[3]
    for x in range(out.size):
        out[x] += w0 * v0[x] + w1 * v1[x] + w2 * v2[x] + w3 * v3[x]


def _squares(v0, v1, v2, v3, out):
    for x in range(out.size):
        a0, a1, a2, a3 = np.float64(v0[x]), np.float64(v1[x]), np.float64(v2[x]), np.float64(v3[x])
        out[x] += a0 * a0 + a1 * a1 + a2 * a2 + a3 * a3


def _free_two(v0, v1, v2, v3, w, out0, out1, squares):
    p0, p1, p2, p3 = w[0, 0], w[0, 1], w[0, 2], w[0, 3]
    q0, q1, q2, q3 = w[1, 0], w[1, 1], w[1, 2], w[1, 3]
    for x in range(out0.size):
        a0, a1, a2, a3 = np.float64(v0[x]), np.float64(v1[x]), np.float64(v2[x]), np.float64(v3[x])
        out0[x] += p0 * a0 + p1 * a1 + p2 * a2 + p3 * a3
        out1[x] += q0 * a0 + q1 * a1 + q2 * a2 + q3 * a3
        squares[x] += a0 * a0 + a1 * a1 + a2 * a2 + a3 * a3


def _window_three(v0, v1, v2, v3, w, out0, out1, out2):
    p0, p1, p2, p3 = w[0, 0], w[0, 1], w[0, 2], w[0, 3]
    q0, q1, q2, q3 = w[1, 0], w[1, 1], w[1, 2], w[1, 3]
    r0, r1, r2, r3 = w[2, 0], w[2, 1], w[2, 2], w[2, 3]
    for x in range(out0.size):
        a0, a1, a2, a3 = np.float64(v0[x]), np.float64(v1[x]), np.float64(v2[x]), np.float64(v3[x])
        out0[x] += p0 * a0 + p1 * a1 + p2 * a2 + p3 * a3
        out1[x] += q0 * a0 + q1 * a1 + q2 * a2 + q3 * a3
        out2[x] += r0 * a0 + r1 * a1 + r2 * a2 + r3 * a3


if njit is None:
    accumulate = None
else:
    _compile = njit(cache=True, nogil=True, error_model="numpy")
    _one_row, _squares, _free_two, _window_three = (_compile(f) for f in (_one_row, _squares, _free_two,
                                                                           _window_three))
    accumulate = _compile(_accumulate)
