"""Upper-level populations from line intensities and back, and what the LTE level ladder needs.

An optically thin line's velocity-integrated intensity counts the molecules in
its upper level. Two forms are in use:

* a map in brightness temperature, ``W = int T dv`` [K km/s], gives the
  upper-level column density (Goldsmith & Langer 1999, ApJ 517, 209),
  ``N_u = 8 pi k nu^2 W / (h c^3 A_ul)``;
* an unresolved source at redshift z, ``S dv`` [Jy km/s], gives the number of
  molecules in the upper level: the line luminosity ``L = 4 pi D_L^2 F`` with
  ``F = S dv nu_obs / c`` (Solomon & Vanden Bout 2005, ARA&A 43, 677, eq. 1)
  is ``N_u A_ul h nu_rest`` per unit magnification, so
  ``N_u = 4 pi D_L^2 S dv / ((1 + z) c h A_ul mu)``.

`upper_level_population` and `line_intensity` turn one into the other, the
unit of the input choosing the form. In LTE at temperature T, a spin species
s (or the whole molecule) of N molecules puts
``N_u = N g_u exp(-(E_up - E_0,s)/kT) / Q_s(T)`` in each level
(`spin_partition_function` gives Q_s and E_0,s), and `molecular_mass` turns a
number of molecules into a mass.

Examples
--------
>>> import astropy.units as u
>>> n_u = upper_level_population(1 * u.K * u.km / u.s, 115.2712018 * u.GHz, 7.203e-8 / u.s)
>>> f"{n_u.to_value(u.cm**-2):.3e}"
'3.585e+14'
"""

import functools
import re

import astropy.units as u
import numpy as np
from astropy.constants import c, h, k_B

from .errors import CatalogError, RedshiftError, UnitMismatchError
from .luminosity import get_cosmology
from .partition import partition_energy_zero, partition_function, partition_function_species
from .spectral import check_redshift

__all__ = ["molecular_mass", "spin_partition_function", "STATISTICAL_ORTHO_PARA", "upper_level_population",
           "line_intensity", "intensity_kind", "check_magnification"]

_KMS = u.km / u.s
_K_KMS = u.K * _KMS
_JY_KMS = u.Jy * _KMS

#: High-temperature ortho-to-para ratio (ratio of the nuclear-spin statistical weights) of the catalog's
#: species with ortho and para lines (from memory: H2O, H2CO, H2S and c-C3H2 have two equivalent protons,
#: 3:1; NH3 and H3O+ three, 1:1 for the catalog's ortho = K multiple of 3).
STATISTICAL_ORTHO_PARA = {"H2O": 3.0, "H2CO": 3.0, "H2S": 3.0, "c-C3H2": 3.0, "NH3": 1.0, "H3O+": 1.0}

# Atomic masses [u] of the isotopes in the catalog's species (from memory; AME2020, Wang et al. 2021,
# Chinese Physics C 45, 030003). A dozen numbers: a periodic-table dependency would outweigh them.
_ISOTOPE_MASS = {
    "H": 1.00782503, "D": 2.01410178, "C": 12.0, "13C": 13.00335484, "N": 14.00307401, "15N": 15.00010890,
    "O": 15.99491462, "17O": 16.99913176, "18O": 17.99915961, "S": 31.97207117, "34S": 33.96786701,
    "Si": 27.97692653, "Cl": 34.96885268, "F": 18.99840316, "He": 4.00260325,
}
_TOKEN = re.compile(r"(\d*)([A-Z][a-z]?)(\d*)")


