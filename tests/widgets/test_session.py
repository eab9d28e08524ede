"""Sessions: save the suite's state to a versioned JSON file and open it again, whole or not at all (#19)."""

import json
import os
import shutil
from pathlib import Path

import astropy.units as u
import numpy as np
import pytest
from regions import PixCoord, RectanglePixelRegion

from cubeloupe.analysis import CubeFileError, CubeloupeError, OutputExistsError, demo_path
from cubeloupe.widgets import Loupe
from cubeloupe.widgets.session import (
    LOUPE_SETTINGS, SESSION_VERSION, VIEW_SETTINGS, SessionError, SessionState, read_session, same_regions,
    session_state,
)
from session_steps import CASES, drive, same_map

SESSIONS = Path(__file__).resolve().parents[1] / "data" / "sessions"


def _settings(loupe):
    return {name: getattr(loupe, name) for name, _, _ in LOUPE_SETTINGS}


def _views(loupe):
    return {part: {name: getattr(getattr(loupe, part), name) for name, _, _ in table}
            for part, table in VIEW_SETTINGS.items()}


def _same_rows(got, expected):
    assert len(got) == len(expected)
    for g, e in zip(got, expected):
        for key, value in e.items():
            assert g[key] == value or (np.isnan(g[key]) and np.isnan(value)), (key, g[key], value)


def test_every_setting_a_user_can_change_is_in_the_session():
    """A new trait on the suite or a part must be saved, be marked "(read-only)" in its help, or be listed here."""
    import ipywidgets as w

    # Derived from other state, shown only, or transient while a gesture lasts (not a user's setting).
    not_settings = {"regions", "moments", "measurements", "velocity_reference", "maps", "outlines", "pointer_text",
                    "polygon_vertices", "source", "max_display_size", "display_factor", "shown_limits", "state",
                    "running", "progress", "result", "window_index", "candidates", "hover_text", "lines",
                    "marker_reach", "head_reach", "velocity_only", "brushing", "cursor_frequency", "x_range",
                    "reshape", "readout", "reference_label", "other_bands", "go_message", "n_channels",
                    "show_window", "rows", "clip", "channel", "window", "z", "velocity_offset", "reference_line",
                    "rest_frequency", "convention", "axis_kind", "line_free", "line_window", "peaks",
                    "baseline_order", "show_subtracted", "magnification", "cosmology"}
    saved = {name for name, _, _ in LOUPE_SETTINGS}
    for part, table in VIEW_SETTINGS.items():
        saved |= {name for name, _, _ in table}
    base = set(w.VBox.class_trait_names())
    loupe_names = {n for n in Loupe.class_trait_names() if n not in base}
    assert loupe_names - saved - {"regions", "moments", "measurements", "velocity_reference"} == set()
    # The newer parts (#16, #18): a PV path's width is the sky path tool's (saved through the PV tab, linked both
    # ways); the path being clicked is a gesture; the PV tab's axis follows the suite's axis choice.
    not_settings |= {"vertices", "axis"}
    for part in ("sky_view", "line_overlay", "spectrum_view", "region_list", "moment_panel", "channel_bar",
                 "measurement_table", "smoothing", "fit_panel", "path_tool", "pv_panel", "channel_map_panel",
                 "excitation_panel"):
        cls = {"sky_view": "SkyView", "line_overlay": "LineOverlay", "spectrum_view": "SpectrumView",
               "region_list": "RegionList", "moment_panel": "MomentPanel", "channel_bar": "ChannelBar",
               "measurement_table": "MeasurementTable", "smoothing": "SmoothingChoice", "fit_panel": "FitPanel",
               "path_tool": "PathTool", "pv_panel": "PVPanel", "channel_map_panel": "ChannelMapPanel",
               "excitation_panel": "ExcitationPanel"}[part]
        import cubeloupe.widgets as widgets
        traits = getattr(widgets, cls).class_traits()
        names = {n for n, t in traits.items() if n not in base and not n.startswith("_")
                 and "read-only" not in (t.help or "")}
        assert names - saved - not_settings == set(), f"{cls} settings not in sessions"


