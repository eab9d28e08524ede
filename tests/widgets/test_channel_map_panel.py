"""ChannelMapPanel: the suite's channel-map tab, driven from code as the browser would (#18).

The panel's figure must be what `channel_maps`/`channel_panels` give for the suite's line window and
velocity frame; problems are told beside the panel's controls; files are written atomically and never
replaced unless asked.
"""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal
from traitlets import TraitError

from cubeloupe.analysis import channel_panels, open_cube
from cubeloupe.widgets.channel_map_panel import TAB_TITLE, ChannelMapPanel

from suite_driver import mark_ranges

CO21 = 230.538 * u.GHz  # CO J=2-1 rest frequency (CDMS catalogue, Mueller et al. 2005): the test cube's RESTFRQ
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2


def _tabs(loupe):
    return loupe.children[-1]


def test_panel_is_a_tab_of_the_suite(loupe):
    tabs = _tabs(loupe)
    index = list(tabs.children).index(loupe.channel_map_panel)
    assert isinstance(loupe.channel_map_panel, ChannelMapPanel) and tabs.get_title(index) == TAB_TITLE


def test_without_a_line_window_the_panel_says_what_to_do(loupe):
    panel = loupe.channel_map_panel
    assert "No line window yet" in panel.hint.value
    assert panel.make() is None
    assert panel.status.level == "warning" and "drag across the line" in panel.status.message
    assert panel.panels is None and panel.figure_for_files is None and all(b.disabled for b in panel.save_buttons)


@pytest.mark.parametrize("average", [True, False])
def test_figure_is_the_analysis_channel_maps_of_the_suite_window(loupe, line_cube, average):
    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    panel.n = 9
    panel.average = average
    panel.make(wait=True)
    assert panel.state == "done", panel.status.message
    expected = channel_panels(open_cube(line_cube), u.Quantity(loupe.line_window, u.GHz), n=9, average=average,
                              rest_frequency=CO21, z=0.0, convention="radio")
    assert_array_equal(panel.panels.images.value, expected.images.value)
    assert panel.panels.channels == expected.channels
    assert_allclose(panel.panels.centers.to_value(u.km / u.s), expected.centers.to_value(u.km / u.s))
    # The figure for papers is channel_maps of the same inputs, made when a file is written.
    assert len(panel.figure_for_files.axes) == 9 + 1, "nine panels and the colour bar"
    assert_array_equal(panel.figure_for_files.channel_panels.images.value, expected.images.value)
    if not average:
        assert all(stop - start == 1 for start, stop in panel.panels.channels)


def test_panels_follow_the_suite_velocity_frame_and_label_choice(loupe, line_cube):
    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    loupe.convention = "optical"
    panel.make(wait=True)
    optical = channel_panels(open_cube(line_cube), u.Quantity(loupe.line_window, u.GHz), n=16,
                             rest_frequency=CO21, convention="optical")
    assert_allclose(panel.panels.centers.to_value(u.km / u.s), optical.centers.to_value(u.km / u.s))
    panel.label_in = "frequency"
    panel.make(wait=True)
    assert panel.panels.centers.unit == u.GHz
    # The panels' centres lie inside the suite's line window (observed GHz).
    low, high = loupe.line_window
    assert np.all((panel.panels.centers.value >= low - 1e-3) & (panel.panels.centers.value <= high + 1e-3))


def test_bad_number_of_panels_is_told_beside_the_control(loupe):
    panel = loupe.channel_map_panel
    panel.n_input.value = 0
    assert panel.status.level == "error" and "1 to 64" in panel.status.message
    assert panel.n == 16 and panel.n_input.value == 16
    with pytest.raises(TraitError):
        panel.n = 65


def test_png_and_pdf_are_written_and_never_replaced_unless_asked(loupe, tmp_path):
    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    panel.make(wait=True)
    panel.name.value = str(tmp_path / "maps")
    for button in panel.save_buttons:
        button.click()
    assert (tmp_path / "maps.png").read_bytes().startswith(PNG_SIGNATURE)
    assert (tmp_path / "maps.pdf").read_bytes().startswith(b"%PDF-")  # ISO 32000-1, section 7.5.2
    before = (tmp_path / "maps.png").read_bytes()
    panel.save_buttons[0].click()
    assert panel.status.level == "error" and "exists already" in panel.status.message
    assert (tmp_path / "maps.png").read_bytes() == before
    panel.overwrite.value = True
    panel.save_buttons[0].click()
    assert panel.status.level == "info" and "Written" in panel.status.message
    written = sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(("maps", ".cubeloupe")))
    assert written == ["maps.pdf", "maps.png"], "no temporary file is left"


