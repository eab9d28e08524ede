"""SkyView: one channel (or a moment map) of a cube on the sky, with colour bar, beam and regions.

The image shown is a display copy: the plane is read from the memory map
(nothing else is read) and block-averaged to the plot's size on screen (at most
``max_display_size``) by `cubeloupe.analysis.display.display_image`; limits and
stretch come from the same module; large images travel as 8-bit PNG (`SkyImage`).
Drawing tools turn mouse gestures into region shapes, which are handed to whoever
listens (`on_shape`), usually a `RegionList`.
"""

import html
import re

import ipywidgets as w
import numpy as np
from bqplot import Axis, ColorScale, Figure, LinearScale, Lines, Scatter
from bqplot_image_gl import ImageGL
from bqplot_image_gl.interacts import BrushRectangleSelector, MouseInteraction
from traitlets import Bool, Dict, Enum, Float, Int, List, TraitError, Unicode, observe, validate

from cubeloupe.analysis import (
    STRETCHES, beam_anchor, beam_outline, BeamError, centred_limits, contour_paths, cube_beam, CubeShapeError,
    display_image, display_limits, nice_ticks, prefetch_channels, sky_axes, sky_position, stretched,
    tick_decimals,
)

from ._look import DIVERGING_RAMPS, RAMPS, blank_color, row
from .sky_image import SkyImage
from .path_tool import PathTool  # the path tool of position–velocity slices (#18)
from .mark_update import SPARE_MARKS
from .status import StatusLine

__all__ = ["SkyView", "TOOLS", "MAX_WIDTH"]

# Sizes on screen (px). The plot area's longer side is MAX_PLOT_SIDE; the figure adds fixed margins
# for the tick labels and axis titles, so the plot area, not the whole figure, gets the map's shape.
MAX_PLOT_SIDE = 300
FIGURE_MARGIN = {"top": 8, "bottom": 42, "left": 58, "right": 10}
COLORBAR_WIDTH = 88
# The sky column beside the spectrum in a ~1 000 px notebook: figure plus colour bar.
MAX_WIDTH = 460
# Room one tick label needs along each axis (px), so narrow maps get fewer ticks.
X_TICK_ROOM = 48
Y_TICK_ROOM = 36

# Maps of a signed quantity, drawn in a diverging ramp centred on zero: the velocity field.
_DIVERGING_MAP = re.compile(r"^moment 1\b(?!.*error)")

_POINTER_HINT = ("<span style='color:#829ab1;font-size:90%'>Point at the image to read the sky position and "
                 "value.{centre}</span>")

# Drawing tools: value -> (button label, icon, tooltip)
TOOLS = {
    "look": ("Look", "eye", "Move the pointer over the image to read sky position and value"),
    "box": ("Box", "square-o", "Drag a box on the image to make a rectangular region"),
    "oval": ("Oval", "circle-o", "Drag from corner to corner, as with the box: the elliptical region fills "
                                 "the box you drag"),
    "outline": ("Outline", "pencil", "Click corner after corner to outline a free-form region; "
                                     "double-click (or press Close outline) to finish it"),
    "pixel": ("Pixel", "crosshairs", "Click one pixel to make a one-pixel region"),
    "path": ("Path", "share-alt", "Click point after point along a path for a position–velocity slice; "
                                  "double-click (or press Finish path) to end it"),
}