def _set_everything(loupe):
    """Every setting a user can change, away from its default."""
    f = loupe.spectrum_view.band
    loupe.line_overlay.velocity_range = 2500.0
    loupe.velocity_offset = 310.0
    loupe.axis_kind = "velocity"
    loupe.show_subtracted = True
    loupe.peaks = [float(np.mean(f))]
    loupe.magnification = 3.5
    loupe.cosmology = "WMAP9"
    loupe.sky_view.palette = [p for p in type(loupe.sky_view).class_traits()["palette"].values
                              if p != loupe.sky_view.palette][0]
    loupe.sky_view.lower_percentile = 2.0
    loupe.sky_view.upper_percentile = 98.0
    loupe.sky_view.vmin = -0.001
    loupe.sky_view.vmax = 0.02
    loupe.sky_view.show_beam = False
    loupe.sky_view.contour_source = "moment 0"
    loupe.sky_view.contour_levels = [0.1, 0.2, 0.4]
    loupe.line_overlay.species = ["CO"]
    loupe.line_overlay.spin_isomer = "para"
    loupe.line_overlay.max_E_up = 150.0
    loupe.spectrum_view.mode = "peak" if "peak" in type(loupe.spectrum_view).class_traits()["mode"].values \
        else loupe.spectrum_view.mode
    loupe.region_list.selected = "oval"
    loupe.moment_panel.significance = 4.5
    loupe.sky_view.velocity_palette = [p for p in type(loupe.sky_view).class_traits()["velocity_palette"].values
                                       if p != loupe.sky_view.velocity_palette][0]
    loupe.channel_bar.play_interval = 120
    # The newer parts (#16, #18): smoothing and fit, a PV path 1.5 arcsec wide over the whole band, channel maps of
    # 9 single channels labelled in frequency, and a population diagram of three CO lines with its prediction.
    loupe.smoothing.kernel = "boxcar"
    loupe.smoothing.width = 5.0
    loupe.fit_panel.model = "1"
    loupe.pv_panel.only_line_window = False
    loupe.pv_panel.set_path([[3.0, 4.0], [20.5, 18.0], [30.0, 10.0]], width=1.5 * u.arcsec, window=0)
    assert loupe.pv_panel.slice is not None, loupe.pv_panel.status.message
    panel = loupe.channel_map_panel
    panel.n, panel.average, panel.label_in = 9, False, "frequency"
    panel.make(wait=True)
    assert panel.state == "done", panel.status.message
    excitation = loupe.excitation_panel
    excitation.limit_sigma, excitation.spin = 2.5, "separate"
    # Integrated intensities of a CO ladder (K km/s), as a user might have measured them.
    excitation.picked = [{"region": "box", "window": 0, "line": name, "flux": flux, "flux_error": 0.1,
                          "flux_unit": "K km / s", "upper_limit": False}
                         for name, flux in (("CO J=1-0", 1.2), ("CO J=2-1", 3.9), ("CO J=3-2", 6.1))]
    assert "CO" in excitation.diagrams, excitation.status.message
    excitation.show_prediction = True
    excitation.prediction_temperature, excitation.prediction_amount, excitation.prediction_fwhm = 42.0, 15.5, 150.0
    assert loupe.status.level != "error", loupe.status.message


