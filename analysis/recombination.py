"""Radio recombination lines of hydrogen, helium and carbon from the Rydberg formula.

An electron dropping from level n + Δn to n of an atom whose core has net
charge Z = 1 emits at

    nu = Z^2 R_M c (1/n^2 - 1/(n + Δn)^2),   R_M = R_inf / (1 + m_e / M_core),

the Rydberg formula with the reduced-mass correction of the Rydberg constant
(e.g. Gordon & Sorochenko 2002, *Radio Recombination Lines*, Kluwer, eq. 2.3;
Lilley & Palmer 1968, ApJS 16, 143). ``M_core`` is the atom's mass less one
electron. Lines are named ``<n>alpha``, ``<n>beta``, ``<n>gamma`` for
Δn = 1, 2, 3, with ``n`` the lower level, as the trade writes H40alpha.

No library computes these (astropy has the constants, not the series), so the
formula is written here; R_inf, m_e and the atomic mass unit come from
astropy.constants (CODATA).

Examples
--------
>>> import astropy.units as u
>>> recombination_frequency("H", 40, 1).to(u.GHz).round(4)
<Quantity 99.023 GHz>
"""

import astropy.constants as const
import astropy.units as u
import numpy as np
from astropy.table import QTable

from .errors import CatalogError, UnitMismatchError

__all__ = ["RECOMBINATION_ELEMENTS", "recombination_frequency", "recombination_lines"]

# Atomic masses in u: 1H, 4He and 12C (AME 2016, Wang et al. 2017, Chinese Phys. C 41, 030003;
# 1H and 4He from memory, 12C exact by definition).
RECOMBINATION_ELEMENTS = {"H": 1.00782503223, "He": 4.00260325413, "C": 12.0}
_SERIES = {1: "alpha", 2: "beta", 3: "gamma"}
_PROVENANCE = ("nu: Rydberg formula with the reduced-mass Rydberg constant (Gordon & Sorochenko 2002), "
               "R_inf and m_e from CODATA 2018 (astropy.constants), atomic mass {mass} u")


def _rydberg_frequency(element):
    """R_M c in Hz for ``element`` (core = atom less one electron)."""
    m_e = const.m_e.to_value(u.u)
    core = RECOMBINATION_ELEMENTS[element] - m_e
    return (const.Ryd * const.c).to_value(u.Hz) / (1.0 + m_e / core)


def _check_element(element):
    if element not in RECOMBINATION_ELEMENTS:
        raise CatalogError(f"no recombination lines for {element!r}; choose from {list(RECOMBINATION_ELEMENTS)}")


def recombination_frequency(element, n, delta_n=1):
    """Rest frequency of the n + Δn -> n recombination line of ``element``.

    Parameters
    ----------
    element : {'H', 'He', 'C'}
    n : int or array of int
        Lower principal quantum number (>= 1).
    delta_n : {1, 2, 3}
        1 for alpha, 2 for beta, 3 for gamma lines.

    Returns
    -------
    Quantity [GHz]

    Raises
    ------
    CatalogError
        Unknown element, n < 1 or delta_n not 1, 2 or 3.

    Examples
    --------
    >>> recombination_frequency("C", 40, 1).round(4)
    <Quantity 99.0724 GHz>
    """
    _check_element(element)
    if delta_n not in _SERIES:
        raise CatalogError(f"delta_n must be 1 (alpha), 2 (beta) or 3 (gamma); got {delta_n!r}")
    n = np.asarray(n)
    if np.any(n < 1) or not np.issubdtype(n.dtype, np.integer):
        raise CatalogError(f"n must be a whole number >= 1; got {n!r}")
    n = n.astype(float)
    return (_rydberg_frequency(element) * (1.0 / n**2 - 1.0 / (n + delta_n) ** 2) * u.Hz).to(u.GHz)


def recombination_lines(fmin, fmax, elements=("H", "He", "C"), delta_n=(1, 2, 3)):
    """Every recombination line of ``elements`` with rest frequency in [fmin, fmax].

    Parameters
    ----------
    fmin, fmax : Quantity [frequency]
    elements : iterable of {'H', 'He', 'C'}
    delta_n : iterable of {1, 2, 3}

    Returns
    -------
    QTable
        Columns ``species`` (the element), ``transition`` (e.g. ``"40alpha"``),
        ``n`` (lower level), ``delta_n``, ``rest_frequency`` [GHz] and
        ``provenance``; sorted by rest frequency.

    Examples
    --------
    >>> import astropy.units as u
    >>> lines = recombination_lines(99 * u.GHz, 99.1 * u.GHz, delta_n=[1])
    >>> [f"{s}{t}" for s, t in zip(lines["species"], lines["transition"])]
    ['H40alpha', 'He40alpha', 'C40alpha']
    """
    lo, hi = (_frequency_ghz(value, name) for value, name in ((fmin, "fmin"), (fmax, "fmax")))
    if not lo < hi:
        raise CatalogError(f"fmin ({fmin}) must be < fmax ({fmax})")
    rows = []
    for element in elements:
        _check_element(element)
        rydberg = _rydberg_frequency(element) / 1e9
        for dn in delta_n:
            if dn not in _SERIES:
                raise CatalogError(f"delta_n must be 1, 2 or 3; got {dn!r}")
            # nu ~ 2 dn R / n^3 bounds n; search a little wider and cut exactly.
            n_min = max(1, int((dn * rydberg / hi) ** (1 / 3)) - 2)
            n_max = int((2 * dn * rydberg / lo) ** (1 / 3)) + 2
            n = np.arange(n_min, n_max + 1)
            nu = recombination_frequency(element, n, dn).to_value(u.GHz)
            for n_i, nu_i in zip(n[(nu >= lo) & (nu <= hi)], nu[(nu >= lo) & (nu <= hi)]):
                rows.append((element, f"{n_i}{_SERIES[dn]}", int(n_i), dn, nu_i,
                             _PROVENANCE.format(mass=RECOMBINATION_ELEMENTS[element])))
    table = QTable(rows=rows or None, names=("species", "transition", "n", "delta_n", "rest_frequency",
                                             "provenance"),
                   dtype=(str, str, int, int, float, str))
    table["rest_frequency"].unit = u.GHz
    table["rest_frequency"] = u.Quantity(table["rest_frequency"], u.GHz)
    table.sort("rest_frequency")
    return table


def _frequency_ghz(value, name):
    if not isinstance(value, u.Quantity):
        raise UnitMismatchError(f"{name} must be a Quantity with a frequency unit, e.g. {name}=90*u.GHz; got {value!r}")
    try:
        return float(value.to_value(u.GHz, equivalencies=u.spectral()))
    except u.UnitConversionError:
        raise UnitMismatchError(f"{name} must be a frequency; got {value.unit}") from None
