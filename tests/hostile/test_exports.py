"""Hostile corpus, exports and output paths (#14): every refusal is a CubeloupeError naming the path, and
nothing is ever half-written.

Each case checks (through the ``sandbox`` fixture) that the input cube is unchanged and that the output
folder holds exactly what the case expects: no partial file, no temporary file.
"""

import errno
import json
import os

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import (
    CubeFileError,
    CubeloupeError,
    ExportContentError,
    ExportError,
    OutputExistsError,
    check_output_path,
    moment_maps,
    open_cube,
    region_spectrum,
    write_map,
    write_maps,
    write_spectra,
    write_table,
)

from conftest import CO21, run_python

KMS = u.km / u.s
WINDOW = (-15, 15) * KMS


@pytest.fixture
def products(sandbox):
    """A moment map, a region spectrum and a table made from the sandbox's cube."""
    cube = open_cube(sandbox.cube())
    maps = moment_maps(cube, WINDOW, rest_frequency=CO21 * u.Hz)
    spectrum = region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 4))
    table = Table({"name": ["a", "b"], "flux": [1.0, 2.0] * u.Jy * KMS})
    return {"map": maps.m0, "maps": {"m0": maps.m0, "m1": maps.m1}, "spectrum": spectrum, "table": table}


WRITERS = {
    "write_map": lambda p, path, **kw: write_map(p["map"], path, **kw),
    "write_maps": lambda p, path, **kw: write_maps(p["maps"], path, **kw),
    "write_spectra": lambda p, path, **kw: write_spectra({"region 1": p["spectrum"]}, path, **kw),
    "write_table": lambda p, path, **kw: write_table(p["table"], path, **kw),
}
SUFFIX = {"write_map": ".fits", "write_maps": ".fits", "write_spectra": ".ecsv", "write_table": ".ecsv"}


# --- refusals decided before anything is written ---------------------------------------------------------

@pytest.mark.parametrize("writer", WRITERS)
def test_existing_file_is_refused_and_kept(sandbox, products, writer):
    target = sandbox.out / f"result{SUFFIX[writer]}"
    target.write_bytes(b"keep me")
    sandbox.expect(target.name)
    with pytest.raises(OutputExistsError, match="result") as caught:
        WRITERS[writer](products, target)
    assert "overwrite=True" in str(caught.value)
    assert target.read_bytes() == b"keep me"


@pytest.mark.parametrize("writer", WRITERS)
def test_overwrite_replaces_the_file_whole(sandbox, products, writer):
    target = sandbox.out / f"result{SUFFIX[writer]}"
    target.write_bytes(b"old")
    sandbox.expect(target.name)
    WRITERS[writer](products, target, overwrite=True)
    assert target.read_bytes() != b"old"
    if SUFFIX[writer] == ".fits":
        with fits.open(target) as hdul:
            hdul.verify("exception")  # a complete, valid FITS file (astropy's verifier)
    else:
        assert len(Table.read(target, format="ascii.ecsv")) > 0


def test_dangling_symlink_is_not_followed(sandbox, products):
    link = sandbox.out / "map.fits"
    victim = sandbox.root / "elsewhere.fits"
    link.symlink_to(victim)
    sandbox.expect("map.fits")
    with pytest.raises(OutputExistsError, match="symbolic link"):
        write_map(products["map"], link)
    assert not victim.exists(), "the link's target must not be created"
    assert link.is_symlink()


def test_symlink_to_a_file_is_not_written_through(sandbox, products):
    victim = sandbox.raw("precious.txt", b"precious")  # tracked: must not change
    link = sandbox.out / "map.fits"
    link.symlink_to(victim)
    sandbox.expect("map.fits")
    with pytest.raises(OutputExistsError, match="map.fits"):
        write_map(products["map"], link)


def test_symlink_with_overwrite_is_replaced_not_followed(sandbox, products):
    victim = sandbox.raw("precious.txt", b"precious")  # tracked: must not change
    link = sandbox.out / "map.fits"
    link.symlink_to(victim)
    sandbox.expect("map.fits")
    write_map(products["map"], link, overwrite=True)
    assert not link.is_symlink() and fits.getdata(link).shape == (16, 16)


