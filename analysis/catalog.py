"""The transition catalog: which lines exist, and which fall in an observed band.

cubeloupe ships its own catalog (``analysis/data/transitions.ecsv``, written by
``analysis/data/make_transitions.py`` from published line files) and never
queries an online service. `load_catalog` returns it as an astropy Table,
optionally merged with a user's own ECSV/CSV line list; `select_lines` filters
it; `lines_in_band` lists the transitions whose redshifted frequencies fall in
an observed band, with velocity offsets from a chosen reference line.

The bundled catalog holds some 2 400 rows between 20 GHz and 1.9 THz: molecular
lines up to E_up/k = 600 K (filter with ``max_E_up``), the atomic fine-structure
lines and the H, He and C recombination lines (`cubeloupe.analysis.recombination`).
Each row has a ``family`` (see `LINE_FAMILIES`). Lines split by hyperfine
structure are one row per component, grouped by ``hyperfine_group`` (e.g.
``"N2H+ J=1-0"``) with each component's LTE optically-thin share of the group's
intensity in ``relative_intensity``; `collapse_hyperfine` turns each group into
one row, and `find_line` accepts a group's name.

Degeneracies: ``g_up`` carries no nuclear-spin factor. Ortho and para (and
methanol's A and E) are separate species with their own partition function, so
spin-statistical weights cancel and are left out; a hyperfine component carries
(2F+1)/prod(2I+1), its share of the rotational level's 2J+1. CH3CN and CH3CCH
keep their K ladders' relative spin weights (2 for K = 3n, 1 otherwise), as one
partition function covers all K. `cubeloupe.analysis.partition_function` uses
the same convention.

Examples
--------
>>> import astropy.units as u
>>> band = lines_in_band(210 * u.GHz, 240 * u.GHz, z=3.0, species="CO")
>>> band["name"].tolist(), band["observed_frequency"].round(4)
(['CO J=8-7'], <Quantity [230.4499] GHz>)
"""

import difflib
import functools
from importlib import resources
from pathlib import Path

import astropy.units as u
import numpy as np
from astropy.table import Column, QTable, Table, vstack

from .errors import CatalogError, SpectralRangeError, UnitMismatchError
from .spectral import check_convention, check_redshift, check_rest_frequency, velocity

__all__ = [
    "CATALOG_COLUMNS",
    "LINE_FAMILIES",
    "SPIN_ISOMERS",
    "collapse_hyperfine",
    "load_catalog",
    "read_line_list",
    "select_lines",
    "lines_in_band",
    "find_line",
]

# Column -> unit (None for text), in catalog order.
CATALOG_COLUMNS = {
    "species": None,
    "transition": None,
    "rest_frequency": u.GHz,
    "E_up": u.K,
    "einstein_A": 1 / u.s,
    "spin_isomer": None,
    "provenance": None,
    "g_up": None,
    "family": None,
    "hyperfine_group": None,
    "relative_intensity": None,
}
_REQUIRED = ("species", "transition", "rest_frequency")
SPIN_ISOMERS = ("ortho", "para", "none")
LINE_FAMILIES = ("CO and isotopologues", "dense gas", "shock tracers", "complex organics",
                 "water and hydrides", "atoms and ions", "recombination lines")

_KMS = u.km / u.s


# ---------------------------------------------------------------------------
# Loading and merging
# ---------------------------------------------------------------------------

@functools.lru_cache(maxsize=1)
def _bundled():
    """The bundled catalog, read once per session (callers must not modify it)."""
    ref = resources.files("cubeloupe.analysis.data").joinpath("transitions.ecsv")
    with resources.as_file(ref) as path:
        table = Table.read(path, format="ascii.ecsv")
    for name in ("hyperfine_group", "provenance"):  # empty strings come back masked
        table[name] = np.asarray(table[name].filled("") if hasattr(table[name], "filled") else table[name],
                                 dtype=str)
    return _finish(QTable(table))


