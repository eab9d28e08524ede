"""The suite's smoothing choice (widgets/smoothing_choice.py), driven from code as the browser would."""

import astropy.units as u
import numpy as np
import pytest
from astropy.convolution import Gaussian1DKernel, convolve
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import (
    correlated_line_errors, measure_line, smooth_spectrum, with_channel_correlation,
)
from suite_driver import mark_ranges

REGION = "core"


def _suite_with_line(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=4), name=REGION)
    mark_ranges(loupe)
    return loupe


def _raw(loupe):
    return loupe.spectra[REGION][0]


def _shown(loupe):
    return loupe.spectrum_view.shown_spectra()[REGION][0]


def _measured_by_hand(loupe, spectrum):
    """measure_line on ``spectrum`` with the suite's inputs, errors recomputed for its channel correlation."""
    m = measure_line(spectrum, u.Quantity(loupe.line_window, u.GHz), line_free=u.Quantity(loupe.line_free, u.GHz),
                     order=loupe.baseline_order, rest_frequency=loupe.rest_frequency * u.GHz, z=loupe.z,
                     convention=loupe.convention)
    return correlated_line_errors(m, spectrum)


def test_hanning_spectrum_shown_is_the_convolution_with_the_published_window(loupe):
    # Hanning smoothing is the convolution with [1/4, 1/2, 1/4] (Blackman & Tukey 1958).
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "hanning"
    raw = np.asarray(_raw(loupe).value, float)
    expected = np.convolve(raw, [0.25, 0.5, 0.25], mode="same")
    drawn = np.asarray(loupe.spectrum_view.curve_marks[(REGION, 0)].y, float)
    np.testing.assert_allclose(drawn[1:-1], expected[1:-1], rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(np.asarray(_shown(loupe).value)[1:-1], expected[1:-1], rtol=1e-12, atol=1e-12)


def test_gaussian_smoothing_agrees_with_astropy(loupe):
    # Reference library: astropy.convolution with a Gaussian of stddev = FWHM / (2 sqrt(2 ln 2)).
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "gaussian"
    loupe.smoothing.width = 4.0
    raw = np.asarray(_raw(loupe).value, float)
    expected = convolve(raw, Gaussian1DKernel(4.0 / (2 * np.sqrt(2 * np.log(2)))), boundary="fill",
                        fill_value=np.nan, nan_treatment="interpolate")
    inner = slice(10, -10)
    np.testing.assert_allclose(np.asarray(_shown(loupe).value)[inner], expected[inner], rtol=1e-10)


def test_smoothed_measurement_errors_are_the_analysis_layers_correlated_errors(loupe):
    _suite_with_line(loupe)
    plain = dict(loupe.measurements[0])
    loupe.smoothing.kernel = "boxcar"
    loupe.smoothing.width = 3
    by_hand = _measured_by_hand(loupe, smooth_spectrum(_raw(loupe), "boxcar", 3))
    row = loupe.measurements[0]
    assert row["flux"] == pytest.approx(by_hand.flux.value, rel=1e-12)
    assert row["flux_error"] == pytest.approx(by_hand.flux_error.value, rel=1e-12)
    assert row["snr"] == pytest.approx(by_hand.snr, rel=1e-12)
    assert row["flux_error"] != pytest.approx(plain["flux_error"], rel=1e-3)


def test_delivered_hanning_counts_the_correlation_without_smoothing_again(loupe):
    _suite_with_line(loupe)
    plain = dict(loupe.measurements[0])
    loupe.smoothing.delivered_hanning = True
    np.testing.assert_array_equal(np.asarray(_shown(loupe).value), np.asarray(_raw(loupe).value))
    by_hand = _measured_by_hand(loupe, with_channel_correlation(_raw(loupe), "hanning", 3))
    row = loupe.measurements[0]
    assert row["flux"] == pytest.approx(plain["flux"], rel=1e-12)
    assert row["flux_error"] == pytest.approx(by_hand.flux_error.value, rel=1e-12)
    # Hanning-correlated channels: a wide sum's error grows towards sqrt(8/3) = 1.63 (Blackman & Tukey 1958).
    assert 1.3 < row["flux_error"] / plain["flux_error"] < 1.7


def test_rebinning_draws_fewer_channels_and_the_raw_spectrum_faintly(loupe):
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "rebin"
    loupe.smoothing.width = 3
    assert len(_shown(loupe)) == len(_raw(loupe)) // 3
    view = loupe.spectrum_view
    raw_mark = view.raw_marks[(REGION, 0)]
    assert len(raw_mark.y) == len(_raw(loupe)) and raw_mark in view.figure.marks
    assert raw_mark.opacities[0] < 0.5
    loupe.smoothing.show_raw = False
    assert raw_mark not in view.figure.marks


def test_a_bad_width_is_refused_next_to_the_control(loupe):
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "hanning"
    before = np.asarray(_shown(loupe).value).copy()
    loupe.smoothing.width = 4
    status = loupe.smoothing.status
    assert status.level == "error" and "odd number of channels" in status.message and "4" in status.message
    assert loupe.smoothing.settings["width"] == 3.0
    np.testing.assert_array_equal(np.asarray(_shown(loupe).value), before)
    assert loupe.status.level != "error"
    loupe.smoothing.width = 5
    assert loupe.smoothing.status.message == "" and loupe.smoothing.settings["width"] == 5.0


def test_rebinning_by_more_channels_than_a_spectrum_has_is_refused(loupe):
    _suite_with_line(loupe)
    loupe.smoothing.kernel = "rebin"
    loupe.smoothing.width = 100  # the test cube has 60 channels
    status = loupe.smoothing.status
    assert status.level == "error" and "cannot rebin 60 channels by 100" in status.message
    assert "unsmoothed" in status.message
    np.testing.assert_array_equal(np.asarray(_shown(loupe).value), np.asarray(_raw(loupe).value))


def _same_rows(got, expected):
    """Equal rows, NaN equal to NaN (L'_line is NaN at z = 0)."""
    assert len(got) == len(expected)
    for g, e in zip(got, expected):
        assert g.keys() == e.keys()
        for key, value in e.items():
            assert g[key] == value or (isinstance(value, float) and np.isnan(value) and np.isnan(g[key])), key


def test_script_of_a_smoothed_suite_makes_the_same_table(loupe):
    # The script (Loupe.to_code) smooths and measures as the suite does: the same numbers bit for bit.
    _suite_with_line(loupe)
    loupe.smoothing.delivered_hanning = True
    loupe.smoothing.kernel = "boxcar"
    loupe.smoothing.width = 3
    loupe.fit_panel.model = "1"
    code = loupe.to_code()
    assert "correlated_measurement_table(" in code and "smooth_spectrum(with_channel_correlation(s" in code
    ns = {}
    exec(compile(code, "script", "exec"), ns)
    table = ns["table"]
    for row, expected in zip(table, loupe.measurements):
        assert row["flux_error"].value == expected["flux_error"] and float(row["snr"]) == expected["snr"]
    restored = ns["loupe"]
    assert restored.smoothing.settings == loupe.smoothing.settings and restored.fit_panel.model == "1"
    _same_rows(restored.measurements, loupe.measurements)


def test_session_keeps_the_smoothing_and_the_fit(loupe, tmp_path):
    from cubeloupe.widgets import Loupe

    _suite_with_line(loupe)
    loupe.smoothing.kernel = "gaussian"
    loupe.smoothing.width = 2.5
    loupe.smoothing.show_raw = False
    loupe.fit_panel.model = "2"
    path = loupe.save_session(str(tmp_path / "s.json"))
    again = Loupe.from_session(path)
    assert again.smoothing.settings == loupe.smoothing.settings and not again.spectrum_view.show_raw
    assert again.fit_panel.model == "2" and again.fit_panel.rows == loupe.fit_panel.rows
    _same_rows(again.measurements, loupe.measurements)
