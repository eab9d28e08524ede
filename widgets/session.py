"""Sessions: the one description of a suite's state, saved to and read from a versioned JSON file.

A `SessionState` is built from a `Loupe` (`SessionState.from_loupe`), written
with `write_session`, read back with `read_session` (which checks every field
before anything is built) and turned into a new suite with
`SessionState.restore`. `session_state` gives the same description as a plain
dict, for the metadata of exported files.

The file format ("cubeloupe-session", version 2) is our own::

    {
      "format": "cubeloupe-session",
      "version": 2,
      "cubeloupe_version": "0.1.0",
      "cubes": [{"path": "disk.fits", "absolute": "/data/disk.fits", "shape": [64, 72, 72]}],
      "settings": {"window": 0, "channel": 31, "z": 0.0, ... every setting of the suite ...},
      "regions": [{"name": "core", "color": "#...", "kind": "box", "ra": ..., ...,
                   "drawn": {"window": 0, "shape": "rectangle", "x": ..., "y": ..., ...}}],
      "views": {"sky_view": {"stretch": "asinh", ...}, "line_overlay": {...}, ...,
                "pv_panel": {"path": [[x, y], ...], "width": 3.0, ...}, "channel_map_panel": {...},
                "excitation_panel": {"picked": [...], "show_prediction": true, ...}},
      "moments": {"window": 0, "line_window": [...], ...} or null,
      "channel_maps": {"window": 0, "line_window": [...], "n": 16, ...} or null,
      "catalog": [{"path": "my_lines.ecsv", "absolute": "/data/my_lines.ecsv"}],
      "client": false
    }

Version 2 added the position–velocity path (``views.pv_panel``, whose width is the sky's path
tool's), the channel-map settings and what the maps shown were made from (``channel_maps``), and
the population diagram's ticked lines and LTE prediction (``views.excitation_panel``). Version 1
files still open: what they lack takes its default (the line overlay's families too, for a file
written before the catalog had families).

Cube paths are stored relative to the session file (``path``) and as given
(``absolute``); reading tries the relative one first, so a folder of cubes and
sessions can be moved as a whole. A region keeps its sky shape and, when it was
drawn on the sky view, the exact pixel shape on the grid it was drawn on
(``drawn``), so its spectrum is made from the same pixels after a restore.
``catalog`` lists the extra line lists given to the suite (``Loupe(catalog=...)``),
found like the cubes; a table given in memory is noted (``in_memory``) and must be
given again. ``client`` says whether a dask.distributed client made the moment maps;
the client itself is not saved (pass ``client=`` again to use one).

Examples
--------
>>> loupe.save_session("field.cubeloupe.json")               # doctest: +SKIP
>>> again = Loupe.from_session("field.cubeloupe.json")       # doctest: +SKIP
"""

import dataclasses
import inspect
import json
import os
import tempfile
from pathlib import Path

import astropy.units as u
import numpy as np
from regions import PixelRegion

from cubeloupe.analysis import CubeFileError, CubeloupeError, OutputExistsError, check_output_path, cube_source

from .session_format import (
    LOUPE_SETTINGS, MOMENT_SETTINGS, SESSION_FORMAT, SESSION_VERSION, VIEW_SETTINGS, SessionError, check_session,
    cubeloupe_version, drawn_shape, pixel_shape, session_text,
)

__all__ = ["LOUPE_SETTINGS", "MOMENT_SETTINGS", "SESSION_FORMAT", "SESSION_VERSION", "VIEW_SETTINGS", "SessionError",
           "SessionState", "current_moment_settings", "follow_moments", "moment_settings", "read_session", "restore_steps",
           "session_state", "session_text", "write_session"]


def _plain(value):
    """A trait value as plain JSON (lists, floats, ints, str, bool, None)."""
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value)
    return value


def _drawn_window(loupe, name):
    """(window, pixel shape) of the first window on whose grid region ``name`` is used as drawn, else None."""
    for index, cube in enumerate(loupe.cubes):
        shape = loupe.region_list.region_for(name, cube)
        if isinstance(shape, PixelRegion):
            return index, shape
    return None


