"""The delivery check of one cube: header, noise, leftover continuum and lines.

Right after a delivery, before anyone opens a notebook, `check_cube` answers
for one cube: is it sound, what is the noise, is continuum left in the data,
which lines are there. Every pass over the data runs block by block through
`blocks.run_blocks` (the robust channel rms of `noise`, the moment map of
`moments`, and one pass of this module's own), so a cube larger than memory
is checked in bounded memory; lines come from `catalog` and
`redshift_solver`. The command ``cubeloupe check`` (``_check_command``) runs
it over many files and ``check_report`` writes the report.

The check reads the cube in two full passes plus a small one:

1. `continuum_free_peaks`: per pixel, the continuum level (median over a
   channel subsample), its noise and its channel-to-channel noise; per
   channel, the highest and lowest values of the data minus that level
   (peak and trough spectra), and the valid fraction; per pixel, sums over
   all channels for the line-free mean (`noise.PixelSums`); over the channel
   subsample, the correlation of neighbouring pixels (the noise FWHM,
   `noise_fwhm_from_lags`). From the channel-to-channel noise,
   `spatial_noise` makes a smooth map of the noise across the field.
2. When the noise is uniform: `noise.channel_statistics` over every k-th
   image row (without pixels with significant continuum when it is
   extended), using every k-th pixel of those rows (`noise_grid`): the robust
   rms per channel. When it varies across the field (a primary-beam-corrected
   cube): `noise_scaled_extremes` over every channel image, each pixel's
   data less its level divided by its relative noise: the peak and trough
   spectra in those units and the rms of the quietest part of the field.
3. The channels excluded from the line-free set are read again to take them
   out of the sums of pass 1 (`noise.PixelSums.without_channels`); the
   spectrum at each absorption candidate is read to confirm it; then
   `moments.moment_maps` over the strongest detection.

The rules the check applies, stated once here and repeated in the report:

Flagged channels
    A channel is flagged when its robust rms differs from the median of all
    channel rms values by more than ``FLAG_SIGMAS`` (5) times the robust
    scatter of those values (1.4826 x their median absolute deviation), or
    when the channel is wholly blanked.
Detections
    The peak-intensity spectrum (the maximum over pixels of each channel,
    after removing each pixel's continuum level, see `continuum_free_peaks`)
    divided by the channel's robust rms gives a peak S/N per channel. A
    feature is a run of adjacent channels whose 3-channel smoothed peak S/N
    stays above the edge level (the noise floor's median plus 3 robust
    scatters, the floor being the channels below the threshold) or whose own
    S/N reaches the threshold; runs one channel apart are merged, and a run
    is a detection when its highest channel reaches the threshold. See
    `group_features`.
Noise across the field
    Each pixel's noise from the differences of neighbouring channels (at
    the channel subsample); the median of its log in boxes; a 2-D
    polynomial in log(noise) through the boxes (`spatial_noise`). When the
    variation is significant and at least ``NOISE_VARIATION`` (5 %),
    detections are judged against each pixel's own noise and the channel
    rms is that of the quietest part of the field (the centre of a
    primary-beam-corrected image); the edge-to-centre ratio is reported, and
    the cube is said to look primary-beam corrected when the noise rises
    towards every edge.
Absorption
    The same rules on the trough S/N spectrum (the minimum over pixels,
    negated): a dip is kept when, on the spectrum of its pixel, it lies by
    the threshold below the continuum given by the channels free of
    features on both sides of it (`_confirmed_absorption`); its depth and
    S/N are measured there.
Detection threshold
    The larger of the threshold asked for (5 by default) and the level
    above which ``FALSE_ALARMS`` (0.05) pure-noise peaks or dips are
    expected over the whole cube, half of them on each side, as both signs
    are searched (`false_alarm_threshold` for ``FALSE_ALARMS / 2``). The
    maximum of N values of Gaussian noise grows like sqrt(2 ln N): a plain
    5 sigma gives a 1 GB cube (512 x 512 x 1000, 5-pixel beam) about 40
    noise detections, so the threshold there is about 6 sigma. The count is the expected Euler
    characteristic of a Gaussian random field (Worsley et al. 1996, Human
    Brain Mapping 4, 58), capped by the Bonferroni bound ``n_pixels Q(t)``,
    per channel image, channels independent; the noise correlation is the
    beam or the one measured on the data, whichever gives more independent
    beams. The threshold applied and the expected count are reported.
Line-free channels
    Every channel except those of a detection padded on each side by a
    quarter of the detection's number of channels (at least
    ``MIN_PAD_CHANNELS``), and except flagged channels.
Leftover continuum
    The mean over line-free channels in each pixel; its significance is that
    mean over its standard error, the pixel's standard deviation over those
    channels divided by ``sqrt(n_free)`` (independent channels; the
    statistics of `noise.leftover_continuum`, by its code, from the sums of
    pass 1).
Velocities
    Offsets of identifications are radio-convention velocities from the
    catalog line redshifted to the identification's z, in the frame of the
    cube's spectral axis (SPECSYS); see `LinesSummary.velocity_reference`.

Examples
--------
>>> from cubeloupe.analysis import demo_path
>>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
>>> result.noise.cube_rms  # doctest: +SKIP
<Quantity 0.0015... Jy / beam>
"""

import warnings
from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy import constants
from astropy.wcs.utils import proj_plane_pixel_scales

from .errors import BeamError, CubeloupeError, SpectralAxisError, SpectralRangeError
from .noise import MAD_TO_SIGMA, pixel_sums
from .noise_map import (
    DEGREE_P_VALUE,
    MIN_BOX_PIXELS,
    NOISE_BOXES,
    NOISE_MAP_DEGREE,
    NOISE_VARIATION,
    NOISE_VARIATION_P_VALUE,
    PBCOR_EDGE_RISE,
    NoiseScaledExtremes,
    SpatialNoise,
    noise_scaled_extremes,
    spatial_noise,
)
from .row_statistics import row_extremes, row_medians

__all__ = [
    "FLAG_SIGMAS",
    "DETECTION_SNR",
    "FALSE_ALARMS",
    "MIN_PAD_CHANNELS",
    "IDENTIFY_TOLERANCE",
    "AxisSummary",
    "HeaderSummary",
    "FeatureChannels",
    "NoiseSummary",
    "ContinuumSummary",
    "Candidate",
    "Feature",
    "ExpectedLine",
    "LinesSummary",
    "StrongestFeature",
    "CubeCheck",
    "check_cube",
    "ContinuumFreePeaks",
    "continuum_free_peaks",
    "header_summary",
    "flag_channels",
    "group_features",
    "line_free_channels",
    "false_alarm_threshold",
    "noise_fwhm_from_lags",
    "noise_grid",
]

FLAG_SIGMAS = 5.0
DETECTION_SNR = 5.0
# Pure-noise peaks the check allows over a whole cube: the detection threshold is
# raised until no more are expected, so that about 19 pure-noise cubes in 20 give
# no detection at all, whatever their size (see `false_alarm_threshold`).
FALSE_ALARMS = 0.05
MIN_PAD_CHANNELS = 2
# Below this many pixels across the beam's minor axis FWHM a cube is
# undersampled: 3 to 5 pixels per beam is the usual imaging choice (common practice).
MIN_PIXELS_PER_BEAM = 3.0

_KMS = u.km / u.s
_C_KMS = constants.c.to_value(_KMS)


# --------------------------------------------------------------------------- header


@dataclass(frozen=True)
class AxisSummary:
    """One WCS axis of the cube, in FITS order (1 = x).

    Attributes
    ----------
    ctype : str
        The axis type, e.g. ``'RA---SIN'`` or ``'FREQ'``.
    unit : str
        The axis unit as the WCS reads it (``'deg'``, ``'Hz'``, ``'m/s'``).
    length : int
        Number of pixels or channels.
    first, last : float
        World coordinate of the first and last pixel centre, in ``unit``.
    """

    ctype: str
    unit: str
    length: int
    first: float
    last: float


@dataclass(frozen=True)
class HeaderSummary:
    """What the header says about a cube, checked.

    Attributes
    ----------
    shape : tuple of int
        Numpy shape ``(n_channels, ny, nx)``.
    axes : tuple of AxisSummary
        The three axes in FITS order (x, y, spectral).
    unit : astropy Unit
        Brightness unit (BUNIT).
    spectral_frame : str or None
        SPECSYS, e.g. ``'LSRK'``.
    rest_frequency : Quantity [GHz] or None
        RESTFRQ of the file.
    frequency : Quantity [GHz] or None
        Channel centres as observed frequencies; None for a velocity axis
        without a rest frequency.
    channel_width_frequency : Quantity [MHz] or None
        Median absolute channel spacing.
    channel_width_velocity : Quantity [km/s] or None
        ``c * dnu / nu`` at the band centre (radio convention, Greisen et al.
        2006, A&A 446, 747), or the native velocity spacing.
    band : Quantity [GHz], shape (2,), or None
        Low and high band edges (outer edges of the end channels).
    beam_major, beam_minor, beam_pa : Quantity or None
        The beam (the median over channels for per-channel beams).
    beam_major_range, beam_minor_range : Quantity, shape (2,), or None
        Smallest and largest per-channel beam axes (None for one beam).
    pixel_size : Quantity [arcsec], shape (2,)
        Pixel size along x and y.
    pixels_per_beam : float or None
        Pixels across the beam's minor-axis FWHM (the smallest over
        channels); under 3 gives a warning.
    beam_area_pixels : float or None
        Beam solid angle in pixels (the median over channels).
    blanked_fraction : ndarray, shape (n_channels,) or None
        Fraction of NaN pixels per channel; filled in by the noise pass.
    warnings : tuple of str
    """

    shape: tuple
    axes: tuple
    unit: u.UnitBase
    spectral_frame: object
    rest_frequency: object
    frequency: object
    channel_width_frequency: object
    channel_width_velocity: object
    band: object
    beam_major: object
    beam_minor: object
    beam_pa: object
    beam_major_range: object
    beam_minor_range: object
    pixel_size: u.Quantity
    pixels_per_beam: object
    beam_area_pixels: object
    blanked_fraction: object = None
    warnings: tuple = ()


def _frequency_or_none(cube):
    from .spectral import frequency_axis

    try:
        return frequency_axis(cube)
    except SpectralAxisError:
        return None


def _band_edges(frequency):
    """Outer edges of the end channels; channels are assumed contiguous."""
    if len(frequency) < 2:
        return u.Quantity([frequency[0], frequency[0]])
    lo, hi = np.argmin(frequency), np.argmax(frequency)
    half = np.abs(np.diff(frequency)).min() / 2 if len(frequency) > 1 else 0 * frequency.unit
    return u.Quantity([frequency[lo] - half, frequency[hi] + half]).to(u.GHz)


