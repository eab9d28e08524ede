"""Exports: what is written reads back with astropy as the same map, spectrum or table (the refusals and
failures are in tests/hostile/test_exports.py)."""

import os

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table
from astropy.wcs import WCS
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord

from cubefactory import line_cube_data
from cubeloupe.analysis import (
    check_output_path,
    frequency_axis,
    moment_maps,
    open_cube,
    region_spectrum,
    write_map,
    write_maps,
    write_spectra,
    write_table,
)

KMS = u.km / u.s
CO21 = 230.538e9  # Hz, CO J=2-1 (CDMS catalogue, Mueller et al. 2005): the test factory's default rest frequency
SHAPE = (30, 12, 14)


@pytest.fixture
def cube(cube_path, rng):
    data = line_cube_data(SHAPE, rng=rng, noise_rms=1e-3, lines=((CO21, 1e-2, 3e6),), crpix3=15.5)
    return open_cube(cube_path(data, crpix3=15.5, beam=(1.2, 0.8, 30.0)))


def test_map_reads_back_with_its_wcs_unit_and_beam(cube, tmp_path):
    maps = moment_maps(cube, (-8, 8) * KMS, rest_frequency=CO21 * u.Hz)
    out = tmp_path / "out"
    out.mkdir()
    path = write_map(maps.m0, out / "m0.fits", history="window -8..8 km/s")
    assert os.listdir(out) == ["m0.fits"], "no temporary file is left after a write"
    with fits.open(path) as hdul:
        header, data = hdul[0].header, hdul[0].data
    assert_allclose(data, maps.m0.value, equal_nan=True)
    assert u.Unit(header["BUNIT"]) == maps.m0.unit
    # The celestial WCS read back by astropy maps pixels to the same sky positions as the map's own.
    assert_allclose(WCS(header).pixel_to_world_values([0, 13], [0, 11]),
                    maps.m0.wcs.pixel_to_world_values([0, 13], [0, 11]), rtol=0, atol=1e-12)
    # BMAJ/BMIN/BPA in degrees (FITS convention, as radio-beam writes them).
    assert_allclose([header["BMAJ"] * 3600, header["BMIN"] * 3600, header["BPA"]], [1.2, 0.8, 30.0], rtol=1e-6)
    assert "window -8..8 km/s" in str(header["HISTORY"])


def test_maps_are_named_extensions_in_order(cube, tmp_path):
    maps = moment_maps(cube, (-8, 8) * KMS, rest_frequency=CO21 * u.Hz)
    path = write_maps({"m0": maps.m0, "m1": maps.m1, "rms": None, "moment 2": maps.m2}, tmp_path / "maps.fits")
    with fits.open(path) as hdul:
        assert isinstance(hdul[0], fits.PrimaryHDU)
        assert [hdu.header["EXTNAME"] for hdu in hdul] == ["M0", "M1", "MOMENT_2"]
        assert_allclose(hdul["M1"].data, maps.m1.value, equal_nan=True)
        assert u.Unit(hdul["M1"].header["BUNIT"]) == KMS


def test_spectra_table_in_long_form(cube, tmp_path):
    spectrum = region_spectrum(cube, CirclePixelRegion(PixCoord(6.5, 5.5), 3))
    path = write_spectra({"centre": [spectrum, None, spectrum]}, tmp_path / "s.ecsv")
    table = Table.read(path, format="ascii.ecsv")
    assert list(table.colnames) == ["name", "window", "channel", "frequency", "value"]
    assert sorted(set(table["window"])) == [0, 2]
    first = table[table["window"] == 0]
    assert_allclose(u.Quantity(first["frequency"]).to_value(u.Hz), frequency_axis(spectrum).to_value(u.Hz),
                    rtol=1e-12)
    assert_allclose(first["value"], spectrum.value, rtol=1e-7)
    assert table["value"].unit == spectrum.unit


def test_table_round_trip_keeps_units_and_text(tmp_path):
    table = Table({"region": ["disk", "north arm"], "flux": [1.25, 3.5] * u.Jy * KMS})
    write_table(table, tmp_path / "t.ecsv")
    back = Table.read(tmp_path / "t.ecsv", format="ascii.ecsv")
    assert list(back["region"]) == ["disk", "north arm"] and back["region"].dtype.kind == "U"
    assert back["flux"].unit == u.Jy * KMS and list(back["flux"].value) == [1.25, 3.5]


def test_overwrite_replaces_atomically(tmp_path):
    target = tmp_path / "t.ecsv"
    write_table(Table({"a": [1]}), target)
    inode = target.stat().st_ino
    write_table(Table({"a": [2]}), target, overwrite=True)
    assert list(Table.read(target, format="ascii.ecsv")["a"]) == [2]
    assert target.stat().st_ino != inode, "a new file renamed into place, not the old one rewritten"
    assert os.listdir(tmp_path) == ["t.ecsv"]


def test_check_output_path_expands_the_home_folder(monkeypatch, tmp_path):
    monkeypatch.setenv("HOME", str(tmp_path))
    assert check_output_path("~/new.fits") == tmp_path / "new.fits"
    assert os.listdir(tmp_path) == [], "the writability probe leaves nothing"


def test_figure_is_written_as_its_extension_says_and_never_replaced(tmp_path):
    """write_figure (#18): PNG and PDF by the name's extension; an existing file is refused unless asked."""
    from matplotlib.figure import Figure

    from cubeloupe.analysis import ExportContentError, OutputExistsError, write_figure

    figure = Figure(figsize=(2, 2))
    figure.add_subplot().plot([0, 1], [1, 0])
    png = write_figure(figure, tmp_path / "maps.png", dpi=50)
    pdf = write_figure(figure, tmp_path / "maps.pdf")
    # PNG signature (PNG specification, ISO/IEC 15948, section 5.2); PDF header (ISO 32000-1, section 7.5.2).
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert pdf.read_bytes()[:5] == b"%PDF-"
    before = png.read_bytes()
    with pytest.raises(OutputExistsError, match="overwrite=True"):
        write_figure(figure, png)
    assert png.read_bytes() == before
    write_figure(figure, png, overwrite=True, dpi=30)
    assert png.read_bytes() != before
    with pytest.raises(ExportContentError, match=r"\.png"):
        write_figure(figure, tmp_path / "maps.fits")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["maps.pdf", "maps.png"], "no temporary file is left"
