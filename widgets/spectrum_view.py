"""SpectrumView: region spectra of every spectral window on one axis, with marked ranges and baselines.

Line-free ranges, the line window and peaks are stored as observed
frequencies (GHz), so they stay on the same channels when the x axis or the
redshift changes. Baselines come from `cubeloupe.analysis.fit_baseline`;
axes from `cubeloupe.analysis.display`.
"""

import astropy.units as u
import ipywidgets as w
import numpy as np
from bqplot import Axis, Figure, LinearScale, Lines, Scatter
from bqplot.interacts import BrushIntervalSelector
from bqplot_image_gl.interacts import MouseInteraction
from traitlets import Bool, Enum, Float, Int, List, TraitError, observe, validate

from cubeloupe.analysis import (
    AXIS_KINDS, CONVENTIONS, MAX_ORDER, CubeloupeError, FitError, SpectralRangeError, check_order, display_axis,
    fit_baseline, nice_ticks, tick_decimals, to_observed_frequency, unit_text,
)

from ._look import BASELINE_COLOR, CHANNEL_COLOR, LINE_FREE_FILL, LINE_WINDOW_FILL, PEAK_COLOR, row
from .mark_update import SPARE_MARKS, update_mark
from .status import StatusLine

__all__ = ["SpectrumView", "CLICK_MODES", "RANGE_MODES"]

# A fitted line model (raspberry, over every region colour) and its residuals (slate); our own picks.
FIT_COLOR, RESIDUAL_COLOR = "#b0174f", "#62768c"

# What a click or drag on the spectrum does: value -> (label, tooltip)
CLICK_MODES = {
    "go": ("Go to channel", "Click the spectrum to show that channel on the sky"),
    "line-free": ("Line-free", "Drag across channels without line emission; the baseline is fitted there"),
    "window": ("Line window", "Drag across the line to set the window used for measurements and moment maps"),
    "peaks": ("Peaks", "Click the tops of lines you see; with two or more the redshift is solved"),
}
PREDICTION_COLOR = "#7b2cbf"  # a predicted (model) spectrum over the data (#16)
# The modes in which a drag marks a spectral range.
RANGE_MODES = ("line-free", "window")


def _pairs(value):
    return [[float(min(a, b)), float(max(a, b))] for a, b in value]


def drawable(x, y):
    """``x``, ``y`` without their trailing non-finite points (blanked end channels).

    bqplot places each line's (hidden) label at its last point; a NaN there is written as
    "translate(975,undefined)" and the browser logs an SVG error (issue #17, the varying-beams demo).
    """
    y = np.asarray(y, dtype=float)
    finite = np.flatnonzero(np.isfinite(y) & np.isfinite(np.asarray(x, dtype=float)))
    end = int(finite[-1]) + 1 if finite.size else 0
    return np.asarray(x)[:end], y[:end]


