"""Block executor: tiling, file views, masks, threads, cancel, and a real dask.distributed cluster."""

import threading
import tracemalloc
import warnings
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from numpy.testing import assert_allclose, assert_array_equal

from cubefactory import gaussian_profile, velocity_axis_kms, write_cube, write_scaled_int_cube
from cubeloupe.analysis import CancelledComputation, ClusterError, open_cube
from cubeloupe.analysis.blocks import (
    channel_runs,
    plane_blocks,
    run_blocks,
    spectra_blocks,
)
from cubeloupe.analysis.moments import moment_maps
from cubeloupe.analysis.noise import channel_statistics

KMS = u.km / u.s
CO21 = 230.538 * u.GHz  # 12CO J=2-1 rest frequency (CDMS catalogue, from memory)
NCHAN = 120
CENTRE = NCHAN / 2 + 0.5
VEL = velocity_axis_kms(NCHAN, crpix3=CENTRE)
REAL = Path(__file__).resolve().parents[2] / ".." / "shared" / "real-cubes"
BLOCK_SHAPES = [(1, 1), (1, 4), (2, 3), (3, 2), (4, 5), (5, 3), (7, 9), (9, 7)]


def noisy_cube(rng, ny=7, nx=9, blank=0.03):
    data = gaussian_profile(VEL, 1.0, 3.0, 8.0)[:, None, None] * rng.uniform(0.5, 1.5, (1, ny, nx))
    data = data + rng.normal(0, 0.1, (NCHAN, ny, nx))
    data[rng.random(data.shape) < blank] = np.nan
    data[:, 0, 0] = np.nan
    return data


@pytest.mark.parametrize("shape", BLOCK_SHAPES)
def test_spectra_blocks_cover_every_pixel_once(shape):
    counts = np.zeros((7, 9), int)
    for block in spectra_blocks((NCHAN, 7, 9), block_shape=shape):
        counts[block.rows, block.columns] += 1
        assert block.shape[0] == NCHAN
    assert np.all(counts == 1)


def test_default_blocks_are_a_few_megabytes():
    for block in spectra_blocks((1000, 512, 512), itemsize=8)[:3] + plane_blocks((1000, 512, 512), itemsize=4)[:3]:
        size = np.prod(block.shape) * (8 if block.n_channels == 1000 else 4)
        assert 1 * 2**20 <= size <= 8 * 2**20
    wide = spectra_blocks((4000, 10, 20000), itemsize=8)  # one row is 640 MB: rows are split
    assert max(np.prod(b.shape) * 8 for b in wide) <= 8 * 2**20


def test_channel_runs():
    assert channel_runs(None, 5) == ((0, 5),)
    assert channel_runs(np.array([False, True, True, False, True]), 5) == ((1, 3), (4, 5))
    assert channel_runs([5, 6, 0, 1, 2], 8) == ((5, 7), (0, 3))