def header_summary(cube):
    """Summarise the header of an opened cube: axes, channels, band, beam, pixels.

    Parameters
    ----------
    cube : SpectralCube or VaryingResolutionSpectralCube
        As returned by `open_cube`.

    Returns
    -------
    HeaderSummary
        ``blanked_fraction`` is None here; `check_cube` fills it from the
        noise pass, which reads the data anyway.

    Examples
    --------
    >>> summary = header_summary(open_cube(demo_path("disk")))  # doctest: +SKIP
    >>> summary.pixels_per_beam > 3  # doctest: +SKIP
    True
    """
    from .beams import beam_area_pixels, cube_beam

    notes = []
    wcs = cube.wcs
    nchan, ny, nx = cube.shape
    lengths = (nx, ny, nchan)
    axes = []
    for i in range(3):
        pixel = np.zeros((2, 3))
        pixel[1, i] = lengths[i] - 1
        world = wcs.wcs_pix2world(pixel, 0)
        axes.append(AxisSummary(
            ctype=str(wcs.wcs.ctype[i]), unit=str(wcs.wcs.cunit[i]) or "",
            length=int(lengths[i]), first=float(world[0, i]), last=float(world[1, i]),
        ))

    frequency = _frequency_or_none(cube)
    rest = wcs.wcs.restfrq or 0.0
    rest_frequency = (rest * u.Hz).to(u.GHz) if rest else None
    native = cube.spectral_axis
    width_f = width_v = band = None
    if frequency is not None:
        if nchan > 1:
            width_f = np.median(np.abs(np.diff(frequency))).to(u.MHz)
            centre = np.median(frequency)
            width_v = (_C_KMS * width_f / centre).decompose() * _KMS
        band = _band_edges(frequency)
    else:
        notes.append(
            "the spectral axis is a velocity and the header has no rest frequency (RESTFRQ): "
            "frequencies, the band and line identifications are not available; add RESTFRQ "
            "to a copy of the file to get them"
        )
    if width_v is None and native.unit.is_equivalent(_KMS) and nchan > 1:
        width_v = np.median(np.abs(np.diff(native))).to(_KMS)

    beam_major = beam_minor = beam_pa = major_range = minor_range = None
    per_beam = area = None
    celestial = wcs.celestial
    units = [u.Unit(unit or "deg") for unit in celestial.wcs.cunit]
    scales = proj_plane_pixel_scales(celestial)
    pixel_size = u.Quantity([scales[0] * units[0], scales[1] * units[1]]).to(u.arcsec)
    try:
        beam = cube_beam(cube)
    except BeamError:
        notes.append("the cube has no beam (BMAJ/BMIN/BPA or a BEAMS table): pixels per beam "
                     "and beam-based conversions are not available")
        beam = None
    if beam is not None:
        major = u.Quantity(beam.major).to(u.arcsec)
        minor = u.Quantity(beam.minor).to(u.arcsec)
        pa = u.Quantity(beam.pa).to(u.deg)
        if major.ndim:
            major_range = u.Quantity([major.min(), major.max()])
            minor_range = u.Quantity([minor.min(), minor.max()])
            beam_major, beam_minor, beam_pa = np.median(major), np.median(minor), np.median(pa)
        else:
            beam_major, beam_minor, beam_pa = major, minor, pa
        smallest_minor = minor.min() if minor.ndim else minor
        per_beam = float((smallest_minor / pixel_size.min()).decompose())
        area = float(np.median(beam_area_pixels(cube, beam)))
        if per_beam < MIN_PIXELS_PER_BEAM:
            notes.append(
                f"only {per_beam:.2f} pixels across the beam minor axis ({smallest_minor:.3g} over "
                f"{pixel_size.min():.3g} pixels); under {MIN_PIXELS_PER_BEAM:g} the beam is undersampled: "
                "re-image with smaller pixels"
            )
    return HeaderSummary(
        shape=tuple(int(n) for n in cube.shape), axes=tuple(axes), unit=cube.unit,
        spectral_frame=(cube.header.get("SPECSYS") if hasattr(cube, "header") else None),
        rest_frequency=rest_frequency, frequency=frequency,
        channel_width_frequency=width_f, channel_width_velocity=width_v, band=band,
        beam_major=beam_major, beam_minor=beam_minor, beam_pa=beam_pa,
        beam_major_range=major_range, beam_minor_range=minor_range,
        pixel_size=pixel_size, pixels_per_beam=per_beam, beam_area_pixels=area,
        warnings=tuple(notes),
    )


# --------------------------------------------------------------------------- rules on spectra


def _robust_level(values):
    """Median and Gaussian-equivalent scatter (1.4826 MAD) of the finite values."""
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if finite.size == 0:
        return np.nan, np.nan
    median = np.median(finite)
    return median, MAD_TO_SIGMA * np.median(np.abs(finite - median))


def flag_channels(channel_rms, *, sigmas=FLAG_SIGMAS):
    """Indices of channels whose noise stands out from the rest of the band.

    Rule: a channel is flagged when its rms differs from the median channel
    rms by more than ``sigmas`` times the robust scatter of the channel rms
    values (1.4826 x median absolute deviation), or when its rms is not
    finite (a wholly blanked channel).

    Parameters
    ----------
    channel_rms : Quantity or ndarray, shape (n_channels,)
    sigmas : float

    Returns
    -------
    ndarray of int

    Examples
    --------
    >>> rms = np.array([1.0, 1.01, 0.99, 1.0, 3.0, 1.0, np.nan])
    >>> flag_channels(rms)
    array([4, 6])
    """
    values = np.asarray(u.Quantity(channel_rms).value, dtype=float)
    median, scatter = _robust_level(values)
    bad = ~np.isfinite(values)
    if np.isfinite(median):
        # A band with identical rms everywhere has zero scatter: then only
        # departures larger than rounding (1e-6 relative) count.
        tolerance = max(sigmas * scatter, 1e-6 * abs(median))
        bad |= np.abs(values - median) > tolerance
    return np.flatnonzero(bad)


@dataclass(frozen=True)
class FeatureChannels:
    """The channels of one feature in the peak S/N spectrum (indices into the band).

    Attributes
    ----------
    first, last : int
        First and last channel of the run (inclusive).
    peak : int
        The channel of highest peak S/N.
    peak_snr : float
    edge_level : float
        The peak S/N level that bounds the run.
    """

    first: int
    last: int
    peak: int
    peak_snr: float
    edge_level: float

    @property
    def n_channels(self):
        return self.last - self.first + 1


def _floor_edge(values, threshold):
    """Edge level of a S/N spectrum: the noise floor's median + 3 robust scatters, at most ``threshold``.

    The floor is measured on the channels below ``threshold`` only, so that
    lines filling much of the band do not lift it.
    """
    finite = values[np.isfinite(values)]
    below = finite[finite < threshold]
    median, scatter = _robust_level(below if below.size >= 3 else finite)
    if not np.isfinite(median):
        return None
    return min(threshold, median + 3.0 * scatter)


def _boxcar3(values):
    """Mean of each channel and its two neighbours (blank neighbours left out; blank channels stay blank)."""
    finite = np.isfinite(values)
    padded = np.pad(np.where(finite, values, 0.0), 1)
    count = np.pad(finite.astype(float), 1)
    sums = padded[:-2] + padded[1:-1] + padded[2:]
    counts = count[:-2] + count[1:-1] + count[2:]
    with np.errstate(invalid="ignore", divide="ignore"):
        smooth = sums / counts
    smooth[~finite] = np.nan
    return smooth


def group_features(peak_snr, *, threshold=DETECTION_SNR, max_gap=1):
    """Group the channels of a peak S/N spectrum into features.

    Rule: a channel belongs to a run when the S/N smoothed over it and its
    two neighbours lies above the smoothed spectrum's edge level (the median
    of its noise floor plus 3 times the floor's robust scatter, the floor
    being the channels below ``threshold``), or when its own S/N reaches
    ``threshold``. Runs at most ``max_gap`` channels apart are merged;
    blank (non-finite) channels break runs. A run is a feature when its
    highest channel reaches ``threshold``. Smoothing lets a broad, faint line
    stay one feature where its noisy peak spectrum dips.

    Parameters
    ----------
    peak_snr : ndarray, shape (n_channels,)
        Peak intensity over channel rms, per channel.
    threshold : float
        Detection threshold in units of the channel rms.
    max_gap : int
        Largest gap (channels below the edge level) bridged inside a feature.

    Returns
    -------
    list of FeatureChannels
        Strongest first; ``edge_level`` is that of the smoothed spectrum.

    Examples
    --------
    >>> snr = np.array([1., 1.2, 0.8, 1.1, 0.9, 6., 9., 5.5, 1., 1.1, 0.9, 1., 1.3, 4., 1., 0.9, 1.1])
    >>> [(f.first, f.last, f.peak) for f in group_features(snr)]
    [(4, 8, 6)]
    """
    snr = np.asarray(peak_snr, dtype=float)
    if not threshold > 0:
        raise ValueError(f"threshold must be positive; got {threshold!r}")
    if not np.isfinite(snr).any():
        return []
    smooth = _boxcar3(snr)
    edge = _floor_edge(smooth, threshold)
    finite = np.isfinite(snr)
    above = finite & ((snr >= threshold) | (np.nan_to_num(smooth, nan=-np.inf) > edge))
    runs = []
    start = None
    for k, flag in enumerate(above):
        if flag and start is None:
            start = k
        elif not flag and start is not None:
            runs.append([start, k - 1])
            start = None
    if start is not None:
        runs.append([start, len(snr) - 1])
    merged = []
    for run in runs:
        gap = slice(merged[-1][1] + 1, run[0]) if merged else None
        if merged and run[0] - merged[-1][1] - 1 <= max_gap and np.all(finite[gap]):
            merged[-1][1] = run[1]
        else:
            merged.append(run)
    features = []
    for first, last in merged:
        segment = snr[first:last + 1]
        peak = first + int(np.nanargmax(segment))
        if snr[peak] >= threshold:
            features.append(FeatureChannels(first, last, peak, float(snr[peak]), float(edge)))
    features.sort(key=lambda f: -f.peak_snr)
    return features


