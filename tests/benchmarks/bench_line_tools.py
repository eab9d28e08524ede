"""Channel maps, PV slices and Gaussian fits on a 1 GB cube, each against a baseline measured in the same run (issue 18).

Run on demand: ``python tests/benchmarks/bench_line_tools.py``. Writes a 512 x 512 x 1000 float32 FREQ
cube (Jy/beam; a Gaussian line at 0 km/s, sigma 15 km/s, in every pixel) in a temporary folder, warms the
page cache, and prints medians of warm repeats:

* ``channel_maps`` of 16 panels over a 200-channel window (the figure object, and the figure saved as a
  PNG), against one ``np.nansum`` pass over the same 200 channels of the memory map (the least any
  channel map must read);
* ``pv_slice`` along a 512-pixel diagonal path (width 1 and 3), against the textbook way: calling
  ``scipy.ndimage.map_coordinates`` on every channel image of the window;
* ``fit_gaussians`` of one component (order-1 baseline on 400 line-free channels) on a region spectrum of
  the cube, against ``scipy.optimize.curve_fit`` alone on the same baseline-subtracted channels.

Targets (issue 18): channel maps < 1 s, a 512-pixel PV path < 300 ms, a Gaussian fit < 20 ms.
"""

import argparse
import os
import tempfile
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.io import fits

from _cubes import timed, write_big_cube

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory); the cube's RESTFRQ




