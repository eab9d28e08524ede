"""Spectral coordinates: velocity conventions, redshifted lines and channel selection.

Velocities for a line at redshift ``z`` are rest-frame offsets from that line's
redshifted frequency ``f_ref = f_rest / (1 + z)``. Each of the three
conventions depends on frequency only through ``f / f_ref``, so the velocity
computed at ``f_ref`` equals the velocity in the source's rest frame:

* radio:        ``v = c (f_ref - f) / f_ref``
* optical:      ``v = c (f_ref - f) / f``
* relativistic: ``v = c (f_ref^2 - f^2) / (f_ref^2 + f^2)``

(Greisen et al. 2006, A&A 446, 747, Table 1; astropy's ``doppler_*``
equivalencies implement the same formulas.)

Examples
--------
>>> import astropy.units as u
>>> CO21 = 230.538 * u.GHz
>>> v = velocity(230.538 * u.GHz / 1.5, rest_frequency=CO21, z=0.5)
>>> print(round(abs(v.to_value(u.km / u.s)), 6))
0.0
"""

import numbers
import weakref

import astropy.units as u
import numpy as np
from astropy import constants

from .errors import RedshiftError, SpectralAxisError, SpectralRangeError, UnitMismatchError

__all__ = [
    "CONVENTIONS",
    "SPEED_OF_LIGHT",
    "Z_MAX",
    "check_convention",
    "check_redshift",
    "check_rest_frequency",
    "observed_frequency",
    "velocity",
    "frequency_from_velocity",
    "frequency_axis",
    "axis_in",
    "channel_mask",
    "cube_rest_frequency",
]

CONVENTIONS = {
    "radio": u.doppler_radio,
    "optical": u.doppler_optical,
    "relativistic": u.doppler_relativistic,
}

# Sources beyond this redshift are not observed in lines; a larger value is
# almost always a typo (e.g. a velocity typed into the redshift field).
Z_MAX = 20.0

_KMS = u.km / u.s

#: The speed of light in km/s, from astropy.constants (CODATA); the one copy
#: every velocity calculation in cubeloupe uses.
SPEED_OF_LIGHT = constants.c.to(_KMS)


def check_convention(convention):
    """Return ``convention`` if it is a known velocity convention, else raise.

    Examples
    --------
    >>> check_convention("optical")
    'optical'
    """
    if convention not in CONVENTIONS:
        raise SpectralAxisError(
            f"unknown velocity convention {convention!r}; choose from {sorted(CONVENTIONS)}"
        )
    return convention


def check_redshift(z, *, argname="z"):
    """Return ``z`` as a float if ``-1 < z <= Z_MAX``, else raise `RedshiftError`.

    Examples
    --------
    >>> check_redshift(3)
    3.0
    """
    if isinstance(z, u.Quantity):
        if z.unit != u.dimensionless_unscaled:
            raise RedshiftError(f"{argname} must be a plain number; got {z}")
        z = z.value
    if z is None or not isinstance(z, numbers.Real) and not (np.ndim(z) == 0 and np.isreal(z)):  # np.isreal(None) is True
        raise RedshiftError(f"{argname} must be a number; got {z!r}")
    z = float(z)
    if not np.isfinite(z) or z <= -1 or z > Z_MAX:
        raise RedshiftError(
            f"{argname}={z} is outside the accepted range -1 < z <= {Z_MAX:g}; "
            "give the source's redshift (e.g. z=0.0047), not a velocity"
        )
    return z


def check_rest_frequency(rest_frequency, *, argname="rest_frequency", func=None):
    """Return ``rest_frequency`` in GHz, accepting any spectral unit.

    Raises `UnitMismatchError` for a plain number or a non-spectral unit.

    Examples
    --------
    >>> check_rest_frequency(1.3004 * u.mm)
    <Quantity 230.53... GHz>
    """
    where = f" to {func!r}" if func else ""
    if not isinstance(rest_frequency, u.Quantity):
        raise UnitMismatchError(
            f"Argument {argname!r}{where} must be a Quantity with a frequency unit; "
            f"got {rest_frequency!r}. Pass e.g. {argname}=230.538*u.GHz"
        )
    try:
        value = rest_frequency.to(u.GHz, equivalencies=u.spectral())
    except u.UnitConversionError:
        raise UnitMismatchError(
            f"Argument {argname!r}{where} must be a frequency; got {rest_frequency.unit}. "
            f"Pass e.g. {argname}=230.538*u.GHz"
        ) from None
    number = value.to_value(u.GHz)  # a plain array: Quantity comparisons cost ~0.5 ms each (issue #20)
    if np.any(number <= 0) or not np.all(np.isfinite(number)):
        raise UnitMismatchError(f"Argument {argname!r}{where} must be positive; got {rest_frequency}")
    return value


