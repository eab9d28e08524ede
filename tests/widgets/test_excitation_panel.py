"""ExcitationPanel: ticked measurements of the suite -> population diagrams, results, prediction and exports (#16).

The suite is opened on the eight windows of the invented lensed demo, a sky circle holding the
whole ring is measured at each CO and water line the demo's LTE model injected, and each
measurement is ticked as a user would. The panel's numbers must be `population_diagram`'s on the
same rows (its outside checks are in tests/analysis/test_population.py and test_demo.py: the
optically thin LTE relation of Goldsmith & Langer 1999, ApJ 517, 209).
"""

import threading
from unittest import mock

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
from astropy.table import QTable, Table
from astropy.tests.helper import assert_quantity_allclose
from regions import CircleSkyRegion

from cubeloupe.analysis import demo_path, demo_truth, find_line, frequency_axis, lte_spectrum, population_diagram
from cubeloupe.widgets import Loupe
from cubeloupe.widgets.excitation_panel import ExcitationPanel

C_KMS = 299792.458
NAMES = [f"lensed_spw{k}" for k in range(1, 9)]


def _line_free(loupe):
    """Every window's channels further than 650 km/s from each of its injected lines (observed GHz)."""
    ranges = []
    for index, name in enumerate(NAMES):
        freq = loupe._frequencies[index]
        free = np.ones(freq.size, bool)
        for line in demo_truth(name)["lines"]:
            f0 = line["observed_frequency"].to_value(u.GHz)
            free &= np.abs(freq - f0) / f0 * C_KMS > 650
        edges = np.flatnonzero(np.diff(np.r_[0, free.astype(int), 0]))
        ranges += [sorted([float(freq[a]), float(freq[b - 1])]) for a, b in zip(edges[::2], edges[1::2])]
    return ranges


def measure(loupe, line):
    """Measure one injected line as a user would: its name as velocity zero, the window over +-550 km/s."""
    f0 = line["observed_frequency"].to_value(u.GHz)
    loupe.reference_line = line["catalog_name"]
    loupe.line_window = [f0 * (1 - 550 / C_KMS), f0 * (1 + 550 / C_KMS)]
    return list(loupe.measurements)


@pytest.fixture(scope="module")
def suite():
    """The suite on the demo, every model line measured and ticked; returns (loupe, measurement rows)."""
    truth = demo_truth(NAMES[0])
    loupe = Loupe([demo_path(n) for n in NAMES], z=truth["z"], first_view=False,
                  rest_frequency=find_line("CO J=7-6")["rest_frequency"])
    loupe.magnification = truth["lte_model"]["magnification"]
    loupe.add_region(CircleSkyRegion(SkyCoord(truth["source"]["ra"], truth["source"]["dec"]), 1.7 * u.arcsec),
                     name="ring")
    loupe.line_free = _line_free(loupe)
    rows = []
    for name in NAMES:
        for line in demo_truth(name)["lines"]:
            if line["from_lte_model"]:
                measured = measure(loupe, line)
                rows += measured
                loupe.excitation_panel.tick_measurements()
    return loupe, rows


@pytest.fixture
def panel(suite):
    loupe, rows = suite
    panel = loupe.excitation_panel
    panel.prediction_delay = 0
    panel.show_prediction = False
    panel.spin = "joint"
    panel.picked = []
    panel.tick_measurements()  # the last line measured
    for row in rows:
        panel.tick(row)
    return panel


def _table(rows, species):
    """The rows of ``species`` as population_diagram reads them, made here from the suite's own rows."""
    rows = [r for r in rows if str(find_line(r["line"])["species"]) == species]
    unit = u.Unit(rows[0]["flux_unit"])
    return QTable({"line": [r["line"] for r in rows], "flux": [r["flux"] for r in rows] * unit,
                   "flux_error": [r["flux_error"] for r in rows] * unit})


def test_panel_is_a_tab_of_the_suite(suite):
    loupe, _ = suite
    tabs = next(c for c in loupe.children if "cubeloupe-actions" in c._dom_classes)
    index = list(tabs.children).index(loupe.excitation_panel)
    assert isinstance(loupe.excitation_panel, ExcitationPanel)
    assert tabs.get_title(index) == "Population diagram"
    # The diagram joins the page when its tab is first shown (bqplot cannot lay out a hidden figure).
    tabs.selected_index = index
    assert loupe.excitation_panel.figure in loupe.excitation_panel.body.children


