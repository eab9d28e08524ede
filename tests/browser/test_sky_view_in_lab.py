"""The sky view in real JupyterLab: world axes, square sky pixels, blanks, a velocity field (issue #17).

A notebook made here opens the suite on the disk demo cube and on a small non-square cube (6 x 21
pixels of 1", a blanked corner) written by the notebook itself, and the sky view alone on each
real cube of ``../shared/real-cubes/`` that is present (skipped where the folder is absent). For each, read from the page: the plot area's
width/height equals the map's width/height on the sky (square sky pixels, within 2 %), the axis
titles are world offsets, the x tick labels do not overlap, the sky column fits in 460 px. On
the non-square cube the blanked corner is drawn in the blank colour; on the disk a velocity
field shows both ends of the diverging ramp. No console errors. Screenshots of each state go to
tests/browser/screenshots-latest/ (sky-view-*.png).

Hooks relied on: CSS classes cubeloupe-sky-view, cubeloupe-sky-figure,
cubeloupe-colorbar; bqplot's own ``rect.plotarea_background``, ``text.axislabel`` and
``g.tick text``. Traits read back: SkyView.plot_size, axes (SkyAxes), x_axis/y_axis labels,
shown_ramp, shown_limits.
"""

import json
from pathlib import Path

import pytest

from cubeloupe.widgets._look import BLANK_COLOR, DIVERGING_RAMPS
from lab import distinct_colours, wait_until

pytestmark = pytest.mark.browser

NOTEBOOK = "sky_view_probe.ipynb"
REAL_CUBES = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"
REAL = {"carma": "co10_ngc4047_carma.fits", "l1448": "l1448_13co.fits"}

SETUP = """\
import json, warnings
import numpy as np
import astropy.units as u
from astropy.io import fits
from spectral_cube import Projection
from cubeloupe.analysis import demo_path
from cubeloupe.widgets import Loupe
suites = {}
"""

DISK = """\
suites['disk'] = loupe = Loupe(demo_path('disk'))
loupe
"""

# A strip 6 pixels wide and 21 high (1" pixels), a Gaussian line in a blob, its upper-right corner
# blanked (NaN) in every channel.
NARROW = """\
ny, nx, nchan = 21, 6, 16
yy, xx = np.mgrid[:ny, :nx]
blob = np.exp(-0.5 * (((xx - 2.5) / 1.5) ** 2 + ((yy - 9) / 3.0) ** 2))
line = np.exp(-0.5 * ((np.arange(nchan) - 8) / 2.0) ** 2)[:, None, None]
data = (line * blob + 0.02 * np.random.default_rng(1).normal(size=(nchan, ny, nx))).astype('float32')
data[:, 16:, 3:] = np.nan
header = fits.Header()
for key, value in dict(CTYPE1='RA---SIN', CRVAL1=150.0, CDELT1=-1 / 3600, CRPIX1=3.5, CUNIT1='deg',
                       CTYPE2='DEC--SIN', CRVAL2=2.0, CDELT2=1 / 3600, CRPIX2=11.0, CUNIT2='deg',
                       CTYPE3='FREQ', CRVAL3=230.538e9, CDELT3=-1e6, CRPIX3=1.0, CUNIT3='Hz',
                       RESTFRQ=230.538e9, BUNIT='Jy/beam', BMAJ=2 / 3600, BMIN=1.5 / 3600, BPA=30.0,
                       SPECSYS='LSRK', RADESYS='ICRS', EQUINOX=2000.0).items():
    header[key] = value
fits.PrimaryHDU(data, header).writeto('narrow_strip.fits', overwrite=True)
suites['narrow'] = narrow = Loupe('narrow_strip.fits')
narrow
"""

# Real cubes in the sky view alone (opening them in the whole suite is tested elsewhere).
REAL_CELL = """\
from cubeloupe.analysis import open_cube
from cubeloupe.widgets import SkyView
with warnings.catch_warnings():
    warnings.simplefilter('ignore')  # header quirks of real deliveries; not what is looked at here
    suites[{name!r}] = {name} = SkyView([open_cube({path!r})])
{name}
"""

