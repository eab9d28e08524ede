"""The JSON summary of a delivery check (``summary.json``): a stable interface for scripts.

`cube_entry` turns one result of `check_cube` into plain JSON,
`failure_entry` records an input that could not be checked, and
`summary_dict` assembles a run. Fields are only ever added (a new ``schema``
version only when a field must change meaning).

JSON summary (``DIR/summary.json``)
-----------------------------------
Quantities are ``{"value": ..., "unit": "..."}``; numbers whose key ends in
``_ghz``, ``_mhz``, ``_kms``, ``_arcsec`` or ``_deg`` are in that unit; NaN is
written as ``null``; pixel positions are ``{"x": ..., "y": ...}`` counted
from 0 (numpy order of the data is ``(channel, y, x)``).

Top level:

``schema``
    ``"cubeloupe-check/2"`` (version 2 added absorption detections, ``kind``,
    and the noise's variation across the field, ``noise.spatial``).
``cubeloupe_version``, ``created`` (ISO 8601, UTC)
``z`` (given redshift or null), ``threshold_snr``
``skipped``
    Inputs that were not checked, each ``{"path", "reason"}`` (e.g. a file
    in a folder that is not FITS).
``cubes``
    One entry per FITS input, in the order given:

    ``path`` (str), ``ok`` (true when the cube was read and checked),
    ``error`` (the reason when not ok, else null), ``error_type`` (the
    exception class name or null), ``rms`` (robust rms over the cube, a
    Quantity in the cube's unit), ``detections`` (list, strongest first),
    ``header``, ``noise``, ``continuum``, ``lines``, ``strongest``,
    ``warnings`` (list of str). A cube that could not be read has ``rms``
    null, ``detections`` empty and the other sections null.

    ``header``: ``shape`` [n_channels, ny, nx]; ``axes`` (FITS order, each
    ``ctype``, ``unit``, ``length``, ``first``, ``last``); ``unit`` (BUNIT);
    ``spectral_frame`` (SPECSYS); ``rest_frequency_ghz``;
    ``channel_width_mhz``; ``channel_width_kms`` (``c dnu / nu`` at the band
    centre); ``band_ghz`` [low, high] (outer channel edges); ``beam``
    (``major_arcsec``, ``minor_arcsec``, ``pa_deg``, and for per-channel
    beams ``major_range_arcsec``, ``minor_range_arcsec``; null without a
    beam); ``pixel_size_arcsec`` [x, y]; ``pixels_per_beam`` (pixels across
    the beam minor axis; under 3 warns); ``beam_area_pixels``;
    ``blanked_fraction`` (per channel) and ``blanked_fraction_max``.

    ``noise``: ``cube_rms``; ``channel_rms`` (Quantity, one value per
    channel); ``frequency_ghz`` (channel centres); ``flagged_channels``
    (indices); ``flag_rule``; ``rms_region`` (which part of the field the
    rms values describe, in words: the whole field, or its quietest part when
    the noise varies across it); ``spatial`` (the noise across the field:
    ``measured`` (false when the field is too small for a map),
    ``varies`` (detections then judged against each pixel's own noise),
    ``primary_beam_corrected`` (the noise rises towards every edge, as in a
    primary-beam-corrected image), ``edge_to_centre`` (median noise along
    the field's edge over that of its quietest part), ``highest`` (noisiest
    pixel over the quietest part), ``quietest_position``, ``p_value``
    (false-alarm probability of the variation for a flat field; null when
    not measured), ``degree``, ``box_pixels``, ``n_boxes``, ``rule``,
    ``varies_in_line_free_channels`` (when it varies: whether the same map
    from each pixel's scatter over the line-free channels varies too; false
    hints at line emission rather than noise; else null)).

    ``continuum``: ``peak`` (Quantity, the mean over line-free channels at
    the most significant pixel); ``peak_significance``; ``peak_position``;
    ``noise`` (Quantity, standard error of the mean at that pixel); ``n_line_free_channels``;
    ``n_significant_pixels`` (|significance| >= 5); ``rule``. Null when
    too few channels are line-free.

    ``lines``: ``z``; ``threshold_snr`` (the threshold asked for);
    ``effective_threshold_snr`` (the threshold applied: the larger of the one
    asked for and the level above which ``false_alarms`` pure-noise peaks
    are expected in the whole cube); ``false_alarms`` (null when not
    controlled); ``expected_noise_peaks`` (pure-noise peaks expected above
    the threshold applied, in the whole cube); ``expected_noise_peaks_at_threshold``
    (the same above the threshold asked for); ``noise_fwhm_pixels`` [x, y]
    (noise correlation behind those counts); ``resolution_elements``
    (independent noise beams per channel image; the counts cover peaks and
    dips, both signs being searched); ``expected`` (catalog lines in the
    band at z: ``name``, ``rest_frequency_ghz``, ``observed_frequency_ghz``,
    ``detected``); ``solved_z`` (null unless solved); ``edge_level_snr``;
    ``peak_snr`` (per channel); ``peak_spectrum``
    (Quantity per channel, after removing each pixel's continuum level);
    ``trough_snr`` and ``trough_spectrum`` (the same for the minimum over
    pixels: absorption; ``trough_snr`` is positive for a dip);
    ``absorption_edge_level_snr``; with a noise varying across the field the
    spectra hold each pixel's values over its relative noise (intensities as
    at the quietest part); ``rule``; ``velocity_reference`` (what velocities
    are relative to, in words).

    ``detections``: emission and absorption together, strongest first; each
    ``kind`` (``"emission"`` or ``"absorption"``), ``frequency_ghz``
    (centroid), ``peak_frequency_ghz``, ``snr`` (S/N of the peak or of the
    depth, positive), ``peak`` (Quantity, relative to the pixel's continuum
    level: negative for absorption), ``peak_error`` (Quantity, its standard
    error), ``depth`` (Quantity, ``-peak`` for absorption, null for
    emission), ``continuum_level`` (Quantity at the position),
    ``width_mhz`` and ``width_kms``
    (full extent of the feature's channels), ``channels`` [first, last],
    ``position`` (brightest, or deepest, pixel of the peak channel), ``candidates`` (best
    first, each ``name``, ``rest_frequency_ghz``, ``z`` (the redshift that
    puts the line at the detection, or the given/solved z),
    ``velocity_offset_kms`` (radio-convention offset from the line redshifted
    to that z, with frequencies in the cube's frame, SPECSYS; with z = 0 the
    velocity in that frame itself; null for a lone detection without z)).

    Added by issue 13 (fields only added, none renamed or dropped): per cube
    ``status`` (``"ok"``, ``"ok, N warnings"`` or ``"failed"``, informative
    notes not counted), ``worst_warning``, ``rms_display`` (mJy/beam, mK);
    ``header.velocity_convention``; ``noise.plain_channel_rms``,
    ``noise.channels_rms_from_differences``, ``noise.channel_correlation``,
    ``noise.spatial.per_pixel``; each detection's ``velocity_kms``,
    ``peak_velocity_kms`` (velocity-only detections have
    ``frequency_ghz`` null and these set) and ``likely_cause``;
    ``lines.local_z``, ``redshift_note``, ``redshift_options`` (``z``,
    ``lines``), ``negative_features`` (dips with no continuum to absorb,
    as detections), ``field_emission_channels``, ``velocity_only``.

    ``strongest``: ``detection`` (index into ``detections``), ``window_ghz``,
    ``position``, ``moment0_peak`` (Quantity), ``spectrum``
    (``frequency_ghz`` and ``intensity`` Quantity). Null without detections.

Examples
--------
>>> summary = summary_dict([failure_entry("broken.fits", OSError("truncated"))], z=None)
>>> summary["schema"], summary["cubes"][0]["ok"]
('cubeloupe-check/2', False)
"""

