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

import math
import mmap
import threading
import time

import numpy as np

from .cube_file import cube_array

__all__ = ["prefetch", "prefetch_if_cold", "prefetch_channels", "BlockReadAhead"]

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
    view : ndarray, 2-D or 3-D
        A (strided) view into a memory-mapped array, e.g. ``data[:, y0:y1, x0:x1]``
        or one channel image ``data[k]``.

    Returns
    -------
    n_ranges : int
        Number of page ranges the kernel was told about (0 when ``view`` is not
        memory-mapped, is not 2-D or 3-D, or the platform has no ``madvise``).
    """
    if view.ndim == 2:
        view = view[np.newaxis]
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
    try:
        for start, stop in zip(lo.tolist(), hi.tolist()):
            mapping.madvise(mmap.MADV_WILLNEED, start, min(stop, size) - start)
    except OSError:  # only a hint: a platform refusing it changes nothing but speed
        return 0
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


def _is_cold(element_view):
    """True when copying ``element_view`` (a few bytes) took as long as a disk read."""
    start = time.perf_counter()
    np.array(element_view)
    return time.perf_counter() - start > _COLD_PROBE_SECONDS


def prefetch_channels(cube, channels):
    """Start reading whole channel images of a memory-mapped cube in the background.

    Announcing the channels next to the one shown lets the disk read them
    while the user looks at the current one, so stepping or playing through
    the band reads from memory. The kernel queues the reads and returns
    (about 1 ms for two 16 MB channels); pages already in memory cost one
    cheap system call. (The channel about to be read gains nothing: a
    contiguous plane read through the memory map is already read ahead by
    the kernel, measured on the benchmark machine.)

    Parameters
    ----------
    cube : SpectralCube or ndarray
        A cube opened with `open_cube` (or its 3-D array).
    channels : iterable of int
        Channel indices; those outside the cube are skipped.

    Returns
    -------
    n_ranges : int
        Page ranges announced (0 for cubes that are not memory-mapped).

    Examples
    --------
    >>> prefetch_channels(np.zeros((4, 8, 8)), [0, 1])   # in memory: nothing to do
    0
    """
    data = cube if isinstance(cube, np.ndarray) else cube_array(cube)
    if data is None or data.ndim != 3 or _mapping(data) is None:
        return 0
    return sum(prefetch(data[k]) for k in channels if 0 <= k < data.shape[0])


class BlockReadAhead:
    """Announce the pages of the next blocks ahead of the reader, once reads turn out cold.

    Block kernels read a block's selected channels one run of pixels each; on
    a cube not in the page cache every run is a separate disk request, so the
    reader waits on latency. Once a probe read finds the data cold, the
    blocks up to ``ahead_bytes`` ahead are announced in batches, consecutive
    blocks merged, so each channel becomes one large request and the disk
    works at its throughput while the cores compute. Warm data pay only the
    probe (one small copy per block).

    Parameters
    ----------
    data : ndarray, 3-D
        The cube's array; nothing is done unless it is a view of a memory map.
    blocks : list of Block
        In the order they will be read (see `cubeloupe.analysis.blocks`).
    ahead_bytes : int
        File data to keep announced ahead of the reader.

    Examples
    --------
    >>> from cubeloupe.analysis.blocks import spectra_blocks
    >>> blocks = spectra_blocks((50, 8, 8))
    >>> ahead = BlockReadAhead(np.zeros((50, 8, 8)), blocks)
    >>> ahead.before(blocks[0])   # in memory: nothing to announce
    0
    """

    def __init__(self, data, blocks, ahead_bytes=64 * 2**20):
        self._data = data
        self._blocks = list(blocks)
        self.active = data.ndim == 3 and bool(self._blocks) and _mapping(data) is not None
        largest = max((math.prod(b.shape) for b in self._blocks), default=1) * data.itemsize
        self._ahead = max(2, math.ceil(ahead_bytes / max(1, largest)))
        self._position = {b.index: i for i, b in enumerate(self._blocks)}
        self.cold = False
        self._horizon = 0  # blocks[:_horizon] have been announced
        self._lock = threading.Lock()

    def before(self, block):
        """Call before reading ``block``; returns the number of page ranges announced now."""
        if not self.active:
            return 0
        position = self._position[block.index]
        with self._lock:
            if not self.cold:
                start, stop = block.runs[0]
                probe = self._data[(start + stop - 1) // 2, block.rows.start, block.columns.start]
                if not _is_cold(probe):
                    return 0
                self.cold = True
                self._horizon = max(self._horizon, position)
            # Announce in batches of half the look-ahead: fewer, larger requests.
            if self._horizon - position > self._ahead // 2:
                return 0
            first, self._horizon = self._horizon, min(len(self._blocks), position + self._ahead)
            batch = self._blocks[first:self._horizon]
        return self._announce(batch)

    def _announce(self, batch):
        n = 0
        i = 0
        while i < len(batch):
            # Consecutive blocks with the same channels: one box per channel run.
            j = i
            while j + 1 < len(batch) and batch[j + 1].runs == batch[i].runs:
                j += 1
            group = batch[i:j + 1]
            rows = slice(min(b.rows.start for b in group), max(b.rows.stop for b in group))
            columns = slice(min(b.columns.start for b in group), max(b.columns.stop for b in group))
            for start, stop in batch[i].runs:
                n += prefetch(self._data[start:stop, rows, columns])
            i = j + 1
        return n
