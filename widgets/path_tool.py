"""PathTool: the sky view's "Path" gesture — click vertices, double-click (or Finish path) to end (#18).

The path is a polyline in the sky view's pixel coordinates (0-based x, y,
as `cubeloupe.analysis.pv_slice` takes it) with a width across it in pixels
or arcsec. While it is being clicked it is drawn dashed; a finished path
stays drawn on the sky, solid, with its first vertex (offset zero of a
position–velocity slice) marked, and is handed to the sky view's listeners
as a ``"path"`` shape (see `SkyView.on_shape`). When the slice averages a
strip wider than one pixel, thin lines either side of the path show the strip
(`show_band`, given the edges by the position–velocity tab from `path_band`).
"""

import ipywidgets as w
import numpy as np
from bqplot import Lines, Scatter
from traitlets import Enum, Float, List, TraitError, validate

__all__ = ["PathTool", "PATH_COLOR", "WIDTH_UNITS"]

# Our pick: a warm orange kept apart from the region colours and from both image ramps' ends.
PATH_COLOR = "#ff9f1c"
WIDTH_UNITS = ("pixels", "arcsec")


class PathTool(w.HBox):
    """Controls and marks of the path tool of one `SkyView` (shown while its tool is "path").

    Parameters
    ----------
    sky_view : SkyView
        The view whose figure the path is drawn on and whose listeners receive it.

    Attributes
    ----------
    vertices : list of [x, y]
        The path being clicked (pixels).
    path : list of [x, y]
        The last finished path (pixels; empty for none), drawn on the sky.
    width : float
        Width averaged across the path, in ``width_unit``.
    width_unit : {'pixels', 'arcsec'}
    marks : list of bqplot marks
        The draft line, its vertices, the finished path, its start and the strip's edges.
    """

    vertices = List(help="Vertices [x, y] (pixels) of the path being clicked")
    path = List(help="Vertices [x, y] (pixels) of the last finished path, drawn on the sky (empty: none)")
    width = Float(1.0, help="Width averaged across the path, in width_unit (1 pixel: the centre line only)")
    width_unit = Enum(list(WIDTH_UNITS), "pixels", help="Unit of width: 'pixels' or 'arcsec'")

    def __init__(self, sky_view, **kwargs):
        self.sky = sky_view
        scales = {"x": sky_view.x_scale, "y": sky_view.y_scale}
        self.draft_line = Lines(x=[], y=[], scales=scales, colors=[PATH_COLOR], line_style="dashed", stroke_width=2)
        self.draft_points = Scatter(x=[], y=[], scales=scales, colors=[PATH_COLOR], default_size=20)
        self.path_line = Lines(x=[], y=[], scales=scales, colors=[PATH_COLOR], stroke_width=2.5)
        self.path_start = Scatter(x=[], y=[], scales=scales, colors=[PATH_COLOR], default_size=48,
                                  stroke="#ffffff", names=[], display_names=False)
        self.band_lines = Lines(x=[], y=[], scales=scales, colors=[PATH_COLOR], stroke_width=1.0, opacities=[0.9])
        self.marks = [self.band_lines, self.path_line, self.path_start, self.draft_line, self.draft_points]
        self.finish_button = w.Button(description="Finish path", icon="check", layout=w.Layout(width="112px"),
                                      tooltip="End the path you are clicking (or double-click its last point)")
        self.finish_button.add_class("cubeloupe-finish-path")
        self.finish_button.on_click(lambda _: self.finish())
        self.width_input = w.BoundedFloatText(value=1.0, min=0.01, max=10000.0, step=1.0, description="Width",
                                              tooltip="Width averaged across the path for the position–velocity "
                                                      "slice (1 pixel: the centre line only)",
                                              style={"description_width": "initial"},
                                              layout=w.Layout(width="118px"))
        self.width_input.add_class("cubeloupe-path-width")
        w.link((self.width_input, "value"), (self, "width"))
        self.unit_choice = w.Dropdown(options=list(WIDTH_UNITS), value="pixels", layout=w.Layout(width="86px"),
                                      tooltip="Unit of the path's width")
        self.unit_choice.add_class("cubeloupe-path-width-unit")
        w.link((self.unit_choice, "value"), (self, "width_unit"))
        kwargs.setdefault("layout", w.Layout(display="none", align_items="center", grid_gap="4px"))
        super().__init__(children=[self.finish_button, self.width_input, self.unit_choice], **kwargs)
        self.add_class("cubeloupe-path-tool")
        sky_view.observe(self._on_tool, names=["tool"])
        self.observe(self._draw_draft, names=["vertices"])
        self.observe(self._draw_path, names=["path"])

    @validate("width")
    def _valid_width(self, proposal):
        value = float(proposal["value"])
        if not value > 0:
            raise TraitError(f"the path's width must be above 0; got {value}")
        return value

    def _on_tool(self, change):
        self.layout.display = "" if change.new == "path" else "none"
        if change.old == "path":
            self.vertices = []

    def handle(self, event, x, y):
        """A mouse event of the sky view at pixel (x, y): a click adds a vertex, a double-click ends the path."""
        if event == "click":
            self.vertices = self.vertices + [[float(x), float(y)]]
        elif event == "dblclick":
            self.finish()

    def finish(self):
        """End the path being clicked: draw it and hand it to the sky view's listeners as a "path" shape."""
        # A double-click also sends two clicks on the same spot: repeated vertices count once.
        vertices = [v for i, v in enumerate(self.vertices) if i == 0 or v != self.vertices[i - 1]]
        with self.sky.status.guard("ending the path"):
            if len(vertices) < 2:
                self.sky.status.warn("A path needs at least two points: click along the path on the image, "
                                     "then double-click (or press Finish path).")
                return
            self.vertices = []
            self.path = vertices
            self.sky.emit_shape("path", self.shape())

    def shape(self):
        """The finished path as the "path" shape's parameters: vertices, width, width_unit."""
        return {"vertices": [list(v) for v in self.path], "width": self.width, "width_unit": self.width_unit}

    def clear(self):
        """Forget the finished path and the one being clicked."""
        self.vertices = []
        self.path = []
        self.show_band([], [])

    def show_band(self, one_side, other_side):
        """Draw the strip's edges: pixel (x, y) of each path segment's two ends on each side (see `path_band`)."""
        pairs = [np.asarray(side, dtype=float).reshape(-1, 2, 2) for side in (one_side, other_side)]
        pieces = np.concatenate(pairs) if sum(len(p) for p in pairs) else np.empty((0, 2, 2))
        with self.band_lines.hold_sync():
            self.band_lines.x = pieces[:, :, 0] if len(pieces) else []
            self.band_lines.y = pieces[:, :, 1] if len(pieces) else []

    def _draw_draft(self, change=None):
        xy = np.asarray(self.vertices, dtype=float).reshape(-1, 2)
        with self.sky.figure.hold_sync():
            self.draft_line.x, self.draft_line.y = xy[:, 0], xy[:, 1]
            self.draft_points.x, self.draft_points.y = xy[:, 0], xy[:, 1]

    def _draw_path(self, change=None):
        xy = np.asarray(self.path, dtype=float).reshape(-1, 2)
        with self.sky.figure.hold_sync():
            self.path_line.x, self.path_line.y = xy[:, 0], xy[:, 1]
            self.path_start.x, self.path_start.y = xy[:1, 0], xy[:1, 1]
