"""Lines of the check: detections in the peak and trough S/N spectra, measured, confirmed and identified.

`find_lines` takes the extremes of each channel (pass 1, or pass 2 with a
noise varying across the field) over the channel rms, groups the emission
and absorption features (`detections.group_features`), keeps the dips that
stand below the continuum at their pixel (`absorption.confirmed_absorption`),
measures each feature at its pixel, and identifies the features with catalog
lines (`identification`).

Examples
--------
>>> from cubeloupe.analysis import check_cube, demo_path
>>> result = check_cube(demo_path("disk"), z=0.0049)  # doctest: +SKIP
>>> result.lines.features[0].candidates[0].name  # doctest: +SKIP
'CO J=2-1'
"""

from dataclasses import dataclass, replace

import astropy.units as u
import numpy as np

from ..errors import CubeloupeError
from .absorption import confirmed_absorption, negative_feature_cause
from .detections import edge_level, field_emission, group_features, measure_feature
from .identification import Identification, expected_lines, identify_features
from .results import LinesSummary
from .rules import lines_rule, velocity_reference_text

__all__ = ["FoundLines", "find_lines"]


@dataclass(frozen=True)
class FoundLines:
    """What `find_lines` found.

    Attributes
    ----------
    summary : LinesSummary
    channels : list of FeatureChannels
        Every feature's channels, emission and absorption, strongest first
        (kept out of the line-free channels).
    notes : list of str
        Warnings for the report.
    """

    summary: LinesSummary
    channels: list
    notes: list


