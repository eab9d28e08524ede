"""Loupe, the whole suite: its header, exports and several spectral windows, checked against cubeloupe.analysis.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import open_cube, region_spectrum
from cubeloupe.analysis.errors import OutputExistsError
from cubeloupe.widgets import Loupe

from suite_driver import mark_ranges


# ----------------------------------------------------------------------------- exports
def test_exports_write_and_refuse_to_overwrite(loupe, tmp_path):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="core")
    mark_ranges(loupe)
    loupe.make_moments(wait=True)
    maps = loupe.export_moments(tmp_path / "m.fits")
    with fits.open(maps) as hdul:
        assert hdul[0].header["BUNIT"].replace(" ", "") in ("Jy/beamkm/s", "beam-1Jykms-1", "Jy/beam.km/s") \
            or "Jy" in hdul[0].header["BUNIT"]
        assert hdul[0].header["BMAJ"] == pytest.approx(1 / 3600)  # cubefactory: 1" beam
        assert hdul[0].header["CTYPE1"].startswith("RA")
    with pytest.raises(OutputExistsError):
        loupe.export_moments(tmp_path / "m.fits")
    loupe.export_moments(tmp_path / "m.fits", overwrite=True)
    spectra = loupe.export_spectra(tmp_path / "s.ecsv")
    from astropy.table import Table

    table = Table.read(spectra)
    assert_allclose(table["value"], loupe.spectra["core"][0].value)
    table = Table.read(loupe.export_measurements(tmp_path / "lines.ecsv"))
    assert table["flux"][0] == pytest.approx(loupe.measurements[0]["flux"])
    png = loupe.save_picture("sky", tmp_path / "sky.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    loupe.save_picture("spectrum", tmp_path / "spec.svg")
    with pytest.raises(OutputExistsError):
        loupe.save_picture("sky", tmp_path / "sky.png")
    # the export button reports instead of raising
    loupe.export_name.value = str(tmp_path / "m")
    before = (tmp_path / "m_moments.fits").exists()
    loupe.export_box.children[1].children[0].click()
    loupe.export_box.children[1].children[0].click()
    assert not before and loupe.export_status.level == "error" and "exists" in loupe.export_status.message


# ----------------------------------------------------------------------------- several windows
def test_two_windows_share_regions_and_one_axis(cube_path, rng):
    low = cube_path(rng.normal(size=(20, 24, 28)), crval3=230.0e9, cdelt3=-2e6)
    high = cube_path(rng.normal(size=(30, 12, 14)), crval3=232.0e9, cdelt3=1e6, pixel=0.5)
    loupe = Loupe([low, high], first_view=False)
    shape = CirclePixelRegion(PixCoord(14.1, 12.1), radius=4)
    loupe.add_region(shape, name="core")
    # the region is kept on the sky: the second window (other grid) gets the same sky shape
    sky = shape.to_sky(loupe.cubes[0].wcs.celestial)
    for window, (path, region) in enumerate(((low, shape), (high, sky))):
        expected = region_spectrum(open_cube(path), region)
        assert_allclose(loupe.spectrum_view.curve_marks[("core", window)].y, expected.value, rtol=1e-6)
    # clicking in the second window's range switches the sky view to it
    loupe.spectrum_view.click(232.010)
    assert loupe.window == 1 and loupe.channel == 10
    assert loupe.sky_view.image.image.shape == (12, 14)
    # a click in the gap between windows leaves the view where it is and says why
    loupe.spectrum_view.click(231.0)
    assert loupe.window == 1 and "gap" in loupe.status.message


def test_windows_far_apart_are_spanned_one_at_a_time(cube_path, rng):
    low = cube_path(rng.normal(size=(20, 24, 28)), crval3=230.0e9, cdelt3=-2e6)    # 229.962-230.000 GHz
    high = cube_path(rng.normal(size=(30, 12, 14)), crval3=232.0e9, cdelt3=1e6)    # 232.000-232.029 GHz
    loupe = Loupe([low, high], rest_frequency=229.98 * u.GHz, first_view=False)
    # 0.07 GHz of data over a 2.07 GHz span: each window would be a sliver, so one is shown at a time
    assert loupe.spectrum_span == "window"
    x0, x1 = loupe.spectrum_view.x_range
    assert x0 < 229.962 and 230.0 < x1 < 231.0
    loupe.window = 1
    x0, x1 = loupe.spectrum_view.x_range
    assert 231.0 < x0 < 232.0 and x1 > 232.029
    # velocity zero (229.98 GHz) is in window 0: window 1's readout gives no velocity from it
    assert "km/s" not in loupe.channel_bar.readout and "in another window" in loupe.channel_bar.readout
    loupe.window = 0
    assert "km/s" in loupe.channel_bar.readout
    loupe.span_choice.value = "all"
    x0, x1 = loupe.spectrum_view.x_range
    assert x0 < 229.962 and x1 > 232.029


def test_unreadable_cube_shows_a_message(tmp_path):
    bad = tmp_path / "not-a-cube.fits"
    bad.write_text("hello")
    loupe = Loupe(bad, first_view=False)
    assert loupe.status.level == "error" and "not-a-cube.fits" in loupe.status.message
    assert loupe.cubes == []


def test_a_lines_flux_scales_with_one_plus_z_for_the_same_channels(loupe):
    """Issue #17: the same region and ranges gave a larger flux with z set than at z = 0.

    Velocities of a line at z are rest-frame offsets from rest / (1 + z), so a channel of width
    dnu spans dv = c (1 + z) dnu / nu_rest instead of c dnu / nu_rest: the integral S dv over the
    same channels grows by exactly (1 + z) (radio convention, Greisen et al. 2006; the rest-frame
    velocity convention of Solomon & Vanden Bout 2005, eq. 1 uses the same S dv).
    """
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=5))
    mark_ranges(loupe)
    at_rest = loupe.measurements[0]["flux"]
    for z in (0.01, 0.5, 2.0):
        loupe.z = z
        assert loupe.measurements[0]["flux"] == pytest.approx(at_rest * (1 + z), rel=1e-9)


def test_a_velocity_axis_cube_without_rest_frequency_works_in_its_own_velocities(cube_path, rng):
    """Issues #13, #17: such a cube opened with a raw traceback from the channel bar."""
    from cubefactory import gaussian_profile
    from cubeloupe.analysis import measure_line

    n = 80
    v_axis = (np.arange(n) - 40) * 0.5  # the factory's VOPT axis: 0.5 km/s channels (km/s)
    line = gaussian_profile(v_axis, 2.0, 3.0, 2.0)[:, None, None]
    data = (line * np.ones((1, 8, 9)) + rng.normal(0, 0.05, (n, 8, 9))).astype(np.float32)
    path = cube_path(data, spectral="VOPT", restfrq=None, cdelt3=500.0, crval3=0.0, crpix3=41, bunit="K")
    loupe = Loupe(path)
    assert loupe.velocity_only and loupe.axis_kind == "velocity" and loupe.convention == "optical"
    assert "km/s" in loupe.channel_bar.readout and "GHz" not in loupe.channel_bar.readout
    assert loupe.channel_bar.go_to("3 km/s") == 46 and loupe.channel_bar.go_to("100 GHz") is None
    # measurements in the file's velocities: the same as measure_line on the file's own velocity spectrum
    region = CirclePixelRegion(PixCoord(4, 4), radius=2)
    loupe.add_region(region, name="middle")
    view = loupe.spectrum_view
    to_ghz = lambda v: float(view.frequency_of_x(np.array([v]))[0])  # noqa: E731
    # range edges between channel centres, so that both sides pick the same channels
    loupe.line_free = sorted([sorted([to_ghz(-19.25), to_ghz(-8.25)]), sorted([to_ghz(12.25), to_ghz(19.25)])])
    loupe.line_window = sorted([to_ghz(-4.25), to_ghz(10.25)])
    direct = measure_line(region_spectrum(open_cube(path), region), (-4.25, 10.25) * u.km / u.s,
                          line_free=[(-19.25, -8.25), (12.25, 19.25)] * u.km / u.s)
    row = next(r for r in loupe.measurements if r["region"] == "middle")
    assert row["flux"] == pytest.approx(direct.flux.to_value(u.K * u.km / u.s), rel=1e-6)
    assert row["centroid"] == pytest.approx(direct.centroid.to_value(u.km / u.s), abs=1e-6)


