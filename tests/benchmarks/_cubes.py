"""Shared benchmark pieces: large cubes written chunk by chunk (never whole in memory), and a timer."""

import gc
import statistics
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # tests/ for cubefactory

from cubefactory import gaussian_profile, make_header, velocity_axis_kms  # noqa: E402


def write_big_cube(path, shape, *, seed=1, noise=0.01, chunk_bytes=256 * 2**20):
    """Write a FREQ-axis Jy/beam float32 cube of numpy ``shape``: noise, a continuum slope and a line.

    The spectral axis is centred on 230.538 GHz (velocity 0 at channel n/2) with 1 MHz channels;
    every pixel holds a Gaussian line at 0 km/s (sigma 15 km/s) over a sloping continuum.
    """
    nchan, ny, nx = shape
    header = make_header(shape, crpix3=nchan / 2 + 0.5)
    velocity = velocity_axis_kms(nchan, crpix3=nchan / 2 + 0.5)
    line = gaussian_profile(velocity, 0.1, 0.0, 15.0) + 0.02 + 1e-5 * velocity
    rng = np.random.default_rng(seed)
    per_chunk = max(1, chunk_bytes // (ny * nx * 4))
    with open(path, "wb") as handle:
        handle.write(header.tostring().encode("ascii"))
        for c0 in range(0, nchan, per_chunk):
            c1 = min(nchan, c0 + per_chunk)
            block = rng.standard_normal((c1 - c0, ny, nx), dtype=np.float32)
            block *= noise
            block += line[c0:c1, None, None].astype(np.float32)
            handle.write(block.astype(">f4").tobytes())
        size = handle.tell()
        handle.write(b"\0" * ((-size) % 2880))
    return Path(path), velocity


def timed(func, repeat):
    """Median wall time of ``repeat`` calls of ``func`` (garbage collected before each) and the last result."""
    times = []
    result = None
    for _ in range(repeat):
        gc.collect()
        start = time.perf_counter()
        result = func()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result
