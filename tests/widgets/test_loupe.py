"""The widget suite driven as a user or browser would, checked against cubeloupe.analysis on the same inputs.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord, RectanglePixelRegion

from cubefactory import gaussian_profile, velocity_axis_kms
from cubeloupe.analysis import fit_baseline, measure_line, open_cube, region_spectrum
from cubeloupe.analysis.catalog import lines_in_band
from cubeloupe.analysis.display import display_image, display_limits, stretched
from cubeloupe.analysis.errors import OutputExistsError
from cubeloupe.analysis.moments import moment_maps
from cubeloupe.widgets import Loupe, SkyView

N_CHAN, NY, NX = 60, 24, 28
LINE_V, LINE_SIGMA, LINE_PEAK = 39.0, 8.0, 1.0  # km/s, km/s, Jy/beam: the line peaks in channel 30


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
    return Loupe(line_cube)


def _freqs(loupe, window=0):
    return loupe._frequencies[window]


def _mark_ranges(loupe):
    f = _freqs(loupe)
    view = loupe.spectrum_view
    view.mode = "line-free"
    for a, b in ((0, 10), (50, 59)):
        # as the browser does: brushing starts, selection is dragged, mouse released
        view.brush.brushing = True
        view.brush.selected = [f[a], f[b]]
        view.brush.brushing = False
    view.mode = "window"
    view.brush.brushing = True
    view.brush.selected = [f[15], f[45]]
    assert loupe.line_window == [], "nothing happens while the mouse is still down"
    view.brush.brushing = False
    return [[f[10], f[0]], [f[59], f[50]]], [f[45], f[15]]


# ----------------------------------------------------------------------------- sky view

def test_channel_change_sends_the_analysis_display_image(loupe, line_cube):
    loupe.channel = 17
    cube = open_cube(line_cube)
    image, _ = display_image(cube.unmasked_data[17].value, loupe.sky_view.max_display_size)
    lo, hi = display_limits(image, 0.5, 99.5)
    assert_allclose(loupe.sky_view.image.image, stretched(image, lo, hi, "linear"), rtol=1e-6)
    assert loupe.sky_view.shown_limits == pytest.approx([lo, hi])
    # the slider is linked both ways and clamps to the band
    loupe.channel_bar.slider.value = 5
    assert loupe.channel == 5 and loupe.sky_view.channel == 5
    loupe.channel = 10_000
    assert loupe.channel == N_CHAN - 1
    assert "230.479000 GHz" in loupe.channel_bar.readout  # 230.538 GHz - 59 x 1 MHz (the cube's header)


def test_channel_change_announces_the_neighbouring_channels(loupe, monkeypatch):
    import cubeloupe.widgets.sky_view as sky_view_module

    announced = []
    monkeypatch.setattr(sky_view_module, "prefetch_channels", lambda cube, channels: announced.append(list(channels)))
    loupe.channel = 17
    assert announced == [[16, 18]]   # stepping either way next reads from memory


def test_stretch_and_fixed_limits(loupe):
    sky = loupe.sky_view
    sky.vmin, sky.vmax = 0.0, 0.5
    sky.stretch = "sqrt"
    image, _ = display_image(sky.current_plane()[0], sky.max_display_size)
    assert_allclose(sky.image.image, stretched(image, 0.0, 0.5, "sqrt"), rtol=1e-6)
    assert sky.shown_limits == [0.0, 0.5]


def test_large_plane_is_block_averaged_for_display(cube_path, rng):
    path = cube_path(rng.normal(size=(3, 300, 200)))
    sky = SkyView([open_cube(path)])
    sky.max_display_size = 100
    assert sky.display_factor == 3
    assert sky.image.image.shape == (100, 67)


def test_pointer_shows_position_and_value(loupe):
    loupe.channel = 30
    loupe.sky_view.pointer._handle_custom_msg({"event": "mousemove", "domain": {"x": 14.2, "y": 11.8}}, [])
    value = open_cube(loupe.cubes[0].meta["cubeloupe_source"]["path"]).unmasked_data[30, 12, 14].value
    assert f"{value:.4g}" in loupe.sky_view.pointer_text
    # astropy is the reference for the sky position of the pointer
    where = loupe.cube.wcs.celestial.pixel_to_world(14.2, 11.8)
    assert where.ra.to_string(unit=u.hourangle, sep="hms", precision=3, pad=True) in loupe.sky_view.pointer_text


def test_beam_is_drawn_to_scale(loupe):
    # cubefactory: 1" x 1" beam, 0.25" pixels -> 4 pixels across
    assert np.ptp(loupe.sky_view.beam_mark.x) == pytest.approx(4.0, rel=1e-3)
    loupe.sky_view.show_beam = False
    assert len(loupe.sky_view.beam_mark.x) == 0


def test_unknown_source_is_refused_and_state_kept(loupe):
    with pytest.raises(Exception, match="cannot be shown"):
        loupe.sky_source = "moment 7"
    assert loupe.sky_source == "channel"


# ----------------------------------------------------------------------------- regions

def test_region_from_code_gives_the_region_spectrum(loupe, line_cube):
    shape = CirclePixelRegion(PixCoord(14, 12), radius=3)
    name = loupe.add_region(shape, name="core")
    expected = region_spectrum(open_cube(line_cube), shape)
    mark = loupe.spectrum_view.curve_marks[("core", 0)]
    assert_allclose(mark.y, expected.value, rtol=1e-6)
    assert_allclose(mark.x, expected.spectral_axis.to_value(u.GHz), rtol=1e-12)
    assert name == "core" and loupe.regions[0]["kind"] == "circle"
    assert loupe.spectrum_view.y_axis.label == "Jy"


def test_drawn_box_becomes_a_region_only_on_release(loupe, line_cube):
    sky = loupe.sky_view
    sky.tool = "box"
    assert sky.figure.interaction is sky.box_selector
    sky.box_selector.brushing = True
    sky.box_selector.selected_x = [10.0, 17.0]
    sky.box_selector.selected_y = [9.0, 15.0]
    assert loupe.regions == []
    sky.box_selector.brushing = False
    assert [r["name"] for r in loupe.regions] == ["R1"]
    box = RectanglePixelRegion(PixCoord(13.5, 12.0), width=7, height=6)
    expected = region_spectrum(open_cube(line_cube), box)
    assert_allclose(loupe.spectrum_view.curve_marks[("R1", 0)].y, expected.value, rtol=1e-5)
    assert len(sky.outlines) == 1


def test_pixel_click_and_outline_regions(loupe, line_cube):
    sky = loupe.sky_view
    sky.tool = "pixel"
    sky.pointer._handle_custom_msg({"event": "click", "domain": {"x": 5.2, "y": 6.9}}, [])
    mask = np.zeros((NY, NX), bool)
    mask[7, 5] = True
    expected = region_spectrum(open_cube(line_cube), mask)
    assert_allclose(loupe.spectrum_view.curve_marks[("R1", 0)].y, expected.value, rtol=1e-6)
    sky.tool = "outline"
    for x, y in ((10, 10), (18, 10), (14, 16)):
        sky.pointer._handle_custom_msg({"event": "click", "domain": {"x": x, "y": y}}, [])
    sky.pointer._handle_custom_msg({"event": "dblclick", "domain": {"x": 14, "y": 16}}, [])
    assert [r["kind"] for r in loupe.regions] == ["pixel", "outline"]
    assert ("R2", 0) in loupe.spectrum_view.curve_marks


def test_regions_are_editable_and_removable(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="a")
    loupe.add_region(CirclePixelRegion(PixCoord(5, 5), radius=2), name="b")
    loupe.region_list.recolor("a", "#123456")
    assert loupe.spectrum_view.curve_marks[("a", 0)].colors == ["#123456"]
    loupe.region_list.rename("b", "edge")
    assert set(loupe.spectra) == {"a", "edge"}
    loupe.remove_region("a")
    assert [k[0] for k in loupe.spectrum_view.curve_marks] == ["edge"]
    assert len(loupe.sky_view.outlines) == 1


def test_region_rows_follow_the_regions_and_refuse_a_taken_name(loupe):
    rows = loupe.region_list._rows
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="a")
    loupe.add_region(CirclePixelRegion(PixCoord(5, 5), radius=2), name="b")
    names = [row.children[2].value for row in rows.children]
    picked = [row.children[0].value for row in rows.children]
    assert names == ["a", "b"] and picked == [False, True]   # the newest region is selected
    rows.children[0].children[0].value = True                 # click a's select button
    assert loupe.region_list.selected == "a"
    assert [row.children[0].value for row in rows.children] == [True, False]
    rows.children[1].children[2].value = "a"                  # type a name that is taken
    assert loupe.region_list.names == ["a", "b"] and rows.children[1].children[2].value == "b"
    rows.children[1].children[2].value = "rim"
    assert loupe.region_list.names == ["a", "rim"] and set(loupe.spectra) == {"a", "rim"}
    rows.children[0].children[4].click()                      # remove a
    assert [row.children[2].value for row in rows.children] == ["rim"] and loupe.regions[0]["name"] == "rim"


def test_region_outside_the_cube_is_reported_and_not_kept(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(500, 500), radius=3), name="far")
    assert loupe.status.level == "error"
    assert "far" in loupe.status.message
    assert loupe.regions == [] and loupe.spectra == {}


# ----------------------------------------------------------------------------- spectrum view

def test_marked_ranges_give_the_analysis_baseline_and_measurement(loupe, line_cube):
    shape = CirclePixelRegion(PixCoord(14, 12), radius=3)
    loupe.add_region(shape, name="core")
    free, window = _mark_ranges(loupe)
    assert loupe.line_free == [sorted(p) for p in free]
    assert loupe.line_window == sorted(window)
    spectrum = region_spectrum(open_cube(line_cube), shape)
    expected_fit = fit_baseline(spectrum, u.Quantity(loupe.line_free, u.GHz), order=1)
    fit = loupe.spectrum_view.fits[("core", 0)]
    assert_allclose(fit.model.value, expected_fit.model.value, rtol=1e-10)
    assert_allclose(loupe.spectrum_view.model_marks[("core", 0)].y, expected_fit.model.value, rtol=1e-10)
    loupe.show_subtracted = True
    assert_allclose(loupe.spectrum_view.curve_marks[("core", 0)].y, expected_fit.subtracted.value, rtol=1e-10)

    m = measure_line(spectrum, u.Quantity(loupe.line_window, u.GHz), line_free=u.Quantity(loupe.line_free, u.GHz),
                     order=1, rest_frequency=230.538 * u.GHz, z=0.0)
    (row,) = loupe.measurements
    assert row["flux"] == pytest.approx(m.flux.value) and row["flux_error"] == pytest.approx(m.flux_error.value)
    assert row["centroid"] == pytest.approx(m.centroid.to_value(u.km / u.s))
    assert row["snr"] == pytest.approx(m.snr)
    # the injected line is at +30 km/s (radio, RESTFRQ 230.538 GHz): the suite agrees with the input
    assert row["centroid"] == pytest.approx(LINE_V, abs=2.0)
    assert loupe.measurement_table.rows == loupe.measurements


def test_click_on_spectrum_moves_the_channel(loupe):
    f = _freqs(loupe)
    loupe.spectrum_view.clicker._handle_custom_msg({"event": "click", "domain": {"x": f[42] + 0.0001}}, [])
    assert loupe.channel == 42
    assert loupe.spectrum_view.cursor_mark.x[0] == pytest.approx(f[42])


def _pointer(loupe, event, x, height=0.5):
    loupe.spectrum_view.clicker._handle_custom_msg({"event": event, "domain": {"x": x, "y": height}}, [])


def test_pointing_at_a_marker_shows_its_details_and_a_click_on_its_head_sets_velocity_zero(loupe):
    # CO J=2-1 (230.538 GHz, this cube's RESTFRQ) lies in the band at z = 0: its marker is drawn.
    overlay = loupe.line_overlay
    index = int(np.flatnonzero(overlay.lines["name"] == "CO J=2-1")[0])
    marker = overlay.marker_x[index]
    _pointer(loupe, "mousemove", marker + 1e-5)
    assert "CO J=2-1" in overlay.hover_text
    far = _freqs(loupe)[2]
    _pointer(loupe, "mousemove", far)
    assert overlay.hover_text == ""   # away from every marker: the hint comes back
    _pointer(loupe, "mousemove", marker)
    _pointer(loupe, "mouseleave", None, None)
    assert overlay.hover_text == ""
    loupe.reference_line = ""
    channel = loupe.channel
    _pointer(loupe, "click", marker, 0.88)          # on the marker's head
    assert loupe.reference_line == "CO J=2-1" and loupe.channel == channel
    loupe.reference_line = ""
    _pointer(loupe, "click", marker, 0.3)           # on the marker's stem, low down: a channel pick
    nearest = int(np.argmin(np.abs(_freqs(loupe) - marker)))
    assert loupe.reference_line == "" and loupe.channel == nearest


def test_clicks_that_end_a_range_drag_pick_no_channel(loupe):
    f = _freqs(loupe)
    loupe.channel = 5
    loupe.spectrum_view.mode = "line-free"
    _pointer(loupe, "click", f[40])
    assert loupe.channel == 5
    loupe.spectrum_view.mode = "go"
    _pointer(loupe, "click", f[40] + 0.0001, 0.2)
    assert loupe.channel == 40


def test_velocity_axis_uses_the_chosen_convention(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="core")
    loupe.axis_kind = "velocity"
    x = loupe.spectrum_view.curve_marks[("core", 0)].x
    f = _freqs(loupe)
    # radio velocity v = c (f0 - f) / f0 (Greisen et al. 2006, A&A 446, 747)
    assert_allclose(x, 299792.458 * (230.538 - f) / 230.538, rtol=1e-9)
    loupe.convention = "optical"
    x = loupe.spectrum_view.curve_marks[("core", 0)].x
    assert_allclose(x, 299792.458 * (230.538 - f) / f, rtol=1e-9)  # optical: c (f0 - f) / f


def test_velocity_with_no_line_chosen_is_from_the_cubes_restfrq(cube_path, rng):
    """No rest frequency given: velocities are from the header's RESTFRQ, at any z, and the readout says so."""
    # cubefactory: RESTFRQ 220.0 GHz here, channel 0 at 230.538 GHz
    loupe = Loupe(cube_path(rng.normal(size=(20, 6, 6)), crval3=230.538e9, restfrq=220.0e9), z=0.0)
    assert loupe.rest_frequency == pytest.approx(220.0)
    assert loupe.reference_line == "" and "RESTFRQ 220 GHz" in loupe.velocity_reference
    # radio velocity v = c (f0 - f) / f0 (Greisen et al. 2006, A&A 446, 747), as axis_in with no line gives
    v = 299792.458 * (220.0 - 230.538) / 220.0
    assert f"{v:+.1f} km/s (radio, RESTFRQ 220 GHz)" in loupe.channel_bar.readout
    loupe.axis_kind = "velocity"
    assert loupe.status.level != "warning", loupe.status.message
    assert loupe.spectrum_view.x_of_frequency(230.538)[0] == pytest.approx(v, rel=1e-9)
    # a redshift keeps RESTFRQ as the line's rest frequency: zero velocity moves to 220 / (1 + z)
    loupe.z = 0.1
    assert "at z = 0.1" in loupe.channel_bar.readout
    assert loupe.spectrum_view.x_of_frequency(220.0 / 1.1)[0] == pytest.approx(0.0, abs=1e-6)


