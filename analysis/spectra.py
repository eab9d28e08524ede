"""The spectrum of a region of a cube: flux density, mean, sum, median or maximum per channel.

Only the region's bounding box is read from the (memory-mapped) cube, so a
small region costs the same on a 100 MB or a 100 GB file.

Flux density of a region (common practice; e.g. Wilson, Rohlfs &
Huettemeister, *Tools of Radio Astronomy*, section 8.2):

* Jy/beam cube: ``S = sum(I_pix) / (Omega_beam / Omega_pix)``, per channel
  where the beam varies;
* Jy/pixel cube: ``S = sum(I_pix)``;
* K cube: ``S = (2 k nu^2 / c^2) * Omega_pix * sum(T_pix)`` (Rayleigh-Jeans,
  astropy's `~astropy.units.brightness_temperature` equivalency).

Examples
--------
>>> from regions import CirclePixelRegion, PixCoord
>>> from cubeloupe.analysis import demo_path, open_cube
>>> cube = open_cube(demo_path("disk"))
>>> spec = region_spectrum(cube, CirclePixelRegion(PixCoord(35.5, 35.5), radius=30))
>>> spec.unit, spec.meta["n_pixels"]
(Unit("Jy"), 2828)
"""

import warnings

import astropy.units as u
import numpy as np

from .beams import beam_area_pixels, pixel_solid_angle
from .cube_file import stored_array
from .cubes import check_total_intensity, cube_source, source_name
from .errors import BlankedDataWarning, PartialRegionWarning, RegionError, UnitMismatchError
from .prefetch import prefetch_if_cold
from .spectral import frequency_axis
from .units import is_per_beam, is_temperature

__all__ = ["STATISTICS", "region_spectrum", "region_pixels"]

STATISTICS = ("flux", "mean", "sum", "median", "max")

# Regions whose bounding box is larger than this are rasterised only over
# their overlap with the image (see `region_pixels`); 4 million pixels of
# mask is ~30 MB of working memory in regions' to_mask.
_FULL_MASK_PIXELS = 4_000_000


def _region_text(region):
    """A one-line description of a region, for meta and messages."""
    if isinstance(region, np.ndarray):
        return f"boolean mask of {int(np.count_nonzero(region))} pixels"
    params = getattr(region, "_params", ())
    parts = []
    for name in params:
        value = getattr(region, name, None)
        if isinstance(value, np.ndarray) or (hasattr(value, "x") and np.ndim(getattr(value, "x")) > 0):
            parts.append(f"{name}=<{np.size(getattr(value, 'x', value))} vertices>")
        else:
            parts.append(f"{name}={value}")
    return f"{type(region).__name__}({', '.join(parts)})"


def _is_per_pixel(obj):
    """True if ``obj`` is a per-pixel (per beam) intensity in Jy."""
    unit = u.Unit(obj)
    return (unit * u.pix).is_equivalent(u.Jy) and u.pix in unit.bases