@pytest.mark.parametrize("writer", WRITERS)
def test_missing_folder_is_named(sandbox, products, writer):
    with pytest.raises(CubeFileError, match="no-such-folder.*does not exist"):
        WRITERS[writer](products, sandbox.out / "no-such-folder" / f"x{SUFFIX[writer]}")


def test_a_folder_as_target_is_refused(sandbox, products):
    (sandbox.out / "a folder").mkdir()
    (sandbox.out / "a folder" / "keep").write_text("x")
    sandbox.expect("a folder/keep")
    with pytest.raises(CubeFileError, match="a folder.*is a folder"):
        write_map(products["map"], sandbox.out / "a folder")


def test_a_file_as_folder_is_refused(sandbox, products):
    (sandbox.out / "plain").write_text("x")
    sandbox.expect("plain")
    with pytest.raises(CubeFileError, match="plain"):
        write_table(products["table"], sandbox.out / "plain" / "t.ecsv")


@pytest.mark.parametrize("bad, match", [
    ("nul\x00byte.fits", r"NUL character"),
    ("", r"is empty"),
    ("   ", r"is empty"),
    (None, r"must be a str or pathlib.Path; got None"),
    (12, r"must be a str or pathlib.Path; got 12"),
])
def test_impossible_paths_are_clear_errors(sandbox, products, bad, match):
    path = bad if not isinstance(bad, str) or not bad.strip() else str(sandbox.out / bad)
    with pytest.raises(ExportError, match=match):
        write_map(products["map"], path)


def test_name_too_long_for_the_file_system(sandbox, products):
    name = "m" * 300 + ".fits"  # NAME_MAX is 255 bytes on Linux file systems (from memory)
    with pytest.raises(ExportError, match="too long") as caught:
        write_map(products["map"], sandbox.out / name)
    assert name[:40] in str(caught.value)


def test_folder_name_too_long(sandbox, products):
    with pytest.raises(ExportError, match="too long"):
        write_map(products["map"], sandbox.out / ("d" * 300) / "m.fits")


def test_long_but_valid_name_is_written(sandbox, products):
    name = "m" * 245 + ".fits"  # 250 bytes: within NAME_MAX, and the temporary name does not depend on it
    sandbox.expect(name)
    write_map(products["map"], sandbox.out / name)
    assert fits.getdata(sandbox.out / name).shape == (16, 16)


def test_check_output_path_is_the_same_check_before_computing(sandbox):
    (sandbox.out / "taken.fits").write_bytes(b"x")
    sandbox.expect("taken.fits")
    with pytest.raises(OutputExistsError, match="taken.fits"):
        check_output_path(sandbox.out / "taken.fits")
    assert check_output_path(sandbox.out / "free.fits") == sandbox.out / "free.fits"


# --- failures while writing leave nothing -----------------------------------------------------------------

UNWRITABLE = """
import os, sys
from regions import CirclePixelRegion, PixCoord
import astropy.units as u
from astropy.table import Table
from cubeloupe.analysis import CubeloupeError, moment_maps, open_cube, region_spectrum, write_map, write_maps, \\
    write_spectra, write_table
cube = open_cube({cube!r})
maps = moment_maps(cube, (-15, 15) * u.km / u.s, rest_frequency={rest!r} * u.Hz)
spectrum = region_spectrum(cube, CirclePixelRegion(PixCoord(7.5, 7.5), 4))
big = Table({{"name": ["region"] * 20000, "value": list(range(20000))}})
writers = {{
    "write_map": lambda path: write_map(maps.m0, path),
    "write_maps": lambda path: write_maps({{"m0": maps.m0, "m1": maps.m1, "m2": maps.m2}}, path),
    "write_spectra": lambda path: write_spectra({{"region": [spectrum] * 40}}, path),
    "write_table": lambda path: write_table(big, path),
}}
{limit}
try:
    writers[{writer!r}]({target!r})
except CubeloupeError as exc:
    print(type(exc).__name__, getattr(exc, "errno", None), exc, sep="|")
else:
    print("written")
"""


