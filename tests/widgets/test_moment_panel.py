"""MomentPanel: moment maps made in the background, equal to moment_maps; stop; clusters.

No browser: traits are set directly, or messages are fed to the interaction
widgets in the form the bqplot front end sends them.
"""

import astropy.units as u
import numpy as np
import pytest
from numpy.testing import assert_allclose

from cubeloupe.analysis import centred_limits, display_limits, open_cube
from cubeloupe.analysis.display import display_image, stretched
from cubeloupe.analysis.moments import moment_maps
from cubeloupe.widgets import Loupe

from suite_driver import mark_ranges


def test_moment_action_equals_moment_maps(loupe, line_cube):
    mark_ranges(loupe)
    loupe.clip = 3.0
    loupe.make_moments(wait=True)
    assert loupe.moment_panel.state == "done" and loupe.moment_panel.progress == pytest.approx(1.0)
    expected = moment_maps(open_cube(line_cube), u.Quantity(loupe.line_window, u.GHz),
                           line_free=u.Quantity(loupe.line_free, u.GHz), order=1,
                           rest_frequency=230.538 * u.GHz, clip=3.0)
    for key in ("m0", "m1", "m2", "m0_error"):
        assert_allclose(getattr(loupe.moments, key).value, getattr(expected, key).value, rtol=1e-6, equal_nan=True)
    # the maps are shown as soon as they are ready, moment 0 first
    assert loupe.sky_source == "moment 0"
    loupe.sky_source = "moment 1"
    # moment 1 is shown where moment 0 exceeds 3 times its error (common practice) and within the window's
    # velocities (a weighted mean of them with positive weights lies between them)
    shown = expected.m1.value.copy()
    shown[~(expected.m0.value > 3 * expected.m0_error.value)] = float("nan")
    low, high = sorted(expected.window.to_value(u.km / u.s))
    with np.errstate(invalid="ignore"):
        shown[(shown < low - 1e-3) | (shown > high + 1e-3)] = float("nan")
    assert 0 < (expected.m0.value > 3 * expected.m0_error.value).sum() < shown.size
    image, _ = display_image(shown, loupe.sky_view.max_display_size)
    # A velocity field: colour limits symmetric about zero when it spans zero, else its own range (#17).
    lo, hi = display_limits(image)
    if lo < 0 < hi:
        lo, hi = centred_limits(image)
    assert_allclose(loupe.sky_view.image.image, stretched(image, lo, hi), rtol=1e-5, equal_nan=True)
    loupe.sky_view.contour_source = "moment 0"
    assert len(loupe.sky_view.contour_mark.x) > 0
    # a stricter cut blanks more of moment 1
    before = int(np_count_finite(loupe.sky_view.maps["moment 1"]))
    loupe.moment_panel.significance = 10
    assert int(np_count_finite(loupe.sky_view.maps["moment 1"])) < before


def np_count_finite(projection):
    import numpy as np

    return np.isfinite(projection.value).sum()


@pytest.mark.slow
def test_moments_on_a_cluster_equal_those_in_the_kernel(line_cube):
    """The same suite on a dask.distributed cluster gives the same maps (issue #7)."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        on_cluster = Loupe(line_cube, client=client, first_view=False)
        mark_ranges(on_cluster)
        on_cluster.make_moments(wait=True)
        assert on_cluster.moment_panel.state == "done", on_cluster.moment_panel.status.message
    in_kernel = Loupe(line_cube, first_view=False)
    mark_ranges(in_kernel)
    in_kernel.make_moments(wait=True)
    for key in ("m0", "m1", "m2", "m0_error"):
        assert_allclose(getattr(on_cluster.moments, key).value, getattr(in_kernel.moments, key).value,
                        rtol=1e-12, equal_nan=True)


def test_a_missing_cluster_is_reported_in_the_status_line(line_cube):
    loupe = Loupe(line_cube, client="default", first_view=False)
    mark_ranges(loupe)
    loupe.make_moments(wait=True)
    assert loupe.moment_panel.state == "failed"
    assert loupe.moment_panel.status.level == "error" and "no dask.distributed Client is running" in loupe.moment_panel.status.message


def test_moments_without_a_window_say_so(loupe):
    assert loupe.make_moments(wait=True) is None
    assert loupe.moment_panel.status.level == "error" and "line window" in loupe.moment_panel.status.message
    assert not loupe.moment_panel.running


def test_moments_can_be_stopped(loupe):
    mark_ranges(loupe)
    panel = loupe.moment_panel
    panel._cancel = None
    import threading

    gate = threading.Event()
    original = panel._report_progress

    def slow_progress(fraction):
        original(fraction)
        gate.wait(2)

    panel._report_progress = slow_progress
    panel.start()
    panel.stop()
    gate.set()
    assert panel.wait(30)
    assert panel.state in ("stopped", "done")  # a tiny cube may finish in its first block
    assert not panel.running



def test_moment_1_of_the_demo_disk_is_drawn_over_the_disks_velocities():
    """Issue #17: moment 1 of the disk demo was drawn over about -2 000..+5 000 km/s, set by noise pixels.

    The demo's injected disk (its sidecar, `demo_truth`): systemic 1 462 km/s, v_flat 195 km/s at inclination
    52 deg, so line-of-sight velocities within 1 462 +- 195 sin 52 = +-154 km/s, plus 14 km/s dispersion.
    """
    from cubeloupe.analysis import demo_path, demo_truth

    truth = demo_truth("disk")
    disk = truth["disk"]
    systemic = disk["systemic_velocity"].to_value(u.km / u.s)
    reach = (disk["v_flat"] * np.sin(disk["inclination"])).to_value(u.km / u.s) + 3 * disk[
        "velocity_dispersion"].to_value(u.km / u.s)
    loupe = Loupe(demo_path("disk"))
    rest = truth["lines"][0]["rest_frequency"]

    def observed(v):  # radio convention at z = 0 (Greisen et al. 2006)
        return float((v * u.km / u.s).to(u.GHz, equivalencies=u.doppler_radio(rest)).value)

    loupe.line_free = [sorted([observed(systemic - 600), observed(systemic - 300)]),
                       sorted([observed(systemic + 300), observed(systemic + 600)])]
    loupe.line_window = sorted([observed(systemic - 250), observed(systemic + 250)])
    loupe.make_moments(wait=True)
    loupe.sky_source = "moment 1"
    low, high = loupe.sky_view.shown_limits
    assert high - low < 1000
    assert systemic - reach - 10 <= low < high <= systemic + reach + 10, (low, high)
