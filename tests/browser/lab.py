"""Drive JupyterLab 4 in a Playwright page the way a user does: menus, keys, mouse.

Every wait is on a condition in the page (kernel state, execution prompts, elements),
never on elapsed time. Selectors are JupyterLab's own CSS classes and ``data-command``
attributes, which JupyterLab keeps stable for its UI tests.
"""

import io
import json
import re
import time
from pathlib import Path

import pytest
from PIL import Image

# Time limits for conditions (milliseconds). They bound a wait; they are not waited out.
LOAD_TIMEOUT = 90_000
KERNEL_TIMEOUT = 90_000
RUN_TIMEOUT = 150_000
UI_TIMEOUT = 30_000

CHANGE_TIMEOUT = 60  # seconds allowed for the kernel's answer to reach the page (polled)

CURRENT_NOTEBOOK = ".jp-NotebookPanel:not(.lm-mod-hidden)"

# Typed into a notebook once: `_probe()` is the suite shown (a global named `loupe` if the
# notebook has one, else the first Loupe made), and json is imported for `ask_kernel`.
PROBE_SETUP = (
    "import json; from ipywidgets.widgets.widget import _instances as _cl_widgets; "
    "from cubeloupe.widgets import Loupe as _cl_Loupe; "
    "_probe = lambda: globals()['loupe'] if isinstance(globals().get('loupe'), _cl_Loupe) "
    "else next(w for w in list(_cl_widgets.values()) if isinstance(w, _cl_Loupe)); "
    "print(type(_probe()).__name__)"
)

_JS_STATE = """
(panelSelector) => {
  const panel = document.querySelector(panelSelector);
  if (!panel) return null;
  const indicator = panel.querySelector('.jp-Notebook-ExecutionIndicator');
  const kernelName = panel.querySelector('.jp-KernelName');
  const cells = Array.from(panel.querySelectorAll('.jp-Notebook .jp-Cell'));
  return {
    status: indicator ? indicator.dataset.status : null,
    kernel: kernelName ? kernelName.innerText.trim() : null,
    cells: cells.map(cell => {
      const prompt = cell.querySelector('.jp-InputArea-prompt');
      const editor = cell.querySelector('.jp-InputArea-editor');
      return {
        code: cell.classList.contains('jp-CodeCell'),
        prompt: prompt ? prompt.innerText.trim() : '',
        source: editor ? editor.innerText.trim() : '',
      };
    }),
  };
}
"""


def _execution_count(prompt):
    match = re.fullmatch(r"\[(\d+)\]:?", prompt)
    return int(match.group(1)) if match else None