def test_chosen_line_names_the_velocity_zero_and_none_goes_back_to_restfrq(loupe):
    # CO J=2-1 at 230.538 GHz (CDMS, from memory) equals this cube's RESTFRQ; naming it on the call finds it
    named = Loupe(loupe.cubes[0], rest_frequency=230.538 * u.GHz)
    assert named.reference_line == "CO J=2-1"
    assert "(radio, CO J=2-1)" in named.channel_bar.readout
    loupe.line_overlay.reference_choice.value = "CO J=2-1"
    assert loupe.velocity_reference == "CO J=2-1"
    loupe.line_overlay.reference_choice.value = ""
    assert loupe.rest_frequency == pytest.approx(230.538) and "RESTFRQ" in loupe.velocity_reference
    # a rest frequency typed in code that is not the chosen line's drops the line name
    loupe.reference_line = "CO J=2-1"
    loupe.rest_frequency = 230.0
    assert loupe.reference_line == "" and loupe.velocity_reference == "rest frequency 230 GHz"
    assert loupe.rest_frequency == 230.0


def test_velocity_axis_without_a_line_measures_from_the_band_centre():
    from cubeloupe.widgets import SpectrumView

    view = SpectrumView()
    view.band = (230.530, 230.538)
    view.z = 0.5
    view.axis_kind = "velocity"
    assert view.axis_kind == "velocity"
    assert view.status.level == "warning" and "band centre" in view.status.message
    # the band centre 230.534 GHz observed is 345.801 GHz in the rest frame at z = 0.5
    assert view.rest_frequency == pytest.approx(230.534 * 1.5)
    assert view.x_of_frequency(230.534)[0] == pytest.approx(0.0, abs=1e-6)


