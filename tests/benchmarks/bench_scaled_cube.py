"""Benchmark: integer (BITPIX 16, BSCALE/BZERO/BLANK) cubes against their float copy.

Run on demand: ``python tests/benchmarks/bench_scaled_cube.py [--channels 400]``.

Writes a 256 x 256 x N int16 cube and its float32 copy (the same physical
values) to a temporary folder, warms the page cache, and prints in one run:

* the floor (issue #13, as issue #20 defines it): one plain ``np.sum`` pass
  over the spectral axis of exactly the channels a moment map reads, on the
  float copy's memory map (and, for comparison, on the int16 memory map);
* `moment_maps` over a window of half the band, int16 and float32, as ratios
  to that floor; the int16 maps read the stored integers through the memory
  map and scale each block (`cube_file.stored_array`);
* `region_spectrum` of a 20 x 20-pixel box, int16 and float32, as ratios to
  one ``np.nansum`` pass over the whole float copy;
* the peak of Python allocations (tracemalloc) while opening the int16 cube
  and making its moment maps, against the size of one float32 copy of the
  cube: integer data are scaled block by block, never as a whole.

The temporary folder is deleted at the end.
"""

import argparse
import shutil
import sys
import tempfile
import tracemalloc
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
from regions import PixCoord, RectanglePixelRegion

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/, for cubefactory

from _cubes import timed  # noqa: E402
from cubefactory import frequency_axis_hz, write_cube, write_scaled_int_cube  # noqa: E402
from cubeloupe.analysis import moment_maps, open_cube, region_spectrum  # noqa: E402
from cubeloupe.analysis.cube_file import stored_array  # noqa: E402
from cubeloupe.analysis.windows import window_channels  # noqa: E402


def median_time(func, repeats):
    return timed(func, repeats)[0]


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--channels", type=int, default=400)
    parser.add_argument("--size", type=int, default=256)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    rng = np.random.default_rng(7)
    shape = (args.channels, args.size, args.size)
    folder = Path(tempfile.mkdtemp(prefix="bench_scaled_"))
    try:
        data = rng.normal(0.0, 1.0, size=shape).astype(np.float32)
        data[:, :8, :] = np.nan  # a blanked border
        int_path, values = write_scaled_int_cube(folder / "int16.fits", data, bzero=0.0)
        del data
        float_path = write_cube(folder / "float32.fits", values)
        del values
        int_cube, float_cube = open_cube(int_path), open_cube(float_path)
        freq = frequency_axis_hz(args.channels) / 1e9
        window = [freq[args.channels // 4], freq[3 * args.channels // 4]] * u.GHz
        box = RectanglePixelRegion(PixCoord(args.size / 2, args.size / 2), 20, 20)
        raw = np.asarray(float_cube.unmasked_data[:].value)  # the float copy's memory map
        np.nansum(raw, axis=0)  # warm the page cache for both files
        moment_maps(int_cube, window)
        read = np.flatnonzero(window_channels(float_cube, window))
        first, last = int(read[0]), int(read[-1]) + 1
        assert read.size == last - first  # one run of channels
        stored = stored_array(int_cube)[0]
        floor = median_time(lambda: np.sum(raw[first:last], axis=0), args.repeats)
        int_floor = median_time(lambda: np.sum(stored[first:last], axis=0), args.repeats)
        baseline = median_time(lambda: np.nansum(raw, axis=0), args.repeats)
        maps = [
            ("moment_maps int16", median_time(lambda: moment_maps(int_cube, window), args.repeats)),
            ("moment_maps float32", median_time(lambda: moment_maps(float_cube, window), args.repeats)),
        ]
        spectra = [
            ("region_spectrum int16", median_time(lambda: region_spectrum(int_cube, box), args.repeats)),
            ("region_spectrum float32", median_time(lambda: region_spectrum(float_cube, box), args.repeats)),
        ]
        print(f"cube {shape}, float32 copy {raw.nbytes / 2**20:.0f} MB; moment maps read channels {first}-{last - 1}")
        print(f"floor: one np.sum pass over those channels, float32 memory map  {floor * 1e3:8.1f} ms  (1.00)")
        print(f"       the same over the int16 memory map (big-endian)          {int_floor * 1e3:8.1f} ms  "
              f"({int_floor / floor:5.2f} x floor)")
        for name, seconds in maps:
            print(f"{name:<28s} {seconds * 1e3:8.1f} ms  ({seconds / floor:5.2f} x floor, "
                  f"{seconds / baseline:5.2f} x the whole-band nansum below)")
        print(f"baseline: one np.nansum pass over the whole float32 memory map  {baseline * 1e3:8.1f} ms  (1.00)")
        for name, seconds in spectra:
            print(f"{name:<28s} {seconds * 1e3:8.1f} ms  ({seconds / baseline:5.2f} x baseline)")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            tracemalloc.start()
            moment_maps(open_cube(int_path), window)
            peak = tracemalloc.get_traced_memory()[1]
            tracemalloc.stop()
        print(f"peak allocations opening the int16 cube and making its moment maps: {peak / 2**20:.1f} MB "
              f"({peak / raw.nbytes:.2f} x one float32 copy of the cube)")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
