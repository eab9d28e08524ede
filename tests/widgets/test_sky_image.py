"""SkyImage: the sky image travels as an 8-bit PNG with a blank mask that decodes to the values shown.

The reference decoder is Pillow (the library the browser side's format is defined by: PNG,
W3C/ISO 15948); bqplot-image-gl's front end reads the same message keys its own serializer
writes (bqplot_image_gl.serialize.array_to_image).
"""

import io

import numpy as np
from PIL import Image

from bqplot_image_gl.serialize import array_to_image
from cubeloupe.widgets.sky_image import SkyImage, png_message


def decoded(message):
    picture = Image.open(io.BytesIO(message["data"]))
    assert picture.format == "PNG" and picture.mode == "LA"
    pixels = np.asarray(picture)
    return pixels[..., 0] / 255.0, pixels[..., 1] == 255


def test_png_round_trip_within_half_a_level_and_blanks_transparent(rng):
    values = rng.uniform(0, 1, size=(37, 53)).astype(np.float32)
    values[3:7, 10:20] = np.nan
    values[0, 0], values[0, 1] = 0.0, 1.0
    levels, opaque = decoded(png_message(values))
    assert levels.shape == values.shape  # rows stay rows: the image is not transposed
    # 8 bits: every value within half a step of 1/255 (uniform quantisation bound, common practice)
    finite = np.isfinite(values)
    assert np.max(np.abs(levels[finite] - values[finite])) <= 0.5 / 255 + 1e-7
    assert levels[0, 0] == 0.0 and levels[0, 1] == 1.0  # the ends of the ramp are kept exactly
    assert (opaque == finite).all()


def test_message_has_the_keys_of_bqplot_image_gl_own_png_messages():
    values = np.array([[0.0, 0.5], [np.nan, 1.0]], dtype=np.float32)
    ours = png_message(values)
    theirs = array_to_image(np.nan_to_num(values), "png")
    for key in ("type", "format", "use_colormap", "min", "max", "data"):
        assert key in ours
        assert type(ours[key]) is type(theirs[key]) or key in ("min", "max")
    assert (ours["type"], ours["format"], ours["use_colormap"]) == (theirs["type"], theirs["format"], True)
    # Our colour positions already span 0..1 (the colour scale's range): no per-image rescaling.
    assert (ours["min"], ours["max"]) == (0.0, 1.0)


def test_flat_image_keeps_its_level():
    flat = np.full((4, 5), 0.25, dtype=np.float32)
    levels, opaque = decoded(png_message(flat))
    assert opaque.all() and np.allclose(levels, 64 / 255)


def test_widget_sends_png_or_float32_as_asked(rng):
    values = rng.uniform(0, 1, size=(6, 7)).astype(np.float32)
    mark = SkyImage(image=values)
    serialise = type(mark).image.metadata["to_json"]
    assert serialise(mark.image, mark)["dtype"] == "float32"  # 'auto': a small image goes as it is
    large = rng.uniform(0, 1, size=(300, 300)).astype(np.float32)
    assert serialise(large, mark)["format"] == "png"
    mark.encoding = "png"
    assert serialise(mark.image, mark)["format"] == "png"
    mark.encoding = "float32"
    plain = serialise(mark.image, mark)
    assert plain["dtype"] == "float32" and tuple(plain["shape"]) == (6, 7)
    assert np.asarray(mark.image) is not None and np.array_equal(mark.image, values)  # the kernel keeps floats
