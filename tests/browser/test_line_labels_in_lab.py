"""Catalog line labels in the spectrum view: none cut off at the ends, none on top of another (issue #15).

A notebook makes a 3 mm cube (84.0-115.3 GHz, 100 MHz channels, noise) whose upper end lies just
above CO J=1-0 (115.2712018 GHz, CDMS), opens it in the suite at 1 440 x 900 with JupyterLab's
file browser open, and shows every line family: hundreds of markers. In the page, every drawn
label lies inside the plot area, no two labels overlap, the CO J=1-0 label (the one the closing
note of the last session found cut at the right edge) is drawn whole, and the labels drawn are the
ones the kernel laid out. Screenshots of the spectrum go to the browser suite's screenshot folder.
"""

import json

import pytest

from lab import PROBE_SETUP, ask_kernel, wait_until

pytestmark = pytest.mark.browser

NOTEBOOK = "line_labels.ipynb"
CELLS = [
    "import numpy as np\nfrom astropy.io import fits\nfrom cubeloupe.widgets import Loupe\n"
    "header = fits.Header({'NAXIS': 3, 'NAXIS1': 6, 'NAXIS2': 6, 'NAXIS3': 313, 'BUNIT': 'K',\n"
    "    'CTYPE1': 'RA---SIN', 'CRVAL1': 150.0, 'CDELT1': -1e-3, 'CRPIX1': 3.5, 'CUNIT1': 'deg',\n"
    "    'CTYPE2': 'DEC--SIN', 'CRVAL2': 20.0, 'CDELT2': 1e-3, 'CRPIX2': 3.5, 'CUNIT2': 'deg',\n"
    "    'CTYPE3': 'FREQ', 'CRVAL3': 84.0e9, 'CDELT3': 1.0e8, 'CRPIX3': 1.0, 'CUNIT3': 'Hz',\n"
    "    'SPECSYS': 'LSRK'})\n"
    "data = np.random.default_rng(1).normal(0, 0.1, (313, 6, 6)).astype('float32')\n"
    "fits.writeto('labels_3mm.fits', data, header, overwrite=True)",
    "loupe = Loupe('labels_3mm.fits', z=0.0)\nloupe",
]

# Page boxes of the spectrum figure's SVG text elements whose text is one of the given names, and
# the plot area's box.
_LABEL_BOXES_JS = """
(figure, names) => {
  const wanted = new Set(names);
  const area = figure.querySelector('.plotarea_events').getBoundingClientRect();
  const boxes = [];
  for (const text of figure.querySelectorAll('text')) {
    const content = text.textContent.trim();
    if (!wanted.has(content) || text.classList.contains('dot_text')) continue;
    const style = getComputedStyle(text);
    if (style.display === 'none' || style.visibility === 'hidden') continue;
    const b = text.getBoundingClientRect();
    if (b.width === 0) continue;
    boxes.push({text: content, left: b.left, right: b.right, top: b.top, bottom: b.bottom});
  }
  return {boxes, area: {left: area.left, right: area.right, top: area.top, bottom: area.bottom}};
}
"""


def _write_notebook(folder):
    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": c}
             for c in CELLS]
    notebook = {"cells": cells, "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3",
                                                            "language": "python"}},
                "nbformat": 4, "nbformat_minor": 5}
    (folder / NOTEBOOK).write_text(json.dumps(notebook))


@pytest.fixture(scope="module")
def labelled(browser, lab_server, lab_root, screenshot_dir):
    from lab import LabPage

    _write_notebook(lab_root / "example_notebooks")
    context = browser.new_context(viewport={"width": 1440, "height": 900}, device_scale_factor=1)
    lab = LabPage(context.new_page(), lab_server.base_url, lab_server.token, screenshot_dir)
    lab.open_notebook(f"example_notebooks/{NOTEBOOK}")
    lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()
    lab.page.locator("#jp-left-stack").wait_for(state="visible")
    lab.run_all()
    suite = lab.notebook.locator(".cubeloupe-loupe").first
    suite.wait_for()
    assert lab.error_outputs() == []
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    yield lab, suite
    context.close()


def _drawn_labels(lab, suite):
    names = ask_kernel(lab, "[str(t) for m in L.line_overlay.labels for t in "
                            "(m.text if m.text is not None else [])]")
    figure = suite.locator(".cubeloupe-spectrum-figure")
    figure.scroll_into_view_if_needed()
    return names, figure


def _check_labels(lab, suite, names, figure, picture):
    found = wait_until(lambda: (lambda r: r if len({b["text"] for b in r["boxes"]}) == len(set(names)) else None)(
        figure.evaluate(_LABEL_BOXES_JS, names)), "the kernel's labels to be drawn")
    area, boxes = found["area"], found["boxes"]
    lab.screenshot(picture, figure)  # before the checks, so a failure can be looked at
    print("plot area width", area["right"] - area["left"], "px")
    for box in boxes:
        # whole inside the plot horizontally (a pixel of antialiasing allowed)
        assert box["left"] >= area["left"] - 1 and box["right"] <= area["right"] + 1, box
        # and inside the figure vertically: the top row may use the figure's top margin, not beyond it
        assert box["top"] >= figure.bounding_box()["y"] - 1, box
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            apart = (a["right"] <= b["left"] + 1 or b["right"] <= a["left"] + 1
                     or a["bottom"] <= b["top"] + 1 or b["bottom"] <= a["top"] + 1)
            assert apart, (a, b)
    return boxes


def test_default_families_labels_inside_and_apart(labelled):
    lab, suite = labelled
    names, figure = _drawn_labels(lab, suite)
    assert "CO J=1-0" in names
    boxes = _check_labels(lab, suite, names, figure, "line-labels-01-default-families")
    co = next(b for b in boxes if b["text"] == "CO J=1-0")
    area = figure.evaluate("(f) => f.querySelector('.plotarea_events').getBoundingClientRect().right")
    assert co["right"] <= area + 1  # the label the last session found cut at the right edge
    lab.screenshot("line-labels-01-page")
    assert lab.console_errors == []


def test_every_family_shown_labels_still_apart(labelled):
    lab, suite = labelled
    lab.run_code("from cubeloupe.analysis import LINE_FAMILIES; _probe().line_overlay.families = list(LINE_FAMILIES)")
    shown = ask_kernel(lab, "[len(L.line_overlay.shown_markers), len(L.line_overlay.labelled_markers)]")
    assert shown[0] > 100 and 0 < shown[1] < shown[0]
    names, figure = _drawn_labels(lab, suite)
    _check_labels(lab, suite, names, figure, "line-labels-02-every-family")
    assert lab.console_errors == []