# ----------------------------------------------------------------------------- line overlay

def test_markers_sit_at_rest_over_one_plus_z(cube_path, rng):
    # 1 MHz channels from 230.538 GHz down: CO J=4-3 (461.0408 GHz, CDMS, from memory) is here at z ~ 1.0
    loupe = Loupe(cube_path(rng.normal(size=(400, 6, 6))), z=1.0)
    overlay = loupe.line_overlay
    for z in (1.0, 1.0001, 0.9995):
        loupe.z = z
        lines = lines_in_band(230.538 / 1.005 * u.GHz, 230.139 * 1.005 * u.GHz, z, loupe.catalog)
        assert list(overlay.lines["name"]) == list(lines["name"])
        expected = u.Quantity(lines["rest_frequency"], u.GHz).value / (1 + z)
        assert_allclose(overlay.marker_x, expected, rtol=1e-12)
        # only markers inside the drawn band are drawn (at z = 0.9995 CO J=4-3 sits above the band)
        lo, hi = loupe.spectrum_view.x_range
        inside = (expected >= lo) & (expected <= hi)
        assert_allclose(overlay.heads.x, expected[inside], rtol=1e-12)
        assert list(overlay.heads.names) == list(np.asarray(lines["name"])[inside])
    # the typed redshift field drives z
    overlay.z_input.value = 1.0002
    assert loupe.z == 1.0002
    # a systemic shift of +100 km/s (radio): f = f_ref (1 - v/c) (Greisen et al. 2006)
    loupe.velocity_offset = 100.0
    assert_allclose(overlay.marker_x, expected * 0 + u.Quantity(overlay.lines["rest_frequency"], u.GHz).value
                    / 2.0002 * (1 - 100 / 299792.458), rtol=1e-12)
    # hover shows rest frequency, E_up, spin isomer and provenance
    text = overlay.hover(0)
    row = overlay.lines[0]
    assert f"{u.Quantity(row['rest_frequency'], u.GHz).value:.6f}" in text
    assert "E_up" in text and str(row["spin_isomer"]) in text and str(row["provenance"])[:10] in text


