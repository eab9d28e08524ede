"""The quick-look example notebook in real JupyterLab, used with the mouse and keyboard.

One notebook run serves the whole module (the steps build on each other the way a user's
session does): run all cells, look at the views, move the channel slider, drag a box region,
change the redshift and the velocity shift, make moment maps. After each step the kernel is
asked (through a cell typed into the notebook) whether it saw the same thing as the browser,
and a screenshot is saved under tests/browser/screenshots-latest/.

Hooks relied on. CSS classes the widgets set with ``add_class``: cubeloupe-loupe,
cubeloupe-sky-view, cubeloupe-sky-figure, cubeloupe-spectrum-figure, cubeloupe-channel-slider,
cubeloupe-channel-label, cubeloupe-region-tools (button "Box"), cubeloupe-spectrum-mode (button
"Line window"), cubeloupe-z-input, cubeloupe-velocity-slider, cubeloupe-moment-button,
cubeloupe-source (option "moment 0"), cubeloupe-status-text (its error mark "✖"). Traits read
back: Loupe.cube, channel, channel_bar.readout, regions, spectra, sky_view.box_selector,
axis_kind, z, convention, velocity_offset, line_window, sky_source, moments, status.
"""

import math

import pytest

from lab import (
    PROBE_SETUP,
    ask_kernel,
    box_centre,
    distinct_colours,
    scatter_label_positions,
    settled,
    spectrum_curves,
    wait_until,
    x_axis_calibration,
)

pytestmark = pytest.mark.browser

QUICK_LOOK_GLOB = "*quick*look*.ipynb"
SPEED_OF_LIGHT = 299_792.458  # km/s, exact by the SI definition of the metre


def snapshot(lab, suite, name):
    """Save a page-sized PNG of the step with the sky and spectrum views in sight."""
    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")
    return lab.screenshot(name)


def canvas_picture(locator):
    return locator.screenshot(animations="disabled")


def drag_slider(lab, slider, fraction):
    """Drag a noUiSlider handle (ipywidgets) to ``fraction`` of its track with the mouse."""
    slider.scroll_into_view_if_needed()
    track = slider.locator(".noUi-base").bounding_box()
    assert track["width"] > 60, (
        f"the slider track is {track['width']:.0f} px wide: too narrow to drag; the widget layout "
        "squeezes it")
    start = box_centre(slider.locator(".noUi-handle"))
    lab.drag(start, (track["x"] + fraction * track["width"], start[1]))


def radio_factor(velocity):
    """Observed/unshifted frequency for a velocity in the radio convention, f = f0 (1 - v/c).

    Greisen et al. 2006, A&A 446, 747 (FITS paper III), radio velocity definition.
    """
    return 1 - velocity / SPEED_OF_LIGHT


def optical_factor(velocity):
    """Optical convention, f = f0 / (1 + v/c) (Greisen et al. 2006)."""
    return 1 / (1 + velocity / SPEED_OF_LIGHT)


def relativistic_factor(velocity):
    """Relativistic Doppler, f = f0 sqrt((1 - b) / (1 + b)), b = v/c (Greisen et al. 2006)."""
    beta = velocity / SPEED_OF_LIGHT
    return math.sqrt((1 - beta) / (1 + beta))


DOPPLER = {"radio": radio_factor, "optical": optical_factor, "relativistic": relativistic_factor}


def marker_frequencies(spectrum_figure):
    """{line name: x-axis value} of the line markers as drawn, read off the axis ticks."""
    def read():
        slope, intercept = wait_until(lambda: x_axis_calibration(spectrum_figure),
                                      "the spectrum's x axis to show a range (two or more ticks)")
        positions = scatter_label_positions(spectrum_figure)
        return {name: round(slope * x + intercept, 7) for name, x in positions.items()}, slope

    return settled(read, "the line markers to settle")


@pytest.fixture(scope="module")
def quick_look(lab_page, lab_root):
    found = sorted((lab_root / "example_notebooks").glob(QUICK_LOOK_GLOB))
    if not found:
        pytest.fail(f"no quick-look notebook ({QUICK_LOOK_GLOB}) in example_notebooks/", pytrace=False)
    path = found[0].relative_to(lab_root).as_posix()
    lab_page.open_notebook(path)
    lab_page.run_all()
    suite = lab_page.notebook.locator(".cubeloupe-loupe").first
    suite.wait_for()
    return lab_page, suite


