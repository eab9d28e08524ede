"""The report of a delivery check: one HTML page, one JSON summary, one terminal table.

`prepare_output` checks the output folder before any cube is read (it must be
writable; an existing report is kept unless ``overwrite=True``);
`summary_dict` turns the results of `~cubeloupe.analysis.delivery_check.check_cube`
into plain JSON; `write_report` writes ``DIR/summary.json`` and
``DIR/report.html`` (figures drawn with matplotlib's Agg backend and embedded
as base64 PNG, so the page is one self-contained file); `terminal_table`
gives the short table the command prints.

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

    ``strongest``: ``detection`` (index into ``detections``), ``window_ghz``,
    ``position``, ``moment0_peak`` (Quantity), ``spectrum``
    (``frequency_ghz`` and ``intensity`` Quantity). Null without detections.

Examples
--------
>>> folder = prepare_output("check-out")  # doctest: +SKIP
>>> result = check_cube(open_cube("cube.fits"))  # doctest: +SKIP
>>> entry = cube_entry(result)  # doctest: +SKIP
>>> summary = summary_dict([entry], z=None)  # doctest: +SKIP
>>> write_report(folder, summary, [cube_section(entry, result)])  # doctest: +SKIP
"""

import base64
import datetime
import html
import io
import json
import math
import os
import tempfile
from pathlib import Path

import astropy.units as u
import numpy as np

from .errors import CubeloupeError, OutputExistsError, ReportFolderError

__all__ = [
    "SCHEMA",
    "SUMMARY_NAME",
    "REPORT_NAME",
    "ReportFolderError",
    "prepare_output",
    "summary_dict",
    "cube_entry",
    "failure_entry",
    "cube_section",
    "write_report",
    "terminal_table",
]

SCHEMA = "cubeloupe-check/2"
SUMMARY_NAME = "summary.json"
REPORT_NAME = "report.html"


# --------------------------------------------------------------------------- output folder


def prepare_output(folder, *, overwrite=False):
    """Make sure the report can be written to ``folder``; create it if needed.

    Parameters
    ----------
    folder : str or os.PathLike
    overwrite : bool
        Allow replacing an existing ``summary.json`` / ``report.html``.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    ReportFolderError
        The folder cannot be created, is a file, or is not writable.
    OutputExistsError
        A report is already there and ``overwrite`` is False.

    Examples
    --------
    >>> prepare_output(tmp_path / "out")  # doctest: +SKIP
    PosixPath('.../out')
    """
    folder = Path(os.fspath(folder)).expanduser()
    if folder.exists() and not folder.is_dir():
        raise ReportFolderError(f"the output path {folder} is a file, not a folder; pass a folder with --out")
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise ReportFolderError(
            f"cannot create the output folder {folder} ({exc.strerror or exc}); "
            "choose another folder with --out"
        ) from None
    # os.access misses read-only mounts and ACLs; creating a file is the real test.
    try:
        with tempfile.NamedTemporaryFile(dir=folder, prefix=".cubeloupe-write-test-"):
            pass
    except OSError as exc:
        raise ReportFolderError(
            f"cannot write to the output folder {folder} ({exc.strerror or exc}); "
            "choose a writable folder with --out"
        ) from None
    if not overwrite:
        existing = [name for name in (SUMMARY_NAME, REPORT_NAME) if (folder / name).exists()]
        if existing:
            raise OutputExistsError(
                f"{folder} already holds a report ({', '.join(existing)}); it is kept. "
                "Choose another folder with --out, or replace it with --overwrite"
            )
    return folder


# --------------------------------------------------------------------------- JSON


def _number(value):
    value = float(value)
    return value if math.isfinite(value) else None


def _numbers(values):
    return [_number(v) for v in np.asarray(values, dtype=float).ravel()]


def _quantity(value, unit=None):
    if value is None:
        return None
    value = u.Quantity(value)
    if unit is not None:
        value = value.to(unit)
    number = _number(value.value) if value.ndim == 0 else _numbers(value.value)
    return {"value": number, "unit": value.unit.to_string()}


def _in(value, unit):
    if value is None:
        return None
    value = u.Quantity(value).to(unit)
    return _number(value.value) if value.ndim == 0 else _numbers(value.value)


