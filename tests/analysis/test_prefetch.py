"""Read-ahead hints for boxes of a memory-mapped cube: they cover the box and change nothing."""

import mmap

import numpy as np
import pytest
from astropy.io import fits

from cubeloupe.analysis.prefetch import _page_ranges, prefetch, prefetch_if_cold


@pytest.mark.parametrize("shape, box", [
    ((6, 40, 3000), (slice(None), slice(5, 9), slice(100, 110))),      # rows pages apart
    ((5, 64, 64), (slice(None), slice(10, 30), slice(3, 60))),          # rows sharing pages
    ((3, 2000, 1100), (slice(None), slice(0, 1), slice(0, 1100))),      # one long row
])
def test_page_ranges_cover_every_byte_of_the_box(shape, box):
    # Reference: the byte offsets numpy itself uses for the view (strides), brute force.
    array = np.zeros(shape, dtype=">f4")
    view = array[box]
    offset = view.__array_interface__["data"][0] - array.__array_interface__["data"][0]
    lo, hi, _ = _page_ranges(offset, view.shape, view.strides, view.itemsize)
    assert np.all(lo % mmap.PAGESIZE == 0) and np.all(hi % mmap.PAGESIZE == 0)
    assert np.all(lo[1:] > hi[:-1])  # sorted and disjoint
    idx = np.indices(view.shape).reshape(3, -1)
    first_bytes = offset + (idx * np.array(view.strides)[:, None]).sum(axis=0)
    for first in (first_bytes, first_bytes + view.itemsize - 1):
        k = np.searchsorted(lo, first, side="right") - 1
        assert np.all(k >= 0) and np.all(first < hi[k])


def test_prefetch_on_a_mapped_file_leaves_data_and_file_unchanged(tmp_path):
    data = np.arange(4 * 50 * 2100, dtype=">f4").reshape(4, 50, 2100)
    path = tmp_path / "c.fits"
    fits.PrimaryHDU(data).writeto(path)
    before = path.read_bytes()
    with fits.open(path, mode="denywrite", memmap=True) as hdul:
        view = hdul[0].data[:, 10:20, 5:25]
        assert prefetch(view) > 0
        np.testing.assert_array_equal(view, data[:, 10:20, 5:25])
        del view
    assert path.read_bytes() == before


def test_arrays_in_memory_need_no_hint():
    assert prefetch(np.zeros((3, 10, 10))[:, 2:5, 2:5]) == 0
    assert prefetch_if_cold(np.zeros((3, 10, 10))[:, 2:5, 2:5]) == 0


def test_only_a_slow_probe_sends_the_hint(tmp_path, monkeypatch):
    import cubeloupe.analysis.prefetch as prefetch_module

    path = tmp_path / "c.fits"
    fits.PrimaryHDU(np.zeros((12, 40, 2100), ">f4")).writeto(path)
    with fits.open(path, mode="denywrite", memmap=True) as hdul:
        view = hdul[0].data[:, 10:20, 5:25]
        monkeypatch.setattr(prefetch_module, "_COLD_PROBE_SECONDS", 3600.0)   # every read counts as warm
        assert prefetch_if_cold(view) == 0
        monkeypatch.setattr(prefetch_module, "_COLD_PROBE_SECONDS", -1.0)     # every read counts as cold
        assert prefetch_if_cold(view) == prefetch(view) > 0
        del view


def _file_cube(tmp_path, shape=(40, 30, 2100)):
    data = np.arange(np.prod(shape), dtype=">f4").reshape(shape)
    path = tmp_path / "c.fits"
    fits.PrimaryHDU(data).writeto(path)
    return path, data


def _announced_bytes(calls, base):
    """Byte offsets (first and last of each voxel) covered by the recorded prefetch views."""
    ranges = []
    for view in calls:
        offset = view.__array_interface__["data"][0] - base
        lo, hi, _ = _page_ranges(offset, view.shape, view.strides, view.itemsize)
        ranges.append((lo, hi))
    return ranges


def _covered(ranges, offsets):
    hit = np.zeros(offsets.shape, dtype=bool)
    for lo, hi in ranges:
        k = np.searchsorted(lo, offsets, side="right") - 1
        hit |= (k >= 0) & (offsets < hi[np.maximum(k, 0)])
    return hit.all()


