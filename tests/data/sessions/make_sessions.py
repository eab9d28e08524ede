"""Write this version's session fixture (and the docs' example session) from a suite driven by hand-like steps.

Run it once per session format version: ``python tests/data/sessions/make_sessions.py``. It writes
``v<version>-disk.cubeloupe.json`` here (never replacing an existing one: files of earlier versions are kept so
that the tests show every later version still reads them) and ``docs/example.cubeloupe.json``. The machine's
absolute cube paths are left out; the cube is found relative to the session file.
"""

from pathlib import Path

import astropy.units as u
from regions import CircleSkyRegion, EllipsePixelRegion, PixCoord, PointSkyRegion, RectanglePixelRegion

from cubeloupe.analysis import demo_path, display_axis
from cubeloupe.widgets import Loupe
from cubeloupe.widgets.session import SESSION_VERSION, session_state, session_text

ROOT = Path(__file__).resolve().parents[3]


def driven_suite():
    loupe = Loupe(demo_path("disk"), z=0.0, first_view=False)
    loupe.add_region(RectanglePixelRegion(PixCoord(35.5, 35.5), width=12, height=8, angle=20 * u.deg), name="core")
    loupe.add_region(EllipsePixelRegion(PixCoord(28.0, 41.0), width=9, height=5, angle=-35 * u.deg),
                     name="north-east arm")
    position = loupe.cube.wcs.celestial.pixel_to_world(44, 30)
    loupe.add_region(CircleSkyRegion(position, 0.6 * u.arcsec), name="south-west clump")
    loupe.add_region(PointSkyRegion(position), name="clump peak")
    f = display_axis(loupe.cube, "observed frequency").to_value(u.GHz)
    loupe.line_free = [[float(f[3]), float(f[18])], [float(f[82]), float(f[96])]]
    loupe.line_window = [float(f[24]), float(f[76])]
    loupe.baseline_order = 1
    loupe.clip = 3.0
    loupe.make_moments(wait=True)
    loupe.sky_source = "moment 0"
    loupe.channel = 50
    loupe.sky_view.stretch = "asinh"
    loupe.sky_view.contour_source = "moment 0"
    loupe.region_list.selected = "core"
    # Version 2 (#16, #18): smoothing, a position–velocity path 3 pixels wide, channel maps of 9 panels.
    loupe.smoothing.kernel = "hanning"
    loupe.pv_panel.set_path([[20.0, 22.0], [52.0, 50.0]], width=3.0, window=0)
    loupe.channel_map_panel.n = 9
    loupe.channel_map_panel.make(wait=True)
    assert loupe.pv_panel.slice is not None and loupe.channel_map_panel.state == "done"
    assert loupe.status.level != "error", loupe.status.message
    return loupe


def write(loupe, path, replace):
    if path.exists() and not replace:
        print(f"kept {path} (files of a released format version are never replaced)")
        return
    data = session_state(loupe, relative_to=path.parent)
    for cube in data["cubes"]:
        cube.pop("absolute")
    path.write_text(session_text(data))
    print(f"wrote {path}")


if __name__ == "__main__":
    suite = driven_suite()
    write(suite, Path(__file__).parent / f"v{SESSION_VERSION}-disk.cubeloupe.json", replace=False)
    write(suite, ROOT / "docs" / "example.cubeloupe.json", replace=True)
