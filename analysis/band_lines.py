"""Catalog lines in a band, re-placed quickly as the redshift changes.

An interactive view moves the redshift many times a second. `lines_in_band`
filters and slices the catalog on every call; `BandLines` filters once and,
when a new redshift leaves the same lines in the band, only recomputes their
observed frequencies and velocities. Its tables are those `lines_in_band`
returns for the same arguments (a test holds it to that).

Examples
--------
>>> import astropy.units as u
>>> lines = BandLines(species="CO")
>>> table = lines.in_band(220 * u.GHz, 232 * u.GHz, z=0.005)
>>> table["name"].tolist()
['CO J=2-1']
"""

import astropy.units as u
import numpy as np

from .catalog import LINE_FAMILIES, find_line, lines_in_band, load_catalog, select_lines
from .errors import CatalogError
from .spectral import check_convention, check_redshift, observed_frequency, velocity

__all__ = ["BandLines"]


class BandLines:
    """Filtered catalog lines, placed in an observed band at any redshift.

    Parameters
    ----------
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.
    species, spin_isomer, max_E_up, family
        Filters, as in `select_lines`, applied once; the family filter also
        keeps a user's lines of a species the bundled catalog lacks (family
        ""), which no family names.
    group_hyperfine : bool
        Give each hyperfine group in the band as one row (`collapse_hyperfine`),
        as ``lines_in_band(..., group_hyperfine=True)`` does.

    Attributes
    ----------
    selected : QTable
        The filtered catalog rows, sorted by rest frequency.
    """

    def __init__(self, catalog=None, *, species=None, spin_isomer=None, max_E_up=None, family=None,
                 group_hyperfine=False):
        catalog = load_catalog() if catalog is None else catalog
        self._catalog = catalog
        self.group_hyperfine = bool(group_hyperfine)
        selected = select_lines(catalog, species=species, spin_isomer=spin_isomer, max_E_up=max_E_up)
        if family is not None:
            wanted = [family] if isinstance(family, str) else list(family)
            unknown = [f for f in wanted if f not in LINE_FAMILIES]
            if unknown:
                raise CatalogError(f"unknown line family {unknown[0]!r}; choose from {list(LINE_FAMILIES)}")
            families = np.asarray(selected["family"], dtype=str)
            selected = selected[np.isin(families, wanted) | (families == "")]
        self.selected = selected
        self._rest = np.asarray(u.Quantity(self.selected["rest_frequency"], u.GHz).value)
        self._order = np.argsort(self._rest, kind="stable")
        self._sorted_rest = self._rest[self._order]
        self._key = None
        self._table = None

    def __len__(self):
        return len(self.selected)

    def indices_in_band(self, fmin, fmax, z):
        """Positions in `selected` of the lines whose redshifted frequency lies in [fmin, fmax].

        Parameters
        ----------
        fmin, fmax : Quantity [frequency]
        z : float

        Returns
        -------
        tuple of int
        """
        z = check_redshift(z)
        lo, hi = (u.Quantity(f).to_value(u.GHz, equivalencies=u.spectral()) for f in (fmin, fmax))
        lo, hi = min(lo, hi), max(lo, hi)
        # The band is compared in the rest frame, as lines_in_band does: rest in [lo (1+z), hi (1+z)].
        start = np.searchsorted(self._sorted_rest, lo * (1 + z), side="left")
        stop = np.searchsorted(self._sorted_rest, hi * (1 + z), side="right")
        return tuple(int(i) for i in np.sort(self._order[start:stop]))

    def in_band(self, fmin, fmax, z, *, reference=None, convention="radio"):
        """The lines in the observed band at redshift z, as `lines_in_band` gives them.

        Parameters
        ----------
        fmin, fmax : Quantity [frequency]
        z : float
        reference : str or Quantity [frequency], optional
        convention : {'radio', 'optical', 'relativistic'}

        Returns
        -------
        QTable
            A table owned by this object: it is updated in place by the next
            call that keeps the same lines, so copy it to keep it. With
            ``group_hyperfine`` a group's velocity is that of its mean
            frequency (equal to the mean velocity in the radio convention).
        """
        z = check_redshift(z)
        convention = check_convention(convention)
        if isinstance(reference, str):
            # A reference line named from the whole catalog, whatever the filters keep.
            reference = u.Quantity(find_line(reference, self._catalog)["rest_frequency"], u.GHz)
        key = (self.indices_in_band(fmin, fmax, z),
               None if reference is None else float(u.Quantity(reference).to_value(u.GHz)), convention)
        if key != self._key or self._table is None:
            self._table = lines_in_band(fmin, fmax, z, self.selected, reference=reference, convention=convention,
                                        group_hyperfine=self.group_hyperfine)
            self._key = key
            return self._table
        table = self._table
        if len(table):
            rest = u.Quantity(table["rest_frequency"], u.GHz)
            observed = observed_frequency(rest, z)
            table["observed_frequency"] = observed
            ref = table.meta.get("reference")
            if ref is not None:
                table["velocity"] = velocity(observed, ref * u.GHz, z=z, convention=convention)
        table.meta["z"] = z
        return table