class SkyView(w.VBox):
    """The sky image of one spectral window: a channel or a moment map.

    Parameters
    ----------
    cubes : list of SpectralCube
        One cube per spectral window; `window` picks the one shown.
    status : StatusLine, optional
        Where problems are reported (a new one by default).

    Attributes
    ----------
    window, channel, source, stretch, palette, lower_percentile, upper_percentile,
    vmin, vmax, max_display_size, tool, show_beam, contour_source, contour_levels,
    pointer_text, shown_limits, outlines, maps
        See each trait's help.
    """

    window = Int(0, help="Index of the spectral window (cube) shown")
    channel = Int(0, help="Channel of the current window shown when source is 'channel'")
    source = Unicode("channel", help="What the image shows: 'channel' or the name of a map in `maps`")
    maps = Dict(help="Extra 2-D maps that can be shown or contoured, name -> spectral-cube Projection "
                     "(e.g. moment maps of the current window)")
    stretch = Enum(list(STRETCHES), "linear", help="How values map to colours between the limits")
    palette = Enum(list(RAMPS), "ink to sand", help="Colour ramp of channels and of moment 0 and 2 maps")
    velocity_palette = Enum(list(DIVERGING_RAMPS), "sea to rust",
                            help="Diverging colour ramp of a velocity field (moment 1), its middle at zero")
    shown_ramp = Unicode("", help="Name of the colour ramp in use (read-only)")
    centre_text = Unicode("", help="Sky position of the map centre the axes count offsets from (read-only)")
    plot_size = List(help="Width and height of the plot area in screen pixels (read-only)")
    lower_percentile = Float(0.5, help="Percentile of the shown pixels used as the lower limit when vmin is None "
                                       "(a velocity field: the larger of the two percentiles' sizes sets limits "
                                       "symmetric about zero)")
    upper_percentile = Float(99.5, help="Percentile of the shown pixels used as the upper limit when vmax is None")
    vmin = Float(None, allow_none=True, help="Fixed lower colour limit in data units (None: percentile)")
    vmax = Float(None, allow_none=True, help="Fixed upper colour limit in data units (None: percentile)")
    shown_limits = List(help="The colour limits in use, [low, high] in data units (read-only)")
    max_display_size = Int(512, help="Largest side of the image sent to the browser, in display pixels; "
                                     "bigger planes are block-averaged, to the plot's size on screen")
    display_factor = Int(1, help="Block size of the last block-averaging (1: full resolution; read-only)")
    tool = Enum(list(TOOLS), "look", help="What a mouse gesture on the image does")
    show_beam = Bool(True, help="Draw the beam (FWHM ellipse) to scale, on the data near the lower left corner")
    contour_source = Unicode("", help="Name of a map in `maps` drawn as contours ('' for none)")
    contour_levels = List(Float(), help="Contour levels in the contour map's units (empty: five levels "
                                        "between its percentile limits)")
    pointer_text = Unicode("", help="Sky position and value under the pointer, as shown")
    outlines = List(Dict(), help="Region outlines to draw, dicts with name, color, x, y (pixel coordinates)")
    polygon_vertices = List(help="Vertices [x, y] of the outline being drawn with the 'outline' tool")

    def __init__(self, cubes, status=None, **kwargs):
        self.cubes = list(cubes)
        self.status = status or StatusLine()
        self._shape_callbacks = []
        self._beam_cache = {}
        self._outline_key = None
        self._outline = None
        self._anchor_cache = {}
        self._plane = None
        self._image_shown = None
        self._setting_ramp_choice = False
        self.axes = None
        self._build()
        kwargs.setdefault("layout", w.Layout(max_width=f"{MAX_WIDTH}px"))
        super().__init__(children=[self._toolbar, w.HBox([self.figure, self.colorbar]), self._pointer,
                                   self._display_bar], **kwargs)
        self.add_class("cubeloupe-sky-view")
        self._refresh_geometry()
        self._apply_ramp()
        self._redraw()

    # ------------------------------------------------------------- building
    def _build(self):
        self.x_scale = LinearScale(allow_padding=False)
        self.y_scale = LinearScale(allow_padding=False)
        self.color_scale = ColorScale(min=0.0, max=1.0, colors=RAMPS[self.palette])
        scales = {"x": self.x_scale, "y": self.y_scale}
        self.image = SkyImage(image=np.zeros((2, 2), np.float32), scales={**scales, "image": self.color_scale})
        self.contour_mark = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], stroke_width=1, opacities=[0.8])
        self.beam_mark = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], fill="inside",
                               fill_colors=["#ffffff"], fill_opacities=[0.35], stroke_width=1.5)
        # Outline marks waiting, empty, for the regions to come (see _draw_outlines).
        self.outline_marks, self._outline_pool = [], [self._outline_mark(scales) for _ in range(SPARE_MARKS)]
        self.draft_mark = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], line_style="dashed")
        self.draft_points = Scatter(x=[], y=[], scales=scales, colors=["#ffffff"], default_size=24)
        # The oval being dragged: the ellipse filling the dragged box, drawn by the kernel.
        self.oval_draft = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], stroke_width=2)
        # The axes read world offsets: scales of their own whose ends are the offsets of the pixel
        # scales' ends (kept in step by _sync_axes); image and gestures stay in pixels.
        self.x_axis_scale = LinearScale(allow_padding=False)
        self.y_axis_scale = LinearScale(allow_padding=False)
        self.x_axis = Axis(scale=self.x_axis_scale, label="x (pixel)", grid_lines="none", label_offset="32px")
        self.y_axis = Axis(scale=self.y_axis_scale, side="left", label="y (pixel)", grid_lines="none",
                           label_offset="42px")
        self.figure = Figure(marks=[self.image, self.contour_mark, *self._outline_pool, self.beam_mark,
                                    self.draft_mark, self.draft_points, self.oval_draft],
                             axes=[self.x_axis, self.y_axis], padding_x=0, padding_y=0,
                             fig_margin=dict(FIGURE_MARGIN),
                             layout=w.Layout(width="364px", height="364px"))
        self.figure.add_class("cubeloupe-sky-figure")
        for scale in (self.x_scale, self.y_scale):
            scale.observe(self._sync_axes, names=["min", "max"])
        # Colour bar: the ramp drawn against data values, so its ticks read in data units.
        self._bar_scale = LinearScale(allow_padding=False)
        self.bar_image = ImageGL(image=np.zeros((2, 1), np.float32),
                                  scales={"x": LinearScale(min=0, max=1), "y": self._bar_scale,
                                          "image": self.color_scale}, x=(0, 1))
        self._bar_axis = Axis(scale=self._bar_scale, side="right", label="", label_offset="46px",
                              grid_lines="none")
        self.colorbar = Figure(marks=[self.bar_image], axes=[self._bar_axis], padding_x=0, padding_y=0,
                               fig_margin={"top": FIGURE_MARGIN["top"], "bottom": FIGURE_MARGIN["bottom"],
                                           "left": 4, "right": COLORBAR_WIDTH - 18},
                               layout=w.Layout(width=f"{COLORBAR_WIDTH}px", min_width=f"{COLORBAR_WIDTH}px",
                                               height="364px"))
        self.colorbar.add_class("cubeloupe-colorbar")

        self.pointer = MouseInteraction(x_scale=self.x_scale, y_scale=self.y_scale,
                                        events=["click", "dblclick", "mousemove", "mouseleave"])
        self.pointer.on_msg(self._on_pointer_msg)
        self.box_selector = BrushRectangleSelector(x_scale=self.x_scale, y_scale=self.y_scale,
                                                   color="#ffffff")
        # bqplot-image-gl's ellipse selector grows from the centre; the oval is dragged corner to corner
        # like the box instead (issue #17): a box selector whose box is drawn faintly, and the ellipse
        # filling it drawn by the kernel while dragging.
        self.oval_selector = BrushRectangleSelector(x_scale=self.x_scale, y_scale=self.y_scale,
                                                    color="#ffffff",
                                                    style={"opacity": 0.06, "cursor": "crosshair"},
                                                    border_style={"fill": "none", "stroke-width": "1px",
                                                                  "opacity": 0.5, "stroke-dasharray": "3,3"})
        for selector, kind in ((self.box_selector, "box"), (self.oval_selector, "oval")):
            selector.observe(lambda change, kind=kind: self._on_brush(kind, change), names=["brushing"])
        self.oval_selector.observe(self._on_oval_drag, names=["selected_x", "selected_y"])
        self.figure.interaction = self.pointer

        self.tool_buttons = w.ToggleButtons(
            options=[(label, key) for key, (label, _, _) in TOOLS.items()],
            tooltips=[tip for _, _, tip in TOOLS.values()],
            icons=[icon for _, icon, _ in TOOLS.values()],
            style=w.ToggleButtonsStyle(button_width="auto"))
        self.tool_buttons.add_class("cubeloupe-region-tools")
        w.link((self.tool_buttons, "value"), (self, "tool"))
        self.close_outline_button = w.Button(description="Close outline", icon="check",
                                             tooltip="Finish the free-form outline you are clicking",
                                             layout=w.Layout(width="130px", display="none"))
        self.close_outline_button.add_class("cubeloupe-close-outline")
        self.close_outline_button.on_click(lambda _: self.finish_outline())
        self.stretch_choice = w.Dropdown(options=list(STRETCHES), description="Stretch",
                                         tooltip="How brightness maps to colour: 'linear' is even; "
                                                 "'sqrt', 'log' and 'asinh' bring out faint emission",
                                         style={"description_width": "initial"}, layout=w.Layout(width="150px"))
        self.stretch_choice.add_class("cubeloupe-stretch")
        w.link((self.stretch_choice, "value"), (self, "stretch"))
        self.palette_choice = w.Dropdown(options=list(RAMPS), description="Colours",
                                         tooltip="Colour ramp used for the image; a velocity field (moment 1) "
                                                 "has ramps of its own, centred on zero velocity. Blanked pixels "
                                                 "are drawn grey",
                                         style={"description_width": "initial"}, layout=w.Layout(width="170px"))
        self.palette_choice.add_class("cubeloupe-palette")
        self.palette_choice.observe(self._on_palette_choice, names="value")
        self.limits_slider = w.FloatRangeSlider(value=(0.5, 99.5), min=0, max=100, step=0.5,
                                                description="Colour limits (percentile)", readout_format=".1f",
                                                tooltip="The darkest and brightest colours are set at these "
                                                        "percentiles of the pixels shown; pixels outside are "
                                                        "drawn at the ends of the colour ramp",
                                                style={"description_width": "initial"},
                                                layout=w.Layout(width="auto", flex="1 1 auto", min_width="280px",
                                                                max_width=f"{MAX_WIDTH}px"))
        self.limits_slider.add_class("cubeloupe-limits")
        self.limits_slider.observe(self._on_limits_slider, names="value")
        self.beam_toggle = w.Checkbox(value=True, description="Beam", indent=False,
                                      tooltip="Draw the beam (the resolution, FWHM) to scale, on the data near "
                                              "the lower left corner",
                                      layout=w.Layout(width="64px"))
        self.beam_toggle.add_class("cubeloupe-beam-toggle")
        w.link((self.beam_toggle, "value"), (self, "show_beam"))
        self.source_choice = w.Dropdown(options=[("channel", "channel")], description="Show",
                                        tooltip="Show the current channel, or a moment map once one has been made",
                                        style={"description_width": "initial"}, layout=w.Layout(width="175px"))
        self.source_choice.add_class("cubeloupe-source")
        w.link((self.source_choice, "value"), (self, "source"))
        self.contour_choice = w.Dropdown(options=[("none", "")], description="Contours",
                                         tooltip="Draw contour lines of a moment map over the image",
                                         style={"description_width": "initial"}, layout=w.Layout(width="180px"))
        self.contour_choice.add_class("cubeloupe-contours")
        w.link((self.contour_choice, "value"), (self, "contour_source"))
        self.path_tool = PathTool(self)
        self.figure.marks = [*self.figure.marks, *self.path_tool.marks]
        self._toolbar = w.VBox([
            row([self.tool_buttons, self.close_outline_button, self.path_tool], flex_flow="row wrap"),
            row([self.source_choice, self.contour_choice, self.beam_toggle], flex_flow="row wrap"),
        ])
        self._display_bar = w.VBox([
            row([self.stretch_choice, self.palette_choice], flex_flow="row wrap"),
            row([self.limits_slider], flex_flow="row wrap"),
        ])
        self._pointer = w.HTML(value=_POINTER_HINT.format(centre=""), layout=w.Layout(min_height="20px"))
        self._pointer.add_class("cubeloupe-pointer")

    # ------------------------------------------------------------ validation
    @property
    def cube(self):
        """The cube of the current window."""
        return self.cubes[self.window]

    @validate("window")
    def _valid_window(self, proposal):
        return self.check_window(proposal["value"])

    def check_window(self, value):
        """Return ``value`` if it numbers one of the cubes, else raise TraitError saying which exist."""
        if not 0 <= value < len(self.cubes):
            raise TraitError(f"window {value} does not exist; there are {len(self.cubes)} window(s), "
                             f"numbered 0 to {len(self.cubes) - 1}")
        return value

    @validate("channel")
    def _valid_channel(self, proposal):
        n = self.cubes[self.window].shape[0]
        return int(min(max(proposal["value"], 0), n - 1))

    @validate("source", "contour_source")
    def _valid_source(self, proposal):
        value = proposal["value"]
        allowed = set(self.maps) | ({"channel"} if proposal["trait"].name == "source" else {""})
        if value not in allowed:
            raise TraitError(f"{value!r} cannot be shown; choose from {sorted(allowed)}")
        return value

    @validate("lower_percentile", "upper_percentile")
    def _valid_percentile(self, proposal):
        value = float(proposal["value"])
        if not 0 <= value <= 100:
            raise TraitError(f"{proposal['trait'].name} must be between 0 and 100; got {value}")
        return value

    @validate("max_display_size")
    def _valid_size(self, proposal):
        if proposal["value"] < 16:
            raise TraitError(f"max_display_size must be at least 16 pixels; got {proposal['value']}")
        return proposal["value"]

    # -------------------------------------------------------------- reacting
    @observe("window")
    def _on_window(self, change):
        with self.hold_trait_notifications():
            self.channel = min(self.channel, self.cube.shape[0] - 1)
            self.maps = {}
        self._refresh_geometry()
        self._redraw()

    @observe("maps")
    def _on_maps(self, change):
        names = list(self.maps)
        if self.source not in names and self.source != "channel":
            self.source = "channel"
        if self.contour_source not in names:
            self.contour_source = ""
        self.source_choice.options = [("channel", "channel")] + [(n, n) for n in names]
        self.contour_choice.options = [("none", "")] + [(n, n) for n in names]
        self._redraw()

    @observe("channel")
    def _on_channel(self, change):
        if self.source == "channel":
            self._redraw()
        elif self.show_beam:
            self._draw_beam()

    @observe("source", "stretch", "lower_percentile", "upper_percentile", "vmin", "vmax", "max_display_size")
    def _on_look(self, change):
        if change.name == "source":
            self._apply_ramp()
        self._redraw()

    @observe("palette", "velocity_palette")
    def _on_palette(self, change):
        self._apply_ramp()

    @property
    def diverging(self):
        """True when the map shown is a velocity field, drawn in a diverging ramp (centred on zero when it spans zero)."""
        return bool(_DIVERGING_MAP.match(self.source))

    def _apply_ramp(self):
        name = self.velocity_palette if self.diverging else self.palette
        options = list(DIVERGING_RAMPS if self.diverging else RAMPS)
        self._setting_ramp_choice = True
        try:
            if list(self.palette_choice.options) != options:
                self.palette_choice.options = options
            self.palette_choice.value = name
        finally:
            self._setting_ramp_choice = False
        colours = (DIVERGING_RAMPS if self.diverging else RAMPS)[name]
        with self.figure.hold_sync():
            self.color_scale.colors = colours
            self.figure.background_style = {"fill": blank_color(name)}
        self.shown_ramp = name

    def _on_palette_choice(self, change):
        if self._setting_ramp_choice or change.new is None:
            return
        if self.diverging:
            self.velocity_palette = change.new
        else:
            self.palette = change.new

    @observe("show_beam")
    def _on_show_beam(self, change):
        self._draw_beam()

    @observe("contour_source", "contour_levels")
    def _on_contours(self, change):
        with self.status.guard("drawing contours"):
            self._draw_contours()

    @observe("outlines")
    def _on_outlines(self, change):
        self._draw_outlines()

    @observe("tool")
    def _on_tool(self, change):
        self.oval_draft.x, self.oval_draft.y = [], []
        self.figure.interaction = {"box": self.box_selector, "oval": self.oval_selector}.get(self.tool,
                                                                                             self.pointer)
        self.close_outline_button.layout.display = "" if self.tool == "outline" else "none"
        if change.old == "outline":
            self.polygon_vertices = []

    @observe("polygon_vertices")
    def _on_vertices(self, change):
        xy = np.asarray(self.polygon_vertices, dtype=float).reshape(-1, 2)
        with self.figure.hold_sync():
            self.draft_mark.x, self.draft_mark.y = xy[:, 0], xy[:, 1]
            self.draft_points.x, self.draft_points.y = xy[:, 0], xy[:, 1]

    def _on_limits_slider(self, change):
        lo, hi = change.new
        if lo < hi:
            with self.hold_trait_notifications():
                self.lower_percentile, self.upper_percentile = lo, hi

    # --------------------------------------------------------------- drawing
    def _refresh_geometry(self):
        ny, nx = self.cube.shape[1:]
        try:
            self.axes = sky_axes(self.cube.wcs, (ny, nx))
        except CubeShapeError:
            self.axes = None  # no sky projection: the axes stay in pixels
        if self.axes is not None:
            width, height = self.axes.plot_size(MAX_PLOT_SIDE)
        else:
            factor = MAX_PLOT_SIDE / max(nx, ny)
            width, height = max(int(round(nx * factor)), 1), max(int(round(ny * factor)), 1)
        # The figure is the plot area plus fixed margins, so the plot area has the map's shape on the
        # sky (square sky pixels) whatever the margins.
        figure_width = width + FIGURE_MARGIN["left"] + FIGURE_MARGIN["right"]
        figure_height = height + FIGURE_MARGIN["top"] + FIGURE_MARGIN["bottom"]
        self.plot_size = [width, height]
        with self.figure.hold_sync():
            self.figure.layout.width = self.figure.layout.min_width = f"{figure_width}px"
            self.figure.layout.height = f"{figure_height}px"
            with self.figure.hold_trait_notifications():  # both bounds checked together (min > max in between)
                self.figure.min_aspect_ratio = self.figure.max_aspect_ratio = figure_width / figure_height
            self.x_scale.min, self.x_scale.max = -0.5, nx - 0.5
            self.y_scale.min, self.y_scale.max = -0.5, ny - 0.5
            self.image.x, self.image.y = (-0.5, nx - 0.5), (-0.5, ny - 0.5)
        self.colorbar.layout.height = f"{figure_height}px"
        self.centre_text = self.axes.centre_text if self.axes is not None else ""
        centre = f" Axes: offsets from {self.centre_text}." if self.centre_text else ""
        self._pointer_hint = _POINTER_HINT.format(centre=html.escape(centre))
        if not self.pointer_text:
            self._pointer.value = self._pointer_hint
        self._sync_axes()
        self._beam_cache.clear()
        self._anchor_cache.clear()
        self._outline_key = None

    def _sync_axes(self, change=None):
        """Give the axes the world offsets of the pixel scales' ends, and ticks that fit."""
        if self.axes is None or None in (self.x_scale.min, self.x_scale.max, self.y_scale.min, self.y_scale.max):
            return
        width, height = self.plot_size or (MAX_PLOT_SIDE, MAX_PLOT_SIDE)
        dx, _ = self.axes.offsets([self.x_scale.min, self.x_scale.max], self.axes.centre_pixel[1])
        _, dy = self.axes.offsets(self.axes.centre_pixel[0], [self.y_scale.min, self.y_scale.max])
        with self.figure.hold_sync():
            for axis, scale, ends, room in ((self.x_axis, self.x_axis_scale, dx.value, width // X_TICK_ROOM),
                                            (self.y_axis, self.y_axis_scale, dy.value, height // Y_TICK_ROOM)):
                low, high = sorted(float(v) for v in ends)
                # East is to the left: the offset falls along x, so the axis scale runs reversed.
                scale.reverse = bool(ends[0] > ends[1])
                scale.min, scale.max = low, high
                ticks = nice_ticks(low, high, max(int(room), 2))
                # The format first: the browser writes the labels when the values arrive (else one step behind).
                axis.tick_format = f".{tick_decimals(ticks)}f"
                axis.tick_values = ticks
            self.x_axis.label, self.y_axis.label = self.axes.labels

    def current_plane(self):
        """The full-resolution 2-D values shown now (a channel read from the memory map, or a map).

        Returns
        -------
        values : ndarray (ny, nx)
        unit : astropy unit
        """
        if self.source == "channel":
            # One plane from the memory map; spectral-cube's unmasked_data slices lazily.
            plane = self.cube.unmasked_data[self.channel, :, :]
            return np.asarray(plane.value), plane.unit
        projection = self.maps[self.source]
        return np.asarray(projection.value), projection.unit

    def _display_size(self, shape):
        """Largest side of the image sent: the plot's size on screen, at most ``max_display_size`` (#20)."""
        longest = max(shape)
        # The largest block size that keeps the image at least as large as the plot: the screen loses nothing.
        factor = max(1, longest // max(int(max(self.plot_size or [MAX_PLOT_SIDE])), 1))
        return min(self.max_display_size, -(-longest // factor))

    def _redraw(self):
        with self.status.guard("drawing the sky image"):
            values, unit = self.current_plane()
            self._plane = values
            image, factor = display_image(values, self._display_size(values.shape))
            self._image_shown = image
            lo, hi = display_limits(image, self.lower_percentile, self.upper_percentile, vmin=self.vmin, vmax=self.vmax)
            if self.diverging and lo < 0 < hi:  # a velocity field about zero; one off zero keeps its own range (#17)
                lo, hi = centred_limits(image, self.lower_percentile, self.upper_percentile, vmin=self.vmin,
                                        vmax=self.vmax)
            colour = stretched(image, lo, hi, self.stretch)
            ramp = stretched(np.linspace(lo, hi, 256, dtype=np.float32)[:, None], lo, hi, self.stretch)
            # One message per widget (#20): the browser redraws the colour bar's axis once, not per trait.
            with self.figure.hold_sync(), self.colorbar.hold_sync(), self.bar_image.hold_sync(), \
                    self._bar_scale.hold_sync(), self._bar_axis.hold_sync():
                self.image.image = colour
                self.bar_image.image = ramp
                self.bar_image.y = (lo, hi)
                self._bar_scale.min, self._bar_scale.max = lo, hi
                self._bar_axis.label = str(unit) if str(unit) else "value"
            with self.hold_trait_notifications():
                self.display_factor = factor
                self.shown_limits = [lo, hi]
            self._draw_beam()
            if self.contour_source:
                self._draw_contours()
        if self.source == "channel":
            # Stepping or playing through the band reads the neighbours next: start reading them now.
            prefetch_channels(self.cube, [self.channel - 1, self.channel + 1])

    def _beam(self):
        if self.window not in self._beam_cache:
            try:
                self._beam_cache[self.window] = cube_beam(self.cube)
            except BeamError:
                self._beam_cache[self.window] = None
        beam = self._beam_cache[self.window]
        if beam is not None and np.ndim(beam.major) > 0:  # radio_beam.Beams: one per channel
            beam = beam[self.channel]
        return beam

    def _draw_beam(self):
        beam = self._beam() if self.show_beam else None
        if beam is None:
            self.beam_mark.x, self.beam_mark.y = [], []
            return
        size = max(beam.major.to_value("deg") / abs(self.cube.wcs.celestial.pixel_scale_matrix[1, 1]), 1.0)
        center = self._beam_anchor(size)
        key = (self.window, beam.major.value, beam.minor.value, beam.pa.value, center)
        if self._outline_key != key:
            self._outline = beam_outline(beam, self.cube.wcs, center)
            self._outline_key = key
        else:
            if len(self.beam_mark.x):
                return
        x, y = self._outline
        with self.figure.hold_sync():
            self.beam_mark.x, self.beam_mark.y = x, y

    def _beam_anchor(self, size):
        """Where the beam goes: on the data, near the lower left (placed on the display image)."""
        image = self._image_shown
        if image is None:
            return (size / 2 + 1.0, size / 2 + 1.0)
        factor = self.display_factor
        finite = np.isfinite(image)
        key = (image.shape, factor, round(size, 3), hash(np.packbits(finite).tobytes()))
        if key not in self._anchor_cache:
            x, y = beam_anchor(image, size / factor)
            # A block's centre sits (factor - 1) / 2 full-resolution pixels from its first pixel.
            offset = (factor - 1) / 2
            self._anchor_cache = {key: (x * factor + offset, y * factor + offset)}
        return self._anchor_cache[key]

    def _draw_contours(self):
        if not self.contour_source:
            self.contour_mark.x, self.contour_mark.y = [], []
            return
        projection = self.maps[self.contour_source]
        image, factor = display_image(np.asarray(projection.value), self._display_size(projection.shape))
        levels = list(self.contour_levels)
        if not levels:
            lo, hi = display_limits(image, 5, 99.5)
            levels = list(np.linspace(lo, hi, 7)[1:-1])
        pieces = contour_paths(image, levels, x_scale=factor, y_scale=factor)
        # A block's centre sits (factor - 1) / 2 full-resolution pixels from its first pixel.
        offset = (factor - 1) / 2
        xs = [np.concatenate([x + offset, [np.nan]]) for x, _ in pieces]
        ys = [np.concatenate([y + offset, [np.nan]]) for _, y in pieces]
        with self.figure.hold_sync():
            self.contour_mark.x = np.concatenate(xs) if xs else []
            self.contour_mark.y = np.concatenate(ys) if ys else []

    def _draw_outlines(self):
        # Marks are reused and updated in place (#20): a new mark list makes the browser lay out the figure anew.
        pool, items, grown = self._outline_pool, list(self.outlines), len(self.outlines) > len(self._outline_pool)
        # Grown a few at a time: a new mark is a new model and a new mark list for the browser, so the
        # next regions' outlines find an empty mark waiting (#20).
        while len(pool) < len(items) + (SPARE_MARKS if grown else 0):
            pool.append(self._outline_mark({"x": self.x_scale, "y": self.y_scale}))
        with self.figure.hold_sync():
            for k, mark in enumerate(pool):
                item = items[k] if k < len(items) else {"x": [], "y": [], "color": mark.colors[0], "name": ""}
                with mark.hold_sync():
                    mark.x, mark.y = np.asarray(item["x"], float), np.asarray(item["y"], float)
                    mark.colors, mark.labels = [item["color"]], [item["name"]]
        self.outline_marks = pool[:len(items)]
        if grown:
            self.figure.marks = [self.image, self.contour_mark, *pool, self.beam_mark, self.draft_mark,
                                 self.draft_points, self.oval_draft, *self.path_tool.marks]

    @staticmethod
    def _outline_mark(scales):
        # An outline only: a fill would tint the data (#17).
        return Lines(x=[], y=[], scales=scales, colors=["#ffffff"], stroke_width=2.5, display_legend=False,
                     fill="none")

    # ------------------------------------------------------------- gestures
    def on_shape(self, callback, remove=False):
        """Register ``callback(kind, params)`` called when a gesture completes a shape.

        ``kind`` is 'box' or 'oval' (params: x, y (two corners each, pixels), angle (deg)),
        'outline' (params: vertices [[x, y], ...]), 'pixel' (params: x, y) or 'path' (params: vertices
        [[x, y], ...], width, width_unit 'pixels' or 'arcsec'; see `PathTool`).
        """
        if remove:
            self._shape_callbacks.remove(callback)
        else:
            self._shape_callbacks.append(callback)

    def _emit(self, kind, params):
        for callback in list(self._shape_callbacks):
            callback(kind, params)

    def emit_shape(self, kind, params):
        """Hand a completed shape to every `on_shape` listener (used by gesture tools of their own modules)."""
        self._emit(kind, params)

    def _on_oval_drag(self, change):
        """Draw the ellipse filling the box being dragged with the oval tool."""
        sx, sy = self.oval_selector.selected_x, self.oval_selector.selected_y
        if sx is None or sy is None or len(sx) != 2 or len(sy) != 2:
            self.oval_draft.x, self.oval_draft.y = [], []
            return
        t = np.linspace(0, 2 * np.pi, 61)
        cx, cy = (sx[0] + sx[1]) / 2, (sy[0] + sy[1]) / 2
        a, b = abs(sx[1] - sx[0]) / 2, abs(sy[1] - sy[0]) / 2
        with self.figure.hold_sync():
            self.oval_draft.x, self.oval_draft.y = cx + a * np.cos(t), cy + b * np.sin(t)

    def _on_brush(self, kind, change):
        # Heavy work (region spectra) waits until the mouse is released.
        if change.new:
            return
        selector = self.box_selector if kind == "box" else self.oval_selector
        if selector.selected_x is None or selector.selected_y is None:
            self.oval_draft.x, self.oval_draft.y = [], []
            return
        params = {"x": [float(v) for v in selector.selected_x], "y": [float(v) for v in selector.selected_y],
                  "angle": float(getattr(selector, "rotate", 0.0) or 0.0)}
        with self.status.guard("making a region from the drawn shape"):
            self._emit(kind, params)
        # The region's own outline shows the shape now; a selector left on the image would
        # move under the next drag instead of starting a new region.
        selector.selected_x = None
        selector.selected_y = None
        self.oval_draft.x, self.oval_draft.y = [], []

    def _on_pointer_msg(self, _, content, buffers=None):
        event = content.get("event")
        domain = content.get("domain") or {}
        if event == "mouseleave":
            self.pointer_text = ""
            self._pointer.value = self._pointer_hint
            return
        if "x" not in domain or "y" not in domain:
            return
        x, y = float(domain["x"]), float(domain["y"])
        if event == "mousemove":
            self.read_pointer(x, y)
        elif event == "click" and self.tool == "pixel":
            with self.status.guard("making a one-pixel region"):
                self._emit("pixel", {"x": int(round(x)), "y": int(round(y))})
        elif event == "click" and self.tool == "outline":
            self.polygon_vertices = self.polygon_vertices + [[x, y]]
        elif event == "dblclick" and self.tool == "outline":
            self.finish_outline()
        elif event in ("click", "dblclick") and self.tool == "path":
            self.path_tool.handle(event, x, y)

    def finish_outline(self):
        """Close the free-form outline being clicked and hand it over as a region."""
        vertices = [v for i, v in enumerate(self.polygon_vertices) if i == 0 or v != self.polygon_vertices[i - 1]]
        with self.status.guard("closing the outline"):
            if len(vertices) < 3:
                self.status.warn("An outline needs at least three corners: click more points on the image.")
                return
            self.polygon_vertices = []
            self._emit("outline", {"vertices": vertices})

    def read_pointer(self, x, y):
        """Show the sky position and value at pixel (x, y); returns the text."""
        ny, nx = self.cube.shape[1:]
        i, j = int(round(x)), int(round(y))
        if not (0 <= i < nx and 0 <= j < ny) or self._plane is None:
            self.pointer_text = ""
            self._pointer.value = self._pointer_hint
            return ""
        _, where = sky_position(self.cube.wcs, x, y)
        unit = self.maps[self.source].unit if self.source != "channel" else self.cube.unit
        value = self._plane[j, i]
        text = f"{where}  (x={i}, y={j})  value {value:.4g} {unit}"
        self.pointer_text = text
        self._pointer.value = (f"<span style='font-family:var(--jp-code-font-family,monospace);font-size:90%'>"
                               f"{html.escape(text)}</span>")
        return text
