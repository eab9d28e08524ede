"""SkyView: the channel image, stretch and limits, pointer readout, beam and sources, in the suite.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import open_cube
from cubeloupe.analysis.display import display_image, display_limits, stretched
from cubeloupe.widgets import SkyView

from suite_driver import N_CHAN


def test_channel_change_sends_the_analysis_display_image(loupe, line_cube):
    loupe.channel = 17
    cube = open_cube(line_cube)
    image, _ = display_image(cube.unmasked_data[17].value, loupe.sky_view.max_display_size)
    lo, hi = display_limits(image, 0.5, 99.5)
    assert_allclose(loupe.sky_view.image.image, stretched(image, lo, hi, "linear"), rtol=1e-6)
    assert loupe.sky_view.shown_limits == pytest.approx([lo, hi])
    # the slider is linked both ways and clamps to the band
    loupe.channel_bar.slider.value = 5
    assert loupe.channel == 5 and loupe.sky_view.channel == 5
    loupe.channel = 10_000
    assert loupe.channel == N_CHAN - 1
    assert "230.479000 GHz" in loupe.channel_bar.readout  # 230.538 GHz - 59 x 1 MHz (the cube's header)


def test_channel_change_announces_the_neighbouring_channels(loupe, monkeypatch):
    import cubeloupe.widgets.sky_view as sky_view_module

    announced = []
    monkeypatch.setattr(sky_view_module, "prefetch_channels", lambda cube, channels: announced.append(list(channels)))
    loupe.channel = 17
    assert announced == [[16, 18]]   # stepping either way next reads from memory


def test_stretch_and_fixed_limits(loupe):
    sky = loupe.sky_view
    sky.vmin, sky.vmax = 0.0, 0.5
    sky.stretch = "sqrt"
    image, _ = display_image(sky.current_plane()[0], sky.max_display_size)
    assert_allclose(sky.image.image, stretched(image, 0.0, 0.5, "sqrt"), rtol=1e-6)
    assert sky.shown_limits == [0.0, 0.5]


def test_large_plane_is_block_averaged_for_display(cube_path, rng):
    path = cube_path(rng.normal(size=(3, 300, 200)))
    sky = SkyView([open_cube(path)])
    sky.max_display_size = 100
    assert sky.display_factor == 3
    assert sky.image.image.shape == (100, 67)


def test_pointer_shows_position_and_value(loupe):
    loupe.channel = 30
    loupe.sky_view.pointer._handle_custom_msg({"event": "mousemove", "domain": {"x": 14.2, "y": 11.8}}, [])
    value = open_cube(loupe.cubes[0].meta["cubeloupe_source"]["path"]).unmasked_data[30, 12, 14].value
    assert f"{value:.4g}" in loupe.sky_view.pointer_text
    # astropy is the reference for the sky position of the pointer
    where = loupe.cube.wcs.celestial.pixel_to_world(14.2, 11.8)
    assert where.ra.to_string(unit=u.hourangle, sep="hms", precision=3, pad=True) in loupe.sky_view.pointer_text


def test_beam_is_drawn_to_scale(loupe):
    # cubefactory: 1" x 1" beam, 0.25" pixels -> 4 pixels across
    assert np.ptp(loupe.sky_view.beam_mark.x) == pytest.approx(4.0, rel=1e-3)
    loupe.sky_view.show_beam = False
    assert len(loupe.sky_view.beam_mark.x) == 0


def test_unknown_source_is_refused_and_state_kept(loupe):
    with pytest.raises(Exception, match="cannot be shown"):
        loupe.sky_source = "moment 7"
    assert loupe.sky_source == "channel"