def region_pixels(cube, region):
    """The pixels of ``region`` inside the cube's image plane, as a bounding box and a mask.

    Parameters
    ----------
    cube : SpectralCube
        Supplies the image shape and the celestial WCS for sky regions.
    region : regions.PixelRegion, regions.SkyRegion or ndarray of bool (ny, nx)
        A pixel belongs to a shape region when its centre is inside it (the
        ``mode="center"`` of `regions`, as spectral-cube's
        ``subcube_from_regions`` uses).

    Returns
    -------
    box : tuple of slice
        ``(y_slice, x_slice)`` in numpy order.
    inside : ndarray of bool
        The region's pixels within ``box``.
    n_outside : int
        Pixels of the region that fall outside the cube. For a region whose
        bounding box exceeds 4 million pixels only its overlap with the image
        is rasterised (time and memory scale with the overlap), and this
        count is estimated from the region's area.

    Raises
    ------
    RegionError
        Unsupported type, wrong mask shape, empty region, or wholly outside.

    Examples
    --------
    >>> from regions import RectanglePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> box, inside, n_out = region_pixels(open_cube(demo_path("disk")),
    ...                                    RectanglePixelRegion(PixCoord(5.5, 5.5), 4, 4))
    >>> box, int(inside.sum()), n_out
    ((slice(4, 8, None), slice(4, 8, None)), 16, 0)
    """
    ny, nx = cube.shape[1:]
    where = source_name(cube)
    if isinstance(region, np.ndarray) or (isinstance(region, (list, tuple)) and np.ndim(region) == 2):
        mask = np.asarray(region)
        if mask.dtype != bool:
            raise RegionError(
                f"a mask region must be a boolean array of shape (ny, nx) = {(ny, nx)}; got dtype {mask.dtype}. "
                "Build one with e.g. mask = np.zeros((ny, nx), bool); mask[10:20, 30:40] = True"
            )
        if mask.shape != (ny, nx):
            raise RegionError(
                f"a mask region must have the image shape (ny, nx) = {(ny, nx)} of {where}; got {mask.shape}"
            )
        rows, cols = np.nonzero(mask)
        if rows.size == 0:
            raise RegionError("the mask region selects no pixel; set at least one pixel to True")
        box = (slice(rows.min(), rows.max() + 1), slice(cols.min(), cols.max() + 1))
        return box, mask[box], 0

    from regions import LinePixelRegion, PixCoord, PixelRegion, PointPixelRegion, TextPixelRegion

    if not isinstance(region, PixelRegion):
        if not hasattr(region, "to_pixel"):
            raise RegionError(
                f"unsupported region {region!r}; pass a regions shape (circle, ellipse, rectangle, "
                "polygon; pixel or sky) or a 2-D boolean mask"
            )
        try:
            region = region.to_pixel(cube.wcs.celestial)
        except Exception as exc:  # regions/astropy raise several types for unreachable coordinates
            raise RegionError(
                f"cannot place the sky region {_region_text(region)} on {where} ({exc}); "
                "check its coordinates and frame"
            ) from None
    if isinstance(region, (PointPixelRegion, LinePixelRegion, TextPixelRegion)):
        raise RegionError(
            f"{type(region).__name__} has no area; use a circle, ellipse, rectangle or polygon"
        )
    try:
        bbox = region.bounding_box
    except Exception as exc:  # e.g. a centre or size that is not finite
        raise RegionError(f"cannot rasterise {_region_text(region)} ({exc}); check its centre and size") from None
    rows = slice(int(max(bbox.iymin, 0)), int(min(bbox.iymax, ny)))
    columns = slice(int(max(bbox.ixmin, 0)), int(min(bbox.ixmax, nx)))
    if rows.start >= rows.stop or columns.start >= columns.stop:
        raise RegionError(
            f"{_region_text(region)} lies wholly outside {where} (image of {nx} x {ny} pixels, "
            f"x from 0 to {nx - 1}, y from 0 to {ny - 1}); move it onto the image"
        )
    bbox_pixels = (bbox.iymax - bbox.iymin) * (bbox.ixmax - bbox.ixmin)
    try:
        if bbox_pixels <= _FULL_MASK_PIXELS:
            footprint = np.asarray(region.to_mask(mode="center").data) > 0
            total = int(footprint.sum())
            inside = footprint[rows.start - bbox.iymin:rows.stop - bbox.iymin,
                               columns.start - bbox.ixmin:columns.stop - bbox.ixmin]
        else:
            # A region far larger than the image (a huge circle, a sky region of a
            # degree on fine pixels): regions' to_mask would build its whole
            # bounding box, so only the overlap with the image is tested, pixel
            # centre by pixel centre (the same rule as mode="center").
            y, x = np.mgrid[rows, columns]
            inside = np.asarray(region.contains(PixCoord(x, y)), dtype=bool)
            total = None
    except Exception as exc:  # e.g. degenerate polygons
        raise RegionError(f"cannot rasterise {_region_text(region)} ({exc}); check its size") from None
    n_inside = int(inside.sum())
    if total == 0:
        raise RegionError(
            f"{_region_text(region)} contains no pixel centre; make it larger than a pixel"
        )
    if n_inside == 0:
        raise RegionError(
            f"{_region_text(region)} covers no pixel of {where} (image of {nx} x {ny} pixels); "
            "move it onto the image"
        )
    if total is None:
        # Counting every pixel centre of a huge region would cost what the
        # overlap saves; its area (in pixels) gives the count to within its perimeter.
        total = max(int(round(float(region.area))), n_inside + 1)
    return (rows, columns), inside, total - n_inside


def _cube_mask_is_finite_only(cube):
    """True when the cube's mask only excludes NaN/inf (the mask open_cube gives)."""
    from spectral_cube.masks import LazyMask

    mask = getattr(cube, "_mask", None)
    return mask is None or (isinstance(mask, LazyMask) and mask._function is np.isfinite)


