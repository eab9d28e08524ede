"""A table of measured line intensities, checked and joined to each line's catalog constants.

The population diagram (`population_diagram`) and any other use of several
lines of one molecule start from the same table: one row per line, with the
line's catalog name (``"CO J=2-1"``, or a hyperfine group's name such as
``"N2H+ J=1-0"``), its integrated intensity ``flux`` and ``flux_error`` (K km/s
for a map in brightness temperature, Jy km/s for an unresolved source),
optionally ``upper_limit`` (the flux being the limit) and ``region``. The
table `measurement_table` writes (`MEASUREMENT_COLUMNS`) is such a table.
`read_line_intensities` checks it and adds what the catalog knows of each line.

Examples
--------
>>> import astropy.units as u
>>> from astropy.table import QTable
>>> lines = QTable({"line": ["CO J=2-1", "CO J=3-2"], "flux": [3.9, 6.1] * u.K * u.km / u.s,
...                 "flux_error": [0.2, 0.4] * u.K * u.km / u.s})
>>> table = read_line_intensities(lines)
>>> table["E_up"].value.tolist(), table.meta["kind"]
([16.6, 33.19], 'brightness')
"""

import functools

import astropy.units as u
import numpy as np
from astropy.table import QTable, Table

from .catalog import find_line, select_lines
from .errors import CatalogError, FitError, ParameterError, UnitMismatchError
from .level_populations import intensity_kind

__all__ = ["read_line_intensities", "LINE_INTENSITY_COLUMNS"]

#: Columns of `read_line_intensities`, in order.
LINE_INTENSITY_COLUMNS = ("line", "species", "spin_isomer", "rest_frequency", "E_up", "einstein_A", "g_up",
                          "flux", "flux_error", "upper_limit")

def _column_quantity(table, name):
    column = table[name]
    if isinstance(column, u.Quantity):
        return u.Quantity(column, copy=True)
    unit = getattr(column, "unit", None)
    if unit is None:
        raise UnitMismatchError(
            f"column {name!r} of the lines table has no unit; give it one, e.g. "
            f"{name}=[1.2, 3.9] * u.K * u.km / u.s (K km/s for a map, Jy km/s for an unresolved source)"
        )
    return u.Quantity(np.asarray(column, dtype=float), unit)

def _read_table(lines, region):
    if not isinstance(lines, Table):
        try:
            lines = QTable(lines)
        except Exception:
            raise ParameterError(
                f"lines must be a table (astropy Table, or a dict of columns) with columns 'line', 'flux' and "
                f"'flux_error'; got {type(lines).__name__}"
            ) from None
    missing = [c for c in ("line", "flux", "flux_error") if c not in lines.colnames]
    if missing:
        raise ParameterError(
            f"the lines table lacks the column(s) {missing}; it needs 'line' (catalog names such as 'CO J=2-1'), "
            f"'flux' and 'flux_error' (as measurement_table writes them). It has {lines.colnames}"
        )
    if "region" in lines.colnames:
        regions = [str(r) for r in lines["region"]]
        if region is None and len(set(regions)) > 1:
            raise ParameterError(
                f"the lines table holds several regions {sorted(set(regions))}; pass region=... to choose one"
            )
        if region is not None:
            if str(region) not in regions:
                raise ParameterError(f"no region {region!r} in the lines table; it has {sorted(set(regions))}")
            lines = lines[np.array(regions) == str(region)]
    elif region is not None:
        raise ParameterError(f"region={region!r} was given but the lines table has no 'region' column")
    if len(lines) == 0:
        raise FitError("the lines table is empty; give at least two detected lines of one species")
    names = [str(n).strip() for n in lines["line"]]
    seen = set()
    for name in names:
        if name.lower() in seen:
            raise ParameterError(
                f"line {name!r} appears twice in the lines table (two windows?); keep one row per line"
            )
        seen.add(name.lower())
    flux = _column_quantity(lines, "flux")
    error = _column_quantity(lines, "flux_error")
    kind = intensity_kind(flux.unit)
    if intensity_kind(error.unit) != kind or not error.unit.is_equivalent(flux.unit):
        raise UnitMismatchError(
            f"flux is in {flux.unit} but flux_error in {error.unit}; give both in the same kind of unit"
        )
    error = error.to(flux.unit)
    limits = (np.asarray(lines["upper_limit"], dtype=bool) if "upper_limit" in lines.colnames
              else np.zeros(len(lines), dtype=bool))
    values, errors = flux.value, error.value
    bad_flux = ~(np.isfinite(values) & (values > 0))
    bad_error = np.where(limits, errors < 0, ~(np.isfinite(errors) & (errors > 0)))
    for i in np.flatnonzero(bad_flux | bad_error)[:1]:  # the first bad row, by name
        name = names[i]
        if bad_flux[i]:
            raise ParameterError(
                f"line {name!r} has flux {flux[i]}; a detection (or an upper limit) needs a finite flux > 0. "
                "Drop the row, or give a non-detection as an upper limit (upper_limit=True, flux = e.g. 3 sigma)"
            )
        if limits[i]:
            raise ParameterError(f"line {name!r} has a negative flux_error {error[i]}; errors are >= 0")
        raise ParameterError(
            f"line {name!r} has flux_error {error[i]}; a detection needs a finite error > 0 (its weight in "
            "the fit is 1 / error^2)"
        )
    return names, flux, error, limits, kind


