"""PVPanel: the suite's "Position–velocity" tab — the slice along the last path drawn on the sky (#18).

The slice is `cubeloupe.analysis.pv_slice` along the path of the sky view's
path tool (its vertices in the pixels of the window it was drawn on, its
width in pixels or arcsec), over the whole band or only the line window. It
is drawn with offset along the path (arcsec) across and velocity or observed
frequency up, following the spectrum's axis choice (velocity when the
spectrum shows velocity, else observed frequency); the catalog lines shown as
markers on the spectrum are drawn as horizontal lines where they fall
(`marker_positions`), and a colour bar in the cube's unit stands beside it.
The path's width is the path tool's (linked both ways: a new width re-slices
the path), and the strip it averages is drawn on the sky either side of the
path (`path_band`). `PVSlice.write` saves it as FITS.
"""

import astropy.units as u
import ipywidgets as w
import numpy as np
from bqplot import Axis, ColorScale, Figure, Label, LinearScale, Lines
from bqplot_image_gl import ImageGL
from traitlets import Bool, Enum, Float, Instance, Int, List, TraitError, dlink, link, observe, validate

from cubeloupe.analysis import (
    CubeloupeError, RegionError, display_axis, display_limits, marker_positions, path_band, pv_slice,
)

from ._look import MARKER_COLOR, RAMPS, blank_color, row
from .status import StatusLine

__all__ = ["PVPanel", "TAB_TITLE"]

TAB_TITLE = "Position–velocity"
AXES = ("velocity", "frequency")
WIDTH_UNITS = ("pixels", "arcsec")
_RAMP = "ink to sand"
_FIGURE_HEIGHT = 380
_BAR_WIDTH = 96  # px: the colour bar, its ticks and its unit

_NO_PATH = ("No path yet: pick the Path tool above the sky image, click point after point along the path, "
            "then double-click (or press Finish path).")


