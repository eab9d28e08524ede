"""Channel maps: a grid of images across a line, each the mean of a run of channels (or one channel of every k).

`channel_panels` computes the images and what labels them; `channel_maps`
draws them as one matplotlib figure for papers:

* the window's channels are split into ``n`` runs of consecutive channels,
  as equal as they divide, and each run averaged (NaN voxels left out); or,
  with ``average=False``, one channel is taken from every run of ``k`` (the
  middle one, ``k`` = channels // ``n``);
* one colour scale for every panel, sky axes in world coordinates on the
  lower-left panel (matplotlib's WCSAxes, `astropy.visualization.wcsaxes`;
  every panel shows the same field), the beam in that panel, contours at multiples of the rms (negative ones dashed),
  each panel labelled with its centre velocity (or frequency);
* the rms of a panel is the median over panels of the robust rms,
  1.4826 x MAD of the panel's pixels (common practice; see `noise`), so the
  line's own pixels hardly move it. For a mean of ``m`` channels it is about
  the channel rms over ``sqrt(m)``.

Only the window's channels are read from the memory-mapped cube, one run at a
time (with a read-ahead hint for a cube not in memory).

Examples
--------
>>> import astropy.units as u
>>> from cubeloupe.analysis import demo_path, open_cube
>>> cube = open_cube(demo_path("disk"))
>>> fig = channel_maps(cube, window=(1250, 1680) * u.km / u.s, rest_frequency=230.538 * u.GHz, n=16)
>>> len(fig.axes)   # 16 panels and the colour bar
17
"""

import math
from dataclasses import dataclass
from pathlib import Path

import astropy.units as u
import contourpy
import numpy as np

from .beams import map_beam
from .cube_file import cube_array, custom_mask
from .cubes import source_name
from .display import beam_outline, display_limits
from .errors import SpectralAxisError, SpectralRangeError
from .noise import MAD_TO_SIGMA
from .prefetch import prefetch_channels
from .spectral import axis_in, channel_mask

__all__ = ["ChannelPanels", "channel_panels", "channel_maps", "DEFAULT_CONTOURS"]

#: Contour levels in multiples of the panel rms (positive; the negative of the first is drawn dashed).
DEFAULT_CONTOURS = (3, 6, 12, 24, 48)

_KMS = u.km / u.s
_MAX_RMS_SAMPLES = 65536  # pixels per panel for the MAD; a subset is as good for a noise figure


@dataclass(frozen=True, eq=False)
class ChannelPanels:
    """The images of a channel map and what labels them.

    Attributes
    ----------
    images : Quantity, shape (n, ny, nx)
        In the cube's unit.
    centers : Quantity, shape (n,)
        Each panel's mean spectral coordinate, in ``centers.unit`` (km/s or GHz).
    channels : list of (int, int)
        Each panel's cube channels as (first, last + 1); with ``average=False`` a single channel.
    rms : Quantity
        Typical rms of one panel (see the module docstring).
    beam : radio_beam.Beam or None
    wcs : astropy.wcs.WCS
        The cube's celestial WCS.
    average : bool
        Whether panels average their runs of channels.
    source : str
    """

    images: u.Quantity
    centers: u.Quantity
    channels: list
    rms: u.Quantity
    beam: object
    wcs: object
    average: bool
    source: str


def _label_unit(cube, spectral_unit, rest_frequency, z, convention):
    if spectral_unit is not None:
        return u.Unit(spectral_unit)
    try:
        axis_in(cube, _KMS, rest_frequency=rest_frequency, z=z, convention=convention)
        return _KMS
    except SpectralAxisError:
        return u.GHz


def _mean_image(cube, data, start, stop):
    """Mean of channels ``start:stop`` per pixel, NaN (and masked) voxels left out; float32."""
    if data is None:
        block = np.asarray(cube[start:stop].filled_data[:].value, dtype=np.float32)
    else:
        block = np.array(data[start:stop], dtype=np.float32)  # one copy, native byte order
    sums = block.sum(axis=0)
    if np.isfinite(sums).all():
        return sums / np.float32(stop - start)
    finite = np.isfinite(block)
    counts = finite.sum(axis=0)
    np.copyto(block, 0, where=~finite)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(counts > 0, block.sum(axis=0) / counts, np.nan).astype(np.float32)


