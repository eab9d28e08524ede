"""SmoothingChoice: how the region spectra are smoothed for display and for measurement.

None, Hanning over n channels, a boxcar of n channels, a Gaussian of a FWHM
in channels, or rebinning by n channels; plus the user's statement that the
delivered spectra are already Hanning-smoothed (as many correlators do
online), so that the errors count that correlation too. Smoothing is done by
`cubeloupe.analysis.smooth_spectrum` and `with_channel_correlation`; the
spectra they return carry their channel noise correlation, which the
measurement errors then use (`cubeloupe.analysis.correlated_measurement_table`).
The unsmoothed spectrum stays drawn, faint, behind the smoothed one (the
"Show unsmoothed" switch hides it).
"""

import astropy.units as u
import ipywidgets as w
import numpy as np
from traitlets import Bool, Dict, Enum, Float, observe

from cubeloupe.analysis import CubeloupeError, smooth_spectrum, with_channel_correlation

from ._look import row
from .status import StatusLine

__all__ = ["SmoothingChoice", "KERNEL_LABELS"]

#: Kernel -> (label in the menu, label of its width, default width, tooltip of the width).
KERNEL_LABELS = {
    "none": ("none", "", 1.0, ""),
    "hanning": ("Hanning", "n", 3.0, "Channels under the Hanning window (odd, 3 or more); 3 is [1/4, 1/2, 1/4]"),
    "boxcar": ("boxcar", "n", 3.0, "Channels averaged by the running mean (the channel grid is kept)"),
    "gaussian": ("Gaussian", "FWHM (channels)", 3.0, "Full width at half maximum of the Gaussian kernel, in "
                                                      "channels"),
    "rebin": ("rebin", "n", 2.0, "Channels averaged into one: the channels become n times wider"),
}

# Channels of the blank spectrum a choice is tried on before it is applied.
_PROBE_CHANNELS = 64


