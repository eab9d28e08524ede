"""Pictures of the sky view drawn without a browser: title, world axes, blanks, beam, refusal to overwrite."""

import astropy.units as u
import numpy as np
import pytest
from astropy.wcs import WCS
from matplotlib.image import imread

from cubeloupe.analysis import OutputExistsError, open_cube
from cubeloupe.widgets import SkyView
from cubeloupe.widgets._look import BLANK_COLOR
from cubeloupe.widgets.snapshot import channel_title, render_sky

C_KMS = 299792.458  # km/s, exact by the SI definition of the metre


def test_channel_title_gives_frequency_and_velocity(line_cube):
    cube = open_cube(line_cube)
    # The frequency of channel 17 from the header alone (astropy.wcs as reference).
    frequency = WCS(cube.header).sub([3]).pixel_to_world_values(17) * u.Hz
    title = channel_title(cube, 17)
    assert f"{frequency.to_value(u.GHz):.6f} GHz" in title
    # Radio convention V = c (f0 - f) / f0 (Greisen et al. 2006, A&A 446, 747) from the header's
    # RESTFRQ, 230.538 GHz.
    speed = C_KMS * (230.538e9 - frequency.to_value(u.Hz)) / 230.538e9
    assert f"{speed:+.1f} km/s" in title and "radio" in title
    assert "channel 17" in title
    # At a redshift, velocities are measured from the redshifted line (f0 / (1 + z)).
    z = 0.001
    speed_z = C_KMS * (230.538e9 / (1 + z) - frequency.to_value(u.Hz)) / (230.538e9 / (1 + z))
    assert f"{speed_z:+.1f} km/s" in channel_title(cube, 17, z=z)


def test_picture_is_written_once_with_blanks_in_their_own_colour(cube_path, rng, tmp_path):
    data = rng.normal(size=(4, 30, 20))
    data[:, :8, :] = np.nan  # a blanked strip along the bottom
    sky = SkyView([open_cube(cube_path(data))])
    path = render_sky(sky, tmp_path / "sky.png")
    picture = imread(path)[..., :3]
    blank = np.array([int(BLANK_COLOR[i:i + 2], 16) for i in (1, 3, 5)]) / 255
    assert (np.abs(picture - blank).max(axis=-1) < 0.02).sum() > 500  # the strip shows in the blank colour
    with pytest.raises(OutputExistsError):
        render_sky(sky, tmp_path / "sky.png")
    render_sky(sky, tmp_path / "sky.png", overwrite=True)


def test_picture_is_drawn_against_the_views_offset_axes(cube_path, rng, tmp_path, monkeypatch):
    sky = SkyView([open_cube(cube_path(rng.normal(size=(4, 21, 6)), pixel=1.0))])
    seen = {}
    import matplotlib.axes

    original = matplotlib.axes.Axes.imshow

    def recording_imshow(self, *args, **kwargs):
        seen["extent"] = kwargs.get("extent")
        seen["axes"] = self
        return original(self, *args, **kwargs)

    monkeypatch.setattr(matplotlib.axes.Axes, "imshow", recording_imshow)
    render_sky(sky, tmp_path / "narrow.svg")
    # 6 x 21 pixels of 1": +-3" across (east to the left) and +-10.5" up, as the view's axes.
    assert seen["extent"] == pytest.approx((3.0, -3.0, -10.5, 10.5), rel=1e-6)
    ax = seen["axes"]
    assert (ax.get_xlabel(), ax.get_ylabel()) == (sky.x_axis.label, sky.y_axis.label) == ("ΔRA (″)", "ΔDec (″)")
    assert "GHz" in ax.get_title() and "km/s" in ax.get_title()
