"""open_cube: the spectral axes, units and layouts real files carry, and clear refusals of bad files."""

import gc
import gzip
import mmap
import os
import subprocess
import sys
import tempfile
import textwrap
import tracemalloc
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose
from numpy.testing import assert_allclose
from regions import PixCoord, RectanglePixelRegion
from spectral_cube import SpectralCube, VaryingResolutionSpectralCube

from cubefactory import C_KMS, file_digest, make_header, write_cube, write_scaled_int_cube
from cubeloupe.analysis import (
    BeamError,
    CubeFileError,
    CubeShapeError,
    InMemoryReadWarning,
    MissingUnitWarning,
    PolarisationError,
    PolarisationWarning,
    SpectralAxisError,
    UnitMismatchError,
    VelocityConventionWarning,
    check_total_intensity,
    cube_rest_frequency,
    cube_source,
    cube_stokes,
    moment_maps,
    open_cube,
    region_spectrum,
    source_name,
)
from cubeloupe.analysis import cubes as cubes_module
from cubeloupe.analysis.cube_file import file_view

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
    cube = open_cube(cube_path(ramp(), spectral="VELO-LSR", crval3=0.0, cdelt3=1.3, cunit3="km/s",
                               extra={"VELREF": 257}))
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


def test_symlinked_file_keeps_the_name_the_user_gave(tmp_path, monkeypatch):
    # A delivery often links cubes under readable names: reports and errors must show that name (#14),
    # while the data are still read through the target's memory map.
    store = tmp_path / "store"
    store.mkdir()
    target = write_cube(store / "member.uid___A001_X1_spw25.cube.I.pbcor.fits", ramp(), stokes=True,
                        extra={"CRVAL4": 2.0})
    link = tmp_path / "my_source_co21.fits"
    link.symlink_to(target)
    monkeypatch.chdir(tmp_path)
    with pytest.warns(PolarisationWarning, match="my_source_co21.fits"):
        cube = open_cube("my_source_co21.fits")  # relative, as typed
    assert cube_source(cube)["path"] == str(link)  # absolute, not resolved
    assert source_name(cube) == str(link)
    with pytest.raises(PolarisationError, match="my_source_co21.fits"):
        check_total_intensity(cube)
    view = file_view(cube)
    assert view is not None and view.path == str(link)  # the memory-map fast paths still find the file
    assert_allclose(view.array(), ramp())
    # Through a symlinked folder, ".." is the target's parent (POSIX path resolution), so folding it
    # would name another file: the path is then kept unfolded.
    (tmp_path / "a" / "b").mkdir(parents=True)
    (tmp_path / "to_b").symlink_to(tmp_path / "a" / "b")
    meant = write_cube(tmp_path / "a" / "x.fits", ramp() + 1.0)
    write_cube(tmp_path / "x.fits", ramp() - 1.0)  # the file the folded name would point at
    tricky = open_cube(tmp_path / "to_b" / ".." / "x.fits")
    assert os.path.samefile(cube_source(tricky)["path"], meant)
    assert_allclose(file_view(tricky).array(), ramp() + 1.0)


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


# --- Header conventions met in delivered files (issue 13) -------------------------------------

def write_header(tmp_path, data, name="cube.fits", remove=(), **header_kw):
    """Write ``data`` with a cubefactory header, minus the keywords in ``remove``."""
    header = make_header(np.shape(data), **header_kw)
    for key in remove:
        header.remove(key, ignore_missing=True)
    path = tmp_path / name
    fits.PrimaryHDU(np.asarray(data, ">f4"), header).writeto(path)
    return path


CO10 = 115.2712018e9  # Hz; 12CO J=1-0 (CDMS catalogue, from memory)


def radio_frequency(v_ms, f0=CO10):
    # radio convention: f = f0 (1 - v / c) (Greisen et al. 2006, A&A 446, 747, Table 1)
    return f0 * (1 - v_ms / (C_KMS * 1e3))


