"""Tests of the header summary of the delivery check (analysis/check/header.py; issue 8)."""


import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose

from cubefactory import C_KMS, frequency_axis_hz, write_cube
from cubeloupe.analysis import PolarisationWarning, open_cube
from cubeloupe.analysis.check import header_summary





def test_header_summary_channel_width_band_and_beam_sampling(tmp_path, rng):
    path = write_cube(tmp_path / "h.fits", rng.normal(size=(10, 12, 16)), beam=(1.0, 0.8, 30.0), pixel=0.25)
    summary = header_summary(open_cube(path))
    assert summary.shape == (10, 12, 16)
    assert [a.ctype for a in summary.axes] == ["RA---SIN", "DEC--SIN", "FREQ"]
    assert [a.length for a in summary.axes] == [16, 12, 10]
    # radio convention: dv = c df / f (Greisen et al. 2006, A&A 446, 747)
    assert_quantity_allclose(summary.channel_width_frequency, 1 * u.MHz)
    assert_quantity_allclose(summary.channel_width_velocity, C_KMS * 1e6 / np.median(frequency_axis_hz(10))
                             * u.km / u.s, rtol=1e-6)
    # 10 channels from 230.538 GHz down in 1 MHz steps: outer edges half a channel beyond
    assert_quantity_allclose(summary.band, [230.5285, 230.5385] * u.GHz, rtol=1e-12)
    assert_quantity_allclose(summary.pixel_size, [0.25, 0.25] * u.arcsec, rtol=1e-9)
    assert summary.pixels_per_beam == pytest.approx(0.8 / 0.25)
    # Gaussian beam solid angle pi bmaj bmin / (4 ln 2) (Wilson, Rohlfs & Huettemeister, Tools of Radio Astronomy)
    assert summary.beam_area_pixels == pytest.approx(np.pi * 1.0 * 0.8 / (4 * np.log(2)) / 0.25**2, rel=1e-6)
    assert summary.unit == u.Jy / u.beam
    assert summary.warnings == ()


def test_header_summary_warns_under_three_pixels_per_beam(tmp_path, rng):
    path = write_cube(tmp_path / "coarse.fits", rng.normal(size=(5, 8, 8)), beam=(1.0, 0.6, 0.0), pixel=0.3)
    summary = header_summary(open_cube(path))
    assert summary.pixels_per_beam == pytest.approx(2.0)
    assert any("undersampled" in note for note in summary.warnings)


def test_header_summary_per_channel_beams_give_a_range(tmp_path, rng):
    beams = [(1.0 + 0.05 * k, 0.8 + 0.01 * k, 10.0) for k in range(6)]
    path = write_cube(tmp_path / "varying.fits", rng.normal(size=(6, 8, 8)), beams=beams)
    summary = header_summary(open_cube(path))
    assert_quantity_allclose(summary.beam_major_range, [1.0, 1.25] * u.arcsec, rtol=1e-6)
    assert_quantity_allclose(summary.beam_minor_range, [0.8, 0.85] * u.arcsec, rtol=1e-6)


def test_header_summary_without_beam_says_so(tmp_path, rng):
    path = write_cube(tmp_path / "nobeam.fits", rng.normal(size=(5, 8, 8)), beam=None)
    summary = header_summary(open_cube(path))
    assert summary.beam_major is None and summary.pixels_per_beam is None
    assert any("no beam" in note for note in summary.warnings)


def test_lone_polarisation_plane_is_named_in_the_notes(tmp_path):
    # CRVAL4 = 2 on a STOKES axis is Q (Greisen & Calabretta 2002, A&A 395, 1061, Table 7); CRVAL4 = 1 is I.
    data = np.random.default_rng(3).normal(0.0, 1e-3, (20, 8, 8))
    with pytest.warns(PolarisationWarning):
        q_cube = open_cube(write_cube(tmp_path / "q.fits", data, stokes=True, extra={"CRVAL4": 2.0}))
    assert any("Stokes Q" in note and "not total intensity" in note for note in header_summary(q_cube).warnings)
    i_cube = open_cube(write_cube(tmp_path / "i.fits", data, stokes=True))
    assert not any("Stokes" in note for note in header_summary(i_cube).warnings)