class LabPage:
    """A Playwright ``page`` showing JupyterLab at ``base_url``.

    Parameters
    ----------
    page : playwright.sync_api.Page
    base_url : str
        ``http://127.0.0.1:<port>`` of the server.
    token : str
        The server's token.
    screenshot_dir : pathlib.Path
        Where :meth:`screenshot` writes PNG files.

    Attributes
    ----------
    console_errors : list of str
        Errors written to the browser console and uncaught page exceptions, in order.
    """

    def __init__(self, page, base_url, token, screenshot_dir):
        self.page = page
        self.base_url = base_url
        self.token = token
        self.screenshot_dir = Path(screenshot_dir)
        self.console_errors = []
        self.failed_requests = []
        page.set_default_timeout(UI_TIMEOUT)
        page.on("console", self._on_console)
        page.on("pageerror", lambda error: self.console_errors.append(f"uncaught: {error}"))
        page.on(
            "response",
            lambda response: response.status >= 400
            and self.failed_requests.append(f"{response.status} {response.url}"),
        )

    def _on_console(self, message):
        if message.type != "error":
            return
        where = (message.location or {}).get("url", "")
        self.console_errors.append(f"{message.text} ({where})" if where else message.text)

    # --- notebook --------------------------------------------------------------------

    @property
    def notebook(self):
        """Locator of the notebook panel in front."""
        return self.page.locator(CURRENT_NOTEBOOK)

    def open_notebook(self, path):
        """Open ``path`` (relative to the server root) alone in a reset workspace.

        Returns once the notebook shows and its kernel is idle.
        """
        url = f"{self.base_url}/lab/tree/{path}?reset&token={self.token}"
        self.page.goto(url, timeout=LOAD_TIMEOUT)
        self.notebook.locator(".jp-Cell").first.wait_for(timeout=LOAD_TIMEOUT)
        self.wait_for_kernel_idle(timeout=KERNEL_TIMEOUT)
        self.hide_left_sidebar()

    def hide_left_sidebar(self):
        """Collapse the left sidebar (a click on its open tab), giving the notebook the full width."""
        if self.page.locator("#jp-left-stack").is_visible():
            self.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab.lm-mod-current").click()
            self.page.locator("#jp-left-stack").wait_for(state="hidden")

    def state(self):
        """Kernel status, kernel name and the cells' prompts and sources, read from the DOM."""
        return self.page.evaluate(_JS_STATE, CURRENT_NOTEBOOK)

    def wait_for_kernel_idle(self, timeout=KERNEL_TIMEOUT):
        """Wait until a kernel is attached, idle, and no cell is queued or running."""
        self.page.wait_for_function(
            f"""() => {{
              const state = ({_JS_STATE})({CURRENT_NOTEBOOK!r});
              return state && state.status === 'idle' && state.kernel
                && state.kernel !== 'No Kernel'
                && !state.cells.some(cell => cell.prompt.includes('*'));
            }}""",
            timeout=timeout,
            polling=100,
        )

    def _max_execution_count(self):
        counts = [_execution_count(cell["prompt"]) for cell in self.state()["cells"]]
        return max([count for count in counts if count is not None], default=0)

    def menu_command(self, menu, command):
        """Click main menu ``menu`` (its label, e.g. "Run"), then the item running ``command``."""
        self.page.locator("#jp-menu-panel .lm-MenuBar-item", has_text=menu).first.click()
        item = self.page.locator(f".lm-Menu .lm-Menu-item[data-command='{command}']").first
        item.click()

    def run_all(self, timeout=RUN_TIMEOUT):
        """Run > Run All Cells, then wait until the kernel has finished (or stopped on an error)."""
        before = self._max_execution_count()
        self.menu_command("Run", "runmenu:run-all")
        self.page.wait_for_function(
            f"""() => {{
              const state = ({_JS_STATE})({CURRENT_NOTEBOOK!r});
              if (!state || state.status !== 'idle') return false;
              if (state.cells.some(cell => cell.prompt.includes('*'))) return false;
              const first = state.cells.find(cell => cell.code && cell.source);
              const match = first && first.prompt.match(/^\\[(\\d+)\\]/);
              return !first || (match && Number(match[1]) > {before});
            }}""",
            timeout=timeout,
            polling=100,
        )

    def error_outputs(self):
        """Texts of error and stderr outputs and of widgets that failed to display."""
        outputs = self.notebook.locator(
            ".jp-OutputArea-output[data-mime-type='application/vnd.jupyter.stderr'],"
            " .jp-OutputArea-output[data-mime-type='application/vnd.jupyter.error']"
        )
        texts = [text.strip() for text in outputs.all_inner_texts()]
        widget_errors = self.notebook.locator(".jp-OutputArea-output", has_text="Error displaying widget")
        texts += [text.strip() for text in widget_errors.all_inner_texts()]
        return texts

    def unexecuted_code_cells(self):
        """Prompts of non-empty code cells that have no execution count."""
        return [
            (index, cell["prompt"])
            for index, cell in enumerate(self.state()["cells"])
            if cell["code"] and cell["source"] and _execution_count(cell["prompt"]) is None
        ]

    def run_code(self, code, timeout=RUN_TIMEOUT):
        """Add a code cell at the end of the notebook, run it and return its output text.

        This is how a test reads kernel state back: type a line, run it, read the result.
        """
        cells = self.notebook.locator(".jp-Notebook .jp-Cell")
        count = cells.count()
        # Select the last cell through its prompt (command mode), insert a cell below ("B").
        cells.nth(count - 1).locator(".jp-InputArea-prompt").click()
        self.page.keyboard.press("Escape")
        self.page.keyboard.press("b")
        new_cell = cells.nth(count)
        new_cell.wait_for()
        new_cell.locator(".jp-InputArea-editor").click()
        # insert_text types without key events, so no auto-closed brackets or indentation.
        self.page.keyboard.insert_text(code)
        editor_text = new_cell.locator(".cm-content").inner_text()
        assert editor_text.strip() == code.strip(), f"typed {code!r}, editor shows {editor_text!r}"
        self.page.keyboard.press("Control+Enter")
        prompt = new_cell.locator(".jp-InputArea-prompt")
        self.page.wait_for_function(
            """(prompt) => /^\\[\\d+\\]/.test(prompt.innerText.trim())""",
            arg=prompt.element_handle(),
            timeout=timeout,
            polling=100,
        )
        self.wait_for_kernel_idle(timeout=timeout)
        return "\n".join(new_cell.locator(".jp-OutputArea-output").all_inner_texts()).strip()

    # --- mouse and pictures -------------------------------------------------------------

    def drag(self, start, end, steps=12):
        """Press the left button at ``start`` (x, y page pixels), move to ``end``, release."""
        mouse = self.page.mouse
        mouse.move(*start)
        mouse.down()
        mouse.move(*end, steps=steps)
        mouse.up()

    def screenshot(self, name, locator=None):
        """Save ``<screenshot_dir>/<name>.png`` of the page (or of ``locator``); return the path."""
        path = self.screenshot_dir / f"{name}.png"
        target = locator if locator is not None else self.page
        target.screenshot(path=str(path), animations="disabled")
        return path