@pytest.mark.parametrize("case", ["disk", "lensed_pair"])
def test_session_round_trips_every_setting(case, tmp_path):
    loupe = drive(case)
    _set_everything(loupe)
    path = loupe.save_session(tmp_path / "work.cubeloupe.json")
    again = Loupe.from_session(path)
    assert _settings(again) == _settings(loupe)
    assert _views(again) == _views(loupe)
    assert again.regions == loupe.regions
    # Drawn regions are used as drawn again: the same pixels, hence the same spectra and numbers.
    for name in loupe.region_list.names:
        for a, b in zip(again.spectra[name], loupe.spectra[name]):
            assert (a is None and b is None) or np.array_equal(a.value, b.value)
    _same_rows(again.measurements, loupe.measurements)
    for key in ("m0", "m1", "m2"):
        same_map(getattr(again.moments, key).value, getattr(loupe.moments, key).value, loupe.moments.n_channels)
    for name, shown in loupe.moment_panel.maps.items():  # as shown: moments 1 and 2 where moment 0 is significant
        same_map(again.moment_panel.maps[name].value, shown.value, loupe.moments.n_channels)
    assert SessionState.from_loupe(again).to_dict() == SessionState.from_loupe(loupe).to_dict()
    # The newer parts give the same pictures and numbers again (#16, #18).
    np.testing.assert_array_equal(again.pv_panel.slice.data.value, loupe.pv_panel.slice.data.value)
    assert again.sky_view.path_tool.path == loupe.pv_panel.path and again.sky_view.path_tool.width == 1.5
    assert again.sky_view.path_tool.width_unit == "arcsec"
    assert again.channel_map_panel.made_with == loupe.channel_map_panel.made_with
    np.testing.assert_array_equal(again.channel_map_panel.panels.images.value,
                                  loupe.channel_map_panel.panels.images.value)
    assert again.excitation_panel.diagrams["CO"].temperature == loupe.excitation_panel.diagrams["CO"].temperature
    assert again.excitation_panel.prediction()[0][0][1].tolist() == loupe.excitation_panel.prediction()[0][0][1].tolist()


@pytest.mark.parametrize("case", sorted(CASES))
def test_every_demo_session_reopens_with_the_same_numbers(case, tmp_path):
    loupe = drive(case)
    again = Loupe.from_session(loupe.save_session(tmp_path / "s.cubeloupe.json"))
    assert _settings(again) == _settings(loupe) and again.regions == loupe.regions
    _same_rows(again.measurements, loupe.measurements)
    same_map(again.moments.m0.value, loupe.moments.m0.value, loupe.moments.n_channels)


def test_moment_maps_keep_the_settings_they_were_made_with(tmp_path):
    """Maps made before the line window changed are restored as made, with the suite's later window."""
    loupe = drive("disk")
    made = loupe.moments.m0.value.copy()
    f = loupe.spectrum_view.band
    loupe.line_window = [f[0] + 0.3 * (f[1] - f[0]), f[0] + 0.6 * (f[1] - f[0])]
    again = Loupe.from_session(loupe.save_session(tmp_path / "s.cubeloupe.json"))
    same_map(again.moments.m0.value, made, loupe.moments.n_channels)
    assert again.line_window == loupe.line_window


def test_session_file_format(tmp_path):
    loupe = drive("disk")
    path = loupe.save_session(tmp_path / "s.cubeloupe.json")
    data = json.loads(path.read_text())
    assert data["format"] == "cubeloupe-session" and data["version"] == SESSION_VERSION
    assert data["cubeloupe_version"]
    # the cube path is relative to the session file where possible, and absolute beside it
    assert not os.path.isabs(data["cubes"][0]["path"])
    assert os.path.samefile(tmp_path / data["cubes"][0]["path"], demo_path("disk"))
    assert data == session_state(loupe, relative_to=tmp_path)
    json.dumps(session_state(loupe))  # plain JSON, for exports' metadata


def test_writing_is_atomic_and_never_overwrites(tmp_path):
    loupe = drive("disk")
    path = tmp_path / "s.cubeloupe.json"
    path.write_text("precious")
    with pytest.raises(OutputExistsError, match="overwrite=True"):
        loupe.save_session(path)
    assert path.read_text() == "precious"
    loupe.save_session(path, overwrite=True)
    assert json.loads(path.read_text())["format"] == "cubeloupe-session"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.cubeloupe.json"], "no temporary file left"


def test_a_moved_folder_of_cubes_and_session_opens(tmp_path):
    """Paths relative to the session file: the folder can move as a whole (common practice for projects)."""
    (tmp_path / "a" / "cubes").mkdir(parents=True)
    cube = shutil.copy(demo_path("disk"), tmp_path / "a" / "cubes" / "disk.fits")
    loupe = Loupe(cube, first_view=False)
    loupe.add_region(RectanglePixelRegion(PixCoord(35.5, 35.5), width=6, height=6), name="core")
    loupe.save_session(tmp_path / "a" / "s.cubeloupe.json")
    shutil.move(tmp_path / "a", tmp_path / "b")
    again = Loupe.from_session(tmp_path / "b" / "s.cubeloupe.json")
    assert Path(again.cubes[0].meta["cubeloupe_source"]["path"]).resolve() == \
        (tmp_path / "b" / "cubes" / "disk.fits").resolve()
    assert again.regions == loupe.regions