def observed_frequency(rest_frequency, z):
    """Observed frequency of a line at redshift ``z``: ``f_rest / (1 + z)``.

    Examples
    --------
    >>> observed_frequency(115.2712018 * u.GHz, 1.0)
    <Quantity 57.6356009 GHz>
    """
    return check_rest_frequency(rest_frequency) / (1.0 + check_redshift(z))


def velocity(frequency, rest_frequency, z=0.0, convention="radio"):
    """Rest-frame velocity offset of ``frequency`` from a line at redshift ``z``.

    Parameters
    ----------
    frequency : Quantity [frequency, wavelength or energy]
        Observed spectral coordinate(s).
    rest_frequency : Quantity [frequency]
        The line's rest frequency.
    z : float
        Redshift of the source.
    convention : {'radio', 'optical', 'relativistic'}

    Returns
    -------
    Quantity [km/s]

    Examples
    --------
    >>> v = velocity(115.2712018 * u.GHz * (1 - 100 / 299792.458), 115.2712018 * u.GHz)
    >>> print(round(v.to_value(u.km / u.s), 6))
    100.0
    """
    ref = observed_frequency(rest_frequency, z)
    doppler = CONVENTIONS[check_convention(convention)](ref)
    return u.Quantity(frequency).to(u.Hz, u.spectral()).to(_KMS, equivalencies=doppler)


def frequency_from_velocity(velocity_offset, rest_frequency, z=0.0, convention="radio"):
    """Observed frequency of a rest-frame velocity offset from a line at ``z``.

    The inverse of `velocity`.

    Examples
    --------
    >>> f = frequency_from_velocity(0 * u.km / u.s, 115.2712018 * u.GHz, z=1)
    >>> print(round(f.to_value(u.GHz), 7))
    57.6356009
    """
    ref = observed_frequency(rest_frequency, z)
    doppler = CONVENTIONS[check_convention(convention)](ref)
    return u.Quantity(velocity_offset).to(u.GHz, equivalencies=doppler)


def frequency_axis(obj):
    """The spectral axis of a cube or spectrum as observed frequencies.

    Velocity axes are converted with the file's own rest frequency (RESTFRQ)
    and the convention its CTYPE names.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or Quantity
        Anything with a ``spectral_axis`` and a ``with_spectral_unit``, or a
        Quantity holding a frequency, wavelength or energy axis.

    Returns
    -------
    Quantity [GHz]

    Raises
    ------
    SpectralAxisError
        A velocity axis without a rest frequency in its header.
    """
    axis = obj.spectral_axis if hasattr(obj, "spectral_axis") else u.Quantity(obj)
    if axis.unit.is_equivalent(u.Hz, equivalencies=u.spectral()):
        return axis.to(u.GHz, equivalencies=u.spectral())
    if not axis.unit.is_equivalent(_KMS) or not hasattr(obj, "with_spectral_unit"):
        raise SpectralAxisError(
            f"cannot express a spectral axis in {axis.unit} as frequency; "
            "the axis must be a frequency, wavelength or velocity"
        )
    wcs = getattr(obj, "wcs", None)
    restfrq = getattr(getattr(wcs, "wcs", None), "restfrq", 0) or 0
    restwav = getattr(getattr(wcs, "wcs", None), "restwav", 0) or 0
    if not restfrq and not restwav:
        raise SpectralAxisError(
            "the spectral axis is a velocity and the header has no rest frequency "
            "(RESTFRQ/RESTFREQ); give ranges in the cube's own velocities without "
            "rest_frequency, or add RESTFRQ to a copy of the file"
        )
    owner = getattr(obj, "spectrum", obj)  # a `baseline.CachedAxis` stands for its spectrum
    known = _converted_axes.get(id(owner))
    if known is not None and known[0]() is owner:
        return known[1].copy()
    try:
        frequencies = obj.with_spectral_unit(u.GHz).spectral_axis
    except Exception as exc:  # spectral-cube raises several types here
        raise SpectralAxisError(
            f"cannot convert the velocity axis to frequency ({exc}); check CTYPE3 and RESTFRQ"
        ) from None
    _remember_axis(owner, frequencies)
    return frequencies


