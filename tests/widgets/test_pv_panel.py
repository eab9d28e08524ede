"""PVPanel: the position–velocity tab, fed a path drawn with the sky view's path tool (#18).

The slice shown must be `pv_slice` of the same path, width and channels; the vertical axis follows the
suite's axis choice and velocity frame; the catalog line markers sit where the spectrum draws them;
problems are told beside the panel's controls; FITS files are written by `PVSlice.write`.
"""

import astropy.units as u
import numpy as np
from astropy.io import fits
from numpy.testing import assert_allclose, assert_array_equal

from cubeloupe.analysis import display_axis, open_cube, pv_slice
from cubeloupe.widgets.pv_panel import TAB_TITLE

from suite_driver import LINE_V, mark_ranges

CO21 = 230.538 * u.GHz  # CO J=2-1 rest frequency (CDMS catalogue, Mueller et al. 2005): the test cube's RESTFRQ
PATH = [[3.0, 4.0], [14.0, 12.0], [24.0, 19.0]]


def _draw_path(loupe, vertices=PATH, width=None, unit=None):
    sky = loupe.sky_view
    sky.tool = "path"
    if width is not None:
        sky.path_tool.width_input.value = width
    if unit is not None:
        sky.path_tool.unit_choice.value = unit
    for x, y in vertices:
        sky.pointer._handle_custom_msg({"event": "click", "domain": {"x": x, "y": y}}, [])
    sky.pointer._handle_custom_msg({"event": "dblclick", "domain": {"x": vertices[-1][0], "y": vertices[-1][1]}},
                                   [])


def test_no_path_yet_is_told_in_the_panel(loupe):
    panel = loupe.pv_panel
    assert "No path yet" in panel.hint.value and panel.slice is None and panel.save_button.disabled


def test_slice_of_the_drawn_path_is_the_analysis_pv_slice(loupe, line_cube):
    panel = loupe.pv_panel
    tabs = loupe.children[-1]
    _draw_path(loupe)
    expected = pv_slice(open_cube(line_cube), PATH, width=1)
    assert_array_equal(panel.slice.data.value, expected.data.value)
    assert_allclose(panel.slice.offset.value, expected.offset.value)
    # The tab comes to the front with the new slice.
    assert tabs.get_title(tabs.selected_index) == TAB_TITLE
    # The image spans the offsets (pixel edges) and the observed frequencies of the channels.
    step = expected.offset[1].value - expected.offset[0].value
    assert_allclose(panel.image.x, (expected.offset[0].value - step / 2, expected.offset[-1].value + step / 2))
    frequencies = np.sort(expected.spectral_axis.to_value(u.GHz))
    assert_allclose(panel.y_values, frequencies)
    assert panel.image.image.shape == expected.data.shape
    assert loupe.regions == [], "the path made no region"


def test_line_window_and_width_in_arcsec_reach_the_slice(loupe, line_cube):
    mark_ranges(loupe)
    _draw_path(loupe, width=1.0, unit="arcsec")
    panel = loupe.pv_panel
    window = u.Quantity(loupe.line_window, u.GHz)
    expected = pv_slice(open_cube(line_cube), PATH, width=1.0 * u.arcsec, window=window)
    assert panel.slice.width == expected.width == 4.0, "1 arcsec across 0.25 arcsec pixels"
    assert_array_equal(panel.slice.data.value, expected.data.value)
    panel.only_line_window = False
    assert panel.slice.data.shape[0] == open_cube(line_cube).shape[0], "the whole band"


def test_vertical_axis_follows_the_suite_axis_and_velocity_frame(loupe, line_cube):
    _draw_path(loupe)
    panel = loupe.pv_panel
    assert panel.axis == "frequency" and "frequency" in panel.y_axis.label
    loupe.axis_kind = "velocity"
    assert panel.axis == "velocity" and "km/s" in panel.y_axis.label
    velocities = display_axis(panel.slice.spectral_axis, "velocity", rest_frequency=CO21, convention="radio")
    assert_allclose(panel.y_values, np.sort(velocities.to_value(u.km / u.s)))
    loupe.convention = "optical"
    optical = display_axis(panel.slice.spectral_axis, "velocity", rest_frequency=CO21, convention="optical")
    assert_allclose(panel.y_values, np.sort(optical.to_value(u.km / u.s)))