def test_ticked_lines_stay_when_the_window_moves_on(suite, panel):
    loupe, rows = suite
    assert len(rows) == 10 and len(panel.picked) == 10  # 4 CO, 3 ortho- and 3 para-H2O lines
    assert {p["window"] for p in panel.picked} == set(range(8))
    # Only the last line is in the measurement table now; every ticked one is still offered, ticked.
    assert len(loupe.measurements) == 1
    boxes = panel.choices.children
    assert len(boxes) == 10 and all(box.value for box in boxes)


def test_the_tick_boxes_are_kept_while_their_lines_are_offered(suite, panel):
    # Each move of the line window changes the measurements; the boxes of lines still offered are the
    # same widgets (no new models for the browser, #20), with their labels brought up to date, and a
    # tick on a kept box still puts its line in and takes it out.
    loupe, rows = suite
    before = {box.description.split(" · ")[0]: box for box in panel.choices.children}
    measured = loupe.measurements[0]["line"]       # still offered when unticked: it is measured now
    first = next(p for p in panel.picked if p["line"] == measured)
    panel.picked = [p for p in panel.picked if p is not first]   # untick it: its box stays, unticked
    after = {box.description.split(" · ")[0]: box for box in panel.choices.children}
    assert after == before
    box = after[first["line"]]
    assert not box.value and not box.description.endswith("(upper limit)")
    panel.limit_sigma = 1e6                        # the offered measurement is now an upper limit: its label says so
    assert after[first["line"]].description.endswith("(upper limit)")
    assert {b.description.split(" · ")[0]: b for b in panel.choices.children} == before
    panel.limit_sigma = 3.0
    assert not box.description.endswith("(upper limit)")
    box.value = True                               # the user ticks it again
    assert [p["line"] for p in panel.picked].count(first["line"]) == 1
    assert all(b.value for b in panel.choices.children)


def test_lines_measured_while_the_tab_is_hidden_are_offered_once_it_is_shown(suite, panel):
    # Measuring (each move of the line window) does not rebuild a hidden tab's tick boxes; showing the
    # tab brings them up to date, and while it is shown they follow each measurement at once (#20).
    loupe, _ = suite
    tabs = next(c for c in loupe.children if "cubeloupe-actions" in c._dom_classes)
    index = list(tabs.children).index(panel)
    measured = loupe.measurements
    tabs.selected_index = 0 if index else 1
    panel.picked = []
    offered = list(panel.choices.children)
    assert [box.description.split(" · ")[0] for box in offered] == [measured[0]["line"]]
    loupe.measurements = []
    assert list(panel.choices.children) == offered           # hidden: not rebuilt yet
    tabs.selected_index = index
    assert "No measured lines yet" in panel.choices.children[0].value
    loupe.measurements = measured
    assert [box.description.split(" · ")[0] for box in panel.choices.children] == [measured[0]["line"]]


@pytest.mark.parametrize("spin", ["joint", "separate"])
def test_numbers_equal_population_diagram_on_the_same_rows(suite, panel, spin):
    loupe, rows = suite
    panel.spin = spin
    assert set(panel.diagrams) == {"CO", "H2O"}
    for species, shown in panel.diagrams.items():
        fit = population_diagram(_table(rows, species), spin=spin, z=loupe.z, magnification=loupe.magnification,
                                 cosmology=loupe.cosmology)
        for name in ("temperature", "temperature_error", "total_number", "total_number_error", "mass"):
            assert_quantity_allclose(getattr(shown, name), getattr(fit, name), rtol=1e-12, equal_nan=True)
        np.testing.assert_allclose(shown.ortho_para_ratio, fit.ortho_para_ratio, rtol=1e-12, equal_nan=True)
        np.testing.assert_allclose(shown.points["ln(N_u/g_u)"], fit.points["ln(N_u/g_u)"], rtol=1e-12)
    # What the user reads: the temperature with its error, the ratio with the fit's name.
    text = panel.results.value
    water = panel.diagrams["H2O"]
    assert f"{water.ortho_para_ratio:.2f} ± {water.ortho_para_ratio_error:.2f}" in text
    assert f"ortho/para ({spin})" in text
    if spin == "joint":
        assert f"{water.temperature.to_value(u.K):.1f} ± {water.temperature_error.to_value(u.K):.1f} K" in text