def _robust_rms(image):
    values = image.ravel()
    values = values[np.isfinite(values)]
    if values.size > _MAX_RMS_SAMPLES:
        values = values[:: values.size // _MAX_RMS_SAMPLES]
    if values.size == 0:
        return np.nan
    return MAD_TO_SIGMA * float(np.median(np.abs(values - np.median(values))))


def channel_panels(cube, window, *, n=16, average=True, rest_frequency=None, z=0.0, convention="radio",
                   spectral_unit=None):
    """The images of a channel map over ``window`` (see the module docstring).

    Parameters
    ----------
    cube : SpectralCube
    window : Quantity, shape (2,)
        Spectral range in any unit (velocities need ``rest_frequency`` or a header RESTFRQ).
    n : int
        Panels; fewer when the window holds fewer channels.
    average : bool
        Average each run of channels (default), or show one channel of each run.
    rest_frequency, z, convention
        The velocity frame (see `axis_in`).
    spectral_unit : Unit or str, optional
        Unit of the panel labels; km/s when velocities can be formed, else GHz.

    Returns
    -------
    ChannelPanels

    Raises
    ------
    SpectralRangeError
        A window outside the band, or ``n`` < 1.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> panels = channel_panels(open_cube(demo_path("disk")), (1250, 1680) * u.km / u.s,
    ...                         rest_frequency=230.538 * u.GHz, n=4)
    >>> panels.images.shape, panels.channels[0]
    ((4, 72, 72), (14, 31))
    """
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise SpectralRangeError(f"n must be a whole number of panels >= 1; got {n!r}")
    frame = dict(rest_frequency=rest_frequency, z=z, convention=convention)
    selected = np.flatnonzero(channel_mask(cube, window, what="window", **frame))
    first, last = int(selected.min()), int(selected.max())
    n_channels = last - first + 1
    n = min(int(n), n_channels)
    if average:
        runs = [(int(r[0]), int(r[-1]) + 1) for r in np.array_split(np.arange(first, last + 1), n)]
    else:
        k = n_channels // n
        runs = [(first + k * i + k // 2, first + k * i + k // 2 + 1) for i in range(n)]
    data = cube_array(cube)
    if data is not None and custom_mask(cube, data) is not None:
        data = None  # the cube's own mask: read through spectral-cube
    if data is not None:
        prefetch_channels(data, range(runs[0][0], runs[-1][1]))
    images = np.stack([_mean_image(cube, data, start, stop) for start, stop in runs])
    unit = _label_unit(cube, spectral_unit, rest_frequency, z, convention)
    coordinates = axis_in(cube, unit, **frame).value
    centers = u.Quantity([coordinates[start:stop].mean() for start, stop in runs], unit)
    rms = np.nanmedian([_robust_rms(image) for image in images]) if np.isfinite(images).any() else np.nan
    return ChannelPanels(
        images=u.Quantity(images, cube.unit, copy=False), centers=centers, channels=runs,
        rms=rms * cube.unit, beam=map_beam(cube, slice(runs[0][0], runs[-1][1])), wcs=cube.wcs.celestial,
        average=bool(average), source=source_name(cube),
    )


def _contour_lines(image, levels):
    """Contours of ``image`` as one NaN-separated (x, y) pair per level, in pixel coordinates.

    Traced by contourpy (matplotlib's tracer) straight into NaN-separated
    arrays: on noisy 512 x 512 panels, with tens of thousands of small loops,
    matplotlib's ``contour`` took over 1 s for 16 panels and joining separate
    pieces in Python (`display.contour_paths`) several seconds.
    """
    generator = contourpy.contour_generator(z=np.ma.masked_invalid(np.asarray(image, dtype=float)),
                                            line_type=contourpy.LineType.ChunkCombinedNan)
    lines = []
    for level in levels:
        chunks = [chunk for chunk in generator.lines(float(level))[0] if chunk is not None]
        points = np.concatenate(chunks) if chunks else np.empty((0, 2))
        lines.append((points[:, 0], points[:, 1]))
    return lines


def _label(value, unit):
    text = unit.to_string().replace(" / ", "/")
    if unit.is_equivalent(_KMS):
        return f"{value:.1f} {text}"
    return f"{value:.5f} {text}"


def _sky_axes(ax, panels, shape, show_beam):
    """Label the sky axes of the WCSAxes panel and draw the beam in its lower-left corner."""
    from matplotlib.patches import Polygon

    wcs = panels.wcs.wcs
    frame = wcs.radesys.strip() or "ICRS"
    lon, lat = ax.coords[0], ax.coords[1]
    lon.set_axislabel(f"RA ({frame})" if wcs.ctype[0].startswith("RA") else wcs.ctype[0].split("-")[0], fontsize=8)
    lat.set_axislabel(f"Dec ({frame})" if wcs.ctype[1].startswith("DEC") else wcs.ctype[1].split("-")[0],
                      fontsize=8)
    lon.set_ticklabel(size=6)
    lat.set_ticklabel(size=6)
    lon.set_ticks(number=3)
    lat.set_ticks(number=4)
    if show_beam and panels.beam is not None:
        ny, nx = shape
        x, y = beam_outline(panels.beam, panels.wcs, (0, 0))
        centre = (0.06 * nx + np.ptp(x) / 2, 0.06 * ny + np.ptp(y) / 2)
        ax.add_patch(Polygon(np.column_stack([x + centre[0], y + centre[1]]), closed=True, facecolor="none",
                             edgecolor="white", linewidth=1.0))


def channel_maps(cube, window, *, n=16, average=True, rest_frequency=None, z=0.0, convention="radio",
                 spectral_unit=None, columns=None, contours=DEFAULT_CONTOURS, rms=None, vmin=None, vmax=None,
                 cmap="viridis", panel_size=2.0, show_beam=True):
    """Channel maps of ``cube`` over ``window`` as a matplotlib Figure (save it as PNG or PDF).

    See the module docstring for how panels are made and drawn.

    Parameters
    ----------
    cube : SpectralCube
    window : Quantity, shape (2,)
    n : int
        Panels (16 by default, on a 4 x 4 grid).
    average : bool
        Average runs of channels (default) or show one channel of every ``k``.
    rest_frequency, z, convention
        The velocity frame of ``window`` and of the labels.
    spectral_unit : Unit or str, optional
        Unit of the panel labels (km/s when velocities can be formed, else GHz).
    columns : int, optional
        Panels per row; ``ceil(sqrt(n))`` by default.
    contours : sequence of float or None
        Levels in multiples of the rms; None for no contours.
    rms : Quantity, optional
        The rms the contours are multiples of; measured from the panels by default.
    vmin, vmax : Quantity or float, optional
        Colour limits (cube unit); by default the 0.5 and 99.9 percentiles of all panels.
    cmap : str
        A matplotlib colour map.
    panel_size : float
        Side of one panel in inches.
    show_beam : bool
        Draw the beam in the lower-left panel.

    Returns
    -------
    matplotlib.figure.Figure
        Not attached to pyplot (no window opens); ``fig.savefig("maps.pdf")`` writes it.
        ``fig.channel_panels`` holds the `ChannelPanels` drawn.

    Raises
    ------
    SpectralRangeError
        A window outside the band, or ``n`` < 1.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> fig = channel_maps(open_cube(demo_path("disk")), (1250, 1680) * u.km / u.s,
    ...                    rest_frequency=230.538 * u.GHz, n=9)
    >>> fig.savefig(pathlib.Path(tempfile.mkdtemp()) / "maps.png")
    """
    from matplotlib.figure import Figure

    panels = channel_panels(cube, window, n=n, average=average, rest_frequency=rest_frequency, z=z,
                            convention=convention, spectral_unit=spectral_unit)
    unit = panels.images.unit
    images = panels.images.value
    count = len(images)
    columns = int(columns) if columns else math.ceil(math.sqrt(count))
    rows = math.ceil(count / columns)
    low, high = display_limits(images, 0.5, 99.9,
                               vmin=None if vmin is None else u.Quantity(vmin, unit).value,
                               vmax=None if vmax is None else u.Quantity(vmax, unit).value)
    noise = panels.rms.to_value(unit) if rms is None else u.Quantity(rms, unit).value
    levels = []
    if contours is not None and np.isfinite(noise) and noise > 0:
        levels = sorted(float(c) * noise for c in contours)

    fig = Figure(figsize=(columns * panel_size + 2.2, rows * panel_size + 0.9))
    axes = []
    labelled = (rows - 1) * columns  # the lower-left panel carries the sky axes and the beam
    for i, image in enumerate(images):
        if i == labelled:
            ax = fig.add_subplot(rows, columns, i + 1, projection=panels.wcs)
        else:
            # Every panel shows the same field; plain axes without ticks draw about 4x faster than WCSAxes
            # (measured: 16 WCSAxes took 1.6-1.9 s to render, plain axes 0.3 s).
            ax = fig.add_subplot(rows, columns, i + 1)
            ax.set_xticks([])
            ax.set_yticks([])
        shown = ax.imshow(image, origin="lower", cmap=cmap, vmin=low, vmax=high, interpolation="nearest")
        if levels and np.isfinite(image).any():
            drawn = [-levels[0]] + levels
            for (x, y), level, colour, style in zip(_contour_lines(image, drawn), drawn,
                                                    ["0.75"] + ["white"] * len(levels), ["--"] + ["-"] * len(levels)):
                if x.size:
                    ax.plot(x, y, color=colour, linestyle=style, linewidth=0.6, scalex=False, scaley=False,
                            gid=f"contour {float(level)!r}")
        ax.text(0.04, 0.95, _label(panels.centers[i].value, panels.centers.unit), transform=ax.transAxes,
                ha="left", va="top", color="white", fontsize=8)
        if i == labelled:
            _sky_axes(ax, panels, image.shape, show_beam)
        axes.append(ax)
    fig.subplots_adjust(left=0.11, right=0.87, bottom=0.09, top=0.94, wspace=0.03, hspace=0.03)
    bar = fig.colorbar(shown, ax=axes, fraction=0.03, pad=0.02)
    bar.set_label(unit.to_string(), fontsize=8)
    bar.ax.tick_params(labelsize=7)
    kind = "mean of" if panels.average else "one channel of"
    caption = f"{Path(panels.source).name}: {kind} each run of channels"
    if levels:
        caption += f"; contours -{contours[0]:g}, " + ", ".join(f"{c:g}" for c in sorted(contours)) + \
            f" x rms ({noise:.3g} {unit.to_string()})"
    fig.suptitle(caption, fontsize=8)
    fig.channel_panels = panels
    return fig