def test_x_axis_spans_the_data_band_not_the_markers(cube_path, rng):
    """Regression: a line marker outside the band stretched the x axis (issue 4 review)."""
    # 400 channels of 1 MHz from 230.538 GHz down (the cube's header): band 230.139-230.538 GHz
    loupe = Loupe(cube_path(rng.normal(size=(400, 6, 6))), z=0.9995)
    view = loupe.spectrum_view
    span = 230.538 - 230.139
    expected = [230.139 - view.band_margin * span, 230.538 + view.band_margin * span]
    assert view.x_range == pytest.approx(expected, rel=1e-12)
    assert [view.x_scale.min, view.x_scale.max] == pytest.approx(expected, rel=1e-12)
    # CO J=4-3 (461.0408 GHz, CDMS, from memory) is at 230.578 GHz here: above the band, so not drawn
    co43 = 461.040768 / 1.9995
    assert any(abs(x - co43) < 1e-6 for x in loupe.line_overlay.marker_x)
    assert all(abs(x - co43) > 1e-3 for x in loupe.line_overlay.heads.x)
    # on a velocity axis the range is the band's velocities (radio, RESTFRQ 230.538 GHz, z = 0.9995)
    loupe.axis_kind = "velocity"
    c = 299792.458  # km/s
    v = sorted(c * (1 - f * 1.9995 / 230.538) for f in (230.139, 230.538))
    margin = view.band_margin * (v[1] - v[0])
    assert view.x_range == pytest.approx([v[0] - margin, v[1] + margin], rel=1e-9)