def optical_frequency(v_ms, f0=CO10):
    # optical convention: f = f0 / (1 + v / c) (Greisen et al. 2006, Table 1)
    return f0 / (1 + v_ms / (C_KMS * 1e3))


def test_velo_with_velref_257_is_radio_lsr(tmp_path):
    # AIPS Memo 27: VELREF = 1 (LSR) + 256 (radio convention).
    v = linear_axis(1.8e6, 2e4, SHAPE[0])
    path = write_header(tmp_path, ramp(), spectral="VELO-LSR", crval3=1.8e6, cdelt3=2e4, restfrq=CO10,
                        extra={"VELREF": 257}, remove=("SPECSYS",))
    cube = open_cube(path)
    assert_allclose(cube.with_spectral_unit(u.Hz).spectral_axis.value, radio_frequency(v), rtol=1e-12)
    read = cube_source(cube)["spectral_axis"]
    assert (read["header_ctype"], read["read_as"], read["convention"], read["frame"]) == \
        ("VELO-LSR", "VRAD", "radio", "LSRK")


def test_legacy_velo_without_velref_warns_and_user_chooses(tmp_path):
    v = linear_axis(1.8e6, 2e4, SHAPE[0])
    path = write_header(tmp_path, ramp(), spectral="VELO-LSR", crval3=1.8e6, cdelt3=2e4, restfrq=CO10)
    with pytest.warns(VelocityConventionWarning, match="no VELREF"):
        assumed = open_cube(path)
    # the legacy rule: optical, as wcslib (and so astropy) reads it
    assert_allclose(assumed.with_spectral_unit(u.Hz).spectral_axis.value, optical_frequency(v), rtol=1e-12)
    assert cube_source(assumed)["spectral_axis"]["assumed"]
    radio = open_cube(path, velocity_convention="radio")
    assert_allclose(radio.with_spectral_unit(u.Hz).spectral_axis.value, radio_frequency(v), rtol=1e-12)
    # The two readings of the same channel differ by about v^2 / c in velocity
    # (optical - radio = v_r^2 / (c - v_r) for the same frequency; Greisen et al. 2006, Table 1).
    v_r = radio.spectral_axis.to_value(u.km / u.s)
    as_optical = radio.with_spectral_unit(u.km / u.s, velocity_convention="optical").spectral_axis
    assert_allclose(as_optical.to_value(u.km / u.s) - v_r, v_r**2 / (C_KMS - v_r), rtol=1e-9)
    assert cube_source(radio)["spectral_axis"]["header_ctype"] == "VELO-LSR"
    assert cube_source(radio)["spectral_axis"]["read_as"] == "VRAD"


def test_felo_axis_is_linear_in_frequency(tmp_path):
    # AIPS FELO = optical velocity sampled linearly in frequency (Paper III 'VOPT-F2W').
    path = write_header(tmp_path, ramp(), spectral="FELO-HEL", crval3=1.8e6, cdelt3=2e4, restfrq=CO10,
                        crpix3=3.0, remove=("SPECSYS",))
    cube = open_cube(path)
    freq = cube.with_spectral_unit(u.Hz).spectral_axis.value
    assert_allclose(np.diff(freq), np.diff(freq)[0], rtol=1e-9)
    assert freq[2] == pytest.approx(optical_frequency(1.8e6), rel=1e-12)  # reference pixel 3
    assert cube_source(cube)["spectral_axis"]["frame"] == "BARYCENT"


def test_velocity_ctype_without_standard_name(tmp_path):
    path = write_header(tmp_path, ramp(), spectral="VELOCITY", crval3=0.0, cdelt3=1300.0, cunit3="m/s")
    cube = open_cube(path, velocity_convention="radio")
    assert_allclose(cube.spectral_axis.to_value(u.m / u.s), linear_axis(0.0, 1300.0, SHAPE[0]))


