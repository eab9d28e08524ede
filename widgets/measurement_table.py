"""MeasurementTable: line measurements per region and spectral window, with L'_line, exportable as ECSV.

Rows are filled from `cubeloupe.analysis.measure_line` and
`cubeloupe.analysis.measurement_table` (see `rows_from_table`);
the widget only formats them. Line fits (`FitPanel`, #18) are shown under
the table and exported as extra columns (see `fit_columns`).
"""

import html

import astropy.units as u
import ipywidgets as w
import numpy as np
from astropy.table import QTable
from traitlets import Bool, Float, List, TraitError, Unicode, validate

from cubeloupe.analysis import get_cosmology, unit_text, write_table

__all__ = ["MeasurementTable", "COLUMNS", "fit_columns"]

_KMS = u.km / u.s

# Column -> heading shown; the unit follows in brackets where the column has one.
COLUMNS = {
    "region": "Region",
    "window": "Window",
    "line": "Line",
    "flux": "Flux",
    "flux_error": "± Flux",
    "centroid": "Centroid",
    "fwhm": "FWHM",
    "snr": "S/N",
    "l_prime": "L'_line",
    "l_prime_error": "± L'_line",
}


def rows_from_table(table):
    """The table's rows as dicts of plain values (units in the column names' conventions) for display."""
    rows = []
    for r in table:
        rows.append({
            "region": str(r["region"]),
            "window": int(r["window"]),
            "line": str(r["line"]),
            "flux": float(r["flux"].value),
            "flux_error": float(r["flux_error"].value),
            "flux_unit": r["flux"].unit.to_string(),
            "centroid": float(r["centroid"].to_value(_KMS)),
            "fwhm": float(r["fwhm"].to_value(_KMS)),
            "snr": float(r["snr"]),
            "l_prime": float(r["l_prime"].to_value(u.K * _KMS * u.pc**2)),
            "l_prime_error": float(r["l_prime_error"].to_value(u.K * _KMS * u.pc**2)),
        })
    return rows


_FIT_QUANTITIES = ("amplitude", "center", "fwhm", "flux")


def _column(values, unit):
    """A Quantity column in ``unit`` (NaN where a value is missing or in another unit)."""
    out = []
    for v in values:
        try:
            out.append(np.nan if v is None else u.Quantity(v).to_value(unit))
        except u.UnitsError:
            out.append(np.nan)
    return u.Quantity(out, unit)


def fit_columns(table, label, fits):
    """Add line-fit columns to a measurement table (in place), one row per region and window.

    Columns ``fit_model`` (the fit in words, 'none' on rows without one), ``fit_reduced_chi2``,
    ``fit<k>_<quantity>`` and ``fit<k>_<quantity>_error`` for component k = 1.. and quantity
    amplitude, center, fwhm, flux (Quantity columns, NaN where absent), and for hyperfine fits
    ``fit_optical_depth``, ``fit_excitation_temperature`` and their errors. ``fits`` maps
    (region, window) to `cubeloupe.analysis.GaussianFit`.
    """
    keys = [(str(r["region"]), int(r["window"])) for r in table]
    found = [fits.get(key) for key in keys]
    if not any(f is not None for f in found):
        return table
    table["fit_model"] = [label if f is not None else "none" for f in found]
    table["fit_reduced_chi2"] = [f.reduced_chi2 if f is not None else np.nan for f in found]
    n = max(len(f.components) for f in found if f is not None)
    reference = next(f for f in found if f is not None).components[0]
    for k in range(n):
        comps = [f.components[k] if f is not None and k < len(f.components) else None for f in found]
        for q in _FIT_QUANTITIES:
            unit = getattr(reference, q).unit
            table[f"fit{k + 1}_{q}"] = _column([getattr(c, q, None) for c in comps], unit)
            table[f"fit{k + 1}_{q}_error"] = _column([getattr(c, q + "_error", None) for c in comps], unit)
    solutions = [None if f is None else f.hyperfine for f in found]
    if any(s is not None for s in solutions):
        table["fit_optical_depth"] = [s.optical_depth if s is not None else np.nan for s in solutions]
        table["fit_optical_depth_error"] = [s.optical_depth_error if s is not None else np.nan for s in solutions]
        table["fit_excitation_temperature"] = _column([getattr(s, "excitation_temperature", None)
                                                       for s in solutions], u.K)
        table["fit_excitation_temperature_error"] = _column([getattr(s, "excitation_temperature_error", None)
                                                             for s in solutions], u.K)
    return table


