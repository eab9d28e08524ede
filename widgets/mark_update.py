"""update_mark: set several traits of one bqplot mark in one message, skipping those that did not change.

Why a helper (#20): every message a mark receives makes the browser redraw it, so ``x`` and ``y`` set
one after the other draw the mark twice (the first time with mismatched lengths). And traitlets'
array comparison counts an array holding NaN as changed even when it is equal, so such data were sent
again on every redraw. Here the traits that really changed are set inside one ``hold_sync()``: one
message, one redraw, no bytes for what the browser already has.
"""

import numpy as np

__all__ = ["SPARE_MARKS", "same_value", "update_mark"]

#: Empty marks a figure keeps waiting for the next regions' spectra and outlines (#20): filling one is
#: a data update; a new one is a new model and a new mark list for the browser to lay out.
SPARE_MARKS = 5


def same_value(old, new):
    """True when a mark trait value ``new`` equals ``old`` (arrays compared element-wise, NaN equal to NaN).

    Examples
    --------
    >>> same_value([1.0, float("nan")], np.array([1.0, np.nan]))
    True
    >>> same_value(["CO"], ["CS"])
    False
    """
    if old is None or new is None:
        return old is new
    try:
        a, b = np.asarray(old), np.asarray(new)
    except (TypeError, ValueError):
        return False
    if a.shape != b.shape:
        return False
    if a.size == 0:
        return True
    if a.dtype.kind in "fiub" and b.dtype.kind in "fiub":
        return bool(np.array_equal(a, b, equal_nan=a.dtype.kind == "f" or b.dtype.kind == "f"))
    try:
        return bool(np.all(a == b))
    except (TypeError, ValueError):
        return False


def update_mark(mark, **values):
    """Set the traits ``values`` of ``mark`` that changed, all in one message; returns the names set.

    Examples
    --------
    >>> from bqplot import Lines
    >>> mark = Lines(x=[0.0, 1.0], y=[1.0, 2.0])
    >>> update_mark(mark, x=[0.0, 1.0], y=[1.0, 3.0])
    ['y']
    """
    changed = {name: value for name, value in values.items() if not same_value(getattr(mark, name), value)}
    if changed:
        with mark.hold_sync():
            for name, value in changed.items():
                setattr(mark, name, value)
    return list(changed)
