"""Integer FITS data scaled as the FITS standard defines: physical = BZERO + BSCALE * stored; BLANK -> NaN.

Source: FITS standard 3.0 (Pence et al. 2010, A&A 524, A42), Sect. 4.4.2.5 (BSCALE, BZERO),
5.3 (BLANK applies to integer arrays only; IEEE NaN marks undefined floating-point values).
astropy's own scaling (reading into memory) is the reference library.
"""

import numpy as np
import pytest
from astropy.io import fits
from numpy.testing import assert_allclose

from cubefactory import write_scaled_int_cube
from cubeloupe.analysis.scaled_data import IntegerScaling, integer_scaling


def test_scaling_by_hand():
    scaling = IntegerScaling(bscale=0.25, bzero=-10.0, blank=-32768, dtype="float32")
    stored = np.array([0, 4, -4, -32768, 32767], dtype=">i2")
    # -10 + 0.25 x (0, 4, -4, blank, 32767) = (-10, -9, -11, NaN, 8181.75)
    assert_allclose(scaling.apply(stored), [-10.0, -9.0, -11.0, np.nan, 8181.75])


@pytest.mark.parametrize("bitpix, dtype", [(8, "float32"), (16, "float32"), (32, "float64")])
def test_integer_types_become_floats_as_astropy_makes_them(bitpix, dtype):
    scaling = integer_scaling(fits.Header({"BSCALE": 1.0}), np.dtype({8: ">u1", 16: ">i2", 32: ">i4"}[bitpix]))
    assert scaling.dtype == dtype
    assert scaling.blank is None


def test_float_data_scaled_only_when_asked():
    assert integer_scaling(fits.Header({"BLANK": -1}), np.dtype(">f4")) is None  # BLANK ignored on floats
    scaled = integer_scaling(fits.Header({"BSCALE": 2.0}), np.dtype(">f4"))
    assert scaled.bscale == 2.0 and scaled.blank is None


@pytest.mark.parametrize("bitpix", [16, 32])
def test_agrees_with_astropy_reading_the_same_file(tmp_path, rng, bitpix):
    data = rng.normal(5.0, 2.0, size=(4, 6, 7))
    data[1, 2, 3] = np.nan
    blank = -32768 if bitpix == 16 else -2**31
    path, values = write_scaled_int_cube(tmp_path / "c.fits", data, bitpix=bitpix, bzero=3.0, blank=blank)
    with fits.open(path) as hdul:
        reference = np.array(hdul[0].data, dtype=float)  # astropy applies BSCALE/BZERO/BLANK itself
    with fits.open(path, do_not_scale_image_data=True) as hdul:
        stored = np.array(hdul[0].data)
        scaling = integer_scaling(hdul[0].header, stored.dtype)
    ours = scaling.apply(stored)
    assert_allclose(ours, reference, rtol=1e-6, equal_nan=True)
    assert_allclose(ours, values, rtol=1e-6, equal_nan=True)
    assert np.isnan(ours[1, 2, 3])


@pytest.mark.parametrize("bitpix, out_dtype", [(16, "float32"), (16, "float64"), (32, "float32"), (32, "float64")])
def test_scaling_into_a_block_matches_astropy(tmp_path, rng, bitpix, out_dtype):
    # The block kernels scale big-endian stored values straight into their working dtype. Reference:
    # astropy's own scaling of the same file (float32 for 16-bit, float64 for 32-bit data), rounded
    # to the working dtype: the same numbers, bit for bit.
    data = rng.normal(5.0, 2.0, size=(5, 6, 7))
    data[2, :, 1] = np.nan
    blank = -32768 if bitpix == 16 else -2**31
    path, _ = write_scaled_int_cube(tmp_path / "c.fits", data, bitpix=bitpix, bzero=3.0, blank=blank)
    with fits.open(path) as hdul:
        reference = np.array(hdul[0].data)
    with fits.open(path, do_not_scale_image_data=True, memmap=True) as hdul:
        stored = hdul[0].data
        assert stored.dtype.byteorder == ">"  # the file's own layout, not a native copy
        scaling = integer_scaling(hdul[0].header, stored.dtype)
        out = scaling.apply_into(stored[1:4, 2:5], np.empty((3, 3, 7), dtype=out_dtype))
        del stored
    expected = reference[1:4, 2:5].astype(out_dtype)
    if reference.dtype.itemsize >= np.dtype(out_dtype).itemsize:
        np.testing.assert_array_equal(out, expected)
    else:  # 16-bit data in a float64 block: scaled in float64, closer than astropy's float32
        assert_allclose(out, expected, rtol=1e-6, equal_nan=True)
    assert np.isnan(out[1, :, 1]).all() and np.isfinite(out[0]).all()
