"""Write the example notebooks from the cell texts below, so that changes are reviewed as code.

Run ``python example_notebooks/build_notebooks.py``; it rewrites
``quick_look.ipynb``, ``high_z_lines.ipynb`` and ``first_session.ipynb``
beside this script, without outputs. ``tests/test_notebooks.py`` runs each
of them top to bottom.

All data are the synthetic demo cubes of an invented scenario (the Quillwort
survey); see ``demo_cubes/make_demo_cubes.py``.
"""

from pathlib import Path

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

HERE = Path(__file__).resolve().parent


def md(text):
    return new_markdown_cell(text.strip("\n"))


def code(text):
    return new_code_cell(text.strip("\n"))


# ------------------------------------------------------------------------------------------------
QUICK_LOOK = [
    md("""
# Quick look after a delivery

A cube has just arrived. Before spending a day on it, five questions are worth five minutes:
is the file what was asked for (axes, channels, beam)? How noisy is it, channel by channel?
Is there continuum left in a cube that should be line-only? Where are the lines? And what do
the moment maps look like?

This notebook walks through that loop on **Quillwort-D7**, an invented nearby disk galaxy
observed in CO(2-1) (a synthetic demo cube). To look at your own data, replace
`demo_path("disk")` with the path of your FITS file; nothing else needs to change.

*These are quick-look numbers. Final science needs calibrated, primary-beam-corrected
products and the observatory's guidance.*
"""),
    code("""
import astropy.units as u
import matplotlib.pyplot as plt
import numpy as np
from regions import CirclePixelRegion, PixCoord

from cubeloupe.analysis import (
    channel_noise, demo_path, find_line, fit_baseline, leftover_continuum, lines_in_band,
    measure_line, moment_maps, open_cube, region_spectrum,
)
from cubeloupe.analysis.check import check_cube
from cubeloupe.analysis.export import write_maps, write_spectra

kms = u.km / u.s
path = demo_path("disk")          # or "my_cube.fits"
cube = open_cube(path)            # read-only and memory-mapped: the file is never changed
cube
"""),
    md("""
## 1. The header: axes, channels, beam

`check_cube` runs the whole delivery check; its header part says what the file holds and warns
about things that often go wrong (an undersampled beam, blanked channels, odd units).
"""),
    code("""
report = check_cube(cube, z=0.0)
h = report.header
print(f"shape {h.shape} (channels, y, x), unit {h.unit}, frame {h.spectral_frame}")
print(f"band {h.band[0]:.4f} to {h.band[1]:.4f}; channel width {h.channel_width_frequency:.4g} "
      f"= {abs(h.channel_width_velocity):.3g}")
print(f"beam {h.beam_major:.2f} x {h.beam_minor:.2f} at PA {h.beam_pa:.0f}; "
      f"{h.pixels_per_beam:.1f} pixels across its minor axis")
for warning in h.warnings:
    print("warning:", warning)
"""),
    md("""
## 2. Noise per channel, and leftover continuum

A robust rms per channel (from the median absolute deviation, so bright emission barely moves
it) shows bad or flagged channels at a glance. The leftover-continuum map is the mean of each
pixel over the line-free channels: in a continuum-subtracted cube it should be noise.
"""),
    code("""
rms = channel_noise(cube)
frequency = cube.spectral_axis.to(u.GHz)
continuum = leftover_continuum(cube)

fig, (left, right) = plt.subplots(1, 2, figsize=(11, 3.6))
left.plot(frequency.value, rms.to_value(u.mJy / u.beam), drawstyle="steps-mid")
left.set(xlabel="observed frequency (GHz)", ylabel="rms (mJy/beam)", title="noise per channel")
image = right.imshow(continuum.mean.to_value(u.mJy / u.beam), origin="lower", cmap="magma")
right.contour(continuum.significance.value, levels=[5, 10, 20], colors="white", linewidths=0.8)
right.set(title="leftover continuum (contours: 5, 10, 20 sigma)", xlabel="x (pixel)", ylabel="y (pixel)")
fig.colorbar(image, ax=right, label="mJy/beam")
plt.tight_layout()
summary = report.continuum
print(f"median rms {np.median(rms).to(u.mJy / u.beam):.2f}; leftover continuum peaks at "
      f"{summary.peak.to(u.mJy / u.beam):.2f} ({summary.peak_significance:.0f} sigma) at pixel (y, x) "
      f"{summary.peak_position}")
"""),
    md("""
This cube still holds continuum: a point source at the centre of the galaxy. Line fluxes then
need a baseline, fitted on line-free channels, or the continuum is counted as line.

## 3. Where are the lines?

The delivery check looks for channels where the brightest pixel stands out from the noise, and
lists catalog lines expected in the band. For a nearby galaxy, z is small: about its systemic
velocity over the speed of light.
"""),
    code("""
for feature in report.lines.features:
    print(f"emission around {feature.frequency:.4f}, peak S/N {feature.peak_snr:.1f}")

z_guess = (1460 * kms / (299792.458 * kms)).value
expected = lines_in_band(*h.band, z=z_guess)
expected["name", "rest_frequency", "observed_frequency"]
"""),
    md("""
## 4. A region spectrum, its baseline and the line flux

The flux density of a region in a Jy/beam cube is the sum of its pixels divided by the beam
area in pixels. Velocities are measured from CO(2-1)'s rest frequency; the line-free ranges lie
either side of the line.
"""),
    code("""
co21 = find_line("CO J=2-1")["rest_frequency"]
centre = PixCoord(35, 37)
spectrum = region_spectrum(cube, CirclePixelRegion(centre, radius=30))
line_free = [(1160, 1240), (1690, 1790)] * kms
window = (1245, 1685) * kms

baseline = fit_baseline(spectrum, line_free, order=1, rest_frequency=co21)
line = measure_line(spectrum, window, line_free=line_free, order=1, rest_frequency=co21)
print(f"flux {line.flux:.2f} +/- {line.flux_error:.2f}, S/N {line.snr:.0f}")
print(f"centroid {line.centroid:.1f}, FWHM of a Gaussian fit {line.fwhm:.0f} +/- {line.fwhm_error:.0f}")
print(f"rms of the line-free channels {baseline.rms.to(u.mJy):.1f}")

v = spectrum.with_spectral_unit(kms, velocity_convention="radio", rest_value=co21).spectral_axis
fig, ax = plt.subplots(figsize=(9, 3.4))
ax.plot(v.value, spectrum.quantity.to_value(u.mJy), drawstyle="steps-mid", label="region spectrum")
ax.plot(v.value, baseline.model.quantity.to_value(u.mJy), label="baseline (order 1)")
for lo, hi in line_free.value:
    ax.axvspan(lo, hi, color="0.85", zorder=0)
ax.axvspan(*window.value, color="tab:green", alpha=0.1, zorder=0)
ax.set(xlabel="radio velocity (km/s)", ylabel="flux density (mJy)")
ax.legend();
"""),
    md("""
## 5. Moment maps

Moment 0 is the integrated intensity, moment 1 the intensity-weighted velocity, moment 2 the
velocity dispersion. A baseline is fitted in every pixel on the same line-free ranges; `clip=3`
keeps only channels brighter than 3 times each pixel's rms for moments 1 and 2.
"""),
    code("""
maps = moment_maps(cube, window, line_free=line_free, order=1, rest_frequency=co21, clip=3)
strong = maps.m0.value > 5 * maps.m0_error.value

fig, axes = plt.subplots(1, 3, figsize=(13, 3.8))
panels = [(maps.m0.value, "moment 0 (Jy/beam km/s)", "viridis"),
          (np.where(strong, maps.m1.value, np.nan), "moment 1 (km/s)", "RdBu_r"),
          (np.where(strong, maps.m2.value, np.nan), "moment 2 (km/s)", "magma")]
for ax, (data, title, cmap) in zip(axes, panels):
    fig.colorbar(ax.imshow(data, origin="lower", cmap=cmap), ax=ax)
    ax.set_title(title)
plt.tight_layout()
"""),
    md("""
The velocity field is the tilted "spider" pattern of a rotating disk: red on the receding side,
blue on the approaching side. Moments 1 and 2 are shown only where moment 0 exceeds 5 times its
uncertainty.

## 6. The same, interactively

`Loupe` shows the cube, its spectra, the line catalog and the moment maps side by side; every
number it shows comes from the functions used above. Draw a region on the sky to get its
spectrum, mark line-free ranges and a line window on the spectrum, then make moment maps.

The demo's record of what was put into the cube (`demo_truth`) gives the frame: z = 0, CO(2-1)
as the line, and the disk's systemic velocity, which moves the catalog's line markers onto the
emission. Velocities are then the same as in section 4. For your own cube, pass your source's
values (or leave them out and set them in the suite).
"""),
    code("""
from cubeloupe.analysis import demo_truth
from cubeloupe.widgets import Loupe

truth = demo_truth("disk")
loupe = Loupe(path, z=truth["z"], rest_frequency=truth["lines"][0]["rest_frequency"],
              velocity_offset=truth["disk"]["systemic_velocity"])
loupe
"""),
    md("""
## 7. Export

Moment maps go to FITS (with sky coordinates, beam and units), spectra to a text table. Files
are written next to this notebook; `overwrite=True` replaces an earlier export.
"""),
    code("""
print(write_maps({"moment0": maps.m0, "moment1": maps.m1, "moment2": maps.m2, "moment0_error": maps.m0_error},
                 "quillwort_d7_moments.fits", overwrite=True))
print(write_spectra({"disk": spectrum}, "quillwort_d7_spectrum.ecsv", overwrite=True))
"""),
]


