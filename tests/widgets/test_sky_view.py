"""SkyView: the channel image, stretch and limits, pointer readout, beam and sources, in the suite.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from matplotlib.colors import LinearSegmentedColormap
from numpy.testing import assert_allclose
from regions import EllipsePixelRegion, PixCoord, RectanglePixelRegion
from spectral_cube import Projection

from cubeloupe.analysis import open_cube, region_spectrum, sky_axes
from cubeloupe.analysis.display import display_image, display_limits, stretched
from cubeloupe.widgets import SkyView
from cubeloupe.widgets._look import DIVERGING_RAMPS, RAMPS
from cubeloupe.widgets.sky_view import TOOLS

from suite_driver import N_CHAN, NX, NY


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


# --- world axes, square sky pixels, colours, beam, gestures (issue #17) ---------------------------

REAL_CUBES = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"


def real_cube(name):
    path = REAL_CUBES / name
    if not path.exists():
        pytest.skip(f"real cube {name} not found at {path} (../shared/real-cubes/ beside the repository)")
    with warnings.catch_warnings():
        # Their header quirks (no BUNIT, BLANK on float data) warn by design; not what is tested here.
        warnings.simplefilter("ignore")
        return open_cube(path)


def axis_ends(scale):
    """The offsets an axis shows at its left (bottom) and right (top) end."""
    ends = [scale.min, scale.max]
    return ends[::-1] if scale.reverse else ends


def test_axes_read_offsets_from_the_map_centre(loupe):
    sky = loupe.sky_view
    assert (sky.x_axis.label, sky.y_axis.label) == ("ΔRA (″)", "ΔDec (″)")
    # astropy is the reference: the offsets of the plot's edges from the pixel grid's middle,
    # along the central row and column (SkyCoord.spherical_offsets_to).
    wcs = loupe.cube.wcs.celestial
    centre = wcs.pixel_to_world((NX - 1) / 2, (NY - 1) / 2)
    left, right = wcs.pixel_to_world([sky.x_scale.min, sky.x_scale.max], [(NY - 1) / 2] * 2)
    bottom, top = wcs.pixel_to_world([(NX - 1) / 2] * 2, [sky.y_scale.min, sky.y_scale.max])
    assert axis_ends(sky.x_axis_scale) == pytest.approx(
        [centre.spherical_offsets_to(p)[0].to_value(u.arcsec) for p in (left, right)], abs=1e-4)
    assert axis_ends(sky.y_axis_scale) == pytest.approx(
        [centre.spherical_offsets_to(p)[1].to_value(u.arcsec) for p in (bottom, top)], abs=1e-4)
    # East to the left: the offset at the left edge is positive (common practice for sky maps).
    assert axis_ends(sky.x_axis_scale)[0] > 0 > axis_ends(sky.x_axis_scale)[1]
    for axis, scale in ((sky.x_axis, sky.x_axis_scale), (sky.y_axis, sky.y_axis_scale)):
        assert len(axis.tick_values) >= 2
        assert scale.min <= min(axis.tick_values) and max(axis.tick_values) <= scale.max
    assert sky.centre_text == sky_axes(wcs, (NY, NX)).centre_text
    assert sky.centre_text.startswith(centre.ra.to_string(unit=u.hourangle, sep="hms", precision=2, pad=True))


def test_axes_follow_the_pixel_scales(loupe):
    sky = loupe.sky_view
    sky.x_scale.min, sky.x_scale.max = 5.5, 9.5  # e.g. a zoom on four pixels (0.25" each)
    assert sky.x_axis_scale.max - sky.x_axis_scale.min == pytest.approx(1.0, rel=1e-6)


def test_narrow_map_keeps_square_sky_pixels_and_few_ticks(cube_path, rng):
    # A 6 x 21 pixel map (the shape of a real interferometer strip that was drawn 2:1 before).
    sky = SkyView([open_cube(cube_path(rng.normal(size=(3, 21, 6))))])
    width, height = sky.plot_size
    assert width / height == pytest.approx(6 / 21, rel=0.02)
    # The figure is the plot area plus its margins: the plot area keeps the map's shape.
    margin = sky.figure.fig_margin
    assert int(sky.figure.layout.width.rstrip("px")) - margin["left"] - margin["right"] == width
    assert int(sky.figure.layout.height.rstrip("px")) - margin["top"] - margin["bottom"] == height
    # An 86 px wide plot: two or three short labels, never a lone tick that gives no scale (#17)
    assert 2 <= len(sky.x_axis.tick_values) <= 3


@pytest.mark.parametrize("shape", [(3, 24, 28), (3, 21, 6), (3, 10, 300), (3, 300, 300)])
def test_sky_column_fits_beside_the_spectrum(cube_path, rng, shape):
    sky = SkyView([open_cube(cube_path(rng.normal(size=shape)))])
    width = int(sky.figure.layout.width.rstrip("px")) + int(sky.colorbar.layout.width.rstrip("px"))
    assert width <= 460  # a ~1 000 px notebook: sky column <= 460 px, the rest for the spectrum
    assert sky.layout.max_width == "460px"


def velocity_map(cube, values):
    return Projection(values * u.km / u.s, wcs=cube.wcs.celestial)


def test_velocity_field_in_a_diverging_ramp_centred_on_zero(loupe, rng):
    sky = loupe.sky_view
    cube = loupe.cube
    velocities = rng.uniform(-80, 200, (NY, NX))
    intensity = Projection(np.abs(rng.normal(size=(NY, NX))) * u.Jy / u.beam * u.km / u.s, wcs=cube.wcs.celestial)
    sky.maps = {"moment 0": intensity, "moment 1": velocity_map(cube, velocities),
                "moment 2": velocity_map(cube, np.abs(velocities) / 10)}
    sky.source = "moment 1"
    assert sky.shown_ramp in DIVERGING_RAMPS
    assert sky.color_scale.colors == DIVERGING_RAMPS[sky.shown_ramp]
    lo, hi = sky.shown_limits
    assert lo == -hi  # zero velocity sits in the ramp's middle colour
    image, _ = display_image(velocities, sky.max_display_size)
    assert hi == pytest.approx(np.max(np.abs(np.percentile(image, [0.5, 99.5]))), rel=1e-6)  # numpy reference
    # The colour choice as a browser sets it changes the velocity ramp only.
    sky.palette_choice.value = "teal to plum"
    assert (sky.velocity_palette, sky.palette) == ("teal to plum", "ink to sand")
    for name in ("moment 0", "moment 2", "channel"):
        sky.source = name
        assert sky.shown_ramp == "ink to sand" and sky.color_scale.colors == RAMPS["ink to sand"], name
        assert list(sky.palette_choice.options) == list(RAMPS)
    assert sky.shown_limits[0] >= 0 or sky.source == "channel"
    sky.source = "moment 1"
    assert sky.shown_ramp == "teal to plum"


def test_moment_panel_names_get_their_ramps(loupe):
    # The maps the MomentPanel hands over, by its own names.
    from cubeloupe.widgets.moment_panel import MAP_NAMES

    sky = loupe.sky_view
    diverging = {name for name in MAP_NAMES.values() if (setattr(sky, "maps", {name: velocity_map(
        loupe.cube, np.ones((NY, NX)))}), setattr(sky, "source", name), sky.diverging)[-1]}
    assert diverging == {"moment 1"}


def hex_rgb(colour):
    return np.array([int(colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255


@pytest.mark.parametrize("ramps", [RAMPS, DIVERGING_RAMPS])
def test_blanked_pixels_are_drawn_apart_from_every_ramp(cube_path, rng, ramps):
    data = rng.normal(size=(3, 20, 20))
    data[:, :5, :] = np.nan
    sky = SkyView([open_cube(cube_path(data))])
    # NaNs reach the browser as NaN, which bqplot-image-gl's shader leaves transparent (its source:
    # "nan's are interpreted as missing values, and 'not shown'"): the plot background shows there.
    assert np.isnan(sky.image.image[:5]).all() and np.isfinite(sky.image.image[5:]).all()
    for name, colours in ramps.items():
        if ramps is RAMPS:
            sky.palette = name
        else:
            sky.maps = {"moment 1": velocity_map(sky.cube, np.zeros((20, 20)))}
            sky.source, sky.velocity_palette = "moment 1", name
        blank = hex_rgb(sky.figure.background_style["fill"])
        # Every colour of the ramp, interpolated as the colour scale does (matplotlib as reference).
        ramp = LinearSegmentedColormap.from_list(name, colours)(np.linspace(0, 1, 256))[:, :3]
        assert np.min(np.linalg.norm(ramp - blank, axis=1)) > 0.1, f"blank colour too close to ramp {name!r}"


def test_beam_is_drawn_on_the_data_not_on_a_blanked_corner(cube_path, rng):
    data = rng.normal(size=(3, 40, 40))
    yy, xx = np.mgrid[:40, :40]
    data[:, np.hypot(xx - 19.5, yy - 19.5) > 17] = np.nan  # a round field: blank corners
    sky = SkyView([open_cube(cube_path(data, beam=(2.0, 1.0, 30.0)))])  # 8 x 4 pixels
    x, y = np.asarray(sky.beam_mark.x), np.asarray(sky.beam_mark.y)
    assert np.ptp(x) > 3
    plane = data[0]
    # Every point of the outline lies on a pixel holding data.
    assert np.isfinite(plane[np.round(y).astype(int), np.round(x).astype(int)]).all()
    assert np.mean(x) < 20 and np.mean(y) < 20  # in the lower-left part of the field


def test_region_outlines_do_not_tint_the_data(loupe):
    loupe.add_region(RectanglePixelRegion(PixCoord(14, 12), width=6, height=4), name="core")
    (mark,) = loupe.sky_view.outline_marks
    assert mark.fill == "none"


def test_oval_is_dragged_corner_to_corner_like_the_box(loupe):
    sky = loupe.sky_view
    shapes = []
    sky.on_shape(lambda kind, params: shapes.append((kind, params)))
    assert "corner to corner" in TOOLS["oval"][2]
    sky.tool = "oval"
    assert sky.figure.interaction is sky.oval_selector
    # As the browser sends a drag from (10, 9) to (17, 15): the box selector's two corners.
    sky.oval_selector.brushing = True
    sky.oval_selector.selected_x = [10.0, 17.0]
    sky.oval_selector.selected_y = [9.0, 15.0]
    # While dragging, the ellipse filling the box is drawn: it touches the box's four sides.
    x, y = np.asarray(sky.oval_draft.x), np.asarray(sky.oval_draft.y)
    assert [x.min(), x.max(), y.min(), y.max()] == pytest.approx([10, 17, 9, 15], abs=0.02)
    assert loupe.regions == []
    sky.oval_selector.brushing = False
    assert shapes == [("oval", {"x": [10.0, 17.0], "y": [9.0, 15.0], "angle": 0.0})]
    assert len(sky.oval_draft.x) == 0
    # The region is the ellipse inscribed in the dragged box (regions.EllipsePixelRegion as reference).
    expected = EllipsePixelRegion(PixCoord(13.5, 12.0), width=7, height=6)
    mask = expected.to_mask(mode="center").to_image((NY, NX)).astype(bool)
    assert_allclose(loupe.spectrum_view.curve_marks[("R1", 0)].y,
                    region_spectrum(loupe.cube, mask).value, rtol=1e-5)


def test_real_sfl_cube_far_from_its_reference_pixel():
    """l1448_13co.fits: RA---SFL/DEC--SFL, CRPIX1 = -799, 23" pixels on 105 x 105 (SOURCES.md)."""
    cube = real_cube("l1448_13co.fits")
    sky = SkyView([cube])
    assert (sky.x_axis.label, sky.y_axis.label) == ("ΔRA (″)", "ΔDec (″)")
    # 105 pixels of 23" (CDELT 0.006388889 deg in the header): +-1207.5" from the centre.
    assert axis_ends(sky.x_axis_scale) == pytest.approx([1207.5, -1207.5], rel=1e-3)
    assert sky.plot_size == [300, 300]


