"""Tests of the whole delivery check of one cube (analysis/check/cube_check.py; issue 8)."""

import json
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.tests.helper import assert_quantity_allclose

from cubefactory import C_KMS, correlated_noise, frequency_axis_hz, line_cube_data, write_cube, write_scaled_int_cube
from cubeloupe.analysis import PolarisationWarning, open_cube
from cubeloupe.analysis.check import cube_entry, summary_dict
from cubeloupe.analysis.check import FALSE_ALARMS, check_cube
from cubeloupe.analysis.errors import MissingUnitWarning

from two_lines import CDELT3, CI21, CO76, CRVAL3, NCHAN, Z




def _line_cube(tmp_path, rng, *, lines=(), name="lines.fits", noise=1e-3, shape=(NCHAN, 32, 32), **kw):
    data = line_cube_data(shape, rng=rng, noise_rms=noise, lines=lines, crval3=CRVAL3, cdelt3=CDELT3, **kw)
    return write_cube(tmp_path / name, data, crval3=CRVAL3, cdelt3=CDELT3, restfrq=CO76 / (1 + Z))


def _two_lines(noise=1e-3, snr=(12.0, 8.0)):
    """CO 7-6 and [CI] 2-1 at z=2, peaks ``snr`` times the noise, sigma 40 MHz (about 45 km/s)."""
    return [(CO76 / (1 + Z), snr[0] * noise, 40e6), (CI21 / (1 + Z), snr[1] * noise, 40e6)]


@pytest.fixture(scope="module")
def two_line_check(tmp_path_factory):
    rng = np.random.default_rng(8)
    path = _line_cube(tmp_path_factory.mktemp("two"), rng, lines=_two_lines())
    return check_cube(open_cube(path), z=Z), check_cube(open_cube(path), z=None)


def test_rms_recovered_within_ten_percent(two_line_check):
    with_z, _ = two_line_check
    # injected white noise of rms 1 mJy/beam; the issue asks for 10 %
    assert_quantity_allclose(with_z.noise.cube_rms, 1e-3 * u.Jy / u.beam, rtol=0.10)
    assert_quantity_allclose(np.nanmedian(with_z.noise.channel_rms), 1e-3 * u.Jy / u.beam, rtol=0.10)
    assert with_z.noise.flagged.size == 0


def test_injected_lines_detected_at_their_frequency_and_identified(two_line_check):
    with_z, _ = two_line_check
    features = with_z.lines.features
    assert len(features) == 2
    # strongest first: CO 7-6 (12 sigma) then [CI] 2-1 (8 sigma), at f_rest / (1 + z)
    expected = [("CO J=7-6", CO76 / (1 + Z)), ("[CI] 3P2-3P1", CI21 / (1 + Z))]
    for feature, (name, freq) in zip(features, expected):
        assert abs(feature.frequency.to_value(u.Hz) - freq) < abs(CDELT3), "within one channel"
        assert feature.peak_snr >= 5
        assert feature.candidates[0].name == name
        assert abs(feature.candidates[0].velocity_offset.to_value(u.km / u.s)) < 10
    assert {e.name: e.detected for e in with_z.lines.expected} == {"CO J=7-6": True, "[CI] 3P2-3P1": True}


def test_peak_snr_matches_the_injected_peak_over_noise(two_line_check):
    with_z, _ = two_line_check
    # the peak channel holds the 12-sigma line peak plus a noise draw of the brightest pixel
    assert with_z.lines.features[0].peak_snr == pytest.approx(12, abs=3)


def test_two_lines_without_z_offer_the_redshift_but_do_not_solve_it(two_line_check):
    """Regression test for #13: two lines fit many catalog pairs equally well; z is an option, not a solution."""
    _, without_z = two_line_check
    assert without_z.lines.solved_z is None
    assert "redshift not constrained" in without_z.lines.redshift_note
    # the pair at z = 2 is among the redshifts offered (2e-4 in z is 20 km/s at z = 2)
    assert any(z == pytest.approx(Z, abs=2e-4) and set(lines) == {"CO J=7-6", "[CI] 3P2-3P1"}
               for z, lines in without_z.lines.redshift_options), without_z.lines.redshift_options
    assert without_z.lines.expected == ()


def test_strongest_feature_moment_map_peaks_on_the_source(two_line_check):
    with_z, _ = two_line_check
    strongest = with_z.strongest
    assert strongest is not None
    # the injected source is centred at (15.5, 15.5) in a 32 x 32 image
    assert all(abs(p - 15.5) <= 1.5 for p in strongest.position)
    assert strongest.moment0.unit.is_equivalent(u.Jy / u.beam * u.km / u.s)
    assert len(strongest.spectrum) == NCHAN


