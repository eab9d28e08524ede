"""StatusLine: the suite's own message area, and the guard every user action runs under.

A bad action (an empty region, a window outside the band, a file that cannot
be read) must never leave a traceback in the notebook: it is caught here and
shown as one readable line. Errors cubeloupe raises on purpose
(`CubeloupeError`) are shown as they are; anything unexpected is shown with a
short note and its traceback goes to the ``cubeloupe.widgets`` logger.
cubeloupe warnings raised during an action are shown too.
"""

import contextlib
import html
import logging
import time
import warnings

import ipywidgets as w
from traitlets import Enum, Int, List, Unicode, observe

from cubeloupe.analysis import CubeloupeError, CubeloupeWarning

__all__ = ["StatusLine"]

log = logging.getLogger("cubeloupe.widgets")

_LEVEL_STYLE = {
    # Own palette: calm slate for news, amber for warnings, brick red for errors.
    "info": ("#33475b", "#eef3f7", "●"),
    "warning": ("#7a4b00", "#fff4dc", "▲"),
    "error": ("#8c1d18", "#fde9e7", "✖"),
}


class StatusLine(w.HBox):
    """One line telling the user what just happened, plus a short history.

    Attributes
    ----------
    message : str
        The latest message shown ("" when idle).
    level : {'info', 'warning', 'error'}
        How the latest message is shown.
    history : list of dict
        Past messages, newest last: ``{"time", "level", "message"}``.
    max_history : int
        How many past messages are kept.
    """

    message = Unicode("", help="The latest message shown to the user").tag(sync=False)
    level = Enum(["info", "warning", "error"], "info", help="Severity of the latest message")
    history = List(help="Past messages, newest last, as dicts with time, level and message")
    max_history = Int(50, help="How many past messages are kept in history")

    def __init__(self, **kwargs):
        self._cause = None
        self._text = w.HTML(value="", layout=w.Layout(flex="1 1 auto"))
        self._text.add_class("cubeloupe-status-text")
        self._clear = w.Button(icon="times", layout=w.Layout(width="32px"),
                               tooltip="Hide this message")
        self._clear.on_click(lambda _: self.clear())
        super().__init__(children=[self._text, self._clear], **kwargs)
        self.add_class("cubeloupe-status")
        self.layout.align_items = "center"
        self._render()

    # ------------------------------------------------------------------ API
    def show(self, message, level="info", cause=None):
        """Show ``message`` at ``level`` and add it to the history (once, if it repeats the last one).

        ``cause`` names the action the message is about; a later success of the
        same action clears it (see `guard`).
        """
        self._cause = cause
        if str(message) == self.message and level == self.level:
            return
        entry = {"time": time.strftime("%H:%M:%S"), "level": level, "message": str(message)}
        self.history = (self.history + [entry])[-self.max_history:]
        with self.hold_trait_notifications():
            self.level = level
            self.message = str(message)

    def info(self, message):
        self.show(message, "info")

    def warn(self, message):
        self.show(message, "warning")

    def error(self, message):
        self.show(message, "error")

    def clear(self):
        """Hide the current message (the history is kept)."""
        self._cause = None
        self.message = ""
        self.level = "info"

    @contextlib.contextmanager
    def guard(self, action, success=None):
        """Run a user action; show any error or cubeloupe warning instead of raising.

        Parameters
        ----------
        action : str
            What the user was doing, in plain words ("drawing a region").
        success : str, optional
            Shown when the action finishes without error or warning.
            Otherwise a success clears an error or warning that the same
            action left earlier: once its cause is gone, so is the message.

        Examples
        --------
        >>> status = StatusLine()
        >>> with status.guard("reading the cube"):
        ...     raise CubeloupeError("nothing there")
        >>> status.level, status.message
        ('error', 'Could not finish reading the cube: nothing there')
        """
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", CubeloupeWarning)
            try:
                yield self
            except CubeloupeError as exc:
                self.show(f"Could not finish {action}: {exc}", "error", cause=action)
                return
            except Exception as exc:  # noqa: BLE001 - the point is that nothing escapes to the notebook
                log.exception("unexpected problem while %s", action)
                self.show(f"Unexpected problem while {action}: {type(exc).__name__}: {exc}. "
                          "The details are in the 'cubeloupe.widgets' log; please report it.", "error",
                          cause=action)
                return
        ours = [str(item.message) for item in caught if issubclass(item.category, CubeloupeWarning)]
        for item in caught:
            if not issubclass(item.category, CubeloupeWarning):
                log.debug("warning while %s: %s", action, item.message)
        if ours:
            self.show(f"Note while {action}: " + " | ".join(dict.fromkeys(ours)), "warning", cause=action)
        elif success:
            self.info(success)
        elif self._cause == action and self.message:
            self.clear()

    # -------------------------------------------------------------- display
    @observe("message", "level")
    def _render(self, change=None):
        fg, bg, mark = _LEVEL_STYLE[self.level]
        if not self.message:
            self._text.value = "<span style='color:#7b8794'>Ready.</span>"
            self.layout.border = "1px solid #d9e2ec"
            return
        self._text.value = (
            f"<div style='color:{fg};background:{bg};padding:2px 6px;white-space:normal'>"
            f"{mark} {html.escape(self.message)}</div>"
        )
        self.layout.border = f"1px solid {fg}"
