"""SpectrumView: marked ranges, baselines, clicks, velocity conventions and the x axis.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import fit_baseline, measure_line, open_cube, region_spectrum
from cubeloupe.widgets import Loupe

from suite_driver import LINE_V, freqs, mark_ranges


def test_marked_ranges_give_the_analysis_baseline_and_measurement(loupe, line_cube):
    shape = CirclePixelRegion(PixCoord(14, 12), radius=3)
    loupe.add_region(shape, name="core")
    free, window = mark_ranges(loupe)
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
    f = freqs(loupe)
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
    far = freqs(loupe)[2]
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
    nearest = int(np.argmin(np.abs(freqs(loupe) - marker)))
    assert loupe.reference_line == "" and loupe.channel == nearest


def test_clicks_that_end_a_range_drag_pick_no_channel(loupe):
    f = freqs(loupe)
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
    f = freqs(loupe)
    # radio velocity v = c (f0 - f) / f0 (Greisen et al. 2006, A&A 446, 747)
    assert_allclose(x, 299792.458 * (230.538 - f) / 230.538, rtol=1e-9)
    loupe.convention = "optical"
    x = loupe.spectrum_view.curve_marks[("core", 0)].x
    assert_allclose(x, 299792.458 * (230.538 - f) / f, rtol=1e-9)  # optical: c (f0 - f) / f


def test_velocity_with_no_line_chosen_is_from_the_cubes_restfrq(cube_path, rng):
    """No rest frequency given: velocities are from the header's RESTFRQ, at any z, and the readout says so."""
    # cubefactory: RESTFRQ 220.0 GHz here, channel 0 at 230.538 GHz
    loupe = Loupe(cube_path(rng.normal(size=(20, 6, 6)), crval3=230.538e9, restfrq=220.0e9), z=0.0, first_view=False)
    assert loupe.rest_frequency == pytest.approx(220.0)
    assert loupe.reference_line == "" and "RESTFRQ 220 GHz" in loupe.velocity_reference
    # radio velocity v = c (f0 - f) / f0 (Greisen et al. 2006, A&A 446, 747), as axis_in with no line gives
    v = 299792.458 * (220.0 - 230.538) / 220.0
    assert f"{v:+.1f} km/s (radio, RESTFRQ 220 GHz)" in loupe.channel_bar.readout
    loupe.axis_kind = "velocity"
    assert loupe.spectrum_view.status.level != "warning", loupe.spectrum_view.status.message
    assert loupe.spectrum_view.x_of_frequency(230.538)[0] == pytest.approx(v, rel=1e-9)
    # a redshift keeps RESTFRQ as the line's rest frequency: zero velocity moves to 220 / (1 + z)
    loupe.z = 0.1
    assert "at z = 0.1" in loupe.channel_bar.readout
    assert loupe.spectrum_view.x_of_frequency(220.0 / 1.1)[0] == pytest.approx(0.0, abs=1e-6)


def test_chosen_line_names_the_velocity_zero_and_none_goes_back_to_restfrq(loupe):
    # CO J=2-1 at 230.538 GHz (CDMS, from memory) equals this cube's RESTFRQ; naming it on the call finds it
    named = Loupe(loupe.cubes[0], rest_frequency=230.538 * u.GHz, first_view=False)
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


def test_a_narrow_band_gets_distinct_tick_labels(cube_path, rng):
    # 100 channels of 10 kHz at 110.2 GHz: a band 1 MHz wide (a narrow single-dish backend)
    loupe = Loupe(cube_path(rng.normal(size=(100, 5, 5)), crval3=110.2e9, cdelt3=-1.0e4, restfrq=110.2e9),
                  first_view=False)
    axis = loupe.spectrum_view.x_axis
    labels = [format(v, axis.tick_format) for v in axis.tick_values]
    assert len(labels) >= 3 and len(set(labels)) == len(labels)
    assert all(len(text) <= 10 for text in labels), labels