# ------------------------------------------------------------------------------------------------
HIGH_Z = [
    md("""
# Line identification at high redshift, and what several lines say together

A dusty galaxy behind a foreground galaxy, **Quillwort-L1** (invented), was observed in eight
spectral windows of one delivery. The windows have different channel widths and pixel grids. We
know neither the redshift nor which lines we see. This notebook finds the lines, solves for the
redshift, measures the fluxes, turns them into line luminosities (correcting for the lensing
magnification) and puts the CO and water lines on population diagrams.

*Quick-look numbers: final fluxes need calibrated, primary-beam-corrected products.*
"""),
    code("""
import astropy.units as u
import matplotlib.pyplot as plt
import numpy as np
from astropy.coordinates import SkyCoord
from astropy.table import QTable

from cubeloupe.analysis import (
    demo_names, demo_path, demo_truth, find_line, fit_baseline, line_luminosity, lines_in_band, measure_line,
    open_cube, population_diagram, population_figure, redshift_candidates, redshift_summary, region_spectrum,
    velocity,
)
from cubeloupe.analysis.check import check_cube

kms = u.km / u.s
names = [name for name in demo_names() if name.startswith("lensed_")]
paths = [demo_path(name) for name in names]
cubes = [open_cube(p) for p in paths]
for p, cube in zip(paths, cubes):
    band = cube.spectral_axis.to(u.GHz)
    print(f"{p.name}: {band.min():.3f} to {band.max():.3f}, {cube.shape[0]} channels of "
          f"{abs(band[1] - band[0]).to(u.MHz):.2f}, beam {cube.beam.major.to(u.arcsec):.2f}")
"""),
    md("""
## 1. A ring-shaped aperture

Lensing stretches the galaxy into a ring around the foreground galaxy. An aperture that follows
the ring collects the line flux with much less noise than the whole image. It is defined on the
sky, so the same ring is used on every pixel grid.
"""),
    code("""
def ring_mask(cube, centre, inner, outer):
    \"\"\"Pixels whose centre lies between ``inner`` and ``outer`` from ``centre`` on the sky.\"\"\"
    dec, ra = cube.spatial_coordinate_map
    separation = SkyCoord(ra, dec).separation(centre)
    return np.asarray((separation >= inner) & (separation <= outer))


centre = SkyCoord(cubes[0].wcs.celestial.wcs.crval[0], cubes[0].wcs.celestial.wcs.crval[1], unit="deg")
masks = [ring_mask(cube, centre, 0.5 * u.arcsec, 1.6 * u.arcsec) for cube in cubes]

fig, axes = plt.subplots(2, 4, figsize=(14, 7))
for ax, cube, mask, name in zip(axes.flat, cubes, masks, names):
    ax.imshow(np.nansum(cube.unmasked_data[:].value, axis=0), origin="lower", cmap="inferno")
    ax.contour(mask, levels=[0.5], colors="cyan")
    ax.set_title(name)
spectra = [region_spectrum(cube, mask) for cube, mask in zip(cubes, masks)]
"""),
    md("""
## 2. Find the lines and solve for the redshift

The delivery check flags channels where emission stands out; two or more lines, in any
window, are enough for the redshift solver to try every catalog pair.
"""),
    code("""
peaks = []
for name, cube in zip(names, cubes):
    for feature in check_cube(cube).lines.features:
        print(f"{name}: line near {feature.frequency:.3f} (peak S/N {feature.peak_snr:.1f})")
        peaks.append(feature.frequency.to_value(u.GHz))

candidates = redshift_candidates(peaks * u.GHz)
for c in candidates[:3]:
    print(f"z = {c.z:.4f} +/- {c.z_uncertainty:.4f}: {c.lines}, rms residual {c.rms_residual:.0f}")
z = candidates[0].z
identified = {name for name in candidates[0].lines if name is not None}
"""),
    md("""
## 3. The line overlay

At that redshift, the catalog says where each identified line falls. Grey bands mark the
channels kept free of them (more than 650 km/s away), where the baseline is fitted. The
continuum rises with frequency, as dust emission does.
"""),
    code("""
fig, axes = plt.subplots(2, 4, figsize=(18, 7.5))
in_band, line_free = [], []
for ax, spectrum, name in zip(axes.flat, spectra, names):
    freq = spectrum.spectral_axis.to(u.GHz)
    lines = lines_in_band(freq.min(), freq.max(), z=z)
    lines = lines[np.isin(lines["name"], sorted(identified))]
    in_band.append(lines)
    free = np.ones(freq.size, bool)
    for rest in lines["rest_frequency"]:
        free &= np.abs(velocity(freq, rest, z)) > 650 * kms
    edges = np.flatnonzero(np.diff(np.r_[0, free.astype(int), 0]))
    ranges = [(freq[a].value, freq[b - 1].value) for a, b in zip(edges[::2], edges[1::2])] * u.GHz
    line_free.append(ranges)
    baseline = fit_baseline(spectrum, ranges, order=1)
    ax.plot(freq.value, spectrum.quantity.to_value(u.mJy), drawstyle="steps-mid", color="0.2")
    ax.plot(freq.value, baseline.model.quantity.to_value(u.mJy), color="tab:orange", label="baseline")
    for lo, hi in ranges.value:
        ax.axvspan(lo, hi, color="0.9", zorder=0)
    for row in lines:
        ax.axvline(row["observed_frequency"].value, color="tab:blue", ls=":")
        ax.text(row["observed_frequency"].value, ax.get_ylim()[1], row["name"], rotation=90,
                va="top", ha="right", fontsize=8)
    ax.set(title=name, xlabel="observed frequency (GHz)", ylabel="flux density (mJy)")
plt.tight_layout()
"""),
    md("""
## 4. Fluxes and line luminosities

Each identified line is measured over +/- 550 km/s of its redshifted frequency, after the baseline. The
lensing magnification comes from a lens model, which is outside this tool; for this invented
system the model gives the value recorded with the demo cubes.
"""),
    code("""
magnification = demo_truth(names[0])["lens"]["magnification"]
print(f"z = {z:.4f}; lensing magnification mu = {magnification:.1f} (from the lens model)")
summary = redshift_summary(z)
print(f"luminosity distance {summary.luminosity_distance:.0f}, {summary.angular_scale:.2f}, "
      f"age of the universe then {summary.age:.2f} ({summary.cosmology})")

rows = []
for spectrum, lines, ranges in zip(spectra, in_band, line_free):
    for row in lines:
        measured = measure_line(spectrum, (-550, 550) * kms, line_free=ranges,
                                rest_frequency=row["rest_frequency"], z=z)
        lum = line_luminosity(measured.flux, z, row["rest_frequency"], magnification=magnification)
        rows.append({"line": row["name"], "flux": measured.flux, "flux_error": measured.flux_error,
                     "l_prime": lum.l_prime})
        print(f"{row['name']:<16} {measured.flux:.2f} +/- {measured.flux_error:.2f} (S/N {measured.snr:.0f}); "
              f"L' = {lum.l_prime:.2e} after dividing by mu")
measured_lines = QTable(rows=rows)
"""),
    md("""
## 5. Population diagrams: CO and water together

In local thermodynamic equilibrium, with optically thin lines, the number of molecules in a
line's upper level follows from its flux, N_u = 4 pi D_L^2 (S dv) / ((1 + z) c h A_ul mu), and
ln(N_u / g_u) falls on a straight line against the upper level's energy with slope -1/T
(Goldsmith & Langer 1999, ApJ 517, 209). `population_diagram` fits that line by weighted least
squares, with the errors of T and of the number of molecules from the fit's covariance. Ortho and
para water are two spin species, each counted from its own lowest level: `spin="joint"` fits one
temperature for both and their ratio. The measurement table above is a valid input (names are
catalog names); the fluxes are in Jy km/s, so z and the magnification give molecule counts and
masses.
"""),
    code("""
species_of = np.array([str(find_line(name)["species"]) for name in measured_lines["line"]])
co = population_diagram(measured_lines[species_of == "CO"], z=z, magnification=magnification)
water = population_diagram(measured_lines[species_of == "H2O"], z=z, magnification=magnification, spin="joint")
for fit in (co, water):
    print(f"{fit.species}: T = {fit.temperature:.1f} +/- {fit.temperature_error:.1f}, "
          f"{fit.total_number:.2e} +/- {fit.total_number_error:.1e} molecules, mass {fit.mass:.2e}")
print(f"water ortho/para = {water.ortho_para_ratio:.2f} +/- {water.ortho_para_ratio_error:.2f}")
population_figure([co, water])
"""),
    md("""
The demo was made from a recorded LTE model; the fits recover its temperatures and water's
ortho-to-para ratio within their errors. The ring aperture misses some of the flux (the demo's
record says how much), so the molecule counts come out a little low.
"""),
    code("""
model = demo_truth(names[0])["lte_model"]["species"]
share = demo_truth(names[0])["ring_aperture"]["line_fraction"]
for fit in (co, water):
    truth = model[fit.species]
    print(f"{fit.species}: T {fit.temperature:.1f} (model {truth['temperature']:.0f}); molecules / aperture share "
          f"{fit.total_number / share:.2e} (model {truth['total_number']:.2e})")
print(f"ortho/para {water.ortho_para_ratio:.2f} (model {model['H2O']['ortho_para_ratio']})")
"""),
    md("""
## 6. All windows in the interactive suite

`Loupe` takes the list of windows; the catalog overlay follows `z`, and the magnification is
divided out of the luminosities in its measurement table. These windows lie far apart, so the
spectrum spans the window shown on the sky ("Sky shows" switches it); "Spectrum spans: all windows"
puts them on one axis.
"""),
    code("""
from cubeloupe.widgets import Loupe

loupe = Loupe(paths, z=z, rest_frequency=find_line("CO J=7-6")["rest_frequency"])
loupe.magnification = magnification
loupe
"""),
    md("""
The suite's **Population diagram** tab does the same from the measurement table: measure a line
(its name under "Velocity zero", the line window dragged on the spectrum), tick it, move on to
the next line and tick that one too; the diagram, the fitted temperature, molecule count, mass and
ortho/para ratio follow, and "Draw the LTE prediction over the spectra" draws the model's
spectrum, with sliders for the temperature and the amount.
"""),
]