@pytest.fixture
def saved(tmp_path):
    loupe = drive("disk")
    path = loupe.save_session(tmp_path / "s.cubeloupe.json")
    return path, json.loads(path.read_text())


def _tampered(saved, change):
    path, data = saved
    change(data)
    path.write_text(json.dumps(data))
    return path


@pytest.mark.parametrize("change, error, match", [
    (lambda d: d.update(version=SESSION_VERSION + 1), SessionError, f"version {SESSION_VERSION + 1}.*update cubeloupe"),
    (lambda d: d["views"]["pv_panel"].update(path=[[1.0, 2.0]]), SessionError, r"views\.pv_panel\.path"),
    (lambda d: d["views"]["pv_panel"].update(path_window=4), SessionError, r"views\.pv_panel\.path_window.*1 cube"),
    (lambda d: d["views"]["channel_map_panel"].update(n=0), SessionError, r"views\.channel_map_panel\.n"),
    (lambda d: d["views"]["excitation_panel"].update(picked=[{"line": "CO J=1-0"}]), SessionError,
     r"views\.excitation_panel\.picked"),
    (lambda d: d["views"]["excitation_panel"].update(spin="both"), SessionError, r"views\.excitation_panel\.spin"),
    (lambda d: d.update(channel_maps={"window": 0}), SessionError, r"channel_maps\.line_window' is missing"),
    (lambda d: d.update(format="something else"), SessionError, "not a cubeloupe session"),
    (lambda d: d["settings"].update(z="two"), SessionError, r"settings\.z"),
    (lambda d: d["settings"].pop("line_window"), SessionError, r"settings\.line_window' is missing"),
    (lambda d: d["settings"].update(convention="sideways"), SessionError, r"settings\.convention"),
    (lambda d: d["settings"].update(window=3), SessionError, r"settings\.window.*1 cube"),
    (lambda d: d["settings"].update(baseline_order=9), SessionError, r"settings\.baseline_order"),
    (lambda d: d["regions"][0].update(kind="star"), SessionError, r"regions\[0\]\.kind"),
    (lambda d: d["regions"][0].pop("ra"), SessionError, r"regions\[0\]\.ra"),
    (lambda d: d["regions"][0]["drawn"].update(width=-2), SessionError, r"regions\[0\]\.drawn\.width"),
    (lambda d: d["regions"].append(dict(d["regions"][0])), SessionError, "two regions are named"),
    (lambda d: d["views"]["sky_view"].update(vmin="low"), SessionError, r"views\.sky_view\.vmin"),
    (lambda d: d.update(extra=1), SessionError, r"unknown field\(s\) \['extra'\]"),
    (lambda d: d.update(moments=None), SessionError, "sky_source.*no moment maps"),
    (lambda d: d["cubes"][0].update(path="gone.fits", absolute="/nowhere/gone.fits"), CubeFileError,
     "window 0 is missing.*gone.fits"),
])
def test_tampered_file_gives_a_clear_error(saved, change, error, match):
    path = _tampered(saved, change)
    with pytest.raises(error, match=match):
        read_session(path).restore(_Counting)
    assert issubclass(error, CubeloupeError)
    assert not _Counting.made, "nothing is built from a file that does not check"


def test_not_json_and_no_file(tmp_path):
    bad = tmp_path / "bad.cubeloupe.json"
    bad.write_text("{ not json")
    with pytest.raises(SessionError, match="not valid JSON"):
        Loupe.from_session(bad)
    with pytest.raises(CubeFileError, match="no session file"):
        Loupe.from_session(tmp_path / "absent.json")


