"""ChannelMapPanel: the suite's "Channel maps" tab — a grid of channel images over the line window (#18).

The panels are `cubeloupe.analysis.channel_panels` over the suite's line
window, in its velocity frame (rest frequency, z, convention), for the window
shown on the sky; only the line window's channels are read. They are made in
a background thread, so the notebook stays responsive, and drawn in one bqplot
figure: the panels side by side in one image (block-averaged to at most
`PANEL_PIXELS` a side by `display_image`), one colour scale for all (the 0.5
and 99.9 percentiles, as `channel_maps` draws them) with its colour bar in the
cube's unit, contours at the same multiples of the panel rms (`contour_paths`;
the negative first level dashed), each panel's velocity or frequency, and the
beam in the lower-left panel.

The figure for papers is `cubeloupe.analysis.channel_maps` of the same
inputs (sky axes in world coordinates), made only when a PNG or PDF file is
written, by `cubeloupe.analysis.write_figure` (atomic, never replacing a file
unless asked). Drawing that matplotlib figure and encoding it as PNG took
most of the tab's time when it was also the picture on screen (#18).
"""

import math
import threading

import astropy.units as u
import ipywidgets as w
import numpy as np
from bqplot import Axis, ColorScale, Figure, Label, LinearScale, Lines
from bqplot_image_gl import ImageGL
from traitlets import Bool, Dict, Instance, Int, TraitError, Unicode, observe, validate

from cubeloupe.analysis import (
    DEFAULT_CONTOURS, CubeloupeError, SpectralAxisError, beam_outline, channel_maps, channel_panels,
    contour_paths, display_image, display_limits, stretched, write_figure,
)

from ._look import RAMPS, blank_color, row
from .sky_image import SkyImage
from .status import StatusLine

__all__ = ["ChannelMapPanel", "TAB_TITLE", "PANEL_PIXELS"]

TAB_TITLE = "Channel maps"
MAX_PANELS = 64
PANEL_PIXELS = 256  # largest side of a panel's image as sent to the browser (block-averaged above it)
_SCREEN_WIDTH = 760  # px of the panels together (4 of 190 px): with the colour bar, inside the tab at 1 440 px
_RAMP = "ink to sand"
_FRAME = "#9fb3c8"
_NEGATIVE = "#bcccdc"

_NO_WINDOW = ("No line window yet: choose 'Line window' above the spectrum and drag across the line, then press "
              "Make channel maps.")


def _label(value, unit):
    text = unit.to_string().replace(" / ", "/")
    return f"{value:.1f} {text}" if unit.is_equivalent(u.km / u.s) else f"{value:.5f} {text}"


def _joined(xs, ys):
    """Contour pieces as one line, apart by NaN, with no NaN at either end (see `ChannelMapPanel._draw`)."""
    x = np.concatenate(xs) if xs else np.empty(0)
    y = np.concatenate(ys) if ys else np.empty(0)
    finite = np.flatnonzero(np.isfinite(x) & np.isfinite(y))
    if not finite.size:
        return {"x": [], "y": []}
    return {"x": x[finite[0]:finite[-1] + 1], "y": y[finite[0]:finite[-1] + 1]}