def _finish(table):
    """Add the ``name`` column, sort by rest frequency, and hold units as Quantities."""
    table = QTable(table)
    for name in ("rest_frequency", "E_up", "einstein_A"):
        table[name] = u.Quantity(table[name], CATALOG_COLUMNS[name])
    names = [f"{s} {t}" for s, t in zip(table["species"], table["transition"])]
    table.add_column(np.array(names, dtype=str), name="name", index=0)
    table.sort("rest_frequency")
    table.meta.pop("comments", None)
    return table


def _row_error(source, row, column, problem):
    return CatalogError(
        f"{source}, data row {row + 1} (line {row + 2} of a CSV), column {column!r}: {problem}. "
        "Fix that entry; see the header of cubeloupe's transitions.ecsv for the expected columns"
    )


def _as_float_column(table, name, unit, source):
    """Column ``name`` of ``table`` as float64 in ``unit`` (NaN for empty cells)."""
    col = table[name]
    if isinstance(col, u.Quantity):  # a QTable column carries its unit itself
        col = Table({name: col})[name]
    values = np.full(len(col), np.nan)
    for i, value in enumerate(col):
        if value is np.ma.masked or (isinstance(value, str) and not value.strip()):
            continue
        try:
            values[i] = float(value)
        except (TypeError, ValueError):
            raise _row_error(source, i, name, f"{value!r} is not a number") from None
    col_unit = getattr(col, "unit", None)
    if col_unit is not None and unit is not None and col_unit != unit:
        try:
            values = (values * col_unit).to_value(
                unit, equivalencies=u.spectral() + u.temperature_energy())
        except u.UnitConversionError:
            raise CatalogError(
                f"{source}: column {name!r} has unit {col_unit}, which cannot be converted to {unit}; "
                f"give {name} in {unit}"
            ) from None
    return values


def _normalise(table, *, source):
    """Check a line list and return it with exactly the catalog's columns and units."""
    missing = [c for c in _REQUIRED if c not in table.colnames]
    if missing:
        raise CatalogError(
            f"{source} lacks the column(s) {missing}; a line list needs at least "
            f"{list(_REQUIRED)} (rest_frequency in GHz), and may add "
            f"{[c for c in CATALOG_COLUMNS if c not in _REQUIRED]}. It has {table.colnames}"
        )
    n = len(table)
    out = Table()
    for name in ("species", "transition"):
        texts = [str(v).strip() if v is not np.ma.masked else "" for v in table[name]]
        for i, text in enumerate(texts):
            if not text or text == "--":
                raise _row_error(source, i, name, "the entry is empty")
        out[name] = np.array(texts, dtype=str)
    for name in ("rest_frequency", "E_up", "einstein_A"):
        unit = CATALOG_COLUMNS[name]
        values = (_as_float_column(table, name, unit, source) if name in table.colnames
                  else np.full(n, np.nan))
        for i, value in enumerate(values):
            if name == "rest_frequency" and not (np.isfinite(value) and value > 0):
                raise _row_error(source, i, name, f"{value!r} is not a positive frequency in GHz")
            if name != "rest_frequency" and (np.isinf(value) or value < 0):
                raise _row_error(source, i, name, f"{value!r} must be >= 0 (or empty if unknown)")
        out[name] = u.Quantity(values, unit)
    if "spin_isomer" in table.colnames:
        spins = []
        for i, value in enumerate(table["spin_isomer"]):
            text = "" if value is np.ma.masked else str(value).strip().lower()
            text = text or "none"
            if text not in SPIN_ISOMERS:
                raise _row_error(source, i, "spin_isomer", f"{value!r} is not one of {list(SPIN_ISOMERS)}")
            spins.append(text)
    else:
        spins = ["none"] * n
    out["spin_isomer"] = np.array(spins, dtype=str)
    if "provenance" in table.colnames:
        prov = [str(v).strip() if v is not np.ma.masked and str(v).strip() else f"user line list {source}"
                for v in table["provenance"]]
    else:
        prov = [f"user line list {source}"] * n
    out["provenance"] = np.array(prov, dtype=str)
    out["g_up"] = (_as_float_column(table, "g_up", None, source) if "g_up" in table.colnames
                   else np.full(n, np.nan))
    families = _text_column(table, "family", n)
    known = _bundled_families() if source != "bundled" else {}
    for i, family in enumerate(families):
        if not family:
            families[i] = known.get(out["species"][i], "")
        elif family not in LINE_FAMILIES:
            raise _row_error(source, i, "family", f"{family!r} is not one of {list(LINE_FAMILIES)}")
    out["family"] = np.array(families, dtype=str)
    out["hyperfine_group"] = np.array(_text_column(table, "hyperfine_group", n), dtype=str)
    share = (_as_float_column(table, "relative_intensity", None, source) if "relative_intensity" in table.colnames
             else np.full(n, np.nan))
    out["relative_intensity"] = np.where(np.isfinite(share), share, 1.0)
    return out