# The plot area, the axis titles and the x tick labels' boxes of a suite's sky figure, from the DOM.
_SKY_JS = """
(suite) => {
  const figure = suite.querySelector('.cubeloupe-sky-figure');
  const bar = suite.querySelector('.cubeloupe-colorbar');
  const view = suite.querySelector('.cubeloupe-sky-view');
  const area = figure.querySelector('rect.plotarea_background') || figure.querySelector('rect.plotarea_events');
  const box = area.getBoundingClientRect();
  const labels = Array.from(figure.querySelectorAll('text.axislabel')).map(t => t.textContent.trim());
  const xTicks = Array.from(figure.querySelectorAll('g.axis')).filter(g => !g.querySelector('text.axislabel')
      || true).flatMap(g => Array.from(g.querySelectorAll('g.tick text')).map(t => {
        const b = t.getBoundingClientRect();
        return {text: t.textContent, left: b.left, right: b.right, top: b.top, bottom: b.bottom};
      }));
  const figureBox = figure.getBoundingClientRect();
  const barBox = bar.getBoundingClientRect();
  return {area: {left: box.left, top: box.top, width: box.width, height: box.height},
          labels, ticks: xTicks, column: barBox.right - figureBox.left, view: view.getBoundingClientRect().width,
          fill: getComputedStyle(area).fill};
}
"""


def _write_notebook(folder, real):
    import nbformat

    notebook = nbformat.v4.new_notebook()
    notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    cells = [SETUP, DISK, NARROW] + [REAL_CELL.format(name=name, path=str(path)) for name, path in real.items()]
    notebook.cells = [nbformat.v4.new_code_cell(source) for source in cells]
    nbformat.write(notebook, str(folder / NOTEBOOK))


def ask(lab, expression):
    """Evaluate ``expression`` in the notebook's kernel (``suites`` holds the suites by name)."""
    output = lab.run_code(f"print(json.dumps({expression}, default=str))")
    return json.loads(output.splitlines()[-1])


@pytest.fixture(scope="module")
def sky_page(lab_page, lab_root):
    real = {name: (REAL_CUBES / file).resolve() for name, file in REAL.items() if (REAL_CUBES / file).exists()}
    _write_notebook(lab_root, real)
    lab_page.page.set_viewport_size({"width": 1280, "height": 1000})
    lab_page.open_notebook(NOTEBOOK)
    lab_page.run_all()
    names = ["disk", "narrow", *real]
    assert lab_page.error_outputs() == []
    cells = lab_page.notebook.locator(".jp-CodeCell")
    views = lab_page.notebook.locator(".cubeloupe-sky-view")
    wait_until(lambda: views.count() == len(names), f"{len(names)} sky views on the page")
    # Each view's cell: the first cell sets up, then one cell per view.
    return lab_page, {name: cells.nth(k + 1) for k, name in enumerate(names)}


def sky_geometry(lab, suite):
    suite.locator(".cubeloupe-sky-view").scroll_into_view_if_needed()
    canvas = suite.locator(".cubeloupe-sky-figure canvas").first
    wait_until(lambda: distinct_colours(canvas) > 5, "the sky image to be drawn")
    return suite.evaluate(_SKY_JS)


def overlapping(boxes):
    """Pairs of tick labels on one row whose boxes overlap."""
    rows = {}
    for box in boxes:
        rows.setdefault(round(box["top"]), []).append(box)
    found = []
    for row in rows.values():
        row.sort(key=lambda b: b["left"])
        found += [(a["text"], b["text"]) for a, b in zip(row, row[1:]) if a["right"] > b["left"] + 0.5]
    return found


def test_plot_area_has_square_sky_pixels_and_world_axes(sky_page):
    lab, suites = sky_page
    for name, suite in suites.items():
        found = sky_geometry(lab, suite)
        lab.screenshot(f"sky-view-{name}", locator=suite.locator(".cubeloupe-sky-view"))
        kernel = ask(lab, f"(lambda s: {{'shape': list(s.cube.shape[1:]), 'scale': [abs(float(v)) for v in "
                          f"s.axes.scale.value], 'labels': [s.x_axis.label, s.y_axis.label]}})"
                          f"(getattr(suites[{name!r}], 'sky_view', suites[{name!r}]))")
        (ny, nx), (sx, sy) = kernel["shape"], kernel["scale"]
        area = found["area"]
        # The map's width over its height on the sky (its WCS pixel sizes, from astropy in the kernel).
        expected = (nx * sx) / (ny * sy)
        assert area["width"] / area["height"] == pytest.approx(expected, rel=0.02), (
            f"{name}: plot area {area['width']:.0f} x {area['height']:.0f} px for a {nx} x {ny} map")
        assert kernel["labels"][0] in found["labels"] and kernel["labels"][1] in found["labels"], found["labels"]
        assert any(label.startswith("ΔRA") for label in found["labels"]), found["labels"]
        assert any(label.startswith("ΔDec") for label in found["labels"]), found["labels"]
        assert overlapping(found["ticks"]) == [], f"{name}: tick labels overlap"
        assert found["column"] <= 460 and found["view"] <= 460, f"{name}: sky column {found['column']:.0f} px"
    assert lab.console_errors == []


