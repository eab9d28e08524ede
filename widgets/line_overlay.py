"""LineOverlay: catalog transitions in the band at the current redshift, drawn on the spectrum view.

Which lines fall in the band comes from `cubeloupe.analysis.lines_in_band`;
where they sit on the current x axis from
`cubeloupe.analysis.display.marker_positions`; redshift candidates for marked
peaks from `cubeloupe.analysis.redshift_solver.redshift_candidates`; the
distances shown beside the redshift from `luminosity.redshift_summary`.
"""

import html
import threading

import astropy.units as u
import ipywidgets as w
import numpy as np
from bqplot import Lines, Scatter
from traitlets import Enum, Float, Instance, List, TraitError, Unicode, observe, validate

from cubeloupe.analysis.catalog import lines_in_band, load_catalog
from cubeloupe.analysis.display import marker_positions
from cubeloupe.analysis.errors import CubeloupeError
from cubeloupe.analysis.luminosity import redshift_summary
from cubeloupe.analysis.redshift_solver import redshift_candidates
from cubeloupe.analysis.spectral import Z_MAX, check_redshift

from ._look import MARKER_COLOR
from .spectrum_view import SpectrumView
from .status import StatusLine

__all__ = ["LineOverlay"]

ISOMER_CHOICES = ("any", "ortho", "para", "none")