def _file_record(path, relative_to):
    """{"path": relative to ``relative_to`` when given, "absolute": ...} of a file."""
    absolute = os.path.abspath(str(path))
    path = absolute
    if relative_to is not None:
        try:
            path = os.path.relpath(absolute, os.path.abspath(relative_to))
        except ValueError:  # another drive on Windows: keep the absolute path
            path = absolute
    return {"path": Path(path).as_posix(), "absolute": absolute}


def _cube_record(cube, index, relative_to):
    source = cube_source(cube)
    if not source or not source.get("path"):
        raise SessionError(f"window {index} is a cube made in memory, with no file; a session can only name "
                           "cubes opened from files (open it with open_cube or pass its path to Loupe)")
    record = {**_file_record(source["path"], relative_to), "shape": [int(n) for n in cube.shape]}
    if source.get("hdu") not in (None, 0):
        record["hdu"] = source["hdu"]
    return record


def _catalog_records(catalog, relative_to):
    """The extra line lists given to a suite: files by path, tables in memory noted by type (not saved)."""
    if catalog is None:
        return ()
    items = catalog if isinstance(catalog, (list, tuple)) else [catalog]
    return tuple(_file_record(item, relative_to) if isinstance(item, (str, os.PathLike))
                 else {"in_memory": type(item).__name__} for item in items)


