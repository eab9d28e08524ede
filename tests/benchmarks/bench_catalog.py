"""Speed of the catalog calls a redshift slider makes on every move, and of loading it.

Run on demand: ``python tests/benchmarks/bench_catalog.py``. Prints median
times over many calls and the ratio to a baseline measured in the same run:
one plain numpy pass (redshift + band mask) over the catalog's rest-frequency
column; for loading, astropy's own read of the bundled ECSV file.
Targets (issue 15, ~2 400 rows): lines_in_band over the whole catalog < 5 ms;
loading the catalog < 200 ms.

Overlay redraw: the line overlay of the suite on a cube whose band (20-1010 GHz)
holds some 2 100 catalog lines, every family and every hyperfine component
shown; a small redshift step (the same lines stay in the band) redraws stems,
heads and the laid-out labels, each changed mark serialised as for the
browser. Baseline: one bqplot Scatter of the same number of points given new
x and y and serialised the same way. Target: < 100 ms (feels live); issue 15
asks < 50 ms for the markers.
"""

import statistics
import sys
import tempfile
import time
from pathlib import Path

import astropy.units as u
import numpy as np

from importlib import resources

from astropy.table import Table

from cubeloupe.analysis import catalog as catalog_module
from cubeloupe.analysis import lines_in_band, load_catalog, partition_function, redshift_candidates

REPEATS = 300


def median_ms(func, repeats=REPEATS):
    func()  # warm caches (catalog read, unit parsing)
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1e3


def main():
    catalog = load_catalog()
    rest = np.asarray(catalog["rest_frequency"].to_value(u.GHz))
    z = 2.7
    fmin, fmax = 84 * u.GHz, 950 * u.GHz  # wider than any single receiver band: whole-catalog pass

    def baseline():
        observed = rest / (1 + z)
        return observed[(observed >= 84.0) & (observed <= 950.0)]

    names = ["CO J=4-3", "[CI] 3P1-3P0", "CO J=5-4", "H2O 2_11-2_02"]
    nu = u.Quantity([catalog["rest_frequency"][list(catalog["name"]).index(n)] for n in names])
    peaks = nu / (1 + 4.3)

    base = median_ms(baseline, repeats=REPEATS * 10)
    path = resources.files("cubeloupe.analysis.data").joinpath("transitions.ecsv")

    def fresh_load():
        catalog_module._bundled.cache_clear()
        return load_catalog()

    read_base = median_ms(lambda: Table.read(path, format="ascii.ecsv"), repeats=20)
    load = median_ms(fresh_load, repeats=20)
    print(f"loading: astropy Table.read of the ECSV (baseline) {read_base:.1f} ms; "
          f"load_catalog from cold cache {load:.1f} ms ({load / read_base:.2f} x baseline; target < 200 ms)")
    rows = [
        ("numpy pass over rest_frequency (baseline)", base),
        ("lines_in_band, whole catalog, no reference", median_ms(lambda: lines_in_band(fmin, fmax, z))),
        ("lines_in_band, whole catalog, reference line",
         median_ms(lambda: lines_in_band(fmin, fmax, z, reference="CO J=4-3"))),
        ("lines_in_band, every row in band (z=0, 20-1910 GHz)",
         median_ms(lambda: lines_in_band(20 * u.GHz, 1910 * u.GHz, 0.0))),
        ("lines_in_band, whole catalog, hyperfine grouped",
         median_ms(lambda: lines_in_band(fmin, fmax, z, group_hyperfine=True))),
        ("lines_in_band, whole catalog, family filter",
         median_ms(lambda: lines_in_band(fmin, fmax, z, family=["dense gas", "CO and isotopologues"]))),
        ("partition_function, 50 temperatures",
         median_ms(lambda: partition_function("CH3CN", np.linspace(10, 300, 50) * u.K))),
        ("lines_in_band, 7.5 GHz band, reference line",
         median_ms(lambda: lines_in_band(211 * u.GHz, 218.5 * u.GHz, z, reference="CO J=4-3"))),
        ("redshift_candidates, 4 peaks", median_ms(lambda: redshift_candidates(peaks), repeats=100)),
        ("redshift_candidates, 1 peak", median_ms(lambda: redshift_candidates(peaks[:1]), repeats=100)),
    ]
    print(f"catalog rows: {len(catalog)}; median of {REPEATS} calls (baseline {REPEATS * 10})")
    print(f"{'call':50s} {'median ms':>10s} {'x baseline':>11s}")
    for label, ms in rows:
        print(f"{label:50s} {ms:10.3f} {ms / base:11.0f}")


def overlay_redraw():
    """Median ms of an overlay redraw with ~2 000 lines in view, and of the one-mark baseline."""
    from bqplot import LinearScale, Scatter

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for cubefactory
    from cubefactory import write_cube

    from cubeloupe.analysis import LINE_FAMILIES
    from cubeloupe.widgets import Loupe

    with tempfile.TemporaryDirectory(prefix="cubeloupe-bench-") as folder:
        path = write_cube(Path(folder) / "broad.fits", np.zeros((100, 4, 4), dtype=np.float32),
                          crval3=20e9, cdelt3=10e9)
        loupe = Loupe(path, z=0.0, first_view=False)
        overlay = loupe.line_overlay
        overlay.families = list(LINE_FAMILIES)
        overlay.hyperfine_components = True
        marks = [overlay.stems, overlay.heads, *overlay.labels]
        n = len(overlay.shown_markers)
        steps = iter(np.linspace(0.0, 0.001, 10_000))

        def redraw():
            overlay.z = float(next(steps))
            for mark in marks:
                mark.get_state(["x", "y", "text"] if hasattr(mark, "text") else ["x", "y"])

        scatter = Scatter(x=np.zeros(n), y=np.zeros(n), scales={"x": LinearScale(), "y": LinearScale()})
        rng = np.random.default_rng(0)

        def one_mark():
            with scatter.hold_sync():
                scatter.x, scatter.y = rng.uniform(size=n), rng.uniform(size=n)
            scatter.get_state(["x", "y"])

        base = median_ms(one_mark, repeats=50)
        redraw_ms = median_ms(redraw, repeats=50)
        labelled = len(overlay.labelled_markers)
    print(f"overlay redraw with {n} markers in view ({labelled} labelled): {redraw_ms:.1f} ms; baseline one "
          f"bqplot Scatter update of {n} points {base:.2f} ms ({redraw_ms / base:.1f} x baseline; target < 100 ms)")


if __name__ == "__main__":
    main()
    overlay_redraw()
