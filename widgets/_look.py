"""Colours and small layout helpers shared by the widgets (the suite's own look).

Colour ramps and region colours were picked for this project: a deep-ink to
warm-sand ramp for images and a set of region colours that stay apart on it.
"""

# Image colour ramps (dark to light); each is a list of CSS colours for bqplot's ColorScale.
RAMPS = {
    "ink to sand": ["#0b1026", "#22305e", "#2f6f8f", "#58a89a", "#b9d88a", "#f3e7b3", "#fffdf4"],
    "ember": ["#0d0a0b", "#3b1220", "#7d2131", "#c4502b", "#eb9b3f", "#f7d98b", "#fffbea"],
    "glacier": ["#081018", "#163046", "#2c5d7c", "#5692b3", "#93c4dc", "#d2ecf5", "#ffffff"],
    "grey": ["#000000", "#ffffff"],
}

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
