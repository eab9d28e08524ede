"""Speed of a population-diagram fit and of an LTE model spectrum, as the suite's live sliders call them.

Run on demand: ``python tests/benchmarks/bench_population.py``. Prints median
times and the ratio to baselines measured in the same run:

* the fit against ``numpy.polyfit`` (weighted, ``cov="unscaled"``) of the same
  points, the bare straight line without reading the table or the catalog;
* the LTE spectrum against one dense ``np.exp`` pass over a (lines x channels)
  array, the naive way to draw every Gaussian on every channel.

Targets (issue 16): a population fit < 10 ms; ``lte_spectrum`` for 200 lines
over 4 000 channels < 20 ms.
"""

import sys
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.table import QTable

sys.path.insert(0, str(Path(__file__).resolve().parent))

from _cubes import timed  # noqa: E402

from cubeloupe.analysis import lte_lines, lte_spectrum, population_diagram  # noqa: E402

K_KMS = u.K * u.km / u.s
JY_KMS = u.Jy * u.km / u.s
REPEATS = 50


def report(label, seconds, baseline, target_ms):
    ms = seconds * 1e3
    verdict = "ok" if ms < target_ms else "SLOW"
    print(f"{label:58s} {ms:8.2f} ms   baseline {baseline * 1e3:7.3f} ms   ratio {seconds / baseline:7.1f}   "
          f"target < {target_ms} ms: {verdict}")


def bench_fits():
    co = QTable({"line": [f"CO J={j}-{j - 1}" for j in range(1, 7)],
                 "flux": [1.2, 3.9, 6.1, 6.8, 6.0, 4.9] * K_KMS, "flux_error": [0.1, 0.2, 0.4, 0.5, 0.5, 0.5] * K_KMS})
    names = ["H2O 2_02-1_11", "H2O 2_11-2_02", "H2O 1_11-0_00", "H2O 3_12-3_03", "H2O 3_21-3_12", "H2O 1_10-1_01",
             "H2O 2_21-2_12"]
    model = lte_lines(100 * u.GHz, 600 * u.GHz, "H2O", temperature=60 * u.K, total_number=1e60, z=3.1,
                      magnification=12)
    flux = u.Quantity([model["intensity"][list(model["name"]).index(n)] for n in names])
    water = QTable({"line": names, "flux": flux, "flux_error": 0.1 * flux})
    fit = population_diagram(co)
    x, y = np.asarray(fit.points["E_up"].value), np.asarray(fit.points["ln(N_u/g_u)"])
    w = 1 / np.asarray(fit.points["ln(N_u/g_u)_error"])
    baseline, _ = timed(lambda: np.polyfit(x, y, 1, w=w, cov="unscaled"), REPEATS * 10)
    seconds, _ = timed(lambda: population_diagram(co), REPEATS)
    report("population_diagram, 6 CO lines, K km/s", seconds, baseline, 10)
    seconds, _ = timed(lambda: population_diagram(water, z=3.1, magnification=12, spin="joint"), REPEATS)
    report("population_diagram, 7 H2O lines ortho+para joint, Jy km/s", seconds, baseline, 10)
    seconds, _ = timed(lambda: population_diagram(water, z=3.1, magnification=12, spin="separate"), REPEATS)
    report("population_diagram, 7 H2O lines ortho+para separate", seconds, baseline, 10)


def bench_spectrum():
    species = ["CH3CN", "CH3CCH"]
    axis = np.linspace(80.0, 300.0, 4000) * u.GHz
    kwargs = dict(temperature=60 * u.K, column_density=1e14 / u.cm**2, fwhm=300 * u.km / u.s)
    table = lte_lines(axis.min(), axis.max(), species, **{k: kwargs[k] for k in ("temperature", "column_density")})
    centres = table["observed_frequency"].to_value(u.GHz)
    width = centres * 300 / 299792.458 / 2.3548
    nu = axis.value

    def dense():
        return (np.exp(-0.5 * ((nu[None, :] - centres[:, None]) / width[:, None]) ** 2)).sum(axis=0)

    baseline, _ = timed(dense, REPEATS)
    lte_spectrum(axis, species, **kwargs)  # the line selection is cached for the live slider
    seconds, _ = timed(lambda: lte_spectrum(axis, species, **kwargs), REPEATS)
    report(f"lte_spectrum, {len(table)} lines x {len(nu)} channels, K", seconds, baseline, 20)
    thick, _ = timed(lambda: lte_spectrum(axis, species, opacity=True, **kwargs), REPEATS)
    report(f"lte_spectrum, {len(table)} lines x {len(nu)} channels, K with opacity", thick, baseline, 20)
    temperatures = iter(np.linspace(30, 90, 10_000))
    slider, _ = timed(lambda: lte_spectrum(axis, species, temperature=next(temperatures) * u.K,
                                           column_density=1e14 / u.cm**2, fwhm=300 * u.km / u.s), REPEATS)
    report("lte_spectrum, temperature slider (new T each call)", slider, baseline, 20)


if __name__ == "__main__":
    bench_fits()
    bench_spectrum()
