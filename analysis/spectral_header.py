"""How a cube file's header describes its spectral axis: velocity conventions, frames and rest frequency.

Delivered files describe the same axis in several generations of keywords:

* the FITS standard (Greisen et al. 2006, A&A 446, 747, "Paper III"):
  ``FREQ``, ``VRAD`` (radio velocity), ``VOPT`` (optical), ``VELO``
  (relativistic), ``WAVE``, ... with the frame in ``SPECSYS`` and the rest
  frequency in ``RESTFRQ``;
* the older AIPS convention (Greisen 1983, AIPS Memo 27, "Non-linear
  coordinate systems in AIPS", revised 1993): ``VELO-xxx`` and ``FELO-xxx``
  with a frame suffix (``LSR``, ``HEL``, ``OBS``) and the keyword ``VELREF``,
  whose value is the frame (1 LSR, 2 heliocentric, 3 observer; 4-7 added by
  AIPS++: LSR dynamic, geocentric, source, galactocentric) plus 256 when the
  velocity is in the radio convention, otherwise optical; ``FELO`` is an
  optical velocity sampled linearly in frequency, whatever VELREF says; the
  rest frequency is spelled ``RESTFREQ``.  wcslib (Calabretta, ``spcaips``)
  implements this reading, and astropy uses wcslib;
* writer-specific types such as ``'VELOCITY'``, which no standard defines.

A legacy velocity axis without VELREF does not say its convention. wcslib then
reads it as optical without a word; here the same default is kept, but
`read_spectral_axis` says so with a `VelocityConventionWarning`, and the
caller can choose with ``velocity_convention=``. The result records both the
header's own CTYPE and how it was read, so a report can quote them separately.

Examples
--------
>>> from astropy.io import fits
>>> header = fits.Header({"CTYPE3": "VELO-LSR", "VELREF": 257, "RESTFREQ": 115.271204e9})
>>> reading = read_spectral_axis(header, 3)
>>> reading.read_as, reading.convention, reading.frame
('VRAD', 'radio', 'LSRK')
>>> reading.rest_frequency
<Quantity 115.271204 GHz>
"""

import warnings
from dataclasses import dataclass, field

import astropy.units as u

from .errors import VelocityConventionWarning
from .spectral import check_convention, check_rest_frequency

__all__ = ["SpectralReading", "read_spectral_axis", "is_velocity_type", "VELREF_FRAMES"]

#: VELREF modulo 256 -> SPECSYS (AIPS Memo 27 for 1-3; AIPS++ for 4-7; as read by wcslib's spcaips).
VELREF_FRAMES = {1: "LSRK", 2: "BARYCENT", 3: "TOPOCENT", 4: "LSRD", 5: "GEOCENTR", 6: "SOURCE", 7: "GALACTOC"}

# Frame suffixes of the AIPS 'VELO-xxx' / 'FELO-xxx' types (AIPS Memo 27; wcslib spcaips).
_SUFFIX_FRAMES = {"LSR": "LSRK", "LSRK": "LSRK", "LSRD": "LSRD", "HEL": "BARYCENT", "BAR": "BARYCENT",
                  "OBS": "TOPOCENT", "TOP": "TOPOCENT", "GEO": "GEOCENTR"}

# Paper III velocity types and the Doppler convention each one fixes.
_STANDARD_VELOCITY = {"VRAD": "radio", "VOPT": "optical", "VELO": "relativistic"}
_TYPE_FOR_CONVENTION = {"radio": "VRAD", "optical": "VOPT", "relativistic": "VELO"}

# Assumed when a legacy velocity axis does not state its convention: the AIPS
# rule (no +256 in VELREF means optical), which is also what wcslib and so
# astropy do; kept so that cubeloupe reads such files as every FITS reader does.
DEFAULT_LEGACY_CONVENTION = "optical"


@dataclass(frozen=True)
class SpectralReading:
    """How the spectral axis of a file was read.

    Attributes
    ----------
    header_ctype : str
        The spectral CTYPE exactly as in the file (e.g. ``'VELO-LSR'``).
    read_as : str
        The Paper III CTYPE the axis was read as (e.g. ``'VRAD'``).
    convention : str or None
        ``'radio'``, ``'optical'`` or ``'relativistic'`` for a velocity
        axis; None for frequency, wavelength and other axes.
    frame : str or None
        The standard of rest (SPECSYS value) the axis refers to, if known.
    basis : str
        Why the axis was read so: the keyword, its value and the rule used.
    assumed : bool
        True when the convention was not stated by the file or the caller.
    rest_frequency : Quantity [GHz] or None
        The rest frequency used for conversions between velocity and frequency.
    rest_frequency_basis : str
        Where it came from (RESTFRQ, RESTFREQ, RESTWAV, the ``rest_frequency``
        argument) or ``"none"``.
    header_updates : dict
        Keywords to set in a copy of the header so that wcslib reads the axis
        this way (``None`` values are keywords to remove).
    """

    header_ctype: str
    read_as: str
    convention: object
    frame: object
    basis: str
    assumed: bool
    rest_frequency: object
    rest_frequency_basis: str
    header_updates: dict = field(default_factory=dict, repr=False)

    def as_record(self):
        """A plain dict for metadata (no Quantities, no header updates)."""
        return {
            "header_ctype": self.header_ctype,
            "read_as": self.read_as,
            "convention": self.convention,
            "frame": self.frame,
            "basis": self.basis,
            "assumed": self.assumed,
            "rest_frequency_ghz": None if self.rest_frequency is None else float(self.rest_frequency.to_value(u.GHz)),
            "rest_frequency_basis": self.rest_frequency_basis,
        }