def test_catalog_line_markers_at_the_systemic_velocity(loupe):
    _draw_path(loupe)
    loupe.axis_kind = "velocity"
    loupe.velocity_offset = LINE_V
    panel = loupe.pv_panel
    # A line moved by the systemic velocity sits at that velocity on an axis measured from its own rest
    # frequency (radio convention, Greisen et al. 2006, A&A 446, 747).
    assert "CO J=2-1" in panel.marker_names
    assert_allclose(panel.marker_values[panel.marker_names.index("CO J=2-1")], LINE_V, atol=1e-6)
    assert_allclose(np.atleast_2d(panel.marker_lines.y)[:, 0], panel.marker_values)


def test_path_off_the_image_is_told_beside_the_controls(loupe):
    panel = loupe.pv_panel
    panel.set_path([[500.0, 500.0], [600.0, 650.0]])
    assert panel.status.level == "error" and "outside" in panel.status.message
    assert panel.slice is None and panel.save_button.disabled


def test_fits_export_is_the_slice_and_never_replaces_a_file(loupe, tmp_path):
    _draw_path(loupe)
    panel = loupe.pv_panel
    panel.name.value = str(tmp_path / "pv")
    panel.save_button.click()
    with fits.open(tmp_path / "pv.fits") as written:
        assert_allclose(written[0].data, panel.slice.data.value.astype(np.float32))
        assert written[0].header["CTYPE1"] == "OFFSET"
    before = (tmp_path / "pv.fits").read_bytes()
    panel.save_button.click()
    assert panel.status.level == "error" and "exists already" in panel.status.message
    assert (tmp_path / "pv.fits").read_bytes() == before


def test_colour_bar_reads_in_the_cube_unit_over_the_image_limits(loupe):
    _draw_path(loupe)
    panel = loupe.pv_panel
    data = panel.slice.data.value
    low, high = panel.limits
    # The limits are the 0.5 and 99.5 percentiles of the slice (numpy's, as the caption says).
    assert_allclose([low, high], np.nanpercentile(data, [0.5, 99.5]), rtol=1e-5)
    assert panel.bar_axis.label == panel.slice.data.unit.to_string() == "Jy / beam"
    assert (panel.bar_scale.min, panel.bar_scale.max) == (low, high) == (panel.color_scale.min, panel.color_scale.max)
    assert tuple(panel.bar_image.y) == (low, high)
    assert np.nanmin(panel.image.image) >= low and np.nanmax(panel.image.image) <= high
    assert panel.colorbar in panel.figure_row.children


def test_width_is_drawn_on_the_sky_and_a_new_width_slices_again(loupe, line_cube):
    from cubeloupe.analysis import path_band

    _draw_path(loupe)
    tool, panel = loupe.sky_view.path_tool, loupe.pv_panel
    assert len(tool.band_lines.x) == 0, "one pixel wide: the path alone"
    tool.width_input.value = 3.0
    assert panel.width == 3.0 and panel.slice.width == 3.0
    assert_array_equal(panel.slice.data.value, pv_slice(open_cube(line_cube), PATH, width=3).data.value)
    one, other = path_band(open_cube(line_cube), PATH, width=3)
    drawn = np.asarray(tool.band_lines.x)
    assert drawn.shape == (4, 2), "two segments, an edge either side of each"
    assert_allclose(drawn, np.concatenate([one, other])[:, 0].reshape(4, 2))
    assert_allclose(np.asarray(tool.band_lines.y), np.concatenate([one, other])[:, 1].reshape(4, 2))
    assert tool.band_lines in loupe.sky_view.figure.marks
