"""open_cube: the spectral axes, units and layouts real files carry, and clear refusals of bad files."""

import mmap

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from numpy.testing import assert_allclose
from spectral_cube import SpectralCube, VaryingResolutionSpectralCube

from cubefactory import C_KMS, file_digest, make_header
from cubeloupe.analysis import (
    CubeFileError,
    CubeShapeError,
    MissingUnitWarning,
    SpectralAxisError,
    open_cube,
)

SHAPE = (6, 5, 4)


def ramp(shape=SHAPE):
    return np.arange(np.prod(shape), dtype=float).reshape(shape)


def linear_axis(crval, cdelt, n, crpix=1.0):
    # FITS linear axis: value = CRVAL + (p - CRPIX) CDELT for 1-based pixel p
    # (Greisen & Calabretta 2002, A&A 395, 1061).
    return crval + (np.arange(1, n + 1) - crpix) * cdelt


@pytest.mark.parametrize("ctype, crval, cdelt, unit", [
    ("FREQ", 230.538e9, -1e6, u.Hz),
    ("FREQ", 230.538e9, 1e6, u.Hz),
    ("VRAD", -5000.0, 1300.0, u.m / u.s),
    ("VRAD", 5000.0, -1300.0, u.m / u.s),
    ("VOPT", 1000.0, 2600.0, u.m / u.s),
    ("VELO-LSR", 0.0, 1300.0, u.m / u.s),
    ("WAVE", 1.3e-3, 2e-9, u.m),
    ("WAVE", 1.3e-3, -2e-9, u.m),
])
def test_spectral_axis_types_and_directions(cube_path, ctype, crval, cdelt, unit):
    data = ramp()
    cube = open_cube(cube_path(data, spectral=ctype, crval3=crval, cdelt3=cdelt, crpix3=2.0))
    assert isinstance(cube, SpectralCube)
    assert cube.shape == SHAPE
    assert_allclose(cube.spectral_axis.to_value(unit), linear_axis(crval, cdelt, SHAPE[0], crpix=2.0), rtol=1e-12)
    # Channel order is kept: plane k of the file is channel k of the cube.
    assert_allclose(cube.unmasked_data[:].value, data)


@pytest.mark.parametrize("ctype, crval, cdelt, unit", [
    ("FREQ", 230.538e9, -1e6, u.Hz),  # FITS default units when CUNIT3 is missing:
    ("VRAD", 0.0, 1300.0, u.m / u.s),  # Hz, m/s and m (Greisen et al. 2006, A&A 446, 747)
    ("WAVE", 1.3e-3, 2e-9, u.m),
])
def test_missing_cunit3_means_si_defaults(cube_path, ctype, crval, cdelt, unit):
    cube = open_cube(cube_path(ramp(), spectral=ctype, crval3=crval, cdelt3=cdelt, cunit3=None))
    assert_allclose(cube.spectral_axis.to_value(unit), linear_axis(crval, cdelt, SHAPE[0]), rtol=1e-12)


def test_velo_axis_in_km_per_s(cube_path):
    cube = open_cube(cube_path(ramp(), spectral="VELO-LSR", crval3=0.0, cdelt3=1.3, cunit3="km/s"))
    assert_allclose(cube.spectral_axis.to_value(u.km / u.s), np.arange(6) * 1.3, rtol=1e-12)


def test_wave_axis_frequencies(cube_path):
    cube = open_cube(cube_path(ramp(), spectral="WAVE", crval3=1.3e-3, cdelt3=2e-9))
    freq = cube.with_spectral_unit(u.GHz).spectral_axis.to_value(u.GHz)
    assert_allclose(freq, C_KMS * 1e3 / linear_axis(1.3e-3, 2e-9, 6) / 1e9, rtol=1e-12)  # f = c / lambda


@pytest.mark.parametrize("bunit, unit", [
    ("K (Tmb)", u.K),
    ("K", u.K),
    ("JY/BEAM", u.Jy / u.beam),
    ("Jy/beam", u.Jy / u.beam),
    ("mJy/beam", u.mJy / u.beam),
    ("Jy/pixel", u.Jy / u.pix),
])
def test_unit_strings_from_real_files(cube_path, bunit, unit):
    assert open_cube(cube_path(ramp(), bunit=bunit)).unit == unit


def test_no_bunit_warns_and_keeps_going(cube_path):
    data = ramp()
    with pytest.warns(MissingUnitWarning, match="no BUNIT"):
        cube = open_cube(cube_path(data, bunit=None))
    assert cube.unit == u.dimensionless_unscaled
    assert_allclose(cube.unmasked_data[:].value, data)


def test_unreadable_bunit_warns(cube_path):
    with pytest.warns(MissingUnitWarning, match="'furlongs per fortnight'"):
        open_cube(cube_path(ramp(), bunit="furlongs per fortnight"))


def test_degenerate_stokes_axis_is_dropped(cube_path):
    data = ramp()
    cube = open_cube(cube_path(data, stokes=True))
    assert cube.shape == SHAPE
    assert_allclose(cube.unmasked_data[:].value, data)