def test_pure_noise_cube_has_no_detection(tmp_path, rng):
    path = _line_cube(tmp_path, rng, name="noise.fits")
    result = check_cube(open_cube(path), z=Z)
    assert result.lines.features == ()
    assert result.strongest is None
    assert result.continuum is not None and abs(result.continuum.peak_significance) < 6
    assert_quantity_allclose(result.noise.cube_rms, 1e-3 * u.Jy / u.beam, rtol=0.10)
    # the two catalog lines are still listed as expected at z, but not detected
    assert [(e.name, e.detected) for e in result.lines.expected] == [("CO J=7-6", False), ("[CI] 3P2-3P1", False)]


def test_robust_rms_matches_std_of_gaussian_noise(tmp_path, rng):
    # For Gaussian noise 1.4826 x MAD estimates sigma (common practice); 5 % asked by the issue.
    data = rng.normal(0, 2.5e-3, size=(40, 48, 48))
    result = check_cube(open_cube(write_cube(tmp_path / "g.fits", data)))
    assert_quantity_allclose(result.noise.cube_rms, np.std(data) * u.Jy / u.beam, rtol=0.05)
    assert_quantity_allclose(result.noise.channel_rms, np.std(data, axis=(1, 2)) * u.Jy / u.beam, rtol=0.05)


def test_leftover_continuum_is_found_and_lines_are_kept_out_of_it(tmp_path, rng):
    # 0.8 mJy/beam of continuum on the source under bright lines: the line channels must not
    # enter the line-free mean, else it would be far above 0.8 mJy/beam
    path = _line_cube(tmp_path, rng, lines=_two_lines(snr=(40, 30)), continuum=0.8e-3, source_sigma_pixels=3)
    result = check_cube(open_cube(path), z=Z)
    cont = result.continuum
    assert cont.peak_significance > 5
    assert_quantity_allclose(cont.peak, 0.8e-3 * u.Jy / u.beam, atol=0.3e-3 * u.Jy / u.beam)
    for feature in result.lines.features:
        assert not cont.line_free[feature.channels.first:feature.channels.last + 1].any()
    assert any("leftover continuum" in note for note in result.warnings)


def test_noisy_and_blanked_channels_are_flagged(tmp_path, rng):
    data = rng.normal(0, 1e-3, size=(60, 32, 32))
    data[10] *= 3.0
    data[40] = np.nan
    data[41, :8, :] = np.nan
    result = check_cube(open_cube(write_cube(tmp_path / "flag.fits", data)))
    assert list(result.noise.flagged) == [10, 40]
    assert result.header.blanked_fraction[40] == 1.0
    assert result.header.blanked_fraction[41] == pytest.approx(0.25)
    assert result.header.blanked_fraction[0] == 0.0
    assert result.lines.features == ()


def test_velocity_axis_without_rest_frequency_still_gives_noise(tmp_path, rng):
    data = rng.normal(0, 1e-3, size=(30, 16, 16))
    path = write_cube(tmp_path / "vrad.fits", data, spectral="VRAD", restfrq=None)
    result = check_cube(open_cube(path))
    assert result.header.frequency is None
    assert result.header.channel_width_velocity.to_value(u.km / u.s) == pytest.approx(1.3)
    assert_quantity_allclose(result.noise.cube_rms, 1e-3 * u.Jy / u.beam, rtol=0.1)
    assert any("RESTFRQ" in note for note in result.warnings)


def test_missing_unit_is_reported(tmp_path, rng):
    path = write_cube(tmp_path / "nounit.fits", rng.normal(size=(20, 16, 16)), bunit=None)
    with pytest.warns(MissingUnitWarning):
        cube = open_cube(path)
    result = check_cube(cube)
    entry = cube_entry(result)
    assert entry["rms"]["unit"] == ""


def test_json_entry_is_plain_json_with_the_issue_keys(two_line_check):
    with_z, _ = two_line_check
    text = json.dumps(summary_dict([cube_entry(with_z)], z=Z), allow_nan=False)
    cube = json.loads(text)["cubes"][0]
    assert cube["ok"] is True and cube["error"] is None
    assert cube["rms"]["unit"] == "Jy / beam"
    assert cube["detections"][0]["candidates"][0]["name"] == "CO J=7-6"
    assert cube["detections"][0]["frequency_ghz"] == pytest.approx(CO76 / (1 + Z) / 1e9, abs=0.008)