def test_panels_on_screen_are_the_binned_images_on_one_colour_scale_with_rms_contours(loupe, line_cube):
    """The tab draws channel_panels' images side by side: one linear colour scale over the 0.5-99.9 percentiles
    of all panels (as channel_maps), contours at the same rms multiples, a label per panel, the beam."""
    from cubeloupe.analysis import DEFAULT_CONTOURS, contour_paths, display_limits, stretched

    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    panel.n = 4
    panel.make(wait=True)
    assert panel.state == "done", panel.status.message
    images = panel.panels.images.value
    low, high = panel.limits
    assert (low, high) == display_limits(images, 0.5, 99.9)
    # numpy's percentiles of every finite pixel (the test cube is small enough to use them all).
    assert_allclose([low, high], np.nanpercentile(images, [0.5, 99.9]), rtol=1e-5)
    ny, nx = images.shape[1:]  # 4 panels on a 2 x 2 grid; small panels are shown unbinned
    gap = max(2, nx // 40)
    mosaic = np.asarray(panel.image.image)
    assert mosaic.shape == (2 * ny + gap, 2 * nx + gap)
    lower_left, top_left = mosaic[:ny, :nx], mosaic[ny + gap:, :nx]
    assert_allclose(top_left, stretched(images[0], low, high), equal_nan=True)
    assert_allclose(lower_left, stretched(images[2], low, high), equal_nan=True)
    assert np.isnan(mosaic[ny:ny + gap]).all(), "a blank gap between rows of panels"
    assert panel.bar_axis.label == "Jy / beam" and (panel.bar_scale.min, panel.bar_scale.max) == (low, high)
    assert list(panel.labels.text) == [f"{c:.1f} km/s" for c in panel.panels.centers.to_value(u.km / u.s)]
    # Contours: the points of the first panel at 3 x rms are contourpy's (via contour_paths), shifted to its place.
    rms = panel.panels.rms.value
    (x, y), = contour_paths(images[0], [DEFAULT_CONTOURS[0] * rms])
    assert x.size, "noise reaches 3 x rms somewhere in a panel"
    assert_allclose(np.asarray(panel.contours.x)[:x.size], x, equal_nan=True)
    assert_allclose(np.asarray(panel.contours.y)[:y.size], y + ny + gap, equal_nan=True)
    assert len(panel.beam.x) > 0 and np.nanmax(panel.beam.x) < nx, "the beam in the lower-left panel"
    assert panel.figure_row not in panel.children, "the figure joins the page when its tab is shown"
    _tabs(loupe).selected_index = list(_tabs(loupe).children).index(panel)
    assert panel.figure_row in panel.children and panel.caption in panel.children


def test_maps_can_be_remade_from_what_they_were_made_with(loupe, line_cube):
    """A session or script remakes the maps from `made_with`, even after the suite's window moved on."""
    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    panel.n, panel.average, panel.label_in = 6, False, "frequency"
    panel.make(wait=True)
    record, first = dict(panel.made_with), panel.panels
    low, high = loupe.line_window
    loupe.line_window = [low, (low + high) / 2]
    assert "another window or velocity frame" in panel.hint.value
    panel.make(wait=True, record=record)
    assert_array_equal(panel.panels.images.value, first.images.value) and panel.made_with == record
    assert record["n"] == 6 and record["average"] is False and record["label_in"] == "frequency"


def test_colour_bar_ramp_spans_the_colour_positions_between_the_limits(loupe):
    """The mosaic holds colour positions 0..1 (linear between the limits): the bar's ramp covers 0..1 from the
    lower limit to the upper one, so each colour reads at its data value."""
    mark_ranges(loupe)
    panel = loupe.channel_map_panel
    panel.make(wait=True)
    ramp = np.asarray(panel.bar_image.image)[:, 0]
    assert ramp[0] == 0.0 and ramp[-1] == 1.0 and np.all(np.diff(ramp) > 0)
    assert tuple(panel.bar_image.y) == panel.limits
    assert np.nanmin(panel.image.image) >= 0.0 and np.nanmax(panel.image.image) <= 1.0