def molecular_mass(species):
    """Mass of one molecule (or atom) of a catalog species, from its formula.

    Isotopes are written before their element (``"13CO"``, ``"C18O"``,
    ``"HC15N"``); a number after an element below 10 counts atoms, one of 10 or
    more is the next atom's mass number. Charges, ``c-``/``l-`` prefixes and the
    ionisation stage of ``[CII]`` are ignored (an electron's mass is below the
    precision that matters here).

    Raises
    ------
    CatalogError
        The formula holds an element without a bundled mass.

    Examples
    --------
    >>> molecular_mass("CO").round(4), molecular_mass("H2O").round(4)
    (<Quantity 27.9949 u>, <Quantity 18.0106 u>)
    """
    text = str(species).strip()
    atom = re.fullmatch(r"\[([A-Z][a-z]?)(?:I|V|X)+\]", text)
    if atom and atom.group(1) in _ISOTOPE_MASS:
        return _ISOTOPE_MASS[atom.group(1)] * u.u
    text = re.sub(r"^[a-z]-", "", text).rstrip("+-")
    total, pending, pos = 0.0, "", 0
    while pos < len(text):
        match = _TOKEN.match(text, pos)
        if not match:
            break
        lead, element, count = match.groups()
        isotope = (pending or lead) + element if (pending or lead) else element
        if isotope not in _ISOTOPE_MASS:
            raise CatalogError(
                f"no mass for {isotope!r} in species {species!r}; pass the mass yourself "
                "(e.g. mass = fit.total_number * 30 * u.u)"
            )
        pending = ""
        if count and int(count) >= 10:  # "C18O": 18 is the oxygen's mass number
            pending, count = count, ""
        total += _ISOTOPE_MASS[isotope] * (int(count) if count else 1)
        pos = match.end()
    if pos != len(text) or total == 0:
        raise CatalogError(f"cannot read the formula of species {species!r}; pass the mass yourself")
    return total * u.u


def spin_partition_function(species, spin_isomer, temperature):
    """Partition function and energy zero of a species, or of one of its spin species.

    Where `cubeloupe.analysis.partition_function` holds the spin species' own
    Q (H2O, NH3, H2S, H3O+, c-C3H2), that Q and its energy zero are returned. Where
    only the total over both spin species is bundled (H2CO), the spin
    species' level sum on the molecule's energy scale (zero at its ground
    level) is taken as its high-temperature share,
    ``Q_s = Q_total / (g_ortho + g_para)`` with the spin weights of
    `STATISTICAL_ORTHO_PARA` (3 and 1): exact when the ortho-to-para ratio in
    LTE is its statistical value (kT well above the lowest ortho level), off at
    lower temperatures, where the ratio derived with it is too low.

    Parameters
    ----------
    species : str
    spin_isomer : {'ortho', 'para'} or None
    temperature : Quantity [temperature]

    Returns
    -------
    Q : Quantity [dimensionless]
    energy_zero : Quantity [K]
        The level Q counts from, on the catalog's E_up scale.
    how : str
        Which of the two ways gave Q.

    Raises
    ------
    CatalogError
        No partition function for the species (or the temperature is out of its range).

    Examples
    --------
    >>> import astropy.units as u
    >>> q, zero, how = spin_partition_function("NH3", "para", 50 * u.K)
    >>> zero.round(1), how
    (<Quantity 22.1 K>, 'own partition function')
    """
    spin = None if spin_isomer in (None, "none", "") else str(spin_isomer)
    have = _with_partition_function()
    if spin is None or (species, spin) in have:
        return (partition_function(species, temperature, spin_isomer=spin),
                partition_energy_zero(species, spin), "own partition function")
    if (species, None) in have and species in STATISTICAL_ORTHO_PARA:
        # Q_total = g_ortho Q_ortho + g_para Q_para, and Q_ortho = Q_para at high temperature.
        q = partition_function(species, temperature) / (STATISTICAL_ORTHO_PARA[species] + 1.0)
        return q, 0.0 * u.K, "high-temperature share of the total partition function"
    raise CatalogError(
        f"no partition function for {spin} {species}; the spin species with one are "
        f"{sorted(f'{p} {s}' for s, p in have if p)}"
    )


@functools.lru_cache(maxsize=1)
def _with_partition_function():
    return frozenset(partition_function_species())


def check_magnification(magnification):
    """``magnification`` as a float > 0, else `RedshiftError` (as `line_luminosity`)."""
    if isinstance(magnification, u.Quantity):
        if magnification.unit != u.dimensionless_unscaled:
            raise UnitMismatchError(f"magnification must be a plain number; got {magnification}")
        magnification = magnification.value
    try:
        mu = float(magnification)
    except (TypeError, ValueError):
        raise RedshiftError(f"magnification must be a number > 0; got {magnification!r}") from None
    if not np.isfinite(mu) or mu <= 0:
        raise RedshiftError(f"magnification must be a finite number > 0 (1 for an unlensed source); got {mu}")
    return mu


def intensity_kind(unit):
    """``"brightness"`` for K km/s (or K Hz), ``"flux"`` for Jy km/s (Jy Hz, W/m2), else `UnitMismatchError`."""
    kind = _kind_of(u.Unit(unit))
    if kind is None:
        raise UnitMismatchError(
            f"a line intensity must be integrated over the line: K km/s (a map in brightness temperature) or "
            f"Jy km/s (an unresolved source); got {unit}. Convert Jy/beam to K first, or integrate over the source"
        )
    return kind


