"""A scripted series of steps through the suite on the demo cubes, shared by the session and replay tests.

Each step is what a user does: open the suite, draw regions (box, oval, outline on the sky view's grid), add a
sky circle and a one-pixel region from code, mark line-free ranges and a line window, choose the baseline
order, a clip level, a magnification and a cosmology, make the moment maps and show one, move to a channel and
change the sky view's stretch.
"""

import astropy.units as u
import numpy as np
from regions import CircleSkyRegion, EllipsePixelRegion, PixCoord, PointSkyRegion, PolygonPixelRegion, \
    RectanglePixelRegion

from cubeloupe.analysis import demo_names, demo_path, demo_truth, display_axis
from cubeloupe.widgets import Loupe

#: One suite per demo cube, and the two windows of the lensed delivery together.
CASES = {name: [name] for name in demo_names()} | {"lensed_pair": ["lensed_spw1", "lensed_spw2"]}


def frequencies(loupe, window):
    return display_axis(loupe.cubes[window], "observed frequency").to_value(u.GHz)


def drive(case):
    """A suite opened on the case's cube(s) and taken through the steps; returns it with its moment maps made."""
    names = CASES[case]
    truth = demo_truth(names[0])
    loupe = Loupe([demo_path(n) for n in names] if len(names) > 1 else demo_path(names[0]),
                  z=float(truth.get("z", 0.0)), first_view=False)
    ny, nx = loupe.cube.shape[1:]
    cx, cy = nx / 2 - 0.5, ny / 2 - 0.5
    # Shapes drawn on the sky view arrive as pixel shapes on the current window's grid.
    loupe.add_region(RectanglePixelRegion(PixCoord(cx, cy), width=nx / 4, height=ny / 5, angle=12 * u.deg),
                     name="box")
    loupe.add_region(EllipsePixelRegion(PixCoord(cx - 3.3, cy + 2.7), width=9.0, height=5.0, angle=-30 * u.deg),
                     name="oval")
    loupe.add_region(PolygonPixelRegion(PixCoord([cx - 8, cx + 2, cx + 0.5], [cy - 9, cy - 7, cy + 4])),
                     name="outline")
    if len(loupe.cubes) > 1:
        loupe.window = 1  # drawn on the other window's grid
        loupe.add_region(RectanglePixelRegion(PixCoord(cx + 1.5, cy - 2.5), width=6, height=6), name="box 2")
        loupe.window = 0
    position = loupe.cube.wcs.celestial.pixel_to_world(cx + 4.2, cy - 1.1)
    loupe.add_region(CircleSkyRegion(position, 0.25 * u.arcmin if case == "single_dish" else 0.4 * u.arcsec),
                     name="sky circle")
    loupe.add_region(PointSkyRegion(position), name="one pixel")
    f = frequencies(loupe, 0)
    n = len(f)
    at = [int(round(fraction * (n - 1))) for fraction in (0.02, 0.16, 0.26, 0.72, 0.84, 0.97)]
    loupe.line_free = [[float(f[at[0]]), float(f[at[1]])], [float(f[at[4]]), float(f[at[5]])]]
    loupe.line_window = [float(f[at[3]]), float(f[at[2]])]
    loupe.baseline_order = 0 if case == "single_dish" else 1
    loupe.clip = 2.5
    if case.startswith("lensed"):
        loupe.magnification = 18.9
        loupe.cosmology = "WMAP9"
    loupe.make_moments(wait=True)
    loupe.sky_source = "moment 1"
    loupe.channel = n // 2 - 3
    loupe.sky_view.stretch = "asinh" if "asinh" in type(loupe.sky_view).class_traits()["stretch"].values else \
        loupe.sky_view.stretch
    assert loupe.status.level != "error", loupe.status.message
    assert loupe.measurements and loupe.moments is not None
    return loupe


def same_map(got, expected, n_channels):
    """A moment map equal bit for bit, or (a float32 cube) to float32 rounding.

    For a float32 cube the block kernels sum in float32 (the map then holds float32 values), in blocks whose
    order may differ between runs (threads free at the time), so two runs may differ in the last bits. The bound is that of a sum of n terms in floating point,
    |error| <= n * eps * sum|x| (Higham 2002, Accuracy and Stability of Numerical Algorithms, 2nd ed., eq. 4.4),
    with sum|x| taken as n times the map's largest value.
    """
    got, expected = np.asarray(got), np.asarray(expected)
    assert got.shape == expected.shape and np.array_equal(np.isnan(got), np.isnan(expected))
    if np.array_equal(got, expected, equal_nan=True):
        return
    # The demo cubes are float32: the block kernels accumulate their sums in float32 (the maps may then be
    # divided in float64, so a map need not hold float32 values), in blocks whose order and BLAS paths may
    # differ between processes under load (seen: 1e-7 relative on the single-dish demo). The bound is that
    # of a float32 sum of n terms.
    eps = np.finfo(np.float32).eps
    scale = np.nanmax(np.abs(expected))
    bound = n_channels ** 2 * eps * scale
    np.testing.assert_allclose(got, expected, rtol=0, atol=bound)
