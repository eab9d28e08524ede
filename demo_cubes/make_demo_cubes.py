"""Make the demo cubes that ship with cubeloupe: synthetic, deterministic and small.

Every cube belongs to an invented scenario, the *Quillwort survey*, with
invented sources at invented positions; none is modelled on a real object or
observation. Each FITS file gets a sidecar ``<name>.json`` that records every
injected value (line centres, widths, fluxes, rms, redshift, continuum, beams,
model parameters), so that tests can check what the analysis layer recovers.

Cubes
-----
``disk``
    Quillwort-D7, a nearby rotating, inclined disk galaxy in CO(2-1):
    arctan rotation curve, exponential surface brightness, constant velocity
    dispersion, a weak continuum nucleus; Jy/beam, FREQ axis, one beam.
``lensed_spw1`` ... ``lensed_spw8``
    Quillwort-L1, a dusty galaxy at z = 2.67 strongly lensed into a ring by
    a foreground galaxy (singular isothermal sphere), seen in eight spectral
    windows of one delivery with different channel widths and pixel grids:
    CO(7-6) and [CI] 3P2-3P1; ortho-H2O 3_12-3_03 and para-H2O 1_11-0_00;
    ortho-H2O 1_10-1_01 and CO(5-4); para-H2O 2_02-1_11; CO(9-8); para-H2O
    2_11-2_02; ortho-H2O 3_21-3_12; CO(4-3). Four CO lines (E_up 55 to 249 K),
    three ortho- and three para-H2O lines (E_up 53 to 305 K): enough for a
    population diagram of each species, and of each water spin species alone
    (two small windows, 7 and 8, were added for that, #16).
    The CO and H2O fluxes come from an LTE model (optically thin,
    one excitation temperature and number of molecules per species, an
    ortho-to-para ratio for water; Goldsmith & Langer 1999, ApJ 517, 209),
    recorded in the sidecar, so a population diagram can be checked against
    it; dust continuum rising with frequency.
``single_dish``
    Quillwort-C4, a Galactic molecular cloud in the outer Galaxy (invented
    position and velocities) mapped in CO(1-0) by a single dish: main-beam
    brightness temperature in K, VRAD axis in m/s, a degenerate Stokes axis
    (4-D file).
``varying_beams``
    Quillwort-N2, the nucleus of a nearby galaxy in CO(3-2): one restoring
    beam per channel (a BEAMS table) and blanked (NaN) edge channels.

How the cubes are made
----------------------
A sky model (Jy per pixel, or K) is evaluated at every channel centre, then
convolved with the beam: for Jy/beam cubes with a Gaussian of peak 1 (so a
point source of S Jy peaks at S Jy/beam), for the K cube with a Gaussian of
unit sum (so extended emission keeps its brightness temperature). Noise is
white Gaussian noise convolved with the same beam and rescaled so that its
expected rms per channel is the stated value. Line profiles are Gaussians in
radio velocity relative to the line's redshifted frequency
``f_rest / (1 + z)`` (the convention of `cubeloupe.analysis.spectral`),
evaluated at channel centres.

Rest frequencies come from the bundled catalog
(``analysis/data/transitions.ecsv``) when it has the line; otherwise from the
fallback table below. The sidecar says which was used.

Run ``python demo_cubes/make_demo_cubes.py [--out DIR]``. Needs numpy and
astropy (and, when importable, `cubeloupe.analysis.partition_function` for
CO's partition function; the sidecar says which was used). The same numpy and
astropy versions give the same bytes. Budget: the whole folder (FITS files
and sidecars) stays under 13 MB.
"""

import argparse
import functools
import json
import zlib
from pathlib import Path

import numpy as np
from astropy import constants
from astropy import units as u
from astropy.convolution import Gaussian2DKernel, convolve_fft
from astropy.io import fits
from astropy.wcs import WCS

C_KMS = constants.c.to_value(u.km / u.s)
FWHM_PER_SIGMA = np.sqrt(8 * np.log(2))
SEED = 20260521
HERE = Path(__file__).resolve().parent
CATALOG = HERE.parent / "analysis" / "data" / "transitions.ecsv"
SCENARIO = ("Quillwort survey: an invented scenario. All sources, positions and observations are "
            "synthetic and not modelled on any real object or published observation.")

# Rest frequencies in GHz, from memory of the CDMS/JPL catalogue values; used only when the
# bundled catalog lacks the line. Keys are the catalog's (species, transition) names.
FALLBACK_REST_GHZ = {
    ("CO", "J=1-0"): 115.2712018,
    ("CO", "J=2-1"): 230.5380000,
    ("CO", "J=3-2"): 345.7959899,
    ("CO", "J=5-4"): 576.2679305,
    ("CO", "J=7-6"): 806.6518060,
    ("CO", "J=9-8"): 1036.9123930,
    ("[CI]", "3P2-3P1"): 809.3419700,
    ("H2O", "3_12-3_03"): 1097.3647910,
    ("H2O", "1_11-0_00"): 1113.3429640,
    ("H2O", "1_10-1_01"): 556.9359877,
    ("H2O", "2_02-1_11"): 987.9267440,
    ("H2O", "2_11-2_02"): 752.0331430,
}


# --------------------------------------------------------------------------------------------
# Small helpers


def _round(value, digits=8):
    """A float rounded to ``digits`` significant digits, so sidecars stay readable."""
    return float(f"{float(value):.{digits}g}")


def quantity(value, unit, digits=8):
    """A JSON quantity: ``{"value": ..., "unit": ...}`` (read back as Quantity by demo_truth)."""
    if np.ndim(value):
        return {"value": [_round(v, digits) for v in np.ravel(value)], "unit": unit}
    return {"value": _round(value, digits), "unit": unit}


def line_entry(species, transition):
    """Catalog facts of a line: rest frequency (GHz) and the sidecar fields naming its source."""
    if CATALOG.exists():
        from astropy.table import Table

        table = Table.read(CATALOG, format="ascii.ecsv")
        for row in table:
            if row["species"] == species and row["transition"] == transition:
                rest = u.Quantity(row["rest_frequency"], table["rest_frequency"].unit).to_value(u.GHz)
                entry = {"species": species, "transition": transition, "catalog_name": f"{species} {transition}",
                         "rest_frequency": quantity(rest, "GHz", 10),
                         "rest_frequency_from": "analysis/data/transitions.ecsv"}
                if "spin_isomer" in table.colnames and row["spin_isomer"] != "none":
                    entry["spin_isomer"] = str(row["spin_isomer"])
                return float(rest), entry
    rest = FALLBACK_REST_GHZ[(species, transition)]
    return rest, {"species": species, "transition": transition, "catalog_name": f"{species} {transition}",
                  "rest_frequency": quantity(rest, "GHz", 10),
                  "rest_frequency_from": "generator fallback table (from memory of CDMS values)"}


def rest_frequency(species, transition):
    return line_entry(species, transition)[0]


def rng_for(name):
    """A random generator of its own for each cube, so cubes do not depend on each other."""
    return np.random.default_rng([SEED, zlib.crc32(name.encode())])


def beam_kernel(bmaj, bmin, bpa, pixel):
    """A Gaussian beam sampled on pixels, peak 1.

    ``bmaj``, ``bmin`` (FWHM) and ``pixel`` in arcsec, ``bpa`` in degrees east
    of north. With CDELT1 < 0, east is -x and north is +y, so a position angle
    PA points along (-sin PA, cos PA), at PA + 90 deg from +x (the angle
    Gaussian2DKernel measures).
    """
    sx, sy = bmaj / FWHM_PER_SIGMA / pixel, bmin / FWHM_PER_SIGMA / pixel
    half = int(np.ceil(4.5 * sx))
    kernel = Gaussian2DKernel(sx, sy, theta=np.deg2rad(bpa + 90.0), x_size=2 * half + 1,
                              y_size=2 * half + 1, mode="center")
    return kernel.array / kernel.array.max()


def beam_image(shape, x0, y0, bmaj, bmin, bpa, pixel):
    """The beam (peak 1) centred on the fractional pixel (x0, y0): the image of a point source."""
    ny, nx = shape
    y, x = np.mgrid[0:ny, 0:nx].astype(float)
    east, north = -(x - x0) * pixel, (y - y0) * pixel
    pa = np.deg2rad(bpa)
    along = east * np.sin(pa) + north * np.cos(pa)
    across = east * np.cos(pa) - north * np.sin(pa)
    return np.exp(-0.5 * ((along / (bmaj / FWHM_PER_SIGMA)) ** 2 + (across / (bmin / FWHM_PER_SIGMA)) ** 2))


