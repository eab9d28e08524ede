"""Line fits in the suite (widgets/fit_panel.py), driven from code as the browser would."""

import astropy.units as u
import numpy as np
import pytest
from astropy import constants
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import fit_gaussians, hyperfine_lines, smooth_spectrum
from cubeloupe.widgets import Loupe
from suite_driver import LINE_PEAK, LINE_SIGMA, LINE_V, mark_ranges

REGION = "core"
FWHM_PER_SIGMA = 2 * np.sqrt(2 * np.log(2))


def _suite_with_line(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=4), name=REGION)
    mark_ranges(loupe)
    return loupe


def _fit_by_hand(loupe, spectrum, **kw):
    return fit_gaussians(spectrum, window=u.Quantity(loupe.line_window, u.GHz),
                         line_free=u.Quantity(loupe.line_free, u.GHz), order=loupe.baseline_order,
                         rest_frequency=loupe.rest_frequency * u.GHz, z=loupe.z, convention=loupe.convention, **kw)


def _check_rows_equal_fit(rows, fit):
    assert len(rows) == len(fit.components)
    for row, c in zip(rows, fit.components):
        for key in ("amplitude", "center", "fwhm", "flux"):
            assert row[key] == pytest.approx(getattr(c, key).value, rel=1e-9)
            assert row[key + "_error"] == pytest.approx(getattr(c, key + "_error").value, rel=1e-9)
        assert row["reduced_chi2"] == pytest.approx(fit.reduced_chi2, rel=1e-9)


def test_suite_fit_equals_fit_gaussians_on_the_same_spectrum_and_finds_the_line(loupe):
    _suite_with_line(loupe)
    moments = [dict(r) for r in loupe.measurements]
    loupe.fit_panel.model = "1"
    fit = _fit_by_hand(loupe, loupe.spectra[REGION][0], n_components=1)
    rows = loupe.fit_panel.rows
    _check_rows_equal_fit(rows, fit)
    # The injected line of the test cube (suite_driver): centre 39 km/s, sigma 8 km/s.
    assert abs(rows[0]["center"] - LINE_V) < 3 * rows[0]["center_error"] + 0.5
    assert rows[0]["fwhm"] == pytest.approx(FWHM_PER_SIGMA * LINE_SIGMA, rel=0.1)
    assert rows[0]["center_unit"] == "km / s" and rows[0]["flux_unit"] == "Jy km / s"
    # The moment-based numbers stay as they were.
    assert loupe.measurements == moments
    assert "1 Gaussian" in loupe.fit_panel._table.value and "Jy km/s" in loupe.fit_panel._table.value


def test_fit_of_a_smoothed_spectrum_equals_fit_gaussians_on_the_same_smoothed_spectrum(loupe):
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "hanning"
    loupe.fit_panel.model = "2"
    fit = _fit_by_hand(loupe, smooth_spectrum(loupe.spectra[REGION][0], "hanning", 3), n_components=2)
    _check_rows_equal_fit(loupe.fit_panel.rows, fit)
    assert fit.channel_correlation.size > 1  # the errors count the smoothing's correlation


def test_model_and_residuals_are_drawn_and_removed(loupe):
    _suite_with_line(loupe)
    view = loupe.spectrum_view
    loupe.fit_panel.model = "1"
    fit = loupe.fit_panel.results[(REGION, 0)]
    model_mark, residual_mark = view.fit_marks[(REGION, 0)]
    assert model_mark in view.figure.marks and residual_mark in view.figure.marks
    # Over the data the model includes the fit's baseline; with the baseline subtracted it does not.
    np.testing.assert_allclose(model_mark.y, (fit.model + fit.baseline.model).value)
    fitted = np.flatnonzero(fit.fitted)
    np.testing.assert_allclose(residual_mark.y, fit.residuals.value[fitted[0]:fitted[-1] + 1])
    assert np.all(np.isfinite(residual_mark.y))
    loupe.show_subtracted = True
    np.testing.assert_allclose(view.fit_marks[(REGION, 0)][0].y, fit.model.value)
    loupe.fit_panel.model = "none"
    assert not view.fit_marks and model_mark not in view.figure.marks and loupe.fit_panel.rows == []


def test_changing_the_window_refits(loupe):
    _suite_with_line(loupe)
    loupe.fit_panel.model = "1"
    first = loupe.fit_panel.rows[0]["flux"]
    loupe.line_window = [loupe.line_window[0] + 0.004, loupe.line_window[1] - 0.004]
    fit = _fit_by_hand(loupe, loupe.spectra[REGION][0], n_components=1)
    _check_rows_equal_fit(loupe.fit_panel.rows, fit)
    assert loupe.fit_panel.rows[0]["flux"] != first


def test_too_many_components_for_the_window_give_a_readable_message(loupe):
    _suite_with_line(loupe)
    f = loupe._frequencies[0]
    loupe.line_window = [float(f[30]), float(f[26])]  # 5 channels
    loupe.fit_panel.model = "3"
    status = loupe.fit_panel.status
    assert status.level == "error" and "fewer components" in status.message and REGION in status.message
    assert loupe.fit_panel.rows == []