class MeasurementTable(w.VBox):
    """A table of line measurements, with the cosmology and magnification used for L'_line.

    Attributes
    ----------
    rows : list of dict
        One dict per region, window and line (see `rows_from_table`).
    cosmology : str
        Name of the astropy cosmology used for luminosities.
    magnification : float
        Lensing magnification the luminosities are divided by.
    """

    rows = List(help="Measurements, one dict per region, window and line (read-only)")
    show_window = Bool(False, help="Show the spectral-window column (on for a suite of several windows)")
    cosmology = Unicode("Planck18", help="Name of the astropy cosmology used for L'_line (e.g. 'Planck18', 'WMAP9')")
    magnification = Float(1.0, help="Lensing magnification; luminosities are divided by it")

    def __init__(self, **kwargs):
        self._source = None
        self._fit_label, self._fits = "", {}
        self._table = w.HTML()
        self._table.add_class("cubeloupe-measurement-table")
        self.cosmology_choice = w.Dropdown(options=["Planck18", "Planck15", "WMAP9", "WMAP7"], value="Planck18",
                                           description="Cosmology",
                                           tooltip="Cosmological model used to turn fluxes into "
                                                               "luminosities (distances depend on it)",
                                           layout=w.Layout(width="210px"))
        w.link((self.cosmology_choice, "value"), (self, "cosmology"))
        self.magnification_input = w.BoundedFloatText(value=1.0, min=0.001, max=1e4, description="Magnification μ",
                                                      tooltip="If the source is gravitationally "
                                                                          "lensed, how much brighter it appears; "
                                                                          "1 for no lensing",
                                                      style={"description_width": "initial"},
                                                      layout=w.Layout(width="200px"))
        w.link((self.magnification_input, "value"), (self, "magnification"))
        self._note = w.HTML()
        super().__init__(children=[w.HBox([self.cosmology_choice, self.magnification_input]), self._table,
                                   self._note], **kwargs)
        self.add_class("cubeloupe-measurements")
        self._render()
        self.observe(lambda _: self._render(), names=["rows", "show_window"])

    @validate("magnification")
    def _valid_mu(self, proposal):
        if not proposal["value"] > 0:
            raise TraitError(f"magnification must be > 0; got {proposal['value']}")
        return float(proposal["value"])

    @validate("cosmology")
    def _valid_cosmology(self, proposal):
        try:
            get_cosmology(proposal["value"])
        except Exception as exc:  # the luminosity module raises its own error for unknown names
            raise TraitError(str(exc)) from None
        return proposal["value"]

    def add_part(self, widget):
        """Show ``widget`` (e.g. the line-fit panel) under the table."""
        self.children = (*self.children, widget)

    def set_fits(self, label, fits):
        """Line fits to export with the rows: ``fits`` maps (region, window) to a GaussianFit (see `fit_columns`)."""
        self._fit_label, self._fits = label, dict(fits)

    def set_table(self, table):
        """Show a `cubeloupe.analysis.measurement_table` result (rows are derived from it)."""
        self._source = table
        self.rows = rows_from_table(table) if table is not None else []

    def table(self, meta=None):
        """The measurements as the analysis layer made them: an astropy QTable with units and its metadata.

        ``meta`` (a dict) is added to the table's metadata, e.g. how the measurements were made.
        """
        table = QTable() if self._source is None else self._source.copy()
        if self._source is not None and self._fits:
            fit_columns(table, self._fit_label, self._fits)
        table.meta["cosmology"] = self.cosmology
        table.meta["magnification"] = self.magnification
        if meta:
            table.meta.update(meta)
        return table

    def export_ecsv(self, path, overwrite=False, meta=None):
        """Write the table as ECSV (metadata included); refuses to replace a file unless ``overwrite``."""
        return write_table(self.table(meta), path, overwrite=overwrite)

    def _render(self):
        if not self.rows:
            self._table.value = ("<span style='color:#7b8794'>No measurements yet: add a region and drag the line "
                                 "window on the spectrum.</span>")
            self._note.value = ""
            return
        units = {"flux": unit_text(self.rows[0]["flux_unit"]), "flux_error": unit_text(self.rows[0]["flux_unit"]),
                 "centroid": "km/s", "fwhm": "km/s", "l_prime": "K km/s pc²", "l_prime_error": "K km/s pc²"}
        keys = [k for k in COLUMNS if k != "window" or self.show_window]
        head = "".join(f"<th style='padding:2px 8px;text-align:right'>{html.escape(COLUMNS[k])}"
                       + (f"<br><span style='font-weight:400'>({html.escape(units[k])})</span>" if k in units else "")
                       + "</th>" for k in keys)
        body = []
        for r in self.rows:
            cells = []
            for key in keys:
                v = r[key]
                if key in ("flux", "flux_error"):
                    text = f"{v:.4g}" if key == "flux" else f"{v:.2g}"
                elif key in ("l_prime", "l_prime_error"):
                    text = "—" if not np.isfinite(v) else f"{v:.3e}"
                elif key == "snr":
                    text = f"{v:.1f}"
                elif isinstance(v, float):
                    text = f"{v:.1f}" if np.isfinite(v) else "—"
                else:
                    text = html.escape(str(v))
                cells.append(f"<td style='padding:2px 8px;text-align:right'>{text}</td>")
            body.append("<tr>" + "".join(cells) + "</tr>")
        self._table.value = (f"<table style='border-collapse:collapse;font-size:90%'><tr>{head}</tr>"
                             + "".join(body) + "</table>")
        if any(np.isfinite(r["l_prime"]) for r in self.rows):
            self._note.value = (f"<span style='color:#52606d'>L'_line with {html.escape(self.cosmology)} and "
                                f"magnification μ = {self.magnification:g} (divided out).</span>")
        else:
            self._note.value = ("<span style='color:#52606d'>No L'_line: it needs a redshift in the Hubble flow "
                                "(cz above 1000 km/s), a line chosen and a flux in Jy km/s.</span>")
