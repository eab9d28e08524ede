"""Tests of the delivery check on cubes whose noise varies across the field (primary-beam correction).

The noise of a primary-beam-corrected image is the flat noise of the
interferometer divided by the primary-beam response, so it rises from the
pointing centre towards the edge of the field (common practice). Test cubes
are made that way: flat noise (white, or correlated over a beam as
interferometers make it) divided by a Gaussian primary beam, blanked below a
response cut as deliveries usually are.
"""

import json

import astropy.units as u
import numpy as np
import pytest
from astropy.tests.helper import assert_quantity_allclose
from scipy.ndimage import binary_erosion

from cubefactory import correlated_noise, frequency_axis_hz, primary_beam, write_cube
from cubeloupe.analysis import open_cube
from cubeloupe.analysis.check import cube_entry, cube_section, summary_dict, terminal_table
from cubeloupe.analysis.check import FALSE_ALARMS, check_cube, continuum_free_peaks
from cubeloupe.analysis.noise import channel_statistics
from cubeloupe.analysis.check import noise_scaled_extremes, spatial_noise

RMS = 1e-3  # the flat (uncorrected) noise, Jy/beam: the noise at the pointing centre


def _beam_reaching(cut, image_shape):
    """Gaussian primary beam whose response falls to ``cut`` half the smaller image side from the centre."""
    ny, nx = image_shape
    # exp(-4 ln 2 r^2 / F^2) = cut at r = min(ny, nx) / 2
    fwhm = (min(ny, nx) / 2) * np.sqrt(4 * np.log(2) / np.log(1 / cut))
    return primary_beam(image_shape, fwhm)


def _flat_noise(shape, rng, noise_fwhm):
    if noise_fwhm:
        return correlated_noise(shape, rng=rng, fwhm_pixels=noise_fwhm, rms=RMS)
    return rng.normal(0.0, RMS, shape)


def _pbcor(flat, beam, cut):
    """Primary-beam correction as deliveries have it: divided by the response, blanked below ``cut``."""
    data = flat / beam
    if cut is not None:
        data[:, beam < cut] = np.nan
    return data


def _injected_edge_to_centre(beam, cut):
    """The injected noise rise: median of 1 / beam along the outermost pixels with data, over its lowest value."""
    has_data = beam >= cut if cut is not None else np.ones(beam.shape, dtype=bool)
    edge = has_data & ~binary_erosion(has_data, border_value=0)
    rise = 1 / beam
    return float(np.median(rise[edge]) / rise[has_data].min())


# --------------------------------------------------------------------------- pure noise


@pytest.mark.parametrize("shape, noise_fwhm, cut, seed", [
    ((120, 96, 96), 4.0, 0.2, 1),    # noise correlated over a 4-pixel beam, blanked at 20 % response
    ((200, 64, 64), 0.0, 0.3, 2),    # white noise
    ((80, 128, 128), 3.0, 0.2, 3),
    ((100, 80, 112), 2.5, 0.5, 4),   # a rectangular field, cut at half power
])
def test_pure_noise_pbcor_cube_gives_no_detection_and_reports_the_noise_rise(tmp_path, shape, noise_fwhm, cut,
                                                                            seed):
    rng = np.random.default_rng(seed)
    beam = _beam_reaching(cut, shape[1:])
    path = write_cube(tmp_path / "pbcor.fits", _pbcor(_flat_noise(shape, rng, noise_fwhm), beam, cut))
    result = check_cube(open_cube(path))
    lines, noise = result.lines, result.noise
    assert lines.features == () and result.strongest is None
    assert lines.expected_noise_peaks <= FALSE_ALARMS * 1.0001

    spatial = noise.spatial
    assert spatial.varies and spatial.primary_beam_corrected
    # the noise rise injected through the primary beam (common practice: pbcor noise = flat noise / response)
    assert spatial.edge_to_centre == pytest.approx(_injected_edge_to_centre(beam, cut), rel=0.10)
    assert any("primary-beam-corrected" in note for note in result.warnings)
    assert noise.varies_in_line_free_channels  # the same rise in the line-free channels alone
    # the channel rms is that of the centre: the injected flat noise, not a blend with the noisy edge
    assert_quantity_allclose(noise.cube_rms, RMS * u.Jy / u.beam, rtol=0.10)
    assert "centre" in noise.rms_region
    # What the noise map prevents: against the centre's rms, the raw peaks at the noisy edge
    # stand far above the threshold applied.
    raw = continuum_free_peaks(open_cube(path)).peaks
    assert np.nanmax((raw / noise.channel_rms).to_value(u.one)) > 1.5 * lines.effective_threshold