def test_real_sin_cube_with_blanked_border_draws_the_beam_on_the_data():
    """co10_ngc4047_carma.fits: 1" pixels, 7" beam, about 37 % NaN in a border (SOURCES.md)."""
    cube = real_cube("co10_ngc4047_carma.fits")
    sky = SkyView([cube])
    sky.channel = 20
    plane = sky.current_plane()[0]
    assert np.isnan(plane[0, 0])
    x, y = np.asarray(sky.beam_mark.x), np.asarray(sky.beam_mark.y)
    assert np.ptp(x) == pytest.approx(7.0, rel=0.01)  # BMAJ = BMIN = 7" on 1" pixels
    assert np.isfinite(plane[np.round(y).astype(int), np.round(x).astype(int)]).all()
    assert axis_ends(sky.x_axis_scale) == pytest.approx([64.0, -64.0], rel=1e-4)
    assert sky.centre_text.endswith("(FK5)")  # EPOCH = 2000 in the header: FK5 J2000 (FITS Paper II)


def test_large_plane_is_sent_at_the_plot_size_on_screen(cube_path, rng):
    # A 1024-pixel map in a plot about 300 px wide: blocks of 3 (342 px) keep at least one image
    # pixel per screen pixel (issue #20); blocks of 2 (512 px) would send 2.2x the pixels for nothing.
    sky = SkyView([open_cube(cube_path(rng.normal(size=(2, 1024, 1024)).astype(np.float32)))])
    side = max(sky.plot_size)
    assert sky.display_factor == 1024 // side
    assert side <= max(sky.image.image.shape) < 2 * side
    sky.max_display_size = 128  # the cap still holds
    assert max(sky.image.image.shape) <= 128


def test_region_outlines_are_updated_in_place(loupe):
    sky = loupe.sky_view
    loupe.add_region(RectanglePixelRegion(PixCoord(14, 12), width=6, height=4), name="core")
    loupe.add_region(RectanglePixelRegion(PixCoord(8, 8), width=4, height=4), name="edge")
    first, second = sky.outline_marks
    marks = list(sky.figure.marks)
    loupe.remove_region("edge")
    assert sky.outline_marks == [first] and list(second.x) == []
    loupe.add_region(RectanglePixelRegion(PixCoord(20, 8), width=4, height=4), name="east")
    # The same marks and mark list: the browser updates two lines and lays out nothing anew.
    assert sky.outline_marks == [first, second] and list(sky.figure.marks) == marks
    assert max(second.x) > 20 and second.labels == ["east"]

