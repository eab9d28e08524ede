"""The whole suite on real observed cubes in JupyterLab: a region, moment maps, moment 1 in the window (#17).

A notebook made here opens the suite (``Loupe``) on each cube of ``../shared/real-cubes/`` that is
present (each skipped, with the reason, where it is absent; SOURCES.md there says what each holds),
and on a 6 x 21-pixel cube written by the notebook whose moment maps are made and shown before its
figure is on the page. For each real cube, as a user would: type the redshift of the brightest
emission (the suite opens on it), draw a box with the Box tool, mark a line window around the line
and line-free channels on both sides, press "Make moment maps" and choose "moment 1" under "Show".

Checked from the page and the kernel: the box becomes a region with a spectrum; the moment maps
are offered; moment 1's colour range and every value shown lie within the window's velocities (an
intensity-weighted mean of the window's channel velocities with positive weights lies between
them; on these cubes noise once set a -2 000..+9 000 km/s range for a 460 km/s window); the
narrow map has at least two x ticks; the page is resized narrow and back; no error output and no
browser console error (an SVG transform with "undefined" was once seen). Screenshots of each
state go to tests/browser/screenshots-latest/ (real-*.png).

What an observer sees in the cubes (worked out from the data, SOURCES.md): co10_ngc4047_carma, CO
J=1-0 of a galaxy at about 3 400 km/s (radio), rotating over a few hundred km/s in 20 km/s channels;
l1448_13co, the 13CO J=1-0 line of a cloud at about 4.3 km/s in 66 m/s channels, no rest frequency
in the file (given here: 110.20135428 GHz, CDMS catalogue).

Hooks relied on: CSS classes cubeloupe-loupe, cubeloupe-sky-figure, cubeloupe-region-tools (button
"Box"), cubeloupe-z-input, cubeloupe-moment-button, cubeloupe-source, cubeloupe-moment-panel,
cubeloupe-status-text; bqplot's ``.plotarea_events`` and ``g.tick``. Traits read back: Loupe.regions,
spectra, channel, rest_frequency, z, cube, moments (window), sky_source, sky_view.shown_limits,
sky_view.maps.
"""

import json
from pathlib import Path

import pytest

from lab import distinct_colours, wait_until, x_axis_ticks

pytestmark = pytest.mark.browser

NOTEBOOK = "real_cubes_probe.ipynb"
REAL_CUBES = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"
# name: (file, rest frequency given by the user (code) or None, half-width of the line window in km/s)
REAL = {
    # CO J=1-0: the file's RESTFREQ. A galaxy's rotation: +-250 km/s about its systemic velocity.
    "carma": ("co10_ngc4047_carma.fits", None, 250.0),
    # 13CO J=1-0 at 110.20135428 GHz (CDMS catalogue); a cloud's line: +-1 km/s.
    "l1448": ("l1448_13co.fits", "110.20135428 * u.GHz", 1.0),
}

SETUP = """\
import json
import numpy as np
import astropy.units as u
from astropy.io import fits
from cubeloupe.analysis import display_axis
from cubeloupe.widgets import Loupe
suites = {}
"""

REAL_CELL = """\
suites[{name!r}] = {name} = Loupe({path!r}, rest_frequency={rest})
{name}
"""

# A strip 6 pixels wide and 21 high (1" pixels) with a line in a blob; its moment maps are made and moment 1
# chosen before the suite is displayed (the figure is not laid out yet when the maps arrive).
NARROW = """\
ny, nx, nchan = 21, 6, 24
yy, xx = np.mgrid[:ny, :nx]
blob = np.exp(-0.5 * (((xx - 2.5) / 1.5) ** 2 + ((yy - 9) / 3.0) ** 2))
line = np.exp(-0.5 * ((np.arange(nchan) - 12) / 2.0) ** 2)[:, None, None]
data = (line * blob + 0.02 * np.random.default_rng(1).normal(size=(nchan, ny, nx))).astype('float32')
header = fits.Header()
for key, value in dict(CTYPE1='RA---SIN', CRVAL1=150.0, CDELT1=-1 / 3600, CRPIX1=3.5, CUNIT1='deg',
                       CTYPE2='DEC--SIN', CRVAL2=2.0, CDELT2=1 / 3600, CRPIX2=11.0, CUNIT2='deg',
                       CTYPE3='FREQ', CRVAL3=230.538e9 + 12e6, CDELT3=-1e6, CRPIX3=1.0, CUNIT3='Hz',
                       RESTFRQ=230.538e9, BUNIT='Jy/beam', BMAJ=2 / 3600, BMIN=1.5 / 3600, BPA=30.0,
                       SPECSYS='LSRK', RADESYS='ICRS', EQUINOX=2000.0).items():
    header[key] = value
fits.PrimaryHDU(data, header).writeto('narrow_strip_moments.fits', overwrite=True)
narrow = Loupe('narrow_strip_moments.fits', first_view=False)
f = display_axis(narrow.cube, 'observed frequency').to_value(u.GHz)
narrow.line_free = [sorted([float(f[0]), float(f[4])]), sorted([float(f[19]), float(f[23])])]
narrow.line_window = sorted([float(f[7]), float(f[17])])
narrow.make_moments(wait=True)
narrow.sky_source = 'moment 1'
suites['narrow'] = narrow
narrow
"""

