"""first_view: the channel with the brightest emission and an aperture on it (common practice: look at the
peak-intensity spectrum, then at the brightest place of the line's peak channel)."""

import numpy as np
import pytest

from cubefactory import frequency_axis_hz, line_cube_data
from cubeloupe.analysis import demo_path, demo_truth, first_view, open_cube


def test_finds_the_line_channel_and_the_source_not_a_hot_pixel(cube_path, rng):
    shape = (120, 40, 50)
    freq = frequency_axis_hz(shape[0])
    line_channel = 83
    data = line_cube_data(shape, rng=rng, lines=[(freq[line_channel], 8.0, 2.0e6)], centre=(28, 12),
                          source_sigma_pixels=2.5)
    data[10, 5, 40] = 30.0  # one hot pixel in a line-free channel: brighter than the source's peak
    data[:3] *= 4.0         # noisier first channels, as at a band edge
    view = first_view(open_cube(cube_path(data.astype(np.float32))))
    assert abs(view.channel - line_channel) <= 1
    x, y = view.position
    assert abs(x - 12) <= 1 and abs(y - 28) <= 1
    # the beam of the factory cube is 1" on 0.25" pixels: a 4-pixel FWHM gives a 2-pixel radius
    assert view.region.radius == pytest.approx(2.0)
    assert view.significance > 5 and view.stride == 1


def test_a_large_cube_is_sampled_every_kth_channel_and_still_finds_a_wide_line(cube_path, rng):
    shape = (200, 30, 30)
    freq = frequency_axis_hz(shape[0])
    data = line_cube_data(shape, rng=rng, lines=[(freq[140], 6.0, 6.0e6)])
    cube = open_cube(cube_path(data.astype(np.float32)))
    view = first_view(cube, max_bytes=cube.size * 4 // 5)
    assert view.stride == 5 and view.channel % 5 == 0
    assert abs(view.channel - 140) <= 5


def test_pure_noise_says_it_found_nothing_clear(cube_path, rng):
    view = first_view(open_cube(cube_path(rng.normal(size=(60, 20, 20)).astype(np.float32))))
    assert view.significance < 7
    assert "no clear emission" in view.description or view.significance >= 5


def test_demo_disk_opens_on_its_line():
    cube = open_cube(demo_path("disk"))
    view = first_view(cube)
    disk = demo_truth("disk")["disk"]
    # The channel's radio velocity lies within the rotation's reach of the systemic velocity
    # (v_sys +/- v_flat sin i, from the generator's sidecar), and the aperture on the disk.
    velocity = cube.with_spectral_unit("km/s", velocity_convention="radio").spectral_axis[view.channel]
    reach = disk["v_flat"] * np.sin(disk["inclination"]) + 3 * disk["velocity_dispersion"]
    assert abs(velocity - disk["systemic_velocity"]) < reach
    x, y = view.position
    centre = disk["centre_pixel"]
    assert np.hypot(x - centre["x"], y - centre["y"]) < (disk["r_out"] / demo_truth("disk")["pixel_size"]).value
    assert view.significance > 5
