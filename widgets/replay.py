"""Replay: the suite's current state written out as a plain Python script.

`to_code` writes what a user would type by hand with the public analysis API:
imports, `open_cube`, the regions exactly as the suite uses them (the pixel
shape on the grid it was drawn on, each with its sky-coordinate equivalent
beside it for another grid of the same field), `region_spectrum`,
`measurement_table` and `moment_maps` with the suite's own parameters, the
position–velocity slice (`pv_slice`), the channel maps (`channel_maps`), the
population diagrams of the ticked lines (`population_diagram`, and `lte_spectrum`
when the LTE prediction is drawn), and the `Loupe` that shows the same state
again. Run top to bottom in a fresh
interpreter, it reproduces the suite's measurement table and moment maps
exactly: the same functions are called with the same float64 values (every
float is written with Python's shortest round-tripping repr).

The order of the steps that rebuild the suite comes from
`cubeloupe.widgets.session.restore_steps`, the one description of state that
sessions use too.

Examples
--------
>>> print(to_code(loupe))                                    # doctest: +SKIP
>>> exec(to_code(loupe))                                     # doctest: +SKIP
"""

import inspect

import astropy.units as u
import numpy as np
from regions import PixelRegion

from cubeloupe.analysis import CubeloupeError, display_axis, find_line

from .session import MOMENT_SETTINGS, SessionState, drawn_shape, restore_steps

__all__ = ["to_code"]

_SKY_CLASSES = {"box": "RectangleSkyRegion", "oval": "EllipseSkyRegion", "circle": "CircleSkyRegion",
                "outline": "PolygonSkyRegion", "pixel": "PointSkyRegion"}
_PIXEL_CLASSES = {"rectangle": "RectanglePixelRegion", "ellipse": "EllipsePixelRegion",
                  "polygon": "PolygonPixelRegion", "circle": "CirclePixelRegion"}


def _ghz(value):
    """A frequency list or number (GHz) as code."""
    return f"{value!r} * u.GHz"


def _sky_code(item):
    kind = item["kind"]
    if kind == "outline":
        ras = [v[0] for v in item["vertices"]]
        decs = [v[1] for v in item["vertices"]]
        return f"PolygonSkyRegion(SkyCoord({ras!r}, {decs!r}, unit=\"deg\"))"
    centre = f"SkyCoord({item['ra']!r}, {item['dec']!r}, unit=\"deg\")"
    if kind == "pixel":
        return f"PointSkyRegion({centre})"
    if kind == "circle":
        return f"CircleSkyRegion({centre}, radius={item['radius']!r} * u.arcsec)"
    return (f"{_SKY_CLASSES[kind]}({centre}, width={item['width']!r} * u.arcsec, "
            f"height={item['height']!r} * u.arcsec, angle={item['angle']!r} * u.deg)")


def _pixel_code(shape):
    item = drawn_shape(shape)
    if item["shape"] == "polygon":
        xs = [v[0] for v in item["vertices"]]
        ys = [v[1] for v in item["vertices"]]
        return f"PolygonPixelRegion(PixCoord({xs!r}, {ys!r}))"
    if item["shape"] == "circle":
        return f"CirclePixelRegion(PixCoord({item['x']!r}, {item['y']!r}), radius={item['radius']!r})"
    return (f"{_PIXEL_CLASSES[item['shape']]}(PixCoord({item['x']!r}, {item['y']!r}), width={item['width']!r}, "
            f"height={item['height']!r}, angle={item['angle']!r} * u.deg)")


def _wrapped(start, call, width=110):
    """``start + call`` on one line, or one argument a line when that is too long."""
    if len(start) + len(call) <= width:
        return start + call
    head, arguments = call.split("(", 1)
    parts, depth, begin = [], 0, 0
    for position, char in enumerate(arguments[:-1]):
        depth += char in "([{"
        depth -= char in ")]}"
        if char == "," and depth == 0:
            parts.append(arguments[begin:position].strip())
            begin = position + 1
    parts.append(arguments[begin:-1].strip())
    return start + head + "(\n" + "".join(f"    {part},\n" for part in parts) + ")"


def _ranges_in(cube, ranges):
    """The [low, high] GHz ranges that overlap ``cube``'s band (as the suite picks a window's line-free ranges)."""
    f = display_axis(cube, "observed frequency").to_value(u.GHz)
    return [r for r in ranges if r[1] >= f.min() and r[0] <= f.max()]


def _optional_ghz(ranges):
    return _ghz(ranges) if ranges else "None"


def _rest_code(rest):
    return _ghz(rest) if rest > 0 else "None"


