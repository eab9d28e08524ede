"""Where to look first in a cube: the channel with the brightest emission and a beam-sized aperture on it.

A viewer that opens on channel 0 shows noise and an empty spectrum. An
observer's first move is to find the emission: the peak-intensity spectrum
(each channel's maximum over the field) shows which channels hold a line,
and the brightest place in that channel, smoothed to the resolution so that a
single noisy pixel does not win, is where to put a first aperture (common
practice). `first_view` does that from one pass over the channel images; on a
cube larger than ``max_bytes`` it reads every k-th channel only (a line is
many channels wide, so it is still found), keeping the cost bounded.

Examples
--------
>>> from cubeloupe.analysis import demo_path, open_cube
>>> view = first_view(open_cube(demo_path("disk")))
>>> view.significance > 5
True
"""

import math
from dataclasses import dataclass

import numpy as np
from regions import CirclePixelRegion, PixCoord
from scipy import ndimage

from .beams import cube_beam
from .errors import BeamError
from .noise import channel_statistics

__all__ = ["FirstView", "first_view"]

# Read at most this much of a cube to choose the first view.
DEFAULT_MAX_BYTES = 2 * 2**30
# Smallest aperture radius in pixels (a cube without a beam, or with a beam of a pixel or two).
_MIN_RADIUS = 1.5
# Channels with the highest peaks looked at again after smoothing to the beam.
_CANDIDATES = 16


@dataclass(frozen=True)
class FirstView:
    """A first channel and aperture to show.

    Attributes
    ----------
    channel : int
        The channel whose peak stands highest above the typical channel noise.
    position : tuple of float
        (x, y) pixel of the brightest place in that channel (after smoothing to
        the beam).
    region : `regions.CirclePixelRegion`
        An aperture of the beam's FWHM diameter (at least 3 pixels across) at
        ``position``.
    significance : float
        The channel's peak over the median channel rms; below ~5 the cube
        shows no clear emission and the view is only a starting point.
    stride : int
        1 when every channel was read; k when every k-th channel was.
    """

    channel: int
    position: tuple
    region: object
    significance: float
    stride: int = 1

    @property
    def description(self):
        """One line saying how the view was chosen, for a status line."""
        x, y = self.position
        clear = "" if self.significance >= 5 else " (no clear emission found: only a starting point)"
        return (f"channel {self.channel}: peak {self.significance:.1f} x the typical channel rms; aperture of "
                f"the beam's size on the brightest place, pixel ({x:.0f}, {y:.0f}){clear}")


def _beam_fwhm_pixels(cube, channel):
    try:
        beam = cube_beam(cube)
    except BeamError:
        return None
    if np.ndim(beam.major) > 0:
        beam = beam[channel]
    pixel = abs(float(cube.wcs.celestial.proj_plane_pixel_scales()[1].to_value("deg")))
    return float(np.sqrt(beam.major.to_value("deg") * beam.minor.to_value("deg"))) / pixel


def _smoothed_plane(cube, channel, size):
    """Channel image averaged over a ``size``-pixel box, blanks left out (-inf where mostly blank)."""
    plane = np.asarray(cube.unmasked_data[channel, :, :].value, dtype=float)
    valid = np.isfinite(plane)
    total = ndimage.uniform_filter(np.where(valid, plane, 0.0), size=size, mode="constant")
    weight = ndimage.uniform_filter(valid.astype(float), size=size, mode="constant")
    return np.where(weight > 0.5, total / np.maximum(weight, 1e-12), -np.inf)


def first_view(cube, *, max_bytes=DEFAULT_MAX_BYTES):
    """The channel with the brightest emission and a beam-sized aperture on its brightest place.

    Parameters
    ----------
    cube : SpectralCube
    max_bytes : int
        Read at most about this much; larger cubes are sampled every k-th channel.

    Returns
    -------
    FirstView

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> view = first_view(open_cube(demo_path("disk")))
    >>> view.region.radius >= 1.5
    True
    """
    n_chan, ny, nx = cube.shape
    stride = max(1, math.ceil(n_chan * ny * nx * 4 / max_bytes))
    sampled = cube[::stride] if stride > 1 else cube
    stats = channel_statistics(sampled)
    peak = np.asarray(stats.peak.value, dtype=float)
    rms = np.asarray(stats.rms.value, dtype=float)
    typical = np.nanmedian(rms) if np.any(np.isfinite(rms)) else np.nan
    median = np.nan_to_num(np.asarray(stats.median.value, dtype=float))
    score = (peak - median) / typical if np.isfinite(typical) and typical > 0 else peak
    fwhm = _beam_fwhm_pixels(cube, n_chan // 2)
    size = max(1, int(round(fwhm))) if fwhm else 3
    if not np.any(np.isfinite(score)):
        channel, significance, smooth = n_chan // 2, 0.0, None
    else:
        # A single hot pixel can top the peak spectrum: the channels with the highest peaks are
        # compared again after smoothing to the beam, where a source keeps its brightness.
        candidates = np.argsort(np.where(np.isfinite(score), score, -np.inf))[::-1][:_CANDIDATES]
        best, best_value, smooth = None, -np.inf, None
        for index in candidates:
            if not np.isfinite(score[index]):
                continue
            plane = _smoothed_plane(cube, int(index) * stride, size)
            value = np.max(plane) - median[index]
            if value > best_value:
                best, best_value, smooth = int(index), value, plane
        channel, significance = best * stride, float(score[best])
    if smooth is None or np.all(~np.isfinite(smooth)):
        y, x = (ny - 1) / 2, (nx - 1) / 2
    else:
        y, x = np.unravel_index(int(np.argmax(smooth)), smooth.shape)
    radius = max(_MIN_RADIUS, (fwhm or 0.0) / 2)
    region = CirclePixelRegion(PixCoord(float(x), float(y)), radius=radius)
    return FirstView(channel=int(channel), position=(float(x), float(y)), region=region,
                     significance=significance, stride=stride)
