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
``lensed_spw1``, ``lensed_spw2``
    Quillwort-L1, a dusty galaxy at z = 3.0421 strongly lensed into a ring by
    a foreground galaxy (singular isothermal sphere), seen in two spectral
    windows of one delivery with different channel widths and pixel grids:
    CO(7-6) and [CI] 3P2-3P1 in the first, ortho-H2O 3_12-3_03 and
    para-H2O 1_11-0_00 in the second; dust continuum rising with frequency.
``single_dish``
    Quillwort-C4, a Galactic molecular cloud mapped in CO(1-0) by a single
    dish: main-beam brightness temperature in K, VRAD axis in m/s, a
    degenerate Stokes axis (4-D file).
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
astropy only. The same numpy and astropy versions give the same bytes.
"""

import argparse
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
    ("CO", "J=7-6"): 806.6518060,
    ("[CI]", "3P2-3P1"): 809.3419700,
    ("H2O", "3_12-3_03"): 1097.3647910,
    ("H2O", "1_11-0_00"): 1113.3429640,
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
# (b) the lensed galaxy in two spectral windows

LENS = {
    "z_source": 3.0421,
    "z_lens": 0.61,
    "phase_centre": (34.81250, -5.27125),                  # RA, Dec in deg
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

LENSED_WINDOWS = {
    "lensed_spw1": {
        "pixel": 0.075, "crpix": (33.0, 33.0), "beam": (0.46, 0.38, 32.0), "rms": 0.12e-3,
        "n_channels": 100, "crval": 198.93e9, "cdelt": 19.53125e6,
        "lines": [("CO", "J=7-6", 3.8, 120.0), ("[CI]", "3P2-3P1", 2.3, 115.0)],
    },
    "lensed_spw2": {
        "pixel": 0.06, "crpix": (32.5, 32.5), "beam": (0.34, 0.29, 38.0), "rms": 0.10e-3,
        "n_channels": 100, "crval": 276.44e9, "cdelt": -60.0e6,
        "lines": [("H2O", "3_12-3_03", 3.0, 105.0), ("H2O", "1_11-0_00", 2.2, 105.0)],
    },
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


def make_lensed(out, name):
    spw = LENSED_WINDOWS[name]
    rng = rng_for(name)
    z = LENS["z_source"]
    shape = (spw["n_channels"], 64, 64)
    pixel = spw["pixel"]
    bmaj, bmin, bpa = spw["beam"]
    header = base_header(shape, pixel=pixel, ra=LENS["phase_centre"][0], dec=LENS["phase_centre"][1],
                         crpix=spw["crpix"], obj="Quillwort-L1", telescope="SYNTHETIC-ARRAY")
    first_rest = rest_frequency(*spw["lines"][0][:2])
    add_spectral_axis(header, "FREQ", spw["crval"], spw["cdelt"], "Hz", first_rest * 1e9 / (1 + z))
    add_beam(header, bmaj, bmin, bpa)
    header["BUNIT"] = "Jy/beam"
    header["SPECSYS"] = "BARYCENT"
    freq_ghz = channel_values(spw["crval"], spw["cdelt"], shape[0]) / 1e9

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
    sub_area = (pixel / sub) ** 2
    # Lensing keeps surface brightness, so the magnification is the ratio of image to source areas
    # weighted by brightness: sum over the image grid / integral of the source (2 pi sigma^2).
    mu_gas = gas.sum() * sub_area / (2 * np.pi * (LENS["gas_fwhm"] / FWHM_PER_SIGMA) ** 2)
    mu_dust = dust.sum() * sub_area / (2 * np.pi * (LENS["dust_fwhm"] / FWHM_PER_SIGMA) ** 2)

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
    for species, transition, flux, sigma_v in spw["lines"]:
        rest_ghz, line_info = line_entry(species, transition)
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
            "flux": quantity(flux, "Jy km/s"),
            "intrinsic_flux": quantity(flux / mu_gas, "Jy km/s", 5),
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
        "delivery": {"windows": list(LENSED_WINDOWS), "note": "two spectral windows of one delivery"},
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
    header = base_header(shape, pixel=pixel, ra=83.94750, dec=-3.81500, crpix=(32.5, 32.5),
                         projection="SFL", obj="Quillwort-C4", telescope="SYNTHETIC-DISH")
    add_spectral_axis(header, "VRAD", -4000.0, 250.0, "m/s", rest_ghz * 1e9)
    add_beam(header, beam, beam, 0.0)
    header["BUNIT"] = "K"
    header["COMMENT"] = "Main-beam brightness temperature (Rayleigh-Jeans), synthetic data."
    vel = channel_values(-4.0, 0.25, shape[0])            # km/s

    ny, nx = shape[1:]
    y, x = np.mgrid[0:ny, 0:nx].astype(float)
    # A filament with a velocity gradient along it, and a dense core at another velocity.
    fil = {"centre_pixel": (30.0, 34.0), "pa": 60.0, "length_fwhm": 330.0, "width_fwhm": 75.0,
           "peak": 5.5, "v_centre": 7.2, "gradient": 0.9, "sigma": 0.85}
    core = {"centre_pixel": (42.0, 23.0), "fwhm": 60.0, "peak": 9.0, "v_centre": 11.6, "sigma": 0.55}
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


DEMO_NAMES = ("disk", "lensed_spw1", "lensed_spw2", "single_dish", "varying_beams")


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
