"""One line measured in every region and spectral window: a table of fluxes, widths and luminosities.

A suite of region spectra over several spectral windows asks the same
question of each spectrum: is the line window inside this spectrum's band,
and which of the line-free ranges are? `measurement_table` answers it and
runs `measure_line` (and, for a source at z > 0 with a flux in Jy km/s,
`line_luminosity`) on each spectrum, so that a script and the suite give
the same rows.

The table's columns ``line``, ``flux`` and ``flux_error`` are the names the
excitation analysis reads.

Examples
--------
>>> import astropy.units as u
>>> from regions import CirclePixelRegion, PixCoord
>>> from cubeloupe.analysis import demo_path, open_cube, region_spectrum
>>> cube = open_cube(demo_path("disk"))
>>> spec = region_spectrum(cube, CirclePixelRegion(PixCoord(35.5, 35.5), radius=20))
>>> co21 = 230.538 * u.GHz
>>> table = measurement_table({"disk": [spec]}, (1250, 1680) * u.km / u.s,
...                           line_free=[(1165, 1230), (1700, 1785)] * u.km / u.s,
...                           rest_frequency=co21, line="CO J=2-1")
>>> table["region"].tolist(), table["flux"].unit
(['disk'], Unit("Jy km / s"))
"""

import astropy.units as u
import numpy as np
from astropy.table import QTable

from .lines import measure_line
from .luminosity import get_cosmology, in_hubble_flow, line_luminosity
from .spectral import check_convention, check_redshift

__all__ = ["measurement_table", "MEASUREMENT_COLUMNS"]

#: Columns of `measurement_table`, in order.
MEASUREMENT_COLUMNS = ("region", "window", "line", "flux", "flux_error", "centroid", "centroid_error",
                       "fwhm", "fwhm_error", "snr", "l_prime", "l_prime_error")

_KMS = u.km / u.s
_L_PRIME_UNIT = u.K * _KMS * u.pc**2


def _band(spectrum):
    """The observed-frequency band [GHz] of a spectrum (channel centres)."""
    f = spectrum.spectral_axis
    if not f.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
        return None
    f = f.to_value(u.GHz, equivalencies=u.spectral())
    return float(np.min(f)), float(np.max(f))


def _overlapping(ranges, band):
    """The ranges (GHz, shape (n, 2)) that overlap ``band``; all of them when the band is unknown."""
    if band is None:
        return ranges
    lo, hi = band
    return [r for r in ranges if max(r) >= lo and min(r) <= hi]


def _as_ghz_ranges(ranges):
    """A (n, 2) list of frequency ranges [GHz] for frequency Quantities, or None for other units."""
    q = u.Quantity(ranges)
    if not q.unit.is_equivalent(u.GHz, equivalencies=u.spectral()):
        return None
    return [tuple(r) for r in np.atleast_2d(q.to_value(u.GHz, equivalencies=u.spectral()))]


def measurement_table(spectra, window, *, line_free=None, order=1, rest_frequency=None, z=0.0,
                      convention="radio", line=None, cosmology=None, magnification=1.0):
    """Measure one line in every spectrum whose band holds the line window.

    Parameters
    ----------
    spectra : dict of str to list of OneDSpectrum or None
        For each region name, its spectrum in each spectral window (``None``
        where the region has none). The list index is the window number.
    window : Quantity, shape (2,)
        The line window, in any spectral unit (see `measure_line`).
    line_free : Quantity, shape (n, 2), optional
        Line-free ranges; for frequency ranges, each spectrum uses those that
        overlap its own band.
    order : int
        Baseline polynomial order.
    rest_frequency, z, convention
        The line's rest frequency, the source redshift and the velocity
        convention, as in `measure_line`.
    line : str, optional
        The line's name for the ``line`` column (a catalog name such as
        ``"CO J=2-1"``); by default its rest frequency, or ``"line"``.
    cosmology : str or astropy.cosmology.Cosmology, optional
        For L'_line at z > 0 (Planck18 by default; see `get_cosmology`).
    magnification : float
        Lensing magnification the luminosities are divided by.

    Returns
    -------
    QTable
        One row per region and window, columns `MEASUREMENT_COLUMNS`; flux
        and its error in the spectra's flux unit times km/s (or times the
        spectral unit), centroid and widths in km/s, L'_line in K km/s pc2
        (NaN where not defined: z below the Hubble flow (`in_hubble_flow`),
        no rest frequency, or a flux not in Jy km/s). ``meta`` records every parameter.

    Raises
    ------
    CubeloupeError
        As `measure_line` raises it for a spectrum.
    """
    z = check_redshift(z)
    convention = check_convention(convention)
    cosmology_name = getattr(get_cosmology(cosmology), "name", None) or str(cosmology)
    window_ghz = _as_ghz_ranges(window)
    free_ghz = None if line_free is None else _as_ghz_ranges(line_free)
    if line is None:
        line = f"{rest_frequency.to_value(u.GHz):.4f} GHz" if rest_frequency is not None else "line"
    rows = []
    for region, per_window in spectra.items():
        for index, spectrum in enumerate(per_window):
            if spectrum is None:
                continue
            band = _band(spectrum)
            if window_ghz is not None and not _overlapping(window_ghz, band):
                continue
            free = line_free
            if free_ghz is not None:
                kept = _overlapping(free_ghz, band)
                free = u.Quantity(kept, u.GHz) if kept else None
            m = measure_line(spectrum, window, line_free=free, order=order, rest_frequency=rest_frequency,
                             z=z, convention=convention)
            l_prime = l_prime_error = np.nan * _L_PRIME_UNIT
            # L'_line needs a distance from the Hubble flow: not for local (e.g. Galactic) velocities.
            if in_hubble_flow(z) and rest_frequency is not None and m.flux.unit.is_equivalent(u.Jy * _KMS):
                l_prime = line_luminosity(m.flux, z, rest_frequency, cosmology=cosmology,
                                          magnification=magnification).l_prime
                l_prime_error = line_luminosity(m.flux_error, z, rest_frequency, cosmology=cosmology,
                                                magnification=magnification).l_prime
            rows.append((str(region), index, str(line), m.flux, m.flux_error, m.centroid.to(_KMS),
                         m.centroid_error.to(_KMS), m.fwhm.to(_KMS), m.fwhm_error.to(_KMS), float(m.snr),
                         l_prime.to(_L_PRIME_UNIT), l_prime_error.to(_L_PRIME_UNIT)))
    meta = {"window": [list(r) for r in np.atleast_2d(u.Quantity(window).value)],
            "window_unit": u.Quantity(window).unit.to_string(),
            "order": int(order), "z": z, "convention": convention,
            "rest_frequency_GHz": None if rest_frequency is None else float(rest_frequency.to_value(u.GHz)),
            "cosmology": cosmology_name, "magnification": float(magnification)}
    if line_free is not None:
        meta["line_free"] = [list(r) for r in np.atleast_2d(u.Quantity(line_free).value)]
        meta["line_free_unit"] = u.Quantity(line_free).unit.to_string()
    if not rows:
        table = QTable(names=MEASUREMENT_COLUMNS,
                       dtype=(str, int, str, float, float, float, float, float, float, float, float, float))
        table.meta.update(meta)
        return table
    columns = list(zip(*rows))
    table = QTable(meta=meta)
    for name, values in zip(MEASUREMENT_COLUMNS, columns):
        first = values[0]
        if isinstance(first, u.Quantity):
            table[name] = u.Quantity(list(values), first.unit)
        else:
            table[name] = list(values)
    return table