def convolve_planes(cube, kernel, boundary="fill"):
    """Convolve every channel of ``cube`` (n_chan, ny, nx) with ``kernel`` (or one kernel per channel)."""
    out = np.empty_like(cube)
    for k in range(cube.shape[0]):
        kern = kernel[k] if isinstance(kernel, list) else kernel
        out[k] = convolve_fft(cube[k], kern, normalize_kernel=False, boundary=boundary,
                              fill_value=0.0, allow_huge=False)
    return out


def beam_noise(rng, shape, kernels, rms):
    """Noise with the beam's correlation and an expected rms of ``rms`` in every channel.

    White unit noise convolved with a kernel ``k`` has variance ``sum(k**2)``;
    wrapping at the edges keeps the noise the same across the image.
    """
    white = rng.standard_normal(shape)
    out = np.empty(shape)
    for k in range(shape[0]):
        kern = kernels[k] if isinstance(kernels, list) else kernels
        out[k] = convolve_fft(white[k], kern, normalize_kernel=False, boundary="wrap") / np.sqrt((kern ** 2).sum())
    return rms * out


def gaussian(v, centre, sigma):
    return np.exp(-0.5 * ((v - centre) / sigma) ** 2)


def radio_velocity(freq_ghz, rest_ghz, z=0.0):
    """Radio velocity (km/s) relative to the line's redshifted frequency f_rest / (1 + z)."""
    ref = rest_ghz / (1.0 + z)
    return C_KMS * (ref - freq_ghz) / ref


def frequency_of(velocity_kms, rest_ghz, z=0.0):
    """Observed frequency (GHz) of a radio velocity offset from a line at ``z``."""
    return rest_ghz / (1.0 + z) * (1.0 - velocity_kms / C_KMS)


def channel_values(crval, cdelt, n, crpix=1.0):
    return crval + (np.arange(n) + 1.0 - crpix) * cdelt


def base_header(shape, *, pixel, ra, dec, crpix, projection="SIN", obj, telescope):
    """Header for a (n_chan, ny, nx) cube: sky axes; the caller adds the spectral axis."""
    nchan, ny, nx = shape
    h = fits.Header()
    h["SIMPLE"] = True
    h["BITPIX"] = -32
    h["NAXIS"] = 3
    h["NAXIS1"], h["NAXIS2"], h["NAXIS3"] = nx, ny, nchan
    h["EXTEND"] = True
    h["BSCALE"], h["BZERO"] = 1.0, 0.0
    h["OBJECT"] = obj
    h["TELESCOP"] = telescope
    h["ORIGIN"] = "cubeloupe demo generator (synthetic data)"
    h["CTYPE1"], h["CRVAL1"], h["CDELT1"], h["CRPIX1"], h["CUNIT1"] = (
        f"RA---{projection}", ra, -pixel / 3600.0, crpix[0], "deg")
    h["CTYPE2"], h["CRVAL2"], h["CDELT2"], h["CRPIX2"], h["CUNIT2"] = (
        f"DEC--{projection}", dec, pixel / 3600.0, crpix[1], "deg")
    h["RADESYS"] = "ICRS"
    h["EQUINOX"] = 2000.0
    return h


def add_spectral_axis(h, ctype, crval, cdelt, cunit, restfrq_hz, specsys="LSRK"):
    h["CTYPE3"], h["CRVAL3"], h["CDELT3"], h["CRPIX3"], h["CUNIT3"] = ctype, crval, cdelt, 1.0, cunit
    h["RESTFRQ"] = restfrq_hz
    h["SPECSYS"] = specsys
    return h


def add_beam(h, bmaj, bmin, bpa):
    h["BMAJ"], h["BMIN"], h["BPA"] = bmaj / 3600.0, bmin / 3600.0, bpa
    return h


def sky_position(header, x, y):
    """(RA, Dec) in degrees of the 0-based pixel (x, y)."""
    wcs = WCS(header).celestial
    ra, dec = wcs.wcs_pix2world([[x, y]], 0)[0]
    return float(ra), float(dec)


def pixel_of(header, ra, dec):
    """0-based (x, y) pixel of the sky position (RA, Dec) in degrees."""
    wcs = WCS(header).celestial
    x, y = wcs.wcs_world2pix([[ra, dec]], 0)[0]
    return float(x), float(y)


def write_fits(path, data, header, extra_hdus=()):
    hdus = [fits.PrimaryHDU(data=np.asarray(data, dtype=">f4"), header=header), *extra_hdus]
    fits.HDUList(hdus).writeto(path, overwrite=True)


def write_sidecar(path, truth):
    path.write_text(json.dumps(truth, indent=1) + "\n")


def beam_entry(bmaj, bmin, bpa):
    return {"major": quantity(bmaj, "arcsec"), "minor": quantity(bmin, "arcsec"), "pa": quantity(bpa, "deg")}


def spectral_axis_entry(h):
    return {"ctype": h["CTYPE3"], "crval": h["CRVAL3"], "cdelt": h["CDELT3"], "crpix": h["CRPIX3"],
            "cunit": h["CUNIT3"], "n_channels": h["NAXIS3"], "specsys": h["SPECSYS"], "restfrq_hz": h["RESTFRQ"]}


def common_entry(name, header, rms, rms_unit, source):
    return {
        "name": name,
        "file": f"{name}.fits",
        "scenario": SCENARIO,
        "source": source,
        "generator": "demo_cubes/make_demo_cubes.py",
        "seed": [SEED, zlib.crc32(name.encode())],
        "shape": [header["NAXIS3"], header["NAXIS2"], header["NAXIS1"]],
        "bunit": header["BUNIT"],
        "pixel_size": quantity(abs(header["CDELT2"]) * 3600.0, "arcsec"),
        "spectral_axis": spectral_axis_entry(header),
        "rms": quantity(rms, rms_unit),
        "noise": "white Gaussian noise convolved with the beam, rescaled to the stated rms per channel",
        "velocity_convention": "radio, relative to rest_frequency / (1 + z)",
        "line_profile": "Gaussian in radio velocity evaluated at channel centres",
    }


# --------------------------------------------------------------------------------------------
# (a) the disk galaxy


def disk_velocity_field(east, north, *, pa, inclination, v_sys, v_flat, r_turn):
    """Line-of-sight velocity (km/s) of a thin rotating disk at sky offsets (arcsec).

    ``v = v_sys + v_rot(R) sin(i) cos(theta)`` with ``v_rot(R) = v_flat (2/pi) arctan(R / r_turn)``;
    ``R`` and ``theta`` are the radius and azimuth (from the receding major axis) in the disk
    plane, found by de-projecting the offsets with the position angle ``pa`` (of the receding
    major axis, east of north) and the inclination ``i`` (0 = face-on).
    Returns (velocity, R).
    """
    pa, inc = np.deg2rad(pa), np.deg2rad(inclination)
    along = east * np.sin(pa) + north * np.cos(pa)          # along the receding major axis
    across = (east * np.cos(pa) - north * np.sin(pa)) / np.cos(inc)
    radius = np.hypot(along, across)
    cos_theta = np.divide(along, radius, out=np.zeros_like(radius), where=radius > 0)
    v_rot = v_flat * (2.0 / np.pi) * np.arctan(radius / r_turn)
    return v_sys + v_rot * np.sin(inc) * cos_theta, radius