def test_an_exported_lines_table_is_remeasured_from_its_own_metadata(loupe, tmp_path):
    """Issue #17: every export says how it was made; the table's metadata re-makes the same fluxes."""
    import json

    from astropy.table import QTable

    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=5), name="blob")
    mark_ranges(loupe)
    loupe.z = 0.01
    written = loupe.export_measurements(tmp_path / "lines.ecsv")
    table = QTable.read(written)
    session = table.meta["cubeloupe_session"]
    assert session["settings"]["line_window"] and session["regions"][0]["name"] == "blob"
    (tmp_path / "again.cubeloupe.json").write_text(json.dumps(session))
    again = Loupe.from_session(tmp_path / "again.cubeloupe.json")
    assert [r["flux"] for r in again.measurements] == pytest.approx(list(table["flux"].value), rel=1e-12)


# ------------------------------------------------------------------ known suite bugs (#17, #19)
def test_regions_set_from_code_keep_the_list_and_views_in_step(loupe):
    """Regression test for #19: setting ``loupe.regions`` directly broke its link to the region list."""
    first = loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=4), name="core")
    core = loupe.regions[0]
    # Another region, given in sky coordinates as a user types it: 2" east of the core.
    east = dict(core, name="east", color="#123456", ra=core["ra"] + 2 / 3600 / np.cos(np.deg2rad(core["dec"])))
    loupe.regions = [core, east]
    for names in (loupe.region_list.names, list(loupe.spectra), list(loupe.spectrum_view.spectra),
                  [o["name"] for o in loupe.sky_view.outlines]):
        assert sorted(names) == ["core", "east"]
    # Its spectrum is the region's own (the regions package's sky shape on the cube's grid).
    expected = region_spectrum(loupe.cube, loupe.region_list.sky_region("east"))
    assert_allclose(loupe.spectra["east"][0].value, expected.value, rtol=1e-6)
    # The link still holds both ways: the list's remove button and a drawn shape reach the suite.
    loupe.region_list.remove(first)
    assert [r["name"] for r in loupe.regions] == ["east"] and list(loupe.spectra) == ["east"]
    loupe.sky_view._emit("box", {"x": [3.0, 8.0], "y": [3.0, 9.0]})
    assert len(loupe.regions) == 2 and len(loupe.spectra) == 2
    loupe.regions = []
    assert loupe.region_list.names == [] and loupe.spectra == {} and loupe.sky_view.outlines == []


