"""Pictures of population diagrams: points with error bars, upper limits as arrows, the fitted lines.

`population_figure` draws one or more `PopulationDiagram` results (e.g. CO and
water) on one pair of axes with matplotlib, each spin species in its own
colour and marker; `write_population_figure` writes that picture to a file
atomically, never replacing a file unless asked. The axes are those of
Goldsmith & Langer (1999, ApJ 517, 209): ``E_up / k`` in K against
``ln(N_u / g_u)``, where an LTE population at one temperature is a straight
line of slope ``-1 / T``.

Examples
--------
>>> import astropy.units as u
>>> from astropy.table import QTable
>>> from cubeloupe.analysis import population_diagram
>>> lines = QTable({"line": ["CO J=1-0", "CO J=2-1", "CO J=3-2"],
...                 "flux": [1.2, 3.9, 6.1] * u.K * u.km / u.s,
...                 "flux_error": [0.1, 0.2, 0.4] * u.K * u.km / u.s})
>>> fig = population_figure(population_diagram(lines))
>>> fig.axes[0].get_xlabel()
'E_up / k (K)'
"""

import astropy.units as u
import numpy as np
from matplotlib.figure import Figure

from .errors import ParameterError
from .export import check_output_path, write_figure

__all__ = ["population_figure", "write_population_figure", "SPIN_STYLES", "spin_group"]

# Colour and marker of each kind of point: our own picks, one per spin species and one for the rest.
SPIN_STYLES = {
    "ortho": {"color": "#c8553d", "marker": "o", "label": "ortho"},
    "para": {"color": "#2a7f9e", "marker": "s", "label": "para"},
    "all": {"color": "#3d3a6b", "marker": "D", "label": ""},
}
_SPECIES_COLORS = ["#3d3a6b", "#6a994e", "#bc6c25", "#7b2cbf"]
_LN = "ln(N_u/g_u)"


def spin_group(spin_isomer, components):
    """The component a point of spin species ``spin_isomer`` belongs to (``"ortho"``, ``"para"`` or ``"all"``)."""
    spin = str(spin_isomer)
    return spin if spin in components else "all"


def _style(diagram, group, index):
    style = dict(SPIN_STYLES[group])
    if group == "all":
        style["color"] = _SPECIES_COLORS[index % len(_SPECIES_COLORS)]
        style["label"] = diagram.species
    else:
        style["label"] = f"{style['label']}-{diagram.species}"
    return style


def _fit_label(diagram, group):
    part = diagram.components[group]
    temperature = part.temperature.to_value(u.K)
    if not np.isfinite(temperature):
        return "no fit"
    error = part.temperature_error.to_value(u.K)
    return f"T = {temperature:.1f} ± {error:.1f} K"


def population_figure(diagrams, title=None):
    """Draw population diagrams on one pair of axes (a matplotlib Figure not attached to pyplot).

    Parameters
    ----------
    diagrams : PopulationDiagram or list of PopulationDiagram
        From `population_diagram`; several species share the axes.
    title : str, optional
        Default: the species, the spin fit and the ortho-to-para ratio when there is one.

    Returns
    -------
    matplotlib.figure.Figure
        Detections as points with 1-sigma error bars, upper limits as downward arrows from the
        limit, the fitted straight lines over the energies of each component's lines.

    Raises
    ------
    ParameterError
        No diagram given.
    """
    diagrams = [diagrams] if not isinstance(diagrams, (list, tuple)) else list(diagrams)
    if not diagrams:
        raise ParameterError("population_figure needs at least one PopulationDiagram (from population_diagram)")
    fig = Figure(figsize=(6.4, 4.4), dpi=110)
    fig.set_layout_engine("constrained")
    ax = fig.add_subplot()
    all_energies = np.concatenate([d.points["E_up"].to_value(u.K) for d in diagrams])
    span = max(all_energies.max() - all_energies.min(), 1.0)
    for index, diagram in enumerate(diagrams):
        points = diagram.points
        groups = np.array([spin_group(s, diagram.components) for s in points["spin_isomer"]])
        for group in dict.fromkeys(groups):
            style = _style(diagram, group, index)
            rows = points[groups == group]
            energy = rows["E_up"].to_value(u.K)
            value = np.asarray(rows[_LN], dtype=float)
            error = np.asarray(rows[f"{_LN}_error"], dtype=float)
            limit = np.asarray(rows["upper_limit"], dtype=bool)
            detected = ~limit
            if detected.any():
                ax.errorbar(energy[detected], value[detected], yerr=error[detected], fmt=style["marker"],
                            color=style["color"], ms=6, capsize=3, lw=1.2,
                            label=f"{style['label']} ({_fit_label(diagram, group)})")
            if limit.any():
                # An upper limit: the point can lie anywhere below, so an arrow points down from it.
                for x, y in zip(energy[limit], value[limit]):
                    ax.annotate("", xy=(x, y - 0.8), xytext=(x, y),
                                arrowprops={"arrowstyle": "-|>", "color": style["color"], "lw": 1.2})
                ax.plot(energy[limit], value[limit], ls="none", marker="_", ms=12, mew=2, color=style["color"],
                        label=f"{style['label']} upper limit")
            part = diagram.components.get(group)
            if part is not None and np.isfinite(part.slope) and np.isfinite(part.intercept):
                grid = np.linspace(energy.min() - 0.05 * span, energy.max() + 0.05 * span, 50)
                ax.plot(grid, diagram.model(grid * u.K, spin_isomer=group), color=style["color"], lw=1.4, ls="--")
    ax.set_xlabel("E_up / k (K)")
    ax.set_ylabel("ln(N_u / g_u)")
    ax.grid(alpha=0.3)
    ax.legend(fontsize=8, loc="best")
    if title is None:
        parts = []
        for diagram in diagrams:
            text = diagram.species
            if np.isfinite(diagram.ortho_para_ratio):
                text += (f" ({diagram.spin} fit, ortho/para = {diagram.ortho_para_ratio:.2f}"
                         f" ± {diagram.ortho_para_ratio_error:.2f})")
            parts.append(text)
        title = "Population diagram: " + "; ".join(parts)
    ax.set_title(title, fontsize=10)
    return fig


def write_population_figure(diagrams, path, *, overwrite=False, title=None, dpi=150):
    """Write `population_figure` to ``path`` (PNG, SVG or PDF by extension), atomically (`write_figure`).

    Parameters
    ----------
    diagrams : PopulationDiagram or list of PopulationDiagram
    path : str or Path
    overwrite : bool
        Replace an existing file; by default one is never replaced.
    title : str, optional
    dpi : int

    Returns
    -------
    Path

    Raises
    ------
    OutputExistsError, ExportContentError, CubeFileError, ExportError
        See `write_figure`.
    """
    check_output_path(path, overwrite)  # refuse before drawing
    return write_figure(population_figure(diagrams, title=title), path, overwrite=overwrite, dpi=dpi)
