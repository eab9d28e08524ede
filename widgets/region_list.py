"""RegionList: the named sky regions whose spectra are shown, each with its own colour.

Regions are kept on the sky (centre RA/Dec, sizes in arcsec, angle, or
vertex RA/Dec), so one region gives a spectrum in every spectral window even
when the windows have different pixel grids. Shapes are converted with the
`regions` package; the `regions` trait holds plain dicts that code can read,
edit and set.
"""

import astropy.units as u
import ipywidgets as w
import numpy as np
from astropy.coordinates import SkyCoord
from regions import (
    CircleSkyRegion,
    EllipsePixelRegion,
    EllipseSkyRegion,
    PixCoord,
    PixelRegion,
    PointSkyRegion,
    PolygonPixelRegion,
    PolygonSkyRegion,
    RectanglePixelRegion,
    RectangleSkyRegion,
    SkyRegion,
)
from traitlets import Bool, List, TraitError, Unicode, observe, validate

from cubeloupe.analysis import RegionError

from ._look import REGION_COLORS, section_title

__all__ = ["RegionList", "REGION_KINDS", "check_regions"]

REGION_KINDS = ("box", "oval", "circle", "outline", "pixel")
_REQUIRED = {
    "box": ("ra", "dec", "width", "height", "angle"),
    "oval": ("ra", "dec", "width", "height", "angle"),
    "circle": ("ra", "dec", "radius"),
    "outline": ("vertices",),
    "pixel": ("ra", "dec"),
}


def check_regions(regions):
    """Copies of region dicts checked for kind, required keys and unique names; `TraitError` names the problem."""
    items = []
    names = set()
    for item in regions:
        if not isinstance(item, dict):
            raise TraitError(f"each region must be a dict; got {item!r}")
        kind = item.get("kind")
        if kind not in REGION_KINDS:
            raise TraitError(f"region kind {kind!r} is unknown; use one of {list(REGION_KINDS)}")
        missing = [key for key in ("name", "color", *_REQUIRED[kind]) if key not in item]
        if missing:
            raise TraitError(f"region {item.get('name', '?')!r} lacks {missing}")
        if item["name"] in names:
            raise TraitError(f"two regions are named {item['name']!r}; names must be unique")
        if kind == "outline" and len(item["vertices"]) < 3:
            raise TraitError(f"outline region {item['name']!r} needs at least 3 vertices")
        names.add(item["name"])
        items.append(dict(item))
    return items


def _frame(wcs):
    return wcs.celestial.pixel_to_world(0, 0).frame.name