def test_restfreq_alias_and_rest_frequency_argument(tmp_path):
    path = write_header(tmp_path, ramp(), spectral="VRAD", crval3=0.0, cdelt3=2e4, restfrq=None,
                        extra={"RESTFREQ": CO10})
    cube = open_cube(path)
    assert_quantity_allclose(cube_rest_frequency(cube), CO10 * u.Hz)
    assert "RESTFREQ" in cube_source(cube)["spectral_axis"]["rest_frequency_basis"]
    other = open_cube(path, rest_frequency=110.2013541 * u.GHz)  # 13CO J=1-0 (CDMS, from memory)
    assert_quantity_allclose(cube_rest_frequency(other), 110.2013541 * u.GHz)
    v = linear_axis(0.0, 2e4, SHAPE[0])
    assert_allclose(other.with_spectral_unit(u.Hz).spectral_axis.value, radio_frequency(v, 110.2013541e9), rtol=1e-12)


def test_velocity_cube_without_rest_frequency_gets_one(tmp_path):
    path = write_header(tmp_path, ramp(), spectral="VOPT", crval3=1.8e6, cdelt3=2e4, restfrq=None)
    assert cube_rest_frequency(open_cube(path)) is None
    cube = open_cube(path, rest_frequency=CO10 * u.Hz)
    v = linear_axis(1.8e6, 2e4, SHAPE[0])
    assert_allclose(cube.with_spectral_unit(u.Hz).spectral_axis.value, optical_frequency(v), rtol=1e-12)
    with pytest.raises(UnitMismatchError, match="rest_frequency"):
        open_cube(path, rest_frequency=115.27)


def test_blank_on_float_data_is_ignored_with_a_note(tmp_path):
    # FITS standard 3.0 (Pence et al. 2010, A&A 524, A42), Sect. 5.3: BLANK is for integer data only.
    data = ramp()
    data[0, 0, 0] = np.nan
    data[1, 0, 0] = -1.0  # equal to BLANK, but a real value in float data
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Invalid 'BLANK' keyword")  # astropy, while writing
        path = write_header(tmp_path, data, extra={"BLANK": -1})
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # astropy's VerifyWarning is replaced by the note
        cube = open_cube(path)
    assert any("BLANK" in note for note in cube_source(cube)["notes"])
    filled = cube.filled_data[:].value
    assert np.isnan(filled[0, 0, 0]) and filled[1, 0, 0] == -1.0


@pytest.mark.parametrize("bitpix", [16, 32])
def test_integer_data_scaled_like_the_float_copy(tmp_path, rng, bitpix):
    # physical = BZERO + BSCALE * stored, BLANK -> undefined (Pence et al. 2010, Sect. 4.4.2.5, 5.3);
    # the float copy is written from those same numbers, so both must agree to float precision.
    data = rng.normal(0.0, 0.1, size=(30, 12, 14))
    v = np.arange(30)
    data += 2.0 * np.exp(-0.5 * ((v - 15) / 3.0) ** 2)[:, None, None]
    data[:, :3, :] = np.nan  # a blanked border
    path, values = write_scaled_int_cube(tmp_path / "int.fits", data, bitpix=bitpix, bzero=0.5,
                                         blank=-32768 if bitpix == 16 else -2**31)
    copy = write_cube(tmp_path / "float.fits", values)
    scaled, plain = open_cube(path), open_cube(copy)
    assert cube_source(scaled)["scaling"]["bzero"] == 0.5
    assert_allclose(scaled.filled_data[:].value, plain.filled_data[:].value, rtol=1e-6, atol=1e-7)
    region = RectanglePixelRegion(PixCoord(6.5, 7.5), 8, 6)
    assert_allclose(region_spectrum(scaled, region).value, region_spectrum(plain, region).value, rtol=1e-5,
                    atol=1e-6)
    window = [230.528, 230.518] * u.GHz  # channels 10 to 20 of the 1 MHz axis from 230.538 GHz
    a, b = moment_maps(scaled, window), moment_maps(plain, window)
    for ours, reference in ((a.m0, b.m0), (a.m1, b.m1)):
        assert_allclose(ours.value, reference.value, rtol=1e-5, atol=1e-6)
    assert np.isnan(a.m0.value[:3]).all()


