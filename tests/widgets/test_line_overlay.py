"""LineOverlay: catalog markers at z, filters, redshift input and candidates.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis.catalog import lines_in_band
from cubeloupe.widgets import Loupe


def test_markers_sit_at_rest_over_one_plus_z(cube_path, rng):
    # 1 MHz channels from 230.538 GHz down: CO J=4-3 (461.0408 GHz, CDMS, from memory) is here at z ~ 1.0
    loupe = Loupe(cube_path(rng.normal(size=(400, 6, 6))), z=1.0, first_view=False)
    overlay = loupe.line_overlay
    for z in (1.0, 1.0001, 0.9995):
        loupe.z = z
        # the band searched is padded by the slider's reach, 1500 km/s: a factor 1 + 1500 / c
        pad = 1 + overlay.velocity_range / 299792.458
        # by default the bright families, each hyperfine group as one marker
        lines = lines_in_band(230.139 / pad * u.GHz, 230.538 * pad * u.GHz, z, loupe.catalog,
                              family=overlay.families, group_hyperfine=True)
        assert list(overlay.lines["name"]) == list(lines["name"])
        expected = u.Quantity(lines["rest_frequency"], u.GHz).value / (1 + z)
        assert_allclose(overlay.marker_x, expected, rtol=1e-12)
        # only markers inside the drawn band are drawn (at z = 0.9995 CO J=4-3 sits above the band)
        lo, hi = loupe.spectrum_view.x_range
        inside = (expected >= lo) & (expected <= hi)
        assert_allclose(overlay.heads.x, expected[inside], rtol=1e-12)
        assert list(overlay.heads.names) == list(np.asarray(lines["name"])[inside])
    # the typed redshift field drives z
    overlay.z_input.value = "1.0002"
    assert loupe.z == 1.0002
    # a systemic shift of +100 km/s (radio): f = f_ref (1 - v/c) (Greisen et al. 2006)
    loupe.velocity_offset = 100.0
    assert_allclose(overlay.marker_x, expected * 0 + u.Quantity(overlay.lines["rest_frequency"], u.GHz).value
                    / 2.0002 * (1 - 100 / 299792.458), rtol=1e-12)
    # hover shows rest frequency, E_up, spin isomer and provenance
    text = overlay.hover(0)
    row = overlay.lines[0]
    assert f"{u.Quantity(row['rest_frequency'], u.GHz).value:.6f}" in text
    assert "E_up" in text and str(row["spin_isomer"]) in text and str(row["provenance"])[:10] in text


def test_x_axis_spans_the_data_band_not_the_markers(cube_path, rng):
    """Regression: a line marker outside the band stretched the x axis (issue 4 review)."""
    # 400 channels of 1 MHz from 230.538 GHz down (the cube's header): band 230.139-230.538 GHz
    loupe = Loupe(cube_path(rng.normal(size=(400, 6, 6))), z=0.9995, first_view=False)
    view = loupe.spectrum_view
    span = 230.538 - 230.139
    expected = [230.139 - view.band_margin * span, 230.538 + view.band_margin * span]
    assert view.x_range == pytest.approx(expected, rel=1e-12)
    assert [view.x_scale.min, view.x_scale.max] == pytest.approx(expected, rel=1e-12)
    # CO J=4-3 (461.0408 GHz, CDMS, from memory) is at 230.578 GHz here: above the band, so not drawn
    co43 = 461.040768 / 1.9995
    assert any(abs(x - co43) < 1e-6 for x in loupe.line_overlay.marker_x)
    assert all(abs(x - co43) > 1e-3 for x in loupe.line_overlay.heads.x)
    # on a velocity axis the range is the band's velocities (radio, RESTFRQ 230.538 GHz, z = 0.9995)
    loupe.axis_kind = "velocity"
    c = 299792.458  # km/s
    v = sorted(c * (1 - f * 1.9995 / 230.538) for f in (230.139, 230.538))
    margin = view.band_margin * (v[1] - v[0])
    assert view.x_range == pytest.approx([v[0] - margin, v[1] + margin], rel=1e-9)


def test_energy_limit_is_blank_for_no_limit(loupe):
    overlay = loupe.line_overlay
    assert overlay.max_E_up is None and overlay.eup_input.value == "" and overlay.eup_input.placeholder
    shown = len(overlay.lines)
    overlay.eup_input.value = "20"
    assert overlay.max_E_up == 20.0
    # the filter is the catalog's: every line left has E_up/k <= 20 K
    assert all(u.Quantity(overlay.lines["E_up"], u.K).value <= 20)
    assert len(overlay.lines) <= shown
    overlay.eup_input.value = "lots"
    assert overlay.max_E_up == 20.0 and overlay.eup_input.value == "20" and overlay.status.level == "error"
    overlay.eup_input.value = " "
    assert overlay.max_E_up is None and len(overlay.lines) == shown
    # nothing picked means every species; picking and "All species" round-trip
    assert overlay.species == [] and "every species" in overlay._species_note.value
    overlay.species = ["CO"]
    assert overlay.species_choice.value == ("CO",) and set(overlay.lines["species"]) <= {"CO"}
    overlay.all_species_button.click()
    assert overlay.species == [] and overlay.species_choice.value == ()


def test_clip_level_is_blank_for_no_clipping(loupe):
    panel = loupe.moment_panel
    assert loupe.clip is None and panel.clip_input.value == ""
    panel.clip_input.value = "3"
    assert loupe.clip == 3.0
    panel.clip_input.value = "-1"
    assert loupe.clip == 3.0 and loupe.moment_panel.status.level == "error"
    loupe.clip = None
    assert panel.clip_input.value == ""


def test_systemic_velocity_puts_the_marker_on_the_line(cube_path, rng):
    # 100 channels of 4.88 MHz below 229.65 GHz; CO J=2-1 (230.538 GHz, CDMS, from memory) at +1462 km/s
    loupe = Loupe(cube_path(rng.normal(size=(100, 6, 6)), crval3=229.65e9, cdelt3=-4.8828125e6),
                  rest_frequency=230.538 * u.GHz, velocity_offset=1462 * u.km / u.s, first_view=False)
    assert loupe.velocity_offset == 1462.0
    assert loupe.line_overlay.velocity_slider.max >= 1462.0 >= loupe.line_overlay.velocity_slider.min
    # radio convention: f = f0 (1 - v/c) (Greisen et al. 2006, A&A 446, 747)
    expected = 230.538 * (1 - 1462 / 299792.458)
    names = list(loupe.line_overlay.heads.names)
    assert "CO J=2-1" in names
    assert loupe.line_overlay.heads.x[names.index("CO J=2-1")] == pytest.approx(expected, rel=1e-12)


def test_header_names_the_cube(loupe, line_cube):
    text = loupe.header.value
    # cubefactory: 60 channels of 24 x 28 pixels, 1 MHz channels, a 1" round beam, Jy/beam
    assert line_cube.name in text and "60 channels × 24 × 28 pixels" in text
    assert "1 MHz channels" in text and "beam 1.00″ × 1.00″" in text and "Jy/beam" in text


def test_bad_redshift_is_refused_with_a_message(loupe):
    loupe.line_overlay.z_input.value = "19"
    loupe.line_overlay.z_input.value = "50"
    assert loupe.z == 19.0
    assert loupe.line_overlay.status.level == "error" and "redshift" in loupe.line_overlay.status.message.lower()


def test_marked_peaks_offer_redshift_candidates(cube_path, rng):
    from cubeloupe.analysis.redshift_solver import redshift_candidates

    loupe = Loupe(cube_path(rng.normal(size=(4, 6, 6)), crval3=100e9, cdelt3=100e9 / 3),
                  z=0.0, first_view=False)
    # CO J=4-3 and J=5-4 (461.0408 and 576.2679 GHz, CDMS, from memory) at z = 2.5
    peaks = [461.040768 / 3.5, 576.267931 / 3.5]
    loupe.spectrum_view.mode = "peaks"
    for f in peaks:
        loupe.spectrum_view.click(f)
    assert loupe.peaks == pytest.approx(peaks)
    expected = redshift_candidates(np.array(peaks) * u.GHz, loupe.catalog)
    assert [c.z for c in loupe.line_overlay.candidates] == pytest.approx([c.z for c in expected])
    loupe.line_overlay.use_candidate_index(0)
    assert loupe.z == pytest.approx(expected[0].z)
