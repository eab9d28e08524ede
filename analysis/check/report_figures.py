"""The figures of the report: channel noise, noise map, S/N spectra, leftover continuum, strongest line.

Drawn with matplotlib's Agg backend (imported when the first figure is drawn:
it is a heavy library the rest of the check does not need) and embedded as
base64 PNG, so that the page is one self-contained file.

Examples
--------
>>> figures = cube_figures(check_cube(demo_path("disk")))  # doctest: +SKIP
>>> sorted(figures)  # doctest: +SKIP
['continuum', 'lines', 'noise', 'strongest']
"""

import base64
import io

import astropy.units as u
import numpy as np

from ..errors import CubeloupeError
from ..spectral import frequency_axis

__all__ = ["cube_figures", "figure_html"]


def figure_html(fig):
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


def cube_figures(check):
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
    out["noise"] = figure_html(fig)

    spatial = noise.spatial
    if spatial is not None and spatial.measured:
        fig, ax = plt.subplots(figsize=(5.2, 4), layout="constrained")
        image = ax.imshow(spatial.relative, origin="lower", cmap="cividis")
        fig.colorbar(image, ax=ax, label="noise / noise of the quietest part")
        ax.plot(spatial.quietest[1], spatial.quietest[0], "+", color="white", ms=10)
        ax.set_title("noise across the field (fitted map)", fontsize=9)
        ax.set_xlabel("x (pixel)")
        ax.set_ylabel("y (pixel)")
        out["noise_map"] = figure_html(fig)

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
        out["lines"] = figure_html(fig)

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
        out["continuum"] = figure_html(fig)

    strongest = check.strongest
    if strongest is not None:
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
        out["strongest"] = figure_html(fig)
    return out