def test_integer_data_stay_memory_mapped(tmp_path, rng):
    data = rng.normal(size=(40, 100, 100))
    path, _ = write_scaled_int_cube(tmp_path / "int.fits", data)
    cube = open_cube(path)
    # The graph reads from the file's memory map: its source array is a view of an mmap.
    sources = [value for value in dict(cube._data.dask).values() if isinstance(value, np.ndarray)]
    sources += [getattr(value, "_array", None) for value in dict(cube._data.dask).values()]

    def mapped(array):
        base = array
        while isinstance(base, np.ndarray):
            base = base.base
        return isinstance(base, mmap.mmap)

    assert any(isinstance(s, np.ndarray) and mapped(s) and s.dtype == np.dtype(">i2") for s in sources)
    # Opening scaled nothing: no float copy of the cube was made (tracemalloc counts numpy buffers).
    tracemalloc.start()
    again = open_cube(path)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < data.size * 4 / 4, peak  # a quarter of one float32 copy of the cube
    del again


def test_lone_stokes_q_plane_is_named_and_flux_refused(tmp_path):
    data = ramp()
    header = make_header(SHAPE, stokes=True)
    header["CRVAL4"] = 2.0  # Stokes Q (Greisen & Calabretta 2002, A&A 395, 1061, Table 7)
    path = tmp_path / "q.fits"
    fits.PrimaryHDU(data[np.newaxis].astype(">f4"), header).writeto(path)
    with pytest.warns(PolarisationWarning, match="Stokes Q"):
        cube = open_cube(path)
    assert cube_stokes(cube) == "Q"
    assert_allclose(cube.unmasked_data[:].value, data)
    with pytest.raises(PolarisationError, match="allow_polarisation=True"):
        check_total_intensity(cube)
    assert check_total_intensity(cube, allow_polarisation=True) == "Q"
    assert cube_stokes(open_cube(write_cube(tmp_path / "i.fits", data, stokes=True))) == "I"


@pytest.mark.parametrize("bunit", ["km/s", "m/s", "K km/s", "deg"])
def test_bunit_that_is_not_a_brightness_is_refused(cube_path, bunit):
    with pytest.raises(UnitMismatchError, match="not a brightness") as info:
        open_cube(cube_path(ramp(), bunit=bunit))
    assert repr(bunit) in str(info.value) and "cube" in str(info.value)


def test_padded_upper_case_unit(tmp_path):
    path = write_header(tmp_path, ramp(), bunit="JY/BEAM ")
    assert open_cube(path).unit == u.Jy / u.beam


def test_gzip_compressed_file_read_into_memory(cube_path, monkeypatch):
    data = ramp()
    path = cube_path(data)
    packed = path.with_suffix(".fits.gz")
    packed.write_bytes(gzip.compress(path.read_bytes()))
    with pytest.warns(InMemoryReadWarning, match="gunzip"):
        cube = open_cube(packed)
    assert_allclose(cube.unmasked_data[:].value, data)
    assert cube_source(cube)["memory_mapped"] is False
    # Too large for the memory available: refused, with the fix.
    monkeypatch.setattr(cubes_module, "_in_memory_limit", lambda: 100)
    with pytest.raises(CubeFileError, match="gunzip -k"):
        open_cube(packed)


def test_cdelt3_zero_is_a_clear_one_line_error(cube_path):
    with pytest.raises(SpectralAxisError, match="CDELT3 = 0") as info:
        open_cube(cube_path(ramp(), cdelt3=0.0))
    assert "\n" not in str(info.value)


def test_beams_table_with_wrong_number_of_rows(tmp_path):
    rows = [(1.0, 0.8, 0.0)] * (SHAPE[0] - 1)
    path = tmp_path / "beams.fits"
    write_cube(path, ramp(), beams=rows)
    with pytest.raises(BeamError, match=f"{SHAPE[0] - 1} rows but {SHAPE[0]} channels"):
        open_cube(path)


