"""SkyImage: the sky view's image mark, sent to the browser as an 8-bit PNG with a blank mask (issue #20).

The image a `SkyView` shows holds colour positions 0..1 (limits and stretch are applied in the
kernel) and NaN for blanks. bqplot-image-gl sends such an array as float32, 4 bytes a pixel.
Its own PNG option (``compression='png'``) first rescales each image to its own minimum and
maximum (a flat image then turns into NaN) and compresses at zlib's default level, which took
90-250 ms for a noisy 342-512 pixel image on a 2-core machine: longer than sending the floats.
Here the positions are written as 8 bits (the 256 steps of a colour ramp; nothing visible is
lost), blanks in the alpha channel, and zlib runs at level 1 (13 ms at 342 x 342, 3x smaller
than float32). The browser side is bqplot-image-gl's own: it decodes ``{"type": "image"}``
messages as PNG and maps them through the colour scale between ``min`` and ``max``.

Small images still travel as float32 (``encoding='auto'``): below about 256 x 256 pixels the
bytes saved are a few tens of kB, while decoding a PNG in the browser is asynchronous and was
seen to land the texture 20-110 ms after the other changes of a channel step on a loaded machine.

The trait keeps the float array, so the kernel side (tests, pictures, the pointer) reads
the same values as before; only what goes over the wire changes.
"""

import io

import numpy as np
from bqplot.traits import array_serialization
from bqplot_image_gl import ImageGL
from PIL import Image
from traitlets import Enum
from traittypes import Array

__all__ = ["SkyImage", "png_message"]

# zlib level 1: most of the size gain of higher levels at a fraction of their time (measured on noisy
# images: level 6 was 7x slower for 7 % fewer bytes).
PNG_LEVEL = 1
# With encoding 'auto', images of more pixels than this travel as PNG (256 kB as float32).
PNG_MIN_PIXELS = 65536


def png_message(values):
    """The bqplot-image-gl "image" message of a 2-D array of colour positions 0..1 (NaN: blank).

    Examples
    --------
    >>> message = png_message(np.array([[0.0, 1.0], [np.nan, 0.5]], dtype=np.float32))
    >>> message["format"], message["min"], message["max"], message["data"][:4]
    ('png', 0.0, 1.0, b'\\x89PNG')
    """
    values = np.asarray(values, dtype=np.float32)
    finite = np.isfinite(values)
    pixels = np.empty(values.shape + (2,), dtype=np.uint8)
    # Round to the nearest of 256 levels; values outside 0..1 (not produced by `stretched`) are clipped.
    pixels[..., 0] = np.clip(np.where(finite, values, 0.0) * 255.0 + 0.5, 0, 255)
    pixels[..., 1] = np.where(finite, 255, 0)
    buffer = io.BytesIO()
    Image.fromarray(pixels).save(buffer, format="png", compress_level=PNG_LEVEL)
    return {"type": "image", "format": "png", "use_colormap": True, "min": 0.0, "max": 1.0,
            "data": buffer.getvalue(), "shape": values.shape}


def _to_json(values, widget):
    if values is not None and np.ndim(values) == 2 and (
            widget.encoding == "png" or (widget.encoding == "auto" and np.size(values) > PNG_MIN_PIXELS)):
        return png_message(values)
    return array_serialization["to_json"](values, widget)


def _from_json(value, widget):  # the browser never sends the image back
    raise NotImplementedError("the sky image is not sent back from the browser")


class SkyImage(ImageGL):
    """An `ImageGL` whose 2-D image of colour positions (0..1, NaN blank) travels as an 8-bit PNG.

    Attributes
    ----------
    encoding : {'auto', 'png', 'float32'}
        How the image is sent; 'float32' is bqplot-image-gl's plain array, 'auto' sends PNG
        above `PNG_MIN_PIXELS` pixels.
    """

    image = Array().tag(sync=True, scaled=True, rtype="Color", atype="bqplot.ColorAxis",
                        to_json=_to_json, from_json=_from_json)
    encoding = Enum(["auto", "png", "float32"], "auto",
                    help="How the image is sent to the browser: 'png' (8 bits a pixel and a blank mask), "
                         "'float32', or 'auto' (PNG for images of more than PNG_MIN_PIXELS pixels)")
