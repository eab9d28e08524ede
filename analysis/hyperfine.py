"""Hyperfine groups: their components, and the optically thick profile a hyperfine fit uses.

A resolved hyperfine group (N2H+ 1-0, HCN 1-0, NH3 (1,1), ...) is fitted as
one line whose components share an excitation temperature, a velocity and a
width, with optical depths in the fixed ratios of their relative intensities
``r_i`` (summing to 1; from the catalog's ``hyperfine_group`` and
``relative_intensity`` columns):

    ``T(v) = A (1 - exp(-tau sum_i r_i exp(-4 ln 2 (v - v0 - dv_i)^2 / W^2)))``
    with ``A (1 + z) = J(T_ex) - J(T_bg)`` and ``J(T) = (h nu / k) / (exp(h nu / k T) - 1)``

``tau`` is the total optical depth (the sum of the components' peak optical
depths), ``dv_i`` each component's velocity offset from the reference line.
This is the hyperfine-structure fitting method as used for N2H+ by Caselli,
Myers & Thaddeus (1995, ApJ 455, L77), with the radiative transfer of Mangum &
Shirley (2015, PASP 127, 266, eqs. 27-31). ``T_bg`` is the cosmic microwave
background, 2.72548 K (Fixsen 2009, ApJ 707, 916), times ``1 + z`` at
redshift ``z``, where the observed brightness is ``A / (1 + z)`` of the
source-frame one (da Cunha et al. 2013, ApJ 766, 13). `fit_gaussians` with
``hyperfine=`` does the fitting.

Examples
--------
>>> import astropy.units as u
>>> from astropy.table import Table
>>> lines = hyperfine_lines(Table({"rest_frequency": [93.1717, 93.1737] * u.GHz, "relative_intensity": [1, 3]}))
>>> lines["relative_intensity"].tolist()
[0.25, 0.75]
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np
from astropy import constants
from astropy.table import QTable, Table

from .catalog import load_catalog
from .errors import CatalogError

__all__ = ["CMB_TEMPERATURE", "OPTICAL_DEPTH_LIMITS", "HyperfineSolution", "hyperfine_lines", "hyperfine_profile",
           "strongest_components",
           "hyperfine_jacobian", "planck_temperature", "excitation_temperature"]

_FOUR_LN2 = 4.0 * np.log(2.0)

#: Present-day CMB temperature (Fixsen 2009, ApJ 707, 916).
CMB_TEMPERATURE = 2.72548 * u.K

#: Bounds of a fitted total optical depth: below 1e-3 only A * tau is constrained, beyond 30 the
#: profile no longer constrains tau (common practice).
OPTICAL_DEPTH_LIMITS = (1e-3, 30.0)


@dataclass(frozen=True)
class HyperfineSolution:
    """The radiative-transfer parameters of a hyperfine fit (see the module docstring).

    Attributes
    ----------
    group : str
        The hyperfine group's name ("" for a table given directly).
    optical_depth, optical_depth_error : float
        Total optical depth ``tau`` (the sum over components of their peak
        optical depths) and its 1-sigma error.
    amplitude, amplitude_error : Quantity
        ``A = J(T_ex) - J(T_bg)`` (observed, i.e. divided by ``1 + z``), in the spectrum's unit.
    excitation_temperature, excitation_temperature_error : Quantity or None
        From ``A`` for spectra in K (filling factor 1); None otherwise.
    center, center_error, fwhm, fwhm_error : Quantity [km/s]
        Velocity of the group (of the reference line) and the common intrinsic FWHM.
    lines : QTable
        ``rest_frequency``, ``relative_intensity`` and ``velocity_offset`` of each component.
    reference_frequency : Quantity [GHz]
        The rest frequency velocities are measured from.
    """

    group: str
    optical_depth: float
    optical_depth_error: float
    amplitude: u.Quantity
    amplitude_error: u.Quantity
    excitation_temperature: object
    excitation_temperature_error: object
    center: u.Quantity
    center_error: u.Quantity
    fwhm: u.Quantity
    fwhm_error: u.Quantity
    lines: QTable
    reference_frequency: u.Quantity


def _profile_parts(v, params, offsets, weights):
    amplitude, v0, width, tau = params
    delta = v[:, None] - v0 - offsets
    shapes = np.exp(-_FOUR_LN2 * delta**2 / width**2)
    profile = shapes @ weights  # sum_i r_i g_i(v)
    return amplitude, tau, width, delta, shapes, profile


def hyperfine_profile(v, params, offsets, weights):
    """``A (1 - exp(-tau sum_i r_i exp(-4 ln 2 (v - v0 - dv_i)^2 / W^2)))`` for ``params = [A, v0, W, tau]``.

    Examples
    --------
    >>> round(float(hyperfine_profile(np.array([0.0]), np.array([2.0, 0.0, 1.0, 1.0]), np.array([0.0]),
    ...                                np.array([1.0]))[0]), 4)
    1.2642
    """
    amplitude, tau, _, _, _, profile = _profile_parts(v, params, offsets, weights)
    return amplitude * -np.expm1(-tau * profile)


def hyperfine_jacobian(v, params, offsets, weights):
    """Derivatives of `hyperfine_profile` with respect to ``[A, v0, W, tau]``, shape (n, 4)."""
    amplitude, tau, width, delta, shapes, profile = _profile_parts(v, params, offsets, weights)
    attenuation = np.exp(-tau * profile)
    common = amplitude * attenuation * tau
    return np.column_stack([
        -np.expm1(-tau * profile),
        common * ((shapes * (2 * _FOUR_LN2 * delta / width**2)) @ weights),
        common * ((shapes * (2 * _FOUR_LN2 * delta**2 / width**3)) @ weights),
        amplitude * attenuation * profile,
    ])


def hyperfine_lines(group, catalog=None):
    """The components of a hyperfine group: rest frequencies and relative intensities summing to 1.

    Parameters
    ----------
    group : str or Table
        A group name of the catalog's ``hyperfine_group`` column (e.g.
        ``"N2H+ J=1-0"``), or a table with columns ``rest_frequency``
        (Quantity, or GHz) and ``relative_intensity`` (renormalised to sum to 1).
    catalog : Table, optional
        Defaults to `load_catalog`.

    Returns
    -------
    QTable
        ``rest_frequency`` [GHz] and ``relative_intensity``, sorted by frequency.

    Raises
    ------
    CatalogError
        Unknown group, a catalog without hyperfine groups, or a malformed table.

    Examples
    --------
    >>> from astropy.table import Table
    >>> t = hyperfine_lines(Table({"rest_frequency": [93.1717, 93.1737] * u.GHz, "relative_intensity": [1, 3]}))
    >>> t["relative_intensity"].tolist()
    [0.25, 0.75]
    """
    name = ""
    if isinstance(group, str):
        name = group
        table = load_catalog() if catalog is None else catalog
        if "hyperfine_group" not in table.colnames or "relative_intensity" not in table.colnames:
            raise CatalogError(
                f"the line catalog has no hyperfine groups (columns 'hyperfine_group', 'relative_intensity'), so "
                f"{group!r} cannot be looked up; pass hyperfine= a table with columns rest_frequency and "
                "relative_intensity instead"
            )
        groups = np.array([str(g) for g in table["hyperfine_group"]])
        rows = table[groups == group]
        if len(rows) == 0:
            known = sorted({g for g in groups if g})
            raise CatalogError(f"no hyperfine group {group!r} in the catalog; known groups: {known}")
    elif isinstance(group, Table):
        rows = group
    else:
        raise CatalogError(f"hyperfine must be a group name or a table; got {type(group).__name__}")
    for column in ("rest_frequency", "relative_intensity"):
        if column not in rows.colnames:
            raise CatalogError(f"a hyperfine table needs the column {column!r}; it has {rows.colnames}")
    frequency = u.Quantity(rows["rest_frequency"], u.GHz)
    intensity = np.asarray(u.Quantity(rows["relative_intensity"]).value, dtype=float)
    if len(rows) < 2 or not np.all(np.isfinite(intensity)) or np.any(intensity < 0) or intensity.sum() <= 0:
        raise CatalogError(
            f"the hyperfine group {name or 'table'} needs at least two components with non-negative relative "
            f"intensities; got {intensity.tolist()}"
        )
    order = np.argsort(frequency.value)
    out = QTable({"rest_frequency": frequency[order], "relative_intensity": intensity[order] / intensity.sum()})
    out.meta["group"] = name
    return out


def planck_temperature(temperature, frequency):
    """``J(T) = (h nu / k) / (exp(h nu / k T) - 1)`` in K (Mangum & Shirley 2015, eq. 27); ``temperature`` in K.

    Examples
    --------
    >>> round(float(planck_temperature(10.0, 93.17 * u.GHz)), 3)  # h nu / k = 4.47 K at 93 GHz
    7.93
    """
    t0 = (constants.h * frequency / constants.k_B).to_value(u.K)
    return t0 / np.expm1(t0 / temperature)


def excitation_temperature(amplitude, frequency, z=0.0):
    """``T_ex`` (K) from ``A = [J(T_ex) - J(T_bg)] / (1 + z)`` (``A`` in K), and ``d T_ex / d A``.

    Returns NaN for an amplitude below what the background allows.

    Examples
    --------
    >>> a = float(planck_temperature(8.0, 93.17 * u.GHz) - planck_temperature(2.72548, 93.17 * u.GHz))
    >>> round(excitation_temperature(a, 93.17 * u.GHz)[0], 6)
    8.0
    """
    t0 = (constants.h * frequency / constants.k_B).to_value(u.K)
    background = planck_temperature(CMB_TEMPERATURE.to_value(u.K) * (1 + z), frequency)
    x = amplitude * (1 + z) + background
    if x <= 0:
        return float("nan"), float("nan")
    tex = t0 / np.log1p(t0 / x)
    # d/dx [t0 / ln(1 + t0/x)] = t0^2 / (x^2 (1 + t0/x) ln^2(1 + t0/x)) = tex^2 / (x^2 + x t0)
    derivative = tex**2 / (x**2 + x * t0) * (1 + z)
    return float(tex), float(derivative)


def strongest_components(catalog=None):
    """{hyperfine group: name of its strongest component} over a catalog.

    The strongest component (largest LTE share, ``relative_intensity``) is the
    usual velocity reference for a group, e.g. N2H+ J=1-0's F1,F = 2,3-1,2.

    Examples
    --------
    >>> strongest_components()["N2H+ J=1-0"]
    'N2H+ J=1-0 F1,F=2,3-1,2'
    """
    catalog = load_catalog() if catalog is None else catalog
    if "hyperfine_group" not in catalog.colnames:
        return {}
    groups = np.asarray(catalog["hyperfine_group"], dtype=str)
    rows = np.flatnonzero(groups != "")
    order = rows[np.argsort(-np.asarray(catalog["relative_intensity"], dtype=float)[rows], kind="stable")]
    strongest = {}
    for i in order:
        strongest.setdefault(str(groups[i]), str(catalog["name"][i]))
    return strongest
