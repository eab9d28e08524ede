"""Which rest frequency velocities refer to when the user has not said."""

import astropy.constants as const
import astropy.units as u
import numpy as np

import pytest

from cubeloupe.analysis import catalog_line_at, choose_velocity_reference, lines_in_band, open_cube


@pytest.fixture
def make_cube(cube_path):
    def make(restfrq=230.538e9):
        return open_cube(cube_path(np.zeros((8, 4, 4), np.float32), restfrq=restfrq))
    return make


def test_the_users_choice_wins_and_is_named_when_in_the_catalog(make_cube):
    cube = make_cube()
    # CO J=1-0 at 115.2712018 GHz (CDMS, Mueller et al. 2005)
    choice = choose_velocity_reference(cube, rest_frequency=115.2712018 * u.GHz)
    assert choice.origin == "given" and choice.line == "CO J=1-0"
    # a wavelength is accepted: 2.6 mm is not a catalog line
    choice = choose_velocity_reference(cube, rest_frequency=2.6 * u.mm)
    assert choice.origin == "given" and choice.line == ""
    # nu = c / lambda (astropy.constants)
    assert abs(choice.rest_frequency - (const.c / (2.6 * u.mm))).to_value(u.Hz) < 1.0


def test_the_files_rest_frequency_comes_next(make_cube):
    cube = make_cube()
    restfrq = cube.wcs.wcs.restfrq
    assert restfrq > 0
    choice = choose_velocity_reference(cube, z=1.0)
    assert choice.origin == "file"
    assert np.isclose(choice.rest_frequency.to_value(u.Hz), restfrq)


def test_without_a_file_value_the_lowest_energy_line_in_the_band_at_z(make_cube):
    cube = make_cube(restfrq=None)
    band = u.Quantity([100, 120], u.GHz)
    choice = choose_velocity_reference(cube, z=1.0, band=band)
    lines = lines_in_band(band[0], band[1], 1.0)
    e_up = np.nan_to_num(np.asarray(lines["E_up"], float), nan=np.inf)
    assert choice.origin == "catalog" and choice.line == str(lines["name"][np.argmin(e_up)])
    # at z = 0 nothing is guessed
    assert choose_velocity_reference(cube, band=band).origin == "none"


def test_catalog_line_at_needs_one_match():
    assert catalog_line_at(230.538 * u.GHz) == "CO J=2-1"
    assert catalog_line_at(231.0 * u.GHz) == ""
