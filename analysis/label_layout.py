"""Where the labels of line markers go, so that they neither overlap nor leave the plot.

Markers of catalog lines crowd wherever a band holds many transitions. A label
is wider than the gap between two markers long before the markers themselves
touch, so the labels are laid out on their own: `label_rows` puts each label
centred over its marker in the lowest of a few stacked rows where it overlaps no
label already placed, moves a label that would cross the left or right end of
the axis inwards until it fits, and leaves out a label that finds no free row.
Labels are placed in order of priority, so a crowded stretch keeps the labels
that matter most; markers and their details never depend on this.

This is the greedy first-fit interval placement of the kind used for map and
chart labels; it is written here because neither bqplot nor matplotlib offers a
layout function that works on data-unit intervals without a drawing surface.

Examples
--------
>>> placement = label_rows([1.0, 1.1, 5.0], widths=[0.5, 0.5, 0.5], span=(0.0, 5.1))
>>> placement.row.tolist()
[0, 1, 0]
>>> placement.x.tolist()  # the last label is moved inwards to end at the axis end
[1.0, 1.1, 4.85]
"""

import bisect
import re
from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .errors import ParameterError

__all__ = ["LabelPlacement", "label_priority", "label_rows"]

# Which labels survive where markers crowd: the brighter families first (common practice: CO and the
# fine-structure lines dominate most spectra, recombination lines and complex organics are many and faint).
_FAMILY_ORDER = ("CO and isotopologues", "atoms and ions", "dense gas", "water and hydrides", "shock tracers",
                 "complex organics", "recombination lines")
# A rare isotopologue: a mass number written in the formula (13CO, C18O, H13CN, C34S) or deuterium (DCN).
_RARE_ISOTOPOLOGUE = re.compile(r"^\d|\d{2}|D(?![a-z])")

@dataclass(frozen=True)
class LabelPlacement:
    """Result of `label_rows`.

    Attributes
    ----------
    x : ndarray or Quantity
        Centre of each label, in the unit of the positions: the marker's
        position, moved inwards where the label would cross an end of the axis.
    row : ndarray of int
        Row of each label, 0 nearest the markers; -1 for a label left out.
    """

    x: np.ndarray
    row: np.ndarray

    @property
    def shown(self):
        """Indices of the labels that are drawn (row >= 0)."""
        return np.flatnonzero(self.row >= 0)


def _values(name, value, unit):
    if isinstance(value, u.Quantity):
        if unit is None:
            raise ParameterError(f"{name} has a unit ({value.unit}) but the positions have none; "
                                   "give all three in the same kind of unit or all as plain numbers")
        try:
            return np.asarray(value.to_value(unit), dtype=float)
        except u.UnitConversionError:
            raise ParameterError(f"{name} is in {value.unit}, which cannot be converted to the positions' "
                                   f"unit {unit}; give it in {unit}") from None
    if unit is not None and unit != u.dimensionless_unscaled and np.any(np.asarray(value) != 0):
        raise ParameterError(f"{name} has no unit but the positions are in {unit}; give it in {unit}")
    return np.asarray(value, dtype=float)


def label_priority(lines, reference=None):
    """Label priorities of catalog rows for `label_rows`: the reference, family, main isotopologue, low E_up.

    Parameters
    ----------
    lines : Table
        Catalog rows (``name``, ``family``, ``E_up`` columns), e.g. from `lines_in_band`.
    reference : str, optional
        Name of the line velocities refer to; its label is kept first.

    Returns
    -------
    ndarray
        One value per row, higher first. Within a family the main isotopologue
        wins over rare ones (13CO, C18O, DCN), then a lower E_up/k (unknown
        E_up, e.g. recombination lines, counts as 10 000 K).

    Examples
    --------
    >>> from cubeloupe.analysis import lines_in_band
    >>> import astropy.units as u
    >>> band = lines_in_band(110 * u.GHz, 116 * u.GHz, z=0.0, species=["CO", "13CO"])
    >>> [str(band["name"][i]) for i in np.argsort(-label_priority(band))]
    ['CO J=1-0', '13CO J=1-0']
    >>> [str(band["name"][i]) for i in np.argsort(-label_priority(band, reference="13CO J=1-0"))]
    ['13CO J=1-0', 'CO J=1-0']
    """
    n = len(lines)
    if n == 0:
        return np.zeros(0)
    rank = {name: len(_FAMILY_ORDER) - i for i, name in enumerate(_FAMILY_ORDER)}
    family = np.array([rank.get(str(f), 0) for f in lines["family"]], dtype=float) if "family" in lines.colnames \
        else np.zeros(n)
    e_up = np.nan_to_num(u.Quantity(lines["E_up"], u.K).to_value(u.K), nan=1e4) if "E_up" in lines.colnames \
        else np.full(n, 1e4)
    chosen = np.asarray(lines["name"]) == reference if reference else np.zeros(n, dtype=bool)
    species = lines["species"] if "species" in lines.colnames else [""] * n
    rare = np.array([bool(_RARE_ISOTOPOLOGUE.search(str(s))) for s in species], dtype=float)
    return 100.0 * chosen + family - 0.5 * rare - np.clip(e_up, 0, 1e4) / 1e4 * 0.49


