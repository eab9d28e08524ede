"""ExcitationPanel: population diagrams of the measured lines, their results, and the LTE prediction over the spectra.

The user ticks measured lines (rows of the suite's measurement table, from any
window and region; ticked rows are kept when the line window moves on to the
next line). Every number comes from `cubeloupe.analysis`: the fit from
`population_diagram` (one per species, with the suite's z, magnification and
cosmology for fluxes in Jy km/s), the predicted spectrum from `lte_spectrum`,
the picture from `write_population_figure`, the table from `write_table`.
The panel only collects the rows, draws the points and shows the numbers.
"""

import html
import threading

import astropy.units as u
import ipywidgets as w
import numpy as np
from astropy.table import QTable, vstack
from bqplot import Axis, Figure, LinearScale, Lines, Scatter
from traitlets import Bool, Enum, Float, List, Unicode, observe

from cubeloupe.analysis import (
    SPIN_STYLES, CubeloupeError, ParameterError, find_line, frequency_axis, lte_spectrum,
    population_diagram, spin_group, write_population_figure, write_table,
)

from ._look import row
from .status import StatusLine

__all__ = ["ExcitationPanel"]

_JY_KMS = u.Jy * u.km / u.s
_LN = "ln(N_u/g_u)"
_ARROW = 0.8  # length of an upper limit's arrow, in ln(N_u/g_u)


def _key(item):
    return (str(item["region"]), int(item.get("window", 0)), str(item["line"]))


def _label(item):
    flux = f"{item['flux']:.3g} ± {item['flux_error']:.2g} {item['flux_unit']}"
    limit = " (upper limit)" if item.get("upper_limit") else ""
    return f"{item['line']} · {item['region']} · window {item.get('window', 0)} · {flux}{limit}"


