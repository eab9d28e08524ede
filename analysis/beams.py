"""Beams: their area in pixels, and brightness conversions between Jy/beam and K.

A Gaussian beam with full widths at half maximum ``bmaj`` and ``bmin`` covers
the solid angle ``Omega = pi * bmaj * bmin / (4 ln 2)`` (the integral of the
normalised 2-D Gaussian; e.g. Wilson, Rohlfs & Huettemeister, *Tools of Radio
Astronomy*, 6th ed., section 8.2). radio-beam's `~radio_beam.Beam` computes the
same quantity (``Beam.sr``); this module builds on it rather than re-deriving it.

Brightness in Jy/beam and Rayleigh-Jeans brightness temperature are related by
``T = S c^2 / (2 k nu^2 Omega)``, which astropy implements as the
`~astropy.units.brightness_temperature` equivalency.

Examples
--------
>>> import astropy.units as u
>>> from radio_beam import Beam
>>> factor = jy_per_beam_to_kelvin(230.538 * u.GHz, Beam(1 * u.arcsec))
>>> round(float(factor.to_value(u.K / (u.Jy / u.beam))), 1)
23.0
"""

import astropy.units as u
import numpy as np
from astropy.wcs.utils import proj_plane_pixel_area

from .cubes import source_name
from .errors import BeamError, UnitMismatchError

__all__ = [
    "cube_beam",
    "map_beam",
    "pixel_solid_angle",
    "beam_area_pixels",
    "jy_per_beam_to_kelvin",
    "kelvin_to_jy_per_beam",
    "convert_brightness",
]

_HOW_TO_PASS_A_BEAM = (
    "give the cube a beam, e.g. cube = cube.with_beam(Beam(major=1.2*u.arcsec, minor=0.9*u.arcsec, "
    "pa=30*u.deg), raise_error_jybm=False) with `from radio_beam import Beam`, or add BMAJ/BMIN/BPA "
    "(degrees) to a copy of the file"
)


def cube_beam(cube):
    """The beam of ``cube``: a `~radio_beam.Beam`, or `~radio_beam.Beams` (one per channel).

    Parameters
    ----------
    cube : SpectralCube, VaryingResolutionSpectralCube or OneDSpectrum

    Returns
    -------
    beam : `radio_beam.Beam` or `radio_beam.Beams`

    Raises
    ------
    BeamError
        The cube carries no beam; the message says how to attach one.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> cube_beam(open_cube(demo_path("disk")))  # doctest: +ELLIPSIS
    Beam: BMAJ=2.2999... arcsec BMIN=1.8 arcsec BPA=28.0 deg
    """
    beams = getattr(cube, "_beams", None)
    if beams is not None and len(beams) > 0:
        return beams
    beam = getattr(cube, "_beam", None)
    if beam is None:
        beam = getattr(cube, "meta", {}).get("beam") if hasattr(cube, "meta") else None
    if beam is None:
        raise BeamError(f"{source_name(cube)} has no beam; {_HOW_TO_PASS_A_BEAM}")
    return beam


def map_beam(cube, channels=slice(None)):
    """The beam of a map made from ``channels`` of ``cube``, or None for a cube without a beam.

    A cube with one beam gives that beam; a cube with a beam per channel gives
    the smallest beam enclosing the chosen channels' beams (radio-beam's
    `~radio_beam.Beams.common_beam`), or their largest beam where radio-beam
    cannot find a common one.

    Parameters
    ----------
    cube : SpectralCube
    channels : slice or array of int or bool, optional
        The channels that went into the map; all by default.

    Returns
    -------
    `~radio_beam.Beam` or None

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> cube = open_cube(demo_path("varying_beams"))
    >>> bool(map_beam(cube, slice(0, 10)).major >= cube.beams[:10].major.max())
    True
    """
    beams = getattr(cube, "beams", None)
    if beams is not None:
        chosen = beams[channels]
        try:
            return chosen.common_beam()
        except Exception:  # radio-beam fails on some beam sets; the largest beam is a safe stand-in
            return chosen.largest_beam()
    try:
        return cube.beam
    except Exception:  # no beam (K or Jy/pixel cubes): spectral-cube raises NoBeamError
        return None


def _beam_solid_angle(beam, *, argname="beam"):
    """Solid angle (sr) of a Beam, Beams or solid-angle Quantity; raise BeamError otherwise."""
    if isinstance(beam, u.Quantity) and beam.unit.is_equivalent(u.sr):
        area = beam.to(u.sr)
    else:
        raise BeamError(
            f"{argname} must be a radio_beam Beam or Beams, or a solid angle (e.g. 2.5e-11*u.sr); "
            f"got {beam!r}. Make one with Beam(major=1.2*u.arcsec, minor=0.9*u.arcsec, pa=30*u.deg)"
        )
    area = u.Quantity(area, u.sr, subok=False)
    if not np.all(np.isfinite(area)) or np.any(area <= 0):
        raise BeamError(f"{argname} has a zero, negative or non-finite area ({area}); check BMAJ/BMIN")
    return area


