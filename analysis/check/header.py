"""The header part of the delivery check: axes, channels, band, beam and pixels, checked.

Examples
--------
>>> from cubeloupe.analysis import demo_path, open_cube
>>> summary = header_summary(open_cube(demo_path("disk")))
>>> summary.pixels_per_beam > 3
True
"""

import astropy.units as u
import numpy as np
from astropy.wcs.utils import proj_plane_pixel_scales

from ..beams import beam_area_pixels, cube_beam
from ..cubes import cube_stokes
from ..errors import BeamError, SpectralAxisError
from ..spectral import SPEED_OF_LIGHT, frequency_axis, velocity
from .results import AxisSummary, HeaderSummary

__all__ = ["MIN_PIXELS_PER_BEAM", "header_summary", "beam_fwhm_pixels", "blanked_notes"]

# Below this many pixels across the beam's minor axis FWHM a cube is
# undersampled: 3 to 5 pixels per beam is the usual imaging choice (common practice).
MIN_PIXELS_PER_BEAM = 3.0

_KMS = u.km / u.s
# Velocity conventions of the FITS spectral axis types (Greisen et al. 2006, A&A 446, 747, table 1).
VELOCITY_CONVENTIONS = {"VRAD": "radio", "VOPT": "optical", "FELO": "optical", "VELO": "relativistic"}


def _frequency_or_none(cube):
    try:
        return frequency_axis(cube)
    except SpectralAxisError:
        return None


def _band_edges(frequency):
    """Outer edges of the end channels; channels are assumed contiguous."""
    if len(frequency) < 2:
        return u.Quantity([frequency[0], frequency[0]])
    lo, hi = np.argmin(frequency), np.argmax(frequency)
    half = np.abs(np.diff(frequency)).min() / 2 if len(frequency) > 1 else 0 * frequency.unit
    return u.Quantity([frequency[lo] - half, frequency[hi] + half]).to(u.GHz)