@pytest.fixture(scope="module")
def loupe(quick_look):
    """The page and the suite's element, after the notebook ran and the kernel probe is set up."""
    lab, suite = quick_look
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    return lab, suite


def test_notebook_runs_without_errors(quick_look):
    lab, _ = quick_look
    assert lab.unexecuted_code_cells() == [], "Run All stopped before the end"
    assert lab.error_outputs() == []
    assert lab.console_errors == []
    lab.screenshot("01-quick-look-run")


def test_views_render_real_content(loupe):
    lab, suite = loupe
    sky = suite.locator(".cubeloupe-sky-figure")
    canvas = sky.locator("canvas").first
    canvas.scroll_into_view_if_needed()
    # A cube channel through a colour ramp: many colours; a blank or failed WebGL canvas has one.
    wait_until(lambda: distinct_colours(canvas) > 30, "the sky image to be drawn")
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    slope, _ = wait_until(lambda: x_axis_calibration(spectrum),
                          "the spectrum's x axis to show a range (two or more ticks)")
    assert math.isfinite(slope) and slope > 0
    # Line markers (or spectra) drawn as SVG: paths with real geometry.
    wait_until(lambda: spectrum.evaluate(
        "(figure) => Array.from(figure.querySelectorAll('path.line, path.dot'))"
        ".filter(path => (path.getAttribute('d') || '').length > 10).length"),
        "something drawn inside the spectrum view's axes")
    status = ask_kernel(lab, "[L.status.level, L.status.message]")
    assert status[0] != "error", f"the suite's status line shows an error: {status[1]}"
    snapshot(lab, suite, "02-views")
    assert lab.console_errors == []


def test_channel_slider_drag_changes_channel_and_image(loupe):
    lab, suite = loupe
    slider = suite.locator(".cubeloupe-channel-slider")
    label = suite.locator(".cubeloupe-channel-label")
    readout = slider.locator(".widget-readout")
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    n_channels = ask_kernel(lab, "L.cube.shape[0]")
    label_before, channel_before = label.inner_text(), int(readout.inner_text())
    picture_before = canvas_picture(canvas)

    target = 0.5 if channel_before < n_channels * 0.3 else 0.1
    drag_slider(lab, slider, target)

    channel = int(readout.inner_text())
    assert abs(channel - target * (n_channels - 1)) <= max(2, 0.03 * n_channels)
    assert channel != channel_before
    # The label is written by the kernel: waiting for it waits for the round trip.
    wait_until(lambda: label.inner_text() != label_before, "the channel label to change")
    wait_until(lambda: canvas_picture(canvas) != picture_before, "the sky image to change")
    kernel = ask_kernel(lab, "[L.channel, L.channel_bar.readout]")
    assert kernel[0] == channel
    assert kernel[1] in label.inner_text()
    snapshot(lab, suite, "03-channel-slider")
    assert lab.console_errors == []