def _line_label(settings):
    """The line name the suite writes in the table's 'line' column."""
    if settings["reference_line"]:
        return settings["reference_line"]
    rest = settings["rest_frequency"]
    return f"{rest:.4f} GHz" if rest > 0 else "line"


def _region_section(loupe, state):
    """Code of the regions and of their spectra, as the suite made them."""
    lines = ["# Regions as the suite uses them. 'as_drawn' holds a shape drawn on the sky view: its exact pixel",
             "# shape on the grid it was drawn on. 'on_sky' holds every region in sky coordinates (ICRS), for",
             "# another grid of the same field (the suite places it so on the other windows' grids).",
             "as_drawn = {}", "on_sky = {}"]
    spectra_lines = ["spectra = {"]
    masks = []
    for number, item in enumerate(loupe.regions):
        name = item["name"]
        lines.append(_wrapped(f"on_sky[{name!r}] = ", _sky_code(item)))
        uses = []
        drawn_on = None
        for index, cube in enumerate(loupe.cubes):
            spectrum = loupe.spectra.get(name, [None] * len(loupe.cubes))[index]
            if spectrum is None:
                uses.append(f"None,  # no pixel of {name!r} in window {index}")
                continue
            shape = loupe.region_list.region_for(name, cube)
            if isinstance(shape, PixelRegion):
                if drawn_on is None:
                    drawn_on = index
                    lines.append(f"# {name!r} as drawn, in pixels of window {index}:")
                    lines.append(_wrapped(f"as_drawn[{name!r}] = ", _pixel_code(shape)))
                uses.append(f"region_spectrum(cubes[{index}], as_drawn[{name!r}]),")
            elif isinstance(shape, np.ndarray):
                (y,), (x,) = np.nonzero(shape)
                variable = f"pixel_{number}_{index}"
                masks += [f"{variable} = np.zeros({tuple(int(n) for n in shape.shape)!r}, dtype=bool)",
                          f"{variable}[{int(y)}, {int(x)}] = True  # the pixel (x={int(x)}, y={int(y)}) holding "
                          f"on_sky[{name!r}] in window {index}"]
                uses.append(f"region_spectrum(cubes[{index}], {variable}),")
            else:
                uses.append(f"region_spectrum(cubes[{index}], on_sky[{name!r}]),")
        spectra_lines.append(f"    {name!r}: [")
        spectra_lines += [f"        {use}" for use in uses]
        spectra_lines.append("    ],")
    spectra_lines.append("}")
    if masks:
        lines += ["", "# One-pixel regions: the pixel that holds the position, on each window's grid."] + masks
    lines += ["", "# The spectrum of every region in every window (flux density for Jy/beam cubes)."]
    return lines + spectra_lines


def _measure_section(loupe, state):
    s = state.settings
    if not s["line_window"] or not loupe.spectra:
        return ["# No measurement: the suite has no line window or no region yet."]
    if s["z"] != 0 and s["rest_frequency"] <= 0:
        return ["# No measurement: velocities at z > 0 need a rest frequency, and the suite has none."]
    smoothed = _smoothed_expression(loupe)
    if smoothed:  # smoothing (#18): the spectra as the suite measures them, errors counting the correlation
        return ["# The spectra as the suite measures them: " + loupe.smoothing.description() + ".",
                f"measured = {{name: [None if s is None else {smoothed} for s in items] "
                "for name, items in spectra.items()}",
                "# The measurement table, errors counting the channel correlation the smoothing makes.",
                "table = correlated_measurement_table(",
                "    measured, line_window, line_free=line_free, order=baseline_order, "
                "rest_frequency=rest_frequency,"] + _measure_tail(s)
    return ["# The measurement table: one line measured in every region and window.",
            "table = measurement_table(",
            "    spectra, line_window, line_free=line_free, order=baseline_order, rest_frequency=rest_frequency,",
            f"    z=z, convention=convention, line={_line_label(s)!r}, cosmology={s['cosmology']!r},",
            f"    magnification={s['magnification']!r},",
            ")",
            "print(table)"]


def _smoothed_expression(loupe):
    """The code that smooths one spectrum ``s`` as the suite does ('' when it does not; #18)."""
    smoothing = getattr(loupe, "smoothing", None)
    if smoothing is None:
        return ""
    settings, expression = smoothing.settings, "s"
    if settings["delivered_hanning"]:
        expression = f"with_channel_correlation({expression}, 'hanning', 3)"
    if settings["kernel"] != "none":
        width = settings["width"]
        width = int(width) if settings["kernel"] != "gaussian" and float(width).is_integer() else width
        expression = f"smooth_spectrum({expression}, {settings['kernel']!r}, {width!r})"
    return "" if expression == "s" else expression


