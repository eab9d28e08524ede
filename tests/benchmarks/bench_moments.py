"""Moment maps on a 1 GB cube against one numpy pass and against spectral-cube (issues 2 and 7).

Run on demand: ``python tests/benchmarks/bench_moments.py``. Writes a 512 x 512 x 1000 float32
FREQ cube (Jy/beam) in a temporary folder, warms the page cache, and prints:

* one ``np.nansum`` pass over the spectral axis of the memory-mapped data (the yardstick);
* ``moment_maps`` with a per-pixel order-1 baseline and a 100-channel window, the baseline fitted on
  200 line-free channels (100 on each side) and on the whole rest of the band (800 channels);
* spectral-cube's moment0 + moment1 + linewidth_sigma over the same 100 channels (read with
  ``disable_huge_flag=True`` and ``allow_huge_operations=True`` so it does not spill to temporary files);
* allocations beyond the memory map during ``moment_maps`` (tracemalloc, a separate repetition).

Targets: ours <= 1x the nansum pass, >= 5x faster than spectral-cube, allocations < 256 MB.
"""

import argparse
import os
import tempfile
import tracemalloc
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.io import fits

from _cubes import timed, write_big_cube

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory)




def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shape", type=int, nargs=3, default=(1000, 512, 512), metavar=("NCHAN", "NY", "NX"))
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()

    from cubeloupe.analysis import moment_maps, open_cube

    shape = tuple(args.shape)
    nchan = shape[0]
    with tempfile.TemporaryDirectory(prefix="cubeloupe-bench-") as folder:
        path, velocity = write_big_cube(Path(folder) / "bench.fits", shape)
        size_gb = path.stat().st_size / 1e9
        dv = abs(velocity[1] - velocity[0])
        lo, hi = nchan // 2 - 50, nchan // 2 + 50   # 100 window channels
        window = u.Quantity([velocity[lo] - 0.25 * dv, velocity[hi - 1] + 0.25 * dv], KMS)
        everything_else = u.Quantity([[velocity[0] - 0.25 * dv, velocity[lo - 1] + 0.25 * dv],
                                      [velocity[hi] - 0.25 * dv, velocity[-1] + 0.25 * dv]], KMS)
        flanks = u.Quantity([[velocity[lo - 100] - 0.25 * dv, velocity[lo - 1] + 0.25 * dv],
                             [velocity[hi] - 0.25 * dv, velocity[hi + 99] + 0.25 * dv]], KMS)

        raw = fits.open(path, memmap=True)[0].data
        np.sum(raw, axis=0)  # warm the page cache
        t_nansum, _ = timed(lambda: np.nansum(raw, axis=0), args.repeat)

        cube = open_cube(path)
        kw = dict(line_free=flanks, order=1, rest_frequency=CO21)
        t_ours, maps = timed(lambda: moment_maps(cube, window, **kw), args.repeat)
        assert maps.n_channels == 100 and maps.n_line_free == 200, (maps.n_channels, maps.n_line_free)
        kw_all = dict(line_free=everything_else, order=1, rest_frequency=CO21)
        t_all, maps = timed(lambda: moment_maps(cube, window, **kw_all), args.repeat)
        assert maps.n_line_free == nchan - 100, maps.n_line_free

        tracemalloc.start()
        moment_maps(cube, window, **kw_all)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()

        from spectral_cube import SpectralCube

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            reference = SpectralCube.read(path, disable_huge_flag=True)
            reference.allow_huge_operations = True
            slab = reference.with_spectral_unit(KMS, velocity_convention="radio", rest_value=CO21)
            slab = slab.spectral_slab(*window)

            def library():
                return slab.moment0(), slab.moment1(), slab.linewidth_sigma()

            t_library, (m0, m1, m2) = timed(library, max(1, args.repeat - 1))
        n_library = slab.shape[0]
        del slab, reference, m1, m2
        plain = moment_maps(cube, window, rest_frequency=CO21)  # no baseline: comparable with the library
        agreement = np.nanmax(np.abs(plain.m0.value - m0.to_value(plain.m0.unit))) / np.nanmax(np.abs(plain.m0.value))

    line = "-" * 78
    print(line)
    print(f"cube {shape[0]} x {shape[1]} x {shape[2]} float32 ({size_gb:.2f} GB), page cache warm, "
          f"median of {args.repeat}; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(line)
    print(f"{'operation':52s} {'time (s)':>10s} {'/ nansum':>10s}")
    print(f"{'np.nansum over the spectral axis (memmap)':52s} {t_nansum:10.3f} {1.0:10.2f}")
    print(f"{'moment_maps: order-1 baseline on 200 ch, 100-ch window':52s} {t_ours:10.3f} {t_ours / t_nansum:10.2f}")
    print(f"{'moment_maps: order-1 baseline on 900 ch, 100-ch window':52s} {t_all:10.3f} {t_all / t_nansum:10.2f}")
    print(f"{f'spectral-cube moment0+moment1+linewidth_sigma ({n_library} ch)':52s} {t_library:10.3f} "
          f"{t_library / t_nansum:10.2f}")
    print(line)
    print(f"moment_maps vs nansum pass: {t_ours / t_nansum:.2f}x (200 line-free ch), "
          f"{t_all / t_nansum:.2f}x (900)   (target <= 1x)")
    print(f"spectral-cube / moment_maps: {t_library / t_ours:.1f}x faster (200 line-free ch), "
          f"{t_library / t_all:.1f}x (900)   (target >= 5x)")
    print(f"moment_maps allocations (tracemalloc peak): {peak / 2**20:.0f} MB   (target < 256 MB)")
    print(f"moment 0 without baseline vs spectral-cube: max relative difference {agreement:.1e}")
    print(line)


if __name__ == "__main__":
    main()
