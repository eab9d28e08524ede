"""Velocity-axis cubes without a rest frequency, on a nominal frequency axis: the file's velocities come back."""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import (
    NOMINAL_REST_FREQUENCY, open_cube, on_nominal_frequencies, velocity, velocity_convention_of, velocity_only,
)
from cubeloupe.analysis.cube_file import file_view

KMS = u.km / u.s


@pytest.mark.parametrize("ctype, convention", [("VRAD", "radio"), ("VOPT", "optical")])
def test_velocities_come_back_exactly_through_the_nominal_axis(cube_path, rng, ctype, convention):
    path = cube_path(rng.normal(size=(40, 6, 7)).astype(np.float32), spectral=ctype, restfrq=None)
    cube = open_cube(path)
    assert velocity_only(cube) and velocity_convention_of(cube) == convention
    on_frequency = on_nominal_frequencies(cube)
    assert not velocity_only(on_frequency)
    # v = c (f0 - f) / f0 (radio) or c (f0 - f) / f (optical): the inverse of the axis conversion
    # (Greisen et al. 2006, A&A 446, 747, table 1), with the same f0 and convention.
    back = velocity(on_frequency.spectral_axis, NOMINAL_REST_FREQUENCY, convention=convention)
    assert_allclose(back.to_value(KMS), cube.spectral_axis.to_value(KMS), rtol=0, atol=1e-6)
    # still the file's memory map underneath
    assert file_view(on_frequency) is not None


def test_a_frequency_cube_is_not_velocity_only(cube_path, rng):
    assert not velocity_only(open_cube(cube_path(rng.normal(size=(10, 4, 4)).astype(np.float32))))