@functools.lru_cache(maxsize=1)
def _bundled_rows():
    """{lower-case name: constants} of the bundled catalog, built once (find_line scans every name per call)."""
    table = select_lines()
    return {name.lower(): _constants(row) for name, row in zip(np.asarray(table["name"], dtype=str).tolist(), table)}


def _constants(row):
    return (str(row["species"]), str(row["spin_isomer"]), float(u.Quantity(row["rest_frequency"], u.GHz).value),
            float(u.Quantity(row["E_up"], u.K).value), float(u.Quantity(row["einstein_A"], 1 / u.s).value),
            float(row["g_up"]))


def _catalog_rows(names, catalog):
    rows = []
    known = _bundled_rows() if catalog is None else {}
    for name in names:
        constants = known.get(name.strip().lower())
        if constants is None:  # a user catalog, a hyperfine group's name, or an unknown name (close matches)
            constants = _constants(find_line(name, catalog))
        _, _, _, _, a_ul, g_up = constants
        if not (np.isfinite(a_ul) and a_ul > 0 and np.isfinite(g_up) and g_up > 0):
            raise CatalogError(
                f"line {name!r} has no {'Einstein A' if not np.isfinite(a_ul) or a_ul <= 0 else 'g_up'} in the "
                "catalog; give it in a line list (species, transition, rest_frequency, E_up, einstein_A, g_up) "
                "and pass catalog=load_catalog(extra=...), or drop the line"
            )
        rows.append(constants)
    return rows


def read_line_intensities(lines, *, region=None, species=None, catalog=None):
    """Check a table of line intensities and add each line's catalog constants.

    Parameters
    ----------
    lines : Table or dict of columns
        ``line``, ``flux``, ``flux_error``; optionally ``upper_limit`` and ``region``.
    region : str, optional
        The region to keep when the table holds several (required then).
    species : str, optional
        The species to keep when the table holds several (required then).
    catalog : Table, optional
        The line catalog (`load_catalog`); the bundled one by default.

    Returns
    -------
    QTable
        Columns `LINE_INTENSITY_COLUMNS` (rest_frequency [GHz], E_up [K],
        einstein_A [1/s], flux and flux_error in the input's unit); ``meta``
        holds ``species`` and ``kind`` (``"brightness"`` for K km/s, ``"flux"``
        for Jy km/s).

    Raises
    ------
    ParameterError
        A missing column, several regions or species without a choice, a
        repeated line, a flux <= 0 or NaN, an error <= 0 (a detection) or < 0.
    UnitMismatchError
        Fluxes without units, not integrated over the line, or flux and error
        in different kinds of unit.
    CatalogError
        An unknown line name (close names are suggested), or a line without
        Einstein A or g_up in the catalog.
    FitError
        An empty table.
    """
    names, flux, error, limits, kind = _read_table(lines, region)
    rows = _catalog_rows(names, catalog)
    present = sorted({r[0] for r in rows})
    if species is None:
        if len(present) > 1:
            raise ParameterError(f"the lines table holds several species {present}; pass species=... to choose one")
        species = present[0]
    else:
        match = [s for s in present if s.lower() == str(species).strip().lower()]
        if not match:
            raise ParameterError(f"no line of species {species!r} in the lines table; it has {present}")
        species = match[0]
    keep = np.array([r[0] == species for r in rows])
    rows = [r for r, k in zip(rows, keep) if k]
    table = QTable({
        "line": [n for n, k in zip(names, keep) if k], "species": [r[0] for r in rows],
        "spin_isomer": [r[1] for r in rows], "rest_frequency": [r[2] for r in rows] * u.GHz,
        "E_up": [r[3] for r in rows] * u.K, "einstein_A": [r[4] for r in rows] / u.s,
        "g_up": [r[5] for r in rows], "flux": flux[keep], "flux_error": error[keep], "upper_limit": limits[keep],
    })
    table.meta.update({"species": species, "kind": kind})
    return table