def _read_region(cube, box, inside):
    """The region's pixels, shape (n_channels, n_pixels), read from the memory map.

    Returns the data (float64, native byte order), whether each voxel is
    finite, and whether it is valid (finite and not excluded by the cube's mask).
    Only the bounding box is touched; one copy converts it to float64 (and
    scales integer data, see `cube_file.stored_array`).
    """
    view = (slice(None),) + tuple(box)
    stored = stored_array(cube)
    boxed = cube._data[view] if stored is None else stored[0][view]
    # On a cube not in the page cache, faulting the box in page by page is
    # bound by disk latency x channels; announce every page range first.
    prefetch_if_cold(boxed)
    if stored is None:
        block = np.array(boxed, dtype=np.float64)
    else:
        block = stored[1].apply_into(boxed, np.empty(boxed.shape, dtype=np.float64))
    n_channels = block.shape[0]
    whole_box = bool(inside.all())
    pixels = block.reshape(n_channels, -1) if whole_box else block[:, inside]
    finite = np.isfinite(pixels)
    if _cube_mask_is_finite_only(cube):
        return pixels, finite, finite
    included = np.asarray(cube._mask.include(data=cube._data, wcs=cube._wcs, view=view), dtype=bool)
    included = included.reshape(n_channels, -1) if whole_box else included[:, inside]
    return pixels, finite, finite & included


def _default_statistic(unit):
    if is_per_beam(unit) or _is_per_pixel(unit):
        return "flux"
    return "mean"