class ChannelMapPanel(w.VBox):
    """Channel maps of the suite's line window: panels, averaging or every k-th channel, the figure, exports.

    Parameters
    ----------
    loupe : Loupe
        The suite: its line window, rest frequency, z, convention and the window shown on the sky.
    tabs : ipywidgets.Tab, optional
        The suite's tabs: the panel adds itself as a tab titled "Channel maps".

    Attributes
    ----------
    n, average, label_in, running, state, panels, made_with, limits
        See each trait's help.
    """

    n = Int(16, help="Number of panels (fewer when the window holds fewer channels)")
    average = Bool(True, help="Each panel the mean of its run of channels (True) or one channel of every k (False)")
    label_in = Unicode("velocity", help="Panel labels in 'velocity' (km/s, when it can be formed) or 'frequency'")
    running = Bool(False, help="True while the maps are being made (read-only)")
    state = Unicode("idle", help="idle, running, done or failed")
    panels = Instance(object, allow_none=True, help="The ChannelPanels shown (read-only)")
    made_with = Dict(help="What the maps shown were made from (read-only): window, line_window (GHz), n, average, "
                          "label_in, rest_frequency (GHz, 0: the cube's), z, convention; empty: none")
    limits = Instance(tuple, allow_none=True, help="The colour scale's (low, high) in the cube's unit (read-only)")

    def __init__(self, loupe, tabs=None, **kwargs):
        self.loupe = loupe
        self.status = StatusLine()
        self._thread = None
        self._figure = None
        self.n_input = w.IntText(value=16, description="Panels",
                                 tooltip=f"How many images the line window is cut into (1 to {MAX_PANELS})",
                                 style={"description_width": "initial"}, layout=w.Layout(width="120px"))
        self.n_input.add_class("cubeloupe-channel-map-panels")
        self.n_input.observe(self._on_n_input, names="value")
        self.mode_choice = w.ToggleButtons(options=[("mean of each run", True), ("one channel of every k", False)],
                                           tooltips=["Each panel averages its run of consecutive channels",
                                                     "Each panel shows one channel (the middle of its run of k)"],
                                           style={"button_width": "170px"})
        self.mode_choice.add_class("cubeloupe-channel-map-mode")
        w.link((self.mode_choice, "value"), (self, "average"))
        self.label_choice = w.Dropdown(options=["velocity", "frequency"], description="Labels",
                                       tooltip="Label each panel with its velocity or its observed frequency",
                                       style={"description_width": "initial"}, layout=w.Layout(width="160px"))
        self.label_choice.add_class("cubeloupe-channel-map-labels")
        w.link((self.label_choice, "value"), (self, "label_in"))
        self.make_button = w.Button(description="Make channel maps", icon="th-large", button_style="primary",
                                    tooltip="Cut the line window into panels and draw them (only the window's "
                                            "channels are read)", layout=w.Layout(width="180px"))
        self.make_button.add_class("cubeloupe-channel-map-button")
        self.make_button.on_click(lambda _: self.make())
        self.name = w.Text(value="cubeloupe_channel_maps", description="File name",
                           tooltip="Name of the file written, without extension (a folder may be included)",
                           style={"description_width": "initial"}, layout=w.Layout(width="300px"))
        self.overwrite = w.Checkbox(value=False, description="Replace existing file", indent=False,
                                    tooltip="Allow writing over a file of the same name")
        self.save_buttons = []
        for kind in ("png", "pdf"):
            button = w.Button(description=f"Save {kind.upper()}", icon="download", layout=w.Layout(width="110px"),
                              disabled=True,
                              tooltip=f"Write the channel maps as a {kind.upper()} figure for papers (sky axes "
                                      "in world coordinates)")
            button.add_class(f"cubeloupe-channel-map-save-{kind}")
            button.on_click(lambda _, kind=kind: self._save_clicked(kind))
            self.save_buttons.append(button)
        self.hint = w.HTML()
        self.caption = w.HTML()
        self.caption.add_class("cubeloupe-channel-map-caption")
        self._build_figure()
        self._shown = tabs is None
        super().__init__(children=self._parts(), **kwargs)
        self.add_class("cubeloupe-channel-map-panel")
        loupe.observe(self._show_hint, names=["line_window", "window", "z", "rest_frequency", "convention"])
        self._show_hint()
        if tabs is not None:
            tabs.children = (*tabs.children, self)
            self._tab_index = len(tabs.children) - 1
            tabs.set_title(self._tab_index, TAB_TITLE)
            tabs.observe(self._on_tab, names=["selected_index"])

    def _parts(self):
        # The figure joins the page once there are maps and the tab has been shown: drawn in a hidden tab or
        # a hidden box, bqplot would lay it out at zero width (negative sizes, console errors).
        figure = [self.figure_row, self.caption] if self._shown and self.made_with else []
        return [row([self.make_button, self.n_input, self.label_choice], flex_flow="row wrap", grid_gap="8px"),
                row([self.mode_choice], flex_flow="row wrap"), self.hint, self.status, *figure,
                row([self.name, *self.save_buttons, self.overwrite], flex_flow="row wrap", grid_gap="6px")]

    def _on_tab(self, change):
        if change.new == self._tab_index and not self._shown:
            self._shown = True
            self.children = self._parts()

    def _build_figure(self):
        self.x_scale = LinearScale(allow_padding=False, min=0.0, max=1.0)
        self.y_scale = LinearScale(allow_padding=False, min=0.0, max=1.0)
        self.color_scale = ColorScale(min=0.0, max=1.0, colors=RAMPS[_RAMP])
        scales = {"x": self.x_scale, "y": self.y_scale}
        self.image = SkyImage(image=np.full((2, 2), np.nan, np.float32), encoding="png",
                              scales={**scales, "image": self.color_scale})
        self.frames = Lines(x=[], y=[], scales=scales, colors=[_FRAME], stroke_width=1)
        self.negative_contours = Lines(x=[], y=[], scales=scales, colors=[_NEGATIVE], stroke_width=0.8,
                                       line_style="dashed")
        self.contours = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], stroke_width=0.8)
        self.beam = Lines(x=[], y=[], scales=scales, colors=["#ffffff"], stroke_width=1.2)
        self.labels = Label(x=[], y=[], text=[], scales=scales, colors=["#ffffff"], default_size=11,
                            align="start", x_offset=4, y_offset=13)
        self.bar_scale = LinearScale(allow_padding=False, min=0.0, max=1.0)
        self.bar_image = ImageGL(image=np.linspace(0.0, 1.0, 256, dtype=np.float32)[:, None],
                                 scales={"x": LinearScale(min=0.0, max=1.0), "y": self.bar_scale,
                                         "image": ColorScale(min=0.0, max=1.0, colors=RAMPS[_RAMP])},
                                 x=(0.0, 1.0), y=(0.0, 1.0))
        self.bar_axis = Axis(scale=self.bar_scale, side="right", label="", label_offset="50px", grid_lines="none")
        self.figure = self.colorbar = None
        self._figure_size = None
        self.figure_row = w.HBox(layout=w.Layout(max_width="100%", overflow="auto"))
        self._size_figures(_SCREEN_WIDTH, _SCREEN_WIDTH)

    def _size_figures(self, width, height):
        """The figure and its colour bar at ``width`` x ``height`` screen px (new ones when the size changes).

        A bqplot figure already drawn does not lay itself out again when its layout's size changes (the
        colour bar was drawn over the panels): a new size takes new figures, on the same marks.
        """
        if self._figure_size == (width, height):
            return
        old = [f for f in (self.figure, self.colorbar) if f is not None]
        self.figure = Figure(marks=[self.image, self.negative_contours, self.contours, self.beam, self.frames,
                                    self.labels],
                             padding_x=0, padding_y=0, fig_margin={"top": 2, "bottom": 2, "left": 2, "right": 2},
                             background_style={"fill": blank_color(_RAMP)},
                             layout=w.Layout(width=f"{width}px", min_width=f"{width}px", height=f"{height}px"))
        self.figure.add_class("cubeloupe-channel-map-figure")
        self.colorbar = Figure(marks=[self.bar_image], axes=[self.bar_axis], padding_x=0, padding_y=0,
                               fig_margin={"top": 12, "bottom": 12, "left": 4, "right": 76},
                               layout=w.Layout(width="96px", min_width="96px", height=f"{height}px"))
        self.colorbar.add_class("cubeloupe-channel-map-colorbar")
        self.figure_row.children = [self.figure, self.colorbar]
        self._figure_size = (width, height)
        for figure in old:
            figure.close()

    @validate("n")
    def _valid_n(self, proposal):
        value = proposal["value"]
        if not 1 <= value <= MAX_PANELS:
            raise TraitError(f"the number of panels must be 1 to {MAX_PANELS}; got {value}")
        return value

    def _on_n_input(self, change):
        try:
            self.n = change.new
        except TraitError as exc:
            self.status.error(f"Could not use that number of panels: {exc}.")
            self.n_input.value = self.n

    @observe("n")
    def _show_n(self, change):
        self.n_input.value = self.n

    @validate("label_in")
    def _valid_label(self, proposal):
        if proposal["value"] not in ("velocity", "frequency"):
            raise TraitError(f"labels are in 'velocity' or 'frequency'; got {proposal['value']!r}")
        return proposal["value"]

    def _show_hint(self, change=None):
        loupe = self.loupe
        if not loupe.line_window:
            text = _NO_WINDOW
        else:
            low, high = loupe.line_window
            text = (f"Line window {low:.6f}–{high:.6f} GHz (observed), window {loupe.window} of the sky; "
                    f"{loupe.convention} velocities" + (f" from {loupe.velocity_reference}" if
                                                        loupe.velocity_reference else "") +
                    (f" at z = {loupe.z:g}" if loupe.z else "") + ".")
            if self.made_with and self._frame(self.made_with) != self._frame(self.current()):
                text += " The maps shown were made for another window or velocity frame: press Make channel maps."
        self.hint.value = f"<span style='color:#486581;font-size:90%'>{text}</span>"

    @staticmethod
    def _frame(record):
        return [record.get(k) for k in ("window", "line_window", "z", "rest_frequency", "convention")]

    # ----------------------------------------------------------- making
    def current(self):
        """What maps made now would be made from, as a plain dict (see `made_with`)."""
        loupe = self.loupe
        return {"window": int(loupe.window), "line_window": [float(v) for v in loupe.line_window], "n": int(self.n),
                "average": bool(self.average), "label_in": self.label_in,
                "rest_frequency": float(loupe.rest_frequency), "z": float(loupe.z), "convention": loupe.convention}

    def inputs(self, record=None):
        """The keyword arguments of `channel_panels`/`channel_maps` for ``record`` (the suite's current state).

        Raises
        ------
        SpectralAxisError
            No line window.
        """
        record = self.current() if record is None else record
        if not record["line_window"]:
            raise SpectralAxisError(_NO_WINDOW)
        return {"cube": self.loupe.cubes[record["window"]], "window": u.Quantity(record["line_window"], u.GHz),
                "n": record["n"], "average": record["average"],
                "rest_frequency": record["rest_frequency"] * u.GHz if record["rest_frequency"] > 0 else None,
                "z": record["z"], "convention": record["convention"],
                "spectral_unit": None if record["label_in"] == "velocity" else u.GHz}

    def make(self, wait=False, record=None):
        """Make the channel maps in a background thread (or wait for them); returns the thread or None.

        ``record`` (a `made_with` dict, e.g. from a session) makes them from it instead of the suite's state.
        """
        if self.running:
            self.status.warn("Channel maps are being made; wait for them.")
            return None
        if record is None and not self.loupe.line_window:
            self.status.warn("Channel maps need a line window: choose 'Line window' above the spectrum and drag "
                             "across the line first.")
            return None
        kwargs = None
        record = dict(self.current() if record is None else record)
        with self.status.guard("preparing the channel maps"):
            kwargs = self.inputs(record)
        if kwargs is None:
            return None
        with self.hold_trait_notifications():
            self.running = True
            self.state = "running"
        self.make_button.disabled = True
        self.status.info("Making the channel maps…")
        self._thread = threading.Thread(target=self._work, args=(kwargs, record), name="cubeloupe-channel-maps",
                                        daemon=True)
        self._thread.start()
        if wait:
            self.wait()
        return self._thread

    def _work(self, kwargs, record):
        outcome = "failed"
        with self.status.guard("making the channel maps"):
            panels = channel_panels(**kwargs)
            self._draw(panels)
            self._figure = None  # the figure for papers is made from these panels' inputs when a file is written
            with self.hold_trait_notifications():
                self.panels, self.made_with = panels, record
            outcome = "done"
            kind = "mean of" if panels.average else "one channel of"
            self.status.info(f"{len(panels.channels)} panels, each the {kind} its run of channels "
                             f"{panels.channels[0][0]}–{panels.channels[-1][1] - 1}; rms of a panel "
                             f"{panels.rms.value:.3g} {panels.rms.unit.to_string()}.")
        with self.hold_trait_notifications():
            self.running = False
            self.state = outcome
        self.make_button.disabled = False
        self._show_hint()

    def wait(self, timeout=None):
        """Block until the maps being made are done; True if they are."""
        if self._thread is None:
            return True
        self._thread.join(timeout)
        return not self._thread.is_alive()

    # ----------------------------------------------------------- drawing
    def _draw(self, panels):
        """The panels side by side in one image, with contours, labels, beam and colour bar."""
        values = panels.images.value
        count = len(values)
        columns = math.ceil(math.sqrt(count))
        rows = math.ceil(count / columns)
        low, high = display_limits(values, 0.5, 99.9)  # as channel_maps colours its panels
        if not low < high:
            low, high = low - 0.5, high + 0.5
        noise = panels.rms.to_value(panels.images.unit)
        levels = sorted(c * noise for c in DEFAULT_CONTOURS) if np.isfinite(noise) and noise > 0 else []
        shown = [display_image(image, PANEL_PIXELS) for image in values]
        factor = shown[0][1]
        ny, nx = shown[0][0].shape
        gap = max(2, nx // 40)
        width, height = columns * nx + (columns - 1) * gap, rows * ny + (rows - 1) * gap
        mosaic = np.full((height, width), np.nan, np.float32)
        frames_x, frames_y, label_x, label_y, texts = [], [], [], [], []
        positive, negative = ([], []), ([], [])
        for i, (image, _) in enumerate(shown):
            x0, y0 = (i % columns) * (nx + gap), (rows - 1 - i // columns) * (ny + gap)
            mosaic[y0:y0 + ny, x0:x0 + nx] = stretched(image, low, high, "linear")
            frames_x.append([x0 - 0.5, x0 + nx - 0.5, x0 + nx - 0.5, x0 - 0.5, x0 - 0.5])
            frames_y.append([y0 - 0.5, y0 - 0.5, y0 + ny - 0.5, y0 + ny - 0.5, y0 - 0.5])
            label_x.append(x0 - 0.5)
            label_y.append(y0 + ny - 0.5)
            texts.append(_label(panels.centers[i].value, panels.centers.unit))
            if levels and np.isfinite(image).any():
                for j, (x, y) in enumerate(contour_paths(image, [-levels[0]] + levels)):
                    target = negative if j == 0 else positive
                    target[0].extend([x + x0, [np.nan]])
                    target[1].extend([y + y0, [np.nan]])
        beam_x, beam_y = self._beam(panels, factor, (0, 0), (nx, ny))
        with self.hold_trait_notifications():
            self.limits = (float(low), float(high))
        # Screen px per image pixel: a panel at most 190 px a side (or its share of the width); square pixels.
        scale = min(190, _SCREEN_WIDTH // columns) / max(nx, ny)
        self._size_figures(round(width * scale) + 4, round(height * scale) + 4)
        # One message per widget: a mark whose x, y (and text) arrive apart is drawn with mismatched lengths
        # in between (bqplot's 'translate(undefined,...)' and 'NaN' path errors).
        values = [(self.image, {"image": mosaic, "x": (-0.5, width - 0.5), "y": (-0.5, height - 0.5)}),
                  (self.x_scale, {"min": -0.5, "max": width - 0.5}), (self.y_scale, {"min": -0.5, "max": height - 0.5}),
                  (self.frames, {"x": frames_x, "y": frames_y}), (self.beam, {"x": beam_x, "y": beam_y}),
                  (self.labels, {"x": label_x, "y": label_y, "text": texts})]
        # Pieces apart by NaN, none after the last: bqplot places a line's (hidden) label at its last point,
        # and a NaN there gave 'translate(undefined,undefined)' errors in the browser.
        values += [(mark, _joined(xs, ys)) for mark, (xs, ys) in ((self.contours, positive),
                                                                  (self.negative_contours, negative))]
        for widget, traits in values:
            with widget.hold_sync():
                for name, value in traits.items():
                    setattr(widget, name, value)
        with self.colorbar.hold_sync():
            # The mosaic holds colour positions (linear between the limits): the bar's ramp is 0..1 spread over them.
            self.bar_image.image = np.linspace(0.0, 1.0, 256, dtype=np.float32)[:, None]
            self.bar_image.y = (float(low), float(high))
            self.bar_scale.min, self.bar_scale.max = float(low), float(high)
            self.bar_axis.label = panels.images.unit.to_string() or "value"
        contour_text = (f"contours -{DEFAULT_CONTOURS[0]:g}, " + ", ".join(f"{c:g}" for c in DEFAULT_CONTOURS) +
                        f" x rms ({noise:.3g} {panels.images.unit.to_string()}; the negative one dashed)"
                        if levels else "no contours (no finite rms)")
        self.caption.value = (f"<span style='color:#486581;font-size:90%'>Colours: linear from {low:.3g} to "
                              f"{high:.3g} {panels.images.unit.to_string()} (0.5 and 99.9 percentiles of all "
                              f"panels); {contour_text}; beam in the lower-left panel. Saved files carry sky axes."
                              + (f" Shown block-averaged {factor} x {factor}." if factor > 1 else "") + "</span>")

    @staticmethod
    def _beam(panels, factor, origin, size):
        """The beam outline in display pixels of the lower-left panel (empty without a beam)."""
        if panels.beam is None:
            return [], []
        x, y = beam_outline(panels.beam, panels.wcs, (0, 0))
        x, y = np.asarray(x) / factor, np.asarray(y) / factor
        # Its lower-left edge 6 % of the panel in from the corner, as channel_maps places it.
        cx = origin[0] + 0.06 * size[0] + np.ptp(x) / 2
        cy = origin[1] + 0.06 * size[1] + np.ptp(y) / 2
        return x + cx, y + cy

    # ----------------------------------------------------------- files
    @property
    def figure_for_files(self):
        """The matplotlib Figure of `channel_maps` for the maps shown (made on first use; None without maps)."""
        if not self.made_with:
            return None
        if self._figure is None:
            self._figure = channel_maps(**self.inputs(self.made_with))
        return self._figure

    def export(self, path, overwrite=False, **savefig):
        """Write the channel maps shown to ``path`` (PNG or PDF by its extension) with `write_figure`; returns it.

        Raises
        ------
        CubeloupeError
            No channel maps yet; or as `write_figure` (a file already there, a bad folder or name).
        """
        if not self.made_with:
            raise CubeloupeError("there are no channel maps yet; press Make channel maps first")
        return write_figure(self.figure_for_files, path, overwrite=overwrite, **savefig)

    def _save_clicked(self, kind):
        with self.status.guard(f"writing the channel maps as {kind.upper()}"):
            stem = self.name.value.strip() or "cubeloupe_channel_maps"
            written = self.export(f"{stem}.{kind}", overwrite=self.overwrite.value,
                                  **({"dpi": 200} if kind == "png" else {}))
            self.status.info(f"Written: {written}")

    @observe("made_with")
    def _enable_saving(self, change):
        for button in self.save_buttons:
            button.disabled = not self.made_with
        if bool(change.old) != bool(change.new):
            self.children = self._parts()