def test_stokes_before_the_spectral_axis(tmp_path):
    # CTYPE3 = STOKES, CTYPE4 = FREQ: another axis order spectral-cube accepts.
    data = ramp()
    header = make_header(SHAPE)
    header["NAXIS"], header["NAXIS3"], header["NAXIS4"] = 4, 1, SHAPE[0]
    for key in ("CTYPE", "CRVAL", "CDELT", "CRPIX", "CUNIT"):
        header[f"{key}4"] = header[f"{key}3"]
    header["CTYPE3"], header["CRVAL3"], header["CDELT3"], header["CRPIX3"] = "STOKES", 1.0, 1.0, 1.0
    del header["CUNIT3"]
    path = tmp_path / "stokes_first.fits"
    fits.PrimaryHDU(data[:, None].astype(">f4"), header).writeto(path)
    cube = open_cube(path)
    assert cube.shape == SHAPE
    assert_allclose(cube.unmasked_data[:].value, data)
    assert_allclose(cube.spectral_axis.to_value(u.Hz), linear_axis(230.538e9, -1e6, 6))


def test_per_channel_beams(cube_path):
    rows = [(1.0 + 0.1 * k, 0.8, 5.0 * k) for k in range(SHAPE[0])]
    cube = open_cube(cube_path(ramp(), beams=rows))
    assert isinstance(cube, VaryingResolutionSpectralCube)
    assert_allclose(cube.beams.major.to_value(u.arcsec), [r[0] for r in rows], rtol=1e-6)


def test_single_beam(cube_path):
    cube = open_cube(cube_path(ramp(), beam=(1.5, 1.0, 30.0)))
    assert cube.beam.major.to(u.arcsec).value == pytest.approx(1.5)
    assert cube.beam.pa.to(u.deg).value == pytest.approx(30.0)


def test_memory_mapped_read_only_and_recorded(cube_path):
    path = cube_path(ramp())
    before = file_digest(path)
    cube = open_cube(path)
    base = cube._data
    while base is not None and not isinstance(base, mmap.mmap):
        base = getattr(base, "base", None)
    assert isinstance(base, mmap.mmap)  # backed by the file, not a copy in memory
    assert cube.meta["cubeloupe_source"]["path"] == str(path.resolve())
    assert cube.meta["cubeloupe_source"]["shape"] == SHAPE
    # The mapping is read-only: the data cannot even be changed in memory.
    assert not cube._data.flags.writeable
    with pytest.raises(ValueError, match="read-only"):
        cube._data[0, 0, 0] = -1e9
    cube.moment0()
    del cube, base
    assert file_digest(path) == before


def test_not_fits(tmp_path):
    path = tmp_path / "notes.fits"
    path.write_text("this is not a FITS file\n")
    with pytest.raises(CubeFileError, match="not a FITS file") as info:
        open_cube(path)
    assert isinstance(info.value, OSError)
    assert str(path) in str(info.value)


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(CubeFileError, match="does not exist"):
        open_cube(tmp_path / "nothing.fits")
    with pytest.raises(CubeFileError, match="folder"):
        open_cube(tmp_path)


def test_two_dimensional_image(tmp_path):
    header = make_header((1, 8, 8))
    for key in ("NAXIS3", "CTYPE3", "CRVAL3", "CDELT3", "CRPIX3", "CUNIT3"):
        del header[key]
    header["NAXIS"] = 2
    path = tmp_path / "image.fits"
    fits.PrimaryHDU(np.zeros((8, 8), ">f4"), header).writeto(path)
    with pytest.raises(CubeShapeError, match="2-D image") as info:
        open_cube(path)
    assert isinstance(info.value, ValueError)


def test_no_spectral_axis(cube_path):
    with pytest.raises(SpectralAxisError, match="no spectral axis"):
        open_cube(cube_path(ramp(), spectral="STOKES"))


def test_unknown_spectral_ctype(cube_path):
    with pytest.raises(SpectralAxisError, match="'CHANNEL'"):
        open_cube(cube_path(ramp(), spectral="CHANNEL"))


def test_extra_non_degenerate_axis(tmp_path):
    header = make_header(SHAPE)
    header["NAXIS"], header["NAXIS4"], header["CTYPE4"] = 4, 2, "TIME"
    path = tmp_path / "time.fits"
    fits.PrimaryHDU(np.zeros((2,) + SHAPE, ">f4"), header).writeto(path)
    with pytest.raises(CubeShapeError, match="TIME"):
        open_cube(path)


def test_truncated_file(cube_path):
    path = cube_path(np.ones((20, 30, 30)))
    content = path.read_bytes()
    path.write_bytes(content[: len(content) // 2])
    with pytest.raises(CubeFileError, match="truncated"):
        open_cube(path)


def test_missing_hdu(cube_path):
    with pytest.raises(CubeFileError, match="no HDU 3"):
        open_cube(cube_path(ramp()), hdu=3)


def test_data_in_an_extension(tmp_path):
    data = ramp()
    header = make_header(SHAPE)
    image = fits.ImageHDU(data.astype(">f4"), header, name="CUBE")
    path = tmp_path / "extension.fits"
    fits.HDUList([fits.PrimaryHDU(), image]).writeto(path)
    cube = open_cube(path)
    assert_allclose(cube.unmasked_data[:].value, data)
    assert cube.meta["cubeloupe_source"]["hdu"] == 1
