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
   channel subsample) and noise; per channel, the peak of the data minus
   that level, and the valid fraction; per pixel, sums over all channels for
   the line-free mean.
2. `noise.channel_statistics` over a regular grid of pixels (without those
   with significant continuum when it is extended): the robust rms per
   channel.
3. The channels excluded from the line-free set are read again to take them
   out of the sums of pass 1; then `moments.moment_maps` over the strongest
   detection.

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
    is a detection when its highest channel reaches the threshold (5 by
    default). See `group_features`.
Line-free channels
    Every channel except those of a detection padded on each side by a
    quarter of the detection's number of channels (at least
    ``MIN_PAD_CHANNELS``), and except flagged channels.
Leftover continuum
    The mean over line-free channels in each pixel; its significance is that
    mean over its standard error, the pixel's standard deviation over those
    channels divided by ``sqrt(n_free)`` (independent channels; the same
    statistics as `noise.leftover_continuum`, from the sums of pass 1).
Expected noise peaks
    A large cube has pure-noise peaks above 5 sigma: their expected number
    (Gaussian random fields, see `LinesSummary`) is reported, with a warning
    when it exceeds 0.5.

Examples
--------
>>> from cubeloupe.analysis import demo_path
>>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
>>> result.noise.cube_rms  # doctest: +SKIP
<Quantity 0.0015... Jy / beam>
"""

from dataclasses import dataclass, field

import astropy.units as u
import numpy as np
from astropy import constants
from astropy.wcs.utils import proj_plane_pixel_scales

from .errors import BeamError, CubeloupeError, SpectralAxisError

__all__ = [
    "FLAG_SIGMAS",
    "DETECTION_SNR",
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
]

FLAG_SIGMAS = 5.0
DETECTION_SNR = 5.0
MIN_PAD_CHANNELS = 2
# Below this many pixels across the beam's minor axis FWHM a cube is
# undersampled: 3 to 5 pixels per beam is the usual imaging choice (common practice).
MIN_PIXELS_PER_BEAM = 3.0
# Scale from the median absolute deviation to the standard deviation of a
# Gaussian, 1 / Phi^-1(3/4) (common practice).
MAD_TO_SIGMA = 1.482602218505602

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
        cube's unit; NaN for wholly blanked channels.
    cube_rms : Quantity
        Robust rms of the cube: the median of the channel rms values
        (`noise.cube_noise`).
    flagged : ndarray of int
        Channels that stand out (see `flag_channels`).
    rule : str
        The flagging rule in words.
    """

    channel_rms: u.Quantity
    cube_rms: u.Quantity
    flagged: np.ndarray
    rule: str


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
    """One detected feature of the peak S/N spectrum.

    Attributes
    ----------
    channels : FeatureChannels
    frequency : Quantity [GHz]
        Centroid of the peak spectrum over the feature's channels.
    peak_frequency : Quantity [GHz]
        Frequency of the channel of highest S/N.
    width_frequency, width_velocity : Quantity [MHz], [km/s]
        Full extent of the feature's channels (velocity: ``c dnu / nu``).
    peak : Quantity
        Peak intensity, in the cube's unit.
    peak_snr : float
    position : tuple of int
        ``(y, x)`` of the brightest pixel in the peak channel.
    candidates : tuple of Candidate
        Best first.
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
        Detection threshold in channel rms.
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
        Number of pure-noise peaks expected above the threshold in the whole
        cube, for Gaussian noise correlated over the beam (the Euler
        characteristic of a Gaussian random field, Worsley et al. 1996).
    rule : str
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


@dataclass(frozen=True)
class StrongestFeature:
    """Moment-0 map of the strongest feature and the spectrum at its peak.

    Attributes
    ----------
    window : Quantity [GHz], shape (2,)
        Frequency window of the moment map.
    moment0 : spectral_cube Projection
    position : tuple of int
        ``(y, x)`` of the moment-0 peak.
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
    """

    peaks: u.Quantity
    positions: np.ndarray
    continuum_level: u.Quantity
    pixel_noise: u.Quantity
    valid_fraction: np.ndarray
    n_sample: int
    pixel_sums: np.ndarray = field(default=None, repr=False)  # count, sum, sum of squares about the level

    def line_free_mean(self, cube, line_free, *, client=None, progress=None, cancel=None):
        """Mean over line-free channels per pixel, its standard error and significance.

        The same statistics as `noise.leftover_continuum` (mean over the
        pixel's valid line-free channels; standard error ``std / sqrt(n)``
        with ddof=1), obtained from the per-pixel sums over every channel
        made by this pass, less the sums over the excluded channels, which
        are read again (usually a small part of the cube). This saves a
        whole pass over the cube.

        Returns
        -------
        mean, error : Quantity, shape (ny, nx)
        significance : ndarray, shape (ny, nx)
        """
        from .blocks import plane_blocks, run_blocks

        unit = self.peaks.unit
        count, sum1, sum2 = (np.array(a) for a in self.pixel_sums)
        excluded = ~np.asarray(line_free, dtype=bool)
        if excluded.any():

            def consume(block, result):
                nonlocal count, sum1, sum2
                count -= result[0].reshape(count.shape)
                sum1 -= result[1].reshape(count.shape)
                sum2 -= result[2].reshape(count.shape)

            level = np.nan_to_num(self.continuum_level.value)
            run_blocks(cube, _PlaneSums(level), plane_blocks(cube.shape, channels=excluded, itemsize=4), consume,
                       dtype=np.float32, client=client, progress=progress, cancel=cancel)
        with np.errstate(invalid="ignore", divide="ignore"):
            # the sums are about each pixel's continuum level, near the mean
            offset = sum1 / count
            variance = np.clip(sum2 - sum1 * offset, 0, None) / (count - 1)
            mean = np.nan_to_num(self.continuum_level.value) + offset
            error = np.sqrt(variance / count)
            significance = mean / error
        mean[count < 1] = np.nan
        error[count < 2] = np.nan
        significance[count < 2] = np.nan
        return u.Quantity(mean, unit), u.Quantity(error, unit), significance

    def continuum_pixels(self, sigmas=3.0):
        """Pixels whose continuum level exceeds ``sigmas`` times its own noise.

        The median of ``n`` Gaussian values scatters by ``1.2533 sigma /
        sqrt(n)`` (the median's asymptotic efficiency, common practice); the
        noise is the median over pixels of ``pixel_noise``.
        """
        noise = np.nanmedian(self.pixel_noise.value) * 1.2533 / np.sqrt(max(1, self.n_sample))
        with np.errstate(invalid="ignore"):
            return np.abs(np.nan_to_num(self.continuum_level.value)) > sigmas * noise


@dataclass(frozen=True)
class _ContinuumFreePeaks:
    """Block kernel: per-pixel median and MAD over a channel subsample; per-channel peak of data minus median."""

    step: int

    def __call__(self, data):
        import warnings

        n_chan = data.shape[0]
        flat = data.reshape(n_chan, -1)
        # pixels along the rows so that each pixel's channels are contiguous for the partition
        sample = np.ascontiguousarray(flat[::self.step].T)
        if np.isfinite(sample).all():
            middle = sample.shape[1] // 2
            level = np.partition(sample, middle, axis=1)[:, middle]
            spread = np.partition(np.abs(sample - level[:, None]), middle, axis=1)[:, middle]
        else:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN pixels: no estimate
                level = np.nanmedian(sample, axis=1)
                spread = np.nanmedian(np.abs(sample - level[:, None]), axis=1)
        # The block is this kernel's own copy (see blocks.run_blocks): subtract in place.
        residual = np.subtract(flat, np.nan_to_num(level), out=flat)
        # Sums about the pixel's own level are small numbers: float32 sums lose
        # nothing that matters, and the line-free mean's variance needs no
        # difference of large sums.
        sums = _pixel_sums(residual)
        where = residual.argmax(axis=1)
        peak = residual[np.arange(n_chan), where]
        valid = np.full(n_chan, flat.shape[1])
        # argmax stops at the first NaN, so only channels whose peak came out NaN hold
        # blank pixels; just those are searched again without them.
        blank_rows = np.flatnonzero(np.isnan(peak))
        for k in blank_rows:
            finite = np.isfinite(residual[k])
            valid[k] = int(finite.sum())
            if valid[k]:
                where[k] = np.flatnonzero(finite)[np.argmax(residual[k][finite])]
                peak[k] = residual[k, where[k]]
            else:
                peak[k] = -np.inf
        return {"peak": peak, "where": where, "level": level, "noise": MAD_TO_SIGMA * spread, "valid": valid,
                **sums}


def _pixel_sums(flat):
    """Per-pixel count, sum and sum of squares over the channels (rows) of ``flat``, blanks left out."""
    sum1 = flat.sum(axis=0)
    if np.isfinite(sum1).all():
        count = np.full(flat.shape[1], flat.shape[0], dtype=np.float64)
        sum2 = np.einsum("ij,ij->j", flat, flat)
    else:
        finite = np.isfinite(flat)
        clean = np.where(finite, flat, np.float32(0))
        count = finite.sum(axis=0, dtype=np.float64)
        sum1 = clean.sum(axis=0)
        sum2 = np.einsum("ij,ij->j", clean, clean)
    return {"count": count, "sum1": sum1.astype(np.float64), "sum2": sum2.astype(np.float64)}


@dataclass(frozen=True, eq=False)
class _PlaneSums:
    """Block kernel over whole channel images: per-pixel count, sum and sum of squares about ``level``."""

    level: np.ndarray

    def __call__(self, data):
        residual = data.reshape(data.shape[0], -1) - self.level.ravel().astype(data.dtype)
        sums = _pixel_sums(residual)
        return np.stack([sums["count"], sums["sum1"], sums["sum2"]])


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

    n_chan, ny, nx = cube.shape
    step = max(1, -(-n_chan // CONTINUUM_SAMPLE_CHANNELS))
    best = np.full(n_chan, -np.inf)
    positions = np.full((n_chan, 2), -1, dtype=int)
    level = np.full((ny, nx), np.nan)
    noise = np.full((ny, nx), np.nan)
    valid = np.zeros(n_chan)
    sums = np.zeros((3, ny, nx))

    def consume(block, result):
        rows, columns = block.rows, block.columns
        width = columns.stop - columns.start
        shape = (rows.stop - rows.start, width)
        for i, name in enumerate(("count", "sum1", "sum2")):
            sums[i, rows, columns] = result[name].reshape(shape)
        level[rows, columns] = result["level"].reshape(shape)
        noise[rows, columns] = result["noise"].reshape(shape)
        valid[:] += result["valid"]
        better = result["peak"] > best
        if better.any():
            where = result["where"][better]
            best[better] = result["peak"][better]
            positions[better, 0] = rows.start + where // width
            positions[better, 1] = columns.start + where % width

    blocks = spectra_blocks(cube.shape, itemsize=4)
    run_blocks(cube, _ContinuumFreePeaks(step), blocks, consume, dtype=np.float32, client=client,
               progress=progress, cancel=cancel)
    best[~np.isfinite(best)] = np.nan
    unit = u.Unit(cube.unit)
    return ContinuumFreePeaks(
        peaks=u.Quantity(best, unit), positions=positions, continuum_level=u.Quantity(level, unit),
        pixel_noise=u.Quantity(noise, unit), valid_fraction=valid / float(ny * nx),
        n_sample=len(range(0, n_chan, step)), pixel_sums=sums,
    )


# --------------------------------------------------------------------------- the check


def _stage(progress, start, stop):
    """A progress callback for one stage mapping 0..1 onto start..stop overall."""
    if progress is None:
        return None
    return lambda fraction: progress(start + (stop - start) * min(max(float(fraction), 0.0), 1.0))


def _expected_noise_peaks(n_channels, n_pixels, beam_pixels, threshold):
    """Channels of pure Gaussian noise whose peak would reach ``threshold``.

    For noise correlated over a Gaussian beam of FWHM ``(a, b)`` pixels, the
    expected number of peaks above ``u`` in an image of ``n_pixels`` is its
    Euler characteristic, ``R (4 ln 2) (2 pi)^(-3/2) u exp(-u^2 / 2) + P(X > u)``
    with ``R = n_pixels / (a b)`` resolution elements (Worsley et al. 1996,
    Human Brain Mapping 4, 58; Adler 1981, The Geometry of Random Fields); the
    edge term is left out. Without a beam (or one under a pixel) the pixels
    are taken as independent: ``n_pixels P(X > u)``. Channels are independent.
    """
    from scipy.stats import norm

    tail = norm.sf(threshold)
    if beam_pixels is None or min(beam_pixels) < 1:
        return float(n_channels * n_pixels * tail)
    resels = n_pixels / (beam_pixels[0] * beam_pixels[1])
    density = 4 * np.log(2) * (2 * np.pi) ** -1.5 * threshold * np.exp(-0.5 * threshold**2)
    return float(n_channels * (resels * density + tail))


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


def _lines_rule(threshold):
    return (
        f"Detections: peak-intensity spectrum (maximum over pixels per channel of the data minus each "
        f"pixel's median over channels, i.e. without continuum) over the channel's "
        f"robust rms; runs of adjacent channels whose 3-channel smoothed S/N is above the edge level "
        f"(median + 3 robust scatters of the channels below the threshold) or whose own S/N reaches "
        f"the threshold, gaps of one channel bridged, kept when the highest channel reaches {threshold:g}. Identifications: catalog lines within half the feature "
        f"width + {IDENTIFY_TOLERANCE.to_value(_KMS):g} km/s at z."
    )


def _feature(cube, channels, frequency, peak_spectrum, peak_position, candidates=()):
    """Measure one feature's frequency, width and peak from the peak spectrum."""
    run = slice(channels.first, channels.last + 1)
    values = peak_spectrum.value
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
        peak=peak_spectrum[channels.peak], peak_snr=channels.peak_snr,
        position=tuple(int(p) for p in peak_position), candidates=tuple(candidates),
    )