@pytest.mark.parametrize("writer", WRITERS)
def test_full_disk_leaves_nothing_and_retry_works(sandbox, products, writer):
    """A write that fails midway (the file size limit stands in for a full disk) leaves no file behind."""
    target = sandbox.out / f"result{SUFFIX[writer]}"
    limit = "resource.setrlimit(resource.RLIMIT_FSIZE, (4000, resource.getrlimit(resource.RLIMIT_FSIZE)[1]))"
    result = run_python(UNWRITABLE.format(cube=str(sandbox.inputs / "cube.fits"), rest=CO21, limit=limit,
                                          writer=writer, target=str(target)))
    assert result.returncode == 0 and "|" in result.stdout, result.stdout + result.stderr
    kind, number, message = (result.stdout.strip().splitlines() or [""])[-1].split("|", 2)
    assert kind == "ExportError" and int(number) == errno.EFBIG
    assert str(target) in message and "file size limit" in message
    assert not os.listdir(sandbox.out), "no partial or temporary file may remain"
    sandbox.expect(target.name)
    WRITERS[writer](products, target)  # the retry is not refused as "exists"
    assert target.stat().st_size > 0


@pytest.mark.parametrize("writer", ["write_map", "write_table"])
def test_unwritable_folder_is_refused_up_front(sandbox, writer):
    sandbox.cube()
    locked = sandbox.out / "locked"
    locked.mkdir()
    os.chown(locked, 65534, 65534) if os.geteuid() == 0 else None
    locked.chmod(0o555)  # readable, not writable: the up-front probe must refuse it
    sandbox.expect("locked/")
    try:
        result = run_python(UNWRITABLE.format(cube=str(sandbox.inputs / "cube.fits"), rest=CO21, limit="",
                                              writer=writer, target=str(locked / f"x{SUFFIX[writer]}")),
                            unprivileged=True)
    finally:
        locked.chmod(0o700)
    assert result.returncode == 0 and "|" in result.stdout, result.stdout + result.stderr
    kind, _, message = (result.stdout.strip().splitlines() or [""])[-1].split("|", 2)
    assert kind == "ExportError" and "permission denied" in message.lower() and str(locked) in message
    assert not os.listdir(locked)


