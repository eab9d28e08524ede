"""ChannelBar: pick a channel with a slider, step buttons or playback; see its frequency and velocity."""

import html

import astropy.units as u
import ipywidgets as w
import numpy as np
from traitlets import Bool, Enum, Float, Int, List, Unicode, observe, validate

from cubeloupe.analysis import (
    CONVENTIONS, CubeloupeError, channel_for, cube_rest_frequency, display_axis, velocity,
)

__all__ = ["ChannelBar"]


class ChannelBar(w.VBox):
    """Channel slider with step and play controls and a readout of the channel's coordinates.

    Parameters
    ----------
    cube : SpectralCube
        Supplies the number of channels and their frequencies.

    Attributes
    ----------
    channel : int
    n_channels : int
    z, rest_frequency, convention, reference_label
        The velocity frame of the readout (see each trait's help).
    readout : str
        The text shown beside the slider.
    """

    channel = Int(0, help="The selected channel (0-based)")
    n_channels = Int(1, help="Number of channels of the cube (read-only)")
    z = Float(0.0, help="Source redshift used for the velocity readout")
    rest_frequency = Float(0.0, help="Rest frequency in GHz of the line velocities refer to (0: the cube's RESTFRQ)")
    convention = Enum(list(CONVENTIONS), "radio", help="Velocity convention of the readout")
    reference_label = Unicode("", help="What velocity zero is, as shown in the readout (e.g. 'CO J=2-1'); "
                                       "empty: the rest frequency in GHz")
    readout = Unicode("", help="Frequency and velocity of the selected channel, as shown")
    other_bands = List(help="[low, high] observed GHz of the other spectral windows: velocities measured from "
                            "a line in one of them are not shown")
    velocity_only = Bool(False, help="The cube has a velocity axis and no rest frequency: show velocities only")
    go_message = Unicode("", help="Why the last 'Go to' could not be followed ('' when it was)")
    play_interval = Int(300, help="Milliseconds between channels during playback")

    def __init__(self, cube, **kwargs):
        self._cube = cube
        self.slider = w.IntSlider(min=0, max=cube.shape[0] - 1, description="Channel", continuous_update=True,
                                  tooltip="Drag to move through the cube's channels (frequencies)",
                                  style={"description_width": "initial"},
                                  layout=w.Layout(width="auto", flex="1 1 auto", min_width="320px"))
        self.slider.add_class("cubeloupe-channel-slider")
        self.play = w.Play(min=0, max=cube.shape[0] - 1, interval=self.play_interval, show_repeat=False,
                           tooltip="Play the channels one after the other like a film",
                           layout=w.Layout(width="auto", flex="0 0 auto"))
        self.play.add_class("cubeloupe-channel-play")
        self.back = w.Button(icon="step-backward", tooltip="Go one channel down",
                             layout=w.Layout(width="34px", flex="0 0 auto"))
        self.forward = w.Button(icon="step-forward", tooltip="Go one channel up",
                                layout=w.Layout(width="34px", flex="0 0 auto"))
        self.back.add_class("cubeloupe-channel-back")
        self.forward.add_class("cubeloupe-channel-forward")
        self.back.on_click(lambda _: self.step(-1))
        self.forward.on_click(lambda _: self.step(+1))
        self.label = w.HTML(layout=w.Layout(flex="1 1 auto", margin="0 0 0 10px"))
        self.label.add_class("cubeloupe-channel-label")
        self.go_input = w.Text(value="", placeholder="e.g. 42, 230.3 GHz, 1460 km/s", description="Go to",
                               continuous_update=False,
                               tooltip="Jump to a channel number, an observed frequency (GHz, MHz) or a velocity "
                                       "(km/s, relative to velocity zero); press Enter",
                               style={"description_width": "initial"}, layout=w.Layout(width="260px"))
        self.go_input.add_class("cubeloupe-go-to")
        self.go_input.observe(lambda change: self.go_to(change.new), names="value")
        self.brightest_button = w.Button(description="Brightest", icon="star", layout=w.Layout(width="104px"),
                                         tooltip="Jump to the channel with the brightest emission")
        self.brightest_button.add_class("cubeloupe-brightest")
        self.brightest_button.on_click(lambda _: self._on_brightest())
        self._brightest_callbacks = []
        self.message = w.HTML(layout=w.Layout(flex="1 1 200px"))
        super().__init__(children=[w.HBox([self.back, self.slider, self.forward, self.play, self.label],
                                          layout=w.Layout(align_items="center", width="100%",
                                                          flex_flow="row wrap")),
                                   w.HBox([self.go_input, self.brightest_button, self.message],
                                          layout=w.Layout(align_items="center", width="100%",
                                                          flex_flow="row wrap"))], **kwargs)
        self.layout.width = "100%"
        self.add_class("cubeloupe-channel-bar")
        w.link((self.slider, "value"), (self, "channel"))
        w.link((self.play, "value"), (self, "channel"))
        w.dlink((self, "play_interval"), (self.play, "interval"))
        self.set_cube(cube)

    def set_cube(self, cube):
        """Show the channels of another cube (e.g. another spectral window)."""
        self._cube = cube
        n = cube.shape[0]
        with self.hold_trait_notifications():
            self.n_channels = n
            self.slider.max = self.play.max = n - 1
            self.channel = min(self.channel, n - 1)
        self._frequencies = display_axis(cube, "observed frequency")
        self._file_rest = cube_rest_frequency(cube)
        self._show()

    @validate("channel")
    def _valid_channel(self, proposal):
        return int(min(max(proposal["value"], 0), self.n_channels - 1))

    def step(self, by):
        """Move ``by`` channels (clamped to the band)."""
        self.channel = self.channel + int(by)

    def go_to(self, text):
        """Jump to a channel number, an observed frequency or a velocity typed as text; returns the channel.

        A problem (not a number, outside the band, a velocity with no rest frequency) is shown beside
        the box and None is returned.
        """
        text = str(text).strip()
        if not text:
            self._say("")
            return None
        try:
            position = int(text) if text.lstrip("+-").isdigit() else u.Quantity(text)
            if isinstance(position, u.Quantity) and position.unit == u.dimensionless_unscaled:
                raise ValueError("give a number with a unit (GHz, MHz, km/s) or a whole channel number")
            if self.velocity_only and isinstance(position, u.Quantity) and not position.unit.is_equivalent(u.km / u.s):
                raise ValueError("this cube has a velocity axis and no rest frequency: give a velocity (km/s) "
                                 "or a channel number")
            channel = channel_for(position, self._frequencies, rest_frequency=self._rest(), z=self.z,
                                  convention=self.convention)
        except (ValueError, TypeError, CubeloupeError) as exc:
            self._say(f"Cannot go to {text!r}: {exc}")
            return None
        if channel is None:
            self._say(f"{text} lies outside this window's band ({self._band_text()}).")
            return None
        self.channel = channel
        self._say("")
        return channel

    def _band_text(self):
        f = self._frequencies.to_value(u.GHz)
        return f"{f.min():.6f}–{f.max():.6f} GHz, channels 0–{len(f) - 1}"

    def _say(self, text):
        self.go_message = text
        self.message.value = f"<span style='color:#8c1d18'>{html.escape(text)}</span>" if text else ""

    def on_brightest(self, callback):
        """Register ``callback()``, run by the 'Brightest' button (the suite finds the channel)."""
        self._brightest_callbacks.append(callback)

    def _on_brightest(self):
        for callback in self._brightest_callbacks:
            callback()

    def _rest(self):
        if self.rest_frequency > 0:
            return self.rest_frequency * u.GHz
        return self._file_rest  # the cube's RESTFRQ, as spectral.axis_in uses it (None if it has none)

    def channel_velocity(self):
        """Velocity of the selected channel, or None when no rest frequency is known to measure it from."""
        return self.channel_velocity_of(self.channel)

    def _velocity_text(self, v):
        """``v`` in km/s with the decimals that tell neighbouring channels apart (66 m/s channels: 2), no "-0.0"."""
        k = self.channel
        other = k + 1 if k + 1 < len(self._frequencies) else k - 1
        step = self.channel_velocity_of(other) if other >= 0 else None
        width = abs((step - v).to_value(u.km / u.s)) if step is not None else 0.0
        decimals = max(1, -int(np.floor(np.log10(width)))) if np.isfinite(width) and width > 0 else 1
        return f"{round(float(v.to_value(u.km / u.s)), decimals) + 0.0:+.{decimals}f}"

    def channel_velocity_of(self, channel):
        """Velocity of ``channel``, or None when no rest frequency is known to measure it from."""
        rest = self._rest()
        if rest is None:
            return None
        try:
            # One channel at a time: cheap enough for every z or slider change.
            return velocity(self._frequencies[channel], rest, self.z, self.convention)
        except CubeloupeError:
            return None

    def _zero_in_other_window(self):
        """True when velocity zero falls in one of `other_bands` rather than in this window's band."""
        observed = (self._rest() / (1 + self.z)).to_value(u.GHz)
        band = self._frequencies.to_value(u.GHz)
        if float(np.min(band)) <= observed <= float(np.max(band)):
            return False
        return any(low <= observed <= high for low, high in self.other_bands)

    def velocity_reference(self):
        """What velocity zero is, in words (as the readout shows it)."""
        rest = self._rest()
        if rest is None:
            return ""
        if self.reference_label:
            name = self.reference_label
        elif self.rest_frequency <= 0:
            name = f"RESTFRQ {rest.to_value(u.GHz):.6g} GHz"
        else:
            name = f"rest {rest.to_value(u.GHz):.6g} GHz"
        return name + (f" at z = {self.z:g}" if self.z else "")

    @observe("channel", "z", "rest_frequency", "convention", "reference_label", "other_bands", "velocity_only")
    def _show(self, change=None):
        k = self.channel
        if self.velocity_only:
            v = self.channel_velocity()
            self.readout = f"channel {k} · {v.to_value(u.km / u.s):+.3f} km/s ({self.convention}, the cube's axis)"
            self.label.value = (f"<span style='font-family:var(--jp-code-font-family,monospace)'>"
                                f"{html.escape(self.readout)}</span>")
            return
        text = f"{self._frequencies[k].to_value(u.GHz):.6f} GHz"
        v = self.channel_velocity()
        if v is not None and np.isfinite(v.value):
            if self._zero_in_other_window():
                # Another window's line: a velocity of -100 000 km/s helps no one.
                text += f" · velocity zero, {self.reference_label or 'the rest frequency'}, lies in another window"
            else:
                text += f" · {self._velocity_text(v)} km/s ({self.convention}, {self.velocity_reference()})"
        self.readout = text
        self.label.value = (f"<span style='font-family:var(--jp-code-font-family,monospace)'>"
                            f"{html.escape(text)}</span>")