class _Counting(Loupe):
    made = []

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        _Counting.made.append(self)


@pytest.fixture(autouse=True)
def _no_suites_counted():
    _Counting.made.clear()
    yield
    _Counting.made.clear()


def test_refused_value_closes_the_half_built_suite(saved):
    """A value that checks as a field but that the suite refuses: the new suite is closed, the error names it."""
    path = _tampered(saved, lambda d: d["views"]["sky_view"].update(stretch="sideways"))
    with pytest.raises(SessionError, match=r"views\.sky_view\.stretch = 'sideways'"):
        read_session(path).restore(_Counting)
    assert len(_Counting.made) == 1 and _Counting.made[0].comm is None, "the half-built suite is closed"


def test_another_cube_at_the_path_is_refused(saved, tmp_path):
    path = _tampered(saved, lambda d: d["cubes"][0].update(shape=[10, 72, 72]))
    with pytest.raises(SessionError, match=r"shape \[100, 72, 72\].*another file"):
        Loupe.from_session(path)


@pytest.mark.parametrize("fixture", sorted(p.name for p in SESSIONS.glob("*.cubeloupe.json")))
def test_sessions_of_earlier_versions_still_open(fixture):
    """Files written by earlier versions (kept in tests/data/sessions) open with every setting as saved."""
    data = json.loads((SESSIONS / fixture).read_text())
    loupe = Loupe.from_session(SESSIONS / fixture)
    assert _settings(loupe) == data["settings"]
    # The sky numbers of drawn regions to 1e-12 (placed again from their pixels: the last bit may differ
    # between machines); names, kinds and colours exactly.
    assert same_regions(loupe.regions, [{k: v for k, v in r.items() if k != "drawn"} for r in data["regions"]])
    assert not same_regions(loupe.regions, [dict(r, name=r["name"] + "x") for r in loupe.regions])
    assert not same_regions(loupe.regions, [{k: v + 1e-9 * abs(v) if isinstance(v, float) else v
                                             for k, v in r.items()} for r in loupe.regions])
    for part, values in data["views"].items():
        for name, value in values.items():
            assert getattr(getattr(loupe, part), name) == value
    assert loupe.measurements and loupe.moments is not None


def test_a_session_of_before_the_newer_parts_opens_with_their_defaults():
    """The version 1 fixture predates line families (#15), PV paths, channel maps and population diagrams (#16,
    #18): it opens with each at the default of a new suite."""
    data = json.loads((SESSIONS / "v1-disk.cubeloupe.json").read_text())
    assert data["version"] == 1 and "families" not in data["views"]["line_overlay"] and "pv_panel" not in data["views"]
    loupe = Loupe.from_session(SESSIONS / "v1-disk.cubeloupe.json")
    fresh = Loupe(demo_path("disk"), first_view=False)
    assert loupe.line_overlay.families == fresh.line_overlay.families
    assert loupe.line_overlay.hyperfine_components == fresh.line_overlay.hyperfine_components
    for part in ("pv_panel", "channel_map_panel", "excitation_panel", "smoothing", "fit_panel"):
        for name, _, _ in VIEW_SETTINGS[part]:
            assert getattr(getattr(loupe, part), name) == getattr(getattr(fresh, part), name), (part, name)
    assert loupe.pv_panel.slice is None and loupe.channel_map_panel.panels is None
    assert session_state(loupe)["version"] == SESSION_VERSION and session_state(loupe)["channel_maps"] is None


def _line_list(folder):
    """A user's line list of one invented line (ECSV, the catalog's columns; see read_line_list)."""
    from astropy.table import Table
    import astropy.units as u

    path = folder / "my_lines.ecsv"
    Table({"species": ["XY"], "transition": ["3-2"], "rest_frequency": [230.1 * 1e9] * u.Hz}).write(path)
    return path


