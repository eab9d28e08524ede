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
