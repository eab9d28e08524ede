"""Responsiveness of the widget suite on a 1 GB cube (Python side; run on demand).

    python tests/benchmarks/bench_widgets.py [--keep]

Generates a 1 GB cube (256 channels of 1024 x 1024, float32) in a temporary
folder, deletes it afterwards, and prints the median time of:

* channel change -> new image data (including serialising it for the browser), target < 50 ms;
* z / velocity slider -> new marker positions, target < 10 ms;
* region change -> new spectrum on the plot, target < 100 ms;

each beside a baseline measured in the same run on the same data.
"""

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from astropy.io import fits

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from cubefactory import make_header  # noqa: E402

N_CHAN, NY, NX = 256, 1024, 1024


def write_big_cube(path):
    header = make_header((N_CHAN, NY, NX), cdelt3=-2.0e6)
    header.tofile(path)
    rng = np.random.default_rng(1)
    with open(path, "ab") as handle:
        for _ in range(N_CHAN):
            handle.write(rng.normal(0, 1, (NY, NX)).astype(">f4").tobytes())
        pad = (-handle.tell()) % 2880  # FITS files come in 2880-byte records
        handle.write(b"\0" * pad)
    return path


def median_time(action, values, repeat=1):
    times = []
    for value in values:
        for _ in range(repeat):
            t0 = time.perf_counter()
            action(value)
            times.append(time.perf_counter() - t0)
    return float(np.median(times))


def main(keep=False):
    import astropy.units as u
    from bqplot_image_gl.serialize import image_data_serialization
    from regions import RectanglePixelRegion, PixCoord

    from cubeloupe.analysis.catalog import lines_in_band
    from cubeloupe.widgets import Loupe

    folder = Path(tempfile.mkdtemp(prefix="cubeloupe-bench-"))
    path = folder / "big.fits"
    try:
        t0 = time.perf_counter()
        write_big_cube(path)
        print(f"wrote {path.stat().st_size / 2**30:.2f} GiB in {time.perf_counter() - t0:.1f} s")
        t0 = time.perf_counter()
        loupe = Loupe(path, z=1.0)
        print(f"Loupe opened in {time.perf_counter() - t0:.2f} s; status: {loupe.status.message or 'ok'}")
        data = fits.open(path, memmap=True)[0].data
        channels = list(range(3, N_CHAN, 17))

        # --- channel change
        def change_channel(k):
            loupe.channel = k
            image_data_serialization["to_json"](loupe.sky_view.image.image, loupe.sky_view.image)

        def plain_plane(k):
            np.array(data[k])

        rows = [("channel change -> image sent (1024x1024 -> 512x512)", median_time(change_channel, channels),
                 "plain memmap plane read", median_time(plain_plane, channels), 0.050)]

        # --- redshift / velocity
        zs = list(np.linspace(0.9, 1.1, 25))
        overlay = loupe.line_overlay

        def change_z(z):
            loupe.z = float(z)

        def band_query(z):
            lines_in_band(225 * u.GHz, 231 * u.GHz, float(z), loupe.catalog)

        rows.append((f"z change -> {len(overlay.marker_x)}-ish marker positions", median_time(change_z, zs),
                     "one lines_in_band call", median_time(band_query, zs), 0.010))

        def change_offset(v):
            loupe.velocity_offset = float(v)

        loupe.z = 1.0  # CO J=4-3 falls in this band at z = 1: time the slider with a marker to move
        rows.append((f"velocity slider -> {len(overlay.marker_x)}-ish marker positions", median_time(change_offset, np.linspace(-500, 500, 25)),
                     "one lines_in_band call", rows[-1][3], 0.010))

        # --- region change (20 x 20 box moved around)
        loupe.add_region(RectanglePixelRegion(PixCoord(100, 100), width=20, height=20), name="box")
        centres = [(100 + 37 * i, 200 + 23 * i) for i in range(15)]

        def move_region(c):
            loupe.region_list.replace("box", RectanglePixelRegion(PixCoord(*c), width=20, height=20))
            assert loupe.spectrum_view.curve_marks[("box", 0)].y.shape == (N_CHAN,)

        def plain_box(c):
            x, y = c
            np.nansum(np.asarray(data[:, y - 10:y + 10, x - 10:x + 10], dtype=np.float32), axis=(1, 2))

        rows.append(("region change -> new spectrum (20x20 box)", median_time(move_region, centres),
                     "plain memmap box nansum", median_time(plain_box, centres), 0.100))

        # one full nansum pass over the cube, as the project's reference point
        t0 = time.perf_counter()
        np.nansum(data, axis=0)
        nansum = time.perf_counter() - t0

        print(f"\n{'action':58s} {'time':>9s} {'target':>8s}   {'baseline':30s} {'time':>9s} {'ratio':>7s}")
        for name, t, base_name, base, target in rows:
            flag = "ok" if t < target else "SLOW"
            print(f"{name:58s} {1e3 * t:7.2f}ms {1e3 * target:6.0f}ms   {base_name:30s} {1e3 * base:7.2f}ms "
                  f"{t / base:6.1f}x  {flag}")
        print(f"{'(one np.nansum pass over the whole cube)':58s} {1e3 * nansum:7.0f}ms")
        if loupe.status.level == "error":
            print("status error:", loupe.status.message)
    finally:
        if not keep:
            path.unlink(missing_ok=True)
            folder.rmdir()


if __name__ == "__main__":
    main(keep="--keep" in sys.argv)