def make_disk(out):
    name = "disk"
    rng = rng_for(name)
    shape = (100, 72, 72)
    pixel = 0.5
    rest_ghz, line_info = line_entry("CO", "J=2-1")
    bmaj, bmin, bpa = 2.3, 1.8, 28.0
    rms = 1.5e-3                                           # Jy/beam per channel
    model = {"pa": 118.0, "inclination": 52.0, "v_sys": 1462.0, "v_flat": 195.0, "r_turn": 2.0}
    sigma_v = 14.0                                         # km/s, the same everywhere
    scale_length, r_out, edge_width = 4.5, 13.0, 0.7       # arcsec
    surface_peak = 0.03                                    # Jy/arcsec^2 at the line peak, disk centre
    centre_px = (35.4, 36.7)                               # 0-based pixel of the dynamical centre
    cont_flux, cont_alpha = 3.2e-3, -0.4                   # Jy at the rest-frame line frequency, index

    cdelt = -4.8828125e6                                   # Hz, frequency falls as velocity rises
    f_sys = frequency_of(model["v_sys"], rest_ghz) * 1e9
    crval = f_sys - 47.3 * cdelt                           # systemic velocity near channel 47
    header = base_header(shape, pixel=pixel, ra=201.37125, dec=-17.44250, crpix=(37.0, 37.0),
                         obj="Quillwort-D7", telescope="SYNTHETIC-ARRAY")
    add_spectral_axis(header, "FREQ", crval, cdelt, "Hz", rest_ghz * 1e9)
    add_beam(header, bmaj, bmin, bpa)
    header["BUNIT"] = "Jy/beam"
    freq_ghz = channel_values(crval, cdelt, shape[0]) / 1e9
    vel = radio_velocity(freq_ghz, rest_ghz)

    # Sky model on a 3x finer grid (the velocity field changes within a pixel near the centre).
    sub = 3
    ny, nx = shape[1:]
    ys = (np.arange(ny * sub) + 0.5) / sub - 0.5
    xs = (np.arange(nx * sub) + 0.5) / sub - 0.5
    x, y = np.meshgrid(xs, ys)
    east, north = -(x - centre_px[0]) * pixel, (y - centre_px[1]) * pixel
    vfield, radius = disk_velocity_field(east, north, **model)
    taper = 1.0 / (1.0 + np.exp((radius - r_out) / edge_width))
    surface = surface_peak * np.exp(-radius / scale_length) * taper            # Jy/arcsec^2
    sub_area = (pixel / sub) ** 2
    line = np.empty(shape)
    for k, v in enumerate(vel):
        plane = surface * sub_area * gaussian(v, vfield, sigma_v)             # Jy per sub-pixel
        line[k] = plane.reshape(ny, sub, nx, sub).sum(axis=(1, 3))
    total_flux = (surface * sub_area).sum() * np.sqrt(2 * np.pi) * sigma_v     # Jy km/s
    centroid = (surface * vfield).sum() / surface.sum()

    kernel = beam_kernel(bmaj, bmin, bpa, pixel)
    cube = convolve_planes(line, kernel)
    line_peak = float(cube.max())
    nu_rest_frame = rest_ghz  # continuum spectrum referred to the line's rest frequency
    cont_spec = cont_flux * (freq_ghz / nu_rest_frame) ** cont_alpha
    point = beam_image(shape[1:], *centre_px, bmaj, bmin, bpa, pixel)
    cube += cont_spec[:, None, None] * point[None]
    cube += beam_noise(rng, shape, kernel, rms)
    write_fits(out / f"{name}.fits", cube, header)

    centre_ra, centre_dec = sky_position(header, *centre_px)
    truth = common_entry(name, header, rms, "Jy/beam", {
        "name": "Quillwort-D7", "kind": "nearby rotating disk galaxy",
        "ra": quantity(centre_ra, "deg", 10), "dec": quantity(centre_dec, "deg", 10)})
    truth.update({
        "z": 0.0,
        "beam": beam_entry(bmaj, bmin, bpa),
        "lines": [{
            **line_info,
            "velocity": quantity(model["v_sys"], "km/s"),
            "observed_frequency": quantity(frequency_of(model["v_sys"], rest_ghz), "GHz", 10),
            "flux": quantity(total_flux, "Jy km/s", 5),
            "flux_weighted_velocity": quantity(centroid, "km/s", 6),
            "dispersion": quantity(sigma_v, "km/s"),
            "fwhm_local": quantity(sigma_v * FWHM_PER_SIGMA, "km/s", 5),
            "peak": quantity(line_peak, "Jy/beam", 4),
            "peak_note": "highest value of the noise-free line cube after beam convolution",
        }],
        "continuum": {
            "kind": "point source at the dynamical centre",
            "flux_density": quantity(cont_flux, "Jy"), "at_frequency": quantity(nu_rest_frame, "GHz", 10),
            "spectral_index": cont_alpha,
            "law": "S(nu) = flux_density * (nu / at_frequency) ** spectral_index",
        },
        "disk": {
            "centre_pixel": {"x": centre_px[0], "y": centre_px[1], "origin": "0-based (numpy) pixel"},
            "position_angle": quantity(model["pa"], "deg"),
            "position_angle_note": "of the receding major axis, east of north",
            "inclination": quantity(model["inclination"], "deg"),
            "systemic_velocity": quantity(model["v_sys"], "km/s"),
            "v_flat": quantity(model["v_flat"], "km/s"),
            "r_turn": quantity(model["r_turn"], "arcsec"),
            "rotation_curve": "v_rot(R) = v_flat * (2 / pi) * arctan(R / r_turn)",
            "velocity_field": ("v(R, theta) = systemic_velocity + v_rot(R) * sin(inclination) * cos(theta); "
                               "R, theta: disk-plane radius and azimuth from the receding major axis"),
            "velocity_dispersion": quantity(sigma_v, "km/s"),
            "surface_brightness": ("line peak Sigma(R) = surface_peak * exp(-R / scale_length) / "
                                   "(1 + exp((R - r_out) / edge_width))"),
            "surface_peak": quantity(surface_peak, "Jy/arcsec2"),
            "scale_length": quantity(scale_length, "arcsec"),
            "r_out": quantity(r_out, "arcsec"), "edge_width": quantity(edge_width, "arcsec"),
        },
    })
    write_sidecar(out / f"{name}.json", truth)


# --------------------------------------------------------------------------------------------
# (b) the lensed galaxy in eight spectral windows

LENS = {
    "z_source": 2.67,
    "z_lens": 0.58,
    "phase_centre": (140.85730, -19.33720),                # RA, Dec in deg (invented, nothing known there)
    "lens_offset": (0.04, -0.03),                          # arcsec east, north of the phase centre
    "einstein_radius": 1.05,                               # arcsec
    "source_offset": (0.11, 0.06),                         # arcsec east, north of the lens (source plane)
    "gas_fwhm": 0.22,                                      # arcsec, Gaussian source of the line emission
    "dust_fwhm": 0.16,                                     # arcsec, Gaussian source of the dust continuum
    "gradient_pa": 70.0,                                   # deg east of north, towards positive velocities
    "gradient_v": 110.0,                                   # km/s, v = gradient_v * tanh(d / gradient_r)
    "gradient_r": 0.06,                                    # arcsec
    "dust_flux_250": 22e-3,                                # Jy (lensed) at 250 GHz observed
    "dust_alpha": 3.3,
}

# The molecular gas of Quillwort-L1 in local thermodynamic equilibrium (LTE), optically thin: one
# excitation temperature and one number of molecules (de-lensed) per species; water's ortho and
# para species share the temperature and split the molecules by the ortho-to-para ratio. Line
# fluxes follow from `lte_line_flux`; [CI] is not part of the model and keeps a set flux.
LTE_MODEL = {
    "CO": {"temperature": 70.0, "total_number": 1.3e61},
    "H2O": {"temperature": 75.0, "total_number": 3.5e58, "ortho_para_ratio": 2.5},
}
SET_FLUXES = {("[CI]", "3P2-3P1"): 2.3}                    # Jy km/s (lensed), outside the LTE model
LINE_DISPERSION = {"CO": 120.0, "[CI]": 115.0, "H2O": 105.0}   # km/s, local dispersion of each species

# Windows: centre (GHz), channel width (Hz), channels, pixel (arcsec), grid (pixels), beam
# (FWHM major, minor in arcsec, PA in deg), rms (Jy/beam per channel) and the lines injected.
# Every CO and H2O line of the catalog with an Einstein A that falls in a window at z_source is
# injected (make_lensed checks it), so the windows hold the whole LTE spectrum of the model.
LENSED_WINDOWS = {
    "lensed_spw1": {
        "centre": 220.15, "cdelt": 23.4375e6, "n_channels": 100, "pixel": 0.075, "grid": 64,
        "crpix": (33.0, 33.0), "beam": (0.46, 0.38, 32.0), "rms": 0.12e-3,
        "lines": [("CO", "J=7-6"), ("[CI]", "3P2-3P1")],
    },
    "lensed_spw2": {
        "centre": 301.20, "cdelt": -65.0e6, "n_channels": 100, "pixel": 0.06, "grid": 64,
        "crpix": (32.5, 32.5), "beam": (0.34, 0.29, 38.0), "rms": 0.10e-3,
        "lines": [("H2O", "3_12-3_03"), ("H2O", "1_11-0_00")],
    },
    "lensed_spw3": {
        "centre": 154.40, "cdelt": 40.0e6, "n_channels": 160, "pixel": 0.12, "grid": 48,
        "crpix": (24.5, 24.5), "beam": (0.66, 0.55, -20.0), "rms": 0.07e-3,
        "lines": [("H2O", "1_10-1_01"), ("CO", "J=5-4")],
    },
    "lensed_spw4": {
        "centre": 269.30, "cdelt": 25.0e6, "n_channels": 80, "pixel": 0.09, "grid": 48,
        "crpix": (24.5, 24.5), "beam": (0.38, 0.32, 45.0), "rms": 0.07e-3,
        "lines": [("H2O", "2_02-1_11")],
    },
    "lensed_spw5": {
        "centre": 282.40, "cdelt": -25.0e6, "n_channels": 80, "pixel": 0.09, "grid": 48,
        "crpix": (24.5, 24.5), "beam": (0.36, 0.31, 41.0), "rms": 0.08e-3,
        "lines": [("CO", "J=9-8")],
    },
    "lensed_spw6": {
        "centre": 205.00, "cdelt": 20.0e6, "n_channels": 80, "pixel": 0.1, "grid": 48,
        "crpix": (24.5, 24.5), "beam": (0.50, 0.41, 28.0), "rms": 0.06e-3,
        "lines": [("H2O", "2_11-2_02")],
    },
    # Two small windows (32 x 32 pixels, 56 and 48 channels) for the population diagrams (#16): a
    # third ortho-H2O line, high in energy, and a fourth CO line, low in energy.
    "lensed_spw7": {
        "centre": 316.90, "cdelt": 37.5e6, "n_channels": 56, "pixel": 0.11, "grid": 32,
        "crpix": (16.5, 16.5), "beam": (0.33, 0.28, 36.0), "rms": 0.09e-3,
        "lines": [("H2O", "3_21-3_12")],
    },
    "lensed_spw8": {
        "centre": 125.60, "cdelt": -31.25e6, "n_channels": 48, "pixel": 0.15, "grid": 32,
        "crpix": (16.5, 16.5), "beam": (0.80, 0.67, -15.0), "rms": 0.05e-3,
        "lines": [("CO", "J=4-3")],
    },
}