def test_pbcor_cube_without_blanking(tmp_path):
    """A square pbcor field kept to its corners: the noise rises fastest there."""
    rng = np.random.default_rng(7)
    shape, cut = (120, 80, 80), 0.3
    beam = _beam_reaching(cut, shape[1:])   # 0.3 at the edge midpoints, lower in the corners
    path = write_cube(tmp_path / "square.fits", _pbcor(_flat_noise(shape, rng, 3.0), beam, None))
    result = check_cube(open_cube(path))
    assert result.lines.features == ()
    spatial = result.noise.spatial
    assert spatial.primary_beam_corrected
    assert spatial.edge_to_centre == pytest.approx(_injected_edge_to_centre(beam, None), rel=0.10)
    # the corners hold the injected maximum, 1 / beam there
    assert spatial.highest == pytest.approx(1 / beam.min(), rel=0.15)


def test_noise_map_follows_the_injected_primary_beam(tmp_path):
    rng = np.random.default_rng(12)
    shape, cut = (150, 96, 96), 0.2
    beam = _beam_reaching(cut, shape[1:])
    path = write_cube(tmp_path / "map.fits", _pbcor(_flat_noise(shape, rng, 4.0), beam, cut))
    result = check_cube(open_cube(path))
    spatial = result.noise.spatial
    relative = spatial.relative
    has_data = beam >= cut
    assert np.array_equal(np.isfinite(relative), has_data)
    injected = (1 / beam) / (1 / beam[has_data]).min()
    # within 10 % everywhere, out to the blanking edge where the rise is steepest ...
    np.testing.assert_allclose(relative[has_data], injected[has_data], rtol=0.10)
    # ... and within 4 of its own standard errors (of the pixel's value and of the quietest part's)
    error = np.hypot(spatial.relative_error, spatial.relative_error[spatial.quietest])
    deviation = np.abs(np.log(relative / injected))
    assert np.all(deviation[has_data] <= 4 * error[has_data])
    # the typical noise of each pixel, in the cube's unit
    assert_quantity_allclose(np.nanmedian(result.noise.noise_map / (RMS / beam * u.Jy / u.beam)), 1.0, rtol=0.05)


# --------------------------------------------------------------------------- lines in a pbcor field


def _line(shape, peak, channel, centre, sigma_pixels=2.0, width_channels=3.0):
    """A Gaussian line on a circular Gaussian source, ``peak`` at ``centre`` (y, x) in ``channel``."""
    n, ny, nx = shape
    y, x = np.mgrid[0:ny, 0:nx]
    blob = np.exp(-0.5 * ((y - centre[0]) ** 2 + (x - centre[1]) ** 2) / sigma_pixels**2)
    profile = np.exp(-0.5 * ((np.arange(n) - channel) / width_channels) ** 2)
    return peak * profile[:, None, None] * blob[None]


def test_modest_line_near_the_centre_of_a_pbcor_cube_is_found(tmp_path):
    rng = np.random.default_rng(31)
    shape, cut = (160, 96, 96), 0.2
    beam = _beam_reaching(cut, shape[1:])
    flat = _flat_noise(shape, rng, 4.0)
    twin = check_cube(open_cube(write_cube(tmp_path / "twin.fits", _pbcor(flat, beam, cut))))
    effective = twin.lines.effective_threshold
    assert twin.lines.features == ()
    # 1.3 times the threshold on the sky, 4 pixels from the pointing centre, as the interferometer saw it
    channel, centre, peak = 70, (45.5, 51.5), 1.3 * effective * RMS
    sky = _line(shape, peak, channel, centre)
    result = check_cube(open_cube(write_cube(tmp_path / "line.fits", _pbcor(flat + sky, beam, cut))))
    features = result.lines.features
    assert len(features) == 1
    feature = features[0]
    assert feature.kind == "emission"
    assert abs(feature.frequency.to_value(u.Hz) - frequency_axis_hz(shape[0])[channel]) < 1e6  # within a channel
    assert abs(feature.position[0] - centre[0]) <= 3 and abs(feature.position[1] - centre[1]) <= 3
    # the primary-beam-corrected peak there, the injected value over the response
    injected = peak / beam[feature.position] * u.Jy / u.beam
    assert abs(feature.peak - injected) < 3 * feature.peak_error


