"""LineOverlay: catalog transitions in the band at the current redshift, drawn on the spectrum view.

Which lines fall in the band comes from `cubeloupe.analysis.BandLines` (the
tables of `lines_in_band`, re-placed quickly as z changes); where they sit on
the current x axis from `cubeloupe.analysis.marker_positions`; redshift
candidates for marked peaks from `cubeloupe.analysis.redshift_candidates`; the
distances shown beside the redshift from `cubeloupe.analysis.redshift_summary`.
"""

import contextlib
import html
import logging
import threading
import time

import astropy.units as u
import ipywidgets as w
import numpy as np
from bqplot import Label, Lines, Scatter
from traitlets import Bool, Enum, Float, Instance, List, TraitError, Unicode, observe, validate

from cubeloupe.analysis import (
    HUBBLE_FLOW_MIN_VELOCITY, LINE_FAMILIES, SPEED_OF_LIGHT, BandLines, CubeloupeError, check_redshift, find_line,
    in_hubble_flow, label_priority, label_rows, load_catalog, marker_positions, redshift_candidates,
    redshift_summary, strongest_components,
)

from ._look import MARKER_COLOR, format_optional_number, parse_optional_number, row, section
from .mark_update import update_mark
from .status import StatusLine

__all__ = ["LineOverlay"]


log = logging.getLogger("cubeloupe.widgets")

ISOMER_CHOICES = ("any", "ortho", "para", "none")

# Height of the marker heads as a fraction of the spectrum plot (the stems rise from the bottom to it).
# Their labels stack above them, the top row reaching into the figure's top margin (labels are not clipped).
HEAD_HEIGHT = 0.88

#: Families drawn by default: the bright lines of most spectra. Shock tracers, complex organics and
#: recombination lines number in the hundreds per band and are switched on when wanted.
DEFAULT_FAMILIES = ("CO and isotopologues", "dense gas", "water and hydrides", "atoms and ions")

# Label text: 11 px sans-serif, about 6.2 px a character on average (measured in Chromium, browser test),
# stacked in rows 13 px apart above the heads.
LABEL_FONT_SIZE = 11
LABEL_CHAR_WIDTH = 6.2
LABEL_ROW_STEP = 13
LABEL_GAP = 6  # px between two labels of a row


def _format_z(z):
    """The redshift as the input box shows it: enough digits to tell lines apart, no float noise."""
    return f"{z:.6g}"


def _short_source(provenance):
    """A catalog value's source for a tooltip: the publication, without the paths of public copies."""
    clauses = [part.split(", copy in")[0].split(" copy in ")[0].strip() for part in provenance.split(";")]
    text = "; ".join(c for c in clauses if c)
    return text if len(text) <= 140 else text[:137] + "..."