# ------------------------------------------------------------------ the state
@dataclasses.dataclass(frozen=True)
class SessionState:
    """Everything a user set in a suite: cubes, settings, regions, view settings, moment maps.

    Attributes
    ----------
    cubes : tuple of dict
        Per window: ``path`` (relative to the session file when written), ``absolute``, ``shape``
        and ``hdu`` when not the first.
    settings : dict
        The Loupe's own settings (see `LOUPE_SETTINGS`).
    regions : tuple of dict
        The region dicts (name, colour, kind, sky shape), each with ``drawn`` (``window`` and the
        pixel shape) when it is used as drawn on a window's grid.
    views : dict
        Settings of the parts: ``sky_view``, ``line_overlay``, ``spectrum_view``, ``region_list``.
    moments : dict or None
        ``window`` and the `MOMENT_SETTINGS` the last moment maps were made with; None without maps.
    catalog : tuple of dict
        The extra line lists given to the suite: ``path`` and ``absolute`` of a file, or
        ``in_memory`` (the type of a table given in memory, which a session cannot hold).
    client : bool
        Whether the suite sent its moment maps to a dask.distributed client (the client is not saved).
    channel_maps : dict or None
        What the channel maps shown were made from (`ChannelMapPanel.made_with`); None without maps.
    cubeloupe_version : str
    version : int
        The session format version.
    """

    cubes: tuple
    settings: dict
    regions: tuple
    views: dict
    moments: object = None
    catalog: tuple = ()
    client: bool = False
    channel_maps: object = None
    cubeloupe_version: str = dataclasses.field(default_factory=cubeloupe_version)
    version: int = SESSION_VERSION

    # ------------------------------------------------------------- from a suite
    @classmethod
    def from_loupe(cls, loupe, relative_to=None):
        """The state of ``loupe``; cube paths relative to folder ``relative_to`` when given."""
        if not getattr(loupe, "cubes", None):
            raise SessionError("this suite shows no cube; there is no session to save")
        cubes = tuple(_cube_record(cube, i, relative_to) for i, cube in enumerate(loupe.cubes))
        settings = {name: _plain(getattr(loupe, name)) for name, _, _ in LOUPE_SETTINGS}
        regions = []
        for item in loupe.regions:
            record = _plain(dict(item))
            drawn = _drawn_window(loupe, item["name"]) if item["kind"] != "pixel" else None
            if drawn is not None:
                record["drawn"] = {"window": drawn[0], **drawn_shape(drawn[1])}
            regions.append(record)
        views = {}
        for part, traits in VIEW_SETTINGS.items():
            widget = getattr(loupe, part)
            views[part] = {name: _plain(getattr(widget, name)) for name, _, _ in traits if widget.has_trait(name)}
            for name, check, rule in traits:  # e.g. a ticked line whose flux is NaN: JSON cannot hold it
                if name in views[part] and not check(views[part][name]):
                    raise SessionError(f"the suite's {part}.{name} = {views[part][name]!r} cannot be saved: it must "
                                       f"be {rule}; change it (for a ticked line, untick it) and save again")
        return cls(cubes=cubes, settings=settings, regions=tuple(regions), views=views,
                   moments=moment_settings(loupe),
                   catalog=_catalog_records(getattr(loupe, "catalog_argument", None), relative_to),
                   client=getattr(loupe, "client", None) is not None,
                   channel_maps=_plain(dict(loupe.channel_map_panel.made_with)) or None
                   if hasattr(loupe, "channel_map_panel") else None)

    # ------------------------------------------------------------- to and from JSON
    def to_dict(self):
        """The state as the plain dict written to a session file."""
        return {"format": SESSION_FORMAT, "version": self.version, "cubeloupe_version": self.cubeloupe_version,
                "cubes": [dict(c) for c in self.cubes], "settings": dict(self.settings),
                "regions": [dict(r) for r in self.regions], "views": {k: dict(v) for k, v in self.views.items()},
                "moments": None if self.moments is None else dict(self.moments),
                "catalog": [dict(c) for c in self.catalog], "client": self.client,
                "channel_maps": None if self.channel_maps is None else dict(self.channel_maps)}

    def to_json(self):
        """The session file's text (see `session_text`)."""
        return session_text(self.to_dict())

    @classmethod
    def from_dict(cls, data, where="the session"):
        """Check a session dict field by field and return the state; `SessionError` names the bad field."""
        parts = check_session(data, where)
        return cls(cubes=tuple(parts["cubes"]), settings=parts["settings"], regions=tuple(parts["regions"]),
                   views=parts["views"], moments=parts["moments"], catalog=tuple(parts["catalog"]),
                   client=parts["client"], channel_maps=parts["channel_maps"],
                   cubeloupe_version=parts["cubeloupe_version"],
                   version=parts["version"])

    # ------------------------------------------------------------- to a suite
    def cube_paths(self, folder=None):
        """The cube files, found relative to ``folder`` first, else at their absolute path; checked to exist."""
        return [_found(cube, folder, f"the cube of window {index}", "the cube")
                for index, cube in enumerate(self.cubes)]

    def catalog_paths(self, folder=None):
        """The extra line list files, found as the cubes are; `SessionError` for a table that was given in memory."""
        for index, record in enumerate(self.catalog):
            if "in_memory" in record:
                raise SessionError(f"the session's catalog[{index}] was a line list given in memory (a "
                                   f"{record['in_memory']}), which a session cannot hold; pass it again with "
                                   "catalog=... (e.g. Loupe.from_session(path, catalog=my_lines))")
        return [_found(record, folder, f"line list catalog[{index}]", "the line list")
                for index, record in enumerate(self.catalog)]

    def restore(self, loupe_class, folder=None, **kwargs):
        """A new suite of class ``loupe_class`` in this state (whole, or not at all).

        The cubes are opened first; every setting is then applied and read back. Anything that
        fails closes the new suite and raises a `CubeloupeError` naming the field.
        """
        paths = self.cube_paths(folder)
        for index, cube in enumerate(self.cubes):
            if cube.get("hdu") not in (None, 0):
                raise SessionError(f"window {index} is read from HDU {cube['hdu']!r}, which a suite opened from "
                                   "paths cannot choose; open the cube with open_cube(path, hdu=...) instead")
        arguments = _construction_arguments(loupe_class, self.settings)
        if self.catalog and "catalog" not in kwargs:
            arguments["catalog"] = self.catalog_paths(folder)
        loupe = loupe_class(paths, **arguments, **kwargs)
        try:
            if loupe.status.level == "error":
                raise SessionError(f"the cubes could not be shown: {loupe.status.message}")
            for index, (cube, record) in enumerate(zip(loupe.cubes, self.cubes)):
                if list(cube.shape) != list(record["shape"]):
                    raise SessionError(f"the cube of window {index} ({paths[index]}) has shape {list(cube.shape)}, "
                                       f"but the session was made on one of shape {record['shape']}: it is another "
                                       "file; put the session's cube back")
            for target, name, value in restore_steps(self):
                if target == "region":
                    _add_region(loupe, value)
                elif target == "moments":
                    _remake_moments(loupe, value)
                elif target == "channel_maps":
                    _remake_channel_maps(loupe, value)
                else:
                    widget = loupe if target == "loupe" else getattr(loupe, target)
                    _set(widget, target, name, value)
            _check_restored(loupe, self)
            if self.client and kwargs.get("client") is None:
                loupe.moment_panel.status.info("The session's moment maps were made on a dask.distributed client; "
                                               "these were made in this kernel (the same maps). Pass client=... "
                                               "to from_session to use one.")
        except BaseException:
            loupe.close()
            raise
        return loupe