def pixel_solid_angle(cube):
    """Solid angle of one spatial pixel of ``cube``, from its celestial WCS.

    Uses the projection-plane pixel area at the reference point
    (`astropy.wcs.utils.proj_plane_pixel_area`), exact for the small fields of
    line cubes.

    Returns
    -------
    Quantity [sr]

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> pixel_solid_angle(open_cube(demo_path("disk")))  # 0.5" pixels  # doctest: +ELLIPSIS
    <Quantity 5.876...e-12 sr>
    """
    wcs = cube.wcs
    axes = [wcs.wcs.lng, wcs.wcs.lat]
    if wcs.naxis == 2 or min(axes) < 0:
        celestial = wcs.celestial
        units = [u.Unit(unit or "deg") for unit in celestial.wcs.cunit]
        return (proj_plane_pixel_area(celestial) * units[0] * units[1]).to(u.sr)
    # Same as proj_plane_pixel_area(wcs.celestial) without copying the WCS (a
    # cost of milliseconds per call): the determinant of the celestial block of
    # the pixel scale matrix (spectral-cube keeps pixel and world axes aligned).
    scale = wcs.pixel_scale_matrix[np.ix_(axes, axes)]
    units = [u.Unit(wcs.wcs.cunit[i] or "deg") for i in axes]
    return (abs(np.linalg.det(scale)) * units[0] * units[1]).to(u.sr)


def beam_area_pixels(cube, beam=None):
    """Beam solid angle in units of the cube's pixel area.

    A Jy/beam map summed over a region and divided by this number gives the
    flux density in Jy (common practice).

    Parameters
    ----------
    cube : SpectralCube or VaryingResolutionSpectralCube
        Supplies the pixel scale (and the beam when ``beam`` is None).
    beam : Beam, Beams or Quantity [solid angle], optional
        Overrides the cube's beam.

    Returns
    -------
    ndarray
        Shape () for a single beam, (n_channels,) for per-channel beams.

    Raises
    ------
    BeamError
        No beam in the cube and none given, or a beam with zero area.

    Examples
    --------
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> round(float(beam_area_pixels(open_cube(demo_path("disk")))), 2)
    18.76
    """
    if beam is None:
        beam = cube_beam(cube)
    area = _beam_solid_angle(beam)
    return np.asarray((area / pixel_solid_angle(cube)).to_value(u.dimensionless_unscaled), dtype=float)


def _frequency(frequency):
    try:
        return u.Quantity(frequency).to(u.GHz, equivalencies=u.spectral())
    except (u.UnitsError, TypeError):
        raise UnitMismatchError(
            f"frequency must be a Quantity with a spectral unit (e.g. 230.538*u.GHz); got {frequency!r}"
        ) from None


def jy_per_beam_to_kelvin(frequency, beam):
    """Factor turning Jy/beam into Rayleigh-Jeans brightness temperature.

    ``T = S c^2 / (2 k nu^2 Omega_beam)``, via astropy's
    `~astropy.units.brightness_temperature` equivalency. In practical units
    ``T [K] = 1.222e6 S [Jy/beam] / (nu[GHz]^2 bmaj["] bmin["])`` (common
    practice, e.g. the NRAO brightness-temperature conversion).

    Parameters
    ----------
    frequency : Quantity [frequency, wavelength or energy]
        Scalar or one per channel.
    beam : Beam, Beams or Quantity [solid angle]
        One beam, or one per channel (same length as ``frequency``).

    Returns
    -------
    Quantity [K / (Jy / beam)]

    Raises
    ------
    BeamError, UnitMismatchError

    Examples
    --------
    >>> from radio_beam import Beam
    >>> f = jy_per_beam_to_kelvin(115.2712018 * u.GHz, Beam(2 * u.arcsec))
    >>> round(float(f.to_value(u.K * u.beam / u.Jy)), 2)
    22.99
    """
    area = _beam_solid_angle(beam)
    nu = _frequency(frequency)
    one = np.ones(np.broadcast(nu.value, area.value).shape) * u.Jy / u.beam
    kelvin = one.to(u.K, equivalencies=u.brightness_temperature(nu, beam_area=area))
    return kelvin / (u.Jy / u.beam)


def kelvin_to_jy_per_beam(frequency, beam):
    """Factor turning Rayleigh-Jeans brightness temperature into Jy/beam.

    The inverse of `jy_per_beam_to_kelvin`.

    Returns
    -------
    Quantity [Jy / beam / K]

    Examples
    --------
    >>> from radio_beam import Beam
    >>> f = kelvin_to_jy_per_beam(115.2712018 * u.GHz, Beam(2 * u.arcsec))
    >>> round(float(f.to_value(u.mJy / u.beam / u.K)), 2)
    43.49
    """
    return 1.0 / jy_per_beam_to_kelvin(frequency, beam)


def convert_brightness(values, unit, frequency, beam):
    """Convert surface brightness between Jy/beam-like and K-like units.

    Parameters
    ----------
    values : Quantity
        In Jy/beam, mJy/beam, K, mK or any unit equivalent to them.
    unit : Unit or str
        Target unit.
    frequency : Quantity [frequency]
        Scalar, or one per value along the last axis (channels).
    beam : Beam, Beams or Quantity [solid angle]

    Returns
    -------
    Quantity in ``unit``

    Raises
    ------
    UnitMismatchError
        ``values`` or ``unit`` is not a surface brightness.

    Examples
    --------
    >>> from radio_beam import Beam
    >>> t = convert_brightness(10 * u.mJy / u.beam, u.K, 230.538 * u.GHz, Beam(1 * u.arcsec))
    >>> round(float(t.to_value(u.K)), 3)
    0.23
    """
    unit = u.Unit(unit)
    values = u.Quantity(values)
    area = _beam_solid_angle(beam)
    nu = _frequency(frequency)
    try:
        return values.to(unit, equivalencies=u.brightness_temperature(nu, beam_area=area))
    except u.UnitConversionError:
        raise UnitMismatchError(
            f"cannot convert {values.unit} to {unit}; both must be surface brightness "
            "units such as Jy/beam, mJy/beam, K or mK"
        ) from None