def test_energy_limit_is_blank_for_no_limit(loupe):
    overlay = loupe.line_overlay
    assert overlay.max_E_up is None and overlay.eup_input.value == "" and overlay.eup_input.placeholder
    shown = len(overlay.lines)
    overlay.eup_input.value = "20"
    assert overlay.max_E_up == 20.0
    # the filter is the catalog's: every line left has E_up/k <= 20 K
    assert all(u.Quantity(overlay.lines["E_up"], u.K).value <= 20)
    assert len(overlay.lines) <= shown
    overlay.eup_input.value = "lots"
    assert overlay.max_E_up == 20.0 and overlay.eup_input.value == "20" and loupe.status.level == "error"
    overlay.eup_input.value = " "
    assert overlay.max_E_up is None and len(overlay.lines) == shown
    # nothing picked means every species; picking and "All species" round-trip
    assert overlay.species == [] and "every species" in overlay._species_note.value
    overlay.species = ["CO"]
    assert overlay.species_choice.value == ("CO",) and set(overlay.lines["species"]) <= {"CO"}
    overlay.all_species_button.click()
    assert overlay.species == [] and overlay.species_choice.value == ()


def test_clip_level_is_blank_for_no_clipping(loupe):
    panel = loupe.moment_panel
    assert loupe.clip is None and panel.clip_input.value == ""
    panel.clip_input.value = "3"
    assert loupe.clip == 3.0
    panel.clip_input.value = "-1"
    assert loupe.clip == 3.0 and loupe.status.level == "error"
    loupe.clip = None
    assert panel.clip_input.value == ""


