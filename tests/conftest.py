import numpy as np
import pytest

from cubefactory import write_cube


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


@pytest.fixture
def cube_path(tmp_path):
    """Factory: ``cube_path(data, name="cube.fits", **header_kw)`` writes a test cube."""
    counter = iter(range(10_000))

    def make(data, name=None, **kw):
        return write_cube(tmp_path / (name or f"cube{next(counter)}.fits"), data, **kw)

    return make