# --------------------------------------------------------------------------------------------
# LTE line fluxes of the lensed galaxy

# Ortho-H2O levels of the LAMDA file (Schoier et al. 2005, A&A 432, 369; spectroscopy from JPL),
# copy read in GitHub UCL/Magritte Projects/Lime_1/data/H2O.dat: energy (cm^-1, above para 0_00)
# and weight. LAMDA's weights 3 (2J+1) include the ortho nuclear-spin factor 3; it is divided out
# here, as the catalog's g_up leaves it out (analysis/data/make_transitions.py, DEGENERACY).
# Levels up to 900 cm^-1 (1 300 K): the file's other levels change Q by < 1e-6 at 75 K, < 0.1 % at 150 K.
ORTHO_H2O_LEVELS_CM = (
    (23.794356, 9), (42.371741, 9), (79.496382, 15), (134.901638, 15), (136.761650, 21),
    (173.365803, 21), (212.156362, 21), (224.838381, 27), (285.418572, 21), (300.362281, 27),
    (325.347901, 33), (382.516882, 27), (399.457517, 33), (446.510668, 33), (447.252352, 39),
    (488.107691, 27), (508.812051, 33), (552.911385, 39), (586.243543, 45), (610.341162, 33),
    (648.978689, 39), (704.214046, 45), (742.076279, 33), (744.162650, 51), (756.724775, 39),
    (782.409821, 45), (842.356584, 45), (885.600201, 51), (888.598736, 39),
)
# Para-H2O levels, from the ground level 0_00 up a chain of the catalog's laboratory line
# frequencies (Ritz combination principle: a level's energy is the sum of the photon energies of
# a chain of lines reaching it). Each entry: level, (line, sign) steps from an already known level.
PARA_H2O_LADDER = (
    ("1_11", "0_00", "1_11-0_00"), ("2_02", "1_11", "2_02-1_11"), ("2_11", "2_02", "2_11-2_02"),
    ("2_20", "2_11", "2_20-2_11"), ("3_13", "2_20", "3_13-2_20"), ("3_22", "3_13", "3_22-3_13"),
    ("3_31", "3_22", "3_31-3_22"), ("4_04", "3_13", "4_04-3_13"), ("4_13", "3_22", "4_13-3_22"),
    ("4_22", "3_31", "4_22-3_31"), ("4_31", "4_22", "4_31-4_22"), ("5_15", "4_22", "5_15-4_22"),
    ("5_24", "4_31", "5_24-4_31"),
)
# The rigid-rotor partition function of a linear molecule, Q = kT/(hB) + 1/3 (e.g. Mangum &
# Shirley 2015, PASP 127, 266, eq. 52); B of CO from the CDMS entry (from memory).
CO_ROTATIONAL_CONSTANT_GHZ = 57.6359683


@functools.lru_cache(maxsize=1)
def _catalog_table():
    from astropy.table import Table

    return Table.read(CATALOG, format="ascii.ecsv")


def catalog_row(species, transition):
    """The bundled catalog's row of a line (an astropy Table row)."""
    table = _catalog_table()
    match = (table["species"] == species) & (table["transition"] == transition)
    if not match.any():
        raise KeyError(f"{species} {transition} is not in {CATALOG}")
    return table[match][0]


def upper_level_degeneracy(species, transition):
    """g_up of a line: the catalog's column when it has one, else 2 J_up + 1 from the label.

    The label's first number is the upper level's J (``"J=7-6"``, ``"3_12-3_03"``); no
    nuclear-spin factor, the catalog's convention. Returns (g_up, where it came from).
    """
    row = catalog_row(species, transition)
    if "g_up" in row.colnames and np.isfinite(row["g_up"]):
        return float(row["g_up"]), "catalog g_up (analysis/data/transitions.ecsv)"
    j_up = int(transition.replace("J=", "").split("_")[0].split("-")[0])
    return 2.0 * j_up + 1.0, "2 J_up + 1 from the transition label (no nuclear-spin factor)"


def para_h2o_levels_k():
    """{level: E/k in K} of para-H2O from the catalog's line frequencies (see PARA_H2O_LADDER)."""
    h_over_k = (constants.h / constants.k_B).to_value(u.K / u.GHz)
    levels = {"0_00": 0.0}
    for level, below, line in PARA_H2O_LADDER:
        nu = u.Quantity(catalog_row("H2O", line)["rest_frequency"], _catalog_table()["rest_frequency"].unit)
        levels[level] = levels[below] + h_over_k * nu.to_value(u.GHz)
    return levels


def level_sum(energies_k, weights, temperature, energy_zero=0.0):
    """Q = sum_i g_i exp(-(E_i - E_0) / kT), the partition function as a sum over levels."""
    e = np.asarray(energies_k, float) - energy_zero
    return float(np.sum(np.asarray(weights, float) * np.exp(-e / temperature)))


def demo_partition_function(species, spin, temperature):
    """(Q, energy zero in K, source) of a species of the LTE model at ``temperature`` (K).

    CO: `cubeloupe.analysis.partition_function` (the CDMS table) when it is importable, else
    the rigid rotor kT/(hB) + 1/3. H2O: a spin species' own Q, counted from its lowest level
    (ortho 1_01, para 0_00), summed over its levels (the bundled tables have only the total
    over both spin species).
    """
    if species == "CO":
        try:
            from cubeloupe.analysis import partition_function, partition_function_source
        except ImportError:
            partition_function = None
        if partition_function is not None:
            q = partition_function("CO", temperature * u.K).value
            return float(q), 0.0, "cubeloupe.analysis.partition_function: " + partition_function_source("CO")
        kt_over_hb = (constants.k_B * temperature * u.K / (constants.h * CO_ROTATIONAL_CONSTANT_GHZ * u.GHz)
                      ).decompose().value
        return kt_over_hb + 1.0 / 3.0, 0.0, ("rigid rotor Q = kT/(hB) + 1/3 (Mangum & Shirley 2015, PASP 127, "
                                            "266, eq. 52), B = 57.6359683 GHz (CDMS, from memory)")
    if species == "H2O" and spin == "ortho":
        energies = [_cm_to_k(e) for e, _ in ORTHO_H2O_LEVELS_CM]
        weights = [g / 3.0 for _, g in ORTHO_H2O_LEVELS_CM]
        zero = energies[0]
        return level_sum(energies, weights, temperature, zero), zero, (
            "sum over the ortho-H2O levels of the LAMDA file (Schoier et al. 2005, A&A 432, 369), "
            "copy in GitHub UCL/Magritte Projects/Lime_1/data/H2O.dat, weights 2J+1, levels to 900 cm^-1")
    if species == "H2O" and spin == "para":
        levels = para_h2o_levels_k()
        weights = [2 * int(name.split("_")[0]) + 1 for name in levels]
        return level_sum(list(levels.values()), weights, temperature), 0.0, (
            "sum over the para-H2O levels up to 5_24 (600 K), energies from the catalog's laboratory "
            "line frequencies chained from 0_00 (Ritz combination principle), weights 2J+1; the missing "
            "levels lie above 640 K and change Q by < 0.1 % up to 75 K (with the ortho sum it matches JPL's "
            "published total over both spin species to 0.02 % at 75 K)")
    raise KeyError(f"no LTE partition function for {species} {spin}")