def _found(record, folder, what, thing):
    """The file of a session ``record`` (path, absolute): relative to ``folder`` first, else absolute; checked."""
    tried = []
    if folder is not None and not os.path.isabs(record["path"]):
        tried.append(os.path.normpath(os.path.join(folder, record["path"])))
    tried += [p for p in (record["path"], record.get("absolute")) if p and os.path.isabs(p)]
    found = next((p for p in tried if os.path.isfile(p)), None)
    if found is None:
        raise CubeFileError(f"{what} is missing: no file at "
                            f"{' or '.join(repr(p) for p in dict.fromkeys(tried)) or repr(record['path'])}; "
                            f"put {thing} back, or edit its 'path' in the session file")
    return found


def moment_settings(loupe):
    """The window and settings of the suite's last moment maps (None when there are none).

    The settings are those the suite had when the maps were made (recorded by the suite),
    else its current ones.
    """
    if getattr(loupe, "moments", None) is None:
        return None
    recorded = getattr(loupe, "moments_made_with", None)
    return _plain(dict(recorded)) if recorded else current_moment_settings(loupe)


def follow_moments(loupe):
    """Record, each time ``loupe`` gets new moment maps, the settings they were made with (``moments_made_with``).

    The suite's settings may change afterwards; a session and a script make the maps as they were made.
    """
    def record(change):
        loupe.moments_made_with = current_moment_settings(loupe) if change.new is not None else None
    loupe.observe(record, names=["moments"])


def current_moment_settings(loupe):
    """The window of the suite's last moment maps and its current `MOMENT_SETTINGS`, as a plain dict."""
    return {"window": int(loupe.moment_panel.window_index),
            **{name: _plain(getattr(loupe, name)) for name in MOMENT_SETTINGS}}


def _construction_arguments(loupe_class, settings):
    # The suite is opened with its defaults; the redshift and velocity zero are then set step by step
    # (`restore_steps`), as a user would, so that no choice of the opening is left over.
    arguments = {}
    # A restored suite shows what was saved, not a first view of its own.
    if "first_view" in inspect.signature(loupe_class).parameters:
        arguments["first_view"] = False
    return arguments