# Two windows: the disk demo and the strip above; moment maps of the strip (window 1), shown before display.
PAIR = """\
from cubeloupe.analysis import demo_path
pair = Loupe([demo_path('disk'), 'narrow_strip_moments.fits'], first_view=False)
pair.window = 1
pair.line_free, pair.line_window = narrow.line_free, narrow.line_window
pair.make_moments(wait=True)
pair.sky_source = 'moment 1'
suites['pair'] = pair
pair
"""

# The varying-beams demo: its spectra end in blanked channels (where bqplot once wrote "translate(x,undefined)").
BEAMS = """\
suites['beams'] = beams = Loupe(demo_path('varying_beams'))
beams
"""

# Typed into the notebook for one suite: the redshift that puts velocity zero on the channel the suite opened on
# (the brightest emission), for the z box; the line window and line-free ranges around it in the suite's frame.
# Observed frequency of a rest-frame velocity v: rest (1 - v/c) / (1 + z) (radio convention, Greisen et al. 2006).
RANGES = """\
L = suites[{name!r}]
_f = display_axis(L.cube, 'observed frequency').to(u.GHz)
_rest = L.rest_frequency * u.GHz
_z = float(_rest / _f[L.channel] - 1)
_v = (_f * (1 + _z)).to(u.km / u.s, equivalencies=u.doppler_radio(_rest)).value
_inside = np.abs(_v) <= {half}
_free = np.abs(_v) > {half} + 2 * np.abs(np.diff(_v)).max()
_sides = [_f[_free & (_v < 0)].value, _f[_free & (_v > 0)].value]
print(json.dumps({{'z': _z, 'window': sorted([float(_f[_inside].min().value), float(_f[_inside].max().value)]),
                  'line_free': [sorted([float(s.min()), float(s.max())]) for s in _sides if s.size]}}))
"""


def _write_notebook(folder, real):
    import nbformat

    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    cells = [SETUP] + [REAL_CELL.format(name=name, path=str(path), rest=rest)
                       for name, (path, rest, _) in real.items()] + [NARROW, PAIR, BEAMS]
    notebook.cells = [nbformat.v4.new_code_cell(source) for source in cells]
    nbformat.write(notebook, str(folder / NOTEBOOK))


def ask(lab, expression):
    """Evaluate ``expression`` in the notebook's kernel (``suites`` holds the suites by name); JSON back."""
    output = lab.run_code(f"print(json.dumps({expression}, default=str))")
    return json.loads(output.splitlines()[-1])


def present():
    return {name: ((REAL_CUBES / file).resolve(), rest, half) for name, (file, rest, half) in REAL.items()
            if (REAL_CUBES / file).exists()}


@pytest.fixture(scope="module")
def real_page(lab_page, lab_root):
    real = present()
    _write_notebook(lab_root, real)
    lab = lab_page
    lab.page.set_viewport_size({"width": 1440, "height": 900})
    lab.open_notebook(NOTEBOOK)
    # As a user with JupyterLab's file browser open beside the notebook.
    lab.page.locator(".jp-SideBar.jp-mod-left .lm-TabBar-tab").first.click()
    lab.page.locator("#jp-left-stack").wait_for(state="visible")
    lab.run_all()
    names = [*real, "narrow", "pair", "beams"]
    suites = lab.notebook.locator(".cubeloupe-loupe")
    # Five suites on a busy 2-core machine: allow the page a few minutes to draw them.
    wait_until(lambda: suites.count() == len(names), f"{len(names)} suites on the page (found {suites.count()})",
               timeout=240)
    assert lab.error_outputs() == []
    return lab, {name: suites.nth(k) for k, name in enumerate(names)}


def _bottom_tick_labels(figure):
    """Texts of a bqplot figure's horizontal axis tick labels, left to right as d3 writes them."""
    return figure.evaluate("""(figure) => { const axis = Array.from(figure.querySelectorAll('g.axis'))
        .find(a => a.getAttribute('text-anchor') === 'middle');
      return axis ? Array.from(axis.querySelectorAll('g.tick text')).map(t => t.textContent) : []; }""")