import datetime
import math
from importlib.metadata import PackageNotFoundError, version

import astropy.units as u
import numpy as np

from ..spectral import frequency_axis

__all__ = [
    "SCHEMA",
    "cube_entry",
    "failure_entry",
    "summary_dict",
    "json_number",
    "json_numbers",
    "json_quantity",
    "json_in",
    "json_position",
    "status_text",
    "worst_warning",
    "display_quantity",
]

SCHEMA = "cubeloupe-check/2"


def json_number(value):
    value = float(value)
    return value if math.isfinite(value) else None


def json_numbers(values):
    return [json_number(v) for v in np.asarray(values, dtype=float).ravel()]


def json_quantity(value, unit=None):
    if value is None:
        return None
    value = u.Quantity(value)
    if unit is not None:
        value = value.to(unit)
    number = json_number(value.value) if value.ndim == 0 else json_numbers(value.value)
    return {"value": number, "unit": value.unit.to_string()}


def json_in(value, unit):
    if value is None:
        return None
    value = u.Quantity(value).to(unit)
    return json_number(value.value) if value.ndim == 0 else json_numbers(value.value)


def json_position(yx):
    if yx is None:
        return None
    return {"x": int(yx[1]), "y": int(yx[0])}


def _header_dict(header):
    beam = None
    if header.beam_major is not None:
        beam = {
            "major_arcsec": json_in(header.beam_major, u.arcsec),
            "minor_arcsec": json_in(header.beam_minor, u.arcsec),
            "pa_deg": json_in(header.beam_pa, u.deg),
            "major_range_arcsec": json_in(header.beam_major_range, u.arcsec),
            "minor_range_arcsec": json_in(header.beam_minor_range, u.arcsec),
        }
    blanked = header.blanked_fraction
    return {
        "shape": list(header.shape),
        "axes": [
            {"ctype": a.ctype, "unit": a.unit, "length": a.length, "first": json_number(a.first), "last": json_number(a.last)}
            for a in header.axes
        ],
        "unit": header.unit.to_string(),
        "spectral_frame": header.spectral_frame,
        "rest_frequency_ghz": json_in(header.rest_frequency, u.GHz),
        "channel_width_mhz": json_in(header.channel_width_frequency, u.MHz),
        "channel_width_kms": json_in(header.channel_width_velocity, u.km / u.s),
        "band_ghz": json_in(header.band, u.GHz),
        "beam": beam,
        "pixel_size_arcsec": json_in(header.pixel_size, u.arcsec),
        "pixels_per_beam": None if header.pixels_per_beam is None else json_number(header.pixels_per_beam),
        "beam_area_pixels": None if header.beam_area_pixels is None else json_number(header.beam_area_pixels),
        "blanked_fraction": None if blanked is None else json_numbers(blanked),
        "blanked_fraction_max": None if blanked is None or not np.size(blanked) else json_number(np.nanmax(blanked)),
        "velocity_convention": header.velocity_convention,
    }


