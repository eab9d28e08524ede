"""RegionList and the sky tools: regions drawn or given in code, their spectra, names and removal.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
from numpy.testing import assert_allclose
from regions import CirclePixelRegion, PixCoord, RectanglePixelRegion

from cubeloupe.analysis import open_cube, region_spectrum

from suite_driver import NX, NY


def test_region_from_code_gives_the_region_spectrum(loupe, line_cube):
    shape = CirclePixelRegion(PixCoord(14, 12), radius=3)
    name = loupe.add_region(shape, name="core")
    expected = region_spectrum(open_cube(line_cube), shape)
    mark = loupe.spectrum_view.curve_marks[("core", 0)]
    assert_allclose(mark.y, expected.value, rtol=1e-6)
    assert_allclose(mark.x, expected.spectral_axis.to_value(u.GHz), rtol=1e-12)
    assert name == "core" and loupe.regions[0]["kind"] == "circle"
    assert loupe.spectrum_view.y_axis.label == "Jy"


def test_drawn_box_becomes_a_region_only_on_release(loupe, line_cube):
    sky = loupe.sky_view
    sky.tool = "box"
    assert sky.figure.interaction is sky.box_selector
    sky.box_selector.brushing = True
    sky.box_selector.selected_x = [10.0, 17.0]
    sky.box_selector.selected_y = [9.0, 15.0]
    assert loupe.regions == []
    sky.box_selector.brushing = False
    assert [r["name"] for r in loupe.regions] == ["R1"]
    box = RectanglePixelRegion(PixCoord(13.5, 12.0), width=7, height=6)
    expected = region_spectrum(open_cube(line_cube), box)
    assert_allclose(loupe.spectrum_view.curve_marks[("R1", 0)].y, expected.value, rtol=1e-5)
    assert len(sky.outlines) == 1


def test_pixel_click_and_outline_regions(loupe, line_cube):
    sky = loupe.sky_view
    sky.tool = "pixel"
    sky.pointer._handle_custom_msg({"event": "click", "domain": {"x": 5.2, "y": 6.9}}, [])
    mask = np.zeros((NY, NX), bool)
    mask[7, 5] = True
    expected = region_spectrum(open_cube(line_cube), mask)
    assert_allclose(loupe.spectrum_view.curve_marks[("R1", 0)].y, expected.value, rtol=1e-6)
    sky.tool = "outline"
    for x, y in ((10, 10), (18, 10), (14, 16)):
        sky.pointer._handle_custom_msg({"event": "click", "domain": {"x": x, "y": y}}, [])
    sky.pointer._handle_custom_msg({"event": "dblclick", "domain": {"x": 14, "y": 16}}, [])
    assert [r["kind"] for r in loupe.regions] == ["pixel", "outline"]
    assert ("R2", 0) in loupe.spectrum_view.curve_marks


def test_regions_are_editable_and_removable(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="a")
    loupe.add_region(CirclePixelRegion(PixCoord(5, 5), radius=2), name="b")
    loupe.region_list.recolor("a", "#123456")
    assert loupe.spectrum_view.curve_marks[("a", 0)].colors == ["#123456"]
    loupe.region_list.rename("b", "edge")
    assert set(loupe.spectra) == {"a", "edge"}
    loupe.remove_region("a")
    assert [k[0] for k in loupe.spectrum_view.curve_marks] == ["edge"]
    assert len(loupe.sky_view.outlines) == 1


def _shown_rows(loupe):
    return [row for row in loupe.region_list._rows.children if row.layout.display != "none"]


def test_region_rows_follow_the_regions_and_refuse_a_taken_name(loupe):
    waiting = list(loupe.region_list._rows.children)
    loupe.add_region(CirclePixelRegion(PixCoord(14, 12), radius=3), name="a")
    loupe.add_region(CirclePixelRegion(PixCoord(5, 5), radius=2), name="b")
    rows = _shown_rows(loupe)
    # The rows were waiting, hidden, before the regions came: no new widgets on the way to a spectrum (#20).
    assert all(row in waiting for row in rows)
    names = [row.children[2].value for row in rows]
    picked = [row.children[0].value for row in rows]
    kinds = [row.children[3].value for row in rows]
    assert names == ["a", "b"] and picked == [False, True]   # the newest region is selected
    assert all("circle" in kind for kind in kinds)
    assert [row.layout.border_left for row in rows] == [f"4px solid {r['color']}" for r in loupe.regions]
    rows[0].children[0].value = True                         # click a's select button
    assert loupe.region_list.selected == "a"
    assert [row.children[0].value for row in _shown_rows(loupe)] == [True, False]
    rows[1].children[1].value = "#123456"                    # pick a colour for b
    assert loupe.regions[1]["color"] == "#123456" and rows[1].layout.border_left == "4px solid #123456"
    rows[1].children[2].value = "a"                          # type a name that is taken
    assert loupe.region_list.names == ["a", "b"] and rows[1].children[2].value == "b"
    rows[1].children[2].value = "rim"
    assert loupe.region_list.names == ["a", "rim"] and set(loupe.spectra) == {"a", "rim"}
    rows[0].children[4].click()                              # remove a
    assert [row.children[2].value for row in _shown_rows(loupe)] == ["rim"] and loupe.regions[0]["name"] == "rim"
    for k in range(5):                                       # more regions than rows waiting: more are made
        loupe.add_region(CirclePixelRegion(PixCoord(3 + 3 * k, 20), radius=1), name=f"c{k}")
    assert [row.children[2].value for row in _shown_rows(loupe)] == ["rim"] + [f"c{k}" for k in range(5)]
    loupe.regions = []
    assert _shown_rows(loupe) == [] and loupe.region_list._empty.layout.display == ""


def test_region_outside_the_cube_is_reported_and_not_kept(loupe):
    loupe.add_region(CirclePixelRegion(PixCoord(500, 500), radius=3), name="far")
    assert loupe.status.level == "error"
    assert "far" in loupe.status.message
    assert loupe.regions == [] and loupe.spectra == {}
