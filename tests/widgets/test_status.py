"""StatusLine: messages beside the control that caused them, cleared when their cause is gone."""

import warnings

from cubeloupe.analysis import CubeloupeError, CubeloupeWarning
from cubeloupe.widgets import StatusLine


def test_an_error_clears_when_the_same_action_then_succeeds():
    status = StatusLine()
    with status.guard("fitting the baseline"):
        raise CubeloupeError("only 1 usable channel")
    assert status.level == "error" and "1 usable channel" in status.message
    with status.guard("drawing the sky image"):
        pass
    assert status.level == "error", "another action's success leaves the message"
    with status.guard("fitting the baseline"):
        pass
    assert status.message == ""


def test_a_repeated_message_is_shown_and_kept_once():
    status = StatusLine()
    for _ in range(3):
        with status.guard("reading the header"):
            warnings.warn("RESTFREQ read as RESTFRQ", CubeloupeWarning)
    assert status.level == "warning"
    assert len(status.history) == 1


def test_unexpected_errors_do_not_escape_and_say_where_the_details_are():
    status = StatusLine()
    with status.guard("drawing"):
        raise ZeroDivisionError("boom")
    assert status.level == "error" and "cubeloupe.widgets" in status.message
