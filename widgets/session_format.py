"""The session file format ("cubeloupe-session"): its fields, their checks, and the text layout.

`cubeloupe.widgets.session` builds and restores sessions; this module says
what a valid session file holds, field by field, so that reading one fails
with a `SessionError` naming the bad field before anything is built.
"""

import json
import math
from importlib.metadata import PackageNotFoundError, version as package_version

import astropy.units as u
import numpy as np
from regions import CirclePixelRegion, EllipsePixelRegion, PixCoord, PolygonPixelRegion, RectanglePixelRegion

from cubeloupe.analysis import AXIS_KINDS, CONVENTIONS, MAX_ORDER, CubeloupeError

__all__ = ["CHANNEL_MAP_FIELDS", "LOUPE_SETTINGS", "MOMENT_SETTINGS", "SESSION_FORMAT", "SESSION_VERSION",
           "VIEW_SETTINGS", "SessionError", "check_session", "cubeloupe_version", "drawn_shape", "pixel_shape", "session_text"]

SESSION_FORMAT = "cubeloupe-session"
#: Version 2 (#16, #18) added the position–velocity path, the channel maps and the population diagram
#: (``views.pv_panel``, ``views.channel_map_panel``, ``views.excitation_panel``, ``channel_maps``); a
#: version 1 file opens with those at their defaults.
SESSION_VERSION = 2


class SessionError(CubeloupeError, ValueError):
    """A session file cannot be read: not JSON, another format or version, or a bad or missing field."""


def cubeloupe_version():
    """The installed cubeloupe version ('unknown' when it is not installed as a package)."""
    try:
        return package_version("cubeloupe")
    except PackageNotFoundError:
        return "unknown"