def test_line_near_the_edge_keeps_its_own_signal_to_noise(tmp_path):
    """At the edge a pbcor line and its noise are both scaled up: its S/N is the one the interferometer saw."""
    rng = np.random.default_rng(32)
    shape, cut = (160, 96, 96), 0.2
    beam = _beam_reaching(cut, shape[1:])
    centre = (47.5, 84.0)  # response about 0.35 there
    channel, snr = 100, 12.0
    sky = _line(shape, snr * RMS, channel, centre)
    result = check_cube(open_cube(write_cube(tmp_path / "edge.fits",
                                             _pbcor(_flat_noise(shape, rng, 4.0) + sky, beam, cut))))
    assert 0.3 < beam[int(centre[0]), int(centre[1])] < 0.4
    features = result.lines.features
    assert len(features) == 1
    feature = features[0]
    assert abs(feature.channels.peak - channel) <= 1
    assert abs(feature.position[1] - centre[1]) <= 3
    # the injected 12 sigma plus the noise draw of the brightest of a few pixels
    assert feature.peak_snr == pytest.approx(snr, abs=3)
    # its error is the noise of that pixel, about three times the centre's
    assert feature.peak_error > 2.5 * result.noise.cube_rms


def test_emission_over_the_whole_field_is_told_apart_from_noise(tmp_path):
    """A bright line on a source filling the field lifts each pixel's noise estimate where it lies.

    The map may then vary (it does for this cube); the same map from the line-free channels
    alone does not, and the report says so. The line is still found.
    """
    rng = np.random.default_rng(44)
    shape = (200, 96, 96)
    channel = 100
    sky = _line(shape, 30 * RMS, channel, (47.5, 47.5), sigma_pixels=20.0, width_channels=8.0)
    result = check_cube(open_cube(write_cube(tmp_path / "wide.fits", _flat_noise(shape, rng, 0.0) + sky)))
    assert [abs(f.channels.peak - channel) <= 1 for f in result.lines.features] == [True]
    noise = result.noise
    if noise.spatial.varies:  # the injected noise is uniform: only the emission can make it vary
        assert noise.varies_in_line_free_channels is False
        assert any("from the line-free channels alone is flat" in note for note in result.warnings)
    else:
        assert noise.varies_in_line_free_channels is None


# --------------------------------------------------------------------------- uniform noise


def test_uniform_noise_is_reported_as_uniform_and_checked_as_before(tmp_path):
    rng = np.random.default_rng(41)
    shape = (120, 96, 96)
    path = write_cube(tmp_path / "flat.fits", _flat_noise(shape, rng, 4.0))
    result = check_cube(open_cube(path))
    spatial = result.noise.spatial
    assert not spatial.varies and not spatial.primary_beam_corrected
    assert spatial.edge_to_centre == pytest.approx(1.0, abs=0.05)  # no rise was injected
    assert result.noise.rms_region == "the whole field"
    # as before this change: the channel rms of a uniform field is noise.py's over the check's
    # grid of pixels (every pixel of a 96 x 96 field, at most 2**14 of them)
    stats = channel_statistics(open_cube(path), max_pixels=2**14)
    assert_quantity_allclose(result.noise.plain_rms, stats.rms, rtol=1e-6)


