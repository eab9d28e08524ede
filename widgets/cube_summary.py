"""The suite's title line: one short summary per cube (file, shape, band, beam, unit).

Every number comes from `cubeloupe.analysis` (`cube_beam`, `display_axis`,
`unit_text`); this module only words them for the header.
"""

import html
import os

import astropy.units as u
import numpy as np

from cubeloupe.analysis import NOMINAL_REST_FREQUENCY, BeamError, cube_beam, display_axis, source_name, unit_text

__all__ = ["cube_summary", "title_html", "window_name"]

_TITLE = ("<div style='display:flex;align-items:baseline;gap:10px;border-bottom:2px solid #334e68;"
          "padding:0 0 3px 0;margin:0 0 6px 0'><span style='font-size:15px;font-weight:700;color:#243b53'>"
          "cubeloupe</span><span style='font-size:12px;color:#486581;line-height:1.5'>{info}</span></div>")


def title_html(info):
    """The suite's title bar with ``info`` (HTML) beside the name."""
    return _TITLE.format(info=info)


def window_name(cube, index):
    """The file name of ``cube`` (no folder), or 'window <index>' for a cube made in memory."""
    path = source_name(cube, default="")
    return os.path.basename(path) if path else f"window {index}"


def _beam_text(cube):
    try:
        beam = cube_beam(cube)
    except BeamError:
        return "no beam in the header"
    if np.ndim(beam.major) > 0:
        return (f"beam {np.median(beam.major.to_value(u.arcsec)):.2f}″ × "
                f"{np.median(beam.minor.to_value(u.arcsec)):.2f}″ (median; varies by channel)")
    return (f"beam {beam.major.to_value(u.arcsec):.2f}″ × {beam.minor.to_value(u.arcsec):.2f}″,"
            f" PA {beam.pa.to_value(u.deg):.0f}°")


def cube_summary(cubes, frequencies, window, convention, velocity_only):
    """One HTML line per cube: file, channels × pixels, band, beam, unit; the shown window in bold.

    Parameters
    ----------
    cubes : list of SpectralCube
    frequencies : list of ndarray
        Each cube's observed channel frequencies in GHz.
    window : int
        The window shown on the sky (bold when there are several).
    convention : str
        Velocity convention, for velocity-only cubes.
    velocity_only : bool
        The cubes have a velocity axis and no rest frequency: quote velocities, not frequencies.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube, display_axis
    >>> cube = open_cube(demo_path("disk"))
    >>> ghz = display_axis(cube, "observed frequency").to_value("GHz")
    >>> "channels" in cube_summary([cube], [ghz], 0, "radio", False)
    True
    """
    parts = []
    for index, cube in enumerate(cubes):
        f = frequencies[index]
        n, ny, nx = cube.shape
        width = abs(f[-1] - f[0]) / max(n - 1, 1) * 1e3
        band = f"{f.min():.4f}–{f.max():.4f} GHz ({width:.4g} MHz channels; channel centres)"
        if velocity_only:
            v = display_axis(cube, "velocity", rest_frequency=NOMINAL_REST_FREQUENCY,
                             convention=convention).to_value(u.km / u.s)
            band = (f"{v.min():.2f} to {v.max():.2f} km/s ({abs(v[-1] - v[0]) / max(n - 1, 1):.4g} km/s "
                    f"channels, {convention}; no rest frequency)")
        text = (f"{html.escape(window_name(cube, index))} · {n} channels × {ny} × {nx} pixels · "
                f"{band} · {_beam_text(cube)} · {html.escape(unit_text(cube.unit) or 'no unit')}")
        if len(cubes) > 1:
            text = f"window {index}: {text}"
            if index == window:
                text = f"<b>{text}</b>"
        parts.append(text)
    return "<br>".join(parts)
