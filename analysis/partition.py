"""Partition functions Q(T) of the catalog's species.

Q(T) = sum_i g_i exp(-(E_i - E_0)/kT) sums a species' levels from the level
E_0 it counts from. The values are bundled in
``analysis/data/partition_functions.ecsv`` (written by
``analysis/data/make_partition_functions.py``) from three kinds of source,
named per species by `partition_function_source`:

* the published tables of the CDMS (Mueller et al. 2001, A&A 370, L49; 2005,
  J. Mol. Struct. 742, 215) and JPL (Pickett et al. 1998, JQSRT 60, 883)
  catalogues, at their temperatures (2.725-1000 K where given);
* sums over a published level list (LAMDA files; Schoier et al. 2005, A&A
  432, 369), up to the temperature the list supports;
* sums over levels computed from the catalog's rotational constants.

Between tabulated temperatures Q is interpolated linearly in log Q against
log T (scipy), the usual practice for these tables (e.g. the CDMS
documentation); outside them `partition_function` refuses.

Degeneracies follow the catalog's convention (`cubeloupe.analysis.catalog`):
no nuclear-spin factors, so the CDMS tables of hyperfine-resolved entries are
divided by the splitting nuclei's spin multiplicity. Each ortho or para species
has its own Q counted from its own lowest level: `partition_energy_zero` gives
that level's energy on the catalog's E_up scale (e.g. para-NH3 counts from
(J,K)=(1,1) at 22.1 K), so the upper-level population of a line is

    N_u / N = g_up exp(-(E_up - E_0)/kT) / Q(T).

For H2O, H2CO, CH3OH and H2O+ the published total over both spin species is
bundled as ``spin_isomer=None``; for H2O, H2CO and H2O+ it counts the spin
weights (ortho 3, para 1), so multiply an ortho line's g_up by 3 when using it;
CH3OH's JPL total counts A and E levels alike (2J+1), as the catalog's CH3OH
rows do. Each spin species' own Q is bundled too:

* water (``"ortho"`` counted from 1_01, 34.23 K above 0_00; ``"para"`` from
  0_00): ortho summed over the LAMDA o-H2O levels, para the JPL total less the
  ortho part, at the JPL temperatures (9.375-300 K);
* H2CO (``"ortho"`` from 1_11, 15.16 K above 0_00; ``"para"`` from 0_00) and
  CH3OH (``"A"`` from 0_0 A+; ``"E"`` from 1_-1 E, 7.90 K above it): sums over
  the levels of the published line lists (CDMS H2CO; CH3OH vt=0 of
  Splatalogue's line list 14), g = 2J+1 with no spin weight. With the spin
  weights of the totals, 3 Q_o exp(-E_0/kT) + Q_p matches the JPL H2CO total
  within 0.03 % from 9.375 to 300 K, and Q_A + Q_E exp(-E_0/kT) the JPL CH3OH
  total within 0.1 % up to 37.5 K (1.5 % low at 75 K, where torsionally
  excited levels start to count): the CH3OH spin species stop at 37.5 K;
* c-C3H2 (``"ortho"`` from 1_01, 2.35 K above 0_00; ``"para"``): sums over the
  levels of the JPL entry's lines, within 0.2 % of the JPL total up to 150 K
  (6 % low at 300 K).

Examples
--------
>>> import astropy.units as u
>>> partition_function("CO", 37.5 * u.K).round(2)
<Quantity 13.9>
"""

import functools
from importlib import resources

import astropy.units as u
import numpy as np
from astropy.table import Table
from scipy.interpolate import interp1d

from .errors import CatalogError, UnitMismatchError

__all__ = ["partition_function", "partition_energy_zero", "partition_function_source",
           "partition_function_species"]