def _cm_to_k(wavenumber):
    """E/k in K of a level at ``wavenumber`` cm^-1: E = h c (wavenumber)."""
    return (constants.h * constants.c * wavenumber / u.cm / constants.k_B).to_value(u.K)


def lte_upper_level_number(total_number, g_up, e_up, temperature, q, energy_zero=0.0):
    """Molecules in the upper level in LTE: N_u = N g_u exp(-(E_u - E_0)/kT) / Q (Boltzmann)."""
    return total_number * g_up * np.exp(-(e_up - energy_zero) / temperature) / q


def lte_line_flux(upper_number, einstein_a, z, magnification, luminosity_distance_m):
    """Velocity-integrated flux (Jy km/s) of an optically thin line from N_u molecules at z.

    Each molecule in the upper level emits A_ul photons of h nu_rest a second, so
    L = N_u A_ul h nu_rest; the flux L mu / (4 pi D_L^2) spread over a line of
    velocity width dv seen at nu_obs = nu_rest / (1 + z) gives
    S dv = N_u A_ul h c (1 + z) mu / (4 pi D_L^2) (the optically thin relation
    between line intensity and upper-level population of Goldsmith & Langer 1999,
    ApJ 517, 209, eq. 7-9, for an unresolved source at luminosity distance D_L).
    """
    flux = (upper_number * einstein_a / u.s * constants.h * constants.c * (1 + z) * magnification
            / (4 * np.pi * (luminosity_distance_m * u.m) ** 2))
    return flux.to_value(u.Jy * u.km / u.s)


def lens_magnification(fwhm):
    """Magnification of a Gaussian source of ``fwhm`` (arcsec) by the demo's lens.

    Lensing keeps surface brightness, so the magnification is the image's integral over the
    source's (2 pi sigma^2): summed on a 0.004 arcsec grid, fine enough for 5 significant digits.
    """
    step, half = 0.004, 2.6
    offsets = np.arange(-half, half + step / 2, step)
    east, north = np.meshgrid(offsets, offsets)
    r = np.maximum(np.hypot(east, north), 1e-9)
    shrink = 1.0 - LENS["einstein_radius"] / r
    de, dn = east * shrink - LENS["source_offset"][0], north * shrink - LENS["source_offset"][1]
    sigma = fwhm / FWHM_PER_SIGMA
    image = np.exp(-0.5 * (de ** 2 + dn ** 2) / sigma ** 2)
    return float(image.sum() * step ** 2 / (2 * np.pi * sigma ** 2))


def luminosity_distance_m(z):
    from astropy.cosmology import Planck18

    return Planck18.luminosity_distance(z).to_value(u.m)


def lte_lines(species, transition):
    """The LTE facts of a line of the model: sidecar fields and its flux (Jy km/s, lensed)."""
    model = LTE_MODEL[species]
    row = catalog_row(species, transition)
    spin = str(row["spin_isomer"]) if str(row["spin_isomer"]) != "none" else None
    temperature = model["temperature"]
    total = model["total_number"]
    if spin is not None:
        ratio = model["ortho_para_ratio"]
        total = total * (ratio / (1 + ratio) if spin == "ortho" else 1 / (1 + ratio))
    q, zero, q_source = demo_partition_function(species, spin, temperature)
    g_up, g_source = upper_level_degeneracy(species, transition)
    e_up = float(u.Quantity(row["E_up"], _catalog_table()["E_up"].unit).to_value(u.K))
    a_ul = float(u.Quantity(row["einstein_A"], _catalog_table()["einstein_A"].unit).to_value(1 / u.s))
    z = LENS["z_source"]
    mu = lens_magnification(LENS["gas_fwhm"])
    n_up = lte_upper_level_number(total, g_up, e_up, temperature, q, zero)
    flux = lte_line_flux(n_up, a_ul, z, mu, luminosity_distance_m(z))
    return flux, {
        "from_lte_model": True,
        "g_up": g_up, "g_up_from": g_source,
        "E_up": quantity(e_up, "K"), "einstein_A": quantity(a_ul, "1/s"),
        "upper_level_number": quantity(n_up, "", 8),
        "upper_level_number_note": "molecules in the upper level, de-lensed (intrinsic)",
    }


def lte_model_entry():
    """The sidecar's record of the LTE model: what was set, the constants used and their sources."""
    z = LENS["z_source"]
    species = {}
    for name, model in LTE_MODEL.items():
        entry = {"temperature": quantity(model["temperature"], "K"),
                 "total_number": quantity(model["total_number"], ""),
                 "total_number_note": "molecules in all levels (both spin species for H2O), de-lensed"}
        spins = ("ortho", "para") if "ortho_para_ratio" in model else (None,)
        if "ortho_para_ratio" in model:
            entry["ortho_para_ratio"] = model["ortho_para_ratio"]
        for spin in spins:
            q, zero, source = demo_partition_function(name, spin, model["temperature"])
            part = {"partition_function": _round(q, 8), "energy_zero": quantity(zero, "K", 8),
                    "partition_function_from": source}
            if spin is None:
                entry.update(part)
            else:
                ratio = model["ortho_para_ratio"]
                share = ratio / (1 + ratio) if spin == "ortho" else 1 / (1 + ratio)
                part["number"] = quantity(model["total_number"] * share, "")
                entry[spin] = part
        species[name] = entry
    return {
        "assumptions": ("local thermodynamic equilibrium at one excitation temperature per species, "
                        "optically thin lines, no background; H2O ortho and para share the temperature"),
        "level_population": "N_u = N g_up exp(-(E_up - energy_zero) / (k T)) / Q(T)",
        "line_flux": "S dv = N_u A_ul h c (1 + z) mu / (4 pi D_L^2)",
        "reference": ("Goldsmith & Langer 1999, ApJ 517, 209 (population diagrams: optically thin line "
                      "intensity and upper-level population, Boltzmann distribution)"),
        "energy_zero_note": ("E_up on the catalog's scale (above para-H2O 0_00 for water); each spin species "
                             "counts its Q and populations from its own lowest level (energy_zero)"),
        "g_up_note": "no nuclear-spin factors in g_up or Q (the catalog's convention)",
        "cosmology": "Planck18 (astropy.cosmology)",
        "luminosity_distance": quantity(luminosity_distance_m(z) * u.m.to(u.Mpc), "Mpc", 8),
        "magnification": _round(lens_magnification(LENS["gas_fwhm"]), 6),
        "magnification_note": "of the line-emitting gas; fluxes in 'lines' are lensed (observed)",
        "species": species,
        "not_in_model": [f"{s} {t}: set flux {f} Jy km/s" for (s, t), f in SET_FLUXES.items()],
    }


def lensed_source_plane(x, y, lens_px, pixel):
    """Source-plane offsets (arcsec east, north of the lens) of image-plane pixels.

    Singular isothermal sphere: beta = theta - theta_E * theta / |theta|
    (e.g. Schneider, Ehlers & Falco, *Gravitational Lenses*, section 8.1.4).
    """
    east, north = -(x - lens_px[0]) * pixel, (y - lens_px[1]) * pixel
    r = np.maximum(np.hypot(east, north), 1e-9)
    shrink = 1.0 - LENS["einstein_radius"] / r
    return east * shrink, north * shrink


def check_window_holds_model_lines(name, freq_ghz, z):
    """Refuse a window layout that leaves out a line the LTE model predicts in the window.

    Every catalog line of a model species with an Einstein A, whose redshifted frequency lies
    in the window (with a 300 km/s margin), must be listed in the window's ``lines``.
    """
    table = _catalog_table()
    unit = table["rest_frequency"].unit
    lo, hi = freq_ghz.min() * (1 - 300 / C_KMS), freq_ghz.max() * (1 + 300 / C_KMS)
    listed = set(LENSED_WINDOWS[name]["lines"])
    for row in table:
        if row["species"] not in LTE_MODEL or not np.isfinite(row["einstein_A"]):
            continue
        observed = u.Quantity(row["rest_frequency"], unit).to_value(u.GHz) / (1 + z)
        if lo <= observed <= hi and (row["species"], row["transition"]) not in listed:
            raise ValueError(f"{name}: {row['species']} {row['transition']} at {observed:.3f} GHz falls in the "
                             "window but is not injected; add it to LENSED_WINDOWS")


