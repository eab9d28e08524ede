"""The LTE spectrum of one or more species over an observed band.

Every catalog line of the given species whose redshifted frequency falls in
(or near) the band gets the integrated intensity of an optically thin line in
LTE at temperature T: the upper level holds
``N_u = N_s g_u exp(-(E_up - E_0,s)/kT) / Q_s(T)`` (Goldsmith & Langer 1999,
ApJ 517, 209), which `line_intensity` turns into K km/s (a column
density; Goldsmith & Langer) or Jy km/s of an unresolved source at z (a
number of molecules; Solomon & Vanden Bout 2005, ARA&A 43, 677, eq. 1). Each
line is a Gaussian of the given FWHM in velocity, so its peak is
``W / (1.0645 FWHM)`` (1.0645 = sqrt(pi / (4 ln 2)), common practice).

With ``opacity=True`` (brightness temperature only) the lines are not thin:
the optical depth ``int tau dv = c^3 A_ul N_u (exp(h nu/kT) - 1) / (8 pi nu^3)``
(Mangum & Shirley 2015, PASP 127, 266) is spread with the same
profile and ``T = J(T) (1 - exp(-tau))`` per channel, lines overlapping in a
channel sharing one optical depth.

Spin species (ortho and para) share the molecule's amount in the ratio
``ortho_para_ratio`` (by default the statistical high-temperature ratio,
`STATISTICAL_ORTHO_PARA`), each with its own partition function
(`spin_partition_function`).

Examples
--------
>>> import astropy.units as u
>>> axis = np.linspace(230.3, 230.7, 400) * u.GHz
>>> model = lte_spectrum(axis, ["CO"], temperature=30 * u.K, column_density=1e16 / u.cm**2,
...                      fwhm=20 * u.km / u.s, z=0.0)
>>> model.unit, round(float(model.max().value), 2)
(Unit("K"), 0.8)
"""

import functools

import astropy.units as u
import numpy as np
from astropy.constants import c, h, k_B
from astropy.table import QTable

from .catalog import lines_in_band
from .errors import ParameterError, SpectralAxisError, UnitMismatchError
from .hyperfine import planck_temperature
from .level_populations import STATISTICAL_ORTHO_PARA, line_intensity, spin_partition_function
from .spectral import check_redshift

__all__ = ["lte_spectrum", "lte_lines", "GAUSSIAN_AREA_FACTOR"]

#: Area of a unit-peak Gaussian over its FWHM: sqrt(pi / (4 ln 2)) = 1.0645 (common practice).
GAUSSIAN_AREA_FACTOR = float(np.sqrt(np.pi / (4 * np.log(2))))
_KMS = u.km / u.s
_C_KMS = c.to_value(_KMS)
# Beyond 5 FWHM a Gaussian is below 1e-30 of its peak: channels farther away get nothing.
_REACH = 5.0


def _positive(value, name, unit, example):
    if not isinstance(value, u.Quantity) or not value.unit.is_equivalent(unit):
        raise UnitMismatchError(f"{name} must be a Quantity in {unit}, e.g. {name}={example}; got {value!r}")
    number = float(value.to_value(unit))
    if not np.isfinite(number) or number <= 0:
        raise ParameterError(f"{name} must be finite and > 0; got {value}")
    return number


@functools.lru_cache(maxsize=32)
def _band_lines(species, lo_ghz, hi_ghz, z):
    """Arrays of the bundled catalog's lines of ``species`` observed in [lo, hi] GHz (cached for live sliders)."""
    return _line_arrays(lines_in_band(lo_ghz * u.GHz, hi_ghz * u.GHz, z, species=list(species)))


