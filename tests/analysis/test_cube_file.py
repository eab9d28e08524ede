"""The memory-mapped array under a cube and where it lies in its file."""

import numpy as np
from numpy.testing import assert_array_equal

from cubeloupe.analysis import open_cube
from cubeloupe.analysis.cube_file import cube_array, file_view

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
