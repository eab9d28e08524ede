"""Solve a source's redshift from the observed frequencies of its line peaks.

Each pairing of one peak with one catalog line fixes a trial redshift,
``1 + z = nu_rest / f_obs``. At that redshift every other peak is matched to
the catalog line nearest to ``f_obs (1 + z)``; a match counts if it lies
within ``tolerance`` (a velocity). Each distinct set of identifications is a
candidate; its redshift is the weighted mean of ``nu_rest / f_obs - 1`` over
the identified peaks. Candidates are ranked by the number of peaks
identified, then by the scatter of the per-peak redshifts (in velocity), then
by the summed upper-level energies (lower-lying lines are usually brighter).

Examples
--------
>>> import astropy.units as u
>>> peaks = [115.2712018 / 3.5, 230.538 / 3.5, 492.160651 / 3.5] * u.GHz
>>> best = redshift_candidates(peaks)[0]
>>> round(best.z, 6), best.lines
(2.5, ('CO J=1-0', 'CO J=2-1', '[CI] 3P1-3P0'))
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np

from .catalog import collapse_hyperfine, select_lines
from .errors import RedshiftError, UnitMismatchError
from .spectral import SPEED_OF_LIGHT, Z_MAX, check_redshift

__all__ = ["RedshiftCandidate", "redshift_candidates"]

_C_KMS = SPEED_OF_LIGHT.value

#: Line families searched by default: the lines bright enough to be the peaks a redshift is found from
#: (common practice); pass ``family=None`` to search the whole catalog (complex organics, recombination
#: lines and shock tracers would otherwise match almost any pair of peaks).
REDSHIFT_FAMILIES = ("CO and isotopologues", "dense gas", "water and hydrides", "atoms and ions")
#: Species searched by default within those families: the main isotopologues whose lines are the
#: bright peaks of extragalactic spectra (common practice); ``species=`` chooses others.
REDSHIFT_SPECIES = ("CO", "13CO", "C18O", "HCN", "HNC", "HCO+", "CS", "N2H+", "H2O", "CH+", "OH+", "H2O+", "HF",
                    "[CI]", "[CII]", "[NII]", "[OI]", "[OIII]")
#: Upper-level energy cap of the default search: higher lines are rarely the peaks seen first.
REDSHIFT_MAX_E_UP = 500 * u.K
_KMS = u.km / u.s


@dataclass(frozen=True)
class RedshiftCandidate:
    """One consistent identification of observed peaks with catalog lines.

    Attributes
    ----------
    z : float
        Redshift from the identified peaks.
    z_uncertainty : float
        One-sigma uncertainty of ``z``: the peak-position uncertainty
        propagated through the weighted mean, scaled up by sqrt(reduced
        chi^2) when the per-peak redshifts scatter more than that.
    peak_frequencies : Quantity [GHz]
        The observed peaks, in the order given.
    lines : tuple of str or None
        Catalog name of the line identified with each peak (None: unidentified).
    rest_frequencies : Quantity [GHz]
        Rest frequency of each identified line (NaN for unidentified peaks).
    residuals : Quantity [km/s]
        Velocity of each peak relative to its line at ``z`` (radio
        convention; NaN for unidentified peaks).
    n_identified : int
        Number of peaks identified.
    unique : bool
        False if this candidate rests on a single identified peak, so any
        line could explain it; such a redshift is a guess, not a solution.
    """

    z: float
    z_uncertainty: float
    peak_frequencies: u.Quantity
    lines: tuple
    rest_frequencies: u.Quantity
    residuals: u.Quantity
    n_identified: int
    unique: bool

    @property
    def rms_residual(self):
        """Root-mean-square of the identified peaks' velocity residuals."""
        r = self.residuals.to_value(_KMS)
        return np.sqrt(np.nanmean(r**2)) * _KMS

    @property
    def identifications(self):
        """Mapping of each identified peak frequency [GHz] to its line name."""
        return {float(f): name for f, name in zip(self.peak_frequencies.to_value(u.GHz), self.lines)
                if name is not None}


def _check_peaks(peak_frequencies):
    if not isinstance(peak_frequencies, u.Quantity):
        raise UnitMismatchError(
            "peak_frequencies must be a Quantity with a frequency unit, e.g. [230.1, 345.2] * u.GHz; "
            f"got {peak_frequencies!r}"
        )
    try:
        peaks = np.atleast_1d(peak_frequencies.to_value(u.GHz, equivalencies=u.spectral())).astype(float)
    except u.UnitConversionError:
        raise UnitMismatchError(
            f"peak_frequencies must be frequencies (or wavelengths); got {peak_frequencies.unit}"
        ) from None
    if peaks.ndim != 1 or peaks.size == 0:
        raise RedshiftError(f"give one or more peak frequencies as a 1-D Quantity; got shape {peaks.shape}")
    if not np.all(np.isfinite(peaks)) or np.any(peaks <= 0):
        raise RedshiftError(f"peak frequencies must be finite and positive; got {peak_frequencies}")
    if np.unique(peaks).size != peaks.size:
        raise RedshiftError(f"the same peak frequency is given twice ({peak_frequencies}); give each peak once")
    return peaks


