"""Self-test of the browser harness on a notebook made here (ipywidgets + bqplot + WebGL).

It proves the chain the Loupe tests rely on, independently of the Loupe: the server starts,
the notebook opens and runs from the Run menu, widgets and bqplot render (SVG and the WebGL
canvas), mouse drags on a slider and on the figure (a brush) reach the kernel, and the
kernel's answer comes back. The brush test guards the front-end package set: with bqplot 0.13
plus bqplot-gl the brush draws but never reports its selection to the kernel.
"""

import json

import nbformat
import pytest

from lab import box_centre, distinct_colours

pytestmark = pytest.mark.browser

PROBE = "harness_probe.ipynb"
SLIDER_MAX = 100
SOURCE = f"""\
import ipywidgets as widgets
import numpy as np
import bqplot as bq
from bqplot_image_gl import ImageGL

slider = widgets.IntSlider(value=10, min=0, max={SLIDER_MAX}, description="frequency")
x = np.linspace(0, 1, 200)
xs, ys = bq.LinearScale(), bq.LinearScale(min=-1, max=1)
wave = bq.Lines(x=x, y=np.sin(2 * np.pi * x), scales={{"x": xs, "y": ys}})
picture = ImageGL(
    image=np.random.default_rng(7).random((32, 32)).astype(np.float32),
    x=[0, 1], y=[-1, 1],
    scales={{"x": xs, "y": ys, "image": bq.ColorScale(min=0, max=1)}},
)
figure = bq.Figure(marks=[picture, wave], axes=[bq.Axis(scale=xs), bq.Axis(scale=ys, orientation="vertical")],
                   layout=widgets.Layout(width="600px", height="300px"))
figure.interaction = brush = bq.interacts.BrushSelector(x_scale=xs, y_scale=ys)
slider.observe(lambda change: setattr(wave, "y", np.sin(2 * np.pi * change.new / 10 * x)), "value")
widgets.VBox([slider, figure])
"""


@pytest.fixture(scope="module")
def probe(lab_page, lab_root):
    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    notebook.cells = [
        nbformat.v4.new_markdown_cell("Harness probe: a slider driving a bqplot line over a WebGL image."),
        nbformat.v4.new_code_cell(SOURCE),
    ]
    nbformat.write(notebook, str(lab_root / PROBE))
    lab_page.open_notebook(PROBE)
    lab_page.run_all()
    return lab_page


def test_run_all_gives_no_errors(probe):
    assert probe.unexecuted_code_cells() == []
    assert probe.error_outputs() == []
    probe.notebook.locator(".widget-slider").wait_for()
    assert probe.console_errors == []


def test_bqplot_svg_and_webgl_canvas_render(probe):
    figure = probe.notebook.locator(".bqplot.figure")
    line = figure.locator("path.line")
    line.wait_for()
    # 200 points give a long path; an empty or failed mark has none.
    probe.page.wait_for_function("(path) => (path.getAttribute('d') || '').length > 500",
                                 arg=line.element_handle())
    canvas = figure.locator("canvas")
    canvas.wait_for()
    # 32x32 random pixels through a colour map: many colours, unlike a blank canvas.
    assert distinct_colours(canvas) > 50
    probe.screenshot("harness-render")
    assert probe.console_errors == []


def test_slider_drag_round_trip(probe):
    slider = probe.notebook.locator(".widget-slider")
    handle = slider.locator(".noUi-handle")
    track = slider.locator(".noUi-base").bounding_box()
    line = probe.notebook.locator(".bqplot.figure path.line")
    path_before = line.get_attribute("d")
    readout = slider.locator(".widget-readout")
    assert readout.inner_text() == "10"

    target_fraction = 0.7
    start = box_centre(handle)
    end = (track["x"] + target_fraction * track["width"], start[1])
    probe.drag(start, end)

    # The readout follows the mouse in the browser...
    expected = round(target_fraction * SLIDER_MAX)
    shown = int(readout.inner_text())
    assert abs(shown - expected) <= 2, f"slider shows {shown}, dragged to about {expected}"
    # ...the kernel sees the value and redraws the line, whose new path comes back.
    probe.page.wait_for_function("([path, old]) => path.getAttribute('d') !== old",
                                 arg=[line.element_handle(), path_before])
    assert probe.run_code("print(slider.value)") == str(shown)
    probe.screenshot("harness-slider")
    assert probe.error_outputs() == []
    assert probe.console_errors == []


def test_brush_drag_on_webgl_figure_reaches_kernel(probe):
    area = probe.notebook.locator(".bqplot.figure .plotarea_events")
    area.scroll_into_view_if_needed()
    box = area.bounding_box()
    (fx0, fy0), (fx1, fy1) = (0.2, 0.25), (0.6, 0.75)  # fractions of the plot, from top left
    probe.drag((box["x"] + fx0 * box["width"], box["y"] + fy0 * box["height"]),
               (box["x"] + fx1 * box["width"], box["y"] + fy1 * box["height"]))
    selected = json.loads(probe.run_code(
        "import json; print(json.dumps([None if v is None else sorted(map(float, v)) "
        "for v in (brush.selected_x, brush.selected_y)]))"))
    assert selected[0] is not None, "the brush was drawn but its selection never reached the kernel"
    # Scales: x 0..1 across the plot, y -1..1 upwards.
    assert selected[0] == pytest.approx([fx0, fx1], abs=0.02)
    assert selected[1] == pytest.approx(sorted([1 - 2 * fy0, 1 - 2 * fy1]), abs=0.04)
    probe.screenshot("harness-brush")
    assert probe.console_errors == []