def _candidate_dict(candidate):
    return {
        "name": candidate.name,
        "rest_frequency_ghz": json_in(candidate.rest_frequency, u.GHz),
        "z": json_number(candidate.z),
        "velocity_offset_kms": json_in(candidate.velocity_offset, u.km / u.s),
    }


def _feature_dict(feature):
    return {
        "kind": feature.kind,
        "frequency_ghz": json_in(feature.frequency, u.GHz),
        "peak_frequency_ghz": json_in(feature.peak_frequency, u.GHz),
        "snr": json_number(feature.peak_snr),
        "peak": json_quantity(feature.peak),
        "peak_error": json_quantity(feature.peak_error),
        "depth": json_quantity(feature.depth),
        "continuum_level": json_quantity(feature.continuum),
        "width_mhz": json_in(feature.width_frequency, u.MHz),
        "width_kms": json_in(feature.width_velocity, u.km / u.s),
        "channels": [int(feature.channels.first), int(feature.channels.last)],
        "position": json_position(feature.position),
        "candidates": [_candidate_dict(c) for c in feature.candidates],
        "velocity_kms": json_in(feature.velocity, u.km / u.s),
        "peak_velocity_kms": json_in(feature.peak_velocity, u.km / u.s),
        "likely_cause": feature.likely_cause,
    }


def _spatial_dict(spatial, rule, line_free):
    if spatial is None:
        return None
    return {
        "varies_in_line_free_channels": None if line_free is None else bool(line_free),
        "measured": bool(spatial.measured),
        "varies": bool(spatial.varies),
        "primary_beam_corrected": bool(spatial.primary_beam_corrected),
        "edge_to_centre": json_number(spatial.edge_to_centre),
        "highest": json_number(spatial.highest),
        "quietest_position": json_position(spatial.quietest),
        "p_value": None if spatial.p_value is None else json_number(spatial.p_value),
        "degree": int(spatial.degree),
        "box_pixels": int(spatial.box_pixels),
        "n_boxes": int(spatial.n_boxes),
        "rule": rule,
        "per_pixel": bool(getattr(spatial, "per_pixel", False)),
    }


