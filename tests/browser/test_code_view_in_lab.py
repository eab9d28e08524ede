"""The Code tab in real JupyterLab: the script follows what the user does, copies, and goes into a new cell (#19).

A notebook opens the suite on the disk demo cube; a box is drawn with the mouse on the sky,
the Code tab is opened and must show that box exactly as the kernel has it, follow a change
of the redshift, copy its text to the clipboard with its button, and put the script into a new
cell (``loupe.code_view.to_new_cell()``), which then runs without error.
"""

import nbformat
import pytest

from lab import PROBE_SETUP, ask_kernel, wait_until

pytestmark = pytest.mark.browser

NOTEBOOK = "code_view_probe.ipynb"
SOURCE = """\
from cubeloupe.analysis import demo_path
from cubeloupe.widgets import Loupe

loupe = Loupe(demo_path("disk"))
loupe
"""


@pytest.fixture(scope="module")
def suite(lab_page, lab_root):
    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    notebook.cells = [nbformat.v4.new_markdown_cell("The Code tab of the suite."), nbformat.v4.new_code_cell(SOURCE)]
    nbformat.write(notebook, str(lab_root / NOTEBOOK))
    lab_page.page.set_viewport_size({"width": 1280, "height": 1000})
    lab_page.page.context.grant_permissions(["clipboard-read", "clipboard-write"], origin=lab_page.base_url)
    lab_page.open_notebook(NOTEBOOK)
    lab_page.run_all()
    element = lab_page.notebook.locator(".cubeloupe-loupe").first
    element.wait_for()
    assert lab_page.error_outputs() == []
    assert lab_page.run_code(PROBE_SETUP) == "Loupe"
    return lab_page, element


def _code_text(suite_element):
    return suite_element.locator(".cubeloupe-code-view textarea").input_value()


def test_code_tab_shows_the_drawn_box_and_follows_changes(suite):
    lab, element = suite
    names_before = ask_kernel(lab, "L.region_list.names")
    # Draw a box with the mouse on the sky image.
    element.locator(".cubeloupe-region-tools button", has_text="Box").click()
    area = element.locator(".cubeloupe-sky-figure .plotarea_events")
    area.scroll_into_view_if_needed()
    box = area.bounding_box()
    start = (box["x"] + 0.35 * box["width"], box["y"] + 0.40 * box["height"])
    end = (box["x"] + 0.55 * box["width"], box["y"] + 0.60 * box["height"])
    lab.drag(start, end, steps=15)
    names = wait_until(lambda: (n := ask_kernel(lab, "L.region_list.names")) and len(n) > len(names_before) and n,
                       "the drawn box to become a region")
    new = [n for n in names if n not in names_before][0]

    tab = element.locator(".cubeloupe-actions .lm-TabBar-tab", has_text="Code")
    tab.click()
    view = element.locator(".cubeloupe-code-view")
    view.wait_for(state="visible")
    wait_until(lambda: f"as_drawn[{new!r}] = RectanglePixelRegion(" in _code_text(element),
               "the Code tab to show the drawn box as drawn")
    # What the page shows is the kernel's script, to the character.
    assert _code_text(element) == ask_kernel(lab, "L.to_code()")
    view.scroll_into_view_if_needed()
    lab.screenshot("code-view-01-drawn-box", view)

    lab.run_code("loupe.z = 0.0012")
    wait_until(lambda: "\nz = 0.0012\n" in _code_text(element), "the script to follow the new redshift")
    assert lab.console_errors == []


def test_copy_button_puts_the_script_on_the_clipboard(suite):
    lab, element = suite
    element.locator(".cubeloupe-actions .lm-TabBar-tab", has_text="Code").click()
    element.locator(".cubeloupe-copy-code").click()
    wait_until(lambda: element.locator(".cubeloupe-copy-note").inner_text() == "copied", "the copy to be confirmed")
    copied = lab.page.evaluate("navigator.clipboard.readText()")
    assert copied == _code_text(element) and copied.startswith('"""cubeloupe session as a script')
    lab.screenshot("code-view-02-copied", element.locator(".cubeloupe-code-view"))


def test_script_goes_into_a_new_cell_and_runs(suite):
    lab, element = suite
    lab.run_code("original = loupe")
    lab.run_code("loupe.code_view.to_new_cell()")
    cells = lab.notebook.locator(".jp-Notebook .jp-Cell")
    script_cell = wait_until(
        lambda: next((cells.nth(i) for i in range(cells.count())
                      if '"""cubeloupe session as a script' in cells.nth(i).locator(".cm-content").inner_text()),
                     None),
        "a new cell holding the script")
    script_cell.locator(".jp-InputArea-editor").click()
    lab.page.keyboard.press("Control+Enter")
    lab.page.wait_for_function("""(prompt) => /^\\[\\d+\\]/.test(prompt.innerText.trim())""",
                               arg=script_cell.locator(".jp-InputArea-prompt").element_handle(), timeout=150_000)
    lab.wait_for_kernel_idle()
    assert lab.error_outputs() == []
    # The script made a new suite (the notebook's `loupe` now) with the same regions, settings and numbers.
    same = ask_kernel(lab, "[L is not original, L.regions == original.regions, L.z == original.z, "
                           "json.dumps(L.measurements) == json.dumps(original.measurements), len(L.regions)]")
    assert same[:4] == [True, True, True, True] and same[4] >= 2
    script_cell.locator(".jp-InputArea").evaluate("(input) => input.scrollIntoView({block: 'start'})")
    lab.screenshot("code-view-03-script-cell")
