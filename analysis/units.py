"""Reading the brightness unit (BUNIT) that real cube files carry.

Files from different telescopes and pipelines spell the same unit in many ways
(``JY/BEAM``, ``Jy/Beam``, ``K (Tmb)``, ``Kelvin``). astropy's FITS unit parser
accepts only the standard spelling, so the spelling is normalised here first.

Examples
--------
>>> brightness_unit("JY/BEAM")
Unit("Jy / beam")
>>> brightness_unit("K (Tmb)")
Unit("K")
"""

import re
import warnings

import astropy.units as u

from .errors import MissingUnitWarning, UnitMismatchError

__all__ = ["brightness_unit", "is_brightness", "is_per_beam", "is_temperature"]

# Case-insensitive aliases seen in delivered files (common practice); keys are
# lower-case with blanks removed.
_ALIASES = {
    "jy/beam": u.Jy / u.beam,
    "jy/bm": u.Jy / u.beam,
    "jybeam-1": u.Jy / u.beam,
    "jy.beam-1": u.Jy / u.beam,
    "mjy/beam": u.mJy / u.beam,
    "jy/pixel": u.Jy / u.pix,
    "jy/pix": u.Jy / u.pix,
    "jy": u.Jy,
    "mjy": u.mJy,
    "k": u.K,
    "kelvin": u.K,
    "mk": u.mK,
}


def brightness_unit(bunit, *, source="the cube"):
    """Parse a FITS BUNIT string as an astropy unit.

    Parameters
    ----------
    bunit : str or None
        The header value. A qualifier in parentheses, as in ``K (Tmb)`` or
        ``K (Ta*)``, is dropped: it names the temperature scale, not the unit.
    source : str
        Named in the warning when the unit is missing or unreadable.

    Returns
    -------
    unit : `~astropy.units.UnitBase`
        The unit; ``dimensionless_unscaled`` (with a `MissingUnitWarning`)
        when BUNIT is missing or cannot be read.

    Raises
    ------
    UnitMismatchError
        BUNIT is a unit but not a brightness (e.g. ``km/s``: a velocity
        field or moment map, not a line cube); see `is_brightness`.

    Examples
    --------
    >>> brightness_unit("Jy/beam")
    Unit("Jy / beam")
    """
    if bunit is None or not str(bunit).strip():
        warnings.warn(
            f"{source} has no BUNIT; values are treated as arbitrary units. "
            "Set BUNIT in a copy of the file (e.g. 'Jy/beam' or 'K') to get "
            "fluxes in physical units.",
            MissingUnitWarning,
            stacklevel=3,
        )
        return u.dimensionless_unscaled
    text = re.sub(r"\(.*?\)", "", str(bunit)).strip()
    key = text.lower().replace(" ", "")
    unit = _ALIASES.get(key)
    # Upper-case spellings ('KM/S') are tried in lower case last: lower-casing
    # first would turn MJy into mJy.
    for candidate, fmt in [(text, f) for f in ("fits", "generic", "cds")] + [(text.lower(), "generic")]:
        if unit is not None:
            break
        try:
            unit = u.Unit(candidate, format=fmt)
        except ValueError:
            continue
    if unit is not None:
        if not is_brightness(unit):
            kind = "" if str(unit.physical_type) == "unknown" else f" ({unit.physical_type})"
            raise UnitMismatchError(
                f"{source} has BUNIT={bunit!r}{kind}, which is not a brightness: "
                "a line cube holds Jy/beam, K, Jy/pixel, MJy/sr or similar. A cube in "
                f"{unit} is a derived product (e.g. a velocity field or moment map); open the "
                "line cube it came from, or fix BUNIT in a copy of the file if it is wrong"
            )
        return unit
    warnings.warn(
        f"{source} has BUNIT={bunit!r}, which cubeloupe cannot read as a unit; "
        "values are treated as arbitrary units. Fix BUNIT in a copy of the file "
        "(e.g. 'Jy/beam' or 'K') to get fluxes in physical units.",
        MissingUnitWarning,
        stacklevel=3,
    )
    return u.dimensionless_unscaled


def is_brightness(unit):
    """True if ``unit`` can hold the values of a line cube.

    That is a brightness temperature (K), a flux density per beam, per pixel
    or per solid angle (Jy/beam, Jy/pix, MJy/sr), a flux density (Jy, for
    single spectra), or a plain number (arbitrary units, e.g. counts or a
    normalised cube).

    Examples
    --------
    >>> is_brightness(u.Jy / u.beam), is_brightness(u.km / u.s)
    (True, False)
    """
    unit = u.Unit(unit)
    if unit.physical_type == "dimensionless" or unit.is_equivalent(u.K) or unit.is_equivalent(u.Jy):
        return True
    if is_per_beam(unit) or (unit * u.pix).is_equivalent(u.Jy):
        return True
    return (unit * u.sr).is_equivalent(u.Jy)


def is_per_beam(unit):
    """True if ``unit`` is a surface brightness per beam (e.g. Jy/beam).

    Examples
    --------
    >>> is_per_beam(u.mJy / u.beam), is_per_beam(u.K)
    (True, False)
    """
    return u.beam in u.Unit(unit).bases and (u.Unit(unit) * u.beam).is_equivalent(u.Jy)


def is_temperature(unit):
    """True if ``unit`` is a brightness temperature (K, mK).

    Examples
    --------
    >>> is_temperature(u.mK), is_temperature(u.Jy / u.beam)
    (True, False)
    """
    return u.Unit(unit).is_equivalent(u.K)
