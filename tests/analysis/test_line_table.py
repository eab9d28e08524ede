"""measurement_table: one line measured in every region and window, as measure_line and line_luminosity give it."""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import (
    MEASUREMENT_COLUMNS, demo_path, line_luminosity, measure_line, measurement_table, open_cube, region_spectrum,
)

KMS = u.km / u.s


@pytest.fixture(scope="module")
def lensed_spectra():
    spectra = []
    for name in ("lensed_spw1", "lensed_spw2"):
        cube = open_cube(demo_path(name))
        ny, nx = cube.shape[1:]
        spectra.append(region_spectrum(cube, CirclePixelRegion(PixCoord((nx - 1) / 2, (ny - 1) / 2), radius=6)))
    return spectra


def _band(spectrum):
    f = spectrum.spectral_axis.to_value(u.GHz)
    return f.min(), f.max()


def test_rows_equal_measure_line_and_line_luminosity(lensed_spectra):
    # A window and line-free ranges inside the first spectral window only.
    lo, hi = _band(lensed_spectra[0])
    span = hi - lo
    window = u.Quantity([lo + 0.45 * span, lo + 0.55 * span], u.GHz)
    free = u.Quantity([[lo + 0.05 * span, lo + 0.2 * span], [lo + 0.8 * span, lo + 0.95 * span]], u.GHz)
    far = u.Quantity([[1.0, 2.0]], u.GHz)  # overlaps no window: dropped for each spectrum
    rest, z = 345.7959899 * u.GHz, 2.0
    table = measurement_table({"core": lensed_spectra}, window, line_free=np.vstack([free, far]),
                              rest_frequency=rest, z=z, line="CO J=3-2", magnification=4.0)
    assert tuple(table.colnames) == MEASUREMENT_COLUMNS
    assert table["region"].tolist() == ["core"] and table["window"].tolist() == [0]
    direct = measure_line(lensed_spectra[0], window, line_free=free, rest_frequency=rest, z=z)
    assert_allclose(table["flux"][0].value, direct.flux.value, rtol=1e-12)
    assert_allclose(table["flux_error"][0].value, direct.flux_error.value, rtol=1e-12)
    assert_allclose(table["fwhm"][0].to_value(KMS), direct.fwhm.to_value(KMS), rtol=1e-12)
    lum = line_luminosity(direct.flux, z, rest, magnification=4.0)
    assert_allclose(table["l_prime"][0].value, lum.l_prime.value, rtol=1e-12)
    assert table.meta["magnification"] == 4.0 and table.meta["z"] == 2.0


def test_no_luminosity_at_z_zero_and_no_row_outside_every_band(lensed_spectra):
    lo, hi = _band(lensed_spectra[1])
    span = hi - lo
    window = u.Quantity([lo + 0.4 * span, lo + 0.6 * span], u.GHz)
    free = u.Quantity([[lo + 0.02 * span, lo + 0.3 * span], [lo + 0.7 * span, lo + 0.98 * span]], u.GHz)
    table = measurement_table({"a": lensed_spectra, "b": [None, lensed_spectra[1]]}, window, line_free=free)
    assert table["region"].tolist() == ["a", "b"] and table["window"].tolist() == [1, 1]
    assert np.all(np.isnan(table["l_prime"].value))
    empty = measurement_table({"a": lensed_spectra}, u.Quantity([1.0, 2.0], u.GHz))
    assert len(empty) == 0 and tuple(empty.colnames) == MEASUREMENT_COLUMNS