class PVPanel(w.VBox):
    """The position–velocity slice along the last path drawn on the sky.

    Parameters
    ----------
    loupe : Loupe
        The suite: its sky view's path tool, cubes, line window, velocity frame, axis choice and line markers.
    tabs : ipywidgets.Tab, optional
        The suite's tabs: the panel adds itself as a tab titled "Position–velocity", and is brought to the
        front when a path is finished.

    Attributes
    ----------
    path, path_window, width, width_unit, only_line_window, axis, slice, y_values, marker_names, marker_values,
    limits
        See each trait's help.
    """

    path = List(help="Vertices [x, y] of the path (pixels of the window it was drawn on; empty: none)")
    path_window = Int(0, help="The spectral window (cube) the path was drawn on")
    width = Float(1.0, help="Width averaged across the path, in width_unit (the path tool's width)")
    width_unit = Enum(list(WIDTH_UNITS), "pixels", help="Unit of width: 'pixels' or 'arcsec'")
    only_line_window = Bool(True, help="Slice only the line window's channels (when one is marked), else the band")
    axis = Enum(list(AXES), "frequency", help="Vertical axis: 'velocity' or 'frequency' (observed), following "
                                               "the spectrum's axis choice")
    slice = Instance(object, allow_none=True, help="The last PVSlice (read-only)")
    y_values = Instance(np.ndarray, allow_none=True, help="The slice's channels on the vertical axis (read-only)")
    marker_names = List(help="Catalog lines drawn as horizontal lines (read-only)")
    marker_values = List(help="Where they are drawn on the vertical axis (read-only)")
    limits = List(help="The colour bar's [low, high] in the cube's unit (read-only)")

    def __init__(self, loupe, tabs=None, **kwargs):
        self.loupe = loupe
        self.tabs = tabs
        self.status = StatusLine()
        self._quiet = False
        self._build()
        super().__init__(children=self._parts(with_figure=tabs is None), **kwargs)
        self.add_class("cubeloupe-pv-panel")
        loupe.sky_view.on_shape(self._on_shape)
        # The path tool's width is the slice's, both ways; a path set here (a session, code) is drawn on the sky.
        tool = loupe.sky_view.path_tool
        link((self, "width"), (tool, "width"))
        link((self, "width_unit"), (tool, "width_unit"))
        dlink((self, "path"), (tool, "path"))
        loupe.observe(self._on_frame, names=["axis_kind", "z", "rest_frequency", "convention", "velocity_offset"])
        loupe.observe(self._on_channels, names=["line_window"])
        loupe.line_overlay.observe(self._on_frame, names=["lines"])
        self.axis = self._suite_axis()
        self.hint.value = self._hint(_NO_PATH)
        if tabs is not None:
            tabs.children = (*tabs.children, self)
            self._tab_index = len(tabs.children) - 1
            tabs.set_title(self._tab_index, TAB_TITLE)
            tabs.observe(self._on_tab, names=["selected_index"])

    def _parts(self, with_figure):
        return [row([self.range_choice], flex_flow="row wrap"), self.hint, self.status,
                *([self.figure_row, self.caption] if with_figure else []),
                row([self.name, self.save_button, self.overwrite], flex_flow="row wrap", grid_gap="6px")]

    def _on_tab(self, change):
        # The figure joins the page when its tab is first shown: drawn in a hidden tab, bqplot would lay
        # it out at zero width (negative sizes, console errors).
        if change.new == self._tab_index and self.figure_row not in self.children:
            self.children = self._parts(with_figure=True)

    def _build(self):
        self.x_scale = LinearScale(allow_padding=False)
        self.y_scale = LinearScale(allow_padding=False)
        self.color_scale = ColorScale(min=0.0, max=1.0, colors=RAMPS[_RAMP])
        scales = {"x": self.x_scale, "y": self.y_scale}
        self.image = ImageGL(image=np.full((2, 2), np.nan, np.float32), scales={**scales, "image": self.color_scale})
        self.marker_lines = Lines(x=[], y=[], scales=scales, colors=[MARKER_COLOR], stroke_width=1.5,
                                  line_style="dashed")
        self.marker_labels = Label(x=[], y=[], scales=scales, text=[], colors=[MARKER_COLOR], default_size=12,
                                   x_offset=4, y_offset=-4)
        self.x_axis = Axis(scale=self.x_scale, label="offset along the path (arcsec)", grid_lines="none",
                           label_offset="32px")
        self.y_axis = Axis(scale=self.y_scale, side="left", label="", grid_lines="none", label_offset="52px")
        self.figure = Figure(marks=[self.image, self.marker_lines, self.marker_labels],
                             axes=[self.x_axis, self.y_axis], padding_x=0, padding_y=0,
                             fig_margin={"top": 10, "bottom": 44, "left": 70, "right": 16},
                             background_style={"fill": blank_color(_RAMP)},
                             layout=w.Layout(width="560px", height=f"{_FIGURE_HEIGHT}px"))
        self.figure.add_class("cubeloupe-pv-figure")
        # Colour bar: the ramp drawn against data values, so its ticks read in the cube's unit.
        self.bar_scale = LinearScale(allow_padding=False, min=0.0, max=1.0)
        self.bar_image = ImageGL(image=np.linspace(0.0, 1.0, 256, dtype=np.float32)[:, None],
                                 scales={"x": LinearScale(min=0.0, max=1.0), "y": self.bar_scale,
                                         "image": self.color_scale}, x=(0.0, 1.0), y=(0.0, 1.0))
        self.bar_axis = Axis(scale=self.bar_scale, side="right", label="", label_offset="50px", grid_lines="none")
        self.colorbar = Figure(marks=[self.bar_image], axes=[self.bar_axis], padding_x=0, padding_y=0,
                               fig_margin={"top": 10, "bottom": 44, "left": 4, "right": _BAR_WIDTH - 20},
                               layout=w.Layout(width=f"{_BAR_WIDTH}px", min_width=f"{_BAR_WIDTH}px",
                                               height=f"{_FIGURE_HEIGHT}px"))
        self.colorbar.add_class("cubeloupe-pv-colorbar")
        self.figure_row = w.HBox([self.figure, self.colorbar], layout=w.Layout(max_width="100%",
                                                                                overflow="hidden"))
        self.range_choice = w.ToggleButtons(options=[("line window", True), ("whole band", False)],
                                            description="Channels",
                                            tooltips=["Slice only the channels of the line window (when marked)",
                                                      "Slice every channel of the band"],
                                            style={"description_width": "initial", "button_width": "110px"})
        self.range_choice.add_class("cubeloupe-pv-range")
        w.link((self.range_choice, "value"), (self, "only_line_window"))
        self.hint = w.HTML()
        self.caption = w.HTML()
        self.caption.add_class("cubeloupe-pv-caption")
        self.name = w.Text(value="cubeloupe_pv", description="File name",
                           tooltip="Name of the FITS file written, without extension (a folder may be included)",
                           style={"description_width": "initial"}, layout=w.Layout(width="300px"))
        self.overwrite = w.Checkbox(value=False, description="Replace existing file", indent=False,
                                    tooltip="Allow writing over a file of the same name")
        self.save_button = w.Button(description="Save FITS", icon="download", disabled=True,
                                    layout=w.Layout(width="110px"),
                                    tooltip="Write the slice as a FITS image (offset and spectral axes, beam)")
        self.save_button.add_class("cubeloupe-pv-save")
        self.save_button.on_click(lambda _: self._save_clicked())

    @staticmethod
    def _hint(text):
        return f"<span style='color:#486581;font-size:90%'>{text}</span>"

    def _suite_axis(self):
        return "velocity" if self.loupe.axis_kind == "velocity" else "frequency"

    def _rest(self):
        return self.loupe.rest_frequency * u.GHz if self.loupe.rest_frequency > 0 else None

    # ------------------------------------------------------------ inputs
    def _on_shape(self, kind, params):
        if kind != "path":
            return
        width = params.get("width", 1.0)
        if params.get("width_unit") == "arcsec":
            width = width * u.arcsec
        self.set_path(params["vertices"], width=width, window=self.loupe.window)
        if self.tabs is not None and self.slice is not None:
            self.tabs.selected_index = self._tab_index

    def set_path(self, vertices, width=None, window=None):
        """Slice along ``vertices`` (pixel [x, y] pairs of spectral window ``window``, the shown one by default).

        ``width`` is in pixels (a number) or an angle (Quantity); the current width when not given. Problems
        are shown in the panel's status line. Returns the PVSlice (None on a problem).
        """
        self._quiet = True
        try:
            self.path_window = self.loupe.window if window is None else int(window)
            if isinstance(width, u.Quantity):
                self.width_unit, self.width = "arcsec", float(width.to_value(u.arcsec))
            elif width is not None:
                self.width_unit, self.width = "pixels", float(width)
            self.path = [list(map(float, v)) for v in vertices]
        finally:
            self._quiet = False
        return self.refresh()

    @validate("width")
    def _valid_width(self, proposal):
        value = float(proposal["value"])
        if not value > 0:
            raise TraitError(f"the path's width must be above 0; got {value}")
        return value

    @observe("path", "width", "width_unit", "path_window", "only_line_window")
    def _on_path(self, change):
        if not self._quiet:
            self.refresh()

    def _on_channels(self, change):
        if self.only_line_window and self.path:
            self.refresh()

    def _on_frame(self, change):
        self.axis = self._suite_axis()
        if self.slice is not None:
            with self.status.guard("drawing the position–velocity slice"):
                self._draw()

    @observe("axis")
    def _on_axis(self, change):
        if self.slice is not None:
            with self.status.guard("drawing the position–velocity slice"):
                self._draw()

    # ----------------------------------------------------------- slicing
    def inputs(self):
        """The arguments of `pv_slice` for the current path and the suite's state.

        Raises
        ------
        RegionError
            No path yet.
        """
        if not self.path:
            raise RegionError(_NO_PATH)
        loupe = self.loupe
        window = (u.Quantity(loupe.line_window, u.GHz) if self.only_line_window and loupe.line_window else None)
        return {"cube": loupe.cubes[self.path_window], "path": self.path,
                "width": self.width * u.arcsec if self.width_unit == "arcsec" else self.width, "window": window,
                "rest_frequency": self._rest(), "z": loupe.z, "convention": loupe.convention}

    def refresh(self):
        """Take the slice again along the current path and draw it; returns the PVSlice (None on a problem)."""
        result = None
        self._draw_band()
        if not self.path:  # nothing to slice yet: the hint says what to do
            self.slice = None
            self.image.image = np.full((2, 2), np.nan, np.float32)
            self.save_button.disabled = True
            self.hint.value = self._hint(_NO_PATH)
            return None
        with self.status.guard("taking the position–velocity slice"):
            kwargs = self.inputs()
            result = pv_slice(**kwargs)
            self.slice = result
            self._draw()
            span = "the line window" if kwargs["window"] is not None else "the whole band"
            self.status.info(f"Slice of {result.data.shape[1]} positions ({result.offset[-1].value:.1f} arcsec) "
                             f"by {result.data.shape[0]} channels over {span}, {result.width:g} pixel(s) wide.")
        if result is None:
            self.slice = None
            self.image.image = np.full((2, 2), np.nan, np.float32)
        self.save_button.disabled = self.slice is None
        self.hint.value = self._hint(_NO_PATH if not self.path else
                                     "The path's first point (the larger dot on the sky) is offset 0.")
        return result

    def _draw_band(self):
        """The strip the slice averages, drawn on the sky either side of the path (when wider than a pixel)."""
        tool = self.loupe.sky_view.path_tool
        band = None
        if self.path and 0 <= self.path_window < len(self.loupe.cubes):
            try:
                band = path_band(self.loupe.cubes[self.path_window], self.path, self.inputs()["width"])
            except CubeloupeError:
                band = None  # the slice's own message says what is wrong
        tool.show_band(*(band if band is not None else ([], [])))

    def _vertical(self, pv):
        """The slice's channels on the vertical axis, its unit and label."""
        loupe = self.loupe
        if self.axis == "velocity":
            values = display_axis(pv.spectral_axis, "velocity", rest_frequency=self._rest(), z=loupe.z,
                                  convention=loupe.convention)
            return values.to_value(u.km / u.s), f"velocity (km/s, {loupe.convention})"
        values = display_axis(pv.spectral_axis, "observed frequency")
        return values.to_value(u.GHz), "observed frequency (GHz)"

    def _markers(self, low, high):
        """Names and vertical positions of the suite's catalog line markers inside [low, high]."""
        loupe = self.loupe
        lines = loupe.line_overlay.lines
        if loupe.velocity_only or lines is None or not len(lines):
            return [], []
        kind = "velocity" if self.axis == "velocity" else "observed frequency"
        values = marker_positions(u.Quantity(lines["rest_frequency"], u.GHz), kind, z=loupe.z,
                                  velocity_offset=loupe.velocity_offset * u.km / u.s, convention=loupe.convention,
                                  reference_rest_frequency=self._rest()).value
        inside = np.flatnonzero((values >= low) & (values <= high))
        return [str(lines["name"][i]) for i in inside], [float(values[i]) for i in inside]

    def _draw(self):
        pv = self.slice
        y, label = self._vertical(pv)
        data = np.asarray(pv.data.value, dtype=np.float32)
        if y[0] > y[-1]:  # rows bottom to top in increasing y
            y, data = y[::-1], data[::-1]
        offset = pv.offset.to_value(u.arcsec)
        x_step = offset[1] - offset[0] if offset.size > 1 else 1.0
        y_step = (y[-1] - y[0]) / (y.size - 1) if y.size > 1 else 1.0
        x_edges = (float(offset[0] - x_step / 2), float(offset[-1] + x_step / 2))
        y_edges = (float(y[0] - y_step / 2), float(y[-1] + y_step / 2))
        unit = pv.data.unit.to_string() or "value"
        if np.isfinite(data).any():
            low, high = display_limits(data, 0.5, 99.5)
            if not low < high:  # a flat slice: a scale one unit wide about its value
                low, high = low - 0.5, high + 0.5
            self.caption.value = self._hint(f"Colours: linear from {low:.3g} to {high:.3g} {unit} (0.5 and 99.5 "
                                            f"percentiles); dashed: catalog lines at the spectrum's z and shift.")
        else:
            low, high = 0.0, 1.0
            self.caption.value = self._hint("The path crosses only blank pixels.")
        names, values = self._markers(*y_edges)
        with self.hold_trait_notifications():
            self.y_values = y
            self.marker_names, self.marker_values = names, values
            self.limits = [float(low), float(high)]
        # The colour scale spans the data limits: the image is sent as data values, and the bar reads in them.
        with self.colorbar.hold_sync(), self.bar_image.hold_sync(), self.bar_scale.hold_sync(), \
                self.bar_axis.hold_sync(), self.color_scale.hold_sync():
            self.color_scale.min, self.color_scale.max = float(low), float(high)
            self.bar_image.image = np.linspace(low, high, 256, dtype=np.float32)[:, None]
            self.bar_image.y = (float(low), float(high))
            self.bar_scale.min, self.bar_scale.max = float(low), float(high)
            self.bar_axis.label = unit
        with self.figure.hold_sync():
            self.image.image = np.clip(data, low, high)  # beyond the limits: the ramp's end colours; NaN stays
            self.image.x, self.image.y = x_edges, y_edges
            self.x_scale.min, self.x_scale.max = x_edges
            self.y_scale.min, self.y_scale.max = y_edges
            self.y_axis.label = label
            with self.marker_lines.hold_sync():  # one message a mark: x and y of the same length
                self.marker_lines.x = [list(x_edges) for _ in values] if values else []
                self.marker_lines.y = [[v, v] for v in values] if values else []
            with self.marker_labels.hold_sync():
                self.marker_labels.x = [x_edges[0]] * len(values)
                self.marker_labels.y = values
                self.marker_labels.text = names

    # ------------------------------------------------------------- files
    def export(self, path, overwrite=False):
        """Write the slice as FITS with `PVSlice.write` (atomic, never replacing unless asked); returns the path."""
        if self.slice is None:
            raise CubeloupeError("there is no position–velocity slice yet; draw a path on the sky with the Path tool")
        return self.slice.write(path, overwrite=overwrite)

    def _save_clicked(self):
        with self.status.guard("writing the position–velocity slice"):
            stem = self.name.value.strip() or "cubeloupe_pv"
            written = self.export(f"{stem}.fits", overwrite=self.overwrite.value)
            self.status.info(f"Written: {written}")
