"""Ask the operating system to read a strided box of a memory-mapped cube ahead of use.

A region spectrum touches a few rows of every channel image. Read through a
memory map, each of those pages is faulted in one at a time, so on a cube that
is not in the page cache the time is set by the disk's latency times the number
of channels (tens of seconds for a few thousand channels), not by the few MB
actually needed. Telling the kernel about every page range first
(``madvise(MADV_WILLNEED)``) lets it issue all the reads at once, so the disk
works at its throughput instead. No library offers this for a strided numpy
view of a memory map, hence this small module.

Examples
--------
>>> import numpy as np
>>> prefetch(np.zeros((4, 8, 8))[:, 2:4, 2:6])   # not memory-mapped: nothing to do
0
"""

import mmap
import time

import numpy as np

__all__ = ["prefetch", "prefetch_if_cold"]

# A channel's worth of a small box copies in microseconds from the page cache;
# from disk it takes at least one device round trip (~0.1 ms or more).
_COLD_PROBE_SECONDS = 2e-4

_PAGE = mmap.PAGESIZE
# Ranges closer than this are merged: reading a gap of a few pages costs less
# than one more system call, and keeps the call count near one per channel.
_MERGE_GAP = 64 * 1024
# Beyond this many separate page ranges the system calls cost more than they save.
_MAX_RANGES = 200_000


def _mapping(array):
    """The `mmap.mmap` an array is a view of, or None."""
    base = array
    while base is not None:
        if isinstance(base, mmap.mmap):
            return base
        base = getattr(base, "base", None)
    return None


def _page_ranges(offset, shape, strides, itemsize):
    """Page-aligned (start, stop) byte ranges covering a strided 3-D view, nearby ones merged."""
    n0, n1, n2 = shape
    row_bytes = (n2 - 1) * strides[2] + itemsize
    starts = offset + (np.arange(n0)[:, None] * strides[0] + np.arange(n1)[None, :] * strides[1]).ravel()
    starts = np.sort(starts)
    lo = (starts // _PAGE) * _PAGE
    hi = -((-(starts + row_bytes)) // _PAGE) * _PAGE
    # Merge ranges that overlap or lie within _MERGE_GAP of each other.
    new = np.ones(lo.size, dtype=bool)
    new[1:] = lo[1:] > np.maximum.accumulate(hi)[:-1] + _MERGE_GAP
    group = np.cumsum(new) - 1
    merged_lo = lo[new]
    merged_hi = np.maximum.reduceat(hi, np.flatnonzero(new))
    return merged_lo, merged_hi, group.max() + 1 if group.size else 0


def prefetch(view):
    """Start reading the pages of ``view`` (a 3-D view of a memory map) in the background.

    Parameters
    ----------
    view : ndarray, 3-D
        A (strided) view into a memory-mapped array, e.g. ``data[:, y0:y1, x0:x1]``.

    Returns
    -------
    n_ranges : int
        Number of page ranges the kernel was told about (0 when ``view`` is not
        memory-mapped, is not 3-D, or the platform has no ``madvise``).
    """
    if view.ndim != 3 or view.size == 0 or not hasattr(mmap, "MADV_WILLNEED"):
        return 0
    mapping = _mapping(view)
    if mapping is None:
        return 0
    base_address = np.frombuffer(mapping, dtype=np.uint8).__array_interface__["data"][0]
    offset = view.__array_interface__["data"][0] - base_address
    if offset < 0 or any(s < 0 for s in view.strides):
        return 0
    lo, hi, n = _page_ranges(offset, view.shape, view.strides, view.itemsize)
    if n > _MAX_RANGES:
        lo, hi = lo[:1], hi[-1:]
    size = len(mapping)
    for start, stop in zip(lo.tolist(), hi.tolist()):
        mapping.madvise(mmap.MADV_WILLNEED, start, min(stop, size) - start)
    return len(lo)


def prefetch_if_cold(view):
    """Prefetch ``view`` (see `prefetch`) only if its first channel was not in memory.

    Reading a few channels of the box, spread over the band, tells by their
    time whether the pages come from the page cache (one of them may be warm
    because it was just displayed, hence several); only when one is slow are
    all channels announced, so a warm read pays no system calls.

    Returns
    -------
    n_ranges : int
        As for `prefetch`; 0 when the data were in memory.

    Examples
    --------
    >>> prefetch_if_cold(np.zeros((4, 8, 8))[:, 2:4, 2:6])
    0
    """
    if view.ndim != 3 or view.shape[0] < 2 or _mapping(view) is None:
        return 0
    probes = np.unique(np.linspace(0, view.shape[0] - 1, 6).astype(int)[1:-1])
    for channel in probes:
        start = time.perf_counter()
        np.array(view[channel])
        if time.perf_counter() - start > _COLD_PROBE_SECONDS:
            return prefetch(view)
    return 0