def region_spectrum(cube, region, statistic=None, *, allow_polarisation=False):
    """The spectrum of a region: flux density, mean, sum, median or maximum per channel.

    Parameters
    ----------
    cube : SpectralCube or VaryingResolutionSpectralCube
        As returned by `open_cube`. Voxels that are NaN, or excluded by the
        cube's mask, are left out.
    region : regions.PixelRegion, regions.SkyRegion or ndarray of bool (ny, nx)
        Circle, ellipse, rectangle or polygon in pixel or sky coordinates
        (sky shapes are placed with the cube's celestial WCS), or a mask over
        the image plane. A pixel belongs to a shape when its centre is inside.
    statistic : {None, 'flux', 'mean', 'sum', 'median', 'max'}
        None gives ``'flux'`` for Jy/beam and Jy/pixel cubes and ``'mean'``
        otherwise. ``'flux'`` is the flux density in Jy (see the module
        docstring for the formulas; per channel where beams vary); the other
        statistics are taken over the valid pixels of each channel, in the
        cube's unit.
    allow_polarisation : bool
        Measure ``'flux'`` on a lone polarisation plane (Stokes Q, U, V, ...)
        anyway; by default it is refused (see `check_total_intensity`).

    Returns
    -------
    spectrum : `spectral_cube.lower_dimensional_structures.OneDSpectrum`
        With the cube's spectral axis and WCS. ``meta`` holds ``n_pixels``
        (region pixels inside the cube), ``n_valid`` (valid pixels per
        channel), ``statistic``, ``region`` (a description), and for fluxes
        ``beam_area_pixels``. Channels with no valid pixel are NaN.

    Raises
    ------
    RegionError
        Unsupported region, empty, wholly outside the cube, or only blanked
        pixels in every channel.
    BeamError
        ``'flux'`` of a Jy/beam cube that has no beam.
    UnitMismatchError
        ``'flux'`` of a cube whose unit is not Jy/beam, Jy/pixel or K.
    SpectralAxisError
        ``'flux'`` of a K cube whose channel frequencies are unknown.
    PolarisationError
        ``'flux'`` of a cube holding one Stokes plane other than I, unless
        ``allow_polarisation`` is True.

    Warns
    -----
    PartialRegionWarning
        Part of the region lies outside the cube; only the part inside is used.
    BlankedDataWarning
        Some region pixels are blanked in some channels ('flux' and 'sum'
        then cover only the valid pixels).

    Examples
    --------
    >>> from regions import CirclePixelRegion, PixCoord
    >>> from cubeloupe.analysis import demo_path, open_cube
    >>> spec = region_spectrum(open_cube(demo_path("disk")),
    ...                        CirclePixelRegion(PixCoord(35.5, 35.5), radius=6))
    >>> spec.meta["statistic"], spec.unit
    ('flux', Unit("Jy"))
    """
    from spectral_cube.lower_dimensional_structures import OneDSpectrum, VaryingResolutionOneDSpectrum

    unit = u.Unit(cube.unit)
    if statistic is None:
        statistic = _default_statistic(unit)
    if statistic not in STATISTICS:
        raise RegionError(f"unknown statistic {statistic!r}; choose from {list(STATISTICS)}")
    where = source_name(cube)

    # Check everything the flux needs before reading data.
    flux_scale = None
    beam_pixels = None
    if statistic == "flux":
        check_total_intensity(cube, allow_polarisation=allow_polarisation, what="a flux density")
        if is_per_beam(unit):
            beam_pixels = beam_area_pixels(cube)
            flux_scale = (unit * u.beam).to(u.Jy) / beam_pixels
        elif _is_per_pixel(unit):
            flux_scale = np.asarray((unit * u.pix).to(u.Jy))
        elif is_temperature(unit):
            # Rayleigh-Jeans: K -> Jy/sr at each channel's frequency, times the pixel solid angle.
            nu = frequency_axis(cube)
            per_sr = (1 * unit).to(u.Jy / u.sr, equivalencies=u.brightness_temperature(nu))
            flux_scale = (per_sr * pixel_solid_angle(cube)).to_value(u.Jy)
        else:
            raise UnitMismatchError(
                f"a flux density needs a cube in Jy/beam, Jy/pixel or K; {where} is in "
                f"{unit.to_string() or 'arbitrary units'}. Use statistic='mean' or 'sum', or set BUNIT"
            )

    box, inside, n_outside = region_pixels(cube, region)
    description = _region_text(region)
    n_pixels = int(inside.sum())
    if n_outside:
        warnings.warn(
            f"{description} lies partly outside {where}: {n_outside} of {n_pixels + n_outside} pixels "
            f"are off the image; the spectrum uses the {n_pixels} pixels inside",
            PartialRegionWarning,
            stacklevel=2,
        )

    pixels, finite, valid = _read_region(cube, box, inside)
    n_valid = valid.sum(axis=1)
    if not n_valid.any():
        raise RegionError(
            f"{description} holds only blanked (NaN or masked) pixels in every channel of {where}; "
            "choose a region on valid data"
        )
    n_blanked_pixels = int((~finite.all(axis=0)).sum())
    empty_channels = int((n_valid == 0).sum())
    if statistic in ("flux", "sum") and n_blanked_pixels:
        warnings.warn(
            f"{n_blanked_pixels} of the {n_pixels} region pixels are blanked (NaN) in some channels of "
            f"{where}; the {statistic} covers only the valid pixels"
            + (f", and {empty_channels} channel(s) with none are NaN" if empty_channels else ""),
            BlankedDataWarning,
            stacklevel=2,
        )

    with np.errstate(invalid="ignore", divide="ignore"):
        if statistic in ("flux", "sum", "mean"):
            totals = np.where(valid, pixels, 0.0).sum(axis=1)
            values = totals / n_valid if statistic == "mean" else np.where(n_valid > 0, totals, np.nan)
        else:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # channels with no valid pixel give NaN
                reduce = np.nanmedian if statistic == "median" else np.nanmax
                values = reduce(np.where(valid, pixels, np.nan), axis=1)

    meta = {
        "n_pixels": n_pixels,
        "n_valid": n_valid,
        "statistic": statistic,
        "region": description,
    }
    source = cube_source(cube)
    if source is not None:
        meta["cubeloupe_source"] = source
    spectral_wcs = cube.wcs.sub(["spectral"])
    mask = _channel_mask(n_valid > 0, spectral_wcs)
    if statistic == "flux":
        values = values * flux_scale
        if beam_pixels is not None:
            meta["beam_area_pixels"] = beam_pixels
        return OneDSpectrum(values, unit=u.Jy, wcs=spectral_wcs, meta=meta, mask=mask)
    beams = getattr(cube, "_beams", None)
    if beams is not None and len(beams) == len(values):
        return VaryingResolutionOneDSpectrum(values, unit=unit, wcs=spectral_wcs, meta=meta, beams=beams,
                                             mask=mask)
    return OneDSpectrum(values, unit=unit, wcs=spectral_wcs, meta=meta, beam=getattr(cube, "_beam", None),
                        mask=mask)


def _channel_mask(good, spectral_wcs):
    """spectral-cube mask of the channels with data, made for ``spectral_wcs``.

    spectral-cube checks a new mask's WCS against the spectrum's by comparing
    FITS headers, which costs ~10 ms (half the budget of a region spectrum);
    the mask is built on that very WCS object, so it is declared as checked.
    """
    from spectral_cube.masks import BooleanArrayMask

    mask = BooleanArrayMask(good, spectral_wcs, shape=good.shape)
    whitelist = getattr(mask, "_wcs_whitelist", None)
    if isinstance(whitelist, set):
        whitelist.add(spectral_wcs)
    return mask
