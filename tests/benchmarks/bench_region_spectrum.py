"""Benchmark: a 20 x 20-pixel region spectrum of a 1 GB cube.

Run on demand: ``python tests/benchmarks/bench_region_spectrum.py [--channels 1000]``.

Writes a 512 x 512 x 1000 float32 cube (1 GB) to a temporary folder, reads it
once to warm the page cache, and prints in one run the median times of

* `region_spectrum` of a 20 x 20-pixel box (target: under 20 ms, reading only
  the box through the memory map);
* one ``np.nansum`` pass over the spectral axis of the same memory-mapped data
  (the baseline every figure is compared with);
* spectral-cube's own ``subcube_from_regions(...).mean(axis=(1, 2))``.

The temporary cube is deleted at the end.
"""

import argparse
import os
import shutil
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
from astropy.io import fits

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/, for cubefactory

from cubefactory import make_header  # noqa: E402
from cubeloupe.analysis import open_cube, region_spectrum  # noqa: E402


class RecordingArray:
    """Stands in for the memory-mapped data and counts the bytes each slice returns."""

    def __init__(self, array):
        self.array, self.nbytes_read = array, 0
        self.shape, self.dtype, self.ndim = array.shape, array.dtype, array.ndim

    def __getitem__(self, key):
        out = self.array[key]
        self.nbytes_read += out.nbytes
        return out


def write_big_cube(path, n_chan, ny, nx, rng):
    header = make_header((n_chan, ny, nx), beam=(1.0, 1.0, 0.0), pixel=0.25)
    header["BITPIX"] = -32
    stream = fits.StreamingHDU(path, header)
    for start in range(0, n_chan, 50):
        block = rng.standard_normal((min(50, n_chan - start), ny, nx), dtype=np.float32)
        stream.write(block.astype(">f4"))
    stream.close()


def timed(func, repeats):
    """Median wall-clock and CPU (this process) time of ``func(i)`` over ``repeats`` calls.

    The CPU time is less inflated than the wall clock when other jobs share the machine.
    """
    walls, cpus = [], []
    for i in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        func(i)
        walls.append(time.perf_counter() - t0)
        cpus.append(time.process_time() - c0)
    return statistics.median(walls), statistics.median(cpus)


def main():
    from regions import PixCoord, RectanglePixelRegion

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--channels", type=int, default=1000)
    parser.add_argument("--size", type=int, default=512)
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    folder = Path(tempfile.mkdtemp(prefix="cubeloupe-bench-"))
    try:
        path = folder / "big.fits"
        t0 = time.perf_counter()
        write_big_cube(path, args.channels, args.size, args.size, rng)
        size_gb = path.stat().st_size / 1e9
        print(f"wrote {path.name}: {args.channels} x {args.size} x {args.size} float32, "
              f"{size_gb:.2f} GB in {time.perf_counter() - t0:.1f} s")
        cube = open_cube(path)
        data = cube._data
        np.nansum(data, axis=0)  # warm the page cache

        centres = [(int(x), int(y)) for x, y in rng.integers(20, args.size - 20, size=(20, 2))]

        def box(i):
            x, y = centres[i % len(centres)]
            return RectanglePixelRegion(PixCoord(x + 0.5, y + 0.5), width=20, height=20)

        t_nansum = timed(lambda i: np.nansum(data, axis=0), 3)
        t_ours = timed(lambda i: region_spectrum(cube, box(i)), 20)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t_library = timed(lambda i: cube.subcube_from_regions([box(i)]).mean(axis=(1, 2)), 5)
            reference = cube.subcube_from_regions([box(0)]).mean(axis=(1, 2))
        ours = region_spectrum(cube, box(0), statistic="mean")
        agree = np.allclose(ours.value, reference.value, rtol=1e-4, atol=1e-6)
        assert ours.meta["n_pixels"] == 400

        recorder = RecordingArray(cube._data)
        cube._data = recorder
        region_spectrum(cube, box(0))
        cube._data = recorder.array

        rows = [
            ("np.nansum over the spectral axis (baseline)", t_nansum),
            ("region_spectrum, 20 x 20 box (flux)", t_ours),
            ("spectral-cube subcube_from_regions + mean", t_library),
        ]
        print()
        print(f"| operation on the {size_gb:.2f} GB cube | median wall | / nansum | / spectral-cube "
              "| median CPU | / nansum (CPU) |")
        print("|---|---|---|---|---|---|")
        for name, (wall, cpu) in rows:
            print(f"| {name} | {wall * 1e3:.2f} ms | {wall / t_nansum[0]:.4f} | {wall / t_library[0]:.3f} "
                  f"| {cpu * 1e3:.2f} ms | {cpu / t_nansum[1]:.4f} |")
        print(f"\nload average while running: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
        print()
        print(f"region_spectrum read {recorder.nbytes_read / 1e6:.2f} MB of the {size_gb * 1e3:.0f} MB cube; "
              f"target < 20 ms: {'met' if t_ours[0] < 0.020 else 'NOT met'} (wall), "
              f"{'met' if t_ours[1] < 0.020 else 'NOT met'} (CPU); "
              f"mean spectrum equals spectral-cube's: {agree}")
        del cube, data
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