@functools.lru_cache(maxsize=1)
def _tables():
    """{(species, spin_isomer): (log T, log Q, energy_zero, provenance)} read once."""
    ref = resources.files("cubeloupe.analysis.data").joinpath("partition_functions.ecsv")
    with resources.as_file(ref) as path:
        table = Table.read(path, format="ascii.ecsv")
    out = {}
    species = np.asarray(table["species"], dtype=str)
    spins = np.asarray(table["spin_isomer"], dtype=str)
    for key in sorted(set(zip(species.tolist(), spins.tolist()))):
        rows = table[(species == key[0]) & (spins == key[1])]
        rows.sort("temperature")
        log_t = np.log(np.asarray(rows["temperature"], dtype=float))
        log_q = np.log(np.asarray(rows["Q"], dtype=float))
        interp = interp1d(log_t, log_q, kind="linear", assume_sorted=True)
        out[key] = (interp, float(np.exp(log_t[0])), float(np.exp(log_t[-1])), float(rows["energy_zero"][0]),
                    str(rows["provenance"][0]))
    return out


def _key(species, spin_isomer):
    spin = "none" if spin_isomer is None else str(spin_isomer)
    tables = _tables()
    if (species, spin) in tables:
        return species, spin
    known = sorted({s for s, _ in tables})
    if species not in known:
        raise CatalogError(f"no partition function for species {species!r}; species with one: {known}")
    spins = sorted(p for s, p in tables if s == species)
    raise CatalogError(
        f"no partition function for {species!r} with spin_isomer={spin_isomer!r}; "
        f"{species} has {['None' if p == 'none' else p for p in spins]}"
    )


def partition_function_species():
    """The (species, spin_isomer) pairs that have a partition function (spin_isomer None for "none")."""
    return [(s, None if p == "none" else p) for s, p in _tables()]


def partition_function(species, temperature, spin_isomer=None):
    """Partition function Q(T) of a catalog species.

    Parameters
    ----------
    species : str
        As in the catalog's ``species`` column (``"CO"``, ``"NH3"``, ``"[CI]"``).
    temperature : Quantity [temperature]
        Scalar or array, within the tabulated range of that species.
    spin_isomer : {'ortho', 'para', 'A', 'E'} or None
        For species with spin isomers (H2O, H2CO, NH3, H2S, c-C3H2, H3O+:
        ortho and para; CH3OH: A and E), the spin species whose own Q is
        wanted; None for the others (and, for H2O, H2CO, CH3OH and H2O+, the
        published total over both).

    Returns
    -------
    Quantity [dimensionless]
        Q(T), with the energy zero given by `partition_energy_zero`.

    Raises
    ------
    CatalogError
        Unknown species or spin isomer, or a temperature outside the table.
    UnitMismatchError
        ``temperature`` is not a temperature Quantity.

    Examples
    --------
    >>> import astropy.units as u
    >>> partition_function("NH3", [10, 50] * u.K, spin_isomer="para").round(2)
    <Quantity [ 5.87, 16.23]>
    """
    key = _key(species, spin_isomer)
    if not isinstance(temperature, u.Quantity):
        raise UnitMismatchError(f"temperature must be a Quantity in K, e.g. temperature=50*u.K; got {temperature!r}")
    try:
        t = temperature.to_value(u.K, equivalencies=u.temperature())
    except u.UnitConversionError:
        raise UnitMismatchError(f"temperature must be a temperature; got {temperature.unit}") from None
    interp, t_min, t_max, _, _ = _tables()[key]
    t = np.asarray(t, dtype=float)
    if np.any(~np.isfinite(t)) or np.any(t < t_min * (1 - 1e-9)) or np.any(t > t_max * (1 + 1e-9)):
        raise CatalogError(
            f"temperature {temperature} is outside the {t_min:g}-{t_max:g} K covered by the partition function "
            f"of {species}" + (f" ({spin_isomer})" if spin_isomer else "") + "; pass a temperature in that range"
        )
    q = np.exp(interp(np.log(np.clip(t, t_min, t_max))))
    return u.Quantity(q, u.dimensionless_unscaled)


def partition_energy_zero(species, spin_isomer=None):
    """E/k of the level Q counts from, on the catalog's E_up scale.

    Zero unless a spin species' lowest level lies above the molecule's ground
    level (e.g. para-NH3's (1,1) level).

    Examples
    --------
    >>> partition_energy_zero("NH3", "para").round(1)
    <Quantity 22.1 K>
    """
    return _tables()[_key(species, spin_isomer)][3] * u.K


def partition_function_source(species, spin_isomer=None):
    """Where the bundled Q(T) of a species comes from (publication and copy read)."""
    return _tables()[_key(species, spin_isomer)][4]