# A velocity axis converted to frequency, per cube or spectrum (weakly held): spectral-cube's
# `with_spectral_unit` builds a whole new object (~20 ms for a spectrum, WCS checks included), and the
# suite asks for the same spectrum's frequencies some 20 times per move of a range (a velocity-axis
# cube: 210 ms per line-free drag on the CARMA cube of ../shared/real-cubes; issue #20).
_converted_axes = {}


def _remember_axis(obj, frequencies):
    key = id(obj)

    def forget(dead):
        if _converted_axes.get(key, (None,))[0] is dead:
            del _converted_axes[key]

    try:
        ref = weakref.ref(obj, forget)
    except TypeError:
        return  # not weakly referable: converted each time
    _converted_axes[key] = (ref, frequencies.copy())


def _header_rest_frequency(obj):
    """The rest frequency in the object's WCS (RESTFRQ or RESTWAV), or None."""
    wcs = getattr(getattr(obj, "wcs", None), "wcs", None)
    if wcs is None:
        return None
    if getattr(wcs, "restfrq", 0):
        return (wcs.restfrq * u.Hz).to(u.GHz)
    if getattr(wcs, "restwav", 0):
        return (wcs.restwav * u.m).to(u.GHz, equivalencies=u.spectral())
    return None


def axis_in(obj, unit, *, rest_frequency=None, z=0.0, convention="radio"):
    """The spectral axis of ``obj`` expressed in ``unit``.

    Velocity units give rest-frame offsets from ``rest_frequency / (1 + z)``
    in ``convention``. With no ``rest_frequency`` (and ``z == 0``) a velocity
    axis is returned in its own (file) velocities, and a frequency axis is
    converted with the file's RESTFRQ when it has one.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or Quantity
    unit : Unit or str
        Frequency, wavelength, energy or velocity unit.
    rest_frequency : Quantity [frequency], optional
    z : float
    convention : {'radio', 'optical', 'relativistic'}

    Returns
    -------
    Quantity
    """
    unit = u.Unit(unit)
    check_convention(convention)
    z = check_redshift(z)
    # An axis that keeps its conversions (`baseline.CachedAxis`: one spectrum measured with one frame)
    # is converted once per unit and frame; astropy's unit conversions are most of a line measurement's
    # time (issue #20). A copy is handed out, so that callers may change what they get.
    conversions = getattr(obj, "conversions", None)
    key = _conversion_key(unit, rest_frequency, z, convention) if isinstance(conversions, dict) else None
    if key is not None and key in conversions:
        return conversions[key].copy()
    converted = _axis_in(obj, unit, rest_frequency, z, convention)
    if key is not None:
        conversions[key] = converted.copy()
    return converted


def _conversion_key(unit, rest_frequency, z, convention):
    if rest_frequency is None:
        return (unit.to_string(), None, z, convention)
    if not isinstance(rest_frequency, u.Quantity) or rest_frequency.size != 1:
        return None  # refused in `velocity`, with its message
    try:
        return (unit.to_string(), float(rest_frequency.to_value(u.GHz, equivalencies=u.spectral())), z, convention)
    except u.UnitConversionError:
        return None


