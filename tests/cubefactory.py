"""Small line cubes built in code with a hand-made WCS, written to FITS for tests.

Every test cube is made here so that tests state their inputs exactly:
spectral axis type and direction, units, beam, Stokes axis, NaN blanking.
"""

from pathlib import Path

import numpy as np
from astropy.io import fits

C_KMS = 299792.458  # speed of light in km/s (exact, SI definition)


def make_header(shape, *, spectral="FREQ", crval3=None, cdelt3=None, crpix3=1.0, cunit3="default",
                bunit="Jy/beam", beam=(1.0, 1.0, 0.0), pixel=0.25, restfrq=230.538e9, stokes=False,
                extra=None):
    """Header for a cube of numpy ``shape`` (n_chan, ny, nx); pixel and beam sizes in arcsec.

    ``crval3``/``cdelt3`` default to a 230.538 GHz frequency axis with 1 MHz
    channels (or 0 +/- 1.3 km/s for velocity axes); ``cunit3=None`` omits CUNIT3.
    """
    nchan, ny, nx = shape
    h = fits.Header()
    h["SIMPLE"] = True
    h["BITPIX"] = -32
    h["NAXIS"] = 4 if stokes else 3
    h["NAXIS1"], h["NAXIS2"], h["NAXIS3"] = nx, ny, nchan
    if stokes:
        h["NAXIS4"] = 1
    h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"], h["CUNIT1"] = "RA---SIN", 150.0, -pixel / 3600, (nx + 1) / 2, "deg"
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"], h["CUNIT2"] = "DEC--SIN", 2.0, pixel / 3600, (ny + 1) / 2, "deg"
    kind = spectral.split("-")[0]
    defaults = {
        "FREQ": (restfrq, -1.0e6, "Hz"),
        "VRAD": (0.0, 1300.0, "m/s"),
        "VOPT": (0.0, 1300.0, "m/s"),
        "VELO": (0.0, 1300.0, "m/s"),
        "FELO": (0.0, 1300.0, "m/s"),
        "WAVE": ((C_KMS * 1e3) / (restfrq or 230.538e9), 2e-9, "m"),
    }
    v0, dv, unit = defaults.get(kind, (1.0, 1.0, ""))
    h["CTYPE3"] = spectral
    h["CRVAL3"] = v0 if crval3 is None else crval3
    h["CDELT3"] = dv if cdelt3 is None else cdelt3
    h["CRPIX3"] = crpix3
    if cunit3 == "default":
        cunit3 = unit
    if cunit3:
        h["CUNIT3"] = cunit3
    if stokes:
        h["CTYPE4"], h["CRVAL4"], h["CDELT4"], h["CRPIX4"] = "STOKES", 1.0, 1.0, 1.0
    if restfrq:
        h["RESTFRQ"] = restfrq
    h["SPECSYS"] = "LSRK"
    h["RADESYS"] = "ICRS"
    h["EQUINOX"] = 2000.0
    if bunit is not None:
        h["BUNIT"] = bunit
    if beam is not None:
        h["BMAJ"], h["BMIN"], h["BPA"] = beam[0] / 3600, beam[1] / 3600, beam[2]
    for key, value in (extra or {}).items():
        h[key] = value
    return h


def write_cube(path, data, *, beams=None, **header_kw):
    """Write ``data`` (n_chan, ny, nx) as a FITS cube; return the path.

    ``beams``: per-channel (bmaj_arcsec, bmin_arcsec, bpa_deg) rows, written
    as a BEAMS table (the CASA convention spectral-cube reads).
    """
    data = np.asarray(data, dtype=">f4")
    header = make_header(data.shape, **header_kw)
    if header["NAXIS"] == 4:
        data = data[np.newaxis]
    hdus = [fits.PrimaryHDU(data=data, header=header)]
    if beams is not None:
        beams = np.asarray(beams, dtype=float)
        cols = [
            fits.Column(name="BMAJ", format="1E", unit="arcsec", array=beams[:, 0]),
            fits.Column(name="BMIN", format="1E", unit="arcsec", array=beams[:, 1]),
            fits.Column(name="BPA", format="1E", unit="deg", array=beams[:, 2]),
            fits.Column(name="CHAN", format="1J", array=np.arange(len(beams))),
            fits.Column(name="POL", format="1J", array=np.zeros(len(beams), int)),
        ]
        table = fits.BinTableHDU.from_columns(cols, name="BEAMS")
        table.header["NCHAN"] = len(beams)
        table.header["NPOL"] = 1
        hdus.append(table)
    path = Path(path)
    fits.HDUList(hdus).writeto(path)
    return path


def gaussian_profile(v, amplitude, v0, sigma):
    """A Gaussian line profile at velocities ``v`` (plain arrays)."""
    return amplitude * np.exp(-0.5 * ((np.asarray(v) - v0) / sigma) ** 2)


def velocity_axis_kms(nchan, crval3=230.538e9, cdelt3=-1.0e6, restfrq=230.538e9, crpix3=1.0):
    """Radio velocities (km/s) of the channels of a FREQ axis made by `make_header`."""
    freq = crval3 + (np.arange(nchan) + 1 - crpix3) * cdelt3
    return C_KMS * (restfrq - freq) / restfrq


def file_digest(path):
    """SHA-256 of a file, for checking that inputs are never modified."""
    import hashlib

    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def frequency_axis_hz(nchan, crval3=230.538e9, cdelt3=-1.0e6, crpix3=1.0):
    """Channel frequencies (Hz) of a FREQ axis made by `make_header`."""
    return crval3 + (np.arange(nchan) + 1 - crpix3) * cdelt3