def _position(yx):
    if yx is None:
        return None
    return {"x": int(yx[1]), "y": int(yx[0])}


def _header_dict(header):
    beam = None
    if header.beam_major is not None:
        beam = {
            "major_arcsec": _in(header.beam_major, u.arcsec),
            "minor_arcsec": _in(header.beam_minor, u.arcsec),
            "pa_deg": _in(header.beam_pa, u.deg),
            "major_range_arcsec": _in(header.beam_major_range, u.arcsec),
            "minor_range_arcsec": _in(header.beam_minor_range, u.arcsec),
        }
    blanked = header.blanked_fraction
    return {
        "shape": list(header.shape),
        "axes": [
            {"ctype": a.ctype, "unit": a.unit, "length": a.length, "first": _number(a.first), "last": _number(a.last)}
            for a in header.axes
        ],
        "unit": header.unit.to_string(),
        "spectral_frame": header.spectral_frame,
        "rest_frequency_ghz": _in(header.rest_frequency, u.GHz),
        "channel_width_mhz": _in(header.channel_width_frequency, u.MHz),
        "channel_width_kms": _in(header.channel_width_velocity, u.km / u.s),
        "band_ghz": _in(header.band, u.GHz),
        "beam": beam,
        "pixel_size_arcsec": _in(header.pixel_size, u.arcsec),
        "pixels_per_beam": None if header.pixels_per_beam is None else _number(header.pixels_per_beam),
        "beam_area_pixels": None if header.beam_area_pixels is None else _number(header.beam_area_pixels),
        "blanked_fraction": None if blanked is None else _numbers(blanked),
        "blanked_fraction_max": None if blanked is None or not np.size(blanked) else _number(np.nanmax(blanked)),
    }


def _candidate_dict(candidate):
    return {
        "name": candidate.name,
        "rest_frequency_ghz": _in(candidate.rest_frequency, u.GHz),
        "z": _number(candidate.z),
        "velocity_offset_kms": _in(candidate.velocity_offset, u.km / u.s),
    }


def _feature_dict(feature):
    return {
        "kind": feature.kind,
        "frequency_ghz": _in(feature.frequency, u.GHz),
        "peak_frequency_ghz": _in(feature.peak_frequency, u.GHz),
        "snr": _number(feature.peak_snr),
        "peak": _quantity(feature.peak),
        "peak_error": _quantity(feature.peak_error),
        "depth": _quantity(feature.depth),
        "continuum_level": _quantity(feature.continuum),
        "width_mhz": _in(feature.width_frequency, u.MHz),
        "width_kms": _in(feature.width_velocity, u.km / u.s),
        "channels": [int(feature.channels.first), int(feature.channels.last)],
        "position": _position(feature.position),
        "candidates": [_candidate_dict(c) for c in feature.candidates],
    }


