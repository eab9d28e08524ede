"""Block-wise execution over a cube: bounded memory on a laptop, the same kernels on a cluster.

Heavy operations (moment maps, per-pixel baselines, noise statistics) run as
*pure numpy kernels* over blocks of the cube. A block is either

* a set of spatial pixels carrying every selected channel (`spectra_blocks`),
  for per-pixel work such as moments and baselines, or
* a run of whole channel images (`plane_blocks`), for per-channel statistics.

Each block is read once from the memory-mapped file, converted to native byte
order and to the working dtype in the same copy (FITS data are big-endian,
which numpy reduces about 3x slower), masked voxels set to NaN, and handed to
the kernel. A block is a few MB, so memory stays bounded whatever the cube
size.

`run_blocks` maps a kernel over blocks:

* ``client=None`` (default): in this process, a thread per core (numpy
  releases the GIL); BLAS is held to one thread per worker thread with
  threadpoolctl so that the cores are not oversubscribed.
* ``client=<dask.distributed.Client>``: on that cluster. ``client="default"``
  uses the current default client (``distributed.default_client()``); using a
  cluster is always an explicit choice, never picked up silently. Each task
  carries only the file path, the HDU, the byte layout of the cube inside the
  file and the block's index ranges; the worker memory-maps the file itself,
  so the array is never pickled (sending it is what makes spectral-cube's dask
  mode exhaust memory on a cluster). The file must be visible to the workers
  at the same path (a shared file system).

Integer cubes (BITPIX 8 to 64 with BSCALE/BZERO/BLANK) are read the same way:
each block is copied out of the memory-mapped integers and scaled in that
copy (`cube_file.stored_array`), never through the per-chunk dask graph that
`open_cube` builds for other consumers.

Cubes whose data are not a view of their file (built in memory, or the
result of arithmetic) always run in this process, whatever ``client`` says.
Dask-backed cubes (``open_cube(..., use_dask=True)``) read through the same
memory map when they still show the file's data unchanged, else block by
block through their dask graph in this process.

Examples
--------
>>> import numpy as np
>>> blocks = spectra_blocks((100, 7, 5), block_shape=(3, 5))
>>> [(b.rows.start, b.rows.stop) for b in blocks]
[(0, 3), (3, 6), (6, 7)]
>>> def channel_sums(block):
...     return np.nansum(block, axis=0)
>>> # run_blocks(cube, channel_sums, blocks, consume=lambda block, result: ...)
"""

import concurrent.futures
import os
import threading
from dataclasses import dataclass

import numpy as np
from threadpoolctl import ThreadpoolController

from .cube_file import cube_array, custom_mask, file_view, stored_array
from .errors import CancelledComputation, ClusterError, CubeFileError
from .prefetch import BlockReadAhead

__all__ = [
    "DEFAULT_BLOCK_BYTES",
    "Block",
    "channel_runs",
    "spectra_blocks",
    "plane_blocks",
    "streams",
    "resolve_client",
    "run_blocks",
]

# Size of one block in the kernel's working dtype. A few MB keeps a block
# and its temporaries in the CPU caches (measured on the 1 GB benchmark cube:
# whole image rows of 4 MB ran faster than 1-2 MB pieces of rows), while the per-block
# Python overhead stays small against the numpy work.
DEFAULT_BLOCK_BYTES = 4 * 2**20


@dataclass(frozen=True)
class Block:
    """One piece of a cube in numpy order (channel, row, column).

    Attributes
    ----------
    index : int
        Position in the list of blocks.
    runs : tuple of (int, int)
        Channel ranges ``[start, stop)`` read one after the other; the block's
        first axis follows this order.
    rows, columns : slice
        The spatial pixels (``y``, ``x``) of the block.
    """

    index: int
    runs: tuple
    rows: slice
    columns: slice

    @property
    def n_channels(self):
        return sum(stop - start for start, stop in self.runs)

    @property
    def shape(self):
        return (self.n_channels, self.rows.stop - self.rows.start, self.columns.stop - self.columns.start)


