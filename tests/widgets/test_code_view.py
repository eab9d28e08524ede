"""CodeView: the script of the current state, rewritten as the user works while it is shown (#19)."""

from unittest import mock

from regions import PixCoord, RectanglePixelRegion

from cubeloupe.widgets.code_view import CodeView
from suite_driver import mark_ranges


def _code_tab(loupe):
    tabs = next(c for c in loupe.children if "cubeloupe-actions" in c._dom_classes)
    return tabs, list(tabs.children).index(loupe.code_view)


def test_code_view_is_a_tab_of_the_suite(loupe):
    tabs, index = _code_tab(loupe)
    assert isinstance(loupe.code_view, CodeView)
    assert tabs.get_title(index) == "Code"


def test_shown_view_follows_each_change(loupe):
    tabs, index = _code_tab(loupe)
    tabs.selected_index = index
    assert loupe.code_view.showing and "open_cube(" in loupe.code_view.text.value
    loupe.add_region(RectanglePixelRegion(PixCoord(14.0, 12.0), width=8, height=6), name="core")
    assert "as_drawn['core'] = RectanglePixelRegion(PixCoord(14.0, 12.0), width=8.0, height=6.0" in \
        loupe.code_view.text.value
    mark_ranges(loupe)
    assert "table = measurement_table(" in loupe.code_view.code
    loupe.z = 0.001
    assert "z = 0.001\n" in loupe.code_view.code
    assert loupe.code_view.code == loupe.to_code() == loupe.code_view.text.value


def test_hidden_view_waits_until_shown(loupe):
    """While another tab is shown, changes only mark the script out of date (no cost while scrubbing)."""
    tabs, index = _code_tab(loupe)
    tabs.selected_index = 0
    with mock.patch.object(loupe.code_view, "refresh", wraps=loupe.code_view.refresh) as refresh:
        for channel in range(1, 20):
            loupe.channel = channel
        assert refresh.call_count == 0 and loupe.code_view.stale
        tabs.selected_index = index
        assert refresh.call_count == 1
    assert "loupe.channel = 19\n" in loupe.code_view.code and not loupe.code_view.stale


def test_current_rewrites_a_stale_script(loupe):
    loupe.baseline_order = 2
    assert "baseline_order = 2\n" in loupe.code_view.current()


def test_to_new_cell_asks_ipython(loupe):
    shell = mock.Mock()
    with mock.patch("IPython.get_ipython", return_value=shell):
        assert loupe.code_view.to_new_cell()
    shell.set_next_input.assert_called_once_with(loupe.to_code(), replace=False)
    with mock.patch("IPython.get_ipython", return_value=None):
        assert not loupe.code_view.to_new_cell()


def test_copy_button_copies_its_own_view(loupe):
    """The copy button reads the text box inside the same view, so two suites on a page copy their own."""
    html = loupe.code_view.copy_button.value
    assert "closest('.cubeloupe-code-view')" in html and "navigator.clipboard.writeText" in html
    assert "cubeloupe-code-view" in loupe.code_view._dom_classes


def test_problem_is_shown_in_the_view(line_cube):
    """A state with no script (a cube with no file) is said in the view, not raised at the user."""
    from spectral_cube import SpectralCube

    from cubeloupe.analysis import open_cube
    from cubeloupe.widgets import Loupe

    opened = open_cube(line_cube)
    suite = Loupe(SpectralCube(data=opened.filled_data[:], wcs=opened.wcs), first_view=False)
    assert suite.code_view.refresh().startswith("# No script for this state:")
    assert "made in memory" in suite.code_view.text.value


def test_script_follows_the_newer_parts_while_shown(loupe):
    """A path drawn, channel maps made or a line ticked while the Code tab is shown rewrite the script (#16, #18)."""
    view = loupe.code_view
    view.showing = True
    assert "pv_slice(" not in view.text.value
    loupe.pv_panel.set_path([[3.0, 4.0], [20.0, 18.0]], width=2.0)
    assert "pv_slice(" in view.text.value and "width=2.0" in view.text.value
    loupe.pv_panel.width = 3.0
    assert "width=3.0" in view.text.value