def _measure_tail(s):
    return [f"    z=z, convention=convention, line={_line_label(s)!r}, cosmology={s['cosmology']!r},",
            f"    magnification={s['magnification']!r},",
            ")",
            "print(table)"]


def _moment_section(loupe, state):
    made = state.moments
    if made is None:
        return ["# No moment maps were made in the suite."]
    cube = loupe.cubes[made["window"]]
    free = _ranges_in(cube, made["line_free"])
    client = (["# The suite made them on a dask.distributed client (not saved); add client=... to do the same."]
              if state.client else [])
    return [f"# The moment maps of window {made['window']}, with the settings they were made with.", *client,
            "moments = moment_maps(",
            f"    cubes[{made['window']}], window={_ghz(made['line_window'])},",
            f"    line_free={_optional_ghz(free)},",
            f"    order={made['baseline_order']!r}, rest_frequency={_rest_code(made['rest_frequency'])}, "
            f"z={made['z']!r}, convention={made['convention']!r},",
            f"    clip={made['clip']!r},",
            ")"] + _significance_lines(loupe, made)


def _significance_lines(loupe, made):
    """Moments 1 and 2 as the suite shows them: where moment 0 is significant (maps with an error only) and
    moment 1 lies within the window's channel velocities (`within_window`)."""
    significance = getattr(loupe.moment_panel, "significance", None)
    if significance is None or not made["line_free"]:
        return ["# Moments 1 and 2 as the suite shows them: where moment 1 lies within the window's velocities.",
                "shown_m1, shown_m2 = within_window(moments.m1, moments.m2, moments.window)"]
    return [f"# Moments 1 and 2 as the suite shows them: where moment 0 exceeds {significance!r} times its error",
            "# and moment 1 lies within the window's channel velocities.",
            f"shown = significant_moments(moments, {significance!r})",
            "shown_m1, shown_m2 = within_window(shown.m1, shown.m2, moments.window)"]


def _pv_section(state):
    """The position–velocity slice of the PV tab (#18): `pv_slice` along its path, width and channels."""
    pv = state.views.get("pv_panel", {})
    if not pv.get("path"):
        return ["# No position–velocity slice: no path was drawn on the sky."]
    width = f"{pv['width']!r} * u.arcsec" if pv["width_unit"] == "arcsec" else repr(pv["width"])
    window = "line_window" if pv["only_line_window"] and state.settings["line_window"] else "None"
    return [f"# The position–velocity slice along the path drawn on the sky (pixels of window {pv['path_window']}),",
            f"# averaged across {pv['width']:g} {pv['width_unit']}, over "
            f"{'the line window' if window != 'None' else 'the whole band'}.",
            f"pv_path = {pv['path']!r}",
            _wrapped("pv = ", f"pv_slice(cubes[{pv['path_window']}], pv_path, width={width}, window={window}, "
                              "rest_frequency=rest_frequency, z=z, convention=convention)")]


def _channel_map_section(state):
    """The channel maps shown in their tab (#18), made as they were made (`channel_maps`, the figure for papers)."""
    made = state.channel_maps
    if made is None:
        return ["# No channel maps were made in the suite."]
    unit = "None" if made["label_in"] == "velocity" else "u.GHz"
    return [f"# The channel maps of window {made['window']} as made in the suite (a matplotlib figure for papers;",
            "# channel_map_figure.channel_panels holds the images, e.g. channel_map_figure.savefig('maps.pdf')).",
            "channel_map_figure = channel_maps(",
            f"    cubes[{made['window']}], window={_ghz(made['line_window'])}, n={made['n']!r}, "
            f"average={made['average']!r},",
            f"    rest_frequency={_rest_code(made['rest_frequency'])}, z={made['z']!r}, "
            f"convention={made['convention']!r}, spectral_unit={unit},",
            ")"]


def _species(name):
    try:
        return str(find_line(name)["species"])
    except CubeloupeError:
        return None