def _text_column(table, name, n):
    if name not in table.colnames:
        return [""] * n
    return [str(v).strip() if v is not np.ma.masked else "" for v in table[name]]


def _bundled_families():
    table = _bundled()
    return dict(zip(np.asarray(table["species"]).tolist(), np.asarray(table["family"]).tolist()))


def read_line_list(source):
    """Read and check a user's line list (ECSV or CSV with the catalog's columns).

    Parameters
    ----------
    source : str, Path or Table
        An ``.ecsv`` file (units from its header; a frequency column may use
        any spectral unit), a ``.csv`` file (rest_frequency in GHz, E_up in K,
        einstein_A in s^-1), or a Table with those columns.

    Returns
    -------
    QTable
        Columns ``name`` plus `CATALOG_COLUMNS`, sorted by rest frequency.

    Raises
    ------
    CatalogError
        The file cannot be read, a required column is missing, or an entry is
        malformed (the message names the row and column).

    Examples
    --------
    >>> from astropy.table import Table
    >>> mine = read_line_list(Table({"species": ["CH3OH"], "transition": ["5(-1)-4(0) E"],
    ...                              "rest_frequency": [84.521172]}))
    >>> str(mine["name"][0]), str(mine["spin_isomer"][0])
    ('CH3OH 5(-1)-4(0) E', 'none')
    """
    if isinstance(source, Table):
        return _finish(_normalise(source, source="the given table"))
    path = Path(source)
    if not path.is_file():
        raise CatalogError(f"line list {str(path)!r} does not exist; give the path of an ECSV or CSV file")
    fmt = "ascii.ecsv" if path.suffix.lower() == ".ecsv" else "ascii.csv"
    try:
        table = Table.read(path, format=fmt)
    except Exception as exc:  # astropy's readers raise many types on malformed text
        raise CatalogError(
            f"cannot read line list {str(path)!r} as {fmt[6:].upper()} ({exc}); "
            "check the header line and that every row has the same number of fields"
        ) from None
    return _finish(_normalise(table, source=repr(str(path))))


def load_catalog(extra=None):
    """The bundled transition catalog, optionally merged with user line lists.

    Parameters
    ----------
    extra : str, Path, Table or list of them, optional
        User line lists (see `read_line_list`). A user row with the same
        species and transition as a bundled row replaces it.

    Returns
    -------
    QTable
        Columns ``name`` (``"<species> <transition>"``), ``species``,
        ``transition``, ``rest_frequency`` [GHz], ``E_up`` [K],
        ``einstein_A`` [1/s, NaN where unknown], ``spin_isomer``
        (ortho/para/none), ``provenance``, ``g_up`` (NaN where unknown),
        ``family`` (one of `LINE_FAMILIES`; "" for a user's species the
        bundled catalog lacks), ``hyperfine_group`` ("" outside a group) and
        ``relative_intensity`` (1 outside a group); sorted by rest frequency.
        A fresh copy: changing it does not change the catalog.

    Raises
    ------
    CatalogError
        A user line list is missing or malformed.

    Examples
    --------
    >>> catalog = load_catalog()
    >>> row = catalog[list(catalog["name"]).index("[CII] 2P3/2-2P1/2")]
    >>> row["rest_frequency"]
    <Quantity 1900.5369 GHz>
    """
    table = _bundled()
    if extra is None:
        return table.copy()
    sources = extra if isinstance(extra, (list, tuple)) else [extra]
    user = [read_line_list(s) for s in sources]
    replaced = set().union(*(set(t["name"]) for t in user))
    keep = ~np.isin(np.asarray(table["name"]), list(replaced))
    merged = vstack([table[keep], *user], join_type="exact", metadata_conflicts="silent")
    merged.sort("rest_frequency")
    return merged


