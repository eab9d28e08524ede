"""Shared pieces of the widget tests: the test cube's layout and the gestures a user makes."""

N_CHAN, NY, NX = 60, 24, 28
LINE_V, LINE_SIGMA, LINE_PEAK = 39.0, 8.0, 1.0  # km/s, km/s, Jy/beam: the line peaks in channel 30


def freqs(loupe, window=0):
    return loupe._frequencies[window]


def mark_ranges(loupe):
    f = freqs(loupe)
    view = loupe.spectrum_view
    view.mode = "line-free"
    for a, b in ((0, 10), (50, 59)):
        # as the browser does: brushing starts, selection is dragged, mouse released
        view.brush.brushing = True
        view.brush.selected = [f[a], f[b]]
        view.brush.brushing = False
    view.mode = "window"
    view.brush.brushing = True
    view.brush.selected = [f[15], f[45]]
    assert loupe.line_window == [], "nothing happens while the mouse is still down"
    view.brush.brushing = False
    return [[f[10], f[0]], [f[59], f[50]]], [f[45], f[15]]