def ask_kernel(lab, expression):
    """Evaluate ``expression`` (may use ``L`` for the Loupe) in the kernel; return it from JSON.

    Needs :data:`PROBE_SETUP` to have been run in the notebook.
    """
    output = lab.run_code(f"L = _probe(); print(json.dumps({expression}, default=str))")
    return json.loads(output.splitlines()[-1])


def wait_until(condition, what, timeout=CHANGE_TIMEOUT, interval=0.1):
    """Poll ``condition()`` until it returns a truthy value (returned) or fail after ``timeout``."""
    deadline = time.monotonic() + timeout
    while True:
        value = condition()
        if value:
            return value
        if time.monotonic() > deadline:
            pytest.fail(f"timed out after {timeout} s waiting for {what}")
        time.sleep(interval)  # polling interval of the condition above


def settled(read, what):
    """Poll ``read()`` until two consecutive readings agree (the page stopped changing)."""
    previous = [read()]

    def same():
        current = read()
        done = current == previous[0]
        previous[0] = current
        return done

    wait_until(same, what)
    return previous[0]


def distinct_colours(locator):
    """Number of distinct RGB colours in a screenshot of ``locator`` (a rendered-content check).

    An empty canvas or a blank plot shows one or two colours; a drawn image shows many.
    """
    picture = Image.open(io.BytesIO(locator.screenshot(animations="disabled"))).convert("RGB")
    return len(picture.getcolors(maxcolors=picture.width * picture.height))


def box_centre(locator):
    """Page coordinates (x, y) of the centre of ``locator``'s bounding box."""
    box = locator.bounding_box()
    assert box is not None, f"{locator} has no bounding box (not displayed)"
    return box["x"] + box["width"] / 2, box["y"] + box["height"] / 2


