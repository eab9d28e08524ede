"""The suite's drawing tools and spectrum gestures in real JupyterLab, used with the mouse.

test_loupe_in_lab.py drives the box tool, the channel slider and a line-window drag; this module
drives the gestures whose effect was otherwise checked only on traits: the oval, outline and
pixel tools on the sky image, a click and range drags on the spectrum, and pointing at and
clicking a line marker. They run in one notebook made here, which shows the disk demo cube the
way the quick-look notebook does, and they build on each other as a session does (the regions
drawn first give the spectra that the baseline is fitted to). Where a gesture has a geometric
meaning, the kernel's result is checked against the FITS file read with astropy alone
(astropy.io.fits, astropy.wcs), not through cubeloupe. The last test runs the two-window example
notebook on a page of its own and switches the window the sky view shows.

Asking the kernel types a cell into the notebook, which scrolls the page and moves the mouse:
page positions are read again after every question, and nothing waits on the kernel while a
gesture depends on where the mouse is.

Hooks relied on. CSS classes the widgets set with ``add_class``: cubeloupe-loupe,
cubeloupe-sky-view, cubeloupe-sky-figure, cubeloupe-region-tools (buttons "Oval", "Outline",
"Pixel"), cubeloupe-close-outline, cubeloupe-region-row, cubeloupe-spectrum-figure,
cubeloupe-spectrum-mode (buttons "Go to channel", "Line-free", "Line window"),
cubeloupe-channel-slider, cubeloupe-channel-label, cubeloupe-line-details,
cubeloupe-reference-line, cubeloupe-window-choice. Traits read back: Loupe.regions, spectra,
channel, line_free, line_window, measurements, reference_line, window, cube, axis_kind,
sky_view.polygon_vertices, sky_view.channel, sky_view.window, spectrum_view.band,
spectrum_view.fits, channel_bar.n_channels, line_overlay.lines, line_overlay.hover_text.
"""

import math
import re

import nbformat
import numpy as np
import pytest

from cubeloupe.widgets._look import BASELINE_COLOR, CHANNEL_COLOR, LINE_FREE_FILL, LINE_WINDOW_FILL
from lab import (
    LOAD_TIMEOUT,
    PROBE_SETUP,
    ask_kernel,
    css_rgb,
    distinct_colours,
    drawn_lines,
    scatter_label_points,
    settled,
    spectrum_curves,
    wait_until,
    x_axis_calibration,
)

pytestmark = pytest.mark.browser

TOOLS_NOTEBOOK = "tools_probe.ipynb"
CUBE = "demo_cubes/disk.fits"  # relative to the server root, where the notebook is written
HIGH_Z_NOTEBOOK = "example_notebooks/high_z_lines.ipynb"
PIXEL_TOLERANCE = 2.0  # screen pixels: how closely a gesture must be reproduced in the kernel

SOURCE = f"""\
from cubeloupe.analysis import demo_truth
from cubeloupe.widgets import Loupe

CUBE = {CUBE!r}
truth = demo_truth("disk")
loupe = Loupe(CUBE, z=truth["z"], rest_frequency=truth["lines"][0]["rest_frequency"],
              velocity_offset=truth["disk"]["systemic_velocity"])
loupe
"""

# Typed into the notebook once: the cube as astropy alone reads it, the reference for the checks.
# `_pixel(ra, dec)` is the 0-based pixel position of a sky position (astropy.wcs); `_freq(k)` the
# frequency (GHz) of channel k from the linear FITS axis, CRVAL3 + (k + 1 - CRPIX3) * CDELT3
# (FITS paper I, Greisen & Calabretta 2002, A&A 395, 1061); `_beam_pixels` the area of the
# Gaussian beam in pixels, pi BMAJ BMIN / (4 ln 2) over the pixel area (common practice).
REFERENCE_SETUP = (
    "from astropy.io import fits as _fits; from astropy.wcs import WCS as _WCS; "
    "from astropy.wcs.utils import proj_plane_pixel_area as _pixel_area, "
    "proj_plane_pixel_scales as _pixel_scales; from astropy.coordinates import SkyCoord as _SkyCoord; "
    "import numpy as _np; "
    "_hdr = _fits.getheader(CUBE); _sky = _WCS(_hdr).celestial; _data = _fits.getdata(CUBE); "
    "_pixel = lambda ra, dec: [float(v) for v in _sky.world_to_pixel(_SkyCoord(ra, dec, unit='deg'))]; "
    "_arcsec_per_pixel = float(_pixel_scales(_sky)[1] * 3600); "
    "_freq = lambda k: (_hdr['CRVAL3'] + (k + 1 - _hdr['CRPIX3']) * _hdr['CDELT3']) / 1e9; "
    "_beam_pixels = float(_np.pi * _hdr['BMAJ'] * _hdr['BMIN'] / (4 * _np.log(2)) / _pixel_area(_sky)); "
    "print(_data.shape)"
)


