"""`to_code`: the suite's state as a script that, run in a fresh interpreter, makes the same numbers (#19)."""

import ast
import json
import subprocess
import sys
import warnings

import numpy as np
import pytest

from cubeloupe.analysis import CubeloupeWarning
from cubeloupe.widgets.replay import to_code
from session_steps import CASES, drive, same_map

# Run in a fresh interpreter: the script, then what it made, written for the test to compare.
RUNNER = """
import json, runpy, sys
import numpy as np
from cubeloupe.widgets.measurement_table import rows_from_table
ns = runpy.run_path(sys.argv[1], run_name="__main__")
table, moments, loupe = ns["table"], ns["moments"], ns["loupe"]
rows = rows_from_table(table)
for row, r in zip(rows, table):
    row["centroid_error"] = float(r["centroid_error"].value)
    row["fwhm_error"] = float(r["fwhm_error"].value)
arrays = {f"moment_{k}": np.asarray(getattr(moments, k).value) for k in ("m0", "m1", "m2", "m0_error", "rms")}
for name, spectra in ns["spectra"].items():
    for i, s in enumerate(spectra):
        if s is not None:
            arrays[f"spectrum_{name}_{i}"] = np.asarray(s.value)
np.savez(sys.argv[2] + ".npz", **arrays)
with open(sys.argv[2] + ".json", "w") as out:
    json.dump({"rows": rows, "restored_rows": loupe.measurements,
               "restored_regions": loupe.regions, "restored_status": loupe.status.history, "restored_m0": loupe.moments.m0.value.tolist()}, out)
"""


def _same(a, b):
    """Equal bit for bit, NaN equal to NaN."""
    return a == b or (isinstance(a, float) and isinstance(b, float) and np.isnan(a) and np.isnan(b))


def _same_rows(got, expected):
    assert len(got) == len(expected)
    for g, e in zip(got, expected):
        for key, value in e.items():
            assert _same(g[key], value), (key, g[key], value)


@pytest.fixture(scope="module", params=sorted(CASES))
def driven(request):
    return request.param, drive(request.param)


def test_replay_reproduces_table_and_moments_bit_for_bit(driven, tmp_path):
    """Fluxes, errors, centroids, widths and spectra of the script equal the suite's bit for bit; moment maps too,
    or to float32 rounding for a float32 cube (see `same_map`).

    The script calls the same public functions with the same float64 values (floats are written with
    Python's round-tripping repr), so the table admits no rounding at all (NaN where the suite has NaN).
    """
    case, loupe = driven
    script = tmp_path / f"{case}.py"
    script.write_text(to_code(loupe))
    runner = tmp_path / "runner.py"
    runner.write_text(RUNNER)
    done = subprocess.run([sys.executable, str(runner), str(script), str(tmp_path / "out")],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-3000:]
    made = json.loads((tmp_path / "out.json").read_text())
    arrays = np.load(tmp_path / "out.npz")
    _same_rows(made["rows"], loupe.measurements)
    assert all(np.isfinite(row["centroid_error"]) for row in made["rows"] if np.isfinite(row["flux"]))
    for key in ("m0", "m1", "m2", "m0_error", "rms"):
        same_map(arrays[f"moment_{key}"], getattr(loupe.moments, key).value, loupe.moments.n_channels)
    for name, spectra in loupe.spectra.items():
        for i, s in enumerate(spectra):
            if s is not None:
                np.testing.assert_array_equal(arrays[f"spectrum_{name}_{i}"], s.value)
    # The Loupe the script builds shows the same state and numbers.
    assert made["restored_rows"], made["restored_status"]
    _same_rows(made["restored_rows"], loupe.measurements)
    assert made["restored_regions"] == loupe.regions
    same_map(np.array(made["restored_m0"], dtype=float), loupe.moments.m0.value,
              loupe.moments.n_channels)


