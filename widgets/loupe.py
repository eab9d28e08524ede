"""Loupe: the whole suite in one notebook cell — sky, spectra, lines, moments, measurements, exports.

``Loupe("cube.fits", z=2.1)`` or ``Loupe([window1, window2], z=...)`` shows
every part, linked. All of the suite's state is in traits on this object, so
a notebook (or a test) can read and set it without a browser; every number
shown comes from `cubeloupe.analysis`.

Examples
--------
>>> from cubeloupe.widgets import Loupe                                  # doctest: +SKIP
>>> loupe = Loupe(demo_path("disk"), z=0.0)                              # doctest: +SKIP
>>> loupe.add_region(CircleSkyRegion(center, 1 * u.arcsec), name="core")  # doctest: +SKIP
>>> loupe.line_window = [230.50, 230.56]   # GHz, observed                # doctest: +SKIP
>>> loupe.measurements[0]["flux"]                                         # doctest: +SKIP
"""

import os

import astropy.units as u
import ipywidgets as w
import numpy as np
from astropy.table import Table
from traitlets import Bool, Enum, Float, Instance, Int, List, TraitError, Unicode, link, observe, validate

from cubeloupe.analysis import (
    AXIS_KINDS, CONVENTIONS, CubeloupeError, RegionError, SpectralAxisError, catalog_line_at,
    NOMINAL_REST_FREQUENCY, channel_at, choose_velocity_reference, on_nominal_frequencies, velocity_convention_of,
    velocity_only, cube_rest_frequency, display_axis, load_catalog,
    correlated_measurement_table, open_cube, region_spectrum, write_maps, write_spectra,
)
from cubeloupe.analysis import first_view as find_first_view

from ._look import section
from .channel_bar import ChannelBar
from .cube_summary import cube_summary, title_html, window_name
from .channel_map_panel import ChannelMapPanel  # channel maps (#18)
from .code_view import CodeView  # sessions and replay (#19)
from .excitation_panel import ExcitationPanel  # population diagrams (#16)
from .export_panel import ExportPanel
from .fit_panel import FitPanel  # Gaussian and hyperfine fits (#18)
from .line_overlay import LineOverlay
from .measurement_table import MeasurementTable
from .moment_panel import MomentPanel
from .pv_panel import PVPanel  # position–velocity slices (#18)
from .region_list import RegionList, check_regions
from .replay import to_code  # sessions and replay (#19)
from .session import made_with, read_session, session_state, write_session  # sessions and replay (#19)
from .sky_view import SkyView
from .smoothing_choice import SmoothingChoice  # smoothing the spectra (#18)
from .snapshot import render_sky, render_spectrum
from .spectrum_view import SpectrumView
from .status import StatusLine

__all__ = ["Loupe"]

SKY_COLUMN = 460  # px: the sky image, its colour bar and the sky controls


# Name of the aperture the suite places by itself on the brightest emission when it opens.
FIRST_REGION_NAME = "peak (auto)"