# --- helpers ----------------------------------------------------------------------------


class SkyArea:
    """The sky image's plot area on the page, and its pixel grid.

    The x scale spans -0.5 to nx - 0.5 across the plot (pixel centres at integers) and the
    y scale -0.5 to ny - 0.5 upwards, as set by SkyView.
    """

    def __init__(self, suite, nx, ny):
        area = suite.locator(".cubeloupe-sky-figure .plotarea_events")
        area.scroll_into_view_if_needed()
        box = area.bounding_box()
        self.left, self.top, self.width, self.height = box["x"], box["y"], box["width"], box["height"]
        self.nx, self.ny = nx, ny

    def page(self, x, y):
        """Page coordinates of image pixel position (x, y)."""
        return (self.left + (x + 0.5) / self.nx * self.width,
                self.top + (1 - (y + 0.5) / self.ny) * self.height)

    def pixel(self, page_x, page_y):
        """Image pixel position of page coordinates."""
        return ((page_x - self.left) / self.width * self.nx - 0.5,
                (1 - (page_y - self.top) / self.height) * self.ny - 0.5)

    @property
    def tolerance(self):
        """PIXEL_TOLERANCE screen pixels, in image pixels."""
        return PIXEL_TOLERANCE * max(self.nx / self.width, self.ny / self.height)


def show_views(suite):
    """Scroll the suite's views to the top of the notebook: sky, spectrum and line details in sight."""
    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")


def snapshot(lab, suite, name):
    """Save a page-sized PNG of the step with the suite's views in sight."""
    show_views(suite)
    return lab.screenshot(name)


def choose(suite, group, label):
    """Click the toggle button ``label`` of the button group with CSS class ``group``."""
    button = suite.locator(f".{group} button", has_text=label)
    button.click()
    wait_until(lambda: "mod-active" in (button.get_attribute("class") or ""), f"'{label}' to show as chosen")


def region_names(lab):
    return ask_kernel(lab, "[r['name'] for r in L.regions]")


def new_region(lab, names_before):
    """The one region the kernel has that was not in ``names_before``, with its pixel geometry.

    Positions come back as 0-based pixel coordinates and sizes in pixels, both computed from
    the region's sky description with astropy (the reference set up by REFERENCE_SETUP).
    """
    regions = ask_kernel(lab, "[r['name'] for r in L.regions]")
    new = [name for name in regions if name not in names_before]
    assert len(new) == 1, f"expected one new region, the kernel has {regions} (before: {names_before})"
    name = new[0]
    return ask_kernel(lab, (
        f"(lambda r: dict(r, spectrum_lengths=[None if s is None else int(_np.isfinite(s.value).sum()) "
        f"for s in L.spectra[r['name']]], "
        "centre=_pixel(r['ra'], r['dec']) if 'ra' in r else None, "
        "size=[r['width'] / _arcsec_per_pixel, r['height'] / _arcsec_per_pixel] if 'width' in r else None, "
        "corners=[_pixel(ra, dec) for ra, dec in r.get('vertices', [])]))"
        f"(next(r for r in L.regions if r['name'] == {name!r}))"
    ))


def assert_region_shown(lab, suite, region, curves_before):
    """The new region's spectrum is drawn in its colour, and the region list has a row for it."""
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    assert region["spectrum_lengths"][0] == ask_kernel(lab, "L.cube.shape[0]"), (
        f"region {region['name']} has no full spectrum in the kernel: {region['spectrum_lengths']}")
    curves = wait_until(lambda: (c := spectrum_curves(spectrum)) and len(c) > curves_before and c,
                        "the new region's spectrum to be drawn")
    assert css_rgb(spectrum, region["color"]) in [colour for colour, _ in curves]
    rows = suite.locator(".cubeloupe-region-row")
    wait_until(lambda: any(region["kind"] in text for text in rows.all_inner_texts()),
               f"a row for the {region['kind']} region in the region list")