# ---------------------------------------------------------------------------
# Filters
# ---------------------------------------------------------------------------

def _species_key(name):
    # Case and the square brackets of forbidden lines are not significant:
    # "cii", "CII" and "[CII]" all name [CII].
    return str(name).lower().replace("[", "").replace("]", "").replace(" ", "")


@functools.lru_cache(maxsize=8)
def _species_index(species_tuple):
    return {_species_key(s): s for s in species_tuple}


def _resolve_species(catalog, species):
    """The catalog species named by ``species`` (str or iterable of str)."""
    wanted = [species] if isinstance(species, str) else list(species)
    known = tuple(sorted(set(np.asarray(catalog["species"]).tolist())))
    index = _species_index(known)
    resolved = []
    for name in wanted:
        key = _species_key(name)
        if key not in index:
            close = difflib.get_close_matches(key, list(index), n=3, cutoff=0.5)
            hint = (f"did you mean {[index[c] for c in close]}?" if close
                    else f"known species: {list(known)}")
            raise CatalogError(
                f"unknown species {name!r} in the line catalog; {hint} "
                "(add your own lines with load_catalog(extra=...))"
            )
        resolved.append(index[key])
    return resolved


def _check_frequency(value, argname):
    if not isinstance(value, u.Quantity):
        raise UnitMismatchError(
            f"{argname} must be a Quantity with a frequency unit, e.g. {argname}=230*u.GHz; got {value!r}"
        )
    try:
        return float(value.to_value(u.GHz, equivalencies=u.spectral()))
    except (u.UnitConversionError, TypeError):
        raise UnitMismatchError(
            f"{argname} must be a frequency (or wavelength); got {value.unit}. Pass e.g. {argname}=230*u.GHz"
        ) from None


def _check_band(fmin, fmax):
    lo, hi = _check_frequency(fmin, "fmin"), _check_frequency(fmax, "fmax")
    if not (np.isfinite(lo) and np.isfinite(hi)) or lo <= 0:
        raise SpectralRangeError(f"the band ({fmin}, {fmax}) must be finite and positive")
    if lo >= hi:
        raise SpectralRangeError(
            f"fmin ({fmin}) must be < fmax ({fmax}) in frequency; swap them "
            "(a wavelength range flips order when turned into frequencies)"
        )
    return lo, hi


def _check_max_e_up(max_E_up):
    if not isinstance(max_E_up, u.Quantity):
        raise UnitMismatchError(f"max_E_up must be a temperature Quantity, e.g. max_E_up=300*u.K; got {max_E_up!r}")
    try:
        return float(max_E_up.to_value(u.K, equivalencies=u.temperature_energy()))
    except u.UnitConversionError:
        raise UnitMismatchError(
            f"max_E_up must be a temperature (E_up/k) or an energy; got {max_E_up.unit}. Pass e.g. max_E_up=300*u.K"
        ) from None


def _check_spin(spin_isomer):
    wanted = [spin_isomer] if isinstance(spin_isomer, str) else list(spin_isomer)
    for value in wanted:
        if value not in SPIN_ISOMERS:
            raise CatalogError(f"unknown spin_isomer {value!r}; choose from {list(SPIN_ISOMERS)}")
    return wanted