# the speed of light in km/s (CODATA 2018, through astropy)
C = C_KMS * u.km / u.s


def _injected(truth):
    """(catalog name, observed frequency, redshift of the line) of every injected line or line component.

    Components with their own velocity (radio convention relative to the rest
    frequency at the sidecar's z) stand for themselves; a line without them
    is at its observed frequency.
    """
    rows = []
    for line in truth["lines"]:
        name = line["catalog_name"]
        rest = line["rest_frequency"].to(u.GHz) / (1 + truth["z"])
        components = [c.get("velocity", c.get("velocity_at_centre")) for c in line.get("components", [])]
        components = [v for v in components if v is not None]
        # radio convention f = f_rest (1 - v / c) (Greisen et al. 2006, A&A 446, 747)
        centres = [(rest * (1 - v / C)).to(u.GHz) for v in components] or [line["observed_frequency"].to(u.GHz)]
        reference = line.get("observed_frequency", centres[0]).to(u.GHz)
        z_line = (1 + truth["z"]) * float((rest / reference).decompose()) - 1
        rows.extend((name, centre, z_line) for centre in centres)
    return rows


@pytest.fixture(scope="module")
def demo_checks():
    from cubeloupe.analysis.demo import demo_names, demo_path, demo_truth

    results = {}
    for name in demo_names():
        truth = demo_truth(name)
        # the redshift a user would type: the one that puts the (first) line where it was injected
        z_line = _injected(truth)[0][2]
        results[name] = (truth, check_cube(open_cube(demo_path(name)), z=z_line))
    return results


def test_demo_cubes_rms_within_ten_percent(demo_checks):
    for name, (truth, result) in demo_checks.items():
        # the generator scales its noise to this rms per channel (sidecar "rms")
        assert_quantity_allclose(result.noise.cube_rms, truth["rms"], rtol=0.10, err_msg=name)


def _plain_peak_snr(name, frequency, centres, centre):
    """A line's peak S/N worked out with numpy alone, at the pixel where all the injected lines are brightest.

    The pixel: the maximum of the sum of the channel images within a channel of every injected line
    (less each pixel's median); there, the highest of the line's three channels less the pixel's
    median, over the pixel's standard deviation on channels more than 10 channels from every line.
    """
    from cubeloupe.analysis.demo import demo_path

    data = np.squeeze(fits.getdata(demo_path(name))).astype(float)
    data = data - np.nanmedian(data, axis=0)
    near = np.zeros(len(frequency), dtype=bool)
    far = np.ones(len(frequency), dtype=bool)
    for f in centres:
        k = int(np.argmin(np.abs(frequency - f)))
        near[max(0, k - 1):k + 2] = True
        far[max(0, k - 10):k + 11] = False
    y, x = np.unravel_index(np.nanargmax(np.nansum(data[near], axis=0)), data.shape[1:])
    k = int(np.argmin(np.abs(frequency - centre)))
    return float(np.nanmax(data[max(0, k - 1):k + 2, y, x]) / np.nanstd(data[far, y, x]))


def test_demo_cubes_injected_lines_detected_and_identified(demo_checks):
    for name, (truth, result) in demo_checks.items():
        frequency = result.header.frequency.to(u.GHz)
        spacing = np.median(np.abs(np.diff(frequency)))
        for line_name, centre, _ in _injected(truth):
            # a line injected at the detection limit (one sigma of it) is found or not by chance
            centres = [c for _, c, _ in _injected(truth)]
            if _plain_peak_snr(name, frequency, centres, centre) < result.lines.effective_threshold + 1:
                continue
            # a detection whose channels (give or take one) cover the injected frequency
            hits = [f for f in result.lines.features
                    if min(frequency[f.channels.first], frequency[f.channels.last]) - spacing <= centre
                    <= max(frequency[f.channels.first], frequency[f.channels.last]) + spacing]
            assert hits, f"{name}: {line_name} at {centre:.5f} not detected"
            # among the first three: the components of a rotating disk lie +-100 km/s from the systemic
            # velocity given as z, where another catalog line may lie nearer (candidates come nearest first)
            assert any(line_name in [c.name for c in f.candidates[:3]] for f in hits), \
                f"{name}: {line_name} detected but identified as {[c.name for f in hits for c in f.candidates]}"


