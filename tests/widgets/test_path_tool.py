"""PathTool: the sky view's path gesture, fed the messages bqplot's front end sends (#18)."""

import pytest
from traitlets import TraitError

from cubeloupe.widgets.path_tool import PathTool
from cubeloupe.widgets.sky_view import TOOLS


def _click(sky, x, y, event="click"):
    sky.pointer._handle_custom_msg({"event": event, "domain": {"x": x, "y": y}}, [])


def test_path_is_clicked_vertex_by_vertex_and_ended_by_a_double_click(loupe):
    sky = loupe.sky_view
    shapes = []
    sky.on_shape(lambda kind, params: shapes.append((kind, params)))
    assert "path" in TOOLS and isinstance(sky.path_tool, PathTool)
    assert sky.path_tool.layout.display == "none", "the path controls show only with the path tool"
    sky.tool = "path"
    assert sky.path_tool.layout.display == ""
    for x, y in ((3, 4), (12.5, 10), (20, 18)):
        _click(sky, x, y)
    assert list(sky.path_tool.draft_line.x) == [3, 12.5, 20], "the path being clicked is drawn"
    assert shapes == []
    # A double-click arrives after two clicks on the same spot: the repeated vertex counts once.
    _click(sky, 20, 18)
    _click(sky, 20, 18, "dblclick")
    assert shapes == [("path", {"vertices": [[3.0, 4.0], [12.5, 10.0], [20.0, 18.0]], "width": 1.0,
                                "width_unit": "pixels"})]
    assert list(sky.path_tool.path_line.x) == [3, 12.5, 20] and list(sky.path_tool.path_start.x) == [3]
    assert len(sky.path_tool.draft_line.x) == 0
    assert sky.path_tool.path_line in sky.figure.marks
    assert loupe.regions == [], "a path is no region"


def test_path_stays_drawn_when_region_outlines_change(loupe):
    sky = loupe.sky_view
    sky.tool = "path"
    for x, y in ((3, 4), (20, 18)):
        _click(sky, x, y)
    sky.path_tool.finish()
    sky.tool = "pixel"
    _click(sky, 5, 6)
    assert len(loupe.regions) == 1
    assert sky.path_tool.path_line in sky.figure.marks and list(sky.path_tool.path_line.x) == [3, 20]


def test_finish_button_with_width_in_arcsec(loupe):
    sky = loupe.sky_view
    shapes = []
    sky.on_shape(lambda kind, params: shapes.append((kind, params)))
    sky.tool = "path"
    sky.path_tool.width_input.value = 2.5
    sky.path_tool.unit_choice.value = "arcsec"
    for x, y in ((1, 1), (9, 1)):
        _click(sky, x, y)
    sky.path_tool.finish_button.click()
    assert shapes[-1] == ("path", {"vertices": [[1.0, 1.0], [9.0, 1.0]], "width": 2.5, "width_unit": "arcsec"})


def test_one_point_is_no_path_and_says_so_beside_the_sky(loupe):
    sky = loupe.sky_view
    shapes = []
    sky.on_shape(lambda kind, params: shapes.append((kind, params)))
    sky.tool = "path"
    _click(sky, 4, 4)
    _click(sky, 4, 4, "dblclick")
    assert shapes == []
    assert sky.status.level == "warning" and "at least two points" in sky.status.message


def test_width_must_be_positive(loupe):
    with pytest.raises(TraitError, match="above 0"):
        loupe.sky_view.path_tool.width = 0.0


def test_leaving_the_tool_drops_the_unfinished_path(loupe):
    sky = loupe.sky_view
    sky.tool = "path"
    _click(sky, 4, 4)
    sky.tool = "look"
    assert sky.path_tool.vertices == [] and sky.path_tool.layout.display == "none"