# ------------------------------------------------------------------------------------------------
FIRST_SESSION = [
    md("""
# Your first session with a line cube

Welcome to the group. This notebook teaches the handful of ideas you need to look at a
spectral-line cube, using cubeloupe on a realistic (but invented) observation: CO(2-1) emission
from **Quillwort-D7**, a nearby spiral galaxy. Each section shows one idea and ends with a short
task. Change the code and run the cell again: nothing here can damage the data, because the cube
is opened read-only.
"""),
    code("""
import astropy.units as u
import matplotlib.pyplot as plt
import numpy as np
from matplotlib.patches import Ellipse

from cubeloupe.analysis import (
    demo_path, find_line, fit_baseline, moment_maps, open_cube, region_spectrum,
)

kms = u.km / u.s
cube = open_cube(demo_path("disk"))
co21 = find_line("CO J=2-1")["rest_frequency"]
velocity_cube = cube.with_spectral_unit(kms, velocity_convention="radio", rest_value=co21)
print(cube.shape, cube.unit)
"""),
    md("""
## A cube is a stack of images, one per channel

The three numbers above are (channels, y, x). Each **channel** is an image of the sky at one
narrow range of frequency. Because of the Doppler effect, frequency tells us the velocity of the
gas along the line of sight: gas moving away is seen at lower frequency. Here the channels are
converted to radio velocities.
"""),
    code("""
channel = 30
image = velocity_cube[channel].value
plt.imshow(image, origin="lower", cmap="viridis")
plt.colorbar(label=str(cube.unit))
plt.title(f"channel {channel}: {velocity_cube.spectral_axis[channel]:.0f}");
"""),
    md("""
**Task.** Change `channel` to 50 and then to 70. Which side of the galaxy is moving away from
us? At which channel does the emission sit right on the centre?

## The beam: the smallest detail the telescope can see

Every point of the sky is blurred into an ellipse, the **beam**, described by the header's
BMAJ, BMIN and BPA. The units Jy/beam mean "flux density per beam area". A source smaller than
the beam looks exactly like the beam. The galaxy's nucleus also emits continuum: in a channel
without line emission it is the only thing left.
"""),
    code("""
beam = cube.beam
pixel = abs(cube.wcs.wcs.cdelt[1]) * u.deg
plane = velocity_cube[2].value   # a channel with no line emission
fig, ax = plt.subplots()
ax.imshow(plane, origin="lower", cmap="gray")
ax.add_patch(Ellipse((6, 6), (beam.minor / pixel).decompose().value, (beam.major / pixel).decompose().value,
                     angle=beam.pa.to_value(u.deg), edgecolor="yellow", facecolor="none", lw=2))
ax.set_title(f"beam {beam.major.to(u.arcsec):.1f} x {beam.minor.to(u.arcsec):.1f} (yellow, bottom left)");
"""),
    md("""
**Task.** Compare the size of the bright nucleus with the beam ellipse. Is the nucleus resolved?

## A spectrum, and why it needs a baseline

Adding up the pixels of a region, channel by channel, gives its **spectrum**. The line is the
bump; the level it sits on is continuum (and, in real data, small calibration errors). A
**baseline** is a low-order polynomial fitted only to the *line-free* channels and subtracted.
"""),
    code("""
centre = np.zeros(cube.shape[1:], bool)
centre[34:40, 33:39] = True                  # a small box on the nucleus
spectrum = region_spectrum(cube, centre)
line_free = [(1160, 1240), (1690, 1790)] * kms
fit = fit_baseline(spectrum, line_free, order=1, rest_frequency=co21)

v = velocity_cube.spectral_axis
plt.plot(v.value, spectrum.quantity.to_value(u.mJy), drawstyle="steps-mid", label="spectrum")
plt.plot(v.value, fit.model.quantity.to_value(u.mJy), label=f"baseline, order {fit.order}")
plt.plot(v.value, fit.subtracted.quantity.to_value(u.mJy), drawstyle="steps-mid", alpha=0.6, label="after subtraction")
plt.axhline(0, color="0.5", lw=0.5)
plt.xlabel("velocity (km/s)"); plt.ylabel("flux density (mJy)"); plt.legend()
print(f"rms of the line-free channels after the baseline: {fit.rms.to(u.mJy):.2f}")
"""),
    md("""
**Task.** Set `order=0` and then `order=3`. Does the rms change much? Now make a line-free
range overlap the line, e.g. `(1160, 1400)`: what happens to the subtracted spectrum? That is
why line-free ranges are chosen with care.

## Moment maps: a whole cube in three pictures

Collapsing the cube over the line gives **moment maps**: moment 0, the total line emission;
moment 1, the mean velocity (the rotation of the disk); moment 2, the spread of velocities.
"""),
    code("""
maps = moment_maps(cube, (1245, 1685) * kms, line_free=line_free, rest_frequency=co21, clip=3)
good = maps.m0.value > 5 * maps.m0_error.value
fig, axes = plt.subplots(1, 3, figsize=(13, 3.8))
for ax, data, title, cmap in zip(axes, [maps.m0.value, maps.m1.value, maps.m2.value],
                                 ["moment 0", "moment 1 (km/s)", "moment 2 (km/s)"],
                                 ["viridis", "RdBu_r", "magma"]):
    fig.colorbar(ax.imshow(np.where(good | (ax is axes[0]), data, np.nan), origin="lower", cmap=cmap), ax=ax)
    ax.set_title(title)
plt.tight_layout()
"""),
    md("""
**Task.** Remove `clip=3` and run again. Which map gets noisier, and why? Then narrow the window
to `(1400, 1520) * kms`: which parts of the galaxy disappear from moment 0?

## Now with the interactive suite

`Loupe` puts all of this in one place: the sky (channel or moment map), the spectrum of any
region you draw, the line catalog, baselines, moment maps and a measurement table. Everything
can also be set from code, which makes a session easy to repeat.
"""),
    code("""
from cubeloupe.widgets import Loupe

loupe = Loupe(demo_path("disk"), rest_frequency=co21)
loupe.channel = 30
loupe
"""),
    md("""
**Tasks.**
1. Move through the channels and watch the emission sweep across the disk.
2. Draw a region on the sky and look at its spectrum.
3. Mark line-free ranges either side of the line and a window over it; compare the flux in the
   measurement table with the one from `measure_line` in the quick-look notebook.
4. Make the moment maps and show moment 1 on the sky.
5. From code: `loupe.line_free = [[229.61, 229.64], [229.17, 229.20]]` sets line-free ranges in
   observed GHz; read `loupe.measurements` afterwards.
"""),
    md("""
## The code of what you clicked

Every step in the suite can be written out as a script: open the **Code** tab under the views,
or ask for it with `loupe.to_code()`. The cell below does what a few clicks would do (a box
drawn on the nucleus, line-free ranges and a line window marked on the spectrum, moment maps
made), then prints the script of that session. Read it: it is the analysis you did, in the
functions used above, with the box exactly as drawn and its sky position beside it.
"""),
    code("""
from regions import PixCoord, RectanglePixelRegion

loupe.add_region(RectanglePixelRegion(PixCoord(35.5, 36.5), width=8, height=8), name="nucleus")  # a drawn box
loupe.line_free = [[229.61, 229.64], [229.17, 229.20]]   # dragged on the spectrum, observed GHz
loupe.line_window = [229.25, 229.57]
loupe.make_moments(wait=True)                             # the 'Make moment maps' button
print(loupe.to_code())
"""),
    md("""
A session can also be saved to a small JSON file and opened again later, with the same cubes,
regions, ranges and settings (`loupe.code_view.to_new_cell()` would put the script above into
a new cell of this notebook instead).
"""),
    code("""
import tempfile
from pathlib import Path

path = loupe.save_session(Path(tempfile.mkdtemp()) / "first.cubeloupe.json")
again = Loupe.from_session(path)
print(path.read_text()[:400], "...")
print("same measurements:", [row["flux"] for row in again.measurements] == [row["flux"] for row in loupe.measurements])
"""),
    md("""
**Task.** Draw a second region in the suite, open the Code tab and find it in the script. Run
the script in a new cell: does it give the same measurement table?
"""),
]


NOTEBOOKS = {
    "quick_look.ipynb": QUICK_LOOK,
    "high_z_lines.ipynb": HIGH_Z,
    "first_session.ipynb": FIRST_SESSION,
}


def build(folder=HERE):
    """Write every notebook into ``folder``; return their paths."""
    paths = []
    for name, cells in NOTEBOOKS.items():
        notebook = new_notebook(cells=cells)
        for index, cell in enumerate(notebook.cells):
            cell.id = f"{Path(name).stem}-{index:02d}"   # stable ids keep rebuilds diff-free
        notebook.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
        notebook.metadata["language_info"] = {"name": "python"}
        path = Path(folder) / name
        nbformat.write(notebook, path)
        paths.append(path)
    return paths


if __name__ == "__main__":
    for written in build():
        print(f"wrote {written}")