def test_systemic_velocity_puts_the_marker_on_the_line(cube_path, rng):
    # 100 channels of 4.88 MHz below 229.65 GHz; CO J=2-1 (230.538 GHz, CDMS, from memory) at +1462 km/s
    loupe = Loupe(cube_path(rng.normal(size=(100, 6, 6)), crval3=229.65e9, cdelt3=-4.8828125e6),
                  rest_frequency=230.538 * u.GHz, velocity_offset=1462 * u.km / u.s)
    assert loupe.velocity_offset == 1462.0
    assert loupe.line_overlay.velocity_slider.max >= 1462.0 >= loupe.line_overlay.velocity_slider.min
    # radio convention: f = f0 (1 - v/c) (Greisen et al. 2006, A&A 446, 747)
    expected = 230.538 * (1 - 1462 / 299792.458)
    names = list(loupe.line_overlay.heads.names)
    assert "CO J=2-1" in names
    assert loupe.line_overlay.heads.x[names.index("CO J=2-1")] == pytest.approx(expected, rel=1e-12)


def test_header_names_the_cube(loupe, line_cube):
    text = loupe.header.value
    # cubefactory: 60 channels of 24 x 28 pixels, 1 MHz channels, a 1" round beam, Jy/beam
    assert line_cube.name in text and "60 channels × 24 × 28 pixels" in text
    assert "1 MHz channels" in text and "beam 1.00″ × 1.00″" in text and "Jy / beam" in text


def test_bad_redshift_is_refused_with_a_message(loupe):
    loupe.line_overlay.z_input.value = 19.0
    loupe.line_overlay.z_input.max = 100
    loupe.line_overlay.z_input.value = 50.0
    assert loupe.z == 19.0
    assert loupe.status.level == "error" and "redshift" in loupe.status.message.lower()


def test_marked_peaks_offer_redshift_candidates(cube_path, rng):
    from cubeloupe.analysis.redshift_solver import redshift_candidates

    loupe = Loupe(cube_path(rng.normal(size=(4, 6, 6)), crval3=100e9, cdelt3=100e9 / 3),
                  z=0.0)
    # CO J=4-3 and J=5-4 (461.0408 and 576.2679 GHz, CDMS, from memory) at z = 2.5
    peaks = [461.040768 / 3.5, 576.267931 / 3.5]
    loupe.spectrum_view.mode = "peaks"
    for f in peaks:
        loupe.spectrum_view.click(f)
    assert loupe.peaks == pytest.approx(peaks)
    expected = redshift_candidates(np.array(peaks) * u.GHz, loupe.catalog)
    assert [c.z for c in loupe.line_overlay.candidates] == pytest.approx([c.z for c in expected])
    loupe.line_overlay.use_candidate_index(0)
    assert loupe.z == pytest.approx(expected[0].z)