def channel_runs(channels, n_channels):
    """Split channel indices into runs of consecutive channels.

    Parameters
    ----------
    channels : None, slice, bool mask or sequence of int
        The channels a kernel needs, in the order the kernel wants them.
    n_channels : int
        Length of the cube's spectral axis.

    Returns
    -------
    tuple of (start, stop)

    Examples
    --------
    >>> channel_runs([0, 1, 2, 7, 8, 4], 10)
    ((0, 3), (7, 9), (4, 5))
    """
    if channels is None:
        return ((0, int(n_channels)),)
    if isinstance(channels, slice):
        channels = np.arange(n_channels)[channels]
    channels = np.asarray(channels)
    if channels.dtype == bool:
        channels = np.flatnonzero(channels)
    channels = channels.astype(int)
    if channels.size == 0:
        raise ValueError("no channel selected")
    if channels.min() < 0 or channels.max() >= n_channels:
        raise IndexError(f"channel indices must lie in [0, {n_channels}); got {channels.min()}..{channels.max()}")
    breaks = np.flatnonzero(np.diff(channels) != 1) + 1
    starts = np.concatenate([[0], breaks])
    stops = np.concatenate([breaks, [channels.size]])
    return tuple((int(channels[a]), int(channels[b - 1]) + 1) for a, b in zip(starts, stops))


