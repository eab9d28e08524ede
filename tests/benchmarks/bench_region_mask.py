"""Benchmark: a region far larger than the image costs what its overlap with the image costs (#14).

Run on demand: ``python tests/benchmarks/bench_region_mask.py [--radius 5000]``.

On the 100 x 72 x 72 demo cube "disk", prints in one run the time (median)
and the peak memory allocated (tracemalloc) of

* `region_spectrum` of a circle of radius 5 000 pixels centred on the image
  (target: under 0.1 s and under 50 MB);
* `region_spectrum` of a circle of radius 30 pixels wholly inside the image
  (the same pixels read; the baseline the huge region is compared with);
* one ``np.nansum`` pass over the cube's data (a second baseline);
* regions' own ``to_mask(mode="center")`` of the huge circle, which builds its
  whole 10 001 x 10 001 bounding box (what region masks cost before #14;
  skip with ``--no-full-mask`` on a machine with under 2 GB free).
"""

import argparse
import statistics
import sys
import time
import tracemalloc
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/, as the other benchmarks

from cubeloupe.analysis import PartialRegionWarning, demo_path, open_cube, region_spectrum  # noqa: E402


def measured(func, repeats):
    """Median wall-clock seconds over ``repeats`` calls, and the peak MB tracemalloc saw in one more."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    tracemalloc.start()
    func()
    peak = tracemalloc.get_traced_memory()[1] / 1e6
    tracemalloc.stop()
    return statistics.median(times), peak


def main():
    from regions import CirclePixelRegion, PixCoord

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--radius", type=float, default=5000.0)
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--no-full-mask", action="store_true")
    args = parser.parse_args()

    cube = open_cube(demo_path("disk"))
    nchan, ny, nx = cube.shape
    centre = PixCoord((nx - 1) / 2, (ny - 1) / 2)
    huge = CirclePixelRegion(centre, args.radius)
    inside = CirclePixelRegion(centre, min(nx, ny) / 2 - 6)
    data = np.asarray(cube._data)

    def huge_spectrum():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", PartialRegionWarning)  # the circle is mostly off the image, on purpose
            return region_spectrum(cube, huge)

    rows = [
        (f"region_spectrum, circle r={args.radius:g} px", *measured(huge_spectrum, args.repeats)),
        ("region_spectrum, circle inside the image (baseline)",
         *measured(lambda: region_spectrum(cube, inside), args.repeats)),
        ("np.nansum over the cube (baseline)", *measured(lambda: np.nansum(data, axis=0), args.repeats)),
    ]
    if not args.no_full_mask:
        rows.append((f"regions to_mask of the whole r={args.radius:g} circle (pre-#14 cost)",
                     *measured(lambda: huge.to_mask(mode="center"), 1)))

    print(f"cube {nchan} x {ny} x {nx} (demo 'disk'); median of {args.repeats} runs, peak memory by tracemalloc")
    base_time, base_memory = rows[1][1], rows[1][2]
    for name, seconds, megabytes in rows:
        print(f"{name:62s} {seconds * 1e3:9.2f} ms ({seconds / base_time:7.2f} x baseline)"
              f" {megabytes:9.2f} MB ({megabytes / base_memory:7.2f} x baseline)")
    seconds, megabytes = rows[0][1], rows[0][2]
    print(f"target: under 100 ms and under 50 MB -> {'met' if seconds < 0.1 and megabytes < 50 else 'NOT met'}")


if __name__ == "__main__":
    main()