def check_cube(cube, *, z=None, threshold=DETECTION_SNR, client=None, progress=None, cancel=None):
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
        Detection threshold for the peak S/N spectrum (default 5).
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
    path = str((getattr(cube, "meta", {}) or {}).get("cubeloupe_source", {}).get("path", "<in memory>"))
    report = progress or (lambda fraction: None)
    header = header_summary(cube)
    notes = list(header.warnings)
    nchan, ny, nx = header.shape
    frequency = header.frequency

    # Pass 1: the peak spectrum with each pixel's continuum level removed (so
    # that continuum left in the cube is not taken for a line), each pixel's
    # continuum level and noise, and the valid fraction of every channel.
    spectra = continuum_free_peaks(cube, client=client, progress=_stage(report, 0.0, 0.3), cancel=cancel)
    blanked = 1.0 - spectra.valid_fraction
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
    # A regular grid of pixels (every k-th along x and y) is all the robust rms
    # needs; keeping 4 x NOISE_MAX_PIXELS of them spares reading and sorting the rest.
    stride = max(1, int(np.sqrt(ny * nx / (4 * NOISE_MAX_PIXELS))))
    if stride > 1:
        noise_cube = noise_cube[:, ::stride, ::stride]
    stats = channel_statistics(noise_cube, max_pixels=NOISE_MAX_PIXELS, client=client,
                               progress=_stage(report, 0.3, 0.55), cancel=cancel)
    channel_rms = stats.rms
    total_rms = cube_noise(noise_cube, statistics=stats)
    peak_values, peak_positions = spectra.peaks, spectra.positions
    header = replace(header, blanked_fraction=blanked)
    flagged = flag_channels(channel_rms)
    if len(flagged):
        notes.append(f"{len(flagged)} channel(s) with noise that stands out (see the noise section)")
    if np.nanmax(blanked) > 0:
        n_blank = int(np.sum(blanked >= 1))
        notes.append(f"blanked (NaN) pixels: up to {np.nanmax(blanked):.1%} of a channel"
                     + (f"; {n_blank} channel(s) wholly blanked" if n_blank else ""))
    noise_summary = NoiseSummary(channel_rms=channel_rms, cube_rms=total_rms, flagged=flagged, rule=_FLAG_RULE)

    # Detections in the peak S/N spectrum.
    with np.errstate(invalid="ignore", divide="ignore"):
        snr = (peak_values / channel_rms).to_value(u.dimensionless_unscaled)
    feature_channels = group_features(snr, threshold=threshold)
    edge = _floor_edge(_boxcar3(snr), threshold) if np.isfinite(snr).any() else None
    finite_pixels = ny * nx * (1.0 - float(np.nanmean(blanked)))
    beam_pixels = None
    if header.beam_major is not None:
        beam_pixels = tuple(float((axis / header.pixel_size.min()).decompose())
                            for axis in (header.beam_major, header.beam_minor))
    noise_peaks = _expected_noise_peaks(nchan, finite_pixels, beam_pixels, threshold)
    if noise_peaks > 0.5:
        notes.append(
            f"about {noise_peaks:.1f} pure-noise peaks are expected above {threshold:g} sigma in a cube of "
            f"this size and beam (Gaussian random-field count); treat detections of one or two channels "
            f"with care, or raise the threshold"
        )

    features, solved_z, expected = (), None, ()
    if frequency is not None and feature_channels:
        built = [_feature(cube, ch, frequency, peak_values, peak_positions[ch.peak]) for ch in feature_channels]
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
        z=z, expected=expected, solved_z=solved_z, expected_noise_peaks=noise_peaks, rule=_lines_rule(threshold),
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


def _strongest(cube, feature, frequency, free, *, client, progress, cancel, notes):
    """Moment-0 map over the feature (baseline on the line-free channels) and the spectrum at its peak."""
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
    position = np.unravel_index(np.nanargmax(values), values.shape)
    spectrum = cube[:, int(position[0]), int(position[1])]
    return StrongestFeature(window=window, moment0=m0, position=tuple(int(p) for p in position), spectrum=spectrum)
