"""ChannelBar: the readout, stepping, and jumping to a channel, frequency, velocity or the brightest channel."""

import astropy.units as u
import numpy as np

from cubefactory import frequency_axis_hz
from cubeloupe.analysis import open_cube
from cubeloupe.widgets import ChannelBar, Loupe


C_KMS = 299792.458  # km/s, exact (SI definition of the metre)


def test_go_to_a_channel_a_frequency_and_a_velocity(line_cube):
    bar = ChannelBar(open_cube(line_cube))
    freq = frequency_axis_hz(bar.n_channels) / 1e9  # the factory's axis: 230.538 GHz down in 1 MHz steps
    assert bar.go_to("17") == 17 and bar.channel == 17
    assert bar.go_to(f"{freq[40]:.6f} GHz") == 40
    assert bar.go_to(f"{freq[12] * 1e3:.3f} MHz") == 12
    # radio velocity from the cube's RESTFRQ (230.538 GHz): v = c (f0 - f) / f0 (Greisen et al. 2006)
    v = C_KMS * (230.538 - freq[25]) / 230.538
    assert bar.go_to(f"{v:.3f} km/s") == 25
    assert bar.go_message == ""


def test_what_cannot_be_followed_is_said_beside_the_box(line_cube):
    bar = ChannelBar(open_cube(line_cube))
    bar.channel = 5
    for text, words in (("500", "outside"), ("99 GHz", "outside"), ("fast", "Cannot go to"), ("3 kg", "neither")):
        assert bar.go_to(text) is None
        assert words in bar.go_message and bar.channel == 5


def test_the_suite_opens_on_the_line_and_the_brightest_button_comes_back_to_it(line_cube):
    # The line of the widget-test cube peaks in channel 30 (tests/suite_driver.py).
    loupe = Loupe(line_cube)
    assert abs(loupe.channel - 30) <= 1
    assert list(loupe.spectra) == ["peak (auto)"], "a first spectrum is shown"
    shape = loupe.region_list.region_for("peak (auto)", loupe.cube)
    # on the blob of the test cube, centred at pixel (14, 12)
    assert np.hypot(shape.center.x - 14, shape.center.y - 12) <= 1.5
    loupe.channel = 0
    loupe.channel_bar.brightest_button.click()
    assert abs(loupe.channel - 30) <= 1


def test_velocity_readout_tells_narrow_channels_apart(cube_path, rng):
    """Issue #17: a 66 m/s-channel cube read "-0.0 km/s" and every neighbouring channel alike at 0.1 km/s."""
    # 25 kHz channels at 230.538 GHz: c * 25e3 / 230.538e9 = 0.0325 km/s (radio convention, Greisen et al. 2006).
    path = cube_path(rng.normal(size=(8, 4, 4)), crval3=230.538e9 + 100.0, cdelt3=-25e3)
    bar = ChannelBar(open_cube(path))
    readouts = []
    for k in range(4):
        bar.channel = k
        v = C_KMS * (230.538 - (230.538e9 + 100.0 - 25e3 * k) / 1e9) / 230.538
        assert f"{round(v, 2) + 0.0:+.2f} km/s" in bar.readout, (k, bar.readout)
        readouts.append(bar.readout)
    assert len(set(readouts)) == 4 and "-0.00" not in readouts[0]