class ExcitationPanel(w.VBox):
    """Population diagrams of ticked measurements, with results, exports and a live LTE prediction.

    Parameters
    ----------
    loupe : Loupe
        The suite: its measurements are the lines offered, its ``z``, ``magnification`` and
        ``cosmology`` go into the fits, its spectrum view shows the prediction.
    tabs : ipywidgets.Tab, optional
        The suite's tabs: the panel adds itself as a tab "Population diagram".

    Attributes
    ----------
    picked : list of dict
        The lines in the diagram: region, window, line (catalog name), flux, flux_error, flux_unit,
        upper_limit (flux is then the limit).
    spin : {'joint', 'separate'}
        How ortho and para lines are fitted (see `population_diagram`).
    limit_sigma : float
        A ticked row whose S/N is below this is used as an upper limit of ``limit_sigma`` x its error.
    diagrams : dict
        Species -> PopulationDiagram of the last fit (read-only).
    show_prediction : bool
        Draw `lte_spectrum` of ``prediction_species`` over the spectra.
    prediction_temperature : float
        Excitation temperature of the prediction, K.
    prediction_amount : float
        log10 of the number of molecules (Jy km/s data) or of the column density in cm^-2 (K km/s data).
    """

    picked = List(help="Lines in the diagram, as dicts (region, window, line, flux, flux_error, flux_unit, "
                       "upper_limit)")
    spin = Enum(["joint", "separate"], "joint", help="Ortho and para fitted with one temperature ('joint') or each on "
                                               "its own ('separate')")
    limit_sigma = Float(3.0, help="Ticked rows below this S/N are upper limits at limit_sigma x their error")
    show_prediction = Bool(False, help="Draw the predicted LTE spectrum over the spectra")
    prediction_species = Unicode("", help="Species of the prediction (catalog species, e.g. 'CO')")
    prediction_temperature = Float(50.0, help="Temperature of the prediction, K")
    prediction_amount = Float(60.0, help="log10 of the molecule count (Jy data) or column density in cm^-2 (K data)")
    prediction_fwhm = Float(300.0, help="Line width (FWHM, km/s) of the prediction")

    #: Seconds a burst of slider moves is gathered before the prediction is redrawn once.
    prediction_delay = 0.12

    def __init__(self, loupe, tabs=None, **kwargs):
        self.loupe = loupe
        self.diagrams = {}
        self._timer = None
        self._lock = threading.Lock()
        self.status = StatusLine()
        self.prediction_status = StatusLine()
        self.export_status = StatusLine()
        self._boxes, self._syncing = {}, False  # line key -> (tick box, offered line); see _show_choices
        self._box_layout = w.Layout(width="auto")
        self._no_lines = w.HTML("<span style='color:#7b8794'>No measured lines yet: measure a line (line window "
                                "on the spectrum, its name under 'Velocity zero'), then tick it here; move the "
                                "window to the next line and tick that one too.</span>")
        self.choices = w.VBox(layout=w.Layout(max_height="180px", overflow="auto", width="100%"))
        self.choices.add_class("cubeloupe-excitation-lines")
        self.spin_choice = w.ToggleButtons(options=[("one T (joint)", "joint"), ("each its own", "separate")],
                                           style={"button_width": "110px"},
                                           tooltips=["One temperature for ortho and para; their ratio is fitted",
                                                     "A temperature and amount for ortho and for para"])
        w.link((self.spin_choice, "value"), (self, "spin"))
        self.clear_button = w.Button(description="Untick all", icon="times", layout=w.Layout(width="110px"),
                                     tooltip="Take every line out of the diagram")
        self.clear_button.on_click(lambda _: setattr(self, "picked", []))
        self._build_figure()
        self.results = w.HTML()
        self.results.add_class("cubeloupe-excitation-results")
        self._build_prediction()
        self._build_exports()
        controls = w.VBox([
            w.HTML("<b>Measured lines</b> <span style='color:#829ab1'>tick lines of one or more species (any "
                   "window, any region); rows below 3σ count as upper limits</span>"),
            self.choices,
            row([w.HTML("Ortho/para fit"), self.spin_choice, self.clear_button], flex_flow="row wrap",
                grid_gap="8px"),
            self.status,
        ], layout=w.Layout(width="100%"))
        # The figure joins the page when the tab is first shown (see _on_tab); without tabs, at once.
        self.body = w.HBox([self.results] if tabs is not None else [self.figure, self.results],
                           layout=w.Layout(flex_flow="row wrap", grid_gap="12px", align_items="flex-start"))
        super().__init__([controls, self.body, self.prediction_box, self.export_box], **kwargs)
        self.add_class("cubeloupe-excitation-panel")
        loupe.observe(self._on_measurements, names=["measurements"])
        loupe.observe(self._on_source_traits, names=["z", "magnification", "cosmology"])
        self._tabs, self._choices_stale = tabs, False
        if tabs is not None:
            tabs.children = (*tabs.children, self)
            self._tab_index = len(tabs.children) - 1
            tabs.set_title(self._tab_index, "Population diagram")
            tabs.observe(self._on_tab, names=["selected_index"])
        self._show_choices()
        self.refit()

    # ------------------------------------------------------------- building
    def _build_figure(self):
        self.x_scale = LinearScale()
        self.y_scale = LinearScale()
        self.x_axis = Axis(scale=self.x_scale, label="E_up / k (K)", grid_lines="dashed")
        self.y_axis = Axis(scale=self.y_scale, orientation="vertical", label="ln(N_u / g_u)", grid_lines="dashed",
                           label_offset="44px")
        self.figure = Figure(marks=[], axes=[self.x_axis, self.y_axis],
                             fig_margin={"top": 16, "bottom": 48, "left": 64, "right": 16},
                             layout=w.Layout(width="500px", height="330px"))
        self.figure.add_class("cubeloupe-population-figure")
        self.marks = {}

    def _build_prediction(self):
        self.prediction_toggle = w.Checkbox(value=False, description="Draw the LTE prediction over the spectra",
                                            indent=False, layout=w.Layout(width="300px"))
        w.link((self.prediction_toggle, "value"), (self, "show_prediction"))
        self.species_choice = w.Dropdown(options=[], description="Species", layout=w.Layout(width="170px"),
                                         style={"description_width": "initial"})
        self.species_choice.observe(lambda change: change.new and setattr(self, "prediction_species", change.new),
                                    names=["value"])
        self.temperature_slider = w.FloatSlider(value=50.0, min=3.0, max=500.0, step=0.5, description="T (K)",
                                                continuous_update=True, readout_format=".1f",
                                                style={"description_width": "initial"}, layout=w.Layout(width="300px"))
        w.link((self.temperature_slider, "value"), (self, "prediction_temperature"))
        self.amount_slider = w.FloatSlider(value=60.0, min=10.0, max=70.0, step=0.01, description="log10 N",
                                           continuous_update=True, readout_format=".2f",
                                           style={"description_width": "initial"}, layout=w.Layout(width="300px"))
        w.link((self.amount_slider, "value"), (self, "prediction_amount"))
        self.from_fit_button = w.Button(description="From the fit", icon="undo", layout=w.Layout(width="120px"),
                                        tooltip="Set the temperature and amount to the fitted ones")
        self.from_fit_button.on_click(lambda _: self.prediction_from_fit())
        self.prediction_box = w.VBox([
            row([self.prediction_toggle, self.species_choice, self.from_fit_button], flex_flow="row wrap",
                grid_gap="8px"),
            row([self.temperature_slider, self.amount_slider], flex_flow="row wrap", grid_gap="8px"),
            self.prediction_status,
        ])
        self.prediction_box.add_class("cubeloupe-excitation-prediction")

    def _build_exports(self):
        self.export_name = w.Text(value="population", description="File names start with",
                                  style={"description_width": "initial"}, layout=w.Layout(width="300px"))
        self.export_overwrite = w.Checkbox(value=False, description="Replace existing files", indent=False,
                                           layout=w.Layout(width="170px"))
        self.table_button = w.Button(description="Diagram table (ECSV)", icon="table", layout=w.Layout(width="180px"),
                                     tooltip="Write the diagram's points and fit results as a text table")
        self.table_button.on_click(lambda _: self._export("table"))
        self.picture_button = w.Button(description="Picture (PNG)", icon="image", layout=w.Layout(width="140px"),
                                       tooltip="Draw the diagram to a PNG file (made in the kernel)")
        self.picture_button.on_click(lambda _: self._export("picture"))
        self.export_box = w.VBox([row([self.export_name, self.export_overwrite, self.table_button,
                                       self.picture_button], flex_flow="row wrap", grid_gap="8px"),
                                  self.export_status])

    def _on_tab(self, change):
        # Drawn in a hidden tab, bqplot would lay the figure out at zero width (negative sizes, console errors).
        if change.new == self._tab_index and self.figure not in self.body.children:
            self.body.children = [self.figure, self.results]
        if change.new == self._tab_index and self._choices_stale:
            self._show_choices()

    @property
    def shown(self):
        """True when the panel is on screen: no tabs, or its tab selected."""
        return self._tabs is None or self._tabs.selected_index == self._tab_index

    # ------------------------------------------------------------- the lines
    def _offered(self):
        """The ticked lines, then the suite's current measurements not ticked yet."""
        keys = {_key(item) for item in self.picked}
        rows = [self._as_line(r) for r in (self.loupe.measurements or [])]
        return list(self.picked) + [r for r in rows if _key(r) not in keys]

    def _as_line(self, measured):
        """A measurement row as a line of the diagram (an upper limit below ``limit_sigma``)."""
        item = {k: measured[k] for k in ("region", "window", "line", "flux", "flux_error", "flux_unit")
                if k in measured}
        item.setdefault("window", 0)
        snr = measured.get("snr", np.inf)
        item["upper_limit"] = bool(np.isfinite(snr) and snr < self.limit_sigma)
        if item["upper_limit"]:
            item["flux"] = self.limit_sigma * float(item["flux_error"])
        return item

    def _show_choices(self):
        self._choices_stale = False
        # A box per offered line, kept while the line is offered and only updated when its label or
        # tick changes: new boxes on every measurement made each move of the line window send three
        # new widget models per line to the browser (#20).
        boxes, kept = [], {}
        picked = {_key(item) for item in self.picked}
        self._syncing = True
        try:
            for item in self._offered():
                key = _key(item)
                box, _ = self._boxes.pop(key, (None, None))
                if box is None:
                    box = w.Checkbox(value=False, indent=False, layout=self._box_layout)
                    box.add_class("cubeloupe-excitation-line")
                    box.observe(lambda change, key=key: self._on_box(key, change.new), names=["value"])
                box.description = _label(item)
                box.value = key in picked
                kept[key] = (box, item)
                boxes.append(box)
        finally:
            self._syncing = False
        for box, _ in self._boxes.values():
            box.close()
        self._boxes = kept
        if not boxes:
            boxes = [self._no_lines]
        if list(self.choices.children) != boxes:
            self.choices.children = boxes

    def _on_box(self, key, on):
        if not self._syncing and key in self._boxes:
            self.tick(self._boxes[key][1], on)

    def tick(self, item, on=True):
        """Put a line (a measurement row or a dict like those in `picked`) into the diagram, or take it out."""
        line = item if "upper_limit" in item else self._as_line(item)
        rest = [p for p in self.picked if _key(p) != _key(line)]
        self.picked = rest + [line] if on else rest

    def tick_measurements(self, lines=None):
        """Tick the suite's current measurements (those of the named catalog lines, or all); returns how many."""
        rows = [r for r in (self.loupe.measurements or []) if lines is None or r["line"] in lines]
        keys = {_key(r) for r in rows}
        self.picked = [p for p in self.picked if _key(p) not in keys] + [self._as_line(r) for r in rows]
        return len(rows)

    def _on_measurements(self, change):
        # Each move of the line window measures anew: the lines offered here are brought up to date when
        # the tab is shown, not on the way to the measurement table (#20).
        if self.shown:
            self._show_choices()
        else:
            self._choices_stale = True

    def _on_source_traits(self, change):
        if self.picked:
            self.refit()

    @observe("picked", "spin", "limit_sigma")
    def _on_inputs(self, change):
        self._show_choices()
        self.refit()

    # ------------------------------------------------------------- the fit
    def lines_table(self, species=None):
        """The ticked lines as the table `population_diagram` reads (of one species, or all)."""
        rows = self.picked
        if species is not None:
            rows = [r for r in rows if self._species_of(r["line"]) == species]
        if not rows:
            return QTable({"line": [], "flux": [] * _JY_KMS, "flux_error": [] * _JY_KMS})
        units = {r["flux_unit"] for r in rows}
        if len(units) > 1:
            raise ParameterError(f"the ticked lines mix flux units {sorted(units)}; tick lines of one kind (all "
                                 "Jy km/s, or all K km/s)")
        unit = u.Unit(rows[0]["flux_unit"])
        return QTable({"line": [r["line"] for r in rows],
                       "flux": [r["flux"] for r in rows] * unit,
                       "flux_error": [r["flux_error"] for r in rows] * unit,
                       "upper_limit": [bool(r.get("upper_limit")) for r in rows]})

    @staticmethod
    def _species_of(name):
        return str(find_line(name)["species"])

    def fit_options(self, table):
        """The keyword arguments the panel passes to `population_diagram` for ``table``."""
        options = {"spin": self.spin}
        if len(table) and u.Quantity(table["flux"]).unit.is_equivalent(_JY_KMS):
            options.update(z=self.loupe.z, magnification=self.loupe.magnification, cosmology=self.loupe.cosmology)
        return options

    def refit(self):
        """Fit every species among the ticked lines; draw the diagram and show the results."""
        self.diagrams = {}
        problems = []
        self.status.clear()
        with self.status.guard("reading the ticked lines"):
            species = list(dict.fromkeys(self._species_of(r["line"]) for r in self.picked))
            for name in species:
                table = self.lines_table(name)
                try:
                    self.diagrams[name] = population_diagram(table, **self.fit_options(table))
                except CubeloupeError as exc:
                    problems.append(f"{name}: {exc}")
            if problems:
                self.status.error("Could not fit " + "; ".join(problems))
        self._draw()
        self._show_results()
        self._offer_species()
        if self.show_prediction:
            self.draw_prediction()

    # ------------------------------------------------------------- drawing
    def _draw(self):
        marks = []
        self.marks = {}
        for index, (species, diagram) in enumerate(self.diagrams.items()):
            points = diagram.points
            groups = np.array([spin_group(s, diagram.components) for s in points["spin_isomer"]])
            for group in dict.fromkeys(groups):
                color = self._color(species, group, index)
                rows = points[groups == group]
                energy = rows["E_up"].to_value(u.K)
                value = np.asarray(rows[_LN], dtype=float)
                error = np.asarray(rows[f"{_LN}_error"], dtype=float)
                limit = np.asarray(rows["upper_limit"], dtype=bool)
                key = f"{species} {group}".strip()
                scales = {"x": self.x_scale, "y": self.y_scale}
                found = {}
                det = ~limit
                found["points"] = Scatter(x=energy[det], y=value[det], scales=scales, colors=[color],
                                          marker=SPIN_STYLES[group]["marker"].replace("o", "circle").replace(
                                              "s", "square").replace("D", "diamond"),
                                          default_size=48, stroke="white")
                found["error_bars"] = Lines(x=[[e, e] for e in energy[det]],
                                            y=[[v - s, v + s] for v, s in zip(value[det], error[det])],
                                            scales=scales, colors=[color], stroke_width=1.4)
                found["limits"] = Lines(x=[[e, e] for e in energy[limit]],
                                        y=[[v, v - _ARROW] for v in value[limit]],
                                        scales=scales, colors=[color], stroke_width=1.6)
                found["limit_heads"] = Scatter(x=energy[limit], y=value[limit] - _ARROW, scales=scales,
                                               colors=[color], marker="triangle-down", default_size=40)
                part = diagram.components.get(group)
                if part is not None and np.isfinite(part.slope) and np.isfinite(part.intercept) and len(energy):
                    span = max(np.ptp(energy), 20.0)
                    grid = np.linspace(energy.min() - 0.08 * span, energy.max() + 0.08 * span, 2)
                    found["fit"] = Lines(x=grid, y=diagram.model(grid * u.K, spin_isomer=group), scales=scales,
                                         colors=[color], stroke_width=1.5, line_style="dashed")
                # Empty multi-line marks are left out: bqplot draws nothing for them anyway.
                found = {k: m for k, m in found.items() if len(np.ravel(m.x))}
                self.marks[key] = found
                marks.extend(found.values())
        self.figure.marks = marks

    @staticmethod
    def _color(species, group, index):
        if group != "all":
            return SPIN_STYLES[group]["color"]
        return ["#3d3a6b", "#6a994e", "#bc6c25", "#7b2cbf"][index % 4]

    def _show_results(self):
        if not self.diagrams:
            self.results.value = ("<span style='color:#7b8794'>Tick two or more lines of a species (three for a "
                                  "temperature with an error) to see its population diagram.</span>")
            return
        parts = []
        for index, (species, d) in enumerate(self.diagrams.items()):
            parts.append(self._result_html(species, d, index))
        parts.append("<div style='color:#829ab1;font-size:90%;margin-top:4px'>Optically thin, LTE, one "
                     "temperature (Goldsmith &amp; Langer 1999): quick-look numbers; check the assumptions.</div>")
        self.results.value = "<div style='max-width:420px'>" + "".join(parts) + "</div>"

    def _result_html(self, species, d, index):
        def q(value, error, unit, fmt=".3g"):
            v, e = u.Quantity(value).to_value(unit), u.Quantity(error).to_value(unit)
            if not np.isfinite(v):
                return "—"
            return f"{v:{fmt}} ± {e:{fmt}}" + (f" {unit}" if str(unit) else "")

        rows = []
        if np.isfinite(d.temperature.value):
            rows.append(("T", q(d.temperature, d.temperature_error, u.K, ".1f")))
        for name, part in d.components.items():
            if name != "all" and not np.isfinite(d.temperature.value):
                rows.append((f"T ({name})", q(part.temperature, part.temperature_error, u.K, ".1f")))
        if np.isfinite(d.column_density.value):
            rows.append(("N (column density)", q(d.column_density, d.column_density_error, u.cm ** -2)))
        if np.isfinite(d.total_number.value):
            rows.append(("molecules", q(d.total_number, d.total_number_error, u.dimensionless_unscaled)))
            rows.append(("mass", q(d.mass, d.mass_error, u.M_sun)))
            rows.append(("at", f"z = {d.z:g}, magnification μ = {d.magnification:g} (divided out), "
                               f"{html.escape(d.cosmology)}"))
        if np.isfinite(d.ortho_para_ratio):
            rows.append((f"ortho/para ({d.spin})", f"{d.ortho_para_ratio:.2f} ± {d.ortho_para_ratio_error:.2f}"))
        zeros = ", ".join(f"{k}: {v.to_value(u.K):.1f} K" for k, v in d.energy_zero.items() if k != "all")
        if zeros:
            rows.append(("energy zero", zeros))
        rows.append(("lines", f"{len(d.points)} ({int(np.sum(d.points['upper_limit']))} upper limits), "
                              f"χ²/dof = {d.reduced_chi2:.2f}"))
        body = "".join(f"<tr><td style='padding:1px 8px 1px 0;color:#486581'>{html.escape(k)}</td>"
                       f"<td style='padding:1px 0'>{v}</td></tr>" for k, v in rows)
        notes = "".join(f"<div style='color:#9a3412'>{html.escape(t)}</div>"
                        for t in (*d.undetermined, *d.limit_violations))
        color = self._color(species, "all", index) if "all" in d.components else SPIN_STYLES["ortho"]["color"]
        return (f"<div class='cubeloupe-excitation-species' style='margin-bottom:6px'><b style='color:{color}'>"
                f"{html.escape(species)}</b><table style='font-size:90%'>{body}</table>{notes}</div>")

    # ---------------------------------------------------------- prediction
    def _offer_species(self):
        options = list(self.diagrams)
        if self.species_choice.options != tuple(options):
            self.species_choice.options = options
        if options and self.prediction_species not in options:
            self.prediction_species = options[0]
        if self.prediction_species in options:
            self.species_choice.value = self.prediction_species

    def prediction_from_fit(self):
        """Set the prediction's temperature and amount to the fit of ``prediction_species``."""
        with self.prediction_status.guard("taking the fitted values"):
            d = self.diagrams.get(self.prediction_species)
            if d is None:
                raise ParameterError("no fit yet for the chosen species: tick its lines first")
            temperature = d.temperature if np.isfinite(d.temperature.value) else next(
                iter(d.components.values())).temperature
            amount = d.total_number if np.isfinite(d.total_number.value) else d.column_density.to(u.cm ** -2)
            with self.hold_trait_notifications():
                self.prediction_temperature = float(np.clip(temperature.to_value(u.K), 3.0, 500.0))
                self.prediction_amount = float(np.log10(amount.value))

    @observe("prediction_amount")
    def _widen_amount_slider(self, change):
        low, high = self.amount_slider.min, self.amount_slider.max
        if not low <= change.new <= high:
            self.amount_slider.min, self.amount_slider.max = min(low, change.new - 5), max(high, change.new + 5)

    @observe("show_prediction", "prediction_species", "prediction_temperature", "prediction_amount",
             "prediction_fwhm")
    def _on_prediction(self, change):
        if change.name == "show_prediction" and change.new and self.diagrams:
            if change.new and self.prediction_species in self.diagrams and change.old is False:
                self.prediction_from_fit()
        if not self.show_prediction:
            self.loupe.spectrum_view.set_prediction([])
            return
        if self.prediction_delay <= 0:
            self.draw_prediction()
            return
        # Coalesce a burst of slider moves: one redraw after the burst settles.
        with self._lock:
            if self._timer is not None:
                self._timer.cancel()
            self._timer = threading.Timer(self.prediction_delay, self.draw_prediction)
            self._timer.daemon = True
            self._timer.start()

    def prediction(self):
        """The predicted spectra, one ``(frequency GHz, values)`` per window (None where none), and their unit."""
        d = self.diagrams.get(self.prediction_species)
        if d is None:
            raise ParameterError("no fit to predict from: tick lines of a species first")
        kelvin = not np.isfinite(d.total_number.value)
        amount = 10 ** self.prediction_amount
        curves, unit = [], None
        for cube in self.loupe.cubes:
            axis = frequency_axis(cube).to(u.GHz)
            options = {"temperature": self.prediction_temperature * u.K,
                       "fwhm": self.prediction_fwhm * u.km / u.s, "z": self.loupe.z}
            if kelvin:
                options["column_density"] = amount / u.cm ** 2
            else:
                options.update(total_number=amount, magnification=self.loupe.magnification,
                               cosmology=self.loupe.cosmology)
            if np.isfinite(d.ortho_para_ratio):
                options["ortho_para_ratio"] = d.ortho_para_ratio
            model = lte_spectrum(axis, [self.prediction_species], **options)
            unit = model.unit
            curves.append((axis.value, np.asarray(model.value, dtype=float)))
        return curves, unit

    def draw_prediction(self):
        """Compute the prediction now and hand it to the spectrum view."""
        with self.prediction_status.guard("drawing the LTE prediction"):
            curves, unit = self.prediction()
            self.loupe.spectrum_view.set_prediction(curves)
            self.prediction_status.info(
                f"LTE {self.prediction_species} at {self.prediction_temperature:.1f} K, 10^{self.prediction_amount:.2f}"
                f" ({'molecules, whole source' if unit.is_equivalent(u.Jy) else 'cm⁻²'}); a region spectrum "
                "holds only its share of the source.")

    # ------------------------------------------------------------- exports
    def diagram_table(self):
        """Every species' points in one table, with the fit results in its metadata."""
        if not self.diagrams:
            raise ParameterError("there is no population diagram yet: tick measured lines first")
        table = vstack([QTable(d.points) for d in self.diagrams.values()], metadata_conflicts="silent")
        table.meta["population_fits"] = {
            species: {"spin": d.spin, "temperature_K": float(d.temperature.to_value(u.K)),
                      "temperature_error_K": float(d.temperature_error.to_value(u.K)),
                      "column_density_cm-2": float(d.column_density.to_value(u.cm ** -2)),
                      "column_density_error_cm-2": float(d.column_density_error.to_value(u.cm ** -2)),
                      "total_number": float(d.total_number.value),
                      "total_number_error": float(d.total_number_error.value),
                      "mass_Msun": float(d.mass.to_value(u.M_sun)),
                      "ortho_para_ratio": float(d.ortho_para_ratio),
                      "ortho_para_ratio_error": float(d.ortho_para_ratio_error),
                      "z": float(d.z), "magnification": float(d.magnification), "cosmology": d.cosmology,
                      "method": d.method, "undetermined": list(d.undetermined)}
            for species, d in self.diagrams.items()}
        table.meta.update(self.loupe.provenance())
        return table

    def export_table(self, path, overwrite=False):
        """Write `diagram_table` as ECSV (atomic; never replacing a file unless ``overwrite``)."""
        return write_table(self.diagram_table(), path, overwrite=overwrite)

    def export_picture(self, path, overwrite=False):
        """Draw the diagrams to a PNG (or SVG, PDF) with `write_population_figure`."""
        if not self.diagrams:
            raise ParameterError("there is no population diagram yet: tick measured lines first")
        return write_population_figure(list(self.diagrams.values()), path, overwrite=overwrite)

    def _export(self, kind):
        stem = self.export_name.value.strip() or "population"
        with self.export_status.guard(f"writing the diagram's {kind}"):
            if kind == "table":
                path = self.export_table(f"{stem}_diagram.ecsv", self.export_overwrite.value)
            else:
                path = self.export_picture(f"{stem}_diagram.png", self.export_overwrite.value)
            self.export_status.info(f"Wrote {path}.")