def test_script_uses_only_public_names_in_a_fixed_order(driven):
    case, loupe = driven
    code = to_code(loupe)
    assert code == to_code(loupe), "the same state gives the same text"
    tree = ast.parse(code)
    imported = [(node.module, alias.name) for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)
                for alias in node.names]
    assert all(not name.startswith("_") for _, name in imported)
    assert {module for module, _ in imported} <= {"astropy.coordinates", "regions", "cubeloupe.analysis",
                                                    "cubeloupe.widgets"}
    attributes = [node.attr for node in ast.walk(tree) if isinstance(node, ast.Attribute)]
    assert not [a for a in attributes if a.startswith("_")]
    for call in ("open_cube(", "region_spectrum(", "measurement_table(", "moment_maps(", "Loupe("):
        assert call in code


def test_drawn_regions_are_written_as_drawn_with_their_sky_shape(driven):
    """A drawn shape is used as its exact pixel shape; its sky equivalent sits beside it."""
    case, loupe = driven
    code = to_code(loupe)
    ns = {}
    region_part = code[:code.index("# The spectrum of every region")]
    exec(compile(region_part.replace("cubes = [open_cube(path) for path in paths]", "cubes = None"), "script", "exec"),
         ns)
    for name in ("box", "oval", "outline"):
        shape = loupe.region_list.region_for(name, loupe.cubes[0])
        drawn = ns["as_drawn"][name]
        assert type(drawn) is type(shape)
        assert drawn.center == shape.center if hasattr(shape, "center") else \
            np.array_equal(drawn.vertices.x, shape.vertices.x)
        # the sky shape is the region's own dict (what another grid of the field gets)
        assert ns["on_sky"][name] == loupe.region_list.sky_region(name)
    assert set(ns["on_sky"]) == set(loupe.region_list.names)


def test_cube_made_in_memory_has_no_script(line_cube):
    """A cube with no file cannot be opened again by a script: the message says so."""
    from spectral_cube import SpectralCube

    from cubeloupe.analysis import open_cube
    from cubeloupe.widgets import Loupe
    from cubeloupe.widgets.session import SessionError

    opened = open_cube(line_cube)
    in_memory = SpectralCube(data=opened.filled_data[:], wcs=opened.wcs)
    loupe = Loupe(in_memory, first_view=False)
    with pytest.raises(SessionError, match="made in memory"):
        to_code(loupe)


def test_script_gives_the_suite_its_extra_line_lists(line_cube, tmp_path):
    """Regression test for #19: the script's Loupe lacked the catalog the suite was given."""
    import astropy.units as u
    from astropy.table import Table

    from cubeloupe.widgets import Loupe

    lines = tmp_path / "my_lines.ecsv"
    Table({"species": ["XY"], "transition": ["3-2"], "rest_frequency": [230.1] * u.GHz}).write(lines)
    loupe = Loupe(line_cube, catalog=[str(lines)], first_view=False)
    code = to_code(loupe)
    assert "catalog=catalog" in code and repr(str(lines)) in code
    ns = {}
    exec(compile(code, "script", "exec"), ns)
    assert "XY 3-2" in list(ns["loupe"].catalog["name"])


def test_moments_as_shown_lie_within_the_window(driven):
    """The script's moments 1 and 2 are the suite's shown maps (significant, moment 1 within the window)."""
    case, loupe = driven
    code = to_code(loupe)
    assert "within_window(" in code
    ns = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", CubeloupeWarning)  # the demo's blanked pixels, warned in the suite already
        exec(compile(code, "script", "exec"), ns)
    for name, key in (("moment 1", "shown_m1"), ("moment 2", "shown_m2")):
        same_map(np.asarray(ns[key].value), loupe.moment_panel.maps[name].value, loupe.moments.n_channels)
    low, high = sorted(loupe.moments.window.value)
    m1 = ns["shown_m1"].value[np.isfinite(ns["shown_m1"].value)]
    # An intensity-weighted mean of the window's velocities with positive weights lies between them.
    assert np.all((m1 >= low - 1e-3) & (m1 <= high + 1e-3))
    if case == "disk":  # the disk's rotation is seen (the lensed demo's line-free windows have none)
        assert m1.size > 100 and m1.max() - m1.min() > 100