def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shape", type=int, nargs=3, default=(1000, 512, 512), metavar=("NCHAN", "NY", "NX"))
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    from regions import CirclePixelRegion, PixCoord
    from scipy.ndimage import map_coordinates
    from scipy.optimize import curve_fit

    from cubeloupe.analysis import channel_maps, fit_gaussians, open_cube, pv_slice, region_spectrum

    shape = tuple(args.shape)
    nchan, ny, nx = shape
    with tempfile.TemporaryDirectory(prefix="cubeloupe-bench-") as folder:
        path, velocity = write_big_cube(Path(folder) / "bench.fits", shape)
        size_gb = path.stat().st_size / 1e9
        dv = abs(velocity[1] - velocity[0])
        lo, hi = nchan // 2 - 100, nchan // 2 + 100          # a 200-channel window around the line
        window = u.Quantity([velocity[lo] - 0.25 * dv, velocity[hi - 1] + 0.25 * dv], KMS)
        line_free = u.Quantity([[velocity[lo - 200] - 0.25 * dv, velocity[lo - 1] + 0.25 * dv],
                                [velocity[hi] - 0.25 * dv, velocity[hi + 199] + 0.25 * dv]], KMS)

        raw = fits.open(path, memmap=True)[0].data
        np.sum(raw, axis=0)  # warm the page cache
        cube = open_cube(path)

        # Channel maps.
        t_slab, _ = timed(lambda: np.nansum(raw[lo:hi], axis=0), args.repeat)
        kw = dict(rest_frequency=CO21, n=16)
        channel_maps(cube, window, **kw)  # first call: imports and caches
        t_maps, fig = timed(lambda: channel_maps(cube, window, **kw), args.repeat)
        png = Path(folder) / "maps.png"

        def maps_png():
            channel_maps(cube, window, **kw).savefig(png, dpi=100)

        t_maps_png, _ = timed(maps_png, max(1, args.repeat - 2))

        # PV slices along a 512-pixel diagonal (length 511.9 pixels: 512 samples).
        side = min(nx, ny) - 1
        step = 511.9 / np.sqrt(2) if side >= 362 else side
        vertices = [(0.0, 0.0), (step, step)]
        pv_slice(cube, vertices, window=window, rest_frequency=CO21)
        t_pv1, pv = timed(lambda: pv_slice(cube, vertices, window=window, rest_frequency=CO21), args.repeat)
        t_pv3, _ = timed(lambda: pv_slice(cube, vertices, width=3, window=window, rest_frequency=CO21),
                         args.repeat)
        t_pv_full, _ = timed(lambda: pv_slice(cube, vertices), max(1, args.repeat - 2))
        xs, ys = pv.x, pv.y

        def by_planes():
            return np.array([map_coordinates(np.asarray(raw[k], dtype=np.float64), [ys, xs], order=1)
                             for k in range(lo, hi)])

        t_planes, reference = timed(by_planes, max(1, args.repeat - 2))
        agreement = float(np.nanmax(np.abs(reference - pv.data.value)))

        # Gaussian fit on a region spectrum.
        spec = region_spectrum(cube, CirclePixelRegion(PixCoord(nx / 2, ny / 2), radius=5))
        fit_kw = dict(window=window, line_free=line_free, order=1, rest_frequency=CO21)
        fit_gaussians(spec, **fit_kw)
        t_fit, fit = timed(lambda: fit_gaussians(spec, **fit_kw), 20)
        v = velocity[lo:hi]
        y = fit.residuals.value[lo:hi] + fit.model.value[lo:hi]
        comp = fit.components[0]
        p0 = [comp.amplitude.value, comp.center.value + 5, comp.fwhm.value * 1.2]

        def gaussian(x, a, c, w):
            return a * np.exp(-4 * np.log(2) * (x - c) ** 2 / w**2)

        t_curve_fit, _ = timed(lambda: curve_fit(gaussian, v, y, p0=p0), 20)

    line = "-" * 86
    print(line)
    print(f"cube {nchan} x {ny} x {nx} float32 ({size_gb:.2f} GB), page cache warm, median of {args.repeat}; "
          f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    print(line)
    print(f"{'operation':60s} {'time (ms)':>10s} {'/ baseline':>11s}")
    print(f"{'baseline: np.nansum over the 200 window channels (memmap)':60s} {1e3 * t_slab:10.1f} {1.0:11.2f}")
    print(f"{'channel_maps, 16 panels over 200 channels (Figure)':60s} {1e3 * t_maps:10.1f} {t_maps / t_slab:11.2f}")
    print(f"{'channel_maps, the same saved as PNG (100 dpi)':60s} {1e3 * t_maps_png:10.1f} "
          f"{t_maps_png / t_slab:11.2f}")
    print(f"{'baseline: map_coordinates on each of the 200 channel images':60s} {1e3 * t_planes:10.1f} {1.0:11.2f}")
    print(f"{'pv_slice, 512-pixel path, width 1, 200 channels':60s} {1e3 * t_pv1:10.1f} {t_pv1 / t_planes:11.2f}")
    print(f"{'pv_slice, 512-pixel path, width 3, 200 channels':60s} {1e3 * t_pv3:10.1f} {t_pv3 / t_planes:11.2f}")
    print(f"{f'pv_slice, 512-pixel path, width 1, all {nchan} channels':60s} {1e3 * t_pv_full:10.1f} "
          f"{t_pv_full / t_planes:11.2f}")
    print(f"{'baseline: scipy curve_fit alone (200 channels)':60s} {1e3 * t_curve_fit:10.2f} {1.0:11.2f}")
    print(f"{'fit_gaussians: order-1 baseline on 400 ch + 1 component':60s} {1e3 * t_fit:10.2f} "
          f"{t_fit / t_curve_fit:11.2f}")
    print(line)
    print(f"channel maps {1e3 * t_maps:.0f} ms (PNG {1e3 * t_maps_png:.0f} ms)   target < 1000 ms")
    print(f"PV path {1e3 * t_pv1:.0f} ms (width 3: {1e3 * t_pv3:.0f} ms; whole band {1e3 * t_pv_full:.0f} ms)   "
          f"target < 300 ms")
    print(f"Gaussian fit {1e3 * t_fit:.1f} ms   target < 20 ms")
    print(f"pv_slice vs map_coordinates per plane: max difference {agreement:.1e} Jy/beam")
    print(line)


if __name__ == "__main__":
    main()