def _axis_in(obj, unit, rest_frequency, z, convention):
    native = obj.spectral_axis if hasattr(obj, "spectral_axis") else u.Quantity(obj)
    if unit.is_equivalent(_KMS):
        if rest_frequency is None:
            if native.unit.is_equivalent(_KMS) and z == 0:
                return native.to(unit)
            header_rest = _header_rest_frequency(obj)
            if header_rest is not None and z == 0:
                return velocity(frequency_axis(obj), header_rest, 0.0, convention).to(unit)
            raise SpectralAxisError(
                "velocities need a line: pass rest_frequency (e.g. rest_frequency=230.538*u.GHz) "
                "and z for the source's redshift"
            )
        return velocity(frequency_axis(obj), rest_frequency, z, convention).to(unit)
    if unit.is_equivalent(u.Hz, equivalencies=u.spectral()):
        return frequency_axis(obj).to(unit, equivalencies=u.spectral())
    raise UnitMismatchError(
        f"{unit} is not a spectral unit; use a frequency (GHz), wavelength (mm) or velocity (km/s)"
    )


def channel_mask(obj, ranges, *, rest_frequency=None, z=0.0, convention="radio",
                 min_channels=1, what="range"):
    """Boolean mask of the channels that fall inside any of ``ranges``.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or Quantity
        Supplies the spectral axis.
    ranges : Quantity, shape (2,) or (n, 2)
        Intervals in any spectral unit; the order of each pair does not matter.
    rest_frequency, z, convention
        How velocities are defined; see `axis_in`.
    min_channels : int
        Fewer selected channels than this raises `SpectralRangeError`.
    what : str
        Names the ranges in error messages (e.g. ``"line-free ranges"``).

    Returns
    -------
    mask : ndarray of bool, shape (n_channels,)

    Raises
    ------
    SpectralRangeError
        A range lies wholly outside the band, or too few channels are selected.
    UnitMismatchError
        ``ranges`` is not a spectral Quantity.

    Examples
    --------
    >>> axis = [1, 2, 3, 4, 5] * u.GHz
    >>> channel_mask(axis, [(1.5, 2.5), (4.5, 6)] * u.GHz)
    array([False,  True, False, False,  True])
    """
    if not isinstance(ranges, u.Quantity):
        raise UnitMismatchError(
            f"{what} must be a Quantity, e.g. [(-900, -400), (400, 900)] * u.km / u.s; got {ranges!r}"
        )
    pairs = np.atleast_2d(ranges)
    if pairs.ndim != 2 or pairs.shape[1] != 2:
        raise SpectralRangeError(
            f"{what} must be one (low, high) pair or a list of pairs; got shape {np.shape(ranges)}"
        )
    coords = axis_in(obj, pairs.unit, rest_frequency=rest_frequency, z=z, convention=convention)
    values = coords.to_value(pairs.unit)
    band = (np.nanmin(values), np.nanmax(values))
    mask = np.zeros(values.shape, dtype=bool)
    for lo, hi in pairs.value:
        lo, hi = min(lo, hi), max(lo, hi)
        inside = (values >= lo) & (values <= hi)
        if not inside.any():
            raise SpectralRangeError(
                f"{what} ({lo:g}, {hi:g}) {pairs.unit} selects no channel: the band spans "
                f"{band[0]:g} to {band[1]:g} {pairs.unit}"
                + (f" for a line at {u.Quantity(rest_frequency):g} and z={z:g}" if rest_frequency is not None else "")
                + "; choose a range inside the band"
            )
        mask |= inside
    if mask.sum() < min_channels:
        raise SpectralRangeError(
            f"{what} select {int(mask.sum())} channel(s); at least {min_channels} are needed. "
            "Widen the ranges or lower the polynomial order"
        )
    return mask


def cube_rest_frequency(obj):
    """The rest frequency a cube or spectrum carries in its header (RESTFRQ, or RESTWAV), or None.

    This is the rest frequency `axis_in` measures velocities from when
    no ``rest_frequency`` is given; views use it for velocities until a line is
    chosen.

    Parameters
    ----------
    obj : SpectralCube, OneDSpectrum or anything with a ``wcs``

    Returns
    -------
    Quantity [GHz] or None

    Examples
    --------
    >>> from astropy.wcs import WCS
    >>> w = WCS(naxis=1); w.wcs.ctype = ["FREQ"]; w.wcs.restfrq = 230.538e9
    >>> class Holder: wcs = w
    >>> cube_rest_frequency(Holder())
    <Quantity 230.538 GHz>
    """
    return _header_rest_frequency(obj)