_HOVER_HINT = ("<span style='color:#829ab1;font-size:90%'>Point at a line marker on the spectrum for its "
               "details; click its head to make it velocity zero.</span>")


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
    z, velocity_offset, species, families, spin_isomer, max_E_up, hyperfine_components, reference_line,
    candidates, lines
        See each trait's help.
    marker_x : ndarray
        x positions of the markers of all rows of `lines` on the spectrum view's current axis (read-only).
    shown_markers : ndarray of int
        Rows of `lines` whose markers are drawn: those inside the spectrum view's x range (read-only).
    labelled_markers : ndarray of int
        Rows of `lines` whose marker carries a label (read-only): where markers crowd, labels are
        stacked in up to `label_row_count` rows and the lower-priority ones left out (`label_rows`).
    plot_width : float
        Width in pixels assumed for the spectrum plot when fitting labels (the browser does not report
        it); a narrower guess only spaces labels more.
    """

    plot_width = 360.0  # the spectrum plot is 372 px wide at 1 440 px with the file browser open (browser test)
    label_row_count = 3

    z = Float(0.0, help="Source redshift; line markers sit at rest frequency / (1 + z)")
    velocity_offset = Float(0.0, help="Extra systemic velocity (km/s, rest frame) that shifts all markers")
    species = List(Unicode(), help="Show only these species (empty: all); picked species are shown whatever "
                                   "their family")
    families = List(Enum(list(LINE_FAMILIES)), list(DEFAULT_FAMILIES),
                    help="Show lines of these families (a user's line of unknown family is always shown)")
    hyperfine_components = Bool(False, help="Draw each hyperfine component with its own marker instead of one "
                                            "labelled marker per group")
    spin_isomer = Enum(list(ISOMER_CHOICES), "any", help="Show only this spin isomer ('any': all)")
    max_E_up = Float(None, allow_none=True, help="Hide lines whose upper level lies above this energy E_up/k (K)")
    reference_line = Unicode("", help="Catalog name of the line velocities refer to ('' for none)")
    lines = Instance(object, allow_none=True, help="The catalog rows shown as markers (astropy Table)")
    candidates = List(help="Redshift candidates for the marked peaks (RedshiftCandidate objects), best first")
    hover_text = Unicode("", help="Details of the marker under the pointer, as shown")
    velocity_only = Bool(False, help="The cube has a velocity axis and no rest frequency: no lines can be placed")
    velocity_range = Float(1500.0, help="Half-range of the velocity slider (km/s)")
    marker_reach = Float(0.008, help="How near the pointer must come to a marker to point at it, as a fraction "
                                     "of the spectrum's drawn x range")
    head_reach = Float(0.06, help="How near in height to a marker's head a click must be to make its line "
                                  "velocity zero, as a fraction of the plot's height")

    def __init__(self, spectrum_view, band, catalog=None, status=None, **kwargs):
        self.view = spectrum_view
        self.status = status or StatusLine()
        self.band = (float(min(band)), float(max(band)))
        self.catalog = load_catalog() if catalog is None else catalog
        self.marker_x = np.array([])
        self.shown_markers = np.array([], dtype=int)
        self.labelled_markers = np.array([], dtype=int)
        self._strongest = strongest_components(self.catalog)
        self._band_lines = None
        self._quiet_reference = False
        self._summary_worker = _SummaryWorker(self._show_summary)
        self._build()
        super().__init__(children=self._children, **kwargs)
        self.add_class("cubeloupe-line-overlay")
        self.view.add_overlay_marks([self.stems, self.heads, *self.labels])
        self.view.observe(self._on_view_frame, names=["axis_kind", "convention", "rest_frequency", "x_range"])
        self.view.observe(self._on_peaks, names=["peaks"])
        self.view.on_pointer(self._on_pointer)
        self._refresh_lines()

    def _build(self):
        band_scale = self.view.band_scale
        scales = {"x": self.view.x_scale, "y": band_scale}
        self.stems = Lines(x=[], y=[], scales=scales, colors=[MARKER_COLOR], stroke_width=1, opacities=[0.8])
        self._tooltip = w.HTML()
        self.heads = Scatter(x=[], y=[], scales=scales, colors=[MARKER_COLOR], marker="diamond", default_size=40,
                             names=[], display_names=False, tooltip=self._tooltip,
                             interactions={"hover": "tooltip", "click": "select"},
                             selected_style={"stroke": "#000000", "stroke-width": 2})
        self.heads.on_hover(self._on_hover)
        self.heads.observe(self._on_head_selected, names=["selected"])
        # One label mark per row, each row a fixed number of pixels above the heads.
        self.labels = [Label(x=[], y=[], text=[], scales=scales, colors=[MARKER_COLOR], default_size=LABEL_FONT_SIZE,
                             font_weight="normal", align="middle", y_offset=-(10 + LABEL_ROW_STEP * r),
                             apply_clip=False)
                       for r in range(self.label_row_count)]

        self.z_input = w.Text(value=_format_z(0.0), description="Redshift z", continuous_update=False,
                              tooltip="Redshift of the source: catalog lines are drawn where they would be seen "
                                      "at this z (type a value and press Enter). Typing a redshift sets the "
                                      "velocity shift back to 0",
                              style={"description_width": "initial"}, layout=w.Layout(width="190px"))
        self.z_input.add_class("cubeloupe-z-input")
        self.z_input.observe(self._on_z_input, names="value")
        # A fine step, so that a velocity set from code (e.g. 1462.3 km/s) is not snapped by the browser.
        self.velocity_slider = w.FloatSlider(value=0.0, min=-self.velocity_range, max=self.velocity_range, step=0.1,
                                             description="Velocity shift (km/s)", readout_format="+.1f",
                                             tooltip="Move all line markers by a systemic velocity (rest frame), "
                                                     "to line them up with what you see",
                                             style={"description_width": "initial"}, layout=w.Layout(width="440px"))
        self.velocity_slider.add_class("cubeloupe-velocity-slider")
        w.link((self.velocity_slider, "value"), (self, "velocity_offset"))
        species = sorted(set(self.catalog["species"]))
        self.species_choice = w.SelectMultiple(options=species, rows=4, description="Species",
                                               tooltip="Show only the species picked here (Ctrl/Cmd-click to pick "
                                                       "several). Nothing picked shows every species",
                                               style={"description_width": "initial"},
                                               layout=w.Layout(width="190px"))
        self.species_choice.add_class("cubeloupe-species")
        self.species_choice.observe(lambda ch: setattr(self, "species", list(ch.new)), names="value")
        self.all_species_button = w.Button(description="All species", icon="undo", layout=w.Layout(width="110px"),
                                           tooltip="Forget the species picked: show lines of every species")
        self.all_species_button.on_click(lambda _: setattr(self, "species", []))
        self._species_note = w.HTML()
        self.family_choice = w.SelectMultiple(options=list(LINE_FAMILIES), value=tuple(self.families), rows=4,
                                              description="Families",
                                              tooltip="Show lines of the families picked here (Ctrl/Cmd-click to "
                                                      "pick several); species picked on the left are shown "
                                                      "whatever their family",
                                              style={"description_width": "initial"},
                                              layout=w.Layout(width="222px"))
        self.family_choice.add_class("cubeloupe-families")
        self.family_choice.observe(lambda ch: setattr(self, "families", list(ch.new)), names="value")
        self.hyperfine_toggle = w.Checkbox(value=False, description="Hyperfine components", indent=False,
                                           tooltip="Draw every hyperfine component (e.g. the seven of N2H+ "
                                                   "J=1-0) instead of one marker at each group's centre",
                                           layout=w.Layout(width="176px"))
        self.hyperfine_toggle.add_class("cubeloupe-hyperfine-components")
        w.link((self.hyperfine_toggle, "value"), (self, "hyperfine_components"))
        self.isomer_choice = w.Dropdown(options=list(ISOMER_CHOICES), description="Spin isomer",
                                        tooltip="Show only ortho or para lines of molecules that come in both "
                                                "forms (e.g. water); 'any' shows all",
                                        style={"description_width": "initial"}, layout=w.Layout(width="176px"))
        w.link((self.isomer_choice, "value"), (self, "spin_isomer"))
        self.eup_input = w.Text(value="", placeholder="no limit", description="Max E_up/k (K)",
                                continuous_update=False,
                                tooltip="Hide lines whose upper level lies above this energy (in kelvin). "
                                        "Leave blank to show lines of any energy",
                                style={"description_width": "initial"}, layout=w.Layout(width="176px"))
        self.eup_input.add_class("cubeloupe-max-eup")
        self.eup_input.observe(self._on_eup_input, names="value")
        self.reference_choice = w.Dropdown(options=[(self._default_reference_label(), "")],
                                           description="Velocity zero",
                                           tooltip="The line whose redshifted frequency is zero velocity on the "
                                                   "velocity axis, in the channel readout and in measurements; "
                                                   "the first entry is the cube's own rest frequency",
                                           style={"description_width": "initial"},
                                           layout=w.Layout(width="300px"))
        self.reference_choice.add_class("cubeloupe-reference-line")
        w.link((self.reference_choice, "value"), (self, "reference_line"))
        self.candidate_choice = w.Select(options=[], rows=3,
                                         tooltip="Redshifts that explain the peaks you marked, best first",
                                         layout=w.Layout(width="auto"))
        self.candidate_choice.add_class("cubeloupe-z-candidates")
        self.use_candidate = w.Button(description="Use this z", icon="check", layout=w.Layout(width="104px"),
                                      tooltip="Set the redshift to the chosen candidate")
        self.use_candidate.add_class("cubeloupe-use-candidate")
        self.use_candidate.on_click(lambda _: self.use_candidate_index(self.candidate_choice.index or 0))
        self.summary = w.HTML(value="&nbsp;", layout=w.Layout(min_height="20px"))
        self.summary.add_class("cubeloupe-z-summary")
        self._hover = w.HTML(value=_HOVER_HINT, layout=w.Layout(min_height="20px"))
        self._hover.add_class("cubeloupe-line-details")
        peaks_hint = w.HTML("<span style='color:#829ab1;font-size:90%'>Choose <i>Peaks</i> above the spectrum "
                            "and click two or more line tops; the redshifts that fit them appear here.</span>")
        self._render_species_note()
        self.groups = [
            section("Redshift and velocity", [
                row([self.z_input, self.reference_choice]),
                self.velocity_slider,
                self.summary,
            ], width="500px", css_class="cubeloupe-redshift-group"),
            section("Catalog lines shown", [
                row([self.species_choice, self.family_choice], align_items="flex-start"),
                row([self.isomer_choice, self.eup_input]),
                row([self.all_species_button, self.hyperfine_toggle]),
                self._species_note,
            ], width="384px", css_class="cubeloupe-filter-group"),
            section("Redshift from peaks", [peaks_hint, w.HTML("Candidate redshifts, best first:"),
                                            self.candidate_choice, self.use_candidate],
                    css_class="cubeloupe-peaks-group"),
        ]
        for group in self.groups[:2]:
            group.layout.margin = "0 16px 4px 0"
        self.groups[2].layout.flex = "1 1 380px"
        self.groups[2].layout.max_width = "560px"
        self._velocity_note = w.HTML(
            "<span style='color:#52606d'>This cube has a velocity axis and no rest frequency, so catalog lines and "
            "redshifts cannot be placed on it. Open it with <code>Loupe(path, rest_frequency=...)</code> (or "
            "<code>open_cube(path, rest_frequency=...)</code>) to place them.</span>",
            layout=w.Layout(display="none"))
        self._children = [self._velocity_note,
                          w.HBox(self.groups, layout=w.Layout(flex_flow="row wrap", align_items="flex-start")),
                          self._hover, self.status]

    def _default_reference_label(self):
        rest = getattr(self.view, "file_rest_frequency", None)
        if rest:
            return f"cube RESTFRQ ({rest:.6g} GHz)"
        return "band centre (no RESTFRQ)"

    def _render_species_note(self):
        if self.species:
            text = (f"Showing {len(self.species)} species, whatever their family: "
                    + ", ".join(html.escape(s) for s in self.species))
        elif len(self.families) == len(LINE_FAMILIES):
            text = "No species picked: every species is shown."
        else:
            text = f"No species picked: every species of the {len(self.families)} families picked is shown."
        self._species_note.value = f"<span style='color:#829ab1;font-size:90%'>{text}</span>"

    def _on_eup_input(self, change):
        try:
            self.max_E_up = parse_optional_number(change.new, "Max E_up/k")
        except ValueError as exc:
            self.status.error(f"Could not use that energy limit: {exc}")
            self.eup_input.value = format_optional_number(self.max_E_up)

    # ------------------------------------------------------------ validation
    @validate("z")
    def _valid_z(self, proposal):
        try:
            return check_redshift(proposal["value"])
        except CubeloupeError as exc:
            raise TraitError(str(exc)) from None

    def _on_z_input(self, change):
        if change.new == _format_z(self.z):
            return
        shift = self.velocity_offset
        try:
            z = float(str(change.new).strip())
            # The typed z places the lines now; a shift kept from before would move them off their lines.
            # Both change together, so the markers are placed (and sent) once (#20).
            with self.hold_trait_notifications():
                self.z = z
                self.velocity_offset = 0.0
        except (TraitError, ValueError) as exc:
            self.status.error(f"Could not use that redshift ({change.new!r}): {exc}")
            self.z_input.value = _format_z(self.z)
            return
        if shift != 0:
            self.status.info(f"Velocity shift set back to 0 (it was {shift:+.1f} km/s): the redshift now "
                             "places the lines.")
        else:
            self.status.clear()

    @observe("z")
    def _on_z(self, change):
        if self.z_input.value != _format_z(self.z):
            self.z_input.value = _format_z(self.z)
        self._refresh_lines()
        # Distances and ages need cosmological integrals: a background worker works them out once z
        # has stopped changing, so the markers move at once and a slider drag is not slowed down.
        self._summary_worker.request(self.z)

    @observe("velocity_only")
    def _on_velocity_only(self, change):
        for group in self.groups:
            group.layout.display = "none" if self.velocity_only else ""
        self._velocity_note.layout.display = "" if self.velocity_only else "none"
        if self.velocity_only:
            self.lines = self.lines[:0] if self.lines is not None else None
            self._place_markers()

    @observe("species", "families", "spin_isomer", "max_E_up", "hyperfine_components")
    def _on_filters(self, change):
        if change.name == "species":
            if tuple(self.species_choice.value) != tuple(self.species):
                self.species_choice.value = tuple(s for s in self.species if s in self.species_choice.options)
        if change.name == "families" and tuple(self.family_choice.value) != tuple(self.families):
            self.family_choice.value = tuple(self.families)
        self._render_species_note()
        if change.name == "max_E_up" and self.eup_input.value != format_optional_number(self.max_E_up):
            self.eup_input.value = format_optional_number(self.max_E_up)
        self._band_lines = None
        self._refresh_lines()

    @observe("velocity_range")
    def _on_velocity_range(self, change):
        with self.velocity_slider.hold_trait_notifications():
            self.velocity_slider.max = self.velocity_range
            self.velocity_slider.min = -self.velocity_range
        self._refresh_lines()  # the band searched for lines is padded by this range

    @validate("velocity_range")
    def _valid_velocity_range(self, proposal):
        if not proposal["value"] > 0:
            raise TraitError(f"velocity_range must be > 0 km/s; got {proposal['value']}")
        return float(proposal["value"])

    @observe("velocity_offset")
    def _on_offset(self, change):
        self._place_markers()

    def _on_view_frame(self, change):
        self._place_markers()

    @observe("reference_line")
    def _on_reference(self, change):
        if self.lines is not None:
            self._label_priority = label_priority(self.lines, self.reference_line)
        if not self.reference_line:
            # Back to the cube's own rest frequency (or, without one, the band centre).
            if change.old and not self._quiet_reference:
                self.view.rest_frequency = float(self.view.file_rest_frequency or 0.0)
            return
        try:  # a line, or a hyperfine group's name (its intensity-weighted centre)
            row = find_line(self.reference_line, self.catalog)
        except CubeloupeError:
            return
        self.view.rest_frequency = float(u.Quantity(row["rest_frequency"], u.GHz).to_value(u.GHz))

    @contextlib.contextmanager
    def keeping_rest_frequency(self):
        """Within this block, clearing the reference line keeps the view's rest frequency as it is."""
        self._quiet_reference = True
        try:
            yield
        finally:
            self._quiet_reference = False

    def refresh_reference_options(self):
        """Rebuild the 'Velocity zero' choices (e.g. after the cube's rest frequency became known)."""
        groups = list(self.lines["name"]) if self.lines is not None else []
        names = [self.line_name(n) for n in groups]
        labels = [f"{g} (strongest component)" if g in self._strongest else n for g, n in zip(groups, names)]
        options = [(self._default_reference_label(), "")] + list(zip(labels, names))
        if self.reference_line and self.reference_line not in names:
            options.append((self.reference_line, self.reference_line))
        if tuple(options) != tuple(self.reference_choice.options):
            self.reference_choice.options = options

    def line_name(self, name):
        """The catalog line that stands for marker ``name`` as velocity zero: a hyperfine group is
        represented by its strongest component (the trade's usual velocity reference for a group)."""
        return self._strongest.get(str(name), str(name))

    # --------------------------------------------------------------- markers
    def _refresh_lines(self):
        if self.velocity_only:
            return
        with self.status.guard("finding catalog lines in the band"):
            if self._band_lines is None:
                self._band_lines = BandLines(
                    self.catalog, species=self.species or None,
                    family=None if self.species or len(self.families) == len(LINE_FAMILIES) else self.families,
                    spin_isomer=None if self.spin_isomer == "any" else self.spin_isomer,
                    max_E_up=None if self.max_E_up is None else self.max_E_up * u.K,
                    group_hyperfine=not self.hyperfine_components)
            lo, hi = self.band
            # Widen by the slider's range so lines shifted into the band by the offset are kept.
            pad = 1 + self.velocity_range / SPEED_OF_LIGHT.value
            previous = self.lines
            lines = self._band_lines.in_band(lo / pad * u.GHz, hi * pad * u.GHz, self.z)
            if lines is not previous:  # the same table updated in place: traitlets would compare it row by row
                self.lines = lines
            if self.lines is not previous:
                self.refresh_reference_options()
                self._label_priority = label_priority(self.lines, self.reference_line)
            self._place_markers()

    def _place_markers(self):
        with self.status.guard("placing the line markers"):
            if self.lines is None or len(self.lines) == 0:
                x = np.array([])
            else:
                rest = self.view._rest()
                x = marker_positions(u.Quantity(self.lines["rest_frequency"], u.GHz), self.view.axis_kind, z=self.z,
                                     velocity_offset=self.velocity_offset * u.km / u.s,
                                     convention=self.view.convention, reference_rest_frequency=rest).value
            self.marker_x = x
            # Only markers inside the drawn band: one outside is not drawn (and cannot stretch the axis).
            shown = np.flatnonzero(self.view.in_view(x)) if len(x) else np.array([], dtype=int)
            self.shown_markers = shown
            names = np.asarray(self.lines["name"], dtype=str)[shown].tolist() if len(shown) else []
            xs = x[shown]
            n = len(xs)
            placement = self._layout_labels(xs, names, shown)
            # Each mark in one message, and only what changed: every message is a redraw in the browser (#20).
            update_mark(self.stems, x=np.repeat(xs[:, None], 2, axis=1) if n else [],
                        y=np.tile([0.0, HEAD_HEIGHT], (n, 1)) if n else [])
            update_mark(self.heads, x=xs, y=np.full(n, HEAD_HEIGHT), names=names)
            for r, mark in enumerate(self.labels):
                pick = np.flatnonzero(placement.row == r) if n else np.array([], dtype=int)
                update_mark(mark, x=np.asarray(placement.x)[pick] if n else [], y=np.full(len(pick), HEAD_HEIGHT),
                            text=[names[i] for i in pick])

    def _layout_labels(self, xs, names, shown):
        """Label rows (`label_rows`) of the drawn markers, widths converted from pixels to axis units."""
        if not len(xs) or not self.view.x_range:
            self.labelled_markers = np.array([], dtype=int)
            return label_rows(np.zeros(0), 0.0, (0.0, 1.0))
        low, high = self.view.x_range
        per_pixel = (high - low) / self.plot_width
        widths = (np.array([len(name) for name in names]) * LABEL_CHAR_WIDTH) * per_pixel
        priority = getattr(self, "_label_priority", None)
        priority = priority[shown] if priority is not None and len(priority) == len(self.lines) else None
        placement = label_rows(xs, widths, (low, high), priority=priority, max_rows=self.label_row_count,
                               gap=LABEL_GAP * per_pixel)
        self.labelled_markers = shown[placement.row >= 0]
        return placement

    def _describe(self, index):
        row = self.lines[int(index)]
        rest = u.Quantity(row["rest_frequency"], u.GHz).to_value(u.GHz)
        drawn = float(self.drawn_frequencies()[int(index)])
        e_up = u.Quantity(row["E_up"], u.K).to_value(u.K)
        shift = f" shifted by {self.velocity_offset:+.1f} km/s" if self.velocity_offset else ""
        text = (f"<b>{html.escape(str(row['name']))}</b><br>rest frequency {rest:.6f} GHz"
                f"<br>drawn at {drawn:.6f} GHz (z = {_format_z(self.z)}{shift})"
                f"<br>E_up/k {e_up:.1f} K<br>spin isomer {html.escape(str(row['spin_isomer']))}"
                f"<br>source: {html.escape(_short_source(str(row['provenance'])))}")
        group = str(row["hyperfine_group"]) if "hyperfine_group" in row.colnames else ""
        if group and group == str(row["name"]):
            count = int(np.sum(np.asarray(self.catalog["hyperfine_group"]) == group))
            text += (f"<br>hyperfine group of {count} components, drawn at their intensity-weighted centre "
                     "(tick 'Hyperfine components' to see each)")
        return text

    def drawn_frequencies(self):
        """Observed frequencies (GHz) at which the markers are drawn: rest / (1 + z), moved by the velocity shift."""
        if self.lines is None or not len(self.lines):
            return np.array([])
        return marker_positions(u.Quantity(self.lines["rest_frequency"], u.GHz), "observed frequency", z=self.z,
                                velocity_offset=self.velocity_offset * u.km / u.s,
                                convention=self.view.convention).to_value(u.GHz)

    def _on_hover(self, mark, content):
        data = content.get("data") or content.get("point") or {}
        index = data.get("index")
        if index is not None and 0 <= int(index) < len(self.shown_markers):
            index = int(self.shown_markers[int(index)])  # drawn marker -> row of `lines`
        elif "x" in data and len(self.marker_x):
            index = int(np.argmin(np.abs(self.marker_x - float(data["x"]))))
        else:
            index = None
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

    def marker_near(self, x):
        """Row of `lines` whose drawn marker is nearest to ``x`` (current axis units), if within reach.

        Returns None when no drawn marker lies within `marker_reach` of the drawn x range.
        """
        shown = self.shown_markers
        if not len(shown) or not self.view.x_range:
            return None
        distance = np.abs(self.marker_x[shown] - float(x))
        nearest = int(np.argmin(distance))
        reach = self.marker_reach * (self.view.x_range[1] - self.view.x_range[0])
        return int(shown[nearest]) if distance[nearest] <= reach else None

    def _on_pointer(self, event, x, height):
        # The spectrum view's pointer: the marks themselves never see the mouse in the browser,
        # because bqplot's interaction layer lies over them.
        index = None if event == "leave" else self.marker_near(x)
        if event in ("move", "leave"):
            if index is None:
                self.clear_hover()
            else:
                self.hover(index)
            return False
        # Only in 'go' mode: in 'peaks' a click near a head still marks a peak.
        if event == "click" and self.view.mode == "go" and index is not None and height is not None \
                and abs(height - HEAD_HEIGHT) <= self.head_reach:
            self.reference_line = self.line_name(self.lines["name"][index])
            return True
        return False

    def clear_hover(self):
        """Show the hint again instead of a marker's details (the pointer left the markers)."""
        self._hover.value = _HOVER_HINT
        self.hover_text = ""

    def _on_head_selected(self, change):
        # Clicking a marker makes its line the velocity reference.
        if change.new is not None and len(change.new) and int(change.new[0]) < len(self.shown_markers):
            self.reference_line = self.line_name(self.lines["name"][int(self.shown_markers[int(change.new[0])])])

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
                self.status.info(f"{len(found)} redshift(s) fit the {len(peaks)} marked peaks; pick one under "
                                 "'Candidate z' and press 'Use this z'.")

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
        with self.status.guard("using the fitted redshift"):
            if not self.candidates:
                self.status.warn("No fitted redshifts yet: choose 'Peaks' above the spectrum and click two or "
                                 "more line tops first.")
                return
            self.z = float(self.candidates[int(index)].z)

    def _show_summary(self, z):
        """Luminosity distance, angular scale and age at ``z`` (run by the summary worker)."""
        if z <= 0:
            self.summary.value = "&nbsp;"
            return
        if not in_hubble_flow(z):
            self.summary.value = (
                f"<span style='color:#52606d;font-size:90%'>cz = {z * SPEED_OF_LIGHT.value:.1f} km/s: a local "
                f"velocity (below {HUBBLE_FLOW_MIN_VELOCITY.value:.0f} km/s peculiar and Galactic motions "
                "dominate), so no cosmological distance is given.</span>")
            return
        try:
            s = redshift_summary(z)
        except CubeloupeError as exc:
            self.summary.value = f"<span style='color:#829ab1'>{html.escape(str(exc))}</span>"
            return
        if z != self.z:
            return  # z moved on while this was worked out; the worker runs again for the new value
        distance = s.luminosity_distance.to_value(u.Mpc)
        self.summary.value = (
            f"<span style='color:#52606d;font-size:90%'>{html.escape(s.cosmology)} at this z: "
            f"D_L {distance:.{1 if distance < 100 else 0}f} Mpc · "
            f"{s.angular_scale.to_value(u.kpc / u.arcsec):.3g} kpc/arcsec · "
            f"cosmic age {s.age.to_value(u.Gyr):.2f} Gyr</span>")

    def wait_for_summary(self, timeout=5.0):
        """Block until the distance summary for the current z is shown (for scripts and tests)."""
        return self._summary_worker.wait_idle(timeout)


