"""update_mark: what the browser is sent when a mark is redrawn (#20)."""

import numpy as np
from bqplot import Label, Lines, Scatter

from cubeloupe.widgets.mark_update import same_value, update_mark


def _messages(mark):
    """Record the state messages ``mark`` sends (each one is a redraw in the browser)."""
    sent = []
    original = mark.send_state
    mark.send_state = lambda key=None: (sent.append(sorted(key) if key else None), original(key=key))
    return sent


def test_x_and_y_changed_together_go_in_one_message():
    mark = Lines(x=[0.0, 1.0], y=[0.0, 1.0])
    sent = _messages(mark)
    assert update_mark(mark, x=[0.0, 2.0], y=[5.0, 6.0]) == ["x", "y"]
    assert sent == [["x", "y"]]
    np.testing.assert_array_equal(mark.x, [0.0, 2.0])
    np.testing.assert_array_equal(mark.y, [5.0, 6.0])


def test_equal_data_are_not_sent_again_even_with_nan():
    # A spectrum with blanked channels holds NaN: traitlets' own comparison calls it changed every time.
    y = np.array([1.0, np.nan, 3.0])
    mark = Lines(x=[0.0, 1.0, 2.0], y=y)
    sent = _messages(mark)
    assert update_mark(mark, x=[0.0, 1.0, 2.0], y=y.copy(), colors=list(mark.colors)) == []
    assert sent == []


def test_only_what_changed_is_sent():
    heads = Scatter(x=[1.0, 2.0], y=[0.9, 0.9], names=["CO", "CS"])
    sent = _messages(heads)
    update_mark(heads, x=[1.5, 2.5], y=[0.9, 0.9], names=["CO", "CS"])
    assert sent == [["x"]]
    label = Label(x=[1.0], y=[0.9], text=["CO"])
    sent = _messages(label)
    update_mark(label, x=[1.0], y=[0.9], text=["HCN"])
    assert sent == [["text"]]


def test_same_value():
    assert same_value([], np.array([]))
    assert not same_value([1.0], [1.0, 2.0])
    assert not same_value(None, [])
    assert same_value(["a", "b"], np.array(["a", "b"]))
    assert not same_value([0.0, 1.0], [0.0, 1.5])