@pytest.mark.parametrize("shape", BLOCK_SHAPES)
def test_block_kernels_equal_spectral_cube(cube_path, rng, shape):
    # Issue 7: block kernels equal spectral-cube's results on small cubes with NaNs, for every block size.
    cube = open_cube(cube_path(noisy_cube(rng), crpix3=CENTRE))
    slab = cube.with_spectral_unit(KMS, velocity_convention="radio", rest_value=CO21).spectral_slab(-40 * KMS,
                                                                                                    40 * KMS)
    half_channel = 0.65 * KMS
    span = u.Quantity([slab.spectral_axis.min() - half_channel, slab.spectral_axis.max() + half_channel])
    maps = moment_maps(cube, span, rest_frequency=CO21, block_shape=shape)
    m0 = slab.moment0().to_value(u.Jy / u.beam * KMS)
    m0[0, 0] = np.nan  # spectral-cube's nansum gives 0 for an all-NaN spectrum; ours says NaN
    assert_allclose(maps.m0.value, m0, rtol=1e-6, equal_nan=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        assert_allclose(maps.m1.value, slab.moment1().to_value(KMS), rtol=1e-6, atol=1e-6, equal_nan=True)
        assert_allclose(maps.m2.value, slab.linewidth_sigma().to_value(KMS), rtol=1e-6, equal_nan=True)

    peak = np.zeros(NCHAN)
    seen = set()

    def consume(block, result):
        seen.add(block.index)
        (start, stop), = block.runs
        peak[start:stop] = result

    blocks = plane_blocks(cube.shape, itemsize=4, block_bytes=shape[0] * 7 * 9 * 4)
    run_blocks(cube, lambda data: np.nanmax(data.reshape(len(data), -1), axis=1), blocks, consume, threads=2)
    assert seen == set(range(len(blocks)))
    assert_allclose(peak, cube.max(axis=(1, 2)).value)


def test_masked_voxels_reach_the_kernel_as_nan(cube_path, rng):
    data = rng.normal(0, 1, (NCHAN, 4, 5))
    cube = open_cube(cube_path(data))
    masked = cube.with_mask(cube > 0 * u.Jy / u.beam)
    out = np.zeros(data.shape)

    def consume(block, result):
        out[:, block.rows, block.columns] = result

    run_blocks(masked, lambda d: d, spectra_blocks(cube.shape, block_shape=(3, 2)), consume)
    stored = data.astype(np.float32)
    assert_array_equal(out, np.where(stored > 0, stored, np.nan))


def test_threads_give_the_same_result_as_one_thread(cube_path, rng):
    cube = open_cube(cube_path(noisy_cube(rng, 16, 16)))
    results = []
    for threads in (1, 2, 3):
        out = np.zeros((16, 16))

        def consume(block, result, out=out):
            out[block.rows, block.columns] = result

        run_blocks(cube, lambda d: np.nansum(d, axis=0), spectra_blocks(cube.shape, block_shape=(3, 5)), consume,
                   threads=threads)
        results.append(out)
    assert_array_equal(results[0], results[1])
    assert_array_equal(results[0], results[2])


def test_cancel_midway_stops_and_raises(cube_path, rng):
    cube = open_cube(cube_path(noisy_cube(rng, 16, 16)))
    stop = threading.Event()
    consumed = []

    def consume(block, result):
        consumed.append(block.index)
        if len(consumed) == 3:
            stop.set()

    blocks = spectra_blocks(cube.shape, block_shape=(1, 4))
    with pytest.raises(CancelledComputation, match=f"of {len(blocks)} blocks"):
        run_blocks(cube, lambda d: 0, blocks, consume, cancel=stop, threads=2)
    assert 3 <= len(consumed) < len(blocks)


def test_bad_client_values(cube_path, rng):
    cube = open_cube(cube_path(noisy_cube(rng)))
    with pytest.raises(ClusterError, match="no dask.distributed Client"):
        moment_maps(cube, (0, 40) * KMS, rest_frequency=CO21, client="default")
    with pytest.raises(ClusterError, match="not understood"):
        moment_maps(cube, (0, 40) * KMS, rest_frequency=CO21, client="tcp://nowhere")
    with pytest.raises(ClusterError, match="distributed.Client"):
        moment_maps(cube, (0, 40) * KMS, rest_frequency=CO21, client=42)


@pytest.fixture(scope="module")
def cluster_client():
    distributed = pytest.importorskip("distributed")
    # Two worker processes, as a laptop or a small cluster node would run them; started and closed here.
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) \
            as cluster, distributed.Client(cluster) as client:
        yield client


@pytest.mark.slow
def test_local_cluster_reproduces_the_in_process_maps(cube_path, rng, cluster_client):
    # Issue 7: a LocalCluster with 2 workers gives exactly the in-process maps.
    path = cube_path(noisy_cube(rng, 20, 17), crpix3=CENTRE)
    cube = open_cube(path)
    kw = dict(line_free=[(-75, -45), (45, 75)] * KMS, rest_frequency=CO21, order=1, clip=2, block_shape=(3, 7))
    here = moment_maps(cube, (-40, 40) * KMS, **kw)
    seen = []
    there = moment_maps(cube, (-40, 40) * KMS, client=cluster_client, progress=seen.append, **kw)
    for name in ("m0", "m1", "m2", "m0_error", "rms"):
        assert_array_equal(getattr(there, name).value, getattr(here, name).value)
    assert seen[-1] == 1.0
    # the workers mapped the file themselves: each opened it through its own cache
    opened = cluster_client.run(lambda: __import__("cubeloupe.analysis.cube_file", fromlist=["_"])
                                .mapped_file.cache_info().misses)
    assert sum(opened.values()) >= 1
    # a user mask travels with the blocks; a dask-backed cube goes through the same call
    masked = cube.with_mask(cube > 0.05 * u.Jy / u.beam)
    assert_array_equal(moment_maps(masked, (-40, 40) * KMS, client=cluster_client, **kw).m0.value,
                       moment_maps(masked, (-40, 40) * KMS, **kw).m0.value)
    lazy = open_cube(path, use_dask=True)
    assert_array_equal(moment_maps(lazy, (-40, 40) * KMS, client=cluster_client, **kw).m1.value, here.m1.value)
    stats_here = channel_statistics(cube)
    stats_there = channel_statistics(open_cube(path), client=cluster_client)
    assert_array_equal(stats_there.rms, stats_here.rms)
    assert_array_equal(stats_there.peak_pixel, stats_here.peak_pixel)