class RegionList(w.VBox):
    """Named regions on the sky, listed with colour, name and a remove button.

    Parameters
    ----------
    wcs : astropy.wcs.WCS
        The grid that drawn (pixel) shapes are placed with: the sky view's current window.

    Attributes
    ----------
    regions : list of dict
        One dict per region: ``name``, ``color``, ``kind`` (box, oval, circle, outline, pixel) and its sky
        shape: ``ra``, ``dec`` (deg), ``width``, ``height`` or ``radius`` (arcsec), ``angle`` (deg, counter-clockwise
        from the x axis as in `regions`), or ``vertices`` ([[ra, dec], ...] deg).
    selected : str
        Name of the selected region ('' when none).
    reshape : bool
        When True a new drawing replaces the selected region's shape instead of adding a region.
    """

    regions = List(help="The regions as dicts (name, color, kind and sky shape); set it to add, edit or remove")
    selected = Unicode("", help="Name of the selected region ('' for none)")
    reshape = Bool(False, help="If True, the next drawn shape replaces the selected region's shape")

    def __init__(self, wcs, **kwargs):
        self.wcs = wcs
        # name -> (grid key, shape description, PixelRegion): the shape as drawn, on the grid it was drawn
        # on, so that grid needs no sky-to-pixel conversion (the regions package takes ~50 ms for one).
        self._drawn = {}
        self._grid_keys = {}
        self._rows = w.Box(layout=w.Layout(flex_flow="row wrap", align_items="center"))
        self._pool = []  # the rows, shown ones first in the regions' order (see _render)
        self._syncing = False
        self._shared_parts = {}  # layouts and styles shared by the rows (see _shared)
        self._outline_cache = {}
        self._empty = w.HTML("<span style='color:#829ab1;font-size:90%'>No regions yet: pick Box, Oval, Outline "
                             "or Pixel above the sky image and draw on it, or add one from code "
                             "(<code>loupe.add_region(...)</code>).</span>")
        self.reshape_toggle = w.ToggleButton(value=False, description="Reshape", icon="arrows",
                                             layout=w.Layout(width="96px"),
                                             tooltip="When on, the next shape you draw replaces the shape of "
                                                     "the selected region instead of adding a new one")
        self.reshape_toggle.add_class("cubeloupe-reshape")
        w.link((self.reshape_toggle, "value"), (self, "reshape"))
        self.clear_button = w.Button(description="Remove all", icon="trash", layout=w.Layout(width="110px"),
                                     tooltip="Remove every region and its spectrum")
        self.clear_button.add_class("cubeloupe-remove-all")
        self.clear_button.on_click(lambda _: setattr(self, "regions", []))
        title = w.HTML(section_title("Regions", "spectra above are drawn in each region's colour"),
                       layout=w.Layout(flex="1 1 auto"))
        super().__init__(children=[w.HBox([title, self.reshape_toggle, self.clear_button],
                                          layout=w.Layout(align_items="flex-end", flex_flow="row wrap")),
                                   self._empty, self._rows], **kwargs)
        self.add_class("cubeloupe-region-list")
        self._render()

    # ------------------------------------------------------------ validation
    @validate("regions")
    def _valid_regions(self, proposal):
        return check_regions(proposal["value"])

    @validate("selected")
    def _valid_selected(self, proposal):
        value = proposal["value"]
        if value and value not in self.names:
            raise TraitError(f"no region is named {value!r}; regions are {self.names}")
        return value

    @property
    def names(self):
        return [item["name"] for item in self.regions]

    # ------------------------------------------------------------ editing
    def _next_name(self):
        k = len(self.regions) + 1
        while f"R{k}" in self.names:
            k += 1
        return f"R{k}"

    def _next_color(self):
        used = {item["color"] for item in self.regions}
        for color in REGION_COLORS:
            if color not in used:
                return color
        return REGION_COLORS[len(self.regions) % len(REGION_COLORS)]

    def describe(self, shape, name=None, color=None):
        """The dict for a `regions` shape (pixel shapes are placed with this list's WCS)."""
        if isinstance(shape, PixelRegion):
            shape = shape.to_sky(self.wcs.celestial)
        item = {"name": name or self._next_name(), "color": color or self._next_color()}
        if isinstance(shape, (RectangleSkyRegion, EllipseSkyRegion)):
            c = shape.center.icrs
            item.update(kind="box" if isinstance(shape, RectangleSkyRegion) else "oval",
                        ra=float(c.ra.deg), dec=float(c.dec.deg),
                        width=float(shape.width.to_value(u.arcsec)), height=float(shape.height.to_value(u.arcsec)),
                        angle=float(shape.angle.to_value(u.deg)))
        elif isinstance(shape, PolygonSkyRegion):
            v = shape.vertices.icrs
            item.update(kind="outline", vertices=[[float(a), float(d)] for a, d in zip(v.ra.deg, v.dec.deg)])
        elif isinstance(shape, PointSkyRegion):
            c = shape.center.icrs
            item.update(kind="pixel", ra=float(c.ra.deg), dec=float(c.dec.deg))
        elif isinstance(shape, SkyRegion) and hasattr(shape, "radius"):
            c = shape.center.icrs
            item.update(kind="circle", ra=float(c.ra.deg), dec=float(c.dec.deg),
                        radius=float(shape.radius.to_value(u.arcsec)))
        else:
            raise RegionError(
                f"cannot use a region of type {type(shape).__name__}; use a rectangle, ellipse, circle, "
                "polygon or point from the `regions` package"
            )
        return item

    def _grid_key(self, wcs):
        key = id(wcs)
        if key not in self._grid_keys:
            self._grid_keys[key] = (wcs, wcs.celestial.to_header_string())
        return self._grid_keys[key][1]

    @staticmethod
    def _shape_key(item):
        return tuple(sorted((k, str(v)) for k, v in item.items() if k not in ("name", "color")))

    def _remember(self, item, shape):
        if isinstance(shape, PixelRegion):
            self._drawn[item["name"]] = (self._grid_key(self.wcs), self._shape_key(item), shape)
        else:
            self._drawn.pop(item["name"], None)

    def _drawn_shape(self, name, wcs):
        """The shape as drawn, if it was drawn on ``wcs``'s grid and not edited since."""
        entry = self._drawn.get(name)
        if entry is None or entry[0] != self._grid_key(wcs) or entry[1] != self._shape_key(self.get(name)):
            return None
        return entry[2]

    def add(self, shape, name=None, color=None):
        """Add a `regions` shape (sky, or pixel on this list's WCS); returns its name."""
        if name is not None and name in self.names:
            raise RegionError(f"a region named {name!r} exists already; pick another name or remove it first")
        item = self.describe(shape, name, color)
        self._remember(item, shape)
        self.regions = self.regions + [item]
        self.selected = item["name"]
        return item["name"]

    def replace(self, name, shape):
        """Give region ``name`` a new shape (keeping its name and colour)."""
        old = self.get(name)
        item = self.describe(shape, name, old["color"])
        self._remember(item, shape)
        self.regions = [item if r["name"] == name else r for r in self.regions]

    def remove(self, name):
        """Remove region ``name``."""
        self.get(name)
        if self.selected == name:
            self.selected = ""
        self.regions = [r for r in self.regions if r["name"] != name]

    def rename(self, old, new):
        """Rename a region."""
        new = str(new).strip()
        if not new:
            raise RegionError("a region name cannot be empty")
        if new != old and new in self.names:
            raise RegionError(f"a region named {new!r} exists already")
        self.get(old)
        was_selected = self.selected == old
        if old in self._drawn:
            self._drawn[new] = self._drawn.pop(old)
        self.regions = [dict(r, name=new) if r["name"] == old else r for r in self.regions]
        if was_selected:
            self.selected = new

    def recolor(self, name, color):
        """Give region ``name`` another colour."""
        self.get(name)
        self.regions = [dict(r, color=color) if r["name"] == name else r for r in self.regions]

    def get(self, name):
        for item in self.regions:
            if item["name"] == name:
                return item
        raise RegionError(f"no region is named {name!r}; regions are {self.names}")

    def from_gesture(self, kind, params, wcs=None):
        """Turn a gesture on the sky view (pixel coordinates of ``wcs``) into a `regions` shape."""
        wcs = wcs or self.wcs
        if kind in ("box", "oval"):
            (x0, x1), (y0, y1) = sorted(params["x"]), sorted(params["y"])
            if x1 - x0 <= 0 or y1 - y0 <= 0:
                raise RegionError("the drawn shape has no area; drag further to make a region")
            cls = RectanglePixelRegion if kind == "box" else EllipsePixelRegion
            pixel = cls(PixCoord((x0 + x1) / 2, (y0 + y1) / 2), width=x1 - x0, height=y1 - y0,
                        angle=params.get("angle", 0.0) * u.deg)
            return pixel
        if kind == "outline":
            xy = np.asarray(params["vertices"], dtype=float)
            return PolygonPixelRegion(PixCoord(xy[:, 0], xy[:, 1]))
        if kind == "pixel":
            return PointSkyRegion(wcs.celestial.pixel_to_world(params["x"], params["y"]))
        raise RegionError(f"unknown drawing {kind!r}")

    # ------------------------------------------------------- use with cubes
    def sky_region(self, name):
        """Region ``name`` as a `regions` sky shape."""
        item = self.get(name)
        if item["kind"] == "outline":
            v = np.asarray(item["vertices"], dtype=float)
            return PolygonSkyRegion(SkyCoord(v[:, 0], v[:, 1], unit="deg"))
        center = SkyCoord(item["ra"], item["dec"], unit="deg")
        if item["kind"] == "pixel":
            return PointSkyRegion(center)
        if item["kind"] == "circle":
            return CircleSkyRegion(center, radius=item["radius"] * u.arcsec)
        cls = RectangleSkyRegion if item["kind"] == "box" else EllipseSkyRegion
        return cls(center, width=item["width"] * u.arcsec, height=item["height"] * u.arcsec,
                   angle=item["angle"] * u.deg)

    def region_for(self, name, cube):
        """What `region_spectrum` takes for region ``name`` on ``cube``'s grid.

        Shapes go as sky regions (or as drawn, on the grid they were drawn on); a one-pixel region
        becomes a mask of the pixel holding its position.
        """
        drawn = self._drawn_shape(name, cube.wcs)
        if drawn is not None:
            return drawn
        shape = self.sky_region(name)
        if not isinstance(shape, PointSkyRegion):
            return shape
        x, y = cube.wcs.celestial.world_to_pixel(shape.center)
        ny, nx = cube.shape[1:]
        i, j = int(np.round(x)), int(np.round(y))
        if not (0 <= i < nx and 0 <= j < ny):
            raise RegionError(f"region {name!r} lies outside the image of this window")
        mask = np.zeros((ny, nx), dtype=bool)
        mask[j, i] = True
        return mask

    def outlines_for(self, cube):
        """Outlines of all regions in ``cube``'s pixel coordinates (dicts name, color, x, y)."""
        out = []
        grid = self._grid_key(cube.wcs)
        for item in self.regions:
            # Placing a sky shape on a grid costs ~25 ms (regions fits the local WCS):
            # keep each outline until its shape or the grid changes.
            key = (grid, self._shape_key(item))
            if key not in self._outline_cache:
                self._outline_cache[key] = self._outline(item["name"], cube)
            xs, ys = self._outline_cache[key]
            out.append({"name": item["name"], "color": item["color"], "x": list(xs), "y": list(ys)})
        if len(self._outline_cache) > 4 * len(self.regions) + 16:
            self._outline_cache.clear()
        return out

    def _outline(self, name, cube):
        shape = self._drawn_shape(name, cube.wcs) or self.sky_region(name)
        if isinstance(shape, PointSkyRegion):
            x, y = cube.wcs.celestial.world_to_pixel(shape.center)
            i, j = np.round(x), np.round(y)
            xs, ys = [i - .5, i + .5, i + .5, i - .5, i - .5], [j - .5, j - .5, j + .5, j + .5, j - .5]
        else:
            pixel = shape if isinstance(shape, PixelRegion) else shape.to_pixel(cube.wcs.celestial)
            verts = pixel.as_artist().get_verts()
            xs, ys = verts[:, 0], verts[:, 1]
        return tuple(float(v) for v in xs), tuple(float(v) for v in ys)

    # --------------------------------------------------------------- display
    @observe("regions", "selected")
    def _render(self, change=None):
        # Rows are widgets waiting in the list (hidden when unused) and are filled with the region they
        # show: a new region's row is a few value changes for the browser, not seven new widget models
        # made one after another before its spectrum shows (#20). Spare rows are made a few at a time.
        wanted = {item["name"] for item in self.regions}
        kept = {row.name: row for row in self._pool if row.name in wanted}
        spare = [row for row in self._pool if row.name not in wanted]
        needed = len(self.regions) - len(kept)
        if not self._pool or needed > len(spare):  # the first rows, or the spares ran out
            spare += [self._make_row() for _ in range(max(0, needed - len(spare)) + _SPARE_ROWS)]
        shown = []
        self._syncing = True
        try:
            for item in self.regions:
                row = kept.get(item["name"]) or spare.pop(0)
                row.show(item, item["name"] == self.selected)
                shown.append(row)
            for row in spare:
                row.hide()
        finally:
            self._syncing = False
        self._pool = shown + spare
        boxes = [row.box for row in self._pool]
        if list(self._rows.children) != boxes:
            self._rows.children = boxes
        self._empty.layout.display = "none" if shown else ""

    def _shared(self, key, make, **kwargs):
        """``make(**kwargs)`` whose style (and layout, when not given) are those of the rows made before.

        Layouts and styles are widgets of their own, one more model for the browser to make each: shared,
        a row costs 7 models instead of 17 (#20).
        """
        for part in ("style", "layout"):
            if (key, part) in self._shared_parts and part not in kwargs:
                kwargs[part] = self._shared_parts[(key, part)]
        widget = make(**kwargs)
        for part in ("style", "layout"):
            self._shared_parts.setdefault((key, part), getattr(widget, part))
        return widget

    def _make_row(self):
        """A hidden row: select button, colour, name box, kind and remove button, for any region."""
        pick = self._shared("pick", w.ToggleButton, value=False, icon="hand-pointer-o",
                            layout=self._shared_parts.get(("pick", "layout")) or w.Layout(width="36px"),
                            tooltip="Select this region (its spectrum is used for the table and reshaping)")
        color = self._shared("color", w.ColorPicker, value="#ffffff", concise=True, layout=pick.layout,
                             tooltip="Colour of this region's outline and spectrum")
        label = self._shared("label", w.Text, value="", continuous_update=False,
                             layout=self._shared_parts.get(("label", "layout")) or w.Layout(width="96px"),
                             tooltip="Name of the region; type a new one and press Enter")
        kind = self._shared("kind", w.HTML, value="",
                            layout=self._shared_parts.get(("kind", "layout")) or w.Layout(width="48px"))
        drop = self._shared("drop", w.Button, icon="times", layout=pick.layout,
                            tooltip="Remove this region and its spectrum")
        box = w.HBox([pick, color, label, kind, drop],
                     layout=w.Layout(align_items="center", margin="0 14px 0 0", padding="0 0 0 4px",
                                     border_left="4px solid #ffffff", display="none"))
        box.add_class("cubeloupe-region-row")
        row = _RegionRow(box)
        pick.observe(lambda ch: self._act(ch.new and (lambda: setattr(self, "selected", row.name))), names="value")
        color.observe(lambda ch: self._act(lambda: self.recolor(row.name, ch.new)), names="value")
        label.observe(lambda ch: self._act(lambda: self._safe_rename(row, ch.new)), names="value")
        drop.on_click(lambda _: self._act(lambda: self.remove(row.name)))
        return row

    def _act(self, action):
        """Run a row's ``action`` when the user acted (not while the rows are being filled)."""
        if action and not self._syncing:
            action()

    def _safe_rename(self, row, new):
        old = row.name
        if old is None or new == old:
            return
        try:
            self.rename(old, new)
        except RegionError:
            row.label.value = old   # put the refused name back in the box


# Rows made ahead of need, hidden, for the next regions: enough for a handful of regions (the
# suite's own first region and four drawn) before more are made on the way to a spectrum.
_SPARE_ROWS = 5


class _RegionRow:
    """One row of the region list and the name of the region it shows (None while it waits)."""

    def __init__(self, box):
        self.box = box
        self.pick, self.color, self.label, self.kind, self.drop = box.children
        self.name = None

    def show(self, item, selected):
        name = item["name"]
        self.name = name
        self.pick.value = selected
        self.color.value = item["color"]
        self.label.value = name
        self.kind.value = f"<span style='color:#7b8794;font-size:90%'>{item['kind']}</span>"
        with self.box.layout.hold_sync():  # one message for both
            self.box.layout.border_left = f"4px solid {item['color']}"
            self.box.layout.display = None

    def hide(self):
        self.name = None
        self.pick.value = False
        self.box.layout.display = "none"