def test_catalog_files_are_saved_and_given_back(line_cube, tmp_path):
    """Regression test for #19: a suite's extra line lists were not saved, so a restore lost their lines."""
    lines = _line_list(tmp_path)
    loupe = Loupe(line_cube, catalog=str(lines), first_view=False)
    assert "XY 3-2" in list(loupe.catalog["name"])
    saved = loupe.save_session(tmp_path / "with_lines.cubeloupe.json")
    data = json.loads(saved.read_text())
    assert data["catalog"] == [{"path": "my_lines.ecsv", "absolute": str(lines)}] and data["client"] is False
    again = Loupe.from_session(saved)
    assert "XY 3-2" in list(again.catalog["name"])
    # A moved folder keeps working (the path is relative to the session file), a missing list is named.
    moved = tmp_path / "moved"
    moved.mkdir()
    for name in ("with_lines.cubeloupe.json", "my_lines.ecsv"):
        shutil.copy(tmp_path / name, moved / name)
    data["cubes"][0]["path"] = os.path.relpath(data["cubes"][0]["absolute"], moved)
    (moved / "with_lines.cubeloupe.json").write_text(json.dumps(data))
    (tmp_path / "my_lines.ecsv").unlink()
    assert "XY 3-2" in list(Loupe.from_session(moved / "with_lines.cubeloupe.json").catalog["name"])
    (moved / "my_lines.ecsv").unlink()
    with pytest.raises(CubeFileError, match="catalog"):
        Loupe.from_session(moved / "with_lines.cubeloupe.json")


def test_a_line_list_given_in_memory_is_noted_and_must_be_given_again(line_cube, tmp_path):
    from cubeloupe.analysis import read_line_list

    table = read_line_list(_line_list(tmp_path))
    loupe = Loupe(line_cube, catalog=[table], first_view=False)
    saved = loupe.save_session(tmp_path / "in_memory.cubeloupe.json")
    assert json.loads(saved.read_text())["catalog"] == [{"in_memory": "QTable"}]
    with pytest.raises(SessionError, match="catalog=") as refused:
        Loupe.from_session(saved)
    assert "catalog[0]" in str(refused.value)
    assert "XY 3-2" in list(Loupe.from_session(saved, catalog=[table]).catalog["name"])


def test_a_client_is_noted_not_saved(line_cube, tmp_path):
    """The session and the script say a dask.distributed client made the maps; a restore says it computes here."""
    from cubeloupe.widgets.replay import to_code

    class StandIn:  # only its presence is recorded: the session never serialises a client
        pass

    loupe = Loupe(line_cube, client=StandIn(), first_view=False)
    saved = loupe.save_session(tmp_path / "client.cubeloupe.json")
    assert json.loads(saved.read_text())["client"] is True
    assert "StandIn" not in saved.read_text()
    assert "dask.distributed client" in to_code(loupe)
    again = Loupe.from_session(saved)
    assert again.client is None and "dask.distributed client" in again.moment_panel.status.message


def test_session_fields_catalog_and_client_are_checked(tmp_path):
    good = json.loads((SESSIONS / "v1-disk.cubeloupe.json").read_text())
    for field, value, words in (("catalog", "lines.ecsv", "must be a list"), ("catalog", [{"path": ""}], "path"),
                                ("catalog", [{"path": "a.ecsv", "extra": 1}], "unknown"), ("client", "yes", "true or false")):
        with pytest.raises(SessionError, match=words):
            SessionState.from_dict({**good, field: value})
    # A version 1 session written before these fields existed still reads: no extra list, no client.
    state = SessionState.from_dict({k: v for k, v in good.items() if k not in ("catalog", "client")})
    assert state.catalog == () and state.client is False


def test_a_setting_json_cannot_hold_is_refused_by_name(line_cube, tmp_path):
    """A ticked line whose flux is NaN (a failed measurement) cannot go into JSON: the message names it."""
    loupe = Loupe(line_cube, first_view=False)
    loupe.excitation_panel.picked = [{"region": "r", "window": 0, "line": "CO J=2-1", "flux": float("nan"),
                                      "flux_error": 0.1, "flux_unit": "K km / s", "upper_limit": False}]
    with pytest.raises(SessionError, match=r"excitation_panel\.picked.*untick"):
        loupe.save_session(tmp_path / "s.cubeloupe.json")
    assert not (tmp_path / "s.cubeloupe.json").exists()
