"""Hostile corpus, input files (#14): every file a user can hand over is opened read-only and either read or
refused with a CubeloupeError that names the file and what is wrong, never a traceback from deep inside.
The ``sandbox`` fixture checks that no input file changed.
"""

import os

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from regions import CirclePixelRegion, PixCoord

from cubefactory import make_header
from cubeloupe.analysis import (
    BeamError,
    CubeFileError,
    CubeloupeError,
    CubeShapeError,
    MissingUnitWarning,
    PolarisationError,
    PolarisationWarning,
    RegionError,
    SpectralAxisError,
    UndefinedErrorWarning,
    measure_line,
    moment_maps,
    open_cube,
    region_spectrum,
    source_name,
)

from conftest import CO21, SHAPE, run_python

KMS = u.km / u.s
REST = CO21 * u.Hz


def _good_bytes(sandbox):
    path = sandbox.cube("full.fits")
    return path.read_bytes()


def _header_only(shape, **changes):
    header = make_header(shape)
    for key, value in changes.items():
        header[key] = value
    return header


@pytest.mark.parametrize("make, error, match", [
    (lambda box: box.inputs / "missing.fits", CubeFileError, "missing.fits.*does not exist"),
    (lambda box: box.raw("empty.fits", b""), CubeFileError, "empty.fits"),
    (lambda box: box.raw("notes.fits", b"calibrated cubes, see weblog\n" * 100), CubeFileError, "notes.fits"),
    (lambda box: box.raw("half.fits", _good_bytes(box)[:6000]), CubeFileError, "half.fits"),
    (lambda box: box.raw("header_only.fits", fits.PrimaryHDU().header.tostring().encode()),
     CubeFileError, "header_only.fits"),
    (lambda box: box.inputs, CubeFileError, "inputs"),
])
def test_unreadable_files_are_named(sandbox, make, error, match):
    with pytest.raises(error, match=match):
        open_cube(make(sandbox))


def test_image_without_a_spectral_axis(sandbox):
    image = sandbox.inputs / "image.fits"
    header = _header_only((1, 16, 16))
    fits.PrimaryHDU(np.zeros((16, 16), ">f4"), fits.Header([c for c in header.cards if "3" not in c.keyword]))\
        .writeto(image)
    sandbox.track(image)
    with pytest.raises(CubeShapeError, match="image.fits"):
        open_cube(image)


def test_third_axis_that_is_not_spectral(sandbox):
    path = sandbox.cube("stokes3.fits", np.zeros(SHAPE), extra={"CTYPE3": "STOKES", "CUNIT3": ""})
    with pytest.raises((SpectralAxisError, CubeShapeError), match="stokes3.fits"):
        open_cube(path)


def test_hdu_that_is_not_there(sandbox):
    path = sandbox.cube()
    with pytest.raises(CubeFileError, match=r"no HDU 7"):
        open_cube(path, hdu=7)


def test_file_holding_only_a_table(sandbox):
    path = sandbox.inputs / "table.fits"
    fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns([fits.Column("a", "E", array=[1.0])])])\
        .writeto(path)
    sandbox.track(path)
    with pytest.raises(CubeFileError, match="table.fits.*no image data"):
        open_cube(path)


def test_zero_channel_width(sandbox):
    """CDELT3 = 0 gives one clear line naming the keyword, not the WCS library's multi-line text (D2's reading work)."""
    path = sandbox.cube("flat.fits", cdelt3=0.0)
    with pytest.raises(CubeloupeError, match="CDELT3") as caught:
        open_cube(path)
    assert "flat.fits" in str(caught.value) and "\n" not in str(caught.value)


def test_beams_table_with_the_wrong_row_count(sandbox):
    """The message gives both counts (D2's reading work)."""
    path = sandbox.cube("beams.fits", beams=[(1.0, 1.0, 0.0)] * (SHAPE[0] - 3))
    with pytest.raises(CubeloupeError, match=f"{SHAPE[0] - 3}") as caught:
        cube = open_cube(path)
        region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3))
    assert str(SHAPE[0]) in str(caught.value) and "beams.fits" in str(caught.value)
    assert isinstance(caught.value, (BeamError, CubeFileError))


def test_unreadable_permissions(sandbox):
    """A file its user may not read is a CubeFileError naming it, not "a bug" (D2's reading work)."""
    path = sandbox.cube("secret.fits")
    path.chmod(0o000)
    try:
        result = run_python(f"""
            from cubeloupe.analysis import CubeloupeError, open_cube
            try:
                open_cube({str(path)!r})
            except CubeloupeError as exc:
                print(type(exc).__name__, exc, sep="|")
            """, unprivileged=True)
    finally:
        path.chmod(0o644)
    assert result.returncode == 0 and "|" in result.stdout, result.stdout + result.stderr
    kind, message = (result.stdout.strip().splitlines() or [""])[-1].split("|", 1)
    assert kind == "CubeFileError" and "secret.fits" in message and "permission" in message.lower()