@pytest.mark.slow
def test_cluster_runs_in_memory_cubes_here(cube_path, rng, cluster_client):
    # Data that are not a view of the file (arithmetic) are computed in this process, with the same answer.
    cube = open_cube(cube_path(noisy_cube(rng), crpix3=CENTRE))
    doubled = cube * 2
    there = moment_maps(doubled, (-40, 40) * KMS, rest_frequency=CO21, client=cluster_client)
    here = moment_maps(doubled, (-40, 40) * KMS, rest_frequency=CO21)
    assert_array_equal(there.m0.value, here.m0.value)


def _blocks_of(cube, blocks, dtype=np.float32):
    out = np.full(cube.shape, -1.0, dtype=dtype)

    def consume(block, result):
        k = 0
        for start, stop in block.runs:
            out[start:stop, block.rows, block.columns] = result[k:k + stop - start]
            k += stop - start

    run_blocks(cube, lambda d: d, blocks, consume, dtype=dtype)
    return out


def _astropy_scaled(path):
    """The file's values as astropy.io.fits scales them itself (BSCALE/BZERO/BLANK): the reference."""
    with fits.open(path) as hdul:
        return np.array(hdul[0].data)


@pytest.mark.parametrize("bitpix", [16, 32])
def test_integer_blocks_are_astropys_scaling_bit_for_bit(tmp_path, rng, bitpix):
    # physical = BZERO + BSCALE * stored, BLANK -> NaN (Pence et al. 2010, A&A 524, A42, Sect. 4.4.2.5,
    # 5.3); astropy.io.fits applies it itself when it reads the file into memory.
    data = noisy_cube(rng, 12, 10)
    data[:, :3, :] = np.nan  # a blanked border, stored as BLANK
    path, _ = write_scaled_int_cube(tmp_path / "int.fits", data, bitpix=bitpix, bzero=-0.5,
                                    blank=-32768 if bitpix == 16 else -2**31, crpix3=CENTRE)
    cube = open_cube(path)
    reference = _astropy_scaled(path).astype(np.float32)  # the float32 working dtype of the kernels
    channels = np.r_[5:30, 70:90]
    for blocks in (spectra_blocks(cube.shape, channels=channels, block_shape=(5, 3)),
                   plane_blocks(cube.shape, channels=channels, itemsize=4, block_bytes=3 * 12 * 10 * 4)):
        got = _blocks_of(cube, blocks)
        assert_array_equal(got[channels], reference[channels])
        assert (got[np.r_[0:5, 30:70, 90:NCHAN]] == -1).all()  # channels not asked for are not read
    # And the moment maps from the scaled blocks are those of astropy's values read as a float cube.
    float_cube = open_cube(write_cube(tmp_path / "float.fits", reference, crpix3=CENTRE))
    window = (-30, 30) * KMS
    ours, theirs = moment_maps(cube, window, rest_frequency=CO21), moment_maps(float_cube, window, rest_frequency=CO21)
    assert_array_equal(ours.m0.value, theirs.m0.value)


def test_integer_cube_is_scaled_block_by_block_not_as_a_whole(tmp_path, rng):
    # Issue #13: integer cubes stay memory-mapped and are scaled per block; never a float copy of the cube.
    data = rng.normal(0.0, 1.0, (200, 128, 128))
    path, _ = write_scaled_int_cube(tmp_path / "int.fits", data)
    cube = open_cube(path)
    blocks = spectra_blocks(cube.shape, itemsize=4, block_bytes=2**18)
    sums = np.zeros(cube.shape[1:])

    def consume(block, result):
        sums[block.rows, block.columns] = result

    tracemalloc.start()
    run_blocks(cube, lambda d: d.sum(axis=0), blocks, consume, threads=1)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < data.size * 4 / 8, peak  # an eighth of one float32 copy of the cube (blocks of 1/50)
    assert_allclose(sums, _astropy_scaled(path).sum(axis=0, dtype=np.float64), rtol=1e-4, atol=1e-3)