def header_summary(cube):
    """Summarise the header of an opened cube: axes, channels, band, beam, pixels.

    Parameters
    ----------
    cube : SpectralCube or VaryingResolutionSpectralCube
        As returned by `open_cube`.

    Returns
    -------
    HeaderSummary
        ``blanked_fraction`` is None here; `check_cube` fills it from the
        noise pass, which reads the data anyway.

    Examples
    --------
    >>> summary = header_summary(open_cube(demo_path("disk")))
    >>> summary.shape[0] == len(summary.frequency)
    True
    """
    notes = []
    stokes = cube_stokes(cube)
    if stokes != "I":
        # Stokes codes: Greisen & Calabretta 2002, A&A 395, 1061, Table 7
        notes.append(f"the cube holds only Stokes {stokes}, not total intensity (I): its detections, maps "
                     "and rms are those of that polarisation plane, not fluxes of the source")
    wcs = cube.wcs
    nchan, ny, nx = cube.shape
    lengths = (nx, ny, nchan)
    axes = []
    for i in range(3):
        pixel = np.zeros((2, 3))
        pixel[1, i] = lengths[i] - 1
        world = wcs.wcs_pix2world(pixel, 0)
        axes.append(AxisSummary(
            ctype=str(wcs.wcs.ctype[i]), unit=str(wcs.wcs.cunit[i]) or "",
            length=int(lengths[i]), first=float(world[0, i]), last=float(world[1, i]),
        ))

    frequency = _frequency_or_none(cube)
    rest = wcs.wcs.restfrq or 0.0
    rest_frequency = (rest * u.Hz).to(u.GHz) if rest else None
    native = cube.spectral_axis
    width_f = width_v = band = None
    if frequency is not None:
        if nchan > 1:
            width_f = np.median(np.abs(np.diff(frequency))).to(u.MHz)
            centre = np.median(frequency)
            width_v = (SPEED_OF_LIGHT * width_f / centre).to(_KMS)
        band = _band_edges(frequency)
    else:
        notes.append(
            "the spectral axis is a velocity and the header has no rest frequency (RESTFRQ): "
            "frequencies, the band and line identifications are not available; add RESTFRQ "
            "to a copy of the file to get them"
        )
    if width_v is None and native.unit.is_equivalent(_KMS) and nchan > 1:
        width_v = np.median(np.abs(np.diff(native))).to(_KMS)
    channel_velocity, convention = None, None
    if native.unit.is_equivalent(_KMS):
        channel_velocity = u.Quantity(native).to(_KMS)
        convention = VELOCITY_CONVENTIONS.get(str(wcs.wcs.ctype[2])[:4])
    elif frequency is not None and rest_frequency is not None:
        channel_velocity, convention = velocity(frequency, rest_frequency).to(_KMS), "radio"

    beam_major = beam_minor = beam_pa = major_range = minor_range = None
    per_beam = area = None
    celestial = wcs.celestial
    units = [u.Unit(unit or "deg") for unit in celestial.wcs.cunit]
    scales = proj_plane_pixel_scales(celestial)
    pixel_size = u.Quantity([scales[0] * units[0], scales[1] * units[1]]).to(u.arcsec)
    try:
        beam = cube_beam(cube)
    except BeamError:
        notes.append("the cube has no beam (BMAJ/BMIN/BPA or a BEAMS table): pixels per beam "
                     "and beam-based conversions are not available")
        beam = None
    if beam is not None:
        major = u.Quantity(beam.major).to(u.arcsec)
        minor = u.Quantity(beam.minor).to(u.arcsec)
        pa = u.Quantity(beam.pa).to(u.deg)
        if major.ndim:
            major_range = u.Quantity([major.min(), major.max()])
            minor_range = u.Quantity([minor.min(), minor.max()])
            beam_major, beam_minor, beam_pa = np.median(major), np.median(minor), np.median(pa)
        else:
            beam_major, beam_minor, beam_pa = major, minor, pa
        smallest_minor = minor.min() if minor.ndim else minor
        per_beam = float((smallest_minor / pixel_size.min()).decompose())
        area = float(np.median(beam_area_pixels(cube, beam)))
        if per_beam < MIN_PIXELS_PER_BEAM:
            notes.append(
                f"only {per_beam:.2f} pixels across the beam minor axis ({smallest_minor:.3g} over "
                f"{pixel_size.min():.3g} pixels); under {MIN_PIXELS_PER_BEAM:g} the beam is undersampled: "
                "re-image with smaller pixels"
            )
    return HeaderSummary(
        shape=tuple(int(n) for n in cube.shape), axes=tuple(axes), unit=cube.unit,
        # SPECSYS from the WCS itself: spectral-cube's ``cube.header`` rebuilds the whole header (about
        # 50 ms on the benchmark cube, a tenth of the check; bench_check.py, #13)
        spectral_frame=str(wcs.wcs.specsys).strip() or None,
        rest_frequency=rest_frequency, frequency=frequency,
        channel_width_frequency=width_f, channel_width_velocity=width_v, band=band,
        beam_major=beam_major, beam_minor=beam_minor, beam_pa=beam_pa,
        beam_major_range=major_range, beam_minor_range=minor_range,
        pixel_size=pixel_size, pixels_per_beam=per_beam, beam_area_pixels=area,
        warnings=tuple(notes), velocity=channel_velocity, velocity_convention=convention,
    )




def beam_fwhm_pixels(header):
    """The beam's major-axis FWHM in pixels (over the smaller pixel side); None without a beam."""
    if header.beam_major is None:
        return None
    return float((header.beam_major / header.pixel_size.min()).decompose())


def blanked_notes(blanked_fraction):
    """A warning about blanked (NaN) pixels, given each channel's blanked fraction; empty when none."""
    if blanked_fraction is None or not np.size(blanked_fraction) or not np.nanmax(blanked_fraction) > 0:
        return []
    n_blank = int(np.sum(blanked_fraction >= 1))
    return [f"blanked (NaN) pixels: up to {np.nanmax(blanked_fraction):.1%} of a channel"
            + (f"; {n_blank} channel(s) wholly blanked" if n_blank else "")]