@functools.lru_cache(maxsize=64)
def _kind_of(unit):
    # Cached: astropy's is_equivalent decomposes composite units, ~0.1 ms a call, and a live fit asks often.
    if unit.is_equivalent(_K_KMS) or unit.is_equivalent(u.K * u.Hz):
        return "brightness"
    if unit.is_equivalent(_JY_KMS) or unit.is_equivalent(u.Jy * u.Hz):
        return "flux"
    return None


@functools.lru_cache(maxsize=64)
def _over_velocity(unit):
    return unit.is_equivalent(_K_KMS) or unit.is_equivalent(_JY_KMS)


def _per_velocity(intensity, observed):
    """``intensity`` integrated over velocity: one over frequency times c / nu_obs (dv = c dnu / nu)."""
    if _over_velocity(intensity.unit):
        return intensity
    return intensity * c / observed


def _distance_factor(z, magnification, cosmology):
    z = check_redshift(z)
    if z <= 0:
        raise RedshiftError(
            f"a flux in Jy km/s needs a source redshift z > 0 to count molecules (got z={z}); "
            "pass z=..., or give the intensity in K km/s for a column density"
        )
    d_l = get_cosmology(cosmology).luminosity_distance(z)
    return 4 * np.pi * d_l**2 / ((1 + z) * check_magnification(magnification))


def upper_level_population(intensity, rest_frequency, einstein_A, *, z=0.0, magnification=1.0, cosmology=None):
    """Molecules in the upper level of an optically thin line, from its integrated intensity.

    Parameters
    ----------
    intensity : Quantity [K km/s or Jy km/s]
        ``int T dv`` of a map in brightness temperature, or ``S dv`` of an
        unresolved source (an integral over frequency is accepted too).
    rest_frequency : Quantity [frequency]
    einstein_A : Quantity [1/s]
    z : float
        Source redshift (needed, > 0, for Jy km/s; scales the observed frequency).
    magnification : float
        Lensing magnification mu (Jy km/s only).
    cosmology : astropy Cosmology or str, optional
        Planck18 by default (see `get_cosmology`).

    Returns
    -------
    Quantity [cm^-2 or dimensionless]
        ``N_u = 8 pi k nu^2 W / (h c^3 A_ul)`` (Goldsmith & Langer
        1999) for K km/s; ``4 pi D_L^2 S dv / ((1 + z) c h A_ul mu)`` (from
        Solomon & Vanden Bout 2005, eq. 1) for Jy km/s.

    Examples
    --------
    >>> import astropy.units as u
    >>> n_u = upper_level_population(1 * u.Jy * u.km / u.s, 345.7959899 * u.GHz, 2.497e-6 / u.s, z=3.0)
    >>> f"{n_u.value:.2e}"
    '4.08e+61'
    """
    kind = intensity_kind(intensity.unit)
    observed = rest_frequency / (1 + check_redshift(z))
    intensity = _per_velocity(intensity, observed)
    if kind == "brightness":
        return (8 * np.pi * k_B * rest_frequency**2 * intensity / (h * c**3 * einstein_A)).to(u.cm**-2)
    factor = _distance_factor(z, magnification, cosmology)
    return (factor * intensity / (c * h * einstein_A)).to(u.dimensionless_unscaled)


def line_intensity(population, rest_frequency, einstein_A, *, z=0.0, magnification=1.0, cosmology=None):
    """The integrated intensity of an optically thin line: the inverse of `upper_level_population`.

    ``population`` per area [cm^-2] gives K km/s; a number of molecules gives
    Jy km/s of an unresolved source at ``z`` (> 0).

    Examples
    --------
    >>> import astropy.units as u
    >>> w = line_intensity(3.585e14 / u.cm**2, 115.2712018 * u.GHz, 7.203e-8 / u.s)
    >>> w.round(3)
    <Quantity 1. K km / s>
    """
    population = u.Quantity(population)
    if population.unit.is_equivalent(u.cm**-2):
        return (population * h * c**3 * einstein_A / (8 * np.pi * k_B * rest_frequency**2)).to(_K_KMS)
    if population.unit.is_equivalent(u.dimensionless_unscaled):
        factor = _distance_factor(z, magnification, cosmology)
        return (population * c * h * einstein_A / factor).to(_JY_KMS)
    raise UnitMismatchError(
        f"a population is a column density (cm^-2) or a number of molecules (no unit); got {population.unit}"
    )