@pytest.mark.skipif(not REAL.is_dir(), reason=f"real cubes not found at {REAL} (see SOURCES.md there)")
def test_real_cube_stored_as_scaled_integers_reads_as_astropy_scales_it(tmp_path):
    # No real delivery in ../shared/real-cubes is stored as integers (both are BITPIX -32), so the real
    # L1448 13CO map (astropy-data, SOURCES.md) is stored here as int16 with BSCALE/BZERO and a BLANK
    # border, as integer deliveries are; astropy.io.fits' own scaling of that file is the reference.
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        observed = fits.getdata(REAL / "l1448_13co.fits").astype(float)
    observed[:, :, :20] = np.nan
    header = fits.getheader(REAL / "l1448_13co.fits")
    extra = {key: header[key] for key in ("CTYPE3", "CRVAL3", "CDELT3", "CRPIX3", "CUNIT3")}
    path, _ = write_scaled_int_cube(tmp_path / "l1448_int16.fits", observed, bzero=1.5, bunit="K",
                                    beam=None, restfrq=110.20135428e9,
                                    spectral="VOPT", crval3=header["CRVAL3"], cdelt3=header["CDELT3"],
                                    crpix3=header["CRPIX3"], extra=extra)
    cube = open_cube(path)
    reference = _astropy_scaled(path)
    got = _blocks_of(cube, spectra_blocks(cube.shape, itemsize=4, block_shape=(7, 40)))
    assert_array_equal(got, reference.astype(np.float32))
    assert np.isnan(got[:, :, :20]).all() and np.isfinite(got[:, :, 20:]).all()


class _SlabCollector:
    """A streaming kernel that hands back its slabs stacked, and the rows it asked for whole."""

    def __call__(self, data):
        return data

    def stream(self, slabs, shape, reread):
        parts = [(first, slab.copy()) for first, slab in slabs]   # slabs share one buffer: copy each
        assert [first for first, _ in parts] == list(np.cumsum([0] + [p.shape[0] for _, p in parts])[:-1])
        stacked = np.concatenate([p for _, p in parts]).reshape(shape)
        assert_array_equal(reread(slice(1, shape[1])), stacked[:, 1:])
        return stacked


def test_streamed_slabs_are_the_block_masked_and_in_order(cube_path, rng, monkeypatch):
    # Slabs concatenated are exactly the block a plain kernel gets (astropy's reading of the file,
    # masked voxels NaN), channel runs in the order asked for.
    import cubeloupe.analysis.blocks as blocks_module

    monkeypatch.setattr(blocks_module, "SLAB_CHANNELS", 3)
    data = rng.normal(size=(NCHAN, 8, 7))
    cube = open_cube(cube_path(data))
    keep = rng.random(data.shape) > 0.1
    masked = cube.with_mask(keep)
    channels = np.r_[40:50, 0:11, 100:104]
    expected = np.where(keep, data.astype(np.float32), np.nan)  # the file holds float32
    got = np.full((channels.size, 8, 7), np.inf)

    def consume(block, result):
        got[:, block.rows, block.columns] = result

    blocks = spectra_blocks(cube.shape, channels=channels, itemsize=4, block_shape=(4, 7))
    run_blocks(masked, _SlabCollector(), blocks, consume, dtype=np.float32)
    assert_array_equal(got, expected[channels])


class _ViewCollector(_SlabCollector):
    """A streaming kernel that takes views of the file, and notes whether each slab was one."""

    takes_file_views = True

    def __init__(self):
        self.views = []

    def stream(self, slabs, shape, reread):
        def noted():
            for first, slab in slabs:
                self.views.append(not slab.flags.writeable and not slab.dtype.isnative)
                yield first, slab
        return super().stream(noted(), shape, reread)


@pytest.mark.parametrize("masked", [False, True])
def test_a_kernel_that_takes_file_views_reads_the_file_itself_unless_it_is_masked(cube_path, rng, masked):
    # Without a mask the slabs are the file's own (big-endian, read-only) values, not a copy; with
    # one they are native copies with masked voxels NaN. Either way the stacked slabs are the block.
    data = rng.normal(size=(NCHAN, 8, 7))
    cube = open_cube(cube_path(data))
    keep = rng.random(data.shape) > 0.1 if masked else np.ones(data.shape, bool)
    if masked:
        cube = cube.with_mask(keep)
    channels = np.r_[40:50, 0:11, 100:104]
    expected = np.where(keep, data.astype(np.float32), np.nan)[channels]
    got = np.full((channels.size, 8, 7), np.inf)

    def consume(block, result):
        got[:, block.rows, block.columns] = result

    kernel = _ViewCollector()
    run_blocks(cube, kernel, spectra_blocks(cube.shape, channels=channels, itemsize=4, block_shape=(4, 7)),
               consume, dtype=np.float32)
    assert_array_equal(got, expected)
    assert kernel.views and all(was_view == (not masked) for was_view in kernel.views)