class Loupe(w.VBox):
    """Linked sky view, spectrum view, line overlay, moment maps and measurements for line cubes.

    Parameters
    ----------
    cubes : str, Path, SpectralCube, or a list of them
        One cube, or the spectral windows of one delivery (each may have its own channel
        width, beam and pixel grid).
    z : float
        Source redshift.
    catalog : str, Path, Table or list, optional
        Extra line lists merged into the bundled catalog (see `load_catalog`), or a Table
        from `load_catalog` used as is.
    rest_frequency : Quantity [frequency], optional
        Of the line velocities refer to (velocity zero is ``rest_frequency / (1 + z)``). By
        default the cube's RESTFRQ; without one, the lowest-energy catalog line in the band
        when z > 0, else the band centre once a velocity is needed (the status line says so).
    convention : {'radio', 'optical', 'relativistic'}
    velocity_offset : Quantity [velocity] or float (km/s), optional
        Systemic velocity that shifts the catalog line markers (e.g. a nearby galaxy's).
    first_view : bool
        Open on the channel with the brightest emission, with a beam-sized
        aperture on its brightest place as a first region (see
        `cubeloupe.analysis.first_view`); False opens on channel 0 with no region.
    client : distributed.Client or 'default', optional
        Send the moment-map computation to a dask.distributed cluster (see
        `cubeloupe.analysis.moment_maps`); by default it runs in this kernel,
        one thread per core. Views always read from the kernel's own memory map.

    Attributes
    ----------
    window, channel, z, velocity_offset, rest_frequency, reference_line, velocity_reference, convention,
    axis_kind, regions,
    line_free, line_window, peaks, baseline_order, show_subtracted, clip, moments, measurements,
    magnification, cosmology, sky_source
        The suite's state (see each trait's help); all readable and settable from code.
    cubes : list of SpectralCube
    spectra : dict
        Region name -> list of OneDSpectrum (None where a window has no pixels of the region).
    """

    window = Int(0, help="Spectral window (index into cubes) shown on the sky")
    channel = Int(0, help="Channel of the current window shown on the sky")
    z = Float(0.0, help="Source redshift")
    velocity_offset = Float(0.0, help="Systemic velocity shift (km/s) applied to the catalog line markers")
    rest_frequency = Float(0.0, help="Rest frequency (GHz) of the line velocities refer to (0: the file's RESTFRQ)")
    reference_line = Unicode("", help="Catalog name of the line velocities refer to ('' for none)")
    velocity_reference = Unicode("", help="What velocity zero is, in words (read-only): a catalog line, the "
                                          "cube's RESTFRQ, a rest frequency, or the band centre")
    convention = Enum(list(CONVENTIONS), "radio", help="Velocity convention")
    axis_kind = Enum(list(AXIS_KINDS), "observed frequency", help="x axis of the spectrum view")
    regions = List(help="Regions as dicts (name, color, kind, sky shape); see RegionList")
    line_free = List(help="Line-free ranges, [[low, high], ...] observed frequency in GHz")
    line_window = List(help="Line window, [low, high] observed frequency in GHz (empty: none)")
    peaks = List(help="Marked peak positions, observed frequency in GHz")
    baseline_order = Int(1, help="Order of the polynomial baseline (0 to 5)")
    show_subtracted = Bool(False, help="Show spectra with the baseline subtracted")
    clip = Float(None, allow_none=True, help="Clip level for moments 1 and 2, in units of the pixel rms")
    sky_source = Unicode("channel", help="What the sky view shows: 'channel' or a moment map name")
    moments = Instance(object, allow_none=True, help="The last MomentMaps result (read-only)")
    measurements = List(help="Line measurements per region and window (read-only; see MeasurementTable)")
    spectrum_span = Enum(["all", "window"], "all", help="What the spectrum's x axis spans: every window, or "
                                                      "the window shown on the sky")
    magnification = Float(1.0, help="Lensing magnification divided out of luminosities")
    cosmology = Unicode("Planck18", help="astropy cosmology used for luminosities")

    def __init__(self, cubes, z=0.0, catalog=None, rest_frequency=None, convention="radio", velocity_offset=None,
                 client=None, first_view=True, **kwargs):
        self.status = StatusLine()
        self.client = client
        self.cubes = []
        self.spectra = {}
        self._region_keys = {}
        self._measure_enabled = False
        items = cubes if isinstance(cubes, (list, tuple)) else [cubes]
        for item in items:
            with self.status.guard(f"opening {item if isinstance(item, (str, os.PathLike)) else 'a cube'}"):
                self.cubes.append(open_cube(item) if isinstance(item, (str, os.PathLike)) else item)
        title = w.HTML(title_html("line cube inspection"))
        title.add_class("cubeloupe-header")
        if not self.cubes:
            super().__init__(children=[title, self.status], **kwargs)
            self.add_class("cubeloupe-loupe")
            if not self.status.message:
                self.status.error("No cube to show: pass the path of a FITS line cube, e.g. Loupe('cube.fits').")
            return
        problem = self.status.message if self.status.level == "error" else ""
        if rest_frequency is not None and not isinstance(rest_frequency, u.Quantity):
            problem = problem or (f"rest_frequency={rest_frequency!r} has no unit; pass e.g. {rest_frequency!r} * u.GHz "
                                  "(import astropy.units as u). The suite opened without it.")
            rest_frequency = None
        self.velocity_only = False
        if any(velocity_only(c) for c in self.cubes):
            with self.status.guard("placing a velocity-only cube"):
                rest_frequency, convention = self._adopt_velocity_axis(rest_frequency, convention)
        self.catalog, self.catalog_argument = self._load_catalog(catalog), catalog  # sessions record the latter
        self._build()
        self.header = title
        super().__init__(children=self._layout(title), **kwargs)
        self.add_class("cubeloupe-loupe")
        self._link_parts()
        with self.status.guard("setting the redshift and line"):
            self.convention = convention
            self.z = z
            if velocity_offset is not None:
                offset = float(u.Quantity(velocity_offset, u.km / u.s).to_value(u.km / u.s))
                if abs(offset) > 0.6 * self.line_overlay.velocity_range:
                    # Room on the slider either side of the systemic velocity, in whole 500 km/s.
                    self.line_overlay.velocity_range = 500.0 * np.ceil(1.5 * abs(offset) / 500.0)
                self.velocity_offset = offset
            self._choose_rest_frequency(rest_frequency)
        self._describe_reference()
        self._show_header()
        if self.velocity_only:
            self._show_velocity_only()
        self._measure_enabled = True
        if first_view:
            self.show_first_view()
        if problem:
            self.status.error(problem)

    # ------------------------------------------------------------- building
    def _adopt_velocity_axis(self, rest_frequency, convention):
        """Velocity-axis cubes without a rest frequency: put them on a frequency axis (see `on_nominal_frequencies`).

        With ``rest_frequency`` given, that is the real axis. Without, the axis is nominal: the suite
        then works in the cube's own velocities and convention only, and shows no frequency.
        """
        cube_convention = velocity_convention_of(next(c for c in self.cubes if velocity_only(c)))
        rest = NOMINAL_REST_FREQUENCY if rest_frequency is None else u.Quantity(rest_frequency).to(
            u.GHz, equivalencies=u.spectral())
        self.cubes = [on_nominal_frequencies(c, rest) if velocity_only(c) else c for c in self.cubes]
        if rest_frequency is None:
            self.velocity_only = True
            self.status.warn(f"{window_name(self.cubes[0], 0)} has a velocity axis ({cube_convention} "
                             "convention) and no rest frequency: the suite works in the file's velocities; "
                             "frequencies and catalog lines cannot be shown. Pass rest_frequency=... to place "
                             "them.")
            return None, cube_convention
        return rest, convention

    def _show_velocity_only(self):
        """Lock the frame to the file's velocities: velocity axis, its convention, no lines, no z."""
        self.axis_kind = "velocity"
        self.spectrum_view.velocity_only = True
        self.channel_bar.velocity_only = True
        self.line_overlay.velocity_only = True
        self.velocity_reference = "the cube's own velocity axis"

    def _load_catalog(self, catalog):
        if isinstance(catalog, Table):
            return catalog
        result = None
        with self.status.guard("loading the line catalog"):
            result = load_catalog(extra=catalog)
        return result if result is not None else load_catalog()

    def _build(self):
        self.sky_view = SkyView(self.cubes, status=self.status)
        self.channel_bar = ChannelBar(self.cubes[0])
        self.region_list = RegionList(self.cubes[0].wcs)
        # Each part reports in a status line of its own, next to its controls; the suite's line
        # (under the channel bar) is for the sky, regions and opening.
        self.spectrum_view = SpectrumView(status=StatusLine())
        restfrq = cube_rest_frequency(self.cubes[0])
        self.spectrum_view.file_rest_frequency = None if restfrq is None else float(restfrq.to_value(u.GHz))
        self.smoothing = SmoothingChoice(self.spectrum_view, status=StatusLine())  # under the spectrum (#18)
        self._frequencies = [display_axis(c, "observed frequency").to_value(u.GHz) for c in self.cubes]
        band = (min(f.min() for f in self._frequencies), max(f.max() for f in self._frequencies))
        self._all_band = band
        # Windows far apart (more gap than data on the axis) would each be a sliver: show one at a time.
        covered = sum(f.max() - f.min() for f in self._frequencies)
        self.spectrum_span = "window" if covered < 0.5 * (band[1] - band[0]) else "all"
        self._show_span()
        self.line_overlay = LineOverlay(self.spectrum_view, band, catalog=self.catalog, status=StatusLine())
        self.moment_panel = MomentPanel(self._moment_inputs, status=StatusLine())
        self.measurement_table = MeasurementTable(show_window=len(self.cubes) > 1)
        self.window_choice = w.Dropdown(options=[(f"{i}: {window_name(c, i)} ({f.min():.3f}–{f.max():.3f} GHz)", i)
                                                 for i, (c, f) in enumerate(zip(self.cubes, self._frequencies))],
                                        description="Sky shows",
                                        tooltip="Which spectral window (cube) the sky view shows",
                                        style={"description_width": "initial"},
                                        layout=w.Layout(width="440px",
                                                        display="" if len(self.cubes) > 1 else "none"))
        self.window_choice.add_class("cubeloupe-window-choice")
        self.span_choice = w.ToggleButtons(options=[("all windows", "all"), ("this window", "window")],
                                           value=self.spectrum_span, description="Spectrum spans",
                                           tooltips=["The spectrum's axis covers all windows, gaps included",
                                                     "The spectrum's axis covers the window shown on the sky"],
                                           style={"description_width": "initial", "button_width": "120px"},
                                           layout=w.Layout(display="" if len(self.cubes) > 1 else "none"))
        self.span_choice.add_class("cubeloupe-span-choice")
        self.export_box = ExportPanel(self)
        self.export_name, self.export_overwrite = self.export_box.name, self.export_box.overwrite
        self.export_status = self.export_box.status

    def _layout(self, title):
        tabs = w.Tab(children=[self.moment_panel, self.measurement_table, self.export_box])
        for i, name in enumerate(("Moment maps", "Measurements", "Export")):
            tabs.set_title(i, name)
        tabs.add_class("cubeloupe-actions")
        self.channel_map_panel, self.pv_panel = ChannelMapPanel(self, tabs), PVPanel(self, tabs)  # (#18)
        self.excitation_panel = ExcitationPanel(self, tabs)  # population diagrams (#16)
        # Sessions and replay (#19): the script of the current state, in a "Code" tab.
        self.code_view = CodeView(self, tabs)
        self.spectrum_view.figure.layout.height = "330px"
        sky = section("Sky", [self.window_choice, self.sky_view], width=f"{SKY_COLUMN}px",
                      css_class="cubeloupe-sky-section")
        spectrum_parts = ([self.span_choice] if len(self.cubes) > 1 else []) + [self.spectrum_view,
                                                                                self.spectrum_view.status,
                                                                                self.region_list]
        spectrum = section("Spectrum", spectrum_parts,
                           hint="drag on it to mark ranges; pick what a click does below",
                           css_class="cubeloupe-spectrum-section")
        # The sky column keeps its width; the spectrum column takes what is left (not its content's width).
        sky.layout.flex = f"0 0 {SKY_COLUMN}px"
        # Below ~900 px of room the spectrum column goes under the sky column instead of being squeezed.
        spectrum.layout.flex = "1 1 420px"
        spectrum.layout.min_width = "420px"
        views = w.HBox([sky, spectrum], layout=w.Layout(align_items="flex-start", grid_gap="16px",
                                                        flex_flow="row wrap"))
        channel = self.channel_bar
        channel.layout.margin = "6px 0 2px 0"
        channel.layout.border_top = "1px solid #d9e2ec"
        channel.layout.padding = "4px 0 0 0"
        self.status.layout.margin = "2px 0 8px 0"
        return [title, views, channel, self.status, self.line_overlay, tabs]

    def _show_header(self):
        """One thin line per cube: file, shape, band, beam, unit (the current window in bold)."""
        self.header.value = title_html(cube_summary(self.cubes, self._frequencies, self.window, self.convention,
                                                    self.velocity_only))

    def _link_parts(self):
        sv, sp, lo, rl, mp, mt, cb = (self.sky_view, self.spectrum_view, self.line_overlay, self.region_list,
                                      self.moment_panel, self.measurement_table, self.channel_bar)
        link((self, "window"), (sv, "window"))
        link((self, "window"), (self.window_choice, "value"))
        link((self, "spectrum_span"), (self.span_choice, "value"))
        link((self, "channel"), (sv, "channel"))
        link((self, "channel"), (cb, "channel"))
        link((self, "sky_source"), (sv, "source"))
        for name in ("z", "velocity_offset", "reference_line"):
            link((self, name), (lo, name))
        for name in ("z", "rest_frequency", "convention", "axis_kind", "line_free", "line_window", "peaks",
                     "baseline_order", "show_subtracted"):
            link((self, name), (sp, name))
        for name in ("z", "rest_frequency", "convention"):
            link((self, name), (cb, name))
        w.dlink((self, "velocity_reference"), (cb, "reference_label"), transform=self._short_reference)
        rl.observe(self._from_region_list, names="regions")  # not a link: see _on_regions
        link((self, "clip"), (mp, "clip"))
        link((self, "magnification"), (mt, "magnification"))
        link((self, "cosmology"), (mt, "cosmology"))
        sv.on_shape(self._on_shape)
        cb.on_brightest(self.go_to_brightest)
        sp.on_pick(self.go_to_frequency)
        mp.observe(self._on_moments, names=["maps"])
        self.smoothing.observe(self._on_smoothing, names=["settings"])
        self.fit_panel = FitPanel(self)  # in the measurements tab, refits when the measurements change (#18)

    def _choose_rest_frequency(self, rest_frequency):
        """Velocity zero by `choose_velocity_reference`: the given line, the cube's RESTFRQ, or a catalog line."""
        choice = choose_velocity_reference(self.cubes[0], self.z, rest_frequency=rest_frequency,
                                           catalog=self.catalog, band=u.Quantity(self._all_band, u.GHz))
        if choice.origin in ("given", "file"):
            self.rest_frequency = float(choice.rest_frequency.to_value(u.GHz))
        if choice.line and choice.origin in ("given", "catalog"):
            self.reference_line = choice.line

    def _catalog_name_of(self, rest_ghz):
        return catalog_line_at(rest_ghz * u.GHz, self.catalog)

    @observe("reference_line", "rest_frequency")
    def _describe_reference(self, change=None):
        if not self.cubes or not hasattr(self, "line_overlay"):
            return
        if self.velocity_only:
            self.velocity_reference = "the cube's own velocity axis"
            return
        if change is not None and change.name == "rest_frequency" and self.reference_line:
            # A rest frequency set by hand that is not the chosen line's: the line no longer applies.
            if self._catalog_name_of(self.rest_frequency) != self.reference_line:
                with self.line_overlay.keeping_rest_frequency():
                    self.reference_line = ""
        rest = self.rest_frequency
        restfrq = self.spectrum_view.file_rest_frequency
        if self.reference_line:
            text = self.reference_line
        elif rest > 0 and restfrq and abs(rest - restfrq) < 1e-9:
            text = f"cube's RESTFRQ {restfrq:.6g} GHz"
        elif rest > 0 and self.spectrum_view.band_centre_rest == rest:
            text = f"band centre (rest {rest:.6g} GHz)"
        elif rest > 0:
            text = f"rest frequency {rest:.6g} GHz"
        elif restfrq:
            text = f"cube's RESTFRQ {restfrq:.6g} GHz"
        else:
            text = ""
        self.velocity_reference = text

    @staticmethod
    def _short_reference(text):
        return text.replace("cube's ", "").replace("rest frequency ", "rest ")

    # ----------------------------------------------------------- validation
    @validate("window")
    def _valid_window(self, proposal):
        return self.sky_view.check_window(proposal["value"]) if self.cubes else 0

    @validate("channel")
    def _valid_channel(self, proposal):
        if not self.cubes:
            return 0
        return int(min(max(proposal["value"], 0), self.cube.shape[0] - 1))

    @validate("reference_line")
    def _valid_reference_line(self, proposal):
        # A line given by rest_frequency= or from code may lie outside the band: offer it in the choice too (#19).
        name = proposal["value"]
        choice = self.line_overlay.reference_choice if hasattr(self, "line_overlay") else None
        if name and choice is not None and name not in [value for _, value in choice.options]:
            if name not in set(np.asarray(self.catalog["name"])):
                raise TraitError(f"{name!r} is not a line of the catalog; pick one under 'Velocity zero' or set "
                                 "rest_frequency instead")
            choice.options = [*choice.options, (name, name)]
        return name

    @validate("sky_source")
    def _valid_sky_source(self, proposal):
        if proposal["value"] != "channel" and proposal["value"] not in self.sky_view.maps:
            raise TraitError(f"{proposal['value']!r} cannot be shown; choose from "
                             f"{['channel', *self.sky_view.maps]}")
        return proposal["value"]

    # ------------------------------------------------------------ reacting
    @observe("window")
    def _on_window(self, change):
        self.channel_bar.set_cube(self.cube)
        self.region_list.wcs = self.cube.wcs
        # The sky view drops its maps when its window changes: switch it first, then give back this window's (#19).
        self.sky_view.window = self.window
        self.sky_view.outlines = self.region_list.outlines_for(self.cube)
        if self.moment_panel.maps and self.moment_panel.window_index == self.window:
            self.sky_view.maps = self.moment_panel.maps
        self._update_cursor()
        if len(self.cubes) > 1:
            self._show_header()

    def _window_band(self, index):
        f = self._frequencies[index]
        return (float(f.min()), float(f.max()))

    @observe("spectrum_span", "window")
    def _on_span(self, change):
        if hasattr(self, "_all_band"):
            with self.status.guard("changing the spectrum's span"):
                self._show_span()

    def _show_span(self):
        """The spectrum's axis over all windows or the current one; the readout learns the other windows."""
        self.spectrum_view.band = self._all_band if self.spectrum_span == "all" else self._window_band(self.window)
        self.channel_bar.other_bands = [list(self._window_band(i)) for i in range(len(self.cubes)) if i != self.window]

    @observe("channel")
    def _update_cursor(self, change=None):
        self.spectrum_view.cursor_frequency = float(self._frequencies[self.window][self.channel])

    @validate("regions")
    def _valid_regions(self, proposal):
        return check_regions(proposal["value"])

    @observe("regions")
    def _on_regions(self, change):
        # The region list holds the shapes the spectra are made from: it takes the regions first. (A traitlets
        # link gave them to it after this observer, and broke when a region without spectrum was dropped; #19.)
        self.region_list.regions = change.new
        with self.status.guard("updating the region spectra"):
            self._sync_spectra()

    def _from_region_list(self, change):
        self.regions = change.new

    def _sync_spectra(self):
        current = {r["name"]: r for r in self.regions}
        for name in [n for n in self._region_keys if n not in current]:
            self._region_keys.pop(name)
            self.spectra.pop(name, None)
            self.spectrum_view.drop_spectra(name)
        failed = []
        for name, item in current.items():
            key = {k: v for k, v in item.items() if k != "color"}
            if self._region_keys.get(name) == key:
                if self.spectrum_view.spectra.get(name, {}).get("color") != item["color"]:
                    self.spectrum_view.recolor(name, item["color"])
                continue
            spectra, notes = [], []
            for index, cube in enumerate(self.cubes):
                try:
                    spectra.append(region_spectrum(cube, self.region_list.region_for(name, cube)))
                except RegionError as exc:
                    spectra.append(None)
                    notes.append(f"window {index}: {exc}")
            if all(s is None for s in spectra):
                failed.append((name, "; ".join(notes)))
                continue
            self._region_keys[name] = key
            self.spectra[name] = spectra
            self.spectrum_view.set_spectra(name, item["color"], self.smoothing.smooth_all(spectra, name), raw=spectra)
            if notes and len(self.cubes) > 1:
                self.status.warn(f"Region {name} has no spectrum in " + "; ".join(notes))
        self.sky_view.outlines = self.region_list.outlines_for(self.cube) if not failed else []
        if failed:
            # Keep the state consistent: a region with no spectrum anywhere is not kept.
            bad = {name for name, _ in failed}
            self.regions = [r for r in self.regions if r["name"] not in bad]
            self.status.error("Could not make a spectrum for " + "; ".join(f"region {n}: {why}" for n, why in failed))
            return
        self._measure()

    def _on_shape(self, kind, params):
        if kind == "path":
            return  # a path is no region: the position–velocity view takes it (#18)
        self.region_list.wcs = self.cube.wcs
        shape = self.region_list.from_gesture(kind, params, self.cube.wcs)
        if self.region_list.reshape and self.region_list.selected:
            self.region_list.replace(self.region_list.selected, shape)
        else:
            self.region_list.add(shape)

    @observe("line_window", "line_free", "baseline_order", "z", "rest_frequency", "convention", "magnification",
             "cosmology")
    def _on_measure_inputs(self, change):
        self._measure()

    def _on_moments(self, change):
        # New maps (not the same maps re-masked at another significance) are shown at once.
        fresh = self.moments is not self.moment_panel.result
        self.moments = self.moment_panel.result
        if self.moment_panel.window_index == self.window:
            self.sky_view.maps = dict(self.moment_panel.maps)
            if fresh and "moment 0" in self.sky_view.maps:
                # New maps: show them where the eye is, on the sky.
                self.sky_source = "moment 0"

    # ------------------------------------------------------------- actions
    @property
    def cube(self):
        """The cube of the current window."""
        return self.cubes[self.window]

    def add_region(self, shape, name=None, color=None):
        """Add a `regions` shape (sky, or pixel in the current window's grid); returns its name.

        Problems are shown in the status line (and None returned).
        """
        with self.status.guard("adding a region"):
            return self.region_list.add(shape, name=name, color=color)
        return None

    def remove_region(self, name):
        with self.status.guard(f"removing region {name}"):
            self.region_list.remove(name)

    def go_to_brightest(self):
        """Show the channel with the brightest emission of the current window (see `first_view`)."""
        with self.status.guard("finding the brightest channel"):
            view = find_first_view(self.cube)
            self.channel = view.channel
            self.status.info(f"Brightest emission: {view.description}.")
            return view.channel
        return None

    def show_first_view(self):
        """Go to the channel with the brightest emission and add a beam-sized aperture there (if no region yet)."""
        with self.status.guard("finding the emission to show first"):
            view = find_first_view(self.cube)
            self.channel = view.channel
            if not self.regions:
                self.region_list.add(view.region, name=FIRST_REGION_NAME)
            self.status.info(f"Opened on {view.description}. The region '{FIRST_REGION_NAME}' was placed "
                             "automatically; remove it or draw your own.")
            return view
        return None

    def go_to_frequency(self, frequency):
        """Show the channel nearest to observed ``frequency`` (GHz), switching window if needed."""
        for index in [self.window] + [i for i in range(len(self.cubes)) if i != self.window]:
            channel = channel_at(self._frequencies[index] * u.GHz, frequency * u.GHz)
            if channel is not None:
                self.window = index
                self.channel = channel
                return channel
        self.status.warn(f"{frequency:.6f} GHz lies in none of the spectral windows (in a gap between them).")
        return None

    def _ranges_in(self, index, ranges):
        f = self._frequencies[index]
        return [r for r in ranges if r[1] >= f.min() and r[0] <= f.max()]

    def _rest(self):
        return self.rest_frequency * u.GHz if self.rest_frequency > 0 else None

    def _line_label(self):
        if self.reference_line:
            return self.reference_line
        return f"{self.rest_frequency:.4f} GHz" if self.rest_frequency > 0 else "line"

    def _measure(self):
        if not self._measure_enabled:
            return
        table = None
        with self.status.guard("measuring the line"):
            if not self.line_window or not self.spectra:
                self.measurement_table.set_table(None)
                self.measurements = []
                return
            if self.z != 0 and self._rest() is None:
                raise SpectralAxisError("velocities need a line: pick it under 'Velocity zero' (or set "
                                        "rest_frequency) before measuring")
            table = correlated_measurement_table(  # errors count the smoothing's channel correlation (#18)
                self.spectrum_view.shown_spectra(), u.Quantity(self.line_window, u.GHz),
                line_free=u.Quantity(self.line_free, u.GHz) if self.line_free else None,
                order=self.baseline_order, rest_frequency=self._rest(), z=self.z, convention=self.convention,
                line=self._line_label(), cosmology=self.cosmology, magnification=self.magnification)
        # Once, after the work: clearing it first made the browser draw an empty table in between (#20).
        self.measurement_table.set_table(table)
        self.measurements = self.measurement_table.rows

    def _on_smoothing(self, change):
        """Show the spectra smoothed as chosen (the unsmoothed ones faint behind) and measure them (#18)."""
        with self.status.guard("smoothing the spectra"):
            for name, spectra in self.spectra.items():
                self.spectrum_view.set_spectra(name, self.spectrum_view.spectra[name]["color"],
                                               self.smoothing.smooth_all(spectra, name), raw=spectra)
            self._measure()

    def _moment_inputs(self):
        if not self.line_window:
            raise SpectralAxisError("no line window yet: choose 'Line window' above the spectrum and drag across "
                                    "the line first")
        free = self._ranges_in(self.window, self.line_free)
        return {"cube": self.cube, "window": u.Quantity(self.line_window, u.GHz),
                "line_free": u.Quantity(free, u.GHz) if free else None, "order": self.baseline_order,
                "rest_frequency": self._rest(), "z": self.z, "convention": self.convention,
                "client": self.client, "window_index": self.window}

    def make_moments(self, wait=False):
        """Start the moment maps of the current window (in a background thread); optionally wait."""
        thread = self.moment_panel.start()
        if wait and thread is not None:
            self.moment_panel.wait()
        return thread

    # ------------------------------------------------------------- exports
    def provenance(self):
        """How the suite's results were made, as a plain dict for the metadata of exported files.

        The session description (`session_state`: cube files, regions with their sky shapes,
        line window, line-free ranges, baseline order, z, velocity convention, rest frequency,
        cosmology, magnification, cubeloupe version), so that an export and a saved session say
        the same thing.
        """
        return {"cubeloupe_session": session_state(self)}

    def export_moments(self, path, overwrite=False):
        """Write the last moment maps to one FITS file (WCS, beam and BUNIT kept; HISTORY says how)."""
        if not self.moment_panel.maps:
            raise CubeloupeError("there are no moment maps yet; make them first ('Make moment maps')")
        return write_maps(self.moment_panel.maps, path, overwrite=overwrite, history=made_with(self))

    def export_spectra(self, path, overwrite=False):
        """Write every region's spectra (all windows) to one ECSV file, with how they were made in its metadata."""
        spectra = self.spectra
        if self.velocity_only:
            # Their frequencies are nominal: write the file's own velocities instead.
            spectra = {name: [None if s is None else s.with_spectral_unit(
                u.km / u.s, velocity_convention=self.convention, rest_value=NOMINAL_REST_FREQUENCY)
                for s in items] for name, items in spectra.items()}
        return write_spectra(spectra, path, overwrite=overwrite, meta=self.provenance())

    def export_measurements(self, path, overwrite=False):
        """Write the measurement table to ECSV, with how it was made in its metadata."""
        if not self.measurements:
            raise CubeloupeError("there are no measurements yet; add a region and mark the line window")
        return self.measurement_table.export_ecsv(path, overwrite=overwrite, meta=self.provenance())

    def save_picture(self, view, path, overwrite=False):
        """Draw the 'sky' or 'spectrum' view to PNG/SVG/PDF with matplotlib (works without a browser).

        For a pixel-exact copy of what the browser shows use ``loupe.sky_view.figure.save_png()``
        (or ``save_svg``): bqplot makes those in the browser, which downloads the file; they do
        nothing when no browser is attached.
        """
        if view == "sky":
            return render_sky(self.sky_view, path, overwrite=overwrite, rest_frequency=self._rest(), z=self.z,
                              convention=self.convention)
        if view == "spectrum":
            return render_spectrum(self.spectrum_view, path, overwrite=overwrite)
        raise CubeloupeError(f"unknown view {view!r}; choose 'sky' or 'spectrum'")

    # ------------------------------------------------ sessions and replay (#19)
    def to_code(self):
        """The current state as a script that re-makes it (`cubeloupe.widgets.replay.to_code`)."""
        return to_code(self)

    def save_session(self, path, overwrite=False):
        """Write the session to a JSON file (never replacing one unless ``overwrite``); returns its path."""
        return write_session(self, path, overwrite=overwrite)

    @classmethod
    def from_session(cls, path, **kwargs):
        """A new suite in the state saved in session file ``path`` (checked before anything is built)."""
        return read_session(path).restore(cls, folder=os.path.dirname(os.path.abspath(path)), **kwargs)