def _line_arrays(band):
    a_ul = np.asarray(u.Quantity(band["einstein_A"], 1 / u.s).value, dtype=float)
    g_up = np.asarray(band["g_up"], dtype=float)
    usable = np.isfinite(a_ul) & (a_ul > 0) & np.isfinite(g_up) & (g_up > 0)
    band = band[usable]
    return {
        "name": np.asarray(band["name"], dtype=str),
        "species": np.asarray(band["species"], dtype=str),
        "spin_isomer": np.asarray(band["spin_isomer"], dtype=str),
        "rest_frequency": np.asarray(u.Quantity(band["rest_frequency"], u.GHz).value, dtype=float),
        "E_up": np.asarray(u.Quantity(band["E_up"], u.K).value, dtype=float),
        "einstein_A": a_ul[usable],
        "g_up": g_up[usable],
        "skipped": tuple(np.asarray(band.meta.get("skipped", ()), dtype=str)),
    }


def _amount(column_density, total_number):
    if (column_density is None) == (total_number is None):
        raise ParameterError("give exactly one of column_density (e.g. 1e16 / u.cm**2, gives K) or total_number "
                             "(molecules of an unresolved source at z, gives Jy)")
    if column_density is not None:
        if not isinstance(column_density, u.Quantity) or not column_density.unit.is_equivalent(u.cm**-2):
            raise UnitMismatchError(f"column_density must be in cm^-2, e.g. 1e16 / u.cm**2; got {column_density!r}")
        value = column_density.to(u.cm**-2)
    else:
        value = u.Quantity(total_number)
        if not value.unit.is_equivalent(u.one):
            raise UnitMismatchError(f"total_number is a number of molecules (no unit); got {total_number!r}")
        value = value.to(u.one)
    if value.ndim != 0 or not np.isfinite(value.value) or value.value < 0:
        raise ParameterError(f"the amount of gas must be one finite number >= 0; got {value}")
    return value


def _spin_shares(species, spins, ortho_para_ratio):
    """{spin: fraction of the molecules} for a species' spin labels."""
    labels = set(spins.tolist())
    if labels <= {"none"}:
        return {"none": 1.0}
    ratio = ortho_para_ratio
    if ratio is None:
        if species not in STATISTICAL_ORTHO_PARA:
            raise ParameterError(f"{species} has ortho and para lines; pass ortho_para_ratio=...")
        ratio = STATISTICAL_ORTHO_PARA[species]
    ratio = float(ratio)
    if not np.isfinite(ratio) or ratio <= 0:
        raise ParameterError(f"ortho_para_ratio must be finite and > 0; got {ortho_para_ratio!r}")
    return {"ortho": ratio / (1 + ratio), "para": 1 / (1 + ratio), "none": 1.0}