def line_cube_data(shape, *, rng, noise_rms=1.0, lines=(), crval3=230.538e9, cdelt3=-1.0e6, crpix3=1.0,
                   source_sigma_pixels=2.0, centre=None, continuum=0.0):
    """White Gaussian noise plus compact sources with Gaussian line profiles (FREQ axis).

    ``lines``: ``(frequency_hz, peak, sigma_hz)`` rows; each line sits on a
    circular Gaussian source of ``source_sigma_pixels`` at ``centre`` (y, x;
    default the middle) whose peak pixel reaches ``peak`` at the line centre.
    ``continuum``: a constant added to every channel of that same source.
    Returns a float64 array (n_chan, ny, nx).
    """
    nchan, ny, nx = shape
    freq = frequency_axis_hz(nchan, crval3, cdelt3, crpix3)
    cy, cx = ((ny - 1) / 2, (nx - 1) / 2) if centre is None else centre
    y, x = np.mgrid[0:ny, 0:nx]
    blob = np.exp(-0.5 * ((y - cy) ** 2 + (x - cx) ** 2) / source_sigma_pixels**2)
    data = rng.normal(0.0, noise_rms, size=shape)
    spectrum = np.full(nchan, float(continuum))
    for f0, peak, sigma in lines:
        spectrum += peak * np.exp(-0.5 * ((freq - f0) / sigma) ** 2)
    data += spectrum[:, None, None] * blob[None]
    return data


def correlated_noise(shape, *, rng, fwhm_pixels, rms=1.0):
    """Gaussian noise correlated over a circular Gaussian beam of ``fwhm_pixels``, as in interferometric images.

    White noise smoothed plane by plane with ``scipy.ndimage.gaussian_filter``
    (FWHM = sqrt(8 ln 2) sigma, wrapping at the edges) and rescaled to ``rms``:
    white noise through a unit-sum Gaussian of width sigma has variance
    1 / (4 pi sigma^2) (common practice). Returns float32 (n_chan, ny, nx).
    """
    from scipy.ndimage import gaussian_filter

    sigma = fwhm_pixels / np.sqrt(8 * np.log(2))
    out = np.empty(shape, dtype=np.float32)
    for k in range(shape[0]):
        plane = gaussian_filter(rng.standard_normal(shape[1:]), sigma, mode="wrap")
        out[k] = plane * np.sqrt(4 * np.pi) * sigma * rms
    return out


def primary_beam(image_shape, fwhm_pixels, centre=None):
    """A circular Gaussian primary-beam response of ``fwhm_pixels`` over an image (ny, nx), 1 at ``centre``.

    Dividing flat noise by it gives the noise of a primary-beam-corrected
    image, rising towards the edge (common practice); the Gaussian stands for
    the main lobe of a dish's response (FWHM about 1.13 lambda / D for a
    tapered illumination, from memory). ``centre`` (y, x) defaults to the middle.
    """
    ny, nx = image_shape
    cy, cx = ((ny - 1) / 2, (nx - 1) / 2) if centre is None else centre
    y, x = np.mgrid[0:ny, 0:nx]
    return np.exp(-4 * np.log(2) * ((y - cy) ** 2 + (x - cx) ** 2) / fwhm_pixels**2)


def write_scaled_int_cube(path, data, *, bitpix=16, bscale=None, bzero=0.0, blank=-32768, **header_kw):
    """Write ``data`` (n_chan, ny, nx; NaN = blank) as integers with BSCALE/BZERO/BLANK; return (path, values).

    The stored integers are ``round((data - bzero) / bscale)``, NaN stored as
    ``blank``, written byte for byte as the FITS standard lays them out
    (big-endian, header and data padded to 2880-byte records; Pence et al.
    2010, A&A 524, A42), so no library rescales them on the way.
    ``bscale`` defaults to the step that spans the data's range with the
    integer type. ``values`` is the float64 cube the file represents
    (``bzero + bscale * stored``, NaN at blanks): the float copy to compare with.
    """
    data = np.asarray(data, dtype=float)
    stored_type = {8: ">u1", 16: ">i2", 32: ">i4"}[bitpix]
    info = np.iinfo(np.dtype(stored_type))
    if bscale is None:
        span = np.nanmax(np.abs(data - bzero))
        bscale = float(span / (info.max - 1)) if span > 0 else 1.0
    stored = np.round((np.nan_to_num(data, nan=bzero) - bzero) / bscale)
    stored = np.clip(stored, info.min + 1, info.max).astype(stored_type)
    blanked = np.isnan(data)
    if blank is not None:
        stored[blanked] = blank
    header = make_header(data.shape, **header_kw)
    header["BITPIX"] = bitpix
    if header["NAXIS"] == 4:
        stored = stored[np.newaxis]
        blanked = blanked[np.newaxis]
    header.insert("NAXIS" + str(header["NAXIS"]), ("BSCALE", bscale), after=True)
    header.insert("BSCALE", ("BZERO", bzero), after=True)
    if blank is not None:
        header.insert("BZERO", ("BLANK", blank), after=True)
    raw = stored.tobytes()
    path = Path(path)
    with open(path, "wb") as handle:
        handle.write(header.tostring().encode("ascii"))
        handle.write(raw + b"\0" * (-len(raw) % 2880))
    values = bzero + bscale * stored.astype(float)
    if blank is not None:
        values[blanked] = np.nan
    return path, values.reshape(data.shape)
