"""Where a cube's data sit in its FITS file: the memory-mapped array and its byte layout.

`open_cube` maps the file read-only; the fast paths of cubeloupe (block
kernels, region spectra, channel images, cluster workers) read that array
directly instead of going through spectral-cube's copies. This module finds
the array under a cube (`cube_array`; for integer data scaled block by block,
the stored integers and their scaling: `stored_array`), describes where it lies in the file
so that another process can map it itself (`file_view`, `FileView`), and
gives the cube's own mask where it is more than "finite" (`custom_mask`).

Examples
--------
>>> from cubeloupe.analysis import demo_path, open_cube
>>> cube = open_cube(demo_path("disk"))
>>> view = file_view(cube)
>>> view.shape == cube.shape
True
"""

import functools
import mmap
import os
from dataclasses import dataclass

import numpy as np
from spectral_cube.masks import LazyMask

from .cubes import cube_source
from .scaled_data import SCALED_NAME_PREFIX, IntegerScaling
from .errors import CubeFileError

__all__ = ["FileView", "cube_array", "stored_array", "file_view", "custom_mask", "mapped_file"]


@dataclass(frozen=True)
class FileView:
    """Where a cube's data sit inside its FITS file: enough for a worker to map them itself.

    Attributes
    ----------
    path : str
    hdu : int
    offset : int
        Byte offset of the first element of the cube (numpy order) in the file.
    shape, strides : tuple of int
        The cube's numpy layout (channel, y, x) over the file's bytes.
    dtype : str
        e.g. ``'>f4'``.
    size, mtime_ns : int
        The file's size and modification time when the cube was opened; a
        worker refuses a file that has changed since.
    """

    path: str
    hdu: int
    offset: int
    shape: tuple
    strides: tuple
    dtype: str
    size: int
    mtime_ns: int

    def array(self):
        """The cube as a read-only array over this process' memory map of the file."""
        mapped = mapped_file(self.path, self.size, self.mtime_ns)
        return np.ndarray(self.shape, dtype=np.dtype(self.dtype), buffer=mapped, offset=self.offset,
                          strides=self.strides)


@functools.lru_cache(maxsize=8)
def mapped_file(path, size, mtime_ns):
    """The whole file as a read-only ``uint8`` memory map, cached per process (one map per worker)."""
    try:
        stat = os.stat(path)
    except OSError as exc:
        raise CubeFileError(f"{path} cannot be read on this machine ({exc}); workers need the cube "
                            "at the same path, on a shared file system") from None
    if stat.st_size != size or stat.st_mtime_ns != mtime_ns:
        raise CubeFileError(f"{path} has changed since the cube was opened (size or modification time "
                            "differ); open the cube again")
    return np.memmap(path, dtype=np.uint8, mode="r")


def _address(array):
    return array.__array_interface__["data"][0]


def cube_array(cube):
    """The cube's data as a numpy array if it has one without computing anything, else None.

    For a cube from `open_cube` this is the memory-mapped array of the file
    (channel, y, x); for a dask cube straight from the file, the array under
    its graph; for anything computed lazily, None.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_names, demo_path, open_cube
    >>> cube_array(open_cube(demo_path(demo_names()[0]))).ndim
    3
    """
    data = cube._data
    if isinstance(data, np.ndarray):
        return data
    dask_graph = getattr(data, "dask", None)
    if dask_graph is None:
        return None
    # A dask cube straight from the reader is a from_array over the (wrapped)
    # memory-mapped array: layers "original-<name>" and "<name>" only; anything
    # derived lazily (slicing, arithmetic, Stokes selection) adds layers.
    layers = set(getattr(dask_graph, "layers", {}))
    if not layers or not layers <= {data.name, "original-" + data.name}:
        return None
    for value in dict(dask_graph).values():
        inner = getattr(value, "_array", value)
        if isinstance(inner, np.ndarray) and inner.shape == data.shape and inner.dtype == data.dtype:
            return inner
    return None


def stored_array(cube):
    """The stored values under a cube scaled from them (integer FITS data), and their scaling; else None.

    A cube from `open_cube` over integer data (BSCALE/BZERO/BLANK) is a dask
    graph that scales the memory-mapped integers chunk by chunk
    (`scaled_data.scaled_cube`). Block kernels read faster from the
    integers themselves, scaling each block as they copy it out
    (`IntegerScaling.apply_into`). Only the graph exactly as `open_cube`
    made it qualifies: a sliced or computed cube gives None.

    Returns
    -------
    (ndarray, IntegerScaling) or None
        The stored array (channel, y, x), in the file's byte order, and the scaling.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> stored_array(open_cube(demo_path("disk"))) is None   # float data: nothing to scale
    True
    """
    data = cube._data
    name = getattr(data, "name", "")
    source = cube_source(cube)
    if not isinstance(name, str) or not name.startswith(SCALED_NAME_PREFIX) or not source \
            or not source.get("scaling"):
        return None
    record = source["scaling"]
    scaling = IntegerScaling(**{key: record[key] for key in ("bscale", "bzero", "blank", "dtype")})
    # The stored array sits alone in the reader's "original-" layer (dask.array.from_array).
    for layer_name, layer in data.dask.layers.items():
        if not str(layer_name).startswith("original-"):
            continue
        for value in layer.values():
            inner = getattr(value, "_array", value)
            if isinstance(inner, np.ndarray) and inner.shape == data.shape:
                return inner, scaling
    return None


def file_view(cube):
    """Describe where ``cube``'s data lie in its file, or None if they are not a view of it.

    Uses ``cube.meta["cubeloupe_source"]`` (set by `open_cube`) and checks that
    the cube's array really is a view of that file's memory map, so that
    cubes computed in memory (arithmetic, filled copies) are never mistaken
    for the file.

    Returns
    -------
    FileView or None
    """
    source = cube_source(cube)
    data = cube_array(cube)
    if not source or data is None:
        return None
    base = data
    while isinstance(base, np.ndarray):
        base = base.base
    path = source["path"]
    try:
        stat = os.stat(path)
    except OSError:
        return None
    if isinstance(base, np.memmap) or not isinstance(base, mmap.mmap) or len(base) != stat.st_size:
        return None
    start = _address(np.frombuffer(base, dtype=np.uint8))
    offset = _address(data) - start
    if offset < 0 or offset >= stat.st_size:
        return None
    return FileView(path=path, hdu=int(source.get("hdu", 0)), offset=int(offset), shape=tuple(data.shape),
                    strides=tuple(data.strides), dtype=data.dtype.str, size=int(stat.st_size),
                    mtime_ns=int(stat.st_mtime_ns))


def custom_mask(cube, data):
    """The cube's mask as a callable ``view -> bool array``, or None when it is only ``isfinite``.

    Blocks read straight from the memory map apply this mask themselves.
    """
    mask = getattr(cube, "_mask", None)
    if mask is None:
        return None
    if isinstance(mask, LazyMask) and mask._function is np.isfinite:
        own = mask._data
        if own is cube._data:
            return None
        if isinstance(own, np.ndarray) and isinstance(data, np.ndarray) and own.shape == data.shape \
                and own.strides == data.strides and _address(own) == _address(data):
            return None

    def include(view):
        return np.asarray(mask.include(view=view), dtype=bool)

    return include
