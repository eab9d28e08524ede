"""MomentPanel: make moment 0/1/2 maps off the kernel's main thread, with progress and a stop button.

The maps come from `cubeloupe.analysis.moment_maps`, run in a background
thread so the notebook stays responsive; its ``progress`` and ``cancel``
hooks drive the progress bar and the stop button.
"""

import threading

import astropy.units as u
import ipywidgets as w
import numpy as np
from traitlets import Bool, Dict, Float, Instance, Int, TraitError, Unicode, observe, validate

from cubeloupe.analysis import (DEFAULT_SIGNIFICANCE, CancelledComputation, moment_maps, significant_moments,
                                within_window)

from ._look import format_optional_number, parse_optional_number, row
from .status import StatusLine

__all__ = ["MomentPanel"]

MAP_NAMES = {"m0": "moment 0", "m1": "moment 1", "m2": "moment 2", "m0_error": "moment 0 error", "rms": "rms"}




class MomentPanel(w.VBox):
    """The moment-map action: clip level, start, stop, progress.

    Parameters
    ----------
    inputs : callable
        Returns the keyword arguments of `moment_maps` for the current state (cube, window,
        line_free, order, rest_frequency, z, convention); raises a CubeloupeError when
        something is missing (e.g. no line window).
    status : StatusLine, optional

    Attributes
    ----------
    clip, running, progress, result, maps, window_index, elapsed_message
        See each trait's help.
    """

    clip = Float(None, allow_none=True, help="For moments 1 and 2, keep only channels brighter than this many "
                                             "times the pixel's rms (None: no clipping)")
    significance = Float(DEFAULT_SIGNIFICANCE, help="Moments 1 and 2 are shown where moment 0 exceeds this many "
                                                    "times its own error")
    running = Bool(False, help="True while the maps are being computed (read-only)")
    progress = Float(0.0, help="Fraction of the maps computed, 0 to 1 (read-only)")
    result = Instance(object, allow_none=True, help="The last MomentMaps result (read-only)")
    maps = Dict(help="The last maps by display name ('moment 0', 'moment 1', ...) -> Projection (read-only)")
    window_index = Int(0, help="Spectral window the last maps were made from (read-only)")
    state = Unicode("idle", help="idle, running, done, stopped or failed")

    def __init__(self, inputs, status=None, **kwargs):
        self._inputs = inputs
        self.status = status or StatusLine()
        self._thread = None
        self._cancel = None
        self.clip_input = w.Text(value="", placeholder="no clipping", description="Clip (× rms)",
                                 continuous_update=False,
                                 tooltip="Moments 1 and 2 use only channels brighter than this many times the "
                                         "pixel's noise (measured on the line-free channels). Leave blank to use "
                                         "every channel of the window",
                                 style={"description_width": "initial"}, layout=w.Layout(width="190px"))
        self.clip_input.add_class("cubeloupe-clip-input")
        self.clip_input.observe(self._on_clip_input, names="value")
        self.start_button = w.Button(description="Make moment maps", icon="th", button_style="primary",
                                     layout=w.Layout(width="170px"),
                                     tooltip="Compute moment 0 (integrated intensity), 1 (velocity) and 2 "
                                             "(velocity dispersion) over the line window, after the baseline")
        self.start_button.add_class("cubeloupe-moment-button")
        self.start_button.on_click(lambda _: self.start())
        self.stop_button = w.Button(description="Stop", icon="stop", disabled=True, layout=w.Layout(width="80px"),
                                    tooltip="Stop the moment-map computation")
        self.stop_button.add_class("cubeloupe-moment-stop")
        self.stop_button.on_click(lambda _: self.stop())
        self.significance_input = w.BoundedFloatText(
            value=DEFAULT_SIGNIFICANCE, min=0.1, max=1000, step=0.5, description="Moments 1, 2 where moment 0 >",
            tooltip="Velocity and dispersion are shown only where the integrated intensity exceeds this many times "
                    "its own 1-sigma error; elsewhere they would be noise",
            style={"description_width": "initial"}, layout=w.Layout(width="270px"))
        self.significance_input.add_class("cubeloupe-significance")
        w.link((self.significance_input, "value"), (self, "significance"))
        self.significance_unit = w.HTML("× its error")
        self.bar = w.FloatProgress(value=0.0, min=0.0, max=1.0, layout=w.Layout(width="200px"))
        self.bar.add_class("cubeloupe-moment-progress")
        self.bar_label = w.HTML()
        hint = w.HTML("<span style='color:#829ab1;font-size:90%'>Uses the line window and line-free ranges marked "
                      "on the spectrum, and the baseline order; the sky view shows moment 0 when they are ready "
                      "(the others under <i>Show</i>).</span>")
        super().__init__(children=[row([self.start_button, self.stop_button, self.bar, self.bar_label],
                                       flex_flow="row wrap"),
                                   row([self.clip_input, self.significance_input, self.significance_unit],
                                       flex_flow="row wrap"),
                                   hint, self.status], **kwargs)
        self.add_class("cubeloupe-moment-panel")

    @validate("clip")
    def _valid_clip(self, proposal):
        value = proposal["value"]
        if value is not None and not value > 0:
            raise TraitError(f"clip must be a positive number of rms, or None; got {value}")
        return value

    def _on_clip_input(self, change):
        try:
            self.clip = parse_optional_number(change.new, "The clip level")
        except ValueError as exc:
            self.status.error(f"Could not use that clip level: {exc}")
            self.clip_input.value = format_optional_number(self.clip)

    @observe("clip")
    def _show_clip(self, change):
        if self.clip_input.value.strip() != format_optional_number(self.clip):
            self.clip_input.value = format_optional_number(self.clip)

    # ----------------------------------------------------------- running
    def start(self):
        """Start computing the maps in a background thread; returns the thread (or None)."""
        if self.running:
            self.status.warn("Moment maps are already being made; wait or press Stop.")
            return None
        kwargs = None
        with self.status.guard("preparing the moment maps"):
            kwargs = dict(self._inputs())
        if kwargs is None:
            return None
        window_index = kwargs.pop("window_index", 0)
        self._cancel = threading.Event()
        with self.hold_trait_notifications():
            self.running = True
            self.progress = 0.0
            self.state = "running"
        self.bar.value = 0.0
        self.bar_label.value = "starting…"
        self.start_button.disabled, self.stop_button.disabled = True, False
        self._thread = threading.Thread(target=self._work, args=(kwargs, window_index),
                                        name="cubeloupe-moments", daemon=True)
        self._thread.start()
        return self._thread

    def _report_progress(self, fraction):
        fraction = float(fraction)
        if fraction - self.progress >= 0.01 or fraction >= 1.0:
            self.progress = fraction
            self.bar.value = fraction
            self.bar_label.value = f"{100 * fraction:.0f} %"

    def _work(self, kwargs, window_index):
        outcome = "failed"
        with self.status.guard("making the moment maps"):
            try:
                result = moment_maps(clip=self.clip, progress=self._report_progress, cancel=self._cancel, **kwargs)
            except CancelledComputation:
                outcome = "stopped"
                self.status.info("Moment maps stopped; nothing was changed.")
            else:
                with self.hold_trait_notifications():
                    self.window_index = window_index
                    self.result = result
                    self.maps = self._shown_maps(result)
                outcome = "done"
                self.status.info(f"Moment maps ready ({result.n_channels} channels in the window): the sky shows "
                                 f"moment 0; moments 1 and 2 where moment 0 > {self.significance:g} × its error.")
        with self.hold_trait_notifications():
            self.running = False
            self.state = outcome
        self.bar_label.value = {"done": "done", "stopped": "stopped", "failed": "failed"}[outcome]
        self.start_button.disabled, self.stop_button.disabled = False, True

    def _shown_maps(self, result):
        """The maps by display name, moments 1 and 2 kept where moment 0 is significant and moment 1 in the window."""
        maps = {label: getattr(result, key) for key, label in MAP_NAMES.items()
                if getattr(result, key, None) is not None}
        m1, m2 = result.m1, result.m2
        if result.m0_error is not None:
            kept = significant_moments(result, self.significance)
            m1, m2 = kept.m1, kept.m2
        maps[MAP_NAMES["m1"]], maps[MAP_NAMES["m2"]] = within_window(m1, m2, result.window)
        return maps

    @observe("significance")
    def _on_significance(self, change):
        if self.result is not None:
            with self.status.guard("masking moments 1 and 2"):
                self.maps = self._shown_maps(self.result)

    def stop(self):
        """Ask the running computation to stop (it stops at the next block)."""
        if self._cancel is not None and self.running:
            self._cancel.set()

    def wait(self, timeout=None):
        """Block until the running computation finishes; True if it has."""
        if self._thread is None:
            return True
        self._thread.join(timeout)
        return not self._thread.is_alive()