# ------------------------------------------------------------------ field checks
def _is_number(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _is_range(value):
    return isinstance(value, list) and len(value) == 2 and all(_is_number(v) for v in value)


def _optional_number(value):
    return value is None or _is_number(value)


def _positive_or_none(value):
    return value is None or (_is_number(value) and value > 0)


def _count(value):
    return isinstance(value, int) and not isinstance(value, bool) and value >= 0


def _text(value):
    return isinstance(value, str)


def _flag(value):
    return isinstance(value, bool)


def _ranges(value):
    return isinstance(value, list) and all(_is_range(r) for r in value)


def _numbers(value):
    return isinstance(value, list) and all(_is_number(v) for v in value)


def _texts(value):
    return isinstance(value, list) and all(isinstance(v, str) for v in value)


def _path(value):
    return isinstance(value, list) and (value == [] or (len(value) >= 2 and all(_is_range(v) for v in value)))


#: The fields of a line ticked in the population diagram (`ExcitationPanel.picked`) and their checks.
_PICKED_FIELDS = {"region": lambda v: isinstance(v, str), "window": lambda v: _count(v), "line": lambda v: bool(v)
                  and isinstance(v, str), "flux": _is_number, "flux_error": lambda v: _is_number(v) and v >= 0,
                  "flux_unit": lambda v: isinstance(v, str), "upper_limit": _flag}


def _picked(value):
    return isinstance(value, list) and all(isinstance(item, dict) and set(item) == set(_PICKED_FIELDS) and all(
        check(item[key]) for key, check in _PICKED_FIELDS.items()) for item in value)


def _one_of(choices):
    def check(value):
        return value in choices
    check.choices = tuple(choices)
    return check


#: The suite's own settings, in the order a restore sets them, each with its check and what it must be.
LOUPE_SETTINGS = (
    ("z", _is_number, "a finite number"),
    ("convention", _one_of(CONVENTIONS), f"one of {sorted(CONVENTIONS)}"),
    ("velocity_offset", _is_number, "a finite number (km/s)"),
    ("reference_line", _text, "a catalog line name or ''"),
    ("rest_frequency", lambda v: _is_number(v) and v >= 0, "a rest frequency in GHz (0: the cube's RESTFRQ)"),
    ("axis_kind", _one_of(AXIS_KINDS), f"one of {list(AXIS_KINDS)}"),
    ("spectrum_span", _one_of(("all", "window")), "'all' or 'window'"),
    ("magnification", lambda v: _is_number(v) and v > 0, "a positive number"),
    ("cosmology", _text, "an astropy cosmology name, e.g. 'Planck18'"),
    ("baseline_order", lambda v: _count(v) and v <= MAX_ORDER, f"a whole number from 0 to {MAX_ORDER}"),
    ("show_subtracted", _flag, "true or false"),
    ("clip", _positive_or_none, "a positive number of rms, or null"),
    ("line_free", _ranges, "a list of [low, high] observed frequencies in GHz"),
    ("line_window", lambda v: v == [] or _is_range(v), "[low, high] observed frequency in GHz, or []"),
    ("peaks", _numbers, "a list of observed frequencies in GHz"),
    ("window", _count, "a window number"),
    ("channel", _count, "a channel number"),
    ("sky_source", _text, "'channel' or a moment map name"),
)

#: Settings of the parts (attribute of the Loupe -> trait), set after the suite's own.
VIEW_SETTINGS = {
    "line_overlay": (
        ("velocity_range", lambda v: _is_number(v) and v > 0, "a positive number (km/s)"),
        ("species", _texts, "a list of species names"),
        ("spin_isomer", _text, "a spin isomer choice"),
        ("max_E_up", _optional_number, "a number (K) or null"),
        ("families", _texts, "a list of line family names"),
        ("hyperfine_components", _flag, "true or false"),
    ),
    "sky_view": (
        ("stretch", _text, "a stretch name"),
        ("palette", _text, "a colour ramp name"),
        ("lower_percentile", _is_number, "a percentile"),
        ("upper_percentile", _is_number, "a percentile"),
        ("vmin", _optional_number, "a number or null"),
        ("vmax", _optional_number, "a number or null"),
        ("show_beam", _flag, "true or false"),
        ("contour_source", _text, "'' or a moment map name"),
        ("contour_levels", _numbers, "a list of numbers"),
        ("tool", _text, "a sky tool name"),
        ("velocity_palette", _text, "a colour ramp name for velocity maps"),
    ),
    "moment_panel": (
        ("significance", lambda v: _is_number(v) and v > 0, "a positive number of moment-0 errors"),
    ),
    "channel_bar": (
        ("play_interval", lambda v: _count(v) and v > 0, "milliseconds between channels"),
    ),
    "spectrum_view": (
        ("mode", _text, "a click mode"),
    ),
    "region_list": (
        ("selected", _text, "'' or a region name"),
    ),
    # Smoothing and line fits (#18); the kernel before its width (a new kernel starts from its usual width).
    "smoothing": (
        ("kernel", _one_of(("none", "hanning", "boxcar", "gaussian", "rebin")),
         "one of 'none', 'hanning', 'boxcar', 'gaussian', 'rebin'"),
        ("width", lambda v: _is_number(v) and v > 0, "a positive number of channels"),
        ("delivered_hanning", _flag, "true or false"),
        ("show_raw", _flag, "true or false"),
    ),
    "fit_panel": (
        ("model", _text, "'none', '1', '2', '3' or 'hyperfine: <group>'"),
    ),
    # Version 2 (#16, #18). The path last: it takes the slice, with the width and window set before it.
    "pv_panel": (
        ("only_line_window", _flag, "true or false"),
        ("width_unit", _one_of(("pixels", "arcsec")), "'pixels' or 'arcsec'"),
        ("width", lambda v: _is_number(v) and v > 0, "a positive width in width_unit"),
        ("path_window", _count, "a window number"),
        ("path", _path, "[] or [[x, y], ...] (pixels, two vertices or more)"),
    ),
    "channel_map_panel": (
        ("n", lambda v: _count(v) and 1 <= v <= 64, "a whole number of panels from 1 to 64"),
        ("average", _flag, "true or false"),
        ("label_in", _one_of(("velocity", "frequency")), "'velocity' or 'frequency'"),
    ),
    # The ticked lines before the species of the prediction, the toggle before its temperature and amount
    # (turning it on starts from the fit).
    "excitation_panel": (
        ("limit_sigma", lambda v: _is_number(v) and v > 0, "a positive signal-to-noise ratio"),
        ("spin", _one_of(("joint", "separate")), "'joint' or 'separate'"),
        ("picked", _picked, "a list of ticked lines, each {" + ", ".join(_PICKED_FIELDS) + "}"),
        ("prediction_species", _text, "a species name or ''"),
        ("show_prediction", _flag, "true or false"),
        ("prediction_temperature", lambda v: _is_number(v) and v > 0, "a temperature in K"),
        ("prediction_amount", _is_number, "log10 of a molecule count or column density (cm^-2)"),
        ("prediction_fwhm", lambda v: _is_number(v) and v > 0, "a line width (FWHM) in km/s"),
    ),
}

#: What the channel maps shown were made from (`ChannelMapPanel.made_with`; version 2).
CHANNEL_MAP_FIELDS = (
    ("line_window", _is_range, "[low, high] observed frequency in GHz"),
    ("n", lambda v: _count(v) and 1 <= v <= 64, "a whole number of panels from 1 to 64"),
    ("average", _flag, "true or false"),
    ("label_in", _one_of(("velocity", "frequency")), "'velocity' or 'frequency'"),
    ("rest_frequency", lambda v: _is_number(v) and v >= 0, "a rest frequency in GHz (0: the cube's RESTFRQ)"),
    ("z", _is_number, "a finite number"),
    ("convention", _one_of(CONVENTIONS), f"one of {sorted(CONVENTIONS)}"),
)

#: The settings moment maps are made with (recorded with the maps, which may predate later changes).
MOMENT_SETTINGS = ("line_window", "line_free", "baseline_order", "rest_frequency", "z", "convention", "clip")

_REGION_FIELDS = {
    "box": ("ra", "dec", "width", "height", "angle"),
    "oval": ("ra", "dec", "width", "height", "angle"),
    "circle": ("ra", "dec", "radius"),
    "outline": ("vertices",),
    "pixel": ("ra", "dec"),
}
_PIXEL_SHAPES = {"rectangle": RectanglePixelRegion, "ellipse": EllipsePixelRegion, "polygon": PolygonPixelRegion,
                 "circle": CirclePixelRegion}
_PIXEL_FIELDS = {"rectangle": ("x", "y", "width", "height", "angle"), "ellipse": ("x", "y", "width", "height", "angle"),
                 "polygon": ("vertices",), "circle": ("x", "y", "radius")}


# ------------------------------------------------------------------ pixel shapes
def drawn_shape(shape):
    """A pixel shape (rectangle, ellipse, polygon) as a plain dict; floats kept exactly.

    Examples
    --------
    >>> from regions import PixCoord, RectanglePixelRegion
    >>> drawn_shape(RectanglePixelRegion(PixCoord(3.0, 4.5), width=2.0, height=3.0))["shape"]
    'rectangle'
    """
    if isinstance(shape, PolygonPixelRegion):
        return {"shape": "polygon", "vertices": [[float(x), float(y)] for x, y in zip(shape.vertices.x,
                                                                                     shape.vertices.y)]}
    if isinstance(shape, CirclePixelRegion):
        return {"shape": "circle", "x": float(shape.center.x), "y": float(shape.center.y),
                "radius": float(shape.radius)}
    for name, cls in (("rectangle", RectanglePixelRegion), ("ellipse", EllipsePixelRegion)):
        if isinstance(shape, cls):
            return {"shape": name, "x": float(shape.center.x), "y": float(shape.center.y),
                    "width": float(shape.width), "height": float(shape.height),
                    "angle": float(u.Quantity(shape.angle, u.deg).to_value(u.deg))}
    raise SessionError(f"a drawn region of type {type(shape).__name__} cannot be saved; "
                       "draw a box, oval, circle or outline")


def pixel_shape(item):
    """The `regions` pixel shape of a `drawn_shape` dict."""
    cls = _PIXEL_SHAPES[item["shape"]]
    if item["shape"] == "polygon":
        xy = np.asarray(item["vertices"], dtype=float)
        return cls(PixCoord(xy[:, 0], xy[:, 1]))
    if item["shape"] == "circle":
        return cls(PixCoord(item["x"], item["y"]), radius=item["radius"])
    return cls(PixCoord(item["x"], item["y"]), width=item["width"], height=item["height"],
               angle=item["angle"] * u.deg)


def check_session(data, where="the session"):
    """Check a session dict field by field; returns its parts, or raises `SessionError` naming the bad field.

    Returns
    -------
    dict
        ``cubes``, ``settings``, ``regions``, ``views``, ``moments``, ``catalog`` (extra line lists),
        ``client`` (whether a dask.distributed client made the moment maps), ``channel_maps`` (what the
        channel maps shown were made from, or None), ``cubeloupe_version`` and ``version``.
        A field added in a later version and missing from an earlier file takes its default.
    """
    if not isinstance(data, dict):
        raise SessionError(f"{where} is not a cubeloupe session (a JSON object was expected)")
    if data.get("format") != SESSION_FORMAT:
        raise SessionError(f"{where} is not a cubeloupe session: its 'format' is {data.get('format')!r}, "
                           f"not {SESSION_FORMAT!r}")
    found = data.get("version")
    if not isinstance(found, int) or isinstance(found, bool) or found < 1:
        raise SessionError(f"{where}: field 'version' must be a whole number; got {found!r}")
    if found > SESSION_VERSION:
        raise SessionError(f"{where} is session format version {found}, written by cubeloupe "
                           f"{data.get('cubeloupe_version', '?')}; this cubeloupe ({cubeloupe_version()}) reads "
                           f"versions up to {SESSION_VERSION}: update cubeloupe to open it")
    known = {"format", "version", "cubeloupe_version", "cubes", "settings", "regions", "views", "moments", "catalog",
             "client", "channel_maps"}
    unknown = sorted(set(data) - known)
    if unknown:
        raise SessionError(f"{where}: unknown field(s) {unknown}; a version {found} session has {sorted(known)}")
    for key, kind in (("cubes", list), ("settings", dict), ("regions", list), ("views", dict)):
        if not isinstance(data.get(key), kind):
            raise SessionError(f"{where}: field {key!r} is missing or not a {kind.__name__}")
    cubes = _checked_cubes(data["cubes"], where)
    settings = _checked_settings(data["settings"], len(cubes), where)
    regions = _checked_regions(data["regions"], len(cubes), where)
    views = _checked_views(data["views"], where)
    path_window = views["pv_panel"].get("path_window", 0)
    if path_window >= len(cubes):
        raise SessionError(f"{where}: field 'views.pv_panel.path_window' is {path_window}, but the session names "
                           f"{len(cubes)} cube(s) (windows 0 to {len(cubes) - 1})")
    channel_maps = _checked_channel_maps(data.get("channel_maps"), len(cubes), where)
    moments = _checked_moments(data.get("moments"), len(cubes), where)
    catalog = _checked_catalog(data.get("catalog", []), where)
    if not isinstance(data.get("client", False), bool):
        raise SessionError(f"{where}: field 'client' must be true or false (whether a dask.distributed client made "
                           f"the moment maps); got {data['client']!r}")
    if settings["sky_source"] != "channel" and moments is None:
        raise SessionError(f"{where}: field 'settings.sky_source' is {settings['sky_source']!r} but the session "
                           "has no moment maps; set it to 'channel'")
    return {"cubes": cubes, "settings": settings, "regions": regions, "views": views, "moments": moments,
            "catalog": catalog, "client": data.get("client", False), "channel_maps": channel_maps,
            "cubeloupe_version": str(data.get("cubeloupe_version", "unknown")), "version": found}


# ------------------------------------------------------------------ checks of each field
def _checked_cubes(cubes, where):
    if not cubes:
        raise SessionError(f"{where}: field 'cubes' is empty; a session names at least one cube")
    out = []
    for index, cube in enumerate(cubes):
        field = f"cubes[{index}]"
        if not isinstance(cube, dict) or not isinstance(cube.get("path"), str) or not cube["path"]:
            raise SessionError(f"{where}: field {field}.path must be the cube's file path; got {cube!r}")
        shape = cube.get("shape")
        if not (isinstance(shape, list) and len(shape) == 3 and all(_count(n) for n in shape)):
            raise SessionError(f"{where}: field {field}.shape must be [channels, ny, nx]; got {shape!r}")
        if "absolute" in cube and not isinstance(cube["absolute"], str):
            raise SessionError(f"{where}: field {field}.absolute must be a path; got {cube['absolute']!r}")
        unknown = sorted(set(cube) - {"path", "absolute", "shape", "hdu"})
        if unknown:
            raise SessionError(f"{where}: unknown field(s) {unknown} in {field}")
        out.append(dict(cube))
    return out


def _checked_catalog(catalog, where):
    """The extra line lists: files (``path``, ``absolute``) or a note of a table given in memory (``in_memory``)."""
    if not isinstance(catalog, list):
        raise SessionError(f"{where}: field 'catalog' must be a list of line list files; got {catalog!r}")
    out = []
    for index, record in enumerate(catalog):
        field = f"catalog[{index}]"
        if isinstance(record, dict) and set(record) == {"in_memory"} and isinstance(record["in_memory"], str):
            out.append(dict(record))
            continue
        if not isinstance(record, dict) or not isinstance(record.get("path"), str) or not record["path"]:
            raise SessionError(f"{where}: field {field}.path must be a line list's file path; got {record!r}")
        if "absolute" in record and not isinstance(record["absolute"], str):
            raise SessionError(f"{where}: field {field}.absolute must be a path; got {record['absolute']!r}")
        unknown = sorted(set(record) - {"path", "absolute"})
        if unknown:
            raise SessionError(f"{where}: unknown field(s) {unknown} in {field}")
        out.append(dict(record))
    return out


def _check_fields(values, table, prefix, where, required=True):
    if not isinstance(values, dict):
        raise SessionError(f"{where}: field {prefix!r} must be an object; got {values!r}")
    names = {name for name, _, _ in table}
    unknown = sorted(set(values) - names)
    if unknown:
        raise SessionError(f"{where}: unknown field(s) {[f'{prefix}.{n}' for n in unknown]}; "
                           f"known: {sorted(names)}")
    for name, check, rule in table:
        if name not in values:
            if required:
                raise SessionError(f"{where}: field '{prefix}.{name}' is missing (it must be {rule})")
            continue
        if not check(values[name]):
            raise SessionError(f"{where}: field '{prefix}.{name}' is {values[name]!r}; it must be {rule}")
    return dict(values)


def _checked_settings(settings, n_cubes, where):
    settings = _check_fields(settings, LOUPE_SETTINGS, "settings", where)
    if settings["window"] >= n_cubes:
        raise SessionError(f"{where}: field 'settings.window' is {settings['window']}, but the session names "
                           f"{n_cubes} cube(s) (windows 0 to {n_cubes - 1})")
    return settings


def _checked_regions(regions, n_cubes, where):
    out, names = [], set()
    for index, record in enumerate(regions):
        field = f"regions[{index}]"
        if not isinstance(record, dict):
            raise SessionError(f"{where}: field {field} must be an object; got {record!r}")
        kind = record.get("kind")
        if kind not in _REGION_FIELDS:
            raise SessionError(f"{where}: field {field}.kind is {kind!r}; it must be one of {sorted(_REGION_FIELDS)}")
        for key in ("name", "color"):
            if not isinstance(record.get(key), str) or not record[key]:
                raise SessionError(f"{where}: field {field}.{key} must be a non-empty text; got {record.get(key)!r}")
        if record["name"] in names:
            raise SessionError(f"{where}: two regions are named {record['name']!r} ({field}); names must be unique")
        names.add(record["name"])
        for key in _REGION_FIELDS[kind]:
            value = record.get(key)
            good = (isinstance(value, list) and len(value) >= 3 and all(_is_range(v) for v in value)
                    if key == "vertices" else _is_number(value))
            if not good:
                raise SessionError(f"{where}: field {field}.{key} of {kind} region {record['name']!r} is "
                                   f"{value!r}; it must be {'[[ra, dec], ...] in deg' if key == 'vertices' else 'a number'}")
        unknown = sorted(set(record) - {"name", "color", "kind", "drawn", *_REGION_FIELDS[kind]})
        if unknown:
            raise SessionError(f"{where}: unknown field(s) {unknown} in {field} ({record['name']!r})")
        if "drawn" in record:
            _check_drawn(record["drawn"], f"{field}.drawn", n_cubes, where)
        out.append(dict(record))
    return out


def _check_drawn(drawn, field, n_cubes, where):
    if not isinstance(drawn, dict) or drawn.get("shape") not in _PIXEL_SHAPES:
        raise SessionError(f"{where}: field {field}.shape must be one of {sorted(_PIXEL_SHAPES)}; got {drawn!r}")
    if not (_count(drawn.get("window")) and drawn["window"] < n_cubes):
        raise SessionError(f"{where}: field {field}.window is {drawn.get('window')!r}; it must be a window number "
                           f"below {n_cubes}")
    keys = _PIXEL_FIELDS[drawn["shape"]]
    for key in keys:
        value = drawn.get(key)
        good = (isinstance(value, list) and len(value) >= 3 and all(_is_range(v) for v in value)
                if key == "vertices" else _is_number(value))
        if not good or (key in ("width", "height", "radius") and value <= 0):
            raise SessionError(f"{where}: field {field}.{key} is {value!r}; it must be "
                               f"{'[[x, y], ...] pixels' if key == 'vertices' else 'a finite (positive size) number'}")
    unknown = sorted(set(drawn) - {"shape", "window", *keys})
    if unknown:
        raise SessionError(f"{where}: unknown field(s) {unknown} in {field}")


def _checked_views(views, where):
    unknown = sorted(set(views) - set(VIEW_SETTINGS))
    if unknown:
        raise SessionError(f"{where}: unknown field(s) {[f'views.{n}' for n in unknown]}; "
                           f"known: {sorted(VIEW_SETTINGS)}")
    return {part: _check_fields(views.get(part, {}), table, f"views.{part}", where, required=False)
            for part, table in VIEW_SETTINGS.items()}


def _checked_channel_maps(record, n_cubes, where):
    if record is None:
        return None
    table = (("window", lambda v: _count(v) and v < n_cubes, f"a window number below {n_cubes}"),) + CHANNEL_MAP_FIELDS
    return _check_fields(record, table, "channel_maps", where)


def _checked_moments(moments, n_cubes, where):
    if moments is None:
        return None
    table = (("window", lambda v: _count(v) and v < n_cubes, f"a window number below {n_cubes}"),) + tuple(
        entry for entry in LOUPE_SETTINGS if entry[0] in MOMENT_SETTINGS)
    moments = _check_fields(moments, table, "moments", where)
    if not moments["line_window"]:
        raise SessionError(f"{where}: field 'moments.line_window' is empty; moment maps need a line window")
    return moments


def session_text(data, indent=""):
    """A session dict as JSON text: one field a line, short lists of numbers kept on one line for reading."""
    inner = indent + "  "
    if isinstance(data, dict) and data:
        fields = [f"{inner}{json.dumps(key)}: {session_text(value, inner).lstrip()}" for key, value in data.items()]
        text = "{\n" + ",\n".join(fields) + f"\n{indent}}}"
    elif isinstance(data, list) and data and not all(isinstance(v, (int, float, str, bool)) or v is None
                                                   for v in data) and not all(_is_range(v) for v in data):
        text = "[\n" + ",\n".join(inner + session_text(v, inner) for v in data) + f"\n{indent}]"
    else:
        text = json.dumps(data, allow_nan=False)
    return text + ("\n" if not indent else "")
