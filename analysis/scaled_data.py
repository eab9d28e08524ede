"""Integer FITS data (BITPIX 8/16/32/64 with BSCALE, BZERO, BLANK) read lazily, block by block.

The FITS standard stores integer images with a linear scaling: the physical
value is ``BZERO + BSCALE * stored`` and a stored value equal to ``BLANK``
marks an undefined pixel (Pence et al. 2010, A&A 524, A42, FITS standard 3.0,
Sect. 4.4.2.5 and 5.3). astropy applies the scaling by reading the whole array
into memory, which a cube larger than memory cannot afford; here the
memory-mapped integers stay on disk and a dask graph scales each block as it
is read, so every consumer of the cube (spectral-cube's own methods and
cubeloupe's block kernels) sees physical values and no step holds the whole
cube. The block kernels go faster still: they find the stored integers under
the graph (`cube_file.stored_array`) and scale each block while copying it
out of the memory map (`IntegerScaling.apply_into`), as for float data.

Examples
--------
>>> scaling = IntegerScaling(bscale=0.5, bzero=3.0, blank=-32768, dtype="float32")
>>> scaling.apply(np.array([0, 2, -32768], dtype=np.int16))
array([ 3.,  4., nan], dtype=float32)
"""

from dataclasses import dataclass

import numpy as np
from dask.base import tokenize
from spectral_cube import LazyMask

__all__ = ["IntegerScaling", "SCALED_NAME_PREFIX", "integer_scaling", "scaled_chunks", "scaled_cube"]

# The name of the dask layer that scales the stored values: a cube whose data still carry it shows
# the file's values unchanged (any slice or arithmetic names a new layer).
SCALED_NAME_PREFIX = "cubeloupe-scaled-"


@dataclass(frozen=True)
class IntegerScaling:
    """The linear scaling of stored values to physical ones: ``bzero + bscale * stored``; ``blank`` -> NaN."""

    bscale: float
    bzero: float
    blank: object
    dtype: str

    def apply(self, stored):
        """Physical values of the stored array ``stored`` (a new float array)."""
        stored = np.asarray(stored)
        return self.apply_into(stored, np.empty(stored.shape, dtype=self.dtype))

    def apply_into(self, stored, out):
        """Write the physical values of ``stored`` into the float array ``out`` (same shape); return ``out``.

        The scaling is computed in ``out``'s dtype, or in this scaling's own
        dtype when that is wider (32-bit integers are scaled in float64, as
        astropy does, before being rounded to a float32 ``out``). ``stored``
        may be big-endian (a view of the file): the byte order is converted
        in the same pass.

        Examples
        --------
        >>> scaling = IntegerScaling(bscale=2.0, bzero=1.0, blank=0, dtype="float32")
        >>> scaling.apply_into(np.array([0, 1, 2], dtype=">i2"), np.empty(3, dtype="float64"))
        array([nan,  3.,  5.])
        """
        work = out
        if np.dtype(self.dtype).itemsize > out.dtype.itemsize:
            work = np.empty(out.shape, dtype=self.dtype)
        kind = work.dtype.type
        if self.bscale != 1:
            np.multiply(stored, kind(self.bscale), out=work, casting="unsafe")
        else:
            work[...] = stored
        if self.bzero != 0:
            work += kind(self.bzero)
        if work is not out:
            out[...] = work
        if self.blank is not None:
            blanked = stored == self.blank
            if blanked.any():
                np.copyto(out, np.nan, where=blanked)
        return out

    @property
    def dtype_type(self):
        return np.dtype(self.dtype).type

    def as_record(self):
        return {"bscale": self.bscale, "bzero": self.bzero, "blank": self.blank, "dtype": self.dtype}


def integer_scaling(header, stored_dtype):
    """The scaling a header asks for, or None when the stored values are already physical floats.

    Integer data are always scaled (to float32 for 8 and 16 bits, float64
    for 32 and 64 bits, as astropy does), so that blanks can become NaN;
    floating-point data only when BSCALE or BZERO say so (BLANK does not
    apply to them, FITS standard Sect. 5.3).

    Examples
    --------
    >>> from astropy.io import fits
    >>> integer_scaling(fits.Header({"BSCALE": 2.0, "BLANK": -1}), np.dtype(">i2"))
    IntegerScaling(bscale=2.0, bzero=0.0, blank=-1, dtype='float32')
    """
    bscale = float(header.get("BSCALE", 1.0))
    bzero = float(header.get("BZERO", 0.0))
    kind = np.dtype(stored_dtype).kind
    if kind in "iu":
        blank = header.get("BLANK")
        blank = None if blank is None or isinstance(blank, (bool, str)) else int(blank)
        dtype = "float32" if np.dtype(stored_dtype).itemsize <= 2 else "float64"
        return IntegerScaling(bscale=bscale, bzero=bzero, blank=blank, dtype=dtype)
    if bscale != 1 or bzero != 0:
        return IntegerScaling(bscale=bscale, bzero=bzero, blank=None, dtype=np.dtype(stored_dtype).newbyteorder("=").name)
    return None


def scaled_chunks(shape, itemsize, target_bytes=2 * 2**20):
    """Chunk shape (channel, y, x) of about ``target_bytes``: 32 channels and square tiles of the image.

    Examples
    --------
    >>> scaled_chunks((1000, 512, 512), 4)
    (32, 128, 128)
    """
    n_chan, ny, nx = shape
    channels = min(n_chan, 32)
    side = max(16, int(np.sqrt(target_bytes / (itemsize * channels))))
    return (channels, min(ny, side), min(nx, side))


def scaled_cube(cube, scaling):
    """A dask-backed cube whose values are ``scaling`` applied, block by block, to ``cube``'s stored values.

    ``cube`` must be dask-backed over the stored (memory-mapped) array; its
    beams, WCS and metadata are kept, and its mask becomes "finite after
    scaling" (blanks are NaN).
    """
    # Small chunks (about 2 MB once scaled): a channel image or a region's box
    # then scales only the chunks it touches, never the whole cube.
    stored = cube._data.rechunk(scaled_chunks(cube._data.shape, np.dtype(scaling.dtype).itemsize))
    data = stored.map_blocks(scaling.apply, dtype=np.dtype(scaling.dtype),
                             name=SCALED_NAME_PREFIX + tokenize(stored.name, scaling.as_record()))
    mask = LazyMask(np.isfinite, data=data, wcs=cube._wcs)
    return cube._new_cube_with(data=data, mask=mask)
