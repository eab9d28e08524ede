"""Speed of the catalog calls a redshift slider makes on every move, and of loading it.

Run on demand: ``python tests/benchmarks/bench_catalog.py``. Prints median
times over many calls and the ratio to a baseline measured in the same run:
one plain numpy pass (redshift + band mask) over the catalog's rest-frequency
column; for loading, astropy's own read of the bundled ECSV file.
Targets (issue 15, ~2 400 rows): lines_in_band over the whole catalog < 5 ms;
loading the catalog < 200 ms.
"""

import statistics
import time

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


if __name__ == "__main__":
    main()
