"""Tests of line identification and redshift in the delivery check (analysis/check/identification.py; issue 13)."""

import astropy.units as u
import numpy as np

from cubefactory import C_KMS, frequency_axis_hz, write_cube
from cubeloupe.analysis import demo_path, open_cube
from cubeloupe.analysis.check import check_cube
from cubeloupe.analysis.check.identification import redshift_constraint
from small_field import small_field_cube

# A 22 MHz band at 23 GHz spans 287 km/s (v = c df / f, radio convention; Greisen et al. 2006).
CENTRE = 23.0e9


def test_a_narrow_band_with_two_lines_100_kms_apart_gives_no_redshift(tmp_path):
    """Regression test for #13: two lines 100 km/s apart in a 22 MHz band made z = 3.71."""
    rng = np.random.default_rng(21)
    nchan, cdelt = 1000, -22e3  # 22 MHz
    freq = frequency_axis_hz(nchan, CENTRE, cdelt, crpix3=nchan / 2)
    v = C_KMS * (CENTRE - freq) / CENTRE
    data = rng.normal(0, 0.05, (nchan, 16, 16))
    y, x = np.mgrid[0:16, 0:16]
    blob = np.exp(-0.5 * ((y - 7.5) ** 2 + (x - 7.5) ** 2) / 4)
    for v0 in (-50.0, 50.0):
        data += (1.0 * np.exp(-0.5 * ((v - v0) / 3.0) ** 2))[:, None, None] * blob
    # RESTFRQ away from any catalog line: no local identification either
    path = write_cube(tmp_path / "narrow.fits", data, crval3=CENTRE, cdelt3=cdelt, crpix3=nchan / 2,
                      restfrq=CENTRE * 1.001, bunit="K", pixel=9.0, beam=(28.0, 28.0, 0.0))
    result = check_cube(open_cube(path))
    assert len(result.lines.features) == 2
    assert result.lines.solved_z is None and result.lines.local_z is None
    assert "redshift not constrained by this band" in result.lines.redshift_note
    assert not any("redshift solved" in w for w in result.warnings)


def test_demo_cube_with_two_disk_components_gets_no_solved_redshift():
    """Regression test for #13: two components of one line, 190 km/s apart at 342 GHz, made z = 2.36.

    The demo sidecar: CO J=3-2 of a rotating ring at 2650 km/s, components at 2555 and 2745 km/s.
    """
    result = check_cube(open_cube(demo_path("varying_beams")))
    assert result.lines.solved_z is None
    # the header's rest frequency is CO J=3-2 (345.7959899 GHz): the local identification comes first
    assert all(f.candidates[0].name == "CO J=3-2" for f in result.lines.features)
    # z = v / c for the strongest component (radio velocity, within 20 km/s of one injected component)
    velocity = result.lines.local_z * C_KMS / (1 + result.lines.local_z)
    assert min(abs(velocity - 2555), abs(velocity - 2745)) < 20


def test_hyperfine_groups_of_one_line_give_no_redshift_but_their_local_names(tmp_path):
    path, _ = small_field_cube(tmp_path / "hfs.fits", np.random.default_rng(15), edge=1.0)
    result = check_cube(open_cube(path))
    assert result.lines.solved_z is None and "one hyperfine group" in result.lines.redshift_note
    assert all(f.candidates[0].name.startswith("N2H+ J=1-0") for f in result.lines.features)


def test_redshift_constraint_needs_a_spread_one_line_cannot_cover():
    near = u.Quantity([100.0, 100.0 * (1 - 300 / C_KMS)], u.GHz)   # 300 km/s apart
    far = u.Quantity([100.0, 100.0 * (1 - 3000 / C_KMS)], u.GHz)   # 3000 km/s apart
    assert "one line" in redshift_constraint(near, 150 * u.km / u.s)
    assert redshift_constraint(far, 150 * u.km / u.s) is None