def find_lines(cube, header, spectra, noise, limit, z):
    """Detect, measure and identify the lines of a cube.

    Parameters
    ----------
    cube : SpectralCube
    header : HeaderSummary
    spectra : ContinuumFreePeaks
        Pass 1 (each pixel's continuum level).
    noise : ChannelNoise
        Pass 2: channel rms and the extremes of each channel in its units.
    limit : DetectionThreshold
    z : float or None

    Returns
    -------
    FoundLines
    """
    notes = []
    channel_rms, frequency, threshold = noise.summary.channel_rms, header.frequency, limit.applied
    with np.errstate(invalid="ignore", divide="ignore"):
        snr = (noise.peaks / channel_rms).to_value(u.dimensionless_unscaled)
        trough_snr = (-noise.troughs / channel_rms).to_value(u.dimensionless_unscaled)
    emission = group_features(snr, threshold=threshold)
    dips = group_features(trough_snr, threshold=threshold)
    relative = noise.summary.spatial.relative if noise.scale is not None else None
    confirmed = confirmed_absorption(cube, dips, emission, noise.trough_positions, channel_rms, noise.summary.flagged,
                                     threshold=threshold, scale=noise.scale, relative=relative)
    n_dropped = len(dips) - len(confirmed.absorption) - len(confirmed.negative)
    if n_dropped:
        notes.append(
            f"{n_dropped} dip(s) of the trough spectrum not kept: on the spectrum of their pixel, the channels "
            "free of features on both sides of them do not stand above them by the threshold (the pixel's median "
            "level is lifted by emission filling much of the band there, or the dip has no such channels on one "
            "side, at the end of the band)")
    tagged = sorted([(ch, "emission") for ch in emission] + [(ch, "absorption") for ch in confirmed.absorption],
                    key=lambda pair: -pair[0].peak_snr)
    notes.extend(_threshold_notes(limit))

    def measured(channels, kind):
        """The feature of ``channels`` in the emission or trough spectrum, with its intensity and error."""
        k = channels.peak
        if kind != "emission":
            depth, error, level = confirmed.measured[(channels.first, channels.last)]
            return measure_feature(channels, frequency, -noise.troughs.value, kind=kind, peak=-depth,
                                   peak_error=error, position=tuple(noise.trough_positions[k]), continuum=level,
                                   velocity=header.velocity, likely_cause=cause if kind == "negative" else None)
        y, x = (int(i) for i in noise.peak_positions[k])
        # the S/N spectra were divided by scale: back to the pixel's own intensity and noise
        at_scale = 1.0 if noise.scale is None else float(noise.scale[y, x])
        at_relative = 1.0 if relative is None else float(relative[y, x])
        return measure_feature(channels, frequency, noise.peaks.value, kind=kind, peak=noise.peaks[k] * at_scale,
                               peak_error=channel_rms[k] * at_relative * limit.widening, position=(y, x),
                               continuum=spectra.continuum_level[y, x], velocity=header.velocity)

    cause = negative_feature_cause(header.unit)
    negative = tuple(measured(ch, "negative") for ch in sorted(confirmed.negative, key=lambda c: -c.peak_snr))
    if negative:
        notes.append(f"{len(negative)} negative feature(s) where there is no continuum to absorb (not absorption): "
                     f"most likely {cause}; see the lines section")
    features, solved_z, expected, local_z, redshift_note, redshift_options = (), None, (), None, None, ()
    built = [measured(ch, kind) for ch, kind in tagged]
    if frequency is not None and built:
        try:
            found = identify_features([f.frequency for f in built], [f.width_velocity for f in built], z,
                                      header.channel_width_velocity, rest_frequency=header.rest_frequency)
        except CubeloupeError as exc:
            notes.append(f"line identification failed: {exc}")
            found = Identification([()] * len(built))
        features = tuple(replace(f, candidates=c) for f, c in zip(built, found.candidates))
        solved_z, local_z, redshift_note = found.solved_z, found.local_z, found.redshift_note
        redshift_options = found.redshift_options
        if redshift_note is not None:
            notes.append(redshift_note)
    elif built:
        features = tuple(built)
        notes.append("detections are given in velocity only: the spectral axis is a velocity and the header has "
                     "no rest frequency, so they cannot be placed in frequency or identified (give the rest "
                     "frequency to identify them)")
    if z is not None and frequency is not None:
        expected = expected_lines(header.band, z, features)
    if solved_z is not None:
        notes.append(f"redshift solved from {len(features)} detections: z = {solved_z:.5f} (tentative)")
    summary = LinesSummary(
        threshold=limit.asked, peak_spectrum=noise.peaks, peak_snr=snr, edge_level=edge_level(snr, threshold),
        features=features, z=z, expected=expected, solved_z=solved_z, expected_noise_peaks=limit.noise_peaks,
        rule=lines_rule(limit.asked, threshold, limit.false_alarms, per_pixel=noise.scale is not None),
        effective_threshold=threshold, false_alarms=limit.false_alarms,
        expected_noise_peaks_at_threshold=limit.noise_peaks_at_asked, noise_fwhm_pixels=limit.fwhm_pixels,
        resolution_elements=limit.resolution_elements,
        velocity_reference=velocity_reference_text(header.spectral_frame),
        trough_spectrum=noise.troughs, trough_snr=trough_snr,
        absorption_edge_level=edge_level(trough_snr, threshold), local_z=local_z, redshift_note=redshift_note,
        negative_features=negative, redshift_options=redshift_options,
    )
    # emission spread over the field, seen in its mean spectrum, is no line-free channel either
    spread = field_emission(noise.field_mean, noise.summary.channel_correlation or 0.0, threshold=threshold) \
        if noise.field_mean is not None else []
    summary = replace(summary, field_emission_channels=tuple((int(f.first), int(f.last)) for f in spread))
    return FoundLines(summary, [ch for ch, _ in tagged] + list(confirmed.negative) + list(spread), notes)


def _threshold_notes(limit):
    """What the threshold applied means for this cube, when the user should know."""
    if limit.applied > limit.asked:
        return [
            f"detection threshold raised from {limit.asked:g} to {limit.applied:.2f} sigma: at {limit.asked:g} "
            f"sigma about {limit.noise_peaks_at_asked:.2g} pure-noise peak(s) or dip(s) would be expected in this "
            f"cube ({limit.n_channels} channels of about {limit.resolution_elements:.3g} independent noise beams "
            f"each, both signs searched); features whose peak S/N lies between {limit.asked:g} and "
            f"{limit.applied:.2f} are not reported"
        ]
    if limit.noise_peaks > 0.5:
        return [
            f"about {limit.noise_peaks:.1f} pure-noise peaks or dips are expected beyond {limit.asked:g} sigma in "
            "a cube of this size and beam (Gaussian random-field count, both signs); treat detections of one or "
            "two channels with care, or raise the threshold"
        ]
    return []