def test_demo_cubes_have_no_detection_away_from_injected_lines(demo_checks):
    for name, (truth, result) in demo_checks.items():
        centres = u.Quantity([c for _, c, _ in _injected(truth)])
        for feature in result.lines.features:
            offset = (C * np.abs(feature.frequency - centres) / centres).to(u.km / u.s)
            # the widest injected line (rotating disk, lensed galaxy) spans about +-300 km/s
            assert offset.min() < 600 * u.km / u.s, f"{name}: spurious detection at {feature.frequency:.5f}"


def test_demo_cube_with_continuum_reports_it(demo_checks):
    truth, result = demo_checks["lensed_spw1"]
    assert truth["continuum"]["flux_density"] > 0 * u.Jy
    assert result.continuum.peak_significance > 5
    # the continuum at the window centre is 10.5 mJy spread over the lensed arcs: a positive mean
    assert result.continuum.peak > 0 * u.Jy / u.beam


@pytest.mark.parametrize("shape, fwhm, seed", [
    ((250, 32, 32), 0.0, 1),     # white noise under a 4-pixel header beam
    ((200, 64, 64), 0.0, 2),
    ((120, 64, 64), 4.0, 3),     # noise correlated over the beam, as interferometers make it
    ((60, 100, 100), 2.5, 4),
])
def test_pure_noise_cubes_of_several_sizes_give_no_detection(tmp_path, shape, fwhm, seed):
    rng = np.random.default_rng(seed)
    data = 1e-3 * (correlated_noise(shape, rng=rng, fwhm_pixels=fwhm) if fwhm else rng.standard_normal(shape))
    result = check_cube(open_cube(write_cube(tmp_path / "noise.fits", data)))
    lines = result.lines
    assert lines.features == () and result.strongest is None
    assert lines.effective_threshold >= 5.0
    assert lines.expected_noise_peaks <= FALSE_ALARMS * 1.0001
    raised = lines.expected_noise_peaks_at_threshold > FALSE_ALARMS
    assert (lines.effective_threshold > 5.0) == raised
    assert any("threshold raised" in note for note in result.warnings) == raised


def test_pure_noise_detections_match_the_expected_false_alarm_count(tmp_path):
    """End to end: asking for 3 noise peaks per cube gives about 3, counted over 12 noise cubes.

    The expected Euler characteristic (Worsley et al. 1996) slightly overestimates the peaks of
    a field sampled at 4 pixels per FWHM (see the test of expected_noise_peaks): between half
    and 1.3 times the count asked for, with Poisson scatter (sqrt(36) = 6).
    """
    counts = []
    for seed in range(12):
        rng = np.random.default_rng(100 + seed)
        data = correlated_noise((100, 48, 48), rng=rng, fwhm_pixels=4.0)
        result = check_cube(open_cube(write_cube(tmp_path / f"n{seed}.fits", data)), threshold=1.0,
                            false_alarms=3.0)
        # both signs share the allowance; dips of pure noise are negative features (no continuum)
        counts.append(len(result.lines.features) + len(result.lines.negative_features))
        assert result.lines.effective_threshold > 4.0
    assert 0.5 * 36 <= sum(counts) <= 1.3 * 36, counts


def test_line_above_the_effective_threshold_is_found(tmp_path):
    rng = np.random.default_rng(21)
    shape, noise = (200, 64, 64), 1e-3
    twin = check_cube(open_cube(write_cube(tmp_path / "twin.fits", rng.normal(0, noise, shape))))
    effective = twin.lines.effective_threshold
    assert effective > 5.0
    # A line at 1.1 times the raised threshold on a 4-pixel source: the source lifts the MAD of its
    # channels by a few per cent (Hampel 1974), so 10 % of margin keeps its peak S/N above the threshold.
    centre = frequency_axis_hz(200)[120]
    data = line_cube_data(shape, rng=rng, noise_rms=noise, lines=[(centre, 1.1 * effective * noise, 3e6)],
                          source_sigma_pixels=4.0)
    result = check_cube(open_cube(write_cube(tmp_path / "line.fits", data)))
    assert result.lines.effective_threshold == pytest.approx(effective, abs=0.1)
    assert len(result.lines.features) == 1
    assert abs(result.lines.features[0].frequency.to_value(u.Hz) - centre) < 1e6  # within a channel
    # and with the false-alarm control off, the asked threshold is applied as it is
    plain = check_cube(open_cube(write_cube(tmp_path / "line2.fits", data)), false_alarms=None)
    assert plain.lines.effective_threshold == 5.0


