"""Fixtures of the widget tests: a small line cube and a suite opened on it."""

import numpy as np
import pytest

from cubefactory import gaussian_profile, velocity_axis_kms
from cubeloupe.widgets import Loupe
from suite_driver import LINE_PEAK, LINE_SIGMA, LINE_V, N_CHAN, NX, NY


@pytest.fixture
def line_cube(cube_path, rng):
    """A 230.538 GHz cube (1 MHz channels) with a Gaussian line on a sloped baseline in a central blob."""
    v = velocity_axis_kms(N_CHAN)
    yy, xx = np.mgrid[:NY, :NX]
    blob = np.exp(-0.5 * (((xx - 14) / 4.0) ** 2 + ((yy - 12) / 4.0) ** 2))
    line = gaussian_profile(v, LINE_PEAK, LINE_V, LINE_SIGMA)[:, None, None] * blob
    slope = (0.02 + 0.0005 * np.arange(N_CHAN))[:, None, None]
    data = line + slope + rng.normal(0, 0.01, (N_CHAN, NY, NX))
    return cube_path(data)


@pytest.fixture
def loupe(line_cube):
    return Loupe(line_cube, first_view=False)