# --- fixtures ------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def tools(lab_page, lab_root):
    """The page, the suite's element and the cube's shape, after the notebook ran and the kernel
    probe and the astropy reference are set up."""
    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    notebook.cells = [
        nbformat.v4.new_markdown_cell("Drawing tools and spectrum gestures on the disk demo cube."),
        nbformat.v4.new_code_cell(SOURCE),
    ]
    nbformat.write(notebook, str(lab_root / TOOLS_NOTEBOOK))
    # Taller than the default page: the pictures then show the line details below the views too.
    lab_page.page.set_viewport_size({"width": 1280, "height": 1000})
    lab_page.open_notebook(TOOLS_NOTEBOOK)
    lab_page.run_all()
    suite = lab_page.notebook.locator(".cubeloupe-loupe").first
    # The page holds every earlier module's notebooks and kernels by now: give the suite as long as a
    # notebook gets to load (a full run once took over 30 s here with 12 kernels alive).
    suite.wait_for(timeout=LOAD_TIMEOUT)
    assert lab_page.error_outputs() == []
    assert lab_page.run_code(PROBE_SETUP) == "Loupe"
    shape = lab_page.run_code(REFERENCE_SETUP)
    n_channels, ny, nx = (int(v) for v in re.findall(r"\d+", shape))
    # The sky image is drawn once the first channel reaches the canvas.
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    canvas.scroll_into_view_if_needed()
    wait_until(lambda: distinct_colours(canvas) > 30, "the sky image to be drawn")
    return lab_page, suite, (n_channels, ny, nx)


@pytest.fixture(scope="module")
def high_z(other_lab_page):
    """The multi-window example notebook, run from the Run menu on a page of its own."""
    lab = other_lab_page
    lab.open_notebook(HIGH_Z_NOTEBOOK)
    lab.run_all()
    suite = lab.notebook.locator(".cubeloupe-loupe").first
    suite.wait_for(timeout=LOAD_TIMEOUT)
    return lab, suite


# --- sky tools -------------------------------------------------------------------------------


def test_oval_drag_adds_elliptical_region(tools):
    lab, suite, (_, ny, nx) = tools
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    names_before = region_names(lab)
    curves_before = len(spectrum_curves(spectrum))

    choose(suite, "cubeloupe-region-tools", "Oval")
    sky = SkyArea(suite, nx, ny)
    # Dragged corner to corner like the box (issue #17): the oval fills the dragged box.
    corner = (0.40, 0.50)  # fractions of the plot from the top left
    drag = (0.20, 0.12)
    start = (sky.left + corner[0] * sky.width, sky.top + corner[1] * sky.height)
    end = (start[0] + drag[0] * sky.width, start[1] + drag[1] * sky.height)
    lab.drag(start, end, steps=15)

    wait_until(lambda: len(spectrum_curves(spectrum)) > curves_before, "a new spectrum line")
    region = new_region(lab, names_before)
    assert region["kind"] == "oval"
    expected_centre = sky.pixel((start[0] + end[0]) / 2, (start[1] + end[1]) / 2)
    expected_size = (drag[0] * nx, drag[1] * ny)
    assert region["centre"] == pytest.approx(expected_centre, abs=sky.tolerance)
    assert region["size"] == pytest.approx(expected_size, abs=2 * sky.tolerance)
    # No rotation was drawn; an oval turned by 180 degrees is the same oval.
    assert (region["angle"] + 90) % 180 - 90 == pytest.approx(0.0, abs=0.5)
    assert_region_shown(lab, suite, region, curves_before)
    # The region's outline on the sky touches the four sides of the box dragged with the mouse.
    # Asking the kernel scrolled the page: the dragged corners are placed again on the plot as it is now.
    corners = [sky.pixel(*start), sky.pixel(*end)]
    sky = SkyArea(suite, nx, ny)
    (left, top), (right, bottom) = (sky.page(*corner) for corner in corners)
    sky_figure = suite.locator(".cubeloupe-sky-figure")
    outlines = drawn_lines(sky_figure, region["color"])
    assert len(outlines) == 1, f"expected one outline in the region's colour, found {outlines}"
    outline = outlines[0]
    assert [outline["left"], outline["right"]] == pytest.approx(
        [left, right], abs=PIXEL_TOLERANCE + 1.5)  # + the outline's stroke
    assert [outline["top"], outline["bottom"]] == pytest.approx(
        [top, bottom], abs=PIXEL_TOLERANCE + 1.5)
    snapshot(lab, suite, "tools-01-oval-region")
    assert lab.console_errors == []