def test_large_beam_correlated_noise_cube_gives_no_detection_but_keeps_its_line(tmp_path):
    """A 105 MB cube (256 x 256 x 400) of noise correlated over a 4-pixel beam, without and with a line."""
    rng = np.random.default_rng(5)
    shape, noise = (400, 256, 256), 1e-3
    data = correlated_noise(shape, rng=rng, fwhm_pixels=4.0, rms=noise)
    # header beam 1" on 0.25" pixels: 4 pixels FWHM, as the noise
    result = check_cube(open_cube(write_cube(tmp_path / "big.fits", data)))
    assert result.lines.features == ()
    assert_quantity_allclose(result.noise.cube_rms, noise * u.Jy / u.beam, rtol=0.05)
    effective = result.lines.effective_threshold
    assert effective > 5.5  # 400 channels of 4000 beams each
    # the same noise with a line of 1.1 times the threshold on a compact source
    centre = frequency_axis_hz(400)[250]
    freq = frequency_axis_hz(400)
    y, x = np.mgrid[0:256, 0:256]
    blob = np.exp(-0.5 * ((y - 100) ** 2 + (x - 140) ** 2) / 3.0**2)
    data += (1.1 * effective * noise * np.exp(-0.5 * ((freq - centre) / 3e6) ** 2))[:, None, None] * blob
    found = check_cube(open_cube(write_cube(tmp_path / "big_line.fits", data)))
    assert len(found.lines.features) == 1
    feature = found.lines.features[0]
    assert abs(feature.channels.peak - 250) <= 1
    assert abs(feature.position[0] - 100) <= 3 and abs(feature.position[1] - 140) <= 3


def test_report_states_the_threshold_applied_and_the_velocity_reference(two_line_check):
    with_z, _ = two_line_check
    entry = cube_entry(with_z)
    lines = entry["lines"]
    assert lines["threshold_snr"] == 5.0
    assert lines["effective_threshold_snr"] >= 5.0
    assert lines["false_alarms"] == FALSE_ALARMS
    assert lines["expected_noise_peaks"] <= FALSE_ALARMS * 1.0001
    assert "LSRK" in lines["velocity_reference"] and "z" in lines["velocity_reference"]
    json.dumps(entry, allow_nan=False)


# --------------------------------------------------------------------------- real observed cubes (issue 13)

REAL = Path(__file__).resolve().parents[3].parent / "shared" / "real-cubes"
needs_real = pytest.mark.skipif(not REAL.is_dir(), reason=f"real observed cubes not available ({REAL} is absent; "
                                                            "see issue 13)")


@needs_real
def test_real_interferometer_cube_co10_of_a_nearby_spiral():
    """co10_ngc4047_carma.fits (SOURCES.md): what an observer sees, worked out with numpy below.

    One CO J=1-0 line, 3260-3540 km/s (channels 14-28 brighter than 0.2 Jy/beam somewhere), a rotating
    disk near the centre; the noise at the centre about 0.013 Jy/beam (the header's RMS keyword says
    0.0131), rising towards the edge (primary-beam corrected); no absorption, one line: no redshift.
    """
    path = REAL / "co10_ngc4047_carma.fits"
    data = np.squeeze(fits.getdata(path)).astype(float)
    velocity = 2980 + 20 * np.arange(data.shape[0])  # CRVAL3 2980 km/s, CDELT3 20 km/s, CRPIX3 1 (header)
    bright = np.flatnonzero(np.nanmax(data, axis=(1, 2)) > 0.2)
    centre = data[:, 44:84, 44:84]
    free = np.r_[0:10, 34:44]
    rms = 1.4826 * np.nanmedian(np.abs(centre[free] - np.nanmedian(centre[free])))
    result = check_cube(open_cube(path))
    assert_quantity_allclose(result.noise.cube_rms, rms * u.Jy / u.beam, rtol=0.25)
    assert len(result.lines.features) == 1 and not result.lines.negative_features
    line = result.lines.features[0]
    assert line.kind == "emission" and line.candidates[0].name == "CO J=1-0"
    assert velocity[bright[0]] - 40 <= line.velocity.to_value(u.km / u.s) <= velocity[bright[-1]] + 40
    assert result.lines.solved_z is None
    assert result.noise.spatial.primary_beam_corrected