# The newer parts (#16, #18): the script's pv_slice, channel_maps, population_diagram and lte_spectrum, written for
# the test to compare with the suite's.
LINE_VIEWS_RUNNER = """
import json, runpy, sys
import numpy as np
ns = runpy.run_path(sys.argv[1], run_name="__main__")
loupe, diagrams = ns["loupe"], ns["diagrams"]
np.savez(sys.argv[2] + ".npz", pv=ns["pv"].data.value, maps=ns["channel_map_figure"].channel_panels.images.value,
         prediction=np.concatenate([p.value for p in ns["prediction"]]),
         restored_pv=loupe.pv_panel.slice.data.value, restored_maps=loupe.channel_map_panel.panels.images.value)
with open(sys.argv[2] + ".json", "w") as out:
    json.dump({"T": {k: float(d.temperature.value) for k, d in diagrams.items()},
               "N": {k: float(d.column_density.value) for k, d in diagrams.items()},
               "restored_picked": loupe.excitation_panel.picked,
               "restored_prediction": [loupe.excitation_panel.prediction_temperature,
                                       loupe.excitation_panel.prediction_amount],
               "restored_made_with": loupe.channel_map_panel.made_with}, out)
"""


def test_script_remakes_the_pv_slice_channel_maps_population_diagram_and_prediction(tmp_path):
    """Run in a fresh interpreter, the script's pv_slice, channel_maps, population_diagram and lte_spectrum equal
    the suite's bit for bit (the same public functions on the same float64 values), and its Loupe shows them."""
    import astropy.units as u

    loupe = drive("disk")
    loupe.pv_panel.set_path([[3.0, 4.0], [40.5, 38.0], [60.0, 30.0]], width=0.5 * u.arcsec, window=0)
    panel = loupe.channel_map_panel
    panel.n, panel.label_in = 9, "frequency"
    panel.make(wait=True)
    excitation = loupe.excitation_panel
    excitation.prediction_delay = 0
    # Integrated intensities of a CO ladder (K km/s), as a user might have measured them.
    excitation.picked = [{"region": "box", "window": 0, "line": name, "flux": flux, "flux_error": 0.1,
                          "flux_unit": "K km / s", "upper_limit": False}
                         for name, flux in (("CO J=1-0", 1.2), ("CO J=2-1", 3.9), ("CO J=3-2", 6.1))]
    excitation.show_prediction = True
    excitation.prediction_temperature = 37.5
    assert panel.state == "done" and loupe.pv_panel.slice is not None and "CO" in excitation.diagrams
    code = to_code(loupe)
    for call in ("pv_slice(", "channel_maps(", "population_diagram(", "lte_spectrum("):
        assert call in code
    script, runner = tmp_path / "line_views.py", tmp_path / "runner.py"
    script.write_text(code)
    runner.write_text(LINE_VIEWS_RUNNER)
    done = subprocess.run([sys.executable, str(runner), str(script), str(tmp_path / "out")],
                          capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-3000:]
    made = json.loads((tmp_path / "out.json").read_text())
    arrays = np.load(tmp_path / "out.npz")
    np.testing.assert_array_equal(arrays["pv"], loupe.pv_panel.slice.data.value)
    np.testing.assert_array_equal(arrays["restored_pv"], loupe.pv_panel.slice.data.value)
    np.testing.assert_array_equal(arrays["maps"], panel.panels.images.value)
    np.testing.assert_array_equal(arrays["restored_maps"], panel.panels.images.value)
    assert made["restored_made_with"] == panel.made_with
    d = excitation.diagrams["CO"]
    assert made["T"] == {"CO": float(d.temperature.value)} and made["N"] == {"CO": float(d.column_density.value)}
    curves, _ = excitation.prediction()
    np.testing.assert_array_equal(arrays["prediction"], np.concatenate([values for _, values in curves]))
    assert made["restored_picked"] == excitation.picked
    assert made["restored_prediction"] == [37.5, excitation.prediction_amount]