def _velref(header):
    value = header.get("VELREF")
    if value is None or isinstance(value, bool):
        return None
    try:
        return int(value)
    except (TypeError, ValueError):
        return None


def _velref_text(velref):
    frame = VELREF_FRAMES.get(velref % 256, f"unknown frame {velref % 256}")
    return f"VELREF = {velref} (AIPS Memo 27: {frame}, {'radio' if velref >= 256 else 'optical'})"


def _frame(header, velref, suffix):
    specsys = str(header.get("SPECSYS", "")).strip().upper()
    if specsys:
        return specsys
    if velref is not None and velref % 256 in VELREF_FRAMES:
        return VELREF_FRAMES[velref % 256]
    return _SUFFIX_FRAMES.get(suffix)


def _rest_frequency(header, rest_frequency, source):
    if rest_frequency is not None:
        value = check_rest_frequency(rest_frequency, argname="rest_frequency", func="open_cube")
        own = header.get("RESTFRQ", header.get("RESTFREQ"))
        basis = "rest_frequency argument" + (f" (the header's {float(own) / 1e9:.9g} GHz replaced)" if own else "")
        return value, basis, {"RESTFRQ": value.to_value(u.Hz), "RESTFREQ": None, "RESTWAV": None}
    for key, basis in (("RESTFRQ", "RESTFRQ"), ("RESTFREQ", "RESTFREQ (the AIPS spelling of RESTFRQ)")):
        value = header.get(key)
        if value is None or isinstance(value, (bool, str)):
            continue
        if not float(value) > 0:
            # wcslib treats 0 as "not given" (Paper III); so does cubeloupe.
            continue
        # RESTFREQ is copied to RESTFRQ so that every reader of the fixed header agrees.
        return (float(value) * u.Hz).to(u.GHz), basis, {"RESTFRQ": float(value)}
    restwav = header.get("RESTWAV")
    if restwav is not None and not isinstance(restwav, (bool, str)) and float(restwav) > 0:
        return (float(restwav) * u.m).to(u.GHz, equivalencies=u.spectral()), "RESTWAV", {}
    return None, "none", {}