def draft_corners(suite):
    """Number of corner dots of the outline being clicked (the sky view's only scatter mark)."""
    return suite.locator(".cubeloupe-sky-figure path.dot").count()


@pytest.mark.parametrize("finish", ["double-click", "Close outline"])
def test_outline_clicks_add_polygon_region(tools, finish):
    lab, suite, (_, ny, nx) = tools
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    names_before = region_names(lab)
    curves_before = len(spectrum_curves(spectrum))

    choose(suite, "cubeloupe-region-tools", "Outline")
    close = suite.locator(".cubeloupe-close-outline")
    close.wait_for(state="visible")
    sky = SkyArea(suite, nx, ny)
    # Image pixel positions of the corners, clicked in order; a different place for each run.
    shift = 0.0 if finish == "double-click" else 36.0
    corners = [(8.3 + shift, 10.6), (24.2 + shift, 8.1), (29.7 + shift, 22.4), (14.9 + shift, 27.3)]
    mouse = lab.page.mouse
    for k, corner in enumerate(corners[:-1]):
        mouse.click(*sky.page(*corner))
        # The draft outline grows corner by corner (drawn by the kernel: a round trip per click).
        wait_until(lambda n=k + 1: draft_corners(suite) == n, f"corner {k + 1} of the draft outline")
    if finish == "double-click":
        mouse.dblclick(*sky.page(*corners[-1]))
    else:
        mouse.click(*sky.page(*corners[-1]))
        wait_until(lambda: draft_corners(suite) == len(corners), "the last corner of the draft outline")
        close.click()

    wait_until(lambda: len(spectrum_curves(spectrum)) > curves_before, "a new spectrum line")
    region = new_region(lab, names_before)
    assert region["kind"] == "outline"
    assert len(region["corners"]) == len(corners), f"corners clicked {corners}, kernel has {region['corners']}"
    for got, clicked in zip(region["corners"], corners):
        assert got == pytest.approx(clicked, abs=sky.tolerance)
    assert_region_shown(lab, suite, region, curves_before)
    # Finishing clears the draft: no corner dots left, and the kernel holds no half-made outline.
    wait_until(lambda: draft_corners(suite) == 0, "the draft outline to be cleared")
    assert ask_kernel(lab, "L.sky_view.polygon_vertices") == []
    snapshot(lab, suite, f"tools-02-outline-{finish.replace(' ', '-').lower()}")
    assert lab.console_errors == []


def test_pixel_click_gives_that_pixels_spectrum(tools):
    lab, suite, (n_channels, ny, nx) = tools
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    names_before = region_names(lab)
    curves_before = len(spectrum_curves(spectrum))

    choose(suite, "cubeloupe-region-tools", "Pixel")
    sky = SkyArea(suite, nx, ny)
    i, j = 41, 30  # on the disk's emission
    lab.page.mouse.click(*sky.page(i, j))  # the pixel's centre

    wait_until(lambda: len(spectrum_curves(spectrum)) > curves_before, "a new spectrum line")
    region = new_region(lab, names_before)
    assert region["kind"] == "pixel"
    assert [round(v) for v in region["centre"]] == [i, j]
    assert_region_shown(lab, suite, region, curves_before)
    # The spectrum is the flux density of that one pixel: its values in Jy/beam over the beam
    # area in pixels, channel by channel, read from the FITS file with astropy.
    got = ask_kernel(lab, f"[str(L.spectra[{region['name']!r}][0].unit), "
                          f"L.spectra[{region['name']!r}][0].value.tolist(), "
                          # numpy order of a FITS cube: (channel, y, x)
                          f"_data[:, {j}, {i}].astype(float).tolist(), _beam_pixels, str(_hdr['BUNIT'])]")
    unit, values, pixel_values, beam_pixels, bunit = got
    assert bunit.replace(" ", "") == "Jy/beam"
    assert unit == "Jy"
    assert len(values) == n_channels
    np.testing.assert_allclose(np.array(values) * beam_pixels, pixel_values, rtol=1e-6, atol=0)
    snapshot(lab, suite, "tools-03-pixel-region")
    assert lab.console_errors == []


# --- spectrum gestures -----------------------------------------------------------------------