def _check_family(family):
    wanted = [family] if isinstance(family, str) else list(family)
    for value in wanted:
        if value not in LINE_FAMILIES:
            close = difflib.get_close_matches(str(value), LINE_FAMILIES, n=2, cutoff=0.4)
            hint = f"did you mean {close}? " if close else ""
            raise CatalogError(f"unknown line family {value!r}; {hint}choose from {list(LINE_FAMILIES)}")
    return wanted


def _selection_mask(catalog, species=None, spin_isomer=None, max_E_up=None, rest_band=None, family=None):
    mask = np.ones(len(catalog), dtype=bool)
    if family is not None:
        mask &= np.isin(np.asarray(catalog["family"]), _check_family(family))
    if species is not None:
        mask &= np.isin(np.asarray(catalog["species"]), _resolve_species(catalog, species))
    if spin_isomer is not None:
        mask &= np.isin(np.asarray(catalog["spin_isomer"]), _check_spin(spin_isomer))
    if max_E_up is not None:
        # Lines of unknown E_up (NaN) are dropped by an E_up cut, except recombination
        # lines, which have no E_up and would otherwise vanish from every cut.
        e_up = np.asarray(catalog["E_up"])
        keep = e_up <= _check_max_e_up(max_E_up)
        if "family" in catalog.colnames:
            keep |= np.isnan(e_up) & (np.asarray(catalog["family"]) == "recombination lines")
        mask &= keep
    if rest_band is not None:
        nu = np.asarray(catalog["rest_frequency"])
        mask &= (nu >= rest_band[0]) & (nu <= rest_band[1])
    return mask


def select_lines(catalog=None, *, species=None, spin_isomer=None, max_E_up=None, fmin=None, fmax=None,
                 family=None):
    """Rows of the catalog that pass every given filter.

    Parameters
    ----------
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.
    species : str or list of str, optional
        Species as written in the catalog (case and square brackets do not
        matter: ``"cii"`` finds ``[CII]``).
    spin_isomer : {'ortho', 'para', 'none'} or list of them, optional
    max_E_up : Quantity [temperature or energy], optional
        Keep lines with E_up/k at most this (lines of unknown E_up are
        dropped, except recombination lines, which have none).
    fmin, fmax : Quantity [frequency], optional
        Keep lines whose *rest* frequency lies in [fmin, fmax].
    family : str or list of str, optional
        Keep lines of these families (see `LINE_FAMILIES`).

    Returns
    -------
    QTable

    Raises
    ------
    CatalogError
        Unknown species (with close matches suggested), spin isomer or family.
    UnitMismatchError
        A limit without units or of the wrong kind.
    SpectralRangeError
        fmin >= fmax.

    Examples
    --------
    >>> import astropy.units as u
    >>> water = select_lines(species="H2O", spin_isomer="para", max_E_up=100 * u.K)
    >>> water["transition"].tolist()
    ['1_11-0_00']
    >>> len(select_lines(family="recombination lines", fmin=99 * u.GHz, fmax=99.1 * u.GHz))
    3
    """
    catalog = _bundled() if catalog is None else catalog
    rest_band = None
    if fmin is not None or fmax is not None:
        rest_band = _check_band(fmin if fmin is not None else 1e-30 * u.GHz,
                                fmax if fmax is not None else 1e30 * u.GHz)
    mask = _selection_mask(catalog, species, spin_isomer, max_E_up, rest_band, family)
    return catalog[mask]


