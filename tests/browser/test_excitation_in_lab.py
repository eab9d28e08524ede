"""The Population diagram tab in real JupyterLab at 1 440 px with the file browser open (#16).

A notebook opens the suite on the eight windows of the invented lensed demo (Quillwort-L1) with a
sky circle over the lensed ring. For each line of the demo's LTE model a code cell measures it
(its name as velocity zero, the line window over it) and the test ticks the line in the tab with
the mouse, as a user would. The diagram must show a point per line (CO, ortho- and para-water in
their own marks, fitted lines), the results with their errors, and the LTE prediction over the
spectra once its box is ticked; nothing of the suite may stick out of the output area.
"""

import json

import pytest

from lab import PROBE_SETUP, ask_kernel, wait_until

pytestmark = pytest.mark.browser

NOTEBOOK = "excitation_probe.ipynb"
SETUP = """\
import astropy.units as u
import numpy as np
from astropy.coordinates import SkyCoord
from regions import CircleSkyRegion
from cubeloupe.analysis import demo_names, demo_path, demo_truth, find_line
from cubeloupe.widgets import Loupe

names = [n for n in demo_names() if n.startswith("lensed_")]
truth = demo_truth(names[0])
loupe = Loupe([demo_path(n) for n in names], z=truth["z"], first_view=False,
              rest_frequency=find_line("CO J=7-6")["rest_frequency"])
loupe.magnification = truth["lte_model"]["magnification"]
loupe.add_region(CircleSkyRegion(SkyCoord(truth["source"]["ra"], truth["source"]["dec"]), 1.7 * u.arcsec),
                 name="ring")
model_lines = {line["catalog_name"]: line["observed_frequency"].to_value(u.GHz)
               for n in names for line in demo_truth(n)["lines"] if line["from_lte_model"]}
free = []
for index, n in enumerate(names):
    f = loupe._frequencies[index]
    keep = np.ones(f.size, bool)
    for line in demo_truth(n)["lines"]:
        keep &= np.abs(f / line["observed_frequency"].to_value(u.GHz) - 1) * 299792.458 > 650
    edges = np.flatnonzero(np.diff(np.r_[0, keep.astype(int), 0]))
    free += [sorted([float(f[a]), float(f[b - 1])]) for a, b in zip(edges[::2], edges[1::2])]
loupe.line_free = free


def measure(name):
    f0 = model_lines[name]
    loupe.reference_line = name
    loupe.line_window = [f0 * (1 - 550 / 299792.458), f0 * (1 + 550 / 299792.458)]
    return [row["line"] for row in loupe.measurements]
"""
SHOW = "loupe"

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
    // Marks inside a plot's clip path are cut at the plot's edge by the browser: never drawn outside.
    if (el.closest('[clip-path]')) continue;
    if (box.right > limit) {
      const figure = el.closest('.bqplot');
      const where = figure ? [...figure.classList].filter(c => c.startsWith('cubeloupe')).join('.') : '';
      const parent = el.parentElement ? [...el.parentElement.classList].join('.') : '';
      out.push(`${el.tagName.toLowerCase()}.${[...el.classList].join('.')} in ${parent} of ${where} ` +
               `right ${Math.round(box.right)} > ${Math.round(limit)}`);
    }
  }
  return {overflowing: out.slice(0, 12), scroll: area.scrollWidth - area.clientWidth};
}
"""


@pytest.fixture(scope="module")
def suite(lab_page, lab_root):
    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": source}
             for source in (SETUP, SHOW)]
    notebook = {"cells": cells, "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3",
                                                            "language": "python"}},
                "nbformat": 4, "nbformat_minor": 5}
    (lab_root / NOTEBOOK).write_text(json.dumps(notebook))
    lab = lab_page
    lab.page.set_viewport_size({"width": 1440, "height": 900})
    lab.open_notebook(NOTEBOOK)
    # The file browser open, as many people work.
    lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()
    lab.page.locator("#jp-left-stack").wait_for(state="visible")
    lab.run_all()
    element = lab.notebook.locator(".cubeloupe-loupe").first
    element.wait_for()
    assert lab.error_outputs() == []
    assert lab.run_code(PROBE_SETUP) == "Loupe"
    return lab, element


def _open_tab(element):
    element.locator(".cubeloupe-actions .lm-TabBar-tab", has_text="Population diagram").click()
    panel = element.locator(".cubeloupe-excitation-panel")
    panel.wait_for(state="visible")
    return panel


def test_ticking_measured_lines_draws_the_diagram(suite):
    lab, element = suite
    panel = _open_tab(element)
    names = ask_kernel(lab, "list(model_lines)")
    assert len(names) == 10
    for count, name in enumerate(names, start=1):
        assert lab.run_code(f"print(measure({name!r}))") == str([name])
        box = panel.locator(".cubeloupe-excitation-line", has_text=f"{name} · ring").locator("input")
        box.scroll_into_view_if_needed()
        box.wait_for(state="visible")
        assert not box.is_checked()
        box.click()
        wait_until(lambda count=count: ask_kernel(lab, "len(L.excitation_panel.picked)") == count,
                   f"the kernel to have {count} ticked lines")
    figure = panel.locator(".cubeloupe-population-figure")
    figure.scroll_into_view_if_needed()
    # One scatter dot per detected line, in three marks (CO, ortho-H2O, para-H2O).
    wait_until(lambda: figure.locator("path.dot").count() == 10, "ten points in the diagram")
    colours = set(figure.locator("path.dot").evaluate_all("dots => dots.map(d => getComputedStyle(d).fill)"))
    assert len(colours) == 3
    results = panel.locator(".cubeloupe-excitation-results")
    wait_until(lambda: "ortho/para (joint)" in results.inner_text(), "the ortho/para result")
    text = results.inner_text()
    assert "CO" in text and "H2O" in text and "±" in text and "mass" in text
    shown = ask_kernel(lab, "{k: [d.temperature.value, d.temperature_error.value] "
                            "for k, d in L.excitation_panel.diagrams.items()}")
    for temperature, error in shown.values():
        assert f"{temperature:.1f} ± {error:.1f} K" in text
    panel.scroll_into_view_if_needed()
    lab.screenshot("excitation-01-diagram", panel)
    lab.screenshot("excitation-02-page-1440-browser-open")
    assert lab.console_errors == []


def test_prediction_over_the_spectra(suite):
    lab, element = suite
    panel = _open_tab(element)
    if not ask_kernel(lab, "len(L.excitation_panel.picked)"):
        pytest.skip("needs the lines ticked by the previous test")
    panel.locator(".cubeloupe-excitation-prediction input[type=checkbox]").first.click()
    wait_until(lambda: ask_kernel(lab, "len(L.spectrum_view.prediction)") == 8, "the prediction in all windows")
    temperature = ask_kernel(lab, "L.excitation_panel.prediction_temperature")
    # Move the temperature slider with the keyboard, as a user can; the prediction follows.
    handle = panel.locator(".cubeloupe-excitation-prediction .noUi-handle").first
    handle.click()
    for _ in range(20):
        lab.page.keyboard.press("ArrowRight")
    wait_until(lambda: ask_kernel(lab, "L.excitation_panel.prediction_temperature") != temperature,
               "the slider to change the prediction's temperature")
    spectrum = element.locator(".cubeloupe-spectrum-section")
    spectrum.scroll_into_view_if_needed()
    lab.screenshot("excitation-03-prediction-on-spectrum", spectrum)
    assert lab.console_errors == []


def test_nothing_sticks_out_at_1440_with_the_file_browser_open(suite):
    lab, element = suite
    panel = _open_tab(element)
    panel.scroll_into_view_if_needed()
    # The panel and the tab bar: every element within the output area; the area does not scroll sideways.
    for part in (panel, element.locator(".cubeloupe-actions > .lm-TabBar").first):
        found = part.evaluate(_OVERFLOW_JS)
        assert found["overflowing"] == [], found["overflowing"]
        assert found["scroll"] <= 0, f"the output area scrolls sideways by {found['scroll']} px"
    lab.screenshot("excitation-04-panel-1440-browser-open")