def cube_entry(check):
    """The JSON entry of one checked cube (`CubeCheck`)."""
    header, noise, lines = check.header, check.noise, check.lines
    frequency = header.frequency
    entry = {
        "path": check.path,
        "ok": True,
        "error": None,
        "error_type": None,
        "rms": json_quantity(noise.cube_rms),
        "detections": [_feature_dict(f) for f in lines.features] if lines is not None else [],
        "header": _header_dict(header),
        "noise": {
            "cube_rms": json_quantity(noise.cube_rms),
            "channel_rms": json_quantity(noise.channel_rms),
            "frequency_ghz": None if frequency is None else json_in(frequency, u.GHz),
            "flagged_channels": [int(k) for k in noise.flagged],
            "flag_rule": noise.rule,
            "plain_channel_rms": json_quantity(noise.plain_rms),
            "channels_rms_from_differences": (None if noise.from_differences is None
                                              else [int(k) for k in np.flatnonzero(noise.from_differences)]),
            "channel_correlation": None if noise.channel_correlation is None else json_number(noise.channel_correlation),
            "rms_region": noise.rms_region,
            "spatial": _spatial_dict(noise.spatial, noise.spatial_rule, noise.varies_in_line_free_channels),
        },
        "continuum": None,
        "lines": None,
        "strongest": None,
        "warnings": list(check.warnings),
        "status": status_text(check.warnings),
        "worst_warning": worst_warning(check.warnings),
        "rms_display": display_quantity(noise.cube_rms),
    }
    cont = check.continuum
    if cont is not None:
        entry["continuum"] = {
            "peak": json_quantity(cont.peak),
            "peak_significance": json_number(cont.peak_significance),
            "peak_position": json_position(cont.peak_position),
            "noise": json_quantity(cont.noise),
            "n_line_free_channels": int(cont.n_free),
            "n_significant_pixels": int(cont.n_significant),
            "rule": cont.rule,
        }
    if lines is not None:
        entry["lines"] = {
            "z": lines.z,
            "threshold_snr": json_number(lines.threshold),
            "effective_threshold_snr": json_number(lines.effective_threshold),
            "false_alarms": None if lines.false_alarms is None else json_number(lines.false_alarms),
            "expected_noise_peaks_at_threshold": json_number(lines.expected_noise_peaks_at_threshold),
            "noise_fwhm_pixels": None if lines.noise_fwhm_pixels is None else json_numbers(lines.noise_fwhm_pixels),
            "resolution_elements": json_number(lines.resolution_elements),
            "velocity_reference": lines.velocity_reference,
            "expected": [
                {
                    "name": e.name,
                    "rest_frequency_ghz": json_in(e.rest_frequency, u.GHz),
                    "observed_frequency_ghz": json_in(e.observed_frequency, u.GHz),
                    "detected": bool(e.detected),
                }
                for e in lines.expected
            ],
            "solved_z": None if lines.solved_z is None else json_number(lines.solved_z),
            "edge_level_snr": None if lines.edge_level is None else json_number(lines.edge_level),
            "expected_noise_peaks": json_number(lines.expected_noise_peaks),
            "peak_snr": json_numbers(lines.peak_snr),
            "peak_spectrum": json_quantity(lines.peak_spectrum),
            "trough_snr": None if lines.trough_snr is None else json_numbers(lines.trough_snr),
            "trough_spectrum": json_quantity(lines.trough_spectrum),
            "absorption_edge_level_snr": (None if lines.absorption_edge_level is None
                                          else json_number(lines.absorption_edge_level)),
            "rule": lines.rule,
            "local_z": None if lines.local_z is None else json_number(lines.local_z),
            "redshift_note": lines.redshift_note,
            "redshift_options": [{"z": json_number(z), "lines": list(names)} for z, names in lines.redshift_options],
            "negative_features": [_feature_dict(f) for f in lines.negative_features],
            "field_emission_channels": [list(pair) for pair in lines.field_emission_channels],
            "velocity_only": lines.features != () and all(f.frequency is None for f in lines.features),
        }
    strongest = check.strongest
    if strongest is not None:
        spectrum = strongest.spectrum
        entry["strongest"] = {
            "detection": 0,
            "window_ghz": json_in(strongest.window, u.GHz),
            "position": json_position(strongest.position),
            "moment0_peak": json_quantity(np.nanmax(strongest.moment0.value) * strongest.moment0.unit),
            "spectrum": {
                "frequency_ghz": json_in(frequency_axis(spectrum), u.GHz),
                "intensity": json_quantity(u.Quantity(spectrum)),
            },
        }
    return entry