def restore_steps(state):
    """The steps that rebuild ``state`` on a new suite, in order: (target, name, value).

    ``target`` is 'loupe', a part's attribute name ('sky_view', ...), 'region' (value: the
    region record), 'moments' (value: the moment settings) or 'channel_maps' (value: what the
    channel maps were made from; last, after the parts' settings). `SessionState.restore` runs them and
    `cubeloupe.widgets.replay.to_code` writes them out, so the two cannot disagree.
    """
    s, views = state.settings, state.views
    steps = [("loupe", "convention", s["convention"]), ("loupe", "z", s["z"]),
             ("line_overlay", "velocity_range", views.get("line_overlay", {}).get("velocity_range"))]
    steps += [("loupe", name, s[name]) for name in ("velocity_offset", "reference_line", "rest_frequency",
                                                    "axis_kind", "spectrum_span", "magnification", "cosmology",
                                                    "baseline_order", "show_subtracted", "clip")]
    steps += [("region", record["name"], record) for record in state.regions]
    steps += [("loupe", name, s[name]) for name in ("line_free", "line_window", "peaks")]
    if state.moments is not None:
        steps.append(("moments", "window", state.moments))
    steps += [("loupe", name, s[name]) for name in ("window", "channel", "sky_source")]
    for part, traits in VIEW_SETTINGS.items():
        for name, _, _ in traits:
            if (part, name) != ("line_overlay", "velocity_range") and name in views.get(part, {}):
                steps.append((part, name, views[part][name]))
    if state.channel_maps is not None:
        steps.append(("channel_maps", "made_with", state.channel_maps))
    return [step for step in steps if step[2] is not None or step[1] in ("clip", "max_E_up", "vmin", "vmax")]


def _set(widget, target, name, value):
    try:
        setattr(widget, name, value)
    except CubeloupeError:
        raise
    except Exception as exc:  # traitlets' TraitError and the like: name the field
        field = f"settings.{name}" if target == "loupe" else f"views.{target}.{name}"
        raise SessionError(f"the session's {field} = {value!r} cannot be used: {exc}") from None


def _add_region(loupe, record):
    item = {k: v for k, v in record.items() if k != "drawn"}
    drawn = record.get("drawn")
    if drawn is None:
        # Through the region list: it checks the region before the suite makes its spectra.
        loupe.region_list.regions = list(loupe.region_list.regions) + [item]
    else:
        loupe.window = drawn["window"]
        loupe.region_list.add(pixel_shape(drawn), name=item["name"], color=item["color"])
    if item["name"] not in loupe.region_list.names:
        raise SessionError(f"region {item['name']!r} of the session could not be restored: {loupe.status.message}")


def _remake_moments(loupe, recorded):
    current = {name: getattr(loupe, name) for name in MOMENT_SETTINGS}
    for name in MOMENT_SETTINGS:
        _set(loupe, "loupe", name, recorded[name])
    loupe.window = recorded["window"]
    loupe.make_moments(wait=True)
    if loupe.moments is None:
        raise SessionError(f"the session's moment maps could not be remade: {loupe.status.message}")
    for name in MOMENT_SETTINGS:
        _set(loupe, "loupe", name, current[name])
    # The window stays on the maps' own until the 'window' step: the sky view keeps the maps of the window
    # it shows, and the suite (as of #19) does not give them back after a switch away and back.


def _remake_channel_maps(loupe, recorded):
    panel = loupe.channel_map_panel
    panel.make(wait=True, record=recorded)
    if panel.state != "done":
        raise SessionError(f"the session's channel maps could not be remade: {panel.status.message}")


def _check_restored(loupe, state):
    """Read back every setting: a restored suite that differs from the session is refused."""
    for name, _, _ in LOUPE_SETTINGS:
        if _plain(getattr(loupe, name)) != state.settings[name]:
            raise SessionError(f"the session's settings.{name} = {state.settings[name]!r} did not hold: the suite "
                               f"has {_plain(getattr(loupe, name))!r} ({loupe.status.message or 'no message'})")
    restored = [{k: v for k, v in r.items()} for r in _plain(loupe.regions)]
    wanted = [{k: v for k, v in r.items() if k != "drawn"} for r in state.regions]
    if not same_regions(restored, wanted):
        raise SessionError(f"the session's regions did not hold: {loupe.status.message or 'they differ'}")