def test_scaled_extremes_with_a_flat_map_agree_with_the_first_pass(tmp_path):
    """Two strategies, one answer: per-channel extremes by whole spectra and by whole channel images."""
    rng = np.random.default_rng(42)
    data = _flat_noise((60, 40, 48), rng, 3.0)
    data[:, :3, :] = np.nan          # blank spectra, as outside a primary-beam cutoff
    data[7, 10:20, 5:9] = np.nan     # and a few blank pixels in one channel
    cube = open_cube(write_cube(tmp_path / "two.fits", data))
    spectra = continuum_free_peaks(cube)
    ones = np.where(np.isnan(data).all(axis=0), np.nan, 1.0)
    scaled = noise_scaled_extremes(cube, spectra.continuum_level, ones)
    assert_quantity_allclose(scaled.peaks, spectra.peaks, rtol=1e-6)
    assert_quantity_allclose(scaled.troughs, spectra.troughs, rtol=1e-6)
    np.testing.assert_array_equal(scaled.positions, spectra.positions)
    np.testing.assert_array_equal(scaled.trough_positions, spectra.trough_positions)
    # the peak and trough of each channel are those of numpy over the data less the level
    residual = data - spectra.continuum_level.value[None]
    np.testing.assert_allclose(spectra.peaks.value, np.nanmax(residual, axis=(1, 2)), rtol=1e-6)
    np.testing.assert_allclose(spectra.troughs.value, np.nanmin(residual, axis=(1, 2)), rtol=1e-6)
    # and with a flat map the rms is noise.py's robust rms over the same pixels
    assert_quantity_allclose(scaled.grid.plain_rms * scaled.rms.unit, channel_statistics(cube).rms, rtol=1e-5)


# --------------------------------------------------------------------------- the noise map on its own


def test_spatial_noise_of_a_one_sided_gradient_varies_but_is_not_pbcor():
    rng = np.random.default_rng(51)
    x = np.arange(128)[None, :] * np.ones((96, 1))
    rise = np.exp(np.log(2.0) * x / 127)  # the noise doubles from left to right
    found = spatial_noise(rise * rng.normal(1.0, 0.15, rise.shape))
    assert found.varies and not found.primary_beam_corrected
    assert found.highest == pytest.approx(2.0, rel=0.05)       # injected
    assert found.quietest[1] <= 5                               # on the left edge


def test_spatial_noise_ignores_a_compact_source_and_stays_flat():
    """A source lifting the noise estimate of a few pixels moves no box median (Bertin & Arnouts 1996)."""
    rng = np.random.default_rng(52)
    noise = rng.normal(1.0, 0.15, (96, 96))
    noise[40:46, 50:56] *= 4.0  # a bright compact source filling part of one box
    found = spatial_noise(noise)
    assert not found.varies
    assert found.highest < 1.05


def test_spatial_noise_of_a_small_field_is_not_measured():
    found = spatial_noise(np.ones((12, 12)))
    assert not found.measured and not found.varies
    assert np.all(found.relative == 1.0)


# --------------------------------------------------------------------------- the report


def test_report_says_which_region_the_rms_describes_and_that_the_cube_looks_pbcor(tmp_path):
    rng = np.random.default_rng(61)
    shape, cut = (100, 80, 80), 0.2
    beam = _beam_reaching(cut, shape[1:])
    path = write_cube(tmp_path / "report.fits", _pbcor(_flat_noise(shape, rng, 3.0), beam, cut))
    result = check_cube(open_cube(path))
    entry = cube_entry(result)
    json.dumps(summary_dict([entry]), allow_nan=False)
    spatial = entry["noise"]["spatial"]
    assert spatial["varies"] and spatial["primary_beam_corrected"] and spatial["measured"]
    assert spatial["edge_to_centre"] == pytest.approx(_injected_edge_to_centre(beam, cut), rel=0.10)
    assert "centre" in entry["noise"]["rms_region"]
    page = cube_section(entry, result)
    assert "primary-beam corrected" in page and "edge/centre noise ratio" in page
    table = terminal_table(summary_dict([entry]))
    assert "(centre; edge x" in table


def test_noisier_edge_rows_of_a_small_field_make_no_detection(tmp_path):
    """Regression test for #13: a field too small for a noise map; its edge rows, 3x noisier, made 100 detections."""
    from small_field import small_field_cube

    path, velocity = small_field_cube(tmp_path / "edges.fits", np.random.default_rng(14))
    result = check_cube(open_cube(path))
    assert result.noise.spatial.per_pixel and not result.noise.spatial.measured
    # each pixel's own noise: the edge rows stand 3 times above the median pixel (injected)
    assert np.median(result.noise.spatial.relative[[0, -1]]) == pytest.approx(3.0, rel=0.15)
    found = [*result.lines.features, *result.lines.negative_features]
    assert all(f.position[0] not in (0, 19) for f in found)
    # only the three injected line groups (main line, +8 and -7 km/s), no absorption, no negative feature
    assert len(result.lines.features) == 3 and not result.lines.negative_features
    assert all(f.kind == "emission" for f in result.lines.features)