def test_a_bad_region_set_from_code_is_refused_and_changes_nothing(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=4), name="core")
    before = list(loupe.regions)
    with pytest.raises(Exception, match="lacks"):
        loupe.regions = [*before, {"name": "odd", "color": "#000000", "kind": "circle"}]
    assert loupe.regions == before and loupe.region_list.regions == before and list(loupe.spectra) == ["core"]
    # A region entirely off the image has no spectrum anywhere: it is not kept, and the status says why.
    far = dict(before[0], name="far", dec=before[0]["dec"] + 1.0)
    loupe.regions = [*before, far]
    assert [r["name"] for r in loupe.regions] == ["core"] == loupe.region_list.names
    assert loupe.status.level == "error" and "far" in loupe.status.message


def test_moment_maps_stay_on_the_sky_after_switching_windows_and_back(cube_path, rng):
    """Regression test for #19: the maps vanished from the sky's 'Show' choice after a switch away and back."""
    low = cube_path(rng.normal(size=(20, 24, 28)), crval3=230.0e9, cdelt3=-2e6)
    high = cube_path(rng.normal(size=(30, 12, 14)), crval3=232.0e9, cdelt3=1e6, pixel=0.5)
    loupe = Loupe([low, high], first_view=False)
    f = np.sort(loupe._frequencies[0])
    loupe.line_free = [[float(f[0]), float(f[4])], [float(f[15]), float(f[19])]]
    loupe.line_window = [float(f[6]), float(f[13])]
    loupe.make_moments(wait=True)
    made = ["moment 0", "moment 1", "moment 2", "moment 0 error", "rms"]
    assert list(loupe.sky_view.maps) == made
    loupe.window = 1
    # The other window's grid cannot show them (another pixel grid): only its channels are offered.
    assert loupe.sky_view.maps == {} and loupe.sky_view.source_choice.options == (("channel", "channel"),)
    loupe.window = 0
    assert list(loupe.sky_view.maps) == made
    assert [value for _, value in loupe.sky_view.source_choice.options] == ["channel", *made]
    loupe.sky_source = "moment 1"
    assert loupe.sky_view.source == "moment 1"