def spectrum_axis(suite):
    """(figure locator, plot area box, slope, intercept) of the spectrum view, with x in GHz."""
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    area = spectrum.locator(".plotarea_events")
    area.scroll_into_view_if_needed()
    slope, intercept = settled(
        lambda: wait_until(lambda: x_axis_calibration(spectrum), "the spectrum's x axis to show a range"),
        "the spectrum's x axis to settle")
    return spectrum, area.bounding_box(), slope, intercept


def readout_frequency(label):
    """The frequency (GHz) the channel readout shows, or NaN while it shows none."""
    match = re.search(r"(\d+\.\d+) GHz", label.inner_text())
    return float(match.group(1)) if match else math.nan


def test_click_on_spectrum_goes_to_channel(tools):
    lab, suite, (n_channels, _, _) = tools
    assert ask_kernel(lab, "L.axis_kind") == "observed frequency", "the test reads GHz off the x axis"
    choose(suite, "cubeloupe-spectrum-mode", "Go to channel")
    slider = suite.locator(".cubeloupe-channel-slider .widget-readout")
    label = suite.locator(".cubeloupe-channel-label")
    channel_before = int(slider.inner_text())
    target = 71 if channel_before < n_channels // 2 else 18
    frequency = ask_kernel(lab, f"_freq({target})")

    spectrum, area, slope, intercept = spectrum_axis(suite)
    x = (frequency - intercept) / slope  # the channel's centre on the page
    assert area["x"] < x < area["x"] + area["width"], "the channel is outside the drawn axis"
    lab.page.mouse.click(x, area["y"] + 0.5 * area["height"])

    wait_until(lambda: int(slider.inner_text()) == target,
               f"the channel slider to show channel {target}")
    # The readout prints the frequency to 1 kHz.
    wait_until(lambda: abs(readout_frequency(label) - frequency) < 1.5e-6,
               f"the channel readout to show channel {target}'s frequency, {frequency:.6f} GHz")
    assert ask_kernel(lab, "[L.channel, L.sky_view.channel]") == [target, target]
    # The dashed channel line on the spectrum moves under the pointer.
    cursor = wait_until(lambda: [b for b in drawn_lines(spectrum, CHANNEL_COLOR, dashed=True)
                                 if abs((b["left"] + b["right"]) / 2 - x) <= PIXEL_TOLERANCE + 1],
                        "the channel line to move to the click")
    assert len(cursor) == 1
    snapshot(lab, suite, "tools-04-spectrum-click")
    assert lab.console_errors == []


def drag_range(lab, area, slope, intercept, low, high):
    """Drag across [low, high] GHz, halfway up the spectrum's plot area; return the page x's."""
    x0, x1 = sorted([(low - intercept) / slope, (high - intercept) / slope])
    y = area["y"] + 0.5 * area["height"]
    lab.drag((x0, y), (x1, y), steps=15)
    return x0, x1


