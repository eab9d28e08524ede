"""ChannelMapPanel: the suite's "Channel maps" tab — a grid of channel images over the line window (#18).

The figure is `cubeloupe.analysis.channel_maps` over the suite's line window,
in its velocity frame (rest frequency, z, convention), for the window shown
on the sky; only the line window's channels are read. It is made and drawn to
PNG in a background thread, so the notebook stays responsive, and shown as an
image; PNG and PDF files are written by `cubeloupe.analysis.write_figure`
(atomic, never replacing a file unless asked).
"""

import io
import threading

import astropy.units as u
import ipywidgets as w
from traitlets import Bool, Instance, Int, TraitError, Unicode, observe, validate

from cubeloupe.analysis import CubeloupeError, SpectralAxisError, channel_maps, write_figure

from ._look import row
from .status import StatusLine

__all__ = ["ChannelMapPanel", "TAB_TITLE"]

TAB_TITLE = "Channel maps"
SHOWN_DPI = 90  # 16 panels make a ~920 px wide picture, about the tab's width in a notebook (narrower: scaled down)
MAX_PANELS = 64

_NO_WINDOW = ("No line window yet: choose 'Line window' above the spectrum and drag across the line, then press "
              "Make channel maps.")


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
    n, average, label_in, running, state, figure, panels, png
        See each trait's help.
    """

    n = Int(16, help="Number of panels (fewer when the window holds fewer channels)")
    average = Bool(True, help="Each panel the mean of its run of channels (True) or one channel of every k (False)")
    label_in = Unicode("velocity", help="Panel labels in 'velocity' (km/s, when it can be formed) or 'frequency'")
    running = Bool(False, help="True while the figure is being made (read-only)")
    state = Unicode("idle", help="idle, running, done or failed")
    figure = Instance(object, allow_none=True, help="The last matplotlib Figure from channel_maps (read-only)")
    panels = Instance(object, allow_none=True, help="The ChannelPanels the figure shows (read-only)")
    png = Instance(bytes, allow_none=True, help="The figure drawn as PNG, as shown (read-only)")

    def __init__(self, loupe, tabs=None, **kwargs):
        self.loupe = loupe
        self.status = StatusLine()
        self._thread = None
        self._made_for = None
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
                              tooltip=f"Write the channel maps as a {kind.upper()} file for papers")
            button.add_class(f"cubeloupe-channel-map-save-{kind}")
            button.on_click(lambda _, kind=kind: self._save_clicked(kind))
            self.save_buttons.append(button)
        self.hint = w.HTML()
        # Shown at its own size (not stretched by the column), scaled down only where the tab is narrower.
        self.image = w.Image(format="png", layout=w.Layout(max_width="100%", width="auto", height="auto",
                                                           align_self="flex-start", display="none"))
        self.image.add_class("cubeloupe-channel-map-image")
        super().__init__(children=[
            row([self.make_button, self.n_input, self.label_choice], flex_flow="row wrap", grid_gap="8px"),
            row([self.mode_choice], flex_flow="row wrap"),
            self.hint, self.status, self.image,
            row([self.name, *self.save_buttons, self.overwrite], flex_flow="row wrap", grid_gap="6px"),
        ], **kwargs)
        self.add_class("cubeloupe-channel-map-panel")
        loupe.observe(self._show_hint, names=["line_window", "window", "z", "rest_frequency", "convention"])
        self._show_hint()
        if tabs is not None:
            tabs.children = (*tabs.children, self)
            tabs.set_title(len(tabs.children) - 1, TAB_TITLE)

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
            if self.figure is not None and self._made_for != self._frame():
                text += " The maps shown were made for another window or velocity frame: press Make channel maps."
        self.hint.value = f"<span style='color:#486581;font-size:90%'>{text}</span>"

    def _frame(self):
        loupe = self.loupe
        return (list(loupe.line_window), loupe.window, loupe.z, loupe.rest_frequency, loupe.convention)

    # ----------------------------------------------------------- making
    def inputs(self):
        """The keyword arguments of `channel_maps` for the suite's current state.

        Raises
        ------
        SpectralAxisError
            No line window yet.
        """
        loupe = self.loupe
        if not loupe.line_window:
            raise SpectralAxisError(_NO_WINDOW)
        return {"cube": loupe.cube, "window": u.Quantity(loupe.line_window, u.GHz), "n": self.n,
                "average": self.average,
                "rest_frequency": loupe.rest_frequency * u.GHz if loupe.rest_frequency > 0 else None,
                "z": loupe.z, "convention": loupe.convention,
                "spectral_unit": None if self.label_in == "velocity" else u.GHz}

    def make(self, wait=False):
        """Make the channel maps in a background thread (or wait for them); returns the thread or None."""
        if self.running:
            self.status.warn("Channel maps are being made; wait for them.")
            return None
        if not self.loupe.line_window:
            self.status.warn("Channel maps need a line window: choose 'Line window' above the spectrum and drag "
                             "across the line first.")
            return None
        kwargs = None
        with self.status.guard("preparing the channel maps"):
            kwargs = self.inputs()
        if kwargs is None:
            return None
        with self.hold_trait_notifications():
            self.running = True
            self.state = "running"
        self.make_button.disabled = True
        self.status.info("Making the channel maps…")
        self._made_for = self._frame()
        self._thread = threading.Thread(target=self._work, args=(kwargs,), name="cubeloupe-channel-maps",
                                        daemon=True)
        self._thread.start()
        if wait:
            self.wait()
        return self._thread

    def _work(self, kwargs):
        outcome = "failed"
        with self.status.guard("making the channel maps"):
            figure = channel_maps(**kwargs)
            picture = io.BytesIO()
            figure.savefig(picture, format="png", dpi=SHOWN_DPI)
            panels = figure.channel_panels
            with self.hold_trait_notifications():
                self.figure, self.panels, self.png = figure, panels, picture.getvalue()
            self.image.value = self.png
            self.image.layout.display = ""
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
        """Block until the figure being made is done; True if it is."""
        if self._thread is None:
            return True
        self._thread.join(timeout)
        return not self._thread.is_alive()

    # ----------------------------------------------------------- files
    def export(self, path, overwrite=False, **savefig):
        """Write the last channel maps to ``path`` (PNG or PDF by its extension); returns the path.

        Raises
        ------
        CubeloupeError
            No channel maps yet; or as `write_figure` (a file already there, a bad folder or name).
        """
        if self.figure is None:
            raise CubeloupeError("there are no channel maps yet; press Make channel maps first")
        return write_figure(self.figure, path, overwrite=overwrite, **savefig)

    def _save_clicked(self, kind):
        with self.status.guard(f"writing the channel maps as {kind.upper()}"):
            stem = self.name.value.strip() or "cubeloupe_channel_maps"
            written = self.export(f"{stem}.{kind}", overwrite=self.overwrite.value,
                                  **({"dpi": 200} if kind == "png" else {}))
            self.status.info(f"Written: {written}")

    @observe("figure")
    def _enable_saving(self, change):
        for button in self.save_buttons:
            button.disabled = self.figure is None
