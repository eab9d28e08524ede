"""Pictures of population diagrams (#16): what is drawn, and how the file is written."""

import astropy.units as u
import numpy as np
import pytest
from astropy.table import QTable

from cubeloupe.analysis import (
    OutputExistsError, ParameterError, population_diagram, population_figure, write_population_figure,
)

KKMS = u.K * u.km / u.s


def _co():
    # Intensities of an optically thin CO ladder at 20 K (any T works; the figure only draws the fit).
    return population_diagram(QTable({"line": ["CO J=1-0", "CO J=2-1", "CO J=3-2", "CO J=4-3"],
                                      "flux": [1.2, 3.9, 6.1, 3.0] * KKMS, "flux_error": [0.1, 0.2, 0.4, 0.3] * KKMS,
                                      "upper_limit": [False, False, False, True]}))


def _water():
    lines = ["H2O 1_10-1_01", "H2O 3_12-3_03", "H2O 1_11-0_00", "H2O 2_02-1_11", "H2O 2_11-2_02"]
    flux = [4.4, 3.9, 11.0, 3.1, 2.2] * u.Jy * u.km / u.s
    return population_diagram(QTable({"line": lines, "flux": flux, "flux_error": 0.05 * flux}), z=2.67,
                              magnification=19.0, spin="joint")


def test_points_error_bars_limits_and_fitted_lines_are_drawn():
    co, water = _co(), _water()
    fig = population_figure([co, water])
    ax = fig.axes[0]
    assert ax.get_xlabel() == "E_up / k (K)" and ax.get_ylabel() == "ln(N_u / g_u)"
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(t.startswith("CO (T = ") for t in labels)
    assert any(t.startswith("ortho-H2O") for t in labels) and any(t.startswith("para-H2O") for t in labels)
    assert "CO upper limit" in labels
    # One downward arrow per upper limit, from the limit.
    arrows = [a for a in ax.texts if getattr(a, "arrow_patch", None) is not None]
    limit = co.points[np.asarray(co.points["upper_limit"])]
    assert len(arrows) == 1 and arrows[0].xy[1] < arrows[0].xyann[1]
    assert arrows[0].xyann[1] == pytest.approx(float(limit["ln(N_u/g_u)"][0]))
    # The dashed fitted lines have slope -1/T (Goldsmith & Langer 1999, ApJ 517, 209).
    dashed = [line for line in ax.get_lines() if line.get_linestyle() == "--"]
    assert len(dashed) == 3  # CO, ortho and para
    slopes = sorted(np.diff(line.get_ydata())[0] / np.diff(line.get_xdata())[0] for line in dashed)
    expected = sorted([-1 / co.temperature.to_value(u.K)] + [-1 / water.temperature.to_value(u.K)] * 2)
    np.testing.assert_allclose(slopes, expected, rtol=1e-9)
    assert "ortho/para = " in ax.get_title()


def test_written_once_unless_asked(tmp_path):
    path = write_population_figure(_co(), tmp_path / "diagram.png")
    first = path.read_bytes()
    assert first[:8] == b"\x89PNG\r\n\x1a\n"  # the PNG signature (PNG specification, W3C 2003)
    with pytest.raises(OutputExistsError):
        write_population_figure(_co(), path)
    assert path.read_bytes() == first
    write_population_figure(_water(), path, overwrite=True)
    assert path.read_bytes() != first
    assert list(tmp_path.iterdir()) == [path]  # no temporary file left behind


def test_nothing_to_draw_is_refused():
    with pytest.raises(ParameterError, match="at least one PopulationDiagram"):
        population_figure([])