# ----------------------------------------------------------------------------- moments

def test_moment_action_equals_moment_maps(loupe, line_cube):
    _mark_ranges(loupe)
    loupe.clip = 3.0
    loupe.make_moments(wait=True)
    assert loupe.moment_panel.state == "done" and loupe.moment_panel.progress == pytest.approx(1.0)
    expected = moment_maps(open_cube(line_cube), u.Quantity(loupe.line_window, u.GHz),
                           line_free=u.Quantity(loupe.line_free, u.GHz), order=1,
                           rest_frequency=230.538 * u.GHz, clip=3.0)
    for key in ("m0", "m1", "m2", "m0_error"):
        assert_allclose(getattr(loupe.moments, key).value, getattr(expected, key).value, rtol=1e-6, equal_nan=True)
    loupe.sky_source = "moment 1"
    image, _ = display_image(expected.m1.value, loupe.sky_view.max_display_size)
    lo, hi = display_limits(image)
    assert_allclose(loupe.sky_view.image.image, stretched(image, lo, hi), rtol=1e-5, equal_nan=True)
    loupe.sky_view.contour_source = "moment 0"
    assert len(loupe.sky_view.contour_mark.x) > 0


@pytest.mark.slow
def test_moments_on_a_cluster_equal_those_in_the_kernel(line_cube):
    """The same suite on a dask.distributed cluster gives the same maps (issue #7)."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        on_cluster = Loupe(line_cube, client=client)
        _mark_ranges(on_cluster)
        on_cluster.make_moments(wait=True)
        assert on_cluster.moment_panel.state == "done", on_cluster.status.message
    in_kernel = Loupe(line_cube)
    _mark_ranges(in_kernel)
    in_kernel.make_moments(wait=True)
    for key in ("m0", "m1", "m2", "m0_error"):
        assert_allclose(getattr(on_cluster.moments, key).value, getattr(in_kernel.moments, key).value,
                        rtol=1e-12, equal_nan=True)


def test_a_missing_cluster_is_reported_in_the_status_line(line_cube):
    loupe = Loupe(line_cube, client="default")
    _mark_ranges(loupe)
    loupe.make_moments(wait=True)
    assert loupe.moment_panel.state == "failed"
    assert loupe.status.level == "error" and "no dask.distributed Client is running" in loupe.status.message


def test_moments_without_a_window_say_so(loupe):
    assert loupe.make_moments(wait=True) is None
    assert loupe.status.level == "error" and "line window" in loupe.status.message
    assert not loupe.moment_panel.running


def test_moments_can_be_stopped(loupe):
    _mark_ranges(loupe)
    panel = loupe.moment_panel
    panel._cancel = None
    import threading

    gate = threading.Event()
    original = panel._report_progress

    def slow_progress(fraction):
        original(fraction)
        gate.wait(2)

    panel._report_progress = slow_progress
    panel.start()
    panel.stop()
    gate.set()
    assert panel.wait(30)
    assert panel.state in ("stopped", "done")  # a tiny cube may finish in its first block
    assert not panel.running


# ----------------------------------------------------------------------------- exports

def test_exports_write_and_refuse_to_overwrite(loupe, tmp_path):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="core")
    _mark_ranges(loupe)
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
    assert not before and loupe.status.level == "error" and "exists" in loupe.status.message


# ----------------------------------------------------------------------------- several windows

def test_two_windows_share_regions_and_one_axis(cube_path, rng):
    low = cube_path(rng.normal(size=(20, 24, 28)), crval3=230.0e9, cdelt3=-2e6)
    high = cube_path(rng.normal(size=(30, 12, 14)), crval3=232.0e9, cdelt3=1e6, pixel=0.5)
    loupe = Loupe([low, high])
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
    loupe = Loupe([low, high], rest_frequency=229.98 * u.GHz)
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
    loupe = Loupe(bad)
    assert loupe.status.level == "error" and "not-a-cube.fits" in loupe.status.message
    assert loupe.cubes == []