def test_range_drags_set_line_free_window_and_baseline(tools):
    lab, suite, _ = tools
    assert ask_kernel(lab, "L.axis_kind") == "observed frequency", "the test reads GHz off the x axis"
    if not region_names(lab):
        pytest.fail("no region to fit a baseline to: the sky tool tests above draw them", pytrace=False)
    n_spectra = ask_kernel(lab, "sum(s is not None for spectra in L.spectra.values() for s in spectra)")
    low, high = ask_kernel(lab, "list(L.spectrum_view.band)")
    width = high - low

    def at(fraction):
        return low + fraction * width

    # Line-free channels either side of the disk's line (it covers about 0.3 to 0.75 of the band).
    choose(suite, "cubeloupe-spectrum-mode", "Line-free")
    free = [(at(0.03), at(0.2)), (at(0.82), at(0.97))]
    for k, (f0, f1) in enumerate(free):
        # Read the axis again before each drag: asking the kernel adds cells and scrolls the page.
        spectrum, area, slope, intercept = spectrum_axis(suite)
        drag_range(lab, area, slope, intercept, f0, f1)
        wait_until(lambda figure=spectrum, n=k + 1: len(drawn_lines(figure, LINE_FREE_FILL, filled=True)) == n,
                   f"line-free range {k + 1} to be shaded")
    # Both shaded ranges sit where the mouse went.
    shaded = drawn_lines(spectrum, LINE_FREE_FILL, filled=True)
    for box, (f0, f1) in zip(sorted(shaded, key=lambda b: b["left"]), free):
        assert [box["left"], box["right"]] == pytest.approx(
            [(f0 - intercept) / slope, (f1 - intercept) / slope], abs=PIXEL_TOLERANCE + 1)
    tolerance = PIXEL_TOLERANCE * abs(slope)  # GHz
    kernel = ask_kernel(lab, "[L.line_free, len(L.spectrum_view.fits)]")
    assert sorted(kernel[0]) == [pytest.approx(list(r), abs=tolerance) for r in free]
    assert kernel[1] == n_spectra, "a baseline is fitted to every region spectrum"
    # The fitted baselines are drawn over the spectra (dash-dotted), one per spectrum.
    baselines = wait_until(lambda: (b := drawn_lines(spectrum, BASELINE_COLOR, dashed=True)) and
                           len(b) >= n_spectra and b, "the baselines to be drawn")
    assert len(baselines) == n_spectra
    snapshot(lab, suite, "tools-05a-line-free")

    choose(suite, "cubeloupe-spectrum-mode", "Line window")
    window = (at(0.3), at(0.74))
    spectrum, area, slope, intercept = spectrum_axis(suite)
    drag_range(lab, area, slope, intercept, *window)
    wait_until(lambda: drawn_lines(spectrum, LINE_WINDOW_FILL, filled=True), "the line window to be shaded")
    kernel = ask_kernel(lab, "[L.line_window, L.line_free, len(L.measurements)]")
    assert kernel[0] == pytest.approx(sorted(window), abs=tolerance)
    assert sorted(kernel[1]) == [pytest.approx(list(r), abs=tolerance) for r in free], \
        "marking the window must keep the line-free ranges"
    assert kernel[2] == n_spectra, "every region spectrum is measured in the window"
    snapshot(lab, suite, "tools-05b-line-window")
    assert lab.console_errors == []


@pytest.mark.parametrize("mode", ["Go to channel", "Line-free"])
def test_pointing_at_line_marker_shows_its_details(tools, mode):
    """Regression: bqplot's interaction layer lies over the marks, so the markers' own hover
    never fired in the browser; the spectrum view's pointer finds them now, in every mode."""
    lab, suite, _ = tools
    choose(suite, "cubeloupe-spectrum-mode", mode)
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    name = min(wait_until(lambda: scatter_label_points(spectrum), "line markers on the spectrum"))
    # Asked first: typing into the notebook moves the mouse off the spectrum.
    rest = ask_kernel(lab, f"float(L.line_overlay.lines[list(L.line_overlay.lines['name']).index({name!r})]"
                           "['rest_frequency'].to_value('GHz'))")
    show_views(suite)  # the spectrum and the details line below it in sight, for the picture
    spectrum, area, _, _ = spectrum_axis(suite)
    heads = scatter_label_points(spectrum)
    x, y = heads[name]
    details = suite.locator(".cubeloupe-line-details")
    mouse = lab.page.mouse
    # Away from every marker first: the details line shows its hint.
    away = (area["x"] + 0.1 * area["width"], y)
    assert all(abs(away[0] - hx) > 20 for hx, _ in heads.values())
    mouse.move(*away)
    wait_until(lambda: name not in details.inner_text(), "the details line to show its hint")

    mouse.move(x, y, steps=8)
    # The details are written by the kernel: seeing them is seeing the kernel's answer.
    wait_until(lambda: name in details.inner_text(), f"the details of {name} under the spectrum")
    text = details.inner_text()
    assert f"{rest:.6f}" in text, f"the details of {name} do not give its rest frequency {rest}: {text!r}"
    lab.screenshot(f"tools-06-marker-details-{mode.split()[0].lower()}")  # no scrolling under the mouse
    # Leaving the marker hides its details again.
    mouse.move(*away, steps=8)
    wait_until(lambda: name not in details.inner_text(), f"the details of {name} to go")
    assert ask_kernel(lab, "L.line_overlay.hover_text") == ""
    assert lab.console_errors == []


def selected_text(select):
    """The label of the chosen option of a <select> (ipywidgets writes non-breaking spaces)."""
    return select.evaluate("(s) => s.selectedOptions.length ? s.selectedOptions[0].textContent : ''") \
        .replace("\xa0", " ")