def test_sfl_projection_with_reference_pixel_far_outside(tmp_path):
    # Sanson-Flamsteed: x = phi cos(theta), y = theta (Calabretta & Greisen 2002, A&A 395, 1077, eq. 92);
    # with CRVAL2 = 0 and LONPOLE = 0 native and celestial coordinates coincide, so
    # dec = CDELT2 (j - CRPIX2) and ra = CRVAL1 + CDELT1 (i - CRPIX1) / cos(dec) for 1-based pixels (i, j).
    header = make_header(SHAPE)
    header.update({"CTYPE1": "RA---SFL", "CTYPE2": "DEC--SFL", "CRPIX1": -799.0, "CRPIX2": -4741.913,
                   "CRVAL1": 57.66, "CRVAL2": 0.0, "CDELT1": -0.006388889, "CDELT2": 0.006388889,
                   "LONPOLE": 0.0})
    path = tmp_path / "sfl.fits"
    fits.PrimaryHDU(ramp().astype(">f4"), header).writeto(path)
    cube = open_cube(path)
    dec = 0.006388889 * (1 + 4741.913)
    ra = 57.66 - 0.006388889 * (1 + 799.0) / np.cos(np.radians(dec))
    assert cube.world[0, 0, 0][1].to_value(u.deg) == pytest.approx(dec, abs=1e-9)
    assert cube.world[0, 0, 0][2].to_value(u.deg) == pytest.approx(ra, abs=1e-9)


# --- Files opened and closed as the operating system sees them (issue 14) ---------------------

def open_descriptors(path):
    target = str(path.resolve())
    count = 0
    for entry in Path("/proc/self/fd").iterdir():
        try:
            count += os.readlink(entry) == target
        except OSError:
            continue
    return count


@pytest.mark.skipif(not Path("/proc/self/fd").exists(), reason="needs /proc to count open files")
def test_no_file_left_open_and_handle_released_with_the_cube(cube_path):
    path = cube_path(ramp())
    with warnings.catch_warnings():
        warnings.simplefilter("error", ResourceWarning)
        cube = open_cube(path)
        gc.collect()
    # one handle, held by the memory map under the data, and only while the cube lives
    assert open_descriptors(path) <= 1
    cube.moment0()
    del cube
    gc.collect()
    assert open_descriptors(path) == 0


def run_isolated(code):
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True, text=True,
                          timeout=120)


def test_unreadable_file(cube_path):
    path = cube_path(ramp())
    path.chmod(0)
    # Run as an unprivileged user where possible (root reads any file).
    code = f"""
        import os
        import spectral_cube
        from cubeloupe.analysis import open_cube, CubeFileError
        if os.geteuid() == 0:
            os.setgid(65534); os.setuid(65534)
        try:
            open_cube({str(path)!r})
        except CubeFileError as exc:
            print("CLEAR:", exc)
    """
    for parent in path.parents:  # let the unprivileged user reach the file (not read it)
        if str(parent).startswith(tempfile.gettempdir()) and parent != Path(tempfile.gettempdir()):
            os.chmod(parent, os.stat(parent).st_mode | 0o011)
    result = run_isolated(code)
    assert "CLEAR:" in result.stdout, result.stderr[-2000:]
    assert "permission denied" in result.stdout and str(path) in result.stdout


def test_out_of_file_handles_is_named(cube_path):
    path = cube_path(ramp())
    code = f"""
        import resource
        from cubeloupe.analysis import open_cube, CubeFileError
        open_cube({str(path)!r})  # imports everything first
        soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
        resource.setrlimit(resource.RLIMIT_NOFILE, (64, hard))
        held = []
        try:
            while True:
                held.append(open({str(path)!r}, "rb"))
        except OSError:
            pass
        try:
            open_cube({str(path)!r})
        except CubeFileError as exc:
            print("CLEAR:", exc)
    """
    result = run_isolated(code)
    assert "CLEAR:" in result.stdout, result.stderr[-2000:]
    assert "file handles" in result.stdout and "truncated" not in result.stdout