def test_interrupted_write_leaves_nothing(sandbox, products, monkeypatch):
    def interrupted(self, *args, **kwargs):
        with open(args[0], "w") as handle:
            handle.write("# %ECSV 1.0\n# half")
        raise KeyboardInterrupt

    monkeypatch.setattr(Table, "write", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_table(products["table"], sandbox.out / "t.ecsv")


def test_file_appearing_during_the_write_is_not_replaced(sandbox, products, monkeypatch):
    from cubeloupe.analysis import export

    target = sandbox.out / "t.ecsv"
    real_link = os.link

    def racing(source, destination):
        target.write_text("written by someone else meanwhile")  # between the checks and the final move
        return real_link(source, destination)

    monkeypatch.setattr(export.os, "link", racing)
    sandbox.expect("t.ecsv")
    with pytest.raises(OutputExistsError, match="appeared while writing"):
        write_table(products["table"], target)
    assert target.read_text() == "written by someone else meanwhile"


def test_unserialisable_column_is_a_clear_error(sandbox):
    column = np.empty(2, dtype=object)
    column[:] = [{1}, {2}]
    with pytest.raises(ExportContentError, match="t.ecsv"):
        write_table(Table({"sets": column}), sandbox.out / "t.ecsv")


def test_written_file_gets_the_usual_permissions(sandbox, products):
    sandbox.expect("m.fits")
    write_map(products["map"], sandbox.out / "m.fits")
    umask = os.umask(0)
    os.umask(umask)
    assert (sandbox.out / "m.fits").stat().st_mode & 0o777 == 0o666 & ~umask  # as open(path, "w") gives


# --- names that collide or cannot be written as given --------------------------------------------------------

@pytest.mark.parametrize("names", [("m 0", "M_0"), ("m0", "M0"), ("mom-1", "MOM-1"), ("a.b", "a b")])
def test_colliding_extension_names_are_refused(sandbox, products, names):
    maps = {names[0]: products["map"], names[1]: products["map"]}
    with pytest.raises(ExportContentError, match="rename one") as caught:
        write_maps(maps, sandbox.out / "maps.fits")
    assert repr(names[0]) in str(caught.value) and repr(names[1]) in str(caught.value)


@pytest.mark.parametrize("name", ["!!!", "", "   "])
def test_map_name_without_letters_is_refused(sandbox, products, name):
    with pytest.raises(ExportContentError, match="no usable FITS extension name"):
        write_maps({name: products["map"]}, sandbox.out / "maps.fits")


def test_non_ascii_and_control_names_become_valid_extensions(sandbox, products):
    sandbox.expect("maps.fits")
    write_maps({"m\u2080 (CO)": products["map"], "m1\n\x1b[31m": products["map"]}, sandbox.out / "maps.fits")
    with fits.open(sandbox.out / "maps.fits") as hdul:
        hdul.verify("exception")  # FITS keeps EXTNAME in printable ASCII (FITS standard 4.0, sec. 4.1.2.3)
        assert [hdu.header["EXTNAME"] for hdu in hdul] == ["M___CO_", "M1___31M"]


def test_history_with_any_text_is_written(sandbox, products):
    sandbox.expect("m.fits")
    write_map(products["map"], sandbox.out / "m.fits", history="window -60..60 km/s\nby Zoë\x1b[0m")
    history = "".join(fits.getheader(sandbox.out / "m.fits")["HISTORY"])
    assert "window -60..60 km/s" in history and "Zo\\xeb" in history


@pytest.mark.parametrize("value", [np.arange(4.0), "m0", 3])
def test_map_that_is_not_a_projection_is_refused(sandbox, products, value):
    with pytest.raises(ExportContentError, match="not a 2-D spectral-cube Projection"):
        write_maps({"m0": products["map"], "bad": value}, sandbox.out / "maps.fits")


def test_no_maps_at_all(sandbox):
    with pytest.raises(CubeFileError, match="no maps to write"):
        write_maps({"m0": None}, sandbox.out / "maps.fits")


REGION_NAMES = [
    "line\nbreak", 'say "hi"', "it's", "  padded  ", "", "carriage\rreturn", "escape\x1b[31m red", "Zoë ü 東",
    "comma, here", "# hash first", "tab\there", "back\\slash", "null", "{\"json\": 1}",
]


@pytest.mark.parametrize("name", REGION_NAMES)
def test_any_region_name_round_trips_through_ecsv(sandbox, products, name):
    """astropy's ECSV reader gives back exactly the name written (ECSV 1.0 standard, astropy's reader)."""
    sandbox.expect("spectra.ecsv")
    write_spectra({name: products["spectrum"], "plain": products["spectrum"]}, sandbox.out / "spectra.ecsv")
    back = Table.read(sandbox.out / "spectra.ecsv", format="ascii.ecsv")
    assert set(back["name"]) == {name, "plain"}
    assert len(back) == 2 * len(products["spectrum"])


def test_names_with_the_same_text_are_refused(sandbox, products):
    with pytest.raises(ExportContentError, match="same name '1'"):
        write_spectra({1: products["spectrum"], "1": products["spectrum"]}, sandbox.out / "s.ecsv")


def test_spectrum_that_is_not_a_spectrum_is_refused(sandbox, products):
    with pytest.raises(ExportContentError, match="'r1'.*not a OneDSpectrum"):
        write_spectra({"r1": np.ones(5)}, sandbox.out / "s.ecsv")


@pytest.mark.parametrize("column", ["two\nlines", "carriage\rreturn", "unicode\u2028separator"])
def test_column_name_ecsv_cannot_hold_is_refused(sandbox, column):
    table = Table([[1, 2], [3, 4]], names=["ok", column])
    assert table.colnames == ["ok", column]
    with pytest.raises(ExportContentError, match="column name"):
        write_table(table, sandbox.out / "t.ecsv")


def test_table_values_round_trip_exactly(sandbox):
    sandbox.expect("t.ecsv")
    table = Table({"region": ["  a", 'b"', "c\nd"], "flux": [1.5, np.nan, -2.0] * u.Jy * KMS})
    write_table(table, sandbox.out / "t.ecsv")
    back = Table.read(sandbox.out / "t.ecsv", format="ascii.ecsv")
    assert list(back["region"]) == ["  a", 'b"', "c\nd"]
    assert back["flux"].unit == u.Jy * KMS and np.isnan(back["flux"][1])
    assert json.dumps(list(back["region"]))  # plain Python strings


def test_folder_with_spaces_and_unicode(sandbox, products):
    folder = sandbox.out / "résultats 2026 (copie)"
    folder.mkdir()
    sandbox.expect("résultats 2026 (copie)/m.fits")
    write_map(products["map"], folder / "m.fits")
    assert fits.getdata(folder / "m.fits").shape == (16, 16)
