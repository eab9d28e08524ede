"""Colours and small layout helpers shared by the widgets (the suite's own look).

Colour ramps and region colours were picked for this project: a deep-ink to
warm-sand ramp for images and a set of region colours that stay apart on it.
"""

import html

import ipywidgets as w

# Image colour ramps (dark to light); each is a list of CSS colours for bqplot's ColorScale.
RAMPS = {
    "ink to sand": ["#0b1026", "#22305e", "#2f6f8f", "#58a89a", "#b9d88a", "#f3e7b3", "#fffdf4"],
    "ember": ["#0d0a0b", "#3b1220", "#7d2131", "#c4502b", "#eb9b3f", "#f7d98b", "#fffbea"],
    "glacier": ["#081018", "#163046", "#2c5d7c", "#5692b3", "#93c4dc", "#d2ecf5", "#ffffff"],
    "grey": ["#000000", "#ffffff"],
}

# Diverging ramps for signed maps (a velocity field): cool for approaching, warm for receding, a light
# neutral middle at zero. Our own picks, kept clear of the grey that marks blanked pixels.
DIVERGING_RAMPS = {
    "sea to rust": ["#123a6b", "#2f6ea8", "#79a9d1", "#e9eef2", "#e8a77a", "#bf5a2c", "#7a2410"],
    "teal to plum": ["#0d4d4d", "#2a8c82", "#8fd0c4", "#f1efe9", "#d6a5c9", "#9c4f8f", "#5a1a56"],
}

# Blanked (NaN) pixels show the plot's background: a neutral mid grey no colour ramp uses, or, on the
# grey ramp (which holds every grey), a muted blue.
BLANK_COLOR = "#8c8c8c"
BLANK_COLOR_ON_GREY = "#5b7db1"


def blank_color(ramp):
    """The colour blanked pixels are drawn in on the colour ramp named ``ramp``."""
    return BLANK_COLOR_ON_GREY if ramp == "grey" else BLANK_COLOR

# Region colours, in the order new regions take them.
REGION_COLORS = ["#ff6f59", "#43bccd", "#f9c80e", "#9b5de5", "#7bd389", "#ff99c8", "#3a86ff", "#fb8500"]

# Shading of marked spectral ranges on the spectrum view.
LINE_FREE_FILL = "#8ecae6"
LINE_WINDOW_FILL = "#ffb703"
BASELINE_COLOR = "#6c757d"
MARKER_COLOR = "#2a9d8f"
PEAK_COLOR = "#e76f51"
CHANNEL_COLOR = "#d62828"


def px(value):
    """A CSS length in pixels."""
    return f"{int(value)}px"


# Section titles: a thin rule with a small heading, in the suite's slate colour.
_TITLE_STYLE = ("font-size:12px;font-weight:600;letter-spacing:0.04em;text-transform:uppercase;color:#486581;"
                "border-bottom:1px solid #d9e2ec;padding:2px 0 1px 0;margin:0 0 2px 0")


def section_title(text, hint=""):
    """A small section heading (HTML string) with an optional grey hint after it."""
    extra = (f" <span style='font-weight:400;text-transform:none;letter-spacing:0;color:#829ab1'>"
             f"{html.escape(hint)}</span>") if hint else ""
    return f"<div style='{_TITLE_STYLE}'>{html.escape(text)}{extra}</div>"


def section(title, children, hint="", width=None, css_class=None):
    """A titled group of controls (an ipywidgets VBox)."""
    box = w.VBox([w.HTML(section_title(title, hint)), *children],
                 layout=w.Layout(width=width or "auto", margin="0 0 4px 0"))
    if css_class:
        box.add_class(css_class)
    return box


def row(children, **layout):
    """Controls side by side, vertically centred, without wrapping."""
    layout.setdefault("align_items", "center")
    return w.HBox(list(children), layout=w.Layout(**layout))


def parse_optional_number(text, what):
    """The number typed in an optional-number box, or None when it is blank.

    Raises ValueError with a readable message for anything else (or a value <= 0).
    """
    text = str(text).strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        raise ValueError(f"{what} must be a number or left blank; got {text!r}") from None
    if not value > 0:
        raise ValueError(f"{what} must be above 0 or left blank; got {text!r}")
    return value


def format_optional_number(value):
    """The text an optional-number box shows for ``value`` (blank for None)."""
    return "" if value is None else f"{value:g}"