def _check_velocity(value, argname, n=None):
    if not isinstance(value, u.Quantity) or not value.unit.is_equivalent(_KMS):
        raise UnitMismatchError(f"{argname} must be a velocity Quantity, e.g. {argname}=100*u.km/u.s; got {value!r}")
    v = np.abs(np.asarray(value.to_value(_KMS), dtype=float))
    if not np.all(np.isfinite(v)) or np.any(v == 0):
        raise RedshiftError(f"{argname} must be finite and > 0; got {value}")
    if n is not None:
        if v.ndim == 0:
            v = np.full(n, float(v))
        elif v.shape != (n,):
            raise RedshiftError(f"{argname} needs one value or one per peak ({n}); got shape {v.shape}")
    return v


def redshift_candidates(peak_frequencies, catalog=None, *, tolerance=150 * _KMS,
                        peak_uncertainty=None, z_range=(-0.01, Z_MAX), species=None,
                        spin_isomer=None, max_E_up=REDSHIFT_MAX_E_UP, max_candidates=10, family=REDSHIFT_FAMILIES):
    """Rank redshifts and line identifications consistent with observed peaks.

    Parameters
    ----------
    peak_frequencies : Quantity [frequency], shape (n,)
        Observed peak (line centre) frequencies.
    catalog : Table, optional
        From `load_catalog`; the bundled catalog by default.
    tolerance : Quantity [velocity]
        Largest velocity offset between a peak and its line at the trial z.
    peak_uncertainty : Quantity [velocity], scalar or shape (n,), optional
        One-sigma uncertainty of each peak's position; ``tolerance / 3`` by default.
    z_range : (float, float)
        Redshifts searched.
    species, spin_isomer, max_E_up
        Restrict the candidate lines, as in `select_lines`.
    max_candidates : int
        How many candidates to return at most.

    Returns
    -------
    list of RedshiftCandidate
        Best first. With two or more peaks, only candidates identifying at
        least two of them are returned (possibly none). With a single peak
        every line that puts it in ``z_range`` is a candidate (lowest E_up
        first, up to ``max_candidates``), each marked ``unique=False``.

    Raises
    ------
    UnitMismatchError
        Peaks without a frequency unit, or a tolerance that is not a velocity.
    RedshiftError
        No peaks, repeated or non-positive peaks, or a bad ``z_range``.

    Examples
    --------
    >>> import astropy.units as u
    >>> only = redshift_candidates([230.538 / 2] * u.GHz)
    >>> len(only) > 1, only[0].unique
    (True, False)
    """
    peaks = _check_peaks(peak_frequencies)
    n = peaks.size
    tol = float(_check_velocity(tolerance, "tolerance"))
    sigma = (_check_velocity(peak_uncertainty, "peak_uncertainty", n) if peak_uncertainty is not None
             else np.full(n, tol / 3))
    try:
        z_lo, z_hi = (check_redshift(v, argname="z_range") for v in z_range)
    except (TypeError, ValueError) as exc:
        raise RedshiftError(f"z_range must be (z_min, z_max) with -1 < z_min < z_max <= {Z_MAX:g}; {exc}") from None
    if z_lo >= z_hi:
        raise RedshiftError(f"z_range {tuple(z_range)} must have z_min < z_max")
    if int(max_candidates) < 1:
        raise RedshiftError(f"max_candidates must be >= 1; got {max_candidates}")

    if species is None and family == REDSHIFT_FAMILIES:
        present = set(np.asarray((catalog if catalog is not None else select_lines())["species"]))
        species = [name for name in REDSHIFT_SPECIES if name in present] or None
    chosen = select_lines(catalog, species=species, spin_isomer=spin_isomer, max_E_up=max_E_up, family=family)
    if "hyperfine_group" in chosen.colnames:
        # A hyperfine group is one peak at a redshift-finding resolution: one candidate line, not several.
        chosen = collapse_hyperfine(chosen)
    nu = u.Quantity(chosen["rest_frequency"], u.GHz).value
    names = np.asarray(chosen["name"])
    e_up = np.nan_to_num(np.asarray(chosen["E_up"], dtype=float), nan=1e4)
    order = np.argsort(nu)
    nu, names, e_up = nu[order], names[order], e_up[order]
    if nu.size == 0:
        return []

    # Trial redshifts: every (anchor peak, line) pairing inside z_range.
    anchor_peak, anchor_line = np.nonzero(np.ones((n, nu.size), dtype=bool))
    one_plus_z = nu[anchor_line] / peaks[anchor_peak]
    keep = (one_plus_z - 1 >= z_lo) & (one_plus_z - 1 <= z_hi)
    anchor_peak, anchor_line, one_plus_z = anchor_peak[keep], anchor_line[keep], one_plus_z[keep]
    if one_plus_z.size == 0:
        return []

    # Nearest catalog line to every peak at every trial z, and its offset.
    wanted = peaks[None, :] * one_plus_z[:, None]
    right = np.clip(np.searchsorted(nu, wanted), 1, nu.size - 1) if nu.size > 1 else np.zeros_like(wanted, int)
    left = right - 1 if nu.size > 1 else right
    pick = np.where(np.abs(nu[left] - wanted) <= np.abs(nu[right] - wanted), left, right)
    offset = _C_KMS * (wanted / nu[pick] - 1)  # radio-like offset of the peak from the line
    matched = np.abs(offset) <= tol
    assign = np.where(matched, pick, -1)
    assign[np.arange(assign.shape[0]), anchor_peak] = anchor_line
    # A line cannot explain two peaks: keep only the closer of any pair.
    for i in range(n):
        for j in range(i + 1, n):
            clash = (assign[:, i] == assign[:, j]) & (assign[:, i] >= 0)
            if clash.any():
                worse = np.where(np.abs(offset[:, i]) > np.abs(offset[:, j]), i, j)
                assign[clash, worse[clash]] = -1

    n_id = (assign >= 0).sum(axis=1)
    keep = n_id >= min(2, n)
    assign, n_id = assign[keep], n_id[keep]
    if assign.size == 0:
        return []
    # Distinct identification sets. Packing each row into one integer is much
    # faster than np.unique(axis=0), which sorts a structured view.
    if (nu.size + 1) ** n < 2**62:
        keys = ((assign + 1) * (nu.size + 1) ** np.arange(n)).sum(axis=1)
        _, first = np.unique(keys, return_index=True)
    else:
        _, first = np.unique(assign, axis=0, return_index=True)
    assign, n_id = assign[first], n_id[first]

    # Weighted mean of (1 + z) over identified peaks; weights from the peak
    # uncertainties, sigma(1 + z_i) = (1 + z_i) sigma_v / c.
    ok = assign >= 0
    rest = np.where(ok, nu[np.maximum(assign, 0)], np.nan)
    opz_i = rest / peaks[None, :]
    w = np.where(ok, 1.0 / (opz_i * sigma[None, :] / _C_KMS) ** 2, 0.0)
    opz = np.nansum(w * np.nan_to_num(opz_i), axis=1) / w.sum(axis=1)
    chi2 = np.nansum(w * (np.nan_to_num(opz_i) - opz[:, None]) ** 2 * ok, axis=1)
    dof = np.maximum(n_id - 1, 1)
    z_err = np.sqrt(1.0 / w.sum(axis=1)) * np.sqrt(np.maximum(1.0, chi2 / dof))
    # Radio velocity of each peak from its line redshifted to z: c (1 - f (1+z) / nu).
    residual = _C_KMS * (1 - opz[:, None] / opz_i)
    rms = np.sqrt(np.nanmean(np.where(ok, residual, np.nan) ** 2, axis=1))
    energy = np.where(ok, e_up[np.maximum(assign, 0)], 0.0).sum(axis=1)
    z_all = opz - 1
    inside = (z_all >= z_lo) & (z_all <= z_hi)

    ranked = np.lexsort((energy, rms, -n_id))
    ranked = ranked[inside[ranked]][: int(max_candidates)]
    peak_quantity = u.Quantity(peaks, u.GHz)
    out = []
    for k in ranked:
        out.append(RedshiftCandidate(
            z=float(z_all[k]),
            z_uncertainty=float(z_err[k]),
            peak_frequencies=peak_quantity,
            lines=tuple(str(names[a]) if a >= 0 else None for a in assign[k]),
            rest_frequencies=u.Quantity(rest[k], u.GHz),
            residuals=u.Quantity(np.where(ok[k], residual[k], np.nan), _KMS),
            n_identified=int(n_id[k]),
            unique=bool(n_id[k] >= 2),
        ))
    return out