_JS_AXIS_TICKS = """
(figure) => {
  // d3 keeps each tick's value as the element's __data__: exact values, no label parsing.
  const axes = Array.from(figure.querySelectorAll('g.axis'));
  // bqplot draws a horizontal axis with middle-anchored tick labels, vertical ones not.
  const horizontal = axes.find(axis => axis.getAttribute('text-anchor') === 'middle');
  if (!horizontal) return [];
  return Array.from(horizontal.querySelectorAll('g.tick')).map(tick => {
    const box = tick.querySelector('line').getBoundingClientRect();
    return [box.left + box.width / 2, Number(tick.__data__)];
  });
}
"""


def x_axis_ticks(figure):
    """[(page x, value), ...] of the x-axis ticks of a bqplot figure."""
    return figure.evaluate(_JS_AXIS_TICKS)


def x_axis_calibration(figure):
    """(slope, intercept) turning page x pixels into data values, from a bqplot figure's x ticks.

    None while the axis has fewer than two distinct ticks (not drawn yet, or an empty range).
    """
    ticks = x_axis_ticks(figure)
    if len(ticks) < 2:
        return None
    (x0, v0), (x1, v1) = ticks[0], ticks[-1]
    if x1 == x0 or v1 == v0:
        return None
    slope = (v1 - v0) / (x1 - x0)
    return slope, v0 - slope * x0


def scatter_label_positions(figure):
    """Page x of every labelled scatter point in a bqplot figure: {label: x}."""
    return {label: x for label, (x, _) in scatter_label_points(figure).items()}


def spectrum_curves(spectrum_figure, min_points=10):
    """(stroke colour, vertex count) of every drawn line with at least ``min_points`` vertices."""
    return spectrum_figure.evaluate(
        """(figure, minPoints) => Array.from(figure.querySelectorAll('path.line'))
             .map(path => [getComputedStyle(path).stroke,
                           ((path.getAttribute('d') || '').match(/L/g) || []).length + 1])
             .filter(([, n]) => n >= minPoints)""",
        min_points,
    )


def css_rgb(figure, colour):
    """The computed ``rgb(...)`` form of a CSS colour, as getComputedStyle reports strokes."""
    return figure.evaluate(
        "(figure, colour) => { const probe = document.createElement('div'); probe.style.color = colour;"
        " figure.appendChild(probe); const rgb = getComputedStyle(probe).color; probe.remove(); return rgb; }",
        colour)


def drawn_lines(figure, colour, dashed=None, filled=False):
    """Bounding boxes of the drawn lines of a bqplot figure stroked (or filled) in ``colour``.

    bqplot fills a line with ``fill="inside"`` by styling the line's own path.
    """
    return figure.evaluate(
        """(figure, [rgb, dashed, filled]) => Array.from(figure.querySelectorAll('path.line'))
             .filter(path => (path.getAttribute('d') || '').length > 4)
             .filter(path => getComputedStyle(path)[filled ? 'fill' : 'stroke'] === rgb)
             .filter(path => getComputedStyle(path).display !== 'none')
             .filter(path => dashed === null
                     || ((getComputedStyle(path).strokeDasharray || 'none') !== 'none') === dashed)
             .map(path => { const b = path.getBoundingClientRect();
                            return {left: b.left, right: b.right, top: b.top, bottom: b.bottom}; })""",
        [css_rgb(figure, colour), dashed, filled],
    )


def scatter_label_points(figure):
    """Page (x, y) of the centre of every named scatter point in a bqplot figure: {name: (x, y)}.

    Names count whether bqplot draws them or not: the line overlay draws its marker labels as a
    separate label mark (laid out so they do not pile up) and keeps the names on the heads."""
    return figure.evaluate(
        """(figure) => {
          const out = {};
          for (const group of figure.querySelectorAll('g.object_grp')) {
            const label = group.querySelector('text.dot_text');
            const dot = group.querySelector('path.dot');
            if (!label || !dot || !label.textContent.trim()) continue;
            const box = dot.getBoundingClientRect();
            out[label.textContent.trim()] = [box.left + box.width / 2, box.top + box.height / 2];
          }
          return out;
        }"""
    )