def spectra_blocks(shape, *, channels=None, itemsize=8, block_bytes=DEFAULT_BLOCK_BYTES, block_shape=None):
    """Blocks of spatial pixels, each carrying every selected channel.

    Whole image rows are preferred (each channel of a block is then one
    contiguous run in the file); when one row is already larger than
    ``block_bytes``, a row is split into column ranges.

    Parameters
    ----------
    shape : tuple of int
        The cube's numpy shape (n_channels, ny, nx).
    channels : None, slice, bool mask or sequence of int
        The channels each block carries (default all), in kernel order.
    itemsize : int
        Bytes per value in the kernel's working dtype.
    block_bytes : int
        Target size of one block.
    block_shape : (int, int), optional
        Force (rows, columns) per block; blocks at the edges may be smaller.

    Returns
    -------
    list of Block

    Examples
    --------
    >>> len(spectra_blocks((1000, 512, 512), itemsize=8))
    512
    """
    n_chan, ny, nx = (int(n) for n in shape)
    runs = channel_runs(channels, n_chan)
    if block_shape is None:
        n_sel = sum(b - a for a, b in runs)
        pixels = max(1, int(block_bytes) // max(1, n_sel * int(itemsize)))
        block_shape = (max(1, pixels // nx), nx) if pixels >= nx else (1, pixels)
    rows, cols = (max(1, int(n)) for n in block_shape)
    blocks = []
    for y0 in range(0, ny, rows):
        for x0 in range(0, nx, cols):
            blocks.append(Block(len(blocks), runs, slice(y0, min(y0 + rows, ny)), slice(x0, min(x0 + cols, nx))))
    return blocks


def plane_blocks(shape, *, channels=None, itemsize=4, block_bytes=DEFAULT_BLOCK_BYTES):
    """Blocks of whole channel images: consecutive channels, every pixel.

    A block holds as many planes as fit in ``block_bytes``, and at least one
    (so memory is bounded by the larger of ``block_bytes`` and one plane).

    Examples
    --------
    >>> [b.runs for b in plane_blocks((5, 512, 512), itemsize=4, block_bytes=2 * 2**20)]
    [((0, 2),), ((2, 4),), ((4, 5),)]
    """
    n_chan, ny, nx = (int(n) for n in shape)
    per_block = max(1, int(block_bytes) // max(1, ny * nx * int(itemsize)))
    blocks = []
    for start, stop in channel_runs(channels, n_chan):
        for c0 in range(start, stop, per_block):
            runs = ((c0, min(c0 + per_block, stop)),)
            blocks.append(Block(len(blocks), runs, slice(0, ny), slice(0, nx)))
    return blocks


def _read_block(array, block, dtype, mask=None, scaling=None):
    """Copy ``block`` out of ``array`` into native ``dtype``; masked voxels become NaN.

    With ``scaling`` (an `IntegerScaling`), ``array`` holds the stored
    values and each run is scaled while it is copied (blanks become NaN).
    """
    out = np.empty(block.shape, dtype=dtype)
    k = 0
    for start, stop in block.runs:
        _read_run(array, start, stop, block, out[k:k + stop - start], mask, scaling)
        k += stop - start
    return out


def _read_run(array, start, stop, block, out, mask, scaling):
    """Copy channels ``start:stop`` of ``block``'s pixels into ``out`` (native dtype)."""
    part = array[start:stop, block.rows, block.columns]
    if not isinstance(array, np.ndarray):
        part = part.compute(scheduler="synchronous")
    # one copy: byte order and dtype are converted while copying out of the memory map
    if scaling is None:
        np.copyto(out, part, casting="unsafe")
    else:
        scaling.apply_into(part, out)
    if mask is not None:
        keep = mask((slice(start, stop), block.rows, block.columns))
        out[~keep] = np.nan


# Streaming (`run_blocks` with a kernel that has ``stream``): a block of many whole image rows is
# read a slab of channels at a time into one reused buffer (16 channels of `STREAM_PIXELS` pixels:
# 1 MB), so that the byte-swapping copy and the kernel's sums on it stay in the core's L2 cache,
# and each channel of a slab is one long contiguous piece of the file (64 kB). Reading the same
# pixels as whole spectra of a few kB per channel made the copy alone 1.3-1.8x one np.sum pass
# over the data; slabs of 16 channels x 16384 pixels copy in 0.7x (issue #20, measured on the
# 1 GB benchmark cube). Slabs hold a fixed number of channels and break at the block's channel
# runs, whatever the block's size, so that a streaming kernel adds its sums in the same order
# in this process and on a cluster.
SLAB_CHANNELS = 16
STREAM_PIXELS = 16384
_buffers = threading.local()


def _slab_buffer(n_values, dtype):
    buffer = getattr(_buffers, "array", None)
    if buffer is None or buffer.size < n_values or buffer.dtype != dtype:
        buffer = _buffers.array = np.empty(n_values, dtype=dtype)
    return buffer


def _slab_ranges(runs):
    """``(first, start, stop)`` of each slab: its place in the block's channel order and in the cube."""
    first = 0
    for start, stop in runs:
        for c0 in range(start, stop, SLAB_CHANNELS):
            c1 = min(stop, c0 + SLAB_CHANNELS)
            yield first, c0, c1
            first += c1 - c0


def _slabs(array, block, dtype, mask, scaling, file_views=False):
    """Yield ``(first, slab)``: the block's selected channels ``first:first + n`` as (n, pixels).

    Each slab is a view of one thread-local buffer, overwritten by the next slab; with
    ``file_views``, where the file's own values are the block's (no mask, no scaling, the working
    dtype in either byte order, whole image rows), a view of ``array`` itself (not copied).
    """
    dtype = np.dtype(dtype)
    _, ny, nx = block.shape
    pixels = ny * nx
    if file_views and _viewable(array, block, dtype, mask, scaling):
        # No buffer to fit in a cache: a slab per channel run (fewer calls into the kernel). Runs
        # start on a slab boundary either way, so a kernel that groups channels by a divisor of
        # `SLAB_CHANNELS` from each slab's start adds them in the same groups.
        first = 0
        for start, stop in block.runs:
            yield first, np.reshape(array[start:stop, block.rows, block.columns], (stop - start, pixels), copy=False)
            first += stop - start
        return
    buffer = _slab_buffer(SLAB_CHANNELS * pixels, dtype)
    for first, c0, c1 in _slab_ranges(block.runs):
        out = buffer[:(c1 - c0) * pixels].reshape(c1 - c0, ny, nx)
        _read_run(array, c0, c1, block, out, mask, scaling)
        yield first, out.reshape(c1 - c0, pixels)


def _viewable(array, block, dtype, mask, scaling):
    """True when ``block``'s slabs can be views of ``array``: its values as they are, each channel contiguous."""
    return (mask is None and scaling is None and isinstance(array, np.ndarray) and array.ndim == 3
            and array.flags.c_contiguous and array.dtype.newbyteorder("=") == dtype
            and block.columns.indices(array.shape[2]) == (0, array.shape[2], 1))


def streams(cube, client=None):
    """True when `run_blocks` hands blocks to a streaming kernel slab by slab (in this process).

    Callers then choose larger blocks (`spectra_blocks` with ``block_bytes`` of
    about `STREAM_PIXELS` spectra): memory stays bounded by the slab buffer.
    """
    if resolve_client(client) is not None:
        return False
    if cube_array(cube) is not None:
        return True
    return stored_array(cube) is not None or isinstance(getattr(cube, "_data", None), np.ndarray)


def _remote_block(view, block, dtype, mask_bits, kernel):
    """Run on a worker: map the file, read one block, run the kernel."""
    array = view.array()
    # A worker sees one block at a time: when it is cold, announce its channel runs all at once.
    BlockReadAhead(array, [block]).before(block)
    data = _read_block(array, block, np.dtype(dtype))
    if mask_bits is not None:
        keep = np.unpackbits(mask_bits, count=data.size).reshape(data.shape).astype(bool)
        data[~keep] = np.nan
    return _run_on_block(kernel, block, data)


def _run_on_block(kernel, block, data):
    """``kernel(data)``, or for a streaming kernel its ``stream`` over slabs that are views of ``data``.

    A streaming kernel then does the same arithmetic wherever its blocks come from (the file here,
    a worker, a dask graph): the same slabs, so the same sums in the same order.
    """
    stream = getattr(kernel, "stream", None)
    if stream is None:
        return kernel(data)
    flat = data.reshape(data.shape[0], -1)
    slabs = ((first, flat[first:first + c1 - c0]) for first, c0, c1 in _slab_ranges(block.runs))
    return stream(slabs, data.shape, lambda rows: data[:, rows].copy())


def resolve_client(client):
    """Turn the ``client`` argument into a `distributed.Client` or None.

    ``None`` means "in this process"; ``"default"`` the current default client
    (error if there is none); a Client is used as given.

    Raises
    ------
    ClusterError
        ``"default"`` without a running client, or an object that is not a Client.
    """
    if client is None:
        return None
    try:
        import distributed
    except ImportError:  # pragma: no cover - distributed is a dependency
        raise ClusterError("client= needs the 'distributed' package; pip install distributed") from None
    if isinstance(client, str):
        if client != "default":
            raise ClusterError(f"client={client!r} is not understood; pass a distributed.Client, "
                               "'default' for the current default client, or None to run in this process")
        try:
            return distributed.default_client()
        except ValueError:
            raise ClusterError("client='default' but no dask.distributed Client is running; start one "
                               "(e.g. Client('tcp://scheduler:8786')) or pass client=None") from None
    if not isinstance(client, distributed.Client):
        raise ClusterError(f"client must be a distributed.Client, 'default' or None; got {type(client).__name__}")
    if client.status not in ("running", "connecting", "newly-created"):
        raise ClusterError(f"the dask.distributed client is {client.status!r}; reconnect it or pass client=None")
    return client


def default_threads():
    """Number of worker threads for in-process runs: one per usable core."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - not on Linux
        return os.cpu_count() or 1


_controller = []


def _blas_threads(limit):
    """threadpoolctl's BLAS thread limit without scanning the loaded libraries on every call.

    Building threadpoolctl's view of the loaded libraries took 2.6 ms, paid by every
    `run_blocks` (a moment map of a 300-channel slab takes about 30 ms; issue #20).
    """
    if not _controller:
        _controller.append(ThreadpoolController())
    return _controller[0].limit(limits=limit, user_api="blas")


def _check_cancel(cancel, done, total):
    if cancel is not None and cancel.is_set():
        raise CancelledComputation(f"cancelled after {done} of {total} blocks; nothing was returned. "
                                   "Clear the cancel event and call again to restart")


def run_blocks(cube, kernel, blocks, consume, *, dtype=np.float64, client=None, progress=None, cancel=None,
               threads=None):
    """Map ``kernel`` over ``blocks`` of ``cube`` and pass each result to ``consume``.

    Parameters
    ----------
    cube : SpectralCube or DaskSpectralCube
    kernel : callable
        ``kernel(data) -> result`` with ``data`` a native-order array of shape
        ``block.shape`` in ``dtype``, NaN where the cube is masked or blank. It
        must be pure; for a cluster it must also pickle (a module-level
        function or an instance of a module-level class). A kernel that also
        has ``stream(slabs, shape, reread)`` is given, in this process, the
        block as ``slabs``: ``(first, slab)`` pairs, ``slab`` of shape
        (n, pixels) holding the block's selected channels ``first:first + n``
        in a buffer reused for the next slab (or, for a kernel whose
        ``takes_file_views`` is true, a read-only view of the memory-mapped
        file where no conversion is needed: each channel contiguous, channels
        a plane apart, in the file's byte order); ``reread(rows)`` returns the
        block's rows ``rows`` (a slice) whole, as ``kernel`` would get them.
        ``stream`` must return what ``kernel`` returns for the block.
    blocks : list of Block
        From `spectra_blocks` or `plane_blocks`.
    consume : callable
        ``consume(block, result)``, called in the calling thread as results
        arrive (in no particular order).
    dtype : numpy dtype
        Working dtype of the blocks.
    client : None, "default" or distributed.Client
        Where to run; see the module notes.
    progress : callable, optional
        ``progress(fraction)`` with a fraction from 0 to 1, after each block.
    cancel : threading.Event-like, optional
        Checked between blocks; when ``cancel.is_set()``, pending blocks are
        dropped and `CancelledComputation` is raised.
    threads : int, optional
        In-process worker threads (default one per core).

    Raises
    ------
    CancelledComputation
        ``cancel`` was set.
    ClusterError
        Bad ``client``.
    """
    client = resolve_client(client)
    total = len(blocks)
    _check_cancel(cancel, 0, total)
    view = file_view(cube) if client is not None else None
    if client is not None and view is not None:
        _run_distributed(cube, kernel, blocks, consume, view, dtype, client, progress, cancel)
    else:
        _run_local(cube, kernel, blocks, consume, dtype, progress, cancel, threads)


def _run_local(cube, kernel, blocks, consume, dtype, progress, cancel, threads):
    data = cube_array(cube)
    scaling = None
    if data is None:
        data, scaling = stored_array(cube) or (cube._data, None)
    mask = custom_mask(cube, data)
    total = len(blocks)
    threads = default_threads() if threads is None else max(1, int(threads))
    ahead = BlockReadAhead(data, blocks) if isinstance(data, np.ndarray) else None

    stream = getattr(kernel, "stream", None) if isinstance(data, np.ndarray) else None
    file_views = bool(getattr(kernel, "takes_file_views", False))

    def work(block):
        if ahead is not None:
            ahead.before(block)
        if stream is None:
            return _run_on_block(kernel, block, _read_block(data, block, dtype, mask, scaling))

        def reread(rows):
            part = Block(block.index, block.runs, slice(block.rows.start + rows.start, block.rows.start + rows.stop),
                         block.columns)
            return _read_block(data, part, dtype, mask, scaling)

        return stream(_slabs(data, block, dtype, mask, scaling, file_views), block.shape, reread)

    if threads == 1 or total <= 1:
        # BLAS threads beyond the cores allowed fight over them: with the process on one core, an
        # unlimited OpenBLAS made the moment kernel 7x slower (bench_moments, issue #20).
        with _blas_threads(threads):
            for done, block in enumerate(blocks, start=1):
                consume(block, work(block))
                if progress is not None:
                    progress(done / total)
                _check_cancel(cancel, done, total)
        return

    pending = {}
    queue = iter(blocks)
    done = 0
    # One BLAS thread per worker thread: the worker threads already fill the cores.
    with _blas_threads(1), \
            concurrent.futures.ThreadPoolExecutor(max_workers=threads, thread_name_prefix="cubeloupe-block") as pool:
        try:
            for block in queue:
                pending[pool.submit(work, block)] = block
                if len(pending) >= 2 * threads:
                    break
            while pending:
                finished, _ = concurrent.futures.wait(pending, return_when=concurrent.futures.FIRST_COMPLETED)
                for future in finished:
                    block = pending.pop(future)
                    consume(block, future.result())
                    done += 1
                    if progress is not None:
                        progress(done / total)
                _check_cancel(cancel, done, total)
                for block in queue:
                    pending[pool.submit(work, block)] = block
                    if len(pending) >= 2 * threads:
                        break
        finally:
            for future in pending:
                future.cancel()


def _run_distributed(cube, kernel, blocks, consume, view, dtype, client, progress, cancel):
    import distributed

    mask = custom_mask(cube, cube_array(cube))
    total = len(blocks)
    try:
        slots = max(4, 2 * sum(client.nthreads().values()))
    except Exception as exc:
        raise ClusterError(f"cannot reach the dask.distributed scheduler ({exc}); check the client") from None
    dtype_name = np.dtype(dtype).str

    def submit(block):
        bits = None
        if mask is not None:
            # A user mask cannot be rebuilt on the worker from the file alone:
            # send it with the block, packed to one bit per voxel.
            keep = np.concatenate([mask((slice(a, b), block.rows, block.columns)) for a, b in block.runs])
            bits = np.packbits(keep, axis=None)
        return client.submit(_remote_block, view, block, dtype_name, bits, kernel, pure=False)

    pending = {}
    queue = iter(blocks)
    done = 0
    try:
        for block in queue:
            pending[submit(block)] = block
            if len(pending) >= slots:
                break
        while pending:
            finished = distributed.wait(list(pending), return_when="FIRST_COMPLETED").done
            for future in finished:
                block = pending.pop(future)
                try:
                    result = future.result()
                except (OSError, distributed.comm.CommClosedError) as exc:
                    if isinstance(exc, CubeFileError):
                        raise
                    raise ClusterError(f"a dask worker failed on block {block.index} ({exc}); "
                                       "check the cluster, or pass client=None to run here") from None
                consume(block, result)
                done += 1
                if progress is not None:
                    progress(done / total)
            _check_cancel(cancel, done, total)
            for block in queue:
                pending[submit(block)] = block
                if len(pending) >= slots:
                    break
    finally:
        if pending:
            client.cancel(list(pending))
