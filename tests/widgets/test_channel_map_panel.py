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
    assert panel.figure is None and all(b.disabled for b in panel.save_buttons)


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
    assert len(panel.figure.axes) == 9 + 1, "nine panels and the colour bar"
    assert panel.png.startswith(PNG_SIGNATURE) and panel.image.value == panel.png
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