def test_fit_recovers_the_demo_model(panel):
    """The ring holds the whole lensed image, so T, N and ortho/para come back within 3 sigma of the demo's
    LTE model (its sidecar record), as the Goldsmith & Langer (1999) relation says they should."""
    model = demo_truth(NAMES[0])["lte_model"]["species"]
    for species, fit in panel.diagrams.items():
        assert abs(fit.temperature - model[species]["temperature"]) < 3 * fit.temperature_error
        # The 1.7" circle misses a few per cent of the beam-smeared ring: N to 3 sigma plus 5 %.
        assert abs(fit.total_number - model[species]["total_number"]) < (
            3 * fit.total_number_error + 0.05 * model[species]["total_number"])
    water = panel.diagrams["H2O"]
    assert abs(water.ortho_para_ratio - model["H2O"]["ortho_para_ratio"]) < 3 * water.ortho_para_ratio_error


def test_diagram_marks_ortho_and_para_apart_with_error_bars_and_fitted_lines(panel):
    assert set(panel.marks) == {"CO all", "H2O ortho", "H2O para"}
    for key, count in (("CO all", 4), ("H2O ortho", 3), ("H2O para", 3)):
        marks = panel.marks[key]
        assert len(marks["points"].x) == count and len(marks["error_bars"].x) == count
        assert "fit" in marks and "limits" not in marks
    assert panel.marks["H2O ortho"]["points"].colors != panel.marks["H2O para"]["points"].colors
    # The fitted line falls with energy with slope -1/T (Goldsmith & Langer 1999).
    fit = panel.marks["CO all"]["fit"]
    slope = np.diff(fit.y)[0] / np.diff(fit.x)[0]
    assert slope == pytest.approx(-1 / panel.diagrams["CO"].temperature.to_value(u.K))


def test_weak_rows_are_upper_limits_drawn_as_arrows(panel):
    weak = dict(panel.picked[0], flux=0.2, flux_error=0.1, snr=2.0)
    weak.pop("upper_limit")
    panel.tick(weak)
    line = next(p for p in panel.picked if p["line"] == weak["line"])
    assert line["upper_limit"] and line["flux"] == pytest.approx(0.3)  # 3 sigma
    species = str(find_line(weak["line"])["species"])
    key = next(k for k in panel.marks if k.startswith(species) and "limits" in panel.marks[k])
    arrow = panel.marks[key]["limits"]
    stems = np.atleast_2d(arrow.y)  # bqplot keeps a single segment as one line
    assert len(stems) == 1 and stems[0][1] < stems[0][0]  # pointing down


def test_unticking_takes_a_line_out(panel):
    before = len(panel.diagrams["CO"].points)
    co = next(p for p in panel.picked if p["line"].startswith("CO"))
    panel.tick(co, False)
    assert len(panel.diagrams["CO"].points) == before - 1


def test_bad_input_is_shown_next_to_the_controls(panel):
    controls = panel.children[0]
    assert panel.status in controls.children and panel.spin_choice in controls.children[2].children
    # A single CO line: no temperature can be fitted; the water fit stays.
    panel.picked = [p for p in panel.picked if not p["line"].startswith("CO")] + [
        next(p for p in panel.picked if p["line"] == "CO J=5-4")]
    assert panel.status.level == "error" and "CO" in panel.status.message
    assert "H2O" in panel.diagrams and "CO" not in panel.diagrams
    # A name that is no catalog line (measured with no line chosen).
    panel.picked = panel.picked + [dict(panel.picked[0], line="115.9 GHz", region="other")]
    assert panel.status.level == "error" and "115.9 GHz" in panel.status.message
    # Fluxes in two kinds of unit.
    panel.picked = [p for p in panel.picked if p["line"] != "115.9 GHz"] + [
        dict(panel.picked[0], line="CO J=4-3", flux_unit="K km / s")]
    assert panel.status.level == "error" and "flux units" in panel.status.message