def make_lensed(out, name):
    spw = LENSED_WINDOWS[name]
    rng = rng_for(name)
    z = LENS["z_source"]
    shape = (spw["n_channels"], spw["grid"], spw["grid"])
    pixel = spw["pixel"]
    crval = spw["centre"] * 1e9 - 0.5 * (spw["n_channels"] - 1) * spw["cdelt"]
    bmaj, bmin, bpa = spw["beam"]
    header = base_header(shape, pixel=pixel, ra=LENS["phase_centre"][0], dec=LENS["phase_centre"][1],
                         crpix=spw["crpix"], obj="Quillwort-L1", telescope="SYNTHETIC-ARRAY")
    first_rest = rest_frequency(*spw["lines"][0][:2])
    add_spectral_axis(header, "FREQ", crval, spw["cdelt"], "Hz", first_rest * 1e9 / (1 + z))
    add_beam(header, bmaj, bmin, bpa)
    header["BUNIT"] = "Jy/beam"
    header["SPECSYS"] = "BARYCENT"
    freq_ghz = channel_values(crval, spw["cdelt"], shape[0]) / 1e9
    check_window_holds_model_lines(name, freq_ghz, z)

    # Lens centre on this window's pixel grid (the windows share sky positions, not pixels).
    centre_px = pixel_of(header, LENS["phase_centre"][0], LENS["phase_centre"][1])
    cos_dec = np.cos(np.deg2rad(LENS["phase_centre"][1]))
    lens_ra = LENS["phase_centre"][0] + LENS["lens_offset"][0] / 3600.0 / cos_dec
    lens_dec = LENS["phase_centre"][1] + LENS["lens_offset"][1] / 3600.0
    lens_px = pixel_of(header, lens_ra, lens_dec)

    sub = 5
    ny, nx = shape[1:]
    x, y = np.meshgrid((np.arange(nx * sub) + 0.5) / sub - 0.5, (np.arange(ny * sub) + 0.5) / sub - 0.5)
    beta_e, beta_n = lensed_source_plane(x, y, lens_px, pixel)
    de, dn = beta_e - LENS["source_offset"][0], beta_n - LENS["source_offset"][1]
    gas = np.exp(-0.5 * (de ** 2 + dn ** 2) / (LENS["gas_fwhm"] / FWHM_PER_SIGMA) ** 2)
    dust = np.exp(-0.5 * (de ** 2 + dn ** 2) / (LENS["dust_fwhm"] / FWHM_PER_SIGMA) ** 2)
    pa = np.deg2rad(LENS["gradient_pa"])
    vfield = LENS["gradient_v"] * np.tanh((de * np.sin(pa) + dn * np.cos(pa)) / LENS["gradient_r"])
    # One magnification for every window, from a grid finer than any window's (lens_magnification).
    mu_gas = lens_magnification(LENS["gas_fwhm"])
    mu_dust = lens_magnification(LENS["dust_fwhm"])

    def binned(plane):
        return plane.reshape(ny, sub, nx, sub).sum(axis=(1, 3))

    # Each pixel's spectrum is a sum of Gaussians centred on its sub-pixels' velocities. Binning
    # those velocities at 1 km/s (far below the line widths of 100+ km/s) turns the sum into one
    # matrix product: (pixels x velocity bins) @ (velocity bins x channels).
    bin_width = 1.0
    bin_index = np.round((vfield - vfield.min()) / bin_width).astype(int)
    bin_v = vfield.min() + bin_width * np.arange(bin_index.max() + 1)
    pixel_index = (np.arange(ny * sub)[:, None] // sub) * nx + np.arange(nx * sub)[None, :] // sub
    weight = gas / gas.sum()
    histogram = np.bincount((pixel_index * bin_v.size + bin_index).ravel(), weights=weight.ravel(),
                            minlength=ny * nx * bin_v.size).reshape(ny * nx, bin_v.size)
    sky = np.zeros(shape)
    lines_truth = []
    fine_v = np.arange(-1500.0, 1500.0, 0.5)
    for species, transition in spw["lines"]:
        rest_ghz, line_info = line_entry(species, transition)
        sigma_v = LINE_DISPERSION[species]
        if (species, transition) in SET_FLUXES:
            flux = SET_FLUXES[(species, transition)]
            line_info["from_lte_model"] = False
        else:
            flux, lte_info = lte_lines(species, transition)
            line_info.update(lte_info)
        vel = radio_velocity(freq_ghz, rest_ghz, z)
        # Jy per pixel: flux * brightness share * normalised Gaussian profile (1 / (km/s))
        profiles = gaussian(vel[None, :], bin_v[:, None], sigma_v) / (np.sqrt(2 * np.pi) * sigma_v)
        sky += flux * (histogram @ profiles).T.reshape(shape)
        # The noise-free spatially integrated spectrum, for the recorded peak and FWHM.
        fine = gaussian(fine_v[None, :], bin_v[:, None], sigma_v) / (np.sqrt(2 * np.pi) * sigma_v)
        spectrum = flux * histogram.sum(axis=0) @ fine
        half = fine_v[spectrum >= spectrum.max() / 2]
        centroid = (weight * vfield).sum()
        lines_truth.append({
            **line_info,
            "observed_frequency": quantity(rest_ghz / (1 + z), "GHz", 10),
            "velocity": quantity(centroid, "km/s", 5),
            "velocity_note": "flux-weighted velocity of the lensed emission (differential magnification "
                             "moves it off 0)",
            "observed_frequency_of_centroid": quantity(frequency_of(centroid, rest_ghz, z), "GHz", 10),
            "flux": quantity(flux, "Jy km/s", 8),
            "intrinsic_flux": quantity(flux / mu_gas, "Jy km/s", 8),
            "local_dispersion": quantity(sigma_v, "km/s"),
            "fwhm": quantity(half[-1] - half[0], "km/s", 4),
            "fwhm_note": "full width at half maximum of the noise-free spatially integrated line",
            "peak": quantity(spectrum.max(), "Jy", 5),
            "peak_note": "peak flux density of the noise-free spatially integrated line",
        })

    dust_map = binned(dust) / dust.sum()
    cont_spec = LENS["dust_flux_250"] * (freq_ghz / 250.0) ** LENS["dust_alpha"]       # Jy, lensed
    sky += cont_spec[:, None, None] * dust_map[None]
    kernel = beam_kernel(bmaj, bmin, bpa, pixel)
    cube = convolve_planes(sky, kernel)

    # The share of the total flux that falls in a ring aperture around the lens, from the
    # noise-free maps after beam convolution (the line emission has the same velocity-integrated
    # map for every line; the dust is more compact).
    ring_in, ring_out = LENS["einstein_radius"] - 0.55, LENS["einstein_radius"] + 0.55
    yy, xx = np.mgrid[0:ny, 0:nx]
    r_pix = np.hypot(xx - lens_px[0], yy - lens_px[1]) * pixel
    ring = (r_pix >= ring_in) & (r_pix <= ring_out)

    def ring_share(map2d):
        seen = convolve_fft(map2d, kernel, normalize_kernel=False, boundary="fill", fill_value=0.0)
        return seen[ring].sum() / (map2d.sum() * kernel.sum())

    line_share = ring_share(binned(gas))
    dust_share = ring_share(binned(dust))
    cube += beam_noise(rng, shape, kernel, spw["rms"])
    write_fits(out / f"{name}.fits", cube, header)

    f_mid = 0.5 * (freq_ghz[0] + freq_ghz[-1])
    s_mid = LENS["dust_flux_250"] * (f_mid / 250.0) ** LENS["dust_alpha"]
    truth = common_entry(name, header, spw["rms"], "Jy/beam", {
        "name": "Quillwort-L1", "kind": "strongly lensed dusty star-forming galaxy",
        "ra": quantity(lens_ra, "deg", 10), "dec": quantity(lens_dec, "deg", 10),
        "position_note": "of the lens centre; the lensed source forms a ring around it"})
    truth.update({
        "z": z,
        "delivery": {"windows": list(LENSED_WINDOWS), "note": f"{len(LENSED_WINDOWS)} spectral windows of one "
                     "delivery; every CO and H2O line of the catalog (with an Einstein A) that falls in a "
                     "window is injected, with its LTE flux"},
        "lte_model": lte_model_entry(),
        "beam": beam_entry(bmaj, bmin, bpa),
        "lines": lines_truth,
        "continuum": {
            "kind": "lensed dust continuum, same lens as the lines, more compact source",
            "flux_density": quantity(LENS["dust_flux_250"], "Jy"), "at_frequency": quantity(250.0, "GHz"),
            "spectral_index": LENS["dust_alpha"],
            "law": "S(nu) = flux_density * (nu / at_frequency) ** spectral_index (spatially integrated)",
            "at_window_centre": quantity(s_mid, "Jy", 6),
            "window_centre": quantity(f_mid, "GHz", 10),
            "slope_at_window_centre": quantity(s_mid * LENS["dust_alpha"] / f_mid, "Jy/GHz", 6),
            "at_band_edges": quantity([cont_spec[0], cont_spec[-1]], "Jy", 6),
        },
        "ring_aperture": {
            "centre_pixel": {"x": _round(lens_px[0]), "y": _round(lens_px[1]), "origin": "0-based (numpy) pixel"},
            "inner_radius": quantity(ring_in, "arcsec"), "outer_radius": quantity(ring_out, "arcsec"),
            "pixels": "those whose centre lies within inner_radius <= r <= outer_radius of centre_pixel",
            "line_fraction": _round(line_share, 5),
            "continuum_fraction": _round(dust_share, 5),
            "note": "share of each total flux inside the ring after beam convolution (noise-free model)",
        },
        "lens": {
            "model": "singular isothermal sphere: beta = theta - theta_E * theta / |theta|",
            "z_lens": LENS["z_lens"],
            "centre_pixel": {"x": _round(lens_px[0]), "y": _round(lens_px[1]), "origin": "0-based (numpy) pixel"},
            "phase_centre_pixel": {"x": _round(centre_px[0]), "y": _round(centre_px[1])},
            "einstein_radius": quantity(LENS["einstein_radius"], "arcsec"),
            "source_offset": quantity(LENS["source_offset"], "arcsec"),
            "source_offset_note": "east, north of the lens centre in the source plane",
            "gas_fwhm": quantity(LENS["gas_fwhm"], "arcsec"), "dust_fwhm": quantity(LENS["dust_fwhm"], "arcsec"),
            "magnification": _round(mu_gas, 5),
            "magnification_note": "of the line-emitting gas (use it for line luminosities)",
            "dust_magnification": _round(mu_dust, 5),
            "source_velocity_field": ("v = gradient_v * tanh(d / gradient_r), d = source-plane offset "
                                      "along gradient_pa (east of north)"),
            "gradient_v": quantity(LENS["gradient_v"], "km/s"),
            "gradient_r": quantity(LENS["gradient_r"], "arcsec"),
            "gradient_pa": quantity(LENS["gradient_pa"], "deg"),
        },
    })
    write_sidecar(out / f"{name}.json", truth)


# --------------------------------------------------------------------------------------------
# (c) the single-dish cloud in K, VRAD axis, degenerate Stokes axis


def make_single_dish(out):
    name = "single_dish"
    rng = rng_for(name)
    shape = (100, 64, 64)
    pixel = 11.0                                          # arcsec
    beam = 33.0                                           # arcsec, circular
    rms = 0.18                                            # K per channel
    rest_ghz, line_info = line_entry("CO", "J=1-0")
    header = base_header(shape, pixel=pixel, ra=75.54500, dec=45.60700, crpix=(32.5, 32.5),
                         projection="SFL", obj="Quillwort-C4", telescope="SYNTHETIC-DISH")
    add_spectral_axis(header, "VRAD", -24600.0, 250.0, "m/s", rest_ghz * 1e9)
    add_beam(header, beam, beam, 0.0)
    header["BUNIT"] = "K"
    header["COMMENT"] = "Main-beam brightness temperature (Rayleigh-Jeans), synthetic data."
    vel = channel_values(-24.6, 0.25, shape[0])           # km/s

    ny, nx = shape[1:]
    y, x = np.mgrid[0:ny, 0:nx].astype(float)
    # A filament with a velocity gradient along it, and a dense core at another velocity.
    fil = {"centre_pixel": (30.0, 34.0), "pa": 60.0, "length_fwhm": 330.0, "width_fwhm": 75.0,
           "peak": 5.5, "v_centre": -13.4, "gradient": 0.9, "sigma": 0.85}
    core = {"centre_pixel": (42.0, 23.0), "fwhm": 60.0, "peak": 9.0, "v_centre": -9.0, "sigma": 0.55}
    east, north = -(x - fil["centre_pixel"][0]) * pixel, (y - fil["centre_pixel"][1]) * pixel
    pa = np.deg2rad(fil["pa"])
    along = east * np.sin(pa) + north * np.cos(pa)
    across = east * np.cos(pa) - north * np.sin(pa)
    fil_t = fil["peak"] * gaussian(along, 0, fil["length_fwhm"] / FWHM_PER_SIGMA) * \
        gaussian(across, 0, fil["width_fwhm"] / FWHM_PER_SIGMA)
    fil_v = fil["v_centre"] + fil["gradient"] * along / 60.0
    ce, cn = -(x - core["centre_pixel"][0]) * pixel, (y - core["centre_pixel"][1]) * pixel
    core_t = core["peak"] * gaussian(np.hypot(ce, cn), 0, core["fwhm"] / FWHM_PER_SIGMA)
    sky = (fil_t[None] * gaussian(vel[:, None, None], fil_v[None], fil["sigma"])
           + core_t[None] * gaussian(vel[:, None, None], core["v_centre"], core["sigma"]))

    # Temperature-preserving smoothing by the beam (kernel of unit sum).
    kernel = beam_kernel(beam, beam, 0.0, pixel)
    kernel_unit = kernel / kernel.sum()
    model = convolve_planes(sky, kernel_unit)
    # A Gaussian core of FWHM a seen with a Gaussian beam of FWHM b (kernel of unit sum) peaks at
    # T a^2 / (a^2 + b^2): the convolution of two Gaussians (common practice).
    core_peak_in_beam = core["peak"] * core["fwhm"] ** 2 / (core["fwhm"] ** 2 + beam ** 2)
    # Gridding correlates single-dish noise over about a third of the beam.
    grid_kernel = beam_kernel(beam / 3.0, beam / 3.0, 0.0, pixel)
    cube = model + beam_noise(rng, shape, grid_kernel, rms)
    header["NAXIS"] = 4
    header["NAXIS4"] = 1
    header["CTYPE4"], header["CRVAL4"], header["CDELT4"], header["CRPIX4"], header["CUNIT4"] = "STOKES", 1.0, 1.0, 1.0, ""
    write_fits(out / f"{name}.fits", cube[np.newaxis], header)

    area_sr = (pixel * u.arcsec) ** 2
    truth = common_entry(name, header, rms, "K", {
        "name": "Quillwort-C4", "kind": "Galactic molecular cloud (filament and dense core)",
        "ra": quantity(header["CRVAL1"], "deg", 10), "dec": quantity(header["CRVAL2"], "deg", 10),
        "position_note": "map centre"})
    truth["shape"] = [1, *truth["shape"]]
    truth["noise"] = ("white Gaussian noise convolved with a Gaussian of FWHM beam/3 (gridding), "
                      "rescaled to the stated rms per channel")
    truth.update({
        "z": 0.0,
        "velocity_convention": "radio LSRK velocities of the file (VRAD axis), rest frequency RESTFRQ",
        "temperature_scale": "main-beam brightness temperature T_mb",
        "beam": beam_entry(beam, beam, 0.0),
        "stokes_axis": "degenerate (NAXIS4 = 1, Stokes I)",
        "lines": [{
            **line_info,
            "components": [
                {"name": "core", "velocity": quantity(core["v_centre"], "km/s"),
                 "dispersion": quantity(core["sigma"], "km/s"),
                 "fwhm": quantity(core["sigma"] * FWHM_PER_SIGMA, "km/s", 5),
                 "peak_intrinsic": quantity(core["peak"], "K"),
                 "peak_in_beam": quantity(core_peak_in_beam, "K", 6),
                 "peak_note": "core alone at its centre pixel after beam smoothing: peak_intrinsic * "
                              "size_fwhm^2 / (size_fwhm^2 + beam^2)",
                 "centre_pixel": {"x": core["centre_pixel"][0], "y": core["centre_pixel"][1],
                                  "origin": "0-based (numpy) pixel"},
                 "size_fwhm": quantity(core["fwhm"], "arcsec"),
                 "integrated_intensity_at_centre": quantity(
                     core_peak_in_beam * np.sqrt(2 * np.pi) * core["sigma"], "K km/s", 6),
                 "flux": quantity(
                     ((core["peak"] * u.K).to(u.Jy / u.sr, u.brightness_temperature(rest_ghz * u.GHz))
                      * 2 * np.pi * (core["fwhm"] / FWHM_PER_SIGMA * u.arcsec) ** 2
                      * np.sqrt(2 * np.pi) * core["sigma"] * u.km / u.s).to_value(u.Jy * u.km / u.s),
                     "Jy km/s", 5),
                 "flux_note": "Rayleigh-Jeans conversion at the rest frequency, whole core"},
                {"name": "filament", "velocity_at_centre": quantity(fil["v_centre"], "km/s"),
                 "velocity_gradient": quantity(fil["gradient"], "km / (s arcmin)"),
                 "gradient_direction": quantity(fil["pa"], "deg"),
                 "gradient_note": "velocity rises along gradient_direction (east of north) through centre_pixel",
                 "dispersion": quantity(fil["sigma"], "km/s"),
                 "peak_intrinsic": quantity(fil["peak"], "K"),
                 "centre_pixel": {"x": fil["centre_pixel"][0], "y": fil["centre_pixel"][1],
                                  "origin": "0-based (numpy) pixel"},
                 "length_fwhm": quantity(fil["length_fwhm"], "arcsec"),
                 "width_fwhm": quantity(fil["width_fwhm"], "arcsec")},
            ],
        }],
        "continuum": {"kind": "none (single-dish spectral-line maps are baseline-subtracted)"},
        "pixel_solid_angle": quantity(area_sr.to_value(u.sr), "sr", 6),
    })
    write_sidecar(out / f"{name}.json", truth)


# --------------------------------------------------------------------------------------------
# (d) per-channel beams and blanked edge channels


def make_varying_beams(out):
    name = "varying_beams"
    rng = rng_for(name)
    shape = (100, 64, 64)
    pixel = 0.15
    rms = 1.5e-3
    rest_ghz, line_info = line_entry("CO", "J=3-2")
    v_sys = 2650.0
    blank_low, blank_high = 6, 8                            # NaN channels at the start and end
    header = base_header(shape, pixel=pixel, ra=152.08375, dec=31.20917, crpix=(33.0, 33.0),
                         obj="Quillwort-N2", telescope="SYNTHETIC-ARRAY")
    cdelt = 7.8125e6
    crval = frequency_of(v_sys, rest_ghz) * 1e9 - 50.6 * cdelt
    add_spectral_axis(header, "FREQ", crval, cdelt, "Hz", rest_ghz * 1e9)
    header["BUNIT"] = "Jy/beam"
    header["CASAMBM"] = (True, "one restoring beam per channel (BEAMS table)")
    freq_ghz = channel_values(crval, cdelt, shape[0]) / 1e9
    vel = radio_velocity(freq_ghz, rest_ghz)

    # Beams: a smooth trend across the band plus two channels with a much larger beam, as
    # when a few channels lose long baselines to flagging.
    n = shape[0]
    ramp = np.linspace(-1, 1, n)
    bmaj = 0.78 + 0.06 * ramp + 0.015 * np.sin(np.arange(n) / 7.0)
    bmin = 0.62 + 0.04 * ramp
    bpa = 57.0 + 4.0 * ramp
    for k in (37, 38):
        bmaj[k], bmin[k] = bmaj[k] * 1.3, bmin[k] * 1.25
    bmaj, bmin, bpa = np.round(bmaj, 4), np.round(bmin, 4), np.round(bpa, 3)

    centre_px = (32.3, 31.6)
    horns = [  # a compact rotating ring: its two halves give a double-horned spectrum
        {"offset": 0.25, "velocity": v_sys + 95.0, "sigma": 45.0, "flux": 7.0},
        {"offset": -0.25, "velocity": v_sys - 95.0, "sigma": 45.0, "flux": 7.0},
    ]
    ring_pa, source_fwhm = 40.0, 0.5
    cont_flux, cont_alpha = 5.0e-3, -0.7

    ny, nx = shape[1:]
    y, x = np.mgrid[0:ny, 0:nx].astype(float)
    east, north = -(x - centre_px[0]) * pixel, (y - centre_px[1]) * pixel
    pa = np.deg2rad(ring_pa)
    sky = np.zeros(shape)
    for horn in horns:
        he, hn = horn["offset"] * np.sin(pa), horn["offset"] * np.cos(pa)
        shape2d = gaussian(np.hypot(east - he, north - hn), 0, source_fwhm / FWHM_PER_SIGMA)
        shape2d /= shape2d.sum()
        profile = horn["flux"] * gaussian(vel, horn["velocity"], horn["sigma"]) / (np.sqrt(2 * np.pi) * horn["sigma"])
        sky += profile[:, None, None] * shape2d[None]
    kernels = [beam_kernel(bmaj[k], bmin[k], bpa[k], pixel) for k in range(n)]
    cube = convolve_planes(sky, kernels)
    cont_spec = cont_flux * (freq_ghz / freq_ghz.mean()) ** cont_alpha
    for k in range(n):
        cube[k] += cont_spec[k] * beam_image(shape[1:], *centre_px, bmaj[k], bmin[k], bpa[k], pixel)
    cube += beam_noise(rng, shape, kernels, rms)
    cube[:blank_low] = np.nan
    cube[n - blank_high:] = np.nan

    cols = [
        fits.Column(name="BMAJ", format="1E", unit="arcsec", array=bmaj),
        fits.Column(name="BMIN", format="1E", unit="arcsec", array=bmin),
        fits.Column(name="BPA", format="1E", unit="deg", array=bpa),
        fits.Column(name="CHAN", format="1J", array=np.arange(n)),
        fits.Column(name="POL", format="1J", array=np.zeros(n, int)),
    ]
    table = fits.BinTableHDU.from_columns(cols, name="BEAMS")
    table.header["NCHAN"] = n
    table.header["NPOL"] = 1
    write_fits(out / f"{name}.fits", cube, header, [table])

    total = sum(h["flux"] for h in horns)
    mean_v = sum(h["flux"] * h["velocity"] for h in horns) / total
    ra, dec = sky_position(header, *centre_px)
    truth = common_entry(name, header, rms, "Jy/beam", {
        "name": "Quillwort-N2", "kind": "nucleus of a nearby galaxy (compact rotating ring)",
        "ra": quantity(ra, "deg", 10), "dec": quantity(dec, "deg", 10)})
    truth.update({
        "z": 0.0,
        "beams": {"major": quantity(bmaj, "arcsec", 6), "minor": quantity(bmin, "arcsec", 6),
                  "pa": quantity(bpa, "deg", 6),
                  "note": "one per channel, as in the BEAMS table; channels 37 and 38 have larger beams"},
        "blanked_channels": [*range(blank_low), *range(n - blank_high, n)],
        "lines": [{
            **line_info,
            "velocity": quantity(mean_v, "km/s"),
            "observed_frequency": quantity(frequency_of(mean_v, rest_ghz), "GHz", 10),
            "flux": quantity(total, "Jy km/s"),
            "components": [{"velocity": quantity(h["velocity"], "km/s"), "dispersion": quantity(h["sigma"], "km/s"),
                            "flux": quantity(h["flux"], "Jy km/s"),
                            "peak": quantity(h["flux"] / (np.sqrt(2 * np.pi) * h["sigma"]), "Jy", 5),
                            "offset": quantity(h["offset"], "arcsec")} for h in horns],
            "components_note": "two Gaussian sources of FWHM source_fwhm, offset along ring_pa from the centre",
            "ring_pa": quantity(ring_pa, "deg"), "source_fwhm": quantity(source_fwhm, "arcsec"),
        }],
        "continuum": {
            "kind": "point source at the centre",
            "centre_pixel": {"x": centre_px[0], "y": centre_px[1], "origin": "0-based (numpy) pixel"},
            "flux_density": quantity(cont_flux, "Jy"), "at_frequency": quantity(freq_ghz.mean(), "GHz", 10),
            "spectral_index": cont_alpha,
            "law": "S(nu) = flux_density * (nu / at_frequency) ** spectral_index",
        },
    })
    write_sidecar(out / f"{name}.json", truth)


DEMO_NAMES = ("disk", *LENSED_WINDOWS, "single_dish", "varying_beams")


def make_all(out=HERE):
    """Write every demo cube and its sidecar into ``out``; return the list of FITS paths."""
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    make_disk(out)
    for name in LENSED_WINDOWS:
        make_lensed(out, name)
    make_single_dish(out)
    make_varying_beams(out)
    return [out / f"{name}.fits" for name in DEMO_NAMES]


def main(argv=None):
    parser = argparse.ArgumentParser(description="Write cubeloupe's synthetic demo cubes and their sidecars.")
    parser.add_argument("--out", type=Path, default=HERE, help="output folder (default: beside this script)")
    args = parser.parse_args(argv)
    for path in make_all(args.out):
        print(f"wrote {path} ({path.stat().st_size / 1e6:.2f} MB)")


if __name__ == "__main__":
    main()