def test_fits_are_exported_in_the_ecsv_and_read_back_with_astropy(loupe, tmp_path):
    from astropy.table import Table

    _suite_with_line(loupe)
    loupe.fit_panel.model = "2"
    path = loupe.export_measurements(str(tmp_path / "lines.ecsv"))
    table = Table.read(path)
    rows = loupe.fit_panel.rows
    assert table["fit_model"][0] == "2 Gaussians"
    assert table["fit_reduced_chi2"][0] == pytest.approx(rows[0]["reduced_chi2"])
    for k, row in enumerate(rows, 1):
        for key in ("amplitude", "center", "fwhm", "flux"):
            column = table[f"fit{k}_{key}"]
            assert column.unit == u.Unit(row[key + "_unit"])
            assert column[0] == pytest.approx(row[key])
            assert table[f"fit{k}_{key}_error"][0] == pytest.approx(row[key + "_error"])
    assert table["flux"][0] == pytest.approx(loupe.measurements[0]["flux"])  # moment numbers still there


# ---------------------------------------------------------------------------------------- hyperfine
N2H = "N2H+ J=1-0"
TAU, TEX, V_GROUP, FWHM = 2.0, 8.0, 2.0, 0.6  # total optical depth, K, km/s, km/s


def _planck_temperature(t, nu):
    # J(T) = (h nu / k) / (exp(h nu / k T) - 1) (Mangum & Shirley 2015, PASP 127, 266, eq. 27)
    t0 = (constants.h * nu / constants.k_B).to_value(u.K)
    return t0 / np.expm1(t0 / t)


@pytest.fixture
def n2h_cube(cube_path, rng):
    """An N2H+ 1-0 group in K: T = A (1 - exp(-tau sum_i r_i g_i(v))) (Caselli, Myers & Thaddeus 1995)."""
    lines = hyperfine_lines(N2H)
    reference = lines["rest_frequency"][int(np.argmax(lines["relative_intensity"]))]
    nchan, cdelt = 240, -40e3  # 40 kHz channels, 0.13 km/s
    crval = reference.to_value(u.Hz) + 120 * 40e3
    nu = (crval + cdelt * np.arange(nchan)) * u.Hz
    c = constants.c.to_value(u.km / u.s)
    v = c * (1 - (nu / reference).decompose().value)  # radio velocity from the strongest component
    offsets = c * (1 - (lines["rest_frequency"] / reference).decompose().value)
    shapes = np.exp(-4 * np.log(2) * (v[:, None] - V_GROUP - offsets) ** 2 / FWHM**2)
    amplitude = _planck_temperature(TEX, reference) - _planck_temperature(2.72548, reference)  # Fixsen 2009
    spectrum = amplitude * -np.expm1(-TAU * shapes @ np.asarray(lines["relative_intensity"]))
    data = spectrum[:, None, None] + rng.normal(0, 0.05, (nchan, 8, 8))
    return cube_path(data, crval3=crval, cdelt3=cdelt, restfrq=reference.to_value(u.Hz), bunit="K", pixel=10.0,
                     beam=(30.0, 30.0, 0.0))


def test_hyperfine_group_in_the_band_is_offered_and_its_fit_recovers_the_optical_depth(n2h_cube, tmp_path):
    loupe = Loupe(n2h_cube, first_view=False)
    labels = dict((v, k) for k, v in loupe.fit_panel.model_choice.options)
    assert "hyperfine: " + N2H in labels
    loupe.add_region(CirclePixelRegion(PixCoord(3.5, 3.5), radius=3), name=REGION)
    f = loupe._frequencies[0]
    loupe.line_free = [[float(f[239]), float(f[215])], [float(f[20]), float(f[0])]]
    loupe.baseline_order = 0
    loupe.line_window = [float(f[214]), float(f[21])]
    loupe.fit_panel.model = "hyperfine: " + N2H
    assert loupe.fit_panel.status.level != "error", loupe.fit_panel.status.message
    row = loupe.fit_panel.rows[0]
    fit = fit_gaussians(loupe.spectra[REGION][0], hyperfine=N2H, window=u.Quantity(loupe.line_window, u.GHz),
                        line_free=u.Quantity(loupe.line_free, u.GHz), order=0, z=0.0)
    assert row["optical_depth"] == pytest.approx(fit.hyperfine.optical_depth, rel=1e-9)
    assert row["excitation_temperature"] == pytest.approx(fit.hyperfine.excitation_temperature.value, rel=1e-9)
    # Recovers the injected group (common practice: a hyperfine fit returns tau and T_ex within their errors).
    assert abs(row["optical_depth"] - TAU) < 4 * row["optical_depth_error"]
    assert abs(row["excitation_temperature"] - TEX) < 4 * row["excitation_temperature_error"]
    assert abs(row["center"] - V_GROUP) < 4 * row["center_error"]
    assert "τ total" in loupe.fit_panel._table.value
    # The optical depth and T_ex go into the ECSV export and read back with astropy.
    from astropy.table import Table

    table = Table.read(loupe.export_measurements(str(tmp_path / "n2h.ecsv")))
    assert table["fit_model"][0] == "hyperfine group " + N2H
    assert table["fit_optical_depth"][0] == pytest.approx(row["optical_depth"])
    assert table["fit_excitation_temperature"].unit == u.K
    assert table["fit_excitation_temperature_error"][0] == pytest.approx(row["excitation_temperature_error"])