def collapse_hyperfine(table):
    """``table`` with each hyperfine group replaced by one row.

    The group's row is named after the group (``"N2H+ J=1-0"``); its rest
    frequency is the relative-intensity-weighted mean of the components
    present (the hyperfine-free centre when all are), ``g_up`` the sum of
    theirs, ``einstein_A`` and ``E_up`` their intensity-weighted means, and
    ``relative_intensity`` the sum of their shares (1 for a whole group).
    Rows outside groups pass unchanged. Extra columns (``observed_frequency``,
    ``velocity``) are averaged like the frequency. The result keeps the input's
    order by its first column of frequencies.

    Parameters
    ----------
    table : QTable
        Rows of the catalog, e.g. from `lines_in_band` or `select_lines`.

    Returns
    -------
    QTable

    Examples
    --------
    >>> import astropy.units as u
    >>> band = lines_in_band(93.17 * u.GHz, 93.18 * u.GHz, z=0.0, species="N2H+")
    >>> len(band), collapse_hyperfine(band)["name"].tolist()
    (7, ['N2H+ J=1-0'])
    """
    if "hyperfine_group" not in table.colnames or len(table) == 0:
        return table
    groups = np.asarray(table["hyperfine_group"], dtype=str)
    in_group = groups != ""
    if not in_group.any():
        return table
    rows = np.flatnonzero(in_group)
    names, which = np.unique(groups[rows], return_inverse=True)
    share = np.asarray(table["relative_intensity"], dtype=float)[rows]
    total = np.bincount(which, weights=share)
    weight = share / total[which]
    # The strongest component stands for its group in the columns not averaged.
    order = np.lexsort((-share, which))
    strongest = rows[order[np.r_[0, np.flatnonzero(np.diff(which[order])) + 1]]]
    # One take of the rows kept (ungrouped rows and each group's strongest component), in the
    # order of the merged frequencies; then whole columns replaced: stacking tables row-wise
    # (astropy vstack) costs ten times more on the full catalog.
    kept = np.flatnonzero(~in_group)
    sort_by = "observed_frequency" if "observed_frequency" in table.colnames else "rest_frequency"
    averaged = {}
    for name in ("rest_frequency", "observed_frequency", "velocity", "E_up", "einstein_A"):
        if name in table.colnames:
            column = u.Quantity(table[name])
            averaged[name] = (np.r_[column.value[kept], np.bincount(which, weights=weight * column.value[rows])],
                              column.unit)
    position = np.argsort(averaged[sort_by][0], kind="stable")
    out = table[np.r_[kept, strongest][position]]
    species = np.asarray(table["species"], dtype=str)[strongest]
    texts = {"name": np.r_[np.asarray(table["name"], dtype=str)[kept], names],
             "transition": np.r_[np.asarray(table["transition"], dtype=str)[kept],
                                 [n[len(s) + 1:] for n, s in zip(names, species)]]}
    for name, values in texts.items():
        out.replace_column(name, Column(values[position], name=name))
    out["relative_intensity"] = np.r_[np.asarray(table["relative_intensity"], dtype=float)[kept], total][position]
    g_up = np.asarray(table["g_up"], dtype=float)
    out["g_up"] = np.r_[g_up[kept], np.bincount(which, weights=g_up[rows])][position]
    for name, (values, unit) in averaged.items():
        out[name] = values[position] * unit
    out.meta.update(table.meta)
    return out


def find_line(name, catalog=None):
    """The catalog row called ``name`` (``"<species> <transition>"``).

    Matching ignores case. A hyperfine group's name (e.g. ``"N2H+ J=1-0"``)
    gives the group collapsed to one row (see `collapse_hyperfine`). An
    unknown name raises `CatalogError` with close matches.

    Examples
    --------
    >>> find_line("co j=3-2")["rest_frequency"]
    <Quantity 345.7959899 GHz>
    >>> find_line("HCN J=1-0")["rest_frequency"].round(5)
    <Quantity 88.6316 GHz>
    """
    catalog = _bundled() if catalog is None else catalog
    names = np.asarray(catalog["name"])
    key = str(name).strip().lower()
    hits = np.flatnonzero(np.char.lower(names) == key)
    if hits.size == 0 and "hyperfine_group" in catalog.colnames:
        in_group = np.char.lower(np.asarray(catalog["hyperfine_group"], dtype=str)) == key
        if in_group.any():
            return collapse_hyperfine(catalog[in_group])[0]
    if hits.size == 0:
        names = np.concatenate([names, np.unique(np.asarray(catalog["hyperfine_group"], dtype=str))]) \
            if "hyperfine_group" in catalog.colnames else names
        close = difflib.get_close_matches(str(name), names.tolist(), n=3, cutoff=0.6)
        hint = f"did you mean {close}?" if close else "names look like 'CO J=4-3' or 'H2O 1_10-1_01'"
        raise CatalogError(f"no line called {name!r} in the catalog; {hint}")
    return catalog[int(hits[0])]