def test_box_drag_on_sky_adds_region_spectrum(loupe):
    lab, suite = loupe
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    ny, nx = ask_kernel(lab, "list(L.cube.shape[1:])")
    regions_before = ask_kernel(lab, "[r['name'] for r in L.regions]")
    curves_before = spectrum_curves(spectrum)

    suite.locator(".cubeloupe-region-tools button", has_text="Box").click()
    area = suite.locator(".cubeloupe-sky-figure .plotarea_events")
    area.scroll_into_view_if_needed()
    box = area.bounding_box()
    (fx0, fy0), (fx1, fy1) = (0.3, 0.35), (0.65, 0.7)  # fractions of the plot, from top left
    lab.drag((box["x"] + fx0 * box["width"], box["y"] + fy0 * box["height"]),
             (box["x"] + fx1 * box["width"], box["y"] + fy1 * box["height"]), steps=15)

    wait_until(lambda: len(spectrum_curves(spectrum)) > len(curves_before), "a new spectrum line")
    regions = ask_kernel(lab, "[[r['name'], r['color']] for r in L.regions]")
    new = [r for r in regions if r[0] not in regions_before]
    assert len(new) == 1, f"expected one new region, kernel has {regions}"
    name, colour = new[0]
    spectra = ask_kernel(lab, f"[None if s is None else len(s) for s in L.spectra[{name!r}]]")
    assert any(spectra), f"region {name} has no spectrum in the kernel"
    # The box the kernel got is the one dragged: pixel centres run from -0.5 to n - 0.5
    # across the plot, and the image's y axis points up the screen.
    geometry = (f"(lambda s: [[s.center.x - s.width / 2, s.center.x + s.width / 2], "
                f"[s.center.y - s.height / 2, s.center.y + s.height / 2]])(L.region_list.region_for({name!r}, L.cube))")
    selected = ask_kernel(lab, geometry)
    expected_x = [-0.5 + fx0 * nx, -0.5 + fx1 * nx]
    expected_y = sorted([-0.5 + (1 - fy0) * ny, -0.5 + (1 - fy1) * ny])
    assert selected[0] == pytest.approx(expected_x, abs=1.0)
    assert selected[1] == pytest.approx(expected_y, abs=1.0)
    # The drawn box is cleared once it is a region: a drag inside it starts another region.
    wait_until(lambda: ask_kernel(lab, "L.sky_view.box_selector.selected_x is None"), "the box selector cleared")
    area.scroll_into_view_if_needed()   # asking the kernel ran cells below the suite
    box = area.bounding_box()
    lab.drag((box["x"] + 0.4 * box["width"], box["y"] + 0.45 * box["height"]),
             (box["x"] + 0.55 * box["width"], box["y"] + 0.6 * box["height"]), steps=10)
    wait_until(lambda: len(ask_kernel(lab, "L.regions")) == len(regions_before) + 2, "a second region")
    after = ask_kernel(lab, geometry)
    assert after[0] + after[1] == pytest.approx(selected[0] + selected[1], abs=1e-9)   # the first box did not move
    # The new line is drawn in the region's colour.
    stroke = spectrum.evaluate(
        "(figure, colour) => { const probe = document.createElement('div'); probe.style.color = colour;"
        " figure.appendChild(probe); const rgb = getComputedStyle(probe).color; probe.remove(); return rgb; }",
        colour)
    assert stroke in [c for c, _ in spectrum_curves(spectrum)]
    snapshot(lab, suite, "04-box-region")
    assert lab.console_errors == []


def test_typed_redshift_moves_line_markers(loupe):
    lab, suite = loupe
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    axis_kind = ask_kernel(lab, "L.axis_kind")
    assert axis_kind == "observed frequency", "the test reads marker frequencies off the x axis"
    # The grown catalog crowds the band with weak lines: follow CO's markers only.
    lab.run_code("_probe().line_overlay.species = ['CO']")
    shift_before = ask_kernel(lab, "L.velocity_offset")
    convention = ask_kernel(lab, "L.convention")
    z_box = suite.locator(".cubeloupe-z-input input")
    z_before = float(z_box.input_value())
    wait_until(lambda: scatter_label_positions(spectrum), "line markers in the spectrum view")
    before, slope = marker_frequencies(spectrum)

    # The z that puts the lines where the shift had put them (radio: 1 + z = 1 / (1 - v/c)), a little more.
    z_after = round(1 / DOPPLER[convention](shift_before) * (1 + z_before) - 1 + 0.0004, 6)
    z_box.click()
    z_box.fill(str(z_after))
    z_box.press("Enter")

    wait_until(lambda: marker_frequencies(spectrum)[0] != before, "the line markers to move")
    after, slope = marker_frequencies(spectrum)
    assert ask_kernel(lab, "L.z") == pytest.approx(z_after)
    common = sorted(set(before) & set(after))
    assert common, f"no marker kept its name: before {before}, after {after}"
    tolerance = 1.5 * abs(slope)  # 1.5 screen pixels in GHz
    # Typing z sets the velocity shift back to 0 (the redshift now places the lines).
    assert ask_kernel(lab, "L.velocity_offset") == 0
    for name in common:
        # An observed frequency scales as 1 / (1 + z) (definition of redshift); the old shift is undone.
        expected = before[name] * (1 + z_before) / (1 + z_after) / DOPPLER[convention](shift_before)
        assert after[name] == pytest.approx(expected, abs=tolerance), name
    snapshot(lab, suite, "05-redshift")
    assert lab.console_errors == []


