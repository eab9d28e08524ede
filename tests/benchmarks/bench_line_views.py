"""The suite's line views on a 1 GB cube: what the Channel maps and Position–velocity tabs add to the analysis calls (#18).

Run on demand: ``python tests/benchmarks/bench_line_views.py``. Writes the 512 x 512 x 1000 float32
cube of ``bench_line_tools.py`` in a temporary folder, warms the page cache, opens the suite on it
(``first_view=False``) with a 200-channel line window, and prints medians of warm repeats:

* the channel-map tab's "Make channel maps" (`channel_panels` and the panels drawn in bqplot, in its
  thread, waited for), against `channel_maps` alone (the matplotlib figure for papers, without its
  PNG), the figure's PNG as the tab showed it before (``savefig`` at 90 dpi) and one ``np.nansum``
  pass over the window's channels;
* the PV tab's slice along a 512-pixel path drawn with the path tool (slice and drawing), against
  `pv_slice` alone on the same path and channels.

Targets (issue 18): channel maps < 1 s warm, a 512-pixel PV path < 300 ms warm.
"""

import argparse
import tempfile
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.io import fits

from _cubes import timed, write_big_cube

CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory); the cube's RESTFRQ


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shape", type=int, nargs=3, default=(1000, 512, 512), metavar=("NCHAN", "NY", "NX"))
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    import io

    from cubeloupe.analysis import channel_maps, channel_panels, frequency_axis, open_cube, pv_slice
    from cubeloupe.widgets import Loupe

    nchan, ny, nx = shape = tuple(args.shape)
    with tempfile.TemporaryDirectory(prefix="cubeloupe-bench-") as folder:
        path, _ = write_big_cube(Path(folder) / "bench.fits", shape)
        raw = fits.open(path, memmap=True)[0].data
        np.sum(raw, axis=0)  # warm the page cache
        lo, hi = nchan // 2 - 100, nchan // 2 + 100
        loupe = Loupe(str(path), first_view=False)
        f = frequency_axis(open_cube(path)).to_value(u.GHz)
        loupe.line_window = sorted([float(f[lo]), float(f[hi - 1])])
        window = u.Quantity(loupe.line_window, u.GHz)

        t_slab, _ = timed(lambda: np.nansum(raw[lo:hi], axis=0), args.repeat)
        panel = loupe.channel_map_panel
        panel.make(wait=True)  # first call: imports and caches
        t_panel, _ = timed(lambda: panel.make(wait=True), args.repeat)
        assert panel.state == "done", panel.status.message
        t_maps, figure = timed(lambda: channel_maps(loupe.cube, window, n=16, rest_frequency=CO21), args.repeat)
        t_png, _ = timed(lambda: figure.savefig(io.BytesIO(), format="png", dpi=90), args.repeat)
        t_panels, _ = timed(lambda: channel_panels(loupe.cube, window, n=16, rest_frequency=CO21), args.repeat)

        side = 511.9 / np.sqrt(2)
        vertices = [[0.0, 0.0], [side, side]]
        pv = loupe.pv_panel
        pv.set_path(vertices)
        t_pv_panel, _ = timed(pv.refresh, args.repeat)
        assert pv.slice is not None, pv.status.message
        t_pv, _ = timed(lambda: pv_slice(loupe.cube, vertices, window=window), args.repeat)

    print(f"cube {nchan} x {ny} x {nx} float32, page cache warm, median of {args.repeat}; "
          f"200-channel line window, 16 panels, 512-pixel path")
    print(f"baseline np.nansum over the window: {t_slab * 1e3:8.1f} ms")
    print(f"channel_panels alone:               {t_panels * 1e3:8.1f} ms  ({t_panels / t_slab:5.1f} x baseline)")
    print(f"channel_maps alone (paper figure):  {t_maps * 1e3:8.1f} ms  ({t_maps / t_slab:5.1f} x baseline)")
    print(f"  its PNG at 90 dpi (the tab before): {t_png * 1e3:6.1f} ms  (tab before ~ channel_maps + PNG = "
          f"{(t_maps + t_png) * 1e3:.0f} ms)")
    print(f"Channel maps tab (panels + bqplot): {t_panel * 1e3:8.1f} ms  ({t_panel / t_slab:5.1f} x baseline, "
          f"{t_panel / t_maps:4.2f} x channel_maps)   target < 1000 ms")
    print(f"pv_slice alone:                     {t_pv * 1e3:8.1f} ms")
    print(f"Position–velocity tab (slice+draw): {t_pv_panel * 1e3:8.1f} ms  ({t_pv_panel / t_pv:4.2f} x pv_slice)"
          f"   target < 300 ms")


if __name__ == "__main__":
    main()