def lte_lines(fmin, fmax, species_list, *, temperature, column_density=None, total_number=None, z=0.0,
              ortho_para_ratio=None, magnification=1.0, cosmology=None, catalog=None):
    """The catalog lines of ``species_list`` observed in [fmin, fmax] and their LTE integrated intensities.

    Parameters are as in `lte_spectrum` (``fmin``, ``fmax``: the observed
    band, Quantity [frequency]).

    Returns
    -------
    QTable
        ``name``, ``species``, ``spin_isomer``, ``rest_frequency``,
        ``observed_frequency`` [GHz], ``E_up`` [K], ``g_up``, ``einstein_A``,
        ``N_u`` [cm^-2, or a number] and ``intensity`` [K km/s or Jy km/s], sorted by observed
        frequency. Lines without Einstein A or g_up are left out.

    Examples
    --------
    >>> import astropy.units as u
    >>> table = lte_lines(340 * u.GHz, 350 * u.GHz, ["CO"], temperature=30 * u.K,
    ...                   column_density=1e16 / u.cm**2)
    >>> table["name"].tolist(), table["intensity"].round(1)
    (['CO J=3-2'], <Quantity [22.2] K km / s>)
    """
    t = _positive(temperature, "temperature", u.K, "30*u.K")
    amount = _amount(column_density, total_number)
    z = check_redshift(z)
    lo = float(u.Quantity(fmin).to_value(u.GHz, equivalencies=u.spectral()))
    hi = float(u.Quantity(fmax).to_value(u.GHz, equivalencies=u.spectral()))
    lo, hi = min(lo, hi), max(lo, hi)
    species = (species_list,) if isinstance(species_list, str) else tuple(species_list)
    if not species:
        raise ParameterError("species_list is empty; give e.g. ['CO', '13CO']")
    if catalog is None:
        lines = _band_lines(species, lo, hi, z)
    else:
        lines = _line_arrays(lines_in_band(lo * u.GHz, hi * u.GHz, z, catalog, species=list(species)))
    n_u = np.zeros(len(lines["name"]))
    for name in sorted(set(lines["species"].tolist())):
        here = lines["species"] == name
        shares = _spin_shares(name, lines["spin_isomer"][here], ortho_para_ratio)
        for spin, share in shares.items():
            rows = here & (lines["spin_isomer"] == spin)
            if not rows.any():
                continue
            q, zero, _ = spin_partition_function(name, None if spin == "none" else spin, t * u.K)
            n_u[rows] = (share * lines["g_up"][rows] * np.exp(-(lines["E_up"][rows] - zero.to_value(u.K)) / t)
                         / float(q))
    population = n_u * amount
    intensity = line_intensity(population, lines["rest_frequency"] * u.GHz, lines["einstein_A"] / u.s, z=z,
                               magnification=magnification, cosmology=cosmology)
    table = QTable({"name": lines["name"], "species": lines["species"], "spin_isomer": lines["spin_isomer"],
                    "rest_frequency": lines["rest_frequency"] * u.GHz,
                    "observed_frequency": lines["rest_frequency"] / (1 + z) * u.GHz,
                    "E_up": lines["E_up"] * u.K, "g_up": lines["g_up"], "einstein_A": lines["einstein_A"] / u.s,
                    "N_u": population, "intensity": intensity})
    table.meta.update({"temperature_K": t, "z": z})
    return table