def _reference_frequency(reference, catalog):
    if isinstance(reference, str):
        return float(u.Quantity(find_line(reference, catalog)["rest_frequency"], u.GHz).value)
    return float(check_rest_frequency(reference, argname="reference", func="lines_in_band").value)


# ---------------------------------------------------------------------------
# Lines in an observed band
# ---------------------------------------------------------------------------

def lines_in_band(fmin, fmax, z, catalog=None, *, reference=None, convention="radio",
                  species=None, spin_isomer=None, max_E_up=None, family=None, group_hyperfine=False):
    """Transitions whose redshifted frequencies fall in the observed band [fmin, fmax].

    Parameters
    ----------
    fmin, fmax : Quantity [frequency]
        The observed band (wavelengths are accepted and converted).
    z : float
        Source redshift, -1 < z <= 20.
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.
    reference : str or Quantity [frequency], optional
        The line velocities are measured from: a catalog row name such as
        ``"CO J=4-3"``, or a rest frequency. It need not lie in the band.
    convention : {'radio', 'optical', 'relativistic'}
        Velocity convention (Greisen et al. 2006).
    species, spin_isomer, max_E_up, family
        Filters, as in `select_lines`.
    group_hyperfine : bool
        Give each hyperfine group with a component in the band as one row
        (`collapse_hyperfine`) instead of one row per component.

    Returns
    -------
    QTable
        The selected catalog rows sorted by observed frequency, with two more
        columns: ``observed_frequency`` [GHz] = rest / (1 + z), and
        ``velocity`` [km/s], the rest-frame velocity of each line relative to
        the reference line at the same z (NaN when no reference is given).
        ``meta`` holds ``z``, ``convention`` and ``reference`` [GHz].

    Raises
    ------
    RedshiftError
        z <= -1, z > 20 or not a number.
    SpectralRangeError
        fmin >= fmax.
    CatalogError
        Unknown species, spin isomer or reference name.
    UnitMismatchError
        A band edge or reference without a frequency unit.

    Examples
    --------
    >>> import astropy.units as u
    >>> band = lines_in_band(340 * u.GHz, 360 * u.GHz, z=0.0, reference="CO J=3-2",
    ...                      species=["CO", "CS", "HCN", "HCO+"])
    >>> band["name"].tolist()
    ['CS J=7-6', 'CO J=3-2', 'HCN J=4-3', 'HCO+ J=4-3']
    >>> [round(v) for v in band["velocity"].to_value(u.km / u.s)]
    [2526, 0, -7551, -9483]
    """
    z = check_redshift(z)
    lo, hi = _check_band(fmin, fmax)
    convention = check_convention(convention)
    catalog = _bundled() if catalog is None else catalog
    ref = None if reference is None else _reference_frequency(reference, catalog)

    # One vectorised pass: rest frequencies are compared against the band
    # scaled to the rest frame, so no per-line redshifting is needed first.
    mask = _selection_mask(catalog, species, spin_isomer, max_E_up, (lo * (1 + z), hi * (1 + z)), family)
    band = catalog[mask]
    observed = u.Quantity(band["rest_frequency"], u.GHz) / (1.0 + z)
    band["observed_frequency"] = observed
    if ref is None or len(band) == 0:
        band["velocity"] = np.full(len(band), np.nan) * _KMS
    else:
        band["velocity"] = velocity(observed, ref * u.GHz, z=z, convention=convention)
    band.meta.update({"z": z, "convention": convention, "reference": ref})
    if group_hyperfine:
        band = collapse_hyperfine(band)
    return band
