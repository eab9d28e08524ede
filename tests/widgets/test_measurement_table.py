"""MeasurementTable's fit columns (widgets/measurement_table.py): one row per region and window, read back by astropy."""

import astropy.units as u
import numpy as np
import pytest
from astropy.table import Table

from cubeloupe.analysis import fit_gaussians, measurement_table, smooth_spectrum
from cubeloupe.widgets.measurement_table import fit_columns

KMS = u.km / u.s
V = np.arange(-100.0, 100.0, 2.0) * KMS


def _spectrum(rng, peak):
    """A Gaussian line (sigma 10 km/s) on white noise (peak 0: noise alone), as a OneDSpectrum.

    A one-channel boxcar keeps the values and makes the OneDSpectrum `measurement_table` takes.
    """
    values = (peak * np.exp(-0.5 * (V.value / 10.0) ** 2) + rng.normal(0, 0.05, V.size)) * u.K
    return smooth_spectrum(values, "boxcar", 1, spectral_axis=V)


def test_rows_without_a_fit_get_none_and_nan_and_the_file_reads_back(tmp_path):
    rng = np.random.default_rng(11)
    spectra = {"line": [_spectrum(rng, 1.0)], "empty": [_spectrum(rng, 0.0)]}
    window, free = (-40, 40) * KMS, [(-100, -50), (50, 100)] * KMS
    table = measurement_table(spectra, window, line_free=free, order=0)
    fit = fit_gaussians(spectra["line"][0], n_components=2, window=window, line_free=free, order=0)
    fit_columns(table, "2 Gaussians", {("line", 0): fit})
    path = tmp_path / "lines.ecsv"
    table.write(path, format="ascii.ecsv")
    back = Table.read(path)
    by_region = {str(r["region"]): r for r in back}
    assert by_region["empty"]["fit_model"] == "none" and np.isnan(by_region["empty"]["fit2_fwhm"])
    assert by_region["line"]["fit_model"] == "2 Gaussians"
    for k, c in enumerate(fit.components, 1):
        assert by_region["line"][f"fit{k}_center"] == pytest.approx(c.center.to_value(KMS))
        assert by_region["line"][f"fit{k}_flux_error"] == pytest.approx(c.flux_error.to_value(u.K * KMS))
    assert back["fit1_flux"].unit == u.K * KMS and back["fit1_amplitude"].unit == u.K
    assert "fit_optical_depth" not in back.colnames  # only hyperfine fits have one


def test_no_fit_leaves_the_table_as_it_was():
    rng = np.random.default_rng(12)
    table = measurement_table({"a": [_spectrum(rng, 1.0)]}, (-40, 40) * KMS, line_free=[(-100, -50)] * KMS)
    names = list(table.colnames)
    fit_columns(table, "1 Gaussian", {})
    assert table.colnames == names