def _population_section(loupe, state):
    """The population diagrams of the ticked lines (#16) and the LTE prediction drawn over the spectra."""
    excitation = state.views.get("excitation_panel", {})
    picked = excitation.get("picked") or []
    if not picked:
        return ["# No population diagram: no measured line was ticked."]
    s = state.settings
    lines = ["# The lines ticked for the population diagram, with the fluxes measured in the suite (region, window;",
             f"# an upper limit is {excitation['limit_sigma']!r} x its error).",
             "picked = ["] + [f"    {item!r}," for item in picked] + ["]", "diagrams = {}"]
    species = list(dict.fromkeys(_species(item["line"]) for item in picked))
    for name in species:
        rows = [item for item in picked if _species(item["line"]) == name]
        if name is None or len({item["flux_unit"] for item in rows}) > 1:
            lines.append(f"# {len(rows)} ticked line(s) could not be fitted in the suite (see its message).")
            continue
        unit = rows[0]["flux_unit"]
        options = f"spin={excitation['spin']!r}"
        if u.Unit(unit).is_equivalent(u.Jy * u.km / u.s):
            options += f", z=z, magnification={s['magnification']!r}, cosmology={s['cosmology']!r}"
        lines += [f"rows = [item for item in picked if item['line'] in {[item['line'] for item in rows]!r}]",
                  f"diagrams[{name!r}] = population_diagram(QTable({{",
                  "    'line': [item['line'] for item in rows],",
                  f"    'flux': [item['flux'] for item in rows] * u.Unit({unit!r}),",
                  f"    'flux_error': [item['flux_error'] for item in rows] * u.Unit({unit!r}),",
                  "    'upper_limit': [item['upper_limit'] for item in rows],",
                  f"}}), {options})"]
    return lines + _prediction_lines(loupe, state, excitation)


def _prediction_lines(loupe, state, excitation):
    """`lte_spectrum` of the prediction drawn over the spectra, one per window (as the suite draws it)."""
    name = excitation.get("prediction_species", "")
    diagram = getattr(getattr(loupe, "excitation_panel", None), "diagrams", {}).get(name)
    if not excitation.get("show_prediction") or diagram is None:
        return ["# The LTE prediction is not drawn over the spectra."]
    s = state.settings
    if np.isfinite(diagram.total_number.value):
        amount = (f"total_number=10 ** {excitation['prediction_amount']!r}, magnification={s['magnification']!r}, "
                  f"cosmology={s['cosmology']!r}")
    else:
        amount = f"column_density=10 ** {excitation['prediction_amount']!r} / u.cm ** 2"
    ratio = f", ortho_para_ratio=diagrams[{name!r}].ortho_para_ratio" if np.isfinite(diagram.ortho_para_ratio) else ""
    return ["# The LTE prediction drawn over the spectra: its spectrum on every window's channels.",
            "prediction = [",
            f"    lte_spectrum(frequency_axis(cube).to(u.GHz), [{name!r}], temperature="
            f"{excitation['prediction_temperature']!r} * u.K,",
            f"                 fwhm={excitation['prediction_fwhm']!r} * u.km / u.s, z=z, {amount}{ratio})",
            "    for cube in cubes",
            "]"]


def _loupe_section(loupe, state):
    s = state.settings
    arguments = ", catalog=catalog" if state.catalog else ""
    arguments += ", first_view=False" if "first_view" in inspect.signature(type(loupe)).parameters else ""
    lines = ["# The suite in the same state: same cubes, regions, ranges, settings and view."]
    if state.client:
        lines.append("# The suite sent its moment maps to a dask.distributed client: add client=... to do so again.")
    lines.append(f"loupe = {type(loupe).__name__}(paths{arguments})")
    current = {name: s[name] for name in MOMENT_SETTINGS}
    shown = None  # the window the script has shown last: it is set only where it changes

    def show(index):
        nonlocal shown
        if index != shown:
            shown = index
            lines.append(f"loupe.window = {index!r}")

    for target, name, value in restore_steps(state):
        if target == "region":
            item = {k: v for k, v in value.items() if k != "drawn"}
            if "drawn" in value:
                show(value["drawn"]["window"])
                lines.append(f"loupe.add_region(as_drawn[{name!r}], name={name!r}, color={item['color']!r})")
            else:
                lines.append(f"loupe.region_list.regions = [*loupe.region_list.regions, {item!r}]")
        elif target == "moments":
            differs = [n for n in MOMENT_SETTINGS if value[n] != current[n]]
            lines += [f"loupe.{n} = {value[n]!r}  # as when the moment maps were made" for n in differs]
            show(value["window"])
            lines.append("loupe.make_moments(wait=True)")
            lines += [f"loupe.{n} = {current[n]!r}" for n in differs]
        elif (target, name) == ("loupe", "window"):
            show(value)
        elif target == "channel_maps":
            lines.append("loupe.channel_map_panel.make(wait=True, record=" + repr(value) + ")")
        elif (target, name) in (("pv_panel", "path"), ("excitation_panel", "picked")) and value:
            lines.append(f"loupe.{target}.{name} = {'pv_path' if name == 'path' else 'picked'}")
        elif target == "loupe":
            lines.append(f"loupe.{name} = {name}" if name in ("z", "convention") else f"loupe.{name} = {value!r}")
        else:
            widget = getattr(loupe, target)
            if value != type(widget).class_traits()[name].default(widget) or name == "velocity_range":
                lines.append(f"loupe.{target}.{name} = {value!r}")
    return lines + ["loupe"]