def _spatial_dict(spatial, rule, line_free):
    if spatial is None:
        return None
    return {
        "varies_in_line_free_channels": None if line_free is None else bool(line_free),
        "measured": bool(spatial.measured),
        "varies": bool(spatial.varies),
        "primary_beam_corrected": bool(spatial.primary_beam_corrected),
        "edge_to_centre": _number(spatial.edge_to_centre),
        "highest": _number(spatial.highest),
        "quietest_position": _position(spatial.quietest),
        "p_value": None if spatial.p_value is None else _number(spatial.p_value),
        "degree": int(spatial.degree),
        "box_pixels": int(spatial.box_pixels),
        "n_boxes": int(spatial.n_boxes),
        "rule": rule,
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
        "rms": _quantity(noise.cube_rms),
        "detections": [_feature_dict(f) for f in lines.features] if lines is not None else [],
        "header": _header_dict(header),
        "noise": {
            "cube_rms": _quantity(noise.cube_rms),
            "channel_rms": _quantity(noise.channel_rms),
            "frequency_ghz": None if frequency is None else _in(frequency, u.GHz),
            "flagged_channels": [int(k) for k in noise.flagged],
            "flag_rule": noise.rule,
            "rms_region": noise.rms_region,
            "spatial": _spatial_dict(noise.spatial, noise.spatial_rule, noise.varies_in_line_free_channels),
        },
        "continuum": None,
        "lines": None,
        "strongest": None,
        "warnings": list(check.warnings),
    }
    cont = check.continuum
    if cont is not None:
        entry["continuum"] = {
            "peak": _quantity(cont.peak),
            "peak_significance": _number(cont.peak_significance),
            "peak_position": _position(cont.peak_position),
            "noise": _quantity(cont.noise),
            "n_line_free_channels": int(cont.n_free),
            "n_significant_pixels": int(cont.n_significant),
            "rule": cont.rule,
        }
    if lines is not None:
        entry["lines"] = {
            "z": lines.z,
            "threshold_snr": _number(lines.threshold),
            "effective_threshold_snr": _number(lines.effective_threshold),
            "false_alarms": None if lines.false_alarms is None else _number(lines.false_alarms),
            "expected_noise_peaks_at_threshold": _number(lines.expected_noise_peaks_at_threshold),
            "noise_fwhm_pixels": None if lines.noise_fwhm_pixels is None else _numbers(lines.noise_fwhm_pixels),
            "resolution_elements": _number(lines.resolution_elements),
            "velocity_reference": lines.velocity_reference,
            "expected": [
                {
                    "name": e.name,
                    "rest_frequency_ghz": _in(e.rest_frequency, u.GHz),
                    "observed_frequency_ghz": _in(e.observed_frequency, u.GHz),
                    "detected": bool(e.detected),
                }
                for e in lines.expected
            ],
            "solved_z": None if lines.solved_z is None else _number(lines.solved_z),
            "edge_level_snr": None if lines.edge_level is None else _number(lines.edge_level),
            "expected_noise_peaks": _number(lines.expected_noise_peaks),
            "peak_snr": _numbers(lines.peak_snr),
            "peak_spectrum": _quantity(lines.peak_spectrum),
            "trough_snr": None if lines.trough_snr is None else _numbers(lines.trough_snr),
            "trough_spectrum": _quantity(lines.trough_spectrum),
            "absorption_edge_level_snr": (None if lines.absorption_edge_level is None
                                          else _number(lines.absorption_edge_level)),
            "rule": lines.rule,
        }
    strongest = check.strongest
    if strongest is not None:
        spectrum = strongest.spectrum
        from .spectral import frequency_axis

        entry["strongest"] = {
            "detection": 0,
            "window_ghz": _in(strongest.window, u.GHz),
            "position": _position(strongest.position),
            "moment0_peak": _quantity(np.nanmax(strongest.moment0.value) * strongest.moment0.unit),
            "spectrum": {
                "frequency_ghz": _in(frequency_axis(spectrum), u.GHz),
                "intensity": _quantity(u.Quantity(spectrum)),
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
    from importlib.metadata import PackageNotFoundError, version

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


# --------------------------------------------------------------------------- writing


def _write_atomically(path, text, overwrite):
    if path.exists() and not overwrite:
        raise OutputExistsError(f"{path} exists and is kept; pass --overwrite to replace it")
    handle = tempfile.NamedTemporaryFile("w", dir=path.parent, prefix=f".{path.name}.", delete=False,
                                         encoding="utf-8")
    try:
        with handle:
            handle.write(text)
        # NamedTemporaryFile makes private (0600) files; a report gets the usual permissions
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(handle.name, 0o666 & ~umask)
        os.replace(handle.name, path)
    except BaseException:
        Path(handle.name).unlink(missing_ok=True)
        raise


def write_report(folder, summary, sections=None, *, overwrite=False, title=None):
    """Write ``summary.json`` and the self-contained ``report.html`` into ``folder``.

    Parameters
    ----------
    folder : path
        A folder accepted by `prepare_output`.
    summary : dict
        From `summary_dict`.
    sections : sequence of str, optional
        One HTML fragment per entry of ``summary["cubes"]``, made with
        `cube_section` right after each cube was checked (so that a long run
        keeps no maps in memory); made from the summary alone (no figures)
        when not given.
    overwrite : bool
    title : str, optional

    Returns
    -------
    tuple of pathlib.Path
        ``(summary_path, report_path)``.

    Raises
    ------
    OutputExistsError, ReportFolderError
    """
    folder = Path(folder)
    summary_path, report_path = folder / SUMMARY_NAME, folder / REPORT_NAME
    if sections is None:
        sections = [cube_section(entry, None) for entry in summary["cubes"]]
    page = _html_page(summary, sections, title=title)
    try:
        _write_atomically(summary_path, json.dumps(summary, indent=1, allow_nan=False) + "\n", overwrite)
        _write_atomically(report_path, page, overwrite)
    except OutputExistsError:
        raise
    except OSError as exc:
        raise ReportFolderError(f"cannot write the report into {folder} ({exc.strerror or exc}); "
                                "choose a writable folder with --out") from None
    return summary_path, report_path


# --------------------------------------------------------------------------- terminal


def _fmt(value, spec):
    return "-" if value is None else format(value, spec)


def _rms_where(noise):
    """A short tag saying which part of the field the rms describes, when not the whole of it."""
    spatial = (noise or {}).get("spatial") or {}
    if not spatial.get("varies"):
        return ""
    if spatial.get("primary_beam_corrected"):
        return f" (centre; edge x{_fmt(spatial.get('edge_to_centre'), '.2g')})"
    return f" (quietest part; up to x{_fmt(spatial.get('highest'), '.2g')})"


def terminal_table(summary):
    """The short table printed at the end of a run: one line per input.

    Examples
    --------
    >>> print(terminal_table({"cubes": [], "skipped": []}))
    cube  status  rms  flagged  continuum S/N  detections  strongest
    """
    header = ["cube", "status", "rms", "flagged", "continuum S/N", "detections", "strongest"]
    rows = []
    for cube in summary["cubes"]:
        name = Path(cube["path"]).name
        if not cube["ok"]:
            rows.append([name, "FAILED", "-", "-", "-", "-", cube["error"]])
            continue
        rms = cube["rms"]
        cont = cube.get("continuum") or {}
        strongest = "-"
        if cube["detections"]:
            best = cube["detections"][0]
            ident = best["candidates"][0]["name"] if best["candidates"] else "unidentified"
            kind = " absorption" if best.get("kind") == "absorption" else ""
            strongest = f"{_fmt(best['frequency_ghz'], '.4f')} GHz{kind} S/N {_fmt(best['snr'], '.1f')} {ident}"
        status = "ok" if not cube.get("warnings") else f"ok, {len(cube['warnings'])} warning(s)"
        rows.append([
            name, status, f"{_fmt(rms['value'], '.3g')} {rms['unit']}{_rms_where(cube['noise'])}",
            str(len(cube["noise"]["flagged_channels"])),
            _fmt(cont.get("peak_significance"), ".1f"),
            str(len(cube["detections"])), strongest,
        ])
    for item in summary.get("skipped", []):
        rows.append([Path(item["path"]).name, "skipped", "-", "-", "-", "-", item["reason"]])
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    lines = ["  ".join(str(cell).ljust(w) for cell, w in zip(row, widths)).rstrip() for row in [header, *rows]]
    return "\n".join(lines)


# --------------------------------------------------------------------------- HTML

_STYLE = """
body { font-family: system-ui, sans-serif; margin: 1.5em auto; max-width: 68em; color: #1d232b; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 2em; border-bottom: 2px solid #2a6f97; }
h3 { font-size: 1em; margin-bottom: .3em; }
table { border-collapse: collapse; margin: .4em 0; } td, th { padding: .15em .7em; text-align: left; }
tr:nth-child(even) { background: #f0f4f7; } th { background: #dbe7ef; }
.fail { color: #a4161a; font-weight: bold; } .ok { color: #2d6a4f; font-weight: bold; }
.warn { color: #9c6644; } .rule { color: #555; font-size: .9em; }
img { max-width: 100%; }
"""


def _figure_png(fig):
    import matplotlib.pyplot as plt
    from matplotlib.ticker import MaxNLocator

    for axis in fig.axes:
        if axis.get_xlabel():  # not the colour bars
            axis.xaxis.set_major_locator(MaxNLocator(6))
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=90)
    plt.close(fig)
    return '<img alt="figure" src="data:image/png;base64,' + base64.b64encode(buffer.getvalue()).decode() + '">'


def _pyplot():
    import matplotlib

    matplotlib.use("Agg", force=False) if matplotlib.get_backend().lower() != "agg" else None
    import matplotlib.pyplot as plt

    return plt


def _figures(check):
    """Figures of one checked cube as HTML <img> tags, keyed by section."""
    plt = _pyplot()
    out = {}
    header, noise, lines = check.header, check.noise, check.lines
    if header.frequency is not None:
        x, xlabel = header.frequency.to_value(u.GHz), "frequency (GHz)"
    else:
        x, xlabel = np.arange(header.shape[0]), "channel"
    unit = noise.channel_rms.unit.to_string()

    blanked = header.blanked_fraction
    if blanked is not None and np.nanmax(blanked) > 0:
        fig, (ax, ax_blank) = plt.subplots(2, 1, figsize=(9, 3.8), layout="constrained", sharex=True,
                                           gridspec_kw={"height_ratios": [3, 1]})
        ax_blank.plot(x, blanked, color="#9c6644", lw=1, drawstyle="steps-mid")
        ax_blank.set_ylabel("blanked")
        ax_blank.set_ylim(-0.05, 1.05)
        ax_blank.set_xlabel(xlabel)
    else:
        fig, ax = plt.subplots(figsize=(9, 2.8), layout="constrained")
        ax.set_xlabel(xlabel)
    varies = noise.spatial is not None and noise.spatial.varies
    ax.plot(x, noise.channel_rms.value, color="#2a6f97", lw=1,
            label="channel rms (quietest part of the field)" if varies else "channel rms")
    ax.axhline(noise.cube_rms.value, color="#555", ls="--", lw=0.8, label="cube rms")
    if len(noise.flagged):
        ax.plot(x[noise.flagged], noise.channel_rms.value[noise.flagged], "o", color="#a4161a",
                ms=4, label="flagged")
    ax.set_ylabel(f"rms ({unit})")
    ax.legend(loc="best", fontsize=8)
    out["noise"] = _figure_png(fig)

    spatial = noise.spatial
    if spatial is not None and spatial.measured:
        fig, ax = plt.subplots(figsize=(5.2, 4), layout="constrained")
        image = ax.imshow(spatial.relative, origin="lower", cmap="cividis")
        fig.colorbar(image, ax=ax, label="noise / noise of the quietest part")
        ax.plot(spatial.quietest[1], spatial.quietest[0], "+", color="white", ms=10)
        ax.set_title("noise across the field (fitted map)", fontsize=9)
        ax.set_xlabel("x (pixel)")
        ax.set_ylabel("y (pixel)")
        out["noise_map"] = _figure_png(fig)

    if lines is not None:
        fig, ax = plt.subplots(figsize=(9, 3.4), layout="constrained")
        ax.plot(x, lines.peak_snr, color="#1d232b", lw=0.9, drawstyle="steps-mid", label="peak S/N")
        if lines.trough_snr is not None:
            ax.plot(x, -np.asarray(lines.trough_snr), color="#6c757d", lw=0.9, drawstyle="steps-mid",
                    label="trough S/N (absorption, drawn negative)")
        applied = lines.effective_threshold if lines.effective_threshold is not None else lines.threshold
        ax.axhline(applied, color="#a4161a", ls="--", lw=0.8, label=f"threshold applied {applied:.2f}")
        if lines.trough_snr is not None:
            ax.axhline(-applied, color="#a4161a", ls="--", lw=0.8)
        if applied > lines.threshold:
            ax.axhline(lines.threshold, color="#a4161a", ls=":", lw=0.7, label=f"threshold asked {lines.threshold:g}")
        for i, feature in enumerate(lines.features):
            ch = feature.channels
            sign = -1 if feature.kind == "absorption" else 1
            ax.axvspan(x[ch.first], x[ch.last], color="#f4a261" if sign > 0 else "#90be6d", alpha=0.35)
            ax.annotate(f"{i + 1}", (x[ch.peak], sign * feature.peak_snr), fontsize=8, ha="center",
                        va="bottom" if sign > 0 else "top")
        for expected in lines.expected:
            ax.axvline(expected.observed_frequency.to_value(u.GHz), color="#2a6f97", lw=0.7, ls=":")
        ax.set_xlabel(xlabel)
        ax.set_ylabel("S/N")
        ax.legend(loc="best", fontsize=8)
        out["lines"] = _figure_png(fig)

    cont = check.continuum
    if cont is not None:
        fig, axes = plt.subplots(1, 2, figsize=(9, 3.6), layout="constrained")
        image = axes[0].imshow(cont.mean.value, origin="lower", cmap="viridis")
        fig.colorbar(image, ax=axes[0], label=cont.mean.unit.to_string())
        axes[0].set_title("mean over line-free channels", fontsize=9)
        limit = max(5.0, float(np.nanmax(np.abs(cont.significance))) if np.isfinite(cont.significance).any() else 5.0)
        image = axes[1].imshow(cont.significance, origin="lower", cmap="RdBu_r", vmin=-limit, vmax=limit)
        fig.colorbar(image, ax=axes[1], label="significance")
        axes[1].set_title("significance", fontsize=9)
        for axis in axes:
            axis.set_xlabel("x (pixel)")
            axis.set_ylabel("y (pixel)")
        out["continuum"] = _figure_png(fig)

    strongest = check.strongest
    if strongest is not None:
        from .spectral import frequency_axis

        fig, axes = plt.subplots(1, 2, figsize=(10, 3.6), layout="constrained",
                                 gridspec_kw={"width_ratios": [1, 1.6]})
        m0 = strongest.moment0
        image = axes[0].imshow(np.asarray(m0.value), origin="lower", cmap="magma")
        fig.colorbar(image, ax=axes[0], label=m0.unit.to_string())
        axes[0].plot(strongest.position[1], strongest.position[0], "+", color="cyan", ms=10)
        kind = check.lines.features[0].kind if check.lines is not None and check.lines.features else "emission"
        axes[0].set_title("moment 0 of the strongest feature" + (" (absorption: negative)" if kind == "absorption"
                                                                 else ""), fontsize=9)
        axes[0].set_xlabel("x (pixel)")
        axes[0].set_ylabel("y (pixel)")
        spectrum = strongest.spectrum
        try:
            sx = frequency_axis(spectrum).to_value(u.GHz)
        except CubeloupeError:
            sx = np.arange(len(spectrum))
        axes[1].plot(sx, np.asarray(spectrum.value), color="#1d232b", lw=0.9, drawstyle="steps-mid")
        lo, hi = strongest.window.to_value(u.GHz)
        axes[1].axvspan(min(lo, hi), max(lo, hi), color="#f4a261", alpha=0.3)
        axes[1].set_xlabel(xlabel)
        axes[1].set_ylabel(spectrum.unit.to_string())
        axes[1].set_title(f"spectrum at pixel x={strongest.position[1]}, y={strongest.position[0]}", fontsize=9)
        out["strongest"] = _figure_png(fig)
    return out


def _table(rows, head=None, *, escape=True):
    cell = html.escape if escape else str
    parts = ["<table>"]
    if head:
        parts.append("<tr>" + "".join(f"<th>{html.escape(str(h))}</th>" for h in head) + "</tr>")
    for row in rows:
        parts.append("<tr>" + "".join(f"<td>{cell(str(c))}</td>" for c in row) + "</tr>")
    parts.append("</table>")
    return "".join(parts)


def _q(q, spec=".4g"):
    return "-" if q is None or q.get("value") is None else f"{q['value']:{spec}} {q['unit']}"


def _spatial_sentence(spatial):
    """The noise across the field in one sentence."""
    if not spatial["measured"]:
        return "Noise across the field: not measured (too few pixels for a noise map)."
    ratio = (f"edge/centre noise ratio {_fmt(spatial['edge_to_centre'], '.3g')}, highest "
             f"{_fmt(spatial['highest'], '.3g')} times the quietest part")
    if spatial["primary_beam_corrected"]:
        return (f"Noise across the field: {ratio}. The noise rises towards every edge: the cube looks "
                "primary-beam corrected. Detections are judged against each pixel's own noise; the rms "
                "above is that of the centre.")
    if spatial["varies"]:
        where = spatial["quietest_position"]
        return (f"Noise across the field: {ratio} (quietest around x={where['x']}, y={where['y']}). "
                "Detections are judged against each pixel's own noise; the rms above is that of the "
                "quietest part.")
    return f"Noise across the field: uniform within the measurement ({ratio})."


def cube_section(entry, check=None):
    """The HTML fragment of one cube: tables, notes and embedded figures.

    Parameters
    ----------
    entry : dict
        The cube's JSON entry (`cube_entry` or `failure_entry`).
    check : CubeCheck, optional
        The full result, for the figures; None gives the text only.
    """
    esc = html.escape
    parts = [f'<h2>{esc(entry["path"])}</h2>']
    if not entry["ok"]:
        parts.append(f'<p class="fail">Not checked: {esc(entry["error"])}</p>')
        return "".join(parts)
    figures = {}
    if check is not None:
        try:
            figures = _figures(check)
        except Exception as exc:  # a figure must never cost the user the report
            parts.append(f'<p class="warn">Figures could not be drawn: {esc(type(exc).__name__)}: {esc(str(exc))}</p>')
    for note in entry["warnings"]:
        parts.append(f'<p class="warn">&#9888; {esc(note)}</p>')
    h = entry["header"]
    beam = h["beam"]
    beam_text = "none"
    if beam:
        beam_text = f'{beam["major_arcsec"]:.3g}" x {beam["minor_arcsec"]:.3g}", PA {beam["pa_deg"]:.1f} deg'
        if beam["major_range_arcsec"]:
            beam_text += (f' (per channel: major {beam["major_range_arcsec"][0]:.3g}-{beam["major_range_arcsec"][1]:.3g}", '
                          f'minor {beam["minor_range_arcsec"][0]:.3g}-{beam["minor_range_arcsec"][1]:.3g}")')
    band = h["band_ghz"]
    rows = [
        ("shape (channels, y, x)", " x ".join(map(str, h["shape"]))),
        ("axes", "; ".join(f'{a["ctype"]} [{a["unit"]}] x{a["length"]}' for a in h["axes"])),
        ("brightness unit", h["unit"]),
        ("spectral frame", h["spectral_frame"] or "-"),
        ("rest frequency", "-" if h["rest_frequency_ghz"] is None else f'{h["rest_frequency_ghz"]:.6f} GHz'),
        ("band", "-" if band is None else f"{band[0]:.5f} - {band[1]:.5f} GHz"),
        ("channel width", f'{_fmt(h["channel_width_mhz"], ".4g")} MHz = {_fmt(h["channel_width_kms"], ".4g")} km/s'),
        ("beam", beam_text),
        ("pixel size", " x ".join(f"{p:.3g}\"" for p in h["pixel_size_arcsec"])),
        ("pixels across the beam (minor axis)", _fmt(h["pixels_per_beam"], ".2f")),
        ("beam area", f'{_fmt(h["beam_area_pixels"], ".3g")} pixels'),
        ("blanked fraction (largest in a channel)", _fmt(h["blanked_fraction_max"], ".3f")),
    ]
    parts.append("<h3>Header</h3>" + _table(rows))
    noise = entry["noise"]
    parts.append("<h3>Noise</h3>")
    region = noise.get("rms_region", "the whole field")
    parts.append(f"<p>Robust rms over the cube: <b>{esc(_q(noise['cube_rms']))}</b>"
                 + ("" if region == "the whole field" else f", that of {esc(region)}")
                 + f"; {len(noise['flagged_channels'])} flagged channel(s)"
                 + (f": {esc(', '.join(map(str, noise['flagged_channels'][:40])))}" if noise["flagged_channels"] else "")
                 + "</p>")
    parts.append(f'<p class="rule">{esc(noise["flag_rule"])}</p>')
    parts.append(figures.get("noise", ""))
    spatial = noise.get("spatial")
    if spatial is not None:
        parts.append(f"<p>{esc(_spatial_sentence(spatial))}</p>")
        parts.append(f'<p class="rule">{esc(spatial["rule"])}</p>')
        parts.append(figures.get("noise_map", ""))
    cont = entry["continuum"]
    parts.append("<h3>Leftover continuum</h3>")
    if cont is None:
        parts.append("<p>Not measured: too few line-free channels.</p>")
    else:
        parts.append(
            f"<p>Most significant pixel x={cont['peak_position']['x']}, y={cont['peak_position']['y']}: "
            f"mean {esc(_q(cont['peak']))}, "
            f"{_fmt(cont['peak_significance'], '.1f')} sigma (noise of the mean {esc(_q(cont['noise']))}); "
            f"{cont['n_significant_pixels']} pixel(s) at 5 sigma or more; "
            f"{cont['n_line_free_channels']} line-free channels.</p>")
        parts.append(f'<p class="rule">{esc(cont["rule"])}</p>')
        parts.append(figures.get("continuum", ""))
    lines = entry["lines"]
    parts.append("<h3>Lines</h3>")
    if lines is not None:
        if lines["z"] is not None:
            parts.append(f"<p>Expected in the band at z = {lines['z']:g}: "
                         + (esc(", ".join(f"{e['name']} ({e['observed_frequency_ghz']:.4f} GHz"
                                          f"{', detected' if e['detected'] else ''})" for e in lines["expected"]))
                            or "no catalog line") + "</p>")
        if lines["solved_z"] is not None:
            parts.append(f"<p>Redshift solved from the detections: z = {lines['solved_z']:.5f}</p>")
        parts.append(
            f"<p>Detection threshold applied: <b>{lines['effective_threshold_snr']:.2f} sigma</b> "
            f"(asked: {lines['threshold_snr']:g}), for emission and absorption alike; about "
            f"{lines['expected_noise_peaks']:.2g} pure-noise peak(s) or dip(s) "
            f"are expected beyond it in the whole cube ({lines['expected_noise_peaks_at_threshold']:.2g} beyond "
            f"{lines['threshold_snr']:g} sigma), for about {lines['resolution_elements']:.3g} independent noise "
            "beams per channel.</p>")
        parts.append(f'<p class="rule">{esc(lines["rule"])}</p>')
        parts.append(f'<p class="rule">{esc(lines["velocity_reference"])}</p>')
        parts.append(figures.get("lines", ""))
    detections = entry["detections"]
    if detections:
        rows = []
        for i, d in enumerate(detections):
            cands = "; ".join(
                f"{c['name']} (z={c['z']:.4f}"
                + (f", {c['velocity_offset_kms']:+.0f} km/s" if c["velocity_offset_kms"] is not None else "") + ")"
                for c in d["candidates"][:4]) or "-"
            kind = d.get("kind", "emission")
            size = d["depth"] if kind == "absorption" else d["peak"]
            error = d.get("peak_error")
            measure = _q(size, ".3g") + ("" if error is None else f" +/- {_q(error, '.2g')}")
            rows.append((i + 1, kind, f"{d['frequency_ghz']:.5f}", f"{d['snr']:.1f}", measure,
                         f"{d['width_mhz']:.3g}", f"{d['width_kms']:.4g}", f"{d['channels'][0]}-{d['channels'][1]}",
                         cands))
        parts.append(_table(rows, ["#", "kind", "frequency (GHz)", "S/N", "peak or depth", "width (MHz)",
                                   "width (km/s)", "channels", "tentative identifications, best first"]))
    else:
        parts.append("<p>No detection.</p>")
    if entry["strongest"] is not None:
        parts.append("<h3>Strongest feature</h3>" + figures.get("strongest", ""))
    return "".join(parts)


def _html_page(summary, sections, *, title=None):
    esc = html.escape
    title = title or "cubeloupe delivery check"
    cubes = summary["cubes"]
    n_failed = sum(not c["ok"] for c in cubes)
    parts = [
        "<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>",
        f"<title>{esc(title)}</title><style>{_STYLE}</style></head><body>",
        f"<h1>{esc(title)}</h1>",
        f"<p>{len(cubes)} cube(s), {n_failed} not checked; z = {summary['z'] if summary['z'] is not None else 'not given'}; "
        f"detection threshold {summary['threshold_snr']:g} sigma, raised per cube where needed to keep pure-noise "
        f"detections rare (see each cube); made {esc(summary['created'])} "
        f"with cubeloupe {esc(str(summary['cubeloupe_version']))}.</p>",
    ]
    rows = []
    for i, cube in enumerate(cubes):
        status = "ok" if cube["ok"] else "not checked"
        rows.append((f'<a href="#cube{i}">{i + 1}</a>', esc(cube["path"]), status, esc(_q(cube["rms"])),
                     len(cube["detections"])))
    parts.append(_table(rows, ["", "cube", "status", "rms", "detections"], escape=False))
    if summary["skipped"]:
        parts.append("<p>Skipped: " + esc("; ".join(f"{s['path']} ({s['reason']})" for s in summary["skipped"])) + "</p>")
    for i, section in enumerate(sections):
        parts.append(f'<section id="cube{i}">{section}</section>')
    parts.append("</body></html>\n")
    return "".join(parts)
