"""The suite as it first opens, at the window sizes people use (issue #17).

A notebook holding one suite per demo cube is opened at 1 440 x 900 with JupyterLab's file
browser open and at 1 280 x 800 with it closed. At each size: nothing of the suite sticks out
of the notebook's output area or scrolls sideways, the first view shows a channel with
emission and a spectrum with units, the sky axes are in world coordinates, the browser
console stays clean and no news prompt covers the page. Moment 1 of the disk, made with the
moment button and chosen under "Show", is drawn over the disk's velocities only (< 1 000 km/s).
Screenshots of each state go to the browser suite's screenshot folder.
"""

import json

import pytest

from lab import PROBE_SETUP, ask_kernel, distinct_colours, wait_until

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
                             "'unit': L.spectrum_view.y_axis.label, "
                             "'peak': float(__import__('numpy').nanmax(L.cube[L.channel].value)), "
                             "'rms': float(__import__('cubeloupe.analysis').analysis.demo_truth('disk')['rms'].value)}")
    assert answer["spectra"], "the first view has no spectrum"
    assert answer["unit"], "the spectrum's axis has no unit"
    # The channel shown holds emission: its brightest pixel stands well above the demo's injected noise (sidecar rms).
    assert answer["peak"] > 10 * answer["rms"], answer


# Typed into the notebook: line-free ranges and a line window about the disk demo's systemic velocity (its sidecar,
# demo_truth), in observed frequency (radio convention at z = 0, Greisen et al. 2006).
DISK_RANGES = (
    "import astropy.units as u; from cubeloupe.analysis import demo_truth; _t = demo_truth('disk'); "
    "_s = _t['disk']['systemic_velocity'].to_value(u.km / u.s); _rest = _t['lines'][0]['rest_frequency']; "
    "_f = lambda v: float((v * u.km / u.s).to(u.GHz, equivalencies=u.doppler_radio(_rest)).value); "
    "loupe.line_free = [sorted([_f(_s - 600), _f(_s - 300)]), sorted([_f(_s + 300), _f(_s + 600)])]; "
    "loupe.line_window = sorted([_f(_s - 250), _f(_s + 250)]); print(_s)"
)


def test_moment_1_of_the_disk_spans_its_velocities_only(opened):
    """Issue #17: moment 1 of the disk spanned about -2 000..+5 000 km/s (noise pixels); the disk's own velocities
    are 1 462 +- 154 km/s (its sidecar: v_flat 195 km/s at 52 deg inclination)."""
    # Both pages show one notebook, hence one kernel: its `loupe` is the suite the last page ran and shows.
    size = SIZES[-1][0]
    _, lab = opened[size]
    suite = lab.notebook.locator(".cubeloupe-loupe").first
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    systemic = float(lab.run_code(DISK_RANGES).splitlines()[-1])
    suite.locator(".cubeloupe-moment-button").scroll_into_view_if_needed()
    suite.locator(".cubeloupe-moment-button").click()
    choice = suite.locator(".cubeloupe-source select")
    status = suite.locator(".cubeloupe-moment-panel .cubeloupe-status-text")

    def offered():
        return [text.replace("\xa0", " ") for text in choice.locator("option").all_inner_texts()]

    wait_until(lambda: "moment 1" in offered() or "✖" in status.inner_text(), "'moment 1' to be offered under Show")
    assert "✖" not in status.inner_text(), status.inner_text()
    choice.select_option(index=offered().index("moment 1"))
    wait_until(lambda: ask_kernel(lab, "L.sky_source") == "moment 1", "moment 1 on the sky")
    low, high = ask_kernel(lab, "L.sky_view.shown_limits")
    assert high - low < 1000 and systemic - 200 <= low < high <= systemic + 200, (low, high)
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")
    wait_until(lambda: distinct_colours(canvas) > 10, "moment 1 to be drawn")
    lab.screenshot(f"layout-{size}-disk-moment-1")
    assert lab.error_outputs() == []
    assert lab.console_errors == []
