"""The memory-mapped array under a cube and where it lies in its file."""

import mmap

import numpy as np
from numpy.testing import assert_array_equal

from cubeloupe.analysis import open_cube
from cubefactory import write_cube, write_scaled_int_cube
from cubeloupe.analysis.cube_file import cube_array, file_view, stored_array

NCHAN = 120
CENTRE = NCHAN / 2 + 0.5


def noisy_cube(rng, ny=7, nx=9):
    data = rng.normal(0.0, 0.05, (NCHAN, ny, nx)).astype(np.float32)
    data[rng.random(data.shape) < 0.03] = np.nan
    return data


def test_file_view_finds_the_data_in_the_file(cube_path, rng):
    data = noisy_cube(rng)
    cube = open_cube(cube_path(data, stokes=True, crpix3=CENTRE))
    view = file_view(cube)
    assert view is not None and view.shape == data.shape
    assert_array_equal(view.array(), cube.unmasked_data[:].value)
    slab = cube.spectral_slab(cube.spectral_axis[10], cube.spectral_axis[30])
    assert_array_equal(file_view(slab).array(), slab.unmasked_data[:].value)
    # arithmetic gives an in-memory cube that still carries the source in meta: not the file
    assert file_view(cube * 2) is None
    plain_path = cube_path(data)
    assert file_view(open_cube(plain_path, use_dask=True)) == file_view(open_cube(plain_path))



def test_cube_array_is_the_files_memory_map(cube_path, rng):
    data = noisy_cube(rng)
    cube = open_cube(cube_path(data, crpix3=CENTRE))
    array = cube_array(cube)
    assert isinstance(array, np.ndarray) and not array.flags.writeable
    assert_array_equal(array, data)
    # a cube computed in memory has an array but it is not a view of the file
    assert file_view(cube * 2) is None


def test_stored_array_finds_the_integers_under_a_scaled_cube(tmp_path, rng):
    # Integer data: physical = BZERO + BSCALE * stored, BLANK -> NaN (Pence et al. 2010, A&A 524, A42,
    # Sect. 4.4.2.5 and 5.3); the kernels read the stored integers from the file's memory map.
    data = rng.normal(0.0, 1.0, (NCHAN, 7, 9))
    data[:, 0, :] = np.nan
    path, values = write_scaled_int_cube(tmp_path / "int.fits", data, bzero=0.25)
    cube = open_cube(path)
    assert cube_array(cube) is None  # not a plain array: a graph that scales it
    array, scaling = stored_array(cube)
    assert array.dtype == np.dtype(">i2") and array.shape == data.shape
    base = array
    while isinstance(base, np.ndarray):
        base = base.base
    assert isinstance(base, mmap.mmap)  # the file itself, not a copy
    np.testing.assert_allclose(scaling.apply(array), values, rtol=1e-6, atol=1e-6, equal_nan=True)
    # Only the graph as open_cube made it: a slice or arithmetic shows other values.
    assert stored_array(cube[10:20]) is None
    assert stored_array(cube * 2) is None
    assert stored_array(open_cube(write_cube(tmp_path / "float.fits", values))) is None  # nothing to scale