def same_regions(restored, saved):
    """True when region dicts agree: names, kinds and colours exactly, sky numbers to 1e-12.

    A drawn region is placed on the sky again from its pixels when a session opens; the sines and
    arctangents on the way may round differently in the last bit on another machine (a box's angle
    324.9996509044625 against the saved 324.99965090446244), which is no change of the region.
    """
    def same(a, b):
        if isinstance(a, float) or isinstance(b, float):
            return isinstance(a, (int, float)) and isinstance(b, (int, float)) and bool(
                np.isclose(a, b, rtol=1e-12, atol=1e-12))
        if isinstance(a, (list, tuple)) and isinstance(b, (list, tuple)):
            return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b))
        if isinstance(a, dict) and isinstance(b, dict):
            return a.keys() == b.keys() and all(same(a[k], b[k]) for k in a)
        return a == b

    return same(list(restored), list(saved))


# ------------------------------------------------------------------ files
def session_state(loupe, relative_to=None):
    """The state of ``loupe`` as a plain dict (the content of a session file), e.g. for export metadata.

    Parameters
    ----------
    loupe : Loupe
    relative_to : str or Path, optional
        Folder that cube paths are made relative to (absolute paths are always included too).

    Returns
    -------
    dict
        JSON-ready: ``format``, ``version``, ``cubeloupe_version``, ``cubes``, ``settings``, ``regions``,
        ``views``, ``moments``, ``catalog``, ``client``, ``channel_maps``.
    """
    return SessionState.from_loupe(loupe, relative_to=relative_to).to_dict()


def write_session(loupe, path, overwrite=False):
    """Write ``loupe``'s session to ``path`` (JSON) atomically; refuses to replace a file unless ``overwrite``.

    Returns
    -------
    Path
    """
    path = check_output_path(path, overwrite=overwrite)
    text = SessionState.from_loupe(loupe, relative_to=path.absolute().parent).to_json()
    # analysis.export writes FITS and ECSV; a JSON text needs the same care, done here: a temporary file in
    # the same folder, flushed, then linked (refusing an existing name) or renamed into place.
    handle, temporary = tempfile.mkstemp(dir=path.absolute().parent, prefix=".cubeloupe-", suffix=".part")
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            stream.write(text)
            stream.flush()
            os.fsync(stream.fileno())
        if overwrite:
            os.replace(temporary, path)
        else:
            try:
                os.link(temporary, path)
            except FileExistsError:
                raise OutputExistsError(f"{path} appeared while the session was written; choose another name or "
                                        "pass overwrite=True to replace it") from None
    finally:
        if os.path.exists(temporary):
            os.unlink(temporary)
    return path


def read_session(path):
    """Read and check a session file; returns the `SessionState` (nothing is built yet).

    Raises
    ------
    CubeFileError
        No file at ``path``.
    SessionError
        Not JSON, not a cubeloupe session, a newer format version, or a bad, missing or unknown field
        (the message names it).
    """
    path = Path(path)
    if not path.is_file():
        raise CubeFileError(f"no session file at {str(path)!r}; check the name and folder")
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise SessionError(f"{str(path)!r} is not a cubeloupe session: it is not valid JSON ({exc})") from None
    return SessionState.from_dict(data, where=repr(str(path)))


def made_with(loupe):
    """One line of text saying how maps were made (for FITS HISTORY, which holds text only)."""
    state = session_state(loupe)
    settings = state["settings"]
    moments = state.get("moments") or {}
    cubes = ", ".join(c.get("absolute") or c.get("path", "?") for c in state["cubes"])
    extra = "".join(f"; extra line list {c.get('absolute') or c.get('path') or 'given in memory'}"
                    for c in state.get("catalog", []))
    extra += "; moment maps made on a dask.distributed client" if state.get("client") else ""
    return (f"cubeloupe {state['cubeloupe_version']}: cube {cubes}{extra}; line window {settings.get('line_window')} "
            f"GHz; line-free {settings.get('line_free')} GHz; baseline order {settings.get('baseline_order')}; "
            f"z {settings.get('z')}; rest frequency {settings.get('rest_frequency')} GHz; velocity convention "
            f"{settings.get('convention')}; clip {moments.get('clip')}; moments 1-2 where moment 0 > "
            f"{loupe.moment_panel.significance:g} x its error")
