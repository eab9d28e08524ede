"""CodeView: the script of the suite's current state, kept up to date, with a copy button.

The script comes from `cubeloupe.widgets.replay.to_code`. While the view is
shown (``showing`` True) it is rewritten after each change of the suite's
state; while hidden it is only marked out of date and rewritten when shown
again, so scrubbing channels costs nothing when nobody looks at the code.

The copy button uses the browser's clipboard (``navigator.clipboard``, which
browsers allow on https pages and on localhost); the text box can always be
selected and copied by hand. `CodeView.to_new_cell` puts the script into a new
notebook cell below the one that calls it (IPython's ``set_next_input``, which
JupyterLab and Notebook honour).
"""

import ipywidgets as w
from traitlets import Bool, Unicode, observe

from cubeloupe.analysis import CubeloupeError

from .replay import to_code
from .session import VIEW_SETTINGS, follow_moments

__all__ = ["CodeView", "WATCHED"]

#: The suite's traits whose change changes the script.
WATCHED = ("window", "channel", "z", "velocity_offset", "rest_frequency", "reference_line", "convention",
           "axis_kind", "regions", "line_free", "line_window", "peaks", "baseline_order", "show_subtracted",
           "clip", "sky_source", "spectrum_span", "magnification", "cosmology", "moments", "measurements")
#: The parts' traits whose change changes the script: every setting a session saves (the PV path, the
#: channel maps and the population diagram's too, #16 and #18), and the channel maps made.
_PART_WATCHED = {part: tuple(name for name, _, _ in traits) for part, traits in VIEW_SETTINGS.items()}
_PART_WATCHED["channel_map_panel"] += ("made_with",)

# Copies the text box of the same view: the button and the box are found from the clicked element, so
# several suites on one page each copy their own script.
_COPY_BUTTON = (
    "<button class='cubeloupe-copy-code' title='Copy the script to the clipboard' "
    "style='padding:2px 10px;font-size:12px;cursor:pointer' "
    "onclick=\"const box=this.closest('.cubeloupe-code-view').querySelector('textarea');"
    "const note=this.nextElementSibling;"
    "navigator.clipboard.writeText(box.value).then(()=>{note.textContent='copied';},"
    "()=>{box.select();note.textContent='select all and copy (Ctrl+C)';});\">"
    "Copy</button><span class='cubeloupe-copy-note' style='margin-left:8px;color:#486581;font-size:12px'></span>"
)


class CodeView(w.VBox):
    """The script that re-makes the suite's state (see `cubeloupe.widgets.replay.to_code`).

    Parameters
    ----------
    loupe : Loupe
        The suite whose state is written out.
    tabs : ipywidgets.Tab, optional
        The suite's tabs: the view adds itself as the last one, "Code", and is ``showing`` while selected.

    Attributes
    ----------
    code : str
        The script of the current state ('' before the first one is written).
    showing : bool
        True while the view is on screen: changes then rewrite the script at once.
    stale : bool
        True when the suite changed since the script was written (read-only).
    """

    code = Unicode("", help="The script of the suite's current state")
    showing = Bool(False, help="True while the view is shown; the script is then kept up to date")
    stale = Bool(True, help="True when the suite changed since the script was written (read-only)")

    def __init__(self, loupe, tabs=None, **kwargs):
        self.loupe = loupe
        self.text = w.Textarea(value="", layout=w.Layout(width="100%", height="320px"),
                               tooltip="The script of what the suite shows; run it to make the same numbers")
        self.text.add_class("cubeloupe-code-text")
        self.copy_button = w.HTML(_COPY_BUTTON)
        self.note = w.HTML("<span style='color:#829ab1;font-size:90%'>A script that opens the same cubes, makes "
                           "the same spectra, measurements and moment maps, and shows this suite again. In a "
                           "notebook, <code>loupe.code_view.to_new_cell()</code> puts it in a new cell.</span>")
        super().__init__(children=[w.HBox([self.copy_button, self.note], layout=w.Layout(align_items="center",
                                                                                        grid_gap="12px")),
                                   self.text], **kwargs)
        self.add_class("cubeloupe-code-view")
        follow_moments(loupe)
        loupe.observe(self._changed, names=list(WATCHED))
        for part, names in _PART_WATCHED.items():
            widget = getattr(loupe, part, None)
            if widget is not None:
                widget.observe(self._changed, names=[n for n in names if widget.has_trait(n)])
        if tabs is not None:
            tabs.children = (*tabs.children, self)
            last = len(tabs.children) - 1
            tabs.set_title(last, "Code")
            w.dlink((tabs, "selected_index"), (self, "showing"), transform=lambda index: index == last)

    def _changed(self, change=None):
        self.stale = True
        if self.showing:
            self.refresh()

    @observe("showing")
    def _on_showing(self, change):
        if change.new and self.stale:
            self.refresh()

    def refresh(self):
        """Write the script of the current state now; returns it."""
        try:
            code = to_code(self.loupe)
        except CubeloupeError as exc:
            code = f"# No script for this state: {exc}\n"
        with self.hold_trait_notifications():
            self.code = code
            self.stale = False
        self.text.value = code
        return code

    def current(self):
        """The script of the current state (rewritten first if the suite changed)."""
        return self.refresh() if self.stale else self.code

    def to_new_cell(self):
        """Put the script into a new notebook cell below the running one (IPython front ends only).

        Returns
        -------
        bool
            True if IPython took the request; False outside IPython (the script is then only returned by
            `current`).
        """
        try:
            from IPython import get_ipython  # deferred: optional outside notebooks
        except ImportError:
            return False
        shell = get_ipython()
        if shell is None:
            return False
        shell.set_next_input(self.current(), replace=False)
        return True
