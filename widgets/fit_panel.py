"""FitPanel: Gaussian or hyperfine fits of each region's line, next to the moment-based measurements.

The moment-based numbers (`measurement_table`) stay the suite's default; a
fit is chosen here: one to three Gaussian components, or a hyperfine group of
the catalog with a component in the band (e.g. N2H+ J=1-0), whose components
are tied by their relative intensities. Each region's spectrum in each window
holding the line window (the spectrum as drawn, so smoothed if a smoothing
is chosen) is fitted by `cubeloupe.analysis.fit_gaussians` in the line
window after the baseline on the line-free ranges. The panel shows per
component the peak, centre, FWHM and integrated flux with their errors and
the reduced chi2 (and, for a hyperfine group, the total optical depth and the
excitation temperature); the spectrum view draws the fitted model and the
residuals; the fits go into the measurement table's ECSV export.
"""

import html

import astropy.units as u
import ipywidgets as w
import numpy as np
from traitlets import List, Unicode, observe

from cubeloupe.analysis import CubeloupeError, display_axis, fit_gaussians, lines_in_band, unit_text

from ._look import row
from .status import StatusLine

__all__ = ["FitPanel", "GAUSSIAN_MODELS", "hyperfine_groups_in_band"]

_KMS = u.km / u.s

#: Gaussian models offered: value -> label.
GAUSSIAN_MODELS = {"none": "none (moments only)", "1": "1 Gaussian", "2": "2 Gaussians", "3": "3 Gaussians"}
_HYPERFINE = "hyperfine: "


def hyperfine_groups_in_band(band, z, catalog):
    """Names of the catalog's hyperfine groups with a component in ``band`` (observed GHz) at redshift ``z``."""
    if band is None or catalog is None or "hyperfine_group" not in catalog.colnames:
        return []
    rows = lines_in_band(band[0] * u.GHz, band[1] * u.GHz, z, catalog)
    return sorted({str(g) for g in rows["hyperfine_group"] if str(g)})


def _pm(value, error):
    """``value ± error`` with the error to two significant digits and the value to the same decimal."""
    if not np.isfinite(value):
        return "—"
    if not np.isfinite(error) or error <= 0:
        return f"{value:.4g}"
    decimals = max(0, 1 - int(np.floor(np.log10(error))))
    return f"{value:.{decimals}f} ± {error:.{decimals}f}"


