"""Channel maps, the path tool and the position–velocity view in real JupyterLab, with the mouse (#18).

A notebook opens the suite on the disk demo cube at 1 440 x 900 with JupyterLab's file browser
open. The "Channel maps" tab first says that a line window is needed; the window is then dragged
on the spectrum and the channel maps made with the tab's button (drawn in bqplot, with their colour
bar in Jy/beam), then again with 9 panels of one channel each labelled in frequency, and saved as
PNG. The Path tool, 3 pixels wide, draws the disk's major axis on the sky with three clicks and a
double-click (thin lines either side show the strip averaged); the "Position–velocity" tab comes to
the front with the slice along that path and its colour bar, and shows the CO line at the systemic
velocity once the spectrum's axis is in velocity. The "Code" tab's script then holds the
`pv_slice` and `channel_maps` calls. At each step nothing of the suite sticks out of the notebook's
output area, the console stays clean, and a screenshot is kept in the browser suite's folder.

Where the result has a geometric meaning it is checked against the demo's injected values
(`demo_truth("disk")`): the path's vertices are where the mouse clicked, and along the receding
major axis (position angle from the sidecar) the slice's velocity rises from the approaching end
to the receding end.

Hooks relied on. CSS classes: cubeloupe-loupe, cubeloupe-actions (tab titles "Channel maps",
"Position–velocity"), cubeloupe-channel-map-panel, cubeloupe-channel-map-button,
cubeloupe-channel-map-figure, cubeloupe-channel-map-colorbar, cubeloupe-channel-map-panels,
cubeloupe-channel-map-mode, cubeloupe-channel-map-labels, cubeloupe-channel-map-save-png,
cubeloupe-region-tools (button "Path"), cubeloupe-path-width, cubeloupe-sky-figure,
cubeloupe-spectrum-figure, cubeloupe-spectrum-mode (button "Line window"), cubeloupe-pv-panel,
cubeloupe-pv-figure, cubeloupe-pv-colorbar, cubeloupe-code-text. Traits read back: Loupe.line_window,
channel_map_panel.state/panels/made_with, pv_panel.path/slice/axis/marker_names/width,
sky_view.path_tool.band_lines, spectrum_view.band.
"""

import json
import math

import pytest

from lab import PROBE_SETUP, ask_kernel, distinct_colours, settled, wait_until, x_axis_calibration

pytestmark = pytest.mark.browser

NOTEBOOK = "line_views_probe.ipynb"
VIEWPORT = {"width": 1440, "height": 900}
SOURCE = """\
from cubeloupe.analysis import demo_path, demo_truth
from cubeloupe.widgets import Loupe

truth = demo_truth("disk")
loupe = Loupe(demo_path("disk"), velocity_offset=truth["disk"]["systemic_velocity"])
loupe
"""
PIXEL_TOLERANCE = 2.0  # screen pixels: how closely a click must be reproduced in the kernel

# Every element of the suite whose right edge lies beyond the output area's, and the output area's
# sideways scroll (as in test_suite_layout_in_lab.py).
_OVERFLOW_JS = """
(suite) => {
  const area = suite.closest('.jp-OutputArea-output') || suite.parentElement;
  const limit = area.getBoundingClientRect().right + 1;
  const out = [];
  for (const el of suite.querySelectorAll('*')) {
    const box = el.getBoundingClientRect();
    if (box.width === 0 || box.height === 0) continue;
    const style = getComputedStyle(el);
    if (style.visibility === 'hidden' || style.display === 'none') continue;
    if (box.right > limit) out.push(`${el.tagName.toLowerCase()}.${[...el.classList].join('.')} ` +
                                    `right ${Math.round(box.right)} > ${Math.round(limit)}`);
  }
  return {overflowing: out.slice(0, 12), scroll: area.scrollWidth - area.clientWidth};
}
"""


def _assert_nothing_sticks_out(suite, what):
    found = suite.evaluate(_OVERFLOW_JS)
    assert found["overflowing"] == [], f"{what}: {found['overflowing']}"
    assert found["scroll"] <= 0, f"{what}: the output scrolls sideways by {found['scroll']} px"


def _open_tab(suite, title):
    tab = suite.locator(".cubeloupe-actions .lm-TabBar-tab", has_text=title)
    tab.click()
    wait_until(lambda: "lm-mod-current" in (tab.get_attribute("class") or ""), f"the '{title}' tab to open")
    return tab


def _scroll_to_tabs(suite):
    suite.locator(".cubeloupe-actions").evaluate("(tabs) => tabs.scrollIntoView({block: 'start'})")