def shot(lab, suite, name):
    """A page-sized PNG with the suite's views at the top of the notebook."""
    suite.locator(".cubeloupe-sky-view").evaluate("(view) => view.scrollIntoView({block: 'start'})")
    return lab.screenshot(name)


@pytest.mark.parametrize("name", list(REAL))
def test_region_moment_maps_and_moment_1_within_the_window(real_page, name):
    if name not in present():
        pytest.skip(f"real cube {REAL[name][0]} not found in {REAL_CUBES} (../shared/real-cubes/ beside the "
                    "repository)")
    lab, suites = real_page
    suite = suites[name]
    half = REAL[name][2]
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    suite.locator(".cubeloupe-sky-view").scroll_into_view_if_needed()
    wait_until(lambda: distinct_colours(canvas) > 5, "the sky image to be drawn")
    shot(lab, suite, f"real-{name}-01-opened")
    ranges = json.loads(lab.run_code(RANGES.format(name=name, half=half)).splitlines()[-1])

    # The redshift of the brightest emission, typed into the z box.
    z_box = suite.locator(".cubeloupe-z-input input")
    z_box.scroll_into_view_if_needed()
    z_box.fill(f"{ranges['z']:.6g}")
    z_box.press("Enter")
    wait_until(lambda: abs(ask(lab, f"suites[{name!r}].z") - float(f"{ranges['z']:.6g}")) < 1e-12, "z to be set")

    # A box drawn with the Box tool over the middle of the map.
    before = ask(lab, f"[r['name'] for r in suites[{name!r}].regions]")
    suite.locator(".cubeloupe-region-tools button", has_text="Box").click()
    area = suite.locator(".cubeloupe-sky-figure .plotarea_events")
    area.scroll_into_view_if_needed()
    box = area.bounding_box()
    lab.drag((box["x"] + 0.35 * box["width"], box["y"] + 0.35 * box["height"]),
             (box["x"] + 0.65 * box["width"], box["y"] + 0.65 * box["height"]), steps=12)
    wait_until(lambda: len(ask(lab, f"suites[{name!r}].regions")) == len(before) + 1, "the box to become a region")
    new = [n for n in ask(lab, f"[r['name'] for r in suites[{name!r}].regions]") if n not in before]
    assert ask(lab, f"[s is not None and bool(np.isfinite(s.value).any()) for s in suites[{name!r}].spectra[{new[0]!r}]]") \
        == [True], f"region {new[0]} of {name} has no spectrum"
    shot(lab, suite, f"real-{name}-02-box-region")

    # The line window and line-free ranges, then the moment maps as a user makes them.
    lab.run_code(f"suites[{name!r}].line_free = {ranges['line_free']!r}; "
                 f"suites[{name!r}].line_window = {ranges['window']!r}")
    suite.locator(".cubeloupe-moment-button").scroll_into_view_if_needed()
    suite.locator(".cubeloupe-moment-button").click()
    choice = suite.locator(".cubeloupe-source select")
    status = suite.locator(".cubeloupe-moment-panel .cubeloupe-status-text")

    def offered():
        return [text.replace("\xa0", " ") for text in choice.locator("option").all_inner_texts()]

    wait_until(lambda: "moment 1" in offered() or "✖" in status.inner_text(), "'moment 1' to be offered under Show")
    assert "✖" not in status.inner_text(), f"{name}: the moment status shows an error: {status.inner_text()}"
    choice.select_option(index=offered().index("moment 1"))
    wait_until(lambda: ask(lab, f"suites[{name!r}].sky_source") == "moment 1", "moment 1 on the sky")
    kernel = ask(lab, f"(lambda L: {{'limits': L.sky_view.shown_limits, 'window': sorted(L.moments.window.value.tolist()), "
                      f"'shown': [float(np.nanmin(L.sky_view.maps['moment 1'].value)), "
                      f"float(np.nanmax(L.sky_view.maps['moment 1'].value)), "
                      f"int(np.isfinite(L.sky_view.maps['moment 1'].value).sum())]}})(suites[{name!r}])")
    low, high = kernel["window"]
    vmin, vmax = kernel["limits"]
    # The window is centred on velocity zero (the typed z), +-half: the colour range and every value shown
    # lie within its first and last channel velocities.
    assert low < 0 < high and high - low <= 2 * half + 1e-6
    assert low - 1e-6 <= vmin < vmax <= high + 1e-6, f"{name}: moment 1 drawn over {vmin:.1f}..{vmax:.1f} km/s " \
                                                      f"for a {low:.1f}..{high:.1f} km/s window"
    shown_low, shown_high, count = kernel["shown"]
    assert count > 20 and low - 1e-3 <= shown_low < shown_high <= high + 1e-3
    wait_until(lambda: distinct_colours(canvas) > 10, "moment 1 to be drawn")
    shot(lab, suite, f"real-{name}-03-moment-1")
    assert lab.error_outputs() == []
    assert lab.console_errors == []


