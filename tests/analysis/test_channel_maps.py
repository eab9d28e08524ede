"""Tests for analysis/channel_maps.py: panel images, labels, noise, and the drawn figure."""

import tracemalloc

import astropy.units as u
import numpy as np
import pytest
from astropy.visualization.wcsaxes import WCSAxes
from numpy.testing import assert_allclose
from scipy.ndimage import map_coordinates

from cubefactory import velocity_axis_kms, write_cube
from cubeloupe.analysis import SpectralRangeError, open_cube
from cubeloupe.analysis.channel_maps import channel_maps, channel_panels

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory); the cubefactory default RESTFRQ


@pytest.fixture(scope="module")
def noise_cube(tmp_path_factory):
    rng = np.random.default_rng(41)
    data = rng.normal(0.0, 1.0, size=(60, 40, 48)).astype(np.float32)
    data[30:34, 15:25, 20:30] += 20.0          # a bright source in four channels
    path = write_cube(tmp_path_factory.mktemp("cm") / "noise.fits", data)
    return open_cube(path), data


def window_of(first, last):
    """A velocity window from channel ``first`` to ``last``, reaching a quarter channel beyond each."""
    v = velocity_axis_kms(60)
    quarter = 0.25 * abs(v[1] - v[0])
    low, high = sorted([v[first], v[last]])
    return u.Quantity([low - quarter, high + quarter], KMS)


def test_panels_are_means_of_equal_runs_of_channels(noise_cube):
    cube, data = noise_cube
    panels = channel_panels(cube, window_of(10, 41), n=5, rest_frequency=CO21)
    # 32 channels in 5 runs as numpy's array_split divides them: 7, 7, 6, 6, 6.
    runs = [(int(r[0]), int(r[-1]) + 1) for r in np.array_split(np.arange(10, 42), 5)]
    assert panels.channels == runs
    expected = np.stack([data[a:b].mean(axis=0) for a, b in runs])
    assert_allclose(panels.images.value, expected, rtol=1e-5, atol=1e-5)
    # Labels: the mean radio velocity of each run (Greisen et al. 2006 radio convention, cubefactory's axis).
    v = velocity_axis_kms(60)
    assert_allclose(panels.centers.to_value(KMS), [v[a:b].mean() for a, b in runs], rtol=1e-9)


def test_one_channel_of_every_k(noise_cube):
    cube, data = noise_cube
    panels = channel_panels(cube, window_of(0, 39), n=4, average=False, rest_frequency=CO21)
    # 40 channels, k = 10: the middle channel of each run of ten.
    assert [a for a, _ in panels.channels] == [5, 15, 25, 35]
    assert_allclose(panels.images.value, data[[5, 15, 25, 35]], rtol=1e-6)


def test_panel_rms_falls_as_one_over_sqrt_channels(noise_cube):
    cube, _ = noise_cube
    # The mean of m independent unit-rms channels has rms 1/sqrt(m) (common practice); the robust MAD estimate
    # ignores the source. 2000 pixels per panel: a few percent scatter.
    panels = channel_panels(cube, window_of(0, 15), n=2, rest_frequency=CO21)
    assert panels.rms.to_value(cube.unit) == pytest.approx(1 / np.sqrt(8), rel=0.06)


def test_frequency_labels_without_a_rest_frequency(tmp_path):
    data = np.zeros((10, 8, 8), np.float32)
    cube = open_cube(write_cube(tmp_path / "nofreq.fits", data, restfrq=None, crval3=230.538e9))
    panels = channel_panels(cube, [230.538, 230.530] * u.GHz, n=3)
    assert panels.centers.unit == u.GHz
    assert panels.centers[0].to_value(u.GHz) == pytest.approx(230.538 - 0.001 * 1.0, abs=1e-3)


def test_figure_has_one_colour_scale_contours_at_rms_multiples_and_labels(noise_cube, tmp_path):
    cube, _ = noise_cube
    fig = channel_maps(cube, window_of(26, 37), n=4, rest_frequency=CO21)
    panels = fig.channel_panels
    image_axes = [ax for ax in fig.axes if ax.images]
    assert len(image_axes) == 4
    limits = {ax.images[0].get_clim() for ax in image_axes}
    assert len(limits) == 1                                   # one colour scale
    sky = [ax for ax in image_axes if isinstance(ax, WCSAxes)]
    assert len(sky) == 1 and sky[0] is image_axes[2]          # lower-left panel of a 2 x 2 grid
    rms = panels.rms.to_value(cube.unit)
    # Contours at -3, 3, 6, ... x rms: every vertex of a level's line interpolates to that level (contour
    # tracing interpolates linearly along pixel edges, where bilinear interpolation reduces to the same).
    expected = set(np.array([-3, 3, 6, 12, 24, 48]) * rms)
    for ax, image in zip(image_axes, panels.images.value):
        for line in ax.lines:
            level = float(line.get_gid().split()[1])
            assert min(abs(level - e) for e in expected) < 1e-9 * rms
            x, y = line.get_data()
            good = np.isfinite(x)
            values = map_coordinates(image.astype(float), [y[good], x[good]], order=1)
            assert_allclose(values, level, rtol=1e-4, atol=1e-6 * rms)
    assert any(float(line.get_gid().split()[1]) < 0 for ax in image_axes for line in ax.lines)
    labels = [t.get_text() for ax in image_axes for t in ax.texts]
    assert labels == [f"{v:.1f} km/s" for v in panels.centers.to_value(KMS)]
    fig.savefig(tmp_path / "maps.png")
    fig.savefig(tmp_path / "maps.pdf")
    assert (tmp_path / "maps.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (tmp_path / "maps.pdf").read_bytes()[:5] == b"%PDF-"


def test_only_the_window_channels_are_read(tmp_path):
    # 400 channels of 256 x 256 float32 (105 MB on disk); a 10-channel window must not copy the cube.
    rng = np.random.default_rng(42)
    path = tmp_path / "big.fits"
    write_cube(path, rng.normal(size=(400, 256, 256)).astype(np.float32))
    cube = open_cube(path)
    v = velocity_axis_kms(400)
    tracemalloc.start()
    quarter = 0.25 * abs(v[1] - v[0])
    channel_panels(cube, u.Quantity([v[100] - quarter, v[109] + quarter], KMS), n=5, rest_frequency=CO21)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 8 * 2**20   # two channels of 256 x 256 float32 are 0.5 MB; the whole cube 105 MB


@pytest.mark.parametrize("kwargs, match", [
    (dict(n=0), "n must be a whole number"),
    (dict(window=[100, 101] * u.GHz), "selects no channel"),
])
def test_bad_requests_are_refused(noise_cube, kwargs, match):
    cube, _ = noise_cube
    args = dict(window=window_of(0, 10), rest_frequency=CO21)
    args.update(kwargs)
    with pytest.raises(SpectralRangeError, match=match):
        channel_panels(cube, **args)