def failure_entry(path, error):
    """The JSON entry of an input that could not be read or checked."""
    return {
        "path": str(path),
        "ok": False,
        "error": str(error),
        "error_type": type(error).__name__,
        "rms": None,
        "detections": [],
        "header": None,
        "noise": None,
        "continuum": None,
        "lines": None,
        "strongest": None,
        "warnings": [],
        "status": "failed",
        "worst_warning": None,
        "rms_display": None,
    }


def summary_dict(entries, *, z=None, threshold=5.0, skipped=()):
    """Assemble the JSON summary of a run.

    Parameters
    ----------
    entries : sequence of CubeCheck or dict
        Results of `check_cube`, or entries already made with `failure_entry`
        (or `cube_entry`).
    z : float or None
        The redshift given for the run.
    threshold : float
        Detection threshold used.
    skipped : sequence of (path, reason)
        Inputs that were not checked.

    Returns
    -------
    dict
        JSON-serialisable; see the module docstring for the schema.
    """
    try:
        package_version = version("cubeloupe")
    except PackageNotFoundError:  # running from a source tree that is not installed
        package_version = None
    return {
        "schema": SCHEMA,
        "cubeloupe_version": package_version,
        "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"),
        "z": z,
        "threshold_snr": float(threshold),
        "skipped": [{"path": str(p), "reason": str(r)} for p, r in skipped],
        "cubes": [e if isinstance(e, dict) else cube_entry(e) for e in entries],
    }



# Warnings that only inform (the threshold applied, the redshift left open) do not count in a cube's
# status; the others are ranked by these words, most serious first.
_INFORMATION = ("detection threshold raised", "pure-noise peaks or dips are expected", "redshift not constrained",
                "redshift not solved", "redshift solved", "the field is too small for a smooth noise map")
_SEVERITY = ("cannot", "failed", "not measured", "no beam", "no BUNIT", "undersampled", "pixels across the beam",
             "channel(s) with noise that stands out", "leftover continuum", "negative feature", "blanked",
             "noise rises", "noise varies", "velocity only")


def worst_warning(warnings):
    """The most serious of a cube's warnings (informative notes left aside), or None.

    Examples
    --------
    >>> worst_warning(["detection threshold raised from 5 to 5.2 sigma", "leftover continuum: 9 sigma"])
    'leftover continuum: 9 sigma'
    """
    serious = [w for w in warnings if not any(word in w for word in _INFORMATION)]
    if not serious:
        return None
    rank = [next((i for i, word in enumerate(_SEVERITY) if word in w), len(_SEVERITY)) for w in serious]
    return serious[int(np.argmin(rank))]


def status_text(warnings):
    """``'ok'`` or ``'ok, N warnings'`` (informative notes not counted).

    Examples
    --------
    >>> status_text(["detection threshold raised from 5 to 5.2 sigma"])
    'ok'
    """
    serious = [w for w in warnings if not any(word in w for word in _INFORMATION)]
    return "ok" if not serious else f"ok, {len(serious)} warning{'s' if len(serious) > 1 else ''}"


def display_quantity(value):
    """A brightness in convenient units: mJy/beam under 1 Jy/beam, mK under 1 K, else as it is.

    Examples
    --------
    >>> display_quantity(0.0013 * u.Jy / u.beam)
    '1.3 mJy / beam'
    >>> display_quantity(0.044 * u.K)
    '44 mK'
    """
    if value is None:
        return None
    value = u.Quantity(value)
    for big, small in ((u.Jy / u.beam, u.mJy / u.beam), (u.K, u.mK), (u.Jy, u.mJy)):
        if value.unit == big and abs(value.value) < 1:
            value = value.to(small)
            break
    return f"{value.value:.3g} {value.unit.to_string()}"