class SpectrumView(w.VBox):
    """Spectra of the regions on one spectral axis, with line-free ranges, line window and baseline.

    Parameters
    ----------
    status : StatusLine, optional

    Attributes
    ----------
    axis_kind, convention, z, rest_frequency, line_free, line_window, peaks, baseline_order,
    show_subtracted, mode, cursor_frequency
        See each trait's help.
    spectra : dict
        ``name -> {"color": str, "spectra": [OneDSpectrum or None per window]}`` (set with `set_spectra`).
    fits : dict
        ``(name, window) -> BaselineFit`` for every spectrum the line-free ranges cover.
    """

    axis_kind = Enum(list(AXIS_KINDS), "observed frequency", help="What the x axis shows")
    convention = Enum(list(CONVENTIONS), "radio", help="Velocity convention of a velocity axis")
    z = Float(0.0, help="Source redshift (rest-frequency axis and velocity axis)")
    rest_frequency = Float(0.0, help="Rest frequency (GHz) velocities refer to; 0 uses the file's RESTFRQ")
    line_free = List(List(Float(), minlen=2, maxlen=2),
                     help="Line-free ranges as [low, high] observed frequencies in GHz")
    line_window = List(Float(), help="The line window as [low, high] observed frequency in GHz (empty: none)")
    peaks = List(Float(), help="Marked peak positions, observed frequency in GHz")
    baseline_order = Int(1, help=f"Order of the polynomial baseline (0 to {MAX_ORDER})")
    show_subtracted = Bool(False, help="Show spectra with the baseline subtracted")
    show_raw = Bool(True, help="Draw the unsmoothed spectra (given to set_spectra as raw) faintly behind the "
                               "smoothed ones")
    velocity_only = Bool(False, help="The cube has a velocity axis and no rest frequency: only the velocity axis, "
                                     "in the file's convention, can be shown")
    mode = Enum(list(CLICK_MODES), "go", help="What clicking or dragging on the spectrum does")
    cursor_frequency = Float(None, allow_none=True, help="Observed frequency (GHz) of the channel on the sky")
    brushing = Bool(False, help="True while a range is being dragged (heavy work waits until release)")
    x_range = List(Float(), help="The x range drawn, [low, high] in the axis unit (read-only): the data band(s) "
                                 "with a small margin; empty until the band is known")

    #: Fraction of the band's width left free on each side of the x axis.
    band_margin = 0.02

    def __init__(self, status=None, **kwargs):
        self.status = status or StatusLine()
        self._band = None
        # The cube's own rest frequency (RESTFRQ, GHz), used for velocities when no line is chosen.
        self.file_rest_frequency = None
        self.band_centre_rest = None  # the rest frequency adopted from the band centre, if that happened
        self.spectra = {}
        self.fits = {}
        self.curve_marks = {}
        self._spare_curves = []  # empty curve marks in the figure, for the next spectra (see _new_curve)
        self.model_marks = {}
        # Smoothing and Gaussian fits (#18): unsmoothed curves drawn faintly, fitted models and residuals.
        self.raw_spectra, self.raw_marks, self.line_fits, self.fit_marks = {}, {}, {}, {}
        self._pick_callbacks = []
        self._pointer_callbacks = []
        self._overlay_marks = []
        self.prediction = []  # [(observed frequency GHz, values)] of a predicted spectrum (#16)
        self._build()
        super().__init__(children=[self._toolbar, self.figure], **kwargs)
        self.add_class("cubeloupe-spectrum-view")
        self._draw_ranges()

    @property
    def band(self):
        """(low, high) observed frequency in GHz covered by the data (all windows); set by the owner."""
        return self._band

    @band.setter
    def band(self, value):
        self._band = None if value is None else (float(min(value)), float(max(value)))
        self._update_x_range()

    # ------------------------------------------------------------- building
    def _build(self):
        # The x range is set from the data band (see _update_x_range), not from the marks: a line
        # marker or a cursor outside the band must not stretch the axis.
        self.x_scale = LinearScale(allow_padding=False)
        self.y_scale = LinearScale()
        self.band_scale = LinearScale(min=0.0, max=1.0, allow_padding=False)
        self.x_axis = Axis(scale=self.x_scale, label="observed frequency (GHz)", grid_lines="none")
        self.y_axis = Axis(scale=self.y_scale, side="left", label="", grid_lines="dashed", label_offset="58px")
        band = {"x": self.x_scale, "y": self.band_scale}
        self.free_mark = Lines(x=[], y=[], scales=band, fill="inside", colors=[LINE_FREE_FILL],
                               fill_colors=[LINE_FREE_FILL], fill_opacities=[0.3], stroke_width=0)
        self.window_mark = Lines(x=[], y=[], scales=band, fill="inside", colors=[LINE_WINDOW_FILL],
                                 fill_colors=[LINE_WINDOW_FILL], fill_opacities=[0.3], stroke_width=0)
        self.cursor_mark = Lines(x=[], y=[0, 1], scales=band, colors=[CHANNEL_COLOR], stroke_width=1.5,
                                 line_style="dashed")
        self.peak_mark = Scatter(x=[], y=[], scales=band, colors=[PEAK_COLOR], marker="triangle-down",
                                 default_size=64)
        self.zero_mark = Lines(x=[], y=[], scales={"x": self.x_scale, "y": self.y_scale},
                               colors=[BASELINE_COLOR], stroke_width=0.8)
        self.prediction_mark = Lines(x=[], y=[], scales={"x": self.x_scale, "y": self.y_scale},
                                     colors=[PREDICTION_COLOR], stroke_width=1.6)  # a model curve (#16)
        self.figure = Figure(marks=[], axes=[self.x_axis, self.y_axis],
                             fig_margin={"top": 30, "bottom": 45, "left": 72, "right": 84},
                             layout=w.Layout(width="calc(100% - 4px)", height="360px"))
        self.figure.add_class("cubeloupe-spectrum-figure")
        # The pointer is followed in every mode. bqplot lays its interaction layer over the marks,
        # so marks never see the mouse: line markers are found from the pointer's position instead
        # (see on_pointer). In the range modes the brush is chained after the pointer (`next`):
        # drags then brush a range and pointer moves still reach the kernel. The y scale is the
        # band scale, so a height comes as a fraction of the plot (0 at the bottom, 1 at the top).
        self.clicker = MouseInteraction(x_scale=self.x_scale, y_scale=self.band_scale,
                                        events=["click", "mousemove", "mouseleave"])
        self.clicker.on_msg(self._on_click_msg)
        self.brush = BrushIntervalSelector(scale=self.x_scale, marks=[], color=LINE_WINDOW_FILL)
        self.brush.observe(self._on_brushing, names=["brushing"])
        self.figure.interaction = self.clicker
        self._spare_curves = self._make_spare_curves()  # waiting from the start (#20)
        self._set_marks()

        self.axis_choice = w.Dropdown(options=list(AXIS_KINDS), description="x axis",
                                      tooltip="Draw the spectrum against the observed (sky) frequency, the "
                                              "frequency in the source's rest frame, or velocity relative to "
                                              "the chosen line",
                                      style={"description_width": "initial"}, layout=w.Layout(width="196px"))
        self.axis_choice.add_class("cubeloupe-axis-choice")
        w.link((self.axis_choice, "value"), (self, "axis_kind"))
        self.convention_choice = w.Dropdown(options=list(CONVENTIONS), description="Velocity convention",
                                            tooltip="Velocity convention: radio, optical or relativistic "
                                                    "(used by the velocity axis, the channel readout and "
                                                    "the measurements)",
                                            style={"description_width": "initial"},
                                            layout=w.Layout(width="226px"))
        self.convention_choice.add_class("cubeloupe-convention")
        w.link((self.convention_choice, "value"), (self, "convention"))
        self.mode_buttons = w.ToggleButtons(options=[(label, key) for key, (label, _) in CLICK_MODES.items()],
                                            tooltips=[tip for _, tip in CLICK_MODES.values()],
                                            style=w.ToggleButtonsStyle(button_width="112px"))
        self.mode_buttons.add_class("cubeloupe-spectrum-mode")
        w.link((self.mode_buttons, "value"), (self, "mode"))
        self.order_choice = w.BoundedIntText(value=1, min=0, max=MAX_ORDER, description="Baseline order",
                                             tooltip="Degree of the polynomial fitted to the line-free "
                                                     "channels: 0 is a flat offset, 1 a sloped line",
                                             style={"description_width": "initial"}, layout=w.Layout(width="136px"))
        self.order_choice.add_class("cubeloupe-baseline-order")
        w.link((self.order_choice, "value"), (self, "baseline_order"))
        self.subtract_toggle = w.Checkbox(value=False, description="Subtract", indent=False,
                                          tooltip="Show the spectra with the fitted baseline subtracted",
                                          layout=w.Layout(width="86px"))
        self.subtract_toggle.add_class("cubeloupe-subtract")
        w.link((self.subtract_toggle, "value"), (self, "show_subtracted"))
        self.clear_button = w.Button(description="Clear", icon="eraser", layout=w.Layout(width="84px"),
                                     tooltip="Forget the line-free ranges, line window and peaks marked so far")
        self.clear_button.add_class("cubeloupe-clear-marks")
        self.clear_button.on_click(lambda _: self.clear_marks())
        self._toolbar = w.VBox([
            row([self.axis_choice, self.convention_choice, self.order_choice, self.subtract_toggle],
                flex_flow="row wrap"),
            row([self.mode_buttons, self.clear_button], flex_flow="row wrap"),
        ])

    @observe("velocity_only")
    def _on_velocity_only(self, change):
        # Frequencies of a velocity-only cube are nominal: neither they nor another convention may be shown.
        self.axis_choice.options = ["velocity"] if self.velocity_only else list(AXIS_KINDS)
        self.axis_choice.disabled = self.convention_choice.disabled = self.velocity_only
        if self.velocity_only:
            self.axis_kind = "velocity"

    def _set_marks(self):
        curves = []
        for key in self.curve_marks:
            if key in self.model_marks:
                curves.append(self.model_marks[key])
            if key in self.raw_marks and self.show_raw:
                curves.insert(0, self.raw_marks[key])
            curves.append(self.curve_marks[key])
        # The spare curves next: the first becomes the next spectrum's curve with the mark list unchanged.
        curves += self._spare_curves
        curves += [mark for key in self.curve_marks for mark in self.fit_marks.get(key, ())]
        self.figure.marks = [self.free_mark, self.window_mark, self.zero_mark, *curves, self.prediction_mark,
                             *self._overlay_marks, self.peak_mark, self.cursor_mark]

    def add_overlay_marks(self, marks):
        """Put marks (e.g. catalog line markers) on the figure above the spectra."""
        self._overlay_marks = list(marks)
        self._set_marks()

    # ------------------------------------------------------------ validation
    @validate("baseline_order")
    def _valid_order(self, proposal):
        try:
            return check_order(proposal["value"])
        except FitError as exc:
            raise TraitError(str(exc)) from None

    @validate("line_free")
    def _valid_line_free(self, proposal):
        return _pairs(proposal["value"])

    @validate("line_window")
    def _valid_window(self, proposal):
        value = list(proposal["value"])
        if value and len(value) != 2:
            raise TraitError(f"line_window must be [low, high] in GHz or empty; got {value}")
        return [float(min(value)), float(max(value))] if value else []

    # ------------------------------------------------------------ the frame
    def _rest(self):
        return self.rest_frequency * u.GHz if self.rest_frequency > 0 else None

    def x_of(self, spectrum):
        """The x coordinates of ``spectrum`` on the current axis."""
        return display_axis(spectrum, self.axis_kind, rest_frequency=self._rest(), z=self.z,
                            convention=self.convention)

    def x_of_frequency(self, frequencies):
        """Observed frequencies (GHz) as x coordinates of the current axis."""
        return display_axis(np.atleast_1d(frequencies) * u.GHz, self.axis_kind, rest_frequency=self._rest(),
                            z=self.z, convention=self.convention).value

    def frequency_of_x(self, values):
        """x coordinates of the current axis as observed frequencies (GHz)."""
        return to_observed_frequency(values, self.axis_kind, rest_frequency=self._rest(), z=self.z,
                                     convention=self.convention).to_value(u.GHz)

    @observe("axis_kind", "convention", "z", "rest_frequency")
    def _on_frame(self, change):
        if self.axis_kind == "velocity" and self._rest() is None:
            self._adopt_default_rest()
            return  # setting rest_frequency comes back here
        unit = AXIS_KINDS[self.axis_kind]
        self.x_axis.label = f"{self.axis_kind} ({unit.to_string()})" + (
            f", {self.convention}" if self.axis_kind == "velocity" else "")
        # An observed-frequency axis does not depend on z, the line or the convention.
        if change.name == "axis_kind" or (self.axis_kind == "velocity") or \
                (self.axis_kind == "rest frequency" and change.name == "z"):
            self._update_x_range()
            self._redraw_all()

    def _adopt_default_rest(self):
        """A velocity axis with no line: use the cube's RESTFRQ, else the band centre (and say so)."""
        if self.file_rest_frequency:
            self.rest_frequency = float(self.file_rest_frequency)
            return
        with self.status.guard("switching to a velocity axis"):
            if self.band is None:
                raise SpectralRangeError("a velocity axis needs a line: set the rest frequency first")
            centre = display_axis([sum(self.band) / 2] * u.GHz, "rest frequency", z=self.z)[0]
            self.status.warn(f"No line chosen and the cube has no rest frequency (RESTFRQ), so velocities are "
                             f"measured from the band centre ({sum(self.band) / 2:.6f} GHz observed, rest frequency "
                             f"{centre.value:.6f} GHz at z = {self.z:g}); pick a line under 'Velocity zero' "
                             "to measure from it.")
            self.band_centre_rest = float(centre.to_value(u.GHz))
            self.rest_frequency = self.band_centre_rest

    def _update_x_range(self):
        """Span the x axis over the data band(s) plus a small margin, in the current axis unit."""
        if self.band is None:
            return
        try:
            ends = np.sort(self.x_of_frequency(np.array(self.band)))
        except CubeloupeError:
            return  # a velocity axis waiting for its line; _on_frame comes back once it is set
        margin = self.band_margin * (ends[1] - ends[0]) if ends[1] > ends[0] else 1.0
        low, high = float(ends[0] - margin), float(ends[1] + margin)
        with self.figure.hold_sync():
            self.x_scale.min, self.x_scale.max = low, high
            # Round ticks written with just enough decimals: narrow bands get distinct labels (no 1.101992e+2).
            ticks = nice_ticks(low, high, 6)
            # The format first: the browser writes the labels when the values arrive (else one step behind).
            self.x_axis.tick_format = f".{tick_decimals(ticks)}f"
            self.x_axis.tick_values = ticks
        self.x_range = [low, high]

    def in_view(self, x):
        """Boolean mask of the x values (current axis units) inside the drawn x range."""
        x = np.asarray(x, dtype=float)
        if not self.x_range:
            return np.ones(x.shape, dtype=bool)
        return (x >= self.x_range[0]) & (x <= self.x_range[1])

    # ---------------------------------------------------------------- data
    def set_spectra(self, name, color, spectra, raw=None):
        """Show region ``name``'s spectra (one per window, None where a window has none).

        ``raw``: the same spectra unsmoothed, drawn faintly behind (while `show_raw`) when they differ.
        """
        self.spectra[name] = {"color": color, "spectra": list(spectra)}
        self.raw_spectra[name] = list(raw) if raw is not None else [None] * len(spectra)
        self._refit(names=[name])
        self._redraw(names=[name])

    def drop_spectra(self, name):
        """Remove region ``name``'s curves."""
        self.spectra.pop(name, None)
        for key in [k for k in self.curve_marks if k[0] == name]:
            self.curve_marks.pop(key)
            self.model_marks.pop(key, None)
            self.fits.pop(key, None)
            for extra in (self.raw_marks, self.line_fits, self.fit_marks):
                extra.pop(key, None)
        self.raw_spectra.pop(name, None)
        self._set_marks()

    def recolor(self, name, color):
        if name in self.spectra:
            self.spectra[name]["color"] = color
            for key, mark in [*self.curve_marks.items(), *self.raw_marks.items()]:
                if key[0] == name:
                    mark.colors = [color]

    def shown_spectra(self):
        """Region name -> the spectra drawn (smoothed, if a smoothing is chosen), one per window."""
        return {name: list(entry["spectra"]) for name, entry in self.spectra.items()}

    def add_controls(self, widget):
        """Put ``widget`` (e.g. a smoothing choice) under the view's toolbar."""
        self._toolbar.children = (*self._toolbar.children, widget)

    def show_fit(self, name, window, model, residuals, baseline=None):
        """Draw a fitted line model and its residuals on region ``name``'s spectrum in ``window``.

        ``model`` (baseline not included; ``baseline`` is added while the spectra are shown
        unsubtracted) and ``residuals`` (NaN where not fitted) are Quantities on that spectrum's channels.
        """
        self.line_fits[(name, window)] = tuple(None if q is None else np.asarray(u.Quantity(q).value, float)
                                               for q in (model, residuals, baseline))
        with self.status.guard("drawing the fitted line"):
            self._redraw(names=[name])

    def clear_fits(self):
        """Remove every fitted model and its residuals."""
        self.line_fits.clear()
        self.fit_marks.clear()
        self._set_marks()

    def _window_ranges(self, spectrum, ranges):
        """Those of ``ranges`` (GHz) that overlap the band of ``spectrum``."""
        f = display_axis(spectrum, "observed frequency").to_value(u.GHz)
        lo, hi = np.nanmin(f), np.nanmax(f)
        return [r for r in ranges if r[1] >= lo and r[0] <= hi]

    def _refit(self, names=None):
        names = list(self.spectra) if names is None else names
        problems = []
        for name in names:
            for window, spectrum in enumerate(self.spectra[name]["spectra"]):
                self.fits.pop((name, window), None)
                if spectrum is None or not self.line_free:
                    continue
                ranges = self._window_ranges(spectrum, self.line_free)
                if not ranges:
                    continue
                try:
                    self.fits[(name, window)] = fit_baseline(spectrum, u.Quantity(ranges, u.GHz),
                                                             order=self.baseline_order)
                except CubeloupeError as exc:
                    problems.append(f"{name}, window {window}: {exc}")
        if problems:
            self.status.error("Could not fit the baseline for " + "; ".join(problems))

    @observe("line_free", "baseline_order")
    def _on_baseline_inputs(self, change):
        self._refit()
        self._redraw_all()  # the ranges too

    @observe("show_raw")
    def _on_show_raw(self, change):
        self._set_marks()

    @observe("show_subtracted")
    def _on_subtracted(self, change):
        if self.show_subtracted and not self.fits:
            self.status.warn("No baseline yet: mark line-free ranges (mode 'Line-free') to fit one.")
        self._redraw_all()

    def _redraw_all(self):
        with self.status.guard("drawing the spectra"):
            self._redraw()
            self._draw_ranges()
            self._draw_prediction()

    def set_prediction(self, curves):
        """Draw a model spectrum over the data (#16): one (observed frequency GHz, values) per window; [] hides it.

        While the spectra are shown unsubtracted, the model sits on the first region's baseline of its window.
        """
        self.prediction = [(np.asarray(f, float), np.asarray(v, float)) for f, v in curves]
        self._draw_prediction()

    @observe("x_range")
    def _on_x_range(self, change):
        self._draw_prediction()  # only what lies in the drawn range is drawn

    def _on_baseline(self, window, values):
        fit = next((self.fits[k] for k in self.fits if k[1] == window), None)
        if self.show_subtracted or fit is None or len(fit.model) != len(values):
            return values
        return values + np.asarray(fit.model.value, dtype=float)

    def _draw_prediction(self):
        # Windows joined by a NaN (a gap); only what lies in the drawn x range, no NaN at the end (see drawable).
        x = np.concatenate([np.append(self.x_of_frequency(f), np.nan) for f, _ in self.prediction] or [[]])
        y = np.concatenate([np.append(self._on_baseline(i, v), np.nan) for i, (_, v) in enumerate(self.prediction)]
                           or [[]])
        y = np.where(self.in_view(x), y, np.nan)
        x, y = drawable(x, y)
        update_mark(self.prediction_mark, x=x, y=y)

    def _redraw(self, names=None):
        names = list(self.spectra) if names is None else names
        scales = {"x": self.x_scale, "y": self.y_scale}
        with self.figure.hold_sync():
            for name in names:
                entry = self.spectra[name]
                for window, spectrum in enumerate(entry["spectra"]):
                    key = (name, window)
                    if spectrum is None:
                        self.curve_marks.pop(key, None)
                        self.model_marks.pop(key, None)
                        continue
                    x = self.x_of(spectrum).value
                    fit = self.fits.get(key)
                    y = spectrum.value
                    if self.show_subtracted and fit is not None:
                        y = fit.subtracted.value
                    mark = self.curve_marks.get(key)
                    if mark is None:
                        mark = self.curve_marks[key] = self._new_curve()
                    shown_x, shown_y = drawable(x, y)
                    update_mark(mark, x=shown_x, y=shown_y, colors=[entry["color"]], labels=[name])
                    if fit is not None and not self.show_subtracted:
                        model = self.model_marks.get(key)
                        if model is None:
                            model = Lines(scales=scales, colors=[BASELINE_COLOR], stroke_width=1.2,
                                          line_style="dash_dotted")
                            self.model_marks[key] = model
                        update_mark(model, x=x, y=np.asarray(fit.model.value, dtype=float))
                    else:
                        self.model_marks.pop(key, None)
                    self._draw_extras(key, x, fit, entry["color"], scales)
                    self.y_axis.label = unit_text(spectrum.unit)
            self._set_marks()
            self._draw_zero()
            self._draw_cursor()

    def _new_curve(self):
        """A mark for a new spectrum: one of the empty ones waiting in the figure (#20).

        A new mark is a new model and a new mark list for the browser to make before the spectrum
        shows: they are made a few at a time, ahead of need.
        """
        if not self._spare_curves:
            self._spare_curves = self._make_spare_curves()
        return self._spare_curves.pop(0)

    def _make_spare_curves(self):
        return [Lines(x=[], y=[], labels=[], scales={"x": self.x_scale, "y": self.y_scale}, stroke_width=1.6)
                for _ in range(SPARE_MARKS)]

    def _draw_extras(self, key, x, fit, color, scales):
        """The faint unsmoothed curve and the fitted model with its residuals, for one spectrum (#18)."""
        raw = self.raw_spectra.get(key[0], [])
        raw = raw[key[1]] if key[1] < len(raw) else None
        if raw is not None and raw is not self.spectra[key[0]]["spectra"][key[1]]:
            raw_x, raw_y = self.x_of(raw).value, np.asarray(raw.value, dtype=float)
            if self.show_subtracted and fit is not None:
                order = np.argsort(x)
                raw_y = raw_y - np.interp(raw_x, x[order], np.asarray(fit.model.value, float)[order])
            mark = self.raw_marks.get(key) or Lines(scales=scales, stroke_width=1.0, opacities=[0.35])
            update_mark(mark, x=raw_x, y=raw_y, colors=[color])
            self.raw_marks[key] = mark
        else:
            self.raw_marks.pop(key, None)
        if key not in self.line_fits:
            self.fit_marks.pop(key, None)
            return
        model, residuals, baseline = self.line_fits[key]
        if baseline is not None and not self.show_subtracted:
            model = model + baseline
        marks = self.fit_marks.get(key) or (
            Lines(scales=scales, colors=[FIT_COLOR], stroke_width=2.0),
            Lines(scales=scales, colors=[RESIDUAL_COLOR], stroke_width=1.0))  # no labels: residuals end in NaN
        update_mark(marks[0], x=x, y=model)
        # Only the fitted span: bqplot places a line's (hidden) label at its last point, which must be a number.
        fitted = np.flatnonzero(np.isfinite(residuals))
        span = slice(fitted[0], fitted[-1] + 1) if fitted.size else slice(0, 0)
        update_mark(marks[1], x=x[span], y=residuals[span])
        self.fit_marks[key] = marks

    def _draw_zero(self):
        xs = [m.x for m in self.curve_marks.values() if len(m.x)]
        if self.show_subtracted and xs:
            lo, hi = min(np.nanmin(x) for x in xs), max(np.nanmax(x) for x in xs)
            update_mark(self.zero_mark, x=[lo, hi], y=[0.0, 0.0])
        else:
            update_mark(self.zero_mark, x=[], y=[])

    def _band_polygons(self, ranges):
        if not ranges:
            return [], []
        xs = [self.x_of_frequency(np.array([lo, lo, hi, hi])) for lo, hi in ranges]
        ys = [[0.0, 1.0, 1.0, 0.0]] * len(ranges)
        return np.array(xs), np.array(ys)

    def _draw_ranges(self):
        with self.figure.hold_sync():
            free_x, free_y = self._band_polygons(self.line_free)
            # One fill colour per shaded range (bqplot fills only the lines it has a colour for).
            n_free = max(len(self.line_free), 1)
            update_mark(self.free_mark, x=free_x, y=free_y, fill_colors=[LINE_FREE_FILL] * n_free,
                        fill_opacities=[0.3] * n_free)
            window_x, window_y = self._band_polygons([self.line_window] if self.line_window else [])
            update_mark(self.window_mark, x=window_x, y=window_y)
            if self.peaks:
                update_mark(self.peak_mark, x=self.x_of_frequency(np.array(self.peaks)),
                            y=np.full(len(self.peaks), 0.96))
            else:
                update_mark(self.peak_mark, x=[], y=[])
            self._draw_cursor()

    @observe("line_window", "peaks")
    def _on_marks(self, change):
        with self.status.guard("drawing the marked ranges"):
            self._draw_ranges()

    @observe("cursor_frequency")
    def _draw_cursor(self, change=None):
        if self.cursor_frequency is None:
            update_mark(self.cursor_mark, x=[])
            return
        try:
            x = float(self.x_of_frequency(self.cursor_frequency)[0])
        except CubeloupeError:
            return
        update_mark(self.cursor_mark, x=[x, x], y=[0.0, 1.0])

    def clear_marks(self):
        """Forget line-free ranges, the line window and peaks."""
        with self.hold_trait_notifications():
            self.line_free = []
            self.line_window = []
            self.peaks = []

    # ---------------------------------------------------------- interaction
    @observe("mode")
    def _on_mode(self, change):
        self.clicker.next = self.brush if self.mode in RANGE_MODES else None
        self.brush.color = LINE_FREE_FILL if self.mode == "line-free" else LINE_WINDOW_FILL

    def on_pick(self, callback, remove=False):
        """Register ``callback(frequency_GHz)`` for clicks in 'go' mode."""
        if remove:
            self._pick_callbacks.remove(callback)
        else:
            self._pick_callbacks.append(callback)

    def on_pointer(self, callback, remove=False):
        """Register ``callback(event, x, height)`` for the pointer over the plot.

        ``event`` is 'move', 'leave' (the pointer left the plot) or 'click', ``x`` is in the
        current axis units and ``height`` is the fraction of the plot's height (0 at the bottom,
        1 at the top; None if unknown). A callback that returns True for a click takes it: no
        channel is picked and no peak is marked.
        """
        if remove:
            self._pointer_callbacks.remove(callback)
        else:
            self._pointer_callbacks.append(callback)

    def _on_click_msg(self, _, content, buffers=None):
        event = content.get("event")
        domain = content.get("domain") or {}
        x = None if domain.get("x") is None else float(domain["x"])
        height = None if domain.get("y") is None else float(domain["y"])
        if event == "mouseleave":
            self._tell_pointer("leave", x, height)
        elif x is None:
            return
        elif event == "mousemove":
            self.point(x, height)
        elif event == "click" and self.mode not in RANGE_MODES:
            # In the range modes the click that ends a brush drag also reaches the pointer.
            self.click(x, height)

    def point(self, x, height=None):
        """Act on the pointer moving to ``x`` (current axis units) at ``height``, as the mouse would."""
        self._tell_pointer("move", x, height)

    def _tell_pointer(self, event, x, height):
        with self.status.guard("following the pointer"):
            for callback in list(self._pointer_callbacks):
                callback(event, x, height)

    def click(self, x, height=None):
        """Act on a click at ``x`` (current axis units) and ``height``, as the mouse would.

        A pointer listener may take the click (e.g. one on a line marker's head); otherwise it
        picks the channel ('go') or marks a peak ('peaks').
        """
        with self.status.guard("reading the clicked position"):
            for callback in list(self._pointer_callbacks):
                if callback("click", x, height):
                    return
            frequency = float(self.frequency_of_x([x])[0])
            if self.mode == "peaks":
                if frequency not in self.peaks:
                    self.peaks = self.peaks + [frequency]
            else:
                for callback in list(self._pick_callbacks):
                    callback(frequency)

    def _on_brushing(self, change):
        self.brushing = bool(change.new)
        if change.new:
            return  # wait for the release
        selected = self.brush.selected
        if selected is None or len(selected) != 2:
            return
        self.mark_range(*[float(v) for v in selected])
        self.brush.selected = None

    def mark_range(self, x0, x1):
        """Mark [x0, x1] (current axis units) as line-free or as the line window, per `mode`."""
        with self.status.guard("marking a spectral range"):
            if x0 == x1:
                raise SpectralRangeError("the dragged range is empty; drag across some channels")
            f = sorted(self.frequency_of_x([x0, x1]))
            if self.mode == "window":
                self.line_window = f
            else:
                self.line_free = self.line_free + [f]