class _SummaryWorker:
    """Runs ``action(z)`` in one background thread once z has stopped changing for ``quiet`` seconds.

    One long-lived thread instead of one per change: starting a thread per keystroke or slider step
    costs more than moving the markers, and the computation would compete with them for the GIL.
    """

    def __init__(self, action, quiet=0.03):
        self._action = action
        self._quiet = quiet
        self._condition = threading.Condition()
        self._pending = None
        self._changed_at = 0.0
        self._busy = False
        self._thread = None

    def request(self, z):
        with self._condition:
            self._pending = float(z)
            self._changed_at = time.monotonic()
            if self._thread is None:
                self._thread = threading.Thread(target=self._run, name="cubeloupe-z-summary", daemon=True)
                self._thread.start()
            self._condition.notify()

    def _run(self):
        while True:
            with self._condition:
                while self._pending is None:
                    self._condition.wait()
                # Wait until z has been still for `quiet` seconds.
                while (left := self._changed_at + self._quiet - time.monotonic()) > 0:
                    self._condition.wait(left)
                z, self._pending = self._pending, None
                self._busy = True
            try:
                self._action(z)
            except Exception:  # noqa: BLE001 - a summary must never kill the worker
                log.exception("could not work out the distance summary for z = %s", z)
            finally:
                with self._condition:
                    self._busy = False
                    self._condition.notify_all()

    def wait_idle(self, timeout=5.0):
        deadline = time.monotonic() + timeout
        with self._condition:
            while self._pending is not None or self._busy:
                left = deadline - time.monotonic()
                if left <= 0:
                    return False
                self._condition.wait(min(left, 0.05))
        return True
