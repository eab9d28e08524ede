"""ChannelBar: pick a channel with a slider, step buttons or playback; see its frequency and velocity."""

import astropy.units as u
import ipywidgets as w
import numpy as np
from traitlets import Enum, Float, Int, Unicode, observe, validate

from cubeloupe.analysis.display import display_axis
from cubeloupe.analysis.errors import CubeloupeError
from cubeloupe.analysis.spectral import CONVENTIONS

__all__ = ["ChannelBar"]


class ChannelBar(w.HBox):
    """Channel slider with step and play controls and a readout of the channel's coordinates.

    Parameters
    ----------
    cube : SpectralCube
        Supplies the number of channels and their frequencies.

    Attributes
    ----------
    channel : int
    n_channels : int
    z, rest_frequency, convention
        The velocity frame of the readout (see each trait's help).
    readout : str
        The text shown beside the slider.
    """

    channel = Int(0, help="The selected channel (0-based)")
    n_channels = Int(1, help="Number of channels of the cube (read-only)")
    z = Float(0.0, help="Source redshift used for the velocity readout")
    rest_frequency = Float(0.0, help="Rest frequency in GHz of the line velocities refer to (0: the file's)")
    convention = Enum(list(CONVENTIONS), "radio", help="Velocity convention of the readout")
    readout = Unicode("", help="Frequency and velocity of the selected channel, as shown")
    play_interval = Int(300, help="Milliseconds between channels during playback")

    def __init__(self, cube, **kwargs):
        self._cube = cube
        self._velocity_key = None
        self._velocities = None
        self.slider = w.IntSlider(min=0, max=cube.shape[0] - 1, description="Channel", continuous_update=True,
                                  tooltip="Drag to move through the cube's channels (frequencies)",
                                  layout=w.Layout(width="420px"))
        self.slider.add_class("cubeloupe-channel-slider")
        self.play = w.Play(min=0, max=cube.shape[0] - 1, interval=self.play_interval,
                           tooltip="Play the channels one after the other like a film",
                           layout=w.Layout(width="140px"))
        self.play.add_class("cubeloupe-channel-play")
        self.back = w.Button(icon="step-backward", tooltip="Go one channel down", layout=w.Layout(width="36px"))
        self.forward = w.Button(icon="step-forward", tooltip="Go one channel up", layout=w.Layout(width="36px"))
        self.back.add_class("cubeloupe-channel-back")
        self.forward.add_class("cubeloupe-channel-forward")
        self.back.on_click(lambda _: self.step(-1))
        self.forward.on_click(lambda _: self.step(+1))
        self.label = w.HTML()
        self.label.add_class("cubeloupe-channel-label")
        super().__init__(children=[self.back, self.slider, self.forward, self.play, self.label], **kwargs)
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
        self._show()

    @validate("channel")
    def _valid_channel(self, proposal):
        return int(min(max(proposal["value"], 0), self.n_channels - 1))

    def step(self, by):
        """Move ``by`` channels (clamped to the band)."""
        self.channel = self.channel + int(by)

    def channel_velocity(self):
        """Velocity of the selected channel, or None when no line is set to measure it from."""
        rest = self.rest_frequency * u.GHz if self.rest_frequency > 0 else None
        if rest is None:
            return None
        key = (self.rest_frequency, self.z, self.convention, id(self._frequencies))
        if self._velocity_key != key:
            try:
                # From the cached frequencies (not the cube's WCS): cheap enough for every z change.
                self._velocities = display_axis(self._frequencies, "velocity", rest_frequency=rest, z=self.z,
                                                convention=self.convention)
            except CubeloupeError:
                self._velocities = None
            self._velocity_key = key
        return None if self._velocities is None else self._velocities[self.channel]

    @observe("channel", "z", "rest_frequency", "convention")
    def _show(self, change=None):
        k = self.channel
        text = f"{self._frequencies[k].to_value(u.GHz):.6f} GHz"
        v = self.channel_velocity()
        if v is not None and np.isfinite(v.value):
            text += f" · {v.to_value(u.km / u.s):+.1f} km/s ({self.convention})"
        self.readout = text
        self.label.value = f"<code>{text}</code>"