def test_clicking_line_marker_head_makes_it_velocity_zero(tools):
    """Regression: the markers' own click ('select') never fired in the browser (see above)."""
    lab, suite, _ = tools
    choose(suite, "cubeloupe-spectrum-mode", "Go to channel")
    zero = suite.locator(".cubeloupe-reference-line select")
    zero.scroll_into_view_if_needed()
    # Start from the cube's own rest frequency, the first entry under "Velocity zero".
    zero.select_option(index=0)
    wait_until(lambda: "RESTFRQ" in selected_text(zero), "'Velocity zero' to show the cube's RESTFRQ")
    slider = suite.locator(".cubeloupe-channel-slider .widget-readout")
    label = suite.locator(".cubeloupe-channel-label")
    channel_before = int(slider.inner_text())
    spectrum, _, _, _ = spectrum_axis(suite)
    heads = wait_until(lambda: scatter_label_points(spectrum), "line markers on the spectrum")
    name, (x, y) = min(heads.items())

    lab.page.mouse.click(x, y)

    wait_until(lambda: selected_text(zero) == name, f"'Velocity zero' to show {name}")
    # The channel readout measures velocities from that line now; the click picked no channel.
    wait_until(lambda: name in label.inner_text(), f"the channel readout to refer to {name}")
    assert int(slider.inner_text()) == channel_before
    assert ask_kernel(lab, "[L.reference_line, L.channel]") == [name, channel_before]
    snapshot(lab, suite, "tools-07-marker-click")
    assert lab.console_errors == []


# --- the two-window example ------------------------------------------------------------------


def test_high_z_notebook_runs_and_window_switch_changes_band(high_z):
    lab, suite = high_z
    assert lab.unexecuted_code_cells() == [], "Run All stopped before the end"
    assert lab.error_outputs() == []
    assert lab.console_errors == []
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    # Each window's band from its FITS header, read with astropy alone (linear FITS axis,
    # FITS paper I), for the paths the notebook gave the suite.
    lab.run_code("from astropy.io import fits as _fits")
    bands = ask_kernel(lab, "[[(h['CRVAL3'] + (k + 1 - h['CRPIX3']) * h['CDELT3']) / 1e9 "
                            "for k in (0, h['NAXIS3'] - 1)] for h in [_fits.getheader(p) for p in paths]]")
    bands = [sorted(b) for b in bands]
    # The demo delivery has several windows; the first two lie apart (their bands do not overlap).
    assert len(bands) >= 2 and (bands[0][1] < bands[1][0] or bands[1][1] < bands[0][0])
    label = suite.locator(".cubeloupe-channel-label")
    choice = suite.locator(".cubeloupe-window-choice select")
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    canvas.scroll_into_view_if_needed()
    wait_until(lambda: distinct_colours(canvas) > 30, "the sky image to be drawn")

    def cursor_frequency():
        # The axis is read each time: with windows this far apart it spans the window shown.
        spectrum, _, slope, intercept = spectrum_axis(suite)
        lines = drawn_lines(spectrum, CHANNEL_COLOR, dashed=True)
        return [slope * (b["left"] + b["right"]) / 2 + intercept for b in lines]

    def inside(frequency, band):
        return band[0] - 1e-6 <= frequency <= band[1] + 1e-6

    assert ask_kernel(lab, "L.window") == 0
    assert inside(readout_frequency(label), bands[0])
    picture_before = canvas.screenshot(animations="disabled")
    snapshot(lab, suite, "tools-08a-high-z-window-0")

    choice.select_option(index=1)

    wait_until(lambda: inside(readout_frequency(label), bands[1]), "the channel readout to move into window 1")
    wait_until(lambda: (c := cursor_frequency()) and all(inside(f, bands[1]) for f in c),
               "the channel line on the spectrum to move into window 1's band")
    wait_until(lambda: canvas.screenshot(animations="disabled") != picture_before, "the sky image to change")
    kernel = ask_kernel(lab, "[L.window, L.sky_view.window, L.channel_bar.n_channels, L.cube.shape[0], "
                             "L.spectrum_span, list(L.spectrum_view.x_range)]")
    assert kernel[:2] == [1, 1]
    assert kernel[2] == kernel[3]
    # The windows lie far apart, so the spectrum spans the one shown, not the gap.
    x0, x1 = kernel[5]
    assert kernel[4] == "window" and x0 < bands[1][0] and x1 > bands[1][1]
    assert x1 - x0 < 2 * (bands[1][1] - bands[1][0]) and not (x0 <= bands[0][0] <= x1)
    snapshot(lab, suite, "tools-08b-high-z-window-1")
    assert lab.error_outputs() == []
    assert lab.console_errors == []