def test_cold_block_reads_announce_every_block_ahead_of_the_reader(tmp_path, monkeypatch):
    import cubeloupe.analysis.prefetch as prefetch_module
    from cubeloupe.analysis.blocks import spectra_blocks

    path, _ = _file_cube(tmp_path)
    calls = []
    real_prefetch = prefetch_module.prefetch

    def recording_prefetch(view):
        calls.append(view)
        return real_prefetch(view)

    monkeypatch.setattr(prefetch_module, "prefetch", recording_prefetch)
    monkeypatch.setattr(prefetch_module, "_COLD_PROBE_SECONDS", -1.0)   # every probe counts as cold
    with fits.open(path, mode="denywrite", memmap=True) as hdul:
        data = hdul[0].data
        base = _map_start(data)
        blocks = spectra_blocks(data.shape, channels=[3, 4, 5, 20, 21], block_shape=(2, 700))
        ahead = prefetch_module.BlockReadAhead(data, blocks, ahead_bytes=4 * blocks[0].n_channels * 2 * 700 * 4)
        for i, block in enumerate(blocks):
            ahead.before(block)
            announced = _announced_bytes(calls, base)
            # Reference: numpy's own byte offsets of every voxel this block and the next one read.
            for upcoming in blocks[i:i + 2]:
                for start, stop in upcoming.runs:
                    view = data[start:stop, upcoming.rows, upcoming.columns]
                    offset = view.__array_interface__["data"][0] - base
                    idx = np.indices(view.shape).reshape(3, -1)
                    first = offset + (idx * np.array(view.strides)[:, None]).sum(axis=0)
                    assert _covered(announced, first) and _covered(announced, first + 3)
        assert ahead.cold and len(calls) < len(blocks) * 2   # batched: far fewer calls than channel runs
        del data


def _map_start(array):
    from cubeloupe.analysis.prefetch import _mapping

    return np.frombuffer(_mapping(array), dtype=np.uint8).__array_interface__["data"][0]


def test_warm_block_reads_announce_nothing(tmp_path, monkeypatch):
    import cubeloupe.analysis.prefetch as prefetch_module
    from cubeloupe.analysis.blocks import spectra_blocks

    path, _ = _file_cube(tmp_path)
    monkeypatch.setattr(prefetch_module, "_COLD_PROBE_SECONDS", 3600.0)   # every probe counts as warm
    with fits.open(path, mode="denywrite", memmap=True) as hdul:
        data = hdul[0].data
        blocks = spectra_blocks(data.shape, block_shape=(3, 2100))
        ahead = prefetch_module.BlockReadAhead(data, blocks)
        assert sum(ahead.before(block) for block in blocks) == 0 and not ahead.cold
        del data


def test_moment_maps_are_unchanged_by_read_ahead(tmp_path, monkeypatch, rng):
    import astropy.units as u
    from cubefactory import write_cube

    import cubeloupe.analysis.prefetch as prefetch_module
    from cubeloupe.analysis import moment_maps, open_cube

    data = rng.normal(1.0, 0.2, (60, 24, 300))
    cube = open_cube(write_cube(tmp_path / "noise.fits", data))
    window = cube.spectral_axis[[20, 40]]
    line_free = cube.spectral_axis[[[0, 15], [45, 59]]]
    plain = moment_maps(cube, window, line_free=line_free, block_shape=(2, 300))
    monkeypatch.setattr(prefetch_module, "_COLD_PROBE_SECONDS", -1.0)   # read-ahead on for every block
    ahead = moment_maps(cube, window, line_free=line_free, block_shape=(2, 300))
    for name in ("m0", "m1", "m2", "m0_error"):
        np.testing.assert_array_equal(getattr(ahead, name).value, getattr(plain, name).value)
    assert np.isfinite(plain.m0.value).all()


def test_channel_images_are_announced_whole(tmp_path, rng):
    from cubefactory import write_cube

    import cubeloupe.analysis.prefetch as prefetch_module
    from cubeloupe.analysis import open_cube

    data = rng.normal(size=(6, 30, 2100)).astype(np.float32)
    cube = open_cube(write_cube(tmp_path / "c.fits", data))
    assert prefetch_module.prefetch_channels(cube, [-1, 2, 3, 6]) == 2   # channels -1 and 6 do not exist
    np.testing.assert_array_equal(cube.unmasked_data[2].value, data[2])