def read_spectral_axis(header, axis, *, velocity_convention=None, rest_frequency=None, source="the cube"):
    """Work out how to read the spectral axis ``axis`` (1-based FITS axis number) of ``header``.

    Parameters
    ----------
    header : `astropy.io.fits.Header`
    axis : int
        FITS number of the spectral axis (3 for ``CTYPE3``).
    velocity_convention : {'radio', 'optical', 'relativistic'}, optional
        The convention of a velocity axis, overriding what the header says or
        does not say. Needed for legacy types (``VELO-xxx``, ``'VELOCITY'``)
        without VELREF; a value that contradicts the header is used, with a
        `VelocityConventionWarning`.
    rest_frequency : Quantity [frequency], optional
        Supplies a missing rest frequency, or replaces the header's.
    source : str
        Names the file in messages.

    Returns
    -------
    SpectralReading

    Raises
    ------
    SpectralAxisError
        Unknown ``velocity_convention``.
    UnitMismatchError
        ``rest_frequency`` is not a positive frequency.

    Warns
    -----
    VelocityConventionWarning
        The convention was assumed (a legacy velocity axis without VELREF), or
        the caller's choice contradicts the header.

    Examples
    --------
    >>> from astropy.io import fits
    >>> read_spectral_axis(fits.Header({"CTYPE3": "FELO-HEL"}), 3).read_as
    'VOPT-F2W'
    """
    if velocity_convention is not None:
        check_convention(velocity_convention)
    key = f"CTYPE{axis}"
    header_ctype = str(header.get(key, "")).strip()
    ctype = header_ctype.upper()
    kind, _, suffix = ctype.partition("-")
    suffix = suffix.strip("-")
    velref = _velref(header)
    rest, rest_basis, updates = _rest_frequency(header, rest_frequency, source)
    frame = _frame(header, velref, suffix if kind in ("VELO", "FELO") else "")
    assumed = False

    legacy = (kind == "VELO" and suffix) or ctype == "VELOCITY"
    if legacy:
        # AIPS 'VELO-xxx' (and the unstandardised 'VELOCITY'): linear in
        # velocity, convention from VELREF (AIPS Memo 27).
        if velocity_convention is not None:
            convention = velocity_convention
            basis = "velocity_convention argument"
            if velref is not None and ("radio" if velref >= 256 else "optical") != convention:
                warnings.warn(
                    f"{source} has {key} = {header_ctype!r} with {_velref_text(velref)}, but "
                    f"velocity_convention={convention!r} was asked for; the axis is read as {convention}",
                    VelocityConventionWarning, stacklevel=3)
                basis += f" (the header's {_velref_text(velref)} overridden)"
        elif velref is not None:
            convention = "radio" if velref >= 256 else "optical"
            basis = _velref_text(velref)
        else:
            convention = DEFAULT_LEGACY_CONVENTION
            assumed = True
            basis = (f"assumed: {key} = {header_ctype!r} without VELREF does not state its convention; "
                     "read as optical (the AIPS rule, as wcslib reads it)")
            warnings.warn(
                f"{source} has the legacy spectral axis {key} = {header_ctype!r} and no VELREF, so its "
                f"velocity convention is not stated; it was read as {convention} velocity (the AIPS rule "
                "that wcslib follows). If the data are in the radio convention (usual for radio "
                "interferometers), open it with open_cube(..., velocity_convention='radio'); "
                "the two readings differ by v^2/c (about 11 km/s at 1800 km/s)",
                VelocityConventionWarning, stacklevel=3)
        read_as = _TYPE_FOR_CONVENTION[convention]
        updates[key] = read_as
        updates["VELREF"] = None
    elif kind == "FELO" and (suffix or ctype == "FELO"):
        # AIPS 'FELO-xxx': optical velocity sampled linearly in frequency, the
        # Paper III 'VOPT-F2W' (the +256 radio flag does not apply to FELO).
        convention = velocity_convention or "optical"
        basis = f"{key} = {header_ctype!r} (AIPS: optical velocity, linear in frequency)"
        if convention != "optical":
            basis = "velocity_convention argument (against the AIPS meaning of FELO: optical)"
            warnings.warn(
                f"{source} has {key} = {header_ctype!r}, an optical velocity by the AIPS convention, but "
                f"velocity_convention={convention!r} was asked for; the axis is read as {convention}",
                VelocityConventionWarning, stacklevel=3)
        read_as = {"optical": "VOPT-F2W", "radio": "VRAD", "relativistic": "VELO-F2V"}[convention]
        updates[key] = read_as
        updates["VELREF"] = None
    elif kind in _STANDARD_VELOCITY:
        own = _STANDARD_VELOCITY[kind]
        convention = own
        read_as = header_ctype.upper()
        basis = f"{key} = {header_ctype!r} (FITS standard, Greisen et al. 2006: {own})"
        if velref is not None:
            basis += f"; {_velref_text(velref)}"
            if kind != "VELO" and ("radio" if velref >= 256 else "optical") != own:
                warnings.warn(
                    f"{source} has {key} = {header_ctype!r} ({own}) but {_velref_text(velref)}; "
                    f"the standard CTYPE is followed ({own}). Pass velocity_convention= to read it otherwise",
                    VelocityConventionWarning, stacklevel=3)
        if velocity_convention is not None and velocity_convention != own:
            convention = velocity_convention
            read_as = _TYPE_FOR_CONVENTION[convention] + ctype[4:]
            basis = f"velocity_convention argument (the header's {key} = {header_ctype!r} says {own})"
            warnings.warn(
                f"{source} has {key} = {header_ctype!r} ({own}), but velocity_convention={convention!r} "
                f"was asked for; the axis is read as {convention}",
                VelocityConventionWarning, stacklevel=3)
            updates[key] = read_as
        # wcslib would re-translate a standard type by VELREF only for AIPS
        # types; dropping it from the working copy keeps that certain.
        updates.setdefault("VELREF", None)
    else:
        convention = None
        read_as = header_ctype.upper()
        basis = f"{key} = {header_ctype!r} (FITS standard, Greisen et al. 2006)"
        if velocity_convention is not None:
            basis += "; velocity_convention applies to velocities computed from it"
            convention = velocity_convention
    if frame and not str(header.get("SPECSYS", "")).strip():
        updates["SPECSYS"] = frame
    return SpectralReading(header_ctype=header_ctype, read_as=read_as, convention=convention, frame=frame or None,
                           basis=basis, assumed=assumed, rest_frequency=rest, rest_frequency_basis=rest_basis,
                           header_updates=updates)


def is_velocity_type(ctype):
    """True for a velocity CTYPE, standard or legacy (``VRAD``, ``VOPT``, ``VELO-LSR``, ``'VELOCITY'``)."""
    kind = str(ctype).strip().upper().split("-")[0]
    return kind in ("VRAD", "VOPT", "VELO", "FELO", "VELOCITY")
