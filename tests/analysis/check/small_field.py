"""A small single-dish map whose line fills the field (issue 13), built in code for several test files."""

import numpy as np

from cubefactory import C_KMS, frequency_axis_hz, write_cube

# N2H+ J=1-0 F1,F=2,3-1,2 at 93.1737637 GHz (CDMS catalogue, Mueller et al. 2005, as in the bundled
# catalog); its hyperfine groups lie about +8 and -7 km/s away (common practice).
N2HP = 93.1737637e9
NOISE = 0.044  # K, the true noise of the map described in issue 13
PEAK = 2.2     # K: a 50-sigma main line


def small_field_cube(path, rng, *, ny=20, nx=5, nchan=1000, edge=3.0, rest=N2HP):
    """A few x 20 pixels, 1000 channels of 0.07 km/s in K; the line fills the field, the edge rows are noisier."""
    cdelt = -rest * 0.07 / C_KMS
    freq = frequency_axis_hz(nchan, rest, cdelt, crpix3=nchan / 2)
    v = C_KMS * (rest - freq) / rest
    y, x = np.mgrid[0:ny, 0:nx]
    fill = 0.6 + 0.4 * np.exp(-0.5 * ((y - ny * 0.45) ** 2 / 30 + (x - nx / 2) ** 2 / 8))
    profile = (PEAK * np.exp(-0.5 * v**2) + 0.6 * np.exp(-0.5 * ((v - 8.0) / 0.6) ** 2)
               + 0.45 * np.exp(-0.5 * ((v + 7.0) / 0.6) ** 2))
    data = rng.normal(0, NOISE, (nchan, ny, nx))
    data[:, 0, :] *= edge
    data[:, -1, :] *= edge
    data += profile[:, None, None] * fill[None]
    return write_cube(path, data, crval3=rest, cdelt3=cdelt, crpix3=nchan / 2, restfrq=rest, bunit="K",
                      beam=(28.0, 28.0, 0.0), pixel=9.0), v
