"""The HTML page of the report: one section per cube with its tables, notes and figures.

Examples
--------
>>> from cubeloupe.analysis.check import failure_entry
>>> entry = failure_entry("broken.fits", OSError("truncated"))
>>> "Not checked" in cube_section(entry)
True
"""

import html

from .report_figures import cube_figures
from .report_terminal import format_or_dash

__all__ = ["cube_section", "html_page"]


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
    ratio = (f"edge/centre noise ratio {format_or_dash(spatial['edge_to_centre'], '.3g')}, highest "
             f"{format_or_dash(spatial['highest'], '.3g')} times the quietest part")
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
            figures = cube_figures(check)
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
        ("channel width", f'{format_or_dash(h["channel_width_mhz"], ".4g")} MHz = {format_or_dash(h["channel_width_kms"], ".4g")} km/s'),
        ("beam", beam_text),
        ("pixel size", " x ".join(f"{p:.3g}\"" for p in h["pixel_size_arcsec"])),
        ("pixels across the beam (minor axis)", format_or_dash(h["pixels_per_beam"], ".2f")),
        ("beam area", f'{format_or_dash(h["beam_area_pixels"], ".3g")} pixels'),
        ("blanked fraction (largest in a channel)", format_or_dash(h["blanked_fraction_max"], ".3f")),
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
    parts.append(figures.get("noise", ""))
    spatial = noise.get("spatial")
    if spatial is not None:
        parts.append(f"<p>{esc(_spatial_sentence(spatial))}</p>")
        parts.append(figures.get("noise_map", ""))
    cont = entry["continuum"]
    parts.append("<h3>Leftover continuum</h3>")
    if cont is None:
        parts.append("<p>Not measured: too few line-free channels.</p>")
    else:
        parts.append(
            f"<p>Most significant pixel x={cont['peak_position']['x']}, y={cont['peak_position']['y']}: "
            f"mean {esc(_q(cont['peak']))}, "
            f"{format_or_dash(cont['peak_significance'], '.1f')} sigma (noise of the mean {esc(_q(cont['noise']))}); "
            f"{cont['n_significant_pixels']} pixel(s) at 5 sigma or more; "
            f"{cont['n_line_free_channels']} line-free channels.</p>")
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
            rows.append((i + 1, kind, format_or_dash(d["frequency_ghz"], ".5f"),
                         format_or_dash(d.get("velocity_kms"), ".2f"), f"{d['snr']:.1f}", measure,
                         format_or_dash(d["width_mhz"], ".3g"), format_or_dash(d["width_kms"], ".4g"),
                         f"{d['channels'][0]}-{d['channels'][1]}", cands))
        parts.append(_table(rows, ["#", "kind", "frequency (GHz)", "velocity (km/s)", "S/N", "peak or depth",
                                   "width (MHz)", "width (km/s)", "channels", "tentative identifications, best first"]))
    else:
        parts.append("<p>No detection.</p>")
    if lines is not None and lines.get("redshift_note"):
        parts.append(f"<p>{esc(lines['redshift_note'])}.</p>")
    negative = (lines or {}).get("negative_features") or []
    if negative:
        parts.append("<p>Negative features (no continuum to absorb, so not absorption): "
                     + esc("; ".join(f"channels {d['channels'][0]}-{d['channels'][1]}, S/N {d['snr']:.1f}"
                                     for d in negative))
                     + f". Likely cause: {esc(negative[0]['likely_cause'] or '-')}.</p>")
    if entry["strongest"] is not None:
        parts.append("<h3>Strongest feature</h3>" + figures.get("strongest", ""))
    return "".join(parts)


def _methods(cubes):
    """The rule texts of every checked cube, each distinct text once, in the order of the sections."""
    texts = []
    for cube in cubes:
        if not cube["ok"]:
            continue
        noise, lines, cont = cube["noise"], cube["lines"] or {}, cube["continuum"] or {}
        found = [noise.get("flag_rule"), (noise.get("spatial") or {}).get("rule"), cont.get("rule"),
                 lines.get("rule"), lines.get("velocity_reference")]
        texts.extend(t for t in found if t and t not in texts)
    return texts


def html_page(summary, sections, *, title=None):
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
        status = cube.get("status") or ("ok" if cube["ok"] else "failed")
        if cube.get("worst_warning"):
            status += f" (worst: {cube['worst_warning']})"
        best = cube["detections"][0] if cube["detections"] else None
        strongest = "-"
        if best is not None:
            where = (f"{best['frequency_ghz']:.4f} GHz" if best.get("frequency_ghz") is not None
                     else f"{format_or_dash(best.get('velocity_kms'), '.1f')} km/s")
            name = best["candidates"][0]["name"] if best["candidates"] else "unidentified"
            strongest = f"{where}, S/N {best['snr']:.1f}, {name}"
        rows.append((f'<a href="#cube{i}">{i + 1}</a>', esc(cube["path"]), esc(status),
                     esc(cube.get("rms_display") or _q(cube["rms"])), len(cube["detections"]), esc(strongest)))
    parts.append(_table(rows, ["", "cube", "status", "rms", "detections", "strongest line"], escape=False))
    if summary["skipped"]:
        parts.append("<p>Skipped: " + esc("; ".join(f"{s['path']} ({s['reason']})" for s in summary["skipped"])) + "</p>")
    for i, section in enumerate(sections):
        parts.append(f'<section id="cube{i}">{section}</section>')
    methods = _methods(cubes)
    if methods:
        parts.append("<details><summary>Methods (the rules every number above follows)</summary>"
                     + "".join(f'<p class="rule">{esc(text)}</p>' for text in methods) + "</details>")
    parts.append("</body></html>\n")
    return "".join(parts)