def test_maps_made_before_display_and_a_resize_leave_no_console_error(real_page):
    """The once-seen console error (an SVG transform with "undefined"): moment maps shown before the figure is
    laid out, a 6 x 21-pixel map, and the page made narrow and wide again."""
    lab, suites = real_page
    suite = suites["narrow"]
    figure = suite.locator(".cubeloupe-sky-figure")
    suite.locator(".cubeloupe-sky-view").scroll_into_view_if_needed()
    wait_until(lambda: distinct_colours(figure.locator("canvas").first) > 5, "the narrow map to be drawn")
    # A narrow map still gets at least two x ticks (issue #17: a 6 x 21 map had a single one).
    ticks = wait_until(lambda: x_axis_ticks(figure) if len(x_axis_ticks(figure)) >= 2 else None,
                       "two x ticks on the narrow map")
    assert len({value for _, value in ticks}) >= 2
    assert ask(lab, "suites['narrow'].sky_source") == "moment 1"
    shot(lab, suite, "real-narrow-moment-1")
    for width in (900, 1440):
        lab.page.set_viewport_size({"width": width, "height": 900})
        wait_until(lambda: figure.bounding_box() is not None, "the figure after the resize")
        suite.locator(".cubeloupe-sky-view").scroll_into_view_if_needed()
        wait_until(lambda: distinct_colours(figure.locator("canvas").first) > 5, "the map drawn after the resize")
    assert not [e for e in lab.console_errors if "undefined" in e]
    assert lab.console_errors == []
    assert lab.error_outputs() == []


def test_moment_maps_come_back_after_switching_windows_and_back(real_page):
    """Regression test for #19 in the browser: the maps vanished from 'Show' after a switch away and back; the
    switch is also one of the places the once-seen console error was looked for."""
    lab, suites = real_page
    suite = suites["pair"]
    windows = suite.locator(".cubeloupe-window-choice select")
    shown = suite.locator(".cubeloupe-source select")
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first

    def offered():
        return [text.replace("\xa0", " ") for text in shown.locator("option").all_inner_texts()]

    suite.locator(".cubeloupe-sky-view").scroll_into_view_if_needed()
    wait_until(lambda: "moment 1" in offered(), "the strip's moment maps under Show")
    for index, maps in ((0, False), (1, True)):
        windows.select_option(index=index)
        wait_until(lambda: ask(lab, "suites['pair'].window") == index, f"window {index} on the sky")
        wait_until(lambda: ("moment 1" in offered()) == maps, f"Show to {'offer' if maps else 'drop'} the maps")
        wait_until(lambda: distinct_colours(canvas) > 5, "the sky image to be drawn")
    # The spectrum's tick labels are written in this window's format, not the last window's (they read
    # "230.5 230.5 230.5 230.5 230.6" when the format arrived after the values).
    axis = ask(lab, "(lambda a: [a.tick_format, [float(v) for v in a.tick_values]])(suites['pair'].spectrum_view.x_axis)")
    expected = [format(value, axis[0]) for value in axis[1]]
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    wait_until(lambda: _bottom_tick_labels(spectrum) == expected, f"the spectrum's tick labels {expected}")
    assert len(set(expected)) == len(expected)
    shown.select_option(index=offered().index("moment 1"))
    wait_until(lambda: ask(lab, "suites['pair'].sky_source") == "moment 1", "moment 1 on the sky again")
    shot(lab, suite, "real-pair-window-back")
    assert lab.error_outputs() == []
    assert lab.console_errors == []


def test_spectra_ending_in_blanked_channels_leave_no_console_error(real_page):
    """The once-seen console error: an SVG transform with "undefined", from a spectrum whose last channel is NaN."""
    lab, suites = real_page
    suite = suites["beams"]
    spectrum = suite.locator(".cubeloupe-spectrum-figure")
    spectrum.scroll_into_view_if_needed()
    wait_until(lambda: spectrum.locator("path.line").count() > 0, "the spectrum to be drawn")
    assert ask(lab, "bool(np.isnan(suites['beams'].spectra['peak (auto)'][0].value[-1]))"), \
        "the demo's spectrum ends in a blanked channel (the case looked at)"
    shot(lab, suite, "real-beams-blanked-end")
    assert not [e for e in lab.console_errors if "undefined" in e]
    assert lab.console_errors == []