def test_velocity_slider_moves_line_markers(loupe):
    lab, suite = loupe
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    slider = suite.locator(".cubeloupe-velocity-slider")
    readout = slider.locator(".widget-readout")
    convention = ask_kernel(lab, "L.convention")
    shift = DOPPLER[convention]
    v_before = float(readout.inner_text())
    wait_until(lambda: scatter_label_positions(spectrum), "line markers in the spectrum view")
    before, slope = marker_frequencies(spectrum)

    drag_slider(lab, slider, 0.53)  # about +90 km/s: CO stays in the band

    v_after = float(readout.inner_text())
    assert v_after != v_before
    wait_until(lambda: marker_frequencies(spectrum)[0] != before, "the line markers to move")
    after, slope = marker_frequencies(spectrum)
    assert ask_kernel(lab, "L.velocity_offset") == pytest.approx(v_after)
    common = sorted(set(before) & set(after))
    assert common, f"no marker kept its name: before {before}, after {after}"
    tolerance = 1.5 * abs(slope)
    for name in common:
        expected = before[name] * shift(v_after) / shift(v_before)
        assert after[name] == pytest.approx(expected, abs=tolerance), name
    snapshot(lab, suite, "06-velocity-shift")
    assert lab.console_errors == []


def test_moment_action_shows_moment_map(loupe):
    lab, suite = loupe
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    if not ask_kernel(lab, "L.line_window"):
        # Mark the line window as a user does: choose the mode, drag across the spectrum.
        suite.locator(".cubeloupe-spectrum-mode button", has_text="Line window").click()
        # Across the middle of the drawn spectra, where the demo line sits.
        spectrum.scroll_into_view_if_needed()
        left, right = spectrum.evaluate(
            """(figure) => { const boxes = Array.from(figure.querySelectorAll('path.line'))
                 .filter(path => (path.getAttribute('d') || '').split('L').length > 10)
                 .map(path => path.getBoundingClientRect());
               return [Math.min(...boxes.map(b => b.left)), Math.max(...boxes.map(b => b.right))]; }""")
        assert right > left, "no spectrum drawn to mark a line window on"
        area = spectrum.locator(".plotarea_events").bounding_box()
        middle = area["y"] + area["height"] / 2
        lab.drag((left + 0.3 * (right - left), middle), (left + 0.7 * (right - left), middle))
        wait_until(lambda: ask_kernel(lab, "L.line_window"), "the line window to be set")
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    picture_before = canvas_picture(canvas)

    suite.locator(".cubeloupe-moment-button").click()
    choice = suite.locator(".cubeloupe-source select")
    status = suite.locator(".cubeloupe-moment-panel .cubeloupe-status-text")

    def offered():
        # ipywidgets writes option labels with non-breaking spaces.
        return [text.replace("\xa0", " ") for text in choice.locator("option").all_inner_texts()]

    wait_until(lambda: "moment 0" in offered() or "✖" in status.inner_text(),
               "'moment 0' to be offered under Show")
    assert "✖" not in status.inner_text(), f"the status line shows an error: {status.inner_text()}"
    choice.select_option(index=offered().index("moment 0"))

    wait_until(lambda: canvas_picture(canvas) != picture_before, "the sky image to change")
    kernel = ask_kernel(lab, "[L.sky_source, L.moments is not None, L.moment_panel.status.level, "
                             "L.moment_panel.status.message]")
    assert kernel[:2] == ["moment 0", True]
    assert kernel[2] != "error", kernel[3]
    canvas.scroll_into_view_if_needed()
    assert distinct_colours(canvas) > 30
    snapshot(lab, suite, "07-moment-map")
    assert lab.error_outputs() == []
    assert lab.console_errors == []