def line_free_channels(n_channels, features, flagged=(), *, min_pad=MIN_PAD_CHANNELS):
    """Mask of the channels used as line-free: away from every feature, not flagged.

    Rule: each feature's channels are excluded together with a quarter as
    many channels again on each side (rounded up, at least ``min_pad``): the
    feature's run already reaches down to the noise floor of the peak
    spectrum, the padding covers the faint wings. Flagged channels are
    excluded too.

    Parameters
    ----------
    n_channels : int
    features : sequence of FeatureChannels
    flagged : sequence of int
    min_pad : int

    Returns
    -------
    ndarray of bool, shape (n_channels,)

    Examples
    --------
    >>> mask = line_free_channels(12, [FeatureChannels(5, 5, 5, 8.0, 3.0)])
    >>> np.flatnonzero(~mask)
    array([3, 4, 5, 6, 7])
    """
    free = np.ones(n_channels, dtype=bool)
    for feature in features:
        pad = max(min_pad, -(-feature.n_channels // 4))
        free[max(0, feature.first - pad):feature.last + pad + 1] = False
    free[np.asarray(flagged, dtype=int)] = False
    return free


def _channel_ranges(mask, frequency):
    """Contiguous runs of ``mask`` as (low, high) frequency pairs of channel centres."""
    idx = np.flatnonzero(mask)
    if idx.size == 0:
        return None
    breaks = np.flatnonzero(np.diff(idx) > 1)
    starts = np.r_[idx[0], idx[breaks + 1]]
    ends = np.r_[idx[breaks], idx[-1]]
    f = frequency.to_value(u.GHz)
    pairs = [(min(f[a], f[b]), max(f[a], f[b])) for a, b in zip(starts, ends)]
    return u.Quantity(pairs, u.GHz)


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class NoiseSummary:
    """Noise of the cube.

    Attributes
    ----------
    channel_rms : Quantity, shape (n_channels,)
        Robust rms per channel (1.4826 x median absolute deviation over the
        channel's pixels, leaving out pixels with significant continuum; for
        large images over a regular grid of about 65536 of them), in the
        cube's unit; NaN for wholly blanked channels. When the noise varies
        across the field (``spatial.varies``) it is the rms of the quietest
        part of the field (the centre of a primary-beam-corrected image),
        measured over the whole field with each pixel's values divided by its
        relative noise; see ``rms_region``.
    cube_rms : Quantity
        Robust rms of the cube: the median of the channel rms values
        (`noise.cube_noise`), of the same part of the field.
    flagged : ndarray of int
        Channels that stand out (see `flag_channels`).
    rule : str
        The flagging rule in words.
    spatial : SpatialNoise or None
        How the noise varies across the field (`spatial_noise`).
    rms_region : str
        Which part of the field ``channel_rms`` and ``cube_rms`` describe, in words.
    spatial_rule : str
        The rules of the noise map in words.
    varies_in_line_free_channels : bool or None
        When the noise varies: whether the same map made from each pixel's
        standard deviation over the line-free channels varies too (a check
        that the variation is not line emission); None otherwise.
    """

    channel_rms: u.Quantity
    cube_rms: u.Quantity
    flagged: np.ndarray
    rule: str
    spatial: object = None
    rms_region: str = "the whole field"
    spatial_rule: str = ""
    varies_in_line_free_channels: object = None

    @property
    def noise_map(self):
        """Typical noise of each pixel: ``cube_rms`` times the relative noise map (None without a map)."""
        if self.spatial is None:
            return None
        return self.cube_rms * self.spatial.relative


@dataclass(frozen=True)
class ContinuumSummary:
    """Continuum left in the cube: the mean over line-free channels per pixel.

    Attributes
    ----------
    mean : Quantity, shape (ny, nx)
        Mean over line-free channels, in the cube's unit.
    significance : ndarray, shape (ny, nx)
        ``mean / noise``.
    noise : Quantity
        Standard error of the mean at the most significant pixel.
    line_free : ndarray of bool, shape (n_channels,)
    n_free : int
    peak : Quantity
        The mean at the pixel of largest absolute significance.
    peak_significance : float
    peak_position : tuple of int
        ``(y, x)`` of that pixel (numpy order).
    n_significant : int
        Pixels with ``|significance| >= 5``.
    rule : str
    """

    mean: u.Quantity
    significance: np.ndarray
    noise: u.Quantity
    line_free: np.ndarray
    n_free: int
    peak: u.Quantity
    peak_significance: float
    peak_position: tuple
    n_significant: int
    rule: str


@dataclass(frozen=True)
class Candidate:
    """A tentative identification of a feature with a catalog line.

    Attributes
    ----------
    name : str
    rest_frequency : Quantity [GHz]
    z : float
        The redshift at which the line falls at the feature's frequency.
    velocity_offset : Quantity [km/s] or None
        The feature's offset from the line at the given (or solved) redshift
        (radio convention); None when no redshift is known.
    """

    name: str
    rest_frequency: u.Quantity
    z: float
    velocity_offset: object = None


@dataclass(frozen=True)
class Feature:
    """One detected feature: emission in the peak S/N spectrum or absorption in the trough S/N spectrum.

    Attributes
    ----------
    channels : FeatureChannels
    frequency : Quantity [GHz]
        Centroid of the peak (or trough) spectrum over the feature's channels.
    peak_frequency : Quantity [GHz]
        Frequency of the channel of highest S/N.
    width_frequency, width_velocity : Quantity [MHz], [km/s]
        Full extent of the feature's channels (velocity: ``c dnu / nu``).
    peak : Quantity
        Intensity at ``position`` in the channel of highest S/N relative to
        the pixel's continuum level, in the cube's unit: positive for
        emission, negative for absorption (its depth is ``-peak``).
    peak_snr : float
        ``|peak|`` over the noise at that pixel and channel (positive for
        both kinds).
    position : tuple of int
        ``(y, x)`` of the brightest (emission) or deepest (absorption) pixel
        of the peak channel, each pixel judged against its own noise.
    candidates : tuple of Candidate
        Best first.
    kind : str
        ``'emission'`` or ``'absorption'``.
    peak_error : Quantity or None
        Standard error of ``peak``: the channel's rms at that pixel (times
        the relative noise there when the noise varies across the field),
        widened by the scatter of the continuum level.
    continuum : Quantity or None
        The continuum level at ``position``: for emission the pixel's median
        over the channel subsample, for absorption the local continuum on
        both sides of it; an absorption's depth over it is the fraction
        absorbed.
    """

    channels: FeatureChannels
    frequency: u.Quantity
    peak_frequency: u.Quantity
    width_frequency: u.Quantity
    width_velocity: u.Quantity
    peak: u.Quantity
    peak_snr: float
    position: tuple
    candidates: tuple = ()
    kind: str = "emission"
    peak_error: object = None
    continuum: object = None

    @property
    def depth(self):
        """Depth of an absorption below the continuum level (``-peak``); None for emission."""
        return -self.peak if self.kind == "absorption" else None


@dataclass(frozen=True)
class ExpectedLine:
    """A catalog transition that falls inside the band at the given redshift."""

    name: str
    rest_frequency: u.Quantity
    observed_frequency: u.Quantity
    detected: bool = False


@dataclass(frozen=True)
class LinesSummary:
    """Lines: expected transitions and detections.

    Attributes
    ----------
    threshold : float
        Detection threshold asked for, in channel rms.
    peak_spectrum : Quantity, shape (n_channels,)
        Maximum over pixels of each channel after removing each pixel's
        continuum level (`continuum_free_peaks`).
    peak_snr : ndarray, shape (n_channels,)
        ``peak_spectrum / channel_rms``.
    edge_level : float or None
        Smoothed peak S/N bounding the features (see `group_features`).
    features : tuple of Feature
        Strongest first.
    z : float or None
        The redshift given by the user.
    expected : tuple of ExpectedLine
        Catalog lines in the band at ``z`` (empty without ``z``).
    solved_z : float or None
        Redshift solved from two or more features when no ``z`` was given.
    expected_noise_peaks : float
        Number of pure-noise peaks expected above ``effective_threshold`` in
        the whole cube, for Gaussian noise correlated over ``noise_fwhm_pixels``
        (the Euler characteristic of a Gaussian random field, Worsley et al.
        1996, capped by the Bonferroni bound).
    rule : str
    effective_threshold : float
        The threshold applied: the larger of ``threshold`` and
        `false_alarm_threshold` (equal to ``threshold`` when
        ``false_alarms`` is None).
    false_alarms : float or None
        Expected number of pure-noise detections allowed in the whole cube.
    expected_noise_peaks_at_threshold : float
        Pure-noise peaks expected above ``threshold`` itself.
    noise_fwhm_pixels : tuple of float (x, y) or None
        Noise correlation FWHM used for the counts (see `check_cube` notes).
    resolution_elements : float
        Independent noise beams per channel image behind the counts.
    velocity_reference : str
        What the velocities of the detections are relative to.
    trough_spectrum : Quantity, shape (n_channels,) or None
        Minimum over pixels of each channel after removing each pixel's
        continuum level: absorption shows as a dip.
    trough_snr : ndarray, shape (n_channels,) or None
        ``-trough_spectrum / channel_rms``: positive for a dip.
    absorption_edge_level : float or None
        Smoothed trough S/N bounding the absorption features.

    With a noise varying across the field (`NoiseSummary` ``spatial``),
    ``peak_spectrum`` and ``trough_spectrum`` hold the extremes of each
    pixel's values divided by its relative noise: intensities as they would
    be at the quietest part of the field, where ``channel_rms`` applies.
    Expected counts of pure-noise peaks cover both signs.
    """

    threshold: float
    peak_spectrum: u.Quantity
    peak_snr: np.ndarray
    edge_level: object
    features: tuple
    z: object
    expected: tuple
    solved_z: object
    expected_noise_peaks: float
    rule: str
    effective_threshold: float = None
    false_alarms: object = None
    expected_noise_peaks_at_threshold: float = None
    noise_fwhm_pixels: object = None
    resolution_elements: float = None
    velocity_reference: str = ""
    trough_spectrum: object = None
    trough_snr: object = None
    absorption_edge_level: object = None


@dataclass(frozen=True)
class StrongestFeature:
    """Moment-0 map of the strongest feature and the spectrum at its peak.

    Attributes
    ----------
    window : Quantity [GHz], shape (2,)
        Frequency window of the moment map.
    moment0 : spectral_cube Projection
        Linear baseline per pixel on the line-free channels near the feature
        (negative over an absorption).
    position : tuple of int
        ``(y, x)`` of the moment-0 peak (its minimum for an absorption).
    spectrum : spectral_cube OneDSpectrum
        The cube's spectrum at that pixel.
    """

    window: u.Quantity
    moment0: object
    position: tuple
    spectrum: object


@dataclass(frozen=True)
class CubeCheck:
    """Everything the delivery check found for one cube.

    Attributes
    ----------
    path : str
    header : HeaderSummary
    noise : NoiseSummary
    continuum : ContinuumSummary or None
        None when too few channels are line-free.
    lines : LinesSummary
    strongest : StrongestFeature or None
        None without detections.
    warnings : tuple of str
        Everything a user should look at, in words.
    """

    path: str
    header: HeaderSummary
    noise: NoiseSummary
    continuum: object
    lines: object
    strongest: object
    warnings: tuple = ()


# --------------------------------------------------------------------------- identification

# A catalog line is a tentative identification of a feature when the line,
# redshifted to z, lies within half the feature's width plus this velocity of
# the feature's centroid: redshifts typed from an optical spectrum are often
# off by a few hundred km/s (common practice).
IDENTIFY_TOLERANCE = 300 * _KMS
# How many tentative identifications are kept per feature.
MAX_CANDIDATES = 5


def _candidates_at_z(frequency, half_width, z):
    """Catalog lines near ``frequency`` at redshift ``z``, nearest first."""
    from .catalog import lines_in_band
    from .spectral import velocity

    tolerance = (half_width + IDENTIFY_TOLERANCE).to_value(_KMS) / _C_KMS
    band = lines_in_band(frequency * (1 - tolerance), frequency * (1 + tolerance), z)
    found = []
    for row in band:
        rest = row["rest_frequency"] * u.GHz if not hasattr(row["rest_frequency"], "unit") else row["rest_frequency"]
        rest = u.Quantity(rest, u.GHz)
        offset = velocity(frequency, rest, z=z)
        found.append(Candidate(str(row["name"]), rest, float(z), offset))
    found.sort(key=lambda c: abs(c.velocity_offset.to_value(_KMS)))
    return tuple(found[:MAX_CANDIDATES])


def _identify(frequencies, widths, z, channel_velocity):
    """Tentative identifications per feature, and a solved z when none was given.

    With ``z``: catalog lines near each feature at that z (`_candidates_at_z`).
    Without ``z`` and with two or more features: the redshift solver's best
    candidate that identifies at least two of the (up to
    ``MAX_SOLVER_FEATURES``) strongest features gives ``solved_z``; each
    feature's identifications are the lines the solver's candidates assign
    to it, best candidate first, or else the catalog lines near it at the
    solved z; when no redshift fits two features, each of them is treated as
    a lone feature. A lone feature (also the only one): every line that puts
    it at a redshift from 0 to 20, lowest upper-level energy first (the
    solver's ranking of a lone peak).
    """
    from .redshift_solver import redshift_candidates

    n = len(frequencies)
    if n == 0:
        return [], None
    if z is not None:
        return [_candidates_at_z(f, w / 2, z) for f, w in zip(frequencies, widths)], None
    # The solver's tolerance must cover the centroid's uncertainty: at least
    # 150 km/s (the solver's default) and at least two channels.
    tolerance = max(150 * _KMS, 2 * channel_velocity) if channel_velocity is not None else 150 * _KMS
    # features come strongest first; the solver sees the strongest few
    n_used = min(n, MAX_SOLVER_FEATURES)
    peaks = u.Quantity(frequencies[:n_used]).to(u.GHz)
    try:
        solutions = redshift_candidates(peaks, tolerance=tolerance, z_range=(0.0, 20.0), max_candidates=10)
    except CubeloupeError:
        solutions = []
    solved = None
    if n >= 2:
        unique = [s for s in solutions if s.unique]
        solved = unique[0].z if unique else None
        per_feature = [[] for _ in range(n)]
        for solution in unique:
            for i, name in enumerate(solution.lines):
                if name is None or any(c.name == name for c in per_feature[i]):
                    continue
                per_feature[i].append(Candidate(name, solution.rest_frequencies[i], float(solution.z),
                                                solution.residuals[i]))
        for i in range(n):
            if per_feature[i]:
                continue
            if solved is not None:
                # features the solver did not see (or could not place) are identified at the solved z
                per_feature[i] = list(_candidates_at_z(frequencies[i], widths[i] / 2, solved))
            elif i < n_used:
                # no redshift fits two features (e.g. one line at two velocities): each on its own
                per_feature[i] = list(_lone_candidates(peaks[i], tolerance))
        return [tuple(c[:MAX_CANDIDATES]) for c in per_feature], solved
    return [tuple(_lone_candidates(peaks[0], tolerance, solutions))], None


def _lone_candidates(frequency, tolerance, solutions=None):
    """Every catalog line that puts one feature at 0 <= z <= 20, as the solver ranks a lone peak."""
    from .redshift_solver import redshift_candidates

    if solutions is None:
        try:
            solutions = redshift_candidates(u.Quantity([frequency]), tolerance=tolerance, z_range=(0.0, 20.0),
                                            max_candidates=MAX_CANDIDATES)
        except CubeloupeError:
            solutions = []
    lone = [Candidate(s.lines[0], s.rest_frequencies[0], float(s.z), None) for s in solutions if s.lines[0]]
    return lone[:MAX_CANDIDATES]


# --------------------------------------------------------------------------- continuum-free peaks

# Channels used per pixel for the continuum estimate of `continuum_free_peaks`:
# the median of 64 channels has a noise of about 1.25 sigma / 8 (common
# practice for the median's efficiency), small next to the detection threshold,
# and costs a fraction of a full median over every channel.
CONTINUUM_SAMPLE_CHANNELS = 64
# Pixels with significant continuum are left out of the channel rms when they
# cover more than this fraction of the image. A fraction f of pixels lifted
# far above the noise moves the median absolute deviation of a channel by
# about 1.2 f (of the order of f / (2 phi(0.674)) for a Gaussian, from the
# MAD's influence function; Hampel 1974, JASA 69, 383), so 2 % costs at most
# about 3 %.
CONTINUUM_MASK_FRACTION = 0.02
# Pixels per channel behind the robust rms: the MAD of n Gaussian values
# estimates sigma to about 1.17 / sqrt(n) (Rousseeuw & Croux 1993, JASA 88,
# 1273), 0.9 % here, far inside the 10 % a delivery check needs, at a quarter
# of the cost of noise.py's default. Large images are first thinned to a
# regular grid of about 4 times as many pixels (see check_cube).
NOISE_MAX_PIXELS = 2**14
# The moment map of the strongest feature fits each pixel's baseline on the line-free
# channels within this many feature widths, and at least this many channels, on each side.
BASELINE_SPAN = 3
MIN_BASELINE_CHANNELS = 20
# The redshift solver pairs every feature with every catalog line: only the
# strongest features are given to it.
MAX_SOLVER_FEATURES = 8


@dataclass(frozen=True)
class ContinuumFreePeaks:
    """Result of `continuum_free_peaks`: one pass over the spectra of a cube.

    Attributes
    ----------
    peaks : Quantity, shape (n_channels,)
        Maximum over pixels of the data minus each pixel's continuum level;
        NaN for wholly blank channels.
    positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each channel's peak (numpy order); -1 for blank channels.
    continuum_level : Quantity, shape (ny, nx)
        Median of each pixel's spectrum over the channel subsample.
    pixel_noise : Quantity, shape (ny, nx)
        Robust rms (1.4826 x MAD) of each pixel's spectrum over the same
        channels; continuum does not change it.
    valid_fraction : ndarray, shape (n_channels,)
        Fraction of pixels with data (finite and unmasked) in each channel.
    n_sample : int
        Channels per pixel behind ``continuum_level`` and ``pixel_noise``.
    noise_fwhm_pixels : tuple of float (x, y) or None
        FWHM of the noise correlation in pixels, measured on the same channels
        (`noise_fwhm_from_lags`); 0 for uncorrelated noise.
    pixel_sums : noise.PixelSums
        Per-pixel sums over every channel about ``continuum_level``.
    troughs : Quantity, shape (n_channels,)
        Minimum over pixels of the data minus each pixel's continuum level
        (absorption shows here); NaN for wholly blank channels.
    trough_positions : ndarray of int, shape (n_channels, 2)
        ``(y, x)`` of each channel's minimum; -1 for blank channels.
    step_noise : Quantity, shape (ny, nx)
        Each pixel's noise from the differences between each channel of the
        subsample and the next channel (1.4826 x the median absolute
        difference / sqrt(2)): continuum, its slope and lines broader than a
        few channels hardly change it. For noise correlated between
        neighbouring channels it is lower than the noise itself by the same
        factor at every pixel, so its variation across the field is that of
        the noise (see `spatial_noise`).
    """

    peaks: u.Quantity
    positions: np.ndarray
    continuum_level: u.Quantity
    pixel_noise: u.Quantity
    valid_fraction: np.ndarray
    n_sample: int
    noise_fwhm_pixels: object = None
    pixel_sums: object = field(default=None, repr=False)  # noise.PixelSums about continuum_level
    troughs: object = None
    trough_positions: object = None
    step_noise: object = None

    def line_free_mean(self, cube, line_free, *, client=None, progress=None, cancel=None):
        """Mean over line-free channels per pixel, its standard error and significance.

        The statistics of `noise.leftover_continuum`, by its own code
        (`noise.PixelSums`): the per-pixel sums over every channel made by
        this pass, less the sums over the excluded channels, which are read
        again (usually a small part of the cube). This saves a whole pass.

        Returns
        -------
        mean, error : Quantity, shape (ny, nx)
        significance : ndarray, shape (ny, nx)
        """
        sums = self.pixel_sums.without_channels(cube, ~np.asarray(line_free, dtype=bool), client=client,
                                                progress=progress, cancel=cancel)
        mean, error, significance = sums.statistics()
        unit = self.peaks.unit
        return u.Quantity(mean, unit), u.Quantity(error, unit), significance

    def continuum_pixels(self, sigmas=3.0, *, local=False):
        """Pixels whose continuum level exceeds ``sigmas`` times its own noise.

        The median of ``n`` Gaussian values scatters by ``1.2533 sigma /
        sqrt(n)`` (the median's asymptotic efficiency, common practice); the
        noise is the median over pixels of ``pixel_noise``, or with
        ``local=True`` (a noise varying across the field) each pixel's own.
        """
        spread = self.pixel_noise.value if local else np.nanmedian(self.pixel_noise.value)
        noise = spread * 1.2533 / np.sqrt(max(1, self.n_sample))
        with np.errstate(invalid="ignore"):
            return np.abs(np.nan_to_num(self.continuum_level.value)) > sigmas * noise


def _lag_sums(residual):
    """Per channel of ``residual`` (channels, rows, columns): sums of squares and of neighbour products.

    Returns an array of shape (6, n_channels): the sum of squares, of the
    products of horizontal neighbours, of vertical neighbours, and the
    number of terms in each (blank pixels left out).
    """
    n, rows, columns = residual.shape
    finite = np.isfinite(residual)
    if finite.all():
        values = residual
        counts = [np.full(n, rows * columns), np.full(n, rows * (columns - 1)), np.full(n, (rows - 1) * columns)]
    else:
        values = np.where(finite, residual, residual.dtype.type(0))
        counts = [finite.sum(axis=(1, 2)), (finite[:, :, 1:] & finite[:, :, :-1]).sum(axis=(1, 2)),
                  (finite[:, 1:, :] & finite[:, :-1, :]).sum(axis=(1, 2))]
    squares = np.einsum("cij,cij->c", values, values, dtype=np.float64)
    across = np.einsum("cij,cij->c", values[:, :, 1:], values[:, :, :-1], dtype=np.float64)
    down = np.einsum("cij,cij->c", values[:, 1:, :], values[:, :-1, :], dtype=np.float64)
    return np.stack([squares, across, down, *(np.asarray(c, dtype=np.float64) for c in counts)])


def noise_fwhm_from_lags(lags):
    """FWHM of the noise correlation, in pixels along x and y, from neighbour products per channel.

    For noise that is white noise smoothed with a Gaussian of FWHM ``f``
    pixels, the correlation of neighbouring pixels is ``rho = exp(-2 ln 2 /
    f^2)``, so ``f = sqrt(-2 ln 2 / ln rho)`` (the lag-one smoothness
    estimate of Forman et al. 1995, Magn. Reson. Med. 33, 636, from memory).
    ``rho`` is taken per channel and the median over channels kept, so that
    the few channels holding a bright line do not count. Uncorrelated noise
    (``rho <= 0``) gives 0.

    Parameters
    ----------
    lags : ndarray, shape (6, n_channels)
        As made by `continuum_free_peaks`: sums of squares, of x-neighbour
        and of y-neighbour products, and their numbers of terms.

    Returns
    -------
    tuple of float (x, y), or None when there are too few pixels

    Examples
    --------
    >>> lags = np.array([[100.0], [25.0], [25.0], [100.0], [100.0], [100.0]])
    >>> [round(f, 3) for f in noise_fwhm_from_lags(lags)]  # rho = 1/4 = exp(-2 ln 2): f = 1 pixel
    [1.0, 1.0]
    """
    squares, across, down, n0, n_across, n_down = np.asarray(lags, dtype=float)
    fwhm = []
    for products, n_pairs in ((across, n_across), (down, n_down)):
        usable = (n0 > 1) & (n_pairs > 0) & (squares > 0)
        if not usable.any():
            fwhm.append(None)
            continue
        rho = float(np.median((products[usable] / n_pairs[usable]) / (squares[usable] / n0[usable])))
        fwhm.append(0.0 if rho <= 0 else float(np.sqrt(-2 * np.log(2) / np.log(min(rho, 1 - 1e-12)))))
    if fwhm[0] is None and fwhm[1] is None:
        return None
    # an image one pixel high (or wide) has neighbours along one axis only: take it for both
    return tuple(f if f is not None else next(g for g in fwhm if g is not None) for f in fwhm)


@dataclass(frozen=True)
class _ContinuumFreePeaks:
    """Block kernel: per-pixel median, MAD and channel-step noise over a channel subsample; per-channel extremes."""

    step: int

    def __call__(self, data):
        n_chan = data.shape[0]
        flat = data.reshape(n_chan, -1)
        # pixels along the rows so that each pixel's channels are contiguous for the partition
        sample = np.ascontiguousarray(flat[::self.step].T)
        # differences of each sampled channel and the next one: continuum, its slope and lines
        # broader than a few channels cancel (across the subsample's wider steps, broad
        # emission would lift the noise where it lies, as measured on the demo disk galaxy)
        following = flat[1::self.step]
        steps = np.subtract(following, flat[::self.step][:following.shape[0]])
        steps = np.ascontiguousarray(np.abs(steps, out=steps).T)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels: no estimate
            level = row_medians(sample)
            spread = row_medians(np.abs(sample - level[:, None]), upper=True)
            step_spread = row_medians(steps, upper=True)
        filled_level = np.nan_to_num(level)
        lags = _lag_sums((sample.T - filled_level).reshape((sample.shape[1], *data.shape[1:])))
        # Spectra blank in every channel (outside a primary-beam cutoff, say) are set aside, so
        # that the sums and extremes below run on data without NaN, on their fast paths.
        kept = _pixels_with_data(flat, level)
        if kept is None:
            # The block is this kernel's own copy (see blocks.run_blocks): subtract in place.
            residual = np.subtract(flat, filled_level, out=flat)
        else:
            residual = _take_columns(flat, kept)
            np.subtract(residual, filled_level[kept], out=residual)
        # the sums of noise.leftover_continuum, about the pixel's own level
        sums = pixel_sums(residual)
        peak, where, trough, where_low, valid = row_extremes(residual)
        if kept is not None:
            sums = [_scatter(values, kept, flat.shape[1]) for values in sums]
            where, where_low = kept[where], kept[where_low]
        count, sum1, sum2 = sums
        return {"peak": peak, "where": where, "trough": trough, "where_low": where_low, "level": level,
                "noise": MAD_TO_SIGMA * spread, "step_noise": MAD_TO_SIGMA / np.sqrt(2) * step_spread,
                "valid": valid, "count": count, "sum1": sum1, "sum2": sum2, "lags": lags}


def _pixels_with_data(flat, level):
    """Indices of the pixels of ``flat`` (channels, pixels) with data, when the others are blank throughout.

    None when every pixel has data, or when no pixel does, or when a pixel
    without data in the channel subsample (NaN ``level``) holds data in
    some other channel (then every pixel is kept, on the slower NaN-aware paths).
    """
    blank = np.isnan(level)
    if not blank.any() or blank.all() or not np.isnan(flat[:, blank]).all():
        return None
    return np.flatnonzero(~blank)


def _take_columns(values, columns):
    """A C-ordered copy of ``values[:, columns]`` (``columns`` increasing).

    Plain fancy indexing along the second axis returns a Fortran-ordered
    array here, on which the per-channel reductions run many times slower.
    The pixels with data usually form a few runs (one per image row), which
    are copied as slices.
    """
    breaks = np.flatnonzero(np.diff(columns) != 1)
    if breaks.size >= 16:
        return np.take(values, columns, axis=1)
    starts = np.r_[columns[0], columns[breaks + 1]]
    stops = np.r_[columns[breaks], columns[-1]] + 1
    return np.concatenate([values[:, a:b] for a, b in zip(starts, stops)], axis=1)


def _scatter(values, kept, size):
    """``values`` of the pixels ``kept`` placed in a zero array of ``size`` pixels."""
    out = np.zeros(size, dtype=values.dtype)
    out[kept] = values
    return out


def continuum_free_peaks(cube, *, client=None, progress=None, cancel=None):
    """Peak-intensity spectrum after removing each pixel's continuum level; per-pixel level and noise.

    The continuum level of a pixel is the median of its spectrum over an
    evenly spaced subsample of at most ``CONTINUUM_SAMPLE_CHANNELS``
    channels: lines that fill less than half of the band at a pixel do not
    move it. Without continuum the peak spectrum is the plain one (less a
    level of about 0.2 sigma); with continuum, the continuum no longer lifts
    it, so it cannot pass for a line. The same pass gives each pixel's noise
    along its spectrum (1.4826 x MAD), which continuum does not change, and
    the valid fraction of every channel. One read of the cube, block by block
    through `blocks.run_blocks`, in bounded memory.

    Parameters
    ----------
    cube : SpectralCube
    client, progress, cancel
        As for `blocks.run_blocks`.

    Returns
    -------
    ContinuumFreePeaks

    Examples
    --------
    >>> result = continuum_free_peaks(open_cube(demo_path("disk")))  # doctest: +SKIP
    >>> result.peaks.unit  # doctest: +SKIP
    Unit("Jy / beam")
    """
    from .blocks import run_blocks, spectra_blocks
    from .noise import PixelSums

    n_chan, ny, nx = cube.shape
    step = max(1, -(-n_chan // CONTINUUM_SAMPLE_CHANNELS))
    best = np.full(n_chan, -np.inf)
    positions = np.full((n_chan, 2), -1, dtype=int)
    lowest = np.full(n_chan, np.inf)
    low_positions = np.full((n_chan, 2), -1, dtype=int)
    level = np.full((ny, nx), np.nan)
    noise = np.full((ny, nx), np.nan)
    step_noise = np.full((ny, nx), np.nan)
    valid = np.zeros(n_chan)
    sums = np.zeros((3, ny, nx))
    lags = np.zeros((6, len(range(0, n_chan, step))))

    def consume(block, result):
        rows, columns = block.rows, block.columns
        width = columns.stop - columns.start
        shape = (rows.stop - rows.start, width)
        for i, name in enumerate(("count", "sum1", "sum2")):
            sums[i, rows, columns] = result[name].reshape(shape)
        level[rows, columns] = result["level"].reshape(shape)
        noise[rows, columns] = result["noise"].reshape(shape)
        step_noise[rows, columns] = result["step_noise"].reshape(shape)
        valid[:] += result["valid"]
        lags[:] += result["lags"]
        for extreme, place, value, where, better in (
                (best, positions, result["peak"], result["where"], result["peak"] > best),
                (lowest, low_positions, result["trough"], result["where_low"], result["trough"] < lowest)):
            if better.any():
                extreme[better] = value[better]
                place[better, 0] = rows.start + where[better] // width
                place[better, 1] = columns.start + where[better] % width

    blocks = spectra_blocks(cube.shape, itemsize=4)
    run_blocks(cube, _ContinuumFreePeaks(step), blocks, consume, dtype=np.float32, client=client,
               progress=progress, cancel=cancel)
    best[~np.isfinite(best)] = np.nan
    lowest[~np.isfinite(lowest)] = np.nan
    unit = u.Unit(cube.unit)
    sums = PixelSums(level=np.nan_to_num(level), count=sums[0], sum1=sums[1], sum2=sums[2],
                     channels=np.ones(n_chan, dtype=bool))
    return ContinuumFreePeaks(
        peaks=u.Quantity(best, unit), positions=positions, continuum_level=u.Quantity(level, unit),
        pixel_noise=u.Quantity(noise, unit), valid_fraction=valid / float(ny * nx),
        n_sample=len(range(0, n_chan, step)), noise_fwhm_pixels=noise_fwhm_from_lags(lags), pixel_sums=sums,
        troughs=u.Quantity(lowest, unit), trough_positions=low_positions, step_noise=u.Quantity(step_noise, unit),
    )


def _stage(progress, start, stop):
    """A progress callback for one stage mapping 0..1 onto start..stop overall."""
    if progress is None:
        return None
    return lambda fraction: progress(start + (stop - start) * min(max(float(fraction), 0.0), 1.0))


def _expected_noise_peaks(n_channels, n_pixels, fwhm_pixels, threshold):
    """Expected number of pure-noise peaks at or above ``threshold`` sigma over a whole cube.

    For noise correlated over a Gaussian of FWHM ``(a, b)`` pixels, the
    expected number of peaks above ``t`` in an image of ``n_pixels`` is its
    expected Euler characteristic, ``R (4 ln 2) (2 pi)^(-3/2) t exp(-t^2 / 2) +
    Q(t)`` with ``R = n_pixels / (a b)`` resolution elements and ``Q`` the
    Gaussian upper tail (Worsley et al. 1996, Human Brain Mapping 4, 58;
    Adler 1981, The Geometry of Random Fields); the edge terms are left out.
    It can never exceed the number of pixels above ``t``, ``n_pixels Q(t)``
    (the Bonferroni bound, exact for uncorrelated pixels): the smaller of
    the two is used, as is usual for random-field thresholds. Without an
    FWHM the pixels are taken as independent. Channels are independent.
    """
    from scipy.stats import norm

    tail = norm.sf(threshold)
    bonferroni = n_pixels * tail
    if fwhm_pixels is None or min(fwhm_pixels) <= 0:
        return float(n_channels * bonferroni)
    resels = n_pixels / (fwhm_pixels[0] * fwhm_pixels[1])
    density = 4 * np.log(2) * (2 * np.pi) ** -1.5 * threshold * np.exp(-0.5 * threshold**2)
    return float(n_channels * min(resels * density + tail, bonferroni))


def false_alarm_threshold(n_channels, n_pixels, fwhm_pixels=None, *, false_alarms=FALSE_ALARMS):
    """The peak S/N above which ``false_alarms`` pure-noise peaks are expected in the whole cube.

    The detection threshold that keeps the false-alarm rate of the whole
    cube, not of one pixel, at ``false_alarms``: the level ``t`` where the
    expected number of peaks of Gaussian noise above ``t`` over
    ``n_channels`` channel images of ``n_pixels`` pixels, correlated over a
    Gaussian of ``fwhm_pixels`` (x, y), equals ``false_alarms``
    (`_expected_noise_peaks`: the expected Euler characteristic of a Gaussian
    random field, Worsley et al. 1996, capped by the Bonferroni bound).
    Because the maximum over many pixels of Gaussian noise grows like
    ``sqrt(2 ln N)``, a fixed 5 sigma lets big cubes report dozens of noise
    peaks.

    Parameters
    ----------
    n_channels : int
    n_pixels : float
        Pixels with data per channel image.
    fwhm_pixels : (float, float) or None
        FWHM of the noise correlation along x and y in pixels; None or 0 for
        uncorrelated pixels.
    false_alarms : float
        Expected number of pure-noise peaks allowed in the whole cube.

    Returns
    -------
    float

    Examples
    --------
    >>> from scipy.stats import norm
    >>> t = false_alarm_threshold(100, 10_000, None, false_alarms=0.05)
    >>> bool(np.isclose(t, norm.isf(0.05 / 1e6)))  # independent pixels: the Bonferroni level
    True
    """
    from scipy.optimize import brentq

    if not false_alarms > 0:
        raise ValueError(f"false_alarms must be a positive expected count; got {false_alarms!r}")
    if n_channels < 1 or n_pixels <= 0:
        return 0.0

    def excess(t):
        return np.log(_expected_noise_peaks(n_channels, n_pixels, fwhm_pixels, t)) - np.log(false_alarms)

    low, high = 1.0, 30.0
    if excess(low) <= 0:
        return low
    return float(brentq(excess, low, high, xtol=1e-6))


_FLAG_RULE = (
    "Flagged channels: robust rms differing from the median channel rms by more than "
    f"{FLAG_SIGMAS:g} times the robust scatter (1.4826 x MAD) of the channel rms values, "
    "or wholly blanked."
)
_CONTINUUM_RULE = (
    "Leftover continuum: mean over the line-free channels (all channels except flagged ones and "
    "each detection padded on both sides by a quarter of its number of channels, at least "
    f"{MIN_PAD_CHANNELS}) in each pixel; significance = mean / (the pixel's standard deviation over "
    "those channels / sqrt(n)), for independent channels."
)


def _lines_rule(threshold, effective, false_alarms, per_pixel=False):
    if false_alarms is None:
        level = f"the threshold, {threshold:g} sigma as asked (no false-alarm control)"
    else:
        level = (
            f"the threshold, {effective:.2f} sigma: the larger of the {threshold:g} asked and the level above "
            f"which {false_alarms:g} pure-noise peaks or dips are expected over the whole cube, half on each side "
            f"(both signs are searched: twice the trials; expected Euler "
            f"characteristic of Gaussian noise correlated over the beam or the measured noise correlation, "
            f"whichever gives more independent beams, capped by the Bonferroni bound; Worsley et al. 1996, "
            f"Human Brain Mapping 4, 58)"
        )
    units = ("each pixel's values divided by its relative noise (the noise map), over the channel's rms at the "
             "quietest part of the field" if per_pixel else "over the channel's robust rms")
    return (
        f"Detections: peak-intensity spectrum (maximum over pixels per channel of the data minus each "
        f"pixel's median over channels, i.e. without continuum), {units}; absorption likewise from the "
        f"minimum over pixels (the trough spectrum), negated; runs of adjacent channels whose 3-channel "
        f"smoothed S/N is above the edge level "
        f"(median + 3 robust scatters of the channels below the threshold) or whose own S/N reaches "
        f"the threshold, gaps of one channel bridged, kept when the highest channel reaches {level}. "
        f"Identifications: catalog lines within half the feature "
        f"width + {IDENTIFY_TOLERANCE.to_value(_KMS):g} km/s at z."
    )


_SPATIAL_RULE = (
    "Noise across the field: each pixel's noise from the differences of neighbouring channels, at the channel "
    f"subsample (1.4826 x median absolute difference / sqrt 2); the median of its log in boxes of about 1/"
    f"{NOISE_BOXES} of the field (at least {MIN_BOX_PIXELS} pixels and two beams); a 2-D Legendre polynomial "
    f"in log(noise) of degree up to {NOISE_MAP_DEGREE} through the boxes (weighted least squares, boxes beyond "
    f"4 robust scatters left out, the lowest degree no higher one beats at p = {DEGREE_P_VALUE:g}; the mesh of "
    "boxes as for the background maps of Bertin & Arnouts 1996, A&AS 117, 393), relative to its lowest value. "
    f"The noise varies when a flat field is rejected at p < {NOISE_VARIATION_P_VALUE:g} (F test) and the "
    f"noisiest pixel is at least {NOISE_VARIATION:.0%} above the quietest; it looks primary-beam corrected when "
    f"the median along the field's edge is at least {PBCOR_EDGE_RISE:g} times the quietest and 95 % of the edge "
    f"lies above {1 + (PBCOR_EDGE_RISE - 1) / 2:g}. Edge/centre: the median of the map along the edge (the "
    "outermost pixels with data) over the quietest part."
)


def _velocity_reference(frame):
    """What the velocities of the report are relative to, in words."""
    frame = f"the cube's {frame} frame" if frame else "the cube's own frame (no SPECSYS in the header)"
    return (
        "Velocity offsets of identifications are radio-convention velocities, c (f_line - f) / f_line, of a "
        "detection relative to the catalog line redshifted to the identification's z (f_line = f_rest / (1 + z); "
        "the z given, solved, or that puts the line on the detection), i.e. in the rest frame of a source at "
        f"that z, with observed frequencies in {frame}. With z = 0 they are velocities in that frame itself: "
        "a nearby galaxy described by a systemic velocity v shows its lines near +v; give z = v / c for an "
        "optical-convention v (1 + z = 1 / (1 - v / c) for a radio-convention v) to have offsets from the "
        "systemic velocity. Widths in km/s are c df / f at the detection."
    )


def _noise_fwhm(header, measured):
    """FWHM (x, y) of the noise correlation in pixels for the false-alarm count.

    The beam's (major and minor axes over the pixel size) or the one measured
    on the data (`noise_fwhm_from_lags`), whichever covers the smaller area:
    more independent beams, a higher threshold. This keeps the count honest
    for noise less correlated than the beam (gridded single-dish data,
    white-noise test cubes) and for a measurement lifted by sources.
    """
    beam = None
    if header.beam_major is not None:
        beam = tuple(float((axis / header.pixel_size.min()).decompose())
                     for axis in (header.beam_major, header.beam_minor))
    found = [f for f in (beam, measured) if f is not None]
    return min(found, key=lambda f: f[0] * f[1]) if found else None


def noise_grid(shape, max_pixels=None):
    """How the check samples pixels for the channel rms: every ``stride``-th image row, ``max_pixels`` of them.

    Reading whole rows is several times cheaper than a strided grid along
    both axes (the rows are contiguous in the file); `channel_statistics`
    then takes every ``stride``-th of the rows' pixels, so the pixels used
    lie on a regular grid of about ``stride`` pixels in both directions,
    about ``max_pixels`` of them (default ``NOISE_MAX_PIXELS``).

    Returns
    -------
    stride : int
    max_pixels : int
        The ``max_pixels`` to give `channel_statistics` on the rows read.

    Examples
    --------
    >>> noise_grid((1000, 512, 512))
    (4, 16384)
    """
    max_pixels = NOISE_MAX_PIXELS if max_pixels is None else int(max_pixels)
    _, ny, nx = (int(n) for n in shape)
    stride = max(1, round(np.sqrt(ny * nx / max_pixels)))
    if stride == 1:
        return 1, max_pixels
    read = -(-ny // stride) * nx
    return stride, max(1, -(-read // stride))


def _feature(channels, frequency, spectrum, *, kind, peak, peak_error, position, continuum):
    """Measure one feature's frequency and width from its (peak or negated trough) spectrum."""
    run = slice(channels.first, channels.last + 1)
    values = np.asarray(spectrum, dtype=float)
    floor = np.nanmedian(values)
    weights = np.clip(np.nan_to_num(values[run] - floor), 0, None)
    f = frequency.to(u.GHz)
    centre = (np.sum(weights * f[run]) / weights.sum()) if weights.sum() > 0 else f[channels.peak]
    if len(f) > 1:
        spacing = np.median(np.abs(np.diff(f))).to(u.MHz)
    else:
        spacing = 0 * u.MHz
    width = (channels.n_channels * spacing).to(u.MHz)
    return Feature(
        channels=channels, frequency=centre.to(u.GHz), peak_frequency=f[channels.peak],
        width_frequency=width, width_velocity=(_C_KMS * width / centre).decompose() * _KMS,
        peak=peak, peak_snr=channels.peak_snr, position=tuple(int(p) for p in position), kind=kind,
        peak_error=peak_error, continuum=continuum,
    )


def check_cube(cube, *, z=None, threshold=DETECTION_SNR, false_alarms=FALSE_ALARMS, client=None, progress=None,
               cancel=None):
    """Run the delivery check on one cube.

    Parameters
    ----------
    cube : SpectralCube, VaryingResolutionSpectralCube, str or os.PathLike
        An opened cube (see `open_cube`) or the path of a FITS cube.
    z : float, optional
        Source redshift: lists the catalog lines expected in the band and
        identifies detections at that z. Without it, two or more detections
        are used to solve for z.
    threshold : float
        Smallest detection threshold for the peak and trough S/N spectra
        (default 5).
    false_alarms : float or None
        Expected number of pure-noise detections, emission and absorption
        together, allowed over the whole cube (default 0.05): the threshold
        applied is the larger of ``threshold`` and `false_alarm_threshold`
        for half of it (each sign gets half) at the cube's size and noise
        correlation (``lines.effective_threshold``). None applies
        ``threshold`` as it is.
    client : None, "default" or distributed.Client
        Where the block-wise passes run (see `cubeloupe.analysis.blocks`).
    progress : callable, optional
        ``progress(fraction)`` with a fraction from 0 to 1.
    cancel : threading.Event-like, optional
        Set to stop; `CancelledComputation` is raised.

    Returns
    -------
    CubeCheck

    Raises
    ------
    CubeFileError, CubeShapeError, SpectralAxisError
        The file cannot be read as a line cube.
    RedshiftError
        ``z`` out of range.

    Examples
    --------
    >>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
    >>> [(round(f.frequency.to_value(u.GHz), 3), f.candidates[0].name) for f in result.lines.features]  # doctest: +SKIP
    [(229.414, 'CO J=2-1')]
    """
    import os
    from dataclasses import replace

    from .cubes import open_cube
    from .noise import channel_statistics, cube_noise
    from .spectral import check_redshift

    if isinstance(cube, (str, os.PathLike)):
        cube = open_cube(cube)
    if z is not None:
        z = check_redshift(z)
    if not threshold > 0:
        raise ValueError(f"threshold must be a positive number of sigma; got {threshold!r}")
    if false_alarms is not None and not false_alarms > 0:
        raise ValueError(f"false_alarms must be a positive expected count of noise peaks, or None; "
                         f"got {false_alarms!r}")
    path = str((getattr(cube, "meta", {}) or {}).get("cubeloupe_source", {}).get("path", "<in memory>"))
    report = progress or (lambda fraction: None)
    header = header_summary(cube)
    notes = list(header.warnings)
    nchan, ny, nx = header.shape
    frequency = header.frequency

    # Pass 1: the peak and trough spectra with each pixel's continuum level removed
    # (so that continuum left in the cube is not taken for a line), each pixel's
    # continuum level and noise, and the valid fraction of every channel.
    spectra = continuum_free_peaks(cube, client=client, progress=_stage(report, 0.0, 0.3), cancel=cancel)
    blanked = 1.0 - spectra.valid_fraction
    header = replace(header, blanked_fraction=blanked)

    # The detection threshold, which holds the expected number of pure-noise peaks and dips
    # over the whole cube at false_alarms (half on each side: searching both signs doubles the trials).
    filled = spectra.valid_fraction[spectra.valid_fraction > 0]
    n_filled = int(filled.size)
    finite_pixels = ny * nx * float(filled.mean()) if n_filled else 0.0
    fwhm = _noise_fwhm(header, spectra.noise_fwhm_pixels)
    # The S/N spectra are of data less each pixel's level, the median of n_sample channels,
    # whose own scatter (1.2533 sigma / sqrt(n), the median's efficiency, common practice)
    # widens their noise by sqrt(1 + pi / (2 n)).
    widening = float(np.sqrt(1 + np.pi / (2 * max(1, spectra.n_sample))))
    effective = float(threshold)
    if false_alarms is not None:
        effective = max(effective, widening * false_alarm_threshold(n_filled, finite_pixels, fwhm,
                                                                    false_alarms=false_alarms / 2))
    noise_peaks = 2 * _expected_noise_peaks(n_filled, finite_pixels, fwhm, effective / widening)
    at_requested = 2 * _expected_noise_peaks(n_filled, finite_pixels, fwhm, threshold / widening)
    resels = finite_pixels / (fwhm[0] * fwhm[1]) if fwhm is not None and min(fwhm) > 0 else finite_pixels
    resels = min(resels, finite_pixels)

    # The noise across the field, from each pixel's channel-to-channel noise (pass 1).
    beam_pixels = (float((header.beam_major / header.pixel_size.min()).decompose())
                   if header.beam_major is not None else None)
    spatial = spatial_noise(spectra.step_noise, beam_pixels=beam_pixels)
    scale = None
    if spatial.varies:
        # Pass 2 with a noise map: every pixel's data over its own relative noise; the
        # extremes per channel, and the rms of the whole field in the units of its quietest
        # part. The map's own error e (a fraction) widens the S/N of a pixel by about
        # sqrt(1 + (t e)^2) at a level t (first-order error propagation, common practice), so
        # the map is widened by that much where it is uncertain, at the threshold applied.
        relative = spatial.relative
        scale = relative * np.sqrt(1 + (effective * spatial.relative_error) ** 2)
        stride, _ = noise_grid(header.shape)
        # As for uniform noise, pixels with significant continuum are left out of the rms when
        # they are more than a few; here each pixel's level is judged against its own noise.
        continuum_pixels = spectra.continuum_pixels(local=True)
        covered = float(continuum_pixels.mean())
        rms_pixels = ~continuum_pixels if CONTINUUM_MASK_FRACTION < covered <= 0.5 else None
        if covered > 0.5:
            notes.append(f"continuum covers {covered:.0%} of the image: the channel rms is "
                         "measured over every pixel and may be overestimated")
        extremes = noise_scaled_extremes(cube, spectra.continuum_level, relative, scale=scale,
                                         rms_pixels=rms_pixels, stride=stride, client=client,
                                         progress=_stage(report, 0.3, 0.55), cancel=cancel)
        channel_rms = extremes.rms
        finite_rms = channel_rms[np.isfinite(channel_rms)]
        if finite_rms.size == 0:
            raise SpectralRangeError("every channel of the cube is blank (NaN or masked); there is no noise "
                                     "to measure")
        total_rms = np.median(finite_rms)
        peak_values, peak_positions = extremes.peaks, extremes.positions
        trough_values, trough_positions = extremes.troughs, extremes.trough_positions
        where = "the centre of the field" if spatial.primary_beam_corrected else "the quietest part of the field"
        rms_region = (f"{where} (around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}), measured over "
                      "the whole field with each pixel's values divided by its relative noise")
        if spatial.primary_beam_corrected:
            notes.append(
                f"the noise rises towards the edge of the field to {spatial.edge_to_centre:.2g} times that of "
                f"the centre (median along the edge; up to {spatial.highest:.2g} times), as in a "
                "primary-beam-corrected image: detections are judged against each pixel's own noise, and the "
                "channel rms given is that of the centre")
        else:
            notes.append(
                f"the noise varies across the field (up to {spatial.highest:.2g} times that of the quietest "
                f"part, around pixel x={spatial.quietest[1]}, y={spatial.quietest[0]}): detections are judged "
                "against each pixel's own noise, and the channel rms given is that of the quietest part")
    else:
        # Pass 2 (noise.py): robust rms per channel. When continuum covers more
        # than CONTINUUM_MASK_FRACTION of the image it would inflate the MAD of
        # every channel, so those pixels are left out; below that the bias is at
        # most a few per cent and the faster unmasked pass is used.
        continuum_pixels = spectra.continuum_pixels()
        covered = float(continuum_pixels.mean())
        noise_cube = cube
        if CONTINUUM_MASK_FRACTION < covered <= 0.5:
            noise_cube = cube.with_mask(~continuum_pixels)
        elif covered > 0.5:
            notes.append(f"continuum covers {covered:.0%} of the image: the channel rms is "
                         "measured over every pixel and may be overestimated")
        stride, max_pixels = noise_grid(header.shape)
        if stride > 1:
            noise_cube = noise_cube[:, ::stride, :]
        stats = channel_statistics(noise_cube, max_pixels=max_pixels, client=client,
                                   progress=_stage(report, 0.3, 0.55), cancel=cancel)
        channel_rms = stats.rms
        total_rms = cube_noise(noise_cube, statistics=stats)
        peak_values, peak_positions = spectra.peaks, spectra.positions
        trough_values, trough_positions = spectra.troughs, spectra.trough_positions
        rms_region = "the whole field"
    flagged = flag_channels(channel_rms)
    if len(flagged):
        notes.append(f"{len(flagged)} channel(s) with noise that stands out (see the noise section)")
    if np.nanmax(blanked) > 0:
        n_blank = int(np.sum(blanked >= 1))
        notes.append(f"blanked (NaN) pixels: up to {np.nanmax(blanked):.1%} of a channel"
                     + (f"; {n_blank} channel(s) wholly blanked" if n_blank else ""))
    noise_summary = NoiseSummary(channel_rms=channel_rms, cube_rms=total_rms, flagged=flagged, rule=_FLAG_RULE,
                                 spatial=spatial, rms_region=rms_region, spatial_rule=_SPATIAL_RULE)

    # Detections in the peak and trough S/N spectra (emission and absorption).
    with np.errstate(invalid="ignore", divide="ignore"):
        snr = (peak_values / channel_rms).to_value(u.dimensionless_unscaled)
        trough_snr = (-trough_values / channel_rms).to_value(u.dimensionless_unscaled)
    emission = group_features(snr, threshold=effective)
    dips = group_features(trough_snr, threshold=effective)
    absorption, confirmed = _confirmed_absorption(
        cube, dips, emission, trough_positions, channel_rms, flagged, threshold=effective,
        scale=scale, relative=spatial.relative if scale is not None else None)
    if len(absorption) < len(dips):
        notes.append(
            f"{len(dips) - len(absorption)} dip(s) of the trough spectrum not kept as absorption: on the "
            "spectrum of their pixel, the channels free of features on both sides of them do not stand above "
            "them by the threshold (the pixel's median level is lifted by emission filling much of the band "
            "there, or the dip has no such channels on one side, at the end of the band)")
    tagged = sorted([(ch, "emission") for ch in emission] + [(ch, "absorption") for ch in absorption],
                    key=lambda pair: -pair[0].peak_snr)
    feature_channels = [ch for ch, _ in tagged]
    edge = _floor_edge(_boxcar3(snr), effective) if np.isfinite(snr).any() else None
    absorption_edge = _floor_edge(_boxcar3(trough_snr), effective) if np.isfinite(trough_snr).any() else None
    if effective > threshold:
        notes.append(
            f"detection threshold raised from {threshold:g} to {effective:.2f} sigma: at {threshold:g} sigma "
            f"about {at_requested:.2g} pure-noise peak(s) or dip(s) would be expected in this cube ({n_filled} "
            f"channels of about {resels:.3g} independent noise beams each, both signs searched); features whose "
            f"peak S/N lies between {threshold:g} and {effective:.2f} are not reported"
        )
    elif noise_peaks > 0.5:
        notes.append(
            f"about {noise_peaks:.1f} pure-noise peaks or dips are expected beyond {threshold:g} sigma in a cube of "
            f"this size and beam (Gaussian random-field count, both signs); treat detections of one or two "
            f"channels with care, or raise the threshold"
        )

    def measured(channels, kind):
        """The feature of ``channels`` in the emission or absorption spectrum, with its intensity and error."""
        k = channels.peak
        if kind == "absorption":
            depth, error, level = confirmed[(channels.first, channels.last)]
            return _feature(channels, frequency, -trough_values.value, kind=kind, peak=-depth, peak_error=error,
                            position=tuple(trough_positions[k]), continuum=level)
        values, positions = ((peak_values, peak_positions) if kind == "emission"
                             else (trough_values, trough_positions))
        y, x = (int(i) for i in positions[k])
        # the S/N spectra were divided by scale: back to the pixel's own intensity and noise
        at_scale = 1.0 if scale is None else float(scale[y, x])
        at_relative = 1.0 if scale is None else float(spatial.relative[y, x])
        return _feature(channels, frequency, values.value if kind == "emission" else -trough_values.value,
                        kind=kind, peak=values[k] * at_scale, peak_error=channel_rms[k] * at_relative * widening,
                        position=(y, x), continuum=spectra.continuum_level[y, x])

    features, solved_z, expected = (), None, ()
    if frequency is not None and feature_channels:
        built = [measured(ch, kind) for ch, kind in tagged]
        try:
            candidates, solved_z = _identify([f.frequency for f in built], [f.width_velocity for f in built], z,
                                             header.channel_width_velocity)
        except CubeloupeError as exc:
            notes.append(f"line identification failed: {exc}")
            candidates = [()] * len(built)
        features = tuple(replace(f, candidates=c) for f, c in zip(built, candidates))
    elif feature_channels:
        notes.append("detections cannot be placed in frequency (no rest frequency for the velocity axis)")
    if z is not None and frequency is not None:
        from .catalog import lines_in_band

        names_found = {c.name for f in features for c in f.candidates}
        band = lines_in_band(header.band[0], header.band[1], z)
        expected = tuple(
            ExpectedLine(str(row["name"]), u.Quantity(row["rest_frequency"], u.GHz),
                         u.Quantity(row["observed_frequency"], u.GHz), str(row["name"]) in names_found)
            for row in band
        )
    if solved_z is not None:
        notes.append(f"redshift solved from {len(features)} detections: z = {solved_z:.5f} (tentative)")
    lines = LinesSummary(
        threshold=float(threshold), peak_spectrum=peak_values, peak_snr=snr, edge_level=edge,
        features=features if features else tuple(),
        z=z, expected=expected, solved_z=solved_z, expected_noise_peaks=noise_peaks,
        rule=_lines_rule(threshold, effective, false_alarms, per_pixel=scale is not None),
        effective_threshold=effective, false_alarms=false_alarms, expected_noise_peaks_at_threshold=at_requested,
        noise_fwhm_pixels=fwhm, resolution_elements=float(resels),
        velocity_reference=_velocity_reference(header.spectral_frame),
        trough_spectrum=trough_values, trough_snr=trough_snr, absorption_edge_level=absorption_edge,
    )
    report(0.62)

    # Leftover continuum over the line-free channels.
    free = line_free_channels(nchan, feature_channels, flagged)
    continuum = None
    if free.sum() >= max(3, nchan // 10):
        # The statistics of noise.leftover_continuum, from the sums of pass 1.
        mean, error, significance = spectra.line_free_mean(cube, free, client=client,
                                                           progress=_stage(report, 0.62, 0.8), cancel=cancel)
        if np.isfinite(significance).any():
            where = np.unravel_index(np.nanargmax(np.abs(significance)), significance.shape)
            peak_sig = float(significance[where])
        else:
            where, peak_sig = (0, 0), float("nan")
        n_sig = int(np.sum(np.abs(np.nan_to_num(significance)) >= 5))
        continuum = ContinuumSummary(
            mean=mean, significance=significance, noise=error[where], line_free=free,
            n_free=int(free.sum()), peak=mean[where], peak_significance=peak_sig,
            peak_position=tuple(int(i) for i in where), n_significant=n_sig, rule=_CONTINUUM_RULE,
        )
        if abs(peak_sig) >= 5:
            notes.append(
                f"leftover continuum: {abs(peak_sig):.1f} sigma at pixel x={where[1]}, y={where[0]} "
                f"({n_sig} pixel(s) at 5 sigma or more); subtract it before measuring lines"
            )
        if spatial.varies:
            # A check on the noise map, now that the line channels are known: the same map from
            # each pixel's standard deviation over the line-free channels (from the same sums).
            line_free_field = spatial_noise(error * np.sqrt(int(free.sum())), beam_pixels=beam_pixels)
            noise_summary = replace(noise_summary, varies_in_line_free_channels=line_free_field.varies)
            if not line_free_field.varies:
                notes.append(
                    "the noise map from the line-free channels alone is flat: the variation found at first "
                    "may come from line emission spread over the field, where detections are then judged "
                    "against too high a noise; check the noise map")
    else:
        notes.append(f"only {int(free.sum())} line-free channel(s): leftover continuum not measured")
    report(0.8)

    # Moment 0 of the strongest feature and the spectrum at its peak.
    strongest = None
    if features:
        strongest = _strongest(cube, features[0], frequency, free, client=client,
                               progress=_stage(report, 0.8, 0.98), cancel=cancel, notes=notes)
    report(1.0)
    return CubeCheck(path=path, header=header, noise=noise_summary, continuum=continuum, lines=lines,
                     strongest=strongest, warnings=tuple(dict.fromkeys(notes)))


# An absorption is measured against the channels free of features on both sides of it at its
# pixel: at least MIN_SIDE_CHANNELS on each side, the nearest SIDE_WIDTHS dip widths (and at
# least MIN_LEVEL_CHANNELS) of them on each side; the median of 5 values scatters by 0.56
# sigma (1.2533 sigma / sqrt(n), common practice), which the S/N takes into account.
MIN_SIDE_CHANNELS = 5
MIN_LEVEL_CHANNELS = 10
SIDE_WIDTHS = 2


def _confirmed_absorption(cube, dips, emission, positions, channel_rms, flagged, *, threshold, scale=None,
                          relative=None):
    """The dips of the trough S/N spectrum that stand below the continuum on both sides of them at their pixel.

    A dip of the trough spectrum is measured against each pixel's median
    over a channel subsample. Where emission fills half the band or more at
    a pixel, that median sits in the emission and the line-free channels
    there show as broad "dips", often at the ends of the band. So each dip
    is measured again on the spectrum of its pixel, against a straight line
    through the medians of the nearest channels free of every feature
    (emission and dips alike, padded as for the line-free channels, not
    flagged) on each side of it (see ``MIN_SIDE_CHANNELS``): a local
    continuum, which follows its slope. It is kept when it has such channels
    on both sides and its depth there reaches ``threshold`` times the
    pixel's noise, widened by the scatter of that continuum. This only
    removes dips, so the false-alarm control of the search holds.

    Returns
    -------
    kept : list of FeatureChannels
        ``peak_snr`` is the S/N measured on the pixel's spectrum.
    measured : dict
        ``(first, last) -> (depth, error, level)`` Quantities for each kept dip.
    """
    from dataclasses import replace

    n_chan = cube.shape[0]
    free = line_free_channels(n_chan, [*emission, *dips], flagged)
    kept, measured = [], {}
    for dip in dips:
        y, x = (int(i) for i in positions[dip.peak])
        spectrum = cube.filled_data[:, y, x]
        around = np.flatnonzero(free & np.isfinite(spectrum.value))
        width = max(MIN_LEVEL_CHANNELS, SIDE_WIDTHS * dip.n_channels)
        sides = [around[around < dip.first][-width:], around[around > dip.last][:width]]
        if min(len(side) for side in sides) < MIN_SIDE_CHANNELS:
            continue
        levels = u.Quantity([np.median(spectrum[side]) for side in sides])
        centres = [float(np.mean(side)) for side in sides]
        # the continuum at the dip's peak channel, interpolated between the two sides
        weight = (dip.peak - centres[0]) / (centres[1] - centres[0])
        level = (1 - weight) * levels[0] + weight * levels[1]
        # the median of n values scatters by 1.2533 sigma / sqrt(n) (common practice)
        spread = np.hypot((1 - weight) * 1.2533 / np.sqrt(len(sides[0])), weight * 1.2533 / np.sqrt(len(sides[1])))
        depth = level - spectrum[dip.peak]
        noise = channel_rms[dip.peak] * np.sqrt(1 + spread**2)
        snr = float((depth / (noise * (1.0 if scale is None else scale[y, x]))).decompose())
        if not snr >= threshold:
            continue
        kept.append(replace(dip, peak_snr=snr))
        measured[(dip.first, dip.last)] = (depth, noise * (1.0 if relative is None else relative[y, x]), level)
    return kept, measured


def _strongest(cube, feature, frequency, free, *, client, progress, cancel, notes):
    """Moment-0 map over the feature and the spectrum at its peak.

    Each pixel's linear baseline is fitted on the line-free channels near the
    feature (``BASELINE_SPAN`` feature widths, at least
    ``MIN_BASELINE_CHANNELS`` channels, on each side).
    """
    from .moments import moment_maps

    ch = feature.channels
    n = len(frequency)
    first, last = max(0, ch.first - 1), min(n - 1, ch.last + 1)
    f = frequency.to(u.GHz)
    # A quarter channel of margin so that the inclusive range test of
    # channel_mask picks exactly these channel centres.
    half = np.abs(f[min(first + 1, n - 1)] - f[first]) / 2 if n > 1 else 0 * u.GHz
    lo, hi = sorted([f[first].value, f[last].value])
    window = u.Quantity([lo - 0.5 * half.value, hi + 0.5 * half.value], u.GHz)
    usable = free.copy()
    usable[first:last + 1] = False
    # A local baseline: the line-free channels within BASELINE_SPAN feature widths (at least
    # MIN_BASELINE_CHANNELS channels) on each side, as a baseline around a line is usually fitted
    # (common practice); it also spares reading the whole band again.
    span = max(MIN_BASELINE_CHANNELS, BASELINE_SPAN * ch.n_channels)
    local = np.zeros(n, dtype=bool)
    local[max(0, first - span):last + span + 1] = True
    if (usable & local).sum() >= 3:
        usable &= local
    line_free = _channel_ranges(usable, f)
    order = 1 if usable.sum() >= 3 else None
    if line_free is not None:
        line_free = u.Quantity([(a - 0.5 * half.value, b + 0.5 * half.value) for a, b in line_free.value], u.GHz)
    try:
        maps = moment_maps(cube, window, line_free=line_free if order is not None else None, order=order or 1,
                           rest_frequency=feature.frequency, z=0.0, client=client, progress=progress,
                           cancel=cancel)
    except CubeloupeError as exc:
        notes.append(f"moment-0 map of the strongest feature not made: {exc}")
        return None
    m0 = maps.m0
    values = np.asarray(m0.value, dtype=float)
    if not np.isfinite(values).any():
        notes.append("the moment-0 map of the strongest feature is blank")
        return None
    pick = np.nanargmin if feature.kind == "absorption" else np.nanargmax
    position = np.unravel_index(pick(values), values.shape)
    spectrum = cube[:, int(position[0]), int(position[1])]
    return StrongestFeature(window=window, moment0=m0, position=tuple(int(p) for p in position), spectrum=spectrum)