def test_running_out_of_file_handles(sandbox):
    """No file handle left is said as such, not as "truncated or corrupt" (D2's reading work)."""
    path = sandbox.cube("fine.fits")
    result = run_python(f"""
        import os
        from cubeloupe.analysis import CubeloupeError, open_cube
        held = []
        try:
            while True:
                held.append(os.open({str(path)!r}, os.O_RDONLY))
        except OSError:
            pass
        try:
            open_cube({str(path)!r})
        except CubeloupeError as exc:
            print(type(exc).__name__, exc, sep="|")
        """, limits=[("RLIMIT_NOFILE", 64)])
    assert result.returncode == 0 and "|" in result.stdout, result.stdout + result.stderr
    kind, message = (result.stdout.strip().splitlines() or [""])[-1].split("|", 1)
    assert "fine.fits" in message and "truncated" not in message
    assert "file handles" in message or "too many open files" in message.lower()


def test_blank_cube_opens_and_a_region_on_it_is_refused(sandbox):
    path = sandbox.cube("blank.fits", np.full(SHAPE, np.nan))
    cube = open_cube(path)
    with pytest.raises(RegionError, match="only blanked"):
        region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3))


def test_all_zero_cube_follows_the_written_rule(sandbox):
    """Docs, "All-zero and constant data": opened and measured, zero flux, an undefined S/N said aloud."""
    cube = open_cube(sandbox.cube("zeros.fits", np.zeros(SHAPE)))
    spectrum = region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3))
    with pytest.warns(UndefinedErrorWarning, match="exactly 0"):
        line = measure_line(spectrum, (-10, 10) * KMS, line_free=[(-25, -15), (15, 25)] * KMS, order=0,
                            rest_frequency=REST)
    assert line.flux.value == 0 and np.isnan(line.snr)
    maps = moment_maps(cube, (-10, 10) * KMS, line_free=[(-25, -15), (15, 25)] * KMS, rest_frequency=REST)
    assert np.all(maps.m0.value == 0) and np.all(maps.rms.value == 0)


def test_unreadable_unit_is_a_warning_and_arbitrary_units(sandbox):
    path = sandbox.cube("unit.fits", bunit="Jy/beem")
    with pytest.warns(MissingUnitWarning, match="beem"):
        cube = open_cube(path)
    assert cube.unit == u.dimensionless_unscaled


@pytest.mark.parametrize("name", ["with space.fits", "Zoë ü 東.fits", "line\nbreak.fits", "esc\x1b[31m.fits",
                                  "'quote\".fits", "-starts-with-dash.fits"])
def test_any_file_name_opens_and_is_reported_as_given(sandbox, name):
    path = sandbox.cube(name)
    cube = open_cube(path)
    assert source_name(cube).endswith(name)


def test_symbolic_link_to_a_cube_opens(sandbox):
    target = sandbox.cube("target.fits")
    link = sandbox.inputs / "link.fits"
    link.symlink_to(target)
    cube = open_cube(link)
    assert cube.shape == SHAPE
    assert source_name(cube) == str(link)  # the name the user gave, not the target's (#13)


# A degenerate STOKES axis at CRVAL4 = 2, 3, 4 is Q, U, V (Greisen & Calabretta 2002, A&A 395, 1061,
# Table 7): a flux of one polarisation plane is not the source's flux (#13).
FLUX_PATHS = {
    "region flux": lambda cube: region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3)),
    "line": lambda cube: measure_line(region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3),
                                                      statistic="mean"), (-10, 10) * KMS, rest_frequency=REST),
    "moment maps": lambda cube: moment_maps(cube, (-10, 10) * KMS, rest_frequency=REST),
}


@pytest.mark.parametrize("crval4, stokes", [(2.0, "Q"), (3.0, "U"), (4.0, "V")])
@pytest.mark.parametrize("measure", list(FLUX_PATHS))
def test_flux_of_a_lone_polarisation_plane_is_refused_with_the_way_out(sandbox, crval4, stokes, measure):
    path = sandbox.cube(f"pol_{stokes}.fits", stokes=True, extra={"CRVAL4": crval4})
    with pytest.warns(PolarisationWarning, match=f"Stokes {stokes}"):
        cube = open_cube(path)
    with pytest.raises(PolarisationError) as caught:
        FLUX_PATHS[measure](cube)
    message = str(caught.value)
    assert f"pol_{stokes}.fits" in message and f"Stokes {stokes}" in message
    assert "Stokes I cube" in message and "allow_polarisation=True" in message


def test_file_is_opened_read_only_and_left_as_it_was(sandbox):
    path = sandbox.cube()
    before = os.stat(path)
    cube = open_cube(path)
    region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 3))
    moment_maps(cube, (-10, 10) * KMS, rest_frequency=REST)
    after = os.stat(path)
    assert (before.st_mtime_ns, before.st_size) == (after.st_mtime_ns, after.st_size)


def test_all_zero_cube_is_not_reported_ok_by_the_check(sandbox):
    """Docs, "All-zero and constant data": the delivery check never says "ok, rms 0"."""
    from cubeloupe.analysis import check_cube

    cube = open_cube(sandbox.cube("zeros.fits", np.zeros(SHAPE)))
    try:
        result = check_cube(cube)
    except CubeloupeError as exc:
        assert "noise" in str(exc)
    else:
        assert any("noise" in note or "zero" in note for note in result.warnings), result.warnings