def test_a_given_rest_frequency_outside_the_band_is_offered_as_velocity_zero():
    """Regression test for #19: with rest_frequency= of a line outside the band, the suite failed to list it.

    The varying-beams demo covers 342.3-343.1 GHz; CO J=2-1 rests at 230.538 GHz (CDMS catalogue).
    """
    from cubeloupe.analysis import demo_path

    loupe = Loupe(demo_path("varying_beams"), rest_frequency=230.538 * u.GHz, first_view=False)
    assert loupe.status.level != "error", loupe.status.message
    assert loupe.reference_line == "CO J=2-1" and loupe.rest_frequency == pytest.approx(230.538)
    choice = loupe.line_overlay.reference_choice
    assert choice.value == "CO J=2-1" and "CO J=2-1" in [value for _, value in choice.options]


def test_a_rest_frequency_without_unit_is_named_and_the_suite_still_opens(cube_path, rng):
    """A bare number for rest_frequency broke the opening of a velocity-axis cube (a traceback from the channel bar)."""
    path = cube_path(rng.normal(size=(12, 8, 9)).astype(np.float32), spectral="VOPT", restfrq=None, bunit="K")
    loupe = Loupe(path, rest_frequency=110.20135428, first_view=False)
    assert loupe.cubes and loupe.velocity_only
    assert loupe.status.level == "error" and "110.20135428 * u.GHz" in loupe.status.message


def test_windows_of_different_shapes_switch_both_ways(cube_path, rng):
    """Switching back from a narrow window to a square one failed (bqplot refused min_aspect_ratio > max)."""
    square = cube_path(rng.normal(size=(20, 24, 24)), crval3=230.0e9, cdelt3=-2e6)
    strip = cube_path(rng.normal(size=(30, 21, 6)), crval3=232.0e9, cdelt3=1e6)
    loupe = Loupe([square, strip], first_view=False)
    for window, (ny, nx) in ((1, (21, 6)), (0, (24, 24)), (1, (21, 6))):
        loupe.window = window
        assert loupe.status.level != "error", loupe.status.message
        width, height = loupe.sky_view.plot_size
        # Square sky pixels whatever the window (equal pixel sizes here): the plot area keeps the map's shape.
        assert width / height == pytest.approx(nx / ny, rel=0.02)
        figure = loupe.sky_view.figure
        assert figure.min_aspect_ratio == figure.max_aspect_ratio


def test_spectra_with_blanked_end_channels_end_on_a_drawn_point():
    """Issue #17: one browser console error, an SVG transform with "undefined": bqplot places a line's label at
    its last point, and the varying-beams demo's spectra end in blanked (NaN) channels."""
    import warnings

    from cubeloupe.analysis import CubeloupeWarning, demo_path

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CubeloupeWarning)  # the blanked channels are warned about in the status
        loupe = Loupe(demo_path("varying_beams"))
    spectrum = loupe.spectra["peak (auto)"][0]
    assert not np.isfinite(spectrum.value[-1]), "the demo's last channel is blanked (the case pinned here)"
    mark = loupe.spectrum_view.curve_marks[("peak (auto)", 0)]
    assert np.isfinite(mark.y[-1]) and np.isfinite(mark.x[-1])
    # Nothing else is dropped: the drawn curve is the spectrum up to its last finite channel.
    last = np.flatnonzero(np.isfinite(spectrum.value))[-1]
    assert_allclose(mark.y, spectrum.value[:last + 1], equal_nan=True)
