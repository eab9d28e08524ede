"""Pictures of the views without a browser: PNG/SVG files drawn with matplotlib from the views' data.

bqplot's own ``Figure.save_png``/``save_svg`` are done by the browser (they
download a file there) and do nothing in a kernel with no front end. These
functions draw the same data the views hold (which came from
`cubeloupe.analysis`) with matplotlib's Agg backend, so they also work in
scripts, tests and CI.
"""

import numpy as np
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure

from cubeloupe.analysis import check_output_path

from ._look import RAMPS

__all__ = ["render_sky", "render_spectrum"]


def _figure():
    return Figure(figsize=(6, 5), dpi=110)


def render_sky(sky_view, path, *, overwrite=False):
    """Draw the sky view's current image, colour bar, beam, contours and region outlines to a file.

    The format follows the file name's extension (``.png``, ``.svg``, ``.pdf``).
    """
    path = check_output_path(path, overwrite)
    fig = _figure()
    ax = fig.add_subplot()
    ny, nx = sky_view.cube.shape[1:]
    lo, hi = sky_view.shown_limits
    cmap = LinearSegmentedColormap.from_list("cubeloupe", RAMPS[sky_view.palette])
    shown = ax.imshow(np.asarray(sky_view.image.image), origin="lower", cmap=cmap, vmin=0, vmax=1,
                      extent=(-0.5, nx - 0.5, -0.5, ny - 0.5), interpolation="nearest")
    bar = fig.colorbar(shown, ax=ax)
    ticks = np.linspace(0, 1, 5)
    bar.set_ticks(ticks)
    bar.set_ticklabels([f"{v:.3g}" for v in np.interp(ticks, np.asarray(sky_view.bar_image.image)[:, 0],
                                                       np.linspace(lo, hi, 256))])
    bar.set_label(sky_view._bar_axis.label)
    for mark in (sky_view.contour_mark,):
        if len(mark.x):
            ax.plot(mark.x, mark.y, color="white", lw=0.7)
    for item in sky_view.outlines:
        ax.plot(item["x"], item["y"], color=item["color"], lw=1.5)
        ax.text(item["x"][0], item["y"][0], item["name"], color=item["color"])
    if len(sky_view.beam_mark.x):
        ax.fill(sky_view.beam_mark.x, sky_view.beam_mark.y, color="white", alpha=0.5)
    title = "channel %d" % sky_view.channel if sky_view.source == "channel" else sky_view.source
    ax.set_title(title)
    ax.set_xlabel("x (pixel)")
    ax.set_ylabel("y (pixel)")
    ax.set_xlim(-0.5, nx - 0.5)
    ax.set_ylim(-0.5, ny - 0.5)
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