@needs_real
def test_real_single_dish_cube_13co_filling_the_band():
    """l1448_13co.fits (SOURCES.md): what an observer sees, worked out with numpy below.

    13CO emission over most of the field and in every channel of the 2.5-6.0 km/s band (the mean over
    the field peaks near 4.3 km/s); the noise from the differences of neighbouring channels about
    0.15 K; no rest frequency: the line is reported in km/s; no continuum, so no absorption.
    """
    path = REAL / "l1448_13co.fits"
    header = fits.getheader(path)
    data = fits.getdata(path).astype(float)
    velocity = (header["CRVAL3"] + (np.arange(data.shape[0]) + 1 - header["CRPIX3"]) * header["CDELT3"]) / 1e3
    mean_peak = velocity[np.argmax(np.nanmean(data, axis=(1, 2)))]
    steps = np.diff(data, axis=0) / np.sqrt(2)
    rms = 1.4826 * np.median(np.abs(steps - np.median(steps)))
    with pytest.warns(MissingUnitWarning, match="no BUNIT"):
        cube = open_cube(path)
    result = check_cube(cube)
    assert result.noise.cube_rms.value == pytest.approx(rms, rel=0.25)
    assert len(result.lines.features) == 1
    line = result.lines.features[0]
    assert line.kind == "emission" and line.frequency is None
    assert abs(line.velocity.to_value(u.km / u.s) - mean_peak) < 0.5
    assert not result.lines.negative_features and not result.noise.flagged.size
    assert result.continuum is None or abs(result.continuum.peak_significance) < 5


def test_integer_cube_is_checked_as_its_float_copy(tmp_path):
    """Issue 13: a BITPIX 16 cube (BSCALE/BZERO/BLANK) is checked like the float cube of the same values.

    physical = BZERO + BSCALE * stored, BLANK -> undefined (FITS standard 3.0, Pence et al. 2010, A&A 524,
    A42, Sect. 4.4.2.5 and 5.3): the float copy written from those values is the reference.
    """
    rng = np.random.default_rng(16)
    data = line_cube_data((NCHAN, 32, 32), rng=rng, noise_rms=1e-3, lines=_two_lines(), crval3=CRVAL3,
                          cdelt3=CDELT3)
    data[:, :, :3] = np.nan  # a blanked border, stored as BLANK
    header = dict(crval3=CRVAL3, cdelt3=CDELT3, restfrq=CO76 / (1 + Z))
    path, values = write_scaled_int_cube(tmp_path / "int16.fits", data, bzero=1e-4, **header)
    integer = check_cube(open_cube(path), z=Z)
    plain = check_cube(open_cube(write_cube(tmp_path / "float.fits", values, **header)), z=Z)
    assert_quantity_allclose(integer.noise.channel_rms, plain.noise.channel_rms, rtol=1e-5)
    # the same channels; the S/N equal to float32 rounding (the float copy rounds the values once more)
    spans = [[(f.channels.first, f.channels.last, f.channels.peak) for f in check.lines.features]
             for check in (integer, plain)]
    assert spans[0] == spans[1] and len(spans[0]) == 2
    np.testing.assert_allclose([f.channels.peak_snr for f in integer.lines.features],
                               [f.channels.peak_snr for f in plain.lines.features], rtol=1e-5)
    assert [f.candidates[0].name for f in integer.lines.features] == ["CO J=7-6", "[CI] 3P2-3P1"]
    assert integer.strongest.position == plain.strongest.position
    assert_quantity_allclose(integer.header.blanked_fraction, plain.header.blanked_fraction)


def test_lone_stokes_q_plane_is_checked_and_named(tmp_path):
    """Issue 13: the check of a Stokes Q delivery says so and still pictures its strongest feature."""
    rng = np.random.default_rng(17)
    data = line_cube_data((NCHAN, 32, 32), rng=rng, noise_rms=1e-3, lines=_two_lines(), crval3=CRVAL3,
                          cdelt3=CDELT3)
    # CRVAL4 = 2 on a STOKES axis is Q (Greisen & Calabretta 2002, A&A 395, 1061, Table 7)
    path = write_cube(tmp_path / "q.fits", data, crval3=CRVAL3, cdelt3=CDELT3, restfrq=CO76 / (1 + Z), stokes=True,
                      extra={"CRVAL4": 2.0})
    with pytest.warns(PolarisationWarning):
        result = check_cube(open_cube(path), z=Z)
    assert any("Stokes Q" in note for note in result.warnings)
    assert result.strongest is not None  # the plane's own map, named as Q by the note above
    assert len(result.lines.features) == 2
