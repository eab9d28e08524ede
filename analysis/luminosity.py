"""Line luminosities from integrated line fluxes, and distances for a redshift.

Two luminosities are in use (Solomon, Downes & Radford 1992, ApJ 398, L29;
Solomon & Vanden Bout 2005, ARA&A 43, 677, eqs. 1 and 3):

* ``L'_line = c^2 / (2 k) * S dV * D_L^2 / (nu_obs^2 (1 + z)^3)``, in
  K km/s pc^2, the area-integrated brightness temperature, numerically
  ``3.25e7 S dV nu_obs^-2 D_L^2 (1 + z)^-3`` with S dV in Jy km/s, nu_obs in
  GHz and D_L in Mpc;
* ``L_line = 4 pi D_L^2 * S dV * nu_obs / c``, in L_sun, numerically
  ``1.04e-3 S dV nu_rest (1 + z)^-1 D_L^2``.

Both are computed here from astropy's constants rather than from the rounded
numbers. A gravitationally lensed source's luminosities are divided by the
magnification.

Examples
--------
>>> import astropy.units as u
>>> lum = line_luminosity(1.0 * u.Jy * u.km / u.s, z=2.0, rest_frequency=461.0407682 * u.GHz)
>>> lum.l_prime.unit == u.K * u.km / u.s * u.pc**2, lum.luminosity.unit
(True, Unit("solLum"))
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy import cosmology as _cosmology
from astropy.constants import c, k_B

from .errors import RedshiftError, UnitMismatchError
from .spectral import check_redshift, check_rest_frequency

__all__ = [
    "DEFAULT_COSMOLOGY",
    "CosmologySummary",
    "LineLuminosity",
    "get_cosmology",
    "line_luminosity",
    "redshift_summary",
    "HUBBLE_FLOW_MIN_VELOCITY",
    "in_hubble_flow",
]

# A current Planck parameter set (Planck Collaboration 2020, A&A 641, A6).
DEFAULT_COSMOLOGY = _cosmology.Planck18

L_PRIME_UNIT = u.K * u.km / u.s * u.pc**2

#: Below this recession velocity cz, peculiar and Galactic motions (a few hundred km/s) are a large part of
#: the velocity, so a distance from the Hubble flow means little (common practice); Galactic sources
#: (cz of tens of km/s) are far below it.
HUBBLE_FLOW_MIN_VELOCITY = 1000 * u.km / u.s
_KMS = u.km / u.s


def get_cosmology(cosmology=None):
    """Resolve ``cosmology`` to an astropy Cosmology.

    Parameters
    ----------
    cosmology : astropy.cosmology.Cosmology, str or None
        A Cosmology instance, the name of one of astropy's built-in parameter
        sets (e.g. ``"WMAP9"``), or None for `DEFAULT_COSMOLOGY` (Planck18).

    Examples
    --------
    >>> get_cosmology().name
    'Planck18'
    """
    if cosmology is None:
        return DEFAULT_COSMOLOGY
    if isinstance(cosmology, _cosmology.Cosmology):
        return cosmology
    if isinstance(cosmology, str):
        available = list(_cosmology.realizations.available)
        if cosmology in available:
            return getattr(_cosmology.realizations, cosmology)
        raise RedshiftError(
            f"unknown cosmology {cosmology!r}; choose one of astropy's {available} "
            "or pass an astropy.cosmology object such as FlatLambdaCDM(H0=70, Om0=0.3)"
        )
    raise RedshiftError(
        f"cosmology must be an astropy.cosmology object or a name such as 'Planck18'; got {cosmology!r}"
    )


def _check_source_redshift(z, func):
    z = check_redshift(z)
    if z <= 0:
        raise RedshiftError(
            f"{func} needs a cosmological redshift z > 0; got z={z}. Distances of sources at z <= 0 "
            "are not set by the Hubble flow"
        )
    return z


@dataclass(frozen=True)
class CosmologySummary:
    """Distances and times for a redshift, for display beside it.

    Attributes
    ----------
    z : float
    luminosity_distance : Quantity [Mpc]
    angular_diameter_distance : Quantity [Mpc]
    angular_scale : Quantity [kpc / arcsec]
        Proper transverse size of one arcsecond at ``z``.
    age : Quantity [Gyr]
        Age of the universe at ``z``.
    lookback_time : Quantity [Gyr]
    cosmology : str
        Name (or description) of the cosmology used.
    """

    z: float
    luminosity_distance: u.Quantity
    angular_diameter_distance: u.Quantity
    angular_scale: u.Quantity
    age: u.Quantity
    lookback_time: u.Quantity
    cosmology: str


def _cosmology_name(cosmo):
    return cosmo.name or repr(cosmo)


def in_hubble_flow(z):
    """Whether a source at redshift ``z`` recedes fast enough for a cosmological distance to mean something.

    True when c z >= `HUBBLE_FLOW_MIN_VELOCITY` (1000 km/s).

    Examples
    --------
    >>> in_hubble_flow(1e-4), in_hubble_flow(0.005)
    (False, True)
    """
    z = check_redshift(z)
    return bool(z * c.to(u.km / u.s) >= HUBBLE_FLOW_MIN_VELOCITY)


def redshift_summary(z, cosmology=None):
    """Luminosity distance, angular scale and age of the universe at ``z``.

    Parameters
    ----------
    z : float
        Redshift, 0 < z <= 20.
    cosmology : astropy.cosmology.Cosmology or str, optional
        Planck18 by default; see `get_cosmology`.

    Returns
    -------
    CosmologySummary

    Raises
    ------
    RedshiftError
        z out of range, or an unknown cosmology.

    Examples
    --------
    >>> s = redshift_summary(2.0)
    >>> s.cosmology, s.angular_scale.unit
    ('Planck18', Unit("kpc / arcsec"))
    """
    z = _check_source_redshift(z, "redshift_summary")
    cosmo = get_cosmology(cosmology)
    d_a = cosmo.angular_diameter_distance(z).to(u.Mpc)
    scale = (d_a / u.radian).to(u.kpc / u.arcsec, equivalencies=u.dimensionless_angles())
    return CosmologySummary(
        z=z,
        luminosity_distance=cosmo.luminosity_distance(z).to(u.Mpc),
        angular_diameter_distance=d_a,
        angular_scale=scale,
        age=cosmo.age(z).to(u.Gyr),
        lookback_time=cosmo.lookback_time(z).to(u.Gyr),
        cosmology=_cosmology_name(cosmo),
    )


@dataclass(frozen=True)
class LineLuminosity:
    """A line's luminosities and the numbers they were computed with.

    Attributes
    ----------
    l_prime : Quantity [K km/s pc2]
        L'_line, corrected for magnification.
    luminosity : Quantity [L_sun]
        L_line, corrected for magnification.
    flux : Quantity [Jy km/s]
        The integrated flux used, as S dV.
    z : float
    rest_frequency, observed_frequency : Quantity [GHz]
    luminosity_distance : Quantity [Mpc]
    magnification : float
    cosmology : str
    """

    l_prime: u.Quantity
    luminosity: u.Quantity
    flux: u.Quantity
    z: float
    rest_frequency: u.Quantity
    observed_frequency: u.Quantity
    luminosity_distance: u.Quantity
    magnification: float
    cosmology: str


def _velocity_integrated_flux(flux, observed_frequency):
    """``flux`` as S dV [Jy km/s]; a flux in W/m2 is S dnu, and dV = c dnu / nu_obs."""
    if not isinstance(flux, u.Quantity):
        raise UnitMismatchError(
            f"Argument 'flux' to 'line_luminosity' must be an integrated line flux with units, "
            f"e.g. 1.2*u.Jy*u.km/u.s or 3e-20*u.W/u.m**2; got {flux!r}"
        )
    if flux.unit.is_equivalent(u.Jy * _KMS):
        return flux.to(u.Jy * _KMS)
    if flux.unit.is_equivalent(u.W / u.m**2):
        return (flux * c / observed_frequency).to(u.Jy * _KMS)
    raise UnitMismatchError(
        f"Argument 'flux' to 'line_luminosity' must be an integrated line flux (Jy km/s, or W/m2); "
        f"got {flux.unit}. A flux density (Jy) must first be integrated over the line"
    )


def line_luminosity(flux, z, rest_frequency, cosmology=None, magnification=1):
    """L'_line [K km/s pc2] and L_line [L_sun] of a line of integrated flux ``flux``.

    Parameters
    ----------
    flux : Quantity [Jy km/s or W/m2]
        Integrated line flux, S dV (or S dnu).
    z : float
        Source redshift, 0 < z <= 20.
    rest_frequency : Quantity [frequency]
        The line's rest frequency.
    cosmology : astropy.cosmology.Cosmology or str, optional
        Planck18 by default; see `get_cosmology`.
    magnification : float
        Lensing magnification mu > 0; both luminosities are divided by it.

    Returns
    -------
    LineLuminosity

    Raises
    ------
    UnitMismatchError
        ``flux`` or ``rest_frequency`` without suitable units.
    RedshiftError
        z <= 0 or z > 20, an unknown cosmology, or a magnification <= 0.

    References
    ----------
    Solomon, Downes & Radford 1992, ApJ 398, L29; Solomon & Vanden Bout 2005,
    ARA&A 43, 677, eqs. (1) and (3).

    Examples
    --------
    >>> import astropy.units as u
    >>> lensed = line_luminosity(2 * u.Jy * u.km / u.s, 3.0, 345.7959899 * u.GHz, magnification=10)
    >>> plain = line_luminosity(2 * u.Jy * u.km / u.s, 3.0, 345.7959899 * u.GHz)
    >>> round(float(plain.l_prime / lensed.l_prime), 6)
    10.0
    """
    z = _check_source_redshift(z, "line_luminosity")
    rest = check_rest_frequency(rest_frequency, func="line_luminosity")
    if np.ndim(rest) != 0:
        raise UnitMismatchError(f"rest_frequency must be a single frequency; got {rest_frequency}")
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

    cosmo = get_cosmology(cosmology)
    observed = rest / (1 + z)
    s_dv = _velocity_integrated_flux(flux, observed)
    d_l = cosmo.luminosity_distance(z).to(u.Mpc)

    # Solomon et al. 1992 / Solomon & Vanden Bout 2005 eq. (3), Rayleigh-Jeans
    # brightness temperature integrated over the source.
    l_prime = (c**2 / (2 * k_B) * s_dv * d_l**2 / (observed**2 * (1 + z) ** 3)).to(L_PRIME_UNIT)
    # Eq. (1): L = 4 pi D_L^2 F with F = S dV nu_obs / c.
    luminosity = (4 * np.pi * d_l**2 * s_dv * observed / c).to(u.L_sun)
    return LineLuminosity(
        l_prime=l_prime / mu,
        luminosity=luminosity / mu,
        flux=s_dv,
        z=z,
        rest_frequency=rest,
        observed_frequency=observed,
        luminosity_distance=d_l,
        magnification=mu,
        cosmology=_cosmology_name(cosmo),
    )