@pytest.fixture(scope="module")
def views(browser, lab_server, lab_root, screenshot_dir):
    from lab import LabPage

    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": SOURCE}]
    notebook = {"cells": cells, "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3",
                                                            "language": "python"}},
                "nbformat": 4, "nbformat_minor": 5}
    (lab_root / NOTEBOOK).write_text(json.dumps(notebook))
    context = browser.new_context(viewport=VIEWPORT, device_scale_factor=1)
    lab = LabPage(context.new_page(), lab_server.base_url, lab_server.token, screenshot_dir)
    try:
        lab.open_notebook(NOTEBOOK)
        # The file browser open, as many people work.
        lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()
        lab.page.locator("#jp-left-stack").wait_for(state="visible")
        lab.run_all()
        suite = lab.notebook.locator(".cubeloupe-loupe").first
        suite.wait_for()
        assert lab.error_outputs() == []
        assert lab.run_code(PROBE_SETUP) == "Loupe"
        # Errors while the suite first draws are test_suite_layout_in_lab.py's to report; here, those of
        # the steps below (the views of this module are drawn only when their tab is first shown).
        lab.errors_at_start = len(lab.console_errors)
        yield lab, suite
    finally:
        context.close()


def test_channel_maps_need_a_window_then_show_the_line(views):
    lab, suite = views
    _open_tab(suite, "Channel maps")
    panel = suite.locator(".cubeloupe-channel-map-panel")
    panel.wait_for(state="visible")
    assert "No line window yet" in panel.inner_text()
    panel.locator(".cubeloupe-channel-map-button").click()
    wait_until(lambda: "drag across the line" in panel.locator(".cubeloupe-status").inner_text(),
               "the panel to say that a line window is needed")
    _scroll_to_tabs(suite)
    lab.screenshot("line-views-01-no-line-window")

    # Drag the line window across the disk's line on the spectrum (it covers about 0.3 to 0.74 of the band).
    low, high = ask_kernel(lab, "list(L.spectrum_view.band)")
    window = (low + 0.3 * (high - low), low + 0.74 * (high - low))
    suite.locator(".cubeloupe-spectrum-mode button", has_text="Line window").click()
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    area = spectrum.locator(".plotarea_events")
    area.scroll_into_view_if_needed()
    slope, intercept = settled(lambda: wait_until(lambda: x_axis_calibration(spectrum), "the spectrum's x axis"),
                               "the spectrum's x axis to settle")
    box = area.bounding_box()
    x0, x1 = sorted((f - intercept) / slope for f in window)
    lab.drag((x0, box["y"] + 0.5 * box["height"]), (x1, box["y"] + 0.5 * box["height"]), steps=15)
    marked = wait_until(lambda: ask_kernel(lab, "L.line_window"), "the line window to reach the kernel")
    tolerance = 3 * abs(slope)  # three screen pixels, in GHz
    assert marked == [pytest.approx(v, abs=tolerance) for v in sorted(window)]

    _open_tab(suite, "Channel maps")
    panel.locator(".cubeloupe-channel-map-button").click()
    wait_until(lambda: ask_kernel(lab, "L.channel_map_panel.state") == "done", "the channel maps to be made")
    figure, bar = panel.locator(".cubeloupe-channel-map-figure"), panel.locator(".cubeloupe-channel-map-colorbar")
    figure.wait_for(state="visible")
    wait_until(lambda: "km/s" in (figure.text_content() or ""), "the panels' velocity labels")
    wait_until(lambda: "Jy / beam" in (bar.text_content() or ""), "the colour bar's unit")
    kernel = ask_kernel(lab, "[len(L.channel_map_panel.panels.channels), L.channel_map_panel.panels.centers.unit"
                             ".to_string(), L.channel_map_panel.panels.channels[0][0], "
                             "L.channel_map_panel.panels.channels[-1][1]]")
    assert kernel[0] == 16 and kernel[1] == "km / s"
    _open_tab(suite, "Channel maps")
    _scroll_to_tabs(suite)
    assert distinct_colours(figure) > 100, "the channel maps are drawn"
    _assert_nothing_sticks_out(suite, "channel maps at 1440 px with the file browser open")
    lab.screenshot("line-views-02-channel-maps")

    # Nine panels of one channel each, labelled in observed frequency, then saved as PNG for a paper.
    count = panel.locator(".cubeloupe-channel-map-panels input")
    count.fill("9")
    count.press("Enter")
    panel.locator(".cubeloupe-channel-map-mode button", has_text="one channel of every k").click()
    panel.locator(".cubeloupe-channel-map-labels select").select_option("frequency")
    wait_until(lambda: ask_kernel(lab, "[L.channel_map_panel.n, L.channel_map_panel.average, "
                                       "L.channel_map_panel.label_in]") == [9, False, "frequency"],
               "the panel's settings to reach the kernel")
    panel.locator(".cubeloupe-channel-map-button").click()
    wait_until(lambda: ask_kernel(lab, "L.channel_map_panel.made_with.get('n')") == 9, "the nine channel maps")
    wait_until(lambda: ask_kernel(lab, "L.channel_map_panel.state") == "done", "the channel maps to be made")
    kernel = ask_kernel(lab, "[len(L.channel_map_panel.panels.channels), L.channel_map_panel.panels.centers.unit"
                             ".to_string(), [b - a for a, b in L.channel_map_panel.panels.channels]]")
    assert kernel[0] == 9 and kernel[1] == "GHz" and set(kernel[2]) == {1}
    wait_until(lambda: "GHz" in (figure.text_content() or ""), "the panels' frequency labels")
    panel.locator(".widget-text input[type='text']").fill("line_views_maps")
    panel.locator(".cubeloupe-channel-map-save-png").click()
    wait_until(lambda: "Written" in panel.locator(".cubeloupe-status").inner_text(), "the PNG to be written")
    assert ask_kernel(lab, "__import__('os').path.getsize('line_views_maps.png') > 10000")
    _scroll_to_tabs(suite)
    _assert_nothing_sticks_out(suite, "nine channel maps at 1440 px with the file browser open")
    lab.screenshot("line-views-02b-nine-channels-in-frequency")
    errors = lab.console_errors[lab.errors_at_start:]
    assert errors == [], "\n".join(errors)