class SmoothingChoice(w.VBox):
    """The smoothing of the region spectra, for the view and the measurements.

    Parameters
    ----------
    spectrum_view : SpectrumView, optional
        Its ``show_raw`` follows the "Show unsmoothed" switch.

    Attributes
    ----------
    kernel : {'none', 'hanning', 'boxcar', 'gaussian', 'rebin'}
    width : float
        Channels (odd for Hanning, whole for boxcar and rebin), or the
        Gaussian's FWHM in channels.
    delivered_hanning : bool
        The delivered spectra are already Hanning-smoothed (not smoothed again
        for this; their errors count the correlation).
    show_raw : bool
        Draw the unsmoothed spectra faintly behind the smoothed ones.
    settings : dict
        The last valid choice (read-only): ``kernel``, ``width``,
        ``delivered_hanning``; it changes only when a choice is accepted, and the
        suite re-smooths and re-measures then. A refused choice leaves it as it
        was and says why in `status`.
    """

    kernel = Enum(list(KERNEL_LABELS), "none", help="Smoothing kernel, or 'none'")
    width = Float(3.0, help="Kernel width: channels, or the Gaussian's FWHM in channels")
    delivered_hanning = Bool(False, help="The delivered spectra are already Hanning-smoothed (errors count it)")
    show_raw = Bool(True, help="Draw the unsmoothed spectra faintly behind the smoothed ones")
    settings = Dict(help="The smoothing in use (read-only): kernel, width, delivered_hanning")

    def __init__(self, spectrum_view=None, status=None, **kwargs):
        self.status = status or StatusLine()
        self.kernel_choice = w.Dropdown(options=[(label, key) for key, (label, *_) in KERNEL_LABELS.items()],
                                        value="none", description="Smoothing",
                                        tooltip="Smooth the spectra for display and measurement; errors "
                                                "count the channel correlation this makes",
                                        style={"description_width": "initial"}, layout=w.Layout(width="176px"))
        self.kernel_choice.add_class("cubeloupe-smoothing-kernel")
        self.width_input = w.FloatText(value=3.0, description="n", style={"description_width": "initial"},
                                       layout=w.Layout(width="150px"))
        self.width_input.add_class("cubeloupe-smoothing-width")
        self.delivered_toggle = w.Checkbox(value=False, description="Delivered Hanning-smoothed", indent=False,
                                           tooltip="Tick if the correlator already Hanning-smoothed the "
                                                   "spectra: nothing is smoothed for it, but the errors "
                                                   "count the correlation between channels",
                                           layout=w.Layout(width="auto"))
        self.delivered_toggle.add_class("cubeloupe-smoothing-delivered")
        self.raw_toggle = w.Checkbox(value=True, description="Show unsmoothed", indent=False,
                                     tooltip="Draw the unsmoothed spectra faintly behind the smoothed ones",
                                     layout=w.Layout(width="146px"))
        self.raw_toggle.add_class("cubeloupe-smoothing-raw")
        w.link((self.kernel_choice, "value"), (self, "kernel"))
        w.link((self.width_input, "value"), (self, "width"))
        w.link((self.delivered_toggle, "value"), (self, "delivered_hanning"))
        w.link((self.raw_toggle, "value"), (self, "show_raw"))
        if spectrum_view is not None:
            w.dlink((self, "show_raw"), (spectrum_view, "show_raw"))
        super().__init__(children=[row([self.kernel_choice, self.width_input, self.delivered_toggle,
                                        self.raw_toggle], flex_flow="row wrap"), self.status], **kwargs)
        self.add_class("cubeloupe-smoothing")
        if spectrum_view is not None:
            spectrum_view.add_controls(self)
        for part in self.status.children:  # the close button keeps its width beside a long message
            if isinstance(part, w.Button):
                part.layout.flex = "0 0 auto"
        # The status line takes room only while it has something to say.
        w.dlink((self.status, "message"), (self.status.layout, "display"), transform=lambda m: "" if m else "none")
        self.settings = {"kernel": "none", "width": 3.0, "delivered_hanning": False}
        self._show_width()

    # ---------------------------------------------------------------- choice
    def _width_argument(self):
        """The width as `smooth_spectrum` takes it: whole numbers as int for the channel kernels."""
        if self.kernel != "gaussian" and float(self.width).is_integer():
            return int(self.width)
        return float(self.width)

    @observe("kernel")
    def _on_kernel(self, change):
        # A new kernel starts from its usual width (Hanning and boxcar 3, rebin 2).
        with self.hold_trait_notifications():
            self.width = KERNEL_LABELS[self.kernel][2]
        self._show_width()
        self._accept()

    @observe("width", "delivered_hanning")
    def _on_width(self, change):
        self._accept()

    def _show_width(self):
        _, label, _, tip = KERNEL_LABELS[self.kernel]
        self.width_input.description = label or "n"
        self.width_input.tooltip = tip
        self.width_input.layout.display = "none" if self.kernel == "none" else ""

    def _accept(self):
        """Check the choice on a probe spectrum; adopt it, or keep the last one and say why."""
        with self.status.guard("choosing the smoothing"):
            if self.kernel != "none":
                # Checks the kind of width only; whether a spectrum is long enough is told when it is smoothed.
                n = max(_PROBE_CHANNELS, int(min(abs(self.width), 1e6)) + 1)
                smooth_spectrum(np.zeros(n) * u.one, self.kernel, self._width_argument(),
                                spectral_axis=np.arange(n) * u.km / u.s)
            chosen = {"kernel": self.kernel, "width": float(self.width), "delivered_hanning": self.delivered_hanning}
            if chosen != self.settings:
                self.settings = chosen

    def description(self):
        """The smoothing in use, in words ('' for none)."""
        s = self.settings
        parts = []
        if s["delivered_hanning"]:
            parts.append("delivered Hanning-smoothed")
        if s["kernel"] != "none":
            label = KERNEL_LABELS[s["kernel"]][0]
            parts.append(f"{label} FWHM {s['width']:g} channels" if s["kernel"] == "gaussian"
                         else f"{label} n = {s['width']:g}")
        return ", ".join(parts)

    # --------------------------------------------------------------- applying
    def smooth(self, spectrum):
        """``spectrum`` as the current settings make it (the same object when there is nothing to do).

        Raises `CubeloupeError` when the smoothing cannot be applied to it (e.g. rebinning by more
        channels than it has).
        """
        s = self.settings
        if spectrum is None or (s["kernel"] == "none" and not s["delivered_hanning"]):
            return spectrum
        out = with_channel_correlation(spectrum, "hanning", 3) if s["delivered_hanning"] else spectrum
        if s["kernel"] != "none":
            width = s["width"]
            width = int(width) if s["kernel"] != "gaussian" and float(width).is_integer() else width
            out = smooth_spectrum(out, s["kernel"], width)
        return out

    def smooth_all(self, spectra, name=""):
        """Each spectrum of a list smoothed; one that cannot be is kept unsmoothed and the status says so."""
        out = []
        for index, spectrum in enumerate(spectra):
            try:
                out.append(self.smooth(spectrum))
            except CubeloupeError as exc:
                self.status.error(f"Region {name}, window {index} is shown and measured unsmoothed: {exc}")
                out.append(spectrum)
        return out