class FitPanel(w.VBox):
    """The choice of a line fit and its results, shown in the suite's measurement tab.

    Parameters
    ----------
    loupe : Loupe
        The suite: its line window, line-free ranges, baseline order, frame and
        the spectra its spectrum view draws are fitted; the panel adds itself
        under the measurement table and refits whenever the measurements change.

    Attributes
    ----------
    model : str
        'none', '1', '2', '3' (Gaussian components) or 'hyperfine: <group>'.
    rows : list of dict
        One per fitted component (read-only): region, window, component and the
        fitted numbers with their errors and units.
    results : dict
        ``(region, window) -> GaussianFit`` of the last fits.
    """

    model = Unicode("none", help="The fit: 'none', '1'-'3' Gaussian components, or 'hyperfine: <group>'")
    rows = List(help="Fitted components, one dict each (read-only)")

    def __init__(self, loupe, **kwargs):
        self.loupe = loupe
        self.results = {}
        self.status = StatusLine()
        self.model_choice = w.Dropdown(description="Line fit", style={"description_width": "initial"},
                                       tooltip="Fit Gaussians (or a hyperfine group tied by its catalog "
                                               "intensities) to each region's line, after the baseline; the "
                                               "moment-based numbers above stay as they are",
                                       layout=w.Layout(width="300px"))
        self.model_choice.add_class("cubeloupe-fit-model")
        self._table = w.HTML()
        self._table.add_class("cubeloupe-fit-table")
        super().__init__(children=[row([self.model_choice], flex_flow="row wrap"), self._table, self.status],
                         **kwargs)
        self.add_class("cubeloupe-fit-panel")
        w.dlink((self.status, "message"), (self.status.layout, "display"), transform=lambda m: "" if m else "none")
        for part in self.status.children:  # the close button keeps its width beside a long message
            if isinstance(part, w.Button):
                part.layout.flex = "0 0 auto"
        self._update_choices()
        w.link((self.model_choice, "value"), (self, "model"))
        loupe.measurement_table.add_part(self)
        loupe.observe(self._on_suite, names=["measurements"])
        loupe.observe(self._update_choices, names=["z"])
        self._render()

    # ---------------------------------------------------------------- choices
    def _update_choices(self, change=None):
        groups = hyperfine_groups_in_band(self.loupe.spectrum_view.band, self.loupe.z,
                                          getattr(self.loupe, "catalog", None))
        options = [(label, key) for key, label in GAUSSIAN_MODELS.items()]
        options += [(f"hyperfine group {g}", _HYPERFINE + g) for g in groups]
        keep = self.model if self.model in [v for _, v in options] else "none"
        self.model_choice.options = options
        self.model_choice.value = keep

    def model_label(self):
        """The chosen fit in words."""
        if self.model.startswith(_HYPERFINE):
            return "hyperfine group " + self.model[len(_HYPERFINE):]
        return GAUSSIAN_MODELS.get(self.model, self.model)

    # ------------------------------------------------------------------ fitting
    def _on_suite(self, change):
        self.refit()

    @observe("model")
    def _on_model(self, change):
        self.refit()

    def _fit_inputs(self):
        loupe = self.loupe
        rest = loupe.rest_frequency if loupe.rest_frequency > 0 else loupe.spectrum_view.file_rest_frequency
        frame = {"rest_frequency": rest * u.GHz if rest else None, "z": loupe.z, "convention": loupe.convention,
                 "order": loupe.baseline_order, "window": u.Quantity(loupe.line_window, u.GHz)}
        if self.model.startswith(_HYPERFINE):
            # Velocities of a hyperfine group are measured from its own strongest component.
            frame.update(hyperfine=self.model[len(_HYPERFINE):], rest_frequency=None)
        else:
            frame["n_components"] = int(self.model)
        return frame

    def refit(self):
        """Fit every region's spectrum in every window holding the line window; draw and list the results."""
        view = self.loupe.spectrum_view
        self.results = {}
        view.clear_fits()
        problems = []
        with self.status.guard("fitting the line"):
            if self.model != "none" and self.loupe.line_window and self.loupe.measurements:
                frame = self._fit_inputs()
                window = frame["window"].value
                for name, spectra in view.shown_spectra().items():
                    for index, spectrum in enumerate(spectra):
                        if spectrum is None:
                            continue
                        f = display_axis(spectrum, "observed frequency").to_value(u.GHz)
                        if max(window) < f.min() or min(window) > f.max():
                            continue
                        free = [r for r in self.loupe.line_free if r[1] >= f.min() and r[0] <= f.max()]
                        try:
                            fit = fit_gaussians(spectrum, line_free=u.Quantity(free, u.GHz) if free else None,
                                                **frame)
                        except CubeloupeError as exc:
                            problems.append(f"{name}, window {index}: {exc}")
                            continue
                        self.results[(name, index)] = fit
                        view.show_fit(name, index, fit.model, fit.residuals,
                                      baseline=fit.baseline.model if fit.baseline is not None else None)
            if problems:
                self.status.error("Could not fit " + "; ".join(problems))
        self.loupe.measurement_table.set_fits(self.model_label(), self.results)
        self.rows = self._rows()
        self._render()

    def _rows(self):
        rows = []
        for (name, index), fit in self.results.items():
            for k, c in enumerate(fit.components, 1):
                entry = {"region": name, "window": index, "component": k,
                         "reduced_chi2": float(fit.reduced_chi2), "n_channels": int(fit.n_channels)}
                for key in ("amplitude", "center", "fwhm", "flux"):
                    value, error = getattr(c, key), getattr(c, key + "_error")
                    entry[key], entry[key + "_error"] = float(value.value), float(error.to_value(value.unit))
                    entry[key + "_unit"] = value.unit.to_string()
                h = fit.hyperfine
                if h is not None:
                    entry["optical_depth"], entry["optical_depth_error"] = h.optical_depth, h.optical_depth_error
                    tex = h.excitation_temperature
                    entry["excitation_temperature"] = float(tex.to_value(u.K)) if tex is not None else np.nan
                    entry["excitation_temperature_error"] = float(h.excitation_temperature_error.to_value(u.K)) \
                        if tex is not None else np.nan
                rows.append(entry)
        return rows

    # ---------------------------------------------------------------- display
    def _render(self):
        if self.model == "none":
            self._table.value = ("<span style='color:#7b8794'>Moment-based numbers above. Choose a line fit for "
                                 "Gaussian (or hyperfine) numbers as well.</span>")
            return
        if not self.rows:
            self._table.value = "<span style='color:#7b8794'>No fit yet: add a region and drag the line window.</span>"
            return
        first = self.rows[0]
        hyperfine = "optical_depth" in first
        heads = [("Region", ""), ("Window", ""), ("Comp.", ""), ("Peak", unit_text(first["amplitude_unit"])),
                 ("Centre", unit_text(first["center_unit"])), ("FWHM", unit_text(first["fwhm_unit"])),
                 ("Flux", unit_text(first["flux_unit"])), ("χ²_red", "")]
        if hyperfine:
            heads += [("τ total", ""), ("T_ex", "K")]
        show_window = len(self.loupe.cubes) > 1
        head = "".join(f"<th style='padding:2px 8px;text-align:right'>{html.escape(h)}"
                       + (f"<br><span style='font-weight:400'>({html.escape(unit)})</span>" if unit else "") + "</th>"
                       for h, unit in heads if h != "Window" or show_window)
        body = []
        for r in self.rows:
            cells = [html.escape(r["region"])] + ([str(r["window"])] if show_window else []) + [str(r["component"])]
            cells += [_pm(r[k], r[k + "_error"]) for k in ("amplitude", "center", "fwhm", "flux")]
            cells.append(f"{r['reduced_chi2']:.2f}")
            if hyperfine:
                cells += [_pm(r["optical_depth"], r["optical_depth_error"]),
                          _pm(r["excitation_temperature"], r["excitation_temperature_error"])]
            body.append("<tr>" + "".join(f"<td style='padding:2px 8px;text-align:right'>{c}</td>" for c in cells)
                        + "</tr>")
        note = ("Centre from the group's strongest component. " if hyperfine else "") + \
            "Errors from the line-free rms (and the channel correlation of a smoothed spectrum)."
        self._table.value = (f"<div style='font-weight:600;margin-top:6px'>{html.escape(self.model_label())}</div>"
                             f"<table style='border-collapse:collapse;font-size:90%'><tr>{head}</tr>"
                             + "".join(body) + f"</table><span style='color:#52606d'>{html.escape(note)}</span>")
