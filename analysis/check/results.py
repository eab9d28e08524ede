"""What the delivery check found: frozen result classes, one per section of the report.

Every other module of the check fills one of these; the report writers read
them. Nothing here computes.

Examples
--------
>>> channels = FeatureChannels(first=10, last=14, peak=12, peak_snr=8.0, edge_level=2.5)
>>> channels.n_channels
5
"""

from dataclasses import dataclass

import astropy.units as u
import numpy as np

__all__ = [
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
]


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
    velocity : Quantity [km/s], shape (n_channels,), or None
        Channel centres as velocities: the cube's own velocity axis, or for
        a frequency axis radio velocities from the header's rest frequency;
        None for a frequency axis without one.
    velocity_convention : str or None
        The convention of ``velocity`` (``'radio'``, ``'optical'`` or
        ``'relativistic'``), as the header's spectral axis type says.
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
    velocity: object = None
    velocity_convention: object = None



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
    plain_rms : Quantity, shape (n_channels,) or None
        1.4826 x MAD over the channel's pixels, before emission was allowed
        for (`grid_noise.channel_rms_from_grid`).
    from_differences : ndarray of bool, shape (n_channels,) or None
        Channels whose ``channel_rms`` comes from the differences with their
        neighbours, because emission lifts their plain rms.
    channel_correlation : float or None
        Correlation of the noise of neighbouring channels.
    """

    channel_rms: u.Quantity
    cube_rms: u.Quantity
    flagged: np.ndarray
    rule: str
    spatial: object = None
    rms_region: str = "the whole field"
    spatial_rule: str = ""
    varies_in_line_free_channels: object = None
    plain_rms: object = None
    from_differences: object = None
    channel_correlation: object = None

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
    frequency : Quantity [GHz] or None
        Centroid of the peak (or trough) spectrum over the feature's
        channels; None for a velocity axis without a rest frequency.
    peak_frequency : Quantity [GHz] or None
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
        ``'emission'``, ``'absorption'`` (a dip against continuum) or
        ``'negative'`` (a dip where there is no continuum to absorb).
    peak_error : Quantity or None
        Standard error of ``peak``: the channel's rms at that pixel (times
        the relative noise there when the noise varies across the field),
        widened by the scatter of the continuum level.
    continuum : Quantity or None
        The continuum level at ``position``: for emission the pixel's median
        over the channel subsample, for absorption the local continuum on
        both sides of it; an absorption's depth over it is the fraction
        absorbed.
    velocity, peak_velocity : Quantity [km/s] or None
        Centroid and peak-channel velocity on the cube's velocity axis (its
        own convention), or radio velocities from the header's rest
        frequency for a frequency axis; None without either.
    likely_cause : str or None
        For a negative feature, its likely cause in words.
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
    velocity: object = None
    peak_velocity: object = None
    likely_cause: object = None

    @property
    def depth(self):
        """Depth of a dip below the continuum level (``-peak``); None for emission."""
        return None if self.kind == "emission" else -self.peak


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
    local_z : float or None
        The redshift of the velocity axis: the header's rest frequency (a
        catalog line) moved onto the strongest detection; identifications
        are then made at it first.
    redshift_note : str or None
        Why no redshift was solved from two or more detections.
    negative_features : tuple of Feature
        Dips below zero where there is no continuum to absorb (``kind``
        ``'negative'``, with ``likely_cause``); not in ``features``.
    redshift_options : tuple of (float, tuple of str)
        When several redshifts fit the detections equally well (none
        solved): each z and the lines it gives them, lowest-lying first.
    field_emission_channels : tuple of (int, int)
        First and last channels of the features of the field's mean
        spectrum (emission spread over the field; `detections.field_emission`),
        kept out of the line-free channels.

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
    local_z: object = None
    redshift_note: object = None
    negative_features: tuple = ()
    redshift_options: tuple = ()
    field_emission_channels: tuple = ()


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