def pixel_colour(picture, x, y):
    return picture.getpixel((int(round(x)), int(round(y))))[:3]


def test_blanked_corner_is_drawn_in_the_blank_colour(sky_page):
    import io

    from PIL import Image

    lab, suites = sky_page
    suite = suites["narrow"]
    found = sky_geometry(lab, suite)
    figure = suite.locator(".cubeloupe-sky-figure")
    origin = figure.bounding_box()
    picture = Image.open(io.BytesIO(figure.screenshot(animations="disabled"))).convert("RGB")
    area = found["area"]
    nx, ny = 6, 21

    def at(x, y):  # image pixel (x, y) -> picture pixel, y up in the image
        return (area["left"] - origin["x"] + (x + 0.5) / nx * area["width"],
                area["top"] - origin["y"] + (ny - 0.5 - y) / ny * area["height"])

    blank = tuple(int(BLANK_COLOR[i:i + 2], 16) for i in (1, 3, 5))
    got = pixel_colour(picture, *at(4.5, 18.5))  # inside the blanked block x >= 3, y >= 16
    assert max(abs(a - b) for a, b in zip(got, blank)) <= 6, f"blanked pixels drawn in {got}, not {blank}"
    data = pixel_colour(picture, *at(2.0, 9.0))  # the blob's centre
    assert max(abs(a - b) for a, b in zip(data, blank)) > 40
    lab.screenshot("sky-view-narrow-blanked", locator=suite.locator(".cubeloupe-sky-view"))


def test_velocity_field_shows_both_ends_of_a_diverging_ramp(sky_page):
    import io

    from PIL import Image

    lab, suites = sky_page
    # A velocity field rising from -150 km/s (east, left) to +150 km/s (west, right) across the disk
    # cube's grid, handed to the sky view as the moment panel hands its maps.
    answer = ask(lab, (
        "(lambda s: (setattr(s, 'maps', {'moment 1': Projection(np.broadcast_to(np.linspace(-150, 150, "
        "s.cube.shape[2]), s.cube.shape[1:]).copy() * u.km / u.s, wcs=s.cube.wcs.celestial)}), "
        "setattr(s, 'source', 'moment 1'), [s.shown_ramp, s.shown_limits])[-1])(suites['disk'].sky_view)"))
    ramp, limits = answer
    assert ramp in DIVERGING_RAMPS and limits[0] == pytest.approx(-limits[1])
    suite = suites["disk"]
    found = sky_geometry(lab, suite)
    figure = suite.locator(".cubeloupe-sky-figure")
    origin = figure.bounding_box()
    area = found["area"]

    def colours():
        picture = Image.open(io.BytesIO(figure.screenshot(animations="disabled"))).convert("RGB")
        y = area["top"] - origin["y"] + area["height"] * 0.5
        left = pixel_colour(picture, area["left"] - origin["x"] + 4, y)
        right = pixel_colour(picture, area["left"] - origin["x"] + area["width"] - 4, y)
        return left, right

    def ends_shown():
        left, right = colours()
        first, last = DIVERGING_RAMPS[ramp][0], DIVERGING_RAMPS[ramp][-1]
        close = lambda got, hexa: max(abs(a - int(hexa[i:i + 2], 16)) for a, i in zip(got, (1, 3, 5))) <= 40
        return close(left, first) and close(right, last)

    wait_until(ends_shown, f"the velocity field drawn from {DIVERGING_RAMPS[ramp][0]} to {DIVERGING_RAMPS[ramp][-1]}")
    lab.screenshot("sky-view-disk-moment1", locator=suite.locator(".cubeloupe-sky-view"))
    assert lab.console_errors == []
