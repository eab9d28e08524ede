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


def _label_boxes(overlay):
    """(left, right, row, text) of every drawn label, widths as the overlay estimates them in pixels."""
    from cubeloupe.widgets.line_overlay import LABEL_CHAR_WIDTH

    low, high = overlay.view.x_range
    per_pixel = (high - low) / overlay.plot_width
    boxes = []
    for row, mark in enumerate(overlay.labels):
        for x, text in zip(np.asarray(mark.x, dtype=float), list(mark.text if mark.text is not None else [])):
            half = len(text) * LABEL_CHAR_WIDTH * per_pixel / 2
            boxes.append((x - half, x + half, row, str(text)))
    return boxes


def test_family_filter_hides_the_crowded_families_until_asked(cube_path, rng):
    from cubeloupe.analysis import LINE_FAMILIES

    # 1 MHz channels over 99.0-99.4 GHz: H/He/C recombination lines sit here (Rydberg formula), as do
    # complex organics; the default families are the bright ones
    loupe = Loupe(cube_path(rng.normal(size=(400, 4, 4)), crval3=99.0e9, cdelt3=1e6), first_view=False)
    overlay = loupe.line_overlay
    assert "recombination lines" not in overlay.families and "complex organics" not in overlay.families
    assert not set(overlay.lines["family"]) & {"recombination lines", "complex organics"}
    overlay.family_choice.value = tuple(LINE_FAMILIES)
    assert overlay.families == list(LINE_FAMILIES)
    shown = set(overlay.lines["family"])
    assert "recombination lines" in shown
    # picking a species shows it whatever the families (a user who asks for it wants to see it)
    overlay.families = ["CO and isotopologues"]
    species = sorted(set(loupe.catalog["species"][loupe.catalog["family"] == "recombination lines"]))[0]
    overlay.species = [species]
    assert len(overlay.lines) and set(overlay.lines["species"]) == {species}


def test_crowded_labels_never_overlap_and_stay_inside_the_axis(cube_path, rng):
    from cubeloupe.analysis import LINE_FAMILIES

    # 20-1010 GHz at z = 0: some two thousand catalog lines in view
    loupe = Loupe(cube_path(rng.normal(size=(100, 4, 4)), crval3=20e9, cdelt3=10e9), first_view=False)
    overlay = loupe.line_overlay
    overlay.families = list(LINE_FAMILIES)
    overlay.hyperfine_components = True
    assert len(overlay.shown_markers) > 1500
    boxes = _label_boxes(overlay)
    assert 0 < len(boxes) == len(overlay.labelled_markers) < len(overlay.shown_markers)
    low, high = loupe.spectrum_view.x_range
    for left, right, row, text in boxes:
        assert low - 1e-9 <= left and right <= high + 1e-9, text
    for i, (l1, r1, row1, t1) in enumerate(boxes):
        for l2, r2, row2, t2 in boxes[i + 1:]:
            assert row1 != row2 or r1 <= l2 or r2 <= l1, (t1, t2)
    # a label left out keeps its marker and its details
    unlabelled = sorted(set(overlay.shown_markers) - set(overlay.labelled_markers))[0]
    assert str(overlay.lines["name"][unlabelled]) in overlay.hover(unlabelled)
    assert str(overlay.lines["name"][unlabelled]) in list(overlay.heads.names)


def test_label_at_the_right_end_of_the_band_is_moved_inside(cube_path, rng):
    """Regression (closing note of #14-#20): the label of a marker near the right end was cut off."""
    # 0.5 MHz channels over 93.000-93.1745 GHz: N2H+ J=1-0 (centre 93.1737637 GHz, Pagani et al. 2009
    # via pyspeckit) lies 0.7 MHz inside the upper end
    loupe = Loupe(cube_path(rng.normal(size=(350, 4, 4)), crval3=93.0e9, cdelt3=0.5e6), first_view=False)
    overlay = loupe.line_overlay
    boxes = {text: (left, right) for left, right, _, text in _label_boxes(overlay)}
    left, right = boxes["N2H+ J=1-0"]
    assert right <= loupe.spectrum_view.x_range[1] + 1e-12
    marker = overlay.marker_x[list(overlay.lines["name"]).index("N2H+ J=1-0")]
    assert left < marker < right and (left + right) / 2 < marker  # moved inwards, still over its marker


def test_one_marker_per_hyperfine_group_expands_to_its_components(cube_path, rng):
    loupe = Loupe(cube_path(rng.normal(size=(400, 4, 4)), crval3=93.0e9, cdelt3=0.5e6), first_view=False)
    overlay = loupe.line_overlay
    names = list(overlay.lines["name"])
    assert "N2H+ J=1-0" in names and not any(n.startswith("N2H+ J=1-0 F1") for n in names)
    # the group's marker: the components' frequencies weighted by their LTE shares (naive reference)
    components = loupe.catalog[loupe.catalog["hyperfine_group"] == "N2H+ J=1-0"]
    share = np.asarray(components["relative_intensity"], dtype=float)
    centre = np.sum(share * u.Quantity(components["rest_frequency"], u.GHz).value) / share.sum()
    assert overlay.marker_x[names.index("N2H+ J=1-0")] == pytest.approx(centre, rel=1e-12)
    assert "hyperfine group of 7 components" in overlay.hover(names.index("N2H+ J=1-0"))
    # clicking the group's head makes its strongest component velocity zero (common practice)
    strongest = components[np.argmax(share)]
    loupe.spectrum_view.mode = "go"
    overlay._on_pointer("click", overlay.marker_x[names.index("N2H+ J=1-0")], 0.88)
    assert loupe.reference_line == str(strongest["name"]) == "N2H+ J=1-0 F1,F=2,3-1,2"
    assert loupe.spectrum_view.rest_frequency == pytest.approx(
        u.Quantity(strongest["rest_frequency"], u.GHz).value, rel=1e-12)
    assert ("N2H+ J=1-0 (strongest component)", str(strongest["name"])) in overlay.reference_choice.options
    overlay.hyperfine_toggle.value = True
    assert overlay.hyperfine_components
    # N2H+ J=1-0: seven resolved components (Pagani et al. 2009, A&A 494, 719)
    assert sum(n.startswith("N2H+ J=1-0 F1") for n in overlay.lines["name"]) == 7
