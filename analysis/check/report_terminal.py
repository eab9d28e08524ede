"""The short table ``cubeloupe check`` prints at the end of a run: one line per input.

Examples
--------
>>> format_or_dash(None, ".3g"), format_or_dash(0.01234, ".3g")
('-', '0.0123')
"""

from pathlib import Path

__all__ = ["terminal_table", "terminal_safe", "format_or_dash", "rms_region_tag"]


def terminal_safe(text):
    r"""``text`` with every control character (escape codes, line breaks, tabs) shown as a Python escape.

    File names may hold any byte but ``/``; printed raw, an escape sequence in
    one can recolour, move or clear the user's terminal, and a line break can
    forge a line of the table (#14).

    Examples
    --------
    >>> terminal_safe("cube\x1b[2J\n.fits")
    'cube\\x1b[2J\\n.fits'
    """
    text = str(text)
    if text.isprintable():
        return text
    return "".join(ch if ch.isprintable() else ascii(ch)[1:-1] for ch in text)


def format_or_dash(value, spec):
    return "-" if value is None else format(value, spec)


def rms_region_tag(noise):
    """A short tag saying which part of the field the rms describes, when not the whole of it."""
    spatial = (noise or {}).get("spatial") or {}
    if not spatial.get("varies"):
        return ""
    if spatial.get("primary_beam_corrected"):
        return f" (centre; edge x{format_or_dash(spatial.get('edge_to_centre'), '.2g')})"
    return f" (quietest part; up to x{format_or_dash(spatial.get('highest'), '.2g')})"


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
            rows.append([name, "failed", "-", "-", "-", "-", cube["error"]])
            continue
        rms = cube["rms"]
        cont = cube.get("continuum") or {}
        strongest = "-"
        if cube["detections"]:
            best = cube["detections"][0]
            ident = best["candidates"][0]["name"] if best["candidates"] else "unidentified"
            kind = " absorption" if best.get("kind") == "absorption" else ""
            where = (f"{format_or_dash(best['frequency_ghz'], '.4f')} GHz" if best.get("frequency_ghz") is not None
                     else f"{format_or_dash(best.get('velocity_kms'), '.1f')} km/s")
            strongest = f"{where}{kind} S/N {format_or_dash(best['snr'], '.1f')} {ident}"
        status = cube.get("status") or ("ok" if not cube.get("warnings") else f"ok, {len(cube['warnings'])} warnings")
        if cube.get("worst_warning"):
            worst = cube["worst_warning"]
            status += f" (worst: {worst if len(worst) <= 60 else worst[:59] + '…'})"
        shown = cube.get("rms_display") or f"{format_or_dash(rms['value'], '.3g')} {rms['unit']}"
        rows.append([
            name, status, f"{shown}{rms_region_tag(cube['noise'])}",
            str(len(cube["noise"]["flagged_channels"])),
            format_or_dash(cont.get("peak_significance"), ".1f"),
            str(len(cube["detections"])), strongest,
        ])
    for item in summary.get("skipped", []):
        rows.append([Path(item["path"]).name, "skipped", "-", "-", "-", "-", item["reason"]])
    rows = [[terminal_safe(cell) for cell in row] for row in rows]
    widths = [max(len(str(r[i])) for r in [header, *rows]) for i in range(len(header))]
    lines = ["  ".join(str(cell).ljust(w) for cell, w in zip(row, widths)).rstrip() for row in [header, *rows]]
    return "\n".join(lines)