def label_rows(positions, widths, span, *, priority=None, max_rows=3, gap=0.0):
    """Stack or drop labels so that none overlaps another or crosses an end of the axis.

    Parameters
    ----------
    positions : array or Quantity, shape (n,)
        x of each marker (any unit, e.g. GHz or km/s).
    widths : array or Quantity, shape (n,) or scalar
        Width of each label in the same unit (its drawn width in pixels times
        the axis span per pixel).
    span : (low, high), array or Quantity
        The drawn x range; no label may cross its ends.
    priority : array, shape (n,), optional
        Higher is placed first and so kept first where labels crowd; ties go
        left to right. Default: all equal.
    max_rows : int
        Number of stacked label rows.
    gap : float or Quantity
        Free space required between two labels of a row.

    Returns
    -------
    LabelPlacement
        Label centres (moved inwards at the ends) and rows (-1: left out).
        A label wider than the span, or whose marker lies outside it, is left out.

    Raises
    ------
    ParameterError
        Mismatched lengths or units, a negative width, an empty span, or
        ``max_rows`` < 1.
    """
    unit = positions.unit if isinstance(positions, u.Quantity) else None
    x = np.atleast_1d(np.asarray(positions.value if unit is not None else positions, dtype=float))
    n = x.size
    width = np.broadcast_to(_values("widths", widths, unit), (n,)) if n else np.zeros(0)
    low, high = np.sort(_values("span", span, unit).ravel())[[0, -1]] if np.size(span) == 2 else (None, None)
    if low is None or not np.isfinite([low, high]).all() or not high > low:
        raise ParameterError(f"span must be two finite, different values (low, high); got {span!r}")
    pad = float(_values("gap", gap, unit))
    if int(max_rows) < 1:
        raise ParameterError(f"max_rows must be >= 1; got {max_rows!r}")
    if np.any(~np.isfinite(width)) or np.any(width < 0):
        raise ParameterError("label widths must be finite and >= 0; got "
                               f"{width[~(np.isfinite(width) & (width >= 0))][:3].tolist()}")
    rank = np.zeros(n) if priority is None else np.asarray(priority, dtype=float)
    if rank.shape != (n,):
        raise ParameterError(f"priority must have one value per position ({n}); got shape {rank.shape}")

    half = width / 2
    centre = np.clip(x, low + half, high - half)
    placeable = np.isfinite(x) & (x >= low) & (x <= high) & (width <= high - low)
    row = [-1] * n
    # Each row holds disjoint intervals, kept sorted by their left end (so also by their right end).
    starts = [[] for _ in range(int(max_rows))]
    ends = [[] for _ in range(int(max_rows))]
    order = np.lexsort((x, -np.nan_to_num(rank, nan=-np.inf)))
    order = order[placeable[order]].tolist()
    lefts, rights = (centre - half - pad / 2).tolist(), (centre + half + pad / 2).tolist()  # plain floats: fast
    for i in order:
        left, right = lefts[i], rights[i]
        for r in range(int(max_rows)):
            row_starts = starts[r]
            k = bisect.bisect_left(row_starts, left)
            if (k > 0 and ends[r][k - 1] > left) or (k < len(row_starts) and row_starts[k] < right):
                continue
            row_starts.insert(k, left)
            ends[r].insert(k, right)
            row[i] = r
            break
    row = np.array(row, dtype=int)
    return LabelPlacement(x=centre * unit if unit is not None else centre, row=row)