def lte_spectrum(spectral_axis, species_list, *, temperature, column_density=None, total_number=None, fwhm,
                 z=0.0, ortho_para_ratio=None, opacity=False, magnification=1.0, cosmology=None, catalog=None):
    """The LTE spectrum of ``species_list`` on ``spectral_axis``.

    Parameters
    ----------
    spectral_axis : Quantity [frequency]
        Observed channel frequencies (wavelengths are converted), e.g.
        ``spectrum.spectral_axis`` of a frequency cube (or `frequency_axis`).
    species_list : str or list of str
        Catalog species, e.g. ``["CO", "13CO"]``.
    temperature : Quantity [K]
        Excitation temperature (LTE: one for all levels).
    column_density : Quantity [cm^-2], optional
        Total column density of each species: the model is in K.
    total_number : float, optional
        Total number of molecules of each species in an unresolved source at z
        (> 0): the model is flux density in Jy.
    fwhm : Quantity [velocity]
        Line full width at half maximum.
    z : float
        Source redshift.
    ortho_para_ratio : float, optional
        N_ortho / N_para of species with spin isomers (statistical value by default).
    opacity : bool
        Brightness temperature with the lines' optical depth, ``J(T) (1 - exp(-tau))``
        (column densities only); optically thin by default.
    magnification : float
        Lensing magnification (multiplies the flux of ``total_number`` molecules).
    cosmology : astropy Cosmology or str, optional
        Planck18 by default.
    catalog : Table, optional
        The line catalog (`load_catalog`); the bundled one by default.

    Returns
    -------
    Quantity [K or Jy]
        One value per channel of ``spectral_axis``.

    Raises
    ------
    UnitMismatchError
        An axis, temperature, amount or width of the wrong kind.
    SpectralAxisError
        A velocity axis (give frequencies).
    ParameterError
        Neither or both of column_density and total_number, opacity with a
        molecule count, a non-positive temperature or width.
    CatalogError
        An unknown species, or no partition function for it.

    References
    ----------
    Goldsmith & Langer 1999, ApJ 517, 209; Mangum & Shirley 2015, PASP 127, 266;
    Solomon & Vanden Bout 2005, ARA&A 43, 677.

    Examples
    --------
    >>> import astropy.units as u
    >>> axis = np.linspace(222.0, 226.0, 2000) * u.GHz     # CO J=8-7 at z = 3.1
    >>> flux = lte_spectrum(axis, "CO", temperature=40 * u.K, total_number=1e63, fwhm=300 * u.km / u.s,
    ...                     z=3.1, magnification=12)
    >>> flux.unit, f"{flux.max().value:.2g}"
    (Unit("Jy"), '0.14')
    """
    if not isinstance(spectral_axis, u.Quantity):
        raise UnitMismatchError(f"spectral_axis must be a Quantity of frequencies; got {type(spectral_axis).__name__}")
    if spectral_axis.unit.is_equivalent(_KMS):
        raise SpectralAxisError(
            "spectral_axis is in velocity; give observed frequencies (e.g. frequency_axis(spectrum) or "
            "spectrum.with_spectral_unit(u.GHz).spectral_axis)"
        )
    try:
        nu = np.asarray(spectral_axis.to_value(u.GHz, equivalencies=u.spectral()), dtype=float)
    except u.UnitConversionError:
        raise UnitMismatchError(f"spectral_axis must be in a frequency unit; got {spectral_axis.unit}") from None
    width = _positive(fwhm, "fwhm", _KMS, "20*u.km/u.s")
    if opacity and total_number is not None:
        raise ParameterError("opacity=True needs column_density (brightness temperature); a molecule count of an "
                             "unresolved source gives optically thin fluxes only")
    finite = nu[np.isfinite(nu)]
    if finite.size == 0:
        raise SpectralAxisError("spectral_axis holds no finite frequency")
    margin = _REACH * width / _C_KMS
    lines = lte_lines(finite.min() * (1 - margin) * u.GHz, finite.max() * (1 + margin) * u.GHz, species_list,
                      temperature=temperature, column_density=column_density, total_number=total_number, z=z,
                      ortho_para_ratio=ortho_para_ratio, magnification=magnification, cosmology=cosmology,
                      catalog=catalog)
    unit = u.K if total_number is None else u.Jy
    centre = lines["observed_frequency"].to_value(u.GHz)
    area = lines["intensity"].to_value(unit * _KMS)
    peak = area / (GAUSSIAN_AREA_FACTOR * width)
    if opacity:
        t = float(temperature.to_value(u.K))
        rest = lines["rest_frequency"]
        # int tau dv = c^3 A N_u (exp(h nu / k T) - 1) / (8 pi nu^3) (Mangum & Shirley 2015)
        hnu_kt = (h * rest / (k_B * t * u.K)).to_value(u.one)
        tau_area = (c**3 * lines["einstein_A"] * lines["N_u"] * np.expm1(hnu_kt) / (8 * np.pi * rest**3)).to_value(_KMS)
        source = planck_temperature(t, rest)
        peak = tau_area / (GAUSSIAN_AREA_FACTOR * width)
    order = np.argsort(nu, kind="stable")
    sorted_nu = nu[order]
    total = np.zeros_like(sorted_nu)
    weighted = np.zeros_like(sorted_nu) if opacity else None
    four_ln2 = 4 * np.log(2)
    for i in range(len(centre)):
        half = centre[i] * margin
        lo, hi = np.searchsorted(sorted_nu, [centre[i] - half, centre[i] + half])
        if hi <= lo:
            continue
        v = _C_KMS * (centre[i] - sorted_nu[lo:hi]) / centre[i]
        profile = peak[i] * np.exp(-four_ln2 * (v / width) ** 2)
        total[lo:hi] += profile
        if opacity:
            weighted[lo:hi] += source[i] * profile
    if opacity:
        # Overlapping lines share one optical depth; each contributes in proportion to its tau J(T).
        with np.errstate(invalid="ignore", divide="ignore"):
            total = np.where(total > 0, weighted / total * -np.expm1(-total), 0.0)
    out = np.empty_like(total)
    out[order] = total
    out[~np.isfinite(nu)] = np.nan
    return out * unit