def test_magnification_of_the_suite_is_divided_out(suite, panel):
    loupe, _ = suite
    before = panel.diagrams["CO"].total_number
    mu = loupe.magnification
    try:
        loupe.magnification = 2 * mu
        # N_u = 4 pi D_L^2 (S dv) / ((1 + z) c h A_ul mu): twice the magnification, half the molecules.
        assert_quantity_allclose(panel.diagrams["CO"].total_number, before / 2, rtol=1e-9)
    finally:
        loupe.magnification = mu


def test_prediction_over_the_spectra_is_lte_spectrum(suite, panel):
    loupe, _ = suite
    panel.prediction_species = "CO"
    panel.show_prediction = True
    fit = panel.diagrams["CO"]
    assert panel.prediction_temperature == pytest.approx(fit.temperature.to_value(u.K))
    assert 10 ** panel.prediction_amount == pytest.approx(fit.total_number.value)
    panel.prediction_temperature = 40.0
    frequencies, values = loupe.spectrum_view.prediction[2]  # CO J=5-4 is in window 3 (index 2)
    expected = lte_spectrum(frequency_axis(loupe.cubes[2]), ["CO"], temperature=40 * u.K,
                            total_number=10 ** panel.prediction_amount, fwhm=panel.prediction_fwhm * u.km / u.s,
                            z=loupe.z, magnification=loupe.magnification, cosmology=loupe.cosmology)
    np.testing.assert_allclose(values, expected.to_value(u.Jy), rtol=1e-12)
    np.testing.assert_allclose(frequencies, frequency_axis(loupe.cubes[2]).to_value(u.GHz))
    view = loupe.spectrum_view
    # Drawn on the region's baseline while the spectra are not baseline-subtracted.
    loupe.spectrum_span = "window"
    loupe.window = 2
    start = sum(len(f) + 1 for f, _ in view.prediction[:2])  # windows are joined by one NaN
    part = slice(start, start + len(values))
    drawn = np.asarray(view.prediction_mark.y, dtype=float)[part]
    np.testing.assert_allclose(drawn, values + view.fits[("ring", 2)].model.value, rtol=1e-12)
    loupe.show_subtracted = True
    np.testing.assert_allclose(np.asarray(view.prediction_mark.y, dtype=float)[part], values, rtol=1e-12)
    loupe.show_subtracted = False
    shown = np.asarray(view.prediction_mark.y, dtype=float)
    assert np.nanmax(shown) > 0 and np.isfinite(shown[-1])  # no NaN last: bqplot puts a label there
    assert np.all(view.in_view(np.asarray(view.prediction_mark.x)[np.isfinite(shown)]))
    panel.show_prediction = False
    assert len(loupe.spectrum_view.prediction_mark.y) == 0


def test_a_burst_of_slider_moves_draws_once(suite, panel):
    panel.prediction_species = "CO"
    panel.show_prediction = True
    panel.prediction_delay = 0.2
    done = threading.Event()
    with mock.patch.object(panel, "draw_prediction", side_effect=lambda: done.set()) as draw:
        for t in np.linspace(30, 90, 12):
            panel.temperature_slider.value = float(t)
        assert done.wait(5)
        assert draw.call_count == 1
    panel.show_prediction = False


def test_exports_table_and_picture(panel, tmp_path):
    path = panel.export_table(tmp_path / "diagram.ecsv")
    table = Table.read(path, format="ascii.ecsv")
    assert len(table) == 10 and table.meta["population_fits"]["H2O"]["spin"] == "joint"
    np.testing.assert_allclose(sorted(table["E_up"]), sorted(np.concatenate(
        [d.points["E_up"].to_value(u.K) for d in panel.diagrams.values()])))
    picture = panel.export_picture(tmp_path / "diagram.png")
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # Never replaced unless asked; the refusal is shown beside the buttons.
    panel.export_name.value = str(tmp_path / "diagram_again")
    panel._export("table")
    assert panel.export_status.level == "info"
    before = (tmp_path / "diagram_again_diagram.ecsv").read_bytes()
    panel._export("table")
    assert panel.export_status.level == "error" and "exists" in panel.export_status.message
    assert (tmp_path / "diagram_again_diagram.ecsv").read_bytes() == before
    panel.export_overwrite.value = True
    panel._export("picture")
    panel._export("picture")
    assert panel.export_status.level == "info"
