"""Smoothing and line fits in real JupyterLab (#18).

A notebook opens the suite on the disk demo cube at 1 440 x 900 with JupyterLab's file browser
open, marks the CO line's window and line-free ranges from code, and then, as a user does, picks
Hanning smoothing in the menu under the spectrum and a two-Gaussian fit in the Measurements tab.
The fitted model and its residuals must be drawn on the spectrum in their own colours, the fit's
numbers shown beside the moment-based ones, a bad kernel width refused with a message next to
the control, and nothing of the suite may stick out of the notebook. Screenshots of each step go
to the browser suite's screenshot folder.
"""

import json

import pytest

from lab import PROBE_SETUP, LabPage, ask_kernel, drawn_lines, wait_until

pytestmark = pytest.mark.browser

NOTEBOOK = "fits_probe.ipynb"
FIT_COLOR, RESIDUAL_COLOR = "#b0174f", "#62768c"  # widgets/spectrum_view.py
CELLS = [
    "from cubeloupe.analysis import demo_path\nfrom cubeloupe.widgets import Loupe\n"
    "from regions import CirclePixelRegion, PixCoord",
    "loupe = Loupe(demo_path('disk'))\n"
    "loupe.add_region(CirclePixelRegion(PixCoord(35.5, 35.5), radius=30), name='disk')\n"
    "# CO J=2-1 of the demo disk: radio velocities (km/s) as observed frequencies (GHz)\n"
    "ghz = lambda v: 230.538 * (1 - v / 299792.458)\n"
    "loupe.line_free = [[ghz(1215), ghz(1160)], [ghz(1800), ghz(1715)]]\n"
    "loupe.baseline_order = 0\n"
    "loupe.line_window = [ghz(1710), ghz(1220)]\n"
    "loupe",
]

# Elements of the suite whose right edge lies beyond the output area's (as test_suite_layout_in_lab).
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


@pytest.fixture(scope="module")
def suite(browser, lab_server, lab_root, screenshot_dir):
    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": c}
             for c in CELLS]
    notebook = {"cells": cells, "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3",
                                                            "language": "python"}},
                "nbformat": 4, "nbformat_minor": 5}
    (lab_root / NOTEBOOK).write_text(json.dumps(notebook))
    context = browser.new_context(viewport={"width": 1440, "height": 900}, device_scale_factor=1)
    lab = LabPage(context.new_page(), lab_server.base_url, lab_server.token, screenshot_dir)
    lab.open_notebook(NOTEBOOK)
    lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()  # the file browser, open
    lab.page.locator("#jp-left-stack").wait_for(state="visible")
    lab.run_all()
    element = lab.notebook.locator(".cubeloupe-loupe").first
    element.wait_for()
    assert lab.error_outputs() == []
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    yield lab, element
    context.close()


def _no_overflow(element, where):
    found = element.evaluate(_OVERFLOW_JS)
    assert found["overflowing"] == [], f"{where}: {found['overflowing']}"
    assert found["scroll"] <= 0, f"{where}: the output scrolls sideways by {found['scroll']} px"


def test_hanning_smoothing_picked_in_the_menu_is_drawn_and_measured(suite):
    lab, element = suite
    wait_until(lambda: ask_kernel(lab, "len(L.measurements)"), "the moment-based measurement")
    before = ask_kernel(lab, "L.measurements[0]['flux_error']")
    controls = element.locator(".cubeloupe-smoothing")
    controls.scroll_into_view_if_needed()
    controls.locator(".cubeloupe-smoothing-kernel select").select_option(label="Hanning")
    wait_until(lambda: ask_kernel(lab, "L.smoothing.settings['kernel']") == "hanning", "Hanning smoothing")
    after = wait_until(lambda: (e := ask_kernel(lab, "L.measurements[0]['flux_error']")) != before and e,
                       "the measurement of the smoothed spectrum")
    # The errors are the analysis layer's correlated errors (checked in tests/widgets); here: they changed.
    assert after != before
    figure = element.locator(".cubeloupe-spectrum-figure")
    # The unsmoothed spectrum stays drawn faintly behind the smoothed one.
    faint = figure.evaluate("(f) => Array.from(f.querySelectorAll('path.line')).filter(p => "
                            "Number(getComputedStyle(p).opacity) < 0.5 && (p.getAttribute('d') || '').length > 50)"
                            ".length")
    assert faint >= 1
    element.locator(".cubeloupe-spectrum-section").scroll_into_view_if_needed()
    lab.screenshot("fits-01-hanning", element.locator(".cubeloupe-spectrum-section"))
    _no_overflow(element, "after smoothing")
    assert lab.console_errors == []


def test_a_bad_width_is_refused_next_to_the_control(suite):
    lab, element = suite
    width = element.locator(".cubeloupe-smoothing-width input")
    width.fill("4")
    width.press("Enter")
    message = element.locator(".cubeloupe-smoothing .cubeloupe-status-text")
    wait_until(lambda: "odd number of channels" in message.inner_text(), "the refusal beside the width")
    assert ask_kernel(lab, "L.smoothing.settings['width']") == 3.0
    lab.screenshot("fits-02-bad-width", element.locator(".cubeloupe-smoothing"))
    width.fill("3")
    width.press("Enter")
    wait_until(lambda: "odd number" not in message.inner_text(), "the message to go once the width is good")


def test_two_gaussian_fit_is_drawn_with_its_residuals_and_listed(suite):
    lab, element = suite
    element.locator(".cubeloupe-actions .lm-TabBar-tab", has_text="Measurements").click()
    panel = element.locator(".cubeloupe-fit-panel")
    panel.wait_for(state="visible")
    panel.locator(".cubeloupe-fit-model select").select_option(label="2 Gaussians")
    rows = wait_until(lambda: ask_kernel(lab, "L.fit_panel.rows"), "the fitted components")
    assert len(rows) == 4 and all(r["center_unit"] == "km / s" for r in rows)  # two regions
    # The whole disk's two horns lie either side of its systemic velocity, 1462 km/s (demo_cubes/disk.json).
    centres = sorted(r["center"] for r in rows if r["region"] == "disk")
    assert centres[0] < 1462 < centres[1]
    figure = element.locator(".cubeloupe-spectrum-figure")
    model = wait_until(lambda: drawn_lines(figure, FIT_COLOR), "the fitted model on the spectrum")
    residuals = wait_until(lambda: drawn_lines(figure, RESIDUAL_COLOR), "the residuals on the spectrum")
    assert model[0]["right"] - model[0]["left"] > 20 and residuals[0]["right"] - residuals[0]["left"] > 20
    table = panel.locator(".cubeloupe-fit-table")
    wait_until(lambda: "2 Gaussians" in table.inner_text() and "Jy km/s" in table.inner_text(),
               "the fit's table with its units")
    element.locator(".cubeloupe-measurement-table").wait_for(state="visible")  # moment numbers stay shown
    element.locator(".cubeloupe-spectrum-section").scroll_into_view_if_needed()
    lab.screenshot("fits-03-model-and-residuals", element.locator(".cubeloupe-spectrum-section"))
    element.locator(".cubeloupe-actions").scroll_into_view_if_needed()
    lab.screenshot("fits-04-measurements-tab", element.locator(".cubeloupe-actions"))
    lab.screenshot("fits-05-page")
    _no_overflow(element, "with the fit shown")
    assert lab.error_outputs() == [] and lab.console_errors == []
