"""MeasurementTable: line measurements per region and spectral window, with L'_line, exportable as ECSV.

Rows are filled from `cubeloupe.analysis.measure_line` and
`cubeloupe.analysis.measurement_table` (see `rows_from_table`);
the widget only formats them.
"""

import html

import astropy.units as u
import ipywidgets as w
import numpy as np
from astropy.table import Table
from traitlets import Float, List, TraitError, Unicode, validate

from cubeloupe.analysis import get_cosmology, write_table

__all__ = ["MeasurementTable", "COLUMNS"]

_KMS = u.km / u.s

# Column -> (heading shown, unit string written to ECSV)
COLUMNS = {
    "region": ("Region", None),
    "window": ("Window", None),
    "line": ("Line", None),
    "flux": ("Flux", None),
    "flux_error": ("± error", None),
    "centroid": ("Centroid (km/s)", "km / s"),
    "fwhm": ("FWHM (km/s)", "km / s"),
    "snr": ("S/N", None),
    "l_prime": ("L'_line (K km/s pc²)", "K km / (pc2 s)"),
    "l_prime_error": ("± error", "K km / (pc2 s)"),
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
    cosmology = Unicode("Planck18", help="Name of the astropy cosmology used for L'_line (e.g. 'Planck18', 'WMAP9')")
    magnification = Float(1.0, help="Lensing magnification; luminosities are divided by it")

    def __init__(self, **kwargs):
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
        self.observe(lambda _: self._render(), names=["rows"])

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

    def table(self):
        """The rows as an astropy Table with units (for export or further work)."""
        if not self.rows:
            return Table()
        flux_unit = u.Unit(self.rows[0]["flux_unit"])
        columns = {}
        for key, (_, unit) in COLUMNS.items():
            values = [r[key] for r in self.rows]
            if key in ("flux", "flux_error"):
                columns[key] = u.Quantity([u.Quantity(v, r["flux_unit"]).to_value(flux_unit)
                                           for v, r in zip(values, self.rows)], flux_unit)
            elif unit:
                columns[key] = u.Quantity(values, u.Unit(unit))
            else:
                columns[key] = values
        table = Table(columns)
        table.meta["cosmology"] = self.cosmology
        table.meta["magnification"] = self.magnification
        return table

    def export_ecsv(self, path, overwrite=False):
        """Write the table as ECSV; refuses to replace a file unless ``overwrite``."""
        return write_table(self.table(), path, overwrite=overwrite)

    def _render(self):
        if not self.rows:
            self._table.value = ("<span style='color:#7b8794'>No measurements yet: add a region and drag the line "
                                 "window on the spectrum.</span>")
            self._note.value = ""
            return
        head = "".join(f"<th style='padding:2px 8px;text-align:right'>{html.escape(h)}</th>"
                       for h, _ in COLUMNS.values())
        body = []
        for r in self.rows:
            cells = []
            for key in COLUMNS:
                v = r[key]
                if key in ("flux", "flux_error"):
                    text = f"{v:.4g} {r['flux_unit']}" if key == "flux" else f"{v:.2g}"
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
        self._note.value = (f"<span style='color:#52606d'>L'_line with {html.escape(self.cosmology)} and "
                            f"magnification μ = {self.magnification:g} (divided out).</span>")