class SkyArea:
    """The sky image's plot area on the page and the cube's pixel grid (x from -0.5 to nx - 0.5, y upwards)."""

    def __init__(self, suite, nx, ny):
        area = suite.locator(".cubeloupe-sky-figure .plotarea_events")
        area.scroll_into_view_if_needed()
        box = area.bounding_box()
        self.left, self.top, self.width, self.height = box["x"], box["y"], box["width"], box["height"]
        self.nx, self.ny = nx, ny

    def page(self, x, y):
        return (self.left + (x + 0.5) / self.nx * self.width, self.top + (1 - (y + 0.5) / self.ny) * self.height)

    @property
    def tolerance(self):
        return PIXEL_TOLERANCE * max(self.nx / self.width, self.ny / self.height)


def test_path_drawn_with_the_mouse_gives_the_position_velocity_view(views):
    lab, suite = views
    truth = ask_kernel(lab, "[truth['disk']['centre_pixel']['x'], truth['disk']['centre_pixel']['y'], "
                            "truth['disk']['position_angle'].to_value('deg'), list(L.cube.shape[1:]), "
                            "bool(L.cube.wcs.celestial.pixel_scale_matrix[0, 0] < 0)]")
    cx, cy, angle, (ny, nx), east_left = truth
    assert east_left, "the demo cube has RA increasing to the left (CDELT1 < 0)"
    # The receding major axis points at the position angle, east of north (sidecar note): with east to the
    # left and north up, its pixel direction is (-sin PA, cos PA). The path runs approaching -> receding.
    dx, dy = -math.sin(math.radians(angle)), math.cos(math.radians(angle))
    reach = 18.0  # pixels from the centre (9 arcsec)
    vertices = [(cx - reach * dx, cy - reach * dy), (cx, cy), (cx + reach * dx, cy + reach * dy)]

    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")
    suite.locator(".cubeloupe-region-tools button", has_text="Path").click()
    suite.locator(".cubeloupe-finish-path").wait_for(state="visible")
    width = suite.locator(".cubeloupe-path-width input")
    width.fill("3")
    width.press("Tab")
    wait_until(lambda: ask_kernel(lab, "L.sky_view.path_tool.width") == 3.0, "the path's width to reach the kernel")
    sky = SkyArea(suite, nx, ny)
    mouse = lab.page.mouse
    for x, y in vertices[:-1]:
        mouse.click(*sky.page(x, y))
    mouse.dblclick(*sky.page(*vertices[-1]))
    path = wait_until(lambda: ask_kernel(lab, "L.pv_panel.path if L.pv_panel.slice is not None else []"),
                      "the slice along the drawn path")
    assert len(path) == 3
    for (x, y), (x_clicked, y_clicked) in zip(path, vertices):
        assert x == pytest.approx(x_clicked, abs=sky.tolerance) and y == pytest.approx(y_clicked, abs=sky.tolerance)
    # Three pixels averaged across the path; the strip's edges drawn either side of each of its two segments.
    assert ask_kernel(lab, "[L.pv_panel.slice.width, len(L.sky_view.path_tool.band_lines.x)]") == [3.0, 4]
    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")
    lab.screenshot("line-views-03-path-on-the-sky")

    tab = suite.locator(".cubeloupe-actions .lm-TabBar-tab", has_text="Position–velocity")
    wait_until(lambda: "lm-mod-current" in (tab.get_attribute("class") or ""), "the PV tab to come to the front")
    # Along the major axis from the approaching to the receding end the line's velocity rises
    # (intensity-weighted velocity of each end's third of the slice; demo sidecar's rotation model).
    lab.run_code("import numpy as np; import astropy.units as u; from cubeloupe.analysis import display_axis")
    rising = ask_kernel(lab, (
        "(lambda pv, v: [float(np.nansum(np.clip(pv.data.value[:, part], 0, None) * v[:, None]) / "
        "np.nansum(np.clip(pv.data.value[:, part], 0, None))) for part in "
        "(slice(0, pv.data.shape[1] // 3), slice(-(pv.data.shape[1] // 3), None))])"
        "(L.pv_panel.slice, display_axis(L.pv_panel.slice.spectral_axis, 'velocity', "
        "rest_frequency=L.rest_frequency * u.GHz).to_value('km/s'))"))
    assert rising[0] < 1462 < rising[1], f"approaching end {rising[0]:.0f}, receding end {rising[1]:.0f} km/s"

    lab.run_code("loupe.axis_kind = 'velocity'")
    figure = suite.locator(".cubeloupe-pv-figure")
    wait_until(lambda: "CO J=2-1" in figure.inner_text(), "the CO line marker on the PV view")
    kernel = ask_kernel(lab, "[L.pv_panel.axis, L.pv_panel.y_axis.label, L.pv_panel.marker_names, "
                             "L.pv_panel.marker_values]")
    assert kernel[0] == "velocity" and "km/s" in kernel[1]
    # The CO line moved by the systemic velocity sits at it on an axis measured from its own rest frequency.
    assert kernel[3][kernel[2].index("CO J=2-1")] == pytest.approx(1462.0, abs=1e-6)
    _open_tab(suite, "Position–velocity")
    _scroll_to_tabs(suite)
    assert distinct_colours(figure) > 30, "the slice is drawn"
    bar = suite.locator(".cubeloupe-pv-colorbar")
    wait_until(lambda: "Jy / beam" in (bar.text_content() or ""), "the PV colour bar's unit")
    assert distinct_colours(bar) > 30, "the colour bar's ramp is drawn"
    _assert_nothing_sticks_out(suite, "the PV view at 1440 px with the file browser open")
    lab.screenshot("line-views-04-position-velocity")
    # The script of this state makes the same slice and channel maps.
    _open_tab(suite, "Code")
    text = suite.locator(".cubeloupe-code-text textarea")
    wait_until(lambda: "pv_slice(" in text.input_value() and "channel_maps(" in text.input_value(),
               "the script of the PV slice and channel maps")
    _open_tab(suite, "Position–velocity")
    assert lab.error_outputs() == []
    assert lab.console_errors[lab.errors_at_start:] == []


def test_whole_suite_pictures(views):
    """Pictures of each line view with the sky and the controls: a tall page at 1440 px, file browser open."""
    lab, suite = views
    try:
        lab.page.set_viewport_size({"width": VIEWPORT["width"], "height": 2400})
        _open_tab(suite, "Position–velocity")
        suite.evaluate("(suite) => suite.scrollIntoView({block: 'start'})")
        _assert_nothing_sticks_out(suite, "the suite with the PV view open at 1440 px, file browser open")
        lab.screenshot("line-views-05-suite-position-velocity")
        lab.page.set_viewport_size({"width": VIEWPORT["width"], "height": 1300})
        _open_tab(suite, "Channel maps")
        _scroll_to_tabs(suite)
        _assert_nothing_sticks_out(suite, "the suite with the channel maps open at 1440 px, file browser open")
        lab.screenshot("line-views-06-suite-channel-maps")
    finally:
        lab.page.set_viewport_size(VIEWPORT)
    assert lab.console_errors[lab.errors_at_start:] == []
