"""Pictures of the views without a browser: PNG/SVG files drawn with matplotlib from the views' data.

bqplot's own ``Figure.save_png``/``save_svg`` are done by the browser (they
download a file there) and do nothing in a kernel with no front end. These
functions draw the same data the views hold (which came from
`cubeloupe.analysis`) with matplotlib's Agg backend, so they also work in
scripts, tests and CI.
"""

import astropy.units as u
import numpy as np
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure

from cubeloupe.analysis import (
    check_output_path, cube_rest_frequency, CubeloupeError, frequency_axis, velocity,
)

from ._look import blank_color

__all__ = ["render_sky", "render_spectrum", "channel_title"]


def _figure():
    return Figure(figsize=(6, 5), dpi=110)


def channel_title(cube, channel, *, rest_frequency=None, z=0.0, convention="radio"):
    """A channel's place in the band as a picture's title: frequency, and velocity when it can be measured.

    The velocity is measured from ``rest_frequency`` at ``z`` (or the cube's own rest frequency).
    """
    frequency = frequency_axis(cube)[channel]
    text = f"channel {channel} · {frequency.to_value(u.GHz):.6f} GHz"
    rest = rest_frequency if rest_frequency is not None else cube_rest_frequency(cube)
    if rest is not None:
        try:
            speed = velocity(frequency, rest, z, convention)
        except CubeloupeError:
            return text
        zero = f"rest {u.Quantity(rest, u.GHz).value:.6g} GHz" + (f" at z = {z:g}" if z else "")
        text += f" · {speed.to_value(u.km / u.s):+.1f} km/s\n({convention} velocity from {zero})"
    return text


def render_sky(sky_view, path, *, overwrite=False, title=None, rest_frequency=None, z=0.0, convention="radio"):
    """Draw the sky view's current image, colour bar, beam, contours and region outlines to a file.

    The axes are the view's: offsets from the map centre along the celestial axes (or pixels for a
    map without a sky projection), with square sky pixels. A channel is titled with its frequency
    and velocity (measured from ``rest_frequency`` at ``z`` in ``convention``, or from the cube's
    own rest frequency); ``title`` replaces that. The format follows the file name's extension
    (``.png``, ``.svg``, ``.pdf``).
    """
    path = check_output_path(path, overwrite)
    fig = _figure()
    fig.set_layout_engine("constrained")
    ax = fig.add_subplot()
    ny, nx = sky_view.cube.shape[1:]
    lo, hi = sky_view.shown_limits
    axes = sky_view.axes

    def world(x, y):
        if axes is None:
            return np.asarray(x, float), np.asarray(y, float)
        dx, dy = axes.offsets(x, y)
        return dx.value, dy.value

    (left, right), (bottom, top) = world([-0.5, nx - 0.5], [-0.5, ny - 0.5])
    # Narrow maps get a narrower picture, so the colour bar stays beside the map.
    fig.set_size_inches(min(max(1.9 + 3.9 * abs(right - left) / abs(top - bottom), 3.8), 7.5), 5)
    cmap = LinearSegmentedColormap.from_list("cubeloupe", list(sky_view.color_scale.colors)).with_extremes(
        bad=blank_color(sky_view.shown_ramp))
    shown = ax.imshow(np.asarray(sky_view.image.image), origin="lower", cmap=cmap, vmin=0, vmax=1,
                      extent=(left, right, bottom, top), interpolation="nearest", aspect="equal")
    bar = fig.colorbar(shown, ax=ax)
    ticks = np.linspace(0, 1, 5)
    bar.set_ticks(ticks)
    bar.set_ticklabels([f"{v:.3g}" for v in np.interp(ticks, np.asarray(sky_view.bar_image.image)[:, 0],
                                                       np.linspace(lo, hi, 256))])
    bar.set_label(sky_view._bar_axis.label)
    if len(sky_view.contour_mark.x):
        ax.plot(*world(sky_view.contour_mark.x, sky_view.contour_mark.y), color="white", lw=0.7)
    for item in sky_view.outlines:
        x, y = world(item["x"], item["y"])
        ax.plot(x, y, color=item["color"], lw=1.5)
        ax.text(x[0], y[0], item["name"], color=item["color"])
    if len(sky_view.beam_mark.x):
        ax.fill(*world(sky_view.beam_mark.x, sky_view.beam_mark.y), facecolor="white", alpha=0.6,
                edgecolor="black", lw=0.8)
    if title is None:
        if sky_view.source == "channel":
            title = channel_title(sky_view.cube, sky_view.channel, rest_frequency=rest_frequency, z=z,
                                  convention=convention)
        else:
            title = sky_view.source
    ax.set_title(title, fontsize=10)
    if axes is None:
        ax.set_xlabel("x (pixel)")
        ax.set_ylabel("y (pixel)")
    else:
        ax.set_xlabel(axes.labels[0])
        ax.set_ylabel(axes.labels[1])
        ax.text(0.0, -0.13, f"offsets from {axes.centre_text}", transform=ax.transAxes, fontsize=8,
                color="#486581", va="top")
    ax.set_xlim(left, right)
    ax.set_ylim(bottom, top)
    fig.savefig(path)
    return path


def render_spectrum(spectrum_view, path, *, overwrite=False):
    """Draw the spectrum view's curves, baselines, shaded ranges and line markers to a file."""
    path = check_output_path(path, overwrite)
    fig = _figure()
    fig.set_size_inches(8, 4)
    ax = fig.add_subplot()
    trans = ax.get_xaxis_transform()
    for mark, color in ((spectrum_view.free_mark, "#8ecae6"), (spectrum_view.window_mark, "#ffb703")):
        for xs in np.atleast_2d(mark.x) if len(mark.x) else []:
            ax.axvspan(min(xs), max(xs), color=color, alpha=0.3)
    for (name, window), mark in spectrum_view.curve_marks.items():
        ax.step(mark.x, mark.y, where="mid", color=mark.colors[0], lw=1.2, label=name if window == 0 else None)
    for mark in spectrum_view.model_marks.values():
        ax.plot(mark.x, mark.y, color="#6c757d", ls="-.", lw=1)
    for mark in spectrum_view._overlay_marks:
        if hasattr(mark, "names") and len(mark.x):
            for x, name in zip(mark.x, mark.names):
                ax.axvline(x, color="#2a9d8f", lw=0.8)
                ax.text(x, 0.9, name, rotation=90, transform=trans, fontsize=7, va="top")
    ax.set_xlabel(spectrum_view.x_axis.label)
    ax.set_ylabel(spectrum_view.y_axis.label)
    if spectrum_view.curve_marks:
        ax.legend(loc="upper right", fontsize=8)
    fig.savefig(path)
    return path