def _analysis_names(loupe, state):
    names = ["measurement_table", "moment_maps", "open_cube", "region_spectrum"]
    smoothed = _smoothed_expression(loupe)
    names += [name for name in ("correlated_measurement_table", "smooth_spectrum", "with_channel_correlation")
              if smoothed and (name.startswith("correlated") or name + "(" in smoothed)]
    views = state.views
    names += ["pv_slice"] if views.get("pv_panel", {}).get("path") else []
    names += ["channel_maps"] if state.channel_maps is not None else []
    if views.get("excitation_panel", {}).get("picked"):
        names.append("population_diagram")
        if "lte_spectrum(" in "\n".join(_population_section(loupe, state)):
            names += ["frequency_axis", "lte_spectrum"]
    if state.moments is not None:
        names.append("within_window")
        if state.moments["line_free"]:
            names.append("significant_moments")
    return sorted(names)


def _catalog_lines(state):
    """The extra line lists the suite was given (files by path; a table given in memory cannot be written out)."""
    if not state.catalog:
        return []
    lines = ["# Extra line lists merged into the bundled catalog, as given to the suite.", "catalog = ["]
    for record in state.catalog:
        lines.append(f"    {record['absolute']!r}," if "absolute" in record else
                     f"    # a {record['in_memory']} given in memory (not saved): put it here, e.g. my_lines,")
    return lines + ["]", ""]


def to_code(loupe):
    """The suite's current state as a readable script that re-runs it.

    Parameters
    ----------
    loupe : Loupe

    Returns
    -------
    str
        A script using only the public API (imports, `open_cube`, the regions, `region_spectrum`,
        `measurement_table`, `moment_maps`, and a `Loupe` restoring the view). Its order is fixed: the
        same state always gives the same text.

    Raises
    ------
    SessionError
        The suite shows a cube made in memory (with no file to open again).
    """
    state = SessionState.from_loupe(loupe)
    s = state.settings
    paths = [cube["absolute"] for cube in state.cubes]
    header = [f'"""cubeloupe session as a script (cubeloupe {state.cubeloupe_version}).',
              "",
              "Run it top to bottom to make the same spectra, measurement table and moment maps as the suite.",
              "Quick-look numbers: final values come from the calibrated, primary-beam-corrected products.",
              '"""',
              "",
              "import astropy.units as u",
              "import numpy as np",
              "from astropy.coordinates import SkyCoord",
              *(["from astropy.table import QTable"] if state.views.get("excitation_panel", {}).get("picked") else []),
              "from regions import (",
              "    CirclePixelRegion, CircleSkyRegion, EllipsePixelRegion, EllipseSkyRegion, PixCoord, PointSkyRegion,",
              "    PolygonPixelRegion, PolygonSkyRegion, RectanglePixelRegion, RectangleSkyRegion,",
              ")",
              "",
              f"from cubeloupe.analysis import {', '.join(_analysis_names(loupe, state))}",
              f"from cubeloupe.widgets import {type(loupe).__name__}",
              "",
              "# The cubes: the suite's spectral windows, in its order.",
              "paths = ["] + [f"    {p!r}," for p in paths] + [
              "]",
              "cubes = [open_cube(path) for path in paths]",
              "",
              *_catalog_lines(state),
              "# Redshift, velocity zero, line window and baseline as set in the suite (frequencies observed).",
              f"z = {s['z']!r}",
              f"rest_frequency = {_rest_code(s['rest_frequency'])}" + (f"  # {s['reference_line']}"
                                                                      if s["reference_line"] else ""),
              f"convention = {s['convention']!r}",
              f"line_window = {_ghz(s['line_window']) if s['line_window'] else 'None'}",
              f"line_free = {_optional_ghz(s['line_free'])}",
              f"baseline_order = {s['baseline_order']!r}",
              ""]
    sections = [_region_section(loupe, state), _measure_section(loupe, state), _moment_section(loupe, state),
                _pv_section(state), _channel_map_section(state), _population_section(loupe, state),
                _loupe_section(loupe, state)]
    body = []
    for section in sections:
        body += section + [""]
    return "\n".join(header + body).rstrip("\n") + "\n"