class LineOverlay(w.VBox):
    """Redshift and velocity controls, catalog filters and labelled line markers.

    Parameters
    ----------
    spectrum_view : SpectrumView
        The markers are drawn on its figure, in its x axis.
    band : (float, float)
        Observed band (GHz) covered by all spectral windows together.
    catalog : astropy Table, optional
        From `load_catalog`; the bundled catalog by default.
    status : StatusLine, optional

    Attributes
    ----------
    z, velocity_offset, species, spin_isomer, max_E_up, reference_line, candidates, lines
        See each trait's help.
    marker_x : ndarray
        x positions of the markers on the spectrum view's current axis (read-only).
    """

    z = Float(0.0, help="Source redshift; line markers sit at rest frequency / (1 + z)")
    velocity_offset = Float(0.0, help="Extra systemic velocity (km/s, rest frame) that shifts all markers")
    species = List(Unicode(), help="Show only these species (empty: all)")
    spin_isomer = Enum(list(ISOMER_CHOICES), "any", help="Show only this spin isomer ('any': all)")
    max_E_up = Float(None, allow_none=True, help="Hide lines whose upper level lies above this energy E_up/k (K)")
    reference_line = Unicode("", help="Catalog name of the line velocities refer to ('' for none)")
    lines = Instance(object, allow_none=True, help="The catalog rows shown as markers (astropy Table)")
    candidates = List(help="Redshift candidates for the marked peaks (RedshiftCandidate objects), best first")
    hover_text = Unicode("", help="Details of the marker under the pointer, as shown")
    velocity_range = Float(1500.0, help="Half-range of the velocity slider (km/s)")

    def __init__(self, spectrum_view, band, catalog=None, status=None, **kwargs):
        self.view = spectrum_view
        self.status = status or spectrum_view.status
        self.band = (float(min(band)), float(max(band)))
        self.catalog = load_catalog() if catalog is None else catalog
        self.marker_x = np.array([])
        self._build()
        super().__init__(children=self._children, **kwargs)
        self.add_class("cubeloupe-line-overlay")
        self.view.add_overlay_marks([self.stems, self.heads])
        self.view.observe(self._on_view_frame, names=["axis_kind", "convention", "rest_frequency"])
        self.view.observe(self._on_peaks, names=["peaks"])
        self._refresh_lines()

    def _build(self):
        band_scale = self.view.band_scale
        scales = {"x": self.view.x_scale, "y": band_scale}
        self.stems = Lines(x=[], y=[], scales=scales, colors=[MARKER_COLOR], stroke_width=1, opacities=[0.8])
        self._tooltip = w.HTML()
        self.heads = Scatter(x=[], y=[], scales=scales, colors=[MARKER_COLOR], marker="diamond", default_size=40,
                             names=[], display_names=True, tooltip=self._tooltip,
                             interactions={"hover": "tooltip", "click": "select"},
                             selected_style={"stroke": "#000000", "stroke-width": 2})
        self.heads.on_hover(self._on_hover)
        self.heads.observe(self._on_head_selected, names=["selected"])

        self.z_input = w.BoundedFloatText(value=0.0, min=-0.99, max=Z_MAX, step=0.0001, description="Redshift z",
                                          tooltip="Redshift of the source: catalog lines are drawn where "
                                                              "they would be seen at this z (press Enter to apply)",
                                          layout=w.Layout(width="200px"))
        self.z_input.add_class("cubeloupe-z-input")
        self.z_input.observe(self._on_z_input, names="value")
        self.velocity_slider = w.FloatSlider(value=0.0, min=-self.velocity_range, max=self.velocity_range, step=5,
                                             description="Shift (km/s)", readout_format="+.0f",
                                             tooltip="Slide all line markers by a velocity, to line "
                                                                 "them up with what you see",
                                             style={"description_width": "initial"}, layout=w.Layout(width="380px"))
        self.velocity_slider.add_class("cubeloupe-velocity-slider")
        w.link((self.velocity_slider, "value"), (self, "velocity_offset"))
        species = sorted(set(self.catalog["species"]))
        self.species_choice = w.SelectMultiple(options=species, rows=4, description="Species",
                                               tooltip="Show only the molecules/atoms picked here "
                                                                   "(Ctrl/Cmd-click several; none picked shows all)",
                                               layout=w.Layout(width="230px"))
        self.species_choice.observe(lambda ch: setattr(self, "species", list(ch.new)), names="value")
        self.isomer_choice = w.Dropdown(options=list(ISOMER_CHOICES), description="Spin",
                                        tooltip="Show only ortho or para lines of molecules that have "
                                                            "both forms (e.g. water)",
                                        layout=w.Layout(width="160px"))
        w.link((self.isomer_choice, "value"), (self, "spin_isomer"))
        self.eup_input = w.FloatText(value=0.0, description="Max E_up (K)",
                                     tooltip="Hide lines from levels more energetic than this (upper-"
                                                         "level energy in kelvin); 0 shows all",
                                     style={"description_width": "initial"}, layout=w.Layout(width="170px"))
        self.eup_input.observe(lambda ch: setattr(self, "max_E_up", ch.new if ch.new and ch.new > 0 else None),
                               names="value")
        self.reference_choice = w.Dropdown(options=[("(none)", "")], description="Velocity of",
                                           tooltip="The line whose redshifted frequency is zero velocity "
                                                               "on the velocity axis and for measurements",
                                           layout=w.Layout(width="280px"))
        self.reference_choice.add_class("cubeloupe-reference-line")
        w.link((self.reference_choice, "value"), (self, "reference_line"))
        self.candidate_choice = w.Dropdown(options=[], description="z guesses",
                                           tooltip="Redshifts that explain the peaks you marked, best first",
                                           layout=w.Layout(width="460px"))
        self.candidate_choice.add_class("cubeloupe-z-candidates")
        self.use_candidate = w.Button(description="Use this z", icon="check",
                                      tooltip="Set the redshift to the chosen guess")
        self.use_candidate.add_class("cubeloupe-use-candidate")
        self.use_candidate.on_click(lambda _: self.use_candidate_index(self.candidate_choice.index or 0))
        self.summary = w.HTML()
        self.summary.add_class("cubeloupe-z-summary")
        self._hover = w.HTML()
        self._children = [
            w.HBox([self.z_input, self.velocity_slider, self.reference_choice]),
            w.HBox([self.species_choice, w.VBox([self.isomer_choice, self.eup_input])]),
            w.HBox([self.candidate_choice, self.use_candidate]),
            self.summary, self._hover,
        ]

    # ------------------------------------------------------------ validation
    @validate("z")
    def _valid_z(self, proposal):
        try:
            return check_redshift(proposal["value"])
        except CubeloupeError as exc:
            raise TraitError(str(exc)) from None

    def _on_z_input(self, change):
        try:
            self.z = change.new
        except TraitError as exc:
            self.status.error(f"Could not use that redshift: {exc}")
            self.z_input.value = self.z

    @observe("z")
    def _on_z(self, change):
        if self.z_input.value != self.z:
            self.z_input.value = self.z
        self._refresh_lines()
        # Distances and ages need cosmological integrals (~10 ms): worked out off the main thread so the
        # markers move at once; a newer z makes an older result stale.
        self._summary_generation = getattr(self, "_summary_generation", 0) + 1
        threading.Thread(target=self._show_summary, args=(self._summary_generation, self.z), daemon=True).start()

    @observe("species", "spin_isomer", "max_E_up")
    def _on_filters(self, change):
        self._refresh_lines()

    @observe("velocity_offset")
    def _on_offset(self, change):
        self._place_markers()

    def _on_view_frame(self, change):
        self._place_markers()

    @observe("reference_line")
    def _on_reference(self, change):
        if not self.reference_line:
            return
        rows = self.catalog[np.asarray(self.catalog["name"]) == self.reference_line]
        if len(rows):
            self.view.rest_frequency = float(u.Quantity(rows["rest_frequency"], u.GHz)[0].to_value(u.GHz))

    # --------------------------------------------------------------- markers
    def _refresh_lines(self):
        with self.status.guard("finding catalog lines in the band"):
            lo, hi = self.band
            # Widen by the slider's range so lines shifted into the band by the offset are kept.
            pad = 1 + self.velocity_range / 299792.458
            self.lines = lines_in_band(lo / pad * u.GHz, hi * pad * u.GHz, self.z, self.catalog,
                                       species=self.species or None,
                                       spin_isomer=None if self.spin_isomer == "any" else self.spin_isomer,
                                       max_E_up=None if self.max_E_up is None else self.max_E_up * u.K)
            names = list(self.lines["name"]) if self.lines is not None else []
            options = [("(none)", "")] + [(n, n) for n in names]
            if self.reference_line and self.reference_line not in names:
                options.append((self.reference_line, self.reference_line))
            if tuple(options) != tuple(self.reference_choice.options):
                self.reference_choice.options = options
            self._place_markers()

    def _place_markers(self):
        with self.status.guard("placing the line markers"):
            if self.lines is None or len(self.lines) == 0:
                x = np.array([])
                names = []
            else:
                rest = self.view._rest()
                x = marker_positions(u.Quantity(self.lines["rest_frequency"], u.GHz), self.view.axis_kind, z=self.z,
                                     velocity_offset=self.velocity_offset * u.km / u.s,
                                     convention=self.view.convention, reference_rest_frequency=rest).value
                names = list(self.lines["name"])
            self.marker_x = x
            n = len(x)
            with self.view.figure.hold_sync():
                self.stems.x = np.repeat(x[:, None], 2, axis=1) if n else []
                self.stems.y = np.tile([0.0, 0.88], (n, 1)) if n else []
                self.heads.x, self.heads.y = x, np.full(n, 0.88)
                self.heads.names = names

    def _describe(self, index):
        row = self.lines[int(index)]
        rest = u.Quantity(row["rest_frequency"], u.GHz).to_value(u.GHz)
        observed = u.Quantity(row["observed_frequency"], u.GHz).to_value(u.GHz)
        e_up = u.Quantity(row["E_up"], u.K).to_value(u.K)
        text = (f"<b>{html.escape(str(row['name']))}</b><br>rest frequency {rest:.6f} GHz"
                f"<br>observed at z = {self.z:g}: {observed:.6f} GHz"
                f"<br>E_up/k {e_up:.1f} K<br>spin isomer {html.escape(str(row['spin_isomer']))}"
                f"<br>source: {html.escape(str(row['provenance']))}")
        return text

    def _on_hover(self, mark, content):
        data = content.get("data") or content.get("point") or {}
        index = data.get("index")
        if index is None and "x" in data and len(self.marker_x):
            index = int(np.argmin(np.abs(self.marker_x - float(data["x"]))))
        if index is None or self.lines is None or not 0 <= int(index) < len(self.lines):
            return
        self.hover(int(index))

    def hover(self, index):
        """Show the details of marker ``index`` (what hovering over it shows)."""
        text = self._describe(index)
        self._tooltip.value = text
        self._hover.value = f"<div style='font-size:90%'>{text.replace('<br>', ' · ')}</div>"
        self.hover_text = self._hover.value
        return text

    def _on_head_selected(self, change):
        # Clicking a marker makes its line the velocity reference.
        if change.new is not None and len(change.new):
            self.reference_line = str(self.lines["name"][int(change.new[0])])

    # ---------------------------------------------------------- redshift
    def _on_peaks(self, change):
        peaks = list(self.view.peaks)
        if len(peaks) < 2:
            self.candidates = []
            return
        with self.status.guard("solving the redshift from the marked peaks"):
            found = redshift_candidates(np.array(peaks) * u.GHz, self.catalog,
                                        species=self.species or None,
                                        spin_isomer=None if self.spin_isomer == "any" else self.spin_isomer,
                                        max_E_up=None if self.max_E_up is None else self.max_E_up * u.K)
            self.candidates = list(found)
            if not found:
                self.status.warn(f"No catalog lines explain the {len(peaks)} marked peaks together; "
                                 "check the peak positions or relax the filters.")
            else:
                self.status.info(f"{len(found)} redshift guess(es) for {len(peaks)} peaks; pick one and press "
                                 "'Use this z'.")

    @observe("candidates")
    def _show_candidates(self, change):
        options = []
        for i, cand in enumerate(self.candidates):
            ids = ", ".join(name for name in cand.lines if name) or "?"
            options.append((f"z = {cand.z:.5f} ± {cand.z_uncertainty:.5f}: {ids} "
                            f"(rms {cand.rms_residual.to_value(u.km / u.s):.0f} km/s)", i))
        self.candidate_choice.options = options

    def use_candidate_index(self, index):
        """Set z to the redshift of candidate ``index``."""
        with self.status.guard("using the redshift guess"):
            if not self.candidates:
                self.status.warn("No redshift guesses yet: mark two or more peaks (mode 'Peaks') first.")
                return
            self.z = float(self.candidates[int(index)].z)

    def _show_summary(self, generation, z):
        if z <= 0:
            self.summary.value = ""
            return
        try:
            s = redshift_summary(z)
        except CubeloupeError as exc:
            self.summary.value = html.escape(str(exc))
            return
        if generation != self._summary_generation:
            return
        self.summary.value = (
            f"<span style='color:#52606d'>At z = {z:g} ({html.escape(s.cosmology)}): D_L "
            f"{s.luminosity_distance.to_value(u.Mpc):.0f} Mpc · {s.angular_scale.to_value(u.kpc / u.arcsec):.2f} "
            f"kpc/arcsec · age {s.age.to_value(u.Gyr):.2f} Gyr</span>")
